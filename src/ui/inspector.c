/* The inspector's event loop.
 *
 * Every key becomes a dt_cmd (keymap.c) that insp_cmd.c carries out, most
 * of them through the session core (session.h: check, refit, record,
 * adopt -- nothing is shown as done before the journal has it on disk).
 * This file opens each spectrum of the queue, reads keys from the terminal
 * or from a key file (headless replay), and has view.c draw the state
 * after every key. */
#include "inspector.h"

#include <errno.h>
#include <math.h>
#include <stdarg.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <time.h>

#include "doubletty/cog.h"
#include "doubletty/utf8.h"
#include "insp.h"
#include "keymap.h"
#include "prefetch.h"
#include "term.h"

void dt_inspect_opts_init(dt_inspect_opts *o) {
  memset(o, 0, sizeof *o);
  o->colour = -1;
  o->fit_slice_ms = DT_INSPECT_FIT_SLICE_MS;
  dt_system_opts_init(&o->systems);
}

int dt_inspect_check(const dt_inspect_opts *o, char *msg, size_t size) {
  dt_term_opts to = {o->colour, o->ascii, o->replay != NULL, o->width, o->height};
  return dt_term_check(&to, msg, size);
}

void dt_insp_say(dt_insp *s, dt_session_tone tone, const char *fmt, ...) {
  va_list ap;
  va_start(ap, fmt);
  vsnprintf(s->ss->msg, sizeof s->ss->msg, fmt, ap);
  va_end(ap);
  s->ss->tone = tone;
}

const char *dt_insp_keyname(int c, char *buf, size_t n) {
  const dt_keybind *b = dt_keymap_of((dt_cmd)c);
  return b ? dt_keymap_keyname(b->key, buf, n) : "?";
}

/* ---------------------------------------------------------------- loading */

/* The doublets of queue entry i: the list's (or the command line's)
 * "NAME[,NAME...]"; the first is vetted, the others are linked species. */
static const char *entry_doublets(const dt_insp *s, size_t i) {
  const dt_qentry *e = &s->q->e[i];
  return e->doublet[0] ? e->doublet : s->o->doublet ? s->o->doublet : "NaI";
}

/* The k-th name of a doublet list into buf ("" past the end). */
static const char *doublet_at(const char *list, size_t k, char *buf, size_t n) {
  for (; k > 0 && list; k--) {
    list = strchr(list, ',');
    if (list) list++;
  }
  size_t len = list ? strcspn(list, ",") : 0;
  snprintf(buf, n, "%.*s", (int)len, list ? list : "");
  return buf;
}

/* The name a queue entry has in the session: its file (absolute, tidied),
 * then '#' and the doublet it is vetted for -- the same file may be queued
 * once per doublet (e.g. Na I and Ca II of one wide spectrum). */
static const char *entry_key(const dt_insp *s, size_t i, char *buf, size_t n) {
  char d[DT_JUDGE_DOUBLET * 4];
  doublet_at(entry_doublets(s, i), 0, d, sizeof d);
  const dt_doublet *dd = dt_atomic_find(s->atomic, d);
  snprintf(buf, n, "%s#%s", dt_queue_key(s->q, i), dd ? dd->name : d);
  return buf;
}

static int cmp_double(const void *a, const void *b) {
  double x = *(const double *)a, y = *(const double *)b;
  return (x > y) - (x < y);
}

/* Overview flux range: 1st to 99th percentile of the unmasked flux, widened
 * by 15%, so a cosmic ray or a sky residual does not flatten the spectrum
 * (it is marked as off the plot instead). */
