/* The Voigt-component fitter: recovery of injected components, frozen and
 * tied parameters, bounds, the joint continuum, the definitions of chi2,
 * dof and BIC, unscaled errors, limits, and hostile inputs (damped, narrow,
 * saturated, zero and negative flux, masked).
 *
 * Synthetic spectra are made here with dt_model_eval from chosen (true)
 * components; the expected values are those inputs, never a previous fit.
 * Na I atomic data: Morton (2003, ApJS 149, 205). */
#include <gsl/gsl_randist.h>
#include <gsl/gsl_rng.h>
#include <math.h>
#include <stdlib.h>
#include <string.h>

#include "doubletty/fit.h"
#include "doubletty/judge.h"
#include "doubletty/model.h"
#include "harness.h"

static dt_doublet nai(void) {
  dt_doublet d;
  memset(&d, 0, sizeof d);
  strcpy(d.name, "NaI");
  /* Morton (2003, ApJS 149, 205): vacuum wavelength, f, Gamma */
  d.line[0] = (dt_line){"NaI 5891", 5891.5833, 0.6408, 6.16e7};
  d.line[1] = (dt_line){"NaI 5897", 5897.5581, 0.3201, 6.14e7};
  return d;
}

typedef struct synth {
  size_t n;
  double *wave, *flux, *sigma, *truth;
  unsigned char *mask;
  dt_model *m;
} synth;

/* Pixels of dlam Angstrom over [lo, hi), model at resolving power R. */
static synth make(const dt_doublet *d, double lo, double hi, double dlam, double R) {
  synth s;
  memset(&s, 0, sizeof s);
  s.n = (size_t)((hi - lo) / dlam);
  s.wave = malloc(s.n * sizeof(double));
  s.flux = malloc(s.n * sizeof(double));
  s.sigma = malloc(s.n * sizeof(double));
  s.truth = malloc(s.n * sizeof(double));
  s.mask = calloc(s.n, 1);
  for (size_t i = 0; i < s.n; i++) s.wave[i] = lo + dlam * (double)i;
  dt_model_config cfg;
  memset(&cfg, 0, sizeof cfg);
  cfg.doublet = d;
  cfg.resolution = R;
  s.m = dt_model_alloc(s.wave, s.n, &cfg, DT_MAX_COMP, NULL);
  return s;
}

static void unmake(synth *s) {
  dt_model_free(s->m);
  free(s->wave); free(s->flux); free(s->sigma); free(s->truth); free(s->mask);
}

/* truth = model(comp) * cont(i); flux = truth + noise of sigma */
static void fill(synth *s, const dt_component *c, size_t nc, double snr, gsl_rng *r,
                 const double *cont) {
  dt_model_eval(s->m, c, nc, s->truth, NULL, 0);
  for (size_t i = 0; i < s->n; i++) {
    double k = cont ? cont[i] : 1.0;
    s->truth[i] *= k;
    s->sigma[i] = k / snr;
    s->flux[i] = s->truth[i] + (r ? gsl_ran_gaussian(r, s->sigma[i]) : 0.0);
  }
}

static dt_fit_problem problem(synth *s, const dt_component *start, size_t nc) {
  dt_fit_problem p;
  memset(&p, 0, sizeof p);
  p.model = s->m;
  p.wave = s->wave;
  p.flux = s->flux;
  p.sigma = s->sigma;
  p.mask = s->mask;
  p.ncomp = nc;
  p.comp = start;
  p.vlo = -400;
  p.vhi = 400;
  /* no wall-clock limit: a loaded machine or a sanitizer build must not turn
     a fit into a non-convergence (the limit is tested with its own value) */
  p.time_limit = -1;
  return p;
}

