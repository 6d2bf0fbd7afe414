/* The session file: round trip, damage, versions, locking, failures, crash
 * safety and the speed of replay. */
#include <errno.h>
#include <fcntl.h>
#include <gsl/gsl_rng.h>
#include <math.h>
#include <signal.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/resource.h>
#include <sys/stat.h>
#include <sys/wait.h>
#include <time.h>
#include <unistd.h>
#include <grp.h>
#include <pwd.h>

#include <gsl/gsl_randist.h>

#include "doubletty/analysis.h"
#include "doubletty/atomic.h"
#include "doubletty/digest.h"
#include "doubletty/journal.h"
#include "doubletty/model.h"
#include "doubletty/spectrum.h"
#include "harness.h"

#if defined(__SANITIZE_ADDRESS__)
#define DT_TEST_SANITIZED 1
#elif defined(__has_feature)
#if __has_feature(address_sanitizer)
#define DT_TEST_SANITIZED 1
#endif
#endif
#ifndef DT_TEST_SANITIZED
#define DT_TEST_SANITIZED 0
#endif

static char dir[64];

static const char *tpath(const char *name) {
  static char p[4][128];
  static int k;
  k = (k + 1) % 4;
  snprintf(p[k], sizeof p[k], "%s/%s", dir, name);
  return p[k];
}

static char *slurp(const char *path, size_t *n) {
  FILE *f = fopen(path, "rb");
  if (!f) return NULL;
  fseek(f, 0, SEEK_END);
  long len = ftell(f);
  fseek(f, 0, SEEK_SET);
  char *b = malloc((size_t)len + 1);
  size_t got = fread(b, 1, (size_t)len, f);
  b[got] = '\0';
  fclose(f);
  if (n) *n = got;
  return b;
}

static void spit(const char *path, const char *b, size_t n) {
  FILE *f = fopen(path, "wb");
  fwrite(b, 1, n, f);
  fclose(f);
}

/* FNV-1a 32-bit (offset basis 2166136261, prime 16777619: the published FNV
 * parameters), to forge check sums of deliberately altered lines. */
static uint32_t fnv(const char *p, size_t n) {
  uint32_t h = 2166136261u;
  for (size_t i = 0; i < n; i++) h = (h ^ (unsigned char)p[i]) * 16777619u;
  return h;
}

static void reseal(char *line) {
  char *s = strstr(line, "\tsum=");
  if (!s) return;
  char tail[16];
  snprintf(tail, sizeof tail, "%08x", (unsigned)fnv(line, (size_t)(s - line)));
  memcpy(s + 5, tail, 8);
}

/* A random but valid action for state s (the generator of the round trip). */
static dt_action random_action(gsl_rng *r, const dt_judgement *s, int *ok) {
  dt_action a;
  *ok = 1;
  for (;;) {
    int k = (int)gsl_rng_uniform_int(r, DT_ACT_AUTOFIT); /* the kinds before autofit */
    dt_action_init(&a, (dt_action_kind)k);
    double u = gsl_rng_uniform(r);
    switch (a.kind) {
    case DT_ACT_WINDOW_ADD:
      if (s->nwin >= 4) continue;
      a.x[0] = 5850 + 40 * u;
      a.x[1] = a.x[0] + 1.0 / 3.0 + u;
      break;
    case DT_ACT_WINDOW_REMOVE:
    case DT_ACT_COMP_REMOVE:
    case DT_ACT_COMP_SET:
    case DT_ACT_FREEZE: {
      size_t n = a.kind == DT_ACT_WINDOW_REMOVE ? s->nwin : s->ncomp;
      if (!n) continue;
      a.index = (int)gsl_rng_uniform_int(r, n);
      a.ival = (int)gsl_rng_uniform_int(r, 8);
      a.x[0] = 11 + 3 * u;
      a.x[1] = 2 + 50 * gsl_rng_uniform(r);
      a.x[2] = -400 + 800 * gsl_rng_uniform(r);
      break;
    }
    case DT_ACT_COMP_ADD:
      if (s->ncomp >= 4) continue;
      a.x[0] = 11 + 3 * u;
      a.x[1] = 2 + 50 * gsl_rng_uniform(r);
      a.x[2] = -400 + 800 * gsl_rng_uniform(r);
      break;
    case DT_ACT_TIE_B: a.ival = u < 0.5; break;
    case DT_ACT_CONT_ORDER: a.ival = (int)gsl_rng_uniform_int(r, 5) - 1; break;
    case DT_ACT_DOUBLET: strcpy(a.text, u < 0.5 ? "NaI" : "Ca II"); break;
    case DT_ACT_RESOLUTION:
      a.x[0] = u < 0.5 ? 1800 + 3000 * u : 0;
      a.x[1] = u < 0.5 ? 0 : 30 + 100 * u;
      break;
    case DT_ACT_VSYS: a.x[0] = 1000 * u - 100; break;
    case DT_ACT_VWINDOW:
      a.x[0] = -800 * u;
      a.x[1] = 800 * gsl_rng_uniform(r) + 1e-9;
      break;
    case DT_ACT_FIT:
      a.fit.status = u < 0.9 ? DT_OK : DT_ENOCONV;
      a.fit.niter = (int)(100 * u);
      a.fit.ncomp = s->ncomp;
      for (size_t i = 0; i < s->ncomp; i++) {
        a.fit.comp[i] = (dt_component){12 + gsl_rng_uniform(r), 1 + 30 * gsl_rng_uniform(r),
                                       -300 + 600 * gsl_rng_uniform(r)};
        a.fit.err[i] = (dt_component){gsl_rng_uniform(r) / 7, gsl_rng_uniform(r) * 3,
                                      gsl_rng_uniform(r) * 5};
      }
      a.fit.ncont = gsl_rng_uniform_int(r, 4);
      for (size_t i = 0; i < a.fit.ncont; i++) {
        a.fit.cont_coef[i] = gsl_rng_uniform(r) - 0.5;
        a.fit.cont_err[i] = 1e-300 * gsl_rng_uniform(r);
      }
      a.fit.chi2 = 100 * u + 1.0 / 3.0;
      a.fit.dof = 90;
      a.fit.chi2_red = a.fit.status == DT_OK ? a.fit.chi2 / 90 : NAN;
      a.fit.bic = -a.fit.chi2 * 1e10;
      a.fit.npix = 100;
      break;
    case DT_ACT_VERDICT: a.ival = (int)gsl_rng_uniform_int(r, 5); break;
    case DT_ACT_NOTE:
      snprintf(a.text, sizeof a.text, "note %.3f\twith tab\nnewline \\ back\x01slash \xc3\xa9", u);
      break;
    default: continue;
    }
    return a;
  }
}

