/* Survey catalogues read back (see catalog.h): a small RFC 4180 reader for
 * the CSV files (comment lines "# key=value" before the header, quoted
 * fields), a cfitsio reader that turns a FITS binary table into the same
 * table of texts, then one pass that groups rows into sightlines and parses
 * the columns the statistics need. */
#include "doubletty/catalog.h"

#include <errno.h>
#include <fitsio.h>
#include <math.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "doubletty/num.h"
#include "textfile.h"

void dt_catalog_init(dt_catalog *c) {
  memset(c, 0, sizeof *c);
  c->with_table = -1;
}

static void table_free(dt_catalog_table *t) {
  free(t->path);
  for (size_t i = 0; i < t->ncol; i++) free(t->col[i]);
  free(t->col);
  for (size_t i = 0; i < t->ncol * t->nrow; i++) free(t->cell[i]);
  free(t->cell);
  free(t->line);
  memset(t, 0, sizeof *t);
}

void dt_catalog_free(dt_catalog *c) {
  for (size_t i = 0; i < c->n; i++) free(c->s[i].comp);
  free(c->s);
  for (size_t i = 0; i < c->ntab; i++) table_free(&c->tab[i]);
  free(c->tab);
  dt_catalog_init(c);
}

/* ---- a growing list of texts ---- */

typedef struct strvec {
  char **v;
  size_t n, cap;
} strvec;

static int sv_push(strvec *s, char *x) {
  if (!x) return DT_ENOMEM;
  if (s->n == s->cap) {
    size_t cap = s->cap ? 2 * s->cap : 64;
    char **v = realloc(s->v, cap * sizeof *v);
    if (!v) {
      free(x);
      return DT_ENOMEM;
    }
    s->v = v;
    s->cap = cap;
  }
  s->v[s->n++] = x;
  return DT_OK;
}

static void sv_free(strvec *s) {
  for (size_t i = 0; i < s->n; i++) free(s->v[i]);
  free(s->v);
  memset(s, 0, sizeof *s);
}

static char *dup_range(const char *a, size_t n) {
  char *s = malloc(n + 1);
  if (s) {
    memcpy(s, a, n);
    s[n] = 0;
  }
  return s;
}

/* ---- CSV ---- */

/* One record from *p (advanced past it) into fields; *line counts lines.
 * DT_OK, or DT_EFORMAT for an unterminated quote or a stray quote. */
static int csv_record(const char **p, const char *end, strvec *fields, long *line, dt_err *e) {
  const char *s = *p;
  long start = *line;
  for (;;) {
    char *buf = NULL;
    size_t n = 0;
    if (s < end && *s == '"') {
      s++;
      buf = malloc((size_t)(end - s) + 1);
      if (!buf) return dt_err_set(e, DT_ENOMEM, NULL, "out of memory");
      for (;;) {
        if (s >= end) {
          free(buf);
          char w[48];
          snprintf(w, sizeof w, "line %ld", start);
          return dt_err_set(e, DT_EFORMAT, w, "a quoted field is not closed");
        }
        if (*s == '"') {
          if (s + 1 < end && s[1] == '"') {
            buf[n++] = '"';
            s += 2;
            continue;
          }
          s++;
          break;
        }
        if (*s == '\n') (*line)++;
        buf[n++] = *s++;
      }
      buf[n] = 0;
      if (s < end && *s != ',' && *s != '\n' && *s != '\r') {
        free(buf);
        char w[48];
        snprintf(w, sizeof w, "line %ld", *line);
        return dt_err_set(e, DT_EFORMAT, w, "text after a closing quote");
      }
    } else {
      const char *a = s;
      while (s < end && *s != ',' && *s != '\n' && *s != '\r') s++;
      buf = dup_range(a, (size_t)(s - a));
    }
    if (sv_push(fields, buf) != DT_OK) return dt_err_set(e, DT_ENOMEM, NULL, "out of memory");
    if (s < end && *s == ',') {
      s++;
      continue;
    }
    if (s < end && *s == '\r') s++;
    if (s < end && *s == '\n') s++;
    (*line)++;
    *p = s;
    return DT_OK;
  }
}

