/* The model with a line-spread width per pixel (dt_model_config.lsf_fwhm_kms):
 * equal widths give the constant model (to rounding); a line far from where the
 * width changes is broadened as by a constant LSF of its own width; bad
 * widths are refused.  With --varying it prints cases for
 * tests/py/lsf_numpy.py, which compares them with a direct numerical
 * convolution with the varying Gaussian (tests/scripts/lsf_numpy.sh). */
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "doubletty/model.h"
#include "harness.h"

/* Na I D2, D1: vacuum wavelength [A], f, Gamma [s^-1] (Morton 2003, ApJS
 * 149, 205) */
static dt_doublet nai(void) {
  dt_doublet d;
  memset(&d, 0, sizeof d);
  snprintf(d.name, sizeof d.name, "NaI");
  d.line[0].lambda0 = 5891.5833;
  d.line[0].f = 0.6408;
  d.line[0].gamma = 6.16e7;
  d.line[1].lambda0 = 5897.5581;
  d.line[1].f = 0.3201;
  d.line[1].gamma = 6.14e7;
  return d;
}

static double *grid(double lo, double step, size_t n) {
  double *w = malloc(n * sizeof *w);
  for (size_t i = 0; i < n; i++) w[i] = lo + step * (double)i;
  return w;
}

/* flux and Jacobian of cfg on wave[n] */
static int eval(const double *wave, size_t n, const dt_model_config *cfg, const dt_component *c,
                size_t nc, double *flux, double *jac, dt_model_info *info) {
  dt_err e;
  dt_model *m = dt_model_alloc(wave, n, cfg, nc, &e);
  if (!m) {
    printf("       alloc: %s\n", e.what);
    return -1;
  }
  int st = dt_model_eval(m, c, nc, flux, jac, 3 * nc);
  if (info) dt_model_get_info(m, info);
  dt_model_free(m);
  return st;
}

/* Equal widths per pixel are the constant model, bit for bit (model.h):
 * resolved lines, lines narrower than the cells (moments and pixel-edge
 * corrections), pixels much finer than the LSF (interpolated cells). */
static void test_equal_widths(void) {
  dt_doublet d = nai();
  struct {
    double R, step;
    size_t n;
    int ovs;
    dt_component c[3];
    size_t nc;
  } cs[] = {
      {20000, 0.1, 660, 5, {{12.3, 5.0, 3.0}, {12.0, 9.0, -215.0}}, 2},
      {3000, 0.5, 300, 5, {{13.5, 0.4, 0.0}, {12.0, 1.2, 27.0}, {12.5, 6.0, -40.0}}, 3},
      {2500, 0.05, 1200, 5, {{12.5, 2.0, 10.0}}, 1},
      {80000, 0.5, 300, 2, {{13.0, 0.5, 13.0}}, 1},
  };
  for (size_t t = 0; t < sizeof cs / sizeof *cs; t++) {
    size_t n = cs[t].n, nc = cs[t].nc;
    double *w = grid(5891.0 - cs[t].step * (double)n / 2, cs[t].step, n);
    double *fw = malloc(n * sizeof *fw), *f1 = malloc(n * sizeof *f1), *f2 = malloc(n * sizeof *f2);
    double *j1 = malloc(n * 3 * nc * sizeof *j1), *j2 = malloc(n * 3 * nc * sizeof *j2);
    for (size_t i = 0; i < n; i++) fw[i] = DT_C_KMS / cs[t].R;
    dt_model_config a = {.doublet = &d, .resolution = cs[t].R, .oversample = cs[t].ovs};
    dt_model_config b = a;
    b.resolution = 0;
    b.lsf_fwhm_kms = fw;
    dt_model_info ia, ib;
    int ok = eval(w, n, &a, cs[t].c, nc, f1, j1, &ia) == DT_OK &&
             eval(w, n, &b, cs[t].c, nc, f2, j2, &ib) == DT_OK;
    double df = 0, dj = 0;
    for (size_t i = 0; i < n; i++) df = fmax(df, fabs(f1[i] - f2[i]));
    for (size_t i = 0; i < n * 3 * nc; i++) dj = fmax(dj, fabs(j1[i] - j2[i]) / (1 + fabs(j1[i])));
    /* the same sums, in another order for the narrow-line corrections */
    CHECK(ok && df <= 1e-13 && dj <= 1e-12,
          "equal widths per pixel = constant R %g (%s): flux and Jacobian the same (%.0e, %.0e)",
          cs[t].R, 
          ia.interpolated ? "interpolated cells" : t == 1 ? "narrow lines, moved kernels" : t == 3 ? "narrow line, LSF below a cell" : "cells", df, dj);
    CHECK(ib.lsf_per_pixel == 1 && ia.lsf_per_pixel == 0 && ib.nfine == ia.nfine &&
              ib.lsf_halfwidth == ia.lsf_halfwidth,
          "same grid, flagged as widths per pixel");
    free(w);
    free(fw);
    free(f1);
    free(f2);
    free(j1);
    free(j2);
  }
}

