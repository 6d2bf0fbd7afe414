/* FITS spectra: 1-D images and binary (or ASCII) tables, read through cfitsio.
 *
 * The reader picks an HDU (by number, by EXTNAME, or the first holding
 * data, skipping uncertainty and mask images), checks that its data are all
 * in the file (a truncated download is reported as such, not as a cfitsio
 * read error), and then:
 *   - image: builds the wavelengths from the WCS keywords of that HDU
 *     (linear, WAVE-LOG or log10 axis; the keywords are listed in
 *     include/doubletty/spectrum.h), reads the flux, and looks through the
 *     other HDUs for an uncertainty image and a mask image by EXTNAME;
 *   - table: finds the columns by name; scalar columns hold one spectrum
 *     (a row per pixel), vector or variable-length columns one spectrum per
 *     row (spectrum_fits_table.c).
 * Air wavelengths are converted to vacuum (dt_spectrum_settle_air); everything else that
 * all layouts share is done by dt_spectrum_finish (spectrum.c).  A file can
 * also be read, or its spectra counted, from its bytes in memory (cfitsio's
 * memory driver). */
#include <ctype.h>
#include <limits.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>

#include <fitsio.h>

#include "doubletty/num.h"
#include "spectrum_fits_priv.h"

const char *const dt_fits_aux_text[] = {"", "sigma", "inverse variance", "variance", "mask"};

/* ---- small helpers ------------------------------------------------------- */

int dt_fits_err(dt_err *e, int status, const char *where, const char *doing) {
  char txt[FLEN_STATUS];
  fits_get_errstatus(status, txt);
  fits_clear_errmsg();
  if (status == END_OF_FILE || status == READ_ERROR || status == NO_END)
    return dt_err_set(e, DT_EFORMAT, where, "truncated or damaged FITS file while %s (cfitsio: %s)",
                      doing, txt);
  if (status == MEMORY_ALLOCATION) return dt_err_set(e, DT_ENOMEM, where, "out of memory");
  return dt_err_set(e, DT_EFORMAT, where, "damaged FITS file while %s (cfitsio: %s)", doing, txt);
}

static void upper_trim(char *s) {
  size_t n = strlen(s);
  while (n > 0 && isspace((unsigned char)s[n - 1])) s[--n] = '\0';
  size_t k = 0;
  while (isspace((unsigned char)s[k])) k++;
  memmove(s, s + k, n - k + 1);
  for (char *p = s; *p; p++) *p = (char)toupper((unsigned char)*p);
}

/* Read a numeric keyword: 1 found, 0 absent or blank, -1 not a number. */
static int key_dbl(fitsfile *f, const char *key, double *v) {
  int st = 0;
  fits_read_key(f, TDOUBLE, key, v, NULL, &st);
  if (st == 0) return 1;
  fits_clear_errmsg();
  return (st == KEY_NO_EXIST || st == VALUE_UNDEFINED) ? 0 : -1;
}

/* Read a keyword as text (buf of FLEN_VALUE): 1 found, 0 absent. */
int dt_fits_key_str(fitsfile *f, const char *key, char *buf) {
  int st = 0;
  buf[0] = '\0';
  fits_read_key(f, TSTRING, key, buf, NULL, &st);
  if (st == 0) return 1;
  fits_clear_errmsg();
  buf[0] = '\0';
  return 0;
}

/* Split a name into words at '_', '-', '.', ' ' and dt_fits_classify it. */
aux_kind dt_fits_classify(const char *name, int allow_mask) {
  char buf[FLEN_VALUE];
  snprintf(buf, sizeof buf, "%s", name ? name : "");
  upper_trim(buf);
  static const char *sigma_w[] = {"ERR", "ERROR", "ERRORS", "SIGMA", "NOISE", "STDDEV", "UNCERT",
                                  "UNCERTAINTY"};
  static const char *ivar_w[] = {"IVAR", "INVVAR", "IVARIANCE"};
  static const char *var_w[] = {"VAR", "VARIANCE"};
  aux_kind found = AUX_NONE;
  char *save = NULL;
  for (char *w = strtok_r(buf, "_-. ", &save); w; w = strtok_r(NULL, "_-. ", &save)) {
    if (allow_mask && !strcmp(w, "MASK")) return AUX_MASK;
    for (size_t i = 0; i < sizeof ivar_w / sizeof *ivar_w; i++)
      if (!strcmp(w, ivar_w[i]) && found == AUX_NONE) found = AUX_IVAR;
    for (size_t i = 0; i < sizeof var_w / sizeof *var_w; i++)
      if (!strcmp(w, var_w[i]) && found == AUX_NONE) found = AUX_VAR;
    for (size_t i = 0; i < sizeof sigma_w / sizeof *sigma_w; i++)
      if (!strcmp(w, sigma_w[i]) && found == AUX_NONE) found = AUX_SIGMA;
  }
  return found;
}

