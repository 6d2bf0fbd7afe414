/* Hyperfine components of lines: the table reader.
 *
 * The table is plain text, one line of a doublet per row: the doublet's
 * name, the line's vacuum wavelength [A], then its components as
 * "OFFSET:SHARE" (offset in km/s from the wavelength, share of the
 * oscillator strength), then the source of the values as free text to the
 * end of the row; '#' starts a comment (share/doubletty/hyperfine.dat
 * explains the format at its top).  Like the atomic table, a text is parsed
 * completely before anything is added, so a malformed table leaves the
 * caller's untouched, and the error names the line.  The default table is
 * built into the program by the Makefile. */
#include "doubletty/hyperfine.h"
#include "doubletty/num.h"
#include "textfile.h"

#include <ctype.h>
#include <errno.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

struct dt_hyperfine {
  dt_hfs_entry *r;
  size_t n, cap;
};

dt_hyperfine *dt_hyperfine_new(void) { return calloc(1, sizeof(dt_hyperfine)); }

void dt_hyperfine_free(dt_hyperfine *t) {
  if (!t) return;
  free(t->r);
  free(t);
}

size_t dt_hyperfine_count(const dt_hyperfine *t) { return t ? t->n : 0; }

const dt_hfs_entry *dt_hyperfine_get(const dt_hyperfine *t, size_t i) {
  return (t && i < t->n) ? &t->r[i] : NULL;
}

static long find_row(const dt_hyperfine *t, const char *name, double lambda0) {
  for (size_t i = 0; i < t->n; i++)
    if (dt_atomic_name_eq(t->r[i].doublet, name) && fabs(t->r[i].lambda0 - lambda0) <= DT_HFS_MATCH_A)
      return (long)i;
  return -1;
}

const dt_hfs_line *dt_hyperfine_find(const dt_hyperfine *t, const dt_doublet *d, int l) {
  if (!t || !d || l < 0 || l > 1) return NULL;
  long i = find_row(t, d->name, d->line[l].lambda0);
  return i < 0 ? NULL : &t->r[i].comp;
}

static int push(dt_hyperfine *t, const dt_hfs_entry *r) {
  if (t->n == t->cap) {
    size_t cap = t->cap ? 2 * t->cap : 8;
    dt_hfs_entry *nr = realloc(t->r, cap * sizeof *nr);
    if (!nr) return DT_ENOMEM;
    t->r = nr;
    t->cap = cap;
  }
  t->r[t->n++] = *r;
  return DT_OK;
}

/* A finite number filling the whole of tok. */
static int number(const char *tok, double *x) {
  char *end;
  errno = 0;
  *x = dt_num_strtod(tok, &end);
  return end != tok && *end == '\0' && errno != ERANGE && isfinite(*x);
}

/* "OFFSET:SHARE" -> 1 (a component), 0 (not of that shape: the source
 * begins), -1 (that shape but a bad number; msg says why). */
static int component(char *tok, double *dv, double *share, char *msg, size_t nmsg) {
  char *colon = strchr(tok, ':');
  if (!colon || colon == tok || strchr(colon + 1, ':')) return 0;
  *colon = '\0';
  int ok_dv = number(tok, dv), ok_s = number(colon + 1, share);
  *colon = ':';
  if (!ok_dv && !ok_s) return 0; /* e.g. a reference "RMP:49" */
  if (!ok_dv) {
    snprintf(msg, nmsg, "component '%.40s': the offset is not a number", tok);
    return -1;
  }
  if (!ok_s) {
    snprintf(msg, nmsg, "component '%.40s': the share is not a number", tok);
    return -1;
  }
  if (!(fabs(*dv) <= DT_HFS_DV_MAX)) {
    snprintf(msg, nmsg, "component '%.40s': offset beyond +-%g km/s", tok, DT_HFS_DV_MAX);
    return -1;
  }
  if (!(*share > 0 && *share <= 1)) {
    snprintf(msg, nmsg, "component '%.40s': the share must lie in (0, 1]", tok);
    return -1;
  }
  return 1;
}