/* Two regions of different width, a line deep inside each: each line is
 * broadened as by a constant LSF of its region's width (the Gaussian is cut
 * at 4.5 sigma, so pixels whose kernels all lie in one region see that
 * region only; the LSF definition, common practice).  The Jacobian agrees
 * with finite differences. */
static void test_two_regions(void) {
  dt_doublet d = nai();
  size_t n = 1200;
  double *w = grid(5850.0, 0.1, n), *fw = malloc(n * sizeof *fw);
  double R1 = 30000, R2 = 12000;
  for (size_t i = 0; i < n; i++) fw[i] = DT_C_KMS / (w[i] < 5894.5 ? R1 : R2);
  dt_component c[2] = {{12.6, 4.0, 0.0}, {12.4, 6.0, 0.0}};
  double *f = malloc(n * sizeof *f), *fa = malloc(n * sizeof *fa), *fb = malloc(n * sizeof *fb);
  double *jac = malloc(n * 6 * sizeof *jac);
  dt_model_config cv = {.doublet = &d, .lsf_fwhm_kms = fw, .tau_cut = 1e-10};
  dt_model_config ca = {.doublet = &d, .resolution = R1, .tau_cut = 1e-10};
  dt_model_config cb = {.doublet = &d, .resolution = R2, .tau_cut = 1e-10};
  int ok = eval(w, n, &cv, c, 2, f, jac, NULL) == DT_OK && eval(w, n, &ca, c, 2, fa, NULL, NULL) == DT_OK &&
           eval(w, n, &cb, c, 2, fb, NULL, NULL) == DT_OK;
  double da = 0, db = 0, dab = 0;
  for (size_t i = 0; i < n; i++) {
    if (fabs(w[i] - 5891.58) < 1.0) da = fmax(da, fabs(f[i] - fa[i]));
    if (fabs(w[i] - 5897.56) < 1.0) db = fmax(db, fabs(f[i] - fb[i]));
    if (fabs(w[i] - 5891.58) < 1.0) dab = fmax(dab, fabs(fa[i] - fb[i]));
  }
  CHECK(ok && da < 1e-9 && db < 1e-9 && dab > 0.05,
        "D2 seen at R %g, D1 at R %g: each as the constant model of its own R (%.1e, %.1e; the "
        "two R differ by %.2f)",
        R1, R2, da, db, dab);
  /* Jacobian by central differences */
  dt_err e;
  dt_model *m = dt_model_alloc(w, n, &cv, 2, &e);
  double worst = 0, *fp = malloc(n * sizeof *fp), *fm = malloc(n * sizeof *fm);
  const double hstep[3] = {1e-5, 1e-5, 1e-4};
  for (int k = 0; k < 2 && m; k++)
    for (int p = 0; p < 3; p++) {
      dt_component cp[2] = {c[0], c[1]}, cm[2] = {c[0], c[1]};
      double *xp = p == 0 ? &cp[k].logN : p == 1 ? &cp[k].b : &cp[k].v;
      double *xm = p == 0 ? &cm[k].logN : p == 1 ? &cm[k].b : &cm[k].v;
      *xp += hstep[p];
      *xm -= hstep[p];
      dt_model_eval(m, cp, 2, fp, NULL, 0);
      dt_model_eval(m, cm, 2, fm, NULL, 0);
      for (size_t i = 0; i < n; i++)
        worst = fmax(worst, fabs((fp[i] - fm[i]) / (2 * hstep[p]) - jac[i * 6 + 3 * k + p]));
    }
  CHECK(m && worst < 1e-5, "Jacobian with widths per pixel = central differences (%.1e)", worst);
  dt_model_free(m);
  free(fp);
  free(fm);
  free(w);
  free(fw);
  free(f);
  free(fa);
  free(fb);
  free(jac);
}

