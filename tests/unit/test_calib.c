/* The bootstrap calibration of the log N threshold (calib.h) against the
 * chi-square distribution with one degree of freedom.
 *
 * Reference: where the model is linear in its parameters near the truth
 * and the noise Gaussian, the likelihood-ratio statistic
 * chi2(log N held) - chi2(free) follows chi2_1 exactly (Wilks 1938, Ann.
 * Math. Stat. 9, 60; for a linear model with known sigma the statistic is
 * the square of a normal deviate -- common practice), whatever the
 * parametrisation of N.  A weak (tau0 ~ 0.03), well-resolved Na I line at
 * S/N 300 is such a problem: its errors are a few hundredths of a dex,
 * over which the model is linear.  There the bootstrap's quantiles must
 * be chi2_1's (GSL gsl_cdf_chisq_Pinv / gsl_cdf_chisq_P, an independent
 * implementation) within their binomial sampling error: with M
 * simulations the fraction of statistics below the chi2_1 quantile q_p
 * has the standard deviation sqrt(p (1 - p) / M); the checks allow four.
 * Where the likelihood has two valleys (a saturated line, R 40 000, b 2
 * km/s, log N 13, S/N 30) chi2_1 no longer holds; there the bootstrap's
 * statistics are compared with a brute-force bootstrap of the same test
 * (other noise; each simulated spectrum fitted free from 15 starts in b
 * and log N and held from 5 in b, the lowest chi2 of each) by the
 * two-sample Kolmogorov-Smirnov test at 5% (Smirnov 1948, Ann. Math.
 * Stat. 19, 279: D above 1.358 sqrt((m + n) / (m n)) rejects, from
 * memory).  (At this size it checks the statistics as a whole; the
 * second start of the free fit, which moves the threshold here from 1.14
 * to 1.36 against the brute force's 1.22, shows in the coverage of
 * tests/unit/test_interval_mc.c at DT_MC_SCALE=4.)
 * Also: the same fit gives the same stream (determinism), a different fit
 * another; the 3-sigma threshold is 9 max(c, 1); bad arguments.
 * Atomic data: Morton (2003, ApJS 149, 205). */
#include <gsl/gsl_cdf.h>
#include <gsl/gsl_randist.h>
#include <gsl/gsl_rng.h>
#include <gsl/gsl_sort.h>
#include <gsl/gsl_statistics_double.h>
#include <math.h>
#include <stdlib.h>
#include <string.h>

#include "doubletty/atomic.h"
#include "doubletty/calib.h"
#include "doubletty/fit.h"
#include "doubletty/model.h"
#include "harness.h"

static const char table[] =
    "NaI 5891.5833 0.6408 6.16e7 5897.5581 0.3201 6.14e7 Morton (2003) ApJS 149, 205\n";

#define NPIX 800
#define MSIM 300

typedef struct setup {
  double wave[NPIX], flux[NPIX], sigma[NPIX], clean[NPIX];
  dt_model *m;
  dt_fit_workspace *fw;
  dt_fit_problem p;
  dt_fit_result r;
  dt_component start;
} setup;

/* A spectrum of one component (truth) with noise 1/snr from the seed,
 * fitted: 1 when the fit converged. */
static int make(setup *S, const dt_atomic *t, dt_component truth, double snr, double R,
                unsigned long seed) {
  memset(S, 0, sizeof *S);
  for (size_t i = 0; i < NPIX; i++) {
    S->wave[i] = 5880.0 + 0.04 * (double)i;
    S->sigma[i] = 1.0 / snr;
  }
  dt_model_config cfg;
  memset(&cfg, 0, sizeof cfg);
  cfg.doublet = dt_atomic_find(t, "NaI");
  cfg.resolution = R;
  S->m = dt_model_alloc(S->wave, NPIX, &cfg, 2, NULL);
  S->fw = dt_fit_alloc(NPIX, 2, 0);
  if (!S->m || !S->fw) return 0;
  dt_model_eval(S->m, &truth, 1, S->clean, NULL, 0);
  gsl_rng *rng = gsl_rng_alloc(gsl_rng_mt19937);
  gsl_rng_set(rng, seed);
  for (size_t i = 0; i < NPIX; i++) S->flux[i] = S->clean[i] + gsl_ran_gaussian(rng, 1.0 / snr);
  gsl_rng_free(rng);
  S->start = truth;
  S->start.logN += 0.1;
  S->start.b *= 1.2;
  S->p.model = S->m;
  S->p.wave = S->wave;
  S->p.flux = S->flux;
  S->p.sigma = S->sigma;
  S->p.ncomp = 1;
  S->p.comp = &S->start;
  S->p.vlo = -150;
  S->p.vhi = 150;
  return dt_fit_run(S->fw, &S->p, &S->r, NULL) == DT_OK;
}

