/* Partial covering in the session file: act=covering, and the state's
 * covering=, cf= and fcf= fields written by dt_journal_format and read back
 * by dt_journal_parse to the same state bit for bit; nothing of it written
 * without covering (files without covering keep their lines); malformed
 * covering fields refused.  The check sum of an edited line is recomputed
 * here with FNV-1a 32 (the published algorithm: Fowler, Noll and Vo,
 * offset basis 2166136261, prime 16777619), as the format defines. */
#include <math.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "doubletty/journal.h"
#include "doubletty/judge.h"
#include "harness.h"

#define TIME "2026-01-01T00:00:00.000Z"

static dt_target target(void) {
  dt_target t;
  memset(&t, 0, sizeof t);
  t.path = "a.txt#NaI";
  return t;
}

static dt_judgement covered_state(void) {
  dt_judgement j;
  dt_judgement_init(&j);
  j.ncomp = 2;
  j.comp[0] = (dt_component){13.1, 10.5, -3.25};
  j.comp[1] = (dt_component){12.4, 6.0, 21.0};
  j.covering = 1;
  j.cf[0] = 0.6123456789;
  j.cf[1] = 1.0 - 1e-9;
  j.has_fit = 1;
  dt_fit_result *r = &j.fit;
  memset(r, 0, sizeof *r);
  r->status = DT_OK;
  r->ncomp = 2;
  memcpy(r->comp, j.comp, sizeof j.comp);
  r->err[0] = (dt_component){0.02, 0.3, 0.4};
  r->err[1] = (dt_component){0.05, 0.9, 1.1};
  r->covering = 1;
  r->cf[0] = j.cf[0];
  r->cf[1] = j.cf[1];
  r->cf_err[0] = 0.0123;
  r->cf_err[1] = 0.031;
  r->chi2 = 812.5;
  r->dof = 700;
  r->chi2_red = r->chi2 / 700;
  r->bic = 840.25;
  r->npix = 708;
  r->niter = 12;
  return j;
}

/* Format (act kind) then parse; 1 when the parsed state equals j. */
static int roundtrip(const dt_judgement *j, dt_action_kind kind, int ival, char *line, size_t n) {
  dt_target t = target();
  dt_action a;
  dt_action_init(&a, kind);
  a.ival = ival;
  if (kind == DT_ACT_FIT) a.fit = j->fit;
  dt_journal_format(line, n, TIME, "tester", &t, &a, j, NULL, 0, NULL);
  char *copy = strdup(line);
  dt_journal_record *rec = calloc(1, sizeof *rec);
  dt_err e;
  int ok = dt_journal_parse(copy, rec, &e) == DT_OK && dt_judgement_same(&rec->after, j) &&
           rec->action.kind == kind && (kind != DT_ACT_COVERING || rec->action.ival == ival);
  if (!ok) printf("       line: %s       parse: %s\n", line, e.what);
  free(rec);
  free(copy);
  return ok;
}

/* Replace the first occurrence of from by to in line (n bytes) and put a
 * fresh check sum at the end. */
static void edit_line(char *line, size_t n, const char *from, const char *to) {
  char *p = strstr(line, from);
  if (!p) return;
  char tmp[8192];
  snprintf(tmp, sizeof tmp, "%.*s%s%s", (int)(p - line), line, to, p + strlen(from));
  char *sum = strstr(tmp, "\tsum=");
  if (!sum) return;
  uint32_t h = 2166136261u;
  for (char *q = tmp; q < sum; q++) {
    h ^= (unsigned char)*q;
    h *= 16777619u;
  }
  snprintf(sum, sizeof tmp - (size_t)(sum - tmp), "\tsum=%08x\n", (unsigned)h);
  snprintf(line, n, "%s", tmp);
}

static int parses(const char *line) {
  char *copy = strdup(line);
  dt_journal_record *rec = calloc(1, sizeof *rec);
  dt_err e;
  int ok = dt_journal_parse(copy, rec, &e) == DT_OK;
  free(rec);
  free(copy);
  return ok;
}

