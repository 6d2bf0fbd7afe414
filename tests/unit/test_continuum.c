/* Continuum fitting: Legendre values, recovery of a known continuum under
 * noise with honest error bars, window selection, sigma-clipping of
 * absorption, the smoothing spline, and bad input. */
#include <math.h>
#include <stdlib.h>
#include <string.h>

#include <gsl/gsl_randist.h>
#include <gsl/gsl_rng.h>

#include "doubletty/atomic.h"
#include "doubletty/continuum.h"
#include "doubletty/model.h"
#include "fixtures.h"
#include "harness.h"

#define NPIX 400

typedef struct {
  dt_spectrum s;
  double wave[NPIX], flux[NPIX], sigma[NPIX], truth[NPIX];
  unsigned char mask[NPIX];
} spec;


/* The continuum every test injects: a quadratic in wavelength, in flux
 * units of order 1e-17 as real spectra have. */
static double cont_true(double lam) {
  double t = (lam - 5890.0) / 30.0;
  return 2.0e-17 * (1.0 + 0.08 * t - 0.05 * t * t);
}

static void make(spec *p, gsl_rng *rng, double snr) {
  memset(&p->s, 0, sizeof p->s);
  p->s.n = NPIX;
  p->s.wave = p->wave;
  p->s.flux = p->flux;
  p->s.sigma = p->sigma;
  p->s.mask = p->mask;
  p->s.has_sigma = 1;
  for (size_t i = 0; i < NPIX; i++) {
    p->wave[i] = 5860.0 + 0.15 * (double)i;
    p->truth[i] = cont_true(p->wave[i]);
    p->sigma[i] = p->truth[i] / snr;
    p->flux[i] = p->truth[i] + (rng ? gsl_ran_gaussian(rng, p->sigma[i]) : 0.0);
    p->mask[i] = 0;
  }
}

/* Multiply a Gaussian absorption line into the flux (depth d, width sw A). */
static void absorb(spec *p, double lc, double depth, double sw) {
  for (size_t i = 0; i < NPIX; i++) {
    double x = (p->wave[i] - lc) / sw;
    p->flux[i] *= 1.0 - depth * exp(-0.5 * x * x);
  }
}

static void test_legendre(void) {
  /* Explicit forms (Abramowitz & Stegun 1964, 22.3.8 / Table 22.9, from
   * memory): P2 = (3x^2-1)/2, P3 = (5x^3-3x)/2, P4 = (35x^4-30x^2+3)/8,
   * and P_n(1) = 1, P_n(-1) = (-1)^n (A&S 22.4.6). */
  double p[8];
  dt_legendre(0.5, 4, p);
  CHECK_CLOSE(p[0], 1.0, 1e-15, "P0(0.5) = 1");
  CHECK_CLOSE(p[1], 0.5, 1e-15, "P1(0.5) = 0.5");
  CHECK_CLOSE(p[2], -0.125, 1e-15, "P2(0.5) = -0.125");
  CHECK_CLOSE(p[3], -0.4375, 1e-15, "P3(0.5) = -0.4375");
  CHECK_CLOSE(p[4], -0.2890625, 1e-15, "P4(0.5) = -0.2890625");
  dt_legendre(1.0, 7, p);
  CHECK_CLOSE(p[7], 1.0, 1e-14, "P7(1) = 1");
  dt_legendre(-1.0, 7, p);
  CHECK_CLOSE(p[7], -1.0, 1e-14, "P7(-1) = -1");
  /* Beyond [-1, 1] (an extrapolated continuum): P2(2) = 5.5, P3(2) = 17,
   * P3(-1.5) = (5(-3.375) + 4.5)/2 = -6.1875 from the same forms. */
  dt_legendre(2.0, 3, p);
  CHECK_CLOSE(p[2], 5.5, 1e-14, "P2(2) = 5.5");
  CHECK_CLOSE(p[3], 17.0, 1e-14, "P3(2) = 17");
  dt_legendre(-1.5, 3, p);
  CHECK_CLOSE(p[3], -6.1875, 1e-14, "P3(-1.5) = -6.1875");
  /* the mapping of a wavelength range and a series */
  CHECK_CLOSE(dt_legendre_x(5890.0, 5880.0, 5900.0), 0.0, 1e-15, "middle of the range -> 0");
  CHECK_CLOSE(dt_legendre_x(5900.0, 5880.0, 5900.0), 1.0, 1e-15, "upper end -> 1");
  CHECK_CLOSE(dt_legendre_x(5880.0, 5880.0, 5880.0), 0.0, 0.0, "empty range -> 0");
  double c[3] = {1.0, 0.5, 0.25};
  CHECK_CLOSE(dt_legendre_sum(c, 3, 0.5), 1.0 + 0.25 - 0.25 * 0.125, 1e-15,
              "1 + P1/2 + P2/4 at 0.5");
  CHECK_CLOSE(dt_legendre_sum(c, 0, 0.5), 1.0, 0.0, "no coefficients: 1");
}

