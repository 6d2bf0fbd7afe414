/* The vetting session: apply an action, refit, record, adopt (session.h).
 *
 * Every change is checked on a copy of the judgement; a change to the model
 * is refitted at once, the fit entering the copy as a DT_ACT_FIT action;
 * the action is then appended to the journal together with the state it led
 * to (one record, one fsync per change; the journal writes the whole state
 * when it does not follow from the action alone, so a replay restores
 * fitted values exactly), and only then is the copy adopted.  If an append
 * fails the journal is "failed": the message says so and every later change
 * is refused, so nothing is shown as done that the file does not hold.
 *
 * Loading a target and the automatic first pass live in session_load.c;
 * the journal is touched only by dt_session_journal_target/record here and the look-ups
 * there. */
#include "doubletty/session.h"

#include <math.h>
#include <stdarg.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "doubletty/autofit.h"
#include "doubletty/model.h"
#include "doubletty/num.h"
#include "session_priv.h"

void dt_session_say(dt_session *ss, dt_session_tone tone, const char *fmt, ...) {
  va_list ap;
  va_start(ap, fmt);
  vsnprintf(ss->msg, sizeof ss->msg, fmt, ap);
  va_end(ap);
  ss->tone = tone;
}

dt_session *dt_session_alloc(const dt_atomic *atomic, dt_journal *jn) {
  dt_session *ss = calloc(1, sizeof *ss);
  if (!ss) return NULL;
  ss->undo = malloc(DT_SESSION_UNDO_MAX * sizeof *ss->undo);
  ss->redo = malloc(DT_SESSION_UNDO_MAX * sizeof *ss->redo);
  if (!ss->undo || !ss->redo) {
    dt_session_free(ss);
    return NULL;
  }
  ss->atomic = atomic;
  ss->jn = jn;
  ss->auto_refit = 1;
  dt_analysis_opts ao;
  dt_analysis_opts_init(&ao);
  ss->nsigma = ao.limit_nsigma;
  dt_judgement_init(&ss->j);
  return ss;
}

void dt_session_free(dt_session *ss) {
  if (!ss) return;
  dt_session_unload(ss);
  dt_session_linked_free(ss);
  free(ss->undo);
  free(ss->redo);
  free(ss);
}

/* ---------------------------------------------------------------- journal */

/* The one place a target of the journal is built. */
dt_target dt_session_journal_target(const dt_session *ss) {
  dt_target t;
  memset(&t, 0, sizeof t);
  t.path = ss->key;
  t.hdu = 0;
  t.row = ss->row;
  memcpy(t.sha256, ss->sha, sizeof t.sha256);
  t.name = ss->name; /* the list's name=, "" if none */
  if (ss->loaded && ss->spec) {
    snprintf(t.frame, sizeof t.frame, "%s", dt_frame_name(ss->spec->frame));
    if (ss->spec->has_pos)
      dt_num_snprintf(t.sky, sizeof t.sky, "%.8f,%+.8f", ss->spec->ra, ss->spec->dec);
  }
  return t;
}

int dt_session_writable(dt_session *ss) {
  if (!ss->jn) {
    dt_session_say(ss, DT_TONE_BAD, "no session file: judgements are not accepted");
    return 0;
  }
  if (dt_journal_read_only(ss->jn)) {
    dt_session_say(ss, DT_TONE_WARN, "read-only session: looking only, judgements are not accepted");
    return 0;
  }
  if (dt_journal_failed(ss->jn)) {
    const dt_err *e = dt_journal_error(ss->jn);
    dt_session_say(ss, DT_TONE_BAD, "SESSION FILE FAILED (%s) - judgements refused; quit and check the disk",
                   e && e->what[0] ? e->what : "write error");
    return 0;
  }
  return 1;
}

/* The one place the inspector appends to the journal.  DT_OK on success;
 * otherwise the message says why. */