/* Header facts shared by images and tables, with the primary as fallback. */
void dt_fits_common_keys(fctx *c, dt_spectrum *s) {
  char v[FLEN_VALUE];
  double r = 0;
  if (dt_fits_key_str(c->f, "EXTNAME", v)) snprintf(s->extname, sizeof s->extname, "%s", v);
  s->object[0] = '\0';
  if (dt_fits_key_str(c->f, "OBJECT", v)) snprintf(s->object, sizeof s->object, "%s", v);
  if (!s->object[0]) snprintf(s->object, sizeof s->object, "%s", c->prim_object);
  s->resolution = 0;
  if ((key_dbl(c->f, "SPECRES", &r) == 1 || key_dbl(c->f, "RESOLUTN", &r) == 1) && r > 0 && isfinite(r))
    s->resolution = r;
  else
    s->resolution = c->prim_res;
  s->air = c->prim_air > 0;
  if (c->prim_air >= 0) s->air_from = DT_AIRVAC_FILE;
  if (dt_fits_key_str(c->f, "AIRORVAC", v)) {
    upper_trim(v);
    if (!strcmp(v, "AIR")) s->air = 1, s->air_from = DT_AIRVAC_FILE;
    if (!strcmp(v, "VAC") || !strcmp(v, "VACUUM")) s->air = 0, s->air_from = DT_AIRVAC_FILE;
  }
}

/* Bytes of data an HDU declares (without the padding to 2880); LLONG_MAX
 * when the keywords give more than any file holds, or nonsense. */
static long long declared_data_bytes(fitsfile *f) {
  double bitpix = 8, naxis = 0, pcount = 0, gcount = 1, v;
  key_dbl(f, "BITPIX", &bitpix);
  key_dbl(f, "NAXIS", &naxis);
  if (key_dbl(f, "PCOUNT", &v) == 1) pcount = v;
  if (key_dbl(f, "GCOUNT", &v) == 1) gcount = v;
  if (naxis < 1) return 0;
  /* in floating point: damaged keywords must not overflow an integer */
  double prod = 1;
  for (int i = 1; i <= naxis && i <= 999; i++) {
    char key[FLEN_KEYWORD];
    snprintf(key, sizeof key, "NAXIS%d", i);
    double len = 0;
    key_dbl(f, key, &len);
    prod *= trunc(len);
  }
  double bytes = trunc(fabs(bitpix) / 8) * trunc(gcount) * (trunc(pcount) + prod);
  return bytes >= 0 && bytes < 9e18 ? (long long)bytes : LLONG_MAX;
}

/* Is the current HDU's data entirely inside the file? */
int dt_fits_check_complete(fctx *c, int hdu, dt_err *e) {
  long long head = 0, data = 0, end = 0;
  int st = 0;
  char where[32];
  snprintf(where, sizeof where, "HDU %d", hdu);
  fits_get_hduaddrll(c->f, &head, &data, &end, &st);
  if (st) return dt_fits_err(e, st, where, "locating the data");
  long long bytes = declared_data_bytes(c->f);
  long long need = bytes > LLONG_MAX - data ? LLONG_MAX : data + bytes;
  if (need == LLONG_MAX)
    return dt_err_set(e, DT_EFORMAT, where,
                      "damaged FITS header: its data sizes (BITPIX, NAXISn, PCOUNT, GCOUNT) make "
                      "no sense");
  if (need > c->fsize)
    return dt_err_set(e, DT_EFORMAT, where,
                      "truncated FITS file: the data end at byte %lld but the file has only %lld bytes",
                      need, c->fsize);
  /* cfitsio reads the data in whole 2880-byte blocks: the last one must be
   * whole too (the FITS standard pads it) */
  if (need > data && (need + 2879) / 2880 * 2880 > c->fsize)
    return dt_err_set(e, DT_EFORMAT, where,
                      "truncated FITS file: the last 2880-byte block of the data is cut short at "
                      "byte %lld",
                      c->fsize);
  return DT_OK;
}

/* After the last HDU cfitsio could read (ending at byte last_end): another
 * header that starts there but could not be read means the file was cut
 * inside it. */
