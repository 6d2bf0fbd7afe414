/* Measurements over a velocity range against the last analysis run
 * (dt_analysis_measure_range): windows, the other line of the doublet,
 * masked pixels, upper limits.  Synthetic spectra made here (dt_model_eval
 * times a known continuum plus Gaussian noise; fixed seeds).
 *
 * External references: Na I atomic data, Morton (2003, ApJS 149, 205); the
 * linear curve of growth W = pi e^2/(m_e c^2) N f lambda^2 = 8.85e-13 N f
 * lambda^2 [A, cm] (Spitzer 1978, Physical Processes in the Interstellar
 * Medium, eq. 3-48) for an optically thin line. */
#include <gsl/gsl_randist.h>
#include <gsl/gsl_rng.h>
#include <math.h>
#include <stdlib.h>
#include <string.h>

#include "doubletty/analysis.h"
#include "doubletty/atomic.h"
#include "doubletty/cog.h"
#include "doubletty/model.h"
#include "harness.h"

static const char table[] =
    "NaI 5891.5833 0.6408 6.16e7 5897.5581 0.3201 6.14e7 Morton (2003) ApJS 149, 205\n";

/* Rest-frame W [A] of an optically thin line (Spitzer 1978, eq. 3-48). */
static double thin_W(double logN, double f, double lam) {
  return 8.85e-13 * pow(10.0, logN) * f * (lam * 1e-8) * lam;
}

/* A spectrum over [lo, hi) with pixels of dl, resolution R, components c,
 * flat continuum 100, S/N snr (rng NULL: no noise). */
static dt_spectrum *make(const dt_atomic *t, double lo, double hi, double dl, double R,
                         const dt_component *c, size_t nc, double snr, gsl_rng *rng) {
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
    s->sigma[i] = 100.0 / snr;
    s->flux[i] = 100.0 * s->flux[i] + (rng ? gsl_ran_gaussian(rng, s->sigma[i]) : 0.0);
    s->mask[i] = 0;
  }
  s->has_sigma = 1;
  return s;
}

static void judgement(dt_judgement *j, double R) {
  dt_judgement_init(j);
  strcpy(j->doublet, "NaI");
  j->resolution = R;
  j->vlo = -600;
  j->vhi = 600;
  j->cont_order = 0;
}

/* The interface: the run's measurement is the range's; a range away from
 * the gas measures nothing; errors for a range before a run or empty. */
static void test_interface(const dt_atomic *t, gsl_rng *rng) {
  dt_component truth[1] = {{11.5, 6.0, 40.0}};
  dt_spectrum *s = make(t, 5850, 5940, 0.05, 40000, truth, 1, 200, rng);
  dt_analysis *a = dt_analysis_alloc(s, t);
  dt_analysis_line L[2];
  dt_err e;
  CHECK(dt_analysis_measure_range(a, -50, 50, L, &e) == DT_EINVAL,
        "a range before any run is refused (%s)", e.what);
  dt_judgement j;
  judgement(&j, 40000);
  j.ncomp = 1;
  j.comp[0] = (dt_component){11.4, 8.0, 35.0};
  dt_analysis_out o;
  int st = dt_analysis_run(a, &j, &o, &e);
  CHECK(st == DT_OK, "run (%s)", e.what);
  st = dt_analysis_measure_range(a, o.meas_vlo, o.meas_vhi, L, &e);
  CHECK(st == DT_OK, "range measured (%s)", e.what);
  for (int l = 0; l < 2; l++) {
    CHECK(L[l].W == o.line[l].W && L[l].W_err == o.line[l].W_err &&
              L[l].logN_aod == o.line[l].logN_aod,
          "line %d: the run's measurement is the range's (%g vs %g)", l, L[l].W, o.line[l].W);
  }
  st = dt_analysis_measure_range(a, -20, 100, L, &e);
  CHECK(st == DT_OK, "a wider range measured");
  for (int l = 0; l < 2; l++) {
    double want = thin_W(11.5, L[l].line->f, L[l].line->lambda0);
    CHECK(fabs(L[l].W - want) < 3 * L[l].W_err + 0.02 * want,
          "line %d: W %.2f +- %.2f mA vs the linear curve of growth %.2f mA (Spitzer 1978)",
          l, 1e3 * L[l].W, 1e3 * L[l].W_err, 1e3 * want);
  }
  st = dt_analysis_measure_range(a, -250, -150, L, &e);
  CHECK(st == DT_OK && fabs(L[0].W) < 3.5 * L[0].W_err,
        "a range away from the gas: W %.2f +- %.2f mA", 1e3 * L[0].W, 1e3 * L[0].W_err);
  CHECK(dt_analysis_measure_range(a, 50, 50, L, &e) == DT_EINVAL, "an empty range is refused");
  CHECK(dt_analysis_measure_range(a, 50, NAN, L, &e) == DT_EINVAL, "a NaN range is refused");
  dt_analysis_free(a);
  dt_spectrum_free(s);
}