static int record(dt_session *ss, const dt_action *a, const dt_judgement *after, int with_meas) {
  if (!dt_session_writable(ss)) return DT_EIO;
  dt_target t = dt_session_journal_target(ss);
  dt_meas_summary m;
  if (with_meas) {
    /* with several systems, the target's own measurements are recorded */
    const dt_analysis_out *o = ss->an_ok && !ss->an_fallback ? &ss->out : NULL;
    dt_analysis_out *t = NULL;
    if (o && ss->systems.n > 1 && ss->has_sysmeas && ss->sysmeas[0].measure_status == DT_OK &&
        (t = malloc(sizeof *t)) != NULL) {
      *t = *o;
      memcpy(t->line, ss->sysmeas[0].line, sizeof t->line);
      t->meas_vlo = ss->sysmeas[0].mvlo;
      t->meas_vhi = ss->sysmeas[0].mvhi;
      t->saturated = dt_systems_saturated(t->line);
      o = t;
    }
    dt_meas_summary_from_analysis(o, ss->nsigma, ss->has_suggest ? ss->suggested : DT_VERDICT_NONE, &m);
    free(t);
  }
  dt_err e;
  dt_err_clear(&e);
  int rc = dt_journal_append(ss->jn, &t, a, after, with_meas ? &m : NULL, &e);
  if (rc == DT_OK) return DT_OK;
  if (rc == DT_EINVAL) dt_session_say(ss, DT_TONE_BAD, "not recorded (%s): change dropped", e.what);
  else
    dt_session_say(ss, DT_TONE_BAD, "SESSION FILE FAILED: %s - nothing more can be recorded; judgements refused",
                   e.what[0] ? e.what : dt_status_str(rc));
  return rc == DT_EINVAL ? DT_EINVAL : DT_EIO;
}

/* ---------------------------------------------------------------- analysis */

int dt_session_intervals_pending(const dt_session *ss) {
  return ss->defer_intervals && ss->loaded && ss->an_ok && ss->out.fitted && !ss->intervals_tried &&
         !ss->out.have_intervals &&
         ss->out.fit.status == DT_OK && ss->out.fit.ncomp > 0 && ss->out.fit.ncomp == ss->j.ncomp;
}

void dt_session_finish_intervals(dt_session *ss) {
  if (!dt_session_intervals_pending(ss)) return;
  ss->intervals_tried = 1;
  dt_analysis_run_intervals(ss->an, &ss->j, &ss->out);
}

static void analyse_main(dt_session *ss, const dt_judgement *j, int fit);

void dt_session_analyse_state(dt_session *ss, const dt_judgement *j, int fit) {
  analyse_main(ss, j, fit);
  if (!fit || j->nlinked == 0 || j->ncomp == 0) dt_session_linked_eval(ss, j); /* a joint refit shows them after */
}

static void analyse_main(dt_session *ss, const dt_judgement *j, int fit) {
  ss->an_ok = 0;
  ss->intervals_tried = 0;
  ss->an_fallback = 0;
  ss->an_msg[0] = '\0';
  if (!ss->loaded) return;
  dt_err e;
  dt_err_clear(&e);
  if (fit) ss->nfits++;
  int rc = fit ? dt_analysis_run(ss->an, j, &ss->out, &e) : dt_analysis_eval(ss->an, j, &ss->out, &e);
  ss->has_sysmeas = 0;
  if (rc == DT_OK || (fit && rc == DT_ENOCONV)) {
    ss->an_ok = 1;
    /* each system measured in this state (components as the analysis has them) */
    dt_judgement now = *j;
    now.ncomp = ss->out.fit.ncomp;
    memcpy(now.comp, ss->out.fit.comp, now.ncomp * sizeof now.comp[0]);
    for (size_t k = 0; k < ss->systems.n; k++) {
      dt_system_result *m = &ss->sysmeas[k];
      memset(m, 0, sizeof *m);
      m->measure_status = dt_systems_measure(ss->an, &ss->systems, &now, k, m->line, &m->mvlo, &m->mvhi,
                                             &m->ncomp);
    }
    ss->has_sysmeas = ss->systems.n > 0;
    if (rc == DT_ENOCONV) snprintf(ss->an_msg, sizeof ss->an_msg, "the fit did not converge: %s", e.what);
    return;
  }
  snprintf(ss->an_msg, sizeof ss->an_msg, "%s%s%s", e.where, e.where[0] ? ": " : "",
           e.what[0] ? e.what : dt_status_str(rc));
  if (j->nwin > 0) {
    /* windows too few or too narrow for a continuum: draw the components on
       the automatic continuum meanwhile, so the data stay in view */
    dt_judgement autoc = *j;
    autoc.nwin = 0;
    dt_err_clear(&e);
    if (dt_analysis_eval(ss->an, &autoc, &ss->out, &e) == DT_OK) {
      ss->an_ok = 1;
      ss->an_fallback = 1;
      char why[sizeof ss->an_msg];
      snprintf(why, sizeof why, "%s", ss->an_msg);
      snprintf(ss->an_msg, sizeof ss->an_msg, "the continuum windows cannot carry the fit yet (%.300s): "
               "automatic continuum shown", why);
    }
  }
}

