/* Shared test fixtures: atomic data and file helpers used by several unit
 * tests. */
#ifndef DT_TEST_FIXTURES_H
#define DT_TEST_FIXTURES_H
#include <dirent.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>

#include <gsl/gsl_randist.h>
#include <gsl/gsl_rng.h>
#include <math.h>

#include "doubletty/atomic.h"
#include "doubletty/num.h"
#include "doubletty/session.h"

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

/* A session target for path at R 20 000, window -400..400 km/s. */
static inline void session_target_r20000(dt_session_target *t, const char *path) {
  dt_session_target_init(t, path, path, 0);
  t->initial.resolution = 20000;
  t->initial.vlo = -400;
  t->initial.vhi = 400;
}

/* DIR/NAME, in one of four buffers used in turn (so one call may take
 * the results of up to four). */
static inline const char *dir_path(const char *dir, const char *name) {
  static char p[4][4096];
  static int k;
  k = (k + 1) % 4;
  int n = snprintf(p[k], sizeof p[k], "%s/%s", dir, name);
  if (n < 0 || (size_t)n >= sizeof p[k]) abort(); /* a test's own paths are short */
  return p[k];
}

/* Remove the files of a flat temporary directory, then the directory. */
static inline void remove_dir(const char *dir) {
  DIR *d = opendir(dir);
  for (struct dirent *de; d && (de = readdir(d));)
    if (de->d_name[0] != '.') remove(dir_path(dir, de->d_name));
  if (d) closedir(d);
  rmdir(dir);
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
/* The number of lines of a file (0 when it cannot be read). */
static inline long file_lines(const char *path) {
  size_t n;
  unsigned char *b = slurp(path, &n);
  long k = 0;
  for (size_t i = 0; b && i < n; i++) k += b[i] == '\n';
  free(b);
  return k;
}

/* 1 when the last line of a session file records action act ("act=ACT"). */
static inline int last_action_is(const char *path, const char *act) {
  size_t n;
  unsigned char *b = slurp(path, &n);
  int ok = 0;
  if (b && n > 1) {
    size_t i = n - 1;
    while (i > 0 && b[i - 1] != '\n') i--;
    char want[64];
    snprintf(want, sizeof want, "act=%s\t", act);
    ok = strstr((char *)b + i, want) != NULL;
  }
  free(b);
  return ok;
}

/* A text spectrum (wavelength, flux, error; 5850 A up to hi in steps of
 * step) with Na I D absorption at v [km/s]: Gaussian optical-depth
 * profiles of width sigma [km/s], central depth tau0 in the stronger line
 * and tau0 / 2 in the weaker (the ratio of f lambda, Morton 2003),
 * continuum 100, noise 2 (S/N 50) from a Mersenne Twister seeded seed. */
static inline void write_nai_text(const char *path, unsigned long seed, double hi, double step,
                                  double v, double tau0, double sigma) {
  FILE *f = fopen(path, "w");
  gsl_rng *r = gsl_rng_alloc(gsl_rng_mt19937);
  gsl_rng_set(r, seed);
  const double l0[2] = {5891.5833, 5897.5581}, t0[2] = {tau0, 0.5 * tau0}, c = 299792.458;
  for (double w = 5850; w <= hi; w += step) {
    double tau = 0;
    for (int k = 0; k < 2; k++) {
      double u = (w / l0[k] - 1) * c - v;
      tau += t0[k] * exp(-0.5 * u * u / (sigma * sigma));
    }
    double flux = 100.0 * exp(-tau) + gsl_ran_gaussian(r, 2.0);
    char a[40], b[40];
    dt_num_format(a, sizeof a, w);
    dt_num_format(b, sizeof b, flux);
    fprintf(f, "%s %s 2\n", a, b);
  }
  gsl_rng_free(r);
  fclose(f);
}

#endif