/* A straight line (order 1) by weighted least squares against the closed
 * form of the normal equations (Bevington & Robinson 2003, Data Reduction
 * and Error Analysis, ch. 6, from memory): with S = sum w, Sx = sum w x,
 * Sxx = sum w x^2, Sy = sum w y, Sxy = sum w x y and D = S Sxx - Sx^2,
 *   a = (Sxx Sy - Sx Sxy) / D,  b = (S Sxy - Sx Sy) / D,
 *   var a = Sxx / D,  var b = S / D,  cov(a, b) = -Sx / D,
 * in the Legendre variable x in [-1, 1] (P0 = 1, P1 = x), so the
 * continuum a + b x has the variance var a + 2 x cov + x^2 var b.  Two
 * windows, unequal errors, no clipping (user windows). */
static void test_line_closed_form(void) {
  gsl_rng *rng = gsl_rng_alloc(gsl_rng_mt19937);
  gsl_rng_set(rng, 77);
  spec p;
  make(&p, rng, 40.0);
  for (size_t i = 0; i < NPIX; i++) p.sigma[i] *= 1.0 + 0.5 * (double)(i % 7) / 6.0;
  dt_window win[2] = {{5862.0, 5875.0}, {5905.0, 5911.0}};
  dt_cont_opts o;
  dt_cont_opts_init(&o);
  o.order = 1;
  o.nwin = 2;
  o.win = win;
  dt_cont_work *w = dt_cont_alloc(NPIX, NULL);
  double cont[NPIX], cerr[NPIX];
  dt_cont_result r;
  int st = dt_cont_fit(w, &p.s, 0, NPIX, &o, cont, cerr, NULL, &r, NULL);
  double S = 0, Sx = 0, Sxx = 0, Sy = 0, Sxy = 0;
  size_t m = 0;
  for (size_t i = 0; i < NPIX; i++) {
    if (!((p.wave[i] >= 5862.0 && p.wave[i] <= 5875.0) ||
          (p.wave[i] >= 5905.0 && p.wave[i] <= 5911.0)))
      continue;
    double x = dt_legendre_x(p.wave[i], p.wave[0], p.wave[NPIX - 1]);
    double wt = 1.0 / (p.sigma[i] * p.sigma[i]), y = p.flux[i];
    S += wt; Sx += wt * x; Sxx += wt * x * x; Sy += wt * y; Sxy += wt * x * y;
    m++;
  }
  double D = S * Sxx - Sx * Sx;
  double a = (Sxx * Sy - Sx * Sxy) / D, b = (S * Sxy - Sx * Sy) / D;
  double va = Sxx / D, vb = S / D, cab = -Sx / D;
  double worst = 0, worst_err = 0, chi2 = 0;
  for (size_t i = 0; i < NPIX; i++) {
    double x = dt_legendre_x(p.wave[i], p.wave[0], p.wave[NPIX - 1]);
    double c = a + b * x, e = sqrt(va + 2.0 * x * cab + x * x * vb);
    worst = fmax(worst, fabs(cont[i] - c) / fabs(c));
    worst_err = fmax(worst_err, fabs(cerr[i] - e) / e);
  }
  for (size_t i = 0; i < NPIX; i++) {
    if (!((p.wave[i] >= 5862.0 && p.wave[i] <= 5875.0) ||
          (p.wave[i] >= 5905.0 && p.wave[i] <= 5911.0)))
      continue;
    double x = dt_legendre_x(p.wave[i], p.wave[0], p.wave[NPIX - 1]);
    double d = (p.flux[i] - a - b * x) / p.sigma[i];
    chi2 += d * d;
  }
  CHECK(st == DT_OK && r.nused == m, "order 1 in two windows: %zu pixels used of %zu", r.nused, m);
  CHECK(worst < 1e-12, "the line is the closed form's (max rel. diff %.2g)", worst);
  CHECK(worst_err < 1e-10, "its error is the closed form's (max rel. diff %.2g)", worst_err);
  CHECK_CLOSE(r.chi2, chi2, 1e-9 * chi2, "its chi2 is the closed form's");
  dt_cont_free(w);
  gsl_rng_free(rng);
}

