/* The session file on disk: open, lock, replay, append.
 *
 * WRITING.  One writer at a time (flock on the session file; a refused
 * second writer is told the holder's process id and user from /proc/locks
 * where the system has it).  Each record is built in
 * memory, written with a single write() to the O_APPEND descriptor and
 * fsync'd before the append returns.  A failed write is rolled back
 * (ftruncate to the previous size) and the journal is marked failed: every
 * later append fails too, so nothing is dropped silently.  Before writing, the
 * journal checks that its path still names the file it holds open (a removed
 * or replaced session file fails the append; what the file held, still
 * readable through the open descriptor, is first written back to the path
 * if nothing is there, else beside it as PATH.rescued, so nothing recorded
 * is lost -- and the same happens at close when no append came after the
 * removal).  Spectrum paths are only ever recorded and compared, never
 * opened, run or written. */
#ifndef _XOPEN_SOURCE
#define _XOPEN_SOURCE 700 /* realpath */
#endif
#include "doubletty/journal.h"
#include "journal_int.h"

#include <errno.h>
#include <fcntl.h>
#include <math.h>
#include <pwd.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/file.h>
#include <sys/mman.h>
#include <sys/stat.h>
#include <sys/sysmacros.h>
#include <time.h>
#include <unistd.h>

#include "doubletty/measure.h"

#ifndef DT_VERSION
#define DT_VERSION "unknown"
#endif

#define HEADER_TAG DT_JN_HEADER_TAG
#define MAX_WARN 64
#define WARN_LEN 200


struct dt_journal {
  char *path;
  char *abspath; /* for checking that the path still names our file */
  char user[DT_JOURNAL_USER_MAX];
  int fd;
  int ro;
  int failed;
  int live; /* opened for writing and holding the lock */
  dt_err err;
  dev_t dev;
  ino_t ino;
  dt_journal_entry **ent;
  size_t nent, capent;
  /* the entries themselves, ENTRY_SLAB to a slab (new_entry) */
  void **slab;
  size_t nslab, capslab, slab_used;
  dt_jn_index index; /* identity and path keys -> entry index */
  char *dir, *rdir;  /* the session file's directory, lexically and resolved */
  int version;       /* the format version of the file (appends keep it) */
  long nrecords;
  long nlines;
  size_t nwarn;
  char warn[MAX_WARN][WARN_LEN];
  char *buf;
  size_t bufcap;
  unsigned long index_gen; /* changes of the index so far */
  struct {                 /* the last lookup of a replayed record's target */
    int valid;
    unsigned long gen;     /* ... and the index it was made in */
    char *path;
    size_t cap;
    char sha256[DT_SHA256_HEX];
    int hdu;
    long row;
    long idx;
  } last;
};


/* ---------- the in-memory session ---------- */

#define KEYBUF 1024 /* keys this long are built on the stack */

/* The entry index of a key (freed when not buf), -1 if none. */
static long by_key(const dt_journal *j, char *key, const char *buf, int hdu, long row) {
  long i = key ? dt_jn_index_get(&j->index, key, hdu, row) : -1;
  if (key != buf) free(key);
  return i;
}

/* The entry of a target: by identity (digest, HDU, row, doublet), else by
 * its path -- the hint the caller's path would be recorded as (hint = 1),
 * then the path as given.  Its index, -1 if none. */
static long find_index(const dt_journal *j, const dt_target *t, int hint) {
  char buf[KEYBUF];
  if (!t->path) return -1;
  long i = by_key(j, dt_jn_id_key(t, buf, sizeof buf), buf, t->hdu, t->row);
  if (i < 0 && hint && (j->dir || j->rdir)) {
    char *h = dt_jn_path_hint(j->dir, j->rdir, t->path);
    if (h && strcmp(h, t->path) != 0)
      i = by_key(j, dt_jn_path_key(h, buf, sizeof buf), buf, t->hdu, t->row);
    free(h);
  }
  return i >= 0 ? i : by_key(j, dt_jn_path_key(t->path, buf, sizeof buf), buf, t->hdu, t->row);
}

static dt_journal_entry *find(const dt_journal *j, const dt_target *t, int hint) {
  long i = find_index(j, t, hint);
  return i >= 0 ? j->ent[i] : NULL;
}

/* Give entry i the keys of target t (its digest and its path hint). */
static int index_entry(dt_journal *j, size_t i, const dt_target *t) {
  j->index_gen++;
  char b0[KEYBUF], b1[KEYBUF];
  char *k[2] = {dt_jn_id_key(t, b0, sizeof b0), dt_jn_path_key(t->path, b1, sizeof b1)};
  int rc = k[1] ? DT_OK : DT_ENOMEM;
  for (int n = 0; n < 2 && rc == DT_OK; n++)
    if (k[n]) rc = dt_jn_index_add(&j->index, k[n], t->hdu, t->row, i);
  if (k[0] != b0) free(k[0]);
  if (k[1] != b1) free(k[1]);
  return rc;
}

