/* Sources of the line-spread function (lsf.h): resolution tables R(lambda)
 * read from text and interpolated linearly with GSL, widths per pixel
 * given to a spectrum, and values per doublet ("NaI:4800,CaII:3600").
 *
 * A width per pixel is a FWHM in km/s: for a resolving power R,
 * FWHM = c / R (R = lambda / d lambda, the usual definition; common
 * practice). */
#include "doubletty/lsf.h"

#include <ctype.h>
#include <errno.h>
#include <gsl/gsl_errno.h>
#include <gsl/gsl_interp.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "doubletty/atomic.h"
#include "doubletty/num.h"
#include "textfile.h"
#include "gsl_quiet.h"

struct dt_lsf_table {
  char name[256];
  size_t n;
  double *lam, *R;
  gsl_interp *interp;
};

void dt_lsf_table_free(dt_lsf_table *t) {
  if (!t) return;
  if (t->interp) gsl_interp_free(t->interp);
  free(t->lam);
  free(t->R);
  free(t);
}

const char *dt_lsf_table_name(const dt_lsf_table *t) { return t ? t->name : ""; }

/* One line (NUL-terminated, comment removed): blank, or two numbers. */
static int table_line(dt_lsf_table *t, char *s, long lineno, size_t *cap, dt_err *e) {
  char where[32];
  snprintf(where, sizeof where, "line %ld", lineno);
  char *tok[3];
  int nt = 0;
  for (char *p = s; *p && nt < 3;) {
    while (*p && isspace((unsigned char)*p)) p++;
    if (!*p) break;
    tok[nt++] = p;
    while (*p && !isspace((unsigned char)*p)) p++;
    if (*p) *p++ = '\0';
  }
  if (nt == 0) return DT_OK;
  if (nt != 2)
    return dt_err_set(e, DT_EFORMAT, where,
                      "expected two columns, wavelength [A] and resolving power R, found %s",
                      nt < 2 ? "one" : "more");
  double lam, R;
  if (dt_num_parse(tok[0], &lam) != DT_OK || !isfinite(lam) || !(lam > 0))
    return dt_err_set(e, DT_EFORMAT, where, "wavelength '%.40s' is not a positive number of Angstrom",
                      tok[0]);
  if (dt_num_parse(tok[1], &R) != DT_OK || !isfinite(R) || !(R > 0))
    return dt_err_set(e, DT_EFORMAT, where, "R = '%.40s' is not a positive resolving power", tok[1]);
  if (t->n > 0 && !(lam > t->lam[t->n - 1]))
    return dt_err_set(e, DT_EFORMAT, where,
                      "wavelengths must increase from line to line: %.10g A after %.10g A", lam,
                      t->lam[t->n - 1]);
  if (t->n >= DT_LSF_TABLE_MAX)
    return dt_err_set(e, DT_EFORMAT, where, "more than %d points", DT_LSF_TABLE_MAX);
  if (t->n == *cap) {
    size_t nc = *cap ? 2 * *cap : 64;
    double *a = realloc(t->lam, nc * sizeof *a);
    if (a) t->lam = a;
    double *b = a ? realloc(t->R, nc * sizeof *b) : NULL;
    if (b) t->R = b;
    if (!a || !b) return dt_err_set(e, DT_ENOMEM, where, "out of memory");
    *cap = nc;
  }
  t->lam[t->n] = lam;
  t->R[t->n] = R;
  t->n++;
  return DT_OK;
}

int dt_lsf_table_read_mem(const char *buf, size_t len, const char *name, dt_lsf_table **out,
                          dt_err *e) {
  *out = NULL;
  dt_err_clear(e);
  dt_lsf_table *t = calloc(1, sizeof *t);
  char *line = malloc(len + 1);
  if (!t || !line) {
    free(t);
    free(line);
    return dt_err_set(e, DT_ENOMEM, NULL, "out of memory");
  }
  snprintf(t->name, sizeof t->name, "%s", name ? name : "");
  size_t cap = 0, pos = 0;
  long lineno = 0;
  int rc = DT_OK;
  while (pos < len && rc == DT_OK) {
    size_t end = pos;
    while (end < len && buf[end] != '\n') end++;
    lineno++;
    size_t k = 0;
    for (size_t i = pos; i < end && buf[i] != '#'; i++) {
      if (buf[i] == '\0') {
        rc = dt_err_set(e, DT_EFORMAT, NULL, "line %ld: a NUL byte: not a text file", lineno);
        break;
      }
      line[k++] = buf[i];
    }
    line[k] = '\0';
    if (rc == DT_OK) rc = table_line(t, line, lineno, &cap, e);
    pos = end + 1;
  }
  free(line);
  if (rc == DT_OK && t->n < 2)
    rc = dt_err_set(e, DT_EFORMAT, NULL, "%zu point%s: a resolution table needs at least 2", t->n,
                    t->n == 1 ? "" : "s");
  if (rc == DT_OK) {
    dt_gsl_quiet();
    t->interp = gsl_interp_alloc(gsl_interp_linear, t->n);
    if (!t->interp || gsl_interp_init(t->interp, t->lam, t->R, t->n) != GSL_SUCCESS)
      rc = dt_err_set(e, DT_ENOMEM, NULL, "cannot set up the interpolation");
  }
  if (rc != DT_OK) {
    dt_lsf_table_free(t);
    return rc;
  }
  *out = t;
  return DT_OK;
}

