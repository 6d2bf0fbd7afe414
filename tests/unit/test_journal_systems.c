/* Verdicts per absorber system in the session file (format version 3):
 * system= on a verdict, verdicts= in every state, systems= in full states;
 * replay, undo (restore) and a damaged or inconsistent record; version-2
 * files still read as the target's verdicts and appended in version 2,
 * where the verdict of another system is refused. */
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

/* Apply a verdict of system sys to the recorded state and append it. */
static int verdict(dt_journal *j, const char *sys, dt_verdict v, dt_err *e) {
  dt_target t = {.path = "x.fits#NaI", .hdu = 0, .row = 0};
  const dt_journal_entry *en = dt_journal_find(j, &t);
  dt_judgement s;
  if (en) s = en->state;
  else {
    dt_judgement_init(&s);
    s.nsys = 2;
    snprintf(s.sys[0].name, sizeof s.sys[0].name, "target");
    s.sys[0].vlo = -300;
    s.sys[0].vhi = 300;
    snprintf(s.sys[1].name, sizeof s.sys[1].name, "milky-way");
    s.sys[1].vlo = -660.87133210657683;
    s.sys[1].vhi = -361.38281302502912;
  }
  dt_action a;
  dt_action_init(&a, DT_ACT_VERDICT);
  a.ival = (int)v;
  snprintf(a.text, sizeof a.text, "%s", sys);
  if (dt_judgement_apply(&s, &a) != DT_OK) return -1;
  return dt_journal_append(j, &t, &a, &s, NULL, e);
}

/* FNV-1a 32-bit (offset basis 2166136261, prime 16777619: the published FNV
 * parameters), the check sum of a session line. */
static uint32_t fnv1a(const char *p, size_t n) {
  uint32_t h = 2166136261u;
  for (size_t i = 0; i < n; i++) h = (h ^ (unsigned char)p[i]) * 16777619u;
  return h;
}

/* Replace the first `from` in the file by `to`; a record line changed gets
 * its check sum again (as if written so).  1 when replaced. */
static int rewrite(const char *path, const char *from, const char *to) {
  size_t n;
  char *txt = (char *)slurp(path, &n);
  char *at = txt ? strstr(txt, from) : NULL;
  if (!at) {
    free(txt);
    return 0;
  }
  char *ls = at;
  while (ls > txt && ls[-1] != '\n') ls--;
  char *le = strchr(at, '\n');
  char line[16384];
  snprintf(line, sizeof line, "%.*s%s%.*s", (int)(at - ls), ls, to,
           (int)(le - at - (long)strlen(from)), at + strlen(from));
  char *sum = strstr(line, "\tsum=");
  if (sum) {
    *sum = '\0';
    size_t k = strlen(line);
    snprintf(line + k, sizeof line - k, "\tsum=%08x", (unsigned)fnv1a(line, k));
  }
  FILE *f = fopen(path, "w");
  fprintf(f, "%.*s%s%s", (int)(ls - txt), txt, line, le);
  fclose(f);
  free(txt);
  return 1;
}

static const dt_journal_entry *only(const dt_journal *j) {
  return dt_journal_count(j) == 1 ? dt_journal_entry_at(j, 0) : NULL;
}

