/* The curve of growth (cog.h) against its three analytic limits, and its
 * inverse.  With --table it prints "lambda0 f gamma logN b W" for a grid
 * that tests/py/cog_scipy.py re-computes with SciPy (scipy.special.wofz
 * and scipy.integrate.quad).
 *
 * References: Na I 5891 atomic data, Morton (2003, ApJS 149, 205); the
 * limits of the curve of growth, Spitzer (1978, Physical Processes in the
 * Interstellar Medium, ch. 3 -- from memory):
 *   linear       W = (lambda^2/c) N sigma0 f         (tau0 << 1)
 *   flat         W -> 2 (b/c) lambda sqrt(ln tau0)    (gamma = 0, tau0 >> 1)
 *   square root  W -> (lambda^2/c) sqrt(N sigma0 f Gamma / pi)  (damped)
 * sigma0 = pi e^2/(m_e c) = 0.02654 cm^2 s^-1 (CODATA 2018). */
#include <math.h>
#include <stdio.h>
#include <string.h>

#include "doubletty/cog.h"
#include "harness.h"

static const dt_line NA = {"NaI 5891", 5891.5833, 0.6408, 6.16e7};
#define SIGMA0 0.02654008856
#define C_CMS 2.99792458e10

static double lin_W(const dt_line *l, double logN) {
  double lam = l->lambda0 * 1e-8;
  return 1e8 * lam * lam / C_CMS * pow(10.0, logN) * SIGMA0 * l->f;
}

static int table(void) {
  static const double logN[] = {9.0, 11.0, 12.0, 12.5, 13.0, 14.0, 16.0, 18.0, 19.5, 21.0};
  static const double b[] = {0.5, 1.5, 5.0, 20.0};
  for (size_t i = 0; i < sizeof logN / sizeof logN[0]; i++)
    for (size_t k = 0; k < sizeof b / sizeof b[0]; k++)
      printf("%.7f %.5f %.6g %.3f %.3f %.12g\n", NA.lambda0, NA.f, NA.gamma, logN[i], b[k],
             dt_cog_W(&NA, logN[i], b[k]));
  return 0;
}

int main(int argc, char **argv) {
  if (argc > 1 && strcmp(argv[1], "--table") == 0) return table();
  /* linear: the series W = W_lin (1 - tau0/(2 sqrt 2) + ...) (expand
   * 1 - exp(-tau0 exp(-x^2)) in tau0); log N 8, b 5: tau0 1.1e-4 */
  double W = dt_cog_W(&NA, 8.0, 5.0);
  double t0 = dt_cog_tau0(&NA, 8.0, 5.0);
  CHECK_REL(W, lin_W(&NA, 8.0) * (1 - t0 / (2 * sqrt(2.0))), 1e-6,
            "linear limit and its first correction: log N 8, b 5 (W %.4g A)", W);
  /* flat: no damping, tau0 = 1e6..1e9: W / (2 b lambda/c sqrt(ln tau0)) -> 1 with
   * corrections of order 1/ln tau0 (Spitzer 1978); check the trend and 10% */
  dt_line nodamp = NA;
  nodamp.gamma = 0;
  double r1 = 0, r2 = 0;
  for (int k = 0; k < 2; k++) {
    double logN = k ? 22.0 : 17.0;
    double t0 = dt_cog_tau0(&nodamp, logN, 2.0);
    double flat = 2.0 * (2.0 / 299792.458) * NA.lambda0 * sqrt(log(t0));
    double r = dt_cog_W(&nodamp, logN, 2.0) / flat;
    if (k) r2 = r; else r1 = r;
    CHECK(fabs(r - 1.0) < 0.12, "flat limit: log N %.0f, tau0 %.3g, W/flat %.4f", logN, t0, r);
  }
  CHECK(fabs(r2 - 1.0) < fabs(r1 - 1.0), "flat limit approached as tau0 grows (%.4f, %.4f)",
        r1, r2);
  /* square root: log N 21, b 5: the damping wings hold nearly all of W */
  {
    double lam = NA.lambda0 * 1e-8;
    double sq = 1e8 * lam * lam / C_CMS * sqrt(pow(10.0, 21.0) * SIGMA0 * NA.f * NA.gamma / M_PI);
    W = dt_cog_W(&NA, 21.0, 5.0);
    CHECK_REL(W, sq, 0.01, "square-root limit: log N 21, b 5 (W %.4g A vs %.4g)", W, sq);
  }
  /* monotonic, and the inverse */
  double prev = 0;
  int mono = 1;
  for (double logN = 8; logN <= 22; logN += 0.25) {
    double w = dt_cog_W(&NA, logN, 1.5);
    if (!(w > prev)) mono = 0;
    prev = w;
  }
  CHECK(mono, "W grows with N (log N 8-22, b 1.5)");
  double worst = 0;
  for (double logN = 9; logN <= 21; logN += 0.5)
    for (double b = 0.5; b <= 20; b *= 2) {
      double back = dt_cog_logN(&NA, dt_cog_W(&NA, logN, b), b);
      if (!(fabs(back - logN) <= worst)) worst = isfinite(back) ? fabs(back - logN) : INFINITY;
    }
  CHECK(worst < 1e-5, "inverse recovers log N to %.2g dex (log N 9-21, b 0.5-16)", worst);
  CHECK(isnan(dt_cog_logN(&NA, 0.0, 2.0)) && isnan(dt_cog_logN(&NA, 0.1, 0.0)),
        "no column for W <= 0 or b <= 0");
  /* the saturated column exceeds the linear one: b 1.5, W 0.1 A */
  double ln = log10(0.1 / lin_W(&NA, 0.0));
  double cg = dt_cog_logN(&NA, 0.1, 1.5);
  CHECK(cg > ln + 0.5, "W 100 mA, b 1.5: log N %.2f above the linear %.2f", cg, ln);

  /* the table (interpolated inverse) against the exact inverse above, from
   * the linear part through the flat part into the damping wings */
  for (double b = 1.0; b <= 16; b *= 4) {
    dt_cog_table *t = dt_cog_table_alloc(&NA, b);
    double tw = 0;
    for (double logN = 9.03; t && logN <= 21.5; logN += 0.173) {
      double W = dt_cog_W(&NA, logN, b), d = fabs(dt_cog_table_logN(t, W) - dt_cog_logN(&NA, W, b));
      if (!(d <= tw)) tw = isfinite(d) ? d : INFINITY;
    }
    CHECK(t && tw < 1e-5, "b %g: the table's inverse agrees with the exact one to %.2g dex", b, tw);
    CHECK(t && isnan(dt_cog_table_logN(t, 0.0)), "b %g: the table gives no column for W 0", b);
    dt_cog_table_free(t);
  }
  dt_cog_cache *cc = dt_cog_cache_alloc();
  double w1 = dt_cog_W(&NA, 13.2, 2.0);
  CHECK(cc && fabs(dt_cog_cache_logN(cc, &NA, w1, 2.0) - 13.2) < 1e-5 &&
            fabs(dt_cog_cache_logN(cc, &NA, w1, 2.0) - 13.2) < 1e-5,
        "the cache: made once, asked twice, log N 13.2 back");
  CHECK(fabs(dt_cog_cache_logN(NULL, &NA, w1, 2.0) - 13.2) < 1e-5, "no cache: the exact inverse");
  dt_cog_cache_free(cc);
  return dt_test_done();
}
