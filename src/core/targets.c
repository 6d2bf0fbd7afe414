/* Target lists: parse the queue file of the inspector line by line.
 *
 * The list is read as a stream through one fixed line buffer, so a list of
 * a hundred thousand lines costs no more memory than one of ten; the caller
 * decides what to keep of each target.  Every problem is reported with the
 * line number, and reading may go on after a bad line.  The format is
 * described in include/doubletty/targets.h. */
#include "doubletty/targets.h"

#include "doubletty/lsf.h"
#include "doubletty/num.h"
#include "doubletty/sky.h"

#include <errno.h>
#include <limits.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

struct dt_targets {
  FILE *f;
  long lineno;
  int air_all;  /* every target's wavelengths are in air */
  char basedir[DT_TARGET_PATH_MAX];
  char buf[DT_TARGET_LINE_MAX + 2];
};

void dt_target_resolution(const dt_target_spec *t, const char *doublet, double *R, double *fwhm) {
  *R = t->resolution;
  *fwhm = t->fwhm_kms;
  if (!t->res_text[0]) return;
  dt_lsf_per per;
  dt_err pe;
  if (dt_lsf_per_parse(t->res_text, "R", &per, &pe) != DT_OK) return;
  double v = dt_lsf_per_get(&per, doublet);
  *R = t->res_is_fwhm ? 0.0 : v;
  *fwhm = t->res_is_fwhm ? v : 0.0;
}

void dt_target_spec_init(dt_target_spec *t, const char *path) {
  memset(t, 0, sizeof *t);
  dt_system_opts_init(&t->systems);
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
  double v;
  if (dt_num_parse(s, &v) != DT_OK || !isfinite(v)) return -1;
  *out = v;
  return 0;
}

enum { K_ROW, K_VSYS, K_R, K_FWHM, K_DOUBLET, K_NAME, K_WINDOW, K_AIR, K_TWIN, K_SYSTEM, K_HFS, NKEYS };

/* The position and frame fields ra=, dec=, frame=: DT_OK or an error when
 * the key is one of them, -1 when it is not.  Their bits in *seen sit
 * above the other keys'. */
enum { SKY_SEEN_SHIFT = 24 };
static int parse_sky_field(dt_target_spec *t, const char *key, const char *val, long lineno,
                           unsigned *seen, dt_err *e) {
  static const char *const keys[3] = {"ra", "dec", "frame"};
  int k = -1;
  for (int i = 0; i < 3; i++)
    if (!strcmp(key, keys[i])) k = i;
  if (k < 0) return -1;
  if (!val || !*val) return bad(e, lineno, "key '%s' has no value", key);
  unsigned bit = 1u << (SKY_SEEN_SHIFT + k);
  if (*seen & bit) return bad(e, lineno, "key '%s' given twice", key);
  *seen |= bit;
  if (k == 0 && dt_sky_parse_ra(val, &t->ra))
    return bad(e, lineno, "ra must be degrees or hh:mm:ss (ICRS), not '%s'", val);
  if (k == 1 && dt_sky_parse_dec(val, &t->dec))
    return bad(e, lineno, "dec must be degrees or +dd:mm:ss (ICRS), not '%s'", val);
  if (k == 2) {
    dt_frame f = DT_FRAME_UNSET;
    if (dt_frame_parse(val, &f) || f == DT_FRAME_GALACTOC || f == DT_FRAME_LOCALGRP)
      return bad(e, lineno, "frame must be TOPOCENT, GEOCENTR, BARYCENT, HELIOCEN, LSRK or LSRD, not '%s'", val);
    t->frame = f;
  }
  unsigned both = 3u << SKY_SEEN_SHIFT;
  t->has_pos = (*seen & both) == both;
  return DT_OK;
}

/* The field cover=0|1 (partial covering): DT_OK or an error when the key
 * is cover, -1 when it is not.  Its bit in *seen sits above the position's. */
static int parse_cover_field(dt_target_spec *t, const char *key, const char *val, long lineno,
                             unsigned *seen, dt_err *e) {
  if (strcmp(key, "cover")) return -1;
  unsigned bit = 1u << (SKY_SEEN_SHIFT + 3);
  if (*seen & bit) return bad(e, lineno, "key '%s' given twice", key);
  *seen |= bit;
  if (!val || (strcmp(val, "0") && strcmp(val, "1")))
    return bad(e, lineno, "cover must be 0 or 1 (partial covering off or on), not '%s'",
               val ? val : "");
  t->has_covering = 1;
  t->covering = val[0] == '1';
  return DT_OK;
}

