/* Linked species in the session file (format version 4): link, b-tie and
 * joint-fit records written and replayed bit for bit (every species' log N,
 * T and b_turb), resumed for writing, damaged records skipped, and a
 * version-3 file read unchanged and kept in version 3. */
#include <math.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <unistd.h>

#include "doubletty/journal.h"
#include "doubletty/judge.h"
#include "fixtures.h"
#include "harness.h"

static char dir[64];

static const char *tpath(const char *name) {
  static char p[4][256];
  static int k;
  k = (k + 1) % 4;
  snprintf(p[k], sizeof p[k], "%s/%s", dir, name);
  return p[k];
}

/* FNV-1a 32-bit (offset basis 2166136261, prime 16777619: the published FNV
 * parameters), the check sum of a session line. */
static uint32_t fnv1a(const char *p, size_t n) {
  uint32_t h = 2166136261u;
  for (size_t i = 0; i < n; i++) h = (h ^ (unsigned char)p[i]) * 16777619u;
  return h;
}

/* A record line sealed with its check sum. */
static void seal(char *out, size_t n, const char *body) {
  snprintf(out, n, "%s\tsum=%08x\n", body, (unsigned)fnv1a(body, strlen(body)));
}

static const dt_target T = {.path = "sky/s17.fits#NaI", .hdu = 1, .row = 0};

/* Apply a to the recorded state (or *s0 for a first record) and append it. */
static int put(dt_journal *j, const dt_action *a, dt_judgement *out, dt_err *e) {
  const dt_journal_entry *en = dt_journal_find(j, &T);
  dt_judgement s = *out;
  if (en) s = en->state;
  if (dt_judgement_apply(&s, a) != DT_OK) return -1;
  int rc = dt_journal_append(j, &T, a, &s, NULL, e);
  if (rc == DT_OK) *out = s;
  return rc;
}

static dt_action link_act(const char *name, int on) {
  dt_action a;
  dt_action_init(&a, DT_ACT_LINK);
  snprintf(a.text, sizeof a.text, "%s", name);
  a.ival = on;
  return a;
}

/* A joint fit with awkward numbers (thirds, tiny errors) so that a replay
 * that is not exact shows. */
static dt_action joint_of(const dt_judgement *s) {
  dt_action a;
  dt_action_init(&a, DT_ACT_JOINT_FIT);
  a.fit.status = DT_OK;
  a.fit.niter = 17;
  a.fit.ncomp = s->ncomp;
  for (size_t k = 0; k < s->ncomp; k++) {
    a.fit.comp[k] = (dt_component){12.0 + 1.0 / 3.0 + (double)k, 3.0 + 1.0 / 7.0, -25.0 + 40.0 * (double)k};
    a.fit.err[k] = (dt_component){0.01 / 3.0, 0.2, 1e-300};
  }
  a.fit.chi2 = 312.0 / 7.0;
  a.fit.dof = 301;
  a.fit.chi2_red = a.fit.chi2 / 301.0;
  a.fit.bic = 400.25;
  a.fit.npix = 320;
  dt_linked_fit_clear(&a.joint);
  a.joint.nspecies = s->nlinked;
  for (size_t i = 0; i < s->nlinked; i++) {
    snprintf(a.joint.sp[i].doublet, sizeof a.joint.sp[i].doublet, "%s", s->linked[i]);
    for (size_t k = 0; k < s->ncomp; k++) {
      a.joint.sp[i].logN[k] = 11.0 + 2.0 / 3.0 + 0.1 * (double)(i + k);
      a.joint.sp[i].logN_err[k] = k ? 0.04 / 3.0 : INFINITY;
      a.joint.sp[i].b[k] = 2.0 + 1.0 / 9.0 * (double)(i + 1);
      a.joint.sp[i].b_err[k] = 0.3;
    }
  }
  for (size_t k = 0; k < s->ncomp; k++) {
    a.joint.T[k] = 7321.0 + 1.0 / 3.0;
    a.joint.T_err[k] = 812.5;
    a.joint.bturb[k] = 1.0 + 1.0 / 11.0;
    a.joint.bturb_err[k] = NAN;
  }
  return a;
}

