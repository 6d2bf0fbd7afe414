/* FITS tables (binary or ASCII): one spectrum in scalar columns (a row per
 * pixel) or one spectrum per row in vector or variable-length columns.
 *
 * Columns are found by name (the overrides of dt_read_opts, else common
 * names, case-insensitively); the kind of uncertainty (sigma, inverse
 * variance, variance) comes from the column's name.  The HDU has been
 * chosen and checked by spectrum_fits.c, which also owns opening and
 * closing the file. */
#include <ctype.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "spectrum_fits_priv.h"

typedef struct colinfo {
  int num;             /* 1-based column number; 0 = absent */
  char name[FLEN_VALUE];
  int type;            /* cfitsio type code (positive) */
  int vla;             /* variable-length array column */
  long long repeat;
} colinfo;

/* Find a column: the override name, else the first of the common names. */
static int find_column(fitsfile *f, int ncols, char names[][FLEN_VALUE], const char *override,
                       const char *const *common, const char *role, colinfo *ci, const char *where,
                       dt_err *e) {
  memset(ci, 0, sizeof *ci);
  if (override) {
    for (int i = 0; i < ncols; i++)
      if (dt_spectrum_name_eq(names[i], override)) ci->num = i + 1;
    if (!ci->num) {
      char list[160] = "";
      size_t used = 0;
      for (int i = 0; i < ncols && used < sizeof list - 20; i++)
        used += (size_t)snprintf(list + used, sizeof list - used, "%s%s", i ? ", " : "", names[i]);
      return dt_err_set(e, DT_ENOTFOUND, where, "no %s column '%s' (columns: %s)", role, override, list);
    }
  } else {
    for (int k = 0; common[k] && !ci->num; k++)
      for (int i = 0; i < ncols; i++)
        if (dt_spectrum_name_eq(names[i], common[k])) {
          ci->num = i + 1;
          break;
        }
    if (!ci->num) return DT_OK;
  }
  snprintf(ci->name, sizeof ci->name, "%s", names[ci->num - 1]);
  int st = 0;
  long long width = 0;
  fits_get_eqcoltypell(f, ci->num, &ci->type, &ci->repeat, &width, &st);
  if (st) return dt_fits_err(e, st, where, "reading a column format");
  if (ci->type < 0) {
    ci->vla = 1;
    ci->type = -ci->type;
  }
  if (ci->type == TSTRING || ci->type == TBIT)
    return dt_err_set(e, DT_EFORMAT, where, "column %s holds %s, not numbers", ci->name,
                      ci->type == TSTRING ? "text" : "bits");
  return DT_OK;
}

/* Number of elements of column ci in a row. */
static int col_len(fitsfile *f, const colinfo *ci, long long row, long long *len, int *st) {
  if (!ci->vla) {
    *len = ci->repeat;
    return 0;
  }
  long long off = 0;
  fits_read_descriptll(f, ci->num, row, len, &off, st);
  return *st;
}

/* Read nelem values of a column from (row, element 1) on as doubles;
 * undefined values become NaN (a logical column: true = 1). */
static int read_col(fitsfile *f, const colinfo *ci, long long row, long long nelem, double *out,
                    const char *where, dt_err *e) {
  int st = 0, anynul = 0;
  if (ci->type == TLOGICAL) {
    char *b = malloc((size_t)nelem + 1);
    char *nul = malloc((size_t)nelem + 1);
    if (!b || !nul) {
      free(b);
      free(nul);
      return dt_err_set(e, DT_ENOMEM, where, "out of memory");
    }
    fits_read_colnull(f, TLOGICAL, ci->num, row, 1, nelem, b, nul, &anynul, &st);
    for (long long i = 0; i < nelem && !st; i++) out[i] = nul[i] ? NAN : (b[i] ? 1.0 : 0.0);
    free(b);
    free(nul);
  } else {
    double nan = NAN;
    fits_read_col(f, TDOUBLE, ci->num, row, 1, nelem, &nan, out, &anynul, &st);
  }
  if (st) {
    char w[96];
    snprintf(w, sizeof w, "%.50s, column %.30s", where, ci->name);
    return dt_fits_err(e, st, w, "reading the column");
  }
  return DT_OK;
}

