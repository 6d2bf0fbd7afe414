/* The inspector: vet a queue of spectra full-screen, one keystroke per
 * judgement, with the fit following every change.
 *
 * The command layer builds the queue and opens the session journal; the
 * inspector runs the event loop: key -> command (keymap.h) -> action on the
 * judgement (judge.h) -> journal append -> refit (analysis.h) -> FIT
 * action appended -> screen drawn.  Nothing is shown as done before the
 * journal has it on disk. */
#ifndef DT_UI_INSPECTOR_H
#define DT_UI_INSPECTOR_H
#include <stddef.h>
#include "doubletty/atomic.h"
#include "doubletty/hyperfine.h"
#include "doubletty/journal.h"
#include "doubletty/lsf.h"
#include "queue.h"

typedef struct dt_inspect_opts {
  /* defaults for targets whose list line does not set them */
  const char *doublet;     /* NULL: "NaI" */
  double resolution;       /* > 0: R */
  double fwhm_kms;         /* > 0: LSF FWHM [km/s] */
  dt_lsf_per res_per;      /* --resolution / --fwhm per doublet (n > 0: */
  int res_per_fwhm;        /*   over the two above; lsf.h); FWHM values */
  int has_vsys;
  double vsys;             /* [km/s] */
  dt_system_opts systems;  /* target range, Milky-Way width, more systems */
  int hyperfine_all;       /* 1: every target's lines with hyperfine structure */
  const dt_hyperfine *hyperfine; /* the table, for hyperfine_all and list lines
                              saying hfs=1 (NULL: none read) */
  int covering;            /* 1: partial covering (a covering factor per
                              component) on a first look */
  /* screen */
  int colour;              /* -1 auto, 0 never */
  int ascii;               /* 1: no Unicode even in a UTF-8 locale */
  /* headless runs (benchmarks, tests): keys from a file, output discarded */
  const char *replay;      /* key file: one action name or key name a line,
                              "type TEXT" types TEXT; NULL: interactive */
  const char *dump;        /* write the last screen as text here (or NULL) */
  int width, height;       /* headless screen size (0: 100 x 32) */
  int bench;               /* print per-keystroke timing at the end */
  int no_look_ahead;       /* 1: open each spectrum only when it is shown */
  double fit_slice_ms;     /* a change's refit may take this long before the
                              frame, the rest after it (session.h fit_slice);
                              0: all before it (default DT_INSPECT_FIT_SLICE_MS) */
  /* set by the command, for the inspector to show and use */
  const char *session_path; /* shown at the start (NULL: the journal's path) */
  const struct dt_hicube *hi; /* a 21-cm cube to show at each sightline (or NULL) */
} dt_inspect_opts;

#define DT_INSPECT_FIT_SLICE_MS 5.0

void dt_inspect_opts_init(dt_inspect_opts *o);

/* Can the screen that options o ask for be used (a terminal, or a replay)?
 * 0, or nonzero with msg saying why not.  A command asks before it opens
 * a session file, so none is created for a screen that cannot be used. */
int dt_inspect_check(const dt_inspect_opts *o, char *msg, size_t size);

/* Run the inspector on queue q (n >= 1) with the atomic table t, recording
 * into journal jn (opened by the caller, read-only or not; may be NULL for
 * a look without a record, which then accepts no judgement).  Returns the
 * exit status: 0 after quit, 128 + signal after SIGINT/SIGTERM/SIGHUP/
 * SIGQUIT, 1 when the screen cannot be used (msg says why). */
int dt_inspect_run(dt_queue *q, const dt_atomic *t, dt_journal *jn, const dt_inspect_opts *o,
                   char *msg, size_t msgsize);

#endif
