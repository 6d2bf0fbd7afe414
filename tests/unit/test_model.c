/* The doublet model: the linear curve of growth, the doublet ratio, the
 * accuracy of the fast evaluation (truncated and interpolated wings) against
 * the exact optical depth, the Jacobian against finite differences, the
 * sub-pixel grid as documented, and bad arguments.  Lines narrower than the
 * sub-pixel cells (b = 0.01-5 km/s on 0.5-1 A pixels): the curve of growth
 * against adaptive integration (GSL) of the definition of W, the Jacobian,
 * the place of a line within a cell, and many such lines at once.
 *
 * Run with an argument it prints model values for tests/py/model_scipy.py
 * (called by tests/scripts/model_scipy.sh):
 *   test_model --tau      dt_line_tau on a grid of lines and wavelengths
 *   test_model --pixels   the pixel model for a few configurations */
#include <math.h>
#include <stdlib.h>
#include <string.h>

#include <cerf.h>
#include <gsl/gsl_errno.h>
#include <gsl/gsl_integration.h>

#include "doubletty/atomic.h"
#include "doubletty/fit.h"
#include "doubletty/model.h"
#include "fixtures.h"
#include "harness.h"


static double *grid(double lo, double step, size_t n) {
  double *w = malloc(n * sizeof *w);
  for (size_t i = 0; i < n; i++) w[i] = lo + step * i;
  return w;
}

/* Equivalent width [A] of the absorption in pixels whose centre lies within
 * +-halfwin km/s of lambda_c: sum of (1 - flux) times the pixel width. */
static double eq_width(const double *wave, const double *flux, size_t n, double lc,
                       double halfwin) {
  double w = 0;
  for (size_t i = 1; i + 1 < n; i++) {
    if (fabs(DT_C_KMS * (wave[i] / lc - 1.0)) > halfwin) continue;
    w += (1.0 - flux[i]) * 0.5 * (wave[i + 1] - wave[i - 1]);
  }
  return w;
}

/* W = (pi e^2 / m_e c^2) N f lambda^2 = 8.85e-13 cm N f lambda^2, i.e.
 * W[A] = 8.85e-21 N f lambda[A]^2  (N = 1.13e20 W/(f lambda^2), Spitzer 1978,
 * Physical Processes in the Interstellar Medium, eq. 3-48). */
static double w_linear(double N, double f, double lambda) { return 8.85e-21 * N * f * lambda * lambda; }

static void test_curve_of_growth(void) {
  dt_doublet d = nai();
  const size_t n = 1200;
  double *wave = grid(5880.0, 0.025, n), flux[1200];
  const double R[2] = {0.0, 20000.0};
  for (int r = 0; r < 2; r++) {
    dt_model_config cfg = {.doublet = &d, .resolution = R[r], .oversample = 5};
    dt_err e;
    dt_model *m = dt_model_alloc(wave, n, &cfg, 1, &e);
    CHECK(m != NULL, "model on 0.025 A pixels allocates (R = %g)", R[r]);
    if (!m) continue;
    dt_component c = {10.5, 15.0, 0.0};
    CHECK(dt_model_eval(m, &c, 1, flux, NULL, 0) == DT_OK, "thin Na I component evaluates");
    for (int l = 0; l < 2; l++) {
      double W = eq_width(wave, flux, n, d.line[l].lambda0, 140.0);
      double Wl = w_linear(pow(10.0, 10.5), d.line[l].f, d.line[l].lambda0);
      /* b = 15 km/s keeps tau0 < 0.013, so saturation lowers W by < 0.5% */
      CHECK_REL(W, Wl, 0.01,
                "linear curve of growth, %s, log N 10.5, R = %g: W = %.4g mA (Spitzer 1978: %.4g mA)",
                d.line[l].label, R[r], 1e3 * W, 1e3 * Wl);
    }
    dt_model_free(m);
  }
  free(wave);
}

static void test_doublet_ratio(void) {
  /* Nachman & Hobbs (1973, ApJ 182, 481): W(D2)/W(D1) equals
   * f1 lambda1^2 / (f2 lambda2^2) = 2.00 for thin gas and falls toward 1 as
   * the lines saturate (on the flat part of the curve of growth the ratio
   * is sqrt(ln(tau1/ln2) / ln(tau2/ln2)), about 1.06 at log N = 14 and
   * b = 2 km/s; Spitzer 1978, eq. 3-54). */
  dt_doublet d = nai();
  const size_t n = 2000;
  double *wave = grid(5885.0, 0.009, n), flux[2000];
  dt_model_config cfg = {.doublet = &d, .oversample = 5};
  dt_err e;
  dt_model *m = dt_model_alloc(wave, n, &cfg, 1, &e);
  CHECK(m != NULL, "model on 0.009 A pixels allocates");
  if (!m) return;
  double thin = d.line[0].f * d.line[0].lambda0 * d.line[0].lambda0 /
                (d.line[1].f * d.line[1].lambda0 * d.line[1].lambda0);
  double prev = INFINITY, first = 0, last = 0;
  int mono = 1;
  for (double logN = 9.5; logN <= 14.01; logN += 0.25) {
    dt_component c = {logN, 2.0, 0.0};
    dt_model_eval(m, &c, 1, flux, NULL, 0);
    double r = eq_width(wave, flux, n, d.line[0].lambda0, 140.0) /
               eq_width(wave, flux, n, d.line[1].lambda0, 140.0);
    if (r > prev + 1e-9) mono = 0;
    if (logN < 9.6) first = r;
    last = r;
    prev = r;
  }
  CHECK_REL(first, thin, 0.01, "doublet ratio of thin gas (log N 9.5) is f1 l1^2/(f2 l2^2) = %.3f",
            thin);
  CHECK(mono, "doublet ratio falls monotonically from log N 9.5 to 14 (b = 2 km/s)");
  CHECK(last > 1.0 && last < 1.12, "doublet ratio at log N 14, b = 2 km/s is %.3f (flat part: 1.06)",
        last);
  dt_model_free(m);
  free(wave);
}

/* Cell centres of the sub-pixel grid, as documented in model.h. */
static double cell_lambda(const dt_model_info *in, size_t j) {
  return exp(in->lnlam0 + (j + 0.5) * in->step_kms / DT_C_KMS);
}

static void test_fast_vs_exact(void) {
  dt_doublet d = nai();
  const size_t n = 700;
  double *wave = grid(5860.0, 0.1, n), flux_f[700], flux_x[700];
  const double logNs[] = {10.0, 11.5, 12.5, 13.5, 14.5, 16.0, 18.0};
  const double bs[] = {0.7, 2.0, 6.0, 20.0, 60.0};
  const double cuts[] = {0.0, 1e-7, 1e-3};
  double worst_tau = 0, worst_ref = 0, worst_flux = 0;
  int ok_alloc = 1;
  for (size_t ic = 0; ic < 3; ic++) {
    dt_model_config fast = {.doublet = &d, .resolution = 20000, .oversample = 5, .tau_cut = cuts[ic]};
    dt_model_config exact = fast;
    exact.exact_wings = 1;
    dt_err e;
    dt_model *mf = dt_model_alloc(wave, n, &fast, 2, &e), *mx = dt_model_alloc(wave, n, &exact, 2, &e);
    if (!mf || !mx) {
      ok_alloc = 0;
      dt_model_free(mf);
      dt_model_free(mx);
      continue;
    }
    dt_model_info in;
    dt_model_get_info(mf, &in);
    for (size_t i = 0; i < sizeof logNs / sizeof *logNs; i++)
      for (size_t k = 0; k < sizeof bs / sizeof *bs; k++) {
        dt_component c[2] = {{logNs[i], bs[k], 12.3}, {logNs[i] - 0.7, 0.5 * bs[k] + 1, -150.0}};
        dt_model_eval(mf, c, 2, flux_f, NULL, 0);
        dt_model_eval(mx, c, 2, flux_x, NULL, 0);
        const double *tf = dt_model_fine_tau(mf), *tx = dt_model_fine_tau(mx);
        for (size_t j = 0; j < in.nfine; j++) {
          double lam = cell_lambda(&in, j), ref = 0;
          for (int q = 0; q < 2; q++)
            for (int l = 0; l < 2; l++) ref += dt_line_tau(&d.line[l], &c[q], 0.0, lam);
          /* what the pixels see is exp(-tau): its error from interpolation
           * (against exact w(z) on the same cells) and in total (against
           * the exact, untruncated tau), in units of tau_cut */
          double di = fabs(exp(-tf[j]) - exp(-tx[j])) / in.tau_cut;
          double dr = fabs(exp(-tf[j]) - exp(-ref)) / in.tau_cut;
          if (di > worst_tau) worst_tau = di;
          if (dr > worst_ref) worst_ref = dr;
        }
        for (size_t j = 0; j < n; j++) {
          double df = fabs(flux_f[j] - flux_x[j]) / in.tau_cut;
          if (df > worst_flux) worst_flux = df;
        }
      }
    dt_model_free(mf);
    dt_model_free(mx);
  }
  CHECK(ok_alloc, "fast and exact-wing models allocate");
  /* error budget (model.c): core table 0.1 tau_cut, wing table 0.01 tau_cut */
  CHECK(worst_tau <= 0.11,
        "interpolated exp(-tau) within 0.11 tau_cut of exact w(z) at every cell (worst %.3g)",
        worst_tau);
  /* plus truncation: every line below tau_cut where it is not evaluated;
   * two components x two lines */
  CHECK(worst_ref <= 4 * 1.11,
        "fast exp(-tau) within 4 x 1.11 tau_cut of the exact one (worst %.3g)",
        worst_ref);
  CHECK(worst_flux <= 0.44, "pixel flux of fast and exact-wing models differ by <= 0.44 tau_cut (worst %.3g)",
        worst_flux);
  free(wave);
}