/* The same with lines narrower than the cells (sub-sampled, with the
 * kernel moved within their cells, or split at pixel edges when the LSF is
 * below a cell): the corrections take the kernel of the line's own region,
 * so each line is again the constant model of its region's width (to the
 * interpolation between tabulated kernels). */
static void test_two_regions_narrow(void) {
  dt_doublet d = nai();
  const double R1[2] = {4500, 60000}, R2[2] = {3000, 90000};
  for (int t = 0; t < 2; t++) {
    size_t n = 240;
    double *w = grid(5834.5, 0.5, n), *fw = malloc(n * sizeof *fw);
    for (size_t i = 0; i < n; i++) fw[i] = DT_C_KMS / (w[i] < 5894.5 ? R1[t] : R2[t]);
    dt_component c[2] = {{13.2, 0.4, 0.0}, {12.4, 0.8, 9.0}};
    double *f = malloc(n * sizeof *f), *fa = malloc(n * sizeof *fa), *fb = malloc(n * sizeof *fb);
    dt_model_config cv = {.doublet = &d, .lsf_fwhm_kms = fw, .tau_cut = 1e-10};
    dt_model_config ca = {.doublet = &d, .resolution = R1[t], .tau_cut = 1e-10};
    dt_model_config cb = {.doublet = &d, .resolution = R2[t], .tau_cut = 1e-10};
    dt_model_info in;
    int ok = eval(w, n, &cv, c, 2, f, NULL, &in) == DT_OK &&
             eval(w, n, &ca, c, 2, fa, NULL, NULL) == DT_OK &&
             eval(w, n, &cb, c, 2, fb, NULL, NULL) == DT_OK;
    double da = 0, db = 0, dab = 0;
    for (size_t i = 0; i < n; i++) {
      if (fabs(w[i] - 5891.58) < 1.5) da = fmax(da, fabs(f[i] - fa[i]));
      if (fabs(w[i] - 5897.56) < 1.5) db = fmax(db, fabs(f[i] - fb[i]));
      if (fabs(w[i] - 5891.58) < 1.5) dab = fmax(dab, fabs(fa[i] - fb[i]));
    }
    /* the moved kernels are tabulated at widths 2% apart and interpolated
     * (model_lsf.c: ~5e-5 of the corrections, which are ~2e-2 here) */
    CHECK(ok && da < 1e-6 && db < 1e-6 && dab > 1e-4,
          "narrow lines, LSF %s a cell: D2 at R %g, D1 at R %g as the constant models (%.1e, "
          "%.1e; the two differ by %.1e)",
          t ? "below" : "above", R1[t], R2[t], da, db, dab);
    free(w);
    free(fw);
    free(f);
    free(fa);
    free(fb);
  }
}

/* The Jacobian of narrow lines under widths varying across the window
 * (their corrections through each cell's kernel) against central
 * differences. */
static void test_narrow_jacobian(void) {
  dt_doublet d = nai();
  size_t n = 240;
  double *w = grid(5834.5, 0.5, n), *fw = malloc(n * sizeof *fw);
  for (size_t i = 0; i < n; i++) fw[i] = DT_C_KMS / (3000.0 + 1500.0 * (double)i / (double)(n - 1));
  dt_component c[2] = {{13.2, 0.4, 0.3}, {12.4, 0.8, 9.0}};
  dt_model_config cv = {.doublet = &d, .lsf_fwhm_kms = fw, .tau_cut = 1e-10};
  dt_err e;
  dt_model *m = dt_model_alloc(w, n, &cv, 2, &e);
  double *f = malloc(n * sizeof *f), *fp = malloc(n * sizeof *fp), *fm = malloc(n * sizeof *fm);
  double *jac = malloc(n * 6 * sizeof *jac), worst = 0, scale = 0;
  int ok = m && dt_model_eval(m, c, 2, f, jac, 6) == DT_OK;
  const double hstep[3] = {1e-5, 1e-6, 1e-5};
  for (int k = 0; k < 2 && ok; k++)
    for (int p = 0; p < 3; p++) {
      dt_component cp[2] = {c[0], c[1]}, cm[2] = {c[0], c[1]};
      double *xp = p == 0 ? &cp[k].logN : p == 1 ? &cp[k].b : &cp[k].v;
      double *xm = p == 0 ? &cm[k].logN : p == 1 ? &cm[k].b : &cm[k].v;
      *xp += hstep[p];
      *xm -= hstep[p];
      dt_model_eval(m, cp, 2, fp, NULL, 0);
      dt_model_eval(m, cm, 2, fm, NULL, 0);
      for (size_t i = 0; i < n; i++) {
        double fd = (fp[i] - fm[i]) / (2 * hstep[p]);
        worst = fmax(worst, fabs(fd - jac[i * 6 + 3 * k + p]));
        scale = fmax(scale, fabs(fd));
      }
    }
  CHECK(ok && worst < 1e-4 * scale, "narrow lines, widths varying: Jacobian = central differences (%.1e of %.1e)",
        worst, scale);
  dt_model_free(m);
  free(w);
  free(fw);
  free(f);
  free(fp);
  free(fm);
  free(jac);
}