static dt_target target(int i) {
  static char names[8][64];
  snprintf(names[i], sizeof names[i], "spectra/obj %d.fits", i);
  dt_target t = {.path = names[i], .hdu = 1 + i % 2, .row = i % 3};
  return t;
}

/* ---------------------------------------------------------------------- */

static void test_round_trip(void) {
  const char *p = tpath("round.session");
  dt_journal *j;
  dt_err e;
  CHECK(dt_journal_open(p, DT_JOURNAL_RW, "Ana Quill", &j, &e) == DT_OK, "create a session");
  size_t n;
  char *txt = slurp(p, &n);
  CHECK(txt && !strncmp(txt, "doubletty-session 4\t", 20) && txt[n - 1] == '\n',
        "a new session starts with the versioned header line");
  free(txt);

  gsl_rng *r = gsl_rng_alloc(gsl_rng_mt19937);
  gsl_rng_set(r, 7);
  dt_judgement st[8];
  for (int i = 0; i < 8; i++) dt_judgement_init(&st[i]);
  int nok = 0, nrec = 0, napply_fail = 0;
  for (int step = 0; step < 600; step++) {
    int ti = (int)gsl_rng_uniform_int(r, 8);
    dt_target t = target(ti);
    int ok;
    dt_action a = random_action(r, &st[ti], &ok);
    dt_judgement after = st[ti];
    if (dt_judgement_apply(&after, &a) != DT_OK) {
      napply_fail++;
      continue;
    }
    if (step % 97 == 5) { /* the caller's state jumps (e.g. an automatic first pass) */
      dt_action c;
      dt_action_init(&c, DT_ACT_VSYS);
      c.x[0] = 4242.5;
      dt_judgement_apply(&after, &c);
    }
    if (step % 50 == 7) { /* undo */
      dt_action u;
      dt_action_init(&u, DT_ACT_RESTORE);
      dt_judgement prev = st[ti];
      u.state = &prev;
      a = u;
      after = prev;
    }
    if (dt_journal_append(j, &t, &a, &after, NULL, &e) == DT_OK) nok++;
    else printf("append: %s\n", e.what);
    st[ti] = after;
    nrec++;
  }
  CHECK(nok == nrec, "%d records appended", nok);
  int same_live = 1;
  for (int i = 0; i < 8; i++) {
    dt_target t = target(i);
    const dt_journal_entry *en = dt_journal_lookup(j, t.path, t.hdu, t.row);
    if (en && !dt_judgement_same(&en->state, &st[i])) same_live = 0;
  }
  CHECK(same_live, "the live session holds the states appended");
  dt_journal_close(j);

  CHECK(dt_journal_open(p, DT_JOURNAL_READ_ONLY, NULL, &j, &e) == DT_OK, "reopen read-only");
  int same = 1;
  for (int i = 0; i < 8; i++) {
    dt_target t = target(i);
    const dt_journal_entry *en = dt_journal_lookup(j, t.path, t.hdu, t.row);
    if (!en || !dt_judgement_same(&en->state, &st[i])) {
      same = 0;
      printf("  target %d differs\n", i);
    }
  }
  CHECK(same, "replay reproduces every state exactly (fits bit for bit, notes, windows)");
  CHECK(dt_journal_warning_count(j) == 0, "no warnings on a clean file (%zu%s%s)",
        dt_journal_warning_count(j), dt_journal_warning_count(j) ? ": " : "",
        dt_journal_warning_count(j) ? dt_journal_warning(j, 0) : "");
  CHECK(dt_journal_count(j) == 8 && dt_journal_nrecords(j) == nrec, "8 targets, %d records", nrec);
  const dt_journal_entry *en = dt_journal_entry_at(j, 0);
  CHECK(en && !strcmp(en->user, "Ana Quill") && en->time[10] == 'T', "who and when of the last change");
  dt_journal_close(j);
  /* and once more through a writer (resume) */
  CHECK(dt_journal_open(p, DT_JOURNAL_RW, "Ana Quill", &j, &e) == DT_OK, "reopen for writing");
  same = 1;
  for (int i = 0; i < 8; i++) {
    dt_target t = target(i);
    en = dt_journal_lookup(j, t.path, t.hdu, t.row);
    if (!en || !dt_judgement_same(&en->state, &st[i])) same = 0;
  }
  CHECK(same, "resume: the writer replays the same states");
  dt_journal_close(j);

  /* the line reader sees every record with its action */
  dt_journal_reader *rd;
  dt_journal_record *rec = malloc(sizeof *rec);
  CHECK(dt_journal_reader_open(p, &rd, &e) == DT_OK && dt_journal_reader_version(rd) == DT_JOURNAL_VERSION,
        "reader: version %d", DT_JOURNAL_VERSION);
  int nread = 0, lines_ok = 1, rc;
  while ((rc = dt_journal_reader_next(rd, rec, &e)) == DT_OK) {
    nread++;
    if (rec->line != nread + 1) lines_ok = 0;
  }
  CHECK(rc == DT_ENOTFOUND && nread == nrec && lines_ok, "reader: %d records, line numbers", nread);
  dt_journal_reader_close(rd);
  free(rec);
  gsl_rng_free(r);
}

/* A small session with two targets, for the damage tests. */
static void write_small(const char *p, dt_judgement *final0, dt_judgement *final1) {
  dt_journal *j;
  dt_err e;
  unlink(p);
  dt_journal_open(p, DT_JOURNAL_RW, "kim", &j, &e);
  dt_target t0 = {.path = "a.fits", .hdu = 1}, t1 = {.path = "b.txt", .hdu = 0};
  dt_judgement s0, s1;
  dt_judgement_init(&s0);
  dt_judgement_init(&s1);
  dt_action a;
  for (int i = 0; i < 3; i++) {
    dt_action_init(&a, DT_ACT_COMP_ADD);
    a.x[0] = 12 + i;
    a.x[1] = 10;
    a.x[2] = 100.0 * i;
    dt_judgement_apply(&s0, &a);
    dt_journal_append(j, &t0, &a, &s0, NULL, &e);
    dt_judgement_apply(&s1, &a);
    dt_journal_append(j, &t1, &a, &s1, NULL, &e);
  }
  dt_action_init(&a, DT_ACT_COMP_REMOVE);
  a.index = 0;
  dt_judgement_apply(&s0, &a);
  dt_journal_append(j, &t0, &a, &s0, NULL, &e);
  dt_action_init(&a, DT_ACT_VERDICT);
  a.ival = DT_VERDICT_DETECTED;
  dt_judgement_apply(&s0, &a);
  dt_journal_append(j, &t0, &a, &s0, NULL, &e);
  a.ival = DT_VERDICT_UNSURE;
  dt_judgement_apply(&s1, &a);
  dt_journal_append(j, &t1, &a, &s1, NULL, &e);
  dt_journal_close(j);
  *final0 = s0;
  *final1 = s1;
}

