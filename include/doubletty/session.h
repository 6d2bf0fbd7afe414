/* The vetting session of one spectrum at a time: the logic behind the
 * inspector, without a terminal.
 *
 * A dt_session holds what a person works on: the spectrum being vetted, its
 * judgement, the analysis of that judgement, the undo and redo stacks, the
 * automatic first pass waiting to be recorded and its suggested verdict.
 * Every change goes the same way: check the action on a copy of the state
 * (dt_judgement_apply), refit the copy when the model changed, append the
 * action with the state it led to to the session journal, and only then
 * adopt it.  Nothing counts as done before the journal has it on disk.
 *
 * The session never prints: each call returns a status and leaves a short
 * message with a tone (msg, tone) for the caller to show.  Its fields are
 * public for reading (a screen draws from them); only the functions below
 * change them.  All journal calls of the inspector go through this module
 * (one function builds the target, one appends). */
#ifndef DOUBLETTY_SESSION_H
#define DOUBLETTY_SESSION_H
#include <stddef.h>
#include "doubletty/analysis.h"
#include "doubletty/atomic.h"
#include "doubletty/autofit.h"
#include "doubletty/digest.h"
#include "doubletty/journal.h"
#include "doubletty/judge.h"
#include "doubletty/spectrum.h"
#include "doubletty/systems.h"

#define DT_SESSION_UNDO_MAX 200
#define DT_SESSION_KEY_MAX 8300      /* session name of a target */
#define DT_SESSION_NEW_B 10.0        /* Doppler b of a new component [km/s] */

/* How a message should be read. */
typedef enum dt_session_tone {
  DT_TONE_TEXT = 0, /* information */
  DT_TONE_GOOD,     /* done and saved */
  DT_TONE_WARN,     /* refused or worth a look */
  DT_TONE_BAD       /* an error; the session file may be failing */
} dt_session_tone;

/* Which parameter of a component (nudges and holds). */
typedef enum dt_session_param { DT_PARAM_V = 0, DT_PARAM_B, DT_PARAM_LOGN } dt_session_param;

struct dt_session_ahead;

/* A species linked to the judgement, shown with the main doublet: an
 * analysis of the same spectrum for its doublet, evaluated in the state's
 * components (their velocities; its own log N and b from the joint fit, or
 * starting guesses before one).  Index k is j.linked[k]. */
typedef struct dt_session_species {
  dt_analysis *an;            /* NULL until the species is first shown */
  int ok;                     /* out holds the analysis of the state shown */
  dt_analysis_out out;
  char msg[200];              /* why not (ok = 0) */
} dt_session_species;

/* One spectrum to vet. */
typedef struct dt_session_target {
  const char *path;       /* the file to read */
  const char *key;        /* its name in the session file */
  long row;               /* table row (0: not a row) */
  const char *name;       /* the list's name for it ("" or NULL: none) */
  int air;                /* wavelengths in air where the file does not say */
  dt_read_opts read;      /* further reading options: frames, position, site
                             (row and air from the fields above); zero = defaults */
  dt_judgement initial;   /* settings of a first look; resolution and
                             fwhm_kms both 0: the file header's R */
  int has_window;         /* initial.vlo/vhi were given (else widened to
                             cover the systems) */
  dt_system_opts systems; /* target range and systems of the list/run */
  int defer_intervals;   /* the log N intervals after the frame, not in each
                             analysis (dt_session_finish_intervals) */
  struct dt_cog_cache *cog; /* curve-of-growth tables shared by the analyses
                             (cog.h; NULL: the exact inverse) */
  const dt_hyperfine *hyperfine; /* model lines with hyperfine structure
                             (analysis.h, opts.hyperfine); NULL: none */
  int lsf_constant;       /* 1: the judgement's R or FWHM even where the
                             spectrum has widths per pixel (a value the user
                             gave; lsf.h, dt_analysis_opts.lsf_constant) */
  struct dt_session_ahead *ahead; /* made in advance for this target (NULL:
                             none); dt_session_load takes its parts */
} dt_session_target;

