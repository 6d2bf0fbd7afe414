/* The inspector's event loop and the commands it carries out.
 *
 * Every key becomes a dt_cmd (keymap.c).  A command that changes the
 * judgement builds a dt_action and checks it on a copy of the state
 * (dt_judgement_apply); a change to the model is refitted at once, the fit
 * entering the copy as a DT_ACT_FIT action; the action is then appended to
 * the session journal together with the state it led to (one record, one
 * fsync per keystroke; the journal writes the whole state when it does not
 * follow from the action alone, so a replay restores fitted values
 * exactly), and only then does the screen adopt it.  If an append fails,
 * the journal is "failed": the status line says so at once and every later
 * judgement is refused, so the screen never shows as done what the file
 * does not hold.
 *
 * A spectrum seen for the first time gets the automatic first pass
 * (autofit.h): its components and suggested verdict are shown at once and
 * become part of the record with the first change or verdict (a first
 * record carries the whole state); merely looking at a spectrum writes
 * nothing.
 *
 * Handlers return flags (redraw, quit) that the loop acts on; drawing is
 * view.c's business. */
#include "inspector.h"

#include <errno.h>
#include <math.h>
#include <stdarg.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <time.h>

#include "doubletty/autofit.h"
#include "doubletty/model.h"
#include "insp.h"
#include "keymap.h"
#include "term.h"

enum { EV_NONE = 0, EV_REDRAW = 1, EV_QUIT = 2 };

/* Nudge steps (keymap.c's help texts say the same). */
#define STEP_V 2.0
#define STEP_V_COARSE 20.0
#define STEP_B 0.5
#define STEP_B_COARSE 5.0
#define STEP_LOGN 0.02
#define STEP_LOGN_COARSE 0.2
#define NEW_B 10.0          /* Doppler b of a new component [km/s] */

void dt_inspect_opts_init(dt_inspect_opts *o) {
  memset(o, 0, sizeof *o);
  o->colour = -1;
}

static void say(dt_insp *s, int role, const char *fmt, ...)
#if defined(__GNUC__)
    __attribute__((format(printf, 3, 4)))
#endif
    ;
static void say(dt_insp *s, int role, const char *fmt, ...) {
  va_list ap;
  va_start(ap, fmt);
  vsnprintf(s->msg, sizeof s->msg, fmt, ap);
  va_end(ap);
  s->msg_role = role;
}

static const char *keyname_of(dt_cmd c, char *buf, size_t n) {
  const dt_keybind *b = dt_keymap_of(c);
  return b ? dt_keymap_keyname(b->key, buf, n) : "?";
}

/* ---------------------------------------------------------------- journal */

/* The name a queue entry has in the session: its file (absolute, tidied),
 * then '#' and the doublet it is vetted for -- the same file may be queued
 * once per doublet (e.g. Na I and Ca II of one wide spectrum). */
static const char *entry_key(const dt_insp *s, size_t i, char *buf, size_t n) {
  const dt_qentry *e = &s->q->e[i];
  const char *d = e->doublet[0] ? e->doublet : s->o->doublet ? s->o->doublet : "NaI";
  const dt_doublet *dd = dt_atomic_find(s->atomic, d);
  snprintf(buf, n, "%s#%s", dt_queue_key(s->q, i), dd ? dd->name : d);
  return buf;
}

static dt_target target_of(const dt_insp *s) {
  dt_target t;
  memset(&t, 0, sizeof t);
  t.path = s->key;
  t.hdu = 0;
  t.row = s->q->e[s->cur].row;
  memcpy(t.sha256, s->sha, sizeof t.sha256);
  t.name = dt_queue_name(s->q, s->cur); /* the list's name=, "" if none */
  return t;
}

static void meas_of(const dt_insp *s, dt_meas_summary *m) {
  dt_meas_summary_clear(m);
  m->suggested = s->has_suggest ? s->suggested : DT_VERDICT_NONE;
  if (!s->an_ok || s->out.measure_status != DT_OK) return;
  for (int l = 0; l < 2; l++) {
    const dt_analysis_line *L = &s->out.line[l];
    m->line[l].w = L->W;
    m->line[l].w_err = L->W_err;
    m->line[l].w_lim = L->W_limit;
    m->line[l].logN_aod = L->logN_aod;
    m->line[l].logN_aod_err = L->logN_aod_err;
    m->line[l].logN_lim = L->logN_limit;
  }
  m->nsigma = 3.0;
  m->saturated = s->out.saturated;
}

/* Can judgements be made now?  Says why not. */
static int writable(dt_insp *s) {
  if (!s->jn) {
    say(s, DT_R_BAD, "no session file: judgements are not accepted");
    return 0;
  }
  if (dt_journal_read_only(s->jn)) {
    say(s, DT_R_WARN, "read-only session: looking only, judgements are not accepted");
    return 0;
  }
  if (dt_journal_failed(s->jn)) {
    const dt_err *e = dt_journal_error(s->jn);
    say(s, DT_R_BAD, "SESSION FILE FAILED (%s) - judgements refused; quit and check the disk",
        e && e->what[0] ? e->what : "write error");
    return 0;
  }
  return 1;
}

/* Append one record; 0 on success.  On failure the status line says so. */
static int record(dt_insp *s, const dt_action *a, const dt_judgement *after, int with_meas) {
  if (!writable(s)) return -1;
  dt_target t = target_of(s);
  dt_meas_summary m;
  if (with_meas) meas_of(s, &m);
  dt_err e;
  dt_err_clear(&e);
  int rc = dt_journal_append(s->jn, &t, a, after, with_meas ? &m : NULL, &e);
  if (rc == DT_OK) return 0;
  if (rc == DT_EINVAL) say(s, DT_R_BAD, "not recorded (%s): change dropped", e.what);
  else
    say(s, DT_R_BAD, "SESSION FILE FAILED: %s - nothing more can be recorded; judgements refused",
        e.what[0] ? e.what : dt_status_str(rc));
  return -1;
}

/* ---------------------------------------------------------------- analysis */

/* Analyse state j into s->out (fit: refit its components; otherwise
 * evaluate them as they are). */
static void analyse_state(dt_insp *s, const dt_judgement *j, int fit) {
  s->an_ok = 0;
  s->an_msg[0] = '\0';
  if (!s->loaded) return;
  dt_err e;
  dt_err_clear(&e);
  if (fit) s->nfits++;
  int rc = fit ? dt_analysis_run(s->an, j, &s->out, &e) : dt_analysis_eval(s->an, j, &s->out, &e);
  if (rc == DT_OK || (fit && rc == DT_ENOCONV)) {
    s->an_ok = 1;
    if (rc == DT_ENOCONV) snprintf(s->an_msg, sizeof s->an_msg, "the fit did not converge: %s", e.what);
    return;
  }
  snprintf(s->an_msg, sizeof s->an_msg, "%s%s%s", e.where, e.where[0] ? ": " : "",
           e.what[0] ? e.what : dt_status_str(rc));
}