static const dt_journal_entry *get(dt_journal *j, const char *path) {
  return dt_journal_lookup(j, path, strstr(path, ".fits") ? 1 : 0, 0);
}

static void test_damage(void) {
  const char *p = tpath("damage.session");
  dt_judgement s0, s1;
  write_small(p, &s0, &s1);
  size_t n;
  char *orig = slurp(p, &n);
  dt_journal *j;
  dt_err e;

  /* 1. the last line cut short (a power cut in the middle of a write) */
  char *cut = malloc(n);
  memcpy(cut, orig, n);
  size_t cutn = n - 40;
  spit(p, cut, cutn);
  CHECK(dt_journal_open(p, DT_JOURNAL_READ_ONLY, NULL, &j, &e) == DT_OK, "open with a cut last line");
  CHECK(dt_journal_warning_count(j) == 1 && strstr(dt_journal_warning(j, 0), "line 10") &&
            strstr(dt_journal_warning(j, 0), "incomplete last line"),
        "warning: %s", dt_journal_warning(j, 0) ? dt_journal_warning(j, 0) : "(none)");
  const dt_journal_entry *b = get(j, "b.txt");
  CHECK(b && b->state.verdict == DT_VERDICT_NONE && b->state.ncomp == 3,
        "the cut record is skipped, the rest replayed");
  CHECK(dt_judgement_same(&get(j, "a.fits")->state, &s0), "the other target is intact");
  dt_journal_close(j);
  /* a writer ends the cut line so that new records start on their own line */
  CHECK(dt_journal_open(p, DT_JOURNAL_RW, "kim", &j, &e) == DT_OK, "a writer opens the cut file");
  dt_target t1 = {.path = "b.txt", .hdu = 0};
  dt_action a;
  dt_action_init(&a, DT_ACT_VERDICT);
  a.ival = DT_VERDICT_UNUSABLE;
  dt_judgement s = get(j, "b.txt")->state;
  dt_judgement_apply(&s, &a);
  CHECK(dt_journal_append(j, &t1, &a, &s, NULL, &e) == DT_OK, "and appends");
  dt_journal_close(j);
  CHECK(dt_journal_open(p, DT_JOURNAL_READ_ONLY, NULL, &j, &e) == DT_OK, "reopen");
  CHECK(dt_journal_warning_count(j) == 1 && strstr(dt_journal_warning(j, 0), "line 10") &&
            get(j, "b.txt")->state.verdict == DT_VERDICT_UNUSABLE,
        "the damaged line stays skipped, the new record counts: %s",
        dt_journal_warning(j, 0) ? dt_journal_warning(j, 0) : "(none)");
  dt_journal_close(j);

  /* 2. a garbled line in the middle (line 5: the second comp-add of b.txt) */
  char *g = malloc(n + 1);
  memcpy(g, orig, n + 1);
  char *l4 = g;
  for (int i = 0; i < 4; i++) l4 = strchr(l4, '\n') + 1;
  char *v = strstr(l4, "logN=13");
  v[5] = '7';
  spit(p, g, n);
  CHECK(dt_journal_open(p, DT_JOURNAL_READ_ONLY, NULL, &j, &e) == DT_OK, "open with a garbled line");
  size_t nw = dt_journal_warning_count(j);
  CHECK(nw >= 1 && strstr(dt_journal_warning(j, 0), "line 5") &&
            strstr(dt_journal_warning(j, 0), "check sum"),
        "warning names the line: %s", nw ? dt_journal_warning(j, 0) : "(none)");
  b = get(j, "b.txt");
  CHECK(b && (b->flags & DT_JFLAG_REPLAY_MISMATCH), "the target after it is flagged (replay mismatch)");
  CHECK(b && b->state.ncomp == 3 && b->state.comp[1].logN == 13 && b->state.verdict == DT_VERDICT_UNSURE,
        "its recorded components and verdict are adopted");
  CHECK(dt_judgement_same(&get(j, "a.fits")->state, &s0) && !(get(j, "a.fits")->flags & DT_JFLAG_REPLAY_MISMATCH),
        "the other target is intact and not flagged");
  dt_journal_close(j);

  /* 3. a forged line with a valid check sum but a bad field is still refused */
  memcpy(g, orig, n + 1);
  l4 = g;
  for (int i = 0; i < 4; i++) l4 = strchr(l4, '\n') + 1;
  v = strstr(l4, "hdu=0");
  v[3] = 'X';
  *strchr(l4, '\n') = '\0';
  reseal(l4);
  l4[strlen(l4)] = '\n';
  spit(p, g, n);
  CHECK(dt_journal_open(p, DT_JOURNAL_READ_ONLY, NULL, &j, &e) == DT_OK && dt_journal_warning_count(j) >= 1 &&
            strstr(dt_journal_warning(j, 0), "hdu"),
        "a bad value is named: %s", dt_journal_warning(j, 0) ? dt_journal_warning(j, 0) : "");
  dt_journal_close(j);

  /* 4. an unknown future version: refused, file untouched */
  char *fut = malloc(n + 1);
  memcpy(fut, orig, n + 1);
  fut[18] = '5';
  spit(p, fut, n);
  CHECK(dt_journal_open(p, DT_JOURNAL_RW, "kim", &j, &e) == DT_EVERSION && strstr(e.what, "version 5"),
        "future version refused for writing: %s", e.what);
  CHECK(dt_journal_open(p, DT_JOURNAL_READ_ONLY, NULL, &j, &e) == DT_EVERSION, "and for reading");
  size_t n2;
  char *after = slurp(p, &n2);
  CHECK(n2 == n && !memcmp(after, fut, n), "the newer file is left exactly as it was");
  free(after);

  /* 5. not a session file at all: never written to */
  const char *q = tpath("notes.txt");
  spit(q, "my notes\nline two\n", 18);
  CHECK(dt_journal_open(q, DT_JOURNAL_RW, "kim", &j, &e) == DT_EFORMAT && strstr(e.what, "not a doubletty session"),
        "another file refused: %s", e.what);
  after = slurp(q, &n2);
  CHECK(n2 == 18, "and left alone");
  free(after);
  CHECK(dt_journal_open(tpath("missing.session"), DT_JOURNAL_READ_ONLY, NULL, &j, &e) == DT_EIO,
        "read-only open of a missing session: %s", e.what);
  spit(q, "", 0);
  CHECK(dt_journal_open(q, DT_JOURNAL_READ_ONLY, NULL, &j, &e) == DT_EFORMAT, "empty file read-only: %s", e.what);
  CHECK(dt_journal_open(q, DT_JOURNAL_RW, "kim", &j, &e) == DT_OK, "an empty file becomes a new session");
  dt_journal_close(j);

  /* 6. fuzz: random bytes changed, check sum forged: a record or an error, never a crash */
  gsl_rng *r = gsl_rng_alloc(gsl_rng_mt19937);
  gsl_rng_set(r, 99);
  dt_journal_record *rec = malloc(sizeof *rec);
  char *line = strchr(orig, '\n') + 1;
  size_t ll = (size_t)(strchr(line, '\n') - line) + 1;
  int nparsed = 0, nwrong = 0;
  char wrong[160] = "";
  const char alphabet[] = "=\t,:+-.0123456789eNbvxn\\ac=>";
  for (int it = 0; it < 20000; it++) {
    char buf[1024];
    memcpy(buf, line, ll);
    buf[ll] = '\0';
    int nm = 1 + (int)gsl_rng_uniform_int(r, 3);
    for (int m = 0; m < nm; m++) {
      size_t pos = gsl_rng_uniform_int(r, ll - 16);
      buf[pos] = alphabet[gsl_rng_uniform_int(r, sizeof alphabet - 1)];
    }
    buf[ll - 1] = '\0';
    reseal(buf);
    dt_err_clear(&e);
    int rc = dt_journal_parse(buf, rec, &e);
    /* a record that makes sense, or DT_EFORMAT saying why: nothing else */
    int sane = rc == DT_OK ? rec->target.path && *rec->target.path &&
                                 rec->after.ncomp <= DT_MAX_COMP &&
                                 (int)rec->action.kind >= 0 && rec->action.kind < DT_ACT__COUNT
                           : rc == DT_EFORMAT && e.what[0];
    if (!sane && !nwrong++)
      snprintf(wrong, sizeof wrong, "status %d (%.100s) for: %.40s", rc, e.what, buf);
    if (rc == DT_OK) nparsed++;
  }
  CHECK(nwrong == 0 && nparsed > 0 && nparsed < 20000,
        "20000 altered lines: each a sane record or a damaged line with a reason (%d still "
        "valid, %d neither) %s", nparsed, nwrong, wrong);
  free(rec);
  gsl_rng_free(r);
  free(fut);
  free(g);
  free(cut);
  free(orig);
}