static double urand(unsigned long long *s) {
  *s = *s * 6364136223846793005ULL + 1442695040888963407ULL;
  return (double)(*s >> 11) / 9007199254740992.0;
}

static void test_random(void) {
  /* random components and set-ups (fixed seed): the fast evaluation stays
   * finite, within [0, 1], and within its interpolation budget of the
   * exact-wing evaluation (0.1 tau_cut per line) */
  dt_doublet d = nai();
  unsigned long long seed = 7;
  int finite = 1, inrange = 1, within = 1;
  double worst = 0;
  for (int t = 0; t < 60; t++) {
    size_t n = 50 + (size_t)(400 * urand(&seed));
    double step = 0.02 + 0.5 * urand(&seed), *wave = malloc(n * sizeof *wave);
    double *ff = malloc(n * sizeof *ff), *fx = malloc(n * sizeof *fx);
    wave[0] = 5894.5 - 0.5 * n * step;
    for (size_t i = 1; i < n; i++) wave[i] = wave[i - 1] + step * (0.5 + urand(&seed));
    dt_model_config cf = {.doublet = &d, .resolution = urand(&seed) < 0.3 ? 0 : 1000 + 40000 * urand(&seed),
                          .oversample = 1 + (int)(8 * urand(&seed)),
                          .tau_cut = pow(10, -3 - 9 * urand(&seed))};
    dt_model_config cx = cf;
    cx.exact_wings = 1;
    dt_err e;
    dt_model *mf = dt_model_alloc(wave, n, &cf, 4, &e), *mx = dt_model_alloc(wave, n, &cx, 4, &e);
    if (mf && mx)
      for (int r = 0; r < 5; r++) {
        dt_component c[4];
        size_t nc = 1 + (size_t)(4 * urand(&seed));
        for (size_t k = 0; k < nc; k++) {
          c[k].logN = 9 + 13 * urand(&seed);
          c[k].b = pow(10, -0.5 + 3 * urand(&seed));
          c[k].v = -800 + 1600 * urand(&seed);
        }
        dt_model_eval(mf, c, nc, ff, NULL, 0);
        dt_model_eval(mx, c, nc, fx, NULL, 0);
        for (size_t i = 0; i < n; i++) {
          finite = finite && isfinite(ff[i]);
          inrange = inrange && ff[i] >= -1e-12 && ff[i] <= 1 + 1e-12;
          double dd = fabs(ff[i] - fx[i]) / (0.1 * cf.tau_cut * 2 * nc);
          if (dd > worst) worst = dd;
          within = within && dd <= 1.0;
        }
      }
    else
      finite = 0;
    dt_model_free(mf);
    dt_model_free(mx);
    free(wave);
    free(ff);
    free(fx);
  }
  CHECK(finite, "random set-ups: every flux is finite");
  CHECK(inrange, "random set-ups: every flux lies in [0, 1]");
  CHECK(within, "random set-ups: fast within 0.1 tau_cut per line of exact wings (worst %.2f of that)", worst);
}

/* Central finite differences of the pixel model against the analytic
 * Jacobian, column by column, relative to the column's largest entry. */
static double jac_error(dt_model *m, const dt_component *c0, size_t nc, size_t n) {
  double *f = malloc(n * sizeof *f), *fp = malloc(n * sizeof *fp), *fm = malloc(n * sizeof *fm);
  double *jac = malloc(n * 3 * nc * sizeof *jac);
  dt_component c[DT_MAX_COMP];
  memcpy(c, c0, nc * sizeof *c);
  double worst = 0;
  if (dt_model_eval(m, c, nc, f, jac, 3 * nc) != DT_OK) worst = INFINITY;
  for (size_t k = 0; k < nc && isfinite(worst); k++)
    for (int p = 0; p < 3; p++) {
      double *par = p == 0 ? &c[k].logN : p == 1 ? &c[k].b : &c[k].v;
      double save = *par, h = p == 0 ? 1e-5 : p == 1 ? 1e-5 * save : 1e-4;
      *par = save + h;
      dt_model_eval(m, c, nc, fp, NULL, 0);
      *par = save - h;
      dt_model_eval(m, c, nc, fm, NULL, 0);
      *par = save;
      double big = 0, err = 0;
      for (size_t i = 0; i < n; i++) {
        double fd = (fp[i] - fm[i]) / (2 * h);
        if (fabs(fd) > big) big = fabs(fd);
        if (fabs(fd - jac[i * 3 * nc + 3 * k + p]) > err) err = fabs(fd - jac[i * 3 * nc + 3 * k + p]);
      }
      if (big > 0 && err / big > worst) worst = err / big;
    }
  free(f);
  free(fp);
  free(fm);
  free(jac);
  return worst;
}

static void test_jacobian(void) {
  dt_doublet d = nai();
  /* non-uniform pixels: 0.08 A growing to 0.12 A */
  const size_t n = 600;
  double *wave = malloc(n * sizeof *wave);
  wave[0] = 5870.0;
  for (size_t i = 1; i < n; i++) wave[i] = wave[i - 1] + 0.08 + 0.04 * i / n;
  struct {
    const char *what;
    dt_component c[3];
    size_t nc;
  } cases[] = {
      {"thin", {{11.0, 5.0, 10.0}}, 1},
      {"saturated", {{13.6, 3.0, -20.0}}, 1},
      {"damped", {{16.5, 20.0, 0.0}}, 1},
      {"blend of three", {{12.2, 4.0, -10.0}, {12.5, 8.0, 3.0}, {11.8, 15.0, 30.0}}, 3},
  };
  const double R[2] = {0.0, 15000.0};
  for (int r = 0; r < 2; r++)
    for (int exact = 0; exact < 2; exact++) {
      dt_model_config cfg = {.doublet = &d, .resolution = R[r], .oversample = 4, .tau_cut = 1e-14,
                             .exact_wings = exact};
      dt_err e;
      dt_model *m = dt_model_alloc(wave, n, &cfg, 3, &e);
      if (!m) {
        CHECK(0, "model allocates: %s", e.what);
        continue;
      }
      for (size_t t = 0; t < sizeof cases / sizeof *cases; t++) {
        double err = jac_error(m, cases[t].c, cases[t].nc, n);
        CHECK(err < 1e-5, "Jacobian of %s gas matches central differences (R = %g, %s wings): %.2g",
              cases[t].what, R[r], exact ? "exact" : "interpolated", err);
      }
      dt_model_free(m);
    }
  /* at the default truncation the fitter's Jacobian is still good to 1e-3 */
  dt_model_config cfg = {.doublet = &d, .resolution = 20000, .oversample = 5};
  dt_err e;
  dt_model *m = dt_model_alloc(wave, n, &cfg, 3, &e);
  if (m) {
    double err = jac_error(m, cases[3].c, 3, n);
    CHECK(err < 1e-3, "Jacobian at the default tau cut matches central differences to %.2g", err);
    dt_model_free(m);
  }
  free(wave);
}