static void unmake(setup *S) {
  dt_model_free(S->m);
  dt_fit_free(S->fw);
}

/* The fraction of the last statistics at or below q. */
static double frac_below(const dt_calib_workspace *cw, double q) {
  size_t n;
  const double *st = dt_calib_last_stats(cw, &n);
  size_t c = 0;
  for (size_t i = 0; i < n; i++) c += st[i] <= q;
  return n ? (double)c / (double)n : NAN;
}

/* The statistics against chi2_1 at levels 0.5, 0.6827, 0.9 and the
 * threshold at 0.6827 (dchi2 = 1). */
static void check_chi2_1(const dt_calib_workspace *cw, const dt_calib_result *cr, const char *what) {
  const double lev[] = {0.5, 0.682689492, 0.9};
  CHECK(cr->nsim >= MSIM * 9 / 10, "%s: %d of %d simulations gave a statistic", what, cr->nsim,
        MSIM);
  for (size_t i = 0; i < sizeof lev / sizeof lev[0]; i++) {
    double q = gsl_cdf_chisq_Pinv(lev[i], 1.0);
    double tol = 4.0 * sqrt(lev[i] * (1.0 - lev[i]) / cr->nsim);
    double f = frac_below(cw, q);
    CHECK_CLOSE(f, lev[i], tol,
                "%s: fraction of the statistics below the chi2_1 quantile %.3f (%.4f) is %.4f",
                what, lev[i], q, f);
  }
  /* the threshold: its level under chi2_1 within the binomial error of
   * an empirical quantile */
  double tol = 4.0 * sqrt(0.6827 * 0.3173 / cr->nsim);
  CHECK_CLOSE(gsl_cdf_chisq_P(cr->dchi2, 1.0), 0.682689492, tol,
              "%s: threshold %.3f at the chi2_1 level %.4f (0.6827 for Wilks' 1)", what, cr->dchi2,
              gsl_cdf_chisq_P(cr->dchi2, 1.0));
  CHECK_CLOSE(cr->dchi2_3, 9.0 * fmax(cr->scale, 1.0), 1e-12,
              "%s: 3-sigma threshold 9 max(c, 1) = %.3f", what, cr->dchi2_3);
  CHECK_CLOSE(cr->dchi2, cr->scale, 1e-12, "%s: threshold = scale for dchi2 1", what);
}

/* The statistics of a brute-force bootstrap of the test log N = x for
 * the fit of S (M simulations from the data's fit held at x, other noise
 * than the calibration's): each fitted free from every b in BF_B with
 * every log N in BF_N and held from every b, the lowest chi2 of each;
 * sorted into lam[0..M). */
static void brute_force(setup *S, double x, double *lam, int M) {
  static const double BF_B[] = {0.6, 1.0, 1.6, 2.5, 4.0}, BF_N[] = {12.6, 13.2, 14.0};
  unsigned char fz[1] = {DT_FREEZE_N};
  dt_component ws = S->r.comp[0];
  ws.logN = x;
  dt_fit_problem q = S->p;
  q.frozen = fz;
  q.comp = &ws;
  q.max_iter = 80;
  q.single_run = 1;
  q.time_limit = -1;
  dt_fit_result wr;
  dt_fit_run(S->fw, &q, &wr, NULL);
  double wm[NPIX], sim[NPIX];
  dt_model_eval(S->m, wr.comp, 1, wm, NULL, 0);
  gsl_rng *rng = gsl_rng_alloc(gsl_rng_mt19937);
  gsl_rng_set(rng, 12345);
  q.flux = sim;
  for (int s = 0; s < M; s++) {
    for (size_t i = 0; i < NPIX; i++) sim[i] = wm[i] + gsl_ran_gaussian(rng, S->sigma[i]);
    double c[2] = {INFINITY, INFINITY};   /* free, held */
    for (size_t a = 0; a < sizeof BF_B / sizeof BF_B[0]; a++)
      for (size_t n = 0; n <= sizeof BF_N / sizeof BF_N[0]; n++) {
        int held = n == sizeof BF_N / sizeof BF_N[0];
        dt_component s0 = wr.comp[0];
        s0.b = BF_B[a];
        if (!held) s0.logN = BF_N[n];
        q.comp = &s0;
        q.frozen = held ? fz : NULL;
        dt_fit_result fr;
        int st = dt_fit_run(S->fw, &q, &fr, NULL);
        if ((st == DT_OK || st == DT_ENOCONV) && fr.chi2 < c[held]) c[held] = fr.chi2;
      }
    lam[s] = fmax(c[1] - fmin(c[0], c[1]), 0.0);
  }
  gsl_rng_free(rng);
  gsl_sort(lam, 1, (size_t)M);
}