static void test_checksum_change(void) {
  const char *p = tpath("sha.session");
  dt_journal *j;
  dt_err e;
  dt_journal_open(p, DT_JOURNAL_RW, "lee", &j, &e);
  dt_target t = {.path = "x.fits", .hdu = 1};
  strcpy(t.sha256, "ba7816bf8f01cfea414140de5dae2223b00361a396177a9cb410ff61f20015ad");
  dt_judgement s;
  dt_judgement_init(&s);
  dt_action a;
  dt_action_init(&a, DT_ACT_VERDICT);
  a.ival = DT_VERDICT_DETECTED;
  dt_judgement_apply(&s, &a);
  dt_journal_append(j, &t, &a, &s, NULL, &e);
  const dt_journal_entry *en = dt_journal_lookup(j, "x.fits", 1, 0);
  CHECK(en && !(en->flags & DT_JFLAG_FILE_CHANGED) &&
            !dt_journal_file_changed(en, t.sha256),
        "same digest: not flagged");
  const char *other = "248d6a61d20638b8e5c026930c3e6039a33ce45964ff2167f6ecedd419db06c1";
  CHECK(dt_journal_file_changed(en, other), "a new digest is noticed before any change");
  strcpy(t.sha256, other);
  a.ival = DT_VERDICT_UNSURE;
  dt_judgement_apply(&s, &a);
  dt_journal_append(j, &t, &a, &s, NULL, &e);
  CHECK(en->flags & DT_JFLAG_FILE_CHANGED, "the change is flagged");
  dt_journal_close(j);
  char *txt = slurp(p, NULL);
  CHECK(strstr(txt, "was=ba7816bf") != NULL, "and recorded with the earlier digest");
  free(txt);
  dt_journal_open(p, DT_JOURNAL_READ_ONLY, NULL, &j, &e);
  en = dt_journal_lookup(j, "x.fits", 1, 0);
  CHECK(en && (en->flags & DT_JFLAG_FILE_CHANGED) && !strcmp(en->target.sha256, other) &&
            !strcmp(en->judged_by, "lee"),
        "the flag and the new digest survive a reopen");
  dt_journal_close(j);
}

static void test_writers(void) {
  const char *p = tpath("lock.session");
  dt_journal *j, *j2;
  dt_err e;
  CHECK(dt_journal_open(p, DT_JOURNAL_RW, "first", &j, &e) == DT_OK, "first writer");
  CHECK(dt_journal_open(p, DT_JOURNAL_RW, "second", &j2, &e) == DT_ELOCK, "second writer refused: %s", e.what);
  pid_t pid = fork();
  if (pid == 0) {
    dt_err ce;
    dt_journal *cj;
    int rc = dt_journal_open(p, DT_JOURNAL_RW, "child", &cj, &ce);
    char want[32];
    snprintf(want, sizeof want, "process %ld", (long)getppid());
    _exit(rc == DT_ELOCK && strstr(ce.what, want) ? 0 : 1);
  }
  int status;
  waitpid(pid, &status, 0);
  CHECK(WIFEXITED(status) && WEXITSTATUS(status) == 0,
        "a writer in another process is refused, told the holder's process id");
  CHECK(dt_journal_open(p, DT_JOURNAL_READ_ONLY, NULL, &j2, &e) == DT_OK, "readers are welcome meanwhile");
  dt_target t = {.path = "y.fits"};
  dt_judgement s;
  dt_judgement_init(&s);
  dt_action a;
  dt_action_init(&a, DT_ACT_TIE_B);
  a.ival = 1;
  dt_judgement_apply(&s, &a);
  CHECK(dt_journal_append(j2, &t, &a, &s, NULL, &e) == DT_EIO && strstr(e.what, "read-only"),
        "a read-only session refuses appends: %s", e.what);
  dt_journal_close(j2);
  dt_journal_close(j);
  CHECK(dt_journal_open(p, DT_JOURNAL_RW, "second", &j2, &e) == DT_OK, "after the first closes, the next may write");
  dt_journal_close(j2);
}

