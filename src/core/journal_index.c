/* Finding a spectrum's record in a session: identity and path hints.
 *
 * A spectrum is identified by what it is, not where it lies: the SHA-256 of
 * its file's bytes, the HDU and table row, and the doublet it is vetted for
 * (the "#NAME" after the file name of the recorded path).  The recorded path
 * is only a hint for finding the file again: it is written relative to the
 * session file's directory when the file lies below it, so that a session
 * moved together with its data keeps pointing at it.
 *
 * The index maps keys to entries.  A key is "S:" + digest + "#" + doublet
 * (the identity) or "P:" + path hint (for records without a digest and for
 * following a file whose content changed); both carry the HDU and row.  An
 * entry gets one key per digest and per hint it was recorded with, so a
 * lookup by any of them finds it. */
#include "journal_int.h"

#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>

#include "doubletty/digest.h"

typedef struct dt_jn_key {
  char *key; /* NULL = empty slot */
  int hdu;
  long row;
  size_t val;
} dt_jn_key;

static uint64_t key_hash(const char *key, int hdu, long row) {
  uint64_t h = 1469598103934665603ull;
  for (const unsigned char *p = (const unsigned char *)key; *p; p++) {
    h ^= *p;
    h *= 1099511628211ull;
  }
  h ^= (uint64_t)(unsigned)hdu * 0x9e3779b97f4a7c15ull;
  h *= 1099511628211ull;
  h ^= (uint64_t)row * 0xc2b2ae3d27d4eb4full;
  /* final avalanche (the 64-bit finaliser of MurmurHash3): the table uses the
   * low bits, which FNV alone mixes poorly */
  h ^= h >> 33;
  h *= 0xff51afd7ed558ccdull;
  h ^= h >> 33;
  h *= 0xc4ceb9fe1a85ec53ull;
  h ^= h >> 33;
  return h;
}

static dt_jn_key *probe(dt_jn_key *slot, size_t nslot, const char *key, int hdu, long row) {
  size_t m = nslot - 1;
  for (size_t s = (size_t)key_hash(key, hdu, row) & m;; s = (s + 1) & m)
    if (!slot[s].key ||
        (slot[s].hdu == hdu && slot[s].row == row && !strcmp(slot[s].key, key)))
      return &slot[s];
}

long dt_jn_index_get(const dt_jn_index *x, const char *key, int hdu, long row) {
  if (!x->nslot || !key) return -1;
  const dt_jn_key *k = probe(x->slot, x->nslot, key, hdu, row);
  return k->key ? (long)k->val : -1;
}

static int grow(dt_jn_index *x) {
  size_t nslot = x->nslot ? x->nslot * 2 : 64;
  dt_jn_key *slot = calloc(nslot, sizeof *slot);
  if (!slot) return DT_ENOMEM;
  for (size_t i = 0; i < x->nslot; i++)
    if (x->slot[i].key) *probe(slot, nslot, x->slot[i].key, x->slot[i].hdu, x->slot[i].row) = x->slot[i];
  free(x->slot);
  x->slot = slot;
  x->nslot = nslot;
  return DT_OK;
}

int dt_jn_index_add(dt_jn_index *x, const char *key, int hdu, long row, size_t val) {
  if ((x->nkey + 1) * 2 > x->nslot && grow(x) != DT_OK) return DT_ENOMEM;
  dt_jn_key *k = probe(x->slot, x->nslot, key, hdu, row);
  if (k->key) return DT_OK; /* the first entry with a key keeps it */
  if (!(k->key = strdup(key))) return DT_ENOMEM;
  k->hdu = hdu;
  k->row = row;
  k->val = val;
  x->nkey++;
  return DT_OK;
}

void dt_jn_index_free(dt_jn_index *x) {
  for (size_t i = 0; i < x->nslot; i++) free(x->slot[i].key);
  free(x->slot);
  x->slot = NULL;
  x->nslot = x->nkey = 0;
}

const char *dt_jn_doublet_of(const char *path) {
  const char *slash = strrchr(path, '/');
  const char *hash = strrchr(slash ? slash : path, '#');
  return hash ? hash + 1 : "";
}

/* "S:" a "#" b or "P:" a into buf when it fits, else into malloc'd memory;
 * NULL = out of memory. */
static char *key_of(char *buf, size_t n, const char *tag, const char *a, const char *b) {
  size_t need = strlen(tag) + strlen(a) + (b ? 1 + strlen(b) : 0) + 1;
  char *k = need <= n ? buf : malloc(need);
  if (k) snprintf(k, need, "%s%s%s%s", tag, a, b ? "#" : "", b ? b : "");
  return k;
}

char *dt_jn_id_key(const dt_target *t, char *buf, size_t n) {
  if (!t->path || !dt_digest_is_hex(t->sha256)) return NULL;
  return key_of(buf, n, "S:", t->sha256, dt_jn_doublet_of(t->path));
}

char *dt_jn_path_key(const char *path, char *buf, size_t n) {
  return key_of(buf, n, "P:", path, NULL);
}

/* ---------- path hints ---------- */

/* Lexically normalise an absolute path in place: "//" and "/./" become "/",
 * "DIR/.." is removed (no file is looked at: a hint is text). */
static void normalise(char *p) {
  char *w = p;
  for (char *r = p; *r;) {
    if (r[0] == '/' && (r[1] == '/' || r[1] == '\0') && w > p) {
      r++;
      continue;
    }
    if (r[0] == '/' && r[1] == '.' && (r[2] == '/' || r[2] == '\0')) {
      r += 2;
      continue;
    }
    if (r[0] == '/' && r[1] == '.' && r[2] == '.' && (r[3] == '/' || r[3] == '\0')) {
      while (w > p && *--w != '/') {}
      r += 3;
      continue;
    }
    *w++ = *r++;
  }
  if (w == p) *w++ = '/';
  *w = '\0';
}

/* path made absolute (from the current directory) and normalised; NULL when
 * the current directory cannot be found or out of memory. */
static char *absolute(const char *path) {
  char cwd[4096];
  if (path[0] != '/' && !getcwd(cwd, sizeof cwd)) return NULL;
  size_t n = strlen(path) + (path[0] == '/' ? 0 : strlen(cwd) + 1) + 1;
  char *a = malloc(n);
  if (!a) return NULL;
  if (path[0] == '/') snprintf(a, n, "%s", path);
  else snprintf(a, n, "%s/%s", cwd, path);
  normalise(a);
  return a;
}

char *dt_jn_session_dir(const char *session) {
  char *a = absolute(session);
  if (!a) return NULL;
  char *slash = strrchr(a, '/');
  if (slash == a) {
    free(a);
    return NULL; /* the root directory: hints stay absolute */
  }
  *slash = '\0';
  return a;
}

char *dt_jn_path_hint(const char *dir, const char *rdir, const char *path) {
  char *a = (dir || rdir) ? absolute(path) : NULL;
  const char *base[2] = {dir, rdir};
  for (int i = 0; a && i < 2; i++) {
    size_t n = base[i] ? strlen(base[i]) : 0;
    if (n > 1 && !strncmp(a, base[i], n) && a[n] == '/' && a[n + 1]) {
      char *h = strdup(a + n + 1);
      free(a);
      return h;
    }
  }
  free(a);
  return strdup(path);
}
