/* Monte Carlo check of the fitter's estimates and 1-sigma errors.
 *
 * 1000 synthetic Na I doublets with two unsaturated components, made here
 * with dt_model_eval and Gaussian noise of known sigma (GSL mt19937, fixed
 * seed), are fitted from displaced starting values.  For each parameter
 * type (logN, b, v) the pulls (fit - truth) / error, pooled over both
 * components (90 km/s apart: independent pixels), must behave like a unit
 * normal when the errors are right.  The tolerances are what N pulls allow,
 * three times the sampling error of each statistic for a unit normal:
 *   - standard deviation: 1 +- 3 / sqrt(2 (N - 1))   (0.047 for N = 2000):
 *     errors 5% too small or too large fail;
 *   - 1-sigma coverage (erf(1/sqrt 2) = 0.6827, Abramowitz & Stegun 1964,
 *     26.2): +- 3 sqrt(p (1 - p) / N), the binomial error (3.1% for 2000);
 *   - mean: 0 +- 3 / sqrt(N) (0.067), plus the second-order bias of a
 *     nonlinear least-squares estimate, of the order of the parameter's
 *     error over the scale on which the model bends (Box 1971, JRSS B 33,
 *     171 -- from memory): sigma(ln N), sigma_b / b and sigma_v / b,
 *     averaged over the fits (0.04, 0.07 and 0.04 here).
 * Atomic data: Morton (2003, ApJS 149, 205). */
#include <gsl/gsl_randist.h>
#include <gsl/gsl_rng.h>
#include <gsl/gsl_statistics_double.h>
#include <math.h>
#include <stdlib.h>
#include <string.h>

#include "doubletty/fit.h"
#include "doubletty/model.h"
#include "harness.h"

#define NSPEC 1000
#define SNR 80.0

int main(void) {
  dt_doublet d;
  memset(&d, 0, sizeof d);
  strcpy(d.name, "NaI");
  d.line[0] = (dt_line){"NaI 5891", 5891.5833, 0.6408, 6.16e7};   /* Morton 2003 */
  d.line[1] = (dt_line){"NaI 5897", 5897.5581, 0.3201, 6.14e7};
  size_t n = 400;
  double *wave = malloc(n * sizeof(double)), *truthf = malloc(n * sizeof(double));
  double *flux = malloc(n * sizeof(double)), *sigma = malloc(n * sizeof(double));
  for (size_t i = 0; i < n; i++) {
    wave[i] = 5875.0 + 0.1 * (double)i;
    sigma[i] = 1.0 / SNR;
  }
  dt_model_config cfg;
  memset(&cfg, 0, sizeof cfg);
  cfg.doublet = &d;
  cfg.resolution = 20000;
  dt_model *m = dt_model_alloc(wave, n, &cfg, 2, NULL);
  CHECK(m != NULL, "model allocated");
  /* unsaturated: central optical depths below ~0.8 before the LSF */
  dt_component truth[2] = {{11.9, 10.0, -50.0}, {11.6, 14.0, 40.0}};
  dt_model_eval(m, truth, 2, truthf, NULL, 0);
  double tmin = 1;
  for (size_t i = 0; i < n; i++) tmin = fmin(tmin, truthf[i]);
  CHECK(tmin > 0.45, "the lines are unsaturated (minimum flux %.3f)", tmin);

  dt_fit_workspace *w = dt_fit_alloc(n, 2, 0);
  gsl_rng *rng = gsl_rng_alloc(gsl_rng_mt19937);
  gsl_rng_set(rng, 4242);
  double *pull[3], curv[3] = {0, 0, 0};
  for (int t = 0; t < 3; t++) pull[t] = malloc(2 * NSPEC * sizeof(double));
  size_t npull = 0, nfail = 0;
  dt_component start[2] = {{12.0, 8.0, -46.0}, {11.5, 12.0, 44.0}};
  dt_fit_problem p;
  memset(&p, 0, sizeof p);
  p.model = m;
  p.wave = wave;
  p.flux = flux;
  p.sigma = sigma;
  p.ncomp = 2;
  p.comp = start;
  p.vlo = -300;
  p.vhi = 300;
  for (int s = 0; s < NSPEC; s++) {
    for (size_t i = 0; i < n; i++) flux[i] = truthf[i] + gsl_ran_gaussian(rng, sigma[i]);
    dt_fit_result r;
    if (dt_fit_run(w, &p, &r, NULL) != DT_OK) {
      nfail++;
      continue;
    }
    for (int k = 0; k < 2; k++) {
      pull[0][npull] = (r.comp[k].logN - truth[k].logN) / r.err[k].logN;
      pull[1][npull] = (r.comp[k].b - truth[k].b) / r.err[k].b;
      pull[2][npull] = (r.comp[k].v - truth[k].v) / r.err[k].v;
      /* error over the scale of the model's curvature (Box 1971) */
      curv[0] += r.err[k].logN * M_LN10;
      curv[1] += r.err[k].b / truth[k].b;
      curv[2] += r.err[k].v / truth[k].b;
      npull++;
    }
  }
  CHECK(nfail <= NSPEC / 100, "at most 1%% of fits fail (%zu)", nfail);
  const char *name[3] = {"logN", "b", "v"};
  for (int t = 0; t < 3; t++) {
    double mean = gsl_stats_mean(pull[t], 1, npull);
    double sd = gsl_stats_sd(pull[t], 1, npull);
    size_t in = 0;
    for (size_t k = 0; k < npull; k++) in += fabs(pull[t][k]) <= 1.0;
    double cover = (double)in / (double)npull;
    double N = (double)npull;
    double tol_mean = 3.0 / sqrt(N) + curv[t] / N;
    double tol_sd = 3.0 / sqrt(2.0 * (N - 1.0));
    double tol_cover = 3.0 * sqrt(0.6827 * (1 - 0.6827) / N);
    CHECK(fabs(mean) <= tol_mean, "%s: |mean pull| <= %.3f (%.3f)", name[t], tol_mean, mean);
    CHECK(fabs(sd - 1.0) <= tol_sd, "%s: pull standard deviation 1 +- %.3f (%.3f)", name[t], tol_sd,
          sd);
    CHECK(fabs(cover - 0.6827) <= tol_cover, "%s: 1-sigma coverage 68.27%% +- %.1f%% (%.1f%%)",
          name[t], 100 * tol_cover, 100 * cover);
  }
  for (int t = 0; t < 3; t++) free(pull[t]);
  gsl_rng_free(rng);
  dt_fit_free(w);
  dt_model_free(m);
  free(wave); free(truthf); free(flux); free(sigma);
  return dt_test_done();
}
