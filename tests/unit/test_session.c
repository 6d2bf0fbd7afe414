/* The session core driven directly, without a terminal: a first look
 * writes nothing; add, nudge (which holds), undo, redo, note, verdict and
 * the automatic first pass each append what they should to the session
 * file, and the file replays to the state the session holds; a read-only
 * session and an unreadable spectrum refuse what they must. */
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

/* Na I D, Morton (2003, ApJS 149, 205): the same values as fixtures.h. */
static const char table[] = "NaI 5891.5833 0.6408 6.16e7 5897.5581 0.3201 6.14e7 Morton (2003) ApJS 149, 205\n";


int main(void) {
  char dir[] = "/tmp/dt-session-XXXXXX";
  if (!mkdtemp(dir)) return 1;
  char spec[128], sess[128], bad[128];
  snprintf(spec, sizeof spec, "%s/s.txt", dir);
  snprintf(sess, sizeof sess, "%s/a.session", dir);
  snprintf(bad, sizeof bad, "%s/missing.txt", dir);
  /* absorption at +40 km/s, tau0 1.2, sigma 12 km/s, S/N 50 */
  write_nai_text(spec, 4242, 5940, 0.2, 40.0, 1.2, 12.0);
  dt_atomic *at = dt_atomic_new();
  CHECK(dt_atomic_parse(at, table, sizeof table - 1, NULL) == DT_OK, "atomic table");
  dt_journal *jn = NULL;
  CHECK(dt_journal_open(sess, DT_JOURNAL_RW, "tester", &jn, NULL) == DT_OK, "session file opened");
  dt_session *ss = dt_session_alloc(at, jn);
  CHECK(ss != NULL, "session allocated");
  CHECK(ss->nsigma == 3.0, "limits at the analysis' default significance (3 sigma)");
  long n0 = file_lines(sess);

  /* a first look: the first pass is shown, nothing is written */
  dt_session_target t;
  session_target_r20000(&t, spec);
  CHECK(dt_session_load(ss, &t) == DT_OK && ss->loaded, "spectrum loaded");
  CHECK(ss->pending && ss->has_suggest, "first pass pending, with a suggestion");
  CHECK(file_lines(sess) == n0, "looking writes nothing");

  /* add a component */
  size_t nc = ss->j.ncomp;
  CHECK(dt_session_add(ss, 150.0) == DT_OK, "component added at +150 km/s");
  CHECK(ss->j.ncomp == nc + 1 && ss->sel == nc, "one more component, selected");
  CHECK(file_lines(sess) == n0 + 1 && last_action_is(sess, "comp-add"), "one comp-add record");
  CHECK(!ss->pending, "the first pass is part of the record now");
  CHECK(dt_session_add(ss, 900.0) == DT_EINVAL && strstr(ss->msg, "km/s"), "outside the window: refused, in km/s");

  /* a nudge holds what it moved: the refit does not put it back */
  double v0 = ss->j.comp[ss->sel].v;
  long n1 = file_lines(sess);
  CHECK(dt_session_nudge(ss, DT_PARAM_V, 2.0) == DT_OK, "velocity nudged");
  CHECK(ss->j.frozen[ss->sel] & DT_FREEZE_V, "the nudged velocity is held");
  CHECK(ss->j.comp[ss->sel].v == v0 + 2.0, "and stays where it was put through the refit (%.3f)",
        ss->j.comp[ss->sel].v);
  CHECK(strstr(ss->msg, "held") != NULL, "the message says it is held: %s", ss->msg);
  CHECK(file_lines(sess) == n1 + 2 && last_action_is(sess, "comp-set"), "hold and set: two records");
  CHECK(dt_session_nudge(ss, DT_PARAM_V, 2.0) == DT_OK && file_lines(sess) == n1 + 3,
        "a second nudge of a held velocity: one record");
  CHECK(ss->j.comp[ss->sel].v == v0 + 4.0, "velocity moved twice");

  /* undo / redo */
  CHECK(dt_session_undo(ss) == DT_OK && ss->j.comp[ss->sel].v == v0 + 2.0, "undo: one nudge back");
  CHECK(last_action_is(sess, "restore"), "undo is recorded as a restore");
  CHECK(dt_session_undo(ss) == DT_OK && ss->j.comp[ss->sel].v == v0 && !(ss->j.frozen[ss->sel] & DT_FREEZE_V),
        "undo again: hold and nudge taken back together");
  CHECK(dt_session_redo(ss) == DT_OK && ss->j.comp[ss->sel].v == v0 + 2.0 && (ss->j.frozen[ss->sel] & DT_FREEZE_V),
        "redo: nudged and held again");
  CHECK(dt_session_hold(ss, DT_PARAM_V) == DT_OK && !(ss->j.frozen[ss->sel] & DT_FREEZE_V), "released");
  CHECK(strstr(ss->msg, "released") != NULL, "the message says released: %s", ss->msg);
  long n2 = file_lines(sess);
  CHECK(dt_session_redo(ss) == DT_EINVAL && file_lines(sess) == n2, "nothing to redo after a change: nothing written");

  /* note and verdict */
  CHECK(dt_session_note(ss, "weak; check the red wing") == DT_OK && last_action_is(sess, "note"), "note recorded");
  CHECK(dt_session_note(ss, "weak; check the red wing") == DT_OK && file_lines(sess) == n2 + 1,
        "the same note again writes nothing");
  CHECK(dt_session_verdict(ss, DT_VERDICT_DETECTED) == DT_OK && last_action_is(sess, "verdict"), "verdict recorded");
  CHECK(ss->j.verdict == DT_VERDICT_DETECTED, "the state has it");

  /* the automatic first pass replaces the components */
  CHECK(dt_session_autofit(ss) == DT_OK && last_action_is(sess, "autofit"), "first pass recorded");
  CHECK(ss->j.ncomp >= 1, "it finds the absorption (%zu components)", ss->j.ncomp);
  int near = 0;
  for (size_t k = 0; k < ss->j.ncomp; k++) near |= fabs(ss->j.comp[k].v - 40.0) < 15.0;
  CHECK(near, "a component within 15 km/s of the injected +40 km/s (first at %.1f km/s, b %.1f, log N %.2f)",
        ss->j.ncomp ? ss->j.comp[0].v : NAN, ss->j.ncomp ? ss->j.comp[0].b : NAN,
        ss->j.ncomp ? ss->j.comp[0].logN : NAN);
  CHECK(ss->j.verdict == DT_VERDICT_DETECTED && !strcmp(ss->j.note, "weak; check the red wing"),
        "verdict and note survive the first pass");

  /* a continuum window too narrow to carry a continuum: recorded, and the
   * components are drawn on the automatic continuum meanwhile */
  long nw = file_lines(sess);
  CHECK(dt_session_window_add(ss, 5920.00, 5920.05) == DT_OK && last_action_is(sess, "window-add"), "narrow window recorded");
  CHECK(file_lines(sess) == nw + 1, "one record");
  CHECK(ss->an_ok && ss->an_fallback && strstr(ss->msg, "automatic"), "the automatic continuum stands in: %s", ss->msg);
  CHECK(isfinite(ss->out.line[0].W), "the measurement is there to draw");
  CHECK(dt_session_undo(ss) == DT_OK && ss->j.nwin == 0 && !ss->an_fallback, "undone: no window, no stand-in");

  /* parameters at a bound of the fit */
  dt_action a;
  dt_action_init(&a, DT_ACT_COMP_SET);
  a.index = 0;
  a.x[0] = ss->j.comp[0].logN;
  a.x[1] = DT_FIT_B_MAX;
  a.x[2] = ss->j.comp[0].v;
  ss->auto_refit = 0;
  CHECK(dt_session_apply(ss, &a) == DT_OK, "b set to the top of its range");
  CHECK(dt_session_at_bound(ss, 0, DT_PARAM_B) && !dt_session_at_bound(ss, 0, DT_PARAM_V), "b at a bound, v not");
  ss->auto_refit = 1;

  /* the file replays to the state the session holds */
  dt_judgement held = ss->j;
  dt_session_free(ss);
  dt_journal_close(jn);
  CHECK(dt_journal_open(sess, DT_JOURNAL_READ_ONLY, NULL, &jn, NULL) == DT_OK, "reopened read-only");
  const dt_journal_entry *en = dt_journal_lookup(jn, spec, 0, 0);
  CHECK(en && dt_judgement_same(&en->state, &held), "the replayed state is the session's");
  CHECK(en && en->has_meas && en->meas.nsigma == 3.0, "measurements recorded with their significance");

  /* read-only: looking only */
  ss = dt_session_alloc(at, jn);
  CHECK(dt_session_load(ss, &t) == DT_OK && !ss->pending, "resumed from the record");
  long n3 = file_lines(sess);
  CHECK(dt_session_verdict(ss, DT_VERDICT_UNSURE) != DT_OK && strstr(ss->msg, "read-only"),
        "read-only: a verdict is refused (%s)", ss->msg);
  CHECK(file_lines(sess) == n3, "and nothing is written");
  CHECK(dt_session_recorded_verdict(ss, spec, 0) == DT_VERDICT_DETECTED, "the recorded verdict");
  dt_session_free(ss);
  dt_journal_close(jn);

  /* intervals after the frame: a target that defers them gets a fit without
   * them, then the same intervals a plain analysis computes in its run */
  {
    char p2[160], p3[160];
    snprintf(p2, sizeof p2, "%s/d2.session", dir);
    snprintf(p3, sizeof p3, "%s/d3.session", dir);
    dt_journal *j2 = NULL, *j3 = NULL;
    CHECK(dt_journal_open(p2, DT_JOURNAL_RW, "tester", &j2, NULL) == DT_OK &&
              dt_journal_open(p3, DT_JOURNAL_RW, "tester", &j3, NULL) == DT_OK,
          "two more session files");
    dt_session *s2 = dt_session_alloc(at, j2), *s3 = dt_session_alloc(at, j3);
    dt_session_target t2;
    session_target_r20000(&t2, spec);
    t2.defer_intervals = 1;
    CHECK(s2 && s3 && dt_session_load(s2, &t2) == DT_OK && dt_session_load(s3, &t) == DT_OK, "loaded twice");
    CHECK(dt_session_add(s2, 150.0) == DT_OK && dt_session_add(s3, 150.0) == DT_OK, "a component added to both");
    CHECK(dt_session_intervals_pending(s2) && !s2->out.have_intervals, "deferred: the fit is shown without them");
    CHECK(!dt_session_intervals_pending(s3) && s3->out.have_intervals, "not deferred: computed in the run");
    dt_session_finish_intervals(s2);
    CHECK(!dt_session_intervals_pending(s2) && s2->out.have_intervals, "then computed");
    int same = s2->out.fit.ncomp == s3->out.fit.ncomp;
    /* (an end the profile does not reach is NaN on both sides; a search cut
     * short by the run's time budget on a loaded machine is not compared) */
    for (size_t k = 0; same && k < s2->out.fit.ncomp; k++) {
      const dt_profile_interval *x = &s2->out.logN_int[k], *y = &s3->out.logN_int[k];
      if (x->incomplete || y->incomplete) continue;
      same = ((isnan(x->lo) && isnan(y->lo)) || fabs(x->lo - y->lo) < 1e-9) &&
             ((isnan(x->hi) && isnan(y->hi)) || fabs(x->hi - y->hi) < 1e-9);
    }
    CHECK(same, "the same intervals either way, where both searches finished");
    dt_session_free(s2);
    dt_session_free(s3);
    dt_journal_close(j2);
    dt_journal_close(j3);
  }

  /* an unreadable spectrum: only 'unusable' or a note */
  CHECK(dt_journal_open(sess, DT_JOURNAL_RW, "tester", &jn, NULL) == DT_OK, "reopened for writing");
  ss = dt_session_alloc(at, jn);
  session_target_r20000(&t, bad);
  CHECK(dt_session_load(ss, &t) != DT_OK && !ss->loaded && ss->load_msg[0], "missing file: not loaded");
  CHECK(dt_session_verdict(ss, DT_VERDICT_DETECTED) == DT_EINVAL, "'detected' refused");
  CHECK(dt_session_add(ss, 0.0) != DT_OK || !ss->loaded, "no fit without data");
  CHECK(dt_session_verdict(ss, DT_VERDICT_UNUSABLE) == DT_OK && last_action_is(sess, "verdict"), "'unusable' recorded");
  CHECK(dt_session_note(ss, "file lost") == DT_OK && last_action_is(sess, "note"), "a note recorded");
  dt_session_free(ss);
  dt_journal_close(jn);

  dt_atomic_free(at);
  unlink(spec);
  unlink(sess);
  rmdir(dir);
  return dt_test_done();
}