/* Many noisy realisations: the continuum at a few pixels must scatter about
 * the truth as its error bar says: pulls with mean ~0, standard deviation
 * ~1 and 68.27% within 1 sigma (Gaussian statistics). */
static void test_recovery(void) {
  gsl_rng *rng = gsl_rng_alloc(gsl_rng_mt19937);
  gsl_rng_set(rng, 20240611);
  dt_cont_work *w = dt_cont_alloc(NPIX, NULL);
  dt_cont_opts o;
  dt_cont_opts_init(&o);
  o.order = 2;
  o.max_iter = 1; /* no clipping: plain least squares */
  static spec p;
  double cont[NPIX], cerr[NPIX];
  const int ntrial = 2000;
  const size_t probe[3] = {5, 200, 390};
  double sum[3] = {0}, sum2[3] = {0};
  int inside[3] = {0}, fails = 0;
  for (int t = 0; t < ntrial; t++) {
    make(&p, rng, 20.0);
    dt_cont_result r;
    if (dt_cont_fit(w, &p.s, 0, NPIX, &o, cont, cerr, NULL, &r, NULL) != DT_OK) {
      fails++;
      continue;
    }
    for (int k = 0; k < 3; k++) {
      size_t i = probe[k];
      double pull = (cont[i] - p.truth[i]) / cerr[i];
      sum[k] += pull;
      sum2[k] += pull * pull;
      inside[k] += fabs(pull) < 1.0;
    }
  }
  CHECK(fails == 0, "all %d noisy continuum fits succeed", ntrial);
  for (int k = 0; k < 3; k++) {
    double mean = sum[k] / ntrial, sd = sqrt(sum2[k] / ntrial - mean * mean);
    double cov = (double)inside[k] / ntrial;
    CHECK(fabs(mean) < 0.08, "pixel %zu: mean pull %.3f within 0.08 of 0", probe[k], mean);
    CHECK(sd > 0.9 && sd < 1.1, "pixel %zu: pull s.d. %.3f within 0.9-1.1", probe[k], sd);
    /* 68.27% +- 3.4 binomial sigma for 2000 trials (sigma = 1.04%) */
    CHECK(fabs(cov - 0.6827) < 0.035, "pixel %zu: 1-sigma coverage %.3f ~ 0.683", probe[k],
          cov);
  }
  /* noiseless: exact recovery of the quadratic, chi2 = 0 */
  make(&p, NULL, 20.0);
  dt_cont_result r;
  int st = dt_cont_fit(w, &p.s, 0, NPIX, &o, cont, cerr, NULL, &r, NULL);
  double worst = 0;
  for (size_t i = 0; i < NPIX; i++) {
    double d = fabs(cont[i] / p.truth[i] - 1.0);
    if (d > worst) worst = d;
  }
  CHECK(st == DT_OK && worst < 1e-10, "noiseless quadratic recovered (max rel. diff %.2g)",
        worst);
  CHECK(r.ncoef == 3 && r.order == 2 && !r.lowered, "order 2 -> 3 coefficients");
  double c, ce;
  CHECK(dt_cont_eval(w, p.wave[123], &c, &ce) == DT_OK && fabs(c - cont[123]) < 1e-12 * c,
        "dt_cont_eval agrees with the fitted array");
  dt_cont_free(w);
  gsl_rng_free(rng);
}

/* User windows: only pixels in windows are used, the line between them is
 * ignored, and too few pixels give a clear error or a lowered order. */