static int read_csv(dt_catalog_table *t, const char *path, dt_err *e) {
  size_t len;
  char *buf;
  int src = dt_text_slurp(path, SIZE_MAX / 4, "a catalogue", &buf, &len, e);
  if (src != DT_OK) return src;
  const char *p = buf, *end = buf + len;
  long line = 1;
  int rc = DT_OK;
  strvec head = {0}, cells = {0};
  long *lines = NULL;
  size_t nrow = 0, caprow = 0;
  /* comment lines and blank lines before the header */
  while (p < end && (*p == '#' || *p == '\n' || *p == '\r')) {
    while (p < end && *p != '\n') p++;
    if (p < end) p++;
    line++;
  }
  if (p >= end) {
    rc = dt_err_set(e, DT_EFORMAT, NULL, "no header line (an empty catalogue)");
    goto out;
  }
  if ((rc = csv_record(&p, end, &head, &line, e)) != DT_OK) goto out;
  while (p < end) {
    if (*p == '\n' || *p == '\r') { /* blank line */
      if (*p == '\r') p++;
      if (p < end && *p == '\n') p++;
      line++;
      continue;
    }
    long at = line;
    strvec f = {0};
    if ((rc = csv_record(&p, end, &f, &line, e)) != DT_OK) {
      sv_free(&f);
      goto out;
    }
    if (f.n != head.n) {
      char w[48];
      snprintf(w, sizeof w, "line %ld", at);
      rc = dt_err_set(e, DT_EFORMAT, w, "%zu fields where the header has %zu", f.n, head.n);
      sv_free(&f);
      goto out;
    }
    for (size_t i = 0; i < f.n; i++)
      if ((rc = sv_push(&cells, f.v[i])) != DT_OK) {
        for (size_t j = i + 1; j < f.n; j++) free(f.v[j]);
        free(f.v);
        rc = dt_err_set(e, DT_ENOMEM, NULL, "out of memory");
        goto out;
      }
    free(f.v);
    if (nrow == caprow) {
      caprow = caprow ? 2 * caprow : 64;
      long *l = realloc(lines, caprow * sizeof *l);
      if (!l) {
        rc = dt_err_set(e, DT_ENOMEM, NULL, "out of memory");
        goto out;
      }
      lines = l;
    }
    lines[nrow++] = at;
  }
  t->ncol = head.n;
  t->col = head.v;
  t->nrow = nrow;
  t->cell = cells.v;
  t->line = lines;
  free(buf);
  return DT_OK;
out:
  sv_free(&head);
  sv_free(&cells);
  free(lines);
  free(buf);
  return rc;
}

/* ---- FITS binary table: every column as text ---- */

typedef struct fits_args {
  dt_catalog_table *t;
  const char *path;
  dt_err *e;
} fits_args;

static int fits_fail(int st, dt_err *e) {
  char msg[FLEN_ERRMSG] = "";
  fits_get_errstatus(st, msg);
  return dt_err_set(e, DT_EFORMAT, NULL, "cannot read the FITS table: %s", msg);
}