static int check_tail(fctx *c, int hdu, long long last_end, dt_err *e) {
  if (last_end <= 0 || c->fsize <= last_end) return DT_OK;
  char head[8] = {0};
  size_t got = 0;
  if (c->mem) {
    got = c->fsize - last_end < (long long)sizeof head ? (size_t)(c->fsize - last_end) : sizeof head;
    memcpy(head, c->mem + last_end, got);
  } else {
    FILE *fp = fopen(c->file, "rb");
    if (!fp) return DT_OK;
    if (fseeko(fp, (off_t)last_end, SEEK_SET) == 0) got = fread(head, 1, sizeof head, fp);
    fclose(fp);
  }
  if (got == sizeof head && !memcmp(head, "XTENSION", 8)) {
    char where[32];
    snprintf(where, sizeof where, "HDU %d", hdu);
    return dt_err_set(e, DT_EFORMAT, where,
                      "truncated FITS file: the header of this HDU is cut short at byte %lld",
                      c->fsize);
  }
  return DT_OK;
}

static int hdu_has_data(fitsfile *f, int type, int *st) {
  if (type == IMAGE_HDU) {
    int naxis = 0;
    long long nax[9] = {0};
    fits_get_img_dim(f, &naxis, st);
    if (*st || naxis < 1) return 0;
    fits_get_img_sizell(f, naxis > 9 ? 9 : naxis, nax, st);
    for (int i = 0; i < naxis && i < 9; i++)
      if (nax[i] < 1) return 0;
    return *st == 0;
  }
  long long rows = 0;
  fits_get_num_rowsll(f, &rows, st);
  return *st == 0 && rows > 0;
}

static int count_hdus(fitsfile *f) {
  int n = 0, st = 0;
  fits_get_num_hdus(f, &n, &st);
  fits_clear_errmsg();
  return n;
}

/* cfitsio's status after moving to an HDU.  From memory it is given the
 * whole blocks only: running out of them where the bytes go on into a
 * cut-off last block is, on disk, a failed read of that block. */
static int moved(const fctx *c, int st) {
  return (st == END_OF_FILE && c->mem && c->fsize % 2880 != 0) ? READ_ERROR : st;
}

/* Move to the HDU holding the spectrum. */
static int select_hdu(fctx *c, const dt_hdu_sel *sel, int *hdu, int *type, dt_err *e) {
  int st = 0;
  char where[32];
  if (sel->number > 0) {
    fits_movabs_hdu(c->f, sel->number, type, &st);
    st = moved(c, st);
    if (st == END_OF_FILE || st == BAD_HDU_NUM) {
      fits_clear_errmsg();
      int have = count_hdus(c->f);
      return dt_err_set(e, DT_ENOTFOUND, NULL, "no HDU %d (extension [%d]): the file has %d HDU%s",
                        sel->number, sel->number - 1, have, have == 1 ? "" : "s");
    }
    snprintf(where, sizeof where, "HDU %d", sel->number);
    if (st) return dt_fits_err(e, st, where, "moving to the HDU");
    *hdu = sel->number;
    return DT_OK;
  }
  if (sel->name) {
    fits_movnam_hdu(c->f, ANY_HDU, (char *)sel->name, 0, &st);
    st = moved(c, st);
    if (st == BAD_HDU_NUM || st == END_OF_FILE) {
      fits_clear_errmsg();
      return dt_err_set(e, DT_ENOTFOUND, NULL, "no HDU with EXTNAME '%s'", sel->name);
    }
    if (st) return dt_fits_err(e, st, NULL, "looking for the named HDU");
    fits_get_hdu_num(c->f, hdu);
    fits_get_hdu_type(c->f, type, &st);
    return DT_OK;
  }
  for (int i = 1;; i++) {
    st = 0;
    fits_movabs_hdu(c->f, i, type, &st);
    st = moved(c, st);
    if (st == END_OF_FILE) {
      fits_clear_errmsg();
      break;
    }
    snprintf(where, sizeof where, "HDU %d", i);
    if (st) return dt_fits_err(e, st, where, "reading the header");
    int has = hdu_has_data(c->f, *type, &st);
    if (st) return dt_fits_err(e, st, where, "reading the header");
    if (!has) continue;
    if (*type == IMAGE_HDU) {
      char name[FLEN_VALUE];
      dt_fits_key_str(c->f, "EXTNAME", name);
      if (dt_fits_classify(name, 1) != AUX_NONE) continue; /* an uncertainty or mask image */
    }
    *hdu = i;
    return DT_OK;
  }
  return dt_err_set(e, DT_EFORMAT, NULL, "no HDU holds a spectrum (no image data, no table rows)");
}