static void test_cache(void) {
  /* a Jacobian at the point of the previous evaluation reuses its work; it
   * must equal one computed from scratch */
  dt_doublet d = nai();
  const size_t n = 300;
  double *wave = grid(5880.0, 0.1, n);
  dt_model_config cfg = {.doublet = &d, .resolution = 20000};
  dt_err e;
  dt_model *a = dt_model_alloc(wave, n, &cfg, 2, &e), *b = dt_model_alloc(wave, n, &cfg, 2, &e);
  double fa[300], fb[300], ja[1800], jb[1800];
  dt_component c[2] = {{12.3, 5.0, 0.0}, {12.0, 9.0, 40.0}}, other = {13.0, 2.0, 100.0};
  dt_model_eval(a, &other, 1, fa, NULL, 0);
  dt_model_eval(a, c, 2, fa, NULL, 0);
  dt_model_eval(a, c, 2, fa, ja, 6);
  dt_model_eval(b, c, 2, fb, jb, 6);
  CHECK(memcmp(fa, fb, sizeof fa) == 0 && memcmp(ja, jb, sizeof ja) == 0,
        "Jacobian after a flux-only call at the same point equals a fresh one");
  dt_model_eval(a, c, 1, fa, ja, 6);
  dt_model_eval(b, &other, 1, fb, NULL, 0);
  dt_model_eval(b, c, 1, fb, jb, 6);
  int same = memcmp(fa, fb, sizeof fa) == 0;
  for (size_t i = 0; i < n; i++)
    for (int p = 0; p < 3; p++) same = same && ja[i * 6 + p] == jb[i * 6 + p];
  CHECK(same, "a change of the number of components is not mistaken for the same point");
  dt_model_free(a);
  dt_model_free(b);
  free(wave);
}

/* ---- lines narrower than the sub-pixel cells ---- */

/* Reference absorption, computed apart from the model: tau of each line of
 * each component from its definition (model.h) with
 *   pi e^2 / (m_e c) = pi r_e c = 0.026540081 cm^2 s^-1
 *   (r_e = 2.8179403262e-13 cm, c = 2.99792458e10 cm/s; CODATA 2018)
 * and H(a, x) = sqrt(pi) V(x; 1/sqrt 2, a) from libcerf's Voigt profile
 * V(x; s, g) = Re w((x + ig)/(s sqrt 2)) / (s sqrt(2 pi)). */
typedef struct ref_abs {
  const dt_doublet *d;
  const dt_component *c;
  size_t nc;
} ref_abs;

static double ref_tau(const dt_line *l, const dt_component *c, double lam) {
  const double pi = 3.14159265358979323846;
  double dnu = c->b * 1e5 / (l->lambda0 * 1e-8); /* Doppler width [Hz] */
  double t0 = pow(10.0, c->logN) * 0.026540081 * l->f / (sqrt(pi) * dnu);
  double a = l->gamma / (4.0 * pi * dnu);
  double lc = l->lambda0 * (1.0 + c->v / DT_C_KMS);
  double x = DT_C_KMS / c->b * (lc / lam - 1.0);
  return t0 * sqrt(pi) * voigt(x, 1.0 / sqrt(2.0), a);
}

static double ref_depth(double lam, void *p) {
  const ref_abs *r = p;
  double t = 0;
  for (size_t k = 0; k < r->nc; k++)
    for (int l = 0; l < 2; l++) t += ref_tau(&r->d->line[l], &r->c[k], lam);
  return -expm1(-t);
}

/* Equivalent width [A] of the reference absorption over [lo, hi]: the
 * integral of 1 - exp(-tau) by GSL's adaptive quadrature with breakpoints at
 * each line centre and 1/4 .. 4096 Doppler widths either side. */
static double ref_width(const ref_abs *r, double lo, double hi, gsl_integration_workspace *ws) {
  static const double off[] = {0.25, 1, 2, 4, 8, 16, 64, 256, 1024, 4096};
  double pts[2 * DT_MAX_COMP * 2 * 21 + 2];
  size_t np = 0;
  pts[np++] = lo;
  for (size_t k = 0; k < r->nc; k++)
    for (int l = 0; l < 2; l++) {
      double lc = r->d->line[l].lambda0 * (1.0 + r->c[k].v / DT_C_KMS), db = lc * r->c[k].b / DT_C_KMS;
      for (int s = -10; s <= 10; s++) {
        double p = lc + (s < 0 ? -off[-s - 1] : s > 0 ? off[s - 1] : 0.0) * db;
        if (p > lo && p < hi) pts[np++] = p;
      }
    }
  pts[np++] = hi;
  for (size_t i = 1; i < np; i++) /* sort */
    for (size_t j = i; j > 0 && pts[j] < pts[j - 1]; j--) {
      double t = pts[j];
      pts[j] = pts[j - 1];
      pts[j - 1] = t;
    }
  size_t k = 1; /* drop repeats */
  for (size_t i = 1; i < np; i++)
    if (pts[i] > pts[k - 1]) pts[k++] = pts[i];
  gsl_function F = {ref_depth, (void *)r};
  double w = 0, err = 0;
  gsl_integration_qagp(&F, pts, k, 1e-13, 1e-10, 20000, ws, &w, &err);
  return w;
}

/* Pixel edges as model.h defines them, and the model's equivalent width
 * [A]: sum over pixels of (1 - flux) times the pixel width. */
static void pixel_edges(const double *wave, size_t n, double *edge) {
  edge[0] = wave[0] - 0.5 * (wave[1] - wave[0]);
  for (size_t i = 1; i < n; i++) edge[i] = 0.5 * (wave[i - 1] + wave[i]);
  edge[n] = wave[n - 1] + 0.5 * (wave[n - 1] - wave[n - 2]);
}

static double model_width(const double *edge, const double *flux, size_t n) {
  double w = 0;
  for (size_t i = 0; i < n; i++) w += (1.0 - flux[i]) * (edge[i + 1] - edge[i]);
  return w;
}