static int read_fits_c(void *arg) {
  fits_args *a = arg;
  dt_catalog_table *t = a->t;
  fitsfile *f = NULL;
  int st = 0, hdutype = 0, ncol = 0;
  long nrow = 0;
  if (fits_open_file(&f, a->path, READONLY, &st)) return fits_fail(st, a->e);
  if (fits_movnam_hdu(f, BINARY_TBL, "DOUBLETTY_SESSION", 0, &st)) {
    st = 0;
    if (fits_movabs_hdu(f, 2, &hdutype, &st) || hdutype != BINARY_TBL) {
      int rc = st ? fits_fail(st, a->e) : dt_err_set(a->e, DT_EFORMAT, "HDU 2", "not a binary table");
      st = 0;
      fits_close_file(f, &st);
      return rc;
    }
  }
  fits_get_num_cols(f, &ncol, &st);
  fits_get_num_rows(f, &nrow, &st);
  if (st) {
    int rc = fits_fail(st, a->e);
    st = 0;
    fits_close_file(f, &st);
    return rc;
  }
  t->ncol = (size_t)ncol;
  t->nrow = (size_t)nrow;
  t->fits = 1;
  t->col = calloc((size_t)ncol, sizeof *t->col);
  t->cell = calloc((size_t)ncol * (size_t)nrow + 1, sizeof *t->cell);
  t->line = calloc((size_t)nrow + 1, sizeof *t->line);
  if (!t->col || !t->cell || !t->line) {
    fits_close_file(f, &st);
    return dt_err_set(a->e, DT_ENOMEM, NULL, "out of memory");
  }
  for (long r = 0; r < nrow; r++) t->line[r] = r + 1;
  for (int c = 1; c <= ncol && !st; c++) {
    char key[FLEN_KEYWORD], name[FLEN_VALUE] = "";
    snprintf(key, sizeof key, "TTYPE%d", c);
    fits_read_key_str(f, key, name, NULL, &st);
    if (st == KEY_NO_EXIST) {
      st = 0;
      snprintf(name, sizeof name, "col%d", c);
    }
    t->col[c - 1] = strdup(name);
    int width = 0;
    fits_get_col_display_width(f, c, &width, &st);
    if (width < 1) width = 1;
    for (long r = 0; r < nrow && !st; r++) {
      char *s = calloc((size_t)width + 32, 1);
      char *arr[1] = {s};
      int anynul = 0;
      if (!s) break;
      fits_read_col_str(f, c, r + 1, 1, 1, "", arr, &anynul, &st);
      /* trim the blanks cfitsio pads with */
      size_t n = strlen(s), b = 0;
      while (n && s[n - 1] == ' ') s[--n] = 0;
      while (s[b] == ' ') b++;
      memmove(s, s + b, n - b + 1);
      t->cell[(size_t)r * (size_t)ncol + (size_t)(c - 1)] = s;
    }
  }
  for (size_t i = 0; !st && i < t->ncol; i++)
    if (!t->col[i]) st = MEMORY_ALLOCATION;
  for (size_t i = 0; !st && i < t->ncol * t->nrow; i++)
    if (!t->cell[i]) st = MEMORY_ALLOCATION;
  int rc = st ? fits_fail(st, a->e) : DT_OK;
  st = 0;
  fits_close_file(f, &st);
  return rc;
}

static int is_fits(const char *path) {
  FILE *f = fopen(path, "rb");
  char head[7] = "";
  if (!f) return 0;
  size_t n = fread(head, 1, 6, f);
  fclose(f);
  return n == 6 && !memcmp(head, "SIMPLE", 6);
}

/* ---- columns ---- */

static long col_index(const dt_catalog_table *t, const char *name) {
  for (size_t i = 0; i < t->ncol; i++)
    if (!strcmp(t->col[i], name)) return (long)i;
  return -1;
}

static const char *cell(const dt_catalog_table *t, size_t row, long col) {
  return col < 0 ? NULL : t->cell[row * t->ncol + (size_t)col];
}

static void where_of(const dt_catalog_table *t, size_t row, const char *col, char *w, size_t n) {
  if (col) snprintf(w, n, "%s %ld, column %s", t->fits ? "row" : "line", t->line[row], col);
  else snprintf(w, n, "%s %ld", t->fits ? "row" : "line", t->line[row]);
}

/* A number from a cell: empty (or "nan", any case) is NaN. */
static int parse_cell(const dt_catalog_table *t, size_t row, long col, double *x, dt_err *e) {
  const char *s = cell(t, row, col);
  *x = NAN;
  if (!s || !*s) return DT_OK;
  if (dt_num_parse(s, x) == DT_OK) return DT_OK;
  if (!strcmp(s, "NaN") || !strcmp(s, "NAN")) return DT_OK;
  char w[128];
  where_of(t, row, t->col[col], w, sizeof w);
  return dt_err_set(e, DT_EFORMAT, w, "'%.40s' is not a number", s);
}

/* ---- sightlines ---- */

static int add_sightline(dt_catalog *c, dt_sightline *s) {
  if (c->n % 64 == 0) {
    dt_sightline *v = realloc(c->s, (c->n + 64) * sizeof *v);
    if (!v) return DT_ENOMEM;
    c->s = v;
  }
  c->s[c->n++] = *s;
  return DT_OK;
}

