/* The Voigt function H(a, u) = Re w(u + i a) and the Faddeeva function w(z)
 * the model is built on, against published values, identities that tie w to
 * other functions (computed here with GSL, an independent library), and the
 * unit normalisation of the line profile. */
#include <cerf.h>
#include <complex.h>
#include <math.h>

#include <gsl/gsl_errno.h>
#include <gsl/gsl_integration.h>
#include <gsl/gsl_sf_dawson.h>
#include <gsl/gsl_sf_erf.h>

#include "doubletty/model.h"
#include "harness.h"

#define SQRT_PI 1.7724538509055160273

static double complex w_at(double x, double y) {
  double complex z;
  ((double *)&z)[0] = x;
  ((double *)&z)[1] = y;
  return w_of_z(z);
}

static void test_published_values(void) {
  /* w(1 + i), an entry of Abramowitz & Stegun (1964) Table 7.9
   * (x = 1.0, y = 1.0); value from memory */
  double complex w = w_at(1.0, 1.0);
  CHECK_CLOSE(dt_voigt_H(1.0, 1.0), 0.3047442053, 1e-9, "H(1, 1) = Re w(1+i) = 0.3047442053 (A&S 7.9)");
  CHECK_CLOSE(cimag(w), 0.2082189382, 1e-9, "Im w(1+i) = 0.2082189382 (A&S 7.9)");
  /* Dawson's integral F(x) from A&S Table 7.5, from memory:
   * F(0.5) = 0.4244363835, F(1) = 0.5380795069; Im w(x) = 2 F(x)/sqrt(pi)
   * for real x (A&S 7.1.3 with 7.1.16) */
  CHECK_CLOSE(cimag(w_at(0.5, 0.0)), 2 / SQRT_PI * 0.4244363835, 1e-9, "Im w(0.5) = 2 F(0.5)/sqrt(pi)");
  CHECK_CLOSE(cimag(w_at(1.0, 0.0)), 2 / SQRT_PI * 0.5380795069, 1e-9, "Im w(1) = 2 F(1)/sqrt(pi)");
  CHECK_CLOSE(dt_voigt_H(0.0, 0.0), 1.0, 1e-15, "H(0, 0) = w(0) = 1");
}

static void test_identities(void) {
  /* Along the axes of the A&S Table 7.9 grid (x = 0..3.9, y = 0..3.0):
   * w(iy) = exp(y^2) erfc(y) and w(x) = exp(-x^2) + 2i F(x)/sqrt(pi)
   * (A&S 7.1.3, 7.1.16), with erfc and Dawson's F from GSL. */
  double worst_y = 0, worst_xr = 0, worst_xi = 0;
  for (int k = 1; k <= 30; k++) {
    double y = 0.1 * k;
    double ref = exp(y * y) * gsl_sf_erfc(y);
    double d = fabs(dt_voigt_H(y, 0.0) - ref) / ref;
    if (d > worst_y) worst_y = d;
  }
  for (int k = 0; k <= 39; k++) {
    double x = 0.1 * k;
    double complex w = w_at(x, 0.0);
    double dr = fabs(creal(w) - exp(-x * x));
    double di = fabs(cimag(w) - 2 / SQRT_PI * gsl_sf_dawson(x));
    if (dr > worst_xr) worst_xr = dr;
    if (di > worst_xi) worst_xi = di;
  }
  CHECK(worst_y < 1e-12, "H(a, 0) = erfcx(a) for a = 0.1..3.0 (relative %.1e)", worst_y);
  CHECK(worst_xr < 1e-14, "H(0, u) = exp(-u^2) for u = 0..3.9 (%.1e)", worst_xr);
  CHECK(worst_xi < 1e-13, "Im w(u) = 2 F(u)/sqrt(pi) for u = 0..3.9 (%.1e)", worst_xi);

  /* H(a, 0) = erfcx(a) over the whole range of damping the model meets */
  const double as[] = {1e-6, 1e-4, 1e-2, 0.5, 2.0, 8.0};
  double worst = 0;
  for (size_t i = 0; i < sizeof as / sizeof *as; i++) {
    double ref = exp(as[i] * as[i]) * gsl_sf_erfc(as[i]);
    double d = fabs(dt_voigt_H(as[i], 0.0) - ref) / ref;
    if (d > worst) worst = d;
  }
  CHECK(worst < 1e-12, "H(a, 0) = erfcx(a) for a = 1e-6..8 (relative %.1e)", worst);

  /* Lorentzian limit: for a >> 1, H(a, u) -> a / (sqrt(pi) (a^2 + u^2)),
   * with relative corrections of order 1/(2 a^2) (A&S 7.1.23) */
  double a = 300.0, u = 200.0;
  CHECK_REL(dt_voigt_H(a, u), a / (SQRT_PI * (a * a + u * u)), 1e-5, "Lorentzian limit at a = 300");
  /* symmetry H(a, -u) = H(a, u) (w(-conj z) = conj w(z), A&S 7.1.12) */
  CHECK(dt_voigt_H(0.01, -2.7) == dt_voigt_H(0.01, 2.7), "H is even in u");
}