/* Refit state *j in place: its components take the fit's values through a
 * DT_ACT_FIT action.  0 when there is a fit to keep. */
static int fit_into(dt_session *ss, dt_judgement *j) {
  if (j->nlinked > 0 && j->ncomp > 0 && ss->loaded) return dt_session_joint_into(ss, j);
  dt_session_analyse_state(ss, j, 1);
  if (!ss->an_ok || ss->an_fallback || ss->out.fit.ncomp != j->ncomp) return -1;
  dt_action a;
  dt_action_init(&a, DT_ACT_FIT);
  a.fit = ss->out.fit;
  return dt_judgement_apply(j, &a) == DT_OK ? 0 : -1;
}

static void push(dt_judgement *stack, size_t *n, const dt_judgement *j) {
  if (*n == DT_SESSION_UNDO_MAX) {
    memmove(stack, stack + 1, (DT_SESSION_UNDO_MAX - 1) * sizeof *stack);
    (*n)--;
  }
  stack[(*n)++] = *j;
}

static void adopt(dt_session *ss, const dt_judgement *next) {
  push(ss->undo, &ss->nundo, &ss->j);
  ss->nredo = 0;
  ss->j = *next;
  ss->pending = 0;
  if (ss->sel >= ss->j.ncomp) ss->sel = ss->j.ncomp ? ss->j.ncomp - 1 : 0;
}

static int model_change(dt_action_kind k) { return k != DT_ACT_VERDICT && k != DT_ACT_NOTE; }

static int change_seq(dt_session *ss, const dt_action *const *a, int n);

/* May the refit of state j after actions a[0..n) be cut at fit_slice?
 * Not for linked species (a joint fit) nor actions that point to a state. */
static int sliced(const dt_session *ss, const dt_judgement *j, const dt_action *const *a, int n) {
  if (!(ss->fit_slice > 0) || !ss->auto_refit || j->nlinked > 0 || j->ncomp == 0 ||
      n > (int)(sizeof ss->pend_a / sizeof ss->pend_a[0]))
    return 0;
  for (int i = 0; i < n; i++)
    if (a[i]->state) return 0;
  return 1;
}

/* The refit of *j (the state after the change), cut at fit_slice when
 * allowed: 1 when it was cut -- the change is then pending, shown as typed
 * with the fit as far as it got -- else 0 with *j refitted (or left when
 * the fit failed, analysed as it stands). */
static int refit_change(dt_session *ss, dt_judgement *j, const dt_action *const *a, int n) {
  int cut = sliced(ss, j, a, n);
  dt_judgement typed = *j;
  double was = cut ? dt_analysis_time_limit(ss->an, ss->fit_slice) : 0.0;
  ss->out.fit_info.timed_out = 0;
  int failed = !ss->auto_refit || fit_into(ss, j);
  if (cut) dt_analysis_time_limit(ss->an, was);
  if (cut && ss->an_ok && ss->out.fit_info.timed_out) {
    *j = typed;
    ss->fit_pending = 1;
    ss->pend_before = ss->j;
    ss->pend_n = n;
    for (int i = 0; i < n; i++) ss->pend_a[i] = *a[i];
    ss->j = typed;
    ss->an_msg[0] = '\0';
    return 1;
  }
  if (failed) dt_session_analyse_state(ss, j, 0);
  return 0;
}

int dt_session_fit_pending(const dt_session *ss) { return ss->fit_pending; }

int dt_session_finish_fit(dt_session *ss) {
  if (!ss->fit_pending) return DT_OK;
  ss->fit_pending = 0;
  ss->j = ss->pend_before;
  const dt_action *a[sizeof ss->pend_a / sizeof ss->pend_a[0]];
  for (int i = 0; i < ss->pend_n; i++) a[i] = &ss->pend_a[i];
  double slice = ss->fit_slice;
  ss->fit_slice = 0;
  int rc = change_seq(ss, a, ss->pend_n);
  ss->fit_slice = slice;
  return rc;
}

/* Actions a[0..n) as one change (one undo step): each is recorded with the
 * state it leads to; the last one, when it changes the model, is refitted
 * first (before anything is recorded: a refit cut at fit_slice leaves the
 * whole change pending).  If a later record fails, the states recorded so
 * far are kept. */
