/* Upper limits by injection and recovery (Monte Carlo, fixed seed).
 *
 * Synthetic Na I spectra (dt_model_eval times a flat continuum plus
 * Gaussian noise of known sigma; R 20000, 0.1 A pixels, S/N 40) go through
 * the first pass (autofit.h) with the judgement's default window
 * -600..600 km/s and automatic continuum, as `doubletty fit` runs it:
 *   1. pure noise: the first pass calls at most 1% of them detected;
 *   2. a line injected at a random velocity in -250..250 km/s with the
 *      stronger line's W at 0.4 times the median limit of (1): of those not
 *      called detected, the true W exceeds the reported n-sigma limit
 *      (n = 2 here, for a tail large enough to count: Phi(-2) = 0.02275,
 *      Abramowitz & Stegun 1964, 26.2) no more often than the binomial
 *      distribution with that p allows (one-sided 0.1% bound);
 *   3. lines at 1.5 times the median 3-sigma limit of (1) are detected in
 *      at least 90% of the spectra.
 *   4. a joint continuum (--joint-continuum K = 1, 2) gives the same
 *      verdicts as the fixed continuum on the same spectra (lines at 0.6
 *      times the median limit) in at least 96% of them (before the joint
 *      polynomial was kept at 1 without components, 88-90%).
 * The figures are printed for the README.  True W from the curve of
 * growth (cog.h; checked against SciPy in tests/scripts/cog_scipy.sh).
 * Atomic data: Morton (2003, ApJS 149, 205). */
#include <gsl/gsl_cdf.h>
#include <gsl/gsl_randist.h>
#include <gsl/gsl_rng.h>
#include <gsl/gsl_sort.h>
#include <gsl/gsl_statistics_double.h>
#include <math.h>
#include <stdlib.h>
#include <string.h>

#include "doubletty/analysis.h"
#include "doubletty/atomic.h"
#include "doubletty/autofit.h"
#include "doubletty/cog.h"
#include "doubletty/model.h"
#include "harness.h"

static const char table[] =
    "NaI 5891.5833 0.6408 6.16e7 5897.5581 0.3201 6.14e7 Morton (2003) ApJS 149, 205\n";

#define NNOISE 300
#define NBELOW 400
#define NABOVE 100
#define NJOINT 50
#define SNR 40.0
#define R 20000.0
#define BINJ 5.0

typedef struct sim {
  const dt_atomic *t;
  dt_spectrum *s;
  dt_model *m;
  double *clean;
  gsl_rng *rng;
} sim;

/* One spectrum (a line of log N logN at v, or none for logN <= 0) through
 * the first pass with limits at nsigma: *det 1 when called detected, *wlim
 * the stronger line's W limit [A]. */
static int run_k(sim *S, double logN, double v, double nsigma, size_t joint, int fresh,
                 int *det, double *wlim) {
  dt_spectrum *s = S->s;
  if (!fresh) goto fit;
  if (logN > 0) {
    dt_component c = {logN, BINJ, v};
    dt_model_eval(S->m, &c, 1, S->clean, NULL, 0);
  } else {
    for (size_t i = 0; i < s->n; i++) S->clean[i] = 1.0;
  }
  for (size_t i = 0; i < s->n; i++)
    s->flux[i] = S->clean[i] + gsl_ran_gaussian(S->rng, s->sigma[i]);
fit:;
  dt_analysis *a = dt_analysis_alloc(s, S->t);
  dt_analysis_opts ao;
  dt_analysis_opts_init(&ao);
  ao.limit_nsigma = nsigma;
  ao.joint_cont = joint;
  dt_analysis_set_opts(a, &ao);
  dt_judgement j;
  dt_judgement_init(&j);
  strcpy(j.doublet, "NaI");
  j.resolution = R;
  dt_autofit_out o;
  int st = dt_autofit_run(a, &j, NULL, &o, NULL);
  *det = o.suggested == DT_VERDICT_DETECTED;
  *wlim = o.an.line[0].W_limit;
  dt_analysis_free(a);
  return st;
}

static int run(sim *S, double logN, double v, double nsigma, int *det, double *wlim) {
  return run_k(S, logN, v, nsigma, 0, 1, det, wlim);
}

