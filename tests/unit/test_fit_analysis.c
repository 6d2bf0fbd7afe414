/* The per-spectrum analysis: pixels, continuum, fit, measurements and the
 * arrays the inspector plots, on synthetic spectra made here (dt_model_eval
 * times a known continuum plus Gaussian noise; fixed seed).
 *
 * External references: Na I atomic data, Morton (2003, ApJS 149, 205); the
 * linear curve of growth W = pi e^2/(m_e c^2) N f lambda^2 = 8.85e-13 N f
 * lambda^2 [A, cm] (Spitzer 1978, Physical Processes in the Interstellar
 * Medium, eq. 3-48) for the equivalent width of an optically thin line. */
#include <gsl/gsl_randist.h>
#include <gsl/gsl_rng.h>
#include <math.h>
#include <stdlib.h>
#include <string.h>

#include "doubletty/analysis.h"
#include "doubletty/atomic.h"
#include "doubletty/model.h"
#include "harness.h"

static const char table[] =
    "NaI 5891.5833 0.6408 6.16e7 5897.5581 0.3201 6.14e7 Morton (2003) ApJS 149, 205\n"
    "CaII 3934.7750 0.6267 1.444e8 3969.5901 0.3116 1.409e8 Morton (2003) ApJS 149, 205\n";

/* A spectrum over [lo, hi) with pixels of dl, resolution R, components c,
 * continuum c0 + c1 x + c2 x^2 (x = (lambda - 5895)/30), S/N snr. */
static dt_spectrum *make(const dt_atomic *t, double lo, double hi, double dl, double R,
                         const dt_component *c, size_t nc, const double *cc, double snr,
                         gsl_rng *rng) {
  size_t n = (size_t)((hi - lo) / dl);
  dt_spectrum *s = dt_spectrum_alloc(n);
  for (size_t i = 0; i < n; i++) s->wave[i] = lo + dl * (double)i;
  dt_model_config cfg;
  memset(&cfg, 0, sizeof cfg);
  cfg.doublet = dt_atomic_find(t, "NaI");
  cfg.resolution = R;
  dt_model *m = dt_model_alloc(s->wave, n, &cfg, DT_MAX_COMP, NULL);
  dt_model_eval(m, c, nc, s->flux, NULL, 0);
  dt_model_free(m);
  for (size_t i = 0; i < n; i++) {
    double x = (s->wave[i] - 5895.0) / 30.0;
    double cont = cc[0] + cc[1] * x + cc[2] * x * x;
    s->sigma[i] = cont / snr;
    s->flux[i] = s->flux[i] * cont + (rng ? gsl_ran_gaussian(rng, s->sigma[i]) : 0.0);
    s->mask[i] = 0;
  }
  s->has_sigma = 1;
  return s;
}

static void base_judgement(dt_judgement *j) {
  dt_judgement_init(j);
  strcpy(j->doublet, "NaI");
  j->resolution = 20000;
  j->vlo = -500;
  j->vhi = 500;
  j->cont_order = 2;
}

