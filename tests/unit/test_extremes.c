/* Numerical extremes: spectra at the edges of what the fitter and the
 * measurements meet in practice, each run through dt_fit_run (directly,
 * with the true continuum), dt_analysis_run (the judgement's components as
 * starting values) and dt_autofit_run (the first pass).  The promise under
 * test: every run ends with a value or a clear failure code -- a known
 * dt_status with a message -- never a NaN where a value is claimed, and
 * never a hang (the wall time of every case is measured against a bound
 * far above the fit's own clock limit).
 *
 * What is "claimed":
 *  - a fit with status DT_OK: finite parameters, finite chi2, chi2_red and
 *    BIC; 1-sigma errors finite or +infinity (fit.h: a parameter the data
 *    do not constrain); a fit with DT_ENOCONV still carries the finite
 *    parameters it reached;
 *  - measurements with measure_status DT_OK: finite W, its error, its
 *    significance, the W and log N limits; log N_a finite, or NaN together
 *    with its error (measure.h: N_a <= 0); failed measurements are NaN with
 *    a status saying so.
 *
 * The cases (the spectra are built with dt_model_eval, a flat or sloped
 * continuum and Gaussian noise from a fixed seed):
 *  - damped lines: Na I and Mg II at log N = 19 .. 21, where the Lorentzian
 *    wings (H(a,u) ~ a / (sqrt(pi) u^2) far from the core, Abramowitz &
 *    Stegun 1964, 7.4.13 asymptotics of w(z)) blacken the whole window;
 *  - b = 0.5 km/s on R = 2000 pixels of ~50 km/s: an unresolved line
 *    a hundred times narrower than a pixel, thin and saturated;
 *  - four components within 10 km/s fitted as four (degenerate);
 *  - all-saturated cores (log N 15, the cores at zero flux);
 *  - runs of exactly zero flux, with zero and with positive sigma;
 *  - negative flux from over-subtracted sky (faint continuum, S/N 2, a
 *    core at -20% of the continuum);
 *  - a continuum window holding one pixel (and one holding none);
 *  - unmasked NaN / Inf pixels (a caller that skipped validation);
 *  - flux scales of 1e-17 (erg s^-1 cm^-2 A^-1, as calibrated spectra
 *    come) and 1e+20;
 *  - starting values on the bounds of the fit (log N 23, b 0.3 km/s);
 *  - a starved iteration and time budget (max_iter 1, 1 microsecond).
 *
 * Atomic data: Morton (2003, ApJS 149, 205).  Line positions of the damped
 * wings from Hjerting's function: for a = Gamma lambda / (4 pi b) << 1 the
 * wing optical depth is tau ~ N sigma0 f Gamma / (4 pi^2 dnu^2)
 * (e.g. Draine 2011, Physics of the Interstellar and Intergalactic Medium,
 * eq. 6.42 -- from memory), used only to choose the cases.
 *
 * `test_extremes --write DIR` writes every case's spectrum as a text file
 * DIR/NAME.txt (wave flux sigma) and a list DIR/cases.txt ("NAME DOUBLET R"
 * per line) for the command-line check tests/scripts/safety_fit_csv.sh. */
#include <errno.h>
#include <gsl/gsl_randist.h>
#include <gsl/gsl_rng.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <time.h>

#include "doubletty/analysis.h"
#include "doubletty/atomic.h"
#include "doubletty/autofit.h"
#include "doubletty/fit.h"
#include "doubletty/model.h"
#include "harness.h"

static const char table[] =
    "NaI 5891.5833 0.6408 6.16e7 5897.5581 0.3201 6.14e7 Morton (2003) ApJS 149, 205\n"
    "MgII 2796.3543 0.6155 2.625e8 2803.5315 0.3058 2.595e8 Morton (2003) ApJS 149, 205\n";

/* A case must finish well within this (the fit's own limit is 2 s per fit;
 * the first pass runs a handful of fits). */
#define CASE_SECONDS_MAX 30.0