static int set_str(char **dst, const char *src) {
  if (!src || !*src || (*dst && !strcmp(*dst, src))) return DT_OK;
  char *c = strdup(src);
  if (!c) return DT_ENOMEM;
  free(*dst);
  *dst = c;
  return DT_OK;
}

/* arr (of *cap elements of elsize bytes) grown to twice as many, or to
 * first; NULL when out of memory (arr and *cap then unchanged). */
static void *grown(void *arr, size_t *cap, size_t first, size_t elsize) {
  size_t c = *cap ? *cap * 2 : first;
  void *p = realloc(arr, c * elsize);
  if (p) *cap = c;
  return p;
}

/* A zeroed entry, carved from slabs of ENTRY_SLAB entries: 2 MB-aligned
 * and, where the system has them, in huge pages -- a session of 100 000
 * spectra holds 450 MB of entries, which in 4 kB pages cost 110 000 page
 * faults to open (a fifth of the time). */
#define ENTRY_SLAB 448
#define SLAB_ALIGN ((size_t)2 << 20)
static dt_journal_entry *new_entry(dt_journal *j) {
  if (j->nslab == 0 || j->slab_used == ENTRY_SLAB) {
    if (j->nslab == j->capslab) {
      void **p = grown(j->slab, &j->capslab, 16, sizeof *p);
      if (!p) return NULL;
      j->slab = p;
    }
    size_t bytes = ENTRY_SLAB * sizeof(dt_journal_entry);
    bytes = (bytes + SLAB_ALIGN - 1) / SLAB_ALIGN * SLAB_ALIGN;
    void *p = aligned_alloc(SLAB_ALIGN, bytes);
    if (!p) return NULL;
#ifdef MADV_HUGEPAGE
    (void)madvise(p, bytes, MADV_HUGEPAGE);   /* a hint: without it, 4 kB pages */
#endif
    j->slab[j->nslab++] = p;
    j->slab_used = 0;
  }
  dt_journal_entry *en = (dt_journal_entry *)j->slab[j->nslab - 1] + j->slab_used++;
  memset(en, 0, sizeof *en);
  return en;
}

/* A new entry for t (its path the recorded hint), at index j->nent - 1. */
static dt_journal_entry *add_entry(dt_journal *j, const dt_target *t) {
  if (j->nent == j->capent) {
    dt_journal_entry **p = grown(j->ent, &j->capent, 64, sizeof *p);
    if (!p) return NULL;
    j->ent = p;
  }
  char *path = strdup(t->path);
  dt_journal_entry *en = path ? new_entry(j) : NULL;
  if (!en) {
    free(path);
    return NULL;
  }
  en->target = *t;
  en->target.path = path;
  en->target.name = NULL;
  en->target.sha256[0] = '\0';
  dt_judgement_init(&en->state);
  dt_meas_summary_clear(&en->meas);
  j->ent[j->nent++] = en;
  if (index_entry(j, j->nent - 1, t) != DT_OK) return NULL;
  return en;
}

/* Entry i's target after a record of t: the latest digest, hint and name
 * (each kept when the record has none), with keys for a new digest or hint. */
static int update_target(dt_journal *j, size_t i, const dt_target *t) {
  dt_journal_entry *en = j->ent[i];
  int renew = (dt_digest_is_hex(t->sha256) && strcmp(en->target.sha256, t->sha256) != 0) ||
              strcmp(en->target.path, t->path) != 0;
  if (dt_digest_is_hex(t->sha256)) memcpy(en->target.sha256, t->sha256, DT_SHA256_HEX);
  char *path = (char *)en->target.path, *name = (char *)en->target.name;
  int rc = set_str(&path, t->path);
  if (rc == DT_OK) rc = set_str(&name, t->name);
  en->target.path = path;
  en->target.name = name;
  if (t->frame[0]) memcpy(en->target.frame, t->frame, sizeof en->target.frame);
  if (t->sky[0]) memcpy(en->target.sky, t->sky, sizeof en->target.sky);
  return rc == DT_OK && renew ? index_entry(j, i, t) : rc;
}

static void add_warning(dt_journal *j, const dt_err *e) {
  if (j->nwarn < MAX_WARN) {
    if (e->where[0])
      snprintf(j->warn[j->nwarn], WARN_LEN, "%.40s: %.150s", e->where, e->what);
    else
      snprintf(j->warn[j->nwarn], WARN_LEN, "%.190s", e->what);
  }
  j->nwarn++;
}

/* The linked species, the b rule and the joint fit (every record states
 * them too). */
static int same_linked(const dt_judgement *a, const dt_judgement *b) {
  if (a->nlinked != b->nlinked || a->btie != b->btie || a->has_joint != b->has_joint ||
      a->nlinked > DT_JUDGE_MAX_LINKED)
    return 0;
  for (size_t i = 0; i < a->nlinked; i++)
    if (strcmp(a->linked[i], b->linked[i])) return 0;
  return !a->has_joint || dt_linked_fit_same(&a->joint, &b->joint, a->ncomp);
}

