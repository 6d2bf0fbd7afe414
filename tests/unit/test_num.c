/* Numbers in files (num.h): strict parsing, shortest round-trip formatting,
 * and the same bytes when the process runs under a comma-decimal locale.
 *
 * References: the C standard's strtod/printf (%g drops trailing zeros);
 * the shortest digits of 0.1 and 1/3 as Python's repr prints them (Debian
 * python3: repr(0.1) = '0.1', repr(1/3) = '0.3333333333333333'); the Na I
 * D2 wavelength 5891.5833 A of Morton (2003, ApJS 149, 205).  The shortest
 * digit count of random doubles is checked against a brute-force search
 * over every precision from 1 to 17 digits.  The comma-decimal locale is
 * built here with localedef (package locales) into a temporary directory
 * (LOCPATH); that printf really writes a comma under it is checked first,
 * so the locale checks cannot pass vacuously.  Under it, the readers of
 * text spectra, FITS headers, the atomic table and target lists must read
 * the same values as under "C". */
#include <errno.h>
#include <locale.h>
#include <math.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>

#include <fitsio.h>

#include "doubletty/atomic.h"
#include "doubletty/num.h"
#include "doubletty/spectrum.h"
#include "doubletty/status.h"
#include "doubletty/targets.h"
#include "harness.h"

/* A double from 64 random bits (xorshift64*, seeded; common practice). */
static uint64_t rng_state = 0x9E3779B97F4A7C15ull;
static uint64_t rng_next(void) {
  rng_state ^= rng_state >> 12;
  rng_state ^= rng_state << 25;
  rng_state ^= rng_state >> 27;
  return rng_state * 2685821657736338717ull;
}
static double random_double(int k) {
  if (k % 2) { /* values like fitted parameters: moderate exponents */
    double u = (double)(rng_next() >> 11) / 9007199254740992.0;
    double m = (double)(int64_t)(rng_next() % 2000001) - 1000000.0;
    return (m + u) * pow(10.0, (double)((int)(rng_next() % 21) - 10));
  }
  uint64_t b = rng_next();
  double x;
  memcpy(&x, &b, sizeof x);
  return x; /* any bit pattern, NaN and Inf included */
}

/* Number of significant digits in a %g text. */
static int sig_digits(const char *s) {
  int n = 0, started = 0;
  for (const char *p = s; *p && *p != 'e' && *p != 'E'; p++) {
    if (*p < '0' || *p > '9') continue;
    if (*p != '0') started = 1;
    if (started) n++;
  }
  return n;
}

/* Fewest digits p in 1..17 for which "%.{p}g" reads back exactly (brute
 * force, in whatever locale is current: used under "C" only). */
static int shortest_digits(double x) {
  char b[64];
  for (int p = 1; p <= 17; p++) {
    snprintf(b, sizeof b, "%.*g", p, x);
    if (strtod(b, NULL) == x) return p;
  }
  return 99;
}