/* One key=value field (or the flag "air": val == NULL). */
static int parse_field(dt_target_spec *t, const char *key, const char *val, long lineno,
                       unsigned *seen, dt_err *e) {
  int sky = parse_sky_field(t, key, val, lineno, seen, e);
  if (sky >= 0) return sky;
  int cov = parse_cover_field(t, key, val, lineno, seen, e);
  if (cov >= 0) return cov;
  static const char *const keys[NKEYS] = {"row", "vsys", "R", "fwhm", "doublet", "name", "window", "air",
                                             "target-window", "system", "hfs"};
  int k = -1;
  for (int i = 0; i < NKEYS; i++)
    if (!strcmp(key, keys[i])) k = i;
  if (k < 0 && !val) return bad(e, lineno, "field '%s' is neither key=value nor the flag air", key);
  if (k < 0) return bad(e, lineno, "unknown key '%s' (known: row vsys R fwhm doublet name window target-window system hfs ra dec frame cover, flag air)", key);
  if (k != K_SYSTEM && (*seen & (1u << k))) return bad(e, lineno, "key '%s' given twice", key);
  *seen |= 1u << k;
  if (k == K_AIR) {
    if (val) return bad(e, lineno, "air is a flag and takes no value (write just: air)%s", "");
    t->air = 1;
    return DT_OK;
  }
  if (!val) return bad(e, lineno, "field '%s' is not key=value", key);
  if (!*val) return bad(e, lineno, "key '%s' has no value", key);
  double x;
  long r;
  switch (k) {
  case K_ROW:
    if (dt_num_parse_long(val, 1, LONG_MAX, &r) != DT_OK)
      return bad(e, lineno, "row must be a whole number >= 1, not '%s'", val);
    t->row = r;
    break;
  case K_VSYS:
    if (parse_num(val, &x) || fabs(x) >= 0.5 * 299792.458)
      return bad(e, lineno, "vsys must be a velocity in km/s, not '%s'", val);
    t->vsys = x;
    t->has_vsys = 1;
    break;
  case K_R:
  case K_FWHM:
    if (strchr(val, ':')) { /* values per doublet */
      dt_lsf_per per;
      dt_err pe;
      if (strlen(val) >= sizeof t->res_text) return bad(e, lineno, "'%s' is too long", val);
      if (dt_lsf_per_parse(val, k == K_R ? "R" : "fwhm", &per, &pe) != DT_OK)
        return bad(e, lineno, "%s", pe.what);
      snprintf(t->res_text, sizeof t->res_text, "%s", val);
      t->res_is_fwhm = k == K_FWHM;
      x = dt_lsf_per_get(&per, "");
      if (k == K_R) t->resolution = x;
      else t->fwhm_kms = x;
      break;
    }
    if (k == K_R && (parse_num(val, &x) || x <= 0))
      return bad(e, lineno, "R must be a positive resolving power (or DOUBLET:R,...), not '%s'", val);
    if (k == K_FWHM && (parse_num(val, &x) || x <= 0))
      return bad(e, lineno, "fwhm must be a positive width in km/s (or DOUBLET:FWHM,...), not '%s'", val);
    if (k == K_R) t->resolution = x;
    else t->fwhm_kms = x;
    break;
  case K_HFS:
    /* 1: the lines are modelled as their hyperfine components */
    if (strcmp(val, "0") && strcmp(val, "1")) return bad(e, lineno, "hfs must be 0 or 1, not '%s'", val);
    t->hyperfine = val[0] == '1';
    break;
  case K_SYSTEM: {
    /* NAME:VLO:VHI, repeatable: an absorber system of the user */
    dt_system sy;
    dt_err se;
    if (dt_system_parse(val, &sy, &se) != DT_OK || dt_system_opts_add(&t->systems, &sy, &se) != DT_OK)
      return bad(e, lineno, "system: %s", se.what);
    break;
  }
  case K_TWIN:
  case K_WINDOW: {
    /* VLO:VHI in km/s around the rest frame */
    char lo[64], *colon = strchr(val, ':');
    double hi;
    if (!colon || (size_t)(colon - val) >= sizeof lo) return bad(e, lineno, k == K_TWIN ? "target-window must be VLO:VHI in km/s, not '%s'" : "window must be VLO:VHI in km/s, not '%s'", val);
    snprintf(lo, sizeof lo, "%.*s", (int)(colon - val), val);
    if (parse_num(lo, &x) || parse_num(colon + 1, &hi) || !(x < hi) || fabs(x) >= 1e5 || fabs(hi) >= 1e5)
      return bad(e, lineno, k == K_TWIN ? "target-window must be VLO:VHI in km/s with VLO < VHI, not '%s'" : "window must be VLO:VHI in km/s with VLO < VHI, not '%s'", val);
    if (k == K_TWIN) {
      t->systems.has_target = 1;
      t->systems.target_vlo = x;
      t->systems.target_vhi = hi;
      break;
    }
    t->has_window = 1;
    t->vlo = x;
    t->vhi = hi;
    break;
  }
  case K_DOUBLET:
    if (strlen(val) >= sizeof t->doublet) return bad(e, lineno, "doublet name '%s' is too long", val);
    snprintf(t->doublet, sizeof t->doublet, "%s", val);
    break;
  default:
    if (strlen(val) >= sizeof t->name) return bad(e, lineno, "name '%s' is too long", val);
    snprintf(t->name, sizeof t->name, "%s", val);
    break;
  }
  if ((*seen & (1u << K_R)) && (*seen & (1u << K_FWHM)))
    return bad(e, lineno, "give R or fwhm, not both%s", "");
  return DT_OK;
}

