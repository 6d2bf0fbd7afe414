/* Spectra in memory, and the one entry point that reads them from files.
 *
 * dt_spectrum_read looks at the first bytes of the file and hands it to the
 * FITS reader (spectrum_fits.c) or the text reader (spectrum_text.c); both
 * fill a dt_spectrum and call dt_spectrum_finish, which holds the rules every
 * layout shares: wavelengths finite and strictly monotonic (a decreasing
 * spectrum is reversed), masks for non-finite flux and bad uncertainties, an
 * estimated sigma when the file has none, and at least one usable pixel.
 * dt_spectrum_read_mem does the same for a file's bytes already in memory,
 * and dt_spectrum_file_load reads a file's bytes once so that its spectra
 * can be counted and read without going back to the disk.
 * The summaries used by `doubletty info` (median S/N, pixel size) live here
 * too. */
#include "doubletty/spectrum.h"

#include <ctype.h>
#include <errno.h>
#include <fcntl.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <unistd.h>

#include <gsl/gsl_statistics_double.h>

#include "doubletty/airvac.h"
#include "doubletty/atomic.h"
#include "doubletty/lsf.h"
#include "doubletty/num.h"
#include "spectrum_priv.h"

dt_spectrum *dt_spectrum_alloc(size_t n) {
  dt_spectrum *s = calloc(1, sizeof *s);
  if (!s) return NULL;
  size_t m = n ? n : 1;
  s->n = n;
  s->wave = calloc(m, sizeof *s->wave);
  s->flux = calloc(m, sizeof *s->flux);
  s->sigma = calloc(m, sizeof *s->sigma);
  s->mask = calloc(m, sizeof *s->mask);
  if (!s->wave || !s->flux || !s->sigma || !s->mask) {
    dt_spectrum_free(s);
    return NULL;
  }
  return s;
}

void dt_spectrum_free(dt_spectrum *s) {
  if (!s) return;
  free(s->wave);
  free(s->flux);
  free(s->sigma);
  free(s->mask);
  free(s->lsf_fwhm_kms);
  free(s);
}

int dt_spectrum_name_eq(const char *a, const char *b) {
  if (!a || !b) return 0;
  while (*a == ' ') a++;
  size_t la = strlen(a);
  while (la > 0 && a[la - 1] == ' ') la--;
  if (la != strlen(b)) return 0;
  for (size_t i = 0; i < la; i++)
    if (toupper((unsigned char)a[i]) != toupper((unsigned char)b[i])) return 0;
  return 1;
}

int dt_spectrum_unit_scale(const char *unit, double *scale, char *canon, size_t canon_size) {
  /* FITS standard spellings (Paper I, Table 3) and common variants. */
  static const struct { const char *name; double scale; const char *canon; } units[] = {
      {"", 1.0, "Angstrom"},          {"Angstrom", 1.0, "Angstrom"},
      {"Angstroms", 1.0, "Angstrom"}, {"A", 1.0, "Angstrom"},
      {"AA", 1.0, "Angstrom"},        {"0.1 nm", 1.0, "Angstrom"},
      {"nm", 10.0, "nm"},             {"nanometer", 10.0, "nm"},
      {"nanometers", 10.0, "nm"},     {"um", 1.0e4, "um"},
      {"micron", 1.0e4, "um"},        {"microns", 1.0e4, "um"},
      {"micrometer", 1.0e4, "um"},    {"m", 1.0e10, "m"},
      {"meter", 1.0e10, "m"},         {"meters", 1.0e10, "m"},
  };
  for (size_t i = 0; i < sizeof units / sizeof units[0]; i++) {
    if (dt_spectrum_name_eq(unit ? unit : "", units[i].name)) {
      /* "m" and "A" only in their exact case: "M" is not a unit of length. */
      if (unit && (!strcmp(units[i].name, "m") || !strcmp(units[i].name, "A"))) {
        const char *u = unit;
        while (*u == ' ') u++;
        if (*u != units[i].name[0]) continue;
      }
      *scale = units[i].scale;
      if (canon && canon_size) snprintf(canon, canon_size, "%s", units[i].canon);
      return 0;
    }
  }
  return -1;
}

