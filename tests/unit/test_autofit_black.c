/* The automatic first pass where line cores are black: saturated and
 * damped doublets must be detected with a component near the true
 * velocity, while black absorption in one line only, and noise so poor
 * that pixels reach zero flux, must not be.  A thin doublet is detected as
 * before.
 *
 * Spectra: dt_model_eval (Voigt profiles through a Gaussian LSF), a
 * continuum times the model, Gaussian noise from a fixed seed.  The truth
 * is the input of each spectrum.  Physics used to choose the cases:
 *  - the doublet ratio W1/W2 lies between 1 (saturated) and
 *    f1 lambda1^2 / (f2 lambda2^2) (thin) (Spitzer 1978, Physical Processes
 *    in the Interstellar Medium, ch. 3 -- from memory);
 *  - damping wings make a line black over |dlambda| < W / (2 sqrt(pi)),
 *    W = (lambda^2 / c) 2 sqrt(pi N sigma0 f Gamma / (4 pi^2)) on the
 *    square-root part of the curve of growth (the same source -- from
 *    memory): for Na I 5891 at log N 19 about +-300 km/s, for Mg II 2796
 *    at log N 20 about +-900 km/s, i.e. wider than the velocity window;
 *  - atomic data Morton (2003, ApJS 149, 205). */
#include <gsl/gsl_randist.h>
#include <gsl/gsl_rng.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "doubletty/analysis.h"
#include "doubletty/atomic.h"
#include "doubletty/autofit.h"
#include "doubletty/model.h"
#include "harness.h"

static const char table[] =
    "NaI 5891.5833 0.6408 6.16e7 5897.5581 0.3201 6.14e7 Morton (2003) ApJS 149, 205\n"
    "MgII 2796.3543 0.6155 2.625e8 2803.5315 0.3058 2.595e8 Morton (2003) ApJS 149, 205\n"
    /* the Na I lines with the weaker line's oscillator strength made
       negligible: absorption in one line only (a stand-in for an interloper) */
    "Only5891 5891.5833 0.6408 6.16e7 5897.5581 1e-9 6.14e7 test: stronger line only\n";

typedef struct spec_def {
  const char *doublet;   /* doublet the spectrum is made with */
  double R, dl;          /* resolving power, pixel [Angstrom] */
  double half_kms;       /* the spectrum covers the doublet's midpoint +- this */
  double level, slope;   /* continuum: level * (1 + slope x), x in [-1, 1] */
  double snr;            /* continuum S/N per pixel */
} spec_def;

/* A spectrum of sd with components c (n of them). */
static dt_spectrum *make(const dt_atomic *t, const spec_def *sd, const dt_component *c, size_t n,
                         gsl_rng *r) {
  const dt_doublet *d = dt_atomic_find(t, sd->doublet);
  double mid = 0.5 * (d->line[0].lambda0 + d->line[1].lambda0);
  double half = mid * sd->half_kms / DT_C_KMS;
  size_t np = (size_t)(2.0 * half / sd->dl);
  dt_spectrum *s = dt_spectrum_alloc(np);
  for (size_t i = 0; i < np; i++) s->wave[i] = mid - half + sd->dl * (double)i;
  dt_model_config cfg;
  memset(&cfg, 0, sizeof cfg);
  cfg.doublet = d;
  cfg.resolution = sd->R;
  dt_model *m = dt_model_alloc(s->wave, np, &cfg, DT_MAX_COMP, NULL);
  if (m) dt_model_eval(m, c, n, s->flux, NULL, 0);
  dt_model_free(m);
  for (size_t i = 0; i < np; i++) {
    double x = (s->wave[i] - mid) / half;
    double cont = sd->level * (1.0 + sd->slope * x);
    s->sigma[i] = cont / sd->snr;
    s->flux[i] = (m ? s->flux[i] : 1.0) * cont + gsl_ran_gaussian(r, s->sigma[i]);
    s->mask[i] = 0;
  }
  return s;
}

