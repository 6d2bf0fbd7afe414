/* Partial covering: the model I = 1 - C + C exp(-tau) of cover.h, its
 * Jacobian, and the fitted covering factor.
 *
 *  - the pixel-level combination against a reference made here (the
 *    product on a fine grid, convolved with the Gaussian LSF and averaged
 *    over the pixels): exact for one component and for separated ones, the
 *    error for overlapping ones measured and bounded;
 *  - the Jacobian against finite differences;
 *  - the closed form of Hamann et al. 1997 (ApJ 478, 80, eq. 3, from
 *    memory; derived in cover.c) on the model's own line centres;
 *  - a Monte Carlo where the doublet ratio constrains C_f (resolved lines,
 *    tau0 2-10 in the weaker line, C_f 0.5-0.8): the fitted C_f agrees with
 *    the truth within its errors (pulls of unit width) and with the closed
 *    form applied to the data;
 *  - thin lines: flagged unconstrained; C_f = 1 data: consistent with 1, no
 *    flag.
 *
 * Synthetic spectra come from chosen (true) values, never a previous fit.
 * Na I atomic data: Morton (2003, ApJS 149, 205). */
#include <gsl/gsl_randist.h>
#include <gsl/gsl_rng.h>
#include <math.h>
#include <stdlib.h>
#include <string.h>

#include "doubletty/cog.h"
#include "doubletty/cover.h"
#include "doubletty/fit.h"
#include "doubletty/model.h"
#include "harness.h"

#define C_KMS 299792.458

static dt_doublet nai(void) {
  dt_doublet d;
  memset(&d, 0, sizeof d);
  strcpy(d.name, "NaI");
  /* Morton (2003, ApJS 149, 205): vacuum wavelength, f, Gamma */
  d.line[0] = (dt_line){"NaI 5891", 5891.5833, 0.6408, 6.16e7};
  d.line[1] = (dt_line){"NaI 5897", 5897.5581, 0.3201, 6.14e7};
  return d;
}

typedef struct pix {
  size_t n;
  double *wave;
  dt_model *m, *m1;
} pix;

static pix make(const dt_doublet *d, double lo, double hi, double dlam, double R) {
  pix p;
  p.n = (size_t)((hi - lo) / dlam);
  p.wave = malloc(p.n * sizeof(double));
  for (size_t i = 0; i < p.n; i++) p.wave[i] = lo + dlam * (double)i;
  dt_model_config cfg;
  memset(&cfg, 0, sizeof cfg);
  cfg.doublet = d;
  cfg.resolution = R;
  p.m = dt_model_alloc(p.wave, p.n, &cfg, DT_MAX_COMP, NULL);
  p.m1 = dt_model_alloc(p.wave, p.n, &cfg, 1, NULL);
  return p;
}

static void unmake(pix *p) {
  dt_model_free(p->m);
  dt_model_free(p->m1);
  free(p->wave);
}

/* log N [cm^-2] giving the weaker line a central optical depth tau0 at b. */
static double logN_for_tau(const dt_doublet *d, double tau0, double b) {
  double t1 = dt_cog_tau0(&d->line[1], 13.0, b);
  return 13.0 + log10(tau0 / t1);
}

/* Reference: each component's exp(-tau) on a fine grid (no LSF; step
 * 0.002 A), combined as the product prod (1 - C + C e^-tau) there,
 * convolved with the Gaussian LSF (sigma in wavelength from R at the pixel)
 * and averaged over each coarse pixel (edges half-way between centres). */
