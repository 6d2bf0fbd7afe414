/* UTF-8 decoding, encoding and stepping (see utf8.h).
 *
 * The decoder walks Table 3-7 of the Unicode Standard: the lead byte fixes
 * the length and the allowed range of the second byte (which is what rules
 * out overlong forms, surrogates and values above U+10FFFF); the later
 * bytes are plain continuation bytes 80..BF.  It stops at the first byte
 * that cannot continue, which makes the consumed bytes the maximal subpart
 * of an ill-formed sequence. */
#include "doubletty/utf8.h"

#include <string.h>

/* Length of the sequence a lead byte starts and the range of its second
 * byte (Table 3-7); len 0: not a lead byte (C0, C1, F5..FF, or 80..BF). */
static int lead(unsigned char c, unsigned char *lo, unsigned char *hi) {
  *lo = 0x80;
  *hi = 0xBF;
  if (c < 0x80) return 1;
  if (c >= 0xC2 && c <= 0xDF) return 2;
  if (c == 0xE0) { *lo = 0xA0; return 3; }
  if (c >= 0xE1 && c <= 0xEC) return 3;
  if (c == 0xED) { *hi = 0x9F; return 3; }
  if (c >= 0xEE && c <= 0xEF) return 3;
  if (c == 0xF0) { *lo = 0x90; return 4; }
  if (c >= 0xF1 && c <= 0xF3) return 4;
  if (c == 0xF4) { *hi = 0x8F; return 4; }
  return 0;
}

size_t dt_utf8_decode(const char *s, size_t n, uint32_t *cp) {
  uint32_t dummy;
  if (!cp) cp = &dummy;
  if (n == 0) {
    *cp = DT_UTF8_BAD;
    return 0;
  }
  const unsigned char *u = (const unsigned char *)s;
  unsigned char lo, hi;
  int k = lead(u[0], &lo, &hi);
  if (k == 0) {
    *cp = DT_UTF8_BAD;
    return 1;
  }
  if (k == 1) {
    *cp = u[0];
    return 1;
  }
  uint32_t v = u[0] & (0x7Fu >> k);
  for (int i = 1; i < k; i++) {
    if ((size_t)i >= n || u[i] < lo || u[i] > hi) {
      *cp = DT_UTF8_BAD;
      return (size_t)i; /* the maximal subpart ends before this byte */
    }
    v = (v << 6) | (u[i] & 0x3Fu);
    lo = 0x80;
    hi = 0xBF;
  }
  *cp = v;
  return (size_t)k;
}

size_t dt_utf8_encode(uint32_t cp, char out[DT_UTF8_MAX]) {
  if (cp < 0x80) {
    out[0] = (char)cp;
    return 1;
  }
  if (cp < 0x800) {
    out[0] = (char)(0xC0 | (cp >> 6));
    out[1] = (char)(0x80 | (cp & 0x3F));
    return 2;
  }
  if (cp >= 0xD800 && cp <= 0xDFFF) return 0;
  if (cp < 0x10000) {
    out[0] = (char)(0xE0 | (cp >> 12));
    out[1] = (char)(0x80 | ((cp >> 6) & 0x3F));
    out[2] = (char)(0x80 | (cp & 0x3F));
    return 3;
  }
  if (cp > 0x10FFFF) return 0;
  out[0] = (char)(0xF0 | (cp >> 18));
  out[1] = (char)(0x80 | ((cp >> 12) & 0x3F));
  out[2] = (char)(0x80 | ((cp >> 6) & 0x3F));
  out[3] = (char)(0x80 | (cp & 0x3F));
  return 4;
}

size_t dt_utf8_next(const char *s, size_t len, size_t pos) {
  if (pos >= len) return len;
  return pos + dt_utf8_decode(s + pos, len - pos, NULL);
}

/* Backwards: a unit is at most 4 bytes, so try the starts pos-4 .. pos-1
 * (the furthest first) and keep the one whose unit ends exactly at pos.
 * Decoding forward from a unit boundary always lands on pos again; the
 * furthest start that does is the unit, since a valid longer sequence
 * cannot contain a shorter unit's boundary. */
size_t dt_utf8_prev(const char *s, size_t len, size_t pos) {
  if (pos == 0) return 0;
  if (pos > len) pos = len;
  for (size_t back = pos < DT_UTF8_MAX ? pos : DT_UTF8_MAX; back > 1; back--) {
    size_t start = pos - back;
    unsigned char c = (unsigned char)s[start];
    if (c >= 0x80 && c <= 0xBF) continue; /* a continuation byte starts no unit */
    if (dt_utf8_decode(s + start, len - start, NULL) == back) return start;
  }
  return pos - 1;
}

size_t dt_utf8_count(const char *s) {
  size_t n = 0, len = strlen(s);
  for (size_t p = 0; p < len; p = dt_utf8_next(s, len, p)) n++;
  return n;
}

int dt_utf8_valid(const char *s, size_t n) {
  size_t p = 0;
  while (p < n) {
    uint32_t cp;
    p += dt_utf8_decode(s + p, n - p, &cp);
    if (cp == DT_UTF8_BAD) return 0;
  }
  return 1;
}

int dt_utf8_is_control(uint32_t cp) { return cp < 0x20 || (cp >= 0x7F && cp <= 0x9F) || cp == DT_UTF8_BAD; }