static const char *const wave_names[] = {"WAVE", "WAVELENGTH", "LAMBDA", "LOGLAM", NULL};
static const char *const flux_names[] = {"FLUX", NULL};
static const char *const err_names[] = {"IVAR", "INVVAR", "ERR", "ERROR", "SIGMA", "FLUX_ERR",
                                        "VAR", "VARIANCE", NULL};
static const char *const mask_names[] = {"MASK", "AND_MASK", NULL};
/* Sky position per row, degrees (ICRS): the first pair present */
static const char *const ra_names[] = {"RA", "PLUG_RA", "RA_OBJ", NULL};
static const char *const dec_names[] = {"DEC", "PLUG_DEC", "DEC_OBJ", NULL};
/* Line-spread width per pixel (optional; spectrum.h): a FWHM or a Gaussian
 * sigma in the unit of TUNITn, or a resolving power; the first present */
static const char *const lsf_names[] = {"LSF_FWHM", "LSF_SIGMA", "RESPOWER", "RESOLUTION", NULL};

typedef struct table_cols {
  colinfo wave, flux, err, mask, ra, dec, lsf;
  long long nrows;
  int rows_layout;
} table_cols;

static int table_columns(fctx *c, int hdu, const dt_read_opts *o, table_cols *t, dt_err *e) {
  char where[32];
  snprintf(where, sizeof where, "HDU %d", hdu);
  int st = 0, ncols = 0;
  fits_get_num_rowsll(c->f, &t->nrows, &st);
  fits_get_num_cols(c->f, &ncols, &st);
  if (st) return dt_fits_err(e, st, where, "reading the table header");
  if (t->nrows < 1) return dt_err_set(e, DT_EFORMAT, where, "the table has no rows");
  char(*names)[FLEN_VALUE] = calloc((size_t)(ncols > 0 ? ncols : 1), sizeof *names);
  if (!names) return dt_err_set(e, DT_ENOMEM, where, "out of memory");
  for (int i = 0; i < ncols; i++) {
    char key[FLEN_KEYWORD];
    snprintf(key, sizeof key, "TTYPE%d", i + 1);
    dt_fits_key_str(c->f, key, names[i]);
  }
  const char *wo = o ? o->wave_col : NULL, *fo = o ? o->flux_col : NULL;
  const char *eo = o ? o->err_col : NULL, *mo = o ? o->mask_col : NULL;
  int rc = find_column(c->f, ncols, names, fo, flux_names, "flux", &t->flux, where, e);
  if (!rc) rc = find_column(c->f, ncols, names, wo, wave_names, "wavelength", &t->wave, where, e);
  if (!rc) rc = find_column(c->f, ncols, names, eo, err_names, "uncertainty", &t->err, where, e);
  if (!rc) rc = find_column(c->f, ncols, names, mo, mask_names, "mask", &t->mask, where, e);
  if (!rc) rc = find_column(c->f, ncols, names, NULL, lsf_names, "line-spread", &t->lsf, where, e);
  memset(&t->ra, 0, sizeof t->ra);
  memset(&t->dec, 0, sizeof t->dec);
  for (int k = 0; !rc && ra_names[k] && !t->ra.num; k++) {
    /* numeric columns only: a text column (sexagesimal) is not read */
    const char *rn[2] = {ra_names[k], NULL}, *dn[2] = {dec_names[k], NULL};
    dt_err scratch;
    if (find_column(c->f, ncols, names, NULL, rn, "right ascension", &t->ra, where, &scratch) ||
        find_column(c->f, ncols, names, NULL, dn, "declination", &t->dec, where, &scratch)) {
      memset(&t->ra, 0, sizeof t->ra);
      memset(&t->dec, 0, sizeof t->dec);
      continue;
    }
    if ((t->ra.num != 0) != (t->dec.num != 0))
      rc = dt_err_set(e, DT_EFORMAT, where, "column %s without column %s", t->ra.num ? ra_names[k] : dec_names[k],
                      t->ra.num ? dec_names[k] : ra_names[k]);
  }
  free(names);
  if (rc) return rc;
  if (!t->flux.num) return dt_err_set(e, DT_ENOTFOUND, where, "no flux column (looked for FLUX)");
  if (!t->wave.num)
    return dt_err_set(e, DT_ENOWCS, where,
                      "no wavelength column (looked for WAVE, WAVELENGTH, LAMBDA, LOGLAM)");
  t->rows_layout = t->flux.vla || t->flux.repeat > 1;
  return DT_OK;
}

