/* Damaged FITS files found by fuzzing the spectrum reader, kept as tests.
 *
 * Each file is made here: a valid file written with cfitsio, then the one
 * card or the few bytes the fuzzer changed.  Every one must give a clear
 * error naming the HDU -- no abort, no read outside the bytes given, no
 * allocation sized by a damaged number -- from a file and from memory.
 *
 *  1. TTYPEn whose value is not a quoted string, 70 characters or more:
 *     cfitsio 4.2 copies it into a 70-byte field and the C library aborts
 *     the program ("buffer overflow detected").  The FITS Standard (4.0)
 *     makes TTYPEn a character string.
 *  2. TFIELDS = 88888888: cfitsio takes memory for that many columns (14 GB).
 *     The FITS Standard limits TFIELDS to 0..999.
 *  3. A variable-length array descriptor claiming 538976288 elements: the
 *     reader took memory for that many pixels before cfitsio failed to read
 *     them.
 *  4. Bytes in memory that are not a whole number of 2880-byte blocks:
 *     cfitsio's memory driver reads the data in whole blocks, past the end
 *     of the bytes.  The bytes here end just before a page that may not be
 *     read, so a read beyond them stops the test even without a sanitizer.
 *     (Found with the memory reader; a file on disk cut the same way gives
 *     the same errors.)
 *  5. A second NAXIS card with the value 1.0E+30: the check that an HDU's
 *     data are all in the file converted it to an int, which is undefined
 *     behaviour in C (the sanitizer build, make sanitize, stops on it). */
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/mman.h>
#include <unistd.h>

#include <fitsio.h>

#include "doubletty/spectrum.h"
#include "fixtures.h"
#include "harness.h"

#define NPIX 24

static char dir[64];
static char path[128];

/* A binary table with one spectrum in scalar columns WAVE, FLUX, IVAR
 * (vla = 0) or in variable-length array columns (vla = 1). */
static unsigned char *table_bytes(int vla, size_t *len) {
  fitsfile *f;
  int st = 0;
  char *ttype[] = {"WAVE", "FLUX", "IVAR"};
  char *tf_scalar[] = {"1D", "1E", "1E"}, *tf_vla[] = {"1PD(24)", "1PE(24)", "1PE(24)"};
  char *tunit[] = {"Angstrom", "", ""};
  remove(path);
  fits_create_file(&f, path, &st);
  fits_create_tbl(f, BINARY_TBL, vla ? 1 : NPIX, 3, ttype, vla ? tf_vla : tf_scalar, tunit,
                  "SPEC", &st);
  double w[NPIX];
  float fl[NPIX], iv[NPIX];
  for (int i = 0; i < NPIX; i++) {
    w[i] = 5880.0 + 0.5 * i;
    fl[i] = 1.0f;
    iv[i] = 400.0f;
  }
  if (vla) {
    fits_write_col(f, TDOUBLE, 1, 1, 1, NPIX, w, &st);
    fits_write_col(f, TFLOAT, 2, 1, 1, NPIX, fl, &st);
    fits_write_col(f, TFLOAT, 3, 1, 1, NPIX, iv, &st);
  } else {
    for (int i = 0; i < NPIX; i++) {
      fits_write_col(f, TDOUBLE, 1, i + 1, 1, 1, &w[i], &st);
      fits_write_col(f, TFLOAT, 2, i + 1, 1, 1, &fl[i], &st);
      fits_write_col(f, TFLOAT, 3, i + 1, 1, 1, &iv[i], &st);
    }
  }
  fits_close_file(f, &st);
  if (st) return NULL;
  return slurp(path, len);
}

/* Offset of the 80-byte card starting with key (padded to 8), or -1. */
static long card_at(const unsigned char *b, size_t len, const char *key) {
  char k[9];
  snprintf(k, sizeof k, "%-8s", key);
  for (size_t i = 0; i + 80 <= len; i += 80)
    if (!memcmp(b + i, k, 8)) return (long)i;
  return -1;
}

static void set_card(unsigned char *b, long at, const char *text) {
  memset(b + at, ' ', 80);
  memcpy(b + at, text, strlen(text) < 80 ? strlen(text) : 80);
}

/* Read the bytes from a file and from memory: both must fail with code,
 * in HDU `where`, with `what` in the message. */