static void test_narrow_cog(void) {
  /* The curve of growth of lines far narrower than the pixels (survey
   * spectra: 0.5 and 1 A pixels at R = 3000 and 2000, cells of 5 and 10
   * km/s), against adaptive integration of the definition of W.  The LSF
   * keeps W (normalised kernel) and the window reaches 4000 km/s beyond the
   * lines, so the model's W over all pixels must equal the integral over
   * the same span.  Tolerance 1e-3: the sub-sampling is chosen to keep the
   * sampling error of W below ~3e-4 (model.c, sub_setup); the truncation at
   * tau_cut = 1e-10 loses 2 sqrt(A tau_cut) per line wing (< 1e-5 of W);
   * the quadrature is good to 1e-10. */
  dt_doublet d = nai();
  const double pix[2] = {0.5, 1.0}, R[2] = {3000, 2000};
  const double bs[] = {0.3, 0.5, 1.0, 2.0, 5.0};
  const double logNs[] = {10, 11, 12, 13, 14, 15};
  const double vs[] = {3.1, 4.9, 6.6};
  gsl_integration_workspace *ws = gsl_integration_workspace_alloc(20000);
  gsl_set_error_handler_off();
  for (int s = 0; s < 2; s++) {
    size_t n = (size_t)(160.0 / pix[s]);
    double *wave = grid(5814.0, pix[s], n), *flux = malloc(n * sizeof *flux);
    double *edge = malloc((n + 1) * sizeof *edge);
    pixel_edges(wave, n, edge);
    dt_model_config cfg = {.doublet = &d, .resolution = R[s], .tau_cut = 1e-10};
    dt_err e;
    dt_model *m = dt_model_alloc(wave, n, &cfg, 1, &e);
    if (!m) {
      CHECK(0, "model on %.1f A pixels allocates: %s", pix[s], e.what);
      continue;
    }
    dt_model_info in;
    dt_model_get_info(m, &in);
    for (size_t ib = 0; ib < sizeof bs / sizeof *bs; ib++) {
      double worst = 0, wlN = 0;
      for (size_t il = 0; il < sizeof logNs / sizeof *logNs; il++)
        for (size_t iv = 0; iv < sizeof vs / sizeof *vs; iv++) {
          dt_component c = {logNs[il], bs[ib], vs[iv]};
          dt_model_eval(m, &c, 1, flux, NULL, 0);
          ref_abs r = {&d, &c, 1};
          double rel = model_width(edge, flux, n) / ref_width(&r, edge[0], edge[n], ws) - 1.0;
          if (fabs(rel) > fabs(worst)) {
            worst = rel;
            wlN = logNs[il];
          }
        }
      CHECK(fabs(worst) <= 1e-3,
            "W of Na I, b = %.1f km/s, log N 10..15, on %.1f A pixels at R %.0f (cells of %.1f km/s) "
            "within 1e-3 of the integral (worst %+.1e at log N %.0f)",
            bs[ib], pix[s], R[s], in.step_kms, worst, wlN);
    }
    /* the linear part: W = 8.85e-21 N f lambda^2 [A] (Spitzer 1978, eq.
     * 3-48); at log N 8, b = 0.3 km/s tau0 < 2e-3, so saturation lowers W
     * by < 1e-3 (tau0 / (2 sqrt 2)), and 8.85 rounds pi r_e by 3e-4 */
    dt_component c = {8.0, 0.3, 4.4};
    dt_model_eval(m, &c, 1, flux, NULL, 0);
    double wl = w_linear(1e8, d.line[0].f, d.line[0].lambda0) + w_linear(1e8, d.line[1].f, d.line[1].lambda0);
    CHECK_REL(model_width(edge, flux, n), wl, 2e-3,
              "a line of b = 0.3 km/s on %.1f A pixels has the linear W of both lines (Spitzer 1978: "
              "%.4g mA)", pix[s], 1e3 * wl);
    dt_model_free(m);
    free(wave);
    free(flux);
    free(edge);
  }
  gsl_integration_workspace_free(ws);
}

/* jac_error for narrow lines: they change on the scale of b, and the
 * pixel values of a weak one hardly at all as it moves within a pixel, so
 * the steps are 1e-5 in log N and b and 2e-3 b in v, with the fourth-order
 * central difference (f(-2h) - 8 f(-h) + 8 f(h) - f(2h)) / 12h (Abramowitz &
 * Stegun 1964, 25.3.6): truncation ~(h/b)^4 and rounding ~1e-16/h stay far
 * below the tolerance even for a small column. */
static double jac_error_b(dt_model *m, const dt_component *c0, size_t nc, size_t n) {
  double *f = malloc(n * sizeof *f), *fp = malloc(n * sizeof *fp), *fm = malloc(n * sizeof *fm);
  double *fp2 = malloc(n * sizeof *fp2), *fm2 = malloc(n * sizeof *fm2);
  double *jac = malloc(n * 3 * nc * sizeof *jac);
  dt_component c[DT_MAX_COMP];
  memcpy(c, c0, nc * sizeof *c);
  double worst = 0;
  if (dt_model_eval(m, c, nc, f, jac, 3 * nc) != DT_OK) worst = INFINITY;
  for (size_t k = 0; k < nc && isfinite(worst); k++)
    for (int p = 0; p < 3; p++) {
      double *par = p == 0 ? &c[k].logN : p == 1 ? &c[k].b : &c[k].v;
      double save = *par, h = p == 0 ? 1e-5 : p == 1 ? 1e-5 * save : 2e-3 * c[k].b;
      *par = save + h;
      dt_model_eval(m, c, nc, fp, NULL, 0);
      *par = save - h;
      dt_model_eval(m, c, nc, fm, NULL, 0);
      *par = save + 2 * h;
      dt_model_eval(m, c, nc, fp2, NULL, 0);
      *par = save - 2 * h;
      dt_model_eval(m, c, nc, fm2, NULL, 0);
      *par = save;
      double big = 0, err = 0;
      for (size_t i = 0; i < n; i++) {
        double fd = (fm2[i] - 8 * fm[i] + 8 * fp[i] - fp2[i]) / (12 * h);
        double dj = fabs(fd - jac[i * 3 * nc + 3 * k + p]);
        if (fabs(fd) > big) big = fabs(fd);
        if (dj > err) err = dj;
      }
      if (big > 0 && err / big > worst) worst = err / big;
    }
  free(f);
  free(fp);
  free(fm);
  free(fp2);
  free(fm2);
  free(jac);
  return worst;
}

static void test_narrow_jacobian(void) {
  /* The Jacobian where cells are sub-sampled (cell means over sub-points,
   * their moments through the LSF, the split at pixel edges without one),
   * against central differences: survey pixels with an LSF, without one,
   * with one narrower than a cell (R 40000 on 0.5 A), and R 20000 on 0.1 A
   * pixels (the common set-up, for b below the cells). */
  dt_doublet d = nai();
  struct {
    double pix, R;
  } set[] = {{0.5, 3000}, {1.0, 2000}, {0.5, 0}, {0.5, 40000}, {0.1, 20000}};
  struct {
    const char *what;
    dt_component c[3];
    size_t nc;
  } cases[] = {
      {"thin narrow", {{11.5, 0.5, 3.0}}, 1},
      {"saturated narrow", {{13.5, 0.3, -2.0}}, 1},
      {"damped narrow", {{15.5, 0.4, 1.0}}, 1},
      {"narrow on broad", {{13.0, 0.5, 0.0}, {12.5, 8.0, 5.0}}, 2},
      {"two narrow 2.5 km/s apart", {{13.2, 0.5, 0.0}, {12.8, 0.3, 2.5}}, 2},
      {"narrow, medium and broad", {{12.2, 1.0, -10.0}, {12.5, 0.6, 3.0}, {11.8, 15.0, 30.0}}, 3},
  };
  for (size_t s = 0; s < sizeof set / sizeof *set; s++)
    for (int exact = 0; exact < 2; exact++) {
      size_t n = (size_t)(60.0 / set[s].pix);
      double *wave = grid(5865.0, set[s].pix, n);
      dt_model_config cfg = {.doublet = &d, .resolution = set[s].R, .tau_cut = 1e-14, .exact_wings = exact};
      dt_err e;
      dt_model *m = dt_model_alloc(wave, n, &cfg, 3, &e);
      if (!m) {
        CHECK(0, "model allocates: %s", e.what);
        free(wave);
        continue;
      }
      double worst = 0;
      const char *wc = "";
      for (size_t t = 0; t < sizeof cases / sizeof *cases; t++) {
        double err = jac_error_b(m, cases[t].c, cases[t].nc, n);
        if (!(err <= worst)) {
          worst = err;
          wc = cases[t].what;
        }
      }
      CHECK(worst < 1e-5,
            "Jacobian of narrow components matches central differences on %.1f A pixels, R %g, %s "
            "wings (worst %.2g: %s)", set[s].pix, set[s].R, exact ? "exact" : "interpolated", worst, wc);
      dt_model_free(m);
      free(wave);
    }
}

static void test_narrow_position(void) {
  /* A thin line narrower than a cell, moved across one cell: the centroid
   * of its absorption in the pixels, sum (1 - f) lambda dlambda / W, stays
   * at the line centre (a symmetric profile through a symmetric LSF, binned
   * into pixels much narrower than the LSF: common practice).  Represented
   * by cell means alone it would stay at the cell's centre (up to half a
   * cell, 2.5 km/s, off). */
  dt_doublet d = nai();
  const size_t n = 160;
  double *wave = grid(5854.0, 0.5, n), flux[160], edge[161];
  pixel_edges(wave, n, edge);
  dt_model_config cfg = {.doublet = &d, .resolution = 3000};
  dt_err e;
  dt_model *m = dt_model_alloc(wave, n, &cfg, 1, &e);
  if (!m) {
    CHECK(0, "model allocates: %s", e.what);
    free(wave);
    return;
  }
  dt_model_info in;
  dt_model_get_info(m, &in);
  double worst = 0;
  for (int k = 0; k <= 10; k++) {
    dt_component c = {11.5, 0.4, 2.0 + 0.1 * k * in.step_kms};
    dt_model_eval(m, &c, 1, flux, NULL, 0);
    double lc = dt_wavelength(c.v, d.line[0].lambda0, 0.0), s0 = 0, s1 = 0;
    for (size_t i = 0; i < n; i++) {
      if (fabs(wave[i] - lc) > 3.0) continue; /* D2 alone: D1 is 6 A away */
      double a = (1.0 - flux[i]) * (edge[i + 1] - edge[i]);
      s0 += a;
      s1 += a * wave[i];
    }
    double dv = DT_C_KMS * (s1 / s0 / lc - 1.0);
    if (fabs(dv) > worst) worst = fabs(dv);
  }
  CHECK(worst < 0.02 * in.step_kms,
        "a line of b = 0.4 km/s moved across a cell of %.1f km/s: centroid within 2%% of the cell "
        "of its centre (worst %.3f km/s)", in.step_kms, worst);
  dt_model_free(m);
  free(wave);
}