/* The first pass on s for doublet name at resolution R; cont_order -1: the
 * spectrum is normalised (continuum 1); window: the velocity window is
 * +-window km/s (0: the default). */
static int run(const dt_atomic *t, const dt_spectrum *s, const char *name, double R,
               int cont_order, double window, dt_autofit_out *o, dt_judgement *j) {
  dt_analysis *a = dt_analysis_alloc(s, t);
  dt_judgement_init(j);
  snprintf(j->doublet, sizeof j->doublet, "%s", name);
  j->resolution = R;
  j->cont_order = cont_order;
  if (window > 0) {
    j->vlo = -window;
    j->vhi = window;
  }
  dt_err e;
  dt_err_clear(&e);
  int st = dt_autofit_run(a, j, NULL, o, &e);
  dt_analysis_free(a);
  return st;
}

/* The component of j nearest to velocity v (NULL when none). */
static const dt_component *nearest(const dt_judgement *j, double v) {
  const dt_component *best = NULL;
  for (size_t k = 0; k < j->ncomp; k++)
    if (!best || fabs(j->comp[k].v - v) < fabs(best->v - v)) best = &j->comp[k];
  return best;
}

/* Damped doublets on normalised spectra (the continuum known): detected, a
 * component within a third of the LSF FWHM of the truth, and the column
 * from the wings within 0.3 dex.  At log N 20 the black trough is wider than
 * the default window; the window is widened, as a person would, so that
 * the trough's edges (the only thing that places it) are in it. */
static void test_damped_normalised(const dt_atomic *t, gsl_rng *r) {
  static const struct {
    spec_def sd;
    dt_component c;
    double window;
  } cases[] = {
      {{"NaI", 3000, 0.5, 4000, 1.0, 0.0, 30}, {19.0, 10.0, 35.0}, 0},
      {{"NaI", 3000, 0.5, 4000, 1.0, 0.0, 30}, {20.0, 10.0, -40.0}, 1500},
      {{"MgII", 2000, 0.4, 4000, 1.0, 0.0, 20}, {19.0, 15.0, 25.0}, 0},
      {{"MgII", 2000, 0.4, 4000, 1.0, 0.0, 20}, {20.0, 15.0, -30.0}, 1500},
  };
  for (size_t k = 0; k < sizeof cases / sizeof cases[0]; k++) {
    const spec_def *sd = &cases[k].sd;
    const dt_component *c = &cases[k].c;
    dt_spectrum *s = make(t, sd, c, 1, r);
    dt_autofit_out o;
    dt_judgement j;
    int st = run(t, s, sd->doublet, sd->R, -1, cases[k].window, &o, &j);
    const dt_component *n = nearest(&j, c->v);
    double fwhm = DT_C_KMS / sd->R;
    CHECK(st == DT_OK && o.suggested == DT_VERDICT_DETECTED,
          "%s log N %.0f, normalised: detected (status %d, %s: %s)", sd->doublet, c->logN, st,
          dt_verdict_name(o.suggested), o.reason);
    CHECK(n && fabs(n->v - c->v) < fwhm / 3.0,
          "%s log N %.0f, normalised: a component within %.0f km/s of %+.0f km/s (%+.1f)",
          sd->doublet, c->logN, fwhm / 3.0, c->v, n ? n->v : NAN);
    CHECK(n && fabs(n->logN - c->logN) < 0.3,
          "%s log N %.0f, normalised: log N from the wings within 0.3 dex (%.2f)", sd->doublet,
          c->logN, n ? n->logN : NAN);
    dt_spectrum_free(s);
  }
}