static void analyse(dt_insp *s, int fit) { analyse_state(s, &s->j, fit); }

/* Refit state *j in place: its components take the fit's values through a
 * DT_ACT_FIT action.  0 when there is a fit to keep. */
static int fit_into(dt_insp *s, dt_judgement *j) {
  analyse_state(s, j, 1);
  if (!s->an_ok || s->out.fit.ncomp != j->ncomp) return -1;
  dt_action a;
  dt_action_init(&a, DT_ACT_FIT);
  a.fit = s->out.fit;
  return dt_judgement_apply(j, &a) == DT_OK ? 0 : -1;
}

/* Refit the current state and record the result. */
static void refit(dt_insp *s) {
  dt_judgement next = s->j;
  if (fit_into(s, &next)) return;
  dt_action a;
  dt_action_init(&a, DT_ACT_FIT);
  a.fit = next.fit;
  if (record(s, &a, &next, 1)) {
    analyse(s, 0);
    return;
  }
  s->j = next;
  s->pending = 0;
}

static void push(dt_judgement **stack, size_t *n, const dt_judgement *j) {
  if (!*stack) {
    *stack = malloc(DT_UNDO_MAX * sizeof **stack);
    if (!*stack) return;
  }
  if (*n == DT_UNDO_MAX) {
    memmove(*stack, *stack + 1, (DT_UNDO_MAX - 1) * sizeof **stack);
    (*n)--;
  }
  (*stack)[(*n)++] = *j;
}

static int model_change(dt_action_kind k) { return k != DT_ACT_VERDICT && k != DT_ACT_NOTE; }

/* The heart of every judgement: check, refit, record, adopt. */
static int change(dt_insp *s, const dt_action *a) {
  if (!writable(s)) return -1;
  dt_judgement next = s->j;
  if (dt_judgement_apply(&next, a) != DT_OK) {
    say(s, DT_R_WARN, "that change does not fit the current state");
    return -1;
  }
  int mc = model_change(a->kind);
  if (mc) {
    if (!s->auto_refit || fit_into(s, &next)) analyse_state(s, &next, 0);
  }
  if (record(s, a, &next, 1)) {
    if (mc) analyse(s, 0); /* back to what is on record */
    return -1;
  }
  push(&s->undo, &s->nundo, &s->j);
  s->nredo = 0;
  s->j = next;
  s->pending = 0;
  return 0;
}

/* ---------------------------------------------------------------- loading */

static void reset_view(dt_insp *s) {
  s->view_lo = s->j.vlo;
  s->view_hi = s->j.vhi;
  if (s->cursor_v < s->view_lo || s->cursor_v > s->view_hi) s->cursor_v = 0.5 * (s->view_lo + s->view_hi);
}

static int cmp_double(const void *a, const void *b) {
  double x = *(const double *)a, y = *(const double *)b;
  return (x > y) - (x < y);
}

/* Overview flux range: 1st to 99th percentile of the unmasked flux, widened
 * by 15%, so a cosmic ray or a sky residual does not flatten the spectrum
 * (it is marked as off the plot instead). */
static void overview_range(dt_insp *s) {
  const dt_spectrum *sp = s->spec;
  s->ov_ymin = 0;
  s->ov_ymax = 1;
  double *v = malloc(sp->n * sizeof *v);
  if (!v) return;
  size_t m = 0;
  for (size_t i = 0; i < sp->n; i++)
    if (!sp->mask[i] && isfinite(sp->flux[i])) v[m++] = sp->flux[i];
  if (m >= 2) {
    qsort(v, m, sizeof *v, cmp_double);
    double lo = v[(size_t)(0.01 * (double)(m - 1))], hi = v[(size_t)(0.99 * (double)(m - 1))];
    if (lo > 0) lo = 0;
    double pad = 0.15 * (hi - lo);
    if (!(pad > 0)) pad = fabs(hi) > 0 ? 0.1 * fabs(hi) : 1;
    s->ov_ymin = lo < 0 ? lo - pad : 0;
    s->ov_ymax = hi + pad;
  }
  free(v);
}

/* Settings of a first look: the list line, then the command line, then the
 * file's header. */
static void initial_state(dt_insp *s, dt_judgement *j) {
  const dt_qentry *q = &s->q->e[s->cur];
  const dt_inspect_opts *o = s->o;
  dt_judgement_init(j);
  const char *d = q->doublet[0] ? q->doublet : o->doublet ? o->doublet : "NaI";
  const dt_doublet *dd = dt_atomic_find(s->atomic, d);
  snprintf(j->doublet, sizeof j->doublet, "%s", dd ? dd->name : d);
  j->vsys = q->has_vsys ? q->vsys : o->has_vsys ? o->vsys : 0.0;
  if (q->resolution > 0 || q->fwhm_kms > 0) {
    j->resolution = q->resolution;
    j->fwhm_kms = q->resolution > 0 ? 0 : q->fwhm_kms;
  } else if (o->resolution > 0 || o->fwhm_kms > 0) {
    j->resolution = o->resolution;
    j->fwhm_kms = o->resolution > 0 ? 0 : o->fwhm_kms;
  } else if (s->spec && s->spec->resolution > 0) {
    j->resolution = s->spec->resolution;
    j->fwhm_kms = 0;
  } else {
    j->resolution = 0;
    j->fwhm_kms = 0;
  }
}

static void suggest_from(dt_insp *s, const dt_autofit_out *af) {
  s->has_suggest = 1;
  s->suggested = af->suggested;
  snprintf(s->reason, sizeof s->reason, "%s", af->reason);
}

static void unload(dt_insp *s) {
  dt_analysis_free(s->an);
  dt_spectrum_free(s->spec);
  s->an = NULL;
  s->spec = NULL;
  s->loaded = 0;
}