static void test_round_trip(void) {
  dt_err e;
  dt_journal *j;
  CHECK(dt_journal_open(tpath("a.session"), DT_JOURNAL_RW, "ola", &j, &e) == DT_OK, "new session");
  dt_judgement s;
  dt_judgement_init(&s);
  dt_action a;
  dt_action_init(&a, DT_ACT_COMP_ADD);
  a.x[0] = 12.0, a.x[1] = 4.0, a.x[2] = -25.0;
  CHECK(put(j, &a, &s, &e) == DT_OK, "a component");
  a.x[2] = 15.0;
  put(j, &a, &s, &e);
  a = link_act("CaII", 1);
  CHECK(put(j, &a, &s, &e) == DT_OK, "link CaII recorded");
  a = link_act("KI", 1);
  CHECK(put(j, &a, &s, &e) == DT_OK, "link KI recorded");
  dt_action_init(&a, DT_ACT_BTIE);
  a.ival = DT_BTIE_THERMAL;
  CHECK(put(j, &a, &s, &e) == DT_OK, "b rule thermal recorded");
  a = joint_of(&s);
  CHECK(put(j, &a, &s, &e) == DT_OK && s.has_joint, "joint fit recorded");
  dt_judgement held = s;
  dt_journal_close(j);

  size_t n;
  char *txt = (char *)slurp(tpath("a.session"), &n);
  CHECK(txt && !strncmp(txt, "doubletty-session 4\t", 20), "header version 4");
  CHECK(txt && strstr(txt, "\tact=link\tdoublet=CaII\tlink=1\t=>") && strstr(txt, "\tlinked=CaII,KI"),
        "a link record: act=link doublet=CaII link=1, the state's linked=");
  CHECK(txt && strstr(txt, "\tact=b-tie\trule=thermal\t=>") && strstr(txt, "\tb-rule=thermal"),
        "a b-tie record: rule=thermal, the state's b-rule=");
  CHECK(txt && strstr(txt, "\tact=joint-fit\t=>") && strstr(txt, "\tjoint=2\tsp1=CaII:") &&
            strstr(txt, "\tsp2=KI:") && strstr(txt, "\tthermal="),
        "a joint-fit record: joint=2, sp1=CaII, sp2=KI, thermal=");
  free(txt);

  CHECK(dt_journal_open(tpath("a.session"), DT_JOURNAL_READ_ONLY, NULL, &j, &e) == DT_OK, "reopen");
  const dt_journal_entry *en = dt_journal_find(j, &T);
  CHECK(en && dt_judgement_same(&en->state, &held), "replay restores the state bit for bit");
  CHECK(en && en->state.joint.sp[1].logN[0] == held.joint.sp[1].logN[0] &&
            isinf(en->state.joint.sp[0].logN_err[0]) && en->state.joint.T[1] == 7321.0 + 1.0 / 3.0 &&
            isnan(en->state.joint.bturb_err[0]),
        "every species' log N, T and b_turb as recorded (inf and NaN errors too)");
  CHECK(dt_journal_warning_count(j) == 0 && !(en && (en->flags & DT_JFLAG_REPLAY_MISMATCH)),
        "no warnings, no mismatch");
  dt_journal_close(j);

  /* the record reader sees the actions */
  dt_journal_reader *r;
  dt_journal_record *rec = malloc(sizeof *rec);
  int nlink = 0, njoint = 0, nbt = 0;
  if (dt_journal_reader_open(tpath("a.session"), &r, &e) == DT_OK) {
    while (dt_journal_reader_next(r, rec, &e) == DT_OK) {
      if (rec->action.kind == DT_ACT_LINK && rec->action.ival == 1) nlink++;
      if (rec->action.kind == DT_ACT_BTIE && rec->action.ival == DT_BTIE_THERMAL) nbt++;
      if (rec->action.kind == DT_ACT_JOINT_FIT &&
          dt_linked_fit_same(&rec->action.joint, &held.joint, held.ncomp))
        njoint++;
    }
    dt_journal_reader_close(r);
  }
  CHECK(nlink == 2 && nbt == 1 && njoint == 1, "reader: 2 links, 1 b rule, 1 joint fit (%d %d %d)",
        nlink, nbt, njoint);

  /* resume: unlink KI, the joint fit goes */
  CHECK(dt_journal_open(tpath("a.session"), DT_JOURNAL_RW, "ola", &j, &e) == DT_OK, "resume");
  a = link_act("KI", 0);
  CHECK(put(j, &a, &s, &e) == DT_OK && s.nlinked == 1 && !s.has_joint, "unlink KI");
  dt_action_init(&a, DT_ACT_BTIE);
  a.ival = DT_BTIE_FREE;
  put(j, &a, &s, &e);
  a = joint_of(&s);
  CHECK(put(j, &a, &s, &e) == DT_OK && isnan(s.joint.T[0]), "a joint fit under free: no T");
  dt_action_init(&a, DT_ACT_RESTORE);
  a.state = &held;
  CHECK(put(j, &a, &s, &e) == DT_OK && dt_judgement_same(&s, &held), "undo back to the thermal fit");
  dt_journal_close(j);
  CHECK(dt_journal_open(tpath("a.session"), DT_JOURNAL_READ_ONLY, NULL, &j, &e) == DT_OK &&
            (en = dt_journal_find(j, &T)) && dt_judgement_same(&en->state, &held) &&
            dt_journal_warning_count(j) == 0,
        "the restored state replays exactly");
  dt_journal_close(j);
  free(rec);
}