/* Parse one non-empty, comment-stripped row into *r. */
static int parse_row(char *s, const char *where, dt_hfs_entry *r, dt_err *e) {
  memset(r, 0, sizeof *r);
  char *name = dt_text_token(&s);
  if (strlen(name) >= sizeof r->doublet)
    return dt_err_set(e, DT_EFORMAT, where, "doublet name '%.40s' is longer than %zu characters",
                      name, sizeof r->doublet - 1);
  strcpy(r->doublet, name);
  char *tok = dt_text_token(&s);
  if (!tok)
    return dt_err_set(e, DT_EFORMAT, where,
                      "%s: missing the wavelength (a row needs a doublet, a wavelength, "
                      "components OFFSET:SHARE and a source)",
                      r->doublet);
  if (!number(tok, &r->lambda0) || !(r->lambda0 > 0))
    return dt_err_set(e, DT_EFORMAT, where, "%s: wavelength '%.40s' is not a positive number",
                      r->doublet, tok);
  double sum = 0;
  /* components until the first token that is not OFFSET:SHARE: there the
   * source begins (tokens are looked at without cutting the text) */
  for (;;) {
    while (*s && isspace((unsigned char)*s)) s++;
    size_t tl = 0;
    while (s[tl] && !isspace((unsigned char)s[tl])) tl++;
    if (tl == 0) break;
    char tk[64];
    if (tl >= sizeof tk) break;
    memcpy(tk, s, tl);
    tk[tl] = '\0';
    double dv, sh;
    char msg[160];
    int c = component(tk, &dv, &sh, msg, sizeof msg);
    if (c < 0) return dt_err_set(e, DT_EFORMAT, where, "%s %.4f: %s", r->doublet, r->lambda0, msg);
    if (c == 0) break;
    if (r->comp.n == DT_HFS_MAX)
      return dt_err_set(e, DT_EFORMAT, where, "%s %.4f: more than %d components", r->doublet,
                        r->lambda0, DT_HFS_MAX);
    r->comp.dv[r->comp.n] = dv;
    r->comp.share[r->comp.n] = sh;
    r->comp.n++;
    sum += sh;
    s += tl;
  }
  if (r->comp.n == 0)
    return dt_err_set(e, DT_EFORMAT, where,
                      "%s %.4f: no components (write each as OFFSET:SHARE, e.g. -0.65:0.375)",
                      r->doublet, r->lambda0);
  if (!(fabs(sum - 1.0) <= DT_HFS_SUM_TOL))
    return dt_err_set(e, DT_EFORMAT, where, "%s %.4f: the shares sum to %.9g, not 1", r->doublet,
                      r->lambda0, sum);
  size_t sl = strlen(s);
  while (sl > 0 && isspace((unsigned char)s[sl - 1])) s[--sl] = '\0';
  if (sl == 0)
    return dt_err_set(e, DT_EFORMAT, where, "%s %.4f: missing the source of the values",
                      r->doublet, r->lambda0);
  snprintf(r->source, sizeof r->source, "%s", s);
  return DT_OK;
}

/* The rows of one text, with the line each was given on. */
typedef struct parse_ctx {
  dt_hyperfine tmp;
  long *row_line;
  size_t row_cap;
} parse_ctx;

static int parse_one(void *ctx, char *line, long lineno, const char *where, dt_err *e) {
  parse_ctx *c = ctx;
  dt_hfs_entry r;
  int rc = parse_row(line, where, &r, e);
  if (rc != DT_OK) return rc;
  long prev = find_row(&c->tmp, r.doublet, r.lambda0);
  if (prev >= 0)
    return dt_err_set(e, DT_EFORMAT, where, "%s %.4f is already given on line %ld", r.doublet,
                      r.lambda0, c->row_line[prev]);
  if (c->tmp.n == c->row_cap) {
    size_t cap = c->row_cap ? 2 * c->row_cap : 8;
    long *nl = realloc(c->row_line, cap * sizeof *nl);
    if (!nl) return dt_err_set(e, DT_ENOMEM, NULL, "no memory for the hyperfine table");
    c->row_line = nl;
    c->row_cap = cap;
  }
  c->row_line[c->tmp.n] = lineno;
  if (push(&c->tmp, &r) != DT_OK) return dt_err_set(e, DT_ENOMEM, NULL, "no memory for the hyperfine table");
  return DT_OK;
}