static int change_seq(dt_session *ss, const dt_action *const *a, int n) {
  dt_session_finish_fit(ss);
  if (!dt_session_writable(ss)) return DT_EIO;
  dt_judgement next = ss->j;
  for (int i = 0; i < n; i++)
    if (dt_judgement_apply(&next, a[i]) != DT_OK) {
      dt_session_say(ss, DT_TONE_WARN, "that change does not fit the current state");
      return DT_EINVAL;
    }
  int refit = n > 0 && model_change(a[n - 1]->kind) && ss->loaded;
  dt_judgement fitted = next;
  if (refit && refit_change(ss, &fitted, a, n)) return DT_OK;
  next = ss->j;
  dt_judgement done = ss->j;
  int ndone = 0;
  for (int i = 0; i < n; i++) {
    dt_judgement_apply(&next, a[i]);
    int last = i == n - 1;
    if (last && refit) next = fitted;
    int rc = record(ss, a[i], &next, last && (ss->loaded || a[i]->kind != DT_ACT_NOTE));
    if (rc != DT_OK) {
      if (ndone) adopt(ss, &done);
      if (model_change(a[i]->kind) || ndone) dt_session_analyse_state(ss, &ss->j, 0); /* back to what is on record */
      return rc;
    }
    done = next;
    ndone++;
  }
  adopt(ss, &done);
  return DT_OK;
}

int dt_session_apply(dt_session *ss, const dt_action *a) { return change_seq(ss, &a, 1); }

/* ---------------------------------------------------------------- actions */

static const dt_doublet *doublet_of(const dt_session *ss) { return dt_atomic_find(ss->atomic, ss->j.doublet); }

static int need_comp(dt_session *ss) {
  if (ss->j.ncomp == 0) {
    dt_session_say(ss, DT_TONE_WARN, "no component: add one first");
    return 0;
  }
  if (ss->sel >= ss->j.ncomp) ss->sel = ss->j.ncomp - 1;
  return 1;
}

/* Column density of a new component from the optical depth at v:
 * tau0 = 1.497e-15 N lambda f / b (N cm^-2, lambda A, b km/s;
 * Spitzer 1978, Physical Processes in the ISM, eq. 3-44), with tau from the
 * normalised flux of the stronger line, kept within [0.05, 3]. */
static double guess_logN(const dt_session *ss, double v) {
  const dt_doublet *d = doublet_of(ss);
  if (!d || !ss->an_ok) return 13.0;
  const double *vel = dt_analysis_velocity(ss->an, 0), *flux = dt_analysis_flux(ss->an),
               *cont = dt_analysis_continuum(ss->an);
  const unsigned char *mask = dt_analysis_mask(ss->an);
  if (!vel || !flux || !cont) return 13.0;
  double best = INFINITY, fn = 1;
  for (size_t i = 0; i < ss->out.n; i++) {
    if (mask[i] || !(cont[i] > 0) || !isfinite(flux[i])) continue;
    double dv = fabs(vel[i] - v);
    if (dv < best) {
      best = dv;
      fn = flux[i] / cont[i];
    }
  }
  double tau = fn > 0 ? -log(fn) : 3.0;
  if (!(tau > 0.05)) tau = 0.05;
  if (tau > 3) tau = 3;
  double N = tau * DT_SESSION_NEW_B / (1.497e-15 * d->line[0].lambda0 * d->line[0].f);
  return log10(N);
}

int dt_session_add(dt_session *ss, double v) {
  dt_session_finish_fit(ss);
  if (ss->j.ncomp >= DT_MAX_COMP) {
    dt_session_say(ss, DT_TONE_WARN, "%d components at most", DT_MAX_COMP);
    return DT_EINVAL;
  }
  if (!(v > ss->j.vlo && v < ss->j.vhi)) {
    dt_session_say(ss, DT_TONE_WARN, "%+.0f km/s is not inside the fit window (%+.0f to %+.0f km/s)", v,
                   ss->j.vlo, ss->j.vhi);
    return DT_EINVAL;
  }
  dt_action a;
  dt_action_init(&a, DT_ACT_COMP_ADD);
  a.x[0] = guess_logN(ss, v);
  a.x[1] = DT_SESSION_NEW_B;
  a.x[2] = v;
  int rc = dt_session_apply(ss, &a);
  if (rc == DT_OK) {
    ss->sel = ss->j.ncomp - 1;
    dt_session_say(ss, DT_TONE_GOOD, "component %zu added at %+.1f km/s", ss->sel + 1, v);
  }
  return rc;
}