static void test_recovery(const dt_doublet *d, dt_fit_workspace *w) {
  synth s = make(d, 5880, 5910, 0.1, 20000);
  dt_component truth[2] = {{12.1, 7.5, -35.0}, {11.6, 12.0, 48.0}};
  fill(&s, truth, 2, 1e5, NULL, NULL);   /* noiseless; sigma sets the scale */
  dt_component start[2] = {{11.5, 15.0, -20.0}, {12.2, 5.0, 30.0}};
  dt_fit_problem p = problem(&s, start, 2);
  dt_fit_result r;
  dt_err e;
  int st = dt_fit_run(w, &p, &r, &e);
  CHECK(st == DT_OK, "noiseless 2-component doublet converges (status %d: %s)", st, e.what);
  for (int k = 0; k < 2; k++) {
    CHECK_CLOSE(r.comp[k].logN, truth[k].logN, 1e-5, "component %d logN recovered", k + 1);
    CHECK_CLOSE(r.comp[k].b, truth[k].b, 1e-4, "component %d b recovered", k + 1);
    CHECK_CLOSE(r.comp[k].v, truth[k].v, 1e-4, "component %d v recovered", k + 1);
    CHECK(r.err[k].logN > 0 && r.err[k].b > 0 && r.err[k].v > 0 && isfinite(r.err[k].v),
          "component %d has finite positive errors", k + 1);
  }
  /* The fit stops when the Newton decrement (the chi2 still to gain) is
     below 1e-4, so a noiseless fit ends within about that of chi2 = 0. */
  CHECK(r.chi2 < 1e-3, "noiseless chi2 ~ 0 (%g)", r.chi2);
  CHECK(r.npix == s.n && r.dof == (long)s.n - 6, "npix %zu, dof %ld = n - 6", r.npix, r.dof);
  CHECK(r.niter > 0 && r.niter < DT_FIT_MAX_ITER, "iterations %d", r.niter);

  /* Refit from the solution: converges at once to the same place (the
     state a session replay re-runs). */
  dt_fit_result r2;
  p.comp = r.comp;
  st = dt_fit_run(w, &p, &r2, &e);
  CHECK(st == DT_OK, "refit from the solution converges (status %d: %s)", st, e.what);
  CHECK_CLOSE(r2.comp[0].v, r.comp[0].v, 1e-6, "refit keeps v");
  unmake(&s);
}

static void test_definitions(const dt_doublet *d, dt_fit_workspace *w, gsl_rng *rng) {
  synth s = make(d, 5880, 5910, 0.1, 20000);
  dt_component truth[1] = {{11.9, 9.0, 10.0}};
  fill(&s, truth, 1, 40, rng, NULL);
  s.mask[5] = s.mask[6] = 1;
  s.flux[100] = NAN;                       /* unusable pixel */
  dt_fit_problem p = problem(&s, truth, 1);
  dt_fit_result r;
  int st = dt_fit_run(w, &p, &r, NULL);
  CHECK(st == DT_OK, "noisy 1-component fit converges");
  CHECK(r.npix == s.n - 3, "masked and NaN pixels are not used (%zu of %zu)", r.npix, s.n);
  /* chi2 recomputed independently from the model at the fitted values */
  double *mf = malloc(s.n * sizeof(double)), chi2 = 0;
  dt_model_eval(s.m, r.comp, 1, mf, NULL, 0);
  for (size_t i = 0; i < s.n; i++) {
    if (s.mask[i] || !isfinite(s.flux[i])) continue;
    double z = (s.flux[i] - mf[i]) / s.sigma[i];
    chi2 += z * z;
  }
  CHECK_REL(r.chi2, chi2, 1e-9, "chi2 = sum of squared normalised residuals");
  CHECK(r.dof == (long)r.npix - 3, "dof = n - k");
  CHECK_REL(r.chi2_red, chi2 / (double)r.dof, 1e-9, "chi2_red = chi2 / dof");
  /* BIC = chi2 + k ln n (Schwarz 1978) */
  CHECK_REL(r.bic, chi2 + 3.0 * log((double)r.npix), 1e-9, "BIC = chi2 + k ln n");
  double chi2b;
  size_t np;
  CHECK(dt_fit_chi2(w, &p, r.comp, NULL, NULL, &chi2b, &np) == DT_OK && np == r.npix,
        "dt_fit_chi2 evaluates the same pixels");
  CHECK_REL(chi2b, chi2, 1e-9, "dt_fit_chi2 agrees");

  /* Errors are not scaled by chi2_red: the same data with sigmas doubled
     give errors exactly twice as large (and chi2 a quarter). */
  for (size_t i = 0; i < s.n; i++) s.sigma[i] *= 2;
  dt_fit_result r2;
  dt_fit_run(w, &p, &r2, NULL);
  CHECK_REL(r2.err[0].logN, 2 * r.err[0].logN, 1e-3, "logN error scales with sigma");
  CHECK_REL(r2.err[0].v, 2 * r.err[0].v, 1e-3, "v error scales with sigma");
  CHECK_REL(r2.chi2, r.chi2 / 4, 1e-4, "chi2 scales as 1/sigma^2");

  /* The same fit twice on one workspace: identical (no hidden state). */
  dt_fit_result r3;
  dt_fit_run(w, &p, &r3, NULL);
  CHECK(memcmp(&r2.comp, &r3.comp, sizeof r2.comp) == 0 && r2.chi2 == r3.chi2,
        "workspace reuse is deterministic");
  free(mf);
  unmake(&s);
}

