/* The automatic first pass on synthetic spectra (dt_model_eval, a sloped
 * continuum, Gaussian noise, fixed seeds): pure noise must be judged
 * not-detected (false detections rare), clear doublets detected with the
 * components in the right places, single-line absorption and impossible
 * ratios left unsure; options fix the number of components or seed them.
 *
 * Physics used to build the odd cases: the doublet ratio of optically thin
 * gas is f1 lambda1 / (f2 lambda2) ~ 2 for Na I and never below 1
 * (Nachman & Hobbs 1973, ApJ 182, 481 -- from memory); atomic data Morton
 * (2003, ApJS 149, 205). */
#include <gsl/gsl_randist.h>
#include <gsl/gsl_rng.h>
#include <math.h>
#include <stdlib.h>
#include <string.h>

#include "doubletty/analysis.h"
#include "doubletty/atomic.h"
#include "doubletty/autofit.h"
#include "doubletty/model.h"
#include "harness.h"

static const char table[] =
    "NaI 5891.5833 0.6408 6.16e7 5897.5581 0.3201 6.14e7 Morton (2003) ApJS 149, 205\n"
    /* the same lines with one oscillator strength made negligible: a
       "doublet" that absorbs in one line only (a stand-in for an
       interloper), built with the same model */
    "Only5891 5891.5833 0.6408 6.16e7 5897.5581 1e-9 6.14e7 test: stronger line only\n"
    "Only5897 5891.5833 1e-9 6.16e7 5897.5581 0.3201 6.14e7 test: weaker line only\n";

typedef struct spec {
  dt_spectrum *s;
  dt_model *m[3];
} spec;

static spec make(const dt_atomic *t, double dl, double R) {
  spec sp;
  size_t n = (size_t)(110.0 / dl);
  sp.s = dt_spectrum_alloc(n);
  for (size_t i = 0; i < n; i++) sp.s->wave[i] = 5840.0 + dl * (double)i;
  const char *names[3] = {"NaI", "Only5891", "Only5897"};
  for (int k = 0; k < 3; k++) {
    dt_model_config cfg;
    memset(&cfg, 0, sizeof cfg);
    cfg.doublet = dt_atomic_find(t, names[k]);
    cfg.resolution = R;
    sp.m[k] = dt_model_alloc(sp.s->wave, n, &cfg, DT_MAX_COMP, NULL);
  }
  return sp;
}

static void unmake(spec *sp) {
  for (int k = 0; k < 3; k++) dt_model_free(sp->m[k]);
  dt_spectrum_free(sp->s);
}

/* flux = continuum * model(kind, comps) + noise at S/N snr */
static void fill(spec *sp, int kind, const dt_component *c, size_t nc, double snr, gsl_rng *r) {
  dt_spectrum *s = sp->s;
  dt_model_eval(sp->m[kind], c, nc, s->flux, NULL, 0);
  for (size_t i = 0; i < s->n; i++) {
    double x = (s->wave[i] - 5895.0) / 55.0;
    double cont = 40.0 * (1.0 + 0.15 * x - 0.05 * x * x);
    s->sigma[i] = cont / snr;
    s->flux[i] = s->flux[i] * cont + gsl_ran_gaussian(r, s->sigma[i]);
    s->mask[i] = 0;
  }
}

static void judgement(dt_judgement *j, double R) {
  dt_judgement_init(j);
  strcpy(j->doublet, "NaI");
  j->resolution = R;
  j->vlo = -500;
  j->vhi = 500;
  j->cont_order = 2;
}

static int run(const dt_atomic *t, spec *sp, double R, const dt_autofit_opts *op,
               dt_autofit_out *o, dt_judgement *j) {
  dt_analysis *a = dt_analysis_alloc(sp->s, t);
  judgement(j, R);
  dt_err e;
  int st = dt_autofit_run(a, j, op, o, &e);
  dt_analysis_free(a);
  return st;
}

static void test_noise(const dt_atomic *t, gsl_rng *r) {
  spec sp = make(t, 0.3, 4000);
  int nd = 0, det = 0, uns = 0, n = 150;
  for (int k = 0; k < n; k++) {
    fill(&sp, 0, NULL, 0, 25, r);
    dt_autofit_out o;
    dt_judgement j;
    if (run(t, &sp, 4000, NULL, &o, &j) != DT_OK) continue;
    nd += o.suggested == DT_VERDICT_NOT_DETECTED;
    det += o.suggested == DT_VERDICT_DETECTED;
    uns += o.suggested == DT_VERDICT_UNSURE;
  }
  CHECK(nd >= n * 90 / 100, "pure noise: not-detected in >= 90%% (%d of %d)", nd, n);
  CHECK(det <= n / 100, "pure noise: false detections <= 1%% (%d of %d)", det, n);
  printf("       (pure noise: %d not-detected, %d unsure, %d detected)\n", nd, uns, det);
  unmake(&sp);
}