static void test_failures(void) {
  dt_err e;
  dt_journal *j;
  dt_target t = {.path = "z.fits"};
  dt_judgement s;
  dt_judgement_init(&s);
  dt_action a;
  dt_action_init(&a, DT_ACT_NOTE);
  memset(a.text, 'n', 300);
  a.text[300] = '\0';
  dt_judgement_apply(&s, &a);

  /* disk full: a file-size limit in a child (SIGXFSZ ignored: write fails with EFBIG) */
  const char *p = tpath("full.session");
  dt_journal_open(p, DT_JOURNAL_RW, "fay", &j, &e);
  dt_journal_append(j, &t, &a, &s, NULL, &e);
  dt_journal_close(j);
  struct stat st0;
  stat(p, &st0);
  pid_t pid = fork();
  if (pid == 0) {
    signal(SIGXFSZ, SIG_IGN);
    struct rlimit rl = {(rlim_t)st0.st_size + 200, (rlim_t)st0.st_size + 200};
    setrlimit(RLIMIT_FSIZE, &rl);
    dt_journal *cj;
    dt_err ce;
    if (dt_journal_open(p, DT_JOURNAL_RW, "fay", &cj, &ce) != DT_OK) _exit(10);
    int fails = 0;
    for (int i = 0; i < 3; i++) {
      a.text[0] = (char)('a' + i);
      dt_judgement_apply(&s, &a);
      int rc = dt_journal_append(cj, &t, &a, &s, NULL, &ce);
      if (rc == DT_EIO) fails++;
      if (i == 0 && (rc != DT_EIO || !strstr(ce.what, "cannot write"))) _exit(11);
    }
    if (fails != 3 || dt_journal_failed(cj) != DT_EIO) _exit(12);
    if (!strstr(dt_journal_error(cj)->what, "no further judgement")) _exit(13);
    dt_journal_close(cj);
    _exit(0);
  }
  int status;
  waitpid(pid, &status, 0);
  CHECK(WIFEXITED(status) && WEXITSTATUS(status) == 0,
        "disk full: the append fails, the journal stays failed, later appends fail too (%d)",
        WIFEXITED(status) ? WEXITSTATUS(status) : -1);
  struct stat st1;
  stat(p, &st1);
  CHECK(st1.st_size == st0.st_size, "the partial record was rolled back");
  CHECK(dt_journal_open(p, DT_JOURNAL_READ_ONLY, NULL, &j, &e) == DT_OK && dt_journal_warning_count(j) == 0 &&
            dt_journal_nrecords(j) == 1,
        "the file stays clean: one record, no warnings");
  dt_journal_close(j);

  /* removed while open */
  p = tpath("gone.session");
  dt_journal_open(p, DT_JOURNAL_RW, "fay", &j, &e);
  CHECK(dt_journal_append(j, &t, &a, &s, NULL, &e) == DT_OK, "append before removal");
  unlink(p);
  CHECK(dt_journal_append(j, &t, &a, &s, NULL, &e) == DT_EIO && strstr(e.what, "removed"),
        "removed session file: %s", e.what);
  CHECK(dt_journal_append(j, &t, &a, &s, NULL, &e) == DT_EIO && dt_journal_failed(j),
        "and stays failed");
  dt_journal_close(j);

  /* a read-only file */
  p = tpath("ro.session");
  dt_journal_open(p, DT_JOURNAL_RW, "fay", &j, &e);
  dt_journal_close(j);
  chmod(p, 0444);
  {
    /* root may write anyway: the check then runs in a child that has
     * dropped to the unprivileged account, where permissions apply */
    int as_root = geteuid() == 0;
    pid_t pid = as_root ? fork() : 0;
    if (pid == 0) {
      int dropped = 1;
      if (as_root) {
        struct passwd *pw = getpwnam("nobody");
        char dir[4096];
        snprintf(dir, sizeof dir, "%s", p);
        char *slash = strrchr(dir, '/');
        if (slash) *slash = '\0';
        dropped = pw && chmod(dir, 0755) == 0 && setgroups(0, NULL) == 0 && setgid(pw->pw_gid) == 0 &&
                  setuid(pw->pw_uid) == 0 && geteuid() != 0;
      }
      int refused = dropped && dt_journal_open(p, DT_JOURNAL_RW, "fay", &j, &e) == DT_EIO &&
                    strstr(e.what, "read-only") != NULL;
      if (as_root) _exit(refused ? 0 : dropped ? 1 : 2);
      CHECK(refused, "a read-only file cannot be opened for writing: %s", e.what);
    } else {
      int status = 0;
      waitpid(pid, &status, 0);
      CHECK(WIFEXITED(status) && WEXITSTATUS(status) != 2, "privileges dropped to 'nobody' for the check");
      CHECK(WIFEXITED(status) && WEXITSTATUS(status) == 0,
            "a read-only file cannot be opened for writing (as 'nobody')");
    }
  }
  CHECK(dt_journal_open(p, DT_JOURNAL_READ_ONLY, NULL, &j, &e) == DT_OK, "but can be read");
  dt_journal_close(j);
  chmod(p, 0644);

  /* invalid appends change nothing */
  p = tpath("inv.session");
  dt_journal_open(p, DT_JOURNAL_RW, "fay", &j, &e);
  dt_judgement badst = s;
  badst.ncomp = DT_MAX_COMP + 3;
  CHECK(dt_journal_append(j, &t, &a, &badst, NULL, &e) == DT_EINVAL && !dt_journal_failed(j),
        "an impossible state is refused without failing the journal: %s", e.what);
  dt_target nt = {.path = ""};
  CHECK(dt_journal_append(j, &nt, &a, &s, NULL, &e) == DT_EINVAL, "a target without a name is refused");
  CHECK(dt_journal_count(j) == 0 && dt_journal_nrecords(j) == 0, "nothing recorded");
  dt_journal_close(j);
}