static void test_freeze_tie_bounds(const dt_doublet *d, dt_fit_workspace *w, gsl_rng *rng) {
  synth s = make(d, 5880, 5910, 0.1, 20000);
  dt_component truth[2] = {{12.0, 8.0, -40.0}, {11.8, 8.0, 40.0}};
  fill(&s, truth, 2, 60, rng, NULL);
  dt_component start[2] = {{11.7, 6.0, -30.0}, {12.1, 9.0, 35.0}};
  unsigned char fr[2] = {DT_FREEZE_V, DT_FREEZE_N | DT_FREEZE_B};
  dt_fit_problem p = problem(&s, start, 2);
  p.frozen = fr;
  dt_fit_result r;
  int st = dt_fit_run(w, &p, &r, NULL);
  CHECK(st == DT_OK, "fit with frozen parameters converges");
  CHECK(r.comp[0].v == start[0].v && r.err[0].v == 0, "frozen v keeps its value, error 0");
  CHECK(r.comp[1].logN == start[1].logN && r.comp[1].b == start[1].b,
        "frozen logN and b keep their values");
  CHECK(r.dof == (long)r.npix - 3, "frozen parameters are not counted (dof %ld)", r.dof);
  CHECK(r.comp[0].b != start[0].b && r.comp[1].v != start[1].v, "free parameters moved");

  p.frozen = NULL;
  p.tie_b = 1;
  st = dt_fit_run(w, &p, &r, NULL);
  CHECK(st == DT_OK, "tied-b fit converges");
  CHECK(r.comp[0].b == r.comp[1].b, "tied b: one value for both (%g, %g)", r.comp[0].b,
        r.comp[1].b);
  CHECK_CLOSE(r.comp[0].b, 8.0, 0.8, "tied b near the common truth");
  CHECK(r.dof == (long)r.npix - 5, "tied b is one parameter");
  CHECK(r.err[0].b > 0 && r.err[1].b == 0, "the tied b's error is on component 1 only");

  /* velocity bounds: a window that excludes the truth keeps v inside */
  p.tie_b = 0;
  p.vlo = -20;
  p.vhi = 20;
  dt_component st2[2] = {{12.0, 8.0, -10.0}, {11.8, 8.0, 10.0}};
  p.comp = st2;
  st = dt_fit_run(w, &p, &r, NULL);
  CHECK(st == DT_OK && r.status == DT_OK, "a fit held at a velocity bound converges (status %d)", st);
  CHECK(r.comp[0].v >= -20 && r.comp[0].v <= 20 && r.comp[1].v >= -20 && r.comp[1].v <= 20,
        "velocities stay inside [vlo, vhi] (%g, %g; status %d, %d iterations)", r.comp[0].v,
        r.comp[1].v, st, r.niter);
  const dt_fit_info *inf = dt_fit_last_info(w);
  CHECK((inf->at_bound[0] & DT_FREEZE_V) || (inf->at_bound[1] & DT_FREEZE_V),
        "a velocity pushed to the bound is flagged");
  /* starting values outside the bounds are moved inside, not refused */
  dt_component out[1] = {{30.0, 1000.0, 900.0}};
  p.comp = out;
  p.ncomp = 1;
  p.vlo = -400;
  p.vhi = 400;
  st = dt_fit_run(w, &p, &r, NULL);
  CHECK((st == DT_OK || st == DT_ENOCONV) && r.status == st,
        "starting values beyond the bounds are not refused (status %d: %s)", st, dt_status_str(st));
  CHECK(r.comp[0].logN >= DT_FIT_LOGN_MIN && r.comp[0].logN <= DT_FIT_LOGN_MAX &&
            r.comp[0].b >= DT_FIT_B_MIN && r.comp[0].b <= DT_FIT_B_MAX && fabs(r.comp[0].v) <= 400,
        "starting values beyond the bounds are clamped (%g, %g, %g)", r.comp[0].logN, r.comp[0].b,
        r.comp[0].v);
  unmake(&s);
}

