/* Plain-text spectra: one pixel per line, "wave flux [sigma [mask]]".
 *
 * Fields are separated by blanks, tabs or commas (so CSV works too); '#'
 * starts a comment; blank lines are skipped; a first line of column names
 * ("wave,flux,err") is skipped.  Wavelengths are Angstrom, vacuum unless
 * the caller declares air (dt_read_opts.air: converted with airvac.c).  Every
 * line must have the same number of fields.  Errors name the line.  The
 * same parser reads a file or bytes in memory (through a stdio stream). */
#include <ctype.h>
#include <errno.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "spectrum_priv.h"
#include "doubletty/num.h"

#define MAX_FIELDS 4

typedef struct growing {
  double *col[MAX_FIELDS];
  long *line;
  size_t n, cap;
} growing;

static int grow(growing *g) {
  size_t cap = g->cap ? 2 * g->cap : 1024;
  for (int k = 0; k < MAX_FIELDS; k++) {
    double *p = realloc(g->col[k], cap * sizeof *p);
    if (!p) return -1;
    g->col[k] = p;
  }
  long *l = realloc(g->line, cap * sizeof *l);
  if (!l) return -1;
  g->line = l;
  g->cap = cap;
  return 0;
}

static void growing_free(growing *g) {
  for (int k = 0; k < MAX_FIELDS; k++) free(g->col[k]);
  free(g->line);
}

/* Split a line into fields.  Runs of blanks separate fields; a comma
 * separates exactly one field from the next (blanks around it are ignored),
 * so ",," leaves an empty field, reported as an error.  Returns the number
 * of fields (up to max+1 to signal "too many"), or -1 for an empty field. */
static int split_fields(char *p, char **field, int max) {
  int n = 0;
  while (isspace((unsigned char)*p)) p++;
  if (*p == '\0') return 0;
  for (;;) {
    if (*p == ',') return -1; /* empty field */
    char *start = p;
    while (*p && *p != ',' && !isspace((unsigned char)*p)) p++;
    char *end = p;
    while (isspace((unsigned char)*p)) p++;
    int comma = *p == ',';
    if (comma) {
      p++;
      while (isspace((unsigned char)*p)) p++;
      if (*p == '\0') return -1; /* trailing comma: empty last field */
    }
    if (n < max) field[n] = start;
    n++;
    *end = '\0';
    if (*p == '\0') break;
    if (n > max) break;
  }
  return n;
}

static int is_number(const char *t, double *v) {
  char *end;
  errno = 0;
  *v = dt_num_strtod(t, &end);
  return end != t && *end == '\0';
}

/* Read a text spectrum from an open stream (NULL = no bytes at all); the
 * stream is closed here. */
