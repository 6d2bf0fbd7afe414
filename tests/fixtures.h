/* Shared test fixtures: atomic data and file helpers used by several unit
 * tests. */
#ifndef DT_TEST_FIXTURES_H
#define DT_TEST_FIXTURES_H
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "doubletty/atomic.h"

/* Na I D: vacuum wavelengths [A], oscillator strengths and damping
 * constants [s^-1] from Morton (2003, ApJS 149, 205). */
static inline dt_doublet nai(void) {
  dt_doublet d;
  memset(&d, 0, sizeof d);
  strcpy(d.name, "NaI");
  strcpy(d.line[0].label, "NaI 5891");
  d.line[0].lambda0 = 5891.5833;
  d.line[0].f = 0.6408;
  d.line[0].gamma = 6.16e7;
  strcpy(d.line[1].label, "NaI 5897");
  d.line[1].lambda0 = 5897.5581;
  d.line[1].f = 0.3201;
  d.line[1].gamma = 6.14e7;
  strcpy(d.source, "Morton (2003) ApJS 149, 205");
  return d;
}

/* The bytes of a file (NUL-terminated, *n without the NUL); NULL if it
 * cannot be read.  The caller frees. */
static inline unsigned char *slurp(const char *path, size_t *n) {
  FILE *f = fopen(path, "rb");
  if (!f) return NULL;
  fseek(f, 0, SEEK_END);
  long len = ftell(f);
  fseek(f, 0, SEEK_SET);
  unsigned char *b = len >= 0 ? malloc((size_t)len + 1) : NULL;
  *n = b ? fread(b, 1, (size_t)len, f) : 0;
  if (b) b[*n] = 0;
  fclose(f);
  return b;
}

/* Write n bytes to a file (replacing it). */
static inline void spit(const char *path, const void *b, size_t n) {
  FILE *f = fopen(path, "wb");
  if (!f) return;
  if (n) fwrite(b, 1, n, f);
  fclose(f);
}
#endif