static void test_fit_and_arrays(const dt_atomic *t, gsl_rng *rng) {
  double cc[3] = {250.0, 30.0, -12.0};
  dt_component truth[1] = {{11.9, 9.0, 35.0}};
  dt_spectrum *s = make(t, 5840, 5950, 0.1, 20000, truth, 1, cc, 60, rng);
  dt_analysis *a = dt_analysis_alloc(s, t);
  CHECK(a != NULL, "analysis allocated");
  CHECK(dt_analysis_model(a) == NULL, "no arrays before a run");
  dt_judgement j;
  base_judgement(&j);
  j.ncomp = 1;
  j.comp[0] = (dt_component){12.0, 15.0, 20.0};
  dt_analysis_out o;
  dt_err e;
  int st = dt_analysis_run(a, &j, &o, &e);
  CHECK(st == DT_OK, "run with an automatic continuum (status %d: %s)", st, e.what);
  CHECK(o.fitted && o.fit.ncomp == 1, "one component fitted");
  CHECK(fabs(o.fit.comp[0].logN - 11.9) < 4 * o.fit.err[0].logN, "logN %.3f +- %.3f vs 11.9",
        o.fit.comp[0].logN, o.fit.err[0].logN);
  CHECK(fabs(o.fit.comp[0].b - 9.0) < 4 * o.fit.err[0].b, "b %.2f +- %.2f vs 9", o.fit.comp[0].b,
        o.fit.err[0].b);
  CHECK(fabs(o.fit.comp[0].v - 35.0) < 4 * o.fit.err[0].v, "v %.2f +- %.2f vs 35",
        o.fit.comp[0].v, o.fit.err[0].v);
  CHECK(o.cont_order == 2, "continuum order 2 used");
  /* selection: both lines' windows */
  double lo = dt_wavelength(-500, 5891.5833, 0), hi = dt_wavelength(500, 5897.5581, 0);
  CHECK(s->wave[o.i0] >= lo && (o.i0 == 0 || s->wave[o.i0 - 1] < lo), "first pixel at the window");
  CHECK(s->wave[o.i0 + o.n - 1] <= hi + 1e-9, "last pixel inside the window");
  const double *w = dt_analysis_wave(a), *v0 = dt_analysis_velocity(a, 0),
               *v1 = dt_analysis_velocity(a, 1), *cont = dt_analysis_continuum(a),
               *mod = dt_analysis_model(a), *res = dt_analysis_residual(a),
               *na = dt_analysis_na_profile(a, 0);
  CHECK(w && v0 && v1 && cont && mod && res && na && dt_analysis_used(a) &&
            dt_analysis_continuum_err(a) && dt_analysis_flux(a) && dt_analysis_sigma(a) &&
            dt_analysis_mask(a),
        "every array is there after a run");
  CHECK(dt_analysis_velocity(a, 2) == NULL, "line index 2 refused");
  size_t mid = o.n / 2;
  CHECK_CLOSE(v0[mid], dt_velocity(w[mid], 5891.5833, 0), 1e-9, "velocity of line 0");
  CHECK_CLOSE(v1[mid], dt_velocity(w[mid], 5897.5581, 0), 1e-9, "velocity of line 1");
  /* continuum within a few sigma of the truth at the window centre */
  double x = (w[mid] - 5895.0) / 30.0, ct = cc[0] + cc[1] * x + cc[2] * x * x;
  CHECK(fabs(cont[mid] - ct) < 0.01 * ct, "continuum within 1%% (%.3f vs %.3f)", cont[mid], ct);
  /* the model is below the continuum; each component's own model lies
     between the total model and the continuum */
  const double *c0 = dt_analysis_component_model(a, 0);
  CHECK(c0 != NULL && dt_analysis_component_model(a, 1) == NULL, "component models");
  int ok = 1;
  for (size_t i = 0; i < o.n; i++)
    if (mod[i] > cont[i] * (1 + 1e-12) || c0[i] < mod[i] * (1 - 1e-9)) ok = 0;
  CHECK(ok, "model <= component model <= continuum");
  /* residuals are (flux - model) / sigma */
  CHECK_CLOSE(res[mid], (s->flux[o.i0 + mid] - mod[mid]) / s->sigma[o.i0 + mid], 1e-12,
              "residual definition");

  /* eval at the fitted values gives the fit's chi2 */
  dt_judgement j2 = j;
  j2.comp[0] = o.fit.comp[0];
  dt_analysis_out o2;
  st = dt_analysis_eval(a, &j2, &o2, &e);
  CHECK(st == DT_OK && !o2.fitted, "eval without fitting");
  CHECK_REL(o2.fit.chi2, o.fit.chi2, 1e-9, "eval chi2 = fit chi2 at the same values");
  CHECK(o2.fit.dof == o.fit.dof, "same dof");
  /* a second run with the same settings (model and continuum reused) */
  dt_analysis_out o3;
  dt_analysis_run(a, &j, &o3, NULL);
  CHECK(memcmp(o3.fit.comp, o.fit.comp, sizeof o.fit.comp) == 0, "rerun is identical");

  /* measurement of the stronger line against the curve of growth: the
     linear part W_lin = 8.85e-13 N f lambda^2 (Spitzer 1978, eq. 3-48), and
     for a Gaussian optical-depth profile of central depth tau0 (here 0.499:
     tau0 = 1.497e-15 N f lambda / b, lambda in A, b in km/s)
     W / W_lin = sum_n (-tau0)^n / ((n+1)! sqrt(n+1)) = 0.845 (the standard
     series of the Doppler curve of growth; from memory, e.g. Spitzer 1978
     section 3.4).  The LSF and damping wings do not change W. */
  double N = pow(10.0, 11.9), lam = 5891.5833e-8;
  double Wlin = 8.85e-13 * N * 0.6408 * lam * lam * 1e8;
  double tau0 = 1.497e-15 * N * 0.6408 * 5891.5833 / 9.0, ratio = 0, term = 1, fact = 1;
  for (int k = 0; k < 12; k++) {
    fact *= k + 1;
    ratio += term / (fact * sqrt(k + 1.0));
    term *= -tau0;
  }
  CHECK_CLOSE(ratio, 0.845, 0.002, "curve-of-growth series at tau0 = %.3f", tau0);
  CHECK(o.measure_status == DT_OK, "measurements made");
  CHECK(fabs(o.line[0].W / Wlin - ratio) < 3 * o.line[0].W_err / Wlin,
        "W(5891)/W_lin = %.3f +- %.3f vs %.3f", o.line[0].W / Wlin, o.line[0].W_err / Wlin, ratio);
  CHECK(o.line[0].W_sig > 5, "line detected in W (%.1f sigma)", o.line[0].W_sig);
  CHECK(o.meas_vlo < 35 && o.meas_vhi > 35, "measurement window around the component");

  /* a search's run without measurements: the same fit, model and
   * residuals, measure_status DT_EINVAL; the setting restores */
  double rmid = res[mid];
  j2.comp[0].logN += 0.3;   /* other residuals first */
  dt_analysis_eval(a, &j2, &o2, NULL);
  CHECK(dt_analysis_no_measure(a, 1) == 0, "measurements are on by default");
  dt_analysis_out o4;
  dt_analysis_run(a, &j, &o4, NULL);
  CHECK(dt_analysis_no_measure(a, 0) == 1, "no_measure was on");
  CHECK(o4.measure_status == DT_EINVAL && o4.fit.chi2 == o.fit.chi2 &&
            memcmp(o4.fit.comp, o.fit.comp, sizeof o.fit.comp) == 0 &&
            dt_analysis_residual(a)[mid] == rmid,
        "no_measure: the same fit and residuals, not measured (status %d)", o4.measure_status);
  dt_analysis_run(a, &j, &o4, NULL);
  CHECK(o4.measure_status == DT_OK && o4.line[0].W == o.line[0].W,
        "measured again once it is off (W %.5f)", o4.line[0].W);
  dt_analysis_free(a);
  dt_spectrum_free(s);
}