/* kill -9 in the middle of a run of appends: every append reported done is
 * in the file. */
static void test_kill(void) {
  const char *p = tpath("kill.session");
  int fds[2];
  if (pipe(fds) != 0) return;
  pid_t pid = fork();
  if (pid == 0) {
    close(fds[0]);
    dt_journal *j;
    dt_err e;
    if (dt_journal_open(p, DT_JOURNAL_RW, "kit", &j, &e) != DT_OK) _exit(1);
    dt_judgement s;
    dt_judgement_init(&s);
    for (int i = 0;; i++) {
      char name[32];
      snprintf(name, sizeof name, "k%d.fits", i % 5);
      dt_target t = {.path = name, .hdu = 1};
      dt_action a;
      dt_action_init(&a, DT_ACT_VSYS);
      a.x[0] = i;
      dt_judgement_apply(&s, &a);
      if (dt_journal_append(j, &t, &a, &s, NULL, &e) != DT_OK) _exit(2);
      if (write(fds[1], &i, sizeof i) != sizeof i) _exit(3);
    }
  }
  close(fds[1]);
  int last = -1, v;
  while (last < 40 && read(fds[0], &v, sizeof v) == sizeof v) last = v;
  kill(pid, SIGKILL);
  while (read(fds[0], &v, sizeof v) == sizeof v) last = v; /* reported before it died */
  close(fds[0]);
  int status;
  waitpid(pid, &status, 0);
  dt_journal *j;
  dt_err e;
  CHECK(dt_journal_open(p, DT_JOURNAL_RW, "kit", &j, &e) == DT_OK, "reopen after kill -9");
  long nrec = dt_journal_nrecords(j);
  int all = 1;
  for (int k = 0; k < 5; k++) {
    int lastk = last - ((last - k) % 5 + 5) % 5;   /* last i with i % 5 == k */
    char name[32];
    snprintf(name, sizeof name, "k%d.fits", k);
    const dt_journal_entry *en = dt_journal_lookup(j, name, 1, 0);
    if (lastk >= 0 && (!en || en->state.vsys < lastk)) all = 0;
  }
  CHECK(all && nrec >= last + 1, "every append reported done survives (%ld records, %d reported)", nrec, last + 1);
  CHECK(dt_journal_warning_count(j) <= 1, "at most the record being written is cut");
  dt_journal_close(j);
}

static void test_refit_check(void) {
  dt_fit_result a = {0}, b;
  a.status = DT_OK;
  a.ncomp = 1;
  a.comp[0] = (dt_component){13.0, 10.0, 100.0};
  a.err[0] = (dt_component){0.1, 1.0, 2.0};
  a.chi2 = 100;
  a.dof = 98;
  b = a;
  b.comp[0].v = 100.1;
  b.chi2 = 100.5;
  char why[128];
  CHECK(dt_fit_check_refit(&a, &b, 0.1, why, sizeof why), "a refit 0.05 sigma away agrees");
  b.comp[0].v = 101.0;
  CHECK(!dt_fit_check_refit(&a, &b, 0.1, why, sizeof why) && strstr(why, "component 1 v"),
        "0.5 sigma away does not: %s", why);
  b = a;
  b.chi2 = 110;
  CHECK(!dt_fit_check_refit(&a, &b, 0.1, why, sizeof why) && strstr(why, "chi2"), "chi2 differs: %s", why);
  b = a;
  b.status = DT_ENOCONV;
  CHECK(!dt_fit_check_refit(&a, &b, 0.1, why, sizeof why), "status differs: %s", why);
}

/* A real fit recorded, replayed and refitted: the refit reproduces it; a
 * tampered record does not. */