typedef struct xcase {
  const char *name;
  const char *doublet;
  double R;             /* resolving power of the data */
  double dl;            /* pixel size [Angstrom] */
  double snr;           /* continuum S/N per pixel (0: no noise) */
  double scale;         /* continuum level */
  double slope;         /* continuum slope across the spectrum (fraction) */
  size_t ncomp;
  dt_component comp[DT_MAX_COMP];  /* truth */
  size_t nstart;
  dt_component start[DT_MAX_COMP]; /* starting values of the fits (0: truth) */
  int modify;           /* one of the MOD_* below */
  int nwin;             /* continuum windows: -1 none (automatic) */
  double win_lo, win_hi; /* see judgement_of */
  int cont_order;
  int max_iter;         /* fit budget (0: defaults) */
  double time_limit;
} xcase;

enum {
  MOD_NONE = 0,
  MOD_ZERO_RUN,         /* 12 pixels of flux 0 with sigma 0 (a gap filled with zeros) */
  MOD_ZERO_RUN_SIGMA,   /* 12 pixels of flux 0 with the usual sigma */
  MOD_ALL_ZERO,         /* every pixel flux 0 */
  MOD_SKY_OVERSUB,      /* continuum lowered so that the core dips below zero */
  MOD_NONFINITE,        /* unmasked NaN and Inf in flux and sigma */
  MOD_CONSTANT          /* flux constant, no noise, no absorption at all */
};

static double now_s(void) {
  struct timespec ts;
  clock_gettime(CLOCK_MONOTONIC, &ts);
  return (double)ts.tv_sec + 1e-9 * (double)ts.tv_nsec;
}

static int known_status(int st) { return st >= DT_OK && st <= DT_ENOTFOUND; }

/* The spectrum of a case. */
static dt_spectrum *build(const dt_atomic *t, const xcase *c, gsl_rng *r) {
  const dt_doublet *d = dt_atomic_find(t, c->doublet);
  double mid = 0.5 * (d->line[0].lambda0 + d->line[1].lambda0);
  double half = 55.0 * mid / 5895.0; /* the same velocity span for every doublet */
  size_t n = (size_t)(2 * half / c->dl);
  dt_spectrum *s = dt_spectrum_alloc(n);
  for (size_t i = 0; i < n; i++) s->wave[i] = mid - half + c->dl * (double)i;
  dt_model_config cfg;
  memset(&cfg, 0, sizeof cfg);
  cfg.doublet = d;
  cfg.resolution = c->R;
  dt_model *m = dt_model_alloc(s->wave, n, &cfg, DT_MAX_COMP, NULL);
  if (m) dt_model_eval(m, c->comp, c->ncomp, s->flux, NULL, 0);
  else
    for (size_t i = 0; i < n; i++) s->flux[i] = 1.0;
  dt_model_free(m);
  s->has_sigma = 1;
  s->resolution = c->R;
  snprintf(s->layout, sizeof s->layout, "text");
  for (size_t i = 0; i < n; i++) {
    double x = (s->wave[i] - mid) / half;
    double cont = c->scale * (1.0 + c->slope * x);
    double snr = c->snr > 0 ? c->snr : 1e4;
    s->sigma[i] = cont / snr;
    s->flux[i] *= cont;
    if (c->snr > 0) s->flux[i] += gsl_ran_gaussian(r, s->sigma[i]);
    s->mask[i] = 0;
  }
  size_t at = dt_spectrum_index(s, d->line[0].lambda0);
  switch (c->modify) {
  case MOD_ZERO_RUN:
  case MOD_ZERO_RUN_SIGMA:
    for (size_t i = at; i < at + 12 && i < n; i++) {
      s->flux[i] = 0.0;
      if (c->modify == MOD_ZERO_RUN) s->sigma[i] = 0.0;
    }
    break;
  case MOD_ALL_ZERO:
    for (size_t i = 0; i < n; i++) s->flux[i] = 0.0;
    break;
  case MOD_SKY_OVERSUB:
    for (size_t i = 0; i < n; i++) s->flux[i] -= 0.2 * c->scale;
    break;
  case MOD_NONFINITE:
    for (size_t i = 0; i + 7 < n; i += 7) {
      if (i % 3 == 0) s->flux[i] = NAN;
      else if (i % 3 == 1) s->flux[i] = INFINITY;
      else s->sigma[i] = NAN;
    }
    s->flux[at] = -INFINITY;
    break;
  case MOD_CONSTANT:
    for (size_t i = 0; i < n; i++) s->flux[i] = c->scale;
    break;
  }
  return s;
}