static void test_narrow_cache(void) {
  /* near narrow lines too, a Jacobian must not depend on what the model
   * evaluated before: here a broad component first overlaps a narrow one,
   * then moves 200 km/s away; with and without an LSF */
  dt_doublet d = nai();
  const size_t n = 160;
  double *wave = grid(5854.0, 0.5, n), fa[160], fb[160], ja[960], jb[960];
  const double R[2] = {3000, 0};
  for (int r = 0; r < 2; r++) {
    dt_model_config cfg = {.doublet = &d, .resolution = R[r]};
    dt_err e;
    dt_model *a = dt_model_alloc(wave, n, &cfg, 2, &e), *b = dt_model_alloc(wave, n, &cfg, 2, &e);
    dt_component near[2] = {{13.0, 0.4, 0.0}, {12.5, 6.0, 3.0}}, far[2] = {{13.0, 0.4, 0.0}, {12.5, 6.0, -200.0}};
    dt_model_eval(a, near, 2, fa, ja, 6);
    dt_model_eval(a, far, 2, fa, ja, 6);
    dt_model_eval(b, far, 2, fb, jb, 6);
    CHECK(memcmp(fa, fb, sizeof fa) == 0 && memcmp(ja, jb, sizeof ja) == 0,
          "flux and Jacobian near a narrow line (R %g) do not depend on the previous evaluation", R[r]);
    dt_model_free(a);
    dt_model_free(b);
  }
  free(wave);
}

static void test_narrow_many(void) {
  /* All eight components narrow, saturated and damped, apart from each
   * other (the most sub-points the buffers are sized for), on 1 A pixels;
   * and components below DT_MODEL_B_RESOLVED, which still evaluate.  W
   * against the integral as in test_narrow_cog. */
  dt_doublet d = nai();
  const size_t n = 160;
  double *wave = grid(5814.0, 1.0, n), flux[160], jac[160 * 24], edge[161];
  pixel_edges(wave, n, edge);
  dt_model_config cfg = {.doublet = &d, .resolution = 2000, .tau_cut = 1e-10};
  dt_err e;
  dt_model *m = dt_model_alloc(wave, n, &cfg, DT_MAX_COMP, &e);
  gsl_integration_workspace *ws = gsl_integration_workspace_alloc(20000);
  if (!m) {
    CHECK(0, "model allocates: %s", e.what);
    free(wave);
    return;
  }
  const double bset[3] = {0.3, 0.05, 0.01};
  for (int t = 0; t < 3; t++) {
    dt_component c[DT_MAX_COMP];
    for (int k = 0; k < DT_MAX_COMP; k++) c[k] = (dt_component){14.0 + 0.2 * k, bset[t], -1400.0 + 400.0 * k};
    int st = dt_model_eval(m, c, DT_MAX_COMP, flux, jac, 3 * DT_MAX_COMP);
    int ok = st == DT_OK;
    for (size_t i = 0; i < n; i++) ok = ok && flux[i] >= 0 && flux[i] <= 1 && isfinite(jac[i * 24]);
    ref_abs r = {&d, c, DT_MAX_COMP};
    double rel = model_width(edge, flux, n) / ref_width(&r, edge[0], edge[n], ws) - 1.0;
    CHECK(ok, "eight narrow damped components of b = %.2f km/s evaluate, flux in [0, 1]", bset[t]);
    /* below the sized minimum the sub-sampling may be coarsened: 1% */
    double tol = bset[t] >= DT_MODEL_B_RESOLVED ? 1e-3 : 1e-2;
    CHECK(fabs(rel) <= tol, "their W is within %g of the integral (%+.1e)", tol, rel);
  }
  dt_component one = {13.0, 0.01, 2.2};
  dt_model_eval(m, &one, 1, flux, NULL, 0);
  ref_abs r1 = {&d, &one, 1};
  double rel = model_width(edge, flux, n) / ref_width(&r1, edge[0], edge[n], ws) - 1.0;
  CHECK(fabs(rel) <= 1e-3, "one component of b = 0.01 km/s has W within 1e-3 of the integral (%+.1e)", rel);
  /* the fitter's lower bound on b is one the sampling is sized for */
  CHECK(DT_FIT_B_MIN >= DT_MODEL_B_RESOLVED, "DT_FIT_B_MIN (%g km/s) >= DT_MODEL_B_RESOLVED (%g km/s)",
        DT_FIT_B_MIN, DT_MODEL_B_RESOLVED);
  gsl_integration_workspace_free(ws);
  dt_model_free(m);
  free(wave);
}

/* ---- pixels much finer than the line-spread function ---- */

/* Reference pixel values, computed apart from the model: the absorption
 * 1 - exp(-tau) from ref_tau on a grid uniform in ln(lambda) with steps of
 * sigma/250, convolved with the untruncated Gaussian (out to 9 sigma, by
 * the trapezoid rule, whose error for a Gaussian sampled this finely is
 * negligible; common practice) and averaged over the pixel's extent in
 * ln(lambda) by Simpson's rule (Abramowitz & Stegun 1964, 25.4.5). */
typedef struct ref_conv {
  double y0, hs, sy; /* grid start and step, sigma (ln lambda) */
  size_t ng;
  double *dep;       /* 1 - exp(-tau) on the grid */
} ref_conv;

static double ref_conv_at(const ref_conv *r, double y) {
  const double norm = r->hs / (r->sy * sqrt(2.0 * 3.14159265358979323846));
  double u = (y - r->y0) / r->hs;
  long reach = (long)ceil(9.0 * r->sy / r->hs), c = (long)floor(u);
  long a = c - reach < 0 ? 0 : c - reach, b = c + reach > (long)r->ng - 1 ? (long)r->ng - 1 : c + reach;
  double s = 0;
  for (long m = a; m <= b; m++) {
    double z = (y - (r->y0 + m * r->hs)) / r->sy;
    s += exp(-0.5 * z * z) * r->dep[m];
  }
  return s * norm;
}

