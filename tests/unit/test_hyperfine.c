/* Hyperfine structure: the table (the built-in rows against the published
 * ground-level hyperfine constants, every malformed row refused with its
 * line), and the model of a split line: the single line again when b is far
 * above the splitting, the Jacobian of split narrow lines, the equivalent
 * width of a saturated line growing with the splitting, and the bias of b
 * when split data are fitted with single lines.
 *
 * Run with an argument it prints model values for tests/py/hyperfine_ref.py
 * (called by tests/scripts/hyperfine.sh):
 *   test_hyperfine --pixels   the pixel model of split lines at b <= 1 km/s
 *   test_hyperfine --cog      equivalent widths of split and single lines */
#include <math.h>
#include <stdlib.h>
#include <string.h>

#include "doubletty/fit.h"
#include "doubletty/hyperfine.h"
#include "doubletty/model.h"
#include "fixtures.h"
#include "harness.h"

/* Ground-level magnetic dipole constants A [MHz]; for 2S1/2 with I = 3/2
 * the F = 2 and F = 1 levels are 2A apart.  23Na 3s: 885.8130644 MHz; 39K
 * 4s: 230.8598601 MHz (Arimondo, Inguscio & Violino 1977, Rev. Mod. Phys.
 * 49, 31; from memory). */
#define A_NA_MHZ 885.8130644
#define A_K_MHZ 230.8598601

/* K I 7667, 7701: vacuum wavelengths [A], f, Gamma [s^-1] (Morton 2003,
 * ApJS 149, 205; from memory, as in share/doubletty/atomic.dat). */
static dt_doublet ki(void) {
  dt_doublet d;
  memset(&d, 0, sizeof d);
  strcpy(d.name, "KI");
  strcpy(d.line[0].label, "KI 7667");
  d.line[0].lambda0 = 7667.0089;
  d.line[0].f = 0.6700;
  d.line[0].gamma = 3.82e7;
  strcpy(d.line[1].label, "KI 7701");
  d.line[1].lambda0 = 7701.0835;
  d.line[1].f = 0.3327;
  d.line[1].gamma = 3.80e7;
  return d;
}

/* Velocity splitting [km/s] of the ground level at a vacuum wavelength:
 * Delta v = c Delta nu / nu = Delta nu lambda. */
static double split_kms(double a_mhz, double lambda_a) { return 2.0 * a_mhz * 1e6 * lambda_a * 1e-10 * 1e-3; }

/* Two components, shares 5/8 (F = 2, redder) and 3/8 (F = 1), centred on
 * the line: the ground-level split with the weights 2F+1 (common practice). */
static dt_hfs_line two_comp(double dv) {
  dt_hfs_line h;
  memset(&h, 0, sizeof h);
  h.n = 2;
  h.dv[0] = 0.375 * dv;
  h.share[0] = 0.625;
  h.dv[1] = -0.625 * dv;
  h.share[1] = 0.375;
  return h;
}

static double *grid(double lo, double step, size_t n) {
  double *w = malloc(n * sizeof *w);
  for (size_t i = 0; i < n; i++) w[i] = lo + step * i;
  return w;
}

/* Equivalent width [A] over pixels within +-halfwin km/s of lc. */
static double eq_width(const double *wave, const double *flux, size_t n, double lc, double halfwin) {
  double w = 0;
  for (size_t i = 1; i + 1 < n; i++) {
    if (fabs(DT_C_KMS * (wave[i] / lc - 1.0)) > halfwin) continue;
    w += (1.0 - flux[i]) * 0.5 * (wave[i + 1] - wave[i - 1]);
  }
  return w;
}

/* ---- the table ----------------------------------------------------------- */