/* Wavelength unit of a table column: TUNITn, and whether the values are
 * log10 of the wavelength (column LOGLAM, or a unit "log(...)"/"dex"). */
static int table_wave_unit(fctx *c, const colinfo *w, int *log10, double *scale, dt_spectrum *s,
                           const char *where, dt_err *e) {
  char key[FLEN_KEYWORD], unit[FLEN_VALUE];
  snprintf(key, sizeof key, "TUNIT%d", w->num);
  dt_fits_key_str(c->f, key, unit);
  *log10 = dt_spectrum_name_eq(w->name, "LOGLAM");
  char inner[FLEN_VALUE];
  snprintf(inner, sizeof inner, "%s", unit);
  char low[FLEN_VALUE];
  snprintf(low, sizeof low, "%s", unit);
  for (char *p = low; *p; p++) *p = (char)tolower((unsigned char)*p);
  if (!strncmp(low, "log10(", 6) || !strncmp(low, "log(", 4)) {
    *log10 = 1;
    char *open = strchr(unit, '(');
    snprintf(inner, sizeof inner, "%s", open + 1);
    char *close = strchr(inner, ')');
    if (close) *close = '\0';
  } else if (!strcmp(low, "dex") || (*log10 && !strncmp(low, "log", 3))) {
    *log10 = 1;
    inner[0] = '\0';
  }
  if (dt_spectrum_unit_scale(inner, scale, s->unit, sizeof s->unit) != 0)
    return dt_err_set(e, DT_ENOWCS, where, "unknown wavelength unit %s = '%s' (column %s)", key, unit,
                      w->name);
  return DT_OK;
}

/* The line-spread column: its kind from the name, its unit from TUNITn
 * (widths: a length, km/s, or pixel; R: none), into s->lsf_fwhm_kms as a
 * FWHM in km/s at each pixel (FWHM = 2 sqrt(2 ln 2) sigma for a Gaussian;
 * FWHM [km/s] = c FWHM [A] / lambda; FWHM = c / R); where the value is not
 * a positive number, interpolated from the pixels around, NaN beyond the
 * first or last value.  s->wave is read (scaled to Angstrom); buf holds
 * n doubles. */
static int table_lsf(fctx *c, const colinfo *ci, long long row, dt_spectrum *s, double *buf,
                     const char *where, dt_err *e) {
  const size_t n = s->n;
  int rpow = dt_spectrum_name_eq(ci->name, "RESPOWER") || dt_spectrum_name_eq(ci->name, "RESOLUTION");
  double fac = dt_spectrum_name_eq(ci->name, "LSF_SIGMA") ? 2.3548200450309493820 : 1.0;
  char key[FLEN_KEYWORD], unit[FLEN_VALUE], canon[16] = "";
  snprintf(key, sizeof key, "TUNIT%d", ci->num);
  dt_fits_key_str(c->f, key, unit);
  enum { U_LEN, U_KMS, U_PIX } kind = U_LEN;
  double scale = 1.0;
  if (!rpow) {
    char low[FLEN_VALUE];
    size_t k = 0;
    for (const char *p = unit; *p && k + 1 < sizeof low; p++)
      if (*p != ' ') low[k++] = (char)tolower((unsigned char)*p);
    low[k] = '\0';
    if (!strcmp(low, "km/s") || !strcmp(low, "kms-1") || !strcmp(low, "km.s**-1") ||
        !strcmp(low, "km.s-1"))
      kind = U_KMS;
    else if (!strcmp(low, "pix") || !strcmp(low, "pixel") || !strcmp(low, "pixels"))
      kind = U_PIX;
    else if (dt_spectrum_unit_scale(unit, &scale, canon, sizeof canon) != 0)
      return dt_err_set(e, DT_EFORMAT, where,
                        "unknown unit %s = '%s' of column %s (a length, km/s or pixel)", key, unit,
                        ci->name);
  } else if (unit[0] && strspn(unit, " ") != strlen(unit)) {
    return dt_err_set(e, DT_EFORMAT, where, "column %s is a resolving power, without unit, not '%s'",
                      ci->name, unit);
  }
  int rc = read_col(c->f, ci, row, (long long)n, buf, where, e);
  if (rc) return rc;
  s->lsf_fwhm_kms = malloc(n * sizeof *s->lsf_fwhm_kms);
  if (!s->lsf_fwhm_kms) return dt_err_set(e, DT_ENOMEM, where, "out of memory");
  for (size_t i = 0; i < n; i++) {
    double v = buf[i], w = s->wave[i], out = NAN;
    if (isfinite(v) && v > 0 && isfinite(w) && w > 0) {
      if (rpow) {
        out = DT_C_KMS / v;
      } else if (kind == U_KMS) {
        out = fac * v;
      } else {
        double len = fac * v * scale; /* Angstrom */
        if (kind == U_PIX) { /* pixels: times the local pixel width */
          size_t a = i > 0 ? i - 1 : i, b = i + 1 < n ? i + 1 : i;
          len = fac * v * fabs(s->wave[b] - s->wave[a]) / (double)(b - a);
        }
        out = DT_C_KMS * len / w;
      }
    }
    s->lsf_fwhm_kms[i] = isfinite(out) && out > 0 ? out : NAN;
  }
  /* a pixel without a value between two with one (a masked pixel, say)
   * takes the width interpolated linearly in wavelength between them;
   * beyond the first or last value there is none */
  size_t prev = n;
  for (size_t i = 0; i < n; i++) {
    if (isnan(s->lsf_fwhm_kms[i])) continue;
    if (prev < n && i > prev + 1)
      for (size_t k = prev + 1; k < i; k++) {
        double f = (s->wave[k] - s->wave[prev]) / (s->wave[i] - s->wave[prev]);
        s->lsf_fwhm_kms[k] = s->lsf_fwhm_kms[prev] + f * (s->lsf_fwhm_kms[i] - s->lsf_fwhm_kms[prev]);
      }
    prev = i;
  }
  snprintf(s->lsf_from, sizeof s->lsf_from, "column %.30s (%s%s%s)", ci->name,
           rpow ? "resolving power" : fac > 1 ? "sigma" : "FWHM", rpow ? "" : ", ",
           rpow ? "" : kind == U_KMS ? "km/s" : kind == U_PIX ? "pixels" : canon);
  return DT_OK;
}