static void test_windows(void) {
  gsl_rng *rng = gsl_rng_alloc(gsl_rng_mt19937);
  gsl_rng_set(rng, 7);
  static spec p;
  make(&p, rng, 50.0);
  absorb(&p, 5891.0, 0.8, 0.5);
  dt_window win[2] = {{5862.0, 5880.0}, {5900.0, 5918.0}};
  dt_cont_opts o;
  dt_cont_opts_init(&o);
  o.nwin = 2;
  o.win = win;
  o.order = 2;
  dt_cont_work *w = dt_cont_alloc(0, NULL); /* grows on demand */
  double cont[NPIX], cerr[NPIX];
  unsigned char used[NPIX];
  dt_cont_result r;
  dt_err e;
  int st = dt_cont_fit(w, &p.s, 0, NPIX, &o, cont, cerr, used, &r, &e);
  CHECK(st == DT_OK, "fit with two windows");
  int outside_used = 0;
  size_t nin = 0;
  for (size_t i = 0; i < NPIX; i++) {
    int in = (p.wave[i] >= 5862.0 && p.wave[i] <= 5880.0) ||
             (p.wave[i] >= 5900.0 && p.wave[i] <= 5918.0);
    nin += in;
    if (used[i] && !in) outside_used++;
  }
  CHECK(outside_used == 0 && r.nused == nin, "exactly the window pixels are used (%zu)",
        r.nused);
  size_t il = 207; /* 5891.05 A, the line centre */
  CHECK(fabs(cont[il] - p.truth[il]) < 3.0 * cerr[il],
        "continuum under the line within 3 sigma of the truth");

  /* one pixel and order 2 */
  dt_window one = {5890.0, 5890.1};
  o.nwin = 1;
  o.win = &one;
  st = dt_cont_fit(w, &p.s, 0, NPIX, &o, cont, cerr, used, &r, &e);
  CHECK(st == DT_EINVAL && strstr(e.what, "1 usable continuum pixel") &&
            strstr(e.what, "order 2"),
        "single-pixel window, order 2: clear error (%s)", e.what);
  o.allow_lower = 1;
  st = dt_cont_fit(w, &p.s, 0, NPIX, &o, cont, cerr, used, &r, &e);
  CHECK(st == DT_OK && r.lowered && r.order == 0 && r.nused == 1,
        "allow_lower: order lowered to 0 and flagged");
  CHECK_CLOSE(cont[10], p.flux[200], 1e-12 * p.flux[200],
              "order 0 through one pixel is that pixel's flux");

  /* masked windows */
  o.allow_lower = 0;
  o.nwin = 2;
  o.win = win;
  for (size_t i = 0; i < NPIX; i++) p.mask[i] = 1;
  st = dt_cont_fit(w, &p.s, 0, NPIX, &o, cont, cerr, used, &r, &e);
  CHECK(st == DT_EMASKED, "all pixels masked -> DT_EMASKED (%s)", e.what);
  for (size_t i = 0; i < NPIX; i++) p.mask[i] = 0;

  /* bad options */
  dt_window empty = {5900.0, 5890.0};
  o.nwin = 1;
  o.win = &empty;
  CHECK(dt_cont_fit(w, &p.s, 0, NPIX, &o, cont, cerr, used, &r, &e) == DT_EINVAL,
        "empty window rejected (%s)", e.what);
  o.nwin = 0;
  o.order = DT_CONT_MAX_ORDER + 1;
  CHECK(dt_cont_fit(w, &p.s, 0, NPIX, &o, cont, cerr, used, &r, &e) == DT_EINVAL,
        "order beyond the maximum rejected (%s)", e.what);
  o.order = 2;
  CHECK(dt_cont_fit(w, &p.s, 10, 10, &o, cont, cerr, used, &r, &e) == DT_EINVAL,
        "empty region rejected");
  dt_cont_free(w);
  gsl_rng_free(rng);
}

/* Automatic continuum: a strong line away from the doublet bands is removed
 * by sigma-clipping; the doublet's own band is never used. */
