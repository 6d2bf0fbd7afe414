/* Measurements: the constants of the formulas, equivalent widths of known
 * profiles and their errors, apparent optical depth columns of model
 * spectra (thin: recovered; saturated: underestimated and flagged), 3-sigma
 * upper limits on pure noise, and bad input. */
#include <math.h>
#include <stdlib.h>
#include <string.h>

#include <gsl/gsl_randist.h>
#include <gsl/gsl_rng.h>

#include "doubletty/continuum.h"
#include "doubletty/measure.h"
#include "doubletty/model.h"
#include "fixtures.h"
#include "harness.h"

#ifndef M_PI
#define M_PI 3.14159265358979323846
#endif


#define NMAX 12000
static double wave[NMAX], flux[NMAX], sigma[NMAX], cont[NMAX], cerr[NMAX], model[NMAX];
static double prof[NMAX], prof_err[NMAX];
static unsigned char mask[NMAX];

static dt_measure_input input(size_t n, double vsys) {
  dt_measure_input in;
  memset(&in, 0, sizeof in);
  in.n = n;
  in.wave = wave;
  in.flux = flux;
  in.sigma = sigma;
  in.mask = mask;
  in.cont = cont;
  in.cont_err = cerr;
  in.vsys = vsys;
  return in;
}

static size_t grid(double lo, double hi, double step) {
  size_t n = (size_t)((hi - lo) / step) + 1;
  for (size_t i = 0; i < n; i++) {
    wave[i] = lo + step * (double)i;
    flux[i] = cont[i] = 1.0;
    sigma[i] = 0.01;
    cerr[i] = 0.0;
    mask[i] = 0;
  }
  return n;
}

static void test_constants(void) {
  /* 3.768e14 cm^-2 (km/s)^-1 A: Savage & Sembach (1991, ApJ 379, 245) */
  CHECK_REL(dt_aod_const(), 3.768e14, 1e-4, "AOD constant = 3.768e14");
  /* 1.13e20 cm^-2 A^-1: linear curve of growth, Spitzer (1978) eq. 3-48 */
  CHECK_REL(dt_cog_const(), 1.13e20, 5e-4, "curve-of-growth constant = 1.13e20");
  dt_doublet d = nai();
  CHECK_REL(dt_cog_linear_N(0.1, &d.line[0]), 1.13e20 * 0.1 / (0.6408 * 5891.5833 * 5891.5833),
            5e-4, "N = 1.13e20 W / (f lambda^2) for W = 100 mA");
}

/* A Gaussian dip of depth A and width s [A]: W = A s sqrt(2 pi) (the
 * Gaussian integral); its flux-noise error for constant sigma on a window of
 * whole pixels is sigma dlambda sqrt(Npix); a constant continuum error eps
 * adds eps * (window width) linearly. */
static void test_equivalent_width(void) {
  dt_doublet d = nai();
  const dt_line *l = &d.line[0];
  const double step = 0.02, A = 0.4, s = 0.3;
  size_t n = grid(5880.0, 5900.0, step);
  for (size_t i = 0; i < n; i++) {
    double x = (wave[i] - l->lambda0) / s;
    flux[i] = 1.0 - A * exp(-0.5 * x * x);
  }
  dt_measure_input in = input(n, 0.0);
  dt_line_measure m;
  dt_err e;
  int st = dt_measure_line(&in, l, -400.0, 400.0, NULL, &m, NULL, NULL, &e);
  CHECK(st == DT_OK, "measure a Gaussian dip");
  CHECK_REL(m.W, A * s * sqrt(2.0 * M_PI), 1e-6, "W = A s sqrt(2 pi)");
  CHECK_CLOSE(m.coverage, 1.0, 1e-12, "window fully covered");

  /* window of exactly 500 whole pixels: edges at pixel boundaries */
  double e_lo = wave[250] - 0.5 * step, e_hi = wave[749] + 0.5 * step;
  double v1 = dt_velocity(e_lo, l->lambda0, 0.0), v2 = dt_velocity(e_hi, l->lambda0, 0.0);
  for (size_t i = 0; i < n; i++) cerr[i] = 0.002;
  st = dt_measure_line(&in, l, v1, v2, NULL, &m, NULL, NULL, &e);
  CHECK(st == DT_OK && m.npix == 500, "500 pixels in the window (%zu)", m.npix);
  CHECK_REL(m.W_err_flux, 0.01 * step * sqrt(500.0), 1e-6, "sigma_W = sigma dl sqrt(N)");
  /* continuum term: sum of F/C^2 sigma_C dl = eps * (sum of F dl) */
  double sumF = 0;
  for (size_t i = 250; i < 750; i++) sumF += flux[i] * step;
  CHECK_REL(m.W_err_cont, 0.002 * sumF, 1e-6, "continuum error summed linearly");
  CHECK_REL(m.W_err, hypot(m.W_err_flux, m.W_err_cont), 1e-12, "total in quadrature");
  CHECK_REL(m.signif, m.W / m.W_err, 1e-12, "significance W / sigma_W");
  for (size_t i = 0; i < n; i++) cerr[i] = 0.0;

  /* the same dip seen at vsys = 3000 km/s: rest-frame W = observed / (1+z) */
  double zf = 1.0 + 3000.0 / DT_C_KMS;
  for (size_t i = 0; i < n; i++) {
    wave[i] = 5880.0 * zf + step * (double)i;
    double x = (wave[i] - l->lambda0 * zf) / s;
    flux[i] = 1.0 - A * exp(-0.5 * x * x);
  }
  in = input(n, 3000.0);
  st = dt_measure_line(&in, l, -400.0, 400.0, NULL, &m, NULL, NULL, &e);
  CHECK(st == DT_OK, "measure at vsys 3000 km/s");
  CHECK_REL(m.W, A * s * sqrt(2.0 * M_PI) / zf, 1e-6, "rest-frame W = W_obs / (1 + z)");
}