static void test_detections(const dt_atomic *t, gsl_rng *r) {
  /* one clear component, fibre-like resolution */
  spec sp = make(t, 0.3, 4000);
  dt_component c1[1] = {{12.4, 20.0, 60.0}};
  int good = 0, n = 10;
  for (int k = 0; k < n; k++) {
    fill(&sp, 0, c1, 1, 30, r);
    dt_autofit_out o;
    dt_judgement j;
    int st = run(t, &sp, 4000, NULL, &o, &j);
    int ok = st == DT_OK && o.suggested == DT_VERDICT_DETECTED && j.ncomp >= 1 && j.has_fit;
    double best = 1e9;
    for (size_t q = 0; q < j.ncomp; q++) best = fmin(best, fabs(j.comp[q].v - 60.0));
    if (ok && best < 15) good++;
    if (k == 0)
      CHECK(ok && !strcmp(o.reason, "doublet confirmed") && j.fit.status == DT_OK,
            "clear doublet: detected, \"%s\", %zu component(s), v %.1f", o.reason, j.ncomp,
            j.ncomp ? j.comp[0].v : NAN);
  }
  CHECK(good >= n - 1, "clear doublet detected near +60 km/s in %d of %d", good, n);
  unmake(&sp);

  /* two separated components at high resolution: the BIC adds the second */
  sp = make(t, 0.05, 30000);
  dt_component c2[2] = {{12.2, 6.0, -90.0}, {11.9, 5.0, 70.0}};
  fill(&sp, 0, c2, 2, 40, r);
  dt_autofit_out o;
  dt_judgement j;
  int st = run(t, &sp, 30000, NULL, &o, &j);
  CHECK(st == DT_OK && o.suggested == DT_VERDICT_DETECTED, "two components: detected (%s)",
        o.reason);
  CHECK(j.ncomp == 2, "two components found (%zu)", j.ncomp);
  if (j.ncomp == 2) {
    double va = fmin(j.comp[0].v, j.comp[1].v), vb = fmax(j.comp[0].v, j.comp[1].v);
    CHECK(fabs(va + 90) < 3 && fabs(vb - 70) < 3, "at -90 and +70 km/s (%.1f, %.1f)", va, vb);
  }
  CHECK(o.an.fit.ncomp == j.ncomp && o.an.n > 0, "the analysis output matches");

  /* options: a fixed number, seeds */
  dt_autofit_opts op;
  dt_autofit_opts_init(&op);
  op.ncomp = 3;
  st = run(t, &sp, 30000, &op, &o, &j);
  CHECK(st == DT_OK && j.ncomp == 3, "fixed number: 3 components (%zu, status %d)", j.ncomp, st);
  /* one more component than the data hold: the fit still converges to the
     two true ones, and chi2 stays within 5 standard deviations of its dof
     (chi2 distribution: mean dof, variance 2 dof) */
  {
    double dof = (double)o.an.fit.dof;
    CHECK(dof > 0 && fabs(o.an.fit.chi2 - dof) <= 5 * sqrt(2 * dof),
          "fixed number: chi2 %.1f for %.0f degrees of freedom", o.an.fit.chi2, dof);
    int hit[2] = {0, 0};
    for (size_t k = 0; k < j.ncomp && k < DT_MAX_COMP; k++)
      for (int q = 0; q < 2; q++)
        hit[q] |= fabs(j.comp[k].v - c2[q].v) < 3 && fabs(j.comp[k].logN - c2[q].logN) < 0.1;
    CHECK(hit[0] && hit[1], "fixed number: two of the three at the true components "
          "(-90 km/s logN 12.2, +70 km/s logN 11.9)");
  }
  dt_autofit_opts_init(&op);
  op.nseed = 2;
  op.seed_v[0] = -85;
  op.seed_v[1] = 75;
  st = run(t, &sp, 30000, &op, &o, &j);
  CHECK(st == DT_OK && j.ncomp == 2, "seeded: 2 components");
  if (j.ncomp == 2)
    CHECK(fabs(fmin(j.comp[0].v, j.comp[1].v) + 90) < 3 &&
              fabs(fmax(j.comp[0].v, j.comp[1].v) - 70) < 3,
          "seeded components converge to the truth");
  unmake(&sp);
}