static void adopt_linked(dt_judgement *s, const dt_judgement *rec) {
  s->nlinked = rec->nlinked;
  memcpy(s->linked, rec->linked, sizeof s->linked);
  s->btie = rec->btie;
  s->has_joint = rec->has_joint;
  s->joint = rec->joint;
}

/* Partial covering and the components' covering factors (cf= is written
 * only with covering on). */
static int same_cover(const dt_judgement *a, const dt_judgement *b) {
  if (a->covering != b->covering) return 0;
  for (size_t i = 0; a->covering && i < a->ncomp && i < DT_MAX_COMP; i++)
    if (!(a->cf[i] == b->cf[i])) return 0;
  return 1;
}

/* Components, freezes, tie, verdict and fit: what every record states. */
static int same_summary(const dt_judgement *a, const dt_judgement *b) {
  if (a->ncomp != b->ncomp || a->tie_b != b->tie_b || a->verdict != b->verdict ||
      a->has_fit != b->has_fit || a->ncomp > DT_MAX_COMP)
    return 0;
  for (size_t i = 0; i < a->ncomp; i++)
    if (a->frozen[i] != b->frozen[i] || !dt_jn_same_comp(&a->comp[i], &b->comp[i])) return 0;
  if (a->nsysv != b->nsysv || a->nsysv > DT_JUDGE_MAX_SYS) return 0;
  for (size_t i = 0; i < a->nsysv; i++)
    if (strcmp(a->sysv[i].name, b->sysv[i].name) || a->sysv[i].verdict != b->sysv[i].verdict)
      return 0;
  if (!same_linked(a, b)) return 0;
  if (!same_cover(a, b)) return 0;
  return !a->has_fit || dt_fit_result_same(&a->fit, &b->fit);
}

static void adopt_summary(dt_judgement *s, const dt_judgement *rec) {
  adopt_linked(s, rec);
  s->ncomp = rec->ncomp;
  memcpy(s->comp, rec->comp, sizeof s->comp);
  memcpy(s->frozen, rec->frozen, sizeof s->frozen);
  s->tie_b = rec->tie_b;
  s->verdict = rec->verdict;
  s->nsysv = rec->nsysv;
  memcpy(s->sysv, rec->sysv, sizeof s->sysv);
  s->has_fit = rec->has_fit;
  s->fit = rec->fit;
  s->covering = rec->covering;
  memcpy(s->cf, rec->cf, sizeof s->cf);
}

static void note_verdict(dt_journal_entry *en, dt_verdict before, dt_action_kind kind,
                         const char *user, const char *time) {
  if (en->state.verdict == DT_VERDICT_NONE) {
    en->judged_by[0] = en->judged_at[0] = '\0';
  } else if (kind == DT_ACT_VERDICT || en->state.verdict != before || !en->judged_by[0]) {
    dt_jn_copy_str(en->judged_by, sizeof en->judged_by, user);
    dt_jn_copy_str(en->judged_at, sizeof en->judged_at, time);
  }
}

/* find_index(j, t, 0), remembered: a target looked up before, the index
 * unchanged since, has the same answer (a session's records come in runs
 * of one target: the keys need not be built and hashed again). */
static long find_replayed(dt_journal *j, const dt_target *t) {
  if (!t->path) return -1;
  if (j->last.valid && j->last.gen == j->index_gen && j->last.hdu == t->hdu &&
      j->last.row == t->row && !strcmp(j->last.sha256, t->sha256) && !strcmp(j->last.path, t->path))
    return j->last.idx;
  long idx = find_index(j, t, 0);
  size_t n = strlen(t->path) + 1;
  j->last.valid = 0;
  if (n > j->last.cap) {
    char *p = realloc(j->last.path, n);
    if (!p) return idx; /* not remembered */
    j->last.path = p;
    j->last.cap = n;
  }
  memcpy(j->last.path, t->path, n);
  memcpy(j->last.sha256, t->sha256, sizeof j->last.sha256);
  j->last.hdu = t->hdu;
  j->last.row = t->row;
  j->last.idx = idx;
  j->last.gen = j->index_gen;
  j->last.valid = 1;
  return idx;
}