/* Model spectra: pixels of `step` A over both Na I lines, component (logN,
 * b, 0) seen at resolving power R (0 = no LSF). */
static size_t model_spectrum(double logN, double b, double R, double step, double snr,
                             gsl_rng *rng) {
  dt_doublet d = nai();
  size_t n = grid(5885.0, 5904.0, step);
  dt_model_config cfg;
  memset(&cfg, 0, sizeof cfg);
  cfg.doublet = &d;
  cfg.resolution = R;
  cfg.oversample = 5;
  dt_err e;
  dt_model *m = dt_model_alloc(wave, n, &cfg, 1, &e);
  dt_component c = {logN, b, 0.0};
  if (!m || dt_model_eval(m, &c, 1, model, NULL, 0) != DT_OK) {
    CHECK(0, "model evaluation (%s)", e.what);
    dt_model_free(m);
    return 0;
  }
  dt_model_free(m);
  for (size_t i = 0; i < n; i++) {
    sigma[i] = 1.0 / snr;
    flux[i] = model[i] + (rng ? gsl_ran_gaussian(rng, sigma[i]) : 0.0);
  }
  return n;
}

static void test_aod(void) {
  dt_doublet d = nai();
  dt_err e;
  dt_doublet_measure dm;
  double Nt;

  /* Optically thin and resolved (Savage & Sembach 1991: N_a = N when the
   * line is resolved and unsaturated): log N 11.5, b 8 km/s, tau0(5891)
   * ~ 0.22, no LSF.  Both lines within 5%. */
  size_t n = model_spectrum(11.5, 8.0, 0.0, 0.01, 100.0, NULL);
  dt_measure_input in = input(n, 0.0);
  Nt = pow(10.0, 11.5);
  int st = dt_measure_doublet(&in, &d, -60.0, 60.0, NULL, &dm, &e);
  CHECK(st == DT_OK, "measure thin doublet");
  CHECK_REL(dm.line[0].Na, Nt, 0.05, "thin: N_a(5891) = N within 5%% (%.4g)", dm.line[0].Na);
  CHECK_REL(dm.line[1].Na, Nt, 0.05, "thin: N_a(5897) = N within 5%% (%.4g)", dm.line[1].Na);
  CHECK(!dm.saturated, "thin: no saturation flag (excess %.2f sigma)", dm.excess_sigma);
  /* N_a(v) of a pure Doppler profile peaks at N / (b sqrt(pi)) (Spitzer
   * 1978, the definition of b; damping negligible here). */
  dt_line_measure lm;
  st = dt_measure_line(&in, &d.line[0], -60.0, 60.0, NULL, &lm, prof, prof_err, &e);
  double peak = 0;
  for (size_t i = 0; i < n; i++)
    if (isfinite(prof[i]) && prof[i] > peak) peak = prof[i];
  CHECK_REL(peak, Nt / (8.0 * sqrt(M_PI)), 0.02, "N_a(v) peak = N / (b sqrt(pi))");
  size_t outside = 0;
  for (size_t i = 0; i < n; i++)
    if (fabs(dt_velocity(wave[i], d.line[0].lambda0, 0.0)) > 61.0 && !isnan(prof[i]))
      outside++;
  CHECK(outside == 0, "N_a(v) profile is NAN outside the window");

  /* Thin at a survey resolution R = 20000 (b = 15 km/s, log N 12.0). */
  n = model_spectrum(12.0, 15.0, 20000.0, 0.05, 100.0, NULL);
  in = input(n, 0.0);
  Nt = pow(10.0, 12.0);
  st = dt_measure_doublet(&in, &d, -80.0, 80.0, NULL, &dm, &e);
  CHECK(st == DT_OK && fabs(dm.line[0].Na / Nt - 1) < 0.05 &&
            fabs(dm.line[1].Na / Nt - 1) < 0.05,
        "R=20000 thin: both N_a within 5%% (%.4g, %.4g)", dm.line[0].Na, dm.line[1].Na);

  /* Noisy thin lines (the resolved case above, S/N 50 per 0.01 A pixel):
   * N_a scatters about N as its error says (Gaussian pulls). */
  gsl_rng *rng = gsl_rng_alloc(gsl_rng_mt19937);
  gsl_rng_set(rng, 424242);
  const int ntrial = 400;
  double sp = 0, sp2 = 0, sN = 0;
  Nt = pow(10.0, 11.5);
  for (int t = 0; t < ntrial; t++) {
    n = model_spectrum(11.5, 8.0, 0.0, 0.01, 50.0, rng);
    in = input(n, 0.0);
    st = dt_measure_line(&in, &d.line[0], -60.0, 60.0, NULL, &lm, NULL, NULL, &e);
    double pull = (lm.Na - Nt) / lm.Na_err;
    sp += pull;
    sp2 += pull * pull;
    sN += lm.Na;
  }
  double mp = sp / ntrial, sdp = sqrt(sp2 / ntrial - mp * mp);
  CHECK_REL(sN / ntrial, Nt, 0.05, "noisy thin: mean N_a within 5%% of N");
  /* Mean of 400 pulls: standard error 0.05.  ln(C/F) of noisy flux is biased
   * high by ~sigma^2/(2F^2) per pixel (second-order Taylor term; common
   * practice), here ~0.0002 x 235 pixels x 0.51 km/s against an error of
   * ~0.16 km/s in the integrated tau: an expected mean pull of about +0.15. */
  CHECK(mp > -0.1 && mp < 0.35 && sdp > 0.85 && sdp < 1.15,
        "noisy thin: pulls mean %.3f s.d. %.3f (Gaussian: 0, 1)", mp, sdp);
  gsl_rng_free(rng);

  /* Saturated and unresolved (log N 13.5, b 3 km/s at R = 20000): N_a
   * underestimates N, the weaker line gives more (Savage & Sembach 1991,
   * their Fig. 5 discussion), and the flag fires. */
  n = model_spectrum(13.5, 3.0, 20000.0, 0.05, 100.0, NULL);
  in = input(n, 0.0);
  Nt = pow(10.0, 13.5);
  st = dt_measure_doublet(&in, &d, -60.0, 60.0, NULL, &dm, &e);
  CHECK(st == DT_OK, "measure saturated doublet");
  CHECK(dm.line[0].Na < 0.5 * Nt, "saturated: N_a(5891) = %.3g underestimates N = %.3g",
        dm.line[0].Na, Nt);
  CHECK(dm.line[1].Na > dm.line[0].Na, "saturated: the weaker line gives the larger N_a");
  CHECK(dm.saturated && dm.excess_sigma > 2.0, "saturated: flag fires (%.1f sigma)",
        dm.excess_sigma);

  /* Black cores: zero and negative flux are floored and flagged. */
  n = model_spectrum(15.0, 5.0, 0.0, 0.02, 100.0, NULL);
  for (size_t i = 0; i < n; i++)
    if (model[i] < 1e-3) flux[i] = -0.005;
  in = input(n, 0.0);
  st = dt_measure_doublet(&in, &d, -60.0, 60.0, NULL, &dm, &e);
  CHECK(st == DT_OK && dm.line[0].nfloor > 0 && isfinite(dm.line[0].Na) && dm.saturated,
        "black core: %zu pixels floored, finite N_a, flagged", dm.line[0].nfloor);
}