static void test_joint_continuum(const dt_doublet *d, dt_fit_workspace *w, gsl_rng *rng) {
  synth s = make(d, 5870, 5920, 0.1, 20000);
  double *cont = malloc(s.n * sizeof(double));
  /* continuum 1.2 P0 + 0.1 P1 - 0.05 P2 over the window (A&S 22.2.10) */
  for (size_t i = 0; i < s.n; i++) {
    double x = 2.0 * (s.wave[i] - s.wave[0]) / (s.wave[s.n - 1] - s.wave[0]) - 1.0;
    cont[i] = 1.2 + 0.1 * x - 0.05 * 0.5 * (3 * x * x - 1);
  }
  dt_component truth[1] = {{12.2, 6.0, 0.0}};
  fill(&s, truth, 1, 1e5, NULL, cont);
  (void)rng;
  dt_component start[1] = {{11.8, 10.0, 15.0}};
  dt_fit_problem p = problem(&s, start, 1);
  p.ncont = 3;
  dt_fit_result r;
  dt_err e;
  int st = dt_fit_run(w, &p, &r, &e);
  CHECK(st == DT_OK, "joint continuum fit converges (%s)", e.what);
  CHECK(r.ncont == 3, "three coefficients reported");
  CHECK_CLOSE(r.cont_coef[0], 1.2, 1e-5, "P0 coefficient");
  CHECK_CLOSE(r.cont_coef[1], 0.1, 1e-5, "P1 coefficient");
  CHECK_CLOSE(r.cont_coef[2], -0.05, 1e-5, "P2 coefficient");
  CHECK_CLOSE(r.comp[0].logN, 12.2, 1e-5, "logN with a joint continuum");
  CHECK(r.dof == (long)r.npix - 6, "continuum coefficients count as parameters");

  /* the same with the continuum given (fixed) instead */
  p.ncont = 0;
  p.cont = cont;
  st = dt_fit_run(w, &p, &r, &e);
  CHECK(st == DT_OK, "fixed continuum fit converges");
  CHECK_CLOSE(r.comp[0].b, 6.0, 1e-4, "b with a fixed continuum");
  free(cont);
  unmake(&s);
}

/* chi2 of a converged fit to data with Gaussian noise of the stated sigma:
 * within 5 standard deviations of its mean (chi2 distribution, mean dof,
 * variance 2 dof) */
static int chi2_fits(const dt_fit_result *r) {
  double dof = (double)r->dof;
  return dof > 0 && isfinite(r->chi2) && fabs(r->chi2 - dof) <= 5.0 * sqrt(2.0 * dof);
}

/* the truth within 3 of the reported 1-sigma errors (finite, > 0) */
static int covers(double got, double err, double truth) {
  return isfinite(got) && isfinite(err) && err > 0 && fabs(got - truth) <= 3.0 * err;
}

