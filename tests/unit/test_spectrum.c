/* The spectrum readers, through files this test writes with cfitsio and
 * stdio in a temporary directory.
 *
 * Expected wavelengths come from the definitions of the FITS World
 * Coordinate System: linear axis, Greisen & Calabretta 2002 (Paper I,
 * A&A 395, 1061) eq. 3 with CD/CDELT/PC; WAVE-LOG, Greisen et al. 2006
 * (Paper III, A&A 446, 747) eq. 5; log10 axis, lambda = 10^(CRVAL1 +
 * CDELT1 (p - CRPIX1)) (common practice).  Every bad input must give its
 * status code and a message naming the place. */
#include <fitsio.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>

#include <gsl/gsl_randist.h>
#include <gsl/gsl_rng.h>

#include "doubletty/airvac.h"
#include "doubletty/spectrum.h"
#include "harness.h"

static char dir[256];
static char pathbuf[512];

static const char *P(const char *name) {
  snprintf(pathbuf, sizeof pathbuf, "%s/%s", dir, name);
  return pathbuf;
}

/* ---- writers ---------------------------------------------------------- */

typedef struct key {
  const char *name;
  const char *s; /* string value, or NULL for the number d */
  double d;
} key;

static void write_keys(fitsfile *f, const key *k, int *st) {
  for (; k && k->name; k++) {
    if (k->s)
      fits_update_key(f, TSTRING, k->name, (void *)k->s, NULL, st);
    else
      fits_update_key(f, TDOUBLE, k->name, (void *)&k->d, NULL, st);
  }
}

/* Append an image HDU (creating the file when first) holding v[0..n). */
static int add_image(const char *path, int create, const double *v, long n, const key *keys) {
  fitsfile *f;
  int st = 0;
  char p[600];
  if (create) {
    snprintf(p, sizeof p, "!%s", path);
    fits_create_file(&f, p, &st);
  } else {
    fits_open_file(&f, path, READWRITE, &st);
  }
  long nax[1] = {n};
  fits_create_img(f, DOUBLE_IMG, n > 0 ? 1 : 0, nax, &st);
  write_keys(f, keys, &st);
  if (n > 0) fits_write_img(f, TDOUBLE, 1, n, (void *)v, &st);
  fits_close_file(f, &st);
  if (st) fits_report_error(stderr, st);
  return st;
}

static void write_text(const char *path, const char *text) {
  FILE *fp = fopen(path, "w");
  if (!fp) return;
  fputs(text, fp);
  fclose(fp);
}

static void truncate_copy(const char *from_name, const char *to_name, long keep) {
  char from[512], to[512];
  snprintf(from, sizeof from, "%s/%s", dir, from_name);
  snprintf(to, sizeof to, "%s/%s", dir, to_name);
  FILE *a = fopen(from, "rb"), *b = fopen(to, "wb");
  for (long i = 0; a && b && i < keep; i++) {
    int c = fgetc(a);
    if (c == EOF) break;
    fputc(c, b);
  }
  if (a) fclose(a);
  if (b) fclose(b);
}

/* read and expect failure with code; where/what must contain the substrings */
static void expect_err(const char *path, const dt_read_opts *o, int code, const char *where_part,
                       const char *what_part, const char *desc) {
  dt_spectrum *s = (dt_spectrum *)1;
  dt_err e;
  int rc = dt_spectrum_read(path, o, &s, &e);
  int ok = rc == code && s == NULL && e.code == code && (!where_part || strstr(e.where, where_part)) &&
           (!what_part || strstr(e.what, what_part));
  CHECK(ok, "%s: status %d, \"%s: %s\"", desc, rc, e.where, e.what);
}

static dt_spectrum *read_ok(const char *path, const dt_read_opts *o, const char *desc) {
  dt_spectrum *s = NULL;
  dt_err e;
  int rc = dt_spectrum_read(path, o, &s, &e);
  CHECK(rc == DT_OK && s != NULL, "%s read (%s%s%s)", desc, rc ? e.where : "ok", rc ? ": " : "",
        rc ? e.what : "");
  return rc == DT_OK ? s : NULL;
}

/* max |got/want - 1| */
static double max_rel(const double *got, const double *want, size_t n) {
  double m = 0;
  for (size_t i = 0; i < n; i++) {
    double r = fabs(got[i] / want[i] - 1.0);
    if (!(r <= m)) m = r;
  }
  return m;
}

#define N 200

