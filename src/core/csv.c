/* CSV output: quoting, record ends and locale-independent numbers in one
 * place (see csv.h). */
#include "doubletty/csv.h"

#include <math.h>
#include <string.h>

#include "doubletty/num.h"

void dt_csv_init(dt_csv *w, FILE *f) {
  w->f = f;
  w->nfield = 0;
  w->one_line = 0;
}

static void sep(dt_csv *w) {
  if (w->nfield++) fputc(',', w->f);
}

void dt_csv_comment(dt_csv *w, const char *key, const char *value) {
  fprintf(w->f, "# %s=", key);
  for (const char *s = value ? value : ""; *s; s++)
    fputc(*s == '\n' || *s == '\r' ? ' ' : *s, w->f);
  fputc('\n', w->f);
}

void dt_csv_text(dt_csv *w, const char *s) {
  sep(w);
  if (!s) return;
  if (!strpbrk(s, ",\"\n\r")) {
    fputs(s, w->f);
    return;
  }
  fputc('"', w->f);
  for (; *s; s++) {
    if (*s == '"') fputs("\"\"", w->f);
    else if (w->one_line && (*s == '\n' || *s == '\r')) fputc(' ', w->f);
    else fputc(*s, w->f);
  }
  fputc('"', w->f);
}

void dt_csv_fixed(dt_csv *w, double x, int decimals) {
  sep(w);
  if (isfinite(x)) dt_num_fprintf(w->f, "%.*f", decimals, x);
}

void dt_csv_num(dt_csv *w, double x) {
  sep(w);
  if (isnan(x)) return;
  char buf[40];
  dt_num_format(buf, sizeof buf, x);
  fputs(buf, w->f);
}

void dt_csv_long(dt_csv *w, long x) {
  sep(w);
  fprintf(w->f, "%ld", x);
}

void dt_csv_empty(dt_csv *w) { sep(w); }

void dt_csv_end(dt_csv *w) {
  fputc('\n', w->f);
  w->nfield = 0;
}

int dt_csv_error(const dt_csv *w) { return ferror(w->f) != 0; }
