/* The session file knows a spectrum by what it is: the SHA-256 of its file's
 * bytes, HDU, row and doublet, with the path as a hint relative to the
 * session's directory.  Two sessions over the same files reached through
 * different directories compare; a session moved with its data resumes;
 * version-1 files (path identity) still read and go on in their own format;
 * the list name is recorded; the line reader counts damaged lines. */
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <unistd.h>

#include "doubletty/agree.h"
#include "doubletty/digest.h"
#include "doubletty/journal.h"
#include "fixtures.h"
#include "harness.h"

static char dir[64];

static const char *tpath(const char *name) {
  static char p[8][256];
  static int k;
  k = (k + 1) % 8;
  snprintf(p[k], sizeof p[k], "%s/%s", dir, name);
  return p[k];
}

/* FNV-1a 32-bit (offset basis 2166136261, prime 16777619: the published FNV
 * parameters), the check sum of a session line. */
static uint32_t fnv(const char *p, size_t n) {
  uint32_t h = 2166136261u;
  for (size_t i = 0; i < n; i++) h = (h ^ (unsigned char)p[i]) * 16777619u;
  return h;
}

/* A record line of the format of version 1 (a fixture of the old format),
 * ended with its check sum and a newline. */
static void old_line(FILE *f, const char *body) {
  fprintf(f, "%s\tsum=%08x\n", body, (unsigned)fnv(body, strlen(body)));
}

static void make_file(const char *path, const char *content) {
  spit(path, content, strlen(content));
}

static int verdict_record(dt_journal *j, const char *path, const char *sha, dt_verdict v,
                          const char *name) {
  dt_target t = {.path = path, .hdu = 0, .row = 0, .name = name};
  if (sha) memcpy(t.sha256, sha, DT_SHA256_HEX);
  const dt_journal_entry *en = dt_journal_find(j, &t);
  dt_judgement s;
  if (en) s = en->state;
  else dt_judgement_init(&s);
  dt_action a;
  dt_action_init(&a, DT_ACT_VERDICT);
  a.ival = (int)v;
  if (dt_judgement_apply(&s, &a) != DT_OK) return -1;
  dt_err e;
  return dt_journal_append(j, &t, &a, &s, NULL, &e);
}