void dt_spectrum_settle_air(dt_spectrum *s, const dt_read_opts *o) {
  if (s->air_from != DT_AIRVAC_FILE) {
    s->air = o && o->air;
    s->air_from = s->air ? DT_AIRVAC_CALLER : DT_AIRVAC_ASSUMED;
  }
  if (!s->air) return;
  for (size_t i = 0; i < s->n; i++) s->wave[i] = dt_air_to_vac(s->wave[i]);
}

static void place(char *buf, size_t size, const char *prefix, const char *label,
                  const long *line_of, size_t i) {
  long k = line_of ? line_of[i] : (long)i + 1;
  if (!label) label = "pixel";
  if (prefix && *prefix)
    snprintf(buf, size, "%s, %s %ld", prefix, label, k);
  else
    snprintf(buf, size, "%s %ld", label, k);
}

static void reverse_d(double *a, size_t n) {
  for (size_t i = 0, j = n - 1; i < j; i++, j--) {
    double t = a[i];
    a[i] = a[j];
    a[j] = t;
  }
}

int dt_spectrum_finish(dt_spectrum *s, const char *prefix, const char *label,
                       const long *line_of, dt_err *e) {
  char where[96];
  size_t n = s->n;
  if (n < 2) {
    snprintf(where, sizeof where, "%s", prefix ? prefix : "");
    return dt_err_set(e, DT_EFORMAT, where, "%zu pixel%s: a spectrum needs at least 2", n,
                      n == 1 ? "" : "s");
  }
  for (size_t i = 0; i < n; i++) {
    if (!isfinite(s->wave[i])) {
      place(where, sizeof where, prefix, label, line_of, i);
      return dt_err_set(e, DT_ENOWCS, where, "wavelength is not a finite number");
    }
  }
  /* The first step sets the direction; every step must keep it. */
  int dir = s->wave[1] > s->wave[0] ? 1 : -1;
  for (size_t i = 1; i < n; i++) {
    double step = (s->wave[i] - s->wave[i - 1]) * dir;
    if (step > 0) continue;
    place(where, sizeof where, prefix, label, line_of, i);
    if (step == 0)
      return dt_err_set(e, DT_EFORMAT, where, "duplicate wavelength %.10g A (same as the pixel before)",
                        s->wave[i]);
    return dt_err_set(e, DT_EFORMAT, where,
                      "wavelengths not monotonic: %.10g A after %.10g A (%s before)", s->wave[i],
                      s->wave[i - 1], dir > 0 ? "increasing" : "decreasing");
  }
  if (dir < 0) {
    reverse_d(s->wave, n);
    reverse_d(s->flux, n);
    reverse_d(s->sigma, n);
    if (s->lsf_fwhm_kms) reverse_d(s->lsf_fwhm_kms, n);
    for (size_t i = 0, j = n - 1; i < j; i++, j--) {
      unsigned char t = s->mask[i];
      s->mask[i] = s->mask[j];
      s->mask[j] = t;
    }
  }
  for (size_t i = 0; i < n; i++) {
    if (!isfinite(s->flux[i])) s->mask[i] = 1;
    if (s->has_sigma && !(s->sigma[i] > 0 && isfinite(s->sigma[i]))) s->mask[i] = 1;
  }
  if (dt_spectrum_nmasked(s) == n) {
    snprintf(where, sizeof where, "%s", prefix ? prefix : "");
    return dt_err_set(e, DT_EMASKED, where, "all %zu pixels are masked (bad flux, uncertainty or mask)",
                      n);
  }
  if (!s->has_sigma) {
    dt_spectrum_estimate_sigma(s);
    snprintf(s->sigma_from, sizeof s->sigma_from, "estimated");
  }
  int rc = dt_spectrum_validate(s, e);
  if (rc != DT_OK && prefix && *prefix) {
    char inner[96];
    snprintf(inner, sizeof inner, "%s", e ? e->where : "");
    if (e) snprintf(e->where, sizeof e->where, "%.40s, %.40s", prefix, inner);
  }
  return rc;
}