static void test_fine_pixels(void) {
  /* R 40000 (sigma = c/R/2.3548 = 3.18 km/s) on pixels of sigma/50 (0.064
   * km/s): the sub-pixel cells are sigma/DT_MODEL_LSF_CELLS, the pixels
   * interpolate them.  A saturated, a weak and a narrow component (b
   * below the cell, sub-sampled). */
  dt_doublet d = nai();
  const double R = 40000, sig = DT_C_KMS / R / (2 * sqrt(2 * log(2)));
  const double lam_mid = 5894.5, dl = lam_mid * sig / 50 / DT_C_KMS;
  const size_t n = (size_t)(12.0 / dl);
  double *wave = grid(5888.5, dl, n), *flux = malloc(n * sizeof *flux);
  dt_component c[3] = {{12.9, 4.0, -8.0}, {11.6, 1.2, 14.0}, {11.3, 0.15, 30.0}};
  dt_model_config cfg = {.doublet = &d, .resolution = R};
  dt_err e;
  dt_model *m = dt_model_alloc(wave, n, &cfg, 3, &e);
  CHECK(m != NULL, "%zu pixels of sigma/50 at R 40000 allocate", n);
  if (!m) {
    free(wave);
    free(flux);
    return;
  }
  dt_model_info in;
  dt_model_get_info(m, &in);
  CHECK(in.interpolated == 1, "pixels 50 times finer than the LSF sigma: interpolated cells");
  CHECK_REL(in.step_kms, sig / DT_MODEL_LSF_CELLS, 1e-9, "cell = sigma / %d (%.4f km/s)",
            DT_MODEL_LSF_CELLS, in.step_kms);
  /* per pixel: the kernel (2 hw + 1) and at most 4 nodes of the cubic */
  double per_pix = (double)in.ncoef / (double)n;
  double bound = 2 * ceil(DT_MODEL_LSF_NSIGMA * DT_MODEL_LSF_CELLS) + 5;
  CHECK(per_pix <= bound, "matrix entries per pixel %.1f <= %.0f (cells of pixel/5: ~%.0f)", per_pix,
        bound, 2 * DT_MODEL_LSF_NSIGMA * 50 * DT_MODEL_OVERSAMPLE);

  /* (a) against the reference convolution, every pixel */
  CHECK(dt_model_eval(m, c, 3, flux, NULL, 0) == DT_OK, "fine pixels evaluate");
  ref_conv rc;
  rc.sy = sig / DT_C_KMS;
  rc.hs = rc.sy / 250;
  double ylo = log(wave[0]) - 10 * rc.sy, yhi = log(wave[n - 1]) + 10 * rc.sy;
  rc.y0 = ylo;
  rc.ng = (size_t)((yhi - ylo) / rc.hs) + 1;
  rc.dep = malloc(rc.ng * sizeof *rc.dep);
  for (size_t g = 0; g < rc.ng; g++) {
    double lam = exp(rc.y0 + g * rc.hs), t = 0;
    for (int k = 0; k < 3; k++)
      for (int l = 0; l < 2; l++) t += ref_tau(&d.line[l], &c[k], lam);
    rc.dep[g] = -expm1(-t);
  }
  double *edge = malloc((n + 1) * sizeof *edge);
  pixel_edges(wave, n, edge);
  double worst = 0, at = 0, deepest = 1;
  for (size_t i = 0; i < n; i += 3) {
    double a = log(edge[i]), b = log(edge[i + 1]);
    double ref = 1.0 - (ref_conv_at(&rc, a) + 4 * ref_conv_at(&rc, 0.5 * (a + b)) + ref_conv_at(&rc, b)) / 6;
    if (fabs(flux[i] - ref) > worst) {
      worst = fabs(flux[i] - ref);
      at = wave[i];
    }
    if (ref < deepest) deepest = ref;
  }
  CHECK(deepest < 0.2, "the saturated line is deep after the LSF (%.3f)", deepest);
  CHECK(worst <= 1e-4, "fine pixels: flux within 1e-4 of a direct high-resolution convolution "
        "(worst %.2g at %.3f A)", worst, at);
  /* and the equivalent width against adaptive integration of its definition */
  gsl_integration_workspace *ws = gsl_integration_workspace_alloc(20000);
  ref_abs ra = {&d, c, 3};
  double wref = ref_width(&ra, edge[0], edge[n], ws), wmod = model_width(edge, flux, n);
  CHECK_REL(wmod, wref, 3e-4, "fine pixels: W %.6f A against %.6f A", wmod, wref);
  gsl_integration_workspace_free(ws);

  /* (b) the Jacobian against central differences */
  dt_model_config cj = cfg;
  cj.tau_cut = 1e-14;
  dt_model *mj = dt_model_alloc(wave, n, &cj, 3, &e);
  if (mj) {
    double err = jac_error_b(mj, c, 3, n);
    CHECK(err < 1e-5, "fine pixels: Jacobian matches central differences (%.2g)", err);
    dt_model_free(mj);
  }
  free(rc.dep);
  free(edge);
  dt_model_free(m);
  free(wave);
  free(flux);

  /* where the rule switches: cells of pixel/oversample are kept down to
   * sigma / (2 DT_MODEL_LSF_CELLS) (0.5 A at R 3000: sigma / 8.3; 0.1 A at
   * R 20000: sigma / 6.2), coarsened below (0.1 A at R 3000: sigma / 42) */
  const struct {
    double pix, R;
    int interp;
  } sw[] = {{0.5, 3000, 0}, {0.1, 20000, 0}, {0.1, 3000, 1}};
  for (size_t s = 0; s < sizeof sw / sizeof *sw; s++) {
    double *ws = grid(5880.0, sw[s].pix, 200);
    dt_model_config cs = {.doublet = &d, .resolution = sw[s].R};
    dt_model *ms = dt_model_alloc(ws, 200, &cs, 1, &e);
    if (ms) {
      dt_model_get_info(ms, &in);
      double sg = DT_C_KMS / sw[s].R / (2 * sqrt(2 * log(2)));
      double vmin = DT_C_KMS * log((ws[199] + 0.5 * sw[s].pix) / (ws[199] - 0.5 * sw[s].pix));
      double want = sw[s].interp ? sg / DT_MODEL_LSF_CELLS : vmin / DT_MODEL_OVERSAMPLE;
      CHECK(in.interpolated == sw[s].interp && fabs(in.step_kms / want - 1) < 1e-9,
            "%.1f A pixels at R %g: cell %.3f km/s = %s", sw[s].pix, sw[s].R, in.step_kms,
            sw[s].interp ? "sigma / 8" : "pixel / oversample");
      dt_model_free(ms);
    } else {
      CHECK(0, "model allocates: %s", e.what);
    }
    free(ws);
  }

  /* (c) a fit window of 47 000 pixels of 0.028 km/s at R 40000 keeps a
   * small matrix (with cells of a fifth of a pixel it would hold some
   * 5 000 entries per pixel, 2 GB) */
  const size_t nb = 47000;
  double dlb = 5894.0 * 0.028 / DT_C_KMS;
  double *wb = grid(5894.0 - 0.5 * nb * dlb, dlb, nb), *fb = malloc(nb * sizeof *fb);
  dt_model *mb = dt_model_alloc(wb, nb, &cfg, 2, &e);
  CHECK(mb != NULL, "47000 pixels of 0.028 km/s at R 40000 allocate");
  if (mb) {
    dt_model_get_info(mb, &in);
    CHECK((double)in.ncoef <= bound * nb, "47000 fine pixels: %.1f MB of matrix (%.1f entries per pixel)",
          in.ncoef * 8e-6, (double)in.ncoef / nb);
    dt_component cb[2] = {{12.5, 3.0, -5.0}, {12.0, 6.0, 20.0}};
    int ok = dt_model_eval(mb, cb, 2, fb, NULL, 0) == DT_OK, fin = 1;
    double fmin_ = 1;
    for (size_t i = 0; i < nb; i++) {
      fin = fin && isfinite(fb[i]) && fb[i] >= 0 && fb[i] <= 1;
      if (fb[i] < fmin_) fmin_ = fb[i];
    }
    CHECK(ok && fin && fmin_ < 0.9, "47000 fine pixels evaluate (deepest %.3f)", fmin_);
    dt_model_free(mb);
  }
  free(wb);
  free(fb);
}