static void judgement_of(const xcase *c, const dt_spectrum *s, dt_judgement *j) {
  dt_judgement_init(j);
  snprintf(j->doublet, sizeof j->doublet, "%s", c->doublet);
  j->resolution = c->R;
  j->fwhm_kms = 0;
  j->cont_order = c->cont_order;
  if (c->nwin > 0) {
    /* win_lo: where; win_hi: 1 = the window holds exactly the pixel there,
       0 = it lies between two pixels and holds none */
    size_t k = dt_spectrum_index(s, c->win_lo);
    j->nwin = 1;
    j->win[0].lo = s->wave[k] + (c->win_hi >= 1 ? -0.25 : 0.2) * c->dl;
    j->win[0].hi = s->wave[k] + (c->win_hi >= 1 ? 0.25 : 0.3) * c->dl;
  }
  const dt_component *st = c->nstart ? c->start : c->comp;
  j->ncomp = c->nstart ? c->nstart : c->ncomp;
  for (size_t k = 0; k < j->ncomp; k++) j->comp[k] = st[k];
}

/* ---- the checks ---- */

static int finite_or_inf(double x) { return isfinite(x) || x == INFINITY; }

static void check_fit_result(const char *who, const xcase *c, int st, const dt_fit_result *r) {
  CHECK(known_status(st), "%s %s: status %d is a known code (%s)", c->name, who, st, dt_status_str(st));
  CHECK(r->status == st, "%s %s: result status %d (%s) matches the return", c->name, who,
        r->status, dt_status_str(r->status));
  if (st != DT_OK && st != DT_ENOCONV) return;
  int params = 1, errs = 1;
  for (size_t k = 0; k < r->ncomp && k < DT_MAX_COMP; k++) {
    params &= isfinite(r->comp[k].logN) && isfinite(r->comp[k].b) && isfinite(r->comp[k].v);
    errs &= finite_or_inf(r->err[k].logN) && finite_or_inf(r->err[k].b) && finite_or_inf(r->err[k].v);
    errs &= !(r->err[k].logN < 0) && !(r->err[k].b < 0) && !(r->err[k].v < 0);
  }
  CHECK(params, "%s %s (%s): every parameter finite", c->name, who, dt_status_str(st));
  CHECK(errs, "%s %s (%s): every error finite and >= 0, or +inf", c->name, who, dt_status_str(st));
  for (size_t q = 0; q < r->ncont && q < DT_MAX_CONT; q++)
    if (!isfinite(r->cont_coef[q]) || !finite_or_inf(r->cont_err[q])) {
      CHECK(0, "%s %s: joint continuum coefficient %zu finite", c->name, who, q);
      break;
    }
  if (st == DT_OK)
    CHECK(isfinite(r->chi2) && r->chi2 >= 0 && isfinite(r->chi2_red) && isfinite(r->bic),
          "%s %s: chi2 %g, chi2_red %g, BIC %g finite", c->name, who, r->chi2, r->chi2_red, r->bic);
  else
    CHECK(!isnan(r->chi2), "%s %s: chi2 of the unconverged fit is not NaN (%g)", c->name, who, r->chi2);
}

static void check_analysis(const char *who, const xcase *c, int st, const dt_analysis_out *o,
                           const dt_err *e) {
  CHECK(known_status(st), "%s %s: status %d is a known code (%s)", c->name, who, st, dt_status_str(st));
  if (st != DT_OK)
    CHECK(e->what[0] != '\0', "%s %s: failure %s says why: \"%s%s%s\"", c->name, who, dt_status_str(st),
          e->where, e->where[0] ? ": " : "", e->what);
  if (st != DT_OK && st != DT_ENOCONV) return; /* out is not claimed complete */
  if (o->fitted || o->fit.ncomp > 0) check_fit_result(who, c, o->fit_status, &o->fit);
  if (o->measure_status == DT_OK) {
    int ok = 1;
    for (int l = 0; l < 2; l++) {
      const dt_analysis_line *L = &o->line[l];
      /* limits: finite, or both NaN (the first pass gives none for what it
       * calls a detection) */
      ok &= isfinite(L->W) && isfinite(L->W_err) && L->W_err >= 0 && isfinite(L->W_sig) &&
            (isfinite(L->W_limit) ? isfinite(L->logN_limit) : isnan(L->logN_limit));
      ok &= isfinite(L->logN_aod) ? isfinite(L->logN_aod_err) : isnan(L->logN_aod_err);
    }
    CHECK(ok, "%s %s: measurements finite (W %g +- %g, logNa %g; W2 %g +- %g)", c->name, who,
          o->line[0].W, o->line[0].W_err, o->line[0].logN_aod, o->line[1].W, o->line[1].W_err);
  } else {
    CHECK(known_status(o->measure_status) && isnan(o->line[0].W) && isnan(o->line[1].W),
          "%s %s: failed measurements (%s) are NaN, as documented", c->name, who,
          dt_status_str(o->measure_status));
  }
}

