/* The atomic table: the bundled doublets against published values and the
 * physics of resonance doublets, name lookup, user tables that add or
 * replace doublets, and malformed tables (each error names its line). */
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>

#include "doubletty/airvac.h"
#include "doubletty/atomic.h"
#include "fixtures.h"
#include "harness.h"

static const char *table_path(void) {
  static char p[4096];
  const char *d = getenv("DOUBLETTY_DATA");
  snprintf(p, sizeof p, "%s/atomic.dat", d && *d ? d : "share/doubletty");
  return p;
}

/* Write text to a fresh temporary file; returns its name (static buffer). */
static const char *write_tmp(const char *text, size_t len) {
  static char name[64];
  snprintf(name, sizeof name, "/tmp/dt-atomic-XXXXXX");
  int fd = mkstemp(name);
  if (fd < 0) return NULL;
  FILE *f = fdopen(fd, "wb");
  fwrite(text, 1, len, f);
  fclose(f);
  return name;
}

static void test_bundled(void) {
  dt_atomic *t = NULL;
  dt_err e;
  int rc = dt_atomic_load(table_path(), &t, &e);
  CHECK(rc == DT_OK, "bundled table %s loads (%s %s)", table_path(), e.where, e.what);
  if (rc != DT_OK) return;
  const char *names[] = {"NaI", "CaII", "KI", "MgII", "CIV", "SiIV", "NV", "OVI"};
  for (size_t i = 0; i < 8; i++) CHECK(dt_atomic_find(t, names[i]) != NULL, "table has %s", names[i]);
  CHECK(dt_atomic_count(t) >= 8, "table has at least 8 doublets (%zu)", dt_atomic_count(t));

  /* Na I D, Morton (2003, ApJS 149, 205) */
  const dt_doublet *na = dt_atomic_find(t, "Na I");
  CHECK(na && na->line[0].lambda0 == 5891.5833 && na->line[0].f == 0.6408 && na->line[0].gamma == 6.16e7,
        "Na I D2: 5891.5833 A, f = 0.6408, Gamma = 6.16e7 (Morton 2003)");
  CHECK(na && na->line[1].lambda0 == 5897.5581 && na->line[1].f == 0.3201 && na->line[1].gamma == 6.14e7,
        "Na I D1: 5897.5581 A, f = 0.3201, Gamma = 6.14e7 (Morton 2003)");
  CHECK(na && strcmp(na->line[0].label, "NaI 5891") == 0 && strcmp(na->line[1].label, "NaI 5897") == 0,
        "Na I labels are 'NaI 5891' and 'NaI 5897'");
  CHECK(na && strstr(na->source, "Morton") != NULL, "Na I names its source");

  /* Air wavelengths, as tabulated in the NIST Atomic Spectra Database (from
   * memory), through the IAU vacuum-to-air formula (Morton 2000) */
  struct {
    const char *name;
    int line;
    double air;
  } air[] = {{"NaI", 0, 5889.951}, {"NaI", 1, 5895.924}, {"KI", 0, 7664.899}, {"KI", 1, 7698.965},
             {"CaII", 0, 3933.663}, {"CaII", 1, 3968.468}, {"MgII", 0, 2795.528}, {"MgII", 1, 2802.705}};
  for (size_t i = 0; i < sizeof air / sizeof *air; i++) {
    const dt_doublet *d = dt_atomic_find(t, air[i].name);
    double got = d ? dt_vac_to_air(d->line[air[i].line].lambda0) : NAN;
    CHECK_CLOSE(got, air[i].air, 0.003, "%s line %d in air is %.3f A (NIST)", air[i].name, air[i].line,
                air[i].air);
  }

  /* the Na I D lines are about 6 A, i.e. 304 km/s, apart (common practice) */
  CHECK(na && fabs(DT_C_KMS * (na->line[1].lambda0 / na->line[0].lambda0 - 1.0) - 304.0) < 0.5,
        "Na I D lines are 304 km/s apart");

  /* Each is a 2S1/2 - 2P3/2,1/2 resonance doublet: the oscillator
   * strengths are in the ratio of the upper levels' statistical weights,
   * 4:2, and the two upper levels decay at nearly the same rate (LS
   * coupling; common practice) */
  for (size_t i = 0; i < dt_atomic_count(t); i++) {
    const dt_doublet *d = dt_atomic_get(t, i);
    double fr = d->line[0].f / d->line[1].f, gr = d->line[0].gamma / d->line[1].gamma;
    CHECK(fr > 1.95 && fr < 2.05 && gr > 0.97 && gr < 1.03,
          "%s: f ratio %.3f ~ 2, Gamma ratio %.3f ~ 1", d->name, fr, gr);
    CHECK(d->line[0].f * d->line[0].lambda0 > d->line[1].f * d->line[1].lambda0 && d->source[0],
          "%s: the stronger line is first and a source is given", d->name);
  }
  CHECK(dt_atomic_get(t, dt_atomic_count(t)) == NULL, "get past the end is NULL");
  dt_atomic_free(t);
}