static void test_parse(void) {
  double x = -7;
  CHECK(dt_num_parse("1.5", &x) == DT_OK && x == 1.5, "1.5");
  CHECK(dt_num_parse("-2e3", &x) == DT_OK && x == -2000, "-2e3");
  CHECK(dt_num_parse("5891.5833", &x) == DT_OK && x == 5891.5833, "5891.5833");
  CHECK(dt_num_parse("nan", &x) == DT_OK && isnan(x), "nan");
  CHECK(dt_num_parse("-inf", &x) == DT_OK && isinf(x) && x < 0, "-inf");
  CHECK(dt_num_parse("1e-310", &x) == DT_OK && x > 0 && x < 1e-300, "a subnormal (underflow to a tiny value) is kept");
  const char *bad[] = {"", " 1", "1 ", "1,5", "1.5x", "x", "1e999", "-1e999", "\t2", "2\n", "1.2.3", "--1"};
  for (size_t i = 0; i < sizeof bad / sizeof bad[0]; i++) {
    x = 42;
    CHECK(dt_num_parse(bad[i], &x) == DT_EINVAL && x == 42, "rejected, value untouched: '%s'", bad[i]);
  }
  CHECK(dt_num_parse(NULL, &x) == DT_EINVAL, "NULL rejected");

  long v = -7;
  CHECK(dt_num_parse_long("12", 1, 100, &v) == DT_OK && v == 12, "long 12 in [1, 100]");
  CHECK(dt_num_parse_long("-3", -5, 5, &v) == DT_OK && v == -3, "long -3");
  const char *badl[] = {"", "0", "101", "1.0", "1e2", " 5", "5 ", "7x", "99999999999999999999999"};
  for (size_t i = 0; i < sizeof badl / sizeof badl[0]; i++) {
    v = 42;
    CHECK(dt_num_parse_long(badl[i], 1, 100, &v) == DT_EINVAL && v == 42, "long rejected: '%s'", badl[i]);
  }
  char *end;
  errno = EDOM; /* a stale errno must not leak through */
  long long k = dt_num_strtoll("2880 rest", &end);
  CHECK(k == 2880 && !strcmp(end, " rest") && errno == 0, "strtoll: leading integer, errno 0");
  dt_num_strtod("1e999", &end);
  CHECK(errno == ERANGE, "strtod: overflow sets ERANGE");
}

static void test_format(void) {
  char b[40];
  struct { double x; const char *want; } known[] = {
      {0.1, "0.1"},                      /* Python repr(0.1) */
      {1.0 / 3.0, "0.3333333333333333"}, /* Python repr(1/3) */
      {5891.5833, "5891.5833"},          /* Morton 2003, Na I D2 */
      {3.0, "3"},
      {-0.0, "-0"},
      {1e300, "1e+300"},
      {2.5e-7, "2.5e-07"},
  };
  for (size_t i = 0; i < sizeof known / sizeof known[0]; i++) {
    dt_num_format(b, sizeof b, known[i].x);
    CHECK(!strcmp(b, known[i].want), "%.17g -> %s (want %s)", known[i].x, b, known[i].want);
  }
  dt_num_format(b, sizeof b, NAN);
  CHECK(!strcmp(b, "nan"), "NaN -> nan");
  dt_num_format(b, sizeof b, -INFINITY);
  CHECK(!strcmp(b, "-inf"), "-Inf -> -inf");

  int n = 0, exact = 0, shortest = 0;
  char worst[128] = "";
  for (int k = 0; k < 60000; k++) {
    double x = random_double(k);
    if (!isfinite(x)) continue;
    n++;
    dt_num_format(b, sizeof b, x);
    double y;
    int ok = dt_num_parse(b, &y) == DT_OK && memcmp(&x, &y, sizeof x) == 0;
    exact += ok;
    int want = shortest_digits(x);
    if (want < 6) want = 6;
    int got = sig_digits(b);
    if (got <= want || (x == 0 && got <= 1)) shortest++;
    else if (!worst[0]) snprintf(worst, sizeof worst, "%.17g -> %s (%d digits, %d suffice)", x, b, got, want);
  }
  CHECK(exact == n, "%d of %d random doubles read back bit for bit", exact, n);
  CHECK(shortest == n, "%d of %d with the fewest digits (at least 6) %s", shortest, n, worst);
}

/* Build de_DE.UTF-8 into a temporary directory and switch the whole
 * process to it.  Returns 1 when printf then writes a decimal comma. */
static int enter_comma_locale(char *dir, size_t size) {
  snprintf(dir, size, "/tmp/dt-num-loc-XXXXXX");
  if (!mkdtemp(dir)) return 0;
  char cmd[512];
  snprintf(cmd, sizeof cmd, "localedef -i de_DE -f UTF-8 '%s/de_DE.UTF-8' >/dev/null 2>&1", dir);
  int rc = system(cmd);
  (void)rc; /* localedef warns with status 1 on some systems; what counts is below */
  setenv("LOCPATH", dir, 1);
  if (!setlocale(LC_ALL, "de_DE.UTF-8")) return 0;
  char b[16];
  snprintf(b, sizeof b, "%.1f", 1.5);
  return !strcmp(b, "1,5");
}