static void expect_error(const char *label, const unsigned char *b, size_t len, int code,
                         const char *where, const char *what) {
  spit(path, b, len);
  for (int mem = 0; mem < 2; mem++) {
    dt_spectrum *s = NULL;
    dt_err e;
    int rc = mem ? dt_spectrum_read_mem(b, len, NULL, &s, &e) : dt_spectrum_read(path, NULL, &s, &e);
    CHECK(rc == code && !s && !strcmp(e.where, where) && strstr(e.what, what),
          "%s (%s): %s: %s", label, mem ? "memory" : "file", e.where, e.what);
    dt_spectrum_free(s);
  }
}

static void test_ttype(void) {
  size_t len = 0;
  unsigned char *b = table_bytes(0, &len);
  CHECK(b != NULL, "table written");
  if (!b) return;
  long at = card_at(b, len, "TTYPE1");
  char card[81];
  /* the fuzzer's card: 70 bytes that are not a quoted string */
  memcpy(card, "TTYPE1  = ", 10);
  memset(card + 10, 'W', 70);
  card[80] = '\0';
  set_card(b, at, card);
  expect_error("unquoted TTYPE1 of 70 characters", b, len, DT_EFORMAT, "HDU 2", "TTYPE1");
  memset(card + 10, '7', 70); /* a number is no string either */
  set_card(b, at, card);
  expect_error("TTYPE1 a number of 70 digits", b, len, DT_EFORMAT, "HDU 2", "TTYPE1");
  memcpy(card, "TTYPE1  =", 9); /* no blank after the '=' */
  memset(card + 9, 'W', 71);
  set_card(b, at, card);
  expect_error("unquoted TTYPE1 right after '='", b, len, DT_EFORMAT, "HDU 2", "TTYPE1");
  /* a quoted name of 66 characters is legal: no complaint about TTYPE1 */
  snprintf(card, sizeof card, "TTYPE1  = '%.66s'", "WWWWWWWWWWWWWWWWWWWWWWWWWWWWWWWWWWWWWWWWWWWWWWWWWWWWWWWWWWWWWWWWWW");
  set_card(b, at, card);
  expect_error("quoted TTYPE1 of 66 characters (legal; not the wavelength)", b, len, DT_ENOWCS,
               "HDU 2", "no wavelength column");
  /* and the unchanged card reads */
  set_card(b, at, "TTYPE1  = 'WAVE    '");
  dt_spectrum *s = NULL;
  dt_err e;
  CHECK(dt_spectrum_read_mem(b, len, NULL, &s, &e) == DT_OK && s && s->n == NPIX,
        "the same table with TTYPE1 = 'WAVE' reads");
  dt_spectrum_free(s);
  free(b);
}

static void test_tfields(void) {
  size_t len = 0;
  unsigned char *b = table_bytes(0, &len);
  if (!b) return;
  long at = card_at(b, len, "TFIELDS");
  set_card(b, at, "TFIELDS =           88888888         4 / number of table fields");
  expect_error("TFIELDS = 88888888", b, len, DT_EFORMAT, "HDU 2", "TFIELDS");
  set_card(b, at, "TFIELDS =                 1000");
  expect_error("TFIELDS = 1000", b, len, DT_EFORMAT, "HDU 2", "TFIELDS");
  free(b);
}

static void test_vla_length(void) {
  size_t len = 0;
  unsigned char *b = table_bytes(1, &len);
  CHECK(b != NULL, "table of variable-length arrays written");
  if (!b) return;
  dt_spectrum *s = NULL;
  dt_err e;
  CHECK(dt_spectrum_read_mem(b, len, NULL, &s, &e) == DT_OK && s && s->n == NPIX,
        "it reads as written");
  dt_spectrum_free(s);
  /* the data of HDU 2 start after two blocks of header; each row starts with
   * the descriptors (count, offset) of its three arrays, 32-bit big-endian
   * integers ('P' arrays, FITS Standard 4.0): all three counts become
   * 0x20202020 = 538976288 */
  for (int c = 0; c < 3; c++) memset(b + 2 * 2880 + 8 * c, 0x20, 4);
  expect_error("array descriptors claiming 538976288 values", b, len, DT_EFORMAT, "HDU 2, row 1",
               "cannot fit");
  free(b);
}