typedef struct dt_session {
  /* fixed */
  const dt_atomic *atomic;
  dt_journal *jn;             /* may be NULL: looking only */
  double nsigma;              /* significance of recorded upper limits */
  int auto_refit;             /* 1: refit after every model change (default) */
  long nfits;                 /* fits run so far */
  double fit_slice;           /* > 0: seconds a change's refit may take at
                                 once; a longer one is shown as far as it
                                 got and finished later (dt_session_finish_fit) */

  /* the target */
  char key[DT_SESSION_KEY_MAX];
  char name[256];             /* the list's name of the current target */
  long row;
  int loaded;                 /* 1: spec and an are valid */
  char load_msg[400];         /* why not */
  dt_spectrum *spec;
  dt_analysis *an;
  char sha[DT_SHA256_HEX];
  int file_changed;           /* the file's digest differs from the record */

  /* the judgement */
  dt_judgement j;
  int pending;                /* j is the automatic first pass, not yet recorded */
  size_t sel;                 /* selected component */
  int an_ok;                  /* out holds a valid analysis of j ... */
  int defer_intervals;        /* the target's: intervals left for later */
  const dt_hyperfine *hyperfine; /* the target's model settings, for the */
  int lsf_constant;           /*   linked species' analyses too */
  struct dt_cog_cache *cog;
  int intervals_tried;        /* dt_session_finish_intervals ran for out */
  int an_fallback;            /* ... or, when 1, of j without its continuum
                                 windows (they cannot carry the fit yet:
                                 an_msg says why); nothing of it is recorded */
  char an_msg[400];           /* why not */
  dt_analysis_out out;
  int has_suggest;
  dt_verdict suggested;
  char reason[64];

  /* absorber systems (systems.h): [0] the target */
  dt_system_set systems;
  size_t selsys;              /* the system verdicts go to */
  int has_sysres;             /* sysres holds the first pass per system */
  dt_system_result sysres[DT_MAX_SYSTEMS];
  int has_sysmeas;            /* sysmeas: each system measured in out's state */
  dt_system_result sysmeas[DT_MAX_SYSTEMS]; /* (no suggestion) */

  /* linked species (session_joint.c) */
  dt_session_species lsp[DT_JUDGE_MAX_LINKED];
  struct dt_joint_analysis *jan; /* the joint fits' analysis (joint.h); NULL until one */
  struct dt_joint_out *jout;  /* its last result (the next fit starts from it) ... */
  int jout_ok;                /* ... when this is 1 */
  char jmsg[300];             /* why the last joint fit failed ("" when it did not) */

  /* a change whose refit ran out of fit_slice: j shows it as typed, out
   * the fit as far as it got; nothing of it is recorded or adopted yet */
  int fit_pending;
  dt_judgement pend_before;   /* j before the change */
  int pend_n;                 /* its actions */
  dt_action pend_a[2];

  /* undo / redo: snapshots of j */
  dt_judgement *undo, *redo;
  size_t nundo, nredo;

  /* the last message */
  char msg[512];
  dt_session_tone tone;
} dt_session;

/* A session recording into jn (NULL: no judgement is accepted).  NULL when
 * out of memory. */
dt_session *dt_session_alloc(const dt_atomic *atomic, dt_journal *jn);
void dt_session_free(dt_session *ss);

/* A target with the file path, its session key and row, nothing else given:
 * no name, vacuum unless the file says air, the default judgement as its
 * first-look settings.  Callers set further fields after this. */
void dt_session_target_init(dt_session_target *t, const char *path, const char *key, long row);

/* Open target t: its recorded state when the journal has one (then a refit
 * is compared with the recorded fit), otherwise the automatic first pass,
 * which is recorded with the first change.  Looking writes nothing.
 * Returns DT_OK, or the reader's error (loaded = 0, load_msg says why; the
 * target can still take a note or the verdict "unusable"). */
int dt_session_load(dt_session *ss, const dt_session_target *t);

/* The part of opening a target that needs no session: the file read,
 * its digest, and (with `first`) the automatic first pass from the
 * target's first-look settings.  Touches no journal and no session, so it
 * may be made on another thread while the session goes on; given to
 * dt_session_load as t->ahead (for the same target and first-look
 * settings), the load reads and fits nothing more and the result is the
 * same as without.  NULL when out of memory. */
typedef struct dt_session_ahead {
  int rc;                        /* the reader's status */
  char load_msg[400];            /* why not (rc != DT_OK) */
  dt_spectrum *spec;             /* taken by dt_session_load */
  dt_analysis *an;               /* taken by dt_session_load */
  char sha[DT_SHA256_HEX];       /* "" when the digest failed */
  int has_first;                 /* the first pass was run: */
  int first_rc;                  /* its status */
  dt_judgement first;            /* the judgement it gave */
  dt_autofit_out af;             /* and its output */
} dt_session_ahead;

dt_session_ahead *dt_session_ahead_make(const dt_atomic *atomic, const dt_session_target *t,
                                        int first);
void dt_session_ahead_free(dt_session_ahead *a);

/* The verdict the journal holds for a target (NONE if none). */
dt_verdict dt_session_recorded_verdict(const dt_session *ss, const char *key, long row);

/* 1 when judgements can be recorded now; otherwise 0 with msg saying why. */
int dt_session_writable(dt_session *ss);

