/* UTF-8 decoding, encoding and stepping (include/doubletty/utf8.h).
 *
 * Vectors from The Unicode Standard, chapter 3:
 *   Table 3-7  "Well-Formed UTF-8 Byte Sequences": the first and last code
 *              point of each row, and the byte just outside each row's
 *              second-byte range (overlong forms, surrogates, > U+10FFFF).
 *   Table 3-8  "Use of U+FFFD in UTF-8 Conversion" (section 3.9): the bytes
 *              61 F1 80 80 E1 80 C2 62 80 63 80 BF 64 become
 *              0061 FFFD FFFD FFFD 0062 FFFD 0063 FFFD FFFD 0064, i.e. the
 *              maximal subparts F1 80 80 | E1 80 | C2 | 80 | 80 | BF. */
#include <stdint.h>
#include <string.h>

#include "harness.h"
#include "doubletty/utf8.h"

typedef struct vec {
  const char *bytes;
  size_t len;
  uint32_t cp; /* DT_UTF8_BAD: ill-formed */
  size_t used; /* bytes the decoder consumes */
  const char *what;
} vec;

static const vec table37[] = {
    /* Table 3-7, row by row: first and last code point */
    {"\x00", 1, 0x0000, 1, "U+0000 (row 1: 00..7F)"},
    {"\x7F", 1, 0x007F, 1, "U+007F (row 1)"},
    {"\xC2\x80", 2, 0x0080, 2, "U+0080 (row 2: C2..DF 80..BF)"},
    {"\xDF\xBF", 2, 0x07FF, 2, "U+07FF (row 2)"},
    {"\xE0\xA0\x80", 3, 0x0800, 3, "U+0800 (row 3: E0 A0..BF 80..BF)"},
    {"\xE0\xBF\xBF", 3, 0x0FFF, 3, "U+0FFF (row 3)"},
    {"\xE1\x80\x80", 3, 0x1000, 3, "U+1000 (row 4: E1..EC)"},
    {"\xEC\xBF\xBF", 3, 0xCFFF, 3, "U+CFFF (row 4)"},
    {"\xED\x80\x80", 3, 0xD000, 3, "U+D000 (row 5: ED 80..9F)"},
    {"\xED\x9F\xBF", 3, 0xD7FF, 3, "U+D7FF (row 5)"},
    {"\xEE\x80\x80", 3, 0xE000, 3, "U+E000 (row 6: EE..EF)"},
    {"\xEF\xBF\xBF", 3, 0xFFFF, 3, "U+FFFF (row 6)"},
    {"\xF0\x90\x80\x80", 4, 0x10000, 4, "U+10000 (row 7: F0 90..BF)"},
    {"\xF0\xBF\xBF\xBF", 4, 0x3FFFF, 4, "U+3FFFF (row 7)"},
    {"\xF1\x80\x80\x80", 4, 0x40000, 4, "U+40000 (row 8: F1..F3)"},
    {"\xF3\xBF\xBF\xBF", 4, 0xFFFFF, 4, "U+FFFFF (row 8)"},
    {"\xF4\x80\x80\x80", 4, 0x100000, 4, "U+100000 (row 9: F4 80..8F)"},
    {"\xF4\x8F\xBF\xBF", 4, 0x10FFFF, 4, "U+10FFFF (row 9)"},
    /* just outside the rows: ill-formed */
    {"\xC0\x80", 2, DT_UTF8_BAD, 1, "C0 80: overlong U+0000 (C0 is no lead byte)"},
    {"\xC1\xBF", 2, DT_UTF8_BAD, 1, "C1 BF: overlong U+007F"},
    {"\xE0\x9F\xBF", 3, DT_UTF8_BAD, 1, "E0 9F BF: overlong U+07FF (second byte below A0)"},
    {"\xED\xA0\x80", 3, DT_UTF8_BAD, 1, "ED A0 80: surrogate U+D800"},
    {"\xED\xBF\xBF", 3, DT_UTF8_BAD, 1, "ED BF BF: surrogate U+DFFF"},
    {"\xF0\x8F\xBF\xBF", 4, DT_UTF8_BAD, 1, "F0 8F BF BF: overlong U+FFFF"},
    {"\xF4\x90\x80\x80", 4, DT_UTF8_BAD, 1, "F4 90 80 80: U+110000, above U+10FFFF"},
    {"\xF5\x80\x80\x80", 4, DT_UTF8_BAD, 1, "F5: no lead byte"},
    {"\xFF", 1, DT_UTF8_BAD, 1, "FF: no lead byte"},
    {"\x80", 1, DT_UTF8_BAD, 1, "80: a lone continuation byte"},
    {"\xE2\x82", 2, DT_UTF8_BAD, 2, "E2 82: truncated (maximal subpart of 2)"},
    {"\xF0\x9F\x98", 3, DT_UTF8_BAD, 3, "F0 9F 98: truncated (maximal subpart of 3)"},
    {"\xC3\x41", 2, DT_UTF8_BAD, 1, "C3 41: lead byte then ASCII"},
};