/* Two people, the same three files, each in a directory of their own. */
static void test_compare_across_directories(void) {
  static const char *names[3] = {"a.fits", "b.fits", "c.fits"};
  static const char *bytes[3] = {"spectrum one", "spectrum two", "spectrum three"};
  static const dt_verdict v1[3] = {DT_VERDICT_DETECTED, DT_VERDICT_NOT_DETECTED,
                                   DT_VERDICT_UNSURE};
  static const dt_verdict v2[3] = {DT_VERDICT_DETECTED, DT_VERDICT_NOT_DETECTED,
                                   DT_VERDICT_DETECTED};
  mkdir(tpath("alice"), 0755);
  mkdir(tpath("alice/data"), 0755);
  mkdir(tpath("bob"), 0755);
  mkdir(tpath("bob/copies"), 0755);
  mkdir(tpath("sessions"), 0755);
  dt_journal *ja, *jb;
  dt_err e;
  int ok = dt_journal_open(tpath("sessions/alice.session"), DT_JOURNAL_RW, "alice", &ja, &e) == DT_OK;
  ok = ok && dt_journal_open(tpath("sessions/bob.session"), DT_JOURNAL_RW, "bob", &jb, &e) == DT_OK;
  CHECK(ok, "two sessions created");
  if (!ok) return;
  for (int i = 0; i < 3; i++) {
    char pa[256], pb[256], sha[DT_SHA256_HEX];
    snprintf(pa, sizeof pa, "%s/alice/data/%s", dir, names[i]);
    snprintf(pb, sizeof pb, "%s/bob/copies/%s", dir, names[i]);
    make_file(pa, bytes[i]);
    make_file(pb, bytes[i]);
    dt_digest_file(pa, sha, &e);
    char ka[300], kb[300];
    snprintf(ka, sizeof ka, "%s#NaI", pa);
    snprintf(kb, sizeof kb, "%s#NaI", pb);
    ok = ok && verdict_record(ja, ka, sha, v1[i], NULL) == DT_OK &&
         verdict_record(jb, kb, sha, v2[i], NULL) == DT_OK;
  }
  CHECK(ok, "three verdicts each");
  dt_journal_close(ja);
  dt_journal_close(jb);
  ok = dt_journal_open(tpath("sessions/alice.session"), DT_JOURNAL_READ_ONLY, NULL, &ja, &e) == DT_OK;
  ok = ok && dt_journal_open(tpath("sessions/bob.session"), DT_JOURNAL_READ_ONLY, NULL, &jb, &e) == DT_OK;
  dt_agree_report r;
  ok = ok && dt_agree_sessions(ja, jb, &r, &e) == DT_OK;
  CHECK(ok && r.nboth == 3 && r.nonly1 == 0 && r.nonly2 == 0,
        "every verdict is matched across the two directories (%zu in both, %zu only in one, %zu only in two)",
        ok ? r.nboth : 0, ok ? r.nonly1 : 0, ok ? r.nonly2 : 0);
  CHECK(ok && r.ndisagree == 1 && strstr(r.disagree[0].a->target.path, "c.fits#NaI") &&
            strstr(r.disagree[0].b->target.path, "bob/copies/c.fits#NaI"),
        "the one disagreement is c.fits, named by each session's own path");
  if (ok) dt_agree_report_free(&r);
  /* another doublet of the same file is another spectrum */
  char pa[256], sha[DT_SHA256_HEX];
  snprintf(pa, sizeof pa, "%s/alice/data/a.fits", dir);
  dt_digest_file(pa, sha, &e);
  dt_target t = {.path = "/nowhere/a.fits#CaII"};
  memcpy(t.sha256, sha, sizeof sha);
  CHECK(ok && !dt_journal_find(jb, &t), "the same file with another doublet is not found");
  t.path = "/nowhere/a.fits#NaI";
  const dt_journal_entry *en = ok ? dt_journal_find(jb, &t) : NULL;
  CHECK(en && en->state.verdict == DT_VERDICT_DETECTED, "found by its digest under any name");
  if (ok) {
    dt_journal_close(ja);
    dt_journal_close(jb);
  }
}

/* A session kept beside its data: the data and the session move together. */
static void test_moved_session_resumes(void) {
  mkdir(tpath("obs"), 0755);
  mkdir(tpath("obs/data"), 0755);
  make_file(tpath("obs/data/x.fits"), "the bytes of x");
  char key[300], sha[DT_SHA256_HEX];
  dt_err e;
  dt_digest_file(tpath("obs/data/x.fits"), sha, &e);
  snprintf(key, sizeof key, "%s#NaI", tpath("obs/data/x.fits"));
  dt_journal *j;
  int ok = dt_journal_open(tpath("obs/night.session"), DT_JOURNAL_RW, "lee", &j, &e) == DT_OK;
  ok = ok && verdict_record(j, key, sha, DT_VERDICT_DETECTED, NULL) == DT_OK;
  if (ok) dt_journal_close(j);
  size_t tn;
  unsigned char *txt = slurp(tpath("obs/night.session"), &tn);
  CHECK(ok && txt && strstr((char *)txt, "\tfile=data/x.fits#NaI\t") &&
            !strncmp((char *)txt, "doubletty-session 4\t", 20),
        "version 4; the path is recorded relative to the session's directory");
  free(txt);

  ok = rename(tpath("obs"), tpath("moved")) == 0;
  CHECK(ok, "the directory moved");
  ok = ok && dt_journal_open(tpath("moved/night.session"), DT_JOURNAL_RW, "lee", &j, &e) == DT_OK;
  snprintf(key, sizeof key, "%s#NaI", tpath("moved/data/x.fits"));
  const dt_journal_entry *en = ok ? dt_journal_lookup(j, key, 0, 0) : NULL;
  CHECK(en && en->state.verdict == DT_VERDICT_DETECTED, "after the move the path still finds it");
  dt_target t = {.path = key};
  en = ok ? dt_journal_find(j, &t) : NULL;
  CHECK(en && en->state.verdict == DT_VERDICT_DETECTED, "... without a digest too");
  char where[400];
  CHECK(en && !strcmp(dt_journal_resolve(j, en->target.path, where, sizeof where), key),
        "the hint resolves to the file's new place: %s", en ? where : "");
  ok = ok && verdict_record(j, key, sha, DT_VERDICT_UNSURE, NULL) == DT_OK;
  CHECK(ok && dt_journal_count(j) == 1, "a new verdict goes on the same spectrum");
  if (ok) dt_journal_close(j);
  ok = dt_journal_open(tpath("moved/night.session"), DT_JOURNAL_READ_ONLY, NULL, &j, &e) == DT_OK;
  en = ok ? dt_journal_entry_at(j, 0) : NULL;
  CHECK(ok && dt_journal_count(j) == 1 && en->nchanges == 2 &&
            en->state.verdict == DT_VERDICT_UNSURE && dt_journal_warning_count(j) == 0,
        "replayed: one spectrum, two changes, no warning");
  if (ok) dt_journal_close(j);
}