static void load(dt_insp *s, size_t idx) {
  unload(s);
  s->cur = idx;
  s->nundo = s->nredo = 0;
  s->anchor = 0;
  s->editing = 0;
  s->sel = 0;
  s->pending = 0;
  s->an_ok = 0;
  s->an_msg[0] = '\0';
  s->has_suggest = 0;
  s->reason[0] = '\0';
  s->file_changed = 0;
  s->sha[0] = '\0';
  s->load_msg[0] = '\0';
  s->msg[0] = '\0';
  s->msg_role = DT_R_TEXT;
  const char *path = dt_queue_path(s->q, idx);
  const dt_qentry *qe = &s->q->e[idx];
  entry_key(s, idx, s->key, sizeof s->key);
  const dt_journal_entry *en = s->jn ? dt_journal_lookup(s->jn, s->key, 0, qe->row) : NULL;

  dt_err e;
  dt_err_clear(&e);
  dt_read_opts ro;
  memset(&ro, 0, sizeof ro);
  ro.row = qe->row;
  int rc = dt_spectrum_read(path, &ro, &s->spec, &e);
  if (rc == DT_OK) {
    s->an = dt_analysis_alloc(s->spec, s->atomic);
    if (!s->an) {
      dt_spectrum_free(s->spec);
      s->spec = NULL;
      dt_err_set(&e, DT_ENOMEM, NULL, "out of memory");
      rc = DT_ENOMEM;
    }
  }
  if (rc != DT_OK) {
    snprintf(s->load_msg, sizeof s->load_msg, "%s%s%s%s%s", path, e.where[0] ? ": " : "", e.where,
             ": ", e.what[0] ? e.what : dt_status_str(rc));
    char k1[16], k2[16];
    say(s, DT_R_BAD, "cannot read %s - %s skips, %s marks it unusable", s->load_msg,
        keyname_of(DT_CMD_NEXT_SPECTRUM, k1, sizeof k1), keyname_of(DT_CMD_VERDICT_UNUSABLE, k2, sizeof k2));
    if (en) s->j = en->state;
    else initial_state(s, &s->j);
    reset_view(s);
    return;
  }
  s->loaded = 1;
  overview_range(s);
  if (dt_digest_file(path, s->sha, &e) != DT_OK) s->sha[0] = '\0';
  if (s->jn && s->sha[0]) { /* the session knows a spectrum by its file's digest */
    dt_target tg = target_of(s);
    const dt_journal_entry *by_id = dt_journal_find(s->jn, &tg);
    if (by_id) en = by_id;
  }

  if (en) {
    /* resume: the recorded state */
    s->j = en->state;
    s->file_changed = s->sha[0] && dt_journal_file_changed(en, s->sha);
    if (en->has_meas && en->meas.suggested != DT_VERDICT_NONE) {
      s->has_suggest = 1;
      s->suggested = en->meas.suggested;
    }
    if (!s->has_suggest) {
      dt_judgement scratch = s->j;
      dt_autofit_out af;
      if (dt_autofit_run(s->an, &scratch, NULL, &af, NULL) == DT_OK || af.suggested != DT_VERDICT_NONE)
        suggest_from(s, &af);
    }
    char why[160] = "";
    if (s->j.has_fit && s->j.fit.status == DT_OK && s->j.ncomp > 0) {
      analyse(s, 1);
      if (s->an_ok && !dt_fit_check_refit(&s->j.fit, &s->out.fit, DT_REFIT_TOL_SIGMA, why, sizeof why)) {
        dt_journal_set_flag(s->jn, s->key, 0, qe->row, DT_JFLAG_REFIT_MISMATCH, 1);
        say(s, DT_R_WARN, "a refit differs from the recorded fit: %s", why);
      }
    }
    analyse(s, 0);
    if (s->file_changed)
      say(s, DT_R_WARN, "the file has changed since it was judged (SHA-256 differs from the record)");
    else if (!why[0])
      say(s, DT_R_TEXT, "resumed from the session: %ld change%s recorded", en->nchanges,
          en->nchanges == 1 ? "" : "s");
  } else {
    /* first look: the automatic first pass, recorded at the first change */
    initial_state(s, &s->j);
    dt_judgement trial = s->j;
    dt_autofit_out af;
    dt_err_clear(&e);
    rc = dt_autofit_run(s->an, &trial, NULL, &af, &e);
    if (rc == DT_OK || rc == DT_ENOCONV) {
      s->j = trial;
      suggest_from(s, &af);
    }
    s->pending = 1;
    analyse(s, 0);
    if (!s->j.resolution && !s->j.fwhm_kms)
      say(s, DT_R_WARN, "no resolution known (file header, list R=/fwhm= or --resolution): "
                        "fitting without instrumental broadening");
  }
  if (!s->an_ok && s->an_msg[0]) say(s, DT_R_BAD, "%s", s->an_msg);
  s->cursor_v = s->j.ncomp ? s->j.comp[0].v : 0.0;
  reset_view(s);
}

/* Verdict of a queue entry (cached; the journal is asked once). */
static int verdict_of(dt_insp *s, size_t i) {
  dt_qentry *e = &s->q->e[i];
  if (e->verdict < 0) {
    char key[DT_KEY_MAX];
    const dt_journal_entry *en = s->jn ? dt_journal_lookup(s->jn, entry_key(s, i, key, sizeof key), 0, e->row) : NULL;
    e->verdict = (signed char)(en ? en->state.verdict : DT_VERDICT_NONE);
  }
  return e->verdict;
}

static size_t next_unjudged(dt_insp *s, size_t from, int *found) {
  size_t n = s->q->n;
  for (size_t k = 1; k <= n; k++) {
    size_t i = (from + k) % n;
    if (verdict_of(s, i) == DT_VERDICT_NONE) {
      *found = 1;
      return i;
    }
  }
  *found = 0;
  return from;
}

/* ---------------------------------------------------------------- commands */

static double col_step(const dt_insp *s) {
  int w = s->plot_w > 0 ? s->plot_w : 80;
  return (s->view_hi - s->view_lo) / w;
}

static void clamp_view(dt_insp *s) {
  double span = s->view_hi - s->view_lo, full = s->j.vhi - s->j.vlo;
  if (span > full) span = full;
  if (span < 10) span = 10;
  if (s->view_lo < s->j.vlo) s->view_lo = s->j.vlo;
  s->view_hi = s->view_lo + span;
  if (s->view_hi > s->j.vhi) {
    s->view_hi = s->j.vhi;
    s->view_lo = s->view_hi - span;
  }
}

static void move_cursor(dt_insp *s, double dv) {
  s->cursor_v += dv;
  if (s->cursor_v < s->j.vlo) s->cursor_v = s->j.vlo;
  if (s->cursor_v > s->j.vhi) s->cursor_v = s->j.vhi;
  double span = s->view_hi - s->view_lo;
  if (s->cursor_v < s->view_lo) {
    s->view_lo = s->cursor_v;
    s->view_hi = s->view_lo + span;
  } else if (s->cursor_v > s->view_hi) {
    s->view_hi = s->cursor_v;
    s->view_lo = s->view_hi - span;
  }
  clamp_view(s);
}

static void zoom(dt_insp *s, double f) {
  double span = (s->view_hi - s->view_lo) * f;
  double frac = (s->cursor_v - s->view_lo) / (s->view_hi - s->view_lo);
  if (!(frac >= 0 && frac <= 1)) frac = 0.5;
  s->view_lo = s->cursor_v - frac * span;
  s->view_hi = s->view_lo + span;
  clamp_view(s);
}