static void test_options(const dt_atomic *t, gsl_rng *rng) {
  /* linear continuum, user windows well outside the line windows */
  double cc[3] = {100.0, -8.0, 0.0};
  dt_component truth[1] = {{12.0, 8.0, -20.0}};
  dt_spectrum *s = make(t, 5820, 5970, 0.1, 20000, truth, 1, cc, 80, rng);
  dt_analysis *a = dt_analysis_alloc(s, t);
  dt_judgement j;
  base_judgement(&j);
  j.vlo = -300;
  j.vhi = 300;
  j.cont_order = 1;
  j.nwin = 2;
  j.win[0] = (dt_window){5825.0, 5855.0};
  j.win[1] = (dt_window){5935.0, 5965.0};
  j.ncomp = 1;
  j.comp[0] = (dt_component){12.0, 10.0, 0.0};
  dt_analysis_out o;
  dt_err e;
  int st = dt_analysis_run(a, &j, &o, &e);
  CHECK(st == DT_OK, "continuum from windows outside the fit window (%s)", e.what);
  const double *cont = dt_analysis_continuum(a), *w = dt_analysis_wave(a);
  double maxdev = 0;
  for (size_t i = 0; i < o.n; i++) {
    double ct = cc[0] + cc[1] * (w[i] - 5895.0) / 30.0;
    maxdev = fmax(maxdev, fabs(cont[i] / ct - 1));
  }
  CHECK(maxdev < 0.005, "interpolated continuum within 0.5%% (%.4f)", maxdev);

  /* continuum fixed at 1 plus a joint linear continuum */
  dt_analysis_opts op;
  dt_analysis_opts_init(&op);
  op.joint_cont = 2;
  dt_analysis_set_opts(a, &op);
  j.nwin = 0;
  j.cont_order = -1;
  st = dt_analysis_run(a, &j, &o, &e);
  CHECK(st == DT_OK && o.fit.ncont == 2, "joint continuum fitted (%s)", e.what);
  double ct = cc[0] + cc[1] * (w[o.n / 2] - 5895.0) / 30.0;
  CHECK(fabs(dt_analysis_continuum(a)[o.n / 2] / ct - 1) < 0.005,
        "joint continuum recovered (%.3f vs %.3f)", dt_analysis_continuum(a)[o.n / 2], ct);
  CHECK(fabs(o.fit.comp[0].v + 20) < 4 * o.fit.err[0].v, "component with a joint continuum");

  /* fixed integration window from the options */
  op.joint_cont = 0;
  op.int_vlo = -60;
  op.int_vhi = 20;
  dt_analysis_set_opts(a, &op);
  j.cont_order = 1;
  j.nwin = 2;
  st = dt_analysis_run(a, &j, &o, &e);
  CHECK(st == DT_OK && o.meas_vlo == -60 && o.meas_vhi == 20, "integration window from options");
  dt_analysis_free(a);
  dt_spectrum_free(s);
}