static void test_grid_and_helpers(void) {
  dt_doublet d = nai();
  const size_t n = 660;
  double *wave = grid(5862.0, 0.1, n), flux[660];
  dt_model_config cfg = {.doublet = &d, .resolution = 20000};
  dt_err e;
  dt_model *m = dt_model_alloc(wave, n, &cfg, 2, &e);
  CHECK(m != NULL, "660 pixels of 0.1 A at R = 20000 allocate");
  if (!m) return;
  dt_model_info in;
  dt_model_get_info(m, &in);
  /* the narrowest pixel (in velocity) is the reddest: edges half-way */
  double vmin = DT_C_KMS * log((wave[n - 1] + 0.05) / (wave[n - 1] - 0.05));
  CHECK(in.oversample == DT_MODEL_OVERSAMPLE, "default oversampling is %d", DT_MODEL_OVERSAMPLE);
  CHECK_REL(in.step_kms, vmin / in.oversample, 1e-9, "sub-pixel step is the narrowest pixel / oversample");
  CHECK_REL(in.lsf_sigma_kms, DT_C_KMS / 20000 / (2 * sqrt(2 * log(2))), 1e-12,
            "LSF sigma = c / R / (2 sqrt(2 ln 2))");
  CHECK(in.lsf_halfwidth == (int)ceil(DT_MODEL_LSF_NSIGMA * in.lsf_sigma_kms / in.step_kms),
        "kernel half-width is %.1f sigma", DT_MODEL_LSF_NSIGMA);
  CHECK_CLOSE(in.lnlam0, log(wave[0] - 0.05) - in.lsf_halfwidth * in.step_kms / DT_C_KMS, 1e-12,
              "grid starts a kernel half-width below the first pixel's lower edge");
  CHECK(in.tau_cut == DT_MODEL_TAU_CUT, "default tau cut is %g", DT_MODEL_TAU_CUT);
  CHECK(dt_model_npix(m) == n, "npix");

  dt_component none[1];
  CHECK(dt_model_eval(m, none, 0, flux, NULL, 0) == DT_OK, "no components evaluates");
  int ones = 1;
  for (size_t i = 0; i < n; i++) ones = ones && flux[i] == 1.0;
  CHECK(ones, "no components: flux is exactly 1");

  /* a narrow line's deepest pixel is the one holding dt_wavelength(v) */
  dt_component c = {12.0, 3.0, -123.4};
  double vsys = 0;
  dt_model_eval(m, &c, 1, flux, NULL, 0);
  size_t imin = 0;
  for (size_t i = 0; i < n; i++)
    if (flux[i] < flux[imin]) imin = i;
  double lc = dt_wavelength(c.v, d.line[0].lambda0, vsys);
  CHECK(fabs(wave[imin] - lc) <= 0.05 + 1e-9, "deepest pixel %.2f holds the line centre %.3f",
        wave[imin], lc);
  /* velocity <-> wavelength: lambda = lambda0 (1 + vsys/c)(1 + v/c) (relativistic
   * composition of the two Doppler factors is not used; common practice) */
  CHECK_REL(dt_wavelength(299.792458, 5000.0, 0.0), 5005.0, 1e-15, "v = c/1000 shifts by 1/1000");
  CHECK_CLOSE(dt_velocity(dt_wavelength(-250.0, 5891.5833, 1500.0), 5891.5833, 1500.0), -250.0,
              1e-9, "dt_velocity inverts dt_wavelength");
  /* the same absorber seen with vsys: a line at (vsys, v) equals (0, v') where
   * 1 + v'/c = (1 + vsys/c)(1 + v/c) */
  dt_component c1 = {12.5, 7.0, 20.0};
  dt_component c2 = {12.5, 7.0, DT_C_KMS * ((1 + 300.0 / DT_C_KMS) * (1 + 20.0 / DT_C_KMS) - 1)};
  double t1 = dt_line_tau(&d.line[0], &c1, 300.0, 5898.0), t2 = dt_line_tau(&d.line[0], &c2, 0.0, 5898.0);
  CHECK_REL(t1, t2, 1e-9, "vsys and v compose as Doppler factors");
  dt_model_free(m);
  free(wave);
}

static void test_lsf_conserves_w(void) {
  /* convolution with a normalised kernel and averaging over pixels keep the
   * equivalent width (common practice) */
  dt_doublet d = nai();
  const size_t n = 800;
  double *wave = grid(5870.0, 0.05, n), f0[800], f1[800];
  dt_model_config a = {.doublet = &d}, b = {.doublet = &d, .fwhm_kms = 40.0};
  dt_err e;
  dt_model *ma = dt_model_alloc(wave, n, &a, 1, &e), *mb = dt_model_alloc(wave, n, &b, 1, &e);
  dt_component c = {13.0, 4.0, 30.0};
  dt_model_eval(ma, &c, 1, f0, NULL, 0);
  dt_model_eval(mb, &c, 1, f1, NULL, 0);
  double wa = eq_width(wave, f0, n, d.line[0].lambda0, 140), wb = eq_width(wave, f1, n, d.line[0].lambda0, 140);
  CHECK_REL(wb, wa, 2e-4, "a 40 km/s LSF keeps W (%.5f vs %.5f A)", wb, wa);
  double mina = 1, minb = 1;
  for (size_t i = 0; i < n; i++) {
    mina = fmin(mina, f0[i]);
    minb = fmin(minb, f1[i]);
  }
  CHECK(minb > mina + 0.1, "the LSF makes a saturated line shallower (%.3f -> %.3f)", mina, minb);
  dt_model_free(ma);
  dt_model_free(mb);
  free(wave);
}

static void test_bad_input(void) {
  dt_doublet d = nai();
  double wave[5] = {5890, 5891, 5892, 5893, 5894}, flux[5], jac[30];
  dt_err e;
  dt_model_config cfg = {.doublet = &d, .resolution = 20000};
  CHECK(dt_model_alloc(wave, 1, &cfg, 1, &e) == NULL && e.code == DT_EINVAL, "one pixel is refused");
  double bad[5] = {5890, 5891, 5891, 5893, 5894};
  CHECK(dt_model_alloc(bad, 5, &cfg, 1, &e) == NULL && e.code == DT_EINVAL,
        "repeated wavelength is refused: %s", e.what);
  double nanw[5] = {5890, 5891, NAN, 5893, 5894};
  CHECK(dt_model_alloc(nanw, 5, &cfg, 1, &e) == NULL && e.code == DT_EINVAL, "NaN wavelength is refused");
  dt_model_config c2 = cfg;
  c2.doublet = NULL;
  CHECK(dt_model_alloc(wave, 5, &c2, 1, &e) == NULL && e.code == DT_EINVAL, "no doublet is refused");
  c2 = cfg;
  c2.oversample = -2;
  CHECK(dt_model_alloc(wave, 5, &c2, 1, &e) == NULL && e.code == DT_EINVAL, "negative oversampling is refused");
  c2 = cfg;
  c2.tau_cut = 2;
  CHECK(dt_model_alloc(wave, 5, &c2, 1, &e) == NULL && e.code == DT_EINVAL, "tau cut >= 1 is refused");
  c2 = cfg;
  c2.vsys = -4e5;
  CHECK(dt_model_alloc(wave, 5, &c2, 1, &e) == NULL && e.code == DT_EINVAL, "|vsys| >= c is refused");
  c2 = cfg;
  c2.resolution = NAN;
  CHECK(dt_model_alloc(wave, 5, &c2, 1, &e) == NULL && e.code == DT_EINVAL, "NaN resolution is refused");
  CHECK(dt_model_alloc(wave, 5, &cfg, DT_MAX_COMP + 1, &e) == NULL && e.code == DT_EINVAL,
        "more than DT_MAX_COMP components is refused");
  double wide[3] = {1000.0, 5000.0, 1e6};
  c2 = cfg;
  c2.oversample = 1000;
  CHECK(dt_model_alloc(wide, 3, &c2, 1, &e) == NULL && e.code == DT_EINVAL,
        "an absurd sub-pixel grid is refused: %s", e.what);

  dt_model *m = dt_model_alloc(wave, 5, &cfg, 2, &e);
  CHECK(m != NULL, "5 pixels allocate");
  if (!m) return;
  dt_component c[3] = {{12, 5, 0}, {12, 5, 0}, {12, 5, 0}};
  CHECK(dt_model_eval(m, c, 3, flux, NULL, 0) == DT_EINVAL, "more components than allocated");
  dt_component zb = {12, 0, 0}, nb = {12, -1, 0}, nl = {NAN, 5, 0}, hl = {400, 5, 0}, iv = {12, 5, INFINITY};
  CHECK(dt_model_eval(m, &zb, 1, flux, NULL, 0) == DT_EINVAL, "b = 0 is refused");
  CHECK(dt_model_eval(m, &nb, 1, flux, NULL, 0) == DT_EINVAL, "b < 0 is refused");
  CHECK(dt_model_eval(m, &nl, 1, flux, NULL, 0) == DT_EINVAL, "NaN log N is refused");
  CHECK(dt_model_eval(m, &hl, 1, flux, NULL, 0) == DT_EINVAL, "log N = 400 is refused");
  dt_component big = {DT_MODEL_LOGN_MAX, DT_MODEL_B_MIN, 0};
  CHECK(dt_model_eval(m, &big, 1, flux, jac, 3) == DT_OK && isfinite(flux[2]) && isfinite(jac[6]),
        "the extreme allowed component (log N %g, b %g km/s) evaluates to finite numbers",
        DT_MODEL_LOGN_MAX, DT_MODEL_B_MIN);
  CHECK(dt_model_eval(m, &iv, 1, flux, NULL, 0) == DT_EINVAL, "infinite v is refused");
  dt_component tb = {12, 1e-300, 0}, fc = {12, 5, -DT_C_KMS};
  CHECK(dt_model_eval(m, &tb, 1, flux, NULL, 0) == DT_EINVAL, "b = 1e-300 km/s is refused");
  CHECK(dt_model_eval(m, &fc, 1, flux, NULL, 0) == DT_EINVAL, "v = -c is refused");
  dt_component ok1 = {12, 5, 0};
  CHECK(dt_model_eval(m, &ok1, 1, flux, NULL, 0) == DT_OK && flux[1] < 1,
        "after refusals the model still evaluates");
  CHECK(dt_model_eval(m, c, 2, flux, jac, 5) == DT_EINVAL, "Jacobian stride too small is refused");
  dt_component far = {12, 5, 90000};
  CHECK(dt_model_eval(m, &far, 1, flux, jac, 3) == DT_OK && flux[2] == 1.0 && jac[6] == 0.0,
        "a line far outside the pixels leaves flux 1 and zero derivatives");
  dt_model_free(m);
  dt_model_free(NULL);
}

