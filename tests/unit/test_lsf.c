/* Sources of the line-spread function (lsf.h): R(lambda) tables (reading,
 * linear interpolation, every bad input), widths per pixel from FITS table
 * columns written here with cfitsio, values per doublet, and the analysis
 * taking the widths per pixel (or the judgement's value when told to). */
#include <fitsio.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>

#include "doubletty/analysis.h"
#include "doubletty/atomic.h"
#include "doubletty/judge.h"
#include "doubletty/lsf.h"
#include "doubletty/spectrum.h"
#include "harness.h"

static dt_lsf_table *table(const char *text, dt_err *e) {
  dt_lsf_table *t = NULL;
  dt_lsf_table_read_mem(text, strlen(text), "r.txt", &t, e);
  return t;
}

static void test_table(void) {
  dt_err e;
  dt_lsf_table *t = table("# wavelength R\n3800 3000\n\n5000  4000 # comment\n6000\t6000\n", &e);
  CHECK(t != NULL, "a table with comments, blank lines and tabs is read (%s)", t ? "" : e.what);
  if (!t) return;
  double R = 0;
  /* linear interpolation between (5000, 4000) and (6000, 6000): at 5892.5,
   * 4000 + 2000 * 892.5/1000 = 5785 (the definition; common practice) */
  CHECK(dt_lsf_table_R(t, 5892.5, &R, &e) == DT_OK && fabs(R - 5785.0) < 1e-9,
        "R(5892.5 A) = 5785 (linear between the points; got %.6f)", R);
  CHECK(dt_lsf_table_R(t, 3800, &R, &e) == DT_OK && R == 3000 &&
            dt_lsf_table_R(t, 6000, &R, &e) == DT_OK && R == 6000,
        "the end points are inside");
  int rc = dt_lsf_table_R(t, 3799.5, &R, &e);
  CHECK(rc == DT_ERANGE && strstr(e.what, "r.txt") && strstr(e.what, "3799.5") &&
            strstr(e.what, "3800-6000"),
        "outside: an error naming the table, the wavelength and the range (%s)", e.what);
  /* applied to a spectrum: FWHM = c / R at each pixel, NaN outside */
  dt_spectrum *s = dt_spectrum_alloc(3);
  s->wave[0] = 3700;
  s->wave[1] = 4400;
  s->wave[2] = 5500;
  CHECK(dt_lsf_table_apply(t, s, &e) == DT_OK && isnan(s->lsf_fwhm_kms[0]) &&
            fabs(s->lsf_fwhm_kms[1] - DT_C_KMS / 3500.0) < 1e-9 &&
            fabs(s->lsf_fwhm_kms[2] - DT_C_KMS / 5000.0) < 1e-9 && strstr(s->lsf_from, "r.txt"),
        "applied: c/R at each pixel, NaN beyond the table, source named (%s)", s->lsf_from);
  CHECK(dt_lsf_first_bad(s, 0, 3) == 0 && dt_lsf_first_bad(s, 1, 2) == 2,
        "the first pixel without a width is found");
  dt_spectrum_free(s);
  dt_lsf_table_free(t);

  const struct {
    const char *text, *want, *why;
  } bad[] = {
      {"5000 4000\n4900 4100\n", "line 2: wavelengths must increase", "unsorted"},
      {"5000 4000\n5000 4100\n", "line 2: wavelengths must increase", "a repeated wavelength"},
      {"5000 4000\n5100 abc\n", "line 2: R = 'abc' is not a positive", "a non-numeric R"},
      {"5000 4000\nfoo 4100\n", "line 2: wavelength 'foo'", "a non-numeric wavelength"},
      {"5000 0\n5100 4100\n", "line 1: R = '0' is not a positive", "R = 0"},
      {"5000 4000\n5100 -2\n", "line 2: R = '-2' is not a positive", "R < 0"},
      {"5000 4000\n5100 nan\n", "line 2: R = 'nan'", "R = nan"},
      {"5000 4000 12\n", "line 1: expected two columns", "three columns"},
      {"5000\n", "line 1: expected two columns", "one column"},
      {"# nothing\n5000 4000\n", "1 point: a resolution table needs at least 2", "one point"},
      {"", "0 points", "empty"},
  };
  for (size_t k = 0; k < sizeof bad / sizeof *bad; k++) {
    dt_err be;
    dt_lsf_table *bt = table(bad[k].text, &be);
    char msg[400];
    snprintf(msg, sizeof msg, "%s%s%s", be.where, be.where[0] ? ": " : "", be.what);
    CHECK(!bt && strstr(msg, bad[k].want), "%s refused: %s", bad[k].why, msg);
    dt_lsf_table_free(bt);
  }
  dt_lsf_table *nt = NULL;
  CHECK(dt_lsf_table_read("/nonexistent/r.txt", &nt, &e) == DT_EIO && !nt,
        "a missing file: cannot open (%s)", e.what);
}