/* Pure noise: the measured W exceeds its 3-sigma limit in at most 0.5% of
 * trials (Gaussian: 0.135% one-sided).  Continuum fitted from the same
 * noisy data (automatic, Na I bands excluded). */
static void test_limits(void) {
  dt_doublet d = nai();
  gsl_rng *rng = gsl_rng_alloc(gsl_rng_mt19937);
  gsl_rng_set(rng, 8675309);
  dt_cont_work *cw = dt_cont_alloc(0, NULL);
  dt_cont_opts co;
  dt_cont_opts_init(&co);
  co.doublet = &d;
  co.order = 2;
  const int ntrial = 5000;
  int above = 0, fails = 0;
  double s1 = 0, s2 = 0;
  for (int t = 0; t < ntrial; t++) {
    size_t n = grid(5870.0, 5920.0, 0.1);
    for (size_t i = 0; i < n; i++) {
      double c = 3.0e-17 * (1.0 + 0.002 * (wave[i] - 5895.0));
      sigma[i] = c / 20.0;
      flux[i] = c + gsl_ran_gaussian(rng, sigma[i]);
    }
    dt_spectrum s;
    memset(&s, 0, sizeof s);
    s.n = n;
    s.wave = wave;
    s.flux = flux;
    s.sigma = sigma;
    s.mask = mask;
    dt_cont_result cr;
    dt_line_measure m;
    if (dt_cont_fit(cw, &s, 0, n, &co, cont, cerr, NULL, &cr, NULL) != DT_OK ||
        dt_measure_line(&(dt_measure_input){n, wave, flux, sigma, mask, cont, cerr, 0.0},
                        &d.line[0], -50.0, 50.0, NULL, &m, NULL, NULL, NULL) != DT_OK) {
      fails++;
      continue;
    }
    if (m.W > m.W_limit) above++;
    s1 += m.signif;
    s2 += m.signif * m.signif;
  }
  double frac = (double)above / ntrial, mean = s1 / ntrial,
         sd = sqrt(s2 / ntrial - mean * mean);
  CHECK(fails == 0, "%d pure-noise spectra measured", ntrial);
  CHECK(frac <= 0.005, "W above its 3-sigma limit in %.2f%% of trials (<= 0.5%%)",
        100.0 * frac);
  /* the error is not grossly inflated either: W/sigma_W scatters with
   * s.d. a little below 1 (the continuum term is summed conservatively) */
  CHECK(sd > 0.7 && sd <= 1.05, "W/sigma_W s.d. %.3f in 0.7-1.05", sd);
  CHECK(fabs(mean) < 0.1, "W/sigma_W mean %.3f near 0", mean);
  dt_cont_free(cw);
  gsl_rng_free(rng);
}

