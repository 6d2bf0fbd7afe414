/* Target lists: parse the queue file of the inspector line by line.
 *
 * The list is read as a stream through one fixed line buffer, so a list of
 * a hundred thousand lines costs no more memory than one of ten; the caller
 * decides what to keep of each target.  Every problem is reported with the
 * line number, and reading may go on after a bad line.  The format is
 * described in include/doubletty/targets.h. */
#include "doubletty/targets.h"
#include "doubletty/num.h"

#include <errno.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

struct dt_targets {
  FILE *f;
  long lineno;
  char basedir[DT_TARGET_PATH_MAX];
  char buf[DT_TARGET_LINE_MAX + 2];
};

void dt_target_spec_init(dt_target_spec *t, const char *path) {
  memset(t, 0, sizeof *t);
  snprintf(t->path, sizeof t->path, "%s", path ? path : "");
}

static int is_blank(char c) { return c == ' ' || c == '\t' || c == '\r' || c == '\n'; }

static int bad(dt_err *e, long lineno, const char *fmt, const char *arg) {
  char where[32];
  snprintf(where, sizeof where, "line %ld", lineno);
  return dt_err_set(e, DT_EFORMAT, where, fmt, arg);
}

/* A finite number filling the whole text. */
static int parse_num(const char *s, double *out) {
  char *end;
  errno = 0;
  double v = dt_num_strtod(s, &end);
  if (end == s || *end != '\0' || errno == ERANGE || !isfinite(v)) return -1;
  *out = v;
  return 0;
}

static int parse_field(dt_target_spec *t, char *tok, long lineno, unsigned *seen, dt_err *e) {
  static const char *const keys[] = {"row", "vsys", "R", "fwhm", "doublet", "name"};
  char *eq = strchr(tok, '=');
  if (!eq) return bad(e, lineno, "field '%s' is not key=value", tok);
  *eq = '\0';
  const char *key = tok, *val = eq + 1;
  int k = -1;
  for (int i = 0; i < 6; i++)
    if (!strcmp(key, keys[i])) k = i;
  if (k < 0) return bad(e, lineno, "unknown key '%s' (known: row vsys R fwhm doublet name)", key);
  if (*seen & (1u << k)) return bad(e, lineno, "key '%s' given twice", key);
  *seen |= 1u << k;
  if (!*val) return bad(e, lineno, "key '%s' has no value", key);
  double x;
  switch (k) {
  case 0: {
    char *end;
    errno = 0;
    long r = strtol(val, &end, 10);
    if (*end || errno == ERANGE || r < 1) return bad(e, lineno, "row must be a whole number >= 1, not '%s'", val);
    t->row = r;
    break;
  }
  case 1:
    if (parse_num(val, &x) || fabs(x) >= 0.5 * 299792.458)
      return bad(e, lineno, "vsys must be a velocity in km/s, not '%s'", val);
    t->vsys = x;
    t->has_vsys = 1;
    break;
  case 2:
    if (parse_num(val, &x) || x <= 0) return bad(e, lineno, "R must be a positive resolving power, not '%s'", val);
    t->resolution = x;
    break;
  case 3:
    if (parse_num(val, &x) || x <= 0) return bad(e, lineno, "fwhm must be a positive width in km/s, not '%s'", val);
    t->fwhm_kms = x;
    break;
  case 4:
    if (strlen(val) >= sizeof t->doublet) return bad(e, lineno, "doublet name '%s' is too long", val);
    snprintf(t->doublet, sizeof t->doublet, "%s", val);
    break;
  case 5:
    if (strlen(val) >= sizeof t->name) return bad(e, lineno, "name '%s' is too long", val);
    snprintf(t->name, sizeof t->name, "%s", val);
    break;
  }
  if ((*seen & 12u) == 12u) return bad(e, lineno, "give R or fwhm, not both%s", "");
  return DT_OK;
}