int dt_session_remove(dt_session *ss) {
  dt_session_finish_fit(ss);
  if (!need_comp(ss)) return DT_EINVAL;
  dt_action a;
  dt_action_init(&a, DT_ACT_COMP_REMOVE);
  a.index = (int)ss->sel;
  size_t was = ss->sel;
  int rc = dt_session_apply(ss, &a);
  if (rc == DT_OK) dt_session_say(ss, DT_TONE_TEXT, "component %zu removed", was + 1);
  return rc;
}

int dt_session_select(dt_session *ss, int step) {
  dt_session_finish_fit(ss);
  if (!need_comp(ss)) return DT_EINVAL;
  size_t n = ss->j.ncomp;
  ss->sel = (ss->sel + n + (size_t)(step % (int)n + (int)n)) % n;
  return DT_OK;
}

static const unsigned hold_bit[3] = {DT_FREEZE_V, DT_FREEZE_B, DT_FREEZE_N};
static const char *const param_name[3] = {"velocity", "b", "log N"};

int dt_session_nudge(dt_session *ss, dt_session_param p, double d) {
  dt_session_finish_fit(ss);
  if (!need_comp(ss)) return DT_EINVAL;
  dt_component c = ss->j.comp[ss->sel];
  if (p == DT_PARAM_V) {
    c.v += d;
    if (c.v <= ss->j.vlo || c.v >= ss->j.vhi) {
      dt_session_say(ss, DT_TONE_WARN, "velocity would leave the fit window (%+.0f to %+.0f km/s)", ss->j.vlo,
                     ss->j.vhi);
      return DT_EINVAL;
    }
  } else if (p == DT_PARAM_B) {
    c.b += d;
    if (c.b < 0.5) c.b = 0.5;
    if (c.b > 299) c.b = 299;
  } else {
    c.logN += d;
    if (c.logN < 8.1) c.logN = 8.1;
    if (c.logN > 22.9) c.logN = 22.9;
  }
  dt_action set, hold;
  dt_action_init(&set, DT_ACT_COMP_SET);
  set.index = (int)ss->sel;
  set.x[0] = c.logN;
  set.x[1] = c.b;
  set.x[2] = c.v;
  /* a nudged parameter is held, or the refit would put it back */
  unsigned bits = ss->j.frozen[ss->sel];
  dt_action_init(&hold, DT_ACT_FREEZE);
  hold.index = (int)ss->sel;
  hold.ival = (int)(bits | hold_bit[p]);
  const dt_action *seq[2] = {&hold, &set};
  int was_held = (bits & hold_bit[p]) != 0;
  size_t k = ss->sel;
  int rc = was_held ? change_seq(ss, seq + 1, 1) : change_seq(ss, seq, 2);
  if (rc != DT_OK) return rc;
  const dt_component *now = &ss->j.comp[k];
  double val = p == DT_PARAM_V ? now->v : p == DT_PARAM_B ? now->b : now->logN;
  dt_session_say(ss, DT_TONE_TEXT, "component %zu: %s %s%.2f%s, held%s", k + 1, param_name[p],
                 p == DT_PARAM_V ? "" : "= ", val, p == DT_PARAM_LOGN ? "" : " km/s",
                 ss->an_msg[0] ? " (the fit did not converge)" : "; the others refitted");
  return DT_OK;
}

int dt_session_hold(dt_session *ss, dt_session_param p) {
  dt_session_finish_fit(ss);
  if (!need_comp(ss)) return DT_EINVAL;
  dt_action a;
  dt_action_init(&a, DT_ACT_FREEZE);
  a.index = (int)ss->sel;
  a.ival = (int)(ss->j.frozen[ss->sel] ^ hold_bit[p]);
  size_t k = ss->sel;
  int rc = dt_session_apply(ss, &a);
  if (rc == DT_OK)
    dt_session_say(ss, DT_TONE_TEXT, "%s of component %zu %s", param_name[p], k + 1,
                   ((unsigned)a.ival & hold_bit[p]) ? "held" : "released (fitted)");
  return rc;
}

int dt_session_tie(dt_session *ss) {
  dt_session_finish_fit(ss);
  dt_action a;
  dt_action_init(&a, DT_ACT_TIE_B);
  a.ival = !ss->j.tie_b;
  int rc = dt_session_apply(ss, &a);
  if (rc == DT_OK) dt_session_say(ss, DT_TONE_TEXT, a.ival ? "one b for all components" : "each component its own b");
  return rc;
}

int dt_session_covering(dt_session *ss) {
  dt_session_finish_fit(ss);
  dt_action a;
  dt_action_init(&a, DT_ACT_COVERING);
  a.ival = !ss->j.covering;
  int rc = dt_session_apply(ss, &a);
  if (rc == DT_OK)
    dt_session_say(ss, DT_TONE_TEXT, a.ival ? "partial covering: a covering factor per component"
                                            : "partial covering off: every component covers the source");
  return rc;
}