static void test_names(void) {
  dt_atomic *t = dt_atomic_new();
  dt_err e;
  const char *txt = "NaI 5891.5833 0.6408 6.16e7 5897.5581 0.3201 6.14e7 Morton (2003)\n"
                    "MgII 2796.3543 0.6155 2.625e8 2803.5315 0.3058 2.595e8 Morton (2003)\n";
  CHECK(dt_atomic_parse(t, txt, strlen(txt), &e) == DT_OK, "two-line table parses");
  const char *same[] = {"NaI", "Na I", "nai", "NAI", " n a i ", "Na\tI"};
  for (size_t i = 0; i < sizeof same / sizeof *same; i++)
    CHECK(dt_atomic_find(t, same[i]) == dt_atomic_get(t, 0), "'%s' finds NaI", same[i]);
  CHECK(dt_atomic_find(t, "Na II") == NULL && dt_atomic_find(t, "Na") == NULL &&
            dt_atomic_find(t, "NaI I") == NULL && dt_atomic_find(t, "") == NULL &&
            dt_atomic_find(t, NULL) == NULL,
        "other names do not");
  CHECK(dt_atomic_find(t, "mg ii") == dt_atomic_get(t, 1), "'mg ii' finds MgII");
  dt_atomic_free(t);
}

static void test_formats(void) {
  dt_atomic *t = dt_atomic_new();
  dt_err e;
  /* weaker line first, CRLF ends, a trailing comment, a long source */
  const char *txt =
      "# a comment\r\n"
      "\r\n"
      "XX  2000.5 0.2 1e8   2010.0 0.4 1e8  Invented (2031), a table of values that never were, compiled for tests, p. 1-99 # note\r\n";
  CHECK(dt_atomic_parse(t, txt, strlen(txt), &e) == DT_OK, "CRLF, comments and blank lines parse (%s)",
        e.what);
  const dt_doublet *d = dt_atomic_find(t, "XX");
  CHECK(d && d->line[0].lambda0 == 2010.0 && d->line[1].lambda0 == 2000.5,
        "the line with larger f*lambda becomes line[0]");
  CHECK(d && strlen(d->source) == sizeof d->source - 1 && strncmp(d->source, "Invented (2031)", 15) == 0,
        "a long source is kept up to %zu characters", sizeof d->source - 1);
  CHECK(d && strchr(d->source, '#') == NULL, "the comment is not part of the source");
  dt_atomic_free(t);
}

static void expect_error(const char *text, int code, const char *where, const char *what) {
  dt_atomic *t = dt_atomic_new();
  const char *good = "NaI 5891.5833 0.6408 6.16e7 5897.5581 0.3201 6.14e7 Morton (2003)\n";
  dt_atomic_parse(t, good, strlen(good), NULL);
  dt_err e;
  int rc = dt_atomic_parse(t, text, strlen(text), &e);
  CHECK(rc == code && strcmp(e.where, where) == 0 && e.code == code,
        "%s: code %d at '%s' (%s)", what, rc, e.where, e.what);
  /* a failed parse leaves the table as it was */
  const dt_doublet *na = dt_atomic_find(t, "NaI");
  CHECK(dt_atomic_count(t) == 1 && na && na->line[0].f == 0.6408, "%s: table unchanged", what);
  dt_atomic_free(t);
}