static void test_builtin(void) {
  dt_hyperfine *t = NULL;
  dt_err e;
  CHECK(dt_hyperfine_load_builtin(&t, &e) == DT_OK, "the built-in hyperfine table loads");
  if (!t) return;
  dt_doublet na = nai(), k = ki();
  struct {
    const dt_doublet *d;
    double a;
  } cases[2] = {{&na, A_NA_MHZ}, {&k, A_K_MHZ}};
  for (int c = 0; c < 2; c++)
    for (int l = 0; l < 2; l++) {
      const dt_line *li = &cases[c].d->line[l];
      const dt_hfs_line *h = dt_hyperfine_find(t, cases[c].d, l);
      CHECK(h && h->n == 2, "%s has two hyperfine components", li->label);
      if (!h || h->n != 2) continue;
      double want = split_kms(cases[c].a, li->lambda0);
      CHECK_CLOSE(h->dv[0] - h->dv[1], want, 2e-5,
                  "%s: components %.5f km/s apart (2A lambda, A = %.7f MHz, Arimondo et al. 1977)",
                  li->label, h->dv[0] - h->dv[1], cases[c].a);
      CHECK_CLOSE(h->share[0], 5.0 / 8.0, 1e-12, "%s: the redder (F = 2) share is 5/8 (2F+1)", li->label);
      CHECK_CLOSE(h->share[1], 3.0 / 8.0, 1e-12, "%s: the bluer (F = 1) share is 3/8 (2F+1)", li->label);
      CHECK_CLOSE(h->share[0] * h->dv[0] + h->share[1] * h->dv[1], 0.0, 1e-5,
                  "%s: the components are centred on the table's wavelength", li->label);
    }
  dt_doublet ca = na;
  strcpy(ca.name, "CaII");
  ca.line[0].lambda0 = 3934.775;
  ca.line[1].lambda0 = 3969.590;
  CHECK(dt_hyperfine_find(t, &ca, 0) == NULL && dt_hyperfine_find(t, &ca, 1) == NULL,
        "a doublet without rows stays single");
  CHECK(dt_hyperfine_find(NULL, &na, 0) == NULL, "no table: single lines");
  for (size_t i = 0; i < dt_hyperfine_count(t); i++)
    CHECK(dt_hyperfine_get(t, i)->source[0] != '\0', "row %zu names its source", i + 1);
  dt_hyperfine_free(t);
}

static void test_bad_rows(void) {
  const char *good = "NaI 5891.5833 +0.39:0.625 -0.65:0.375 a source\n";
  struct {
    const char *text, *where, *what;
  } cases[] = {
      {"# c\nNaI 5891.5833 a source\n", "line 2", "no components"},
      {"NaI\n", "line 1", "missing the wavelength"},
      {"NaI -5 0:1 src\n", "line 1", "not a positive number"},
      {"NaI 5891.58 0.1:0.5 0.2:0.4 src\n", "line 1", "sum to"},
      {"NaI 5891.58 x:0.5 0.2:0.5 src\n", "line 1", "offset is not a number"},
      {"NaI 5891.58 0.1:y src\n", "line 1", "share is not a number"},
      {"NaI 5891.58 500:1 src\n", "line 1", "offset beyond"},
      {"NaI 5891.58 0:1.5 src\n", "line 1", "share must lie"},
      {"NaI 5891.58 0:1\n", "line 1", "missing the source"},
      {"\n\nNaI 5891.58 0:1 s\nNaI 5891.60 0:1 s\n", "line 4", "already given on line 3"},
      {"NaI 5891.58 0:0.1 0:0.1 0:0.1 0:0.1 0:0.1 0:0.1 0:0.1 0:0.1 0:0.2 s\n", "line 1",
       "more than 8"},
      {"AVeryLongDoubletName 5891.58 0:1 s\n", "line 1", "longer than"},
  };
  for (size_t c = 0; c < sizeof cases / sizeof *cases; c++) {
    dt_hyperfine *t = dt_hyperfine_new();
    dt_err e;
    dt_hyperfine_parse(t, good, strlen(good), &e);
    int rc = dt_hyperfine_parse(t, cases[c].text, strlen(cases[c].text), &e);
    CHECK(rc == DT_EFORMAT && !strcmp(e.where, cases[c].where) && strstr(e.what, cases[c].what),
          "bad row %zu refused at %s: %s: %s", c + 1, cases[c].where, e.where, e.what);
    CHECK(dt_hyperfine_count(t) == 1, "bad row %zu leaves the table as it was", c + 1);
    dt_hyperfine_free(t);
  }
  dt_hyperfine *t = dt_hyperfine_new();
  dt_err e;
  const char nul[] = "NaI 5891.58 0:1 s\0x\n";
  CHECK(dt_hyperfine_parse(t, nul, sizeof nul - 1, &e) == DT_EFORMAT && strstr(e.what, "NUL"),
        "a NUL byte is refused: %s", e.what);
  /* a later table replaces a line's row (same doublet, wavelength within 0.05 A) */
  const char *a = "NaI 5891.5833 0.4:0.625 -0.65:0.375 first\n";
  const char *b = "nai 5891.60 0:1 second\n";
  CHECK(dt_hyperfine_parse(t, a, strlen(a), &e) == DT_OK &&
            dt_hyperfine_parse(t, b, strlen(b), &e) == DT_OK && dt_hyperfine_count(t) == 1,
        "a row for the same line replaces the earlier one");
  dt_doublet na = nai();
  const dt_hfs_line *h = dt_hyperfine_find(t, &na, 0);
  CHECK(h && h->n == 1 && h->dv[0] == 0.0, "the replacing row is the one found");
  CHECK(dt_hyperfine_find(t, &na, 1) == NULL, "the other line has no row");
  dt_hyperfine_free(t);
  dt_hyperfine *f = NULL;
  CHECK(dt_hyperfine_load("/nonexistent/hyperfine.dat", &f, &e) == DT_EIO && f == NULL,
        "a missing file is DT_EIO: %s", e.what);
}