static void test_partial_block(void) {
  size_t len = 0;
  unsigned char *b = table_bytes(0, &len);
  if (!b) return;
  long page = sysconf(_SC_PAGESIZE);
  size_t need = ((len + (size_t)page - 1) / (size_t)page + 1) * (size_t)page;
  unsigned char *m = mmap(NULL, need, PROT_READ | PROT_WRITE, MAP_PRIVATE | MAP_ANONYMOUS, -1, 0);
  CHECK(m != MAP_FAILED, "memory with an unreadable page after it");
  if (m == MAP_FAILED) {
    free(b);
    return;
  }
  unsigned char *guard = m + need - (size_t)page;
  mprotect(guard, (size_t)page, PROT_NONE);
  /* cut inside the data (24 rows of 16 bytes from byte 5760 on), inside
   * the padding of their last block, inside the table header and inside
   * the primary header: the bytes always end right at the unreadable page */
  const size_t cuts[] = {2 * 2880 + 200, 2 * 2880 + 24 * 16 + 100, 2880 + 1000, 500};
  const char *where[] = {"HDU 2", "HDU 2", "HDU 2", "HDU 1"};
  for (size_t k = 0; k < 4; k++) {
    unsigned char *p = guard - cuts[k];
    memcpy(p, b, cuts[k]);
    dt_spectrum *s = NULL;
    dt_err e;
    int rc = dt_spectrum_read_mem(p, cuts[k], NULL, &s, &e);
    CHECK(rc == DT_EFORMAT && !s && !strcmp(e.where, where[k]) && strstr(e.what, "truncated"),
          "%zu of %zu bytes from memory: %s: %s", cuts[k], len, e.where, e.what);
    dt_spectrum_free(s);
  }
  munmap(m, need);
  free(b);
}

/* The fuzzer's file: an image extension whose header repeats BITPIX (not
 * a number) and NAXIS (1.0E+30) after its other cards, its data cut short.
 * The cards are the fuzzer's, blanks aside. */
static void test_second_naxis(void) {
  static const char *const cards[] = {
      "SIMPLE  =                    T / conforms to FITS standard",
      "BITPIX  =                    8 / array data type",
      "NAXIS   =                    0 / number of array dimensions",
      "EXTEND  =                    T",
      "END",
      NULL,
      "XTENSION= 'IMAGE   '           / Image extension                 'F20.3   '",
      "BITPIX  =                  -32 / array data type",
      "NAXIS   =                    2 / number of array dimensions",
      "NAXIS1  =                   24",
      "NAXIS2  =                    1",
      "PCOUNT  =                    0 / number of parameters",
      "GCOUNT  =                    1 / number of groups",
      "EXTNAME = 'SPECTRUM'           / extension name",
      "CRVAL1  =               5880.0",
      "PC1_1   =                  0.5",
      "AIRORVAC= 'vac     '",
      "RESOLUTN=               3000.0",
      "SIMPLE  =                    T / conforms to FITS standard",
      "BITPIX  =                   \xe9" "8 / array data type",
      "NAXIS   =                       1.0E+30 of array dimensions",
      "EXTEND  =                    T",
      "END                                    END",
      NULL};
  size_t len = 2 * 2880 + 26;
  unsigned char *b = malloc(len);
  memset(b, ' ', len);
  long at = 0;
  for (size_t k = 0; k < sizeof cards / sizeof cards[0]; k++) {
    if (!cards[k]) { /* the header's end: on to the next block */
      at = (at + 2879) / 2880 * 2880;
      continue;
    }
    set_card(b, at, cards[k]);
    at += 80;
  }
  spit(path, b, len);
  for (int mem = 0; mem < 2; mem++) {
    dt_spectrum *s = NULL;
    dt_err e;
    int rc = mem ? dt_spectrum_read_mem(b, len, NULL, &s, &e) : dt_spectrum_read(path, NULL, &s, &e);
    CHECK(rc != DT_OK && !s && !strcmp(e.where, "HDU 2") && e.what[0],
          "a second BITPIX and NAXIS = 1.0E+30 (%s): %s: %s", mem ? "memory" : "file", e.where,
          e.what);
    dt_spectrum_free(s);
  }
  free(b);
}

int main(void) {
  snprintf(dir, sizeof dir, "/tmp/dt-regress-fits.XXXXXX");
  if (!mkdtemp(dir)) return 1;
  snprintf(path, sizeof path, "%s/t.fits", dir);
  test_ttype();
  test_tfields();
  test_vla_length();
  test_partial_block();
  test_second_naxis();
  remove(path);
  rmdir(dir);
  return dt_test_done();
}
