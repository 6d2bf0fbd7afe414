/* The inspector's state, shared by the event code (inspector.c) and the
 * drawing code (view.c).  Drawing only reads it. */
#ifndef DT_UI_INSP_H
#define DT_UI_INSP_H
#include <stddef.h>
#include "doubletty/analysis.h"
#include "doubletty/atomic.h"
#include "doubletty/digest.h"
#include "doubletty/hicube.h"
#include "doubletty/journal.h"
#include "doubletty/judge.h"
#include "doubletty/session.h"
#include "doubletty/spectrum.h"
#include "grid.h"
#include "inspector.h"
#include "plot.h"
#include "queue.h"

#define DT_KEY_MAX DT_SESSION_KEY_MAX /* session name of a queue entry */
#define DT_MIN_W 80
#define DT_MIN_H 24

typedef enum dt_edit_mode {
  DT_EDIT_NONE = 0,
  DT_EDIT_NOTE,      /* the note of the current spectrum */
  DT_EDIT_GOTO,      /* a spectrum by number or name */
  DT_EDIT_VELOCITY   /* a velocity for the cursor */
} dt_edit_mode;

typedef struct dt_insp {
  /* fixed for the run */
  const dt_atomic *atomic;
  dt_queue *q;
  dt_journal *jn;
  const dt_inspect_opts *o;
  int utf8;
  dt_plot_mode mode;
  dt_session *ss;                /* the judgement of the current spectrum */
  struct dt_prefetch *pf;        /* the look-ahead thread (NULL: none) */
  struct dt_cog_cache *cog;      /* curve-of-growth tables of all spectra */

  /* the queue */
  size_t cur;
  size_t njudged;
  int finished;                  /* the last spectrum was judged: the summary shows */
  double ov_ymin, ov_ymax;       /* overview flux range */

  /* view */
  double view_lo, view_hi;       /* velocity range of the panels [km/s] */
  double cursor_v;               /* cursor velocity [km/s] */
  int panel;                     /* panel of the cursor: 0 the stronger line */
  int normalised;                /* panels show flux / continuum */
  int help_page;                 /* 0: no help; k: page k */
  int help_pages;                /* pages the last help drawing needed */
  int anchor;                    /* a continuum window is being marked ... */
  double anchor_v;               /* ... from this velocity */
  int anchor_panel;
  int plot_w;                    /* columns of the velocity plots (last layout) */

  /* line editor: note and prompts */
  dt_edit_mode editing;
  char edit[DT_NOTE_MAX];
  size_t edit_len, edit_pos;     /* bytes */

  /* the chooser of species to link (insp_link.c) */
  int choosing;                  /* open */
  size_t choice_sel;             /* the highlighted doublet */

  /* the 21-cm spectrum at the current sightline (o->hi given) */
  int has_hi;                    /* hs holds a sample (any status) */
  dt_hi_sample hs;
  double hs_vsys;                /* the vsys hs's velocities are relative to */
  char hi_msg[120];              /* why not, when has_hi is 0 */

  /* drawing */
  dt_grid g;
  dt_plot p;
  double *tmp;                   /* scratch for scaled curves */
  size_t tmp_cap;
} dt_insp;

/* Draw the whole screen of state s into s->g (w x h cells).  Pure: no
 * terminal.  Updates s->plot_w and s->help_pages. */
void dt_view_draw(dt_insp *s, int w, int h);

/* "value±error" with dec decimals ("+-" without UTF-8); "value±?" when the
 * error is 1000 or more (an unconstrained parameter), just the value when
 * there is no error. */
const char *dt_view_pm(const dt_insp *s, char *buf, size_t size, double v, double err, int dec);

/* The role a message of this tone is drawn in. */
int dt_view_role_of_tone(dt_session_tone t);

/* Event code shared by inspector.c and insp_cmd.c. */
enum { EV_NONE = 0, EV_REDRAW = 1, EV_QUIT = 2 };
void dt_insp_say(dt_insp *s, dt_session_tone tone, const char *fmt, ...)
#if defined(__GNUC__)
    __attribute__((format(printf, 3, 4)))
#endif
    ;
const char *dt_insp_keyname(int cmd, char *buf, size_t n);
void dt_insp_load(dt_insp *s, size_t idx);
int dt_insp_verdict_of(dt_insp *s, size_t i);
/* Carry out key (a command, or a key of the line editor). */
int dt_insp_handle(dt_insp *s, int key);

/* Linked species (insp_link.c): open the chooser; a key while it is open
 * (digits pick, Up/Down and Enter/Space pick, Esc or the link key close);
 * the doublets it lists (those the spectrum covers, the main one left
 * out) into out[0..max), their count. */
#define DT_INSP_CHOICES 9
void dt_insp_link_open(dt_insp *s);
int dt_insp_link_key(dt_insp *s, int key);
size_t dt_insp_link_choices(const dt_insp *s, const dt_doublet **out);

#endif