int dt_session_order(dt_session *ss, int step) {
  dt_session_finish_fit(ss);
  int o = ss->j.cont_order + step;
  if (o < -1 || o > DT_MAX_CONT - 1) {
    dt_session_say(ss, DT_TONE_WARN, "continuum order stays %d (range -1..%d)", ss->j.cont_order, DT_MAX_CONT - 1);
    return DT_EINVAL;
  }
  dt_action a;
  dt_action_init(&a, DT_ACT_CONT_ORDER);
  a.ival = o;
  int rc = dt_session_apply(ss, &a);
  if (rc == DT_OK) {
    if (o < 0) dt_session_say(ss, DT_TONE_TEXT, "continuum fixed at 1 (spectrum taken as normalised)");
    else dt_session_say(ss, DT_TONE_TEXT, "continuum order %d", o);
  }
  return rc;
}

int dt_session_window_add(dt_session *ss, double lo, double hi) {
  dt_session_finish_fit(ss);
  dt_action a;
  dt_action_init(&a, DT_ACT_WINDOW_ADD);
  a.x[0] = lo < hi ? lo : hi;
  a.x[1] = lo < hi ? hi : lo;
  int rc = dt_session_apply(ss, &a);
  if (rc == DT_OK && ss->an_fallback)
    dt_session_say(ss, DT_TONE_WARN, "continuum window %.2f-%.2f A added (%zu in all); too few pixels in the "
                   "windows for a continuum yet: the automatic one is shown", a.x[0], a.x[1], ss->j.nwin);
  else if (rc == DT_OK)
    dt_session_say(ss, DT_TONE_GOOD, "continuum window %.2f-%.2f A added (%zu in all)", a.x[0], a.x[1], ss->j.nwin);
  return rc;
}

int dt_session_window_remove(dt_session *ss, double lambda) {
  dt_session_finish_fit(ss);
  for (size_t i = 0; i < ss->j.nwin; i++)
    if (lambda >= ss->j.win[i].lo && lambda <= ss->j.win[i].hi) {
      dt_action a;
      dt_action_init(&a, DT_ACT_WINDOW_REMOVE);
      a.index = (int)i;
      int rc = dt_session_apply(ss, &a);
      if (rc == DT_OK)
        dt_session_say(ss, DT_TONE_GOOD, "continuum window removed (%zu left%s)", ss->j.nwin,
                       ss->j.nwin ? "" : ": automatic continuum");
      return rc;
    }
  dt_session_say(ss, DT_TONE_WARN, "no continuum window there");
  return DT_ENOTFOUND;
}

int dt_session_refit(dt_session *ss) {
  dt_session_finish_fit(ss);
  if (!dt_session_writable(ss)) return DT_EIO;
  dt_judgement next = ss->j;
  if (fit_into(ss, &next)) {
    dt_session_say(ss, DT_TONE_WARN, "%s", ss->an_msg[0] ? ss->an_msg : "nothing to fit");
    return DT_EINVAL;
  }
  dt_action a;
  dt_action_init(&a, next.has_joint ? DT_ACT_JOINT_FIT : DT_ACT_FIT);
  a.fit = next.fit;
  a.joint = next.joint;
  int rc = record(ss, &a, &next, 1);
  if (rc != DT_OK) {
    dt_session_analyse_state(ss, &ss->j, 0);
    return rc;
  }
  ss->j = next;
  ss->pending = 0;
  if (ss->an_msg[0]) dt_session_say(ss, DT_TONE_WARN, "%s", ss->an_msg);
  else dt_session_say(ss, DT_TONE_GOOD, "refitted%s", next.has_joint ? " jointly" : "");
  return DT_OK;
}

/* Replace the components by the automatic first pass for the settings of
 * base (j, or j with a new doublet), recording action a (NULL: an autofit
 * record of the new state).  why opens the message. */