/* Replay one record into the session. */
static int replay(dt_journal *j, const dt_journal_record *rec) {
  long idx = find_replayed(j, &rec->target);
  dt_journal_entry *en = idx >= 0 ? j->ent[idx] : add_entry(j, &rec->target);
  if (!en) return DT_ENOMEM;
  if (idx < 0) idx = (long)j->nent - 1;
  if (!en->nchanges) en->first_line = rec->line;
  if (rec->flags & DT_JFLAG_FILE_CHANGED) en->flags |= DT_JFLAG_FILE_CHANGED;
  if (rec->target.sha256[0] && en->target.sha256[0] &&
      strcmp(en->target.sha256, rec->target.sha256) != 0)
    en->flags |= DT_JFLAG_FILE_CHANGED;
  if (update_target(j, (size_t)idx, &rec->target) != DT_OK) return DT_ENOMEM;
  dt_verdict before = en->state.verdict;
  if (rec->has & DT_REC_FULL) {
    en->state = rec->after;
  } else {
    dt_judgement *s = &en->state; /* apply changes nothing when it fails */
    int rc = dt_judgement_apply(s, &rec->action);
    if (rc != DT_OK || !same_summary(s, &rec->after)) {
      char what[160];
      snprintf(what, sizeof what,
               "%s of %s: the recorded state does not follow from the records before it; "
               "recorded components and verdict adopted",
               dt_action_name(rec->action.kind), rec->target.path);
      dt_err w;
      char where[32];
      snprintf(where, sizeof where, "line %ld", rec->line);
      dt_err_set(&w, DT_EFORMAT, where, "%s", what);
      add_warning(j, &w);
      en->flags |= DT_JFLAG_REPLAY_MISMATCH;
      adopt_summary(s, &rec->after);
    }
  }
  if (rec->has & DT_REC_MEAS) {
    en->meas = rec->meas;
    en->has_meas = 1;
  }
  dt_jn_copy_str(en->user, sizeof en->user, rec->user);
  dt_jn_copy_str(en->time, sizeof en->time, rec->time);
  note_verdict(en, before, rec->action.kind, rec->user, rec->time);
  en->nchanges++;
  en->last_line = rec->line;
  j->nrecords++;
  return DT_OK;
}

/* Replay every record of an opened reader into j, then close the reader. */
static int load_from(dt_journal *j, dt_journal_reader *r, dt_err *e) {
  int rc;
  dt_journal_record *rec = malloc(sizeof *rec);
  if (!rec) {
    dt_journal_reader_close(r);
    return dt_err_set(e, DT_ENOMEM, NULL, "out of memory");
  }
  dt_err w;
  for (;;) {
    rc = dt_journal_reader_next(r, rec, &w);
    if (rc == DT_ENOTFOUND) {
      rc = DT_OK;
      break;
    }
    if (rc == DT_EFORMAT) {
      add_warning(j, &w);
      continue;
    }
    if (rc != DT_OK) {
      if (e) *e = w;
      break;
    }
    rc = replay(j, rec);
    if (rc != DT_OK) {
      dt_err_set(e, rc, NULL, "out of memory");
      break;
    }
  }
  j->nlines = dt_jn_reader_lineno(r);
  j->version = dt_journal_reader_version(r);
  free(rec);
  dt_journal_reader_close(r);
  return rc;
}

static int load(dt_journal *j, dt_err *e) {
  dt_journal_reader *r;
  int rc = dt_journal_reader_open(j->path, &r, e);
  if (rc != DT_OK) return rc;
  return load_from(j, r, e);
}

/* ---------- open / close ---------- */

static void now_utc(char out[DT_JOURNAL_TIME_MAX]) {
  struct timespec ts;
  clock_gettime(CLOCK_REALTIME, &ts);
  struct tm tm;
  gmtime_r(&ts.tv_sec, &tm);
  char tmp[24];
  strftime(tmp, sizeof tmp, "%Y-%m-%dT%H:%M:%S", &tm);
  snprintf(out, DT_JOURNAL_TIME_MAX, "%.20s.%03dZ", tmp, (int)(ts.tv_nsec / 1000000L) % 1000);
}

static int write_all(int fd, const char *p, size_t n, int *err) {
  while (n > 0) {
    ssize_t k = write(fd, p, n);
    if (k < 0) {
      if (errno == EINTR) continue;
      *err = errno;
      return -1;
    }
    if (k == 0) {
      *err = EIO;
      return -1;
    }
    p += k;
    n -= (size_t)k;
  }
  return 0;
}

/* Make a new directory entry durable (best effort). */
static void sync_dir(const char *path) {
  char *dir = strdup(path);
  if (!dir) return;
  char *slash = strrchr(dir, '/');
  const char *d = ".";
  if (slash) {
    if (slash == dir) slash[1] = '\0';
    else *slash = '\0';
    d = dir;
  }
  int fd = open(d, O_RDONLY);
  if (fd >= 0) {
    (void)fsync(fd);
    close(fd);
  }
  free(dir);
}

/* Who holds the write lock: " (process 1234, user alice)", as far as the
 * system tells (Linux lists every lock with its owner in /proc/locks); ""
 * when unknown. */