static int same_key(const dt_sightline *a, const dt_sightline *b) {
  return !strcmp(a->name, b->name) && !strcmp(a->doublet, b->doublet) && !strcmp(a->system, b->system);
}

typedef struct colmap {
  long name, doublet, system, index, component, verdict, suggested, W, Wlim, logN_aod, logN_limit,
      ra, dec, v, v_err, logN, logN_err;
} colmap;

static int group_rows(dt_catalog *c, size_t ti, dt_err *e) {
  dt_catalog_table *t = &c->tab[ti];
  colmap m;
  m.name = col_index(t, "name");
  m.doublet = col_index(t, "doublet");
  m.system = col_index(t, "system");
  m.index = col_index(t, "index");
  m.component = col_index(t, "component");
  m.verdict = col_index(t, "verdict");
  m.suggested = col_index(t, "suggested");
  m.W = col_index(t, "W_mA");
  m.Wlim = col_index(t, "W_limit_mA");
  if (m.Wlim < 0) m.Wlim = col_index(t, "W_lim_mA"); /* the export's former name */
  m.logN_aod = col_index(t, "logN_aod");
  m.logN_limit = col_index(t, "logN_limit");
  m.ra = col_index(t, "ra_deg");
  m.dec = col_index(t, "dec_deg");
  m.v = col_index(t, "v_kms");
  m.v_err = col_index(t, "v_err");
  m.logN = col_index(t, "logN");
  m.logN_err = col_index(t, "logN_err");
  if (m.name < 0) return dt_err_set(e, DT_ENOTFOUND, NULL, "no column 'name'");
  if (m.verdict < 0 && m.suggested < 0)
    return dt_err_set(e, DT_ENOTFOUND, NULL, "no column 'verdict' or 'suggested'");
  size_t first = c->n;
  for (size_t r = 0; r < t->nrow; r++) {
    dt_sightline k;
    memset(&k, 0, sizeof k);
    k.name = cell(t, r, m.name);
    k.doublet = m.doublet >= 0 ? cell(t, r, m.doublet) : "";
    k.system = m.system >= 0 && *cell(t, r, m.system) ? cell(t, r, m.system) : "target";
    const char *idx = m.index >= 0 ? cell(t, r, m.index) : NULL;
    dt_sightline *cur = c->n > first ? &c->s[c->n - 1] : NULL;
    int same = cur && same_key(cur, &k);
    if (same && idx) same = !strcmp(idx, cell(t, cur->row, m.index));
    if (!same) {
      char w[128];
      /* a sightline seen before: in this catalogue or an earlier one */
      for (size_t i = 0; i < c->n; i++)
        if (same_key(&c->s[i], &k)) {
          const dt_catalog_table *o = &c->tab[c->s[i].table];
          where_of(t, r, NULL, w, sizeof w);
          return dt_err_set(e, DT_EFORMAT, w, "sightline %.40s (%.16s, system %.24s) again: first in %.60s %s %ld",
                            k.name, k.doublet, k.system, o->path, o->fits ? "row" : "line",
                            o->line[c->s[i].row]);
        }
      if (!*k.name) {
        where_of(t, r, "name", w, sizeof w);
        return dt_err_set(e, DT_EFORMAT, w, "empty name");
      }
      k.table = ti;
      k.row = r;
      k.with_row = -1;
      const char *v = m.verdict >= 0 ? cell(t, r, m.verdict) : "";
      if (!*v || !strcmp(v, "none")) v = m.suggested >= 0 ? cell(t, r, m.suggested) : "";
      if (!*v) {
        k.verdict = DT_VERDICT_NONE;
      } else if (dt_verdict_parse(v, &k.verdict) != DT_OK) {
        where_of(t, r, m.verdict >= 0 && *cell(t, r, m.verdict) ? "verdict" : "suggested", w, sizeof w);
        return dt_err_set(e, DT_EFORMAT, w, "unknown verdict '%.40s'", v);
      }
      int rc = DT_OK;
      if (!rc) rc = parse_cell(t, r, m.W, &k.W_mA, e);
      if (!rc) rc = parse_cell(t, r, m.Wlim, &k.W_limit_mA, e);
      if (!rc) rc = parse_cell(t, r, m.logN_aod, &k.logN_aod, e);
      if (!rc) rc = parse_cell(t, r, m.logN_limit, &k.logN_limit, e);
      if (!rc) rc = parse_cell(t, r, m.ra, &k.ra_deg, e);
      if (!rc) rc = parse_cell(t, r, m.dec, &k.dec_deg, e);
      if (rc) return rc;
      if (add_sightline(c, &k) != DT_OK) return dt_err_set(e, DT_ENOMEM, NULL, "out of memory");
      cur = &c->s[c->n - 1];
    }
    /* a component row: a component number other than empty or 0 */
    const char *cn = m.component >= 0 ? cell(t, r, m.component) : "";
    if (*cn && strcmp(cn, "0")) {
      dt_catalog_comp q;
      int rc = parse_cell(t, r, m.v, &q.v_kms, e);
      if (!rc) rc = parse_cell(t, r, m.v_err, &q.v_err, e);
      if (!rc) rc = parse_cell(t, r, m.logN, &q.logN, e);
      if (!rc) rc = parse_cell(t, r, m.logN_err, &q.logN_err, e);
      if (rc) return rc;
      dt_catalog_comp *v = realloc(cur->comp, (cur->ncomp + 1) * sizeof *v);
      if (!v) return dt_err_set(e, DT_ENOMEM, NULL, "out of memory");
      cur->comp = v;
      cur->comp[cur->ncomp++] = q;
    }
  }
  return DT_OK;
}