static void test_errors(const dt_atomic *t, gsl_rng *rng) {
  double cc[3] = {1.0, 0.0, 0.0};
  dt_component truth[1] = {{12.0, 8.0, 0.0}};
  dt_spectrum *s = make(t, 5860, 5930, 0.1, 20000, truth, 1, cc, 50, rng);
  dt_analysis *a = dt_analysis_alloc(s, t);
  dt_judgement j;
  dt_analysis_out o;
  dt_err e;
  base_judgement(&j);
  strcpy(j.doublet, "XyZ");
  CHECK(dt_analysis_run(a, &j, &o, &e) == DT_ENOTFOUND && strstr(e.what, "XyZ"),
        "unknown doublet: %s", e.what);
  base_judgement(&j);
  strcpy(j.doublet, "CaII");
  CHECK(dt_analysis_run(a, &j, &o, &e) == DT_ERANGE && strstr(e.what, "not covered"),
        "doublet outside coverage: %s: %s", e.where, e.what);
  base_judgement(&j);
  j.vlo = 100;
  j.vhi = 100;
  CHECK(dt_analysis_run(a, &j, &o, &e) == DT_EINVAL && strstr(e.what, "window"),
        "empty velocity window: %s", e.what);
  base_judgement(&j);
  j.cont_order = 12;
  CHECK(dt_analysis_run(a, &j, &o, &e) == DT_EINVAL, "continuum order out of range: %s", e.what);
  base_judgement(&j);
  j.vsys = NAN;
  CHECK(dt_analysis_run(a, &j, &o, &e) == DT_EINVAL, "NaN rest frame: %s", e.what);
  base_judgement(&j);
  j.vlo = -4000;   /* most of the window beyond the spectrum */
  j.vhi = 4000;
  CHECK(dt_analysis_run(a, &j, &o, &e) == DT_ERANGE, "window mostly off the spectrum: %s", e.what);
  base_judgement(&j);
  memset(s->mask, 1, s->n);
  CHECK(dt_analysis_run(a, &j, &o, &e) == DT_EMASKED && strstr(e.what, "masked"),
        "all masked: %s", e.what);
  memset(s->mask, 0, s->n);
  /* a run that works after the failures (no stale state) */
  j.ncomp = 1;
  j.comp[0] = truth[0];
  CHECK(dt_analysis_run(a, &j, &o, &e) == DT_OK, "works again after failures");
  /* a fit that cannot converge in 1 iteration: reported, arrays still set */
  dt_analysis_opts op;
  dt_analysis_opts_init(&op);
  op.max_iter = 1;
  dt_analysis_set_opts(a, &op);
  j.comp[0] = (dt_component){10.0, 50.0, 200.0};
  int st = dt_analysis_run(a, &j, &o, &e);
  CHECK(st == DT_ENOCONV && o.fit_status == DT_ENOCONV && dt_analysis_model(a) != NULL,
        "non-convergence reported with the best state shown (%s)", e.what);
  dt_analysis_free(a);
  dt_spectrum_free(s);
}