int dt_session_autofit_to(dt_session *ss, const dt_judgement *base, const dt_action *a, const char *why) {
  dt_session_finish_fit(ss);
  if (!ss->loaded) {
    dt_session_say(ss, DT_TONE_WARN, "no data to fit");
    return DT_EINVAL;
  }
  if (!dt_session_writable(ss)) return DT_EIO;
  dt_judgement trial = *base;
  trial.ncomp = 0;
  trial.has_fit = 0;
  dt_autofit_out af;
  dt_err e;
  dt_err_clear(&e);
  int rc = dt_autofit_run(ss->an, &trial, NULL, &af, &e);
  if (rc != DT_OK && rc != DT_ENOCONV) {
    dt_session_say(ss, DT_TONE_BAD, "first pass failed: %s", e.what[0] ? e.what : dt_status_str(rc));
    dt_session_analyse_state(ss, &ss->j, 0);
    return rc;
  }
  dt_action r;
  if (!a) {
    dt_action_init(&r, DT_ACT_AUTOFIT);
    r.state = &trial;
    a = &r;
  }
  ss->out = af.an; /* the measurements recorded are the new state's */
  ss->an_ok = 1;
  if (trial.nlinked > 0 && ss->auto_refit) dt_session_joint_into(ss, &trial); /* linked: jointly */
  int keep = ss->has_suggest;
  dt_verdict ks = ss->suggested;
  char kr[sizeof ss->reason];
  memcpy(kr, ss->reason, sizeof kr);
  dt_session_suggest(ss, &af);
  rc = record(ss, a, &trial, 1);
  if (rc != DT_OK) {
    ss->has_suggest = keep;
    ss->suggested = ks;
    memcpy(ss->reason, kr, sizeof kr);
    dt_session_analyse_state(ss, &ss->j, 0);
    return rc;
  }
  adopt(ss, &trial);
  ss->sel = 0;
  dt_session_analyse_state(ss, &ss->j, 0);
  dt_session_keep_intervals(ss, &af.an);
  dt_session_say(ss, DT_TONE_GOOD, "%s%zu component%s, suggested %s (%s)", why, ss->j.ncomp,
                 ss->j.ncomp == 1 ? "" : "s", dt_verdict_name(ss->suggested), ss->reason);
  return DT_OK;
}

void dt_session_keep_intervals(dt_session *ss, const dt_analysis_out *first) {
  if (!ss->an_ok || !first->have_intervals || ss->out.fit.ncomp != first->fit.ncomp ||
      memcmp(ss->out.fit.comp, first->fit.comp, first->fit.ncomp * sizeof first->fit.comp[0]))
    return;
  memcpy(ss->out.logN_int, first->logN_int, sizeof ss->out.logN_int);
  ss->out.have_intervals = 1;
}

int dt_session_autofit(dt_session *ss) { return dt_session_autofit_to(ss, &ss->j, NULL, "first pass: "); }

static int covers(const dt_spectrum *sp, const dt_doublet *d, double vsys) {
  for (int l = 0; l < 2; l++) {
    double w = dt_wavelength(0, d->line[l].lambda0, vsys);
    if (w < sp->wave[0] || w > sp->wave[sp->n - 1]) return 0;
  }
  return 1;
}

int dt_session_switch_doublet(dt_session *ss) {
  dt_session_finish_fit(ss);
  if (!ss->loaded) {
    dt_session_say(ss, DT_TONE_WARN, "no data: the doublet cannot change");
    return DT_EINVAL;
  }
  size_t nd = dt_atomic_count(ss->atomic), at = 0;
  for (size_t i = 0; i < nd; i++)
    if (dt_atomic_get(ss->atomic, i) == doublet_of(ss)) at = i;
  for (size_t k = 1; k < nd; k++) {
    const dt_doublet *d = dt_atomic_get(ss->atomic, (at + k) % nd);
    if (!covers(ss->spec, d, ss->j.vsys)) continue;
    dt_action a;
    dt_action_init(&a, DT_ACT_DOUBLET);
    snprintf(a.text, sizeof a.text, "%s", d->name);
    dt_judgement next = ss->j;
    if (dt_judgement_apply(&next, &a) != DT_OK) return DT_EINVAL;
    char why[48];
    snprintf(why, sizeof why, "%s: first pass found ", d->name);
    return dt_session_autofit_to(ss, &next, &a, why);
  }
  dt_session_say(ss, DT_TONE_WARN, "no other doublet of the table is covered by this spectrum");
  return DT_ENOTFOUND;
}