int dt_hyperfine_parse(dt_hyperfine *t, const char *text, size_t len, dt_err *e) {
  dt_err_clear(e);
  if (!t || (!text && len)) return dt_err_set(e, DT_EINVAL, NULL, "no table or no text to parse");
  char *buf = malloc(len + 1);
  if (!buf) return dt_err_set(e, DT_ENOMEM, NULL, "no memory for the hyperfine table");
  if (len) memcpy(buf, text, len);
  buf[len] = '\0';
  parse_ctx c = {0};
  int rc = dt_text_lines(buf, len, parse_one, &c, e);
  dt_hyperfine tmp = c.tmp;
  long *row_line = c.row_line;
  /* Everything parsed: add, or replace by doublet and line.  Room for all
   * first, so that t is left unchanged when memory runs out. */
  if (rc == DT_OK && t->n + tmp.n > t->cap) {
    dt_hfs_entry *nr = realloc(t->r, (t->n + tmp.n) * sizeof *nr);
    if (!nr)
      rc = dt_err_set(e, DT_ENOMEM, NULL, "no memory for the hyperfine table");
    else {
      t->r = nr;
      t->cap = t->n + tmp.n;
    }
  }
  for (size_t i = 0; rc == DT_OK && i < tmp.n; i++) {
    long j = find_row(t, tmp.r[i].doublet, tmp.r[i].lambda0);
    if (j >= 0)
      t->r[j] = tmp.r[i];
    else
      push(t, &tmp.r[i]); /* cannot fail: room reserved above */
  }
  free(row_line);
  free(tmp.r);
  free(buf);
  return rc;
}

int dt_hyperfine_merge(dt_hyperfine *t, const char *path, dt_err *e) {
  dt_err_clear(e);
  if (!t || !path) return dt_err_set(e, DT_EINVAL, NULL, "no table or no file name");
  char *buf;
  size_t n;
  int rc = dt_text_slurp(path, (size_t)1 << 24, "a hyperfine table", &buf, &n, e);
  if (rc == DT_OK) rc = dt_hyperfine_parse(t, buf, n, e);
  free(buf);
  return rc;
}

int dt_hyperfine_load(const char *path, dt_hyperfine **out, dt_err *e) {
  dt_err_clear(e);
  if (!out) return dt_err_set(e, DT_EINVAL, NULL, "no place for the table");
  *out = NULL;
  dt_hyperfine *t = dt_hyperfine_new();
  if (!t) return dt_err_set(e, DT_ENOMEM, NULL, "no memory for the hyperfine table");
  int rc = dt_hyperfine_merge(t, path, e);
  if (rc == DT_OK && t->n == 0) rc = dt_err_set(e, DT_EFORMAT, NULL, "the table holds no rows");
  if (rc != DT_OK) {
    dt_hyperfine_free(t);
    return rc;
  }
  *out = t;
  return DT_OK;
}

/* Generated at build time from share/doubletty/hyperfine.dat (the Makefile). */
extern const unsigned char dt_hyperfine_builtin_data[];
extern const size_t dt_hyperfine_builtin_size;

int dt_hyperfine_load_builtin(dt_hyperfine **out, dt_err *e) {
  dt_err_clear(e);
  if (!out) return dt_err_set(e, DT_EINVAL, NULL, "no place for the table");
  *out = NULL;
  dt_hyperfine *t = dt_hyperfine_new();
  if (!t) return dt_err_set(e, DT_ENOMEM, NULL, "no memory for the hyperfine table");
  int rc = dt_hyperfine_parse(t, (const char *)dt_hyperfine_builtin_data,
                              dt_hyperfine_builtin_size, e);
  if (rc == DT_OK && t->n == 0)
    rc = dt_err_set(e, DT_EFORMAT, NULL, "the built-in hyperfine table holds no rows");
  if (rc != DT_OK) {
    dt_hyperfine_free(t);
    return rc;
  }
  *out = t;
  return DT_OK;
}