/* Damaged linked records: each is skipped with a warning naming it. */
static void test_damaged(void) {
  const char *bad[] = {
      "act=link\tdoublet=CaII\tlink=1\t=>\tverdict=none\tncomp=0\tlinked=CaII,CaII",
      "act=b-tie\trule=hot\t=>\tverdict=none\tncomp=0\tb-rule=hot",
      "act=joint-fit\t=>\tverdict=none\tncomp=1\tc1=logN=12+-0.1,b=3+-1,v=0+-1\tlinked=CaII\t"
      "fit=ok\tniter=3\tchi2=1\tdof=1\tchi2r=1\tbic=1\tnpix=9\tjoint=1\tsp1=KI:12+-0.1/3+-1",
      "act=joint-fit\t=>\tverdict=none\tncomp=2\tc1=logN=12+-0.1,b=3+-1,v=0+-1\t"
      "c2=logN=12+-0.1,b=3+-1,v=9+-1\tlinked=CaII\tfit=ok\tniter=3\tchi2=1\tdof=1\tchi2r=1\t"
      "bic=1\tnpix=9\tjoint=1\tsp1=CaII:12+-0.1/3+-1",
      "act=joint-fit\t=>\tverdict=none\tncomp=1\tc1=logN=12+-0.1,b=3+-1,v=0+-1\tlinked=CaII\t"
      "fit=ok\tniter=3\tchi2=1\tdof=1\tchi2r=1\tbic=1\tnpix=9\tjoint=1\tsp1=CaII:12+-0.1/3+-1\t"
      "thermal=8000+-100/1+-0.1",
      "act=joint-fit\t=>\tverdict=none\tncomp=1\tc1=logN=12+-0.1,b=3+-1,v=0+-1\tlinked=CaII",
  };
  const char *why[] = {"linked twice", "rule", "sp1", "sp1", "thermal", "joint-fit"};
  int ok = 1;
  for (size_t i = 0; i < sizeof bad / sizeof bad[0]; i++) {
    char body[2048], line[2100];
    snprintf(body, sizeof body, "2026-01-02T03:04:05.000Z\tuser=x\tfile=b.fits#NaI\thdu=0\trow=0\tsha256=\t%s",
             bad[i]);
    seal(line, sizeof line, body);
    dt_journal_record rec;
    dt_err e;
    int rc = dt_journal_parse(line, &rec, &e);
    if (rc != DT_EFORMAT || !strstr(e.what, why[i])) {
      ok = 0;
      printf("  bad line %zu: rc %d, %s\n", i + 1, rc, rc ? e.what : "accepted");
    }
  }
  CHECK(ok, "six damaged linked records refused, each naming what is wrong");
}

/* A version-3 file (as that version wrote it) reads unchanged, appends stay
 * in version 3, and a link is refused there with the file untouched. */