/* An analysis rebound from spectrum to spectrum (as each worker of `fit`
 * keeps one) gives what a new analysis of each gives: on the same pixels
 * (its model kept), on other pixels (rebuilt), and after the previous
 * spectrum is freed. */
static int same_run(const dt_analysis_out *x, const dt_analysis_out *y) {
  if (x->fit.ncomp != y->fit.ncomp || x->fit.chi2 != y->fit.chi2) return 0;
  for (size_t k = 0; k < x->fit.ncomp; k++)
    if (x->fit.comp[k].logN != y->fit.comp[k].logN || x->fit.comp[k].b != y->fit.comp[k].b ||
        x->fit.comp[k].v != y->fit.comp[k].v || x->fit.err[k].logN != y->fit.err[k].logN)
      return 0;
  return x->line[0].W == y->line[0].W && x->line[1].W == y->line[1].W;
}

static void test_rebind(const dt_atomic *t, gsl_rng *rng) {
  double cc[3] = {100.0, 5.0, -2.0};
  dt_component tr1[1] = {{12.2, 6.0, 20.0}}, tr2[1] = {{12.3, 9.0, -25.0}};
  dt_spectrum *s1 = make(t, 5860, 5930, 0.1, 20000, tr1, 1, cc, 40, rng);
  dt_spectrum *s2 = make(t, 5860, 5930, 0.1, 20000, tr2, 1, cc, 40, rng);
  dt_spectrum *s3 = make(t, 5860.05, 5930.05, 0.1, 20000, tr1, 1, cc, 40, rng); /* shifted */
  dt_judgement j;
  base_judgement(&j);
  j.ncomp = 1;
  j.comp[0] = (dt_component){12.0, 8.0, 0.0};
  dt_analysis *kept = dt_analysis_alloc(s1, t);
  dt_analysis_out o1, o2, o3, f2, f3;
  CHECK(dt_analysis_run(kept, &j, &o1, NULL) == DT_OK, "a run on the first spectrum");
  dt_spectrum_free(s1);
  CHECK(dt_analysis_rebind(kept, s2) == DT_OK && dt_analysis_run(kept, &j, &o2, NULL) == DT_OK,
        "rebound to a spectrum on the same pixels (the first one freed)");
  dt_analysis *fresh = dt_analysis_alloc(s2, t);
  CHECK(dt_analysis_run(fresh, &j, &f2, NULL) == DT_OK && same_run(&o2, &f2),
        "the same as a new analysis of it (v %.4f, %.4f)", o2.fit.comp[0].v, f2.fit.comp[0].v);
  dt_analysis_free(fresh);
  CHECK(dt_analysis_rebind(kept, s3) == DT_OK && dt_analysis_run(kept, &j, &o3, NULL) == DT_OK,
        "rebound to a spectrum on other pixels");
  fresh = dt_analysis_alloc(s3, t);
  CHECK(dt_analysis_run(fresh, &j, &f3, NULL) == DT_OK && same_run(&o3, &f3) &&
            o3.n == f3.n,
        "the same as a new analysis of it (%zu pixels; log N %.4f, %.4f)", o3.n,
        o3.fit.comp[0].logN, f3.fit.comp[0].logN);
  CHECK(fabs(o3.fit.comp[0].v - 20.0) < 3.0 && fabs(o2.fit.comp[0].v + 25.0) < 3.0,
        "each finds its own line (%.1f, %.1f km/s)", o3.fit.comp[0].v, o2.fit.comp[0].v);
  CHECK(dt_analysis_rebind(kept, NULL) == DT_EINVAL, "no spectrum: refused");
  dt_analysis_free(fresh);
  dt_analysis_free(kept);
  dt_spectrum_free(s2);
  dt_spectrum_free(s3);
}

int main(void) {
  dt_atomic *t = dt_atomic_new();
  CHECK(dt_atomic_parse(t, table, sizeof table - 1, NULL) == DT_OK, "atomic table");
  gsl_rng *rng = gsl_rng_alloc(gsl_rng_mt19937);
  gsl_rng_set(rng, 31415);
  test_fit_and_arrays(t, rng);
  test_options(t, rng);
  test_errors(t, rng);
  test_rebind(t, rng);
  gsl_rng_free(rng);
  dt_atomic_free(t);
  return dt_test_done();
}