static void test_hostile(const dt_doublet *d, dt_fit_workspace *w, gsl_rng *rng) {
  dt_fit_result r;
  dt_err e;
  int st;
  /* damped line: logN 21 (a DLA-like column) */
  {
    synth s = make(d, 5700, 6100, 0.5, 5000);
    dt_component truth[1] = {{20.5, 10.0, 0.0}};
    fill(&s, truth, 1, 50, rng, NULL);
    dt_component start[1] = {{21.0, 20.0, 30.0}};
    dt_fit_problem p = problem(&s, start, 1);
    p.vlo = -2000;
    p.vhi = 2000;
    st = dt_fit_run(w, &p, &r, &e);
    CHECK(st == DT_OK, "damped line: the fit converges (%s)", dt_status_str(st));
    CHECK_CLOSE(r.comp[0].logN, 20.5, 0.05, "damped logN recovered from the wings");
    CHECK(isfinite(r.chi2), "damped line: chi2 finite");
    unmake(&s);
  }
  /* b = 0.5 km/s on coarse pixels (0.5 A = 25 km/s, R 3000) */
  {
    synth s = make(d, 5860, 5930, 0.5, 3000);
    dt_component truth[1] = {{12.5, 0.5, 0.0}};
    fill(&s, truth, 1, 30, rng, NULL);
    dt_fit_problem p = problem(&s, truth, 1);
    st = dt_fit_run(w, &p, &r, &e);
    CHECK(st == DT_OK, "narrow line on coarse pixels: the fit converges (%s)", dt_status_str(st));
    /* unresolved and saturated: b and logN are poorly constrained, but a
       correct fit has chi2 within 5 standard deviations of its dof (chi2
       distribution: mean dof, variance 2 dof) and errors that cover the
       truth (3 sigma) */
    CHECK(chi2_fits(&r), "narrow line: chi2 %.1f for %ld degrees of freedom", r.chi2, r.dof);
    CHECK(covers(r.comp[0].logN, r.err[0].logN, 12.5) && covers(r.comp[0].v, r.err[0].v, 0.0),
          "narrow line: logN %.2f +- %.2f, v %.1f +- %.1f cover the truth (12.5, 0)",
          r.comp[0].logN, r.err[0].logN, r.comp[0].v, r.err[0].v);
    unmake(&s);
  }
  /* all-saturated cores and heavy blends */
  {
    synth s = make(d, 5880, 5910, 0.1, 20000);
    dt_component truth[3] = {{14.5, 6.0, -10.0}, {14.2, 8.0, 0.0}, {13.8, 5.0, 8.0}};
    fill(&s, truth, 3, 30, rng, NULL);
    dt_component start[3] = {{13.0, 10.0, -15.0}, {13.0, 10.0, 2.0}, {13.0, 10.0, 15.0}};
    dt_fit_problem p = problem(&s, start, 3);
    st = dt_fit_run(w, &p, &r, &e);
    CHECK(st == DT_OK, "saturated blend: the fit converges (%s)", dt_status_str(st));
    CHECK(chi2_fits(&r), "saturated blend: chi2 %.1f for %ld degrees of freedom", r.chi2, r.dof);
    for (int k = 0; k < 3; k++)
      CHECK(covers(r.comp[k].logN, r.err[k].logN, truth[k].logN) &&
                covers(r.comp[k].v, r.err[k].v, truth[k].v) && covers(r.comp[k].b, r.err[k].b, truth[k].b),
            "saturated blend component %d: the errors cover the truth (logN %.2f +- %.2f)", k + 1,
            r.comp[k].logN, r.err[k].logN);
    CHECK(isfinite(r.chi2_red), "saturated blend chi2_red finite");
    unmake(&s);
  }
  /* zero flux everywhere, and negative flux */
  for (int kind = 0; kind < 2; kind++) {
    synth s = make(d, 5880, 5910, 0.1, 20000);
    for (size_t i = 0; i < s.n; i++) {
      s.flux[i] = kind ? -0.5 : 0.0;
      s.sigma[i] = 0.05;
    }
    dt_component start[1] = {{12.0, 10.0, 0.0}};
    dt_fit_problem p = problem(&s, start, 1);
    st = dt_fit_run(w, &p, &r, &e);
    CHECK((st == DT_OK || st == DT_ENOCONV) && r.status == st && isfinite(r.chi2) &&
              !isnan(r.comp[0].logN) && (st == DT_OK || e.what[0]),
          "%s flux: finite result or clear failure (%s)", kind ? "negative" : "zero", dt_status_str(st));
    /* the model flux exp(-tau) lies in [0, 1]: zero flux is reached by a
       broad saturated line (chi2 -> 0); flux -0.5 with sigma 0.05 is at best
       10 sigma from the model flux 0 on every pixel: chi2 >= 100 n */
    if (kind == 0)
      CHECK(r.chi2_red < 1e-3, "zero flux: matched by a saturated line (chi2_red %g)", r.chi2_red);
    else
      CHECK(r.chi2 >= 100.0 * (double)r.npix * (1 - 1e-9) && r.chi2 <= 100.5 * (double)r.npix,
            "negative flux: chi2 %.1f at its floor 100 n = %.1f", r.chi2, 100.0 * (double)r.npix);
    unmake(&s);
  }
  /* masked, too few pixels, bad starts, limits */
  {
    synth s = make(d, 5880, 5910, 0.1, 20000);
    dt_component truth[1] = {{12.0, 10.0, 0.0}};
    fill(&s, truth, 1, 30, rng, NULL);
    dt_fit_problem p = problem(&s, truth, 1);
    memset(s.mask, 1, s.n);
    st = dt_fit_run(w, &p, &r, &e);
    CHECK(st == DT_EMASKED && r.status == DT_EMASKED && strstr(e.what, "usable pixels"),
          "all masked: DT_EMASKED (%s)", e.what);
    s.mask[10] = s.mask[11] = s.mask[12] = 0;
    st = dt_fit_run(w, &p, &r, &e);
    CHECK(st == DT_EMASKED, "3 pixels for 3 parameters: DT_EMASKED");
    memset(s.mask, 0, s.n);
    dt_component bad[1] = {{NAN, 10.0, 0.0}};
    p.comp = bad;
    CHECK(dt_fit_run(w, &p, &r, &e) == DT_EINVAL, "NaN start: DT_EINVAL (%s)", e.what);
    p.comp = truth;
    p.vlo = 10;
    p.vhi = 10;
    CHECK(dt_fit_run(w, &p, &r, &e) == DT_EINVAL, "empty velocity window: DT_EINVAL");
    p.vlo = -400;
    p.vhi = 400;
    p.ncomp = DT_MAX_COMP + 1;
    CHECK(dt_fit_run(w, &p, &r, &e) == DT_EINVAL, "too many components: DT_EINVAL");
    p.ncomp = 1;
    dt_component far[1] = {{10.5, 40.0, 150.0}};
    p.comp = far;
    p.max_iter = 1;
    st = dt_fit_run(w, &p, &r, &e);
    CHECK(st == DT_ENOCONV && r.status == DT_ENOCONV && strstr(e.what, "iteration"),
          "iteration limit: DT_ENOCONV (%s)", e.what);
    CHECK(isfinite(r.chi2) && isfinite(r.comp[0].logN), "best parameters reached are reported");
    p.max_iter = 0;
    p.time_limit = 1e-9;
    st = dt_fit_run(w, &p, &r, &e);
    CHECK(st == DT_ENOCONV && strstr(e.what, "time"), "time limit: DT_ENOCONV (%s)", e.what);
    p.time_limit = -1;
    /* nothing free: the chi2 of the given state */
    unsigned char all[1] = {DT_FREEZE_N | DT_FREEZE_B | DT_FREEZE_V};
    p.frozen = all;
    p.comp = truth;
    st = dt_fit_run(w, &p, &r, &e);
    CHECK(st == DT_OK && r.niter == 0 && r.dof == (long)r.npix, "all frozen: chi2 only");
    /* no components: chi2 of the continuum */
    p.frozen = NULL;
    p.ncomp = 0;
    st = dt_fit_run(w, &p, &r, &e);
    CHECK(st == DT_OK && r.ncomp == 0 && r.chi2 > 0, "no components: continuum chi2");
    unmake(&s);
  }
  CHECK(dt_fit_alloc(100, DT_MAX_COMP + 1, 0) == NULL, "workspace beyond DT_MAX_COMP refused");
  CHECK(dt_fit_alloc(0, 1, 0) == NULL, "workspace of 0 pixels refused");
}