/* ---- the model ----------------------------------------------------------- */

/* b = 10 km/s, far above the 1.04 km/s splitting of Na I: the split line is
 * the single line to ~1e-3 in tau and W; and better still the single line
 * of b' = sqrt(b^2 + 2 s^2), s^2 = sum share (dv - mean)^2 (variances of
 * convolved profiles add; the Gaussian core of the mixture matches to
 * fourth order in s/b). */
static void test_broad_limit(void) {
  dt_hyperfine *t = NULL;
  dt_err e;
  if (dt_hyperfine_load_builtin(&t, &e) != DT_OK) {
    CHECK(0, "table: %s", e.what);
    return;
  }
  dt_doublet d = nai();
  const size_t n = 6000;
  double *wave = grid(5885.0, 0.003, n), *f1 = malloc(n * sizeof *f1), *f2 = malloc(n * sizeof *f2),
         *f3 = malloc(n * sizeof *f3), *t1 = NULL;
  dt_model_config single = {.doublet = &d, .oversample = 3};
  dt_model_config split = single;
  for (int l = 0; l < 2; l++) split.hfs[l] = dt_hyperfine_find(t, &d, l);
  dt_model *m1 = dt_model_alloc(wave, n, &single, 1, &e);
  dt_model *m2 = dt_model_alloc(wave, n, &split, 1, &e);
  dt_model_info info;
  dt_model_get_info(m2, &info);
  t1 = malloc((info.nfine ? info.nfine : 1) * sizeof *t1);
  const double logNs[3] = {11.0, 12.5, 13.5};
  for (int q = 0; q < 3 && m1 && m2; q++) {
    dt_component c = {logNs[q], 10.0, 0.0};
    dt_model_eval(m1, &c, 1, f1, NULL, 0);
    const double *tau1 = dt_model_fine_tau(m1);
    memcpy(t1, tau1, info.nfine * sizeof *t1);
    dt_model_eval(m2, &c, 1, f2, NULL, 0);
    const double *tau2 = dt_model_fine_tau(m2);
    double top = 0, diff = 0;
    for (size_t j = 0; j < info.nfine; j++) {
      if (t1[j] > top) top = t1[j];
      if (fabs(tau2[j] - t1[j]) > diff) diff = fabs(tau2[j] - t1[j]);
    }
    CHECK(diff < 3e-3 * top, "b = 10, log N %.1f: split tau within %.1e of the single line's peak",
          logNs[q], diff / top);
    /* against the broadened single line */
    const dt_hfs_line *h = split.hfs[0];
    double s2 = 0, mean = h->share[0] * h->dv[0] + h->share[1] * h->dv[1];
    for (int k = 0; k < 2; k++) s2 += h->share[k] * (h->dv[k] - mean) * (h->dv[k] - mean);
    dt_component cb = {logNs[q], sqrt(100.0 + 2.0 * s2), mean};
    dt_model_eval(m1, &cb, 1, f3, NULL, 0);
    double df = 0;
    for (size_t i = 0; i < n; i++)
      if (fabs(f3[i] - f2[i]) > df) df = fabs(f3[i] - f2[i]);
    CHECK(df < 2e-4, "b = 10, log N %.1f: split line = single line of b' = %.4f km/s to %.1e in flux",
          logNs[q], cb.b, df);
    for (int l = 0; l < 2; l++) {
      double W1 = eq_width(wave, f1, n, d.line[l].lambda0, 100.0);
      double W2 = eq_width(wave, f2, n, d.line[l].lambda0, 100.0);
      double W3 = eq_width(wave, f3, n, d.line[l].lambda0, 100.0);
      /* saturated, W grows with b: by ~(b'/b - 1) = 2.5e-3 on the flat part */
      CHECK_REL(W2, W1, q == 0 ? 1e-4 : 3e-3, "b = 10, log N %.1f, %s: W split %.5g mA, single %.5g mA (%+.1e)",
                logNs[q], d.line[l].label, 1e3 * W2, 1e3 * W1, W2 / W1 - 1);
      CHECK_REL(W2, W3, 2e-4, "b = 10, log N %.1f, %s: W split %.5g mA, single of b' %.5g mA (%+.1e)",
                logNs[q], d.line[l].label, 1e3 * W2, 1e3 * W3, W2 / W3 - 1);
    }
  }
  CHECK(m1 && m2, "models allocate");
  dt_model_free(m1);
  dt_model_free(m2);
  dt_hyperfine_free(t);
  free(wave);
  free(f1);
  free(f2);
  free(f3);
  free(t1);
}

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
      double save = *par, h = p == 0 ? 1e-5 : p == 1 ? 1e-5 * save : 1e-5;
      *par = save + h;
      dt_model_eval(m, c, nc, fp, NULL, 0);
      *par = save - h;
      dt_model_eval(m, c, nc, fm, NULL, 0);
      *par = save;
      double big = 0, err = 0;
      for (size_t i = 0; i < n; i++) {
        double fd = (fp[i] - fm[i]) / (2 * h);
        double an = jac[i * 3 * nc + 3 * k + (size_t)p];
        if (fabs(fd) > big) big = fabs(fd);
        if (fabs(fd - an) > err) err = fabs(fd - an);
      }
      if (big > 0 && err / big > worst) worst = err / big;
    }
  free(f);
  free(fp);
  free(fm);
  free(jac);
  return worst;
}