/* What the readers make of their files; compared between locales. */
typedef struct readings {
  int ok_text, ok_fits, ok_atomic, ok_target;
  double text_wave[3], text_sigma, fits_wave[4], d2, f2, vsys, res;
} readings;

static const char spec_text[] = "# wave flux sigma\n5889.951 1.0 0.05\n5891.5833 0.25 0.125\n5895.924 1.5e-1 0.05\n";
static const char list_line[] = "a.fits vsys=-12.75 R=48000.5 name=x";

static void write_fits(const char *path) {
  int st = 0;
  fitsfile *f;
  char bang[300];
  snprintf(bang, sizeof bang, "!%s", path);
  fits_create_file(&f, bang, &st);
  long ax[1] = {4};
  double d[4] = {1.0, 0.5, 0.25, 1.0}, crval = 5880.25, cdelt = 0.125;
  fits_create_img(f, DOUBLE_IMG, 1, ax, &st);
  fits_write_key(f, TDOUBLE, "CRVAL1", &crval, NULL, &st);
  fits_write_key(f, TDOUBLE, "CDELT1", &cdelt, NULL, &st);
  fits_write_img(f, TDOUBLE, 1, 4, d, &st);
  fits_close_file(f, &st);
}

static void read_all(const char *fits, readings *r) {
  memset(r, 0, sizeof *r);
  dt_spectrum *s = NULL;
  dt_err e;
  if (dt_spectrum_read_mem(spec_text, strlen(spec_text), NULL, &s, &e) == DT_OK) {
    r->ok_text = 1;
    for (int i = 0; i < 3; i++) r->text_wave[i] = s->wave[i];
    r->text_sigma = s->sigma[1];
  }
  dt_spectrum_free(s);
  s = NULL;
  int frc = dt_spectrum_read(fits, NULL, &s, &e);
  if (frc) printf("       FITS: %s: %s\n", e.where, e.what);
  if (frc == DT_OK && s->n == 4) {
    r->ok_fits = 1;
    for (int i = 0; i < 4; i++) r->fits_wave[i] = s->wave[i];
  }
  dt_spectrum_free(s);
  dt_atomic *t = NULL;
  if (dt_atomic_load_builtin(&t, &e) == DT_OK && dt_atomic_find(t, "NaI")) {
    r->ok_atomic = 1;
    r->d2 = dt_atomic_find(t, "NaI")->line[0].lambda0;
    r->f2 = dt_atomic_find(t, "NaI")->line[0].f;
  }
  dt_atomic_free(t);
  dt_target_spec ts;
  int got = 0;
  if (dt_targets_parse_line(list_line, NULL, 1, &ts, &got, &e) == DT_OK && got) {
    r->ok_target = 1;
    r->vsys = ts.vsys;
    r->res = ts.resolution;
  }
}