static void test_per_doublet(void) {
  dt_lsf_per p;
  dt_err e;
  CHECK(dt_lsf_per_parse("NaI:4800,CaII:3600,3000", "R", &p, &e) == DT_OK && p.n == 3,
        "NaI:4800,CaII:3600,3000 parsed");
  CHECK(dt_lsf_per_get(&p, "NaI") == 4800 && dt_lsf_per_get(&p, "ca ii") == 3600 &&
            dt_lsf_per_get(&p, "KI") == 3000,
        "named doublets (case and spaces ignored), the plain value for the others");
  CHECK(dt_lsf_per_parse("NaI:4800", "R", &p, &e) == DT_OK && dt_lsf_per_get(&p, "KI") == 0,
        "no plain value: 0 for doublets not named");
  CHECK(dt_lsf_per_parse("4000", "R", &p, &e) == DT_OK && dt_lsf_per_get(&p, "NaI") == 4000,
        "a plain value for all");
  const char *bad[] = {"NaI:", "NaI:-3", ":4000", "NaI:4000,NaI:5000", "NaI:4000,,3000", "x", ""};
  for (size_t k = 0; k < sizeof bad / sizeof *bad; k++)
    CHECK(dt_lsf_per_parse(bad[k], "R", &p, &e) == DT_EINVAL, "'%s' refused (%s)", bad[k], e.what);
}

/* A FITS binary table of n pixels (WAVE, FLUX, ERR and one line-spread
 * column name/unit/values), written with cfitsio. */
static int write_table(const char *path, const double *w, size_t n, const char *col, const char *unit,
                       const double *v) {
  fitsfile *f;
  int st = 0;
  char *ttype[] = {"WAVE", "FLUX", "ERR", (char *)col};
  char *tform[] = {"1D", "1D", "1D", "1D"};
  char *tunit[] = {"Angstrom", "", "", (char *)unit};
  unlink(path);
  fits_create_file(&f, path, &st);
  fits_create_tbl(f, BINARY_TBL, (LONGLONG)n, 4, ttype, tform, tunit, "SPEC", &st);
  double *one = malloc(n * sizeof *one), *err = malloc(n * sizeof *err);
  for (size_t i = 0; i < n; i++) one[i] = 1.0, err[i] = 0.01;
  fits_write_col(f, TDOUBLE, 1, 1, 1, (LONGLONG)n, (void *)w, &st);
  fits_write_col(f, TDOUBLE, 2, 1, 1, (LONGLONG)n, one, &st);
  fits_write_col(f, TDOUBLE, 3, 1, 1, (LONGLONG)n, err, &st);
  fits_write_col(f, TDOUBLE, 4, 1, 1, (LONGLONG)n, (void *)v, &st);
  fits_close_file(f, &st);
  free(one);
  free(err);
  return st;
}