/* Expected rest W of line l of components c (no overlap between them):
 * the curve of growth (cog.h, checked against SciPy in cog_scipy.sh). */
static double want_W(const dt_line *l, const dt_component *c, size_t nc) {
  double w = 0;
  for (size_t k = 0; k < nc; k++) w += dt_cog_W(l, c[k].logN, c[k].b);
  return w;
}

/* Each line's window excludes the other line: components at -150 and +150
 * km/s put the weaker line's -150 component inside the stronger line's
 * window (Na I: 304 km/s apart).  Noise-free spectrum, fitted model = truth. */
static void test_other_line(const dt_atomic *t) {
  dt_component truth[2] = {{11.6, 5.0, -150.0}, {11.4, 6.0, 150.0}};
  dt_spectrum *s = make(t, 5850, 5940, 0.05, 40000, truth, 2, 300, NULL);
  dt_analysis *a = dt_analysis_alloc(s, t);
  dt_judgement j;
  judgement(&j, 40000);
  j.ncomp = 2;
  memcpy(j.comp, truth, sizeof truth);
  dt_analysis_out o;
  dt_err e;
  int st = dt_analysis_eval(a, &j, &o, &e);
  CHECK(st == DT_OK, "evaluated (%s)", e.what);
  dt_analysis_line L[2];
  st = dt_analysis_measure_range(a, -200, 200, L, &e);
  CHECK(st == DT_OK, "measured -200..200 km/s");
  for (int l = 0; l < 2; l++) {
    double w = want_W(L[l].line, truth, 2);
    CHECK_REL(L[l].W, w, 0.01, "%s: W %.2f mA = both components' %.2f mA, nothing of the "
              "other line", L[l].line->label, 1e3 * L[l].W, 1e3 * w);
    CHECK(L[l].blend == DT_BLEND_DIVIDED, "%s: the other line divided out (blend %d)",
          L[l].line->label, L[l].blend);
    CHECK(L[l].masked_frac == 0.0, "%s: nothing masked", L[l].line->label);
  }
  CHECK(!o.saturated, "thin gas is not flagged saturated");
  /* a range away from the other line's image: nothing to divide */
  st = dt_analysis_measure_range(a, -200, -100, L, &e);
  CHECK(st == DT_OK && L[0].blend == DT_BLEND_NONE, "-200..-100 km/s: the stronger line's "
        "window holds nothing of the weaker (blend %d)", L[0].blend);
  dt_analysis_free(a);
  dt_spectrum_free(s);

  /* a black stronger line (+150 km/s, seen at -154 km/s from the weaker
   * line) on the weaker line's -150 km/s component: blended */
  dt_component deep[2] = {{11.4, 6.0, -150.0}, {13.5, 4.0, 150.0}};
  s = make(t, 5850, 5940, 0.05, 40000, deep, 2, 300, NULL);
  a = dt_analysis_alloc(s, t);
  memcpy(j.comp, deep, sizeof deep);
  st = dt_analysis_eval(a, &j, &o, &e);
  st = dt_analysis_measure_range(a, -200, 200, L, &e);
  CHECK(st == DT_OK && L[1].blend == DT_BLEND_MODEL && L[1].blend_frac > 0,
        "a black line in the other's window: blended, %.1f%% of the window from the model",
        100 * L[1].blend_frac);
  double w = want_W(L[1].line, deep, 2);
  CHECK_REL(L[1].W, w, 0.01, "%s: W %.2f mA vs %.2f mA", L[1].line->label, 1e3 * L[1].W,
            1e3 * w);
  dt_analysis_free(a);
  dt_spectrum_free(s);
}

/* Masked pixels in the window are filled from the fitted model and counted;
 * W does not shrink. */