int dt_spectrum_validate(const dt_spectrum *s, dt_err *e) {
  char where[48];
  if (!s || s->n < 2) return dt_err_set(e, DT_EFORMAT, NULL, "a spectrum needs at least 2 pixels");
  size_t good = 0;
  for (size_t i = 0; i < s->n; i++) {
    if (!isfinite(s->wave[i]) || (i > 0 && !(s->wave[i] > s->wave[i - 1]))) {
      snprintf(where, sizeof where, "pixel %zu", i + 1);
      return dt_err_set(e, DT_EFORMAT, where, "wavelengths not finite and strictly increasing");
    }
    if (s->mask[i]) continue;
    if (!isfinite(s->flux[i]) || !(s->sigma[i] > 0) || !isfinite(s->sigma[i])) {
      snprintf(where, sizeof where, "pixel %zu", i + 1);
      return dt_err_set(e, DT_EFORMAT, where, "unmasked pixel without finite flux and sigma > 0");
    }
    good++;
  }
  if (good == 0) return dt_err_set(e, DT_EMASKED, NULL, "all %zu pixels are masked", s->n);
  return DT_OK;
}

/* Median of the finite values among a[0..n), reordering a; NaN if none. */
static double median_finite(double *a, size_t n) {
  size_t m = 0;
  for (size_t i = 0; i < n; i++)
    if (isfinite(a[i])) a[m++] = a[i];
  if (m == 0) return NAN;
  return gsl_stats_median(a, 1, m);
}

void dt_spectrum_estimate_sigma(dt_spectrum *s) {
  /* For white noise of rms sigma, 2 f[i] - f[i-2] - f[i+2] has rms
   * sqrt(6) sigma, and the median of |N(0,1)| is 1/1.482602.  A smooth
   * continuum contributes only its (small) second derivative. */
  const double k = 1.482602 / sqrt(6.0);
  const size_t half = 100; /* window of 201 pixels */
  const size_t min_values = 10;
  size_t n = s->n;
  s->has_sigma = 0;
  double *d = malloc(n * sizeof *d);
  double *buf = malloc((2 * half + 1 > n ? 2 * half + 1 : n) * sizeof *buf);
  if (!d || !buf) {
    /* Out of memory: fall back to a constant, still usable sigma. */
    for (size_t i = 0; i < n; i++) s->sigma[i] = 1.0;
    free(d);
    free(buf);
    return;
  }
  for (size_t i = 0; i < n; i++) {
    d[i] = NAN;
    if (i >= 2 && i + 2 < n && !s->mask[i] && !s->mask[i - 2] && !s->mask[i + 2])
      d[i] = fabs(2.0 * s->flux[i] - s->flux[i - 2] - s->flux[i + 2]);
  }
  memcpy(buf, d, n * sizeof *d);
  double global = k * median_finite(buf, n);
  double floor_value = 0;
  {
    size_t m = 0;
    for (size_t i = 0; i < n; i++)
      if (!s->mask[i] && isfinite(s->flux[i])) buf[m++] = fabs(s->flux[i]);
    floor_value = m ? 1e-3 * gsl_stats_median(buf, 1, m) : 0;
    if (!(floor_value > 0)) floor_value = 1.0;
  }
  if (!(global > 0) || !isfinite(global)) global = floor_value;
  /* The window median moves slowly: evaluate it every `step` pixels and
   * give it to the pixels around that centre. */
  const size_t step = 8;
  for (size_t c = 0; c < n; c += step) {
    size_t mid = c + step / 2 < n ? c + step / 2 : n - 1;
    size_t lo = mid > half ? mid - half : 0;
    size_t hi = mid + half + 1 < n ? mid + half + 1 : n;
    size_t m = 0;
    for (size_t j = lo; j < hi; j++)
      if (isfinite(d[j])) buf[m++] = d[j];
    double v = m >= min_values ? k * gsl_stats_median(buf, 1, m) : global;
    if (!(v > 0) || !isfinite(v)) v = global;
    for (size_t i = c; i < c + step && i < n; i++) s->sigma[i] = v;
  }
  free(d);
  free(buf);
}