static double worst_seconds;
static const char *worst_case = "";

static void timed(const xcase *c, const char *who, double t0) {
  double dt = now_s() - t0;
  if (dt > worst_seconds) {
    worst_seconds = dt;
    worst_case = c->name;
  }
  CHECK(dt < CASE_SECONDS_MAX, "%s %s: finished in %.3f s", c->name, who, dt);
}

static void run_case(const dt_atomic *t, const xcase *c, gsl_rng *r) {
  dt_spectrum *s = build(t, c, r);
  const dt_doublet *d = dt_atomic_find(t, c->doublet);
  dt_judgement j;
  judgement_of(c, s, &j);

  /* 1. the fitter alone, on the whole spectrum, with the true continuum */
  {
    dt_model_config cfg;
    memset(&cfg, 0, sizeof cfg);
    cfg.doublet = d;
    cfg.resolution = c->R;
    dt_model *m = dt_model_alloc(s->wave, s->n, &cfg, DT_MAX_COMP, NULL);
    dt_fit_workspace *w = dt_fit_alloc(s->n, DT_MAX_COMP, DT_MAX_CONT);
    double *cont = malloc(s->n * sizeof *cont);
    CHECK(m && w && cont, "%s: model and fit workspace allocated", c->name);
    if (m && w && cont) {
      const dt_doublet *dd = d;
      double mid = 0.5 * (dd->line[0].lambda0 + dd->line[1].lambda0);
      double half = 0.5 * (s->wave[s->n - 1] - s->wave[0]) + 0.5 * c->dl;
      for (size_t i = 0; i < s->n; i++)
        cont[i] = c->scale * (1.0 + c->slope * (s->wave[i] - mid) / half);
      dt_fit_problem p;
      memset(&p, 0, sizeof p);
      p.model = m;
      p.wave = s->wave;
      p.flux = s->flux;
      p.sigma = s->sigma;
      p.mask = s->mask;
      p.cont = cont;
      p.ncomp = j.ncomp;
      p.comp = j.comp;
      p.vlo = -800;
      p.vhi = 800;
      p.max_iter = c->max_iter;
      p.time_limit = c->time_limit;
      dt_fit_result fr;
      dt_err e;
      dt_err_clear(&e);
      double t0 = now_s();
      int st = dt_fit_run(w, &p, &fr, &e);
      timed(c, "dt_fit_run", t0);
      check_fit_result("dt_fit_run", c, st, &fr);
      if (st != DT_OK)
        CHECK(e.what[0] != '\0', "%s dt_fit_run: failure %s says why: \"%s\"", c->name, dt_status_str(st),
              e.what);
      printf("       %s dt_fit_run: %s, %d iterations, %.3f s\n", c->name, dt_status_str(st), fr.niter,
             dt_fit_last_info(w)->seconds);
    }
    free(cont);
    dt_fit_free(w);
    dt_model_free(m);
  }

  /* 2. the analysis with the judgement's components */
  dt_analysis *a = dt_analysis_alloc(s, t);
  CHECK(a != NULL, "%s: analysis allocated", c->name);
  if (a) {
    dt_analysis_opts ao;
    dt_analysis_opts_init(&ao);
    ao.max_iter = c->max_iter;
    ao.time_limit = c->time_limit;
    dt_analysis_set_opts(a, &ao);
    dt_analysis_out out;
    dt_err e;
    dt_err_clear(&e);
    double t0 = now_s();
    int st = dt_analysis_run(a, &j, &out, &e);
    timed(c, "dt_analysis_run", t0);
    check_analysis("dt_analysis_run", c, st, &out, &e);
    printf("       %s dt_analysis_run: %s%s%s%s\n", c->name, dt_status_str(st), st ? " (" : "",
           st ? e.what : "", st ? ")" : "");
    if (st == DT_OK || st == DT_ENOCONV) {
      const double *model = dt_analysis_model(a), *cont = dt_analysis_continuum(a);
      int ok = model && cont;
      for (size_t i = 0; ok && i < out.n; i++) ok = isfinite(model[i]) && isfinite(cont[i]);
      CHECK(ok, "%s dt_analysis_run: model and continuum arrays finite", c->name);
    }

    /* the same state evaluated without a fit */
    dt_err_clear(&e);
    t0 = now_s();
    st = dt_analysis_eval(a, &j, &out, &e);
    timed(c, "dt_analysis_eval", t0);
    check_analysis("dt_analysis_eval", c, st, &out, &e);
    if (st == DT_OK && out.fit.dof > 0)
      CHECK(isfinite(out.fit.chi2) && isfinite(out.fit.chi2_red), "%s dt_analysis_eval: chi2 finite",
            c->name);

    /* 3. the first pass */
    dt_judgement ja;
    judgement_of(c, s, &ja);
    ja.ncomp = 0;
    dt_autofit_out ao2;
    dt_err_clear(&e);
    t0 = now_s();
    st = dt_autofit_run(a, &ja, NULL, &ao2, &e);
    timed(c, "dt_autofit_run", t0);
    check_analysis("dt_autofit_run", c, st, &ao2.an, &e);
    if (st == DT_OK || st == DT_ENOCONV) {
      CHECK(ao2.suggested == DT_VERDICT_DETECTED || ao2.suggested == DT_VERDICT_NOT_DETECTED ||
                ao2.suggested == DT_VERDICT_UNSURE,
            "%s dt_autofit_run: a verdict is suggested (%s: %s)", c->name, dt_verdict_name(ao2.suggested),
            ao2.reason);
      int ok = 1;
      for (size_t k = 0; k < ja.ncomp; k++)
        ok &= isfinite(ja.comp[k].logN) && isfinite(ja.comp[k].b) && isfinite(ja.comp[k].v);
      CHECK(ok, "%s dt_autofit_run: the judgement's %zu components are finite", c->name, ja.ncomp);
    }
    printf("       %s dt_autofit_run: %s, %zu components, %s (%s)\n", c->name, dt_status_str(st), ja.ncomp,
           dt_verdict_name(ao2.suggested), ao2.reason);
    dt_analysis_free(a);
  }
  dt_spectrum_free(s);
}

