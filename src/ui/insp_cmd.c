/* The inspector's commands: what each key does.
 *
 * Commands on the judgement go to the session core (session.h), which
 * checks, refits, records and adopts, and leaves the message the status
 * line shows.  What is left here is the screen's own business: the cursor
 * and the view, walking the queue (with the summary at its end), and the
 * one-line editor of the note and of the prompts (go to a spectrum, put
 * the cursor at a velocity).  Handlers return flags (redraw, quit) that the
 * loop acts on; drawing is view.c's business. */
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "doubletty/model.h"
#include "doubletty/num.h"
#include "doubletty/utf8.h"
#include "insp.h"
#include "keymap.h"
#include "term.h"

/* ---------------------------------------------------------------- view */

static double col_step(const dt_insp *s) {
  int w = s->plot_w > 0 ? s->plot_w : 80;
  return (s->view_hi - s->view_lo) / w;
}

static void clamp_view(dt_insp *s) {
  const dt_judgement *j = &s->ss->j;
  double span = s->view_hi - s->view_lo, full = j->vhi - j->vlo;
  if (span > full) span = full;
  if (span < 10) span = 10;
  if (s->view_lo < j->vlo) s->view_lo = j->vlo;
  s->view_hi = s->view_lo + span;
  if (s->view_hi > j->vhi) {
    s->view_hi = j->vhi;
    s->view_lo = s->view_hi - span;
  }
}

static void reset_view(dt_insp *s) {
  s->view_lo = s->ss->j.vlo;
  s->view_hi = s->ss->j.vhi;
  if (s->cursor_v < s->view_lo || s->cursor_v > s->view_hi) s->cursor_v = 0.5 * (s->view_lo + s->view_hi);
}

