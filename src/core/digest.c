/* SHA-256 digests through OpenSSL's EVP interface.
 *
 * Files are read in 64 KiB blocks, so a spectrum of any size is digested in
 * constant memory.  The hex form (64 lower-case digits) is what the session
 * file and the export headers record. */
#include "doubletty/digest.h"

#include <errno.h>
#include <openssl/evp.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>

struct dt_digest {
  EVP_MD_CTX *ctx;
  int failed;
};

dt_digest *dt_digest_new(void) {
  dt_digest *d = calloc(1, sizeof *d);
  if (!d) return NULL;
  d->ctx = EVP_MD_CTX_new();
  if (!d->ctx || EVP_DigestInit_ex(d->ctx, EVP_sha256(), NULL) != 1) {
    EVP_MD_CTX_free(d->ctx);
    free(d);
    return NULL;
  }
  return d;
}

int dt_digest_update(dt_digest *d, const void *p, size_t n) {
  if (d->failed) return DT_EIO;
  if (n && EVP_DigestUpdate(d->ctx, p, n) != 1) d->failed = 1;
  return d->failed ? DT_EIO : DT_OK;
}

static void to_hex(const unsigned char *md, unsigned n, char *hex) {
  static const char digits[] = "0123456789abcdef";
  for (unsigned i = 0; i < n; i++) {
    hex[2 * i] = digits[md[i] >> 4];
    hex[2 * i + 1] = digits[md[i] & 15];
  }
  hex[2 * n] = '\0';
}

int dt_digest_final(dt_digest *d, char hex[DT_SHA256_HEX]) {
  unsigned char md[EVP_MAX_MD_SIZE];
  unsigned n = 0;
  hex[0] = '\0';
  if (d->failed || EVP_DigestFinal_ex(d->ctx, md, &n) != 1 || n != 32) {
    d->failed = 1;
    return DT_EIO;
  }
  to_hex(md, n, hex);
  return DT_OK;
}

void dt_digest_free(dt_digest *d) {
  if (!d) return;
  EVP_MD_CTX_free(d->ctx);
  free(d);
}

int dt_digest_buffer(const void *p, size_t n, char hex[DT_SHA256_HEX]) {
  dt_digest *d = dt_digest_new();
  if (!d) {
    hex[0] = '\0';
    return DT_ENOMEM;
  }
  int rc = dt_digest_update(d, p, n);
  if (rc == DT_OK) rc = dt_digest_final(d, hex);
  dt_digest_free(d);
  return rc;
}

/* The file a spectrum path refers to: the path itself, or, when that does
 * not exist, the path without a trailing "[...]" extension selector. */
static FILE *open_spectrum_file(const char *path, int *err) {
  FILE *f = fopen(path, "rb");
  if (f) return f;
  *err = errno;
  size_t n = strlen(path);
  if (n > 2 && path[n - 1] == ']') {
    const char *lb = strrchr(path, '[');
    if (lb && lb > path) {
      size_t m = (size_t)(lb - path);
      char *base = malloc(m + 1);
      if (!base) return NULL;
      memcpy(base, path, m);
      base[m] = '\0';
      f = fopen(base, "rb");
      free(base);
    }
  }
  return f;
}

int dt_digest_file(const char *path, char hex[DT_SHA256_HEX], dt_err *e) {
  hex[0] = '\0';
  int err = 0;
  FILE *f = open_spectrum_file(path, &err);
  if (!f) return dt_err_set(e, DT_EIO, NULL, "cannot open for reading: %s", strerror(err));
  struct stat st;
  if (fstat(fileno(f), &st) == 0 && S_ISDIR(st.st_mode)) {
    fclose(f);
    return dt_err_set(e, DT_EIO, NULL, "is a directory, not a file");
  }
  dt_digest *d = dt_digest_new();
  if (!d) {
    fclose(f);
    return dt_err_set(e, DT_ENOMEM, NULL, "out of memory");
  }
  static const size_t block = 65536;
  unsigned char *buf = malloc(block);
  if (!buf) {
    dt_digest_free(d);
    fclose(f);
    return dt_err_set(e, DT_ENOMEM, NULL, "out of memory");
  }
  int rc = DT_OK;
  for (;;) {
    size_t n = fread(buf, 1, block, f);
    if (n > 0 && dt_digest_update(d, buf, n) != DT_OK) {
      rc = dt_err_set(e, DT_EIO, NULL, "SHA-256 computation failed");
      break;
    }
    if (n < block) {
      if (ferror(f)) rc = dt_err_set(e, DT_EIO, NULL, "read error: %s", strerror(errno));
      break;
    }
  }
  if (rc == DT_OK && dt_digest_final(d, hex) != DT_OK)
    rc = dt_err_set(e, DT_EIO, NULL, "SHA-256 computation failed");
  free(buf);
  dt_digest_free(d);
  fclose(f);
  return rc;
}

int dt_digest_is_hex(const char *s) {
  if (!s) return 0;
  size_t i = 0;
  for (; s[i]; i++)
    if (!((s[i] >= '0' && s[i] <= '9') || (s[i] >= 'a' && s[i] <= 'f'))) return 0;
  return i == 64;
}