/* ---- the cases ---- */

#define C1(lN, bb, vv) 1, {{lN, bb, vv}}

static const xcase CASES[] = {
    /* damped Na I and Mg II: wings over the whole window at the top end */
    {"damped-NaI-19", "NaI", 3000, 0.5, 30, 40, 0.1, C1(19.0, 10, 0), 0, {{0, 0, 0}}, 0, -1, 0, 0, 2, 0, 0},
    {"damped-NaI-20", "NaI", 3000, 0.5, 30, 40, 0.1, C1(20.0, 10, 0), 0, {{0, 0, 0}}, 0, -1, 0, 0, 2, 0, 0},
    {"damped-NaI-21", "NaI", 3000, 0.5, 30, 40, 0.1, C1(21.0, 10, 0), 0, {{0, 0, 0}}, 0, -1, 0, 0, 2, 0, 0},
    {"damped-NaI-21-start12", "NaI", 3000, 0.5, 30, 40, 0.1, C1(21.0, 10, 0), 1, {{12.0, 20, 50}}, 0, -1,
     0, 0, 2, 0, 0},
    {"damped-MgII-20", "MgII", 2000, 0.4, 20, 5, 0.0, C1(20.0, 15, 0), 0, {{0, 0, 0}}, 0, -1, 0, 0, 2, 0, 0},
    {"damped-MgII-21", "MgII", 2000, 0.4, 20, 5, 0.0, C1(21.0, 15, 0), 0, {{0, 0, 0}}, 0, -1, 0, 0, 2, 0, 0},
    /* b = 0.5 km/s on ~50 km/s pixels */
    {"narrow-b0.5-thin", "NaI", 2000, 1.0, 50, 10, 0.0, C1(11.5, 0.5, 0), 0, {{0, 0, 0}}, 0, -1, 0, 0, 1, 0, 0},
    {"narrow-b0.5-sat", "NaI", 2000, 1.0, 50, 10, 0.0, C1(14.0, 0.5, 0), 0, {{0, 0, 0}}, 0, -1, 0, 0, 1, 0, 0},
    {"narrow-b0.5-start-b0.5", "NaI", 2000, 1.0, 50, 10, 0.0, C1(12.0, 10, 20), 1, {{12.0, 0.5, 0}}, 0, -1,
     0, 0, 1, 0, 0},
    /* four components within 10 km/s, fitted as four */
    {"blend-4-in-10kms", "NaI", 5000, 0.2, 40, 20, 0.0, 4,
     {{12.0, 5, -5}, {12.1, 5, -1.5}, {11.9, 5, 2}, {12.0, 5, 5}}, 4,
     {{12.0, 6, -4}, {12.0, 6, -1}, {12.0, 6, 1}, {12.0, 6, 4}}, 0, -1, 0, 0, 2, 0, 0},
    {"blend-8-identical", "NaI", 5000, 0.2, 40, 20, 0.0, 1, {{12.5, 8, 0}}, 8,
     {{12, 8, 0}, {12, 8, 0}, {12, 8, 0}, {12, 8, 0}, {12, 8, 0}, {12, 8, 0}, {12, 8, 0}, {12, 8, 0}}, 0,
     -1, 0, 0, 2, 0, 0},
    /* saturated cores */
    {"saturated-cores", "NaI", 20000, 0.05, 30, 20, 0.0, C1(15.0, 30, 0), 0, {{0, 0, 0}}, 0, -1, 0, 0, 2, 0, 0},
    {"saturated-noiseless", "NaI", 20000, 0.05, 0, 20, 0.0, C1(16.0, 20, 0), 0, {{0, 0, 0}}, 0, -1, 0, 0, 2, 0, 0},
    /* zero flux */
    {"zero-run-sigma0", "NaI", 4000, 0.3, 30, 20, 0.0, C1(12.5, 15, 0), 0, {{0, 0, 0}}, MOD_ZERO_RUN, -1, 0, 0, 2,
     0, 0},
    {"zero-run", "NaI", 4000, 0.3, 30, 20, 0.0, C1(12.5, 15, 0), 0, {{0, 0, 0}}, MOD_ZERO_RUN_SIGMA, -1, 0, 0, 2, 0,
     0},
    {"all-zero", "NaI", 4000, 0.3, 30, 20, 0.0, C1(12.5, 15, 0), 0, {{0, 0, 0}}, MOD_ALL_ZERO, -1, 0, 0, 2, 0, 0},
    /* negative flux from sky subtraction */
    {"sky-oversubtracted", "NaI", 4000, 0.3, 2, 1, 0.0, C1(13.5, 20, 0), 0, {{0, 0, 0}}, MOD_SKY_OVERSUB, -1, 0, 0,
     2, 0, 0},
    {"sky-oversubtracted-fixed-cont", "NaI", 4000, 0.3, 2, 1, 0.0, C1(13.5, 20, 0), 0, {{0, 0, 0}},
     MOD_SKY_OVERSUB, -1, 0, 0, -1, 0, 0},
    /* continuum windows: one pixel, none */
    {"window-one-pixel", "NaI", 4000, 0.3, 30, 20, 0.1, C1(12.5, 15, 0), 0, {{0, 0, 0}}, 0, 1, 5860, 1, 2,
     0, 0},
    {"window-one-pixel-order0", "NaI", 4000, 0.3, 30, 20, 0.1, C1(12.5, 15, 0), 0, {{0, 0, 0}}, 0, 1, 5860,
     1, 0, 0, 0},
    {"window-no-pixel", "NaI", 4000, 0.3, 30, 20, 0.1, C1(12.5, 15, 0), 0, {{0, 0, 0}}, 0, 1, 5860, 0, 2, 0,
     0},
    /* unmasked non-finite pixels */
    {"nonfinite-unmasked", "NaI", 4000, 0.3, 30, 20, 0.0, C1(12.5, 15, 0), 0, {{0, 0, 0}}, MOD_NONFINITE, -1, 0, 0,
     2, 0, 0},
    /* flux scales */
    {"scale-1e-17", "NaI", 4000, 0.3, 30, 3e-17, 0.1, C1(12.5, 15, 0), 0, {{0, 0, 0}}, 0, -1, 0, 0, 2, 0, 0},
    {"scale-1e20", "NaI", 4000, 0.3, 30, 1e20, 0.1, C1(12.5, 15, 0), 0, {{0, 0, 0}}, 0, -1, 0, 0, 2, 0, 0},
    {"constant-no-noise", "NaI", 4000, 0.3, 0, 1, 0.0, 0, {{0, 0, 0}}, 1, {{12, 10, 0}}, MOD_CONSTANT, -1, 0, 0, 2, 0,
     0},
    /* starting values on the bounds */
    {"start-at-bounds", "NaI", 4000, 0.3, 30, 20, 0.0, C1(12.5, 15, 0), 2, {{23.0, 0.3, 0}, {8.0, 300, 590}}, 0,
     -1, 0, 0, 2, 0, 0},
    /* starved budgets */
    {"one-iteration", "NaI", 4000, 0.3, 30, 20, 0.0, C1(12.5, 15, 0), 1, {{11.0, 40, 80}}, 0, -1, 0, 0, 2, 1,
     0},
    {"one-microsecond", "NaI", 4000, 0.3, 30, 20, 0.0, C1(12.5, 15, 0), 1, {{11.0, 40, 80}}, 0, -1, 0, 0, 2, 0,
     1e-6},
};
#define NCASES (sizeof CASES / sizeof CASES[0])