double dt_spectrum_median_snr(const dt_spectrum *s) {
  if (!s || s->n == 0) return 0;
  double *r = malloc(s->n * sizeof *r);
  if (!r) return 0;
  size_t m = 0;
  for (size_t i = 0; i < s->n; i++)
    if (!s->mask[i] && s->sigma[i] > 0) r[m++] = s->flux[i] / s->sigma[i];
  double med = m ? gsl_stats_median(r, 1, m) : 0;
  free(r);
  return med;
}

double dt_spectrum_pixel_kms(const dt_spectrum *s) {
  if (!s || s->n < 2) return 0;
  double *v = malloc((s->n - 1) * sizeof *v);
  if (!v) return 0;
  for (size_t i = 0; i + 1 < s->n; i++)
    v[i] = DT_C_KMS * log1p((s->wave[i + 1] - s->wave[i]) / s->wave[i]);
  double med = gsl_stats_median(v, 1, s->n - 1);
  free(v);
  return med;
}

size_t dt_spectrum_nmasked(const dt_spectrum *s) {
  size_t k = 0;
  if (!s) return 0;
  for (size_t i = 0; i < s->n; i++) k += s->mask[i] != 0;
  return k;
}

size_t dt_spectrum_index(const dt_spectrum *s, double lam) {
  size_t lo = 0, hi = s->n;
  while (lo < hi) {
    size_t mid = lo + (hi - lo) / 2;
    if (s->wave[mid] < lam)
      lo = mid + 1;
    else
      hi = mid;
  }
  return lo;
}

/* ---- the entry point ---------------------------------------------------- */

/* Split "FILE[sel]" unless the whole path names an existing file. */
static int split_path(const char *path, char **base, char **sel) {
  *base = NULL;
  *sel = NULL;
  size_t len = strlen(path);
  const char *open = NULL;
  if (access(path, F_OK) != 0 && len > 2 && path[len - 1] == ']') open = strrchr(path, '[');
  if (open && open > path && open[1] != ']') {
    *base = strndup(path, (size_t)(open - path));
    *sel = strndup(open + 1, len - (size_t)(open - path) - 2);
  } else {
    *base = strdup(path);
  }
  return (*base && (!open || *sel)) ? 0 : -1;
}

typedef enum { KIND_FITS, KIND_TEXT } file_kind;

/* Decide how to read a file from its first bytes head[0..got). */
static int sniff_bytes(const unsigned char *head, size_t got, file_kind *kind, dt_err *e) {
  if (got == 0) return dt_err_set(e, DT_EFORMAT, NULL, "empty file");
  static const struct { const char *magic; size_t len; const char *name; } packed[] = {
      {"\x1f\x8b", 2, "gzip"},        {"\x1f\x9d", 2, "compress"},
      {"BZh", 3, "bzip2"},            {"PK\x03\x04", 4, "zip"},
      {"\xfd" "7zXZ", 5, "xz"},       {"\x28\xb5\x2f\xfd", 4, "zstd"},
  };
  for (size_t i = 0; i < sizeof packed / sizeof packed[0]; i++)
    if (got >= packed[i].len && !memcmp(head, packed[i].magic, packed[i].len))
      return dt_err_set(e, DT_EFORMAT, NULL,
                        "%s-compressed file: decompress it first, doubletty reads plain FITS or text",
                        packed[i].name);
  if (got >= 9 && !memcmp(head, "SIMPLE  =", 9)) {
    *kind = KIND_FITS;
    return DT_OK;
  }
  for (size_t i = 0; i < got; i++) {
    unsigned char c = head[i];
    if (c == 0 || (c < 32 && c != '\n' && c != '\r' && c != '\t' && c != '\f' && c != '\v'))
      return dt_err_set(e, DT_EFORMAT, NULL,
                        "not a FITS file (no SIMPLE card at the start) and not a text spectrum "
                        "(binary bytes)");
  }
  *kind = KIND_TEXT;
  return DT_OK;
}