int dt_targets_parse_line(const char *line, const char *basedir, long lineno,
                          dt_target_spec *t, int *got, dt_err *e) {
  char buf[DT_TARGET_LINE_MAX + 1];
  *got = 0;
  size_t len = strlen(line);
  while (len && (line[len - 1] == '\n' || line[len - 1] == '\r')) len--;
  if (len > DT_TARGET_LINE_MAX) return bad(e, lineno, "line longer than %s bytes", "8192");
  memcpy(buf, line, len);
  buf[len] = '\0';
  char *hash = strchr(buf, '#');
  if (hash) *hash = '\0';
  for (char *p = buf; *p; p++)
    if ((unsigned char)*p < 0x20 && !is_blank(*p)) return bad(e, lineno, "control character in the line%s", "");

  dt_target_spec_init(t, NULL);
  t->line = lineno;
  unsigned seen = 0;
  int nfield = 0;
  char *p = buf;
  for (;;) {
    while (*p && is_blank(*p)) p++;
    if (!*p) break;
    char *tok = p;
    while (*p && !is_blank(*p)) p++;
    if (*p) *p++ = '\0';
    if (nfield++ == 0) {
      int rel = tok[0] != '/' && basedir && basedir[0] && strcmp(basedir, ".") != 0;
      size_t nb = rel ? strlen(basedir) : 0, nt = strlen(tok);
      int slash = rel && basedir[nb - 1] != '/';
      if (nb + (size_t)slash + nt >= sizeof t->path)
        return bad(e, lineno, "path longer than %s bytes", "4095");
      if (nb) memcpy(t->path, basedir, nb);
      if (slash) t->path[nb++] = '/';
      memcpy(t->path + nb, tok, nt + 1);
      continue;
    }
    int rc = parse_field(t, tok, lineno, &seen, e);
    if (rc != DT_OK) return rc;
  }
  if (nfield == 0) return DT_OK;
  *got = 1;
  return DT_OK;
}

int dt_targets_open(const char *path, dt_targets **out, dt_err *e) {
  *out = NULL;
  dt_targets *l = calloc(1, sizeof *l);
  if (!l) return dt_err_set(e, DT_ENOMEM, NULL, "out of memory");
  l->f = fopen(path, "r");
  if (!l->f) {
    int err = errno;
    free(l);
    return dt_err_set(e, DT_EIO, NULL, "cannot open: %s", strerror(err));
  }
  const char *slash = strrchr(path, '/');
  if (slash) {
    size_t n = (size_t)(slash - path);
    if (n == 0) n = 1; /* "/list" -> "/" */
    if (n >= sizeof l->basedir) n = sizeof l->basedir - 1;
    memcpy(l->basedir, path, n);
    l->basedir[n] = '\0';
  }
  *out = l;
  return DT_OK;
}

int dt_targets_next(dt_targets *l, dt_target_spec *t, int *got, dt_err *e) {
  *got = 0;
  for (;;) {
    size_t n = 0;
    int c, too_long = 0, nul = 0;
    while ((c = getc(l->f)) != EOF && c != '\n') {
      if (c == '\0') nul = 1;
      if (n < DT_TARGET_LINE_MAX) l->buf[n++] = (char)c;
      else too_long = 1;
    }
    if (c == EOF && n == 0 && !too_long) {
      if (ferror(l->f)) return dt_err_set(e, DT_EIO, NULL, "read error after line %ld", l->lineno);
      return DT_OK;
    }
    l->lineno++;
    l->buf[n] = '\0';
    if (nul) return bad(e, l->lineno, "NUL byte in the line (not a text file?)%s", "");
    if (too_long) return bad(e, l->lineno, "line longer than %s bytes", "8192");
    int rc = dt_targets_parse_line(l->buf, l->basedir, l->lineno, t, got, e);
    if (rc != DT_OK || *got) return rc;
  }
}

long dt_targets_lineno(const dt_targets *l) { return l->lineno; }

void dt_targets_close(dt_targets *l) {
  if (!l) return;
  if (l->f) fclose(l->f);
  free(l);
}
