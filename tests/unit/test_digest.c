/* SHA-256 of buffers and files against the FIPS 180-4 example vectors. */
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>

#include "doubletty/digest.h"
#include "harness.h"

/* NIST FIPS 180-4 examples (csrc.nist.gov "SHA256.pdf", also FIPS 180-2
 * Appendix B): "abc", the 448-bit message, one million 'a'. */
static const char *ABC = "ba7816bf8f01cfea414140de5dae2223b00361a396177a9cb410ff61f20015ad";
static const char *MSG448 = "abcdbcdecdefdefgefghfghighijhijkijkljklmklmnlmnomnopnopq";
static const char *H448 = "248d6a61d20638b8e5c026930c3e6039a33ce45964ff2167f6ecedd419db06c1";
static const char *MILLION = "cdc76e5c9914fb9281a1c7e284d73e67f1809a48a497200e046d39ccc7112cd0";
/* The empty message (NIST example values for SHA-256, "from memory"). */
static const char *EMPTY = "e3b0c44298fc1c149afbf4c8996fb92427ae41e4649b934ca495991b7852b855";

int main(void) {
  char hex[DT_SHA256_HEX];
  CHECK(dt_digest_buffer("abc", 3, hex) == DT_OK && !strcmp(hex, ABC), "SHA-256(\"abc\") (FIPS 180-4)");
  CHECK(dt_digest_buffer(MSG448, strlen(MSG448), hex) == DT_OK && !strcmp(hex, H448),
        "SHA-256 of the 448-bit message (FIPS 180-4)");
  CHECK(dt_digest_buffer("", 0, hex) == DT_OK && !strcmp(hex, EMPTY), "SHA-256 of the empty message");

  /* one million 'a', streamed in uneven pieces */
  char *a = malloc(1000000);
  memset(a, 'a', 1000000);
  dt_digest *d = dt_digest_new();
  size_t off = 0, step = 1;
  while (off < 1000000) {
    size_t n = step < 1000000 - off ? step : 1000000 - off;
    dt_digest_update(d, a + off, n);
    off += n;
    step = step * 3 + 7;
  }
  CHECK(dt_digest_final(d, hex) == DT_OK && !strcmp(hex, MILLION),
        "SHA-256 of one million 'a', streamed (FIPS 180-4)");
  dt_digest_free(d);

  /* the same through a file (several 64 KiB blocks) */
  char path[] = "/tmp/dt-digest-XXXXXX";
  int fd = mkstemp(path);
  CHECK(fd >= 0 && write(fd, a, 1000000) == 1000000, "write a test file");
  close(fd);
  dt_err e;
  CHECK(dt_digest_file(path, hex, &e) == DT_OK && !strcmp(hex, MILLION),
        "file digest of one million 'a' (FIPS 180-4)");
  char sel[64];
  snprintf(sel, sizeof sel, "%s[2]", path);
  CHECK(dt_digest_file(sel, hex, &e) == DT_OK && !strcmp(hex, MILLION),
        "a FITS extension selector is ignored: the file's bytes count");
  unlink(path);
  CHECK(dt_digest_file(path, hex, &e) == DT_EIO && hex[0] == '\0' && strstr(e.what, "cannot open"),
        "a missing file is DT_EIO: %s", e.what);
  CHECK(dt_digest_file("/tmp", hex, &e) == DT_EIO, "a directory is DT_EIO: %s", e.what);
  free(a);

  CHECK(dt_digest_is_hex(ABC), "64 hex digits are a digest");
  CHECK(!dt_digest_is_hex("abc") && !dt_digest_is_hex(NULL), "short text is not a digest");
  char up[DT_SHA256_HEX];
  strcpy(up, ABC);
  up[0] = 'B';
  CHECK(!dt_digest_is_hex(up), "upper-case hex is not our digest form");
  return dt_test_done();
}