int main(void) {
  dt_atomic *t = dt_atomic_new();
  dt_err e;
  if (dt_atomic_parse(t, table, sizeof table - 1, &e) != DT_OK) return 1;
  const dt_line *l0 = &dt_atomic_find(t, "NaI")->line[0];
  sim S;
  S.t = t;
  size_t n = 1100;
  S.s = dt_spectrum_alloc(n);
  for (size_t i = 0; i < n; i++) {
    S.s->wave[i] = 5840.0 + 0.1 * (double)i;
    S.s->sigma[i] = 1.0 / SNR;
    S.s->mask[i] = 0;
  }
  S.s->has_sigma = 1;
  dt_model_config cfg;
  memset(&cfg, 0, sizeof cfg);
  cfg.doublet = dt_atomic_find(t, "NaI");
  cfg.resolution = R;
  S.m = dt_model_alloc(S.s->wave, n, &cfg, 1, NULL);
  S.clean = malloc(n * sizeof *S.clean);
  S.rng = gsl_rng_alloc(gsl_rng_mt19937);
  gsl_rng_set(S.rng, 20261202);

  /* 1. pure noise */
  double lim[NNOISE];
  int ndet = 0, det;
  for (int k = 0; k < NNOISE; k++) {
    run(&S, 0, 0, 3.0, &det, &lim[k]);
    ndet += det;
  }
  gsl_sort(lim, 1, NNOISE);
  double typ = gsl_stats_median_from_sorted_data(lim, 1, NNOISE);
  printf("# pure noise: %d of %d detected; median 3-sigma W limit %.2f mA\n", ndet, NNOISE,
         1e3 * typ);
  CHECK(ndet <= NNOISE / 100, "pure noise: %d of %d called detected (<= 1%%)", ndet, NNOISE);

  /* 2. below detection: true W above the 2-sigma limit */
  double wtrue = 0.4 * typ;
  double logN = dt_cog_logN(l0, wtrue, BINJ);
  int nund = 0, nover = 0;
  for (int k = 0; k < NBELOW; k++) {
    double v = -250.0 + 500.0 * gsl_rng_uniform(S.rng), wl;
    run(&S, logN, v, 2.0, &det, &wl);
    if (det) continue;
    nund++;
    nover += wtrue > wl;
  }
  double p = gsl_cdf_ugaussian_Q(2.0);
  /* the largest count the binomial (nund, p) reaches with probability >= 0.001 */
  int kmax = 0;
  while (kmax < nund && gsl_cdf_binomial_Q((unsigned)kmax, p, (unsigned)nund) > 0.001) kmax++;
  printf("# W %.2f mA (0.4 x median limit) at random v: %d of %d not detected; true W above "
         "the 2-sigma limit in %d (expected <= %.1f, bound %d)\n",
         1e3 * wtrue, nund, NBELOW, nover, p * nund, kmax);
  CHECK(nund >= NBELOW / 2, "most of the weak lines are not detected (%d of %d)", nund, NBELOW);
  CHECK(nover <= kmax, "true W above the 2-sigma limit %d times in %d (binomial bound %d)",
        nover, nund, kmax);

  /* 3. lines at 1.5 times the typical 3-sigma limit */
  wtrue = 1.5 * typ;
  logN = dt_cog_logN(l0, wtrue, BINJ);
  int nfound = 0;
  for (int k = 0; k < NABOVE; k++) {
    double v = -250.0 + 500.0 * gsl_rng_uniform(S.rng), wl;
    run(&S, logN, v, 3.0, &det, &wl);
    nfound += det;
  }
  printf("# W %.2f mA (1.5 x median limit): %d of %d detected\n", 1e3 * wtrue, nfound, NABOVE);
  CHECK(nfound >= (int)ceil(0.9 * NABOVE), "lines at 1.5 x the typical limit: %d of %d detected",
        nfound, NABOVE);

  /* 4. a joint continuum (K = 1, 2 multiplicative Legendre coefficients)
   * finds the same lines as the fixed one, spectrum by spectrum: lines at
   * 0.6 times the typical limit, where detection is a coin toss and any absorption
   * taken up by the polynomial shows */
  wtrue = 0.6 * typ;
  logN = dt_cog_logN(l0, wtrue, BINJ);
  int n0 = 0, nk[2] = {0, 0}, ndiff[2] = {0, 0};
  for (int k = 0; k < NJOINT; k++) {
    double v = -250.0 + 500.0 * gsl_rng_uniform(S.rng), wl;
    int d0, dk;
    run_k(&S, logN, v, 3.0, 0, 1, &d0, &wl);
    n0 += d0;
    for (int q = 0; q < 2; q++) {
      run_k(&S, logN, v, 3.0, (size_t)q + 1, 0, &dk, &wl);
      nk[q] += dk;
      ndiff[q] += dk != d0;
    }
  }
  printf("# W %.2f mA (0.6 x median limit): detected %d (fixed continuum), %d (K = 1), %d (K = 2) "
         "of %d\n", 1e3 * wtrue, n0, nk[0], nk[1], NJOINT);
  for (int q = 0; q < 2; q++)
    CHECK(ndiff[q] <= NJOINT / 25, "joint continuum K = %d: the verdict differs from K = 0 in "
          "%d of %d spectra (detected %d vs %d)", q + 1, ndiff[q], NJOINT, nk[q], n0);

  free(S.clean);
  dt_model_free(S.m);
  dt_spectrum_free(S.s);
  gsl_rng_free(S.rng);
  dt_atomic_free(t);
  return dt_test_done();
}