static void move_cursor(dt_insp *s, double dv) {
  const dt_judgement *j = &s->ss->j;
  s->cursor_v += dv;
  if (s->cursor_v < j->vlo) s->cursor_v = j->vlo;
  if (s->cursor_v > j->vhi) s->cursor_v = j->vhi;
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

/* ---------------------------------------------------------------- judgement */

static const dt_doublet *doublet_of(const dt_insp *s) { return dt_atomic_find(s->atomic, s->ss->j.doublet); }

static void cmd_window_mark(dt_insp *s) {
  const dt_doublet *d = doublet_of(s);
  if (!d) return;
  if (!s->anchor) {
    s->anchor = 1;
    s->anchor_v = s->cursor_v;
    s->anchor_panel = s->panel;
    char k[16];
    dt_insp_say(s, DT_TONE_WARN, "continuum window from %+.0f km/s: move the cursor and press %s again",
                s->cursor_v, dt_insp_keyname(DT_CMD_WINDOW_MARK, k, sizeof k));
    return;
  }
  s->anchor = 0;
  double v1 = s->anchor_v < s->cursor_v ? s->anchor_v : s->cursor_v;
  double v2 = s->anchor_v < s->cursor_v ? s->cursor_v : s->anchor_v;
  double half = 0.5 * col_step(s);
  if (v2 - v1 < 2 * half) {
    v1 -= half;
    v2 += half;
  }
  double l0 = d->line[s->anchor_panel].lambda0, vsys = s->ss->j.vsys;
  dt_session_window_add(s->ss, dt_wavelength(v1, l0, vsys), dt_wavelength(v2, l0, vsys));
}

static void cmd_window_unmark(dt_insp *s) {
  const dt_doublet *d = doublet_of(s);
  if (!d) return;
  if (dt_session_window_remove(s->ss, dt_wavelength(s->cursor_v, d->line[s->panel].lambda0, s->ss->j.vsys)) ==
      DT_ENOTFOUND)
    dt_insp_say(s, DT_TONE_WARN, "no continuum window under the cursor");
}

static int need_comp(dt_insp *s) {
  if (s->ss->j.ncomp == 0) {
    char k[16];
    dt_insp_say(s, DT_TONE_WARN, "no component: add one at the cursor with %s",
                dt_insp_keyname(DT_CMD_ADD_COMPONENT, k, sizeof k));
    return 0;
  }
  return 1;
}

static void cmd_nudge(dt_insp *s, dt_cmd c, dt_session_param p) {
  if (!need_comp(s)) return;
  const dt_keybind *b = dt_keymap_of(c);
  if (dt_session_nudge(s->ss, p, b->step) == DT_OK) {
    char k[16];
    size_t n = strlen(s->ss->msg);
    dt_cmd h = p == DT_PARAM_V ? DT_CMD_HOLD_V : p == DT_PARAM_B ? DT_CMD_HOLD_B : DT_CMD_HOLD_LOGN;
    snprintf(s->ss->msg + n, sizeof s->ss->msg - n, " (%s releases)", dt_insp_keyname(h, k, sizeof k));
  }
}

/* ---------------------------------------------------------------- queue */

static size_t unjudged_from(dt_insp *s, size_t from, int dir, int *found) {
  size_t n = s->q->n;
  for (size_t k = 1; k <= n; k++) {
    size_t i = dir > 0 ? (from + k) % n : (from + n - k % n) % n;
    if (dt_insp_verdict_of(s, i) == DT_VERDICT_NONE) {
      *found = 1;
      return i;
    }
  }
  *found = 0;
  return from;
}

static void cmd_unjudged(dt_insp *s, int dir) {
  int found;
  size_t i = unjudged_from(s, s->cur, dir, &found);
  if (found) dt_insp_load(s, i);
  else dt_insp_say(s, DT_TONE_GOOD, "every spectrum of the queue has a verdict (%zu)", s->q->n);
}

/* A queue entry by its name, or its file's name when it has none. */
static const char *target_name(const dt_insp *s, size_t i, char *buf, size_t n) {
  const char *name = dt_queue_name(s->q, i), *path = dt_queue_path(s->q, i), *base = strrchr(path, '/');
  snprintf(buf, n, "%s", name[0] ? name : base ? base + 1 : path);
  return buf;
}

static void cmd_verdict(dt_insp *s, dt_verdict v) {
  if (s->finished) {
    char k1[16], k2[16];
    dt_insp_say(s, DT_TONE_WARN, "the queue is finished: %s goes back to the last spectrum, %s to one without a verdict",
                dt_insp_keyname(DT_CMD_PREV_SPECTRUM, k1, sizeof k1),
                dt_insp_keyname(DT_CMD_NEXT_UNJUDGED, k2, sizeof k2));
    return;
  }
  size_t sys = s->ss->selsys;
  if (sys > 0) { /* another system's verdict: the spectrum stays, the target is selected again */
    char name[DT_SYSTEM_NAME_MAX];
    snprintf(name, sizeof name, "%s", s->ss->systems.sys[sys].name);
    if (dt_session_verdict(s->ss, v) == DT_OK) {
      s->ss->selsys = 0;
      char ks[16];
      dt_insp_say(s, DT_TONE_GOOD, "saved: %s %s - the target is selected again (%s selects a system)", name,
                  dt_verdict_name(v), dt_insp_keyname(DT_CMD_NEXT_SYSTEM, ks, sizeof ks));
    }
    return;
  }
  int was = dt_insp_verdict_of(s, s->cur);
  if (dt_session_verdict(s->ss, v) != DT_OK) {
    if (!s->ss->loaded && v != DT_VERDICT_UNUSABLE) {
      char k[16];
      dt_insp_say(s, DT_TONE_WARN, "this file cannot be read: only 'unusable' (%s) or a note",
                  dt_insp_keyname(DT_CMD_VERDICT_UNUSABLE, k, sizeof k));
    }
    return;
  }
  s->q->e[s->cur].verdict = (signed char)v;
  if (was == DT_VERDICT_NONE) s->njudged++;
  size_t done = s->cur;
  char who[96];
  target_name(s, done, who, sizeof who);
  if (s->cur + 1 < s->q->n) {
    dt_insp_load(s, s->cur + 1);
    if (s->ss->tone == DT_TONE_TEXT || !s->ss->msg[0])
      dt_insp_say(s, DT_TONE_GOOD, "saved: #%zu %s (%s)", done + 1, dt_verdict_name(v), who);
  } else {
    s->finished = 1;
    dt_insp_say(s, DT_TONE_GOOD, "saved: #%zu %s (%s) - end of the queue (%zu of %zu judged)", done + 1,
                dt_verdict_name(v), who, s->njudged, s->q->n);
  }
}

/* ---------------------------------------------------------------- editor */

static void start_edit(dt_insp *s, dt_edit_mode m, const char *text) {
  s->editing = m;
  snprintf(s->edit, sizeof s->edit, "%s", text);
  s->edit_len = s->edit_pos = strlen(s->edit);
}

/* A spectrum by its number in the queue (1-based), or the first whose name
 * or file contains the text. */
static void goto_commit(dt_insp *s, const char *text) {
  char *end;
  long n = strtol(text, &end, 10);
  if (end != text && !*end) {
    if (n >= 1 && (size_t)n <= s->q->n) dt_insp_load(s, (size_t)n - 1);
    else dt_insp_say(s, DT_TONE_WARN, "no spectrum %ld: the queue has 1 to %zu", n, s->q->n);
    return;
  }
  for (size_t k = 1; k <= s->q->n && text[0]; k++) {
    size_t i = (s->cur + k) % s->q->n;
    if (strstr(dt_queue_name(s->q, i), text) || strstr(dt_queue_path(s->q, i), text)) {
      dt_insp_load(s, i);
      return;
    }
  }
  dt_insp_say(s, DT_TONE_WARN, "no spectrum of the queue is called '%s'", text);
}

static void velocity_commit(dt_insp *s, const char *text) {
  double v;
  if (dt_num_parse(text, &v) != DT_OK || !isfinite(v)) {
    dt_insp_say(s, DT_TONE_WARN, "'%s' is not a velocity (km/s)", text);
    return;
  }
  const dt_judgement *j = &s->ss->j;
  if (v < j->vlo || v > j->vhi) {
    dt_insp_say(s, DT_TONE_WARN, "%+.0f km/s is outside the fit window (%+.0f to %+.0f km/s)", v, j->vlo, j->vhi);
    return;
  }
  move_cursor(s, v - s->cursor_v);
  dt_insp_say(s, DT_TONE_TEXT, "cursor at %+.1f km/s", v);
}

static void edit_commit(dt_insp *s) {
  dt_edit_mode m = s->editing;
  s->editing = DT_EDIT_NONE;
  s->edit[s->edit_len] = '\0';
  if (m == DT_EDIT_NOTE) dt_session_note(s->ss, s->edit);
  else if (m == DT_EDIT_GOTO) goto_commit(s, s->edit);
  else if (m == DT_EDIT_VELOCITY) velocity_commit(s, s->edit);
}

/* The small line editor of the note and the prompts. */
static int edit_key(dt_insp *s, int key) {
  if (key == DT_KEY_ENTER) {
    edit_commit(s);
  } else if (key == DT_KEY_ESC) {
    s->editing = DT_EDIT_NONE;
    dt_insp_say(s, DT_TONE_TEXT, "nothing changed");
  } else if (key == DT_KEY_BACKSPACE) {
    if (s->edit_pos > 0) {
      size_t p = dt_utf8_prev(s->edit, s->edit_len, s->edit_pos);
      memmove(s->edit + p, s->edit + s->edit_pos, s->edit_len - s->edit_pos);
      s->edit_len -= s->edit_pos - p;
      s->edit_pos = p;
    }
  } else if (key == DT_KEY_DELETE) {
    if (s->edit_pos < s->edit_len) {
      size_t p = dt_utf8_next(s->edit, s->edit_len, s->edit_pos);
      memmove(s->edit + s->edit_pos, s->edit + p, s->edit_len - p);
      s->edit_len -= p - s->edit_pos;
    }
  } else if (key == DT_KEY_LEFT) {
    s->edit_pos = dt_utf8_prev(s->edit, s->edit_len, s->edit_pos);
  } else if (key == DT_KEY_RIGHT) {
    s->edit_pos = dt_utf8_next(s->edit, s->edit_len, s->edit_pos);
  } else if (key == DT_KEY_HOME || key == 1) {
    s->edit_pos = 0;
  } else if (key == DT_KEY_END || key == 5) {
    s->edit_pos = s->edit_len;
  } else if (key == 21) { /* ^U: clear */
    s->edit_len = s->edit_pos = 0;
  } else if (key == DT_KEY_TAB || (key >= 0x20 && key < 0x110000 && key != 0x7f)) {
    uint32_t cp = key == DT_KEY_TAB ? ' ' : (uint32_t)key;
    char u[DT_UTF8_MAX];
    size_t k = dt_utf8_is_control(cp) ? 0 : dt_utf8_encode(cp, u); /* 0: C1 control or surrogate, not typed */
    if (k && s->edit_len + k < sizeof s->edit - 1) {
      memmove(s->edit + s->edit_pos + k, s->edit + s->edit_pos, s->edit_len - s->edit_pos);
      memcpy(s->edit + s->edit_pos, u, k);
      s->edit_len += k;
      s->edit_pos += k;
    }
  }
  s->edit[s->edit_len] = '\0';
  return EV_REDRAW;
}

/* ---------------------------------------------------------------- dispatch */

/* Commands on the judgement of the current spectrum. */
static void judgement_cmd(dt_insp *s, dt_cmd c) {
  dt_session *ss = s->ss;
  switch (c) {
  case DT_CMD_WINDOW_MARK: cmd_window_mark(s); break;
  case DT_CMD_WINDOW_UNMARK: cmd_window_unmark(s); break;
  case DT_CMD_CONT_ORDER_UP: dt_session_order(ss, +1); break;
  case DT_CMD_CONT_ORDER_DOWN: dt_session_order(ss, -1); break;
  case DT_CMD_ADD_COMPONENT:
    if (s->cursor_v <= ss->j.vlo || s->cursor_v >= ss->j.vhi)
      dt_insp_say(s, DT_TONE_WARN, "the cursor is at the edge of the fit window");
    else dt_session_add(ss, s->cursor_v);
    break;
  case DT_CMD_REMOVE_COMPONENT:
    if (need_comp(s)) dt_session_remove(ss);
    break;
  case DT_CMD_NEXT_COMPONENT:
    if (need_comp(s)) dt_session_select(ss, +1);
    break;
  case DT_CMD_PREV_COMPONENT:
    if (need_comp(s)) dt_session_select(ss, -1);
    break;
  case DT_CMD_V_DOWN: case DT_CMD_V_UP: case DT_CMD_V_DOWN_COARSE: case DT_CMD_V_UP_COARSE:
    cmd_nudge(s, c, DT_PARAM_V);
    break;
  case DT_CMD_B_DOWN: case DT_CMD_B_UP: case DT_CMD_B_DOWN_COARSE: case DT_CMD_B_UP_COARSE:
    cmd_nudge(s, c, DT_PARAM_B);
    break;
  case DT_CMD_LOGN_DOWN: case DT_CMD_LOGN_UP: case DT_CMD_LOGN_DOWN_COARSE: case DT_CMD_LOGN_UP_COARSE:
    cmd_nudge(s, c, DT_PARAM_LOGN);
    break;
  case DT_CMD_HOLD_V:
    if (need_comp(s)) dt_session_hold(ss, DT_PARAM_V);
    break;
  case DT_CMD_HOLD_B:
    if (need_comp(s)) dt_session_hold(ss, DT_PARAM_B);
    break;
  case DT_CMD_HOLD_LOGN:
    if (need_comp(s)) dt_session_hold(ss, DT_PARAM_LOGN);
    break;
  case DT_CMD_TIE_B: dt_session_tie(ss); break;
  case DT_CMD_COVERING: dt_session_covering(ss); break;
  case DT_CMD_REFIT: dt_session_refit(ss); break;
  case DT_CMD_AUTO_REFIT:
    ss->auto_refit = !ss->auto_refit;
    dt_insp_say(s, DT_TONE_TEXT, ss->auto_refit ? "refit after every change: on" : "refit after every change: off");
    break;
  case DT_CMD_AUTOFIT: dt_session_autofit(ss); break;
  case DT_CMD_UNDO: dt_session_undo(ss); break;
  case DT_CMD_REDO: dt_session_redo(ss); break;
  case DT_CMD_SWITCH_DOUBLET: {
    char was[sizeof ss->j.doublet];
    memcpy(was, ss->j.doublet, sizeof was);
    if (dt_session_switch_doublet(ss) == DT_OK && strcmp(was, ss->j.doublet)) reset_view(s);
    break;
  }
  case DT_CMD_NEXT_SYSTEM: dt_session_select_system(s->ss, 1); break;
  case DT_CMD_LINK_SPECIES: dt_insp_link_open(s); break;
  case DT_CMD_B_RULE: dt_session_btie_next(ss); break;
  case DT_CMD_VERDICT_DETECTED: cmd_verdict(s, DT_VERDICT_DETECTED); break;
  case DT_CMD_VERDICT_NOT_DETECTED: cmd_verdict(s, DT_VERDICT_NOT_DETECTED); break;
  case DT_CMD_VERDICT_UNSURE: cmd_verdict(s, DT_VERDICT_UNSURE); break;
  case DT_CMD_VERDICT_UNUSABLE: cmd_verdict(s, DT_VERDICT_UNUSABLE); break;
  case DT_CMD_EDIT_NOTE:
    if (dt_session_writable(ss)) start_edit(s, DT_EDIT_NOTE, ss->j.note);
    break;
  default: break;
  }
}

/* Keys while the end-of-queue summary shows: walking and leaving only. */
static int finished_cmd(dt_cmd c) {
  return c == DT_CMD_QUIT || c == DT_CMD_HELP || c == DT_CMD_REDRAW || c == DT_CMD_PREV_SPECTRUM ||
         c == DT_CMD_NEXT_UNJUDGED || c == DT_CMD_PREV_UNJUDGED || c == DT_CMD_GOTO_SPECTRUM ||
         (c >= DT_CMD_VERDICT_DETECTED && c <= DT_CMD_VERDICT_UNUSABLE);
}

int dt_insp_handle(dt_insp *s, int key) {
  if (key == DT_KEY_RESIZE) return EV_REDRAW;
  if (s->editing) return edit_key(s, key);
  if (s->choosing) return dt_insp_link_key(s, key);
  if (s->help_page) {
    /* in the help: the help key pages on, anything else closes it */
    if (dt_keymap_lookup(key) == DT_CMD_HELP && s->help_page < s->help_pages) s->help_page++;
    else s->help_page = 0;
    if (dt_keymap_lookup(key) != DT_CMD_QUIT) return EV_REDRAW;
  }
  dt_cmd c = dt_keymap_lookup(key);
  char k[16], k2[16];
  if (c != DT_CMD_WINDOW_MARK && c != DT_CMD_NONE && s->anchor &&
      !(c >= DT_CMD_CURSOR_LEFT && c <= DT_CMD_VIEW_RESET)) {
    s->anchor = 0; /* another command drops a half-marked window */
  }
  if (s->finished && c != DT_CMD_NONE && !finished_cmd(c)) {
    dt_insp_say(s, DT_TONE_WARN, "the queue is finished: %s goes back, %s jumps to a spectrum without a verdict",
                dt_insp_keyname(DT_CMD_PREV_SPECTRUM, k, sizeof k), dt_insp_keyname(DT_CMD_NEXT_UNJUDGED, k2, sizeof k2));
    return EV_REDRAW;
  }
  switch (c) {
  case DT_CMD_NONE:
    if (key == DT_KEY_ESC) {
      s->anchor = 0;
      s->ss->msg[0] = '\0';
      return EV_REDRAW;
    }
    dt_insp_say(s, DT_TONE_WARN, "no action on that key - %s lists the keys", dt_insp_keyname(DT_CMD_HELP, k, sizeof k));
    return EV_REDRAW;
  case DT_CMD_QUIT: return EV_QUIT;
  case DT_CMD_HELP: s->help_page = 1; break;
  case DT_CMD_REDRAW: dt_term_invalidate(); break;
  case DT_CMD_CURSOR_LEFT: move_cursor(s, -col_step(s)); break;
  case DT_CMD_CURSOR_RIGHT: move_cursor(s, col_step(s)); break;
  case DT_CMD_CURSOR_LEFT_FAST: move_cursor(s, -8 * col_step(s)); break;
  case DT_CMD_CURSOR_RIGHT_FAST: move_cursor(s, 8 * col_step(s)); break;
  case DT_CMD_CURSOR_UP: s->panel = 0; break;
  case DT_CMD_CURSOR_DOWN: s->panel = 1; break;
  case DT_CMD_CURSOR_TO_VELOCITY: start_edit(s, DT_EDIT_VELOCITY, ""); break;
  case DT_CMD_ZOOM_IN: zoom(s, 1 / 1.5); break;
  case DT_CMD_ZOOM_OUT: zoom(s, 1.5); break;
  case DT_CMD_PAN_LEFT: pan(s, -0.25); break;
  case DT_CMD_PAN_RIGHT: pan(s, 0.25); break;
  case DT_CMD_VIEW_RESET: reset_view(s); break;
  case DT_CMD_TOGGLE_NORMALISED:
    s->normalised = !s->normalised;
    dt_insp_say(s, DT_TONE_TEXT, s->normalised ? "panels: flux / continuum" : "panels: flux as measured, with the continuum");
    break;
  case DT_CMD_NEXT_SPECTRUM:
    if (s->cur + 1 < s->q->n) dt_insp_load(s, s->cur + 1);
    else dt_insp_say(s, DT_TONE_WARN, "this is the last spectrum of the queue");
    break;
  case DT_CMD_PREV_SPECTRUM:
    if (s->finished) s->finished = 0;
    else if (s->cur > 0) dt_insp_load(s, s->cur - 1);
    else dt_insp_say(s, DT_TONE_WARN, "this is the first spectrum of the queue");
    break;
  case DT_CMD_NEXT_UNJUDGED: cmd_unjudged(s, +1); break;
  case DT_CMD_PREV_UNJUDGED: cmd_unjudged(s, -1); break;
  case DT_CMD_GOTO_SPECTRUM: start_edit(s, DT_EDIT_GOTO, ""); break;
  default: judgement_cmd(s, c); break;
  }
  return EV_REDRAW;
}