static void overview_range(dt_insp *s) {
  const dt_spectrum *sp = s->ss->spec;
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

/* Settings of a first look: the list line, then the command line (then,
 * in the session core, the file's header).  The resolution (lsf.h):
 * --resolution-table, else the list's R=/fwhm= for the doublet, else
 * --resolution/--fwhm, else the file's widths per pixel or its header R;
 * returns 1 when a single value given by the user is to beat the
 * spectrum's widths per pixel. */
static int initial_state(const dt_insp *s, size_t idx, dt_judgement *j) {
  const dt_qentry *q = &s->q->e[idx];
  const dt_inspect_opts *o = s->o;
  dt_judgement_init(j);
  char d[DT_JUDGE_DOUBLET * 4];
  doublet_at(entry_doublets(s, idx), 0, d, sizeof d);
  const dt_doublet *dd = dt_atomic_find(s->atomic, d);
  snprintf(j->doublet, sizeof j->doublet, "%.15s", dd ? dd->name : d);
  /* the other doublets of the list are linked (those the table knows) */
  for (size_t k = 1; doublet_at(entry_doublets(s, idx), k, d, sizeof d)[0]; k++) {
    const dt_doublet *ld = dt_atomic_find(s->atomic, d);
    dt_action a;
    dt_action_init(&a, DT_ACT_LINK);
    a.ival = 1;
    snprintf(a.text, sizeof a.text, "%s", ld ? ld->name : d);
    if (ld) dt_judgement_apply(j, &a); /* refused: the main one, twice, a fourth */
  }
  j->vsys = q->has_vsys ? q->vsys : o->has_vsys ? o->vsys : 0.0;
  if (q->has_window) {
    j->vlo = q->vlo;
    j->vhi = q->vhi;
  }
  double qR, qF, oR = o->resolution, oF = o->fwhm_kms;
  dt_queue_resolution(s->q, idx, j->doublet, &qR, &qF);
  if (o->res_per.n) {
    double v = dt_lsf_per_get(&o->res_per, j->doublet);
    oR = o->res_per_fwhm ? 0 : v;
    oF = o->res_per_fwhm ? v : 0;
  }
  j->covering = q->covering >= 0 ? q->covering : o->covering;
  j->resolution = 0;
  j->fwhm_kms = 0;
  if (s->q->read.lsf_table) return 0;
  if (qR > 0 || qF > 0) {
    j->resolution = qR;
    j->fwhm_kms = qR > 0 ? 0 : qF;
  } else if (oR > 0 || oF > 0) {
    j->resolution = oR;
    j->fwhm_kms = oR > 0 ? 0 : oF;
  } else {
    return 0;
  }
  return 1;
}

/* The 21-cm spectrum at the sightline, in the spectrum's frame. */
static void hi_sample(dt_insp *s) {
  dt_hi_sample_free(&s->hs);
  s->has_hi = 0;
  s->hi_msg[0] = '\0';
  if (!s->o->hi) return;
  const dt_spectrum *sp = s->ss->loaded ? s->ss->spec : NULL;
  if (!sp || !sp->has_pos) {
    snprintf(s->hi_msg, sizeof s->hi_msg, "%s", sp ? "no sky position" : "no spectrum");
    return;
  }
  dt_hi_opts ho;
  memset(&ho, 0, sizeof ho);
  ho.frame = sp->frame;
  ho.vsys = s->ss->j.vsys;
  dt_err e;
  dt_err_clear(&e);
  if (dt_hicube_sample(s->o->hi, sp->ra, sp->dec, &ho, &s->hs, &e) != DT_OK) {
    snprintf(s->hi_msg, sizeof s->hi_msg, "%.110s", e.what);
    return;
  }
  s->has_hi = 1;
  s->hs_vsys = ho.vsys;
}

/* The session target of queue entry idx (key: its buffer): the list line's
 * reading options (frames: --frame, --in-frame, --site, then the list's),
 * window and systems (the run's settings over the line's; systems of both). */
static void target_of(const dt_insp *s, size_t idx, dt_session_target *t, char *key, size_t size) {
  dt_session_target_init(t, dt_queue_path(s->q, idx), entry_key(s, idx, key, size), s->q->e[idx].row);
  t->name = dt_queue_name(s->q, idx);
  t->air = s->q->e[idx].air;
  t->read = s->q->read;
  if (s->q->e[idx].has_pos) t->read.has_pos = 1, t->read.ra = s->q->e[idx].ra, t->read.dec = s->q->e[idx].dec;
  if (s->q->e[idx].frame != DT_FRAME_UNSET) t->read.in_frame = (dt_frame)s->q->e[idx].frame;
  t->lsf_constant = initial_state(s, idx, &t->initial);
  t->cog = s->cog;
  /* the table for every target (a resumed state may say hfs=1); a first
   * look splits the lines when the option or the list asks for it */
  t->hyperfine = s->o->hyperfine;
  t->initial.hyperfine = s->o->hyperfine && (s->o->hyperfine_all || s->q->e[idx].hyperfine);
  t->defer_intervals = 1; /* drawn a frame later (the event loop) */
  t->has_window = s->q->e[idx].has_window;
  t->systems = s->o->systems;
  dt_system_opts ls;
  dt_system_opts_init(&ls);
  dt_queue_systems(s->q, idx, &ls);
  if (!t->systems.has_target && ls.has_target) {
    t->systems.has_target = 1;
    t->systems.target_vlo = ls.target_vlo;
    t->systems.target_vhi = ls.target_vhi;
  }
  dt_err e;
  for (size_t k = 0; k < ls.nextra; k++) dt_system_opts_add(&t->systems, &ls.extra[k], &e);
}

/* While the current spectrum is judged, the next two are opened in the
 * background (the first pass too when the session has no record of them),
 * so that a verdict shows the next one at once. */
#define LOOK_AHEAD 2

/* How long the event loop waits for a key before it computes the log N
 * intervals of a new fit (and draws them). */
#define INTERVALS_IDLE_MS 15

static void look_ahead(dt_insp *s) {
  for (size_t d = 1; d <= LOOK_AHEAD && s->pf && s->cur + d < s->q->n; d++) {
    size_t idx = s->cur + d;
    char key[DT_KEY_MAX];
    dt_session_target t;
    target_of(s, idx, &t, key, sizeof key);
    int first = !s->jn || !dt_journal_lookup(s->jn, key, 0, t.row);
    dt_prefetch_want(s->pf, idx, &t, first);
  }
}

void dt_insp_load(dt_insp *s, size_t idx) {
  if (idx >= s->q->n) return;
  s->cur = idx;
  s->anchor = 0;
  s->editing = DT_EDIT_NONE;
  s->choosing = 0;
  s->finished = 0;
  char key[DT_KEY_MAX];
  dt_session_target t;
  target_of(s, idx, &t, key, sizeof key);
  t.ahead = dt_prefetch_take(s->pf, idx);
  int rc = dt_session_load(s->ss, &t);
  dt_session_ahead_free(t.ahead);
  look_ahead(s);
  if (rc != DT_OK) {
    char k1[16], k2[16];
    dt_insp_say(s, DT_TONE_BAD, "cannot read %s - %s skips, %s marks it unusable", s->ss->load_msg,
                dt_insp_keyname(DT_CMD_NEXT_SPECTRUM, k1, sizeof k1),
                dt_insp_keyname(DT_CMD_VERDICT_UNUSABLE, k2, sizeof k2));
  } else {
    overview_range(s);
  }
  hi_sample(s);
  s->cursor_v = s->ss->j.ncomp ? s->ss->j.comp[0].v : 0.0;
  s->view_lo = s->ss->j.vlo;
  s->view_hi = s->ss->j.vhi;
  if (s->cursor_v < s->view_lo || s->cursor_v > s->view_hi) s->cursor_v = 0.5 * (s->view_lo + s->view_hi);
}

/* Verdict of a queue entry (cached; the journal is asked once). */
int dt_insp_verdict_of(dt_insp *s, size_t i) {
  dt_qentry *e = &s->q->e[i];
  if (e->verdict < 0) {
    char key[DT_KEY_MAX];
    e->verdict = (signed char)dt_session_recorded_verdict(s->ss, entry_key(s, i, key, sizeof key), e->row);
  }
  return e->verdict;
}

/* ---------------------------------------------------------------- replay */

typedef struct replay {
  FILE *f;
  long line;
  char pending[1100]; /* characters still to type (a whole line fits) */
  size_t pos;
} replay;

/* Next key of a key file: action names and key names, '#' comments,
 * "type TEXT" types TEXT character by character.  -1 at the end; -2 for a
 * line that names no key (msg says which). */
static int replay_next(replay *r, char *msg, size_t size) {
  for (;;) {
    if (r->pending[r->pos]) {
      uint32_t cp;
      r->pos += dt_utf8_decode(r->pending + r->pos, strlen(r->pending + r->pos), &cp);
      if (cp == DT_UTF8_BAD) continue; /* cannot happen: checked when the line was read */
      return (int)cp;
    }
    char line[1100];
    if (!fgets(line, sizeof line, r->f)) return -1;
    r->line++;
    char *p = line;
    while (*p == ' ' || *p == '\t') p++;
    size_t n = strlen(p);
    while (n && (p[n - 1] == '\n' || p[n - 1] == '\r')) p[--n] = '\0';
    if (!strncmp(p, "pause ", 6)) { /* a person looking: MS milliseconds */
      long ms = strtol(p + 6, NULL, 10);
      if (ms > 0 && ms <= 60000) {
        struct timespec ts = {ms / 1000, (ms % 1000) * 1000000L};
        nanosleep(&ts, NULL);
      }
      continue;
    }
    if (!strncmp(p, "type ", 5)) {
      if (!dt_utf8_valid(p + 5, strlen(p + 5))) {
        snprintf(msg, size, "line %ld: the text to type is not UTF-8", r->line);
        return -2;
      }
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

/* Keystroke times [ms] for --bench. */
typedef struct key_times {
  double *t;
  size_t n, cap;
} key_times;

static void key_times_add(key_times *k, double ms) {
  if (k->n == k->cap) {
    size_t cap = k->cap ? 2 * k->cap : 256;
    double *t = realloc(k->t, cap * sizeof *t);
    if (!t) return; /* out of memory: this time is not counted */
    k->t = t;
    k->cap = cap;
  }
  k->t[k->n++] = ms;
}

/* "LABEL N  median ...  p90 ...  max ..." (nothing when empty). */
static void key_times_print(const char *label, key_times *k) {
  if (!k->n) return;
  qsort(k->t, k->n, sizeof *k->t, cmp_double);
  printf("%s %zu  median %.3f ms  p90 %.3f ms  max %.3f ms\n", label, k->n, k->t[k->n / 2],
         k->t[(size_t)(0.9 * (double)(k->n - 1))], k->t[k->n - 1]);
}

/* Open on the first spectrum without a verdict (the judged counted), and
 * say what the session is: all judged, damaged lines, read-only, its file. */
static void open_first(dt_insp *s, dt_journal *jn, const dt_inspect_opts *o) {
  const dt_queue *q = s->q;
  int found = 0;
  size_t first = 0;
  for (size_t i = 0; i < q->n; i++) {
    if (dt_insp_verdict_of(s, i) != DT_VERDICT_NONE) s->njudged++;
    else if (!found) {
      first = i;
      found = 1;
    }
  }
  draw(s); /* something on screen while the first spectrum loads */
  dt_insp_load(s, first);
  const dt_session *ss = s->ss;
  if (!found && (ss->tone == DT_TONE_TEXT || !ss->msg[0]))
    dt_insp_say(s, DT_TONE_GOOD, "every spectrum of the queue has a verdict already (%zu)", q->n);
  if (jn && dt_journal_warning_count(jn) > 0 && ss->tone != DT_TONE_BAD)
    dt_insp_say(s, DT_TONE_WARN, "session file: %zu damaged line%s skipped (%s)", dt_journal_warning_count(jn),
                dt_journal_warning_count(jn) == 1 ? "" : "s", dt_journal_warning(jn, 0));
  if (jn && dt_journal_read_only(jn) && ss->tone == DT_TONE_TEXT)
    dt_insp_say(s, DT_TONE_WARN, "read-only: looking only");
  if (jn && ss->tone == DT_TONE_TEXT) {
    /* say where the judgements go, after what the first spectrum said */
    const char *sp = o->session_path ? o->session_path : dt_journal_path(jn);
    size_t n = strlen(ss->msg);
    if (!n) dt_insp_say(s, DT_TONE_TEXT, "session file: %s", sp);
    else snprintf(s->ss->msg + n, sizeof s->ss->msg - n, " - session file: %s", sp);
  }
  draw(s);
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
  s->ss = dt_session_alloc(t, jn);
  if (!s->ss) {
    free(s);
    dt_term_close();
    snprintf(msg, msgsize, "out of memory");
    if (rp.f) fclose(rp.f);
    return 1;
  }
  /* a longer refit is drawn as far as it got and finished in the next idle
   * moment (or before the next key), then recorded (session.h) */
  s->ss->fit_slice = o->fit_slice_ms * 1e-3;
  s->atomic = t;
  s->cog = dt_cog_cache_alloc(); /* NULL: the exact inverse */
  s->pf = o->no_look_ahead ? NULL : dt_prefetch_start(t);
  s->q = q;
  s->jn = jn;
  s->o = o;
  s->utf8 = dt_term_utf8();
  s->mode = s->utf8 ? DT_PLOT_BRAILLE : DT_PLOT_ASCII;
  s->normalised = 1;

  open_first(s, jn, o);

  /* keystroke times: all, those that refitted within one spectrum, the
   * moves to another spectrum, and the refits until their fit was done
   * (a refit cut at the frame finished) */
  key_times kt[4];
  memset(kt, 0, sizeof kt);
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
      /* a refit cut at the frame and the log N intervals of a new fit
       * follow in the next frames, when no key comes within
       * INTERVALS_IDLE_MS */
      int fitp = dt_session_fit_pending(s->ss), pending = fitp || dt_session_intervals_pending(s->ss);
      key = dt_term_getkey(pending ? INTERVALS_IDLE_MS : -1);
      if (key == DT_KEY_NONE) {
        if (fitp) dt_session_finish_fit(s->ss);
        else if (pending) dt_session_finish_intervals(s->ss);
        if (pending) draw(s);
        continue;
      }
    }
    double t0 = now_ms();
    dt_session_finish_fit(s->ss); /* a change still fitting is recorded before the next */
    long f0 = s->ss->nfits;
    size_t c0 = s->cur;
    int ev = dt_insp_handle(s, key);
    if (ev & EV_QUIT) break;
    draw(s);
    double dt = now_ms() - t0, settled = dt;
    if (rp.f && dt_session_fit_pending(s->ss)) { /* a replay has no idle time */
      dt_session_finish_fit(s->ss);
      draw(s);
      settled = now_ms() - t0;
    }
    if (rp.f && dt_session_intervals_pending(s->ss)) {
      dt_session_finish_intervals(s->ss);
      draw(s);
    }
    key_times_add(&kt[0], dt);
    if (s->ss->nfits > f0 && s->cur == c0) {
      key_times_add(&kt[1], dt);
      key_times_add(&kt[3], settled);
    }
    if (s->cur != c0) key_times_add(&kt[2], dt);
  }
  dt_session_finish_fit(s->ss); /* nothing typed is lost on the way out */
  if (o->dump) dump_screen(s, o->dump);
  dt_term_close();
  static const char *const label[4] = {"keys", "refits", "next", "refits settled"};
  for (int k = 0; k < 4; k++) {
    if (o->bench && kt[0].n > 0) key_times_print(label[k], &kt[k]);
    free(kt[k].t);
  }
  if (rp.f) fclose(rp.f);
  dt_prefetch_stop(s->pf);
  dt_session_free(s->ss);
  dt_cog_cache_free(s->cog);
  dt_hi_sample_free(&s->hs);
  free(s->tmp);
  dt_grid_free(&s->g);
  dt_plot_free(&s->p);
  free(s);
  return status;
}