/* A fit with stall_chi2 (the first pass's trials of one more component):
 * a superfluous second component on one real line crawls along a flat
 * valley; with the stall test it ends early, says so (reason 6, stalled),
 * and its chi2 is never below that of the fit run to the end (a trial's
 * gain is not overstated; it may be understated: here by 4.0, the fit to
 * the end finding a lower valley after 67 iterations -- no local test
 * foresaw it, not even the Newton decrement); without it, stalled is never
 * set. */
static void test_stall(const dt_doublet *d, dt_fit_workspace *w, gsl_rng *rng) {
  synth s = make(d, 5880, 5910, 0.1, 20000);
  dt_component truth[1] = {{12.3, 6.0, 10.0}};
  fill(&s, truth, 1, 30.0, rng, NULL);
  dt_component start[2] = {{12.3, 6.0, 10.0}, {11.0, 20.0, 150.0}};
  dt_fit_problem p = problem(&s, start, 2);
  dt_fit_result full, quick;
  dt_fit_run(w, &p, &full, NULL);
  CHECK(!dt_fit_last_info(w)->stalled, "without stall_chi2: never stalled (reason %d)",
        dt_fit_last_info(w)->reason);
  p.stall_chi2 = 0.02;
  int st = dt_fit_run(w, &p, &quick, NULL);
  const dt_fit_info *in = dt_fit_last_info(w);
  CHECK(st == DT_OK, "a stalled fit counts as converged (status %d)", st);
  CHECK(in->stalled == (in->reason == 6), "stalled is reason 6 (%d, %d)", in->stalled, in->reason);
  CHECK(quick.niter <= full.niter, "no more iterations than to the end (%d vs %d)", quick.niter,
        full.niter);
  CHECK(quick.chi2 >= full.chi2 - 1e-6, "chi2 not below the fit to the end's (%.4f vs %.4f)",
        quick.chi2, full.chi2);
  p.stall_chi2 = 1e9;   /* any five iterations gain less: it ends at the fifth */
  dt_fit_run(w, &p, &quick, NULL);
  CHECK(dt_fit_last_info(w)->stalled && quick.niter >= DT_FIT_STALL_ITERS &&
            quick.niter <= DT_FIT_STALL_ITERS + 1,
        "a huge margin ends it after DT_FIT_STALL_ITERS iterations (%d)", quick.niter);
  unmake(&s);
}