static void reference(const dt_doublet *d, const pix *p, const dt_component *c,
                      const double *cf, size_t nc, double R, double *out) {
  double step = 0.002;
  double lo = p->wave[0] - 1.0, hi = p->wave[p->n - 1] + 1.0;
  size_t nf = (size_t)((hi - lo) / step);
  double *fw = calloc(nf, sizeof(double)), *prod = malloc(nf * sizeof(double));
  double *one = malloc(nf * sizeof(double)), *conv = malloc(nf * sizeof(double));
  for (size_t i = 0; i < nf; i++) {
    fw[i] = lo + step * (double)i;
    prod[i] = 1.0;
  }
  dt_model_config cfg;
  memset(&cfg, 0, sizeof cfg);
  cfg.doublet = d;
  cfg.oversample = 3;
  dt_model *mf = dt_model_alloc(fw, nf, &cfg, 1, NULL);
  for (size_t k = 0; k < nc; k++) {
    dt_model_eval(mf, &c[k], 1, one, NULL, 0);
    for (size_t i = 0; i < nf; i++) prod[i] *= 1.0 - cf[k] + cf[k] * one[i];
  }
  dt_model_free(mf);
  for (size_t i = 0; i < nf; i++) {
    double sig = fw[i] / R / (2.0 * sqrt(2.0 * log(2.0)));
    int hw = (int)ceil(6.0 * sig / step);
    double s = 0, ws = 0;
    for (int j = -hw; j <= hw; j++) {
      long q = (long)i + j;
      if (q < 0 || q >= (long)nf) continue;
      double x = (double)j * step / sig, g = exp(-0.5 * x * x);
      s += g * prod[q];
      ws += g;
    }
    conv[i] = s / ws;
  }
  for (size_t i = 0; i < p->n; i++) {
    double a = i ? 0.5 * (p->wave[i - 1] + p->wave[i]) : p->wave[0] - 0.5 * (p->wave[1] - p->wave[0]);
    double b = i + 1 < p->n ? 0.5 * (p->wave[i] + p->wave[i + 1])
                            : p->wave[i] + 0.5 * (p->wave[i] - p->wave[i - 1]);
    double s = 0;
    size_t m = 0;
    for (size_t q = 0; q < nf; q++)
      if (fw[q] >= a && fw[q] < b) { s += conv[q]; m++; }
    out[i] = m ? s / (double)m : NAN;
  }
  free(fw); free(prod); free(one); free(conv);
}

static double max_diff(const double *a, const double *b, size_t n) {
  double m = 0;
  for (size_t i = 0; i < n; i++) m = fmax(m, fabs(a[i] - b[i]));
  return m;
}

static void test_combination(void) {
  dt_doublet d = nai();
  double R = 30000;
  pix p = make(&d, 5885.0, 5904.0, 0.05, R);
  dt_cover_work *cw = dt_cover_alloc(p.n, DT_MAX_COMP);
  double *f = malloc(p.n * sizeof(double)), *ref = malloc(p.n * sizeof(double));
  double lN = logN_for_tau(&d, 4.0, 5.0);

  /* one component: exact up to the reference's own sampling */
  dt_component c1[1] = {{lN, 5.0, 0.0}};
  double cf1[1] = {0.6};
  CHECK(dt_cover_eval(cw, NULL, p.m1, c1, cf1, NULL, 1, f, NULL, 0, NULL) == DT_OK, "eval one");
  reference(&d, &p, c1, cf1, 1, R, ref);
  double e1 = max_diff(f, ref, p.n);
  printf("# one covered component: max |F - reference| = %.2e\n", e1);
  CHECK(e1 < 1e-3, "one covered component is exact (%.1e)", e1);

  /* one covered + one uncovered, far apart: exact too */
  dt_component c2[2] = {{lN, 5.0, -60.0}, {lN, 5.0, 60.0}};
  double cf2[2] = {0.6, 1.0};
  unsigned char cov[2] = {1, 0};
  CHECK(dt_cover_eval(cw, p.m, p.m1, c2, cf2, cov, 2, f, NULL, 0, NULL) == DT_OK, "eval mixed");
  reference(&d, &p, c2, cf2, 2, R, ref);
  double e2 = max_diff(f, ref, p.n);
  CHECK(e2 < 1e-3, "separated covered and uncovered components are exact (%.1e)", e2);

  /* two covered components at growing separations: the product of the
   * pixel fluxes against the pixel flux of the product */
  static const double sep[] = {0, 5, 10, 20, 30, 40};
  double err[6];
  for (int s = 0; s < 6; s++) {
    dt_component cc[2] = {{lN, 5.0, -0.5 * sep[s]}, {lN, 5.0, 0.5 * sep[s]}};
    double cfc[2] = {0.6, 0.7};
    dt_cover_eval(cw, NULL, p.m1, cc, cfc, NULL, 2, f, NULL, 0, NULL);
    reference(&d, &p, cc, cfc, 2, R, ref);
    err[s] = max_diff(f, ref, p.n);
    printf("# two covered components %2.0f km/s apart (b = 5, FWHM %.1f km/s): "
           "max error %.2e\n", sep[s], C_KMS / R, err[s]);
  }
  /* bounds stated in cover.h: overlapping (within FWHM + 2 (b1 + b2) =
   * 30 km/s) up to 0.07; 30 km/s apart below 3e-3; 40 km/s below 1e-3 */
  for (int s = 0; s < 4; s++)
    CHECK(err[s] < 0.07, "%.0f km/s apart: error below 0.07 (%.1e)", sep[s], err[s]);
  CHECK(err[4] < 3e-3, "30 km/s apart: error below 3e-3 (%.1e)", err[4]);
  CHECK(err[5] < 1e-3, "40 km/s apart: exact (%.1e)", err[5]);
  CHECK(err[0] > 1e-2, "the overlap error is real and measured (%.1e)", err[0]);

  free(f); free(ref);
  dt_cover_free(cw);
  unmake(&p);
}