int main(void) {
  static char line[8192], bad[8192];
  dt_judgement j = covered_state();

  CHECK(roundtrip(&j, DT_ACT_FIT, 0, line, sizeof line), "covered fit: the state read back exactly");
  CHECK(strstr(line, "\tcovering=1\t") != NULL, "covering=1 written");
  CHECK(strstr(line, "\tcf=0.6123456789+-0.0123,") != NULL, "cf= with the fit's errors");
  CHECK(strstr(line, "\tfcf=") == NULL, "no fcf= when the fit's factors are the state's");
  CHECK(roundtrip(&j, DT_ACT_COVERING, 1, line, sizeof line), "act=covering cover=1 read back");
  CHECK(strstr(line, "act=covering\tcover=1\t=>") != NULL, "act=covering cover=1 written");

  /* a failed fit: its factors differ from the state's -> fcf= */
  dt_judgement f = j;
  f.fit.status = DT_ENOCONV;
  f.fit.comp[0].logN = 13.3;
  f.fit.cf[0] = 0.55;
  CHECK(roundtrip(&f, DT_ACT_FIT, 0, line, sizeof line), "failed covered fit: read back exactly");
  CHECK(strstr(line, "\tfcf=0.55+-0.0123,") != NULL, "fcf= holds the fit's factors");

  /* no fit yet, a new component without a factor (0) */
  dt_judgement n = j;
  n.has_fit = 0;
  n.cf[1] = 0.0;
  CHECK(roundtrip(&n, DT_ACT_COVERING, 1, line, sizeof line), "covered state without a fit: read back");
  CHECK(strstr(line, "\tcf=0.6123456789,0\t") != NULL, "cf= without errors, 0 for none yet");

  /* covering off: nothing of it in the line (files without covering keep
   * their format) */
  dt_judgement o = j;
  o.covering = 0;
  o.has_fit = 0;
  CHECK(roundtrip(&o, DT_ACT_COVERING, 0, line, sizeof line), "covering off: read back");
  CHECK(!strstr(line, "covering=") && !strstr(line, "\tcf=") && !strstr(line, "fcf="),
        "covering off: no covering fields in the state");
  dt_judgement plain = o;
  memset(plain.cf, 0, sizeof plain.cf);
  plain.fit.covering = 0;
  CHECK(roundtrip(&plain, DT_ACT_NOTE, 0, line, sizeof line), "a state that never had covering");

  /* malformed covering fields are refused */
  roundtrip(&j, DT_ACT_FIT, 0, line, sizeof line);
  snprintf(bad, sizeof bad, "%s", line);
  edit_line(bad, sizeof bad, "\tcf=0.6123456789", "\tcf=1.6123456789");
  CHECK(!parses(bad), "cf above 1 refused");
  snprintf(bad, sizeof bad, "%s", line);
  edit_line(bad, sizeof bad, "\tcovering=1", "\tcovering=0");
  CHECK(!parses(bad), "cf= without covering=1 refused");
  snprintf(bad, sizeof bad, "%s", line);
  edit_line(bad, sizeof bad, "+-0.0123,", "+-0.0123,0.5+-0.1,");
  CHECK(!parses(bad), "more factors than components refused");
  snprintf(bad, sizeof bad, "%s", line);
  edit_line(bad, sizeof bad, "0.6123456789+-0.0123", "0.6123456789");
  CHECK(!parses(bad), "errors on some factors only refused");
  roundtrip(&j, DT_ACT_COVERING, 1, line, sizeof line);
  snprintf(bad, sizeof bad, "%s", line);
  edit_line(bad, sizeof bad, "cover=1", "cover=2");
  CHECK(!parses(bad), "cover=2 refused");
  CHECK(parses(line), "the unedited line parses");
  return dt_test_done();
}