/* ---- a guard against a cfitsio defect -------------------------------------
 *
 * cfitsio 4.2 copies the value of a TTYPEn card that is not a quoted string
 * into a field of 70 bytes without checking its length: 70 characters or
 * more overflow it, which the C library's checks turn into an abort.  And it
 * takes memory for as many columns as TFIELDS says, however many that is.
 * The FITS standard makes TTYPEn a character string and limits TFIELDS to
 * 0..999, so either can only be damage; every header is searched for them
 * before cfitsio reads it.  The headers are found as cfitsio finds them: a
 * header ends with the END card, and its data take
 * |BITPIX|/8 * GCOUNT * (PCOUNT + NAXIS1 * ... * NAXISn) bytes (NAXIS1 left
 * out for random groups), padded to 2880-byte blocks (FITS Standard 4.0).
 * Anything the walk cannot follow is left to cfitsio. */

/* Bytes pos.. of the file into buf[0..n): the count read (0 at the end). */
static size_t raw_read(const fctx *c, FILE *fp, long long pos, unsigned char *buf, size_t n) {
  if (pos < 0 || pos >= c->fsize) return 0;
  if ((long long)n > c->fsize - pos) n = (size_t)(c->fsize - pos);
  if (c->mem) {
    memcpy(buf, c->mem + pos, n);
    return n;
  }
  if (fseeko(fp, (off_t)pos, SEEK_SET) != 0) return 0;
  return fread(buf, 1, n, fp);
}

/* The value of a card as text (up to a '/', blanks trimmed) into v[71];
 * returns 1 when it is a quoted string. */
static int card_value(const unsigned char *card, char *v) {
  size_t a = 9, b;
  while (a < 80 && card[a] == ' ') a++;
  if (a < 80 && card[a] == '\'') {
    v[0] = '\0';
    return 1;
  }
  for (b = a; b < 80 && card[b] != '/'; b++) {}
  while (b > a && card[b - 1] == ' ') b--;
  memcpy(v, card + a, b - a);
  v[b - a] = '\0';
  return 0;
}

static int guard_headers(const fctx *c, dt_err *e) {
  FILE *fp = NULL;
  if (!c->mem && !(fp = fopen(c->file, "rb"))) return DT_OK; /* cfitsio will say why */
  static const long long max_axes = 999;
  unsigned char block[2880];
  long long pos = 0, nax[1000];
  int rc = DT_OK;
  for (int hdu = 1; rc == DT_OK && pos < c->fsize && hdu <= 100000; hdu++) {
    long long bitpix = 0, naxis = 0, pcount = 0, gcount = 1;
    memset(nax, 0, sizeof nax);
    int ended = 0;
    while (rc == DT_OK && !ended) {
      size_t got = raw_read(c, fp, pos, block, sizeof block);
      if (got == 0) break;
      memset(block + got, 0, sizeof block - got);
      pos += (long long)sizeof block;
      for (int k = 0; k < 36 && !ended; k++) {
        const unsigned char *card = block + 80 * k;
        if (!memcmp(card, "END     ", 8)) {
          ended = 1;
          break;
        }
        if (card[8] != '=') continue;
        char key[9], v[72];
        memcpy(key, card, 8);
        key[8] = '\0';
        for (int i = 7; i >= 0 && key[i] == ' '; i--) key[i] = '\0';
        int quoted = card_value(card, v);
        if (!strncmp(key, "TTYPE", 5) && !quoted && strlen(v) >= 60) {
          char where[32];
          snprintf(where, sizeof where, "HDU %d", hdu);
          rc = dt_err_set(e, DT_EFORMAT, where,
                          "damaged FITS header: %s is not a quoted string (%zu characters)", key,
                          strlen(v));
          break;
        }
        char *end;
        long long x = dt_num_strtoll(v, &end); /* the first number, as cfitsio reads it */
        if (quoted || end == v) continue;
        if (!strcmp(key, "TFIELDS") && (x < 0 || x > 999)) {
          char where[32];
          snprintf(where, sizeof where, "HDU %d", hdu);
          rc = dt_err_set(e, DT_EFORMAT, where,
                          "damaged FITS header: TFIELDS = %lld (a table has 0 to 999 columns)", x);
          break;
        }
        if (!strcmp(key, "BITPIX")) bitpix = x;
        else if (!strcmp(key, "NAXIS")) naxis = x;
        else if (!strcmp(key, "PCOUNT")) pcount = x;
        else if (!strcmp(key, "GCOUNT")) gcount = x;
        else if (!strncmp(key, "NAXIS", 5) && isdigit((unsigned char)key[5])) {
          long long n = dt_num_strtoll(key + 5, &end);
          if (!*end && n >= 1 && n <= max_axes) nax[n] = x;
        }
      }
    }
    if (!ended || naxis < 0 || naxis > max_axes || pcount < 0 || gcount < 0) break;
    double bytes = 0;
    if (naxis > 0) {
      double prod = 1;
      long long first = (hdu == 1 && nax[1] == 0 && naxis > 1) ? 2 : 1; /* random groups */
      for (long long i = first; i <= naxis; i++) prod *= (double)nax[i];
      bytes = fabs((double)bitpix) / 8 * (double)gcount * ((double)pcount + prod);
    }
    if (!(bytes >= 0) || bytes > (double)c->fsize) break;
    pos += ((long long)bytes + 2879) / 2880 * 2880;
  }
  if (fp) fclose(fp);
  return rc;
}