enum { SNIFF_BYTES = 4096 }; /* how much of the start sniff_bytes looks at */

/* Open the file and decide how to read it from its first bytes.  Only a
 * regular file is a spectrum: a named pipe or a device (a path in a list
 * may name anything) would block the reader or never end, so it is refused
 * -- and opened without waiting (O_NONBLOCK) to find out what it is. */
static int sniff(const char *file, file_kind *kind, dt_err *e) {
  int fd = open(file, O_RDONLY | O_NONBLOCK | O_CLOEXEC);
  if (fd < 0) return dt_err_set(e, DT_EIO, NULL, "cannot open: %s", strerror(errno));
  struct stat st;
  if (fstat(fd, &st) != 0) {
    int err = errno;
    close(fd);
    return dt_err_set(e, DT_EIO, NULL, "cannot open: %s", strerror(err));
  }
  if (!S_ISREG(st.st_mode)) {
    close(fd);
    return dt_err_set(e, DT_EIO, NULL, "%s, not a spectrum file",
                      S_ISDIR(st.st_mode)    ? "is a directory"
                      : S_ISFIFO(st.st_mode) ? "is a named pipe"
                      : S_ISCHR(st.st_mode) || S_ISBLK(st.st_mode) ? "is a device"
                                                                   : "is not a regular file");
  }
  unsigned char head[SNIFF_BYTES];
  size_t got = 0;
  while (got < sizeof head) {
    ssize_t k = read(fd, head + got, sizeof head - got);
    if (k < 0 && errno == EINTR) continue;
    if (k < 0) {
      int err = errno;
      close(fd);
      return dt_err_set(e, DT_EIO, NULL, "cannot read: %s", strerror(err));
    }
    if (k == 0) break;
    got += (size_t)k;
  }
  close(fd);
  return sniff_bytes(head, got, kind, e);
}

static int parse_sel(const char *sel, dt_hdu_sel *hs, dt_err *e) {
  hs->number = 0;
  hs->name = NULL;
  if (!sel) return DT_OK;
  const char *p = sel;
  while (*p == ' ') p++;
  if (isdigit((unsigned char)*p)) {
    char *end;
    long long k = dt_num_strtoll(p, &end);
    while (*end == ' ') end++;
    if (*end != '\0' || k < 0 || k > 100000)
      return dt_err_set(e, DT_EINVAL, NULL, "[%s]: not an extension number or name", sel);
    hs->number = (int)k + 1; /* [0] = primary = HDU 1 */
    return DT_OK;
  }
  if (*p == '\0') return dt_err_set(e, DT_EINVAL, NULL, "[%s]: empty extension selector", sel);
  hs->name = p;
  return DT_OK;
}

/* The options against the kind of file and the HDU selector of its name. */
static int check_opts(const dt_read_opts *opts, file_kind kind, dt_hdu_sel *hs, dt_err *e) {
  if (opts && opts->hdu > 0) {
    hs->number = opts->hdu;
    hs->name = NULL;
  }
  if (opts && opts->hdu < 0) return dt_err_set(e, DT_EINVAL, NULL, "HDU %d: HDUs count from 1", opts->hdu);
  if (opts && opts->row < 0) return dt_err_set(e, DT_EINVAL, NULL, "row %ld: rows count from 1", opts->row);
  if (kind == KIND_TEXT && (hs->number || hs->name))
    return dt_err_set(e, DT_EINVAL, NULL,
                      "an extension selector applies to FITS files; this is a text file");
  return DT_OK;
}

