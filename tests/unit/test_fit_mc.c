/* Monte Carlo check of the fitter's estimates and 1-sigma errors.
 *
 * 1000 synthetic Na I doublets with two unsaturated components, made here
 * with dt_model_eval and Gaussian noise of known sigma (GSL mt19937, fixed
 * seed), are fitted from displaced starting values.  For each parameter
 * type (logN, b, v) the pulls (fit - truth) / error, pooled over both
 * components, must behave like a unit normal when the errors are right:
 * |mean| < 0.15, standard deviation 0.85-1.15, and 68.27% of the true values
 * inside the 1-sigma intervals (Gaussian: erf(1/sqrt 2) = 0.6827,
 * Abramowitz & Stegun 1964, 26.2) within +-4%.
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
  double *pull[3];
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
    CHECK(fabs(mean) < 0.15, "%s: |mean pull| < 0.15 (%.3f)", name[t], mean);
    CHECK(sd > 0.85 && sd < 1.15, "%s: pull standard deviation in 0.85-1.15 (%.3f)", name[t], sd);
    CHECK(fabs(cover - 0.6827) <= 0.04, "%s: 1-sigma coverage 68%% +- 4%% (%.1f%%)", name[t],
          100 * cover);
  }
  for (int t = 0; t < 3; t++) free(pull[t]);
  gsl_rng_free(rng);
  dt_fit_free(w);
  dt_model_free(m);
  free(wave); free(truthf); free(flux); free(sigma);
  return dt_test_done();
}
