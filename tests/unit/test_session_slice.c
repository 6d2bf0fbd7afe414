/* A change whose refit runs out of the session's fit slice (session.h):
 * shown at once as typed and left pending, nothing recorded; the next
 * action, or dt_session_finish_fit, records it first; and the session file
 * and the state come out the same as without a slice (the whole refit is
 * done again from the state as typed).  A session with a slice of a
 * nanosecond (every refit cut) is compared with one without. */
#include <gsl/gsl_randist.h>
#include <gsl/gsl_rng.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>

#include "doubletty/num.h"
#include "doubletty/session.h"
#include "fixtures.h"
#include "harness.h"

/* Na I D, Morton (2003, ApJS 149, 205). */
static const char table[] = "NaI 5891.5833 0.6408 6.16e7 5897.5581 0.3201 6.14e7 Morton (2003) ApJS 149, 205\n";

/* The records of a session file without what differs between two runs:
 * the header line, each record's time (its first field) and checksum. */
static char *records(const char *path) {
  size_t n;
  char *b = (char *)slurp(path, &n);
  char *out = calloc(n + 1, 1);
  if (!b || !out) {
    free(b);
    free(out);
    return NULL;
  }
  size_t o = 0;
  char *line = strchr(b, '\n');
  while (line && *++line) {
    char *end = strchr(line, '\n'), *tab = strchr(line, '\t');
    if (!end) break;
    char *sum = strstr(line, "\tsum=");
    char *stop = sum && sum < end ? sum : end;
    char *from = tab && tab < stop ? tab : line;
    memcpy(out + o, from, (size_t)(stop - from));
    o += (size_t)(stop - from);
    out[o++] = '\n';
    line = end;
  }
  free(b);
  return out;
}


int main(void) {
  char dir[] = "/tmp/dt-slice-XXXXXX";
  if (!mkdtemp(dir)) return 1;
  char spec[128], pc[128], pr[128];
  snprintf(spec, sizeof spec, "%s/s.txt", dir);
  snprintf(pc, sizeof pc, "%s/cut.session", dir);
  snprintf(pr, sizeof pr, "%s/ref.session", dir);
  /* absorption at +40 km/s, tau0 1.0, sigma 10 km/s, S/N 50 */
  write_nai_text(spec, 77, 5940, 0.2, 40.0, 1.0, 10.0);
  dt_atomic *at = dt_atomic_new();
  CHECK(dt_atomic_parse(at, table, sizeof table - 1, NULL) == DT_OK, "atomic table");
  dt_journal *jc = NULL, *jr = NULL;
  CHECK(dt_journal_open(pc, DT_JOURNAL_RW, "tester", &jc, NULL) == DT_OK &&
            dt_journal_open(pr, DT_JOURNAL_RW, "tester", &jr, NULL) == DT_OK,
        "two session files");
  dt_session *sc = dt_session_alloc(at, jc), *sr = dt_session_alloc(at, jr);
  CHECK(sc && sr, "two sessions");
  sc->fit_slice = 1e-9; /* every refit is cut */
  dt_session_target t;
  session_target_r20000(&t, spec);
  CHECK(dt_session_load(sc, &t) == DT_OK && dt_session_load(sr, &t) == DT_OK, "the spectrum loaded in both");
  long n0 = file_lines(pc);
  size_t nc = sc->j.ncomp;

  /* a component added: shown as typed, not recorded */
  CHECK(dt_session_add(sc, 150.0) == DT_OK && dt_session_add(sr, 150.0) == DT_OK, "a component added to both");
  CHECK(dt_session_fit_pending(sc) && !dt_session_fit_pending(sr), "cut: pending; without a slice: done");
  CHECK(sc->j.ncomp == nc + 1 && sc->sel == nc && fabs(sc->j.comp[nc].v - 150.0) < 1e-9,
        "the new component is shown where it was typed (%.3f km/s)", sc->j.comp[nc].v);
  CHECK(file_lines(pc) == n0, "nothing recorded while it is fitting");
  CHECK(sc->an_ok && sc->out.fit_info.timed_out, "the fit as far as it got is there to draw");

  /* the next action records it first, then is cut itself */
  CHECK(dt_session_nudge(sc, DT_PARAM_V, 2.0) == DT_OK && dt_session_nudge(sr, DT_PARAM_V, 2.0) == DT_OK,
        "the velocity nudged in both");
  CHECK(file_lines(pc) == n0 + 1 && last_action_is(pc, "comp-add"), "the add recorded first (%ld lines)",
        file_lines(pc) - n0);
  CHECK(dt_session_fit_pending(sc), "the nudge's refit pending (the hold and the move: one change)");
  CHECK(dt_session_finish_fit(sc) == DT_OK && !dt_session_fit_pending(sc), "finished");
  CHECK(file_lines(pc) == n0 + 3 && last_action_is(pc, "comp-set"), "and recorded: the hold and the move");
  CHECK(dt_session_finish_fit(sc) == DT_OK && file_lines(pc) == n0 + 3, "finishing again writes nothing");

  /* undo and a verdict finish nothing more, and agree */
  CHECK(dt_session_undo(sc) == DT_OK && dt_session_undo(sr) == DT_OK, "undo in both");
  CHECK(dt_session_remove(sc) == DT_OK && dt_session_remove(sr) == DT_OK, "a component removed in both");
  CHECK(dt_session_verdict(sc, DT_VERDICT_DETECTED) == DT_OK && dt_session_verdict(sr, DT_VERDICT_DETECTED) == DT_OK,
        "a verdict in both (the removal recorded first)");
  CHECK(last_action_is(pc, "verdict"), "the verdict is the last record");
  CHECK(dt_judgement_same(&sc->j, &sr->j), "the same state as without a slice");
  char *a = records(pc), *b = records(pr);
  CHECK(a && b && !strcmp(a, b), "the same records as without a slice");
  free(a);
  free(b);

  CHECK(!dt_session_fit_pending(sc), "nothing left pending");
  dt_session_free(sc);
  dt_session_free(sr);
  dt_journal_close(jc);
  dt_journal_close(jr);
  dt_atomic_free(at);
  remove(spec);
  remove(pc);
  remove(pr);
  rmdir(dir);
  return dt_test_done();
}