static void lock_holder(const struct stat *st, char *out, size_t n) {
  out[0] = '\0';
  FILE *f = fopen("/proc/locks", "r");
  if (!f) return;
  char line[256];
  long pid = -1;
  while (pid < 0 && fgets(line, sizeof line, f)) {
    char type[16], mode[16];
    long p;
    unsigned maj, min;
    unsigned long ino;
    if (strstr(line, "->")) continue; /* a process waiting, not holding */
    if (sscanf(line, "%*d: %15s %*s %15s %ld %x:%x:%lu", type, mode, &p, &maj, &min, &ino) != 6)
      continue;
    if (!strcmp(type, "FLOCK") && !strcmp(mode, "WRITE") && ino == (unsigned long)st->st_ino &&
        maj == major(st->st_dev) && min == minor(st->st_dev))
      pid = p;
  }
  fclose(f);
  if (pid <= 0) return;
  if (pid == (long)getpid()) {
    snprintf(out, n, " (this same process)");
    return;
  }
  char proc[64], name[80] = "";
  snprintf(proc, sizeof proc, "/proc/%ld", pid);
  struct stat ps;
  if (stat(proc, &ps) == 0) {
    struct passwd pw, *res = NULL;
    char pwbuf[1024];
    if (getpwuid_r(ps.st_uid, &pw, pwbuf, sizeof pwbuf, &res) == 0 && res)
      snprintf(name, sizeof name, ", user %.60s", res->pw_name);
  }
  snprintf(out, n, " (process %ld%s)", pid, name);
}

static int open_rw(dt_journal *j, dt_err *e) {
  int fd = open(j->path, O_RDWR | O_APPEND | O_CREAT | O_CLOEXEC, 0644);
  if (fd < 0) {
    int err = errno;
    if (err == EACCES || err == EROFS || err == EPERM)
      return dt_err_set(e, DT_EIO, NULL, "cannot open for writing: %s (open it read-only to look)",
                        strerror(err));
    return dt_err_set(e, DT_EIO, NULL, "cannot open for writing: %s", strerror(err));
  }
  j->fd = fd;
  struct stat st;
  if (fstat(fd, &st) != 0) return dt_err_set(e, DT_EIO, NULL, "cannot stat: %s", strerror(errno));
  if (!S_ISREG(st.st_mode)) return dt_err_set(e, DT_EIO, NULL, "not a regular file");
  if (flock(fd, LOCK_EX | LOCK_NB) != 0) {
    int err = errno;
    if (err == EWOULDBLOCK || err == EAGAIN) {
      char who[128];
      lock_holder(&st, who, sizeof who);
      return dt_err_set(e, DT_ELOCK, NULL,
                        "the session is open for writing by another doubletty%s; only one "
                        "writer at a time",
                        who);
    }
    return dt_err_set(e, DT_EIO, NULL, "cannot lock: %s", strerror(err));
  }
  j->dev = st.st_dev;
  j->ino = st.st_ino;
  j->abspath = realpath(j->path, NULL);
  int err = 0;
  if (st.st_size == 0) {
    char hdr[160], t[DT_JOURNAL_TIME_MAX];
    now_utc(t);
    int n = snprintf(hdr, sizeof hdr, HEADER_TAG " %d\tcreated=%s\tprogram=doubletty %s\n",
                     DT_JOURNAL_VERSION, t, DT_VERSION);
    if (write_all(fd, hdr, (size_t)n, &err) != 0 || fsync(fd) != 0) {
      if (!err) err = errno;
      (void)ftruncate(fd, 0);
      return dt_err_set(e, DT_EIO, NULL, "cannot write the header: %s", strerror(err));
    }
    sync_dir(j->path);
    j->nlines = 1;
    j->version = DT_JOURNAL_VERSION;
  } else {
    int rc = load(j, e);
    if (rc != DT_OK) return rc;
    /* a cut-short last line: end it so that new records start on their own line */
    char last = '\n';
    if (pread(fd, &last, 1, st.st_size - 1) == 1 && last != '\n') {
      if (write_all(fd, "\n", 1, &err) != 0 || fsync(fd) != 0) {
        if (!err) err = errno;
        return dt_err_set(e, DT_EIO, NULL, "cannot end the incomplete last line: %s",
                          strerror(err));
      }
    }
  }
  return DT_OK;
}

int dt_journal_open_mem(const void *buf, size_t len, dt_journal **out, dt_err *e) {
  *out = NULL;
  dt_journal *j = calloc(1, sizeof *j);
  if (!j) return dt_err_set(e, DT_ENOMEM, NULL, "out of memory");
  j->fd = -1;
  j->ro = 1;
  j->path = strdup("(memory)");
  dt_jn_copy_str(j->user, sizeof j->user, "unknown");
  dt_journal_reader *r = NULL;
  int rc = j->path ? dt_journal_reader_open_mem(buf, len, &r, e)
                   : dt_err_set(e, DT_ENOMEM, NULL, "out of memory");
  if (rc == DT_OK) rc = load_from(j, r, e);
  if (rc != DT_OK) {
    dt_journal_close(j);
    return rc;
  }
  *out = j;
  return DT_OK;
}