static int add_table(dt_catalog *c, const char *path, int allow_fits, dt_err *e) {
  dt_catalog_table *v = realloc(c->tab, (c->ntab + 1) * sizeof *v);
  if (!v) return dt_err_set(e, DT_ENOMEM, NULL, "out of memory");
  c->tab = v;
  dt_catalog_table *t = &c->tab[c->ntab];
  memset(t, 0, sizeof *t);
  int rc;
  if (allow_fits && is_fits(path)) {
    fits_args a = {t, path, e};
    rc = dt_num_with_c_locale(read_fits_c, &a);
  } else {
    rc = read_csv(t, path, e);
  }
  if (rc == DT_OK && !(t->path = strdup(path))) rc = dt_err_set(e, DT_ENOMEM, NULL, "out of memory");
  if (rc != DT_OK) {
    table_free(t);
    return rc;
  }
  c->ntab++;
  return DT_OK;
}

int dt_catalog_read(dt_catalog *c, const char *path, dt_err *e) {
  dt_err_clear(e);
  if (c->with_table >= 0) return dt_err_set(e, DT_EINVAL, NULL, "catalogues are read before the joined table");
  int rc = add_table(c, path, 1, e);
  if (rc != DT_OK) return rc;
  size_t n0 = c->n;
  rc = group_rows(c, c->ntab - 1, e);
  if (rc != DT_OK) { /* take the file back out */
    for (size_t i = n0; i < c->n; i++) free(c->s[i].comp);
    c->n = n0;
    table_free(&c->tab[--c->ntab]);
  }
  return rc;
}

int dt_catalog_select(dt_catalog *c, const char *system, const char *doublet, dt_err *e) {
  dt_err_clear(e);
  if (!system) system = "target";
  size_t k = 0;
  for (size_t i = 0; i < c->n; i++) {
    dt_sightline *s = &c->s[i];
    if (strcmp(s->system, system) || (doublet && strcmp(s->doublet, doublet))) {
      free(s->comp);
      continue;
    }
    c->s[k++] = *s;
  }
  c->n = k;
  if (!doublet)
    for (size_t i = 1; i < c->n; i++)
      if (strcmp(c->s[i].doublet, c->s[0].doublet))
        return dt_err_set(e, DT_EINVAL, NULL, "the catalogues hold more than one doublet (%.16s, %.16s)",
                          c->s[0].doublet, c->s[i].doublet);
  return DT_OK;
}