/* Open the file (file != NULL) or the bytes mem[0..len) read-only. */
static int open_fits(const char *file, const void *mem, size_t len, fctx *c, dt_err *e) {
  memset(c, 0, sizeof *c);
  c->prim_air = -1;
  c->file = file;
  int st = 0;
  if (file) {
    struct stat st_;
    c->fsize = stat(file, &st_) == 0 ? (long long)st_.st_size : 0;
    int rc = guard_headers(c, e);
    if (rc) return rc;
    fits_open_diskfile(&c->f, file, READONLY, &st);
  } else {
    /* cfitsio only reads a READONLY memory file: the buffer is not changed.
     * It is told of the whole 2880-byte blocks only, so that a cut-off last
     * block is as unreadable as in a file on disk (the checks for a
     * truncated file use the true length).  But its memory driver reads
     * the blocks of an HDU's data without looking at that size: bytes that
     * end inside a block are copied into whole blocks first. */
    c->mem = mem;
    c->fsize = (long long)len;
    int rc = guard_headers(c, e);
    if (rc) return rc;
    c->mem_ptr = (void *)mem;
    c->mem_size = len - len % 2880;
    if (len % 2880 != 0) {
      c->padded = calloc(1, c->mem_size + 2880);
      if (!c->padded) return dt_err_set(e, DT_ENOMEM, "HDU 1", "out of memory");
      memcpy(c->padded, mem, len);
      c->mem_ptr = c->padded;
    }
    fits_open_memfile(&c->f, "memory.fits", READONLY, &c->mem_ptr, &c->mem_size, 0, NULL, &st);
  }
  if (st) {
    c->f = NULL;
    free(c->padded);
    c->padded = NULL;
    char txt[FLEN_STATUS];
    fits_get_errstatus(st, txt);
    fits_clear_errmsg();
    if (c->fsize < 2880 || c->fsize % 2880 != 0)
      return dt_err_set(e, DT_EFORMAT, "HDU 1",
                        "truncated FITS file: %lld bytes, not a whole number of 2880-byte blocks "
                        "(cfitsio: %s)",
                        c->fsize, txt);
    return dt_err_set(e, DT_EFORMAT, "HDU 1", "damaged FITS header (cfitsio: %s)", txt);
  }
  char v[FLEN_VALUE];
  double r;
  if ((key_dbl(c->f, "SPECRES", &r) == 1 || key_dbl(c->f, "RESOLUTN", &r) == 1) && r > 0 && isfinite(r))
    c->prim_res = r;
  if (dt_fits_key_str(c->f, "AIRORVAC", v)) {
    upper_trim(v);
    if (!strcmp(v, "AIR")) c->prim_air = 1;
    if (!strcmp(v, "VAC") || !strcmp(v, "VACUUM")) c->prim_air = 0;
  }
  if (dt_fits_key_str(c->f, "OBJECT", v)) snprintf(c->prim_object, sizeof c->prim_object, "%s", v);
  return DT_OK;
}

static void close_fits(fctx *c) {
  int st = 0;
  if (c->f) fits_close_file(c->f, &st);
  fits_clear_errmsg();
  c->f = NULL;
  free(c->padded);
  c->padded = NULL;
}


/* ---- images --------------------------------------------------------------- */

typedef enum { AXIS_LINEAR, AXIS_LOG, AXIS_LOG10 } axis_kind;

/* Wavelengths [Angstrom] of pixels 1..n from the WCS keywords of the current
 * HDU; sets s->layout, s->unit and, when CTYPE1 says air (AWAV) or vacuum
 * (WAVE), s->air and s->air_from. */