/* A file of version 1, written line by line in the old format. */
static void test_version1_reads(void) {
  static const char sha[] = "ba7816bf8f01cfea414140de5dae2223b00361a396177a9cb410ff61f20015ad";
  const char *p = tpath("old.session");
  FILE *f = fopen(p, "w");
  fprintf(f, "doubletty-session 1\tcreated=2025-02-01T09:00:00.000Z\tprogram=doubletty 0.1.0\n");
  old_line(f, "2025-02-01T09:01:00.000Z\tuser=ines\tfile=/survey/run7/q1.fits#NaI\thdu=0\trow=0\t"
              "sha256=ba7816bf8f01cfea414140de5dae2223b00361a396177a9cb410ff61f20015ad\t"
              "act=verdict\tverdict=detected\t=>\tverdict=detected\tncomp=0\tfull=1\t"
              "doublet=NaI\tvsys=0\tR=0\tfwhm=0\tvlo=-300\tvhi=300\torder=1\twindows=\tnote=");
  old_line(f, "2025-02-01T09:02:00.000Z\tuser=ines\tfile=/survey/run7/q2.fits#NaI\thdu=0\trow=3\t"
              "sha256=\tact=verdict\tverdict=unusable\t=>\tverdict=unusable\tncomp=0\tfull=1\t"
              "doublet=NaI\tvsys=0\tR=0\tfwhm=0\tvlo=-300\tvhi=300\torder=1\twindows=\tnote=");
  fclose(f);
  dt_journal *j;
  dt_err e;
  int ok = dt_journal_open(p, DT_JOURNAL_READ_ONLY, NULL, &j, &e) == DT_OK;
  CHECK(ok && dt_journal_count(j) == 2 && dt_journal_warning_count(j) == 0,
        "a version-1 file reads: 2 spectra, no warning");
  dt_target t = {.path = "/elsewhere/q1.fits#NaI"};
  memcpy(t.sha256, sha, sizeof sha);
  const dt_journal_entry *en = ok ? dt_journal_find(j, &t) : NULL;
  CHECK(en && en->state.verdict == DT_VERDICT_DETECTED, "a record with a digest is found by it");
  en = ok ? dt_journal_lookup(j, "/survey/run7/q2.fits#NaI", 0, 3) : NULL;
  CHECK(en && en->state.verdict == DT_VERDICT_UNUSABLE, "a record without is found by its path");
  if (ok) dt_journal_close(j);

  /* appending keeps the file's own version: the path as given, no name */
  ok = dt_journal_open(p, DT_JOURNAL_RW, "ines", &j, &e) == DT_OK;
  ok = ok && verdict_record(j, "/survey/run7/q2.fits#NaI", NULL, DT_VERDICT_NONE, "knot B") == DT_OK;
  if (ok) dt_journal_close(j);
  size_t tn;
  unsigned char *txt = slurp(p, &tn);
  CHECK(ok && txt && !strncmp((char *)txt, "doubletty-session 1\t", 20) &&
            strstr((char *)txt, "\tfile=/survey/run7/q2.fits#NaI\thdu=0\trow=0") &&
            !strstr((char *)txt, "name="),
        "an append to a version-1 file is a version-1 record");
  free(txt);
}