static void test_locale(void) {
  /* reference texts in the C locale first */
  enum { N = 2000 };
  static char ref[N][40], ref_fix[64];
  static double xs[N];
  for (int k = 0; k < N; k++) {
    xs[k] = random_double(2 * k + 1);
    dt_num_format(ref[k], sizeof ref[k], xs[k]);
  }
  dt_num_snprintf(ref_fix, sizeof ref_fix, "%.3f|%g|%.2e", 5891.5833, 0.5, 12776.0);
  char fits[64];
  snprintf(fits, sizeof fits, "/tmp/dt-num-XXXXXX");
  int fd = mkstemp(fits);
  if (fd >= 0) close(fd);
  write_fits(fits);
  readings rc_, rd;
  read_all(fits, &rc_);
  /* values as written above; Na I D2 of Morton (2003, ApJS 149, 205) */
  CHECK(rc_.ok_text && rc_.text_wave[1] == 5891.5833 && rc_.text_sigma == 0.125, "C locale: text spectrum read");
  /* pixel 1 without CRPIX1 (default 0, FITS WCS Paper I): CRVAL1 + CDELT1 */
  CHECK(rc_.ok_fits && rc_.fits_wave[0] == 5880.375, "C locale: FITS axis CRVAL1 + CDELT1 read");
  CHECK(rc_.ok_atomic && rc_.d2 == 5891.5833 && rc_.f2 == 0.6408, "C locale: atomic table read");
  CHECK(rc_.ok_target && rc_.vsys == -12.75 && rc_.res == 48000.5, "C locale: target line read");

  char dir[64];
  int comma = enter_comma_locale(dir, sizeof dir);
  CHECK(comma, "comma-decimal locale de_DE.UTF-8 built and active: printf writes '1,5'");
  if (comma) {
    double plain = strtod("1.5", NULL);
    CHECK(plain == 1.0, "plain strtod now stops at the '.' (%g): the locale bites", plain);
  }
  int same = 0;
  for (int k = 0; k < N; k++) {
    char b[40];
    dt_num_format(b, sizeof b, xs[k]);
    same += !strcmp(b, ref[k]) && !strchr(b, ',');
  }
  CHECK(same == N, "dt_num_format: %d of %d texts the same as in the C locale", same, N);
  char fix[64];
  dt_num_snprintf(fix, sizeof fix, "%.3f|%g|%.2e", 5891.5833, 0.5, 12776.0);
  CHECK(!strcmp(fix, ref_fix) && !strcmp(fix, "5891.583|0.5|1.28e+04"),
        "dt_num_snprintf: %s (C locale: %s)", fix, ref_fix);
  FILE *f = tmpfile();
  char got[64] = "";
  if (f) {
    dt_num_fprintf(f, "logN=%.3f", 12.776);
    rewind(f);
    if (!fgets(got, sizeof got, f)) got[0] = '\0';
    fclose(f);
  }
  CHECK(!strcmp(got, "logN=12.776"), "dt_num_fprintf: %s", got);
  double x = 0;
  CHECK(dt_num_parse("12.776", &x) == DT_OK && x == 12.776, "dt_num_parse reads '.' under the comma locale");
  CHECK(dt_num_parse("12,776", &x) == DT_EINVAL, "... and still refuses '12,776'");
  char *end;
  CHECK(dt_num_strtod("0.25 rest", &end) == 0.25 && !strcmp(end, " rest"), "dt_num_strtod under the comma locale");
  read_all(fits, &rd);
  CHECK(rd.ok_text && !memcmp(rd.text_wave, rc_.text_wave, sizeof rd.text_wave) && rd.text_sigma == rc_.text_sigma,
        "text spectrum: the same values under the comma locale");
  CHECK(rd.ok_fits && !memcmp(rd.fits_wave, rc_.fits_wave, sizeof rd.fits_wave),
        "FITS header numbers: the same wavelengths under the comma locale (%d: %.17g %.17g)", rd.ok_fits,
        rd.fits_wave[0], rc_.fits_wave[0]);
  CHECK(rd.ok_atomic && rd.d2 == rc_.d2 && rd.f2 == rc_.f2, "atomic table: the same under the comma locale");
  CHECK(rd.ok_target && rd.vsys == rc_.vsys && rd.res == rc_.res, "target list: the same under the comma locale");
  remove(fits);
  char b[16];
  snprintf(b, sizeof b, "%.1f", 2.5);
  CHECK(!comma || !strcmp(b, "2,5"), "the caller's locale is left as it was (printf: %s)", b);
  setlocale(LC_ALL, "C");
  char cmd[128];
  snprintf(cmd, sizeof cmd, "rm -rf '%s'", dir);
  if (system(cmd) != 0) fprintf(stderr, "could not remove %s\n", dir);
}

int main(void) {
  test_parse();
  test_format();
  test_locale();
  return dt_test_done();
}