/* The two-sample Kolmogorov-Smirnov distance of sorted a[0..n), b[0..m). */
static double ks_distance(const double *a, size_t n, const double *b, size_t m) {
  double d = 0;
  size_t i = 0, j = 0;
  while (i < n && j < m) {
    double x = fmin(a[i], b[j]);
    while (i < n && a[i] <= x) i++;
    while (j < m && b[j] <= x) j++;
    d = fmax(d, fabs((double)i / (double)n - (double)j / (double)m));
  }
  return d;
}

/* Two valleys: the calibration's statistics against the brute force's. */
static void check_two_valleys(const dt_atomic *t) {
  dt_component truth = {13.0, 2.0, 0.0};
  setup S;
  CHECK(make(&S, t, truth, 30.0, 40000.0, 99), "the saturated line is fitted");
  S.p.comp = S.r.comp;
  dt_calib_workspace *cw = dt_calib_alloc(NPIX, MSIM);
  dt_calib_result cr;
  int st = dt_calib_logN(cw, S.fw, &S.p, &S.r, 0, truth.logN, 1.0, MSIM, &cr);
  size_t n = 0;
  const double *cs = dt_calib_last_stats(cw, &n);
  static double lam[MSIM];
  brute_force(&S, truth.logN, lam, MSIM);
  double d = ks_distance(cs, n, lam, MSIM);
  double crit = 1.358 * sqrt((double)(n + MSIM) / ((double)n * MSIM));
  printf("# two valleys: threshold %.3f, brute force's 68.27%% quantile %.3f; KS D %.3f\n",
         cr.dchi2, gsl_stats_quantile_from_sorted_data(lam, 1, MSIM, 0.6827), d);
  CHECK(st == DT_OK && n >= MSIM * 9 / 10, "two valleys: the calibration runs (%zu statistics)",
        n);
  CHECK(d < crit, "two valleys: the statistics are the brute force's (KS D %.3f < %.3f, 5%%)", d,
        crit);
  dt_calib_free(cw);
  unmake(&S);
}