static void test_bad_input(void) {
  dt_doublet d = nai();
  size_t n = grid(5880.0, 5900.0, 0.1);
  dt_measure_input in = input(n, 0.0);
  dt_line_measure m;
  dt_err e;
  CHECK(dt_measure_line(&in, &d.line[0], 50.0, -50.0, NULL, &m, NULL, NULL, &e) == DT_EINVAL,
        "v1 >= v2 rejected (%s)", e.what);
  CHECK(dt_measure_line(&in, &d.line[0], 5000.0, 6000.0, NULL, &m, NULL, NULL, &e) ==
            DT_ERANGE,
        "window outside the data (%s)", e.what);
  for (size_t i = 0; i < n; i++)
    if (fabs(dt_velocity(wave[i], d.line[0].lambda0, 0.0)) < 60.0) mask[i] = 1;
  CHECK(dt_measure_line(&in, &d.line[0], -50.0, 50.0, NULL, &m, NULL, NULL, &e) == DT_EMASKED,
        "all-masked window (%s)", e.what);
  memset(mask, 0, sizeof mask);
  /* 5900 A is +428 km/s from 5891.58: a window to +600 is partly covered */
  CHECK(dt_measure_line(&in, &d.line[0], 0.0, 600.0, NULL, &m, NULL, NULL, &e) == DT_OK &&
            m.coverage > 0.6 && m.coverage < 0.8,
        "partly covered window: coverage %.3f", m.coverage);
  cont[5] = 0.0;
  CHECK(dt_measure_line(&in, &d.line[0], -2000.0, 2000.0, NULL, &m, NULL, NULL, &e) ==
            DT_EINVAL,
        "non-positive continuum rejected (%s)", e.what);
}

int main(void) {
  test_constants();
  test_equivalent_width();
  test_aod();
  test_limits();
  test_bad_input();
  return dt_test_done();
}
