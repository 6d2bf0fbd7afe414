/* UTF-8: the one place where code points meet bytes.
 *
 * Decoding follows the Unicode Standard, chapter 3 (D92 and Table 3-7,
 * "Well-Formed UTF-8 Byte Sequences"): overlong forms, surrogates
 * (U+D800..U+DFFF) and values above U+10FFFF are ill-formed.  An ill-formed
 * sequence is consumed as its "maximal subpart" (section 3.9, "U+FFFD
 * Substitution of Maximal Subparts"), so every byte of a string belongs to
 * exactly one unit -- a code point or one piece of garbage -- and stepping
 * forward and back over a string agree.  Nothing here depends on the locale.
 */
#ifndef DOUBLETTY_UTF8_H
#define DOUBLETTY_UTF8_H
#include <stddef.h>
#include <stdint.h>

#define DT_UTF8_BAD 0xFFFFFFFFu /* code point of an ill-formed unit */
#define DT_UTF8_MAX 4           /* bytes of the longest sequence */

/* Decode the unit at s (at most n bytes; n == 0 reads nothing).
 * Returns the bytes of the unit (1..4; 0 when n == 0) and sets *cp to the
 * code point, or to DT_UTF8_BAD for an ill-formed maximal subpart.  A NUL
 * byte is the code point 0 of length 1. */
size_t dt_utf8_decode(const char *s, size_t n, uint32_t *cp);

/* Encode cp into out (no NUL added).  Returns its length 1..4, or 0 for a
 * surrogate or a value above U+10FFFF (nothing written). */
size_t dt_utf8_encode(uint32_t cp, char out[DT_UTF8_MAX]);

/* Offset of the unit after the one at pos (len when pos >= len) ... */
size_t dt_utf8_next(const char *s, size_t len, size_t pos);
/* ... and of the unit that ends at pos (0 when pos == 0).  For any unit
 * boundary p, dt_utf8_next(s, len, dt_utf8_prev(s, len, p)) == p. */
size_t dt_utf8_prev(const char *s, size_t len, size_t pos);

/* Units (code points, each ill-formed piece counting one) of the
 * NUL-terminated string s. */
size_t dt_utf8_count(const char *s);

/* 1 when the n bytes at s are well-formed UTF-8 throughout. */
int dt_utf8_valid(const char *s, size_t n);

/* 1 for a code point that must not reach a terminal: C0 and C1 controls and
 * DEL (U+0000..U+001F, U+007F..U+009F), and DT_UTF8_BAD. */
int dt_utf8_is_control(uint32_t cp);

#endif