static int undo_redo(dt_session *ss, int redo) {
  dt_session_finish_fit(ss);
  size_t *n = redo ? &ss->nredo : &ss->nundo;
  dt_judgement *stack = redo ? ss->redo : ss->undo;
  if (*n == 0) {
    dt_session_say(ss, DT_TONE_WARN, redo ? "nothing to redo" : "nothing to undo");
    return DT_EINVAL;
  }
  const dt_judgement *to = &stack[*n - 1];
  if (!dt_session_writable(ss)) return DT_EIO;
  dt_action a;
  dt_action_init(&a, DT_ACT_RESTORE);
  a.state = to;
  int rc = record(ss, &a, to, 0);
  if (rc != DT_OK) return rc;
  push(redo ? ss->undo : ss->redo, redo ? &ss->nundo : &ss->nredo, &ss->j);
  ss->j = *to;
  (*n)--;
  if (ss->sel >= ss->j.ncomp) ss->sel = ss->j.ncomp ? ss->j.ncomp - 1 : 0;
  dt_session_analyse_state(ss, &ss->j, 0);
  dt_session_say(ss, DT_TONE_TEXT, redo ? "redone" : "undone");
  return DT_OK;
}

int dt_session_undo(dt_session *ss) { return undo_redo(ss, 0); }
int dt_session_redo(dt_session *ss) { return undo_redo(ss, 1); }

int dt_session_verdict(dt_session *ss, dt_verdict v) {
  dt_session_finish_fit(ss);
  if (!ss->loaded && v != DT_VERDICT_UNUSABLE) {
    dt_session_say(ss, DT_TONE_WARN, "this file cannot be read: only 'unusable' or a note");
    return DT_EINVAL;
  }
  dt_action a;
  dt_action_init(&a, DT_ACT_VERDICT);
  a.ival = v;
  if (ss->selsys > 0 && ss->selsys < ss->systems.n) {
    const char *name = ss->systems.sys[ss->selsys].name;
    if (ss->jn && dt_journal_version(ss->jn) < 3) {
      dt_session_say(ss, DT_TONE_WARN,
                     "this session file (format version %d) holds only the target's verdict: "
                     "judge %s in a new session file", dt_journal_version(ss->jn), name);
      return DT_EINVAL;
    }
    snprintf(a.text, sizeof a.text, "%s", name);
  }
  int rc = dt_session_apply(ss, &a);
  if (rc == DT_OK && ss->selsys > 0)
    dt_session_say(ss, DT_TONE_GOOD, "saved: %s %s", a.text, dt_verdict_name(v));
  return rc;
}

int dt_session_select_system(dt_session *ss, int step) {
  dt_session_finish_fit(ss);
  size_t n = ss->systems.n;
  if (n <= 1) {
    dt_session_say(ss, DT_TONE_WARN, "only the target system here%s%s",
                   ss->systems.note[0] ? ": " : "", ss->systems.note);
    return DT_ENOTFOUND;
  }
  ss->selsys = (ss->selsys + n + (size_t)(step < 0 ? n - 1 : 1)) % n;
  const dt_system *y = &ss->systems.sys[ss->selsys];
  dt_verdict v = dt_judgement_system_verdict(&ss->j, ss->selsys ? y->name : "");
  dt_session_say(ss, DT_TONE_TEXT, "%s (%.0f..%.0f km/s): verdict %s%s%s", y->name,
                 y->vlo, y->vhi, v == DT_VERDICT_NONE ? "none yet" : dt_verdict_name(v),
                 ss->has_sysres ? ", suggested " : "",
                 ss->has_sysres ? dt_verdict_name(ss->sysres[ss->selsys].suggested) : "");
  return DT_OK;
}

int dt_session_note(dt_session *ss, const char *text) {
  dt_session_finish_fit(ss);
  if (!strcmp(text, ss->j.note)) {
    dt_session_say(ss, DT_TONE_TEXT, "note unchanged");
    return DT_OK;
  }
  dt_action a;
  dt_action_init(&a, DT_ACT_NOTE);
  snprintf(a.text, sizeof a.text, "%s", text);
  int rc = dt_session_apply(ss, &a);
  if (rc == DT_OK) dt_session_say(ss, DT_TONE_GOOD, "note saved");
  return rc;
}

int dt_session_at_bound(const dt_session *ss, size_t k, dt_session_param p) {
  if (k >= ss->j.ncomp) return 0;
  const dt_component *c = &ss->j.comp[k];
  double x, lo, hi;
  if (p == DT_PARAM_B) {
    x = c->b;
    lo = DT_FIT_B_MIN;
    hi = DT_FIT_B_MAX;
  } else if (p == DT_PARAM_LOGN) {
    x = c->logN;
    lo = DT_FIT_LOGN_MIN;
    hi = DT_FIT_LOGN_MAX;
  } else {
    x = c->v;
    lo = ss->j.vlo;
    hi = ss->j.vhi;
  }
  double tol = 1e-3 * (hi - lo);
  return x <= lo + tol || x >= hi - tol;
}