static void test_bad_widths(void) {
  dt_doublet d = nai();
  double *w = grid(5880.0, 0.2, 100), fw[100];
  const double bad[] = {0.0, -3.0, NAN, INFINITY};
  for (size_t b = 0; b < sizeof bad / sizeof *bad; b++) {
    for (int i = 0; i < 100; i++) fw[i] = 15.0;
    fw[37] = bad[b];
    dt_model_config cfg = {.doublet = &d, .lsf_fwhm_kms = fw};
    dt_err e;
    dt_model *m = dt_model_alloc(w, 100, &cfg, 1, &e);
    CHECK(!m && e.code == DT_EINVAL && strstr(e.what, "pixel 37"),
          "LSF width %g at one pixel refused, naming the pixel (%s)", bad[b], m ? "" : e.what);
    dt_model_free(m);
  }
  free(w);
}

/* ---- cases for tests/py/lsf_numpy.py ---- */

static int print_varying(void) {
  dt_doublet d = nai();
  struct {
    double R0, R1, step;   /* R from R0 at the first pixel to R1 at the last, linear in lambda */
    size_t n;
    int ovs;
    size_t nc;
    dt_component c[3];
  } cs[] = {
      /* resolved lines, R doubling across the window */
      {20000, 40000, 0.1, 660, 5, 2, {{12.3, 5.0, 3.0}, {12.0, 9.0, -215.0}}},
      /* R falling threefold */
      {15000, 5000, 0.1, 660, 5, 2, {{13.0, 8.0, 0.0}, {12.2, 20.0, 60.0}}},
      /* lines narrower than the cells (sub-sampled, moved kernels) */
      {3000, 4500, 0.5, 300, 5, 3, {{13.5, 0.4, 0.0}, {12.0, 1.2, 27.0}, {12.5, 6.0, -40.0}}},
      /* pixels much finer than the LSF (interpolated cells) */
      {2000, 3000, 0.05, 1400, 5, 1, {{12.8, 6.0, 10.0}}},
  };
  for (size_t t = 0; t < sizeof cs / sizeof *cs; t++) {
    size_t n = cs[t].n;
    double *w = grid(5894.5 - cs[t].step * (double)n / 2, cs[t].step, n);
    double *fw = malloc(n * sizeof *fw), *f = malloc(n * sizeof *f);
    for (size_t i = 0; i < n; i++) {
      double R = cs[t].R0 + (cs[t].R1 - cs[t].R0) * (w[i] - w[0]) / (w[n - 1] - w[0]);
      fw[i] = DT_C_KMS / R;
    }
    dt_model_config cfg = {.doublet = &d, .lsf_fwhm_kms = fw, .oversample = cs[t].ovs,
                           .tau_cut = 1e-12};
    dt_model_info in;
    if (eval(w, n, &cfg, cs[t].c, cs[t].nc, f, NULL, &in) != DT_OK) return 1;
    printf("case %zu npix %zu ncomp %zu ovs %d tau_cut %.17g dy %.17g interp %d", t, n, cs[t].nc,
           in.oversample, in.tau_cut, in.step_kms / DT_C_KMS, in.interpolated);
    for (size_t k = 0; k < cs[t].nc; k++)
      printf(" %.17g %.17g %.17g", cs[t].c[k].logN, cs[t].c[k].b, cs[t].c[k].v);
    printf("\n");
    for (size_t i = 0; i < n; i++) printf("%.17g %.17g %.17g\n", w[i], fw[i], f[i]);
    free(w);
    free(fw);
    free(f);
  }
  return 0;
}

int main(int argc, char **argv) {
  if (argc > 1 && strcmp(argv[1], "--varying") == 0) return print_varying();
  test_equal_widths();
  test_two_regions();
  test_two_regions_narrow();
  test_narrow_jacobian();
  test_bad_widths();
  return dt_test_done();
}