int main(void) {
  snprintf(dir, sizeof dir, "%s/dt-spec-XXXXXX", getenv("TMPDIR") ? getenv("TMPDIR") : "/tmp");
  if (!mkdtemp(dir)) {
    perror("mkdtemp");
    return 1;
  }
  double flux[N], err[N], want[N];
  for (int i = 0; i < N; i++) {
    flux[i] = 100.0 + 0.25 * i + ((i * 7919) % 13) * 0.125; /* exact in binary */
    err[i] = 2.0 + (i % 5) * 0.5;
  }

  /* 1. linear axis, CDELT1 */
  {
    key k[] = {{"CTYPE1", "WAVE", 0}, {"CUNIT1", "Angstrom", 0}, {"CRVAL1", NULL, 5600.0},
               {"CRPIX1", NULL, 1.0},  {"CDELT1", NULL, 0.5},     {"SPECRES", NULL, 2500},
               {"OBJECT", "Sightline 7", 0}, {NULL, NULL, 0}};
    add_image(P("lin.fits"), 1, flux, N, k);
    dt_spectrum *s = read_ok(P("lin.fits"), NULL, "linear image");
    if (s) {
      for (int i = 0; i < N; i++) want[i] = 5600.0 + 0.5 * ((i + 1) - 1.0); /* Paper I eq. 3 */
      CHECK(s->n == N, "linear image: %zu pixels", s->n);
      CHECK(max_rel(s->wave, want, N) < 1e-14, "linear image: wavelengths");
      CHECK(!memcmp(s->flux, flux, sizeof flux), "linear image: flux exactly");
      CHECK(!strcmp(s->layout, "image-linear") && s->hdu == 1 && s->row == 0, "linear image: layout %s",
            s->layout);
      CHECK(s->has_sigma == 0 && !strcmp(s->sigma_from, "estimated"), "no error HDU: sigma estimated");
      CHECK(s->resolution == 2500, "SPECRES read as R");
      CHECK(!strcmp(s->object, "Sightline 7") && s->air == 0, "OBJECT read, vacuum");
      CHECK(dt_spectrum_nmasked(s) == 0, "no masked pixels");
      CHECK_CLOSE(dt_spectrum_pixel_kms(s), 299792.458 * log((5600.0 + 0.5 * 100) / (5600.0 + 0.5 * 99)),
                  0.2, "pixel size near the middle of a linear axis");
      CHECK(dt_spectrum_index(s, 5600.0) == 0 && dt_spectrum_index(s, 5600.25) == 1 &&
                dt_spectrum_index(s, 5600.5) == 1 && dt_spectrum_index(s, 1e9) == N,
            "dt_spectrum_index finds the first pixel >= lambda");
      dt_spectrum_free(s);
    }
  }
  /* 2. CD1_1 (replaces CDELT1), CRPIX1 10, nm, decreasing axis (reversed) */
  {
    key k[] = {{"CTYPE1", "WAVE", 0}, {"CUNIT1", "nm", 0}, {"CRVAL1", NULL, 600.0},
               {"CRPIX1", NULL, 10.0}, {"CD1_1", NULL, -0.01}, {"CDELT1", NULL, 99.0}, {NULL, NULL, 0}};
    add_image(P("cd.fits"), 1, flux, N, k);
    dt_spectrum *s = read_ok(P("cd.fits"), NULL, "CD1_1 nm decreasing");
    if (s) {
      for (int i = 0; i < N; i++) want[N - 1 - i] = 10.0 * (600.0 - 0.01 * ((i + 1) - 10.0));
      CHECK(max_rel(s->wave, want, N) < 1e-14, "CD1_1 in nm, decreasing axis reversed");
      CHECK(s->flux[0] == flux[N - 1] && s->flux[N - 1] == flux[0], "flux reversed with it");
      CHECK(!strcmp(s->unit, "nm"), "unit nm reported");
      dt_spectrum_free(s);
    }
  }
  /* 3. WAVE-LOG (Paper III eq. 5), and CRPIX1 defaulting to 0 (Paper I) */
  {
    key k[] = {{"CTYPE1", "WAVE-LOG", 0}, {"CRVAL1", NULL, 5500.0}, {"CDELT1", NULL, 0.55},
               {NULL, NULL, 0}};
    add_image(P("wlog.fits"), 1, flux, N, k);
    dt_spectrum *s = read_ok(P("wlog.fits"), NULL, "WAVE-LOG image");
    if (s) {
      for (int i = 0; i < N; i++) want[i] = 5500.0 * exp(0.55 * ((i + 1) - 0.0) / 5500.0);
      CHECK(max_rel(s->wave, want, N) < 1e-14, "WAVE-LOG wavelengths, CRPIX1 default 0");
      CHECK(!strcmp(s->layout, "image-log"), "layout image-log");
      /* constant velocity step: c * CDELT1 / CRVAL1 */
      CHECK_REL(dt_spectrum_pixel_kms(s), 299792.458 * 0.55 / 5500.0, 1e-9, "WAVE-LOG pixel size");
      dt_spectrum_free(s);
    }
  }
  /* 4. log10 axis, by DC-FLAG and by CTYPE1 */
  {
    key k[] = {{"CRVAL1", NULL, 3.75}, {"CRPIX1", NULL, 1.0}, {"CDELT1", NULL, 1e-4},
               {"DC-FLAG", NULL, 1}, {NULL, NULL, 0}};
    add_image(P("l10a.fits"), 1, flux, N, k);
    key k2[] = {{"CTYPE1", "LOGLAM", 0}, {"CRVAL1", NULL, 3.75}, {"CRPIX1", NULL, 1.0},
                {"CDELT1", NULL, 1e-4}, {NULL, NULL, 0}};
    add_image(P("l10b.fits"), 1, flux, N, k2);
    for (int i = 0; i < N; i++) want[i] = pow(10.0, 3.75 + 1e-4 * i);
    dt_spectrum *s = read_ok(P("l10a.fits"), NULL, "log10 image (DC-FLAG)");
    if (s) {
      CHECK(max_rel(s->wave, want, N) < 1e-14 && !strcmp(s->layout, "image-log10"), "DC-FLAG = 1: log10");
      /* c ln(10) * 1e-4 per pixel */
      CHECK_REL(dt_spectrum_pixel_kms(s), 299792.458 * log(10.0) * 1e-4, 1e-9, "log10 pixel size");
      dt_spectrum_free(s);
    }
    s = read_ok(P("l10b.fits"), NULL, "log10 image (CTYPE1 LOGLAM)");
    if (s) {
      CHECK(max_rel(s->wave, want, N) < 1e-14, "CTYPE1 LOGLAM: log10");
      dt_spectrum_free(s);
    }
  }
  /* 5. air wavelengths: AWAV, and AIRORVAC = 'air' */
  {
    key k[] = {{"CTYPE1", "AWAV", 0}, {"CRVAL1", NULL, 5880.0}, {"CRPIX1", NULL, 1.0},
               {"CDELT1", NULL, 0.1}, {NULL, NULL, 0}};
    add_image(P("air.fits"), 1, flux, N, k);
    key k2[] = {{"AIRORVAC", "air", 0}, {"CRVAL1", NULL, 5880.0}, {"CRPIX1", NULL, 1.0},
                {"CDELT1", NULL, 0.1}, {NULL, NULL, 0}};
    add_image(P("air2.fits"), 1, flux, N, k2);
    const char *names[] = {"air.fits", "air2.fits"};
    for (int j = 0; j < 2; j++) {
      dt_spectrum *s = read_ok(P(names[j]), NULL, names[j]);
      if (!s) continue;
      double worst = 0;
      for (int i = 0; i < N; i++) {
        double d = fabs(dt_vac_to_air(s->wave[i]) - (5880.0 + 0.1 * i));
        if (d > worst) worst = d;
      }
      CHECK(s->air == 1 && worst < 1e-9, "%s: air flagged, vacuum = air->vac of the axis (%.2g)", names[j],
            worst);
      /* Na I D2 in air (NIST ASD 5889.951) lies 1.632 A below vacuum (Morton 2003 5891.5833) */
      CHECK_CLOSE(s->wave[100] - (5880.0 + 10.0), 1.632, 0.002, "%s: shift near Na I D", names[j]);
      dt_spectrum_free(s);
    }
  }
  /* 5b. who settled air or vacuum: the file, the caller, or nobody */
  {
    dt_read_opts air = {0};
    air.air = 1;
    dt_spectrum *s = read_ok(P("air.fits"), &air, "AWAV, caller says air too");
    if (s) {
      CHECK(s->air == 1 && s->air_from == DT_AIRVAC_FILE, "CTYPE1 AWAV: air declared by the file");
      dt_spectrum_free(s);
    }
    key kw[] = {{"CTYPE1", "WAVE", 0}, {"CRVAL1", NULL, 5880.0}, {"CRPIX1", NULL, 1.0},
                {"CDELT1", NULL, 0.1}, {NULL, NULL, 0}};
    add_image(P("vac.fits"), 1, flux, N, kw);
    s = read_ok(P("vac.fits"), &air, "WAVE, caller says air");
    if (s) {
      CHECK(s->air == 0 && s->air_from == DT_AIRVAC_FILE && s->wave[0] == 5880.0,
            "CTYPE1 WAVE: vacuum declared by the file wins over the caller");
      dt_spectrum_free(s);
    }
    key kl[] = {{"CRVAL1", NULL, 5880.0}, {"CRPIX1", NULL, 1.0}, {"CDELT1", NULL, 0.1}, {NULL, NULL, 0}};
    add_image(P("silent.fits"), 1, flux, N, kl);
    s = read_ok(P("silent.fits"), NULL, "no CTYPE1, no AIRORVAC");
    if (s) {
      CHECK(s->air == 0 && s->air_from == DT_AIRVAC_ASSUMED && s->wave[0] == 5880.0,
            "a silent FITS file: vacuum assumed");
      dt_spectrum_free(s);
    }
    s = read_ok(P("silent.fits"), &air, "no CTYPE1, caller says air");
    if (s) {
      CHECK(s->air == 1 && s->air_from == DT_AIRVAC_CALLER, "a silent FITS file: air from the caller");
      CHECK_CLOSE(s->wave[0], dt_air_to_vac(5880.0), 1e-9, "... and converted to vacuum");
      dt_spectrum_free(s);
    }
    /* Na I D in air (NIST ASD 5889.951, 5895.924) and vacuum (Morton 2003,
     * ApJS 149, 205: 5891.5833, 5897.5581) */
    const char *txt = "# wave flux\n5889.951 1.0\n5895.924 0.9\n5900.000 1.0\n";
    write_text(P("air.txt"), txt);
    s = read_ok(P("air.txt"), &air, "text, caller says air");
    if (s) {
      CHECK(s->air == 1 && s->air_from == DT_AIRVAC_CALLER, "text: air from the caller");
      CHECK_CLOSE(s->wave[0], 5891.5833, 0.002, "text: Na I D2 air 5889.951 -> vacuum 5891.5833");
      CHECK_CLOSE(s->wave[1], 5897.5581, 0.002, "text: Na I D1 air 5895.924 -> vacuum 5897.5581");
      dt_spectrum_free(s);
    }
    s = read_ok(P("air.txt"), NULL, "text, nobody says");
    if (s) {
      CHECK(s->air == 0 && s->air_from == DT_AIRVAC_ASSUMED && s->wave[0] == 5889.951,
            "text: vacuum assumed, wavelengths as written");
      dt_spectrum_free(s);
    }
    dt_err e;
    s = NULL;
    int rc = dt_spectrum_read_mem(txt, strlen(txt), &air, &s, &e);
    CHECK(rc == DT_OK && s && s->air_from == DT_AIRVAC_CALLER && fabs(s->wave[0] - 5891.5833) < 0.002,
          "text from memory: air from the caller, converted");
    dt_spectrum_free(s);
  }
  /* 6. uncertainty images: ERR, IVAR, VARIANCE; MASK image; flux in an
   *    extension after the error image */
  {
    key k[] = {{"CRVAL1", NULL, 5600.0}, {"CRPIX1", NULL, 1.0}, {"CDELT1", NULL, 0.5}, {NULL, NULL, 0}};
    key kerr[] = {{"EXTNAME", "ERR", 0}, {NULL, NULL, 0}};
    key kiv[] = {{"EXTNAME", "IVAR", 0}, {NULL, NULL, 0}};
    key kvar[] = {{"EXTNAME", "FLUX_VARIANCE", 0}, {NULL, NULL, 0}};
    key kmask[] = {{"EXTNAME", "MASK", 0}, {NULL, NULL, 0}};
    key kflux[] = {{"EXTNAME", "FLUX", 0}, {"CRVAL1", NULL, 5600.0}, {"CRPIX1", NULL, 1.0},
                   {"CDELT1", NULL, 0.5}, {NULL, NULL, 0}};
    double iv[N], var[N], mk[N];
    for (int i = 0; i < N; i++) {
      iv[i] = 1.0 / (err[i] * err[i]);
      var[i] = err[i] * err[i];
      mk[i] = (i == 5 || i == 6) ? 4 : 0;
    }
    iv[10] = 0;
    iv[11] = -1;
    add_image(P("ierr.fits"), 1, flux, N, k);
    add_image(P("ierr.fits"), 0, err, N, kerr);
    add_image(P("ierr.fits"), 0, mk, N, kmask);
    dt_spectrum *s = read_ok(P("ierr.fits"), NULL, "image + ERR + MASK");
    if (s) {
      CHECK(!memcmp(s->sigma, err, sizeof err) && s->has_sigma, "ERR image read as sigma exactly");
      CHECK(s->mask[5] && s->mask[6] && dt_spectrum_nmasked(s) == 2, "MASK image: 2 masked");
      CHECK(strstr(s->sigma_from, "HDU 2") && strstr(s->sigma_from, "ERR"), "sigma from: %s",
            s->sigma_from);
      dt_spectrum_free(s);
    }
    add_image(P("iivar.fits"), 1, NULL, 0, NULL);
    add_image(P("iivar.fits"), 0, iv, N, kiv);
    add_image(P("iivar.fits"), 0, flux, N, kflux);
    s = read_ok(P("iivar.fits"), NULL, "empty primary + IVAR + FLUX");
    if (s) {
      double worst = 0;
      for (int i = 0; i < N; i++)
        if (i != 10 && i != 11 && fabs(s->sigma[i] / err[i] - 1) > worst) worst = fabs(s->sigma[i] / err[i] - 1);
      CHECK(s->hdu == 3 && !strcmp(s->extname, "FLUX"), "the FLUX HDU (3) chosen, not IVAR (%d)", s->hdu);
      CHECK(worst < 1e-15, "sigma = 1/sqrt(IVAR)");
      CHECK(s->mask[10] && s->mask[11] && dt_spectrum_nmasked(s) == 2, "IVAR <= 0 masked");
      dt_spectrum_free(s);
    }
    add_image(P("ivar2.fits"), 1, flux, N, k);
    add_image(P("ivar2.fits"), 0, var, N, kvar);
    s = read_ok(P("ivar2.fits"), NULL, "image + FLUX_VARIANCE");
    if (s) {
      CHECK(max_rel(s->sigma, err, N) < 1e-15, "sigma = sqrt(variance)");
      dt_spectrum_free(s);
    }
    /* selectors */
    s = read_ok(P("iivar.fits[FLUX]"), NULL, "selector [FLUX]");
    if (s) {
      CHECK(s->hdu == 3, "[FLUX] is HDU 3");
      dt_spectrum_free(s);
    }
    s = read_ok(P("iivar.fits[2]"), NULL, "selector [2]");
    if (s) {
      CHECK(s->hdu == 3, "[2] (second extension) is HDU 3");
      dt_spectrum_free(s);
    }
    dt_read_opts o = {0};
    o.hdu = 3;
    s = read_ok(P("iivar.fits"), &o, "opts.hdu = 3");
    if (s) dt_spectrum_free(s);
    expect_err(P("iivar.fits[7]"), NULL, DT_ENOTFOUND, NULL, "no HDU 8", "selector [7] beyond the file");
    expect_err(P("iivar.fits[SKY]"), NULL, DT_ENOTFOUND, NULL, "EXTNAME 'SKY'", "selector [SKY] unknown");
    long count = 0;
    dt_err e;
    CHECK(dt_spectrum_count(P("ierr.fits"), NULL, &count, &e) == DT_OK && count == 1, "image counts 1");
  }
  /* 7. binary tables */
  {
    fitsfile *f;
    int st = 0;
    char p[600];
    snprintf(p, sizeof p, "!%s", P("tcol.fits"));
    fits_create_file(&f, p, &st);
    fits_create_img(f, 8, 0, NULL, &st);
    char *tt[] = {"wavelength", "Flux", "ivar", "and_mask"};
    char *tf[] = {"1D", "1E", "1D", "1J"};
    char *tu[] = {"nm", "", "", ""};
    fits_create_tbl(f, BINARY_TBL, N, 4, tt, tf, tu, "SPEC", &st);
    double w[N], iv[N];
    float fl[N];
    int mk[N];
    for (int i = 0; i < N; i++) {
      w[i] = 560.0 + 0.05 * i;
      fl[i] = (float)flux[i];
      iv[i] = i == 3 ? 0.0 : 1.0 / (err[i] * err[i]);
      mk[i] = i == 4 ? 16 : 0;
    }
    fits_write_col(f, TDOUBLE, 1, 1, 1, N, w, &st);
    fits_write_col(f, TFLOAT, 2, 1, 1, N, fl, &st);
    fits_write_col(f, TDOUBLE, 3, 1, 1, N, iv, &st);
    fits_write_col(f, TINT, 4, 1, 1, N, mk, &st);
    fits_close_file(f, &st);
    CHECK(st == 0, "wrote table-columns file");
    dt_spectrum *s = read_ok(P("tcol.fits"), NULL, "table columns");
    if (s) {
      for (int i = 0; i < N; i++) want[i] = 10.0 * w[i];
      CHECK(max_rel(s->wave, want, N) < 1e-15, "table columns: TUNIT nm");
      CHECK(!strcmp(s->layout, "table-columns") && s->hdu == 2 && s->row == 0, "layout table-columns");
      int same = 1;
      for (int i = 0; i < N; i++) same &= s->flux[i] == (double)fl[i];
      CHECK(same, "float flux column read exactly");
      CHECK(s->mask[3] && s->mask[4] && dt_spectrum_nmasked(s) == 2, "IVAR 0 and AND_MASK masked");
      CHECK(strstr(s->sigma_from, "ivar") != NULL, "sigma from %s", s->sigma_from);
      dt_spectrum_free(s);
    }
    dt_read_opts o = {0};
    o.err_col = "and_mask";
    o.mask_col = "nothing";
    expect_err(P("tcol.fits"), &o, DT_ENOTFOUND, "HDU 2", "no mask column 'nothing'", "unknown --mask-col");
    o.mask_col = NULL;
    o.row = 2;
    expect_err(P("tcol.fits"), &o, DT_EINVAL, "HDU 2", "one spectrum in columns", "--row on a column table");

    /* rows with vector columns: LOGLAM, FLUX, ERR */
    snprintf(p, sizeof p, "!%s", P("trows.fits"));
    st = 0;
    fits_create_file(&f, p, &st);
    fits_create_img(f, 8, 0, NULL, &st);
    char *tt2[] = {"LOGLAM", "FLUX", "ERR"};
    char tfd[16];
    snprintf(tfd, sizeof tfd, "%dD", N);
    char *tf2[] = {tfd, tfd, tfd};
    fits_create_tbl(f, BINARY_TBL, 3, 3, tt2, tf2, NULL, "ROWS", &st);
    for (int r = 1; r <= 3; r++) {
      double lw[N], fr[N];
      for (int i = 0; i < N; i++) {
        lw[i] = 3.7 + 0.01 * r + 1e-4 * i;
        fr[i] = flux[i] * r;
      }
      fits_write_col(f, TDOUBLE, 1, r, 1, N, lw, &st);
      fits_write_col(f, TDOUBLE, 2, r, 1, N, fr, &st);
      fits_write_col(f, TDOUBLE, 3, r, 1, N, err, &st);
    }
    fits_close_file(f, &st);
    long count = 0;
    dt_err e;
    CHECK(dt_spectrum_count(P("trows.fits"), NULL, &count, &e) == DT_OK && count == 3, "3 rows counted");
    o = (dt_read_opts){0};
    o.row = 2;
    s = read_ok(P("trows.fits"), &o, "table rows, row 2");
    if (s) {
      for (int i = 0; i < N; i++) want[i] = pow(10.0, 3.72 + 1e-4 * i);
      CHECK(max_rel(s->wave, want, N) < 1e-13, "LOGLAM = log10 Angstrom");
      CHECK(s->flux[17] == 2 * flux[17] && s->row == 2 && !strcmp(s->layout, "table-rows"), "row 2 flux");
      CHECK(!memcmp(s->sigma, err, sizeof err), "ERR column read as sigma");
      dt_spectrum_free(s);
    }
    o.row = 4;
    expect_err(P("trows.fits"), &o, DT_ENOTFOUND, "HDU 2", "row 4 requested, the table has 3 rows",
               "row beyond the table");

    /* variable-length rows; row 2 has a wavelength array one shorter */
    snprintf(p, sizeof p, "!%s", P("tvla.fits"));
    st = 0;
    fits_create_file(&f, p, &st);
    fits_create_img(f, 8, 0, NULL, &st);
    char *tt3[] = {"WAVE", "FLUX"};
    char *tf3[] = {"1PD", "1PD"};
    fits_create_tbl(f, BINARY_TBL, 2, 2, tt3, tf3, NULL, "VLA", &st);
    double wv[N];
    for (int i = 0; i < N; i++) wv[i] = 5000.0 + i;
    fits_write_col(f, TDOUBLE, 1, 1, 1, N, wv, &st);
    fits_write_col(f, TDOUBLE, 2, 1, 1, N, flux, &st);
    fits_write_col(f, TDOUBLE, 1, 2, 1, N - 1, wv, &st);
    fits_write_col(f, TDOUBLE, 2, 2, 1, N, flux, &st);
    fits_close_file(f, &st);
    o.row = 1;
    s = read_ok(P("tvla.fits"), &o, "variable-length row 1");
    if (s) {
      CHECK(s->n == N && s->wave[3] == 5003.0 && s->flux[3] == flux[3], "variable-length arrays read");
      dt_spectrum_free(s);
    }
    o.row = 2;
    expect_err(P("tvla.fits"), &o, DT_EFORMAT, "HDU 2, row 2, column WAVE", "length mismatch",
               "variable-length row with mismatched lengths");
  }
  /* 8. text */
  {
    write_text(P("a.txt"), "# a test spectrum\n"
                           "wave, flux, err\n"
                           "\n"
                           "5003.0, 12.5, 0.5   # last pixel first\n"
                           "5002.0, nan, 0.5\n"
                           "5001.0,\t11.0 ,0.5\n"
                           "5000.0 , 10.0, 0.25\n");
    dt_spectrum *s = read_ok(P("a.txt"), NULL, "CSV text with header and comments");
    if (s) {
      CHECK(s->n == 4 && s->wave[0] == 5000.0 && s->wave[3] == 5003.0 && s->flux[3] == 12.5,
            "text: decreasing order reversed");
      CHECK(s->mask[2] && dt_spectrum_nmasked(s) == 1, "text: NaN flux masked");
      CHECK(s->has_sigma && s->sigma[0] == 0.25 && !strcmp(s->layout, "text") && s->hdu == 0, "text: sigma");
      CHECK_CLOSE(dt_spectrum_median_snr(s), 25.0, 1e-12, "text: median S/N of the unmasked 40, 22, 25 is 25");
      dt_spectrum_free(s);
    }
    write_text(P("b.txt"), "1 1 1 0\n2 2 1 1\n3 3 1 0\n");
    s = read_ok(P("b.txt"), NULL, "text with a mask column");
    if (s) {
      CHECK(s->mask[1] && !s->mask[0] && !s->mask[2], "text: 4th column is the mask");
      dt_spectrum_free(s);
    }
    write_text(P("dup.txt"), "5000 1\n5001 1\n5001 1\n");
    expect_err(P("dup.txt"), NULL, DT_EFORMAT, "line 3", "duplicate wavelength", "duplicate wavelength");
    write_text(P("nonmono.txt"), "# c\n5000 1\n5001 1\n5002 1\n5001.5 1\n");
    expect_err(P("nonmono.txt"), NULL, DT_EFORMAT, "line 5", "not monotonic", "non-monotonic wavelengths");
    write_text(P("cols.txt"), "5000 1 0.1\n5001 1\n");
    expect_err(P("cols.txt"), NULL, DT_EFORMAT, "line 2", "2 fields, but line 1 has 3", "column count changes");
    write_text(P("word.txt"), "5000 1\n5001 x\n");
    expect_err(P("word.txt"), NULL, DT_EFORMAT, "line 2", "'x' is not a number", "non-number in data");
    write_text(P("prose.txt"), "Dear colleague,\nhere are the data.\n");
    expect_err(P("prose.txt"), NULL, DT_EFORMAT, "line 2", "not a text spectrum", "prose is not a spectrum");
    write_text(P("many.txt"), "1 2 3 4 5\n");
    expect_err(P("many.txt"), NULL, DT_EFORMAT, "line 1", "more than 4 fields", "five columns");
    write_text(P("empty.txt"), "# nothing\n\n");
    expect_err(P("empty.txt"), NULL, DT_EFORMAT, NULL, "no data lines", "only comments");
    write_text(P("masked.txt"), "5000 1 0\n5001 1 -1\n5002 nan 1\n");
    expect_err(P("masked.txt"), NULL, DT_EMASKED, NULL, "all 3 pixels are masked", "all pixels masked");
    write_text(P("one.txt"), "5000 1\n");
    expect_err(P("one.txt"), NULL, DT_EFORMAT, NULL, "at least 2", "a single pixel");
    write_text(P("comma.txt"), "5000,1,1\n5001,,1\n");
    expect_err(P("comma.txt"), NULL, DT_EFORMAT, "line 2", "empty field", "empty CSV field");
    expect_err(P("a.txt[1]"), NULL, DT_EINVAL, NULL, "FITS", "selector on a text file");
  }
  /* 9. bad files */
  {
    expect_err(P("missing.fits"), NULL, DT_EIO, NULL, "cannot open", "missing file");
    expect_err(dir, NULL, DT_EIO, NULL, "directory", "a directory");
    write_text(P("zero.fits"), "");
    expect_err(P("zero.fits"), NULL, DT_EFORMAT, NULL, "empty file", "empty file");
    FILE *fp = fopen(P("bin.fits"), "wb");
    for (int i = 0; i < 100; i++) fputc(i * 37 % 256, fp);
    fclose(fp);
    expect_err(P("bin.fits"), NULL, DT_EFORMAT, NULL, "not a FITS file", "binary non-FITS");
    fp = fopen(P("gz.fits.gz"), "wb");
    fputs("\x1f\x8b\x08\x00 pretend", fp);
    fclose(fp);
    expect_err(P("gz.fits.gz"), NULL, DT_EFORMAT, NULL, "gzip-compressed", "gzip file");
    truncate_copy("lin.fits", "trunc.fits", 2880 + 800);
    expect_err(P("trunc.fits"), NULL, DT_EFORMAT, "HDU 1", "truncated", "FITS data truncated");
    truncate_copy("lin.fits", "trunc2.fits", 1000);
    expect_err(P("trunc2.fits"), NULL, DT_EFORMAT, "HDU 1", "truncated", "FITS header truncated");
    truncate_copy("ierr.fits", "trunc3.fits", 3 * 2880 + 400);
    expect_err(P("trunc3.fits"), NULL, DT_EFORMAT, "HDU 2", "truncated", "error HDU truncated");
    truncate_copy("ierr.fits", "trunc4.fits", 2 * 2880 + 1000);
    expect_err(P("trunc4.fits"), NULL, DT_EFORMAT, "HDU 2", "truncated", "error HDU header truncated");

    key nowcs[] = {{"CDELT1", NULL, 0.5}, {NULL, NULL, 0}};
    add_image(P("nowcs.fits"), 1, flux, N, nowcs);
    expect_err(P("nowcs.fits"), NULL, DT_ENOWCS, "HDU 1", "CRVAL1 missing", "no CRVAL1");
    key nostep[] = {{"CRVAL1", NULL, 5000}, {NULL, NULL, 0}};
    add_image(P("nostep.fits"), 1, flux, N, nostep);
    expect_err(P("nostep.fits"), NULL, DT_ENOWCS, "HDU 1", "CDELT1", "no CDELT1/CD1_1");
    key zero[] = {{"CRVAL1", NULL, 5000}, {"CDELT1", NULL, 0.0}, {NULL, NULL, 0}};
    add_image(P("zstep.fits"), 1, flux, N, zero);
    expect_err(P("zstep.fits"), NULL, DT_ENOWCS, "HDU 1", "zero", "CDELT1 = 0");
    key freq[] = {{"CTYPE1", "FREQ", 0}, {"CRVAL1", NULL, 5e14}, {"CDELT1", NULL, 1e9}, {NULL, NULL, 0}};
    add_image(P("freq.fits"), 1, flux, N, freq);
    expect_err(P("freq.fits"), NULL, DT_ENOWCS, "HDU 1", "'FREQ'", "frequency axis");
    key unit[] = {{"CUNIT1", "furlong", 0}, {"CRVAL1", NULL, 5000}, {"CDELT1", NULL, 1.0}, {NULL, NULL, 0}};
    add_image(P("unit.fits"), 1, flux, N, unit);
    expect_err(P("unit.fits"), NULL, DT_ENOWCS, "HDU 1", "furlong", "unknown CUNIT1");

    key k[] = {{"CRVAL1", NULL, 5600.0}, {"CDELT1", NULL, 0.5}, {NULL, NULL, 0}};
    key kerr[] = {{"EXTNAME", "SIGMA", 0}, {NULL, NULL, 0}};
    add_image(P("short.fits"), 1, flux, N, k);
    add_image(P("short.fits"), 0, err, N - 1, kerr);
    expect_err(P("short.fits"), NULL, DT_EFORMAT, "HDU 2", "length mismatch", "error image one pixel short");

    double nan[N];
    for (int i = 0; i < N; i++) nan[i] = NAN;
    add_image(P("nan.fits"), 1, nan, N, k);
    expect_err(P("nan.fits"), NULL, DT_EMASKED, "HDU 1", "all 200 pixels are masked", "all-NaN image");

    fitsfile *f;
    int st = 0;
    char p[600];
    snprintf(p, sizeof p, "!%s", P("twod.fits"));
    fits_create_file(&f, p, &st);
    long nax[2] = {50, 4};
    fits_create_img(f, FLOAT_IMG, 2, nax, &st);
    float zeros[200] = {0};
    fits_write_img(f, TFLOAT, 1, 200, zeros, &st);
    fits_close_file(f, &st);
    expect_err(P("twod.fits"), NULL, DT_EFORMAT, "HDU 1", "2-D image", "2-D image");

    add_image(P("nodata.fits"), 1, NULL, 0, NULL);
    expect_err(P("nodata.fits"), NULL, DT_EFORMAT, NULL, "no HDU holds a spectrum", "header only");

    /* a table whose wavelengths go back */
    snprintf(p, sizeof p, "!%s", P("tback.fits"));
    st = 0;
    fits_create_file(&f, p, &st);
    fits_create_img(f, 8, 0, NULL, &st);
    char *tt[] = {"FLUX", "LAMBDA"};
    char *tf[] = {"1D", "1D"};
    fits_create_tbl(f, BINARY_TBL, 4, 2, tt, tf, NULL, NULL, &st);
    double wl[4] = {5000, 5001, 5000.5, 5002}, fl[4] = {1, 2, 3, 4};
    fits_write_col(f, TDOUBLE, 1, 1, 1, 4, fl, &st);
    fits_write_col(f, TDOUBLE, 2, 1, 1, 4, wl, &st);
    fits_close_file(f, &st);
    expect_err(P("tback.fits"), NULL, DT_EFORMAT, "HDU 2, row 3", "not monotonic", "table wavelengths go back");

    snprintf(p, sizeof p, "!%s", P("tnowave.fits"));
    st = 0;
    fits_create_file(&f, p, &st);
    fits_create_img(f, 8, 0, NULL, &st);
    char *tt2[] = {"FLUX", "FREQ"};
    fits_create_tbl(f, BINARY_TBL, 4, 2, tt2, tf, NULL, NULL, &st);
    fits_write_col(f, TDOUBLE, 1, 1, 1, 4, fl, &st);
    fits_write_col(f, TDOUBLE, 2, 1, 1, 4, wl, &st);
    fits_close_file(f, &st);
    expect_err(P("tnowave.fits"), NULL, DT_ENOWCS, "HDU 2", "no wavelength column", "table without wavelengths");
  }
  /* 10. the noise estimate recovers the noise of a smooth spectrum */
  {
    enum { M = 4000 };
    dt_spectrum *s = dt_spectrum_alloc(M);
    gsl_rng *r = gsl_rng_alloc(gsl_rng_mt19937);
    gsl_rng_set(r, 12345);
    for (int i = 0; i < M; i++) {
      s->wave[i] = 5000.0 + 0.1 * i;
      s->flux[i] = 100.0 + 20.0 * sin(i / 400.0) + gsl_ran_gaussian(r, 2.0);
    }
    s->mask[100] = 1;
    s->flux[100] = 1e30; /* masked garbage must not matter */
    dt_spectrum_estimate_sigma(s);
    double sum = 0;
    for (int i = 0; i < M; i++) sum += s->sigma[i];
    /* The median of |N(0,1)| over ~200 independent values scatters by
     * 1/(2 sqrt(200) 2 phi(0.6745)) / 0.6745 = 8% (asymptotic variance of a
     * sample median, common practice); each flux value enters three second
     * differences, so fewer are independent and the scatter is larger.
     * The mean over the spectrum is much tighter. */
    CHECK_CLOSE(sum / M, 2.0, 0.06, "estimated sigma of N(0, 2) noise: mean %.4f", sum / M);
    int within = 0;
    double worst = 0;
    for (int i = 0; i < M; i++) {
      double d = fabs(s->sigma[i] / 2.0 - 1);
      within += d < 0.25;
      if (d > worst) worst = d;
    }
    CHECK(within >= 0.95 * M, "95%% of local estimates within 25%%: %d of %d", within, M);
    CHECK(worst < 0.40, "every local estimate within 40%% (worst %.3f)", worst);
    CHECK(s->has_sigma == 0, "estimated: has_sigma = 0");
    /* median S/N of flux 100 +- 20 sin over sigma 2 is about 50 */
    CHECK_CLOSE(dt_spectrum_median_snr(s), 50.0, 3.0, "median S/N about 50");
    gsl_rng_free(r);
    dt_spectrum_free(s);
  }

  /* clean up */
  char cmd[600];
  snprintf(cmd, sizeof cmd, "rm -rf '%s'", dir);
  if (system(cmd) != 0) fprintf(stderr, "could not remove %s\n", dir);
  return dt_test_done();
}