static void test_malformed(void) {
  const char *ok = "CIV 1548.2040 0.1899 2.642e8 1550.7810 0.09475 2.628e8 Morton (2003)\n";
  char buf[1024];
  snprintf(buf, sizeof buf, "# header\n\n%sNaI 5891.5833 0.6408 6.16e7 5897.5581 0.3201\n", ok);
  expect_error(buf, DT_EFORMAT, "line 4", "too few numbers");
  snprintf(buf, sizeof buf, "%s%sSiIV 1393.76 0.513 8.8e8 1402.77 zero 8.63e8 Morton\n", ok, "\n");
  expect_error(buf, DT_EFORMAT, "line 3", "a word where a number belongs");
  expect_error("NV 1238.821 -0.156 3.4e8 1242.804 0.078 3.37e8 Morton\n", DT_EFORMAT, "line 1",
               "negative oscillator strength");
  expect_error("NV 0 0.156 3.4e8 1242.804 0.078 3.37e8 Morton\n", DT_EFORMAT, "line 1", "zero wavelength");
  expect_error("NV 1238.821 0.156 3.4e8 1242.804 0.078 -1 Morton\n", DT_EFORMAT, "line 1",
               "negative damping constant");
  expect_error("NV 1238.821 0.156 nan 1242.804 0.078 3.37e8 Morton\n", DT_EFORMAT, "line 1", "NaN");
  expect_error("NV 1238.821 0.156 inf 1242.804 0.078 3.37e8 Morton\n", DT_EFORMAT, "line 1", "infinity");
  expect_error("NV 1238.821 0.156 1e999 1242.804 0.078 3.37e8 Morton\n", DT_EFORMAT, "line 1", "overflow");
  expect_error("NV 1238.821 0.156 3.4e8 1242.804 0.078 3.37e8\n", DT_EFORMAT, "line 1", "missing source");
  expect_error("NV 1238.821 0.156 3.4e8 1242.804 0.078 3.37e8   # Morton\n", DT_EFORMAT, "line 1",
               "source only in a comment");
  expect_error("NV 1238.821 0.156 3.4e8 1238.821 0.078 3.37e8 Morton\n", DT_EFORMAT, "line 1",
               "both lines at one wavelength");
  expect_error("AVeryLongDoubletName 1238.821 0.156 3.4e8 1242.804 0.078 3.37e8 Morton\n", DT_EFORMAT,
               "line 1", "name longer than 15 characters");
  snprintf(buf, sizeof buf, "%s# again\n%s", ok, ok);
  expect_error(buf, DT_EFORMAT, "line 3", "a doublet defined twice");
  expect_error("NV 1238.821 0.156 3.4e8x 1242.804 0.078 3.37e8 Morton\n", DT_EFORMAT, "line 1",
               "trailing garbage on a number");
  /* text is counted, not NUL-terminated: a NUL inside a line is an error */
  dt_atomic *t = dt_atomic_new();
  dt_err e;
  const char nul[] = "\nNV 1238.821 0.156 3.4e8 1242.804 0.078 3.37e8 Mor\0ton\n";
  CHECK(dt_atomic_parse(t, nul, sizeof nul - 1, &e) == DT_EFORMAT && strcmp(e.where, "line 2") == 0,
        "a NUL byte inside a line is malformed (%s: %s)", e.where, e.what);
  dt_atomic_free(t);
}