static void test_clipping(void) {
  gsl_rng *rng = gsl_rng_alloc(gsl_rng_mt19937);
  gsl_rng_set(rng, 99);
  static spec p;
  make(&p, rng, 40.0);
  dt_doublet d = nai();
  absorb(&p, 5891.58, 0.7, 0.3);  /* Na I 5891 at rest: inside its band */
  absorb(&p, 5875.0, 0.6, 0.4);   /* an unrelated line outside the bands */
  dt_cont_opts o;
  dt_cont_opts_init(&o);
  o.doublet = &d;
  o.order = 3;
  dt_cont_work *w = dt_cont_alloc(NPIX, NULL);
  double cont[NPIX], cerr[NPIX];
  unsigned char used[NPIX];
  dt_cont_result r;
  dt_err e;
  int st = dt_cont_fit(w, &p.s, 0, NPIX, &o, cont, cerr, used, &r, &e);
  CHECK(st == DT_OK && r.niter > 1, "clipped fit converges in %d rounds", r.niter);
  int band_used = 0, core_used = 0;
  for (size_t i = 0; i < NPIX; i++) {
    double v1 = dt_velocity(p.wave[i], d.line[0].lambda0, 0.0);
    double v2 = dt_velocity(p.wave[i], d.line[1].lambda0, 0.0);
    if (used[i] && ((v1 >= -150 && v1 <= 150) || (v2 >= -150 && v2 <= 150))) band_used++;
    if (used[i] && fabs(p.wave[i] - 5875.0) < 0.6) core_used++;
  }
  CHECK(band_used == 0, "no pixel of the doublet bands is used");
  CHECK(core_used == 0, "the unrelated line's core is clipped");
  double worst = 0;
  for (size_t i = 0; i < NPIX; i++) {
    double pull = fabs(cont[i] - p.truth[i]) / cerr[i];
    if (pull > worst) worst = pull;
  }
  CHECK(worst < 4.0, "clipped continuum within 4 sigma of the truth everywhere (%.2f)",
        worst);
  /* the same without clipping is pulled down by the line */
  o.max_iter = 1;
  st = dt_cont_fit(w, &p.s, 0, NPIX, &o, cont, cerr, used, &r, &e);
  size_t il = 100; /* 5875 A */
  CHECK(st == DT_OK && (p.truth[il] - cont[il]) / cerr[il] > 3.0,
        "without clipping the line biases the continuum (%.1f sigma)",
        (p.truth[il] - cont[il]) / cerr[il]);
  dt_cont_free(w);
  gsl_rng_free(rng);
}

/* Smoothing spline: a wiggly continuum no low-order polynomial follows. */
static void test_spline(void) {
  gsl_rng *rng = gsl_rng_alloc(gsl_rng_mt19937);
  gsl_rng_set(rng, 3);
  static spec p;
  make(&p, rng, 100.0);
  for (size_t i = 0; i < NPIX; i++) {
    p.truth[i] *= 1.0 + 0.05 * sin((p.wave[i] - 5860.0) / 8.0);
    p.sigma[i] = p.truth[i] / 100.0;
    p.flux[i] = p.truth[i] + gsl_ran_gaussian(rng, p.sigma[i]);
  }
  dt_cont_opts o;
  dt_cont_opts_init(&o);
  o.kind = DT_CONT_SPLINE;
  o.spline_kms = 300.0;
  o.max_iter = 1;
  dt_cont_work *w = dt_cont_alloc(NPIX, NULL);
  double cont[NPIX], cerr[NPIX];
  dt_cont_result r;
  dt_err e;
  int st = dt_cont_fit(w, &p.s, 0, NPIX, &o, cont, cerr, NULL, &r, &e);
  double chi = 0;
  int within = 0;
  for (size_t i = 0; i < NPIX; i++) {
    double d = (p.flux[i] - cont[i]) / p.sigma[i];
    chi += d * d;
    within += fabs(cont[i] - p.truth[i]) < 3.0 * cerr[i];
  }
  CHECK(st == DT_OK && r.kind == DT_CONT_SPLINE && r.ncoef > 8, "spline with %zu coefficients",
        r.ncoef);
  CHECK(chi / (NPIX - r.ncoef) < 1.3, "spline follows the wiggles (chi2_red %.2f)",
        chi / (NPIX - r.ncoef));
  CHECK(within > 0.97 * NPIX, "spline within 3 sigma of the truth on %d of %d pixels", within,
        NPIX);
  o.kind = DT_CONT_LEGENDRE;
  o.order = 2;
  st = dt_cont_fit(w, &p.s, 0, NPIX, &o, cont, cerr, NULL, &r, &e);
  CHECK(st == DT_OK && r.chi2_red > 3.0, "a quadratic cannot (chi2_red %.1f)", r.chi2_red);
  dt_cont_free(w);
  gsl_rng_free(rng);
}

int main(void) {
  test_legendre();
  test_recovery();
  test_line_closed_form();
  test_windows();
  test_clipping();
  test_spline();
  return dt_test_done();
}