int main(void) {
  dt_atomic *t = dt_atomic_new();
  dt_err e;
  if (dt_atomic_parse(t, table, sizeof table - 1, &e) != DT_OK) return 1;
  dt_component truth = {11.0, 12.0, 0.0};
  setup S;
  CHECK(make(&S, t, truth, 300.0, 20000.0, 4242), "the weak line is fitted");
  printf("# fit: log N %.4f +- %.4f, b %.2f\n", S.r.comp[0].logN, S.r.err[0].logN, S.r.comp[0].b);
  CHECK(S.r.err[0].logN < 0.05, "the weak line's log N error %.3f dex is small (linear regime)",
        S.r.err[0].logN);
  dt_calib_workspace *cw = dt_calib_alloc(NPIX, MSIM);
  CHECK(cw != NULL, "workspace");
  S.p.comp = S.r.comp;

  /* at the best fit */
  dt_calib_result cr, cr2;
  int st = dt_calib_logN(cw, S.fw, &S.p, &S.r, 0, NAN, 1.0, MSIM, &cr);
  CHECK(st == DT_OK, "calibration at the best fit runs (status %d)", st);
  printf("# best fit: threshold %.3f (scale %.3f) from %d simulations, %d fits\n", cr.dchi2,
         cr.scale, cr.nsim, cr.nfits);
  check_chi2_1(cw, &cr, "at the best fit");
  CHECK(cr.nfits == 3 * MSIM, "three fits per simulation (%d)", cr.nfits);

  /* the test of another value (the world held 1.5 errors above) is as
   * linear: chi2_1 again */
  double x = S.r.comp[0].logN + 1.5 * S.r.err[0].logN;
  st = dt_calib_logN(cw, S.fw, &S.p, &S.r, 0, x, 1.0, MSIM, &cr2);
  CHECK(st == DT_OK, "calibration at log N %.3f runs (status %d)", x, st);
  printf("# at %.3f: threshold %.3f\n", x, cr2.dchi2);
  check_chi2_1(cw, &cr2, "1.5 errors above");
  CHECK(cr2.nfits == 3 * MSIM + 1, "one more fit for the world held there (%d)", cr2.nfits);

  /* another level: dchi2 = 4 (2 sigma, 95.45%) */
  dt_calib_result c4;
  st = dt_calib_logN(cw, S.fw, &S.p, &S.r, 0, NAN, 4.0, MSIM, &c4);
  double tol4 = 4.0 * sqrt(0.9545 * 0.0455 / c4.nsim);
  CHECK(st == DT_OK && fabs(gsl_cdf_chisq_P(c4.dchi2, 1.0) - 0.9545) <= tol4,
        "2 sigma: threshold %.3f at the chi2_1 level %.4f (0.9545 +- %.3f)", c4.dchi2,
        gsl_cdf_chisq_P(c4.dchi2, 1.0), tol4);

  /* determinism: the same fit, the same threshold and statistics */
  size_t n1;
  const double *s1 = dt_calib_last_stats(cw, &n1);
  double keep[MSIM];
  memcpy(keep, s1, n1 * sizeof keep[0]);
  dt_calib_result c4b;
  dt_calib_logN(cw, S.fw, &S.p, &S.r, 0, NAN, 4.0, MSIM, &c4b);
  size_t n2;
  const double *s2 = dt_calib_last_stats(cw, &n2);
  CHECK(n1 == n2 && memcmp(keep, s2, n1 * sizeof keep[0]) == 0 && c4b.dchi2 == c4.dchi2,
        "the same fit gives the same statistics and threshold");
  /* ... and the stream comes from the fit: one that differs in the 9th
   * decimal of log N (the same model to rounding) draws other noise, so
   * its statistics differ by more than rounding (with one fixed seed
   * they would agree to ~1e-8) */
  dt_fit_result rp = S.r;
  rp.comp[0].logN += 1e-9;
  dt_calib_result c5;
  dt_calib_logN(cw, S.fw, &S.p, &rp, 0, NAN, 4.0, MSIM, &c5);
  const double *s3 = dt_calib_last_stats(cw, &n2);
  double dmax = 0;
  for (size_t i = 0; i < n1 && i < n2; i++) dmax = fmax(dmax, fabs(keep[i] - s3[i]));
  CHECK(dmax > 1e-3, "a fit 1e-9 dex away draws another stream (statistics differ by %.3g)",
        dmax);

  /* bad arguments */
  dt_calib_result cb;
  CHECK(dt_calib_logN(cw, S.fw, &S.p, &S.r, 1, NAN, 1.0, MSIM, &cb) == DT_EINVAL &&
            cb.dchi2 == 1.0 && cb.dchi2_3 == 9.0 && cb.scale == 1.0,
        "a component out of range: DT_EINVAL, Wilks' thresholds");
  CHECK(dt_calib_logN(cw, S.fw, &S.p, &S.r, 0, NAN, 0.0, MSIM, &cb) == DT_EINVAL,
        "dchi2 0: DT_EINVAL");
  CHECK(dt_calib_logN(cw, S.fw, &S.p, &S.r, 0, INFINITY, 1.0, MSIM, &cb) == DT_EINVAL,
        "log N infinite: DT_EINVAL");
  unsigned char fz[1] = {DT_FREEZE_N};
  S.p.frozen = fz;
  CHECK(dt_calib_logN(cw, S.fw, &S.p, &S.r, 0, NAN, 1.0, MSIM, &cb) == DT_EINVAL,
        "log N frozen: DT_EINVAL");
  S.p.frozen = NULL;
  dt_calib_workspace *small = dt_calib_alloc(NPIX / 2, 8);
  CHECK(dt_calib_logN(small, S.fw, &S.p, &S.r, 0, NAN, 1.0, MSIM, &cb) == DT_EINVAL,
        "a workspace too small for the pixels: DT_EINVAL");
  dt_calib_free(small);
  small = dt_calib_alloc(NPIX, 8);
  st = dt_calib_logN(small, S.fw, &S.p, &S.r, 0, NAN, 1.0, MSIM, &cb);
  CHECK(st == DT_OK && cb.nsim == 8, "more simulations than the workspace holds: its 8 (%d)",
        cb.nsim);
  dt_calib_free(small);
  CHECK(dt_calib_alloc(0, 8) == NULL, "a workspace of no pixels: NULL");

  dt_calib_free(cw);
  unmake(&S);
  check_two_valleys(t);
  dt_atomic_free(t);
  return dt_test_done();
}
