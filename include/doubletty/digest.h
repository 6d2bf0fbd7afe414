/* SHA-256 digests of files and buffers (FIPS 180-4), through libcrypto's EVP
 * interface.  The session file records the digest of every judged input file
 * so that a later change to the file is noticed; export records the digest of
 * the session file itself.  Digests are handled as 64 lower-case hex digits. */
#ifndef DOUBLETTY_DIGEST_H
#define DOUBLETTY_DIGEST_H
#include <stddef.h>
#include "doubletty/status.h"

#define DT_SHA256_HEX 65   /* 64 hex digits and the terminating NUL */

/* Streaming digest: new, update any number of times, final, free. */
typedef struct dt_digest dt_digest;
dt_digest *dt_digest_new(void);                       /* NULL: out of memory */
int dt_digest_update(dt_digest *d, const void *p, size_t n);   /* DT_OK / DT_EIO */
int dt_digest_final(dt_digest *d, char hex[DT_SHA256_HEX]);    /* DT_OK / DT_EIO */
void dt_digest_free(dt_digest *d);

/* Digest of n bytes in memory. */
int dt_digest_buffer(const void *p, size_t n, char hex[DT_SHA256_HEX]);

/* Digest of a file's bytes, read in blocks (any size).  A trailing FITS
 * extension selector ("file.fits[2]", "file.fits[SCI]") is ignored when the
 * path as given does not exist but the path without it does.
 * DT_EIO with e filled when the file cannot be read. */
int dt_digest_file(const char *path, char hex[DT_SHA256_HEX], dt_err *e);

/* 1 when s is exactly 64 hex digits. */
int dt_digest_is_hex(const char *s);

#endif