static void test_odd(const dt_atomic *t, gsl_rng *r) {
  spec sp = make(t, 0.3, 4000);
  dt_autofit_out o;
  dt_judgement j;
  /* absorption in the stronger line only */
  dt_component c[1] = {{12.8, 25.0, 20.0}};
  fill(&sp, 1, c, 1, 40, r);
  int st = run(t, &sp, 4000, NULL, &o, &j);
  CHECK(st == DT_OK && o.suggested == DT_VERDICT_UNSURE,
        "stronger line only: unsure (%s, \"%s\")", dt_verdict_name(o.suggested), o.reason);
  /* absorption in the weaker line only (ratio below 1: impossible) */
  dt_component c2[1] = {{13.1, 25.0, 20.0}};
  fill(&sp, 2, c2, 1, 40, r);
  st = run(t, &sp, 4000, NULL, &o, &j);
  CHECK(st == DT_OK && o.suggested == DT_VERDICT_UNSURE,
        "weaker line only: unsure (%s, \"%s\")", dt_verdict_name(o.suggested), o.reason);
  unmake(&sp);
}

static void test_errors(const dt_atomic *t, gsl_rng *r) {
  spec sp = make(t, 0.3, 4000);
  fill(&sp, 0, NULL, 0, 25, r);
  dt_analysis *a = dt_analysis_alloc(sp.s, t);
  dt_judgement j;
  dt_autofit_out o;
  dt_err e;
  judgement(&j, 4000);
  strcpy(j.doublet, "MgII");
  CHECK(dt_autofit_run(a, &j, NULL, &o, &e) == DT_ENOTFOUND, "unknown doublet: %s", e.what);
  judgement(&j, 4000);
  dt_autofit_opts op;
  dt_autofit_opts_init(&op);
  op.ncomp = DT_MAX_COMP + 1;
  CHECK(dt_autofit_run(a, &j, &op, &o, &e) == DT_EINVAL, "too many components: %s", e.what);
  memset(sp.s->mask, 1, sp.s->n);
  CHECK(dt_autofit_run(a, &j, NULL, &o, &e) == DT_EMASKED, "all masked: %s", e.what);
  dt_analysis_free(a);
  unmake(&sp);
}

/* Absorption near the edge of the velocity window (here gas of a foreground
 * galaxy 450 km/s below the target's rest frame) must not be absorbed into
 * an automatic continuum: the continuum is fitted outside the lines' whole
 * windows (common practice: continuum regions free of any absorption that
 * is searched for), so it stays at the true level under the line and the
 * first pass finds the component. */
static void test_window_edge(const dt_atomic *t, gsl_rng *r) {
  spec sp = make(t, 0.3, 4000);
  dt_component c = {12.3, 8.0, -450.0};
  fill(&sp, 0, &c, 1, 30.0, r);
  dt_analysis *a = dt_analysis_alloc(sp.s, t);
  dt_judgement j;
  judgement(&j, 4000);
  dt_autofit_out o;
  int st = dt_autofit_run(a, &j, NULL, &o, NULL);
  CHECK(st == DT_OK && o.suggested == DT_VERDICT_DETECTED,
        "line 450 km/s off the rest frame is detected (status %d, verdict %d)", st,
        (int)o.suggested);
  int near = 0;
  for (size_t k = 0; k < j.ncomp; k++) near |= fabs(j.comp[k].v - c.v) < 30.0;
  CHECK(near, "a component within 30 km/s of %.0f km/s", c.v);
  const double *w = dt_analysis_wave(a), *cont = dt_analysis_continuum(a);
  double lc = dt_wavelength(c.v, 5891.5833, 0.0), worst = 0.0;
  for (size_t i = 0; w && i < o.an.n; i++) {
    if (fabs(w[i] - lc) > 1.0) continue;
    double x = (w[i] - 5895.0) / 55.0, truth = 40.0 * (1.0 + 0.15 * x - 0.05 * x * x);
    worst = fmax(worst, fabs(cont[i] / truth - 1.0));
  }
  CHECK(w && worst < 0.01, "continuum under the line within 1%% of the truth (worst %.4f)",
        worst);
  dt_analysis_free(a);
  unmake(&sp);
}

int main(void) {
  dt_atomic *t = dt_atomic_new();
  CHECK(dt_atomic_parse(t, table, sizeof table - 1, NULL) == DT_OK, "atomic table");
  gsl_rng *r = gsl_rng_alloc(gsl_rng_mt19937);
  gsl_rng_set(r, 2718);
  test_noise(t, r);
  test_detections(t, r);
  test_odd(t, r);
  test_errors(t, r);
  test_window_edge(t, r);
  gsl_rng_free(r);
  dt_atomic_free(t);
  return dt_test_done();
}