static void test_replay_fit(void) {
  /* Na I D: Morton (2003), ApJS 149, 205 */
  static const char table[] =
      "NaI 5891.5833 0.6408 6.16e7 5897.5581 0.3201 6.14e7 Morton (2003) ApJS 149, 205\n";
  dt_atomic *at = dt_atomic_new();
  dt_err e;
  if (!at || dt_atomic_parse(at, table, sizeof table - 1, &e) != DT_OK) {
    CHECK(0, "atomic table: %s", e.what);
    return;
  }
  size_t n = 900;
  dt_spectrum *sp = dt_spectrum_alloc(n);
  for (size_t i = 0; i < n; i++) sp->wave[i] = 5855.0 + 0.1 * (double)i;
  dt_model_config cfg;
  memset(&cfg, 0, sizeof cfg);
  cfg.doublet = dt_atomic_find(at, "NaI");
  cfg.resolution = 15000;
  dt_model *m = dt_model_alloc(sp->wave, n, &cfg, 1, &e);
  dt_component truth = {12.2, 9.0, 40.0};
  dt_model_eval(m, &truth, 1, sp->flux, NULL, 0);
  gsl_rng *r = gsl_rng_alloc(gsl_rng_mt19937);
  gsl_rng_set(r, 5);
  for (size_t i = 0; i < n; i++) {
    sp->sigma[i] = 0.03;
    sp->flux[i] += gsl_ran_gaussian(r, 0.03);
    sp->mask[i] = 0;
  }
  sp->has_sigma = 1;
  dt_analysis *an = dt_analysis_alloc(sp, at);
  dt_judgement j;
  dt_judgement_init(&j);
  dt_action a;
  dt_action_init(&a, DT_ACT_RESOLUTION);
  a.x[0] = 15000;
  dt_judgement_apply(&j, &a);
  dt_action_init(&a, DT_ACT_CONT_ORDER);
  a.ival = -1;
  dt_judgement_apply(&j, &a);
  dt_action_init(&a, DT_ACT_COMP_ADD);
  a.x[0] = 12.0;
  a.x[1] = 12.0;
  a.x[2] = 30.0;
  dt_judgement_apply(&j, &a);
  dt_analysis_out *out = malloc(sizeof *out);
  int rc = dt_analysis_run(an, &j, out, &e);
  CHECK(rc == DT_OK && out->fit.status == DT_OK, "a real fit (%s)", rc ? e.what : "ok");
  dt_action_init(&a, DT_ACT_FIT);
  a.fit = out->fit;
  dt_judgement_apply(&j, &a);
  dt_meas_summary ms;
  dt_meas_summary_from_analysis(out, 3.0, DT_VERDICT_DETECTED, &ms);
  CHECK(isfinite(ms.line[0].w) && ms.line[0].w == out->line[0].W && ms.nsigma == 3.0,
        "measurements summarised from the analysis (W = %.4f A)", ms.line[0].w);
  const char *p = tpath("fit.session");
  dt_journal *jn;
  dt_journal_open(p, DT_JOURNAL_RW, "rae", &jn, &e);
  dt_target t = {.path = "synthetic.fits", .hdu = 1};
  CHECK(dt_journal_append(jn, &t, &a, &j, &ms, &e) == DT_OK, "the fit recorded");
  dt_journal_close(jn);
  dt_journal_open(p, DT_JOURNAL_READ_ONLY, NULL, &jn, &e);
  const dt_journal_entry *en = dt_journal_lookup(jn, "synthetic.fits", 1, 0);
  CHECK(en && dt_judgement_same(&en->state, &j) && en->has_meas && en->meas.line[0].w == ms.line[0].w,
        "replay restores the fit and the measurements exactly");
  int agrees = 0;
  char why[160];
  rc = dt_analysis_verify_fit(an, &en->state, DT_REFIT_TOL_SIGMA, &agrees, why, sizeof why, &e);
  CHECK(rc == DT_OK && agrees, "the refit reproduces the recorded fit within %.1f sigma%s%s",
        DT_REFIT_TOL_SIGMA, agrees ? "" : ": ", agrees ? "" : why);
  double verr = en ? en->state.fit.err[0].v : 1.0;
  dt_journal_close(jn);
  /* tamper: the recorded velocity moved by 5 sigma, the line resealed */
  char *txt = slurp(p, NULL);
  char *line = strchr(txt, '\n') + 1;
  *strchr(line, '\n') = '\0';
  char *v = strstr(line, ",v=");
  char buf[8192];
  double vrec = strtod(v + 3, NULL);
  size_t pre = (size_t)(v - line);
  char *rest = strstr(v + 3, "+-");
  snprintf(buf, sizeof buf, "%.*s,v=%.6f%s", (int)pre, line, vrec + 5 * verr, rest);
  reseal(buf);
  FILE *f = fopen(p, "w");
  fprintf(f, "%.*s%s\n", (int)(line - txt), txt, buf);
  fclose(f);
  free(txt);
  dt_journal_open(p, DT_JOURNAL_READ_ONLY, NULL, &jn, &e);
  en = dt_journal_lookup(jn, "synthetic.fits", 1, 0);
  rc = en ? dt_analysis_verify_fit(an, &en->state, DT_REFIT_TOL_SIGMA, &agrees, why, sizeof why, &e) : -1;
  CHECK(rc == DT_OK && !agrees && strstr(why, "component 1 v"), "a tampered fit is reported: %s", why);
  dt_journal_close(jn);
  free(out);
  dt_analysis_free(an);
  dt_model_free(m);
  dt_spectrum_free(sp);
  dt_atomic_free(at);
  gsl_rng_free(r);
}

/* Replay speed: a session of many lines written directly (no fsync). */
static void test_speed(void) {
  const char *p = tpath("big.session");
  FILE *f = fopen(p, "w");
  fprintf(f, "doubletty-session 1\tcreated=2025-01-01T00:00:00.000Z\tprogram=test\n");
  const long nlines = 200000;
  const int ntarg = 5000;
  char *buf = malloc(1 << 15);
  dt_judgement *st = malloc(ntarg * sizeof *st);
  for (int i = 0; i < ntarg; i++) dt_judgement_init(&st[i]);
  gsl_rng *r = gsl_rng_alloc(gsl_rng_mt19937);
  char sha[DT_SHA256_HEX];
  strcpy(sha, "ba7816bf8f01cfea414140de5dae2223b00361a396177a9cb410ff61f20015ad");
  int *seen = calloc(ntarg, sizeof *seen);
  for (long i = 0; i < nlines; i++) {
    int ti = (int)gsl_rng_uniform_int(r, ntarg);
    char name[48];
    snprintf(name, sizeof name, "survey/field%03d/spec%05d.fits", ti % 100, ti);
    dt_target t = {.path = name, .hdu = 1, .row = 0};
    memcpy(t.sha256, sha, sizeof sha);
    snprintf(t.sha256 + 56, 9, "%08x", (unsigned)ti); /* one file, one digest */
    int ok;
    dt_action a = random_action(r, &st[ti], &ok);
    if (dt_judgement_apply(&st[ti], &a) != DT_OK) {
      i--;
      continue;
    }
    dt_meas_summary m;
    dt_meas_summary_clear(&m);
    m.line[0].w = 0.1;
    m.line[0].w_err = 0.01;
    m.nsigma = 3;
    dt_journal_format(buf, 1 << 15, "2025-01-01T00:00:00.000Z", "surveyor", &t, &a, &st[ti],
                      a.kind == DT_ACT_FIT ? &m : NULL, !seen[ti], NULL);
    seen[ti] = 1;
    fputs(buf, f);
  }
  fclose(f);
  /* processor time: the figure that does not depend on what else runs */
  struct timespec t0, t1;
  clock_gettime(CLOCK_PROCESS_CPUTIME_ID, &t0);
  dt_journal *j;
  dt_err e;
  int rc = dt_journal_open(p, DT_JOURNAL_READ_ONLY, NULL, &j, &e);
  clock_gettime(CLOCK_PROCESS_CPUTIME_ID, &t1);
  double dt = (double)(t1.tv_sec - t0.tv_sec) + 1e-9 * (double)(t1.tv_nsec - t0.tv_nsec);
  CHECK(rc == DT_OK && dt_journal_nrecords(j) == nlines && dt_journal_warning_count(j) == 0,
        "a %ld-line session replays cleanly", nlines);
  int same = 1;
  for (int i = 0; rc == DT_OK && i < ntarg; i++) {
    char name[48];
    snprintf(name, sizeof name, "survey/field%03d/spec%05d.fits", i % 100, i);
    const dt_journal_entry *en = dt_journal_lookup(j, name, 1, 0);
    if (seen[i] && (!en || !dt_judgement_same(&en->state, &st[i]))) same = 0;
  }
  CHECK(same, "with every one of %d targets in its final state", ntarg);
  /* a million lines in a few seconds: under 8 us a line even on a busy machine
   * (sanitizers slow the code about threefold: under 30 us there) */
  CHECK(dt < (DT_TEST_SANITIZED ? 30e-6 : 8e-6) * nlines, "replay of %ld lines took %.2f s of processor time (%.2f us/line)",
        nlines, dt, 1e6 * dt / nlines);
  if (rc == DT_OK) dt_journal_close(j);
  if (getenv("DT_KEEP_BIG")) {
    char cmd[256];
    snprintf(cmd, sizeof cmd, "cp '%s' '%s'", p, getenv("DT_KEEP_BIG"));
    if (system(cmd) != 0) printf("copy failed\n");
  }
  unlink(p);
  free(seen);
  free(st);
  free(buf);
  gsl_rng_free(r);
}