static void pan(dt_insp *s, double frac) {
  double d = frac * (s->view_hi - s->view_lo);
  s->view_lo += d;
  s->view_hi += d;
  clamp_view(s);
  if (s->cursor_v < s->view_lo) s->cursor_v = s->view_lo;
  if (s->cursor_v > s->view_hi) s->cursor_v = s->view_hi;
}

static const dt_doublet *doublet_of(const dt_insp *s) { return dt_atomic_find(s->atomic, s->j.doublet); }

/* Column density of a new component from the optical depth under the
 * cursor: tau0 = 1.497e-15 N lambda f / b (N cm^-2, lambda A, b km/s;
 * Spitzer 1978, Physical Processes in the ISM, eq. 3-44), with tau from the
 * normalised flux of the stronger line, kept within [0.05, 3]. */
static double guess_logN(const dt_insp *s, double v) {
  const dt_doublet *d = doublet_of(s);
  if (!d || !s->an_ok) return 13.0;
  const double *vel = dt_analysis_velocity(s->an, 0), *flux = dt_analysis_flux(s->an),
               *cont = dt_analysis_continuum(s->an);
  const unsigned char *mask = dt_analysis_mask(s->an);
  if (!vel || !flux || !cont) return 13.0;
  double best = INFINITY, fn = 1;
  for (size_t i = 0; i < s->out.n; i++) {
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
  double N = tau * NEW_B / (1.497e-15 * d->line[0].lambda0 * d->line[0].f);
  return log10(N);
}

static void cmd_window_mark(dt_insp *s) {
  const dt_doublet *d = doublet_of(s);
  if (!d) return;
  if (!s->anchor) {
    s->anchor = 1;
    s->anchor_v = s->cursor_v;
    s->anchor_panel = s->panel;
    char k[16];
    say(s, DT_R_WARN, "continuum window from %+.0f km/s: move the cursor and press %s again", s->cursor_v,
        keyname_of(DT_CMD_WINDOW_MARK, k, sizeof k));
    return;
  }
  s->anchor = 0;
  double v1 = s->anchor_v, v2 = s->cursor_v;
  if (v1 > v2) {
    double t = v1;
    v1 = v2;
    v2 = t;
  }
  double half = 0.5 * col_step(s);
  if (v2 - v1 < 2 * half) {
    v1 -= half;
    v2 += half;
  }
  double l0 = d->line[s->anchor_panel].lambda0;
  dt_action a;
  dt_action_init(&a, DT_ACT_WINDOW_ADD);
  a.x[0] = dt_wavelength(v1, l0, s->j.vsys);
  a.x[1] = dt_wavelength(v2, l0, s->j.vsys);
  if (change(s, &a) == 0)
    say(s, DT_R_GOOD, "continuum window %.2f-%.2f A added (%zu in all)", a.x[0], a.x[1], s->j.nwin);
}

static void cmd_window_unmark(dt_insp *s) {
  const dt_doublet *d = doublet_of(s);
  if (!d) return;
  double lam = dt_wavelength(s->cursor_v, d->line[s->panel].lambda0, s->j.vsys);
  for (size_t i = 0; i < s->j.nwin; i++)
    if (lam >= s->j.win[i].lo && lam <= s->j.win[i].hi) {
      dt_action a;
      dt_action_init(&a, DT_ACT_WINDOW_REMOVE);
      a.index = (int)i;
      if (change(s, &a) == 0)
        say(s, DT_R_GOOD, "continuum window removed (%zu left%s)", s->j.nwin,
            s->j.nwin ? "" : ": automatic continuum");
      return;
    }
  say(s, DT_R_WARN, "no continuum window under the cursor");
}

static void cmd_order(dt_insp *s, int d) {
  int o = s->j.cont_order + d;
  if (o < -1 || o > DT_MAX_CONT - 1) {
    say(s, DT_R_WARN, "continuum order stays %d (range -1..%d)", s->j.cont_order, DT_MAX_CONT - 1);
    return;
  }
  dt_action a;
  dt_action_init(&a, DT_ACT_CONT_ORDER);
  a.ival = o;
  if (change(s, &a) == 0) {
    if (o < 0) say(s, DT_R_TEXT, "continuum fixed at 1 (spectrum taken as normalised)");
    else say(s, DT_R_TEXT, "continuum order %d", o);
  }
}

static int need_comp(dt_insp *s) {
  if (s->j.ncomp == 0) {
    char k[16];
    say(s, DT_R_WARN, "no component: add one at the cursor with %s", keyname_of(DT_CMD_ADD_COMPONENT, k, sizeof k));
    return 0;
  }
  if (s->sel >= s->j.ncomp) s->sel = s->j.ncomp - 1;
  return 1;
}

static void cmd_add(dt_insp *s) {
  if (s->j.ncomp >= DT_MAX_COMP) {
    say(s, DT_R_WARN, "%d components at most", DT_MAX_COMP);
    return;
  }
  double v = s->cursor_v;
  if (v <= s->j.vlo || v >= s->j.vhi) {
    say(s, DT_R_WARN, "the cursor is at the edge of the fit window");
    return;
  }
  dt_action a;
  dt_action_init(&a, DT_ACT_COMP_ADD);
  a.x[0] = guess_logN(s, v);
  a.x[1] = NEW_B;
  a.x[2] = v;
  if (change(s, &a) == 0) {
    s->sel = s->j.ncomp - 1;
    say(s, DT_R_GOOD, "component %zu added at %+.1f km/s", s->sel + 1, v);
  }
}

static void cmd_remove(dt_insp *s) {
  if (!need_comp(s)) return;
  dt_action a;
  dt_action_init(&a, DT_ACT_COMP_REMOVE);
  a.index = (int)s->sel;
  size_t was = s->sel;
  if (change(s, &a) == 0) {
    if (s->sel >= s->j.ncomp && s->sel > 0) s->sel = s->j.ncomp ? s->j.ncomp - 1 : 0;
    say(s, DT_R_TEXT, "component %zu removed", was + 1);
  }
}

static void cmd_nudge(dt_insp *s, int which, double d) {
  if (!need_comp(s)) return;
  dt_component c = s->j.comp[s->sel];
  if (which == 0) {
    c.v += d;
    if (c.v <= s->j.vlo || c.v >= s->j.vhi) {
      say(s, DT_R_WARN, "velocity would leave the fit window");
      return;
    }
  } else if (which == 1) {
    c.b += d;
    if (c.b < 0.5) c.b = 0.5;
    if (c.b > 299) c.b = 299;
  } else {
    c.logN += d;
    if (c.logN < 8.1) c.logN = 8.1;
    if (c.logN > 22.9) c.logN = 22.9;
  }
  dt_action a;
  dt_action_init(&a, DT_ACT_COMP_SET);
  a.index = (int)s->sel;
  a.x[0] = c.logN;
  a.x[1] = c.b;
  a.x[2] = c.v;
  change(s, &a);
}

static void cmd_freeze(dt_insp *s, int bit, const char *what) {
  if (!need_comp(s)) return;
  dt_action a;
  dt_action_init(&a, DT_ACT_FREEZE);
  a.index = (int)s->sel;
  a.ival = s->j.frozen[s->sel] ^ bit;
  if (change(s, &a) == 0)
    say(s, DT_R_TEXT, "%s of component %zu %s", what, s->sel + 1, (a.ival & bit) ? "frozen" : "free");
}

static void cmd_tie(dt_insp *s) {
  dt_action a;
  dt_action_init(&a, DT_ACT_TIE_B);
  a.ival = !s->j.tie_b;
  if (change(s, &a) == 0) say(s, DT_R_TEXT, a.ival ? "one b for all components" : "each component its own b");
}

static void cmd_refit(dt_insp *s) {
  if (!writable(s)) return;
  refit(s);
  if (s->an_ok && !s->an_msg[0]) say(s, DT_R_GOOD, "refitted");
  else if (s->an_msg[0]) say(s, DT_R_WARN, "%s", s->an_msg);
}

/* Replace the components by the automatic first pass for the settings of
 * base (s->j, or s->j with a new doublet), recording action a (NULL: a
 * restore of the new state) with the result. */
static void autofit_to(dt_insp *s, const dt_judgement *base, const dt_action *a, const char *why) {
  if (!s->loaded || !writable(s)) return;
  dt_judgement trial = *base;
  trial.ncomp = 0;
  trial.has_fit = 0;
  dt_autofit_out af;
  dt_err e;
  dt_err_clear(&e);
  int rc = dt_autofit_run(s->an, &trial, NULL, &af, &e);
  if (rc != DT_OK && rc != DT_ENOCONV) {
    say(s, DT_R_BAD, "first pass failed: %s", e.what[0] ? e.what : dt_status_str(rc));
    analyse(s, 0);
    return;
  }
  dt_action r;
  if (!a) {
    dt_action_init(&r, DT_ACT_AUTOFIT);
    r.state = &trial;
    a = &r;
  }
  s->out = af.an; /* the measurements recorded are the new state's */
  s->an_ok = 1;
  int keep = s->has_suggest;
  dt_verdict ks = s->suggested;
  char kr[sizeof s->reason];
  memcpy(kr, s->reason, sizeof kr);
  suggest_from(s, &af);
  if (record(s, a, &trial, 1)) {
    s->has_suggest = keep;
    s->suggested = ks;
    memcpy(s->reason, kr, sizeof kr);
    analyse(s, 0);
    return;
  }
  push(&s->undo, &s->nundo, &s->j);
  s->nredo = 0;
  s->j = trial;
  s->pending = 0;
  s->sel = 0;
  analyse(s, 0);
  say(s, DT_R_GOOD, "%s%zu component%s, suggested %s (%s)", why, s->j.ncomp, s->j.ncomp == 1 ? "" : "s",
      dt_verdict_name(s->suggested), s->reason);
}

static void cmd_undo(dt_insp *s, int redo) {
  size_t *n = redo ? &s->nredo : &s->nundo;
  dt_judgement *stack = redo ? s->redo : s->undo;
  if (*n == 0) {
    say(s, DT_R_WARN, redo ? "nothing to redo" : "nothing to undo");
    return;
  }
  const dt_judgement *to = &stack[*n - 1];
  if (!writable(s)) return;
  dt_action a;
  dt_action_init(&a, DT_ACT_RESTORE);
  a.state = to;
  if (record(s, &a, to, 0)) return;
  push(redo ? &s->undo : &s->redo, redo ? &s->nundo : &s->nredo, &s->j);
  s->j = *to;
  (*n)--;
  if (s->sel >= s->j.ncomp) s->sel = s->j.ncomp ? s->j.ncomp - 1 : 0;
  analyse(s, 0);
  say(s, DT_R_TEXT, redo ? "redone" : "undone");
}

static int covers(const dt_spectrum *sp, const dt_doublet *d, double vsys) {
  for (int l = 0; l < 2; l++) {
    double w = dt_wavelength(0, d->line[l].lambda0, vsys);
    if (w < sp->wave[0] || w > sp->wave[sp->n - 1]) return 0;
  }
  return 1;
}

static void cmd_switch_doublet(dt_insp *s) {
  if (!s->loaded) return;
  size_t nd = dt_atomic_count(s->atomic), at = 0;
  for (size_t i = 0; i < nd; i++)
    if (dt_atomic_get(s->atomic, i) == doublet_of(s)) at = i;
  for (size_t k = 1; k < nd; k++) {
    const dt_doublet *d = dt_atomic_get(s->atomic, (at + k) % nd);
    if (!covers(s->spec, d, s->j.vsys)) continue;
    dt_action a;
    dt_action_init(&a, DT_ACT_DOUBLET);
    snprintf(a.text, sizeof a.text, "%s", d->name);
    dt_judgement next = s->j;
    if (dt_judgement_apply(&next, &a) != DT_OK) return;
    char why[48];
    snprintf(why, sizeof why, "%s: first pass found ", d->name);
    autofit_to(s, &next, &a, why);
    if (!strcmp(s->j.doublet, d->name)) reset_view(s);
    return;
  }
  say(s, DT_R_WARN, "no other doublet of the table is covered by this spectrum");
}

static void go_to(dt_insp *s, size_t i) {
  if (i >= s->q->n) return;
  load(s, i);
}

static void cmd_verdict(dt_insp *s, dt_verdict v) {
  if (!s->loaded && v != DT_VERDICT_UNUSABLE) {
    char k[16];
    say(s, DT_R_WARN, "this file cannot be read: only 'unusable' (%s) or a note",
        keyname_of(DT_CMD_VERDICT_UNUSABLE, k, sizeof k));
    return;
  }
  dt_action a;
  dt_action_init(&a, DT_ACT_VERDICT);
  a.ival = v;
  int was = verdict_of(s, s->cur);
  if (change(s, &a)) return;
  s->q->e[s->cur].verdict = (signed char)v;
  if (was == DT_VERDICT_NONE) s->njudged++;
  size_t done = s->cur;
  if (s->cur + 1 < s->q->n) {
    go_to(s, s->cur + 1);
    if (s->msg_role == DT_R_TEXT || !s->msg[0])
      say(s, DT_R_GOOD, "saved: #%zu %s", done + 1, dt_verdict_name(v));
  } else {
    say(s, DT_R_GOOD, "saved: #%zu %s - end of the queue (%zu of %zu judged)", done + 1, dt_verdict_name(v),
        s->njudged, s->q->n);
  }
}

static void note_commit(dt_insp *s) {
  s->editing = 0;
  s->edit[s->edit_len] = '\0';
  if (!strcmp(s->edit, s->j.note)) {
    say(s, DT_R_TEXT, "note unchanged");
    return;
  }
  dt_action a;
  dt_action_init(&a, DT_ACT_NOTE);
  snprintf(a.text, sizeof a.text, "%s", s->edit);
  if (!s->loaded) {
    /* an unreadable file can still carry a note */
    if (!writable(s)) return;
    dt_judgement next = s->j;
    if (dt_judgement_apply(&next, &a) || record(s, &a, &next, 0)) return;
    s->j = next;
    say(s, DT_R_GOOD, "note saved");
    return;
  }
  if (change(s, &a) == 0) say(s, DT_R_GOOD, "note saved");
}

static void utf8_encode(unsigned cp, char *out, size_t *k) {
  if (cp < 0x80) {
    out[0] = (char)cp;
    *k = 1;
  } else if (cp < 0x800) {
    out[0] = (char)(0xC0 | (cp >> 6));
    out[1] = (char)(0x80 | (cp & 0x3F));
    *k = 2;
  } else if (cp < 0x10000) {
    out[0] = (char)(0xE0 | (cp >> 12));
    out[1] = (char)(0x80 | ((cp >> 6) & 0x3F));
    out[2] = (char)(0x80 | (cp & 0x3F));
    *k = 3;
  } else {
    out[0] = (char)(0xF0 | (cp >> 18));
    out[1] = (char)(0x80 | ((cp >> 12) & 0x3F));
    out[2] = (char)(0x80 | ((cp >> 6) & 0x3F));
    out[3] = (char)(0x80 | (cp & 0x3F));
    *k = 4;
  }
}

/* The small line editor of the note. */
static int note_key(dt_insp *s, int key) {
  if (key == DT_KEY_ENTER) {
    note_commit(s);
  } else if (key == DT_KEY_ESC) {
    s->editing = 0;
    say(s, DT_R_TEXT, "note not changed");
  } else if (key == DT_KEY_BACKSPACE) {
    if (s->edit_pos > 0) {
      size_t p = s->edit_pos - 1;
      while (p > 0 && ((unsigned char)s->edit[p] & 0xC0) == 0x80) p--;
      memmove(s->edit + p, s->edit + s->edit_pos, s->edit_len - s->edit_pos);
      s->edit_len -= s->edit_pos - p;
      s->edit_pos = p;
    }
  } else if (key == DT_KEY_DELETE) {
    if (s->edit_pos < s->edit_len) {
      size_t p = s->edit_pos + 1;
      while (p < s->edit_len && ((unsigned char)s->edit[p] & 0xC0) == 0x80) p++;
      memmove(s->edit + s->edit_pos, s->edit + p, s->edit_len - p);
      s->edit_len -= p - s->edit_pos;
    }
  } else if (key == DT_KEY_LEFT) {
    while (s->edit_pos > 0) {
      s->edit_pos--;
      if (((unsigned char)s->edit[s->edit_pos] & 0xC0) != 0x80) break;
    }
  } else if (key == DT_KEY_RIGHT) {
    while (s->edit_pos < s->edit_len) {
      s->edit_pos++;
      if (s->edit_pos == s->edit_len || ((unsigned char)s->edit[s->edit_pos] & 0xC0) != 0x80) break;
    }
  } else if (key == DT_KEY_HOME || key == 1) {
    s->edit_pos = 0;
  } else if (key == DT_KEY_END || key == 5) {
    s->edit_pos = s->edit_len;
  } else if (key == 21) { /* ^U: clear */
    s->edit_len = s->edit_pos = 0;
  } else if (key == DT_KEY_TAB || (key >= 0x20 && key < 0x110000 && key != 0x7f)) {
    char u[4];
    size_t k;
    utf8_encode(key == DT_KEY_TAB ? ' ' : (unsigned)key, u, &k);
    if (s->edit_len + k < sizeof s->edit - 1) {
      memmove(s->edit + s->edit_pos + k, s->edit + s->edit_pos, s->edit_len - s->edit_pos);
      memcpy(s->edit + s->edit_pos, u, k);
      s->edit_len += k;
      s->edit_pos += k;
    }
  }
  s->edit[s->edit_len] = '\0';
  return EV_REDRAW;
}

static int handle(dt_insp *s, int key) {
  if (key == DT_KEY_RESIZE) return EV_REDRAW;
  if (s->editing) return note_key(s, key);
  if (s->help_page) {
    /* in the help: the help key pages on, anything else closes it */
    if (dt_keymap_lookup(key) == DT_CMD_HELP && s->help_page < s->help_pages) s->help_page++;
    else s->help_page = 0;
    if (dt_keymap_lookup(key) != DT_CMD_QUIT) return EV_REDRAW;
  }
  dt_cmd c = dt_keymap_lookup(key);
  if (c != DT_CMD_WINDOW_MARK && c != DT_CMD_NONE && s->anchor &&
      !(c >= DT_CMD_CURSOR_LEFT && c <= DT_CMD_VIEW_RESET)) {
    s->anchor = 0; /* another command drops a half-marked window */
  }
  switch (c) {
  case DT_CMD_NONE: {
    char k[16];
    if (key == DT_KEY_ESC) {
      s->anchor = 0;
      s->msg[0] = '\0';
      return EV_REDRAW;
    }
    say(s, DT_R_WARN, "no action on that key - %s lists the keys", keyname_of(DT_CMD_HELP, k, sizeof k));
    return EV_REDRAW;
  }
  case DT_CMD_QUIT: return EV_QUIT;
  case DT_CMD_HELP: s->help_page = 1; break;
  case DT_CMD_REDRAW: dt_term_invalidate(); break;
  case DT_CMD_CURSOR_LEFT: move_cursor(s, -col_step(s)); break;
  case DT_CMD_CURSOR_RIGHT: move_cursor(s, col_step(s)); break;
  case DT_CMD_CURSOR_LEFT_FAST: move_cursor(s, -8 * col_step(s)); break;
  case DT_CMD_CURSOR_RIGHT_FAST: move_cursor(s, 8 * col_step(s)); break;
  case DT_CMD_CURSOR_UP: s->panel = 0; break;
  case DT_CMD_CURSOR_DOWN: s->panel = 1; break;
  case DT_CMD_ZOOM_IN: zoom(s, 1 / 1.5); break;
  case DT_CMD_ZOOM_OUT: zoom(s, 1.5); break;
  case DT_CMD_PAN_LEFT: pan(s, -0.25); break;
  case DT_CMD_PAN_RIGHT: pan(s, 0.25); break;
  case DT_CMD_VIEW_RESET: reset_view(s); break;
  case DT_CMD_TOGGLE_NORMALISED:
    s->normalised = !s->normalised;
    say(s, DT_R_TEXT, s->normalised ? "panels: flux / continuum" : "panels: flux as measured, with the continuum");
    break;
  case DT_CMD_WINDOW_MARK: cmd_window_mark(s); break;
  case DT_CMD_WINDOW_UNMARK: cmd_window_unmark(s); break;
  case DT_CMD_CONT_ORDER_UP: cmd_order(s, +1); break;
  case DT_CMD_CONT_ORDER_DOWN: cmd_order(s, -1); break;
  case DT_CMD_ADD_COMPONENT: cmd_add(s); break;
  case DT_CMD_REMOVE_COMPONENT: cmd_remove(s); break;
  case DT_CMD_NEXT_COMPONENT:
    if (need_comp(s)) s->sel = (s->sel + 1) % s->j.ncomp;
    break;
  case DT_CMD_PREV_COMPONENT:
    if (need_comp(s)) s->sel = (s->sel + s->j.ncomp - 1) % s->j.ncomp;
    break;
  case DT_CMD_V_DOWN: cmd_nudge(s, 0, -STEP_V); break;
  case DT_CMD_V_UP: cmd_nudge(s, 0, STEP_V); break;
  case DT_CMD_V_DOWN_COARSE: cmd_nudge(s, 0, -STEP_V_COARSE); break;
  case DT_CMD_V_UP_COARSE: cmd_nudge(s, 0, STEP_V_COARSE); break;
  case DT_CMD_B_DOWN: cmd_nudge(s, 1, -STEP_B); break;
  case DT_CMD_B_UP: cmd_nudge(s, 1, STEP_B); break;
  case DT_CMD_B_DOWN_COARSE: cmd_nudge(s, 1, -STEP_B_COARSE); break;
  case DT_CMD_B_UP_COARSE: cmd_nudge(s, 1, STEP_B_COARSE); break;
  case DT_CMD_LOGN_DOWN: cmd_nudge(s, 2, -STEP_LOGN); break;
  case DT_CMD_LOGN_UP: cmd_nudge(s, 2, STEP_LOGN); break;
  case DT_CMD_LOGN_DOWN_COARSE: cmd_nudge(s, 2, -STEP_LOGN_COARSE); break;
  case DT_CMD_LOGN_UP_COARSE: cmd_nudge(s, 2, STEP_LOGN_COARSE); break;
  case DT_CMD_FREEZE_V: cmd_freeze(s, DT_FREEZE_V, "velocity"); break;
  case DT_CMD_FREEZE_B: cmd_freeze(s, DT_FREEZE_B, "b"); break;
  case DT_CMD_FREEZE_LOGN: cmd_freeze(s, DT_FREEZE_N, "log N"); break;
  case DT_CMD_TIE_B: cmd_tie(s); break;
  case DT_CMD_REFIT: cmd_refit(s); break;
  case DT_CMD_AUTO_REFIT:
    s->auto_refit = !s->auto_refit;
    say(s, DT_R_TEXT, s->auto_refit ? "refit after every change: on" : "refit after every change: off");
    break;
  case DT_CMD_AUTOFIT: autofit_to(s, &s->j, NULL, "first pass: "); break;
  case DT_CMD_UNDO: cmd_undo(s, 0); break;
  case DT_CMD_REDO: cmd_undo(s, 1); break;
  case DT_CMD_SWITCH_DOUBLET: cmd_switch_doublet(s); break;
  case DT_CMD_VERDICT_DETECTED: cmd_verdict(s, DT_VERDICT_DETECTED); break;
  case DT_CMD_VERDICT_NOT_DETECTED: cmd_verdict(s, DT_VERDICT_NOT_DETECTED); break;
  case DT_CMD_VERDICT_UNSURE: cmd_verdict(s, DT_VERDICT_UNSURE); break;
  case DT_CMD_VERDICT_UNUSABLE: cmd_verdict(s, DT_VERDICT_UNUSABLE); break;
  case DT_CMD_EDIT_NOTE:
    if (!writable(s)) break;
    s->editing = 1;
    snprintf(s->edit, sizeof s->edit, "%s", s->j.note);
    s->edit_len = s->edit_pos = strlen(s->edit);
    break;
  case DT_CMD_NEXT_SPECTRUM:
    if (s->cur + 1 < s->q->n) go_to(s, s->cur + 1);
    else say(s, DT_R_WARN, "this is the last spectrum of the queue");
    break;
  case DT_CMD_PREV_SPECTRUM:
    if (s->cur > 0) go_to(s, s->cur - 1);
    else say(s, DT_R_WARN, "this is the first spectrum of the queue");
    break;
  case DT_CMD_NEXT_UNJUDGED: {
    int found;
    size_t i = next_unjudged(s, s->cur, &found);
    if (found) go_to(s, i);
    else say(s, DT_R_GOOD, "every spectrum of the queue has a verdict (%zu)", s->q->n);
    break;
  }
  case DT_CMD__COUNT: break;
  }
  return EV_REDRAW;
}

/* ---------------------------------------------------------------- replay */

typedef struct replay {
  FILE *f;
  long line;
  char pending[1024]; /* characters still to type */
  size_t pos;
} replay;

/* Next key of a key file: action names and key names, '#' comments,
 * "type TEXT" types TEXT character by character.  -1 at the end; -2 for a
 * line that names no key (msg says which). */
static int replay_next(replay *r, char *msg, size_t size) {
  for (;;) {
    if (r->pending[r->pos]) {
      unsigned char c = (unsigned char)r->pending[r->pos];
      int k = c < 0x80 ? 1 : (c & 0xE0) == 0xC0 ? 2 : (c & 0xF0) == 0xE0 ? 3 : 4;
      unsigned cp = k == 1 ? c : c & (0xFF >> (k + 1));
      for (int i = 1; i < k && r->pending[r->pos + i]; i++) cp = (cp << 6) | ((unsigned char)r->pending[r->pos + i] & 0x3F);
      r->pos += k;
      return (int)cp;
    }
    char line[1100];
    if (!fgets(line, sizeof line, r->f)) return -1;
    r->line++;
    char *p = line;
    while (*p == ' ' || *p == '\t') p++;
    size_t n = strlen(p);
    while (n && (p[n - 1] == '\n' || p[n - 1] == '\r')) p[--n] = '\0';
    if (!strncmp(p, "type ", 5)) {
      snprintf(r->pending, sizeof r->pending, "%s", p + 5);
      r->pos = 0;
      continue;
    }
    char *hash = strchr(p, '#');
    if (hash && hash != p) *hash = '\0';
    else if (hash == p) continue;
    n = strlen(p);
    while (n && (p[n - 1] == ' ' || p[n - 1] == '\t')) p[--n] = '\0';
    if (!n) continue;
    const dt_keybind *b = dt_keymap_find(p);
    if (b) return b->key;
    int k = dt_keymap_keycode(p);
    if (k >= 0) return k;
    snprintf(msg, size, "line %ld: '%s' is neither an action nor a key name", r->line, p);
    return -2;
  }
}

static double now_ms(void) {
  struct timespec ts;
  clock_gettime(CLOCK_MONOTONIC, &ts);
  return ts.tv_sec * 1e3 + ts.tv_nsec / 1e6;
}

static void dump_screen(const dt_insp *s, const char *path) {
  FILE *f = fopen(path, "w");
  if (!f) return;
  char *row = malloc((size_t)s->g.w * 5 + 1);
  if (row) {
    for (int y = 0; y < s->g.h; y++) fprintf(f, "%s\n", dt_grid_row(&s->g, y, row, (size_t)s->g.w * 5 + 1));
    free(row);
  }
  fclose(f);
}

/* ---------------------------------------------------------------- the loop */

static void draw(dt_insp *s) {
  int w, h;
  dt_term_size(&w, &h);
  dt_view_draw(s, w, h);
  dt_term_draw(&s->g);
}

int dt_inspect_run(dt_queue *q, const dt_atomic *t, dt_journal *jn, const dt_inspect_opts *o, char *msg,
                   size_t msgsize) {
  dt_inspect_opts def;
  if (!o) {
    dt_inspect_opts_init(&def);
    o = &def;
  }
  if (!q || q->n == 0) {
    snprintf(msg, msgsize, "nothing to inspect: the queue is empty");
    return 1;
  }
  replay rp;
  memset(&rp, 0, sizeof rp);
  if (o->replay) {
    rp.f = fopen(o->replay, "r");
    if (!rp.f) {
      snprintf(msg, msgsize, "%s: cannot open: %s", o->replay, strerror(errno));
      return 1;
    }
  }
  dt_term_opts to = {o->colour, o->ascii, o->replay != NULL, o->width, o->height};
  if (dt_term_check(&to, msg, msgsize) || dt_term_open(&to, msg, msgsize)) {
    if (rp.f) fclose(rp.f);
    return 1;
  }
  dt_insp *s = calloc(1, sizeof *s);
  if (!s) {
    dt_term_close();
    snprintf(msg, msgsize, "out of memory");
    if (rp.f) fclose(rp.f);
    return 1;
  }
  s->atomic = t;
  s->q = q;
  s->jn = jn;
  s->o = o;
  s->utf8 = dt_term_utf8();
  s->mode = s->utf8 ? DT_PLOT_BRAILLE : DT_PLOT_ASCII;
  s->normalised = 1;
  s->auto_refit = 1;

  /* resume: count the judged, open on the first spectrum without a verdict */
  int found = 0;
  size_t first = 0;
  for (size_t i = 0; i < q->n; i++) {
    if (verdict_of(s, i) != DT_VERDICT_NONE) s->njudged++;
    else if (!found) {
      first = i;
      found = 1;
    }
  }
  draw(s); /* something on screen while the first spectrum loads */
  load(s, first);
  if (!found && (s->msg_role == DT_R_TEXT || !s->msg[0]))
    say(s, DT_R_GOOD, "every spectrum of the queue has a verdict already (%zu)", q->n);
  if (jn && dt_journal_warning_count(jn) > 0 && s->msg_role != DT_R_BAD)
    say(s, DT_R_WARN, "session file: %zu damaged line%s skipped (%s)", dt_journal_warning_count(jn),
        dt_journal_warning_count(jn) == 1 ? "" : "s", dt_journal_warning(jn, 0));
  if (jn && dt_journal_read_only(jn) && s->msg_role == DT_R_TEXT)
    say(s, DT_R_WARN, "read-only: looking only");
  draw(s);

  /* keystroke times: all, and those that refitted within one spectrum */
  double *times = NULL, *ftimes = NULL;
  size_t ntimes = 0, nftimes = 0, captimes = 0;
  int status = 0;
  msg[0] = '\0';
  for (;;) {
    int sig = dt_term_signal();
    if (sig) {
      status = 128 + sig;
      break;
    }
    int key;
    if (rp.f) {
      key = replay_next(&rp, msg, msgsize);
      if (key == -1) break;
      if (key == -2) {
        status = 2;
        break;
      }
    } else {
      key = dt_term_getkey(-1);
      if (key == DT_KEY_NONE) continue;
    }
    double t0 = now_ms();
    long f0 = s->nfits;
    size_t c0 = s->cur;
    int ev = handle(s, key);
    if (ev & EV_QUIT) break;
    draw(s);
    double dt = now_ms() - t0;
    if (ntimes == captimes) {
      size_t cap = captimes ? 2 * captimes : 256;
      double *nt = realloc(times, cap * sizeof *nt), *nf = nt ? realloc(ftimes, cap * sizeof *nf) : NULL;
      if (nt) times = nt;
      if (nf) {
        ftimes = nf;
        captimes = cap;
      }
    }
    if (ntimes < captimes) {
      times[ntimes++] = dt;
      if (s->nfits > f0 && s->cur == c0) ftimes[nftimes++] = dt;
    }
  }
  if (o->dump) dump_screen(s, o->dump);
  dt_term_close();
  if (o->bench && ntimes > 0) {
    qsort(times, ntimes, sizeof *times, cmp_double);
    printf("keys %zu  median %.3f ms  p90 %.3f ms  max %.3f ms\n", ntimes, times[ntimes / 2],
           times[(size_t)(0.9 * (double)(ntimes - 1))], times[ntimes - 1]);
    if (nftimes > 0) {
      qsort(ftimes, nftimes, sizeof *ftimes, cmp_double);
      printf("refits %zu  median %.3f ms  p90 %.3f ms  max %.3f ms\n", nftimes, ftimes[nftimes / 2],
             ftimes[(size_t)(0.9 * (double)(nftimes - 1))], ftimes[nftimes - 1]);
    }
  }
  free(times);
  free(ftimes);
  if (rp.f) fclose(rp.f);
  unload(s);
  free(s->undo);
  free(s->redo);
  free(s->tmp);
  dt_grid_free(&s->g);
  dt_plot_free(&s->p);
  free(s);
  return status;
}