/* Rows r and q of t hold the same texts in every column. */
static int same_row(const dt_catalog_table *t, size_t r, size_t q) {
  for (size_t k = 0; k < t->ncol; k++)
    if (strcmp(cell(t, r, (long)k), cell(t, q, (long)k))) return 0;
  return 1;
}

int dt_catalog_join(dt_catalog *c, const char *path, dt_err *e) {
  dt_err_clear(e);
  if (c->with_table >= 0) return dt_err_set(e, DT_EINVAL, NULL, "one joined table at most");
  int rc = add_table(c, path, 0, e);
  if (rc != DT_OK) return rc;
  dt_catalog_table *t = &c->tab[c->ntab - 1];
  long nc = col_index(t, "name");
  if (nc < 0) {
    table_free(&c->tab[--c->ntab]);
    return dt_err_set(e, DT_ENOTFOUND, NULL, "no column 'name'");
  }
  /* a name twice is refused, unless the two rows say the same (one
   * sightline measured once per doublet of a list, as `hi` writes it) */
  for (size_t r = 0; r < t->nrow; r++)
    for (size_t q = 0; q < r; q++)
      if (!strcmp(cell(t, r, nc), cell(t, q, nc)) && !same_row(t, r, q)) {
        char w[64];
        where_of(t, r, NULL, w, sizeof w);
        rc = dt_err_set(e, DT_EFORMAT, w, "name '%.40s' again (first on line %ld)", cell(t, r, nc), t->line[q]);
        table_free(&c->tab[--c->ntab]);
        return rc;
      }
  c->with_table = (long)(c->ntab - 1);
  for (size_t i = 0; i < c->n; i++) {
    c->s[i].with_row = -1;
    for (size_t r = 0; r < t->nrow; r++)
      if (!strcmp(cell(t, r, nc), c->s[i].name)) c->s[i].with_row = (long)r;
  }
  return DT_OK;
}

int dt_catalog_has(const dt_catalog *c, const char *col, dt_err *e) {
  if (c->with_table >= 0 && col_index(&c->tab[c->with_table], col) >= 0) return 1;
  if (!strcmp(col, "W_limit_mA")) { /* the export's former name counts */
    int all = 1;
    for (size_t i = 0; i < c->ntab; i++)
      if ((long)i != c->with_table && col_index(&c->tab[i], "W_limit_mA") < 0 &&
          col_index(&c->tab[i], "W_lim_mA") < 0) {
        dt_err_set(e, DT_ENOTFOUND, c->tab[i].path, "no column '%s'", col);
        all = 0;
        break;
      }
    return all;
  }
  for (size_t i = 0; i < c->ntab; i++)
    if ((long)i != c->with_table && col_index(&c->tab[i], col) < 0) {
      dt_err_set(e, DT_ENOTFOUND, c->tab[i].path, "no column '%s'", col);
      return 0;
    }
  return 1;
}

const char *dt_catalog_text(const dt_catalog *c, size_t i, const char *col) {
  const dt_sightline *s = &c->s[i];
  const dt_catalog_table *t = &c->tab[s->table];
  long k = col_index(t, col);
  if (k >= 0) return cell(t, s->row, k);
  if (c->with_table < 0) return NULL;
  t = &c->tab[c->with_table];
  k = col_index(t, col);
  if (k < 0) return NULL;
  return s->with_row < 0 ? "" : cell(t, (size_t)s->with_row, k);
}

int dt_catalog_number(const dt_catalog *c, size_t i, const char *col, double *x, dt_err *e) {
  const dt_sightline *s = &c->s[i];
  const dt_catalog_table *t = &c->tab[s->table];
  long k = col_index(t, col);
  *x = NAN;
  if (k >= 0) return parse_cell(t, s->row, k, x, e);
  if (c->with_table >= 0) {
    const dt_catalog_table *w = &c->tab[c->with_table];
    k = col_index(w, col);
    if (k >= 0) return s->with_row < 0 ? DT_OK : parse_cell(w, (size_t)s->with_row, k, x, e);
  }
  return dt_err_set(e, DT_ENOTFOUND, NULL, "no column '%s' in %s%s%s", col, t->path,
                    c->with_table >= 0 ? " nor in " : "",
                    c->with_table >= 0 ? c->tab[c->with_table].path : "");
}