static void test_fits_column(void) {
  char path[64];
  snprintf(path, sizeof path, "/tmp/dt-test-lsf-%d.fits", (int)getpid());
  enum { N = 5 };
  double w[N] = {5880, 5885, 5890, 5895, 5900}, v[N];
  const struct {
    const char *col, *unit;
    double val, want_kms; /* value at every pixel, FWHM wanted at 5890 A */
  } cs[] = {
      /* FWHM [km/s] = c FWHM [A] / lambda; sigma: FWHM = 2 sqrt(2 ln 2) sigma
       * (Gaussian; common practice); R: FWHM = c / R */
      {"LSF_FWHM", "Angstrom", 1.25, DT_C_KMS * 1.25 / 5890},
      {"LSF_FWHM", "nm", 0.125, DT_C_KMS * 1.25 / 5890},
      {"LSF_FWHM", "km/s", 60.0, 60.0},
      {"LSF_SIGMA", "Angstrom", 0.5, DT_C_KMS * 0.5 * 2.3548200450309493 / 5890},
      {"LSF_FWHM", "pixel", 2.0, DT_C_KMS * 10.0 / 5890},
      {"RESPOWER", "", 4800, DT_C_KMS / 4800},
      {"RESOLUTION", "", 3600, DT_C_KMS / 3600},
  };
  for (size_t k = 0; k < sizeof cs / sizeof *cs; k++) {
    for (int i = 0; i < N; i++) v[i] = cs[k].val;
    v[4] = -1;  /* no usable value at the last pixel: none there */
    v[1] = NAN; /* nor at the second: interpolated from its neighbours */
    v[0] = 2 * cs[k].val;
    dt_spectrum *s = NULL;
    dt_err e;
    int ok = write_table(path, w, N, cs[k].col, cs[k].unit, v) == 0 &&
             dt_spectrum_read(path, NULL, &s, &e) == DT_OK;
    CHECK(ok && s->lsf_fwhm_kms && fabs(s->lsf_fwhm_kms[2] - cs[k].want_kms) < 1e-9 * cs[k].want_kms &&
              isnan(s->lsf_fwhm_kms[4]) && strstr(s->lsf_from, cs[k].col) &&
              fabs(s->lsf_fwhm_kms[1] - 0.5 * (s->lsf_fwhm_kms[0] + s->lsf_fwhm_kms[2])) <
                  1e-9 * cs[k].want_kms,
          "column %s [%s] read: FWHM %.4f km/s at 5890 A, a gap filled, none past the end (%s)", cs[k].col, cs[k].unit,
          ok && s->lsf_fwhm_kms ? s->lsf_fwhm_kms[2] : NAN, ok ? s->lsf_from : e.what);
    dt_spectrum_free(s);
  }
  /* decreasing wavelengths: the widths turn with the pixels */
  double wr[N] = {5900, 5895, 5890, 5885, 5880}, vr[N] = {5000, 4000, 3000, 2000, 1000};
  dt_spectrum *s = NULL;
  dt_err e;
  int ok = write_table(path, wr, N, "RESPOWER", "", vr) == 0 && dt_spectrum_read(path, NULL, &s, &e) == DT_OK;
  CHECK(ok && s->wave[0] == 5880 && fabs(s->lsf_fwhm_kms[0] - DT_C_KMS / 1000) < 1e-9,
        "decreasing wavelengths: the widths reversed with them");
  dt_spectrum_free(s);
  /* a table given to the reader replaces the column */
  dt_lsf_table *t = table("5000 9000\n6000 9000\n", &e);
  dt_read_opts ro;
  memset(&ro, 0, sizeof ro);
  ro.lsf_table = t;
  ok = dt_spectrum_read(path, &ro, &s, &e) == DT_OK;
  CHECK(ok && fabs(s->lsf_fwhm_kms[0] - DT_C_KMS / 9000) < 1e-9 && strstr(s->lsf_from, "table"),
        "a resolution table given to the reader replaces the column");
  dt_spectrum_free(s);
  dt_lsf_table_free(t);
  /* a unit that is no width */
  for (int i = 0; i < N; i++) v[i] = 1;
  ok = write_table(path, w, N, "LSF_FWHM", "Jy", v) == 0;
  CHECK(ok && dt_spectrum_read(path, NULL, &s, &e) != DT_OK && strstr(e.what, "LSF_FWHM") &&
            strstr(e.what, "Jy"),
        "an unknown unit of the column refused (%s)", e.what);
  /* no such column: no widths */
  ok = write_table(path, w, N, "OTHER", "", v) == 0 && dt_spectrum_read(path, NULL, &s, &e) == DT_OK;
  CHECK(ok && s->lsf_fwhm_kms == NULL, "no line-spread column: no widths per pixel");
  dt_spectrum_free(s);
  unlink(path);
}