/* --write DIR: the spectra as text files for the command-line check */
static int write_cases(const dt_atomic *t, const char *dir, gsl_rng *r) {
  char path[4096];
  snprintf(path, sizeof path, "%s/cases.txt", dir);
  FILE *lst = fopen(path, "w");
  if (!lst) {
    fprintf(stderr, "test_extremes: %s: %s\n", path, strerror(errno));
    return 1;
  }
  for (size_t k = 0; k < NCASES; k++) {
    const xcase *c = &CASES[k];
    if (c->max_iter || c->time_limit) continue; /* budgets are not command-line settings */
    dt_spectrum *s = build(t, c, r);
    snprintf(path, sizeof path, "%s/%s.txt", dir, c->name);
    FILE *f = fopen(path, "w");
    if (!f) {
      fprintf(stderr, "test_extremes: %s: %s\n", path, strerror(errno));
      fclose(lst);
      return 1;
    }
    fprintf(f, "# %s: synthetic spectrum of a numerical extreme\n", c->name);
    for (size_t i = 0; i < s->n; i++) fprintf(f, "%.10f %.10g %.10g\n", s->wave[i], s->flux[i], s->sigma[i]);
    fclose(f);
    fprintf(lst, "%s %s %g\n", c->name, c->doublet, c->R);
    dt_spectrum_free(s);
  }
  fclose(lst);
  return 0;
}

int main(int argc, char **argv) {
  dt_atomic *t = dt_atomic_new();
  dt_err e;
  if (!t || dt_atomic_parse(t, table, sizeof table - 1, &e) != DT_OK) {
    printf("FAIL - atomic table\n");
    return 1;
  }
  gsl_rng_env_setup();
  gsl_rng *r = gsl_rng_alloc(gsl_rng_mt19937);
  gsl_rng_set(r, 20240611);
  if (argc == 3 && !strcmp(argv[1], "--write")) {
    int rc = write_cases(t, argv[2], r);
    gsl_rng_free(r);
    dt_atomic_free(t);
    return rc;
  }
  double t0 = now_s();
  for (size_t k = 0; k < NCASES; k++) run_case(t, &CASES[k], r);
  printf("       slowest single run: %s, %.3f s; all %zu cases %.1f s\n", worst_case, worst_seconds, NCASES,
         now_s() - t0);
  gsl_rng_free(r);
  dt_atomic_free(t);
  return dt_test_done();
}