static int read_text_stream(FILE *fp, const dt_read_opts *o, dt_spectrum **out, dt_err *e) {
  *out = NULL;
  growing g = {{NULL}, NULL, 0, 0};
  char *buf = NULL;
  size_t bufcap = 0;
  ssize_t len;
  long lineno = 0, first_line = 0;
  int ncol = 0, header_skipped = 0;
  int rc = DT_OK;
  char where[32];
  while (fp && (len = getline(&buf, &bufcap, fp)) != -1) {
    lineno++;
    snprintf(where, sizeof where, "line %ld", lineno);
    if (memchr(buf, '\0', (size_t)len)) {
      rc = dt_err_set(e, DT_EFORMAT, where, "%s",
                      g.n ? "binary bytes in a text file"
                          : "not a FITS file (no SIMPLE card at the start), and not a text "
                            "spectrum (binary bytes)");
      break;
    }
    char *hash = strchr(buf, '#');
    if (hash) *hash = '\0';
    char *field[MAX_FIELDS];
    int nf = split_fields(buf, field, MAX_FIELDS);
    if (nf == 0) continue;
    double v[MAX_FIELDS];
    int bad = -1;
    for (int k = 0; k < nf && k < MAX_FIELDS; k++)
      if (!is_number(field[k], &v[k])) {
        bad = k;
        break;
      }
    /* Before any data, a line that does not start with a number is taken
     * for a line of column names, once. */
    if (g.n == 0 && !header_skipped && (nf < 0 || bad == 0)) {
      header_skipped = 1;
      continue;
    }
    char problem[160] = "";
    if (nf < 0)
      snprintf(problem, sizeof problem, "empty field between separators");
    else if (bad >= 0)
      snprintf(problem, sizeof problem, "field %d: '%.40s' is not a number", bad + 1, field[bad]);
    else if (nf < 2 || nf > MAX_FIELDS)
      snprintf(problem, sizeof problem, "%s%d field%s; expected wave flux [sigma [mask]]",
               nf > MAX_FIELDS ? "more than " : "", nf > MAX_FIELDS ? MAX_FIELDS : nf,
               nf == 1 ? "" : "s");
    if (problem[0]) {
      if (g.n == 0)
        rc = dt_err_set(e, DT_EFORMAT, where, "not a FITS file, and not a text spectrum: %s", problem);
      else
        rc = dt_err_set(e, DT_EFORMAT, where, "%s", problem);
      break;
    }
    if (ncol == 0) {
      ncol = nf;
      first_line = lineno;
    } else if (nf != ncol) {
      rc = dt_err_set(e, DT_EFORMAT, where, "%d fields, but line %ld has %d", nf, first_line, ncol);
      break;
    }
    if (g.n == g.cap && grow(&g) != 0) {
      rc = dt_err_set(e, DT_ENOMEM, where, "out of memory");
      break;
    }
    for (int k = 0; k < nf; k++) g.col[k][g.n] = v[k];
    g.line[g.n] = lineno;
    g.n++;
  }
  if (rc == DT_OK && fp && ferror(fp))
    rc = dt_err_set(e, DT_EIO, NULL, "read error: %s", strerror(errno));
  if (fp) fclose(fp);
  free(buf);
  if (rc == DT_OK && g.n == 0)
    rc = dt_err_set(e, DT_EFORMAT, NULL, "no data lines (expected columns: wave flux [sigma [mask]])");
  dt_spectrum *s = NULL;
  if (rc == DT_OK && !(s = dt_spectrum_alloc(g.n))) rc = dt_err_set(e, DT_ENOMEM, NULL, "out of memory");
  if (rc == DT_OK) {
    memcpy(s->wave, g.col[0], g.n * sizeof(double));
    memcpy(s->flux, g.col[1], g.n * sizeof(double));
    s->has_sigma = ncol >= 3;
    if (s->has_sigma) {
      memcpy(s->sigma, g.col[2], g.n * sizeof(double));
      snprintf(s->sigma_from, sizeof s->sigma_from, "column 3 (sigma)");
    }
    if (ncol >= 4)
      for (size_t i = 0; i < g.n; i++) s->mask[i] = g.col[3][i] != 0; /* NaN counts as set */
    snprintf(s->layout, sizeof s->layout, "text");
    snprintf(s->unit, sizeof s->unit, "Angstrom");
    dt_spectrum_settle_air(s, o);
    rc = dt_spectrum_finish(s, NULL, "line", g.line, e);
  }
  growing_free(&g);
  if (rc != DT_OK) {
    dt_spectrum_free(s);
    return rc;
  }
  *out = s;
  return DT_OK;
}

int dt_spectrum_read_text(const char *file, const dt_read_opts *o, dt_spectrum **out, dt_err *e) {
  *out = NULL;
  FILE *fp = fopen(file, "r");
  if (!fp) return dt_err_set(e, DT_EIO, NULL, "cannot open: %s", strerror(errno));
  return read_text_stream(fp, o, out, e);
}

int dt_spectrum_read_text_mem(const void *buf, size_t len, const dt_read_opts *o,
                              dt_spectrum **out, dt_err *e) {
  *out = NULL;
  FILE *fp = NULL;
  /* fmemopen reads the bytes in place; a zero-length buffer is an empty file */
  if (len > 0 && !(fp = fmemopen((void *)buf, len, "r")))
    return dt_err_set(e, DT_ENOMEM, NULL, "cannot read from memory: %s", strerror(errno));
  return read_text_stream(fp, o, out, e);
}