static void test_files(void) {
  dt_atomic *t = NULL;
  dt_err e;
  CHECK(dt_atomic_load("/nonexistent/dir/atomic.dat", &t, &e) == DT_EIO && t == NULL,
        "a missing file is an I/O error: %s", e.what);
  CHECK(dt_atomic_load("/", &t, &e) == DT_EIO, "a directory is an I/O error: %s", e.what);
  const char *only = "# nothing here\n\n";
  const char *p = write_tmp(only, strlen(only));
  CHECK(p && dt_atomic_load(p, &t, &e) == DT_EFORMAT, "a table without doublets is refused: %s", e.what);
  if (p) unlink(p);

  if (dt_atomic_load(table_path(), &t, &e) != DT_OK) {
    CHECK(0, "bundled table loads");
    return;
  }
  size_t n0 = dt_atomic_count(t);
  const char *user = "# my lines\n"
                     "nai 5891.0 0.5 6e7 5897.0 0.25 6e7 my own measurement\n"
                     "FeII 2600.1729 0.2394 2.35e8 2586.6500 0.0691 2.72e8 a user table\n";
  p = write_tmp(user, strlen(user));
  CHECK(p && dt_atomic_merge(t, p, &e) == DT_OK, "a user table merges");
  if (p) unlink(p);
  const dt_doublet *na = dt_atomic_find(t, "NaI");
  CHECK(dt_atomic_count(t) == n0 + 1 && na && na->line[0].lambda0 == 5891.0 &&
            strcmp(na->source, "my own measurement") == 0 && dt_atomic_find(t, "FeII"),
        "the user table replaces NaI by name and adds FeII");
  const char *bad = "OK1 3000 0.2 1e8 3010 0.1 1e8 fine\nBAD 3000 0.2\n";
  p = write_tmp(bad, strlen(bad));
  CHECK(p && dt_atomic_merge(t, p, &e) == DT_EFORMAT && strcmp(e.where, "line 2") == 0,
        "a malformed user table names its line: %s: %s", e.where, e.what);
  if (p) unlink(p);
  CHECK(dt_atomic_count(t) == n0 + 1 && !dt_atomic_find(t, "OK1"), "and adds nothing");
  CHECK(dt_atomic_merge(t, "/nonexistent/user.dat", &e) == DT_EIO, "a missing user table: %s", e.what);
  CHECK(dt_atomic_merge(NULL, "x", &e) == DT_EINVAL && dt_atomic_load(table_path(), NULL, &e) == DT_EINVAL,
        "NULL arguments are refused");
  dt_atomic_free(t);
  dt_atomic_free(NULL);
}

/* The table built into the program is share/doubletty/atomic.dat, byte for
 * byte, and parses to the same doublets. */
static void test_builtin(void) {
  size_t n = 0, blen = 0;
  unsigned char *file = slurp("share/doubletty/atomic.dat", &n);
  const char *b = dt_atomic_builtin_text(&blen);
  CHECK(file && b && n == blen && n > 0 && !memcmp(file, b, n),
        "built-in table = share/doubletty/atomic.dat byte for byte (%zu vs %zu bytes)", blen, n);
  free(file);
  dt_atomic *ft = NULL, *bt = NULL;
  dt_err e;
  int frc = dt_atomic_load("share/doubletty/atomic.dat", &ft, &e);
  int brc = dt_atomic_load_builtin(&bt, &e);
  CHECK(frc == DT_OK && brc == DT_OK, "both load (%s %s)", e.where, e.what);
  int same = ft && bt && dt_atomic_count(ft) == dt_atomic_count(bt) && dt_atomic_count(bt) > 0;
  for (size_t i = 0; same && i < dt_atomic_count(bt); i++) {
    const dt_doublet *x = dt_atomic_get(ft, i), *y = dt_atomic_get(bt, i);
    same = !strcmp(x->name, y->name) && !strcmp(x->source, y->source);
    for (int j = 0; same && j < 2; j++)
      same = x->line[j].lambda0 == y->line[j].lambda0 && x->line[j].f == y->line[j].f &&
             x->line[j].gamma == y->line[j].gamma && !strcmp(x->line[j].label, y->line[j].label);
  }
  CHECK(same, "built-in table parses to the same %zu doublets", dt_atomic_count(bt));
  /* Na I D2 of Morton (2003, ApJS 149, 205): 5891.5833 A, f = 0.6408 */
  const dt_doublet *na = dt_atomic_find(bt, "Na I");
  CHECK(na && na->line[0].lambda0 == 5891.5833 && na->line[0].f == 0.6408, "built-in Na I D2");
  CHECK(dt_atomic_load_builtin(NULL, &e) == DT_EINVAL, "no place for the table: DT_EINVAL");
  dt_atomic_free(ft);
  dt_atomic_free(bt);
}

int main(void) {
  test_builtin();
  test_bundled();
  test_names();
  test_formats();
  test_malformed();
  test_files();
  return dt_test_done();
}