static void test_version3(void) {
  char l1[1024], l2[1024], text[4096];
  seal(l1, sizeof l1,
       "2026-01-02T03:04:05.000Z\tuser=ana\tfile=c.fits#NaI\thdu=0\trow=0\tsha256=\tact=comp-add\t"
       "logN=12.5\tb=4\tv=-10\t=>\tverdict=none\tncomp=1\tc1=logN=12.5,b=4,v=-10\tfull=1\t"
       "doublet=NaI\tvsys=1200\tR=30000\tfwhm=0\tvlo=-600\tvhi=600\torder=2\twindows=\tnote=\t"
       "systems=target:-300:300");
  seal(l2, sizeof l2,
       "2026-01-02T03:05:00.000Z\tuser=ana\tfile=c.fits#NaI\thdu=0\trow=0\tsha256=\tact=verdict\t"
       "verdict=detected\t=>\tverdict=detected\tncomp=1\tc1=logN=12.5,b=4,v=-10");
  snprintf(text, sizeof text, "doubletty-session 3\tcreated=2026-01-02T03:00:00.000Z\tprogram=doubletty 0.1.0\n%s%s",
           l1, l2);
  FILE *f = fopen(tpath("v3.session"), "w");
  fputs(text, f);
  fclose(f);

  dt_err e;
  dt_journal *j;
  CHECK(dt_journal_open(tpath("v3.session"), DT_JOURNAL_RW, "bo", &j, &e) == DT_OK &&
            dt_journal_version(j) == 3 && dt_journal_warning_count(j) == 0,
        "a version-3 file opens without warnings");
  dt_target t = {.path = "c.fits#NaI"};
  const dt_journal_entry *en = dt_journal_find(j, &t);
  CHECK(en && en->state.verdict == DT_VERDICT_DETECTED && en->state.ncomp == 1 &&
            en->state.vsys == 1200 && en->state.nlinked == 0 && en->state.btie == DT_BTIE_SAME &&
            !en->state.has_joint,
        "its state: one component, detected, nothing linked");
  dt_judgement s = en ? en->state : (dt_judgement){0};
  dt_action a = link_act("CaII", 1);
  dt_judgement after = s;
  dt_judgement_apply(&after, &a);
  int rc = dt_journal_append(j, &t, &a, &after, NULL, &e);
  CHECK(rc == DT_EVERSION && strstr(e.what, "version 3"), "a link is refused in version 3: %s",
        rc ? e.what : "accepted");
  /* a state whose lines are split into hyperfine components (hfs=1, new
     in version 4) is refused too */
  dt_action_init(&a, DT_ACT_NOTE);
  snprintf(a.text, sizeof a.text, "split");
  after = s;
  dt_judgement_apply(&after, &a);
  after.hyperfine = 1;
  rc = dt_journal_append(j, &t, &a, &after, NULL, &e);
  CHECK(rc == DT_EVERSION && strstr(e.what, "hyperfine"), "hyperfine structure is refused in version 3: %s",
        rc ? e.what : "accepted");
  dt_action_init(&a, DT_ACT_NOTE);
  snprintf(a.text, sizeof a.text, "still version 3");
  after = s;
  dt_judgement_apply(&after, &a);
  CHECK(dt_journal_append(j, &t, &a, &after, NULL, &e) == DT_OK, "a note appends");
  dt_journal_close(j);
  size_t n;
  char *txt = (char *)slurp(tpath("v3.session"), &n);
  CHECK(txt && !strncmp(txt, text, strlen(text)) && txt[18] == '3' && !strstr(txt, "linked=") &&
            !strstr(txt, "act=link") && !strstr(txt, "hfs=") && strstr(txt, "note=still version 3"),
        "the file stays version 3, its lines as they were, no link written");
  free(txt);
}

int main(void) {
  snprintf(dir, sizeof dir, "/tmp/dt-test.jlink.%ld", (long)getpid());
  mkdir(dir, 0755);
  test_round_trip();
  test_damaged();
  test_version3();
  if (!getenv("KEEP")) {
    unlink(tpath("a.session"));
    unlink(tpath("v3.session"));
    rmdir(dir);
  }
  return dt_test_done();
}
