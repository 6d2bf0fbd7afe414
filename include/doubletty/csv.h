/* CSV output: one writer for every table doubletty writes.
 *
 * Conventions (the same in every file): fields separated by ',', records
 * ended by "\n" (never "\r\n"); a text field is quoted when it holds a
 * comma, a quote or a line break, quotes doubled (RFC 4180), so it reads
 * back exactly; with one_line set, line breaks become spaces instead, so
 * every record is one line (tables that line-based tools merge); numbers are written in the "C"
 * locale (dt_num_*) whatever the user's locale, NaN and infinities as an
 * empty field.  Comment lines "# key=value" may precede the header.
 *
 * The writer keeps track of the field position, so callers only say what
 * the next field is. */
#ifndef DOUBLETTY_CSV_H
#define DOUBLETTY_CSV_H
#include <stdio.h>

typedef struct dt_csv {
  FILE *f;
  int nfield;   /* fields written in the current record */
  int one_line; /* 1: line breaks in text become spaces (default 0) */
} dt_csv;

void dt_csv_init(dt_csv *w, FILE *f);
/* A comment line "# key=value" (before the header only). */
void dt_csv_comment(dt_csv *w, const char *key, const char *value);
/* A text field (NULL = empty). */
void dt_csv_text(dt_csv *w, const char *s);
/* A number with a fixed number of decimals; empty when not finite. */
void dt_csv_fixed(dt_csv *w, double x, int decimals);
/* A number in the shortest exact form (dt_num_format); empty when NaN. */
void dt_csv_num(dt_csv *w, double x);
/* A whole number. */
void dt_csv_long(dt_csv *w, long x);
/* An empty field. */
void dt_csv_empty(dt_csv *w);
/* End the record. */
void dt_csv_end(dt_csv *w);
/* Nonzero when a write failed. */
int dt_csv_error(const dt_csv *w);

#endif