static int prepare(const char *path, const dt_read_opts *opts, char **base, char **sel,
                   file_kind *kind, dt_hdu_sel *hs, dt_err *e) {
  dt_err_clear(e);
  if (!path || !*path) return dt_err_set(e, DT_EINVAL, NULL, "no file name");
  if (split_path(path, base, sel) != 0) return dt_err_set(e, DT_ENOMEM, NULL, "out of memory");
  int rc = sniff(*base, kind, e);
  if (rc != DT_OK) return rc;
  rc = parse_sel(*sel, hs, e);
  if (rc != DT_OK) return rc;
  return check_opts(opts, *kind, hs, e);
}

int dt_spectrum_read(const char *path, const dt_read_opts *opts, dt_spectrum **out, dt_err *e) {
  *out = NULL;
  char *base = NULL, *sel = NULL;
  file_kind kind = KIND_TEXT;
  dt_hdu_sel hs = {0, NULL};
  int rc = prepare(path, opts, &base, &sel, &kind, &hs, e);
  if (rc == DT_OK) {
    if (kind == KIND_FITS)
      rc = dt_spectrum_read_fits(base, &hs, opts, out, e);
    else {
      if (opts && opts->row > 1)
        rc = dt_err_set(e, DT_EINVAL, NULL, "row %ld: a text file holds one spectrum", opts->row);
      else
        rc = dt_spectrum_read_text(base, opts, out, e);
    }
  }
  free(base);
  free(sel);
  if (rc == DT_OK && *out) rc = dt_spectrum_settle_frame(*out, opts, e);
  if (rc == DT_OK && *out && opts && opts->lsf_table) rc = dt_lsf_table_apply(opts->lsf_table, *out, e);
  if (rc != DT_OK && *out) {
    dt_spectrum_free(*out);
    *out = NULL;
  }
  return rc;
}

/* Read or count (count != NULL) the spectra in a file's bytes buf[0..len),
 * sel being the "[ext]" of the file's name or NULL: the checks of prepare
 * in the same order, then the readers on memory. */
static int from_bytes(const void *buf, size_t len, const char *sel, const dt_read_opts *opts,
                      dt_spectrum **out, long *count, dt_err *e) {
  if (!buf && len) return dt_err_set(e, DT_EINVAL, NULL, "no bytes to read");
  file_kind kind = KIND_TEXT;
  dt_hdu_sel hs = {0, NULL};
  int rc = sniff_bytes(buf, len < SNIFF_BYTES ? len : SNIFF_BYTES, &kind, e);
  if (rc == DT_OK) rc = parse_sel(sel, &hs, e);
  if (rc == DT_OK) rc = check_opts(opts, kind, &hs, e);
  if (rc != DT_OK) return rc;
  if (count) {
    if (kind == KIND_FITS) return dt_spectrum_count_fits_mem(buf, len, &hs, opts, count, e);
    *count = 1;
    return DT_OK;
  }
  if (kind == KIND_FITS) {
    rc = dt_spectrum_read_fits_mem(buf, len, &hs, opts, out, e);
  } else if (opts && opts->row > 1)
    rc = dt_err_set(e, DT_EINVAL, NULL, "row %ld: a text file holds one spectrum", opts->row);
  else
    rc = dt_spectrum_read_text_mem(buf, len, opts, out, e);
  if (rc == DT_OK && *out) rc = dt_spectrum_settle_frame(*out, opts, e);
  if (rc == DT_OK && *out && opts && opts->lsf_table) rc = dt_lsf_table_apply(opts->lsf_table, *out, e);
  if (rc != DT_OK && *out) {
    dt_spectrum_free(*out);
    *out = NULL;
  }
  return rc;
}

int dt_spectrum_read_mem(const void *buf, size_t len, const dt_read_opts *opts,
                         dt_spectrum **out, dt_err *e) {
  *out = NULL;
  dt_err_clear(e);
  return from_bytes(buf, len, NULL, opts, out, NULL, e);
}

