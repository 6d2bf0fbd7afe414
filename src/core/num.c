/* Locale-independent number parsing and formatting (see num.h).
 *
 * The idea: every call runs under the POSIX "C" locale object through
 * uselocale(), which changes only the calling thread's locale and is undone
 * before return.  newlocale(LC_ALL_MASK, "C", 0) needs no locale files and
 * cannot fail for lack of them. */
#include "doubletty/num.h"
#include <errno.h>
#include <locale.h>
#include <math.h>
#include <stdarg.h>
#include <stdlib.h>
#include <string.h>
#include "doubletty/status.h"

typedef struct cloc { locale_t c, old; } cloc;

static void cloc_enter(cloc *l) {
  l->c = newlocale(LC_ALL_MASK, "C", (locale_t)0);
  l->old = l->c ? uselocale(l->c) : (locale_t)0;
}

static void cloc_leave(cloc *l) {
  if (!l->c) return;
  uselocale(l->old);
  freelocale(l->c);
}

double dt_num_strtod(const char *s, char **end) {
  cloc l;
  cloc_enter(&l);
  errno = 0; /* what the caller sees in errno is strtod's alone */
  double x = strtod(s, end);
  int err = errno;
  cloc_leave(&l);
  errno = err;
  return x;
}

long long dt_num_strtoll(const char *s, char **end) {
  cloc l;
  cloc_enter(&l);
  errno = 0;
  long long x = strtoll(s, end, 10);
  int err = errno;
  cloc_leave(&l);
  errno = err;
  return x;
}

int dt_num_parse(const char *s, double *x) {
  if (!s || !*s || strchr(" \t\n\r\f\v", s[0])) return DT_EINVAL;
  char *end;
  errno = 0;
  double v = dt_num_strtod(s, &end);
  if (end == s || *end || (errno == ERANGE && fabs(v) > 1.0)) return DT_EINVAL;
  *x = v;
  return DT_OK;
}

int dt_num_parse_long(const char *s, long lo, long hi, long *x) {
  if (!s || !*s || strchr(" \t\n\r\f\v", s[0])) return DT_EINVAL;
  char *end;
  errno = 0;
  long long v = dt_num_strtoll(s, &end);
  if (end == s || *end || errno || v < lo || v > hi) return DT_EINVAL;
  *x = (long)v;
  return DT_OK;
}

void dt_num_format(char *out, size_t size, double x) {
  if (isnan(x)) {
    snprintf(out, size, "nan");
    return;
  }
  if (isinf(x)) {
    snprintf(out, size, x > 0 ? "inf" : "-inf");
    return;
  }
  cloc l;
  cloc_enter(&l);
  /* round numbers succeed at 6 digits, fitted values mostly need 16-17:
   * try 6, then 15 (and more if needed), and only then the ones between */
  int p = 6;
  snprintf(out, size, "%.6g", x);
  if (strtod(out, NULL) != x) {
    snprintf(out, size, "%.15g", x);
    if (strtod(out, NULL) != x) {
      snprintf(out, size, "%.16g", x);
      if (strtod(out, NULL) != x) snprintf(out, size, "%.17g", x);
    } else {
      for (p = 7; p < 15; p++) {
        snprintf(out, size, "%.*g", p, x);
        if (strtod(out, NULL) == x) break;
      }
      if (p == 15) snprintf(out, size, "%.15g", x);
    }
  }
  cloc_leave(&l);
}

int dt_num_with_c_locale(int (*fn)(void *arg), void *arg) {
  cloc l;
  cloc_enter(&l);
  int rc = fn(arg);
  cloc_leave(&l);
  return rc;
}

int dt_num_snprintf(char *out, size_t size, const char *fmt, ...) {
  cloc l;
  cloc_enter(&l);
  va_list ap;
  va_start(ap, fmt);
  int n = vsnprintf(out, size, fmt, ap);
  va_end(ap);
  cloc_leave(&l);
  return n;
}

int dt_num_fprintf(FILE *f, const char *fmt, ...) {
  cloc l;
  cloc_enter(&l);
  va_list ap;
  va_start(ap, fmt);
  int n = vfprintf(f, fmt, ap);
  va_end(ap);
  cloc_leave(&l);
  return n;
}