/* ---- printing for the SciPy cross-check ---- */

static int print_tau(void) {
  dt_doublet d = nai();
  const double logNs[] = {10, 11, 12, 13, 14, 15, 16, 17, 18, 19, 20, 21};
  const double bs[] = {0.5, 1.5, 5, 15, 50};
  const double dv[] = {0, 0.3, -0.3, 1, -1, 3, -3, 10, -10};
  const double dkms[] = {0, 30, -100, 1000, -3000};
  printf("# logN b v vsys line lambda tau\n");
  for (size_t i = 0; i < sizeof logNs / sizeof *logNs; i++)
    for (size_t k = 0; k < sizeof bs / sizeof *bs; k++)
      for (int vs = 0; vs < 2; vs++)
        for (int l = 0; l < 2; l++) {
          dt_component c = {logNs[i], bs[k], vs ? -37.5 : 0.0};
          double vsys = vs ? 1234.5 : 0.0;
          for (size_t a = 0; a < sizeof dv / sizeof *dv; a++)
            for (size_t q = 0; q < sizeof dkms / sizeof *dkms; q++) {
              double v = c.v + dv[a] * c.b + dkms[q];
              double lam = dt_wavelength(v, d.line[l].lambda0, vsys);
              printf("%.17g %.17g %.17g %.17g %d %.17g %.17g\n", c.logN, c.b, c.v, vsys, l, lam,
                     dt_line_tau(&d.line[l], &c, vsys, lam));
            }
        }
  return 0;
}

static int print_pixels(void) {
  dt_doublet d = nai();
  struct {
    double R, fwhm, vsys, tau_cut;
    int ovs, uneven, ncomp;
    dt_component c[3];
  } cases[] = {
      {20000, 0, 0, 0, 5, 0, 2, {{12.3, 5.0, 3.0}, {12.0, 9.0, -215.0}}},
      {20000, 0, 0, 1e-12, 5, 0, 2, {{12.3, 5.0, 3.0}, {12.0, 9.0, -215.0}}},
      /* (cells of at least sigma/16, as the documented grid keeps them) */
      {8000, 0, 250.0, 1e-12, 3, 1, 3, {{13.5, 3.0, 0.0}, {12.5, 20.0, 35.0}, {11.5, 6.0, -80.0}}},
      {0, 15.0, -120.0, 1e-12, 7, 1, 1, {{15.5, 12.0, 10.0}}},
      {0, 0, 0, 1e-12, 5, 1, 1, {{12.8, 1.5, -40.0}}},
      {3000, 0, 0, 0, 5, 0, 2, {{13.0, 8.0, 0.0}, {12.2, 30.0, 60.0}}},
      /* lines narrower than the sub-pixel cells (sub-sampled) */
      {3000, 0, 0, 1e-12, 5, 0, 3, {{13.5, 0.4, 0.0}, {12.0, 1.2, 27.0}, {12.5, 6.0, -40.0}}},
      {2000, 0, 0, 1e-12, 5, 0, 2, {{11.5, 0.3, 0.0}, {14.8, 0.7, -61.0}}},
      {3000, 0, 0, 1e-12, 5, 0, 2, {{13.2, 0.5, 0.0}, {12.8, 0.3, 2.5}}},
      {0, 0, 0, 1e-12, 5, 0, 1, {{14.0, 0.3, 11.0}}},
      {40000, 0, 0, 1e-12, 5, 0, 1, {{13.0, 0.5, 13.0}}},
      {20000, 0, 0, 1e-12, 5, 0, 2, {{13.0, 0.5, 13.0}, {12.0, 0.8, -31.0}}},
  };
  for (size_t t = 0; t < sizeof cases / sizeof *cases; t++) {
    /* cases 5-9 (R 3000, R 2000 or none after case 4): coarse pixels */
    int coarse = t >= 5;
    size_t n = coarse ? 300 : 660;
    double step = coarse ? (cases[t].R == 2000 ? 1.0 : 0.5) : 0.1;
    double *wave = malloc(n * sizeof *wave), *flux = malloc(n * sizeof *flux);
    double x = 5862.0 + cases[t].vsys / DT_C_KMS * 5890.0 - (coarse ? 60 : 0) - (step > 0.5 ? 80 : 0);
    unsigned s = 12345u + (unsigned)t;
    for (size_t i = 0; i < n; i++) {
      wave[i] = x;
      double jit = 1.0;
      if (cases[t].uneven) {
        s = s * 1103515245u + 12345u;
        jit = 0.6 + 0.8 * ((s >> 8) & 0xffff) / 65535.0;
      }
      x += step * jit;
    }
    dt_model_config cfg = {.doublet = &d, .vsys = cases[t].vsys, .resolution = cases[t].R,
                           .fwhm_kms = cases[t].fwhm, .oversample = cases[t].ovs,
                           .tau_cut = cases[t].tau_cut};
    dt_err e;
    dt_model *m = dt_model_alloc(wave, n, &cfg, 3, &e);
    if (!m || dt_model_eval(m, cases[t].c, (size_t)cases[t].ncomp, flux, NULL, 0) != DT_OK) {
      fprintf(stderr, "case %zu: %s\n", t, m ? "eval failed" : e.what);
      return 1;
    }
    dt_model_info in;
    dt_model_get_info(m, &in);
    printf("case %zu R %.17g fwhm %.17g vsys %.17g ovs %d tau_cut %.17g npix %zu ncomp %d"
           " lnlam0 %.17g dy %.17g nfine %zu hw %d",
           t, cases[t].R, cases[t].fwhm, cases[t].vsys, in.oversample, in.tau_cut, n, cases[t].ncomp,
           in.lnlam0, in.step_kms / DT_C_KMS, in.nfine, in.lsf_halfwidth);
    for (int k = 0; k < cases[t].ncomp; k++)
      printf(" %.17g %.17g %.17g", cases[t].c[k].logN, cases[t].c[k].b, cases[t].c[k].v);
    printf("\n");
    for (size_t i = 0; i < n; i++) printf("%.17g %.17g\n", wave[i], flux[i]);
    dt_model_free(m);
    free(wave);
    free(flux);
  }
  return 0;
}

int main(int argc, char **argv) {
  if (argc > 1 && strcmp(argv[1], "--tau") == 0) return print_tau();
  if (argc > 1 && strcmp(argv[1], "--pixels") == 0) return print_pixels();
  test_curve_of_growth();
  test_doublet_ratio();
  test_grid_and_helpers();
  test_lsf_conserves_w();
  test_fast_vs_exact();
  test_random();
  test_jacobian();
  test_cache();
  test_narrow_cog();
  test_narrow_jacobian();
  test_narrow_position();
  test_narrow_cache();
  test_narrow_many();
  test_fine_pixels();
  test_bad_input();
  return dt_test_done();
}
