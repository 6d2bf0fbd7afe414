/* Timing of the fitter (not a test; prints figures for `make bench`).
 *
 *  - a single refit of a 2-component Na I doublet on 660 pixels (R = 20000,
 *    0.1 A pixels: the peer's layout), after a small nudge of one component
 *    (what the inspector does on a keystroke) and from a generic start;
 *  - the same refit through dt_analysis_run (continuum reused, measurements
 *    included): the inspector's whole per-keystroke cost;
 *  - one model evaluation with and without the Jacobian;
 *  - a table of fit time against pixels and components.
 * Synthetic spectra (dt_model_eval + Gaussian noise, fixed seed).  Times are
 * medians of wall-clock time (CLOCK_MONOTONIC); on a loaded machine they
 * include waiting for the CPU.  Usage: bench_fit [repeats] */
#include <gsl/gsl_randist.h>
#include <gsl/gsl_rng.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <time.h>

#include "doubletty/analysis.h"
#include "doubletty/atomic.h"
#include "doubletty/fit.h"
#include "doubletty/model.h"

static double now(void) {
  struct timespec ts;
  clock_gettime(CLOCK_MONOTONIC, &ts);
  return (double)ts.tv_sec + 1e-9 * (double)ts.tv_nsec;
}

static int cmpd(const void *a, const void *b) {
  double x = *(const double *)a, y = *(const double *)b;
  return (x > y) - (x < y);
}

static double median(double *t, size_t n) {
  qsort(t, n, sizeof t[0], cmpd);
  return n % 2 ? t[n / 2] : 0.5 * (t[n / 2 - 1] + t[n / 2]);
}

static const char table[] =
    "NaI 5891.5833 0.6408 6.16e7 5897.5581 0.3201 6.14e7 Morton (2003) ApJS 149, 205\n";

typedef struct setup {
  size_t n;
  double *wave, *flux, *sigma;
  dt_model *m;
} setup;

static setup make(const dt_doublet *d, double lo, size_t n, double dlam, double R,
                  const dt_component *c, size_t nc, double snr, gsl_rng *rng) {
  setup s;
  s.n = n;
  s.wave = calloc(n, sizeof(double));
  s.flux = calloc(n, sizeof(double));
  s.sigma = calloc(n, sizeof(double));
  for (size_t i = 0; i < n; i++) s.wave[i] = lo + dlam * (double)i;
  dt_model_config cfg;
  memset(&cfg, 0, sizeof cfg);
  cfg.doublet = d;
  cfg.resolution = R;
  s.m = dt_model_alloc(s.wave, n, &cfg, DT_MAX_COMP, NULL);
  dt_model_eval(s.m, c, nc, s.flux, NULL, 0);
  for (size_t i = 0; i < n; i++) {
    s.sigma[i] = 1.0 / snr;
    s.flux[i] += gsl_ran_gaussian(rng, s.sigma[i]);
  }
  return s;
}

static void unmake(setup *s) {
  dt_model_free(s->m);
  free(s->wave);
  free(s->flux);
  free(s->sigma);
}

/* median seconds of fits from start[], the last iteration count, failures */
static double time_fit(dt_fit_workspace *w, setup *s, const dt_component *start, size_t nc,
                       int repeats, int *iters, int *bad) {
  dt_fit_problem p;
  memset(&p, 0, sizeof p);
  p.model = s->m;
  p.wave = s->wave;
  p.flux = s->flux;
  p.sigma = s->sigma;
  p.ncomp = nc;
  p.comp = start;
  p.vlo = -600;
  p.vhi = 400;
  double *t = malloc((size_t)repeats * sizeof(double));
  dt_fit_result r;
  *bad = 0;
  for (int k = 0; k < repeats; k++) {
    double t0 = now();
    int st = dt_fit_run(w, &p, &r, NULL);
    t[k] = now() - t0;
    if (st != DT_OK) (*bad)++;
    *iters = r.niter;
  }
  double m = median(t, (size_t)repeats);
  free(t);
  return m;
}