int dt_journal_open(const char *path, dt_journal_mode mode, const char *user, dt_journal **out,
                    dt_err *e) {
  *out = NULL;
  if (!path || !*path) return dt_err_set(e, DT_EINVAL, NULL, "no session file name");
  dt_journal *j = calloc(1, sizeof *j);
  if (!j) return dt_err_set(e, DT_ENOMEM, NULL, "out of memory");
  j->fd = -1;
  j->path = strdup(path);
  j->bufcap = 1 << 15;
  j->buf = malloc(j->bufcap);
  if (!j->path || !j->buf) {
    dt_journal_close(j);
    return dt_err_set(e, DT_ENOMEM, NULL, "out of memory");
  }
  dt_jn_copy_str(j->user, sizeof j->user, user && *user ? user : "unknown");
  j->ro = mode == DT_JOURNAL_READ_ONLY;
  /* path hints are relative to the session file's directory */
  if ((j->dir = dt_jn_session_dir(path)) != NULL) j->rdir = realpath(j->dir, NULL);
  int rc = j->ro ? load(j, e) : open_rw(j, e);
  if (rc != DT_OK) {
    dt_journal_close(j);
    return rc;
  }
  j->live = !j->ro;
  *out = j;
  return DT_OK;
}

static const char *rescue(dt_journal *j, char *out, size_t size, int *absent);

void dt_journal_close(dt_journal *j) {
  if (!j) return;
  if (j->live && !j->failed && j->fd >= 0) {
    /* removed or replaced since the last append: keep what it held */
    struct stat st;
    if (stat(j->abspath ? j->abspath : j->path, &st) != 0 || st.st_dev != j->dev ||
        st.st_ino != j->ino) {
      char saved[4096];
      int absent;
      (void)rescue(j, saved, sizeof saved, &absent);
    }
  }
  if (j->fd >= 0) close(j->fd); /* releases both locks */
  for (size_t i = 0; i < j->nent; i++) {
    free((char *)j->ent[i]->target.path);
    free((char *)j->ent[i]->target.name);
  }
  for (size_t i = 0; i < j->nslab; i++) free(j->slab[i]);
  free(j->slab);
  free(j->ent);
  free(j->last.path);
  dt_jn_index_free(&j->index);
  free(j->dir);
  free(j->rdir);
  free(j->buf);
  free(j->abspath);
  free(j->path);
  free(j);
}

/* ---------- append ---------- */

/* The session file was removed or replaced while open.  What it held is
 * still readable through the descriptor: write it back where it was when
 * nothing is there now (*absent = 1), else beside it as PATH.rescued --
 * never over an existing file -- so that no recorded judgement is lost.
 * Returns out (the name written) or NULL. */
static const char *rescue(dt_journal *j, char *out, size_t size, int *absent) {
  const char *name = j->abspath ? j->abspath : j->path;
  struct stat st;
  *absent = stat(name, &st) != 0 && errno == ENOENT;
  if ((size_t)snprintf(out, size, "%s%s", name, *absent ? "" : ".rescued") >= size) return NULL;
  int fd = open(out, O_WRONLY | O_CREAT | O_EXCL | O_CLOEXEC, 0644);
  if (fd < 0) return NULL;
  char buf[16384];
  off_t off = 0;
  int ok = 1, err = 0;
  for (;;) {
    ssize_t k = pread(j->fd, buf, sizeof buf, off);
    if (k < 0 && errno == EINTR) continue;
    if (k <= 0) {
      ok = k == 0;
      break;
    }
    if (write_all(fd, buf, (size_t)k, &err) != 0) {
      ok = 0;
      break;
    }
    off += k;
  }
  if (ok && fsync(fd) != 0) ok = 0;
  close(fd);
  if (!ok) {
    unlink(out);
    return NULL;
  }
  sync_dir(out);
  return out;
}

static int set_failed(dt_journal *j, dt_err *e, const char *fmt, const char *arg) {
  j->failed = DT_EIO;
  char what[200];
  snprintf(what, sizeof what, fmt, arg);
  dt_err_set(&j->err, DT_EIO, NULL, "%s; no further judgement can be recorded", what);
  if (e) *e = j->err;
  return DT_EIO;
}

/* Append a record of t (its path the hint to record) to en (NULL = a
 * spectrum the session has no record of yet). */