static void test_jacobian(void) {
  dt_doublet d = nai();
  pix p = make(&d, 5885.0, 5904.0, 0.05, 30000);
  dt_cover_work *cw = dt_cover_alloc(p.n, DT_MAX_COMP);
  size_t n = p.n, nc = 3, ldj = 3 * nc;
  dt_component c[3] = {{12.9, 6.0, -20.0}, {12.5, 4.0, 8.0}, {12.2, 9.0, 30.0}};
  double cf[3] = {0.55, 1.0, 0.8};
  unsigned char cov[3] = {1, 0, 1};
  double *f = malloc(n * sizeof(double)), *fp = malloc(n * sizeof(double));
  double *fm = malloc(n * sizeof(double));
  double *jac = malloc(n * ldj * sizeof(double)), *jcf = malloc(n * nc * sizeof(double));
  CHECK(dt_cover_eval(cw, p.m, p.m1, c, cf, cov, nc, f, jac, ldj, jcf) == DT_OK, "eval jac");
  double worst = 0, scale = 0;
  for (size_t k = 0; k < nc; k++) {
    for (int q = 0; q < 4; q++) {
      dt_component cp[3], cm[3];
      double cfp[3], cfm[3];
      memcpy(cp, c, sizeof cp); memcpy(cm, c, sizeof cm);
      memcpy(cfp, cf, sizeof cfp); memcpy(cfm, cf, sizeof cfm);
      double h = q == 0 ? 1e-4 : q == 1 ? 1e-4 : q == 2 ? 1e-4 : 1e-5;
      if (q == 0) { cp[k].logN += h; cm[k].logN -= h; }
      if (q == 1) { cp[k].b += h; cm[k].b -= h; }
      if (q == 2) { cp[k].v += h; cm[k].v -= h; }
      if (q == 3) {
        if (!cov[k]) continue;
        cfp[k] += h; cfm[k] -= h;
      }
      dt_cover_eval(cw, p.m, p.m1, cp, cfp, cov, nc, fp, NULL, 0, NULL);
      dt_cover_eval(cw, p.m, p.m1, cm, cfm, cov, nc, fm, NULL, 0, NULL);
      for (size_t i = 0; i < n; i++) {
        double fd = (fp[i] - fm[i]) / (2 * h);
        double an = q < 3 ? jac[i * ldj + 3 * k + (size_t)q] : jcf[i * nc + k];
        worst = fmax(worst, fabs(fd - an));
        scale = fmax(scale, fabs(fd));
      }
    }
  }
  printf("# Jacobian: max |analytic - finite difference| = %.2e of max %.2e\n", worst, scale);
  CHECK(worst < 1e-4 * scale, "analytic Jacobian matches finite differences");
  free(f); free(fp); free(fm); free(jac); free(jcf);
  dt_cover_free(cw);
  unmake(&p);
}