int main(void) {
  snprintf(dir, sizeof dir, "/tmp/dt-test.jsys.%ld", (long)getpid());
  mkdir(dir, 0755);
  dt_err e;
  dt_journal *j;

  /* judge: the verdicts of systems */
  dt_judgement s;
  dt_judgement_init(&s);
  dt_action a;
  dt_action_init(&a, DT_ACT_VERDICT);
  a.ival = DT_VERDICT_DETECTED;
  snprintf(a.text, sizeof a.text, "milky-way");
  CHECK(dt_judgement_apply(&s, &a) == DT_OK && s.verdict == DT_VERDICT_NONE && s.nsysv == 1 &&
            dt_judgement_system_verdict(&s, "milky-way") == DT_VERDICT_DETECTED,
        "a verdict of milky-way leaves the target's alone");
  snprintf(a.text, sizeof a.text, "target");
  a.ival = DT_VERDICT_NOT_DETECTED;
  CHECK(dt_judgement_apply(&s, &a) == DT_OK && s.verdict == DT_VERDICT_NOT_DETECTED && s.nsysv == 1,
        "system=target is the target's verdict");
  snprintf(a.text, sizeof a.text, "bad name");
  CHECK(dt_judgement_apply(&s, &a) == DT_EINVAL, "a bad system name is refused");
  snprintf(a.text, sizeof a.text, "milky-way");
  a.ival = DT_VERDICT_NONE;
  CHECK(dt_judgement_apply(&s, &a) == DT_OK && s.nsysv == 0, "verdict none clears a system's");

  /* write and read back */
  CHECK(dt_journal_open(tpath("a.session"), DT_JOURNAL_RW, "ana", &j, &e) == DT_OK, "new session");
  CHECK(verdict(j, "", DT_VERDICT_NOT_DETECTED, &e) == DT_OK, "target verdict");
  CHECK(verdict(j, "milky-way", DT_VERDICT_DETECTED, &e) == DT_OK, "milky-way verdict");
  dt_journal_close(j);
  size_t n;
  char *txt = (char *)slurp(tpath("a.session"), &n);
  CHECK(txt && !strncmp(txt, "doubletty-session 4\t", 20), "header version 4");
  char *l2 = txt ? strchr(txt, '\n') : NULL;
  l2 = l2 ? strchr(l2 + 1, '\n') : NULL; /* the second record */
  CHECK(l2 && strstr(l2, "\tact=verdict\tverdict=detected\tsystem=milky-way\t=>\tverdict=not-detected\t"
                         "verdicts=milky-way:detected\t"),
        "the record: system= on the action, verdicts= in the state");
  char *l1 = txt ? strchr(txt, '\n') + 1 : NULL;
  char *nl1 = l1 ? strchr(l1, '\n') : NULL;
  CHECK(l1 && nl1 && strstr(l1, "\tsystems=target:-300:300,milky-way:-660.8713321065768:-361.3828130250291\t") &&
            (!strstr(l1, "\tsystem=") || strstr(l1, "\tsystem=") > nl1),
        "the first (full) record carries the systems; the target's verdict has no system=");
  free(txt);
  CHECK(dt_journal_open(tpath("a.session"), DT_JOURNAL_READ_ONLY, NULL, &j, &e) == DT_OK &&
            dt_journal_warning_count(j) == 0, "read back without warnings");
  const dt_journal_entry *en = only(j);
  CHECK(en && en->state.verdict == DT_VERDICT_NOT_DETECTED &&
            dt_judgement_system_verdict(&en->state, "milky-way") == DT_VERDICT_DETECTED,
        "replayed: target not-detected, milky-way detected");
  CHECK(en && en->state.nsys == 2 && en->state.sys[1].vlo == -660.87133210657683,
        "replayed: the systems' ranges bit for bit");
  dt_journal_close(j);

  /* a record whose verdicts= does not follow from the action: flagged */
  CHECK(rewrite(tpath("a.session"), "verdicts=milky-way:detected", "verdicts=milky-way:unsure"),
        "rewrite a state");
  CHECK(dt_journal_open(tpath("a.session"), DT_JOURNAL_READ_ONLY, NULL, &j, &e) == DT_OK &&
            dt_journal_warning_count(j) == 1 && strstr(dt_journal_warning(j, 0), "does not follow"),
        "a state whose system verdicts do not follow is flagged");
  en = only(j);
  CHECK(en && dt_judgement_system_verdict(&en->state, "milky-way") == DT_VERDICT_UNSURE,
        "and the recorded verdicts adopted");
  dt_journal_close(j);
  CHECK(rewrite(tpath("a.session"), "verdicts=milky-way:unsure", "verdicts=milky-way:none"),
        "rewrite to none");
  CHECK(dt_journal_open(tpath("a.session"), DT_JOURNAL_READ_ONLY, NULL, &j, &e) == DT_OK &&
            dt_journal_warning_count(j) == 1 && strstr(dt_journal_warning(j, 0), "verdicts"),
        "verdicts=NAME:none is a bad value: %s", dt_journal_warning(j, 0) ? dt_journal_warning(j, 0) : "");
  dt_journal_close(j);

  /* version 2: read as the target's verdicts; appended in version 2 */
  CHECK(dt_journal_open(tpath("b.session"), DT_JOURNAL_RW, "ana", &j, &e) == DT_OK &&
            verdict(j, "", DT_VERDICT_DETECTED, &e) == DT_OK, "a session with a target verdict");
  dt_journal_close(j);
  /* the same lines as version 2 writes them: no systems=, a version-2 header */
  CHECK(rewrite(tpath("b.session"),
                "\tsystems=target:-300:300,milky-way:-660.8713321065768:-361.3828130250291", "") &&
            rewrite(tpath("b.session"), "doubletty-session 4", "doubletty-session 2"),
        "made a version-2 file");
  CHECK(dt_journal_open(tpath("b.session"), DT_JOURNAL_RW, "bo", &j, &e) == DT_OK &&
            dt_journal_warning_count(j) == 0, "a version-2 file opens");
  en = only(j);
  CHECK(en && en->state.verdict == DT_VERDICT_DETECTED && en->state.nsysv == 0 && en->state.nsys == 0,
        "version 2: the verdict is the target's, no systems");
  CHECK(verdict(j, "target", DT_VERDICT_UNSURE, &e) == DT_OK, "version 2: a target verdict appends");
  int rc = verdict(j, "milky-way", DT_VERDICT_DETECTED, &e);
  CHECK(rc == DT_EVERSION && strstr(e.what, "version 2"), "version 2: another system's verdict refused: %s",
        e.what);
  dt_journal_close(j);
  txt = (char *)slurp(tpath("b.session"), &n);
  CHECK(txt && txt[18] == '2' && !strstr(txt, "system") && strstr(txt, "verdict=unsure"),
        "version 2 stays version 2, no system fields");
  free(txt);
  if (getenv("KEEP")) return dt_test_done();
  unlink(tpath("a.session"));
  unlink(tpath("b.session"));
  rmdir(dir);
  return dt_test_done();
}