/* The Jacobian of split lines, narrow on the cells (b 0.4-0.8 km/s on
 * 0.05 A pixels) and resolved (0.004 A pixels), with and without an LSF,
 * against central differences. */
static void test_jacobian(void) {
  dt_doublet d = nai();
  dt_hfs_line h0 = two_comp(split_kms(A_NA_MHZ, d.line[0].lambda0));
  dt_hfs_line h1 = two_comp(split_kms(A_NA_MHZ, d.line[1].lambda0));
  const double step[2] = {0.05, 0.004};
  const double R[2] = {0.0, 60000.0};
  dt_component cs[2] = {{11.8, 0.45, 1.3}, {12.4, 0.8, -2.1}};
  for (int s = 0; s < 2; s++)
    for (int r = 0; r < 2; r++) {
      size_t n = (size_t)(14.0 / step[s]);
      double *wave = grid(5886.0, step[s], n);
      dt_model_config cfg = {.doublet = &d, .resolution = R[r], .tau_cut = 1e-12,
                             .hfs = {&h0, &h1}};
      dt_err e;
      dt_model *m = dt_model_alloc(wave, n, &cfg, 2, &e);
      if (!m) {
        CHECK(0, "model allocates: %s", e.what);
        free(wave);
        continue;
      }
      double err = jac_error(m, cs, 2, n);
      CHECK(err < 1e-4, "split lines, %.3f A pixels, R = %g: Jacobian matches central differences (%.2g)",
            step[s], R[r], err);
      dt_model_free(m);
      free(wave);
    }
}

/* W of a line split by k times the Na I splitting, b = 0.5, no LSF. */
static double w_split(const double *wave, size_t n, double *flux, double logN, double kfac) {
  dt_doublet d = nai();
  dt_hfs_line h0 = two_comp(kfac * split_kms(A_NA_MHZ, d.line[0].lambda0));
  dt_hfs_line h1 = two_comp(kfac * split_kms(A_NA_MHZ, d.line[1].lambda0));
  dt_model_config cfg = {.doublet = &d, .oversample = 2, .hfs = {&h0, &h1}};
  dt_err e;
  dt_model *m = dt_model_alloc(wave, n, &cfg, 1, &e);
  if (!m) return NAN;
  dt_component c = {logN, 0.5, 0.0};
  double W = NAN;
  if (dt_model_eval(m, &c, 1, flux, NULL, 0) == DT_OK) W = eq_width(wave, flux, n, d.line[0].lambda0, 100.0);
  dt_model_free(m);
  return W;
}

/* A saturated narrow line's W grows with its splitting: each component is
 * a weaker line, and apart they absorb over a wider range (the flat part
 * of the curve of growth, where W ~ b sqrt(ln tau0), is left for two
 * lines); for thin gas W is N f lambda^2 whatever the splitting
 * (Spitzer 1978, eq. 3-48). */