int dt_lsf_table_read(const char *path, dt_lsf_table **out, dt_err *e) {
  *out = NULL;
  dt_err_clear(e);
  char *buf;
  size_t len;
  int rc = dt_text_slurp(path, (size_t)64 << 20, "a resolution table", &buf, &len, e);
  if (rc == DT_OK) rc = dt_lsf_table_read_mem(buf, len, path, out, e);
  free(buf);
  return rc;
}

int dt_lsf_table_R(const dt_lsf_table *t, double lambda, double *R, dt_err *e) {
  if (!(lambda >= t->lam[0] && lambda <= t->lam[t->n - 1]))
    return dt_err_set(e, DT_ERANGE, NULL,
                      "resolution table %.120s covers %.10g-%.10g A, not %.10g A", t->name,
                      t->lam[0], t->lam[t->n - 1], lambda);
  *R = gsl_interp_eval(t->interp, t->lam, t->R, lambda, NULL);
  return DT_OK;
}

int dt_lsf_table_apply(const dt_lsf_table *t, dt_spectrum *s, dt_err *e) {
  dt_err_clear(e);
  if (!t || !s) return dt_err_set(e, DT_EINVAL, NULL, "no table or no spectrum");
  double *w = s->lsf_fwhm_kms ? s->lsf_fwhm_kms : malloc((s->n ? s->n : 1) * sizeof *w);
  if (!w) return dt_err_set(e, DT_ENOMEM, NULL, "out of memory");
  for (size_t i = 0; i < s->n; i++) {
    double R = NAN;
    w[i] = dt_lsf_table_R(t, s->wave[i], &R, NULL) == DT_OK ? DT_C_KMS / R : NAN;
  }
  s->lsf_fwhm_kms = w;
  snprintf(s->lsf_from, sizeof s->lsf_from, "table %.120s", t->name);
  return DT_OK;
}

size_t dt_lsf_first_bad(const dt_spectrum *s, size_t i0, size_t n) {
  if (!s->lsf_fwhm_kms) return n;
  for (size_t i = 0; i < n; i++)
    if (!isfinite(s->lsf_fwhm_kms[i0 + i]) || !(s->lsf_fwhm_kms[i0 + i] > 0)) return i;
  return n;
}

int dt_lsf_per_parse(const char *text, const char *what, dt_lsf_per *p, dt_err *e) {
  dt_err_clear(e);
  memset(p, 0, sizeof *p);
  if (!text || !*text) return dt_err_set(e, DT_EINVAL, NULL, "empty %s", what);
  const char *s = text;
  for (;;) {
    const char *end = strchr(s, ',');
    size_t len = end ? (size_t)(end - s) : strlen(s);
    char part[64];
    if (len == 0 || len >= sizeof part)
      return dt_err_set(e, DT_EINVAL, NULL, "%s: '%.60s' is not VALUE or DOUBLET:VALUE", what, s);
    memcpy(part, s, len);
    part[len] = '\0';
    if (p->n == DT_LSF_PER_MAX)
      return dt_err_set(e, DT_EINVAL, NULL, "%s: more than %d entries", what, DT_LSF_PER_MAX);
    char *colon = strchr(part, ':'), *num = part;
    char name[16] = "";
    if (colon) {
      *colon = '\0';
      num = colon + 1;
      if (!*part || strlen(part) >= sizeof name)
        return dt_err_set(e, DT_EINVAL, NULL, "%s: '%.60s' names no doublet before ':'", what, part);
      snprintf(name, sizeof name, "%.15s", part);
    }
    double v;
    if (dt_num_parse(num, &v) != DT_OK || !isfinite(v) || !(v > 0))
      return dt_err_set(e, DT_EINVAL, NULL, "%s must be positive (got %.40s)", what, num);
    for (int k = 0; k < p->n; k++)
      if (dt_atomic_name_eq(p->e[k].doublet, name))
        return dt_err_set(e, DT_EINVAL, NULL, "%s given twice for %s", what,
                          *name ? name : "every doublet");
    snprintf(p->e[p->n].doublet, sizeof p->e[p->n].doublet, "%s", name);
    p->e[p->n].value = v;
    p->n++;
    if (!end) break;
    s = end + 1;
  }
  return DT_OK;
}

double dt_lsf_per_get(const dt_lsf_per *p, const char *doublet) {
  if (!p) return 0;
  for (int k = 0; k < p->n; k++)
    if (p->e[k].doublet[0] && doublet && dt_atomic_name_eq(p->e[k].doublet, doublet)) return p->e[k].value;
  for (int k = 0; k < p->n; k++)
    if (!p->e[k].doublet[0]) return p->e[k].value;
  return 0;
}