/* Damped doublets with the automatic continuum, as `doubletty fit` runs
 * them (ten noise realisations each).  The continuum is fitted beside the
 * windows, where the wings of the strongest cases still absorb, so
 * detection is asked for every time and the velocity (within one LSF FWHM)
 * in 8 of 10, and only where the data place the trough:
 *  - Mg II at log N 20 in the default window (+-600 km/s): the trough
 *    (+-900 km/s around each line, the wing formula above) fills the window
 *    and nothing in it fixes the velocity; widened to +-1500 km/s its edges
 *    are in and the velocity is checked;
 *  - Na I at log N 20 keeps optical depth ~0.2 where its continuum is
 *    fitted, 1500-3000 km/s out, so its velocity rests on that
 *    continuum's error (placed right on a normalised spectrum above). */
static void test_damped_auto(const dt_atomic *t, gsl_rng *r) {
  static const struct {
    spec_def sd;
    dt_component c;
    double window;
    int check_v;
  } cases[] = {
      {{"NaI", 3000, 0.5, 6000, 40.0, 0.1, 30}, {19.0, 10.0, 35.0}, 0, 1},
      {{"NaI", 3000, 0.5, 6000, 40.0, 0.1, 30}, {20.0, 10.0, -40.0}, 1500, 0},
      {{"MgII", 2000, 0.4, 6000, 5.0, 0.0, 20}, {19.0, 15.0, 25.0}, 0, 1},
      {{"MgII", 2000, 0.4, 6000, 5.0, 0.0, 20}, {20.0, 15.0, -30.0}, 0, 0},
      {{"MgII", 2000, 0.4, 6000, 5.0, 0.0, 20}, {20.0, 15.0, -30.0}, 1500, 1},
  };
  const int nreal = 10;
  for (size_t k = 0; k < sizeof cases / sizeof cases[0]; k++) {
    const spec_def *sd = &cases[k].sd;
    const dt_component *c = &cases[k].c;
    double fwhm = DT_C_KMS / sd->R;
    int det = 0, near = 0;
    double win = 0;
    char first[160] = "";
    for (int q = 0; q < nreal; q++) {
      dt_spectrum *s = make(t, sd, c, 1, r);
      dt_autofit_out o;
      dt_judgement j;
      int st = run(t, s, sd->doublet, sd->R, 2, cases[k].window, &o, &j);
      const dt_component *n = nearest(&j, c->v);
      det += st == DT_OK && o.suggested == DT_VERDICT_DETECTED;
      near += n && fabs(n->v - c->v) < fwhm;
      win = j.vhi;
      if (q == 0)
        snprintf(first, sizeof first, "first: %s, \"%s\", W %.2f +- %.2f A and %.2f +- %.2f A",
                 dt_verdict_name(o.suggested), o.reason, o.an.line[0].W, o.an.line[0].W_err,
                 o.an.line[1].W, o.an.line[1].W_err);
      dt_spectrum_free(s);
    }
    CHECK(det == nreal, "%s log N %.0f, window +-%.0f km/s, automatic continuum: detected in %d "
          "of %d (%s)", sd->doublet, c->logN, win,
          det, nreal, first);
    if (cases[k].check_v)
      CHECK(near >= nreal - 2,
            "%s log N %.0f, window +-%.0f km/s, automatic continuum: a component within %.0f "
            "km/s of %+.0f km/s in %d of %d",
            sd->doublet, c->logN, win, fwhm, c->v,
            near, nreal);
  }
}

/* Saturated but not damped: black cores a few tens of km/s wide. */
static void test_saturated(const dt_atomic *t, gsl_rng *r) {
  spec_def sd = {"NaI", 20000, 0.05, 3000, 20.0, 0.0, 30};
  dt_component c = {15.0, 12.0, -60.0};
  dt_spectrum *s = make(t, &sd, &c, 1, r);
  dt_autofit_out o;
  dt_judgement j;
  int st = run(t, s, "NaI", sd.R, 2, 0, &o, &j);
  const dt_component *n = nearest(&j, c.v);
  CHECK(st == DT_OK && o.suggested == DT_VERDICT_DETECTED, "saturated Na I: detected (%s: %s)",
        dt_verdict_name(o.suggested), o.reason);
  CHECK(n && fabs(n->v - c.v) < 5.0, "saturated Na I: a component within 5 km/s of %+.0f (%+.1f)",
        c.v, n ? n->v : NAN);
  dt_spectrum_free(s);
}