static void test_split_grows_w(void) {
  const size_t n = 8000;
  double *wave = grid(5888.0, 0.001, n), *flux = malloc(n * sizeof *flux);
  const double k[4] = {0.0, 0.5, 1.0, 2.0};
  double W[4];
  for (int i = 0; i < 4; i++) W[i] = w_split(wave, n, flux, 12.5, k[i]);
  CHECK(W[0] < W[1] && W[1] < W[2] && W[2] < W[3],
        "log N 12.5, b = 0.5: W grows with the splitting: %.3f, %.3f, %.3f, %.3f mA (x 0, 0.5, 1, 2)",
        1e3 * W[0], 1e3 * W[1], 1e3 * W[2], 1e3 * W[3]);
  CHECK(W[2] > 1.2 * W[0], "log N 12.5, b = 0.5: the Na I splitting adds %.0f%% to W", 100 * (W[2] / W[0] - 1));
  /* log N 8.5: tau0 = 0.0036 at b = 0.5: saturation lowers W by 0.13%, the
   * default tau cut (1e-5) drops 0.06% of the Gaussian's area, and 8.85e-21
   * is rounded (8.8525e-21): 0.3% in all */
  double t0 = w_split(wave, n, flux, 8.5, 0.0), t1 = w_split(wave, n, flux, 8.5, 1.0);
  double wl = 8.85e-21 * pow(10.0, 8.5) * 0.6408 * 5891.5833 * 5891.5833; /* Spitzer 1978, eq. 3-48 */
  CHECK_REL(t1, wl, 4e-3, "log N 8.5 (thin): split W %.5g mA = N f lambda^2 (%.5g mA)", 1e3 * t1, 1e3 * wl);
  CHECK_REL(t0, wl, 4e-3, "log N 8.5 (thin): single W %.5g mA = N f lambda^2 (%.5g mA)", 1e3 * t0, 1e3 * wl);
  CHECK(t1 >= t0, "log N 8.5: even here the split line saturates less");
  free(wave);
  free(flux);
}

/* Noise-free split data (b_true, R = 100000, 0.01 A pixels) fitted with
 * split lines and with single lines.  Single lines take up the splitting
 * in b: for thin gas the best single line matches the profile's second
 * moment, b_fit^2 = b^2 + 2 s^2 (s^2 the variance of the components, 0.255
 * km^2/s^2 for Na I). */
static void fit_bias(double logN, double btrue, double *b_split, double *b_single) {
  dt_doublet d = nai();
  dt_hfs_line h0 = two_comp(split_kms(A_NA_MHZ, d.line[0].lambda0));
  dt_hfs_line h1 = two_comp(split_kms(A_NA_MHZ, d.line[1].lambda0));
  const size_t n = 1800;
  double *wave = grid(5886.0, 0.01, n), *flux = malloc(n * sizeof *flux), *sig = malloc(n * sizeof *sig);
  dt_model_config cs = {.doublet = &d, .resolution = 100000, .hfs = {&h0, &h1}};
  dt_model_config c1 = {.doublet = &d, .resolution = 100000};
  dt_err e;
  dt_model *ms = dt_model_alloc(wave, n, &cs, 1, &e), *m1 = dt_model_alloc(wave, n, &c1, 1, &e);
  dt_fit_workspace *w = dt_fit_alloc(n, 1, 0);
  *b_split = *b_single = NAN;
  dt_component truth = {logN, btrue, 0.0};
  if (ms && m1 && w && dt_model_eval(ms, &truth, 1, flux, NULL, 0) == DT_OK) {
    for (size_t i = 0; i < n; i++) sig[i] = 0.002;
    for (int which = 0; which < 2; which++) {
      dt_component start = {logN - 0.3, 3.0, 1.0};
      dt_fit_problem p = {.model = which ? m1 : ms, .wave = wave, .flux = flux, .sigma = sig,
                          .ncomp = 1, .comp = &start, .vlo = -50, .vhi = 50};
      dt_fit_result r;
      if (dt_fit_run(w, &p, &r, &e) == DT_OK) *(which ? b_single : b_split) = r.comp[0].b;
    }
  }
  dt_fit_free(w);
  dt_model_free(ms);
  dt_model_free(m1);
  free(wave);
  free(flux);
  free(sig);
}