/* Check, refit (model changes, when auto_refit), record, adopt.  DT_OK, or
 * DT_EINVAL (refused: the action does not fit the state) / DT_EIO (not
 * recorded); msg says what happened. */
int dt_session_apply(dt_session *ss, const dt_action *a);

/* The actions a person takes, built on dt_session_apply.  All return DT_OK
 * or an error with msg saying why. */
int dt_session_add(dt_session *ss, double v);          /* at v [km/s]; selects it */
int dt_session_remove(dt_session *ss);                 /* the selected one */
int dt_session_select(dt_session *ss, int step);       /* +1 next, -1 previous */
/* Move parameter p of the selected component by d (km/s, km/s or dex) and
 * hold it (it stays where it was put during refits until released). */
int dt_session_nudge(dt_session *ss, dt_session_param p, double d);
int dt_session_hold(dt_session *ss, dt_session_param p);  /* hold or release */
int dt_session_tie(dt_session *ss);
/* Partial covering (cover.h) on or off: a covering factor per component,
 * fitted (with auto_refit) from then on. */
int dt_session_covering(dt_session *ss);
int dt_session_order(dt_session *ss, int step);
int dt_session_window_add(dt_session *ss, double lo, double hi);  /* [Angstrom] */
int dt_session_window_remove(dt_session *ss, double lambda);      /* the one holding lambda */
int dt_session_refit(dt_session *ss);
int dt_session_autofit(dt_session *ss);                /* replace by the first pass */
int dt_session_switch_doublet(dt_session *ss);         /* next doublet the data cover */
int dt_session_undo(dt_session *ss);
int dt_session_redo(dt_session *ss);
/* The verdict of the selected system.  The target's moves the queue on in
 * the inspector; another system's is refused in a session file of format
 * version < 3. */
int dt_session_verdict(dt_session *ss, dt_verdict v);
/* Select the next (+1) or previous (-1) system. */
int dt_session_select_system(dt_session *ss, int step);
int dt_session_note(dt_session *ss, const char *text);

/* Linked species (joint fits across doublets).  Link doublet name to the
 * judgement, or unlink it when it is linked; the model changes, so the
 * state is refitted jointly (auto_refit).  Refused: the main doublet, a
 * doublet the table does not have or whose lines the spectrum does not
 * cover, a fourth species. */
int dt_session_link(dt_session *ss, const char *name);
/* The next b rule: same -> thermal -> free -> same. */
int dt_session_btie_next(dt_session *ss);
/* The doublets of the table other than the main one whose two lines the
 * spectrum covers at vsys, in table order, into out[0..max); their count. */
size_t dt_session_linkable(const dt_session *ss, const dt_doublet **out, size_t max);
/* Refit a recorded joint state (has_joint) of spectrum sp jointly, starting
 * from its components, and compare: the main doublet's fit as
 * dt_fit_check_refit does, each linked species' log N within tol_sigma of
 * the larger 1-sigma error.  *agrees 1 when it reproduces the record (or
 * the state has no joint fit), else 0 with why naming the difference.
 * DT_OK, or the joint analysis' error with e filled. */
int dt_linked_verify(const dt_spectrum *sp, const dt_atomic *at, const dt_judgement *recorded,
                     double tol_sigma, int *agrees, char *why, size_t nwhy, dt_err *e);

/* Set the message (for callers that speak through the session's line). */
void dt_session_say(dt_session *ss, dt_session_tone tone, const char *fmt, ...)
#if defined(__GNUC__)
    __attribute__((format(printf, 3, 4)))
#endif
    ;

/* 1 when parameter p of component k sits at a bound of the fit (within a
 * thousandth of the range): its error is then meaningless. */
int dt_session_at_bound(const dt_session *ss, size_t k, dt_session_param p);

/* With a target's defer_intervals: 1 when the state shown has a fit whose
 * log N intervals are still to be computed; dt_session_finish_intervals
 * computes them (within the time of one analysis run, analysis.h). */
int dt_session_intervals_pending(const dt_session *ss);
void dt_session_finish_intervals(dt_session *ss);

/* With fit_slice > 0: a change whose refit needed more than fit_slice
 * seconds is shown at once (j as typed, the fit as far as it got) and
 * left pending (dt_session_fit_pending 1).  dt_session_finish_fit then
 * does it as dt_session_apply would have done: the whole refit again
 * from the typed state (so the result does not depend on where the slice
 * ended), the records, the undo step -- its status.  Every action of the
 * session finishes a pending change first, so the records stay in order;
 * a caller must finish it before it closes the session. */
int dt_session_fit_pending(const dt_session *ss);
int dt_session_finish_fit(dt_session *ss);

#endif
