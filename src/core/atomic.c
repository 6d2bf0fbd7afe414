/* Atomic data of resonance doublets: the table reader.
 *
 * The table is plain text, one doublet per line: a one-word name, then for
 * each of the two lines its vacuum wavelength [A], oscillator strength and
 * damping constant [s^-1], then the source of the values as free text to the
 * end of the line; '#' starts a comment (share/doubletty/atomic.dat explains
 * the format at its top).  A table is parsed completely before anything is
 * added, so a malformed table leaves the caller's table untouched; the error
 * names the line.  Names are compared ignoring case and white space.  The
 * default table is also built into the program (the Makefile turns
 * share/doubletty/atomic.dat into a C array), for a program that finds no
 * table file. */
#include "doubletty/atomic.h"

#include "textfile.h"
#include "doubletty/num.h"

#include <ctype.h>
#include <errno.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

struct dt_atomic {
  dt_doublet *d;
  size_t n, cap;
};

dt_atomic *dt_atomic_new(void) { return calloc(1, sizeof(dt_atomic)); }

void dt_atomic_free(dt_atomic *t) {
  if (!t) return;
  free(t->d);
  free(t);
}

size_t dt_atomic_count(const dt_atomic *t) { return t ? t->n : 0; }

const dt_doublet *dt_atomic_get(const dt_atomic *t, size_t i) {
  return (t && i < t->n) ? &t->d[i] : NULL;
}

int dt_atomic_name_eq(const char *a, const char *b) {
  for (;;) {
    while (*a && isspace((unsigned char)*a)) a++;
    while (*b && isspace((unsigned char)*b)) b++;
    if (!*a || !*b) return !*a && !*b;
    if (tolower((unsigned char)*a) != tolower((unsigned char)*b)) return 0;
    a++;
    b++;
  }
}

static long find_index(const dt_atomic *t, const char *name) {
  for (size_t i = 0; i < t->n; i++)
    if (dt_atomic_name_eq(t->d[i].name, name)) return (long)i;
  return -1;
}

const dt_doublet *dt_atomic_find(const dt_atomic *t, const char *name) {
  if (!t || !name) return NULL;
  long i = find_index(t, name);
  return i < 0 ? NULL : &t->d[i];
}

static int push(dt_atomic *t, const dt_doublet *d) {
  if (t->n == t->cap) {
    size_t cap = t->cap ? 2 * t->cap : 16;
    dt_doublet *nd = realloc(t->d, cap * sizeof *nd);
    if (!nd) return DT_ENOMEM;
    t->d = nd;
    t->cap = cap;
  }
  t->d[t->n++] = *d;
  return DT_OK;
}

static const char *const field_name[6] = {
    "first wavelength",  "first oscillator strength",  "first damping constant",
    "second wavelength", "second oscillator strength", "second damping constant"};

/* Parse one non-empty, comment-stripped line into *d. */
static int parse_line(char *s, const char *where, dt_doublet *d, dt_err *e) {
  memset(d, 0, sizeof *d);
  char *name = dt_text_token(&s);
  if (strlen(name) >= sizeof d->name)
    return dt_err_set(e, DT_EFORMAT, where, "doublet name '%.40s' is longer than %zu characters",
                      name, sizeof d->name - 1);
  strcpy(d->name, name);
  double v[6];
  for (int k = 0; k < 6; k++) {
    char *tok = dt_text_token(&s);
    if (!tok)
      return dt_err_set(e, DT_EFORMAT, where,
                        "doublet %s: missing the %s (a row needs a name, 6 numbers and a source)",
                        d->name, field_name[k]);
    char *end;
    errno = 0;
    v[k] = dt_num_strtod(tok, &end);
    if (end == tok || *end != '\0' || errno == ERANGE || !isfinite(v[k]))
      return dt_err_set(e, DT_EFORMAT, where, "doublet %s: %s '%.40s' is not a number", d->name,
                        field_name[k], tok);
    int wave = k % 3 == 0, fosc = k % 3 == 1;
    if ((wave || fosc) ? !(v[k] > 0) : !(v[k] >= 0))
      return dt_err_set(e, DT_EFORMAT, where, "doublet %s: %s %g must be %s", d->name,
                        field_name[k], v[k], (wave || fosc) ? "positive" : "zero or positive");
  }
  while (*s && isspace((unsigned char)*s)) s++;
  size_t sl = strlen(s);
  while (sl > 0 && isspace((unsigned char)s[sl - 1])) s[--sl] = '\0';
  if (sl == 0)
    return dt_err_set(e, DT_EFORMAT, where, "doublet %s: missing the source of the values",
                      d->name);
  if (v[0] == v[3])
    return dt_err_set(e, DT_EFORMAT, where, "doublet %s: both lines have wavelength %g",
                      d->name, v[0]);
  /* The stronger line (larger f * lambda, i.e. larger optical depth at equal
   * N and b) goes first. */
  int first = (v[1] * v[0] >= v[4] * v[3]) ? 0 : 3;
  char nm[sizeof d->name];
  memcpy(nm, d->name, sizeof nm);
  for (int j = 0; j < 2; j++) {
    const double *p = v + (j == 0 ? first : 3 - first);
    dt_line *l = &d->line[j];
    l->lambda0 = p[0];
    l->f = p[1];
    l->gamma = p[2];
    int n = snprintf(l->label, sizeof l->label, "%s %.0f", nm, floor(p[0]));
    if (n < 0 || (size_t)n >= sizeof l->label)
      return dt_err_set(e, DT_EFORMAT, where, "doublet %s: name too long for a line label",
                        d->name);
  }
  size_t cpy = sl < sizeof d->source - 1 ? sl : sizeof d->source - 1;
  memcpy(d->source, s, cpy);
  d->source[cpy] = '\0';
  return DT_OK;
}