const char *dt_catalog_where(const dt_catalog *c, size_t i, char *buf, size_t size) {
  const dt_sightline *s = &c->s[i];
  const dt_catalog_table *t = &c->tab[s->table];
  snprintf(buf, size, "%s %s %ld", t->path, t->fits ? "row" : "line", t->line[s->row]);
  return buf;
}

/* ---- the statistics' view of a sightline ---- */

dt_count dt_sightline_count(const dt_sightline *s, dt_threshold_kind kind, double value) {
  if (s->verdict != DT_VERDICT_DETECTED && s->verdict != DT_VERDICT_NOT_DETECTED) return DT_COUNT_EXCLUDED;
  if (kind == DT_THRESHOLD_NONE)
    return s->verdict == DT_VERDICT_DETECTED ? DT_COUNT_DETECTION : DT_COUNT_NONDETECTION;
  double x, lim;
  if (kind == DT_THRESHOLD_W_MA) {
    x = s->W_mA;
    lim = s->W_limit_mA;
  } else {
    x = dt_sightline_logN(s);
    lim = s->logN_limit;
  }
  if (s->verdict == DT_VERDICT_DETECTED) {
    if (!isfinite(x)) return DT_COUNT_EXCLUDED; /* no measurement: cannot tell */
    return x >= value ? DT_COUNT_DETECTION : DT_COUNT_NONDETECTION;
  }
  return isfinite(lim) && lim <= value ? DT_COUNT_NONDETECTION : DT_COUNT_EXCLUDED;
}

double dt_sightline_logN(const dt_sightline *s) {
  if (!s->ncomp) return s->logN_aod;
  /* log10 sum 10^x_i, scaled by the largest term to stay finite */
  double mx = -INFINITY;
  for (size_t i = 0; i < s->ncomp; i++)
    if (isfinite(s->comp[i].logN) && s->comp[i].logN > mx) mx = s->comp[i].logN;
  if (!isfinite(mx)) return NAN;
  double sum = 0;
  for (size_t i = 0; i < s->ncomp; i++)
    if (isfinite(s->comp[i].logN)) sum += pow(10, s->comp[i].logN - mx);
  return mx + log10(sum);
}

int dt_sightline_velocity(const dt_catalog *c, size_t i, dt_velocity_kind kind, double *v,
                          double *sigma, dt_err *e) {
  const dt_sightline *s = &c->s[i];
  *v = *sigma = NAN;
  if (kind == DT_VELOCITY_AOD) {
    int rc = dt_catalog_number(c, i, "v_aod_kms", v, e);
    if (!rc) rc = dt_catalog_number(c, i, "v_aod_err", sigma, e);
    if (rc) return rc;
    if (!isfinite(*v)) return DT_ERANGE;
    if (!isfinite(*sigma)) *sigma = 0;
    return DT_OK;
  }
  size_t best = s->ncomp;
  double mx = -INFINITY;
  for (size_t k = 0; k < s->ncomp; k++)
    if (isfinite(s->comp[k].v_kms) && isfinite(s->comp[k].logN) && s->comp[k].logN > mx) {
      mx = s->comp[k].logN;
      best = k;
    }
  if (best == s->ncomp) return DT_ERANGE;
  if (kind == DT_VELOCITY_STRONGEST) {
    *v = s->comp[best].v_kms;
    *sigma = isfinite(s->comp[best].v_err) ? s->comp[best].v_err : 0;
    return DT_OK;
  }
  double sw = 0, swv = 0, sw2s2 = 0;
  for (size_t k = 0; k < s->ncomp; k++) {
    const dt_catalog_comp *q = &s->comp[k];
    if (!isfinite(q->v_kms) || !isfinite(q->logN)) continue;
    double w = pow(10, q->logN - mx), se = isfinite(q->v_err) ? q->v_err : 0;
    sw += w;
    swv += w * q->v_kms;
    sw2s2 += w * w * se * se;
  }
  *v = swv / sw;
  *sigma = sqrt(sw2s2) / sw;
  return DT_OK;
}