/* The next field of the line from *pp into out (unquoted, unescaped).
 * Returns 1 with a field, 0 at the end of the line (or at a comment), or
 * DT_EFORMAT with e set.  *eq is set to the offset in out of the first '='
 * (quoted or not), or -1. */
static int next_field(const char *line, const char **pp, char *out, long *eq, long lineno,
                      dt_err *e) {
  const char *p = *pp;
  while (*p && is_blank(*p)) p++;
  if (!*p || *p == '#') return 0;
  size_t n = 0;
  *eq = -1;
  while (*p && !is_blank(*p) && *p != '#') {
    if (*p == '"') {
      const char *open = p++;
      for (;;) {
        if (!*p) {
          char col[24];
          snprintf(col, sizeof col, "%ld", (long)(open - line) + 1);
          return bad(e, lineno, "unterminated quote: the '\"' at column %s is never closed", col);
        }
        if (*p == '"') break;
        if (*p == '\\') {
          p++;
          if (*p != '"' && *p != '\\')
            return bad(e, lineno, "inside quotes, a backslash must be followed by '\"' or '\\' (%s)",
                       *p ? "found another character" : "found the end of the line");
        }
        if (*p == '=' && *eq < 0) *eq = (long)n;
        out[n++] = *p++;
      }
      p++; /* closing quote */
      continue;
    }
    if (*p == '=' && *eq < 0) *eq = (long)n;
    out[n++] = *p++;
  }
  out[n] = '\0';
  *pp = p;
  return 1;
}

int dt_targets_parse_line(const char *line, const char *basedir, long lineno,
                          dt_target_spec *t, int *got, dt_err *e) {
  char buf[DT_TARGET_LINE_MAX + 1], field[DT_TARGET_LINE_MAX + 1];
  *got = 0;
  size_t len = strlen(line);
  while (len && (line[len - 1] == '\n' || line[len - 1] == '\r')) len--;
  if (len > DT_TARGET_LINE_MAX) return bad(e, lineno, "line longer than %s bytes", "8192");
  memcpy(buf, line, len);
  buf[len] = '\0';
  for (char *p = buf; *p; p++)
    if ((unsigned char)*p < 0x20 && !is_blank(*p)) return bad(e, lineno, "control character in the line%s", "");

  dt_target_spec_init(t, NULL);
  t->line = lineno;
  unsigned seen = 0;
  int nfield = 0;
  const char *p = buf;
  long eq;
  int rc;
  while ((rc = next_field(buf, &p, field, &eq, lineno, e)) == 1) {
    if (nfield++ == 0) {
      if (!field[0]) return bad(e, lineno, "empty path%s", "");
      int rel = field[0] != '/' && basedir && basedir[0] && strcmp(basedir, ".") != 0;
      size_t nb = rel ? strlen(basedir) : 0, nt = strlen(field);
      int slash = rel && basedir[nb - 1] != '/';
      if (nb + (size_t)slash + nt >= sizeof t->path)
        return bad(e, lineno, "path longer than %s bytes", "4095");
      if (nb) memcpy(t->path, basedir, nb);
      if (slash) t->path[nb++] = '/';
      memcpy(t->path + nb, field, nt + 1);
      continue;
    }
    const char *val = NULL;
    if (eq >= 0) {
      field[eq] = '\0';
      val = field + eq + 1;
    }
    rc = parse_field(t, field, val, lineno, &seen, e);
    if (rc != DT_OK) return rc;
  }
  if (rc != 0) return rc;
  if (!!(seen & (1u << SKY_SEEN_SHIFT)) != !!(seen & (2u << SKY_SEEN_SHIFT)))
    return bad(e, lineno, "give ra and dec together%s", "");
  if (nfield == 0) return DT_OK;
  *got = 1;
  return DT_OK;
}

int dt_targets_quote(char *out, size_t size, const char *text) {
  int plain = text[0] != '\0';
  for (const char *q = text; *q; q++)
    if (is_blank(*q) || *q == '#' || *q == '"' || *q == '\\' || *q == '=') plain = 0;
  size_t n = 0;
  if (!plain && size > 0) out[n++] = '"';
  for (const char *q = text; *q; q++) {
    if (!plain && (*q == '"' || *q == '\\')) {
      if (n + 1 >= size) return DT_EINVAL;
      out[n++] = '\\';
    }
    if (n + 1 >= size) return DT_EINVAL;
    out[n++] = *q;
  }
  if (!plain) {
    if (n + 1 >= size) return DT_EINVAL;
    out[n++] = '"';
  }
  if (n >= size) return DT_EINVAL;
  out[n] = '\0';
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
    if (rc == DT_OK && *got && l->air_all) t->air = 1;
    if (rc != DT_OK || *got) return rc;
  }
}

long dt_targets_lineno(const dt_targets *l) { return l->lineno; }

void dt_targets_set_air(dt_targets *l, int air) { l->air_all = air != 0; }

void dt_targets_close(dt_targets *l) {
  if (!l) return;
  if (l->f) fclose(l->f);
  free(l);
}