static int append_record(dt_journal *j, long idx, const dt_target *t,
                         const dt_action *a, const dt_judgement *after,
                         const dt_meas_summary *meas, dt_err *e) {
  dt_journal_entry *en = idx >= 0 ? j->ent[idx] : NULL;
  if (j->ro) return dt_err_set(e, DT_EIO, NULL, "the session is open read-only");
  if (j->failed) {
    if (e) *e = j->err;
    return j->failed;
  }
  if (!t || !t->path || !*t->path) return dt_err_set(e, DT_EINVAL, NULL, "no target file name");
  if ((int)a->kind < 0 || a->kind >= DT_ACT__COUNT)
    return dt_err_set(e, DT_EINVAL, NULL, "unknown action");
  /* the state must be one a judgement can be in */
  dt_judgement chk = *after;
  dt_action ra;
  dt_action_init(&ra, DT_ACT_RESTORE);
  ra.state = after;
  if (dt_judgement_apply(&chk, &ra) != DT_OK)
    return dt_err_set(e, DT_EINVAL, NULL, "the state after %s is not a valid judgement",
                      dt_action_name(a->kind));

  int full = 1;
  if (en && a->kind != DT_ACT_RESTORE && a->kind != DT_ACT_AUTOFIT) {
    dt_judgement s = en->state;
    dt_action b = *a;
    if (b.kind == DT_ACT_FIT || b.kind == DT_ACT_JOINT_FIT) b.fit = after->fit; /* as replayed */
    if (b.kind == DT_ACT_JOINT_FIT) b.joint = after->joint;
    full = !(dt_judgement_apply(&s, &b) == DT_OK && dt_judgement_same(&s, after));
  }
  const char *was = NULL;
  if (en && en->target.sha256[0] && dt_digest_is_hex(t->sha256) &&
      strcmp(en->target.sha256, t->sha256) != 0)
    was = en->target.sha256;

  char tm[DT_JOURNAL_TIME_MAX];
  now_utc(tm);
  size_t n = dt_journal_format(j->buf, j->bufcap, tm, j->user, t, a, after, meas, full, was);
  if (n >= j->bufcap) {
    char *p = realloc(j->buf, n + 1);
    if (!p) return dt_err_set(e, DT_ENOMEM, NULL, "out of memory");
    j->buf = p;
    j->bufcap = n + 1;
    n = dt_journal_format(j->buf, j->bufcap, tm, j->user, t, a, after, meas, full, was);
  }

  /* the path must still name the file we hold */
  struct stat st, fst;
  if (stat(j->abspath ? j->abspath : j->path, &st) != 0 || st.st_dev != j->dev ||
      st.st_ino != j->ino) {
    char saved[4096], what[4200];
    int absent = 0;
    if (rescue(j, saved, sizeof saved, &absent)) {
      snprintf(what, sizeof what,
               absent ? "the session file was removed while open; what it held was written "
                        "back to %s (reopen it to go on)"
                      : "the session file was replaced while open; what it held was saved as %s",
               saved);
      return set_failed(j, e, "%.190s", what);
    }
    return set_failed(j, e, "the session file %s was removed or replaced", j->path);
  }
  if (fstat(j->fd, &fst) != 0)
    return set_failed(j, e, "cannot stat the session file: %s", strerror(errno));
  int err = 0;
  if (write_all(j->fd, j->buf, n, &err) != 0) {
    if (ftruncate(j->fd, fst.st_size) == 0) (void)fsync(j->fd);
    return set_failed(j, e, "cannot write the session file: %s", strerror(err));
  }
  if (fsync(j->fd) != 0) {
    err = errno;
    if (ftruncate(j->fd, fst.st_size) == 0) (void)fsync(j->fd);
    return set_failed(j, e, "cannot sync the session file to disk: %s", strerror(err));
  }

  /* recorded: update the session */
  if (!en && (idx = (long)j->nent, !(en = add_entry(j, t)))) {
    /* the line is on disk; the in-memory view can no longer follow it */
    return set_failed(j, e, "%s", "out of memory");
  }
  j->nlines++;
  j->nrecords++;
  if (!en->nchanges) en->first_line = j->nlines;
  if (was) en->flags |= DT_JFLAG_FILE_CHANGED;
  if (update_target(j, (size_t)idx, t) != DT_OK) return set_failed(j, e, "%s", "out of memory");
  dt_verdict before = en->state.verdict;
  en->state = *after;
  if (meas) {
    en->meas = *meas;
    en->has_meas = 1;
  }
  dt_jn_copy_str(en->user, sizeof en->user, j->user);
  dt_jn_copy_str(en->time, sizeof en->time, tm);
  note_verdict(en, before, a->kind, j->user, tm);
  en->nchanges++;
  en->last_line = j->nlines;
  return DT_OK;
}

/* A file of format version < 4 cannot hold linked species or a b rule. */
static int refuse_linked(const dt_journal *j, const dt_action *a, const dt_judgement *after,
                         dt_err *e) {
  if (after->hyperfine)
    return dt_err_set(e, DT_EVERSION, NULL,
                      "this session file is in format version %d, which cannot record "
                      "hyperfine structure: use a new session file",
                      j->version);
  if (after->nlinked == 0 && after->btie == DT_BTIE_SAME && !after->has_joint &&
      a->kind != DT_ACT_LINK && a->kind != DT_ACT_BTIE && a->kind != DT_ACT_JOINT_FIT)
    return DT_OK;
  return dt_err_set(e, DT_EVERSION, NULL,
                    "this session file is in format version %d, which cannot hold linked "
                    "species: link species in a new session file",
                    j->version);
}