/* A trial of one more component with give_up_bic (the first pass's mark:
 * the BIC of the fit without it less the margin of 10, common practice):
 * a superfluous component that cannot pass ends early as stalled, with
 * the verdict of the trial run to the end; a real one is fitted exactly as
 * without the mark. */
static void test_give_up(const dt_doublet *d, dt_fit_workspace *w, gsl_rng *rng) {
  synth s = make(d, 5880, 5910, 0.1, 20000);
  dt_component truth[2] = {{12.3, 6.0, 10.0}, {11.9, 9.0, -120.0}};
  fill(&s, truth, 1, 30.0, rng, NULL);
  dt_component one[1] = {{12.3, 6.0, 10.0}};
  dt_fit_problem p = problem(&s, one, 1);
  dt_fit_result r1, full, quick;
  dt_fit_run(w, &p, &r1, NULL);
  double mark = r1.bic - 10.0;
  dt_component start[2] = {r1.comp[0], {11.0, 20.0, 150.0}};
  p = problem(&s, start, 2);
  dt_fit_run(w, &p, &full, NULL);
  p.give_up_bic = mark;
  int st = dt_fit_run(w, &p, &quick, NULL);
  const dt_fit_info *in = dt_fit_last_info(w);
  CHECK(!(full.bic < mark), "a superfluous component does not pass (BIC %.1f, mark %.1f)",
        full.bic, mark);
  CHECK(st == DT_OK && in->stalled && quick.niter < full.niter,
        "given up: stalled after %d iterations (%d to the end)", quick.niter, full.niter);
  CHECK(!(quick.bic < mark), "... with the same verdict (BIC %.1f)", quick.bic);
  /* a second line that is there: the same fit as without the mark */
  fill(&s, truth, 2, 30.0, rng, NULL);
  p = problem(&s, one, 1);
  dt_fit_run(w, &p, &r1, NULL);
  dt_component real[2] = {r1.comp[0], {11.7, 12.0, -100.0}};
  p = problem(&s, real, 2);
  dt_fit_run(w, &p, &full, NULL);
  p.give_up_bic = r1.bic - 10.0;
  dt_fit_run(w, &p, &quick, NULL);
  CHECK(full.bic < r1.bic - 10.0, "a real component passes (BIC %.1f, mark %.1f)", full.bic,
        r1.bic - 10.0);
  CHECK(quick.chi2 == full.chi2 && quick.niter == full.niter &&
            memcmp(quick.comp, full.comp, 2 * sizeof quick.comp[0]) == 0,
        "... and is fitted as without the mark (chi2 %.4f, %d iterations)", quick.chi2,
        quick.niter);
  unmake(&s);
}

/* no_errors: the same fit, to the bit, without the covariance errors. */
static void test_no_errors(const dt_doublet *d, dt_fit_workspace *w, gsl_rng *rng) {
  synth s = make(d, 5880, 5910, 0.1, 20000);
  dt_component truth[2] = {{12.1, 7.5, -35.0}, {11.6, 12.0, 48.0}};
  fill(&s, truth, 2, 50.0, rng, NULL);
  dt_component start[2] = {{11.8, 10.0, -30.0}, {11.8, 10.0, 40.0}};
  dt_fit_problem p = problem(&s, start, 2);
  dt_fit_result a, b;
  dt_fit_run(w, &p, &a, NULL);
  p.no_errors = 1;
  dt_fit_run(w, &p, &b, NULL);
  CHECK(a.chi2 == b.chi2 && a.niter == b.niter && memcmp(a.comp, b.comp, sizeof a.comp) == 0,
        "no_errors: the same parameters and chi2 (%.6f, %.6f)", a.chi2, b.chi2);
  int zero = 1, some = 1;
  for (size_t k = 0; k < 2; k++) {
    zero &= b.err[k].logN == 0 && b.err[k].b == 0 && b.err[k].v == 0;
    some &= a.err[k].logN > 0 && a.err[k].b > 0 && a.err[k].v > 0;
  }
  CHECK(zero && some, "no_errors: errors 0 (with them: positive)");
  unmake(&s);
}