/* The list's name for a spectrum is recorded and read back. */
static void test_name(void) {
  const char *p = tpath("named.session");
  dt_journal *j;
  dt_err e;
  int ok = dt_journal_open(p, DT_JOURNAL_RW, "oda", &j, &e) == DT_OK;
  ok = ok && verdict_record(j, "/d/n1.fits#NaI", NULL, DT_VERDICT_DETECTED, "NGC 7 arm\tA") == DT_OK;
  ok = ok && verdict_record(j, "/d/n1.fits#NaI", NULL, DT_VERDICT_UNSURE, NULL) == DT_OK;
  if (ok) dt_journal_close(j);
  size_t tn;
  unsigned char *txt = slurp(p, &tn);
  CHECK(txt && strstr((char *)txt, "\tname=NGC 7 arm\\tA\t"), "the name is written, escaped");
  free(txt);
  ok = ok && dt_journal_open(p, DT_JOURNAL_READ_ONLY, NULL, &j, &e) == DT_OK;
  const dt_journal_entry *en = ok ? dt_journal_entry_at(j, 0) : NULL;
  CHECK(en && en->target.name && !strcmp(en->target.name, "NGC 7 arm\tA"),
        "the entry keeps the last name recorded: %s", en && en->target.name ? en->target.name : "(none)");
  if (ok) dt_journal_close(j);
  dt_journal_reader *rd;
  dt_journal_record rec;
  ok = dt_journal_reader_open(p, &rd, &e) == DT_OK;
  int got = ok && dt_journal_reader_next(rd, &rec, &e) == DT_OK && rec.target.name &&
            !strcmp(rec.target.name, "NGC 7 arm\tA");
  got = got && dt_journal_reader_next(rd, &rec, &e) == DT_OK && !rec.target.name;
  CHECK(got, "the line reader gives the name of the record that has one");
  if (ok) dt_journal_reader_close(rd);
}

/* The line reader counts what it skipped. */
static void test_reader_damaged(void) {
  const char *p = tpath("named.session");
  size_t n;
  unsigned char *txt = slurp(p, &n);
  char *first = txt ? strchr((char *)txt, '\n') + 1 : NULL;
  if (first) first[5] ^= 1; /* a changed byte: the check sum no longer matches */
  const char *q = tpath("damaged.session");
  if (txt) spit(q, txt, n - 3); /* and the last line cut short */
  free(txt);
  dt_journal_reader *rd;
  dt_journal_record rec;
  dt_err e;
  int ok = dt_journal_reader_open(q, &rd, &e) == DT_OK;
  int nok = 0, nbad = 0, rc;
  while (ok && (rc = dt_journal_reader_next(rd, &rec, &e)) != DT_ENOTFOUND) {
    if (rc == DT_OK) nok++;
    else if (rc == DT_EFORMAT) nbad++;
    else break;
  }
  CHECK(ok && nok == 0 && nbad == 2 && dt_journal_reader_damaged(rd) == 2,
        "two damaged lines: the reader says 2 (%d good, %d bad)", nok, nbad);
  if (ok) dt_journal_reader_close(rd);
}

int main(void) {
  snprintf(dir, sizeof dir, "/tmp/dt-jid-XXXXXX");
  if (!mkdtemp(dir)) {
    printf("FAIL - cannot make a temp dir\n");
    return 1;
  }
  test_compare_across_directories();
  test_moved_session_resumes();
  test_version1_reads();
  test_name();
  test_reader_damaged();
  char cmd[128];
  snprintf(cmd, sizeof cmd, "rm -rf %s", dir);
  if (system(cmd) != 0) printf("(could not remove %s)\n", dir);
  return dt_test_done();
}