/* The analysis: widths per pixel used (and their FWHM at the line
 * reported) unless lsf_constant; a window reaching a pixel without a width
 * is refused naming the source and the wavelength. */
static void test_analysis(void) {
  dt_err e;
  dt_atomic *at = NULL;
  if (dt_atomic_load_builtin(&at, &e) != DT_OK) {
    CHECK(0, "built-in atomic table (%s)", e.what);
    return;
  }
  size_t n = 2000;
  dt_spectrum *s = dt_spectrum_alloc(n);
  for (size_t i = 0; i < n; i++) {
    s->wave[i] = 5800 + 0.1 * (double)i;
    s->flux[i] = 1.0;
    s->sigma[i] = 0.01;
  }
  s->has_sigma = 1;
  dt_lsf_table *t = table("5700 5000\n5950 8000\n", &e);
  dt_lsf_table_apply(t, s, &e);
  dt_analysis *an = dt_analysis_alloc(s, at);
  dt_judgement j;
  dt_judgement_init(&j);
  snprintf(j.doublet, sizeof j.doublet, "NaI");
  j.resolution = 3000;
  dt_analysis_out out;
  int rc = dt_analysis_run(an, &j, &out, &e);
  /* R at 5891.5833 A: 5000 + 3000 (191.5833/250) (linear) */
  double want = DT_C_KMS / (5000 + 3000 * (5891.5833 - 5700) / 250);
  CHECK(rc == DT_OK && fabs(dt_analysis_lsf_fwhm(an) - want) < 0.05 && dt_analysis_lsf_source(an) &&
            strstr(dt_analysis_lsf_source(an), "r.txt"),
        "analysis: widths per pixel from the table (FWHM %.3f km/s at D2, want %.3f)",
        dt_analysis_lsf_fwhm(an), want);
  dt_analysis_opts o;
  dt_analysis_opts_init(&o);
  o.lsf_constant = 1;
  dt_analysis_set_opts(an, &o);
  rc = dt_analysis_run(an, &j, &out, &e);
  CHECK(rc == DT_OK && fabs(dt_analysis_lsf_fwhm(an) - DT_C_KMS / 3000) < 1e-9 &&
            !dt_analysis_lsf_source(an),
        "lsf_constant: the judgement's R 3000");
  dt_analysis_free(an);
  dt_lsf_table_free(t);
  t = table("5885 5000\n5950 8000\n", &e); /* stops short of the window */
  dt_lsf_table_apply(t, s, &e);
  an = dt_analysis_alloc(s, at);
  rc = dt_analysis_run(an, &j, &out, &e);
  CHECK(rc == DT_ERANGE && strstr(e.what, "r.txt") && strstr(e.what, "A from"),
        "a window beyond the table: refused naming the table and the wavelength (%s)", e.what);
  dt_analysis_free(an);
  dt_lsf_table_free(t);
  dt_spectrum_free(s);
  dt_atomic_free(at);
}

int main(void) {
  test_table();
  test_per_doublet();
  test_fits_column();
  test_analysis();
  return dt_test_done();
}