/* The doublets of one text, with the line each was given on. */
typedef struct parse_ctx {
  dt_atomic tmp;
  long *first_line;
  size_t first_cap;
} parse_ctx;

static int parse_one(void *ctx, char *line, long lineno, const char *where, dt_err *e) {
  parse_ctx *c = ctx;
  dt_doublet d;
  int rc = parse_line(line, where, &d, e);
  if (rc != DT_OK) return rc;
  long prev = find_index(&c->tmp, d.name);
  if (prev >= 0)
    return dt_err_set(e, DT_EFORMAT, where, "doublet %s is already defined on line %ld", d.name,
                      c->first_line[prev]);
  if (c->tmp.n == c->first_cap) {
    size_t cap = c->first_cap ? 2 * c->first_cap : 16;
    long *nf = realloc(c->first_line, cap * sizeof *nf);
    if (!nf) return dt_err_set(e, DT_ENOMEM, NULL, "no memory for the atomic table");
    c->first_line = nf;
    c->first_cap = cap;
  }
  c->first_line[c->tmp.n] = lineno;
  if (push(&c->tmp, &d) != DT_OK) return dt_err_set(e, DT_ENOMEM, NULL, "no memory for the atomic table");
  return DT_OK;
}

int dt_atomic_parse(dt_atomic *t, const char *text, size_t len, dt_err *e) {
  dt_err_clear(e);
  if (!t || (!text && len))
    return dt_err_set(e, DT_EINVAL, NULL, "no table or no text to parse");
  char *buf = malloc(len + 1);
  if (!buf) return dt_err_set(e, DT_ENOMEM, NULL, "no memory for the atomic table");
  if (len) memcpy(buf, text, len);
  buf[len] = '\0';
  parse_ctx c = {0};
  int rc = dt_text_lines(buf, len, parse_one, &c, e);
  /* Everything parsed: add or replace by name. */
  for (size_t i = 0; rc == DT_OK && i < c.tmp.n; i++) {
    long j = find_index(t, c.tmp.d[i].name);
    if (j >= 0)
      t->d[j] = c.tmp.d[i];
    else if (push(t, &c.tmp.d[i]) != DT_OK)
      rc = dt_err_set(e, DT_ENOMEM, NULL, "no memory for the atomic table");
  }
  free(c.first_line);
  free(c.tmp.d);
  free(buf);
  return rc;
}

int dt_atomic_merge(dt_atomic *t, const char *path, dt_err *e) {
  dt_err_clear(e);
  if (!t || !path) return dt_err_set(e, DT_EINVAL, NULL, "no table or no file name");
  char *buf = NULL;
  size_t len = 0;
  int rc = dt_text_slurp(path, (size_t)1 << 28, "an atomic table", &buf, &len, e);
  if (rc != DT_OK) return rc;
  rc = dt_atomic_parse(t, buf, len, e);
  free(buf);
  return rc;
}

/* Generated at build time from share/doubletty/atomic.dat (see the Makefile). */
extern const unsigned char dt_atomic_builtin_data[];
extern const size_t dt_atomic_builtin_size;

const char *dt_atomic_builtin_text(size_t *len) {
  if (len) *len = dt_atomic_builtin_size;
  return (const char *)dt_atomic_builtin_data;
}

int dt_atomic_load_builtin(dt_atomic **out, dt_err *e) {
  dt_err_clear(e);
  if (!out) return dt_err_set(e, DT_EINVAL, NULL, "no place for the table");
  *out = NULL;
  dt_atomic *t = dt_atomic_new();
  if (!t) return dt_err_set(e, DT_ENOMEM, NULL, "no memory for the atomic table");
  int rc = dt_atomic_parse(t, (const char *)dt_atomic_builtin_data, dt_atomic_builtin_size, e);
  if (rc == DT_OK && t->n == 0) rc = dt_err_set(e, DT_EFORMAT, NULL, "the built-in table holds no doublets");
  if (rc != DT_OK) {
    dt_atomic_free(t);
    return rc;
  }
  *out = t;
  return DT_OK;
}

int dt_atomic_load(const char *path, dt_atomic **out, dt_err *e) {
  dt_err_clear(e);
  if (!out) return dt_err_set(e, DT_EINVAL, NULL, "no place for the table");
  *out = NULL;
  dt_atomic *t = dt_atomic_new();
  if (!t) return dt_err_set(e, DT_ENOMEM, NULL, "no memory for the atomic table");
  int rc = dt_atomic_merge(t, path, e);
  if (rc == DT_OK && t->n == 0)
    rc = dt_err_set(e, DT_EFORMAT, NULL, "the table holds no doublets");
  if (rc != DT_OK) {
    dt_atomic_free(t);
    return rc;
  }
  *out = t;
  return DT_OK;
}