/* A parameter at a bound.  Pressing against it (a line narrower than
 * DT_FIT_B_MIN): the fit ends there within 30 iterations (43 when only
 * the gradient of the others may end it), the parameter
 * without an error, and the others' errors are those of a fit that holds
 * it there.  Started at the bound but pulled away from it (a broad line,
 * its column held and plain steps, as in a profile's refits, from just
 * inside the bound, where those refits start the narrow valley): the fit leaves the
 * bound and reaches the chi2 of a start from the inside -- a gradient that
 * looks flat only through the bound's logistic map does not end it (here
 * with v held too: nothing else left to converge). */
static void test_at_bound(const dt_doublet *d, dt_fit_workspace *w, gsl_rng *rng) {
  synth s = make(d, 5880, 5910, 0.1, 20000);
  dt_component narrow[1] = {{12.5, 0.1, 15.0}};
  fill(&s, narrow, 1, 100.0, rng, NULL);
  dt_component start[1] = {{12.3, 0.6, 12.0}};
  dt_fit_problem p = problem(&s, start, 1);
  dt_fit_result r, held;
  int st = dt_fit_run(w, &p, &r, NULL);
  const dt_fit_info *in = dt_fit_last_info(w);
  CHECK(st == DT_OK && (in->at_bound[0] & DT_FREEZE_B) && r.comp[0].b < 1.01 * DT_FIT_B_MIN,
        "a line narrower than the bound ends at it (b %.4f, status %d, reason %d)", r.comp[0].b,
        st, in->reason);
  CHECK(r.niter <= 30, "... within 30 iterations (%d)", r.niter);
  CHECK(isinf(r.err[0].b), "... with no error for b (%g)", r.err[0].b);
  unsigned char fb[1] = {DT_FREEZE_B};
  p.comp = r.comp;
  p.frozen = fb;
  dt_fit_run(w, &p, &held, NULL);
  CHECK(fabs(held.err[0].logN / r.err[0].logN - 1) < 0.02 &&
            fabs(held.err[0].v / r.err[0].v - 1) < 0.02,
        "... and log N, v errors as with b held there (%.4f %.4f, %.4f %.4f)", r.err[0].logN,
        held.err[0].logN, r.err[0].v, held.err[0].v);

  dt_component broad[1] = {{12.2, 10.0, 0.0}};
  fill(&s, broad, 1, 40.0, rng, NULL);
  unsigned char fn[1] = {DT_FREEZE_N | DT_FREEZE_V};
  dt_component in_start[1] = {{12.2, 6.0, 0.0}}, bound_start[1] = {{12.2, 1.00001 * DT_FIT_B_MIN, 0.0}};
  p = problem(&s, in_start, 1);
  p.frozen = fn;
  dt_fit_run(w, &p, &held, NULL);
  p.comp = bound_start;
  p.plain = 1;   /* as a profile's refits run */
  st = dt_fit_run(w, &p, &r, NULL);
  CHECK(st == DT_OK && fabs(r.comp[0].b - held.comp[0].b) < 0.01 * held.comp[0].b &&
            r.chi2 < held.chi2 + 0.01,
        "started at the bound, b leaves it (b %.3f, %.3f from inside; chi2 %.3f, %.3f; reason %d, %d iterations)",
        r.comp[0].b, held.comp[0].b, r.chi2, held.chi2, dt_fit_last_info(w)->reason, r.niter);
  unmake(&s);
}

int main(void) {
  dt_doublet d = nai();
  gsl_rng *rng = gsl_rng_alloc(gsl_rng_mt19937);
  gsl_rng_set(rng, 20261202);
  dt_fit_workspace *w = dt_fit_alloc(2000, DT_MAX_COMP, DT_MAX_CONT);
  CHECK(w != NULL, "workspace allocated");
  test_recovery(&d, w);
  test_definitions(&d, w, rng);
  test_freeze_tie_bounds(&d, w, rng);
  test_joint_continuum(&d, w, rng);
  test_hostile(&d, w, rng);
  test_stall(&d, w, rng);
  test_give_up(&d, w, rng);
  test_no_errors(&d, w, rng);
  test_at_bound(&d, w, rng);
  dt_fit_free(w);
  gsl_rng_free(rng);
  return dt_test_done();
}