/* For tests/scripts/session_verify.sh: DIR/spec.txt, a synthetic Na I
 * spectrum, and DIR/fit.session recording a fit of it made by the library
 * (the spectrum path recorded relative to the session's directory). */
static int make_fixture(const char *d) {
  static const char table[] =
      "NaI 5891.5833 0.6408 6.16e7 5897.5581 0.3201 6.14e7 Morton (2003) ApJS 149, 205\n";
  dt_atomic *at = dt_atomic_new();
  dt_err e;
  if (dt_atomic_parse(at, table, sizeof table - 1, &e) != DT_OK) return 1;
  size_t n = 900;
  double *w = malloc(n * sizeof *w), *fl = malloc(n * sizeof *fl);
  for (size_t i = 0; i < n; i++) w[i] = 5855.0 + 0.1 * (double)i;
  dt_model_config cfg;
  memset(&cfg, 0, sizeof cfg);
  cfg.doublet = dt_atomic_find(at, "NaI");
  cfg.resolution = 15000;
  dt_model *m = dt_model_alloc(w, n, &cfg, 2, &e);
  dt_component truth[2] = {{12.1, 9.0, 40.0}, {11.8, 6.0, 95.0}};
  dt_model_eval(m, truth, 2, fl, NULL, 0);
  gsl_rng *r = gsl_rng_alloc(gsl_rng_mt19937);
  gsl_rng_set(r, 11);
  char path[256];
  snprintf(path, sizeof path, "%s/spec.txt", d);
  FILE *f = fopen(path, "w");
  if (!f) return 1;
  fprintf(f, "# wave flux error (synthetic Na I, R = 15000)\n");
  for (size_t i = 0; i < n; i++) fprintf(f, "%.6f %.6f 0.03\n", w[i], fl[i] + gsl_ran_gaussian(r, 0.03));
  fclose(f);
  dt_spectrum *sp = NULL;
  if (dt_spectrum_read(path, NULL, &sp, &e) != DT_OK) {
    fprintf(stderr, "%s: %s\n", path, e.what);
    return 1;
  }
  dt_analysis *an = dt_analysis_alloc(sp, at);
  dt_judgement j;
  dt_judgement_init(&j);
  char sp_path[300];
  snprintf(sp_path, sizeof sp_path, "%s/fit.session", d);
  dt_journal *jn;
  if (dt_journal_open(sp_path, DT_JOURNAL_RW, "fixture", &jn, &e) != DT_OK) return 1;
  char key[300]; /* as the inspector names it: the list's path and the doublet */
  snprintf(key, sizeof key, "%s#NaI", path);
  dt_target t = {.path = key, .hdu = 0, .row = 0};
  dt_digest_file(path, t.sha256, &e);
  dt_action a;
  dt_action_init(&a, DT_ACT_RESOLUTION);
  a.x[0] = 15000;
  dt_judgement_apply(&j, &a);
  dt_journal_append(jn, &t, &a, &j, NULL, &e);
  dt_action_init(&a, DT_ACT_CONT_ORDER);
  a.ival = 1;
  dt_judgement_apply(&j, &a);
  dt_journal_append(jn, &t, &a, &j, NULL, &e);
  for (int k = 0; k < 2; k++) {
    dt_action_init(&a, DT_ACT_COMP_ADD);
    a.x[0] = 12.0;
    a.x[1] = 10.0;
    a.x[2] = k ? 90.0 : 30.0;
    dt_judgement_apply(&j, &a);
    dt_journal_append(jn, &t, &a, &j, NULL, &e);
  }
  dt_analysis_out *out = malloc(sizeof *out);
  int rc = dt_analysis_run(an, &j, out, &e);
  if (rc != DT_OK) {
    fprintf(stderr, "fit: %s\n", e.what);
    return 1;
  }
  dt_action_init(&a, DT_ACT_FIT);
  a.fit = out->fit;
  dt_judgement_apply(&j, &a);
  dt_meas_summary ms;
  dt_meas_summary_from_analysis(out, 3.0, DT_VERDICT_NONE, &ms);
  rc = dt_journal_append(jn, &t, &a, &j, &ms, &e);
  dt_action_init(&a, DT_ACT_VERDICT);
  a.ival = DT_VERDICT_DETECTED;
  dt_judgement_apply(&j, &a);
  rc |= dt_journal_append(jn, &t, &a, &j, &ms, &e);
  dt_journal_close(jn);
  printf("fixture: %zu components, chi2_red %.3f\n", j.ncomp, j.fit.chi2_red);
  free(out);
  dt_analysis_free(an);
  dt_spectrum_free(sp);
  dt_model_free(m);
  dt_atomic_free(at);
  gsl_rng_free(r);
  free(w);
  free(fl);
  return rc ? 1 : 0;
}

int main(int argc, char **argv) {
  if (argc == 3 && !strcmp(argv[1], "--fixture")) return make_fixture(argv[2]);
  snprintf(dir, sizeof dir, "%s/dt-journal-XXXXXX", getenv("TMPDIR") ? getenv("TMPDIR") : "/tmp");
  if (!mkdtemp(dir)) {
    printf("FAIL - cannot make a temp dir\n");
    return 1;
  }
  test_round_trip();
  test_damage();
  test_checksum_change();
  test_writers();
  test_failures();
  test_kill();
  test_refit_check();
  test_replay_fit();
  test_speed();
  char cmd[128];
  snprintf(cmd, sizeof cmd, "rm -rf '%s'", dir);
  if (system(cmd) != 0) printf("could not remove %s\n", dir);
  return dt_test_done();
}