static void test_closed_form(void) {
  /* the formula itself: I = 1 - C + C x^k for k = 1 (weak) and 2 (strong) */
  double C = 0.63, x = exp(-1.7);
  CHECK_CLOSE(dt_cover_closed_form(1 - C + C * x * x, 1 - C + C * x), C, 1e-12,
              "Hamann et al. 1997 eq. 3 on exact intensities");
  CHECK(isnan(dt_cover_closed_form(0.5, 0.8)), "ratio outside the physical range: NaN");
  /* the flag's rules (cover.h; thresholds common practice) */
  dt_doublet d = nai();
  dt_component sat = {logN_for_tau(&d, 3.0, 10.0), 10.0, 0.0};
  dt_component thin = {logN_for_tau(&d, 0.2, 10.0), 10.0, 0.0};
  CHECK(dt_cover_flag(&d, &sat, 0.02, 0.6, 0.05, 5.0) == DT_CF_PARTIAL, "flag: 0.6+-0.05 partial");
  CHECK(dt_cover_flag(&d, &sat, 0.02, 0.9, 0.05, 5.0) == DT_CF_NONE, "flag: 0.9+-0.05 consistent with 1");
  CHECK(dt_cover_flag(&d, &sat, 0.02, 0.6, 0.31, 5.0) == DT_CF_UNCONSTRAINED, "flag: error > 0.3");
  CHECK(dt_cover_flag(&d, &sat, 0.02, 0.1, 0.06, 5.0) == DT_CF_UNCONSTRAINED, "flag: error > half C_f");
  CHECK(dt_cover_flag(&d, &sat, 1.5, 0.6, 0.05, 5.0) == DT_CF_UNCONSTRAINED, "flag: log N error > 1 dex");
  CHECK(dt_cover_flag(&d, &thin, 0.02, 0.6, 0.05, 5.0) == DT_CF_UNCONSTRAINED, "flag: thin weaker line");
  CHECK(dt_cover_flag(NULL, &thin, NAN, 0.6, 0.05, 5.0) == DT_CF_PARTIAL, "flag: no doublet, no thin test");
  CHECK(dt_cover_flag(&d, &sat, 0.02, 0.6, INFINITY, 5.0) == DT_CF_UNCONSTRAINED, "flag: infinite error");
  /* b = 10 km/s: Doppler FWHM 16.7 km/s, resolved by an LSF of 15 km/s, not by 20 */
  CHECK(dt_cover_flag(&d, &sat, 0.02, 0.6, 0.05, 15.0) == DT_CF_PARTIAL, "flag: resolved (FWHM 15)");
  CHECK(dt_cover_flag(&d, &sat, 0.02, 0.6, 0.05, 20.0) == DT_CF_UNCONSTRAINED, "flag: unresolved (FWHM 20)");
  CHECK(dt_cover_flag(&d, &sat, 0.02, 0.6, 0.05, 0.0) == DT_CF_PARTIAL, "flag: no LSF known, no test");
  CHECK_CLOSE(dt_cover_lsf_fwhm(3000, 0), 99.930819, 1e-5, "LSF FWHM c/R");
  CHECK_CLOSE(dt_cover_lsf_fwhm(0, 7.5), 7.5, 0, "LSF FWHM given");
  CHECK(strcmp(dt_cover_flag_name(DT_CF_PARTIAL), "partial") == 0 &&
            strcmp(dt_cover_flag_name(DT_CF_UNCONSTRAINED), "unconstrained") == 0,
        "flag names");
}

typedef struct fitcase {
  double cf_fit, cf_err, cf_closed, logN;
  int flag, status;
} fitcase;

/* One noisy realisation of a single component (logN from tau0 of the weaker
 * line, b) with covering factor cf at S/N snr, fitted with covering. */
