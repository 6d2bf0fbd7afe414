/* The inspector's state, shared by the event code (inspector.c) and the
 * drawing code (view.c).  Drawing only reads it. */
#ifndef DT_UI_INSP_H
#define DT_UI_INSP_H
#include <stddef.h>
#include "doubletty/analysis.h"
#include "doubletty/atomic.h"
#include "doubletty/digest.h"
#include "doubletty/journal.h"
#include "doubletty/judge.h"
#include "doubletty/spectrum.h"
#include "grid.h"
#include "inspector.h"
#include "plot.h"
#include "queue.h"

#define DT_UNDO_MAX 200
#define DT_KEY_MAX 8300                /* session name of a queue entry */
#define DT_MIN_W 80
#define DT_MIN_H 24

typedef struct dt_insp {
  /* fixed for the run */
  const dt_atomic *atomic;
  dt_queue *q;
  dt_journal *jn;
  const dt_inspect_opts *o;
  int utf8;
  dt_plot_mode mode;

  /* the queue */
  size_t cur;
  size_t njudged;

  /* the current spectrum */
  char key[DT_KEY_MAX];          /* its name in the session (file#doublet) */
  int loaded;                    /* 1: spec and an are valid */
  char load_msg[400];            /* why it is not */
  dt_spectrum *spec;
  dt_analysis *an;
  char sha[DT_SHA256_HEX];
  int file_changed;              /* the file's digest differs from the record */
  dt_judgement j;                /* the current state */
  int pending;                   /* j is the automatic first pass, not yet recorded */
  int an_ok;                     /* out holds a valid analysis of j */
  char an_msg[400];              /* why not */
  dt_analysis_out out;
  int has_suggest;
  dt_verdict suggested;
  char reason[64];
  double ov_ymin, ov_ymax;       /* overview flux range */

  /* undo / redo: snapshots of j */
  dt_judgement *undo, *redo;
  size_t nundo, nredo;

  /* view */
  double view_lo, view_hi;       /* velocity range of the panels [km/s] */
  double cursor_v;               /* cursor velocity [km/s] */
  int panel;                     /* panel of the cursor: 0 the stronger line */
  size_t sel;                    /* selected component */
  int normalised;                /* panels show flux / continuum */
  int auto_refit;
  int help_page;                 /* 0: no help; k: page k */
  int help_pages;                /* pages the last help drawing needed */
  int anchor;                    /* a continuum window is being marked ... */
  double anchor_v;               /* ... from this velocity */
  int anchor_panel;
  int plot_w;                    /* columns of the velocity plots (last layout) */

  /* note editor */
  int editing;
  char edit[DT_NOTE_MAX];
  size_t edit_len, edit_pos;     /* bytes */

  /* status line */
  char msg[512];
  int msg_role;

  long nfits;                    /* fits run so far (for timing by kind) */

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

#endif