int dt_fits_read_table(fctx *c, int hdu, const dt_read_opts *o, dt_spectrum **out, dt_err *e) {
  char where[96];
  snprintf(where, sizeof where, "HDU %d", hdu);
  table_cols t;
  int rc = table_columns(c, hdu, o, &t, e);
  if (rc) return rc;
  rc = dt_fits_check_complete(c, hdu, e);
  if (rc) return rc;
  long want = o ? o->row : 0;
  long long row = 1, n = 0;
  int st = 0;
  colinfo *cols[5] = {&t.flux, &t.wave, &t.err, &t.mask, &t.lsf};
  if (t.rows_layout) {
    row = want > 0 ? want : 1;
    if (row > t.nrows)
      return dt_err_set(e, DT_ENOTFOUND, where, "row %lld requested, the table has %lld row%s", row,
                        t.nrows, t.nrows == 1 ? "" : "s");
    snprintf(where, sizeof where, "HDU %d, row %lld", hdu, row);
    col_len(c->f, &t.flux, row, &n, &st);
    for (int k = 1; k < 5 && !st; k++) {
      if (!cols[k]->num) continue;
      long long len = 0;
      if (col_len(c->f, cols[k], row, &len, &st)) break;
      if (len != n) {
        char w[96];
        snprintf(w, sizeof w, "%.50s, column %.30s", where, cols[k]->name);
        return dt_err_set(e, DT_EFORMAT, w, "length mismatch: %lld value%s, column %s has %lld", len,
                          len == 1 ? "" : "s", t.flux.name, n);
      }
    }
    if (st) return dt_fits_err(e, st, where, "reading a variable-length array descriptor");
  } else {
    if (want > 1)
      return dt_err_set(e, DT_EINVAL, where,
                        "row %ld requested, but this table holds one spectrum in columns (a row "
                        "per pixel)",
                        want);
    n = t.nrows;
    for (int k = 1; k < 5; k++)
      if (cols[k]->num && (cols[k]->vla || cols[k]->repeat != 1))
        return dt_err_set(e, DT_EFORMAT, where,
                          "column %s holds %s values per row but column %s one: mixed layouts",
                          cols[k]->name, cols[k]->vla ? "several" : "multiple", t.flux.name);
  }
  if (n < 1) return dt_err_set(e, DT_EFORMAT, where, "no pixels");
  /* Every value takes at least one byte of the file: a longer row comes from
   * a damaged array descriptor, and must not decide how much memory to take. */
  if (n > c->fsize)
    return dt_err_set(e, DT_EFORMAT, where,
                      "damaged FITS file: %lld values per column cannot fit in its %lld bytes", n,
                      c->fsize);
  dt_spectrum *s = dt_spectrum_alloc((size_t)n);
  double *buf = malloc((size_t)n * sizeof *buf);
  if (!s || !buf) {
    dt_spectrum_free(s);
    free(buf);
    return dt_err_set(e, DT_ENOMEM, where, "out of memory");
  }
  s->hdu = hdu;
  s->row = t.rows_layout ? (long)row : 0;
  snprintf(s->layout, sizeof s->layout, "%s", t.rows_layout ? "table-rows" : "table-columns");
  dt_fits_common_keys(c, s);
  int log10w = 0;
  double scale = 1;
  rc = dt_fits_frame_keys(c, s, where, e);
  if (!rc && t.rows_layout && t.ra.num) {
    /* the row's own position, degrees (ICRS) */
    double ra = NAN, dec = NAN;
    rc = read_col(c->f, &t.ra, row, 1, &ra, where, e);
    if (!rc) rc = read_col(c->f, &t.dec, row, 1, &dec, where, e);
    if (!rc && !(ra >= 0 && ra < 360 && dec >= -90 && dec <= 90))
      rc = dt_err_set(e, DT_EFORMAT, where, "columns %s/%s = %g, %g: not a position in degrees", t.ra.name,
                      t.dec.name, ra, dec);
    if (!rc) {
      s->has_pos = 1;
      s->ra = ra;
      s->dec = dec;
      snprintf(s->pos_from, sizeof s->pos_from, "columns %.16s/%.16s", t.ra.name, t.dec.name);
    }
  }
  if (!rc) rc = table_wave_unit(c, &t.wave, &log10w, &scale, s, where, e);
  if (!rc) rc = read_col(c->f, &t.wave, row, n, s->wave, where, e);
  if (!rc)
    for (long long i = 0; i < n; i++) s->wave[i] = (log10w ? pow(10.0, s->wave[i]) : s->wave[i]) * scale;
  if (!rc) rc = read_col(c->f, &t.flux, row, n, s->flux, where, e);
  if (!rc && t.err.num) {
    rc = read_col(c->f, &t.err, row, n, buf, where, e);
    aux_kind kind = dt_fits_classify(t.err.name, 0);
    if (kind == AUX_NONE) kind = AUX_SIGMA;
    for (long long i = 0; i < n && !rc; i++) {
      double v = buf[i];
      if (kind == AUX_IVAR) {
        s->sigma[i] = v > 0 ? 1.0 / sqrt(v) : INFINITY;
        if (!(v > 0) || !isfinite(v)) s->mask[i] = 1;
      } else if (kind == AUX_VAR) {
        s->sigma[i] = v > 0 ? sqrt(v) : NAN;
      } else {
        s->sigma[i] = v;
      }
    }
    s->has_sigma = 1;
    snprintf(s->sigma_from, sizeof s->sigma_from, "column %.20s (%s)", t.err.name, dt_fits_aux_text[kind]);
  }
  if (!rc && t.mask.num) {
    rc = read_col(c->f, &t.mask, row, n, buf, where, e);
    for (long long i = 0; i < n && !rc; i++)
      if (buf[i] != 0) s->mask[i] = 1; /* NaN (undefined) counts as set */
  }
  if (!rc && t.lsf.num) rc = table_lsf(c, &t.lsf, row, s, buf, where, e);
  free(buf);
  if (!rc) {
    dt_spectrum_settle_air(s, o);
    rc = dt_spectrum_finish(s, where, t.rows_layout ? "pixel" : "row", NULL, e);
  }
  if (rc) {
    dt_spectrum_free(s);
    return rc;
  }
  *out = s;
  return DT_OK;
}

int dt_fits_count_rows(fctx *c, int hdu, const dt_read_opts *o, long *count, dt_err *e) {
  table_cols t;
  int rc = table_columns(c, hdu, o, &t, e);
  if (!rc) *count = t.rows_layout ? (long)t.nrows : 1;
  return rc;
}