int dt_journal_append(dt_journal *j, const dt_target *t, const dt_action *a,
                      const dt_judgement *after, const dt_meas_summary *meas, dt_err *e) {
  if (!t || !t->path || !*t->path) return dt_err_set(e, DT_EINVAL, NULL, "no target file name");
  /* a version-1 file goes on in its own format: the path as given, no name */
  char *hint = j->version >= 2 ? dt_jn_path_hint(j->dir, j->rdir, t->path) : strdup(t->path);
  if (!hint) return dt_err_set(e, DT_ENOMEM, NULL, "out of memory");
  dt_target rt = *t;
  rt.path = hint;
  if (j->version < 2) rt.name = NULL;
  /* an older file goes on without the absorber systems; it cannot hold
     the verdict of a system other than the target */
  /* the target's verdict is written without system= (as version 2 wrote it) */
  dt_action plain;
  if (a->kind == DT_ACT_VERDICT && !strcmp(a->text, DT_JUDGE_TARGET)) {
    plain = *a;
    plain.text[0] = '\0';
    a = &plain;
  }
  if (j->version < DT_JN_COVER_VERSION && (after->covering || a->kind == DT_ACT_COVERING)) {
    free(hint);
    return dt_err_set(e, DT_EVERSION, NULL,
                      "this session file is in format version %d, which cannot hold partial "
                      "covering: fit covering factors in a new session file", j->version);
  }
  const dt_judgement *state = after;
  dt_judgement *old = NULL;
  if (j->version < 3) {
    int other = after->nsysv > 0 || (a->kind == DT_ACT_VERDICT && a->text[0] &&
                                     strcmp(a->text, DT_JUDGE_TARGET));
    if (other) {
      free(hint);
      return dt_err_set(e, DT_EVERSION, NULL,
                        "this session file is in format version %d, which holds only the "
                        "target's verdict: judge other systems in a new session file",
                        j->version);
    }
    if (after->nsys > 0) {
      old = malloc(sizeof *old);
      if (!old) {
        free(hint);
        return dt_err_set(e, DT_ENOMEM, NULL, "out of memory");
      }
      *old = *after;
      old->nsys = 0;
      state = old;
    }
  }
  int rc = j->version < 4 ? refuse_linked(j, a, after, e) : DT_OK;
  if (rc == DT_OK) rc = append_record(j, find_index(j, t, 1), &rt, a, state, meas, e);
  free(old);
  free(hint);
  return rc;
}

/* ---------- queries ---------- */

const dt_journal_entry *dt_journal_lookup(const dt_journal *j, const char *path, int hdu,
                                          long row) {
  dt_target t = {.path = path, .hdu = hdu, .row = row};
  return path ? find(j, &t, 1) : NULL;
}

const dt_journal_entry *dt_journal_find(const dt_journal *j, const dt_target *t) {
  return t ? find(j, t, 1) : NULL;
}

const char *dt_journal_resolve(const dt_journal *j, const char *hint, char *buf, size_t n) {
  if (hint[0] != '/' && j->dir) snprintf(buf, n, "%s/%s", j->dir, hint);
  else snprintf(buf, n, "%s", hint);
  return buf;
}

size_t dt_journal_count(const dt_journal *j) { return j->nent; }

const dt_journal_entry *dt_journal_entry_at(const dt_journal *j, size_t i) {
  return i < j->nent ? j->ent[i] : NULL;
}

int dt_journal_file_changed(const dt_journal_entry *en, const char *sha256) {
  return en && en->target.sha256[0] && sha256 && dt_digest_is_hex(sha256) &&
         strcmp(en->target.sha256, sha256) != 0;
}

int dt_journal_set_flag(dt_journal *j, const char *path, int hdu, long row, unsigned flag,
                        int on) {
  dt_target t = {.path = path, .hdu = hdu, .row = row};
  dt_journal_entry *en = path ? find(j, &t, 1) : NULL;
  if (!en) return DT_ENOTFOUND;
  if (on) en->flags |= flag;
  else en->flags &= ~flag;
  return DT_OK;
}

int dt_journal_failed(const dt_journal *j) { return j->failed; }
const dt_err *dt_journal_error(const dt_journal *j) { return &j->err; }
int dt_journal_read_only(const dt_journal *j) { return j->ro; }
const char *dt_journal_path(const dt_journal *j) { return j->path; }
const char *dt_journal_user(const dt_journal *j) { return j->user; }
long dt_journal_nrecords(const dt_journal *j) { return j->nrecords; }
size_t dt_journal_warning_count(const dt_journal *j) { return j->nwarn; }

const char *dt_journal_warning(const dt_journal *j, size_t i) {
  return i < j->nwarn && i < MAX_WARN ? j->warn[i] : NULL;
}

int dt_journal_version(const dt_journal *j) { return j ? j->version : DT_JOURNAL_VERSION; }