static fitcase fit_one(const dt_doublet *d, pix *p, dt_fit_workspace *fw, dt_cover_work *cw,
                       double tau0, double b, double cf, double snr, gsl_rng *r) {
  fitcase out;
  memset(&out, 0, sizeof out);
  size_t n = p->n;
  double *truth = malloc(n * sizeof(double)), *y = malloc(n * sizeof(double));
  double *sg = malloc(n * sizeof(double));
  dt_component c = {logN_for_tau(d, tau0, b), b, 3.0};
  dt_cover_eval(cw, NULL, p->m1, &c, &cf, NULL, 1, truth, NULL, 0, NULL);
  for (size_t i = 0; i < n; i++) {
    sg[i] = 1.0 / snr;
    y[i] = truth[i] + gsl_ran_gaussian(r, sg[i]);
  }
  /* closed form from the data: mean of the 3 pixels nearest each centre */
  double ic[2];
  for (int l = 0; l < 2; l++) {
    double lc = dt_wavelength(c.v, d->line[l].lambda0, 0.0);
    size_t best = 0;
    for (size_t i = 0; i < n; i++)
      if (fabs(p->wave[i] - lc) < fabs(p->wave[best] - lc)) best = i;
    ic[l] = (y[best - 1] + y[best] + y[best + 1]) / 3.0;
  }
  out.cf_closed = dt_cover_closed_form(ic[0], ic[1]);

  dt_fit_problem pr;
  memset(&pr, 0, sizeof pr);
  pr.model = p->m;
  pr.cover_model = p->m1;
  pr.covering = 1;
  pr.wave = p->wave;
  pr.flux = y;
  pr.sigma = sg;
  pr.ncomp = 1;
  dt_component start = {c.logN - 0.3, b * 1.3, 0.0};
  pr.comp = &start;
  pr.vlo = -100;
  pr.vhi = 100;
  dt_fit_result res;
  out.status = dt_fit_run(fw, &pr, &res, NULL);
  out.cf_fit = res.cf[0];
  out.cf_err = res.cf_err[0];
  out.logN = res.comp[0].logN;
  out.flag = dt_cover_flag(d, &res.comp[0], res.err[0].logN, res.cf[0], res.cf_err[0],
                           dt_cover_lsf_fwhm(60000, 0));
  free(truth); free(y); free(sg);
  return out;
}