static int image_wavelengths(fitsfile *f, dt_spectrum *s, const char *where, dt_err *e) {
  char ctype[FLEN_VALUE], cunit[FLEN_VALUE];
  double crval = 0, crpix = 0, cdelt = 0, cd = 0, pc = 1, dcflag = 0;
  int has_crval = key_dbl(f, "CRVAL1", &crval);
  int has_crpix = key_dbl(f, "CRPIX1", &crpix);
  int has_cdelt = key_dbl(f, "CDELT1", &cdelt);
  int has_cd = key_dbl(f, "CD1_1", &cd);
  int has_pc = key_dbl(f, "PC1_1", &pc);
  int has_dc = key_dbl(f, "DC-FLAG", &dcflag);
  const char *bad = has_crval < 0 ? "CRVAL1" : has_crpix < 0 ? "CRPIX1" : has_cdelt < 0 ? "CDELT1"
                  : has_cd < 0 ? "CD1_1" : has_pc < 0 ? "PC1_1" : has_dc < 0 ? "DC-FLAG" : NULL;
  if (bad) return dt_err_set(e, DT_ENOWCS, where, "keyword %s is not a number", bad);
  if (!has_crval)
    return dt_err_set(e, DT_ENOWCS, where, "no wavelength solution: keyword CRVAL1 missing");
  if (!has_cd && !has_cdelt)
    return dt_err_set(e, DT_ENOWCS, where, "no wavelength solution: neither CDELT1 nor CD1_1 given");
  if (!has_crpix) crpix = 0.0; /* FITS WCS Paper I default */
  double step = has_cd ? cd : cdelt * (has_pc ? pc : 1.0);
  if (step == 0 || !isfinite(step))
    return dt_err_set(e, DT_ENOWCS, where, "no wavelength solution: the pixel step (%s) is zero",
                      has_cd ? "CD1_1" : "CDELT1");
  dt_fits_key_str(f, "CTYPE1", ctype);
  upper_trim(ctype);
  axis_kind axis;
  int air = 0;
  int vacuum = 0; /* CTYPE1 says vacuum explicitly: AIRORVAC cannot override */
  if (!ctype[0] || !strcmp(ctype, "WAVE") || !strcmp(ctype, "LINEAR") || !strcmp(ctype, "WAVELENGTH"))
    axis = AXIS_LINEAR, vacuum = !strcmp(ctype, "WAVE");
  else if (!strcmp(ctype, "AWAV"))
    axis = AXIS_LINEAR, air = 1;
  else if (!strcmp(ctype, "WAVE-LOG"))
    axis = AXIS_LOG, vacuum = 1;
  else if (!strcmp(ctype, "AWAV-LOG"))
    axis = AXIS_LOG, air = 1;
  else if (!strcmp(ctype, "LOG10") || !strcmp(ctype, "LOGLAM"))
    axis = AXIS_LOG10;
  else
    return dt_err_set(e, DT_ENOWCS, where,
                      "unsupported spectral axis CTYPE1 = '%s' (readable: WAVE, AWAV, WAVE-LOG, "
                      "AWAV-LOG, LOG10, LOGLAM)",
                      ctype);
  if (has_dc && dcflag == 1) {
    if (axis == AXIS_LOG)
      return dt_err_set(e, DT_ENOWCS, where,
                        "CTYPE1 = '%s' and DC-FLAG = 1 contradict each other", ctype);
    axis = AXIS_LOG10;
  }
  /* Without CUNIT1 the FITS standard means metres for WAVE and AWAV, but
   * most spectra without it are in Angstrom: a CRVAL1 below 1e-3 can only be
   * metres, anything else is taken as Angstrom. */
  if (!dt_fits_key_str(f, "CUNIT1", cunit) && (!strncmp(ctype, "WAVE", 4) || !strncmp(ctype, "AWAV", 4)) &&
      fabs(crval) < 1e-3)
    snprintf(cunit, sizeof cunit, "m");
  double scale;
  if (dt_spectrum_unit_scale(cunit, &scale, s->unit, sizeof s->unit) != 0)
    return dt_err_set(e, DT_ENOWCS, where, "unknown wavelength unit CUNIT1 = '%s'", cunit);
  if (axis == AXIS_LOG && !(crval > 0))
    return dt_err_set(e, DT_ENOWCS, where, "WAVE-LOG axis needs CRVAL1 > 0 (it is %g)", crval);
  for (size_t i = 0; i < s->n; i++) {
    double x = (double)(i + 1) - crpix; /* FITS pixel numbers start at 1 */
    double lam;
    switch (axis) {
    case AXIS_LOG: /* Greisen et al. 2006 (Paper III), eq. 5 */
      lam = crval * exp(step * x / crval);
      break;
    case AXIS_LOG10:
      lam = pow(10.0, crval + step * x);
      break;
    default:
      lam = crval + step * x;
    }
    s->wave[i] = lam * scale;
  }
  snprintf(s->layout, sizeof s->layout, "%s",
           axis == AXIS_LOG ? "image-log" : axis == AXIS_LOG10 ? "image-log10" : "image-linear");
  if (air) s->air = 1;
  if (vacuum) s->air = 0;
  if (air || vacuum) s->air_from = DT_AIRVAC_FILE;
  return DT_OK;
}