int main(int argc, char **argv) {
  int repeats = argc > 1 ? atoi(argv[1]) : 300;
  if (repeats < 5) repeats = 5;
  dt_atomic *at = dt_atomic_new();
  dt_atomic_parse(at, table, sizeof table - 1, NULL);
  const dt_doublet *D = dt_atomic_find(at, "NaI");
  gsl_rng *rng = gsl_rng_alloc(gsl_rng_mt19937);
  gsl_rng_set(rng, 7);
  dt_fit_workspace *w = dt_fit_alloc(20000, DT_MAX_COMP, DT_MAX_CONT);

  /* the inspector's case: 2 components, 660 pixels */
  dt_component truth[2] = {{12.1, 8.0, 12.0}, {11.9, 10.0, -205.0}};
  setup s = make(D, 5862.0, 660, 0.1, 20000, truth, 2, 40, rng);
  dt_component generic[2] = {{12.0, 8.0, 0.0}, {12.0, 8.0, -220.0}};
  dt_component nudged[2] = {{12.1, 8.0, 17.0}, {11.9, 10.0, -205.0}};
  int it, bad;
  printf("single refit, 2 components, %zu pixels (R 20000, 0.1 A pixels):\n", s.n);
  double tn = time_fit(w, &s, nudged, 2, repeats, &it, &bad);
  printf("  after a 5 km/s nudge:   median %.3f ms (%d iterations, %d failed)  [target <= 2 ms]\n",
         1e3 * tn, it, bad);
  double tg = time_fit(w, &s, generic, 2, repeats, &it, &bad);
  printf("  from a generic start:   median %.3f ms (%d iterations, %d failed)\n", 1e3 * tg, it,
         bad);

  /* the same through the analysis (what a keystroke in the inspector costs) */
  {
    dt_spectrum *sp = dt_spectrum_alloc(s.n);
    for (size_t i = 0; i < s.n; i++) {
      sp->wave[i] = s.wave[i];
      sp->flux[i] = 50.0 * s.flux[i];
      sp->sigma[i] = 50.0 * s.sigma[i];
      sp->mask[i] = 0;
    }
    dt_analysis *a = dt_analysis_alloc(sp, at);
    dt_judgement j;
    dt_judgement_init(&j);
    strcpy(j.doublet, "NaI");
    j.resolution = 20000;
    j.vlo = -500;
    j.vhi = 400;
    j.cont_order = 2;
    j.ncomp = 2;
    memcpy(j.comp, nudged, sizeof nudged);
    dt_analysis_out o;
    dt_analysis_run(a, &j, &o, NULL); /* builds the model and the continuum */
    double *t = malloc((size_t)repeats * sizeof(double));
    for (int k = 0; k < repeats; k++) {
      j.comp[0].v = 17.0 + 0.01 * (k % 7);
      double t0 = now();
      dt_analysis_run(a, &j, &o, NULL);
      t[k] = now() - t0;
    }
    printf("  analysis refit (continuum kept, measurements): median %.3f ms on %zu pixels\n",
           1e3 * median(t, (size_t)repeats), o.n);
    for (int k = 0; k < repeats; k++) {
      j.comp[0].v = 17.0 + 0.01 * (k % 7);
      double t0 = now();
      dt_analysis_eval(a, &j, &o, NULL);
      t[k] = now() - t0;
    }
    printf("  analysis without fitting (a nudge shown as is): median %.3f ms\n",
           1e3 * median(t, (size_t)repeats));
    free(t);
    dt_analysis_free(a);
    dt_spectrum_free(sp);
  }

  /* model evaluation alone, parameters changing every call */
  {
    double *f = malloc(s.n * sizeof(double)), *J = malloc(s.n * 6 * sizeof(double));
    double *t = malloc((size_t)repeats * sizeof(double));
    dt_component c[2] = {truth[0], truth[1]};
    for (int k = 0; k < repeats; k++) {
      c[0].v = 12.0 + 1e-3 * k;
      double t0 = now();
      dt_model_eval(s.m, c, 2, f, NULL, 0);
      t[k] = now() - t0;
    }
    double m0 = median(t, (size_t)repeats);
    for (int k = 0; k < repeats; k++) {
      c[0].v = 12.0 + 1e-3 * k;
      double t0 = now();
      dt_model_eval(s.m, c, 2, f, J, 6);
      t[k] = now() - t0;
    }
    printf("model evaluation (2 components, %zu pixels): %.1f us, with Jacobian %.1f us\n", s.n,
           1e6 * m0, 1e6 * median(t, (size_t)repeats));
    free(f);
    free(J);
    free(t);
  }
  unmake(&s);

  /* time vs pixels and components */
  printf("\nmedian fit time [ms] (iterations) by pixels (rows) and components (columns),\n"
         "R 20000, 0.1 A pixels, S/N 40, components 40 km/s apart, start 4 km/s off:\n");
  printf("%8s", "pixels");
  for (size_t nc = 1; nc <= 4; nc++) printf("  %12zu", nc);
  printf("\n");
  size_t npix[] = {165, 330, 660, 1320, 2640};
  for (size_t k = 0; k < sizeof npix / sizeof npix[0]; k++) {
    double lo = npix[k] < 300 ? 5886.0 : 5895.0 - 0.05 * (double)npix[k];
    printf("%8zu", npix[k]);
    for (size_t nc = 1; nc <= 4; nc++) {
      dt_component tr[4], st[4];
      for (size_t c = 0; c < nc; c++) {
        tr[c] = (dt_component){11.9, 7.0, -60.0 + 40.0 * (double)c};
        st[c] = (dt_component){12.0, 9.0, tr[c].v + 4.0};
      }
      setup q = make(D, lo, npix[k], 0.1, 20000, tr, nc, 40, rng);
      double tq = time_fit(w, &q, st, nc, repeats / 5 + 3, &it, &bad);
      printf("  %7.3f (%2d)%s", 1e3 * tq, it, bad ? "!" : " ");
      unmake(&q);
    }
    printf("\n");
  }
  dt_fit_free(w);
  gsl_rng_free(rng);
  dt_atomic_free(at);
  return 0;
}