static void test_monte_carlo(void) {
  dt_doublet d = nai();
  /* resolved: R = 60000 (FWHM 5 km/s), b = 10 km/s, 2 km/s pixels */
  pix p = make(&d, 5888.0, 5901.0, 0.04, 60000);
  dt_fit_workspace *fw = dt_fit_alloc(p.n, DT_MAX_COMP, DT_MAX_CONT);
  dt_cover_work *cw = dt_cover_alloc(p.n, 1);
  gsl_rng *r = gsl_rng_alloc(gsl_rng_mt19937);
  gsl_rng_set(r, 20261202);
  int N = 60, ok = 0, within1 = 0, partial = 0, closed_ok = 0, nclosed = 0;
  double sp = 0, sp2 = 0;
  for (int t = 0; t < N; t++) {
    double tau0 = 2.0 + 8.0 * gsl_rng_uniform(r);
    double cf = 0.5 + 0.3 * gsl_rng_uniform(r);
    fitcase f = fit_one(&d, &p, fw, cw, tau0, 10.0, cf, 50.0, r);
    if (f.status != DT_OK || !isfinite(f.cf_err) || !(f.cf_err > 0)) continue;
    ok++;
    double pull = (f.cf_fit - cf) / f.cf_err;
    sp += pull;
    sp2 += pull * pull;
    within1 += fabs(pull) < 1.0;
    partial += f.flag == DT_CF_PARTIAL;
    if (isfinite(f.cf_closed)) {
      nclosed++;
      /* the closed form on three noisy centre pixels is itself uncertain:
       * agreement within 0.1 (common practice for this comparison) */
      closed_ok += fabs(f.cf_closed - f.cf_fit) < 0.1;
    }
  }
  double mean = sp / ok, sd = sqrt(sp2 / ok - mean * mean);
  printf("# Monte Carlo (%d fits): pull mean %.3f, sd %.3f, |pull|<1 in %d, "
         "flagged partial %d, closed form within 0.1 in %d of %d\n",
         ok, mean, sd, within1, partial, closed_ok, nclosed);
  CHECK(ok == N, "every fit converged with a finite C_f error (%d of %d)", ok, N);
  /* for N = 60 the mean of unit-variance pulls has sd 0.13 */
  CHECK(fabs(mean) < 0.4, "C_f unbiased: mean pull %.3f", mean);
  CHECK(sd > 0.7 && sd < 1.4, "C_f errors honest: pull sd %.3f", sd);
  CHECK(within1 >= (int)(0.5 * ok), "about 68%% within 1 sigma (%d of %d)", within1, ok);
  CHECK(partial >= (int)(0.9 * ok), "partial covering detected (%d of %d)", partial, ok);
  CHECK(closed_ok >= (int)(0.9 * nclosed), "fit agrees with Hamann's closed form (%d of %d)",
        closed_ok, nclosed);

  /* the closed form on the noiseless model's centres: the model keeps the
   * relation (resolved lines) */
  double *fl = malloc(p.n * sizeof(double));
  dt_component c = {logN_for_tau(&d, 3.0, 10.0), 10.0, 0.0};
  double cf = 0.65;
  dt_cover_eval(cw, NULL, p.m1, &c, &cf, NULL, 1, fl, NULL, 0, NULL);
  double ic[2];
  for (int l = 0; l < 2; l++) {
    double lc = dt_wavelength(0.0, d.line[l].lambda0, 0.0);
    double best = 1e9;
    for (size_t i = 0; i < p.n; i++)
      if (fabs(p.wave[i] - lc) < best) { best = fabs(p.wave[i] - lc); ic[l] = fl[i]; }
  }
  double cc = dt_cover_closed_form(ic[0], ic[1]);
  printf("# closed form on the model's line centres: C = %.4f (true 0.65)\n", cc);
  CHECK_CLOSE(cc, 0.65, 0.02, "the model obeys Hamann et al.'s relation at line centre");
  free(fl);

  /* thin lines: C_f and N degenerate */
  int unc = 0;
  for (int t = 0; t < 8; t++) {
    fitcase f = fit_one(&d, &p, fw, cw, 0.1, 10.0, 1.0, 50.0, r);
    unc += f.flag == DT_CF_UNCONSTRAINED;
  }
  CHECK(unc == 8, "thin lines: C_f flagged unconstrained (%d of 8)", unc);

  /* C_f = 1: consistent with 1, no flag */
  int none = 0, cons = 0;
  for (int t = 0; t < 12; t++) {
    fitcase f = fit_one(&d, &p, fw, cw, 3.0 + 0.5 * t, 10.0, 1.0, 50.0, r);
    none += f.flag == DT_CF_NONE;
    cons += 1.0 - f.cf_fit <= 3.0 * f.cf_err && f.cf_err < 0.3;
    if (t < 3) printf("# C_f = 1 data: fit %.4f +- %.4f\n", f.cf_fit, f.cf_err);
  }
  CHECK(none == 12, "C_f = 1 data: no flag (%d of 12)", none);
  CHECK(cons == 12, "C_f = 1 data: consistent with 1 within 3 sigma (%d of 12)", cons);

  gsl_rng_free(r);
  dt_cover_free(cw);
  dt_fit_free(fw);
  unmake(&p);
}

static void test_fit_plumbing(void) {
  dt_doublet d = nai();
  pix p = make(&d, 5888.0, 5901.0, 0.04, 60000);
  dt_fit_workspace *fw = dt_fit_alloc(p.n, DT_MAX_COMP, DT_MAX_CONT);
  double *y = malloc(p.n * sizeof(double)), *s = malloc(p.n * sizeof(double));
  for (size_t i = 0; i < p.n; i++) { y[i] = 1; s[i] = 0.02; }
  dt_component c = {12.5, 8.0, 0.0};
  dt_fit_problem pr;
  memset(&pr, 0, sizeof pr);
  pr.model = p.m;
  pr.wave = p.wave;
  pr.flux = y;
  pr.sigma = s;
  pr.ncomp = 1;
  pr.comp = &c;
  pr.vlo = -100;
  pr.vhi = 100;
  pr.covering = 1;
  dt_fit_result r;
  CHECK(dt_fit_run(fw, &pr, &r, NULL) == DT_EINVAL, "covering without a second model: EINVAL");
  pr.covering = 0;
  dt_fit_run(fw, &pr, &r, NULL);
  CHECK(r.covering == 0 && r.cf[0] == 1.0 && r.cf_err[0] == 0.0,
        "without covering: C_f 1, error 0");
  free(y); free(s);
  dt_fit_free(fw);
  unmake(&p);
}

int main(void) {
  test_closed_form();
  test_combination();
  test_jacobian();
  test_fit_plumbing();
  test_monte_carlo();
  return dt_test_done();
}