static void test_decode(void) {
  for (size_t i = 0; i < sizeof table37 / sizeof table37[0]; i++) {
    const vec *t = &table37[i];
    uint32_t cp = 0;
    size_t k = dt_utf8_decode(t->bytes, t->len, &cp);
    CHECK(cp == t->cp && k == t->used, "decode %s", t->what);
    if (cp != t->cp || k != t->used) printf("       got U+%04X in %zu bytes\n", (unsigned)cp, k);
  }
}

static void test_encode(void) {
  for (size_t i = 0; i < sizeof table37 / sizeof table37[0]; i++) {
    const vec *t = &table37[i];
    if (t->cp == DT_UTF8_BAD) continue;
    char out[DT_UTF8_MAX];
    size_t k = dt_utf8_encode(t->cp, out);
    CHECK(k == t->len && !memcmp(out, t->bytes, k), "encode %s", t->what);
  }
  char out[DT_UTF8_MAX];
  CHECK(dt_utf8_encode(0xD800, out) == 0 && dt_utf8_encode(0xDFFF, out) == 0, "surrogates are not encoded");
  CHECK(dt_utf8_encode(0x110000, out) == 0, "U+110000 is not encoded");
  CHECK(dt_utf8_encode(0x20AC, out) == 3 && !memcmp(out, "\xE2\x82\xAC", 3), "U+20AC EURO SIGN is E2 82 AC");
}

/* Table 3-8: the decoder's units over the example string. */
static void test_maximal_subparts(void) {
  static const char s[] = "\x61\xF1\x80\x80\xE1\x80\xC2\x62\x80\x63\x80\xBF\x64";
  static const uint32_t want_cp[] = {0x61, DT_UTF8_BAD, DT_UTF8_BAD, DT_UTF8_BAD, 0x62, DT_UTF8_BAD,
                                     0x63, DT_UTF8_BAD, DT_UTF8_BAD, 0x64};
  static const size_t want_len[] = {1, 3, 2, 1, 1, 1, 1, 1, 1, 1};
  size_t len = sizeof s - 1, p = 0, n = 0, ok = 1;
  size_t starts[16];
  while (p < len && n < 10) {
    uint32_t cp;
    size_t k = dt_utf8_decode(s + p, len - p, &cp);
    if (cp != want_cp[n] || k != want_len[n]) ok = 0;
    starts[n++] = p;
    p += k;
  }
  CHECK(ok && n == 10 && p == len, "Table 3-8: 13 bytes decode as 0061 FFFD FFFD FFFD 0062 FFFD 0063 FFFD FFFD 0064");
  CHECK(dt_utf8_count(s) == 10, "Table 3-8: ten units counted");
  /* stepping back visits the same boundaries in reverse */
  int back_ok = 1;
  p = len;
  for (size_t i = n; i-- > 0;) {
    p = dt_utf8_prev(s, len, p);
    if (p != starts[i]) back_ok = 0;
  }
  CHECK(back_ok && p == 0, "stepping back over Table 3-8 lands on the forward boundaries");
  CHECK(!dt_utf8_valid(s, len), "Table 3-8 example is not well-formed");
}

static void test_stepping(void) {
  /* "a", U+00B1, U+20AC, U+1F600, "z" */
  static const char s[] = "a\xC2\xB1\xE2\x82\xAC\xF0\x9F\x98\x80z";
  size_t len = sizeof s - 1;
  static const size_t b[] = {0, 1, 3, 6, 10, 11};
  int ok = 1;
  for (int i = 0; i < 5; i++) {
    if (dt_utf8_next(s, len, b[i]) != b[i + 1]) ok = 0;
    if (dt_utf8_prev(s, len, b[i + 1]) != b[i]) ok = 0;
  }
  CHECK(ok, "next/prev step over 1-, 2-, 3- and 4-byte code points");
  CHECK(dt_utf8_next(s, len, len) == len && dt_utf8_prev(s, len, 0) == 0, "stepping stops at both ends");
  CHECK(dt_utf8_count(s) == 5 && dt_utf8_valid(s, len), "five code points, well-formed");
  CHECK(dt_utf8_count("") == 0, "empty string: no units");
  /* a broken tail: "x" then a truncated 3-byte sequence */
  static const char t[] = "x\xE2\x82";
  CHECK(dt_utf8_prev(t, 3, 3) == 1 && dt_utf8_next(t, 3, 1) == 3, "a truncated tail is one unit both ways");
}

static void test_control(void) {
  CHECK(dt_utf8_is_control(0x1B) && dt_utf8_is_control(0x7F), "ESC and DEL are controls");
  CHECK(dt_utf8_is_control(0x9B) && dt_utf8_is_control(0x85), "C1 controls (CSI U+009B, NEL U+0085) are controls");
  CHECK(!dt_utf8_is_control(0xA0) && !dt_utf8_is_control(' ') && !dt_utf8_is_control(0xB1), "U+00A0, space, U+00B1 print");
  CHECK(dt_utf8_is_control(DT_UTF8_BAD), "an ill-formed unit never reaches the terminal");
}

int main(void) {
  test_decode();
  test_encode();
  test_maximal_subparts();
  test_stepping();
  test_control();
  return dt_test_done();
}