/* Read an uncertainty or mask image from HDU i into s. */
static int read_aux_image(fctx *c, int i, aux_kind kind, const char *name, dt_spectrum *s, dt_err *e) {
  char where[96];
  snprintf(where, sizeof where, "HDU %d", i);
  int st = 0, naxis = 0, anynul = 0;
  long long nax[9] = {0};
  fits_get_img_dim(c->f, &naxis, &st);
  if (!st && naxis >= 1) fits_get_img_sizell(c->f, naxis > 9 ? 9 : naxis, nax, &st);
  if (st) return dt_fits_err(e, st, where, "reading the image size");
  long long len = 1;
  for (int k = 0; k < naxis && k < 9; k++) len *= nax[k];
  if (len != (long long)s->n || (naxis > 1 && nax[0] != len))
    return dt_err_set(e, DT_EFORMAT, where,
                      "length mismatch: the %s image '%s' has %lld pixels, the flux %zu", dt_fits_aux_text[kind],
                      name, len, s->n);
  int rc = dt_fits_check_complete(c, i, e);
  if (rc) return rc;
  double *v = malloc(s->n * sizeof *v);
  if (!v) return dt_err_set(e, DT_ENOMEM, where, "out of memory");
  double nan = NAN;
  fits_read_img(c->f, TDOUBLE, 1, (long long)s->n, &nan, v, &anynul, &st);
  if (st) {
    free(v);
    return dt_fits_err(e, st, where, "reading the image");
  }
  for (size_t p = 0; p < s->n; p++) {
    switch (kind) {
    case AUX_MASK:
      if (v[p] != 0) s->mask[p] = 1; /* NaN (undefined) counts as set */
      break;
    case AUX_IVAR:
      s->sigma[p] = v[p] > 0 ? 1.0 / sqrt(v[p]) : INFINITY;
      if (!(v[p] > 0) || !isfinite(v[p])) s->mask[p] = 1;
      break;
    case AUX_VAR:
      s->sigma[p] = v[p] > 0 ? sqrt(v[p]) : NAN;
      break;
    default:
      s->sigma[p] = v[p];
    }
  }
  free(v);
  if (kind != AUX_MASK) {
    s->has_sigma = 1;
    snprintf(s->sigma_from, sizeof s->sigma_from, "HDU %d '%.16s' (%s)", i, name, dt_fits_aux_text[kind]);
  }
  return DT_OK;
}

static int read_image(fctx *c, int hdu, const dt_read_opts *o, dt_spectrum **out, dt_err *e) {
  char where[32];
  snprintf(where, sizeof where, "HDU %d", hdu);
  int st = 0, naxis = 0, anynul = 0;
  long long nax[9] = {0};
  fits_get_img_dim(c->f, &naxis, &st);
  if (!st && naxis >= 1) fits_get_img_sizell(c->f, naxis > 9 ? 9 : naxis, nax, &st);
  if (st) return dt_fits_err(e, st, where, "reading the image size");
  if (naxis < 1 || nax[0] < 1) return dt_err_set(e, DT_EFORMAT, where, "the image is empty");
  for (int k = 1; k < naxis && k < 9; k++)
    if (nax[k] != 1)
      return dt_err_set(e, DT_EFORMAT, where,
                        "a %d-D image (%lld x %lld%s): doubletty reads 1-D spectra", naxis, nax[0],
                        nax[1], naxis > 2 ? " x ..." : "");
  int rc = dt_fits_check_complete(c, hdu, e);
  if (rc) return rc;
  dt_spectrum *s = dt_spectrum_alloc((size_t)nax[0]);
  if (!s) return dt_err_set(e, DT_ENOMEM, where, "out of memory");
  s->hdu = hdu;
  dt_fits_common_keys(c, s);
  rc = dt_fits_frame_keys(c, s, where, e);
  if (!rc) rc = image_wavelengths(c->f, s, where, e);
  double nan = NAN;
  if (!rc) {
    fits_read_img(c->f, TDOUBLE, 1, (long long)s->n, &nan, s->flux, &anynul, &st);
    if (st) rc = dt_fits_err(e, st, where, "reading the flux");
  }
  /* Uncertainty and mask images elsewhere in the file, by EXTNAME. */
  int got_sigma = 0, got_mask = 0;
  long long last_end = 0;
  for (int i = 1; !rc && !(got_sigma && got_mask); i++) {
    int type;
    st = 0;
    fits_movabs_hdu(c->f, i, &type, &st);
    if (st) { /* no more HDUs, or one cut short */
      fits_clear_errmsg();
      rc = check_tail(c, i, last_end, e);
      break;
    }
    long long h0, d0, d1;
    fits_get_hduaddrll(c->f, &h0, &d0, &d1, &st);
    if (!st && d1 > last_end) last_end = d1;
    if (i == hdu || type != IMAGE_HDU) continue;
    char name[FLEN_VALUE];
    if (!dt_fits_key_str(c->f, "EXTNAME", name)) continue;
    aux_kind kind = dt_fits_classify(name, 1);
    if (kind == AUX_NONE || (kind == AUX_MASK ? got_mask : got_sigma)) continue;
    int has = hdu_has_data(c->f, type, &st);
    if (st || !has) {
      fits_clear_errmsg();
      continue;
    }
    rc = read_aux_image(c, i, kind, name, s, e);
    if (kind == AUX_MASK)
      got_mask = 1;
    else
      got_sigma = 1;
  }
  if (!rc) {
    dt_spectrum_settle_air(s, o);
    rc = dt_spectrum_finish(s, where, "pixel", NULL, e);
  }
  if (rc) {
    dt_spectrum_free(s);
    return rc;
  }
  *out = s;
  return DT_OK;
}