/* dt_voigt_HL against libcerf's w_of_z, inside and around the domain where
 * it sums the Taylor series about the real axis (a <= 0.25, |u| <= 25,
 * a |u| <= 1) and beyond it (libcerf itself): H and L = Im w to 3e-12 and
 * 1e-12 relative (the far wing's H, a difference of two terms, loses ~u^2
 * of the precision), and the whole dense grid within the model's needs. */
static void test_series(void) {
  double worst_h = 0, worst_l = 0, worst_core = 0;
  long inside = 0, n = 0;
  for (int i = 0; i <= 150; i++) {
    double a = i < 100 ? 1e-6 + 0.003 * i : 0.3 + 0.01 * (i - 100);
    for (int k = -4000; k <= 4000; k++) {
      double u = 0.01 * k + 1e-3 * (i % 7);
      double H, L;
      dt_voigt_HL(a, u, &H, &L);
      double complex w = w_at(u, a);
      double dh = fabs(H - creal(w)) / creal(w);
      double dl = fabs(L - cimag(w)) / fmax(fabs(cimag(w)), 1e-3);
      if (dh > worst_h) worst_h = dh;
      if (dl > worst_l) worst_l = dl;
      if (fabs(u) <= 6 && dh > worst_core) worst_core = dh;
      inside += a <= 0.25 && fabs(u) <= 25 && a * fabs(u) <= 1;
      n++;
    }
  }
  CHECK(inside > n / 10 && inside < n, "the grid covers the series (%ld of %ld points) and beyond", inside, n);
  CHECK(worst_h < 3e-12, "H(a, u) = Re w_of_z for a = 0..0.8, |u| <= 40 (relative %.1e)", worst_h);
  CHECK(worst_core < 1e-13, "... in the core, |u| <= 6 (relative %.1e)", worst_core);
  CHECK(worst_l < 1e-12, "L(a, u) = Im w_of_z there (relative %.1e)", worst_l);
}

static double h_integrand(double u, void *p) { return dt_voigt_H(*(double *)p, u); }

static void test_normalisation(void) {
  /* integral of H(a, u) du over the real line = sqrt(pi) for every a: the
   * line profile phi = H / (sqrt(pi) dnu_D) integrates to 1 (e.g. Rybicki &
   * Lightman 1979, eq. 10.77); numerically with GSL's QAGI on (-inf, inf) */
  gsl_set_error_handler_off();
  gsl_integration_workspace *ws = gsl_integration_workspace_alloc(2000);
  const double as[] = {1e-3, 0.05, 1.0, 10.0};
  for (size_t i = 0; i < sizeof as / sizeof *as; i++) {
    double a = as[i], res = 0, err = 0;
    gsl_function F = {h_integrand, &a};
    int st = gsl_integration_qagi(&F, 1e-12, 1e-9, 2000, ws, &res, &err);
    CHECK(st == 0, "QAGI converges for a = %g", a);
    CHECK_REL(res, SQRT_PI, 1e-7, "integral of H(%g, u) du = sqrt(pi) (%.10f)", a, res);
  }
  gsl_integration_workspace_free(ws);
}

static void test_line_tau_scale(void) {
  /* central optical depth of a pure Doppler line:
   * tau0 = sqrt(pi) e^2/(m_e c) N f lambda / b = 1.497e-15 N f lambda[A] / b[km/s]
   * (Spitzer 1978, eq. 3-43 and 3-45; Morton 1975 ApJ 197, 85) */
  dt_line l = {"test", 5891.5833, 0.6408, 0.0};
  dt_component c = {13.0, 4.0, 0.0};
  double tau0 = dt_line_tau(&l, &c, 0.0, l.lambda0);
  CHECK_REL(tau0, 1.497e-15 * 1e13 * 0.6408 * 5891.5833 / 4.0, 1e-3, "tau0 = 1.497e-15 N f lambda / b (%.4f)",
            tau0);
  /* one Doppler width away (x = 1) the Gaussian core is down by exp(-1):
   * lambda_rest = lambda0 / (1 + b/c) gives x = (c/b)(lambda0/lambda_rest - 1) = 1 */
  double lam = l.lambda0 / (1.0 + c.b / DT_C_KMS);
  CHECK_REL(dt_line_tau(&l, &c, 0.0, lam), tau0 * exp(-1.0), 1e-9, "tau(x = 1) = tau0 / e for Gamma = 0");
  /* damping parameter a = Gamma lambda / (4 pi b), e.g. 5.8e-4 for Na I D2
   * at b = 5 km/s (common practice): deep in the wing tau -> tau0 a / (sqrt(pi) x^2) */
  dt_line ld = {"NaI 5891", 5891.5833, 0.6408, 6.16e7};
  dt_component cd = {13.0, 5.0, 0.0};
  double a = 6.16e7 * 5891.5833e-8 / (4 * 3.14159265358979323846 * 5.0e5);
  double x = 400.0, t0 = 1.497e-15 * 1e13 * 0.6408 * 5891.5833 / 5.0;
  double lw = ld.lambda0 / (1.0 + x * cd.b / DT_C_KMS);
  CHECK_REL(dt_line_tau(&ld, &cd, 0.0, lw), t0 * a / (SQRT_PI * x * x), 2e-3,
            "far Lorentzian wing: tau = tau0 a / (sqrt(pi) x^2) at x = 400");
}

int main(void) {
  test_published_values();
  test_identities();
  test_series();
  test_normalisation();
  test_line_tau_scale();
  return dt_test_done();
}