static void test_fit_bias(void) {
  const double s2 = 0.625 * 0.375 * pow(split_kms(A_NA_MHZ, 5891.5833), 2);
  const double bs[3] = {0.5, 1.0, 1.5};
  const double logNs[2] = {10.8, 11.8};
  for (int q = 0; q < 2; q++)
    for (int i = 0; i < 3; i++) {
      double bsp, bsi;
      fit_bias(logNs[q], bs[i], &bsp, &bsi);
      CHECK_CLOSE(bsp, bs[i], 0.01, "log N %.1f, b = %.1f: split lines fitted to split data give b = %.4f",
                  logNs[q], bs[i], bsp);
      CHECK(bsi > bs[i] + 0.05, "log N %.1f, b = %.1f: single lines give b = %.4f (%+.3f km/s)",
            logNs[q], bs[i], bsi, bsi - bs[i]);
      if (q == 0)
        CHECK_CLOSE(bsi, sqrt(bs[i] * bs[i] + 2 * s2), 0.05,
                    "log N %.1f, b = %.1f: single-line b near sqrt(b^2 + 2 s^2) = %.4f",
                    logNs[q], bs[i], sqrt(bs[i] * bs[i] + 2 * s2));
    }
}

/* ---- values for the Python reference ------------------------------------- */

/* The pixel model of split lines (components from the published constants,
 * shares 5/8 and 3/8): "case N R OVERSAMPLE DOUBLET logN b v..." then
 * "pix WAVE FLUX" per pixel. */
static int print_pixels(void) {
  dt_doublet na = nai(), k = ki();
  struct {
    const dt_doublet *d;
    double a, lo, step, R;
    size_t n;
    dt_component c[2];
    size_t nc;
  } cases[] = {
      {&na, A_NA_MHZ, 5889.0, 0.005, 0.0, 2000, {{11.5, 0.5, 0.0}}, 1},
      {&na, A_NA_MHZ, 5887.0, 0.02, 100000.0, 700, {{12.0, 0.5, 1.0}}, 1},
      {&na, A_NA_MHZ, 5887.0, 0.05, 40000.0, 300, {{12.3, 0.7, -1.0}, {11.4, 1.0, 4.0}}, 2},
      {&k, A_K_MHZ, 7663.0, 0.03, 80000.0, 1400, {{11.6, 0.3, 0.5}}, 1},
  };
  for (size_t c = 0; c < sizeof cases / sizeof *cases; c++) {
    const dt_doublet *d = cases[c].d;
    dt_hfs_line h0 = two_comp(split_kms(cases[c].a, d->line[0].lambda0));
    dt_hfs_line h1 = two_comp(split_kms(cases[c].a, d->line[1].lambda0));
    double *wave = grid(cases[c].lo, cases[c].step, cases[c].n), *flux = malloc(cases[c].n * sizeof *flux);
    dt_model_config cfg = {.doublet = d, .resolution = cases[c].R, .tau_cut = 1e-9, .hfs = {&h0, &h1}};
    dt_err e;
    dt_model *m = dt_model_alloc(wave, cases[c].n, &cfg, 2, &e);
    if (!m || dt_model_eval(m, cases[c].c, cases[c].nc, flux, NULL, 0) != DT_OK) return 1;
    dt_model_info info;
    dt_model_get_info(m, &info);
    printf("case %zu %.17g %d %s", c, cases[c].R, info.oversample, d->name);
    for (size_t j = 0; j < cases[c].nc; j++)
      printf(" %.17g %.17g %.17g", cases[c].c[j].logN, cases[c].c[j].b, cases[c].c[j].v);
    printf("\n");
    for (size_t i = 0; i < cases[c].n; i++) printf("pix %.17g %.17g\n", wave[i], flux[i]);
    dt_model_free(m);
    free(wave);
    free(flux);
  }
  return 0;
}

/* The curve of growth of Na I D2 at b = 0.5 km/s: "cog logN W_split W_single" [A]. */
static int print_cog(void) {
  const size_t n = 8000;
  double *wave = grid(5888.0, 0.001, n), *flux = malloc(n * sizeof *flux);
  for (double logN = 10.0; logN <= 14.01; logN += 0.5)
    printf("cog %.3f %.17g %.17g\n", logN, w_split(wave, n, flux, logN, 1.0), w_split(wave, n, flux, logN, 0.0));
  free(wave);
  free(flux);
  return 0;
}

int main(int argc, char **argv) {
  if (argc > 1 && strcmp(argv[1], "--pixels") == 0) return print_pixels();
  if (argc > 1 && strcmp(argv[1], "--cog") == 0) return print_cog();
  test_builtin();
  test_bad_rows();
  test_broad_limit();
  test_jacobian();
  test_split_grows_w();
  test_fit_bias();
  return dt_test_done();
}
