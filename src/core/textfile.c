/* Small text files read whole, and the lines of a table (textfile.h). */
#include "textfile.h"

#include <ctype.h>
#include <errno.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

int dt_text_slurp(const char *path, size_t max, const char *what, char **buf, size_t *len,
                  dt_err *e) {
  *buf = NULL;
  *len = 0;
  FILE *f = fopen(path, "rb");
  if (!f) return dt_err_set(e, DT_EIO, NULL, "cannot open: %s", strerror(errno));
  size_t cap = 4096, n = 0;
  char *b = malloc(cap + 1);
  int rc = b ? DT_OK : dt_err_set(e, DT_ENOMEM, NULL, "out of memory");
  while (rc == DT_OK) {
    if (n == cap) {
      if (cap >= max) {
        rc = dt_err_set(e, DT_EFORMAT, NULL, "larger than %zu MiB: not %s", max >> 20, what);
        break;
      }
      char *nb = realloc(b, 2 * cap + 1);
      if (!nb) {
        rc = dt_err_set(e, DT_ENOMEM, NULL, "out of memory");
        break;
      }
      b = nb;
      cap *= 2;
    }
    size_t got = fread(b + n, 1, cap - n, f);
    n += got;
    if (got == 0) {
      if (ferror(f)) rc = dt_err_set(e, DT_EIO, NULL, "cannot read: %s", strerror(errno));
      break;
    }
  }
  fclose(f);
  if (rc != DT_OK) {
    free(b);
    return rc;
  }
  b[n] = '\0';
  *buf = b;
  *len = n;
  return DT_OK;
}

int dt_text_lines(char *text, size_t len, dt_text_line_fn fn, void *ctx, dt_err *e) {
  long lineno = 0;
  char *p = text, *stop = text + len;
  while (p < stop) {
    lineno++;
    char *eol = memchr(p, '\n', (size_t)(stop - p));
    if (!eol) eol = stop;
    *eol = '\0';
    char where[32];
    snprintf(where, sizeof where, "line %ld", lineno);
    if (strlen(p) != (size_t)(eol - p))
      return dt_err_set(e, DT_EFORMAT, where, "contains a NUL byte (not a text file?)");
    char *hash = strchr(p, '#');
    if (hash) *hash = '\0';
    while (*p && isspace((unsigned char)*p)) p++;
    if (*p) {
      int rc = fn(ctx, p, lineno, where, e);
      if (rc != DT_OK) return rc;
    }
    p = eol + 1;
  }
  return DT_OK;
}

char *dt_text_token(char **s) {
  char *p = *s;
  while (*p && isspace((unsigned char)*p)) p++;
  if (!*p) {
    *s = p;
    return NULL;
  }
  char *tok = p;
  while (*p && !isspace((unsigned char)*p)) p++;
  if (*p) *p++ = '\0';
  *s = p;
  return tok;
}