static void test_masked(const dt_atomic *t, gsl_rng *rng) {
  dt_component truth[1] = {{11.8, 4.0, 0.0}};
  dt_spectrum *s = make(t, 5850, 5940, 0.05, 40000, truth, 1, 100, rng);
  dt_analysis *a = dt_analysis_alloc(s, t);
  dt_judgement j;
  judgement(&j, 40000);
  j.ncomp = 1;
  j.comp[0] = truth[0];
  dt_analysis_out o;
  dt_err e;
  dt_analysis_run(a, &j, &o, &e);
  dt_analysis_line ref[2], L[2];
  dt_analysis_measure_range(a, -30, 30, ref, &e);
  /* mask the two deepest pixels of the stronger line */
  double lam = dt_wavelength(0.0, 5891.5833, 0.0);
  size_t c = dt_spectrum_index(s, lam);
  s->mask[c] = s->mask[c + 1] = 1;
  j.comp[0] = o.fit.comp[0];
  dt_analysis_run(a, &j, &o, &e);
  int st = dt_analysis_measure_range(a, -30, 30, L, &e);
  CHECK(st == DT_OK, "measured with masked pixels");
  CHECK(fabs(L[0].W - ref[0].W) < 0.5 * ref[0].W_err,
        "two masked core pixels: W %.2f mA vs %.2f +- %.2f unmasked", 1e3 * L[0].W,
        1e3 * ref[0].W, 1e3 * ref[0].W_err);
  size_t npix = 0;
  for (size_t i = 0; i < s->n; i++) {
    double v = dt_velocity(s->wave[i], 5891.5833, 0.0);
    npix += v >= -30 && v <= 30;
  }
  CHECK_CLOSE(L[0].masked_frac, 2.0 / (double)npix, 1e-12, "masked fraction 2/%zu", npix);
  CHECK(L[1].masked_frac == 0.0, "the weaker line's window has none");
  dt_analysis_free(a);
  dt_spectrum_free(s);
}

/* Damping wings in the continuum regions: the fitted lines' optical depth
 * at the inner edges of the automatic continuum's regions (where the
 * lines' windows end) against the Lorentzian wing of each line,
 *   tau = N sigma0 f Gamma / (4 pi^2 dnu^2),  dnu = dv / lambda
 * (the far wing of the Voigt profile; e.g. Draine 2011, Physics of the
 * Interstellar and Intergalactic Medium, eq. 6.41 -- from memory), and the
 * warning it raises; a thin line raises none. */
static void test_wings(const dt_atomic *t) {
  const double sigma0 = 0.02654008856, c_cms = 2.99792458e10;
  dt_component damped[1] = {{19.0, 5.0, 0.0}};
  dt_spectrum *s = make(t, 5800, 5990, 0.1, 20000, damped, 1, 100, NULL);
  dt_analysis *a = dt_analysis_alloc(s, t);
  dt_judgement j;
  judgement(&j, 20000);
  j.cont_order = 2;
  j.nwin = 0;
  j.ncomp = 1;
  j.comp[0] = damped[0];
  dt_analysis_out o;
  dt_err e;
  int st = dt_analysis_eval(a, &j, &o, &e);
  CHECK(st == DT_OK, "damped line evaluated (%s)", e.what);
  const dt_doublet *d = dt_atomic_find(t, "NaI");
  double want = 0;
  for (int side = 0; side < 2; side++) {
    /* the edges: -600 km/s from the bluer line, +600 from the redder */
    double lam = side ? d->line[1].lambda0 * (1 + 600 / 299792.458)
                      : d->line[0].lambda0 * (1 - 600 / 299792.458);
    double tau = 0;
    for (int l = 0; l < 2; l++) {
      const dt_line *ln = &d->line[l];
      double dnu = c_cms / (lam * 1e-8) - c_cms / (ln->lambda0 * 1e-8);
      tau += 1e19 * sigma0 * ln->f * ln->gamma / (4 * M_PI * M_PI * dnu * dnu);
    }
    if (tau > want) want = tau;
  }
  CHECK_REL(o.cont_tau, want, 0.02, "log N 19: tau %.3g at the continuum's edge (Lorentzian "
            "wings %.3g)", o.cont_tau, want);
  char w[200];
  CHECK(dt_analysis_warning(&o, w, sizeof w) && strstr(w, "damping wings"),
        "the warning says so: '%s'", w);
  dt_analysis_free(a);
  dt_spectrum_free(s);
  dt_component thin[1] = {{12.0, 5.0, 0.0}};
  s = make(t, 5800, 5990, 0.1, 20000, thin, 1, 100, NULL);
  a = dt_analysis_alloc(s, t);
  j.comp[0] = thin[0];
  dt_analysis_eval(a, &j, &o, &e);
  CHECK(o.cont_tau < 1e-6 && !dt_analysis_warning(&o, w, sizeof w),
        "log N 12: no warning (tau %.2g)", o.cont_tau);
  dt_analysis_free(a);
  dt_spectrum_free(s);
}

int main(void) {
  dt_atomic *t = dt_atomic_new();
  dt_err e;
  if (dt_atomic_parse(t, table, sizeof table - 1, &e) != DT_OK) {
    printf("atomic table: %s\n", e.what);
    return 1;
  }
  gsl_rng *rng = gsl_rng_alloc(gsl_rng_mt19937);
  gsl_rng_set(rng, 9091);
  test_interface(t, rng);
  test_other_line(t);
  test_masked(t, rng);
  test_wings(t);
  gsl_rng_free(rng);
  dt_atomic_free(t);
  return dt_test_done();
}