/* A thin doublet (no pixel near zero flux) is found as before. */
static void test_thin(const dt_atomic *t, gsl_rng *r) {
  spec_def sd = {"NaI", 4000, 0.3, 3000, 40.0, 0.1, 30};
  dt_component c = {12.4, 20.0, 60.0};
  int good = 0, n = 5;
  for (int k = 0; k < n; k++) {
    dt_spectrum *s = make(t, &sd, &c, 1, r);
    dt_autofit_out o;
    dt_judgement j;
    int st = run(t, s, "NaI", sd.R, 2, 0, &o, &j);
    const dt_component *q = nearest(&j, c.v);
    good += st == DT_OK && o.suggested == DT_VERDICT_DETECTED &&
            !strcmp(o.reason, "doublet confirmed") && q && fabs(q->v - c.v) < 15.0;
    dt_spectrum_free(s);
  }
  CHECK(good == n, "thin Na I doublet: detected within 15 km/s in %d of %d", good, n);
}

/* Black absorption in the stronger line only: never "detected". */
static void test_black_single(const dt_atomic *t, gsl_rng *r) {
  static const dt_component cases[] = {{14.5, 20.0, 20.0}, {16.0, 15.0, -50.0}};
  spec_def sd = {"Only5891", 4000, 0.3, 3000, 40.0, 0.1, 40};
  for (size_t k = 0; k < sizeof cases / sizeof cases[0]; k++) {
    dt_spectrum *s = make(t, &sd, &cases[k], 1, r);
    dt_autofit_out o;
    dt_judgement j;
    int st = run(t, s, "NaI", sd.R, 2, 0, &o, &j);
    CHECK(st == DT_OK && o.suggested != DT_VERDICT_DETECTED,
          "black line without a partner (log N %.1f): not detected (%s: %s)", cases[k].logN,
          dt_verdict_name(o.suggested), o.reason);
    dt_spectrum_free(s);
  }
}

/* Noise so poor (S/N 3) that pixels fall below the flux floor of the
 * apparent optical depth: the depth-based path runs, and false detections
 * stay rare. */
static void test_poor_noise(const dt_atomic *t, gsl_rng *r) {
  spec_def sd = {"NaI", 4000, 0.3, 3000, 40.0, 0.1, 3};
  int det = 0, black = 0, n = 100;
  for (int k = 0; k < n; k++) {
    dt_spectrum *s = make(t, &sd, NULL, 0, r);
    dt_autofit_out o;
    dt_judgement j;
    if (run(t, s, "NaI", sd.R, 2, 0, &o, &j) == DT_OK) det += o.suggested == DT_VERDICT_DETECTED;
    for (size_t i = 0; i < s->n; i++) black += s->flux[i] < s->sigma[i];
    dt_spectrum_free(s);
  }
  CHECK(black > n, "noise at S/N 3 puts pixels below 1 sigma (%d in %d spectra)", black, n);
  CHECK(det <= n / 50, "noise at S/N 3: false detections <= 2%% (%d of %d)", det, n);
}

int main(void) {
  dt_atomic *t = dt_atomic_new();
  CHECK(dt_atomic_parse(t, table, sizeof table - 1, NULL) == DT_OK, "atomic table");
  gsl_rng *r = gsl_rng_alloc(gsl_rng_mt19937);
  gsl_rng_set(r, 1729);
  test_damped_normalised(t, r);
  test_damped_auto(t, r);
  test_saturated(t, r);
  test_thin(t, r);
  test_black_single(t, r);
  test_poor_noise(t, r);
  gsl_rng_free(r);
  dt_atomic_free(t);
  return dt_test_done();
}