int dt_spectrum_count(const char *path, const dt_read_opts *opts, long *count, dt_err *e) {
  *count = 0;
  char *base = NULL, *sel = NULL;
  file_kind kind = KIND_TEXT;
  dt_hdu_sel hs = {0, NULL};
  int rc = prepare(path, opts, &base, &sel, &kind, &hs, e);
  if (rc == DT_OK) {
    if (kind == KIND_FITS)
      rc = dt_spectrum_count_fits(base, &hs, opts, count, e);
    else
      *count = 1;
  }
  free(base);
  free(sel);
  return rc;
}

/* ---- a file read once, counted and read many times ---------------------- */

struct dt_spectrum_file {
  char *path;           /* as given, "[ext]" included */
  char *sel;            /* the "[ext]" of it, or NULL */
  unsigned char *bytes; /* the file's bytes, or NULL: kept by name (disk) */
  size_t len;
};

/* The bytes of a regular file of at most DT_SPECTRUM_LOAD_MAX bytes, read
 * with one open: NULL for anything else (not there, not regular, too big,
 * a read error, out of memory), which the disk readers then report. */
static unsigned char *load_bytes(const char *file, size_t *len) {
  *len = 0;
  int fd = open(file, O_RDONLY | O_NONBLOCK | O_CLOEXEC);
  if (fd < 0) return NULL;
  struct stat st;
  unsigned char *buf = NULL;
  if (fstat(fd, &st) == 0 && S_ISREG(st.st_mode) && st.st_size >= 0 &&
      (unsigned long long)st.st_size <= DT_SPECTRUM_LOAD_MAX) {
    size_t want = (size_t)st.st_size, got = 0;
    buf = malloc(want ? want : 1);
    /* the size at fstat, as the disk readers take it (a file cut meanwhile
     * ends at its end) */
    while (buf && got < want) {
      ssize_t k = read(fd, buf + got, want - got);
      if (k < 0 && errno == EINTR) continue;
      if (k < 0) {
        free(buf);
        buf = NULL;
      }
      if (k <= 0) break;
      got += (size_t)k;
    }
    *len = got;
  }
  close(fd);
  return buf;
}

int dt_spectrum_file_load(const char *path, dt_spectrum_file **out, dt_err *e) {
  dt_err_clear(e);
  *out = NULL;
  dt_spectrum_file *f = calloc(1, sizeof *f);
  if (!f || !(f->path = strdup(path ? path : ""))) {
    free(f);
    return dt_err_set(e, DT_ENOMEM, NULL, "out of memory");
  }
  char *base = NULL, *sel = NULL;
  if (path && *path && split_path(path, &base, &sel) == 0) {
    f->bytes = load_bytes(base, &f->len);
    f->sel = sel;
    sel = NULL;
  }
  free(base);
  free(sel);
  *out = f;
  return DT_OK;
}

long long dt_spectrum_file_bytes(const dt_spectrum_file *f) {
  return f && f->bytes ? (long long)f->len : -1;
}

int dt_spectrum_file_count(const dt_spectrum_file *f, const dt_read_opts *opts, long *count,
                           dt_err *e) {
  *count = 0;
  if (f->bytes) {
    dt_err_clear(e);
    if (from_bytes(f->bytes, f->len, f->sel, opts, NULL, count, e) == DT_OK) return DT_OK;
  }
  /* kept by name, or an error: the disk reader's words for it */
  return dt_spectrum_count(f->path, opts, count, e);
}

int dt_spectrum_file_read(const dt_spectrum_file *f, const dt_read_opts *opts,
                          dt_spectrum **out, dt_err *e) {
  *out = NULL;
  if (f->bytes) {
    dt_err_clear(e);
    if (from_bytes(f->bytes, f->len, f->sel, opts, out, NULL, e) == DT_OK) return DT_OK;
  }
  return dt_spectrum_read(f->path, opts, out, e);
}

void dt_spectrum_file_free(dt_spectrum_file *f) {
  if (!f) return;
  free(f->path);
  free(f->sel);
  free(f->bytes);
  free(f);
}