/* ---- entry points ---------------------------------------------------------- */

/* Read the spectrum from an opened file, then close it. */
static int read_opened(fctx *c, const dt_hdu_sel *sel, const dt_read_opts *o, dt_spectrum **out,
                       dt_err *e) {
  int hdu = 0, type = 0;
  int rc = select_hdu(c, sel, &hdu, &type, e);
  if (!rc) {
    if (type == IMAGE_HDU) {
      if (o && o->row > 1) {
        char where[32];
        snprintf(where, sizeof where, "HDU %d", hdu);
        rc = dt_err_set(e, DT_EINVAL, where, "row %ld requested, but this HDU is an image", o->row);
      } else {
        rc = read_image(c, hdu, o, out, e);
      }
    } else {
      rc = dt_fits_read_table(c, hdu, o, out, e);
    }
  }
  close_fits(c);
  return rc;
}

/* The entry points run the reader in the "C" locale (dt_num_with_c_locale):
 * cfitsio converts header numbers with the locale, and keeps the decimal
 * point of the first one it met. */
typedef struct fits_call {
  const char *file;
  const void *buf;
  size_t len;
  const dt_hdu_sel *sel;
  const dt_read_opts *o;
  dt_spectrum **out;
  long *count;
  dt_err *e;
} fits_call;

static int call_read(void *arg) {
  fits_call *a = arg;
  fctx c;
  int rc = open_fits(a->file, a->buf, a->len, &c, a->e);
  if (rc) return rc;
  return read_opened(&c, a->sel, a->o, a->out, a->e);
}

static int call_count(void *arg) {
  fits_call *a = arg;
  fctx c;
  int rc = open_fits(a->file, a->buf, a->len, &c, a->e);
  if (rc) return rc;
  int hdu = 0, type = 0;
  rc = select_hdu(&c, a->sel, &hdu, &type, a->e);
  if (!rc) {
    if (type == IMAGE_HDU)
      *a->count = 1;
    else
      rc = dt_fits_count_rows(&c, hdu, a->o, a->count, a->e);
  }
  close_fits(&c);
  return rc;
}

int dt_spectrum_read_fits(const char *file, const dt_hdu_sel *sel, const dt_read_opts *o,
                          dt_spectrum **out, dt_err *e) {
  *out = NULL;
  fits_call a = {file, NULL, 0, sel, o, out, NULL, e};
  return dt_num_with_c_locale(call_read, &a);
}

int dt_spectrum_read_fits_mem(const void *buf, size_t len, const dt_hdu_sel *sel,
                              const dt_read_opts *o, dt_spectrum **out, dt_err *e) {
  *out = NULL;
  fits_call a = {NULL, buf, len, sel, o, out, NULL, e};
  return dt_num_with_c_locale(call_read, &a);
}

int dt_spectrum_threads_init(void) {
  fits_init_cfitsio();
  return fits_is_reentrant() ? DT_OK : DT_EINVAL;
}

int dt_spectrum_count_fits(const char *file, const dt_hdu_sel *sel, const dt_read_opts *o,
                           long *count, dt_err *e) {
  *count = 0;
  fits_call a = {file, NULL, 0, sel, o, NULL, count, e};
  return dt_num_with_c_locale(call_count, &a);
}

int dt_spectrum_count_fits_mem(const void *buf, size_t len, const dt_hdu_sel *sel,
                               const dt_read_opts *o, long *count, dt_err *e) {
  *count = 0;
  fits_call a = {NULL, buf, len, sel, o, NULL, count, e};
  return dt_num_with_c_locale(call_count, &a);
}
