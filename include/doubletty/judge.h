/* The judgement of one spectrum, and the actions that change it.
 *
 * Everything a person decides about a spectrum lives in a dt_judgement; every
 * change is a dt_action applied with dt_judgement_apply().  The inspector
 * turns keys into actions, the session log writes actions as text lines and
 * replays them, so "what the screen shows" and "what the log says" are the
 * same state by construction.  Fitted values enter the state only through a
 * DT_ACT_FIT action carrying the fit's result, so a replay restores them
 * exactly and may re-run the fit to verify them. */
#ifndef DOUBLETTY_JUDGE_H
#define DOUBLETTY_JUDGE_H
#include <stddef.h>
#include "doubletty/fit.h"
#include "doubletty/model.h"
#include "doubletty/window.h"

#define DT_MAX_WINDOWS 32
#define DT_NOTE_MAX 512
#define DT_JUDGE_MAX_SYS 8       /* absorber systems of a spectrum (systems.h) */
#define DT_JUDGE_SYS_NAME 32     /* bytes of a system name, with the NUL */
#define DT_JUDGE_TARGET "target" /* the system whose verdict is j->verdict */

typedef enum dt_verdict {
  DT_VERDICT_NONE = 0,        /* not judged yet */
  DT_VERDICT_DETECTED,
  DT_VERDICT_NOT_DETECTED,
  DT_VERDICT_UNSURE,
  DT_VERDICT_UNUSABLE         /* the data cannot tell */
} dt_verdict;

/* "none", "detected", "not-detected", "unsure", "unusable" */
const char *dt_verdict_name(dt_verdict v);
int dt_verdict_parse(const char *s, dt_verdict *v);   /* DT_OK or DT_EINVAL */

/* An absorber system's range [km/s relative to vsys] (systems.h). */
typedef struct dt_judge_system {
  char name[DT_JUDGE_SYS_NAME];
  double vlo, vhi;
} dt_judge_system;

/* The verdict of a system other than the target. */
typedef struct dt_system_verdict {
  char name[DT_JUDGE_SYS_NAME];
  dt_verdict verdict;            /* never DT_VERDICT_NONE in a judgement */
} dt_system_verdict;

typedef struct dt_judgement {
  char doublet[16];           /* doublet name, e.g. "NaI" */
  double vsys;                /* rest frame [km/s] */
  double resolution;          /* R (> 0) or ... */
  double fwhm_kms;            /* ... LSF FWHM [km/s] when resolution <= 0 */
  double vlo, vhi;            /* velocity window [km/s] for fit and measurement */
  int cont_order;             /* Legendre order >= 0; -1: continuum fixed at 1 */
  size_t nwin;                /* continuum windows; none = automatic continuum */
  dt_window win[DT_MAX_WINDOWS];
  size_t ncomp;
  dt_component comp[DT_MAX_COMP];
  unsigned char frozen[DT_MAX_COMP];   /* DT_FREEZE_* bits */
  int tie_b;                  /* 1: all components share one b */
  int covering;               /* 1: each component has a covering factor C_f
                                 (cover.h), fitted */
  double cf[DT_MAX_COMP];     /* C_f per component in (0, 1]; 0: none yet
                                 (a fit starts from DT_CF_START) */
  dt_verdict verdict;         /* the target system's verdict */
  size_t nsys;                /* the systems, [0] the target; 0: the defaults
                                 for vsys (systems.h) */
  dt_judge_system sys[DT_JUDGE_MAX_SYS];
  size_t nsysv;               /* verdicts of the other systems, in the order
                                 first given */
  dt_system_verdict sysv[DT_JUDGE_MAX_SYS];
  char note[DT_NOTE_MAX];
  int has_fit;                /* fit below is the result for the state above */
  dt_fit_result fit;
} dt_judgement;

typedef enum dt_action_kind {
  DT_ACT_WINDOW_ADD,     /* x[0], x[1]: window lo, hi [Angstrom] */
  DT_ACT_WINDOW_REMOVE,  /* index: window */
  DT_ACT_COMP_ADD,       /* x[0..2]: logN, b, v */
  DT_ACT_COMP_REMOVE,    /* index: component */
  DT_ACT_COMP_SET,       /* index; x[0..2]: new logN, b, v (a nudge) */
  DT_ACT_FREEZE,         /* index; ival: new DT_FREEZE_* bits */
  DT_ACT_TIE_B,          /* ival: 0/1 */
  DT_ACT_CONT_ORDER,     /* ival: order (-1 .. DT_MAX_CONT-1) */
  DT_ACT_DOUBLET,        /* text: doublet name */
  DT_ACT_RESOLUTION,     /* x[0]: R, x[1]: FWHM km/s */
  DT_ACT_VSYS,           /* x[0]: vsys */
  DT_ACT_VWINDOW,        /* x[0], x[1]: vlo, vhi */
  DT_ACT_FIT,            /* fit: result; components take its values */
  DT_ACT_VERDICT,        /* ival: dt_verdict; text: the system name, "" = target */
  DT_ACT_NOTE,           /* text: the note (replaces) */
  DT_ACT_RESTORE,        /* state: whole judgement (undo / redo) */
  DT_ACT_AUTOFIT,        /* state: whole judgement from the automatic first pass */
  DT_ACT_COVERING,       /* ival: 0/1, partial covering off/on */
  DT_ACT__COUNT
} dt_action_kind;

typedef struct dt_action {
  dt_action_kind kind;
  int index;
  int ival;
  double x[3];
  char text[DT_NOTE_MAX];
  dt_fit_result fit;                 /* DT_ACT_FIT */
  const dt_judgement *state;         /* DT_ACT_RESTORE (not owned) */
} dt_action;

/* Defaults: doublet "NaI", vsys 0, R 3000, window [-600, 600], order 2. */
void dt_judgement_init(dt_judgement *j);

/* Apply an action; DT_EINVAL (state unchanged) when it does not fit the
 * state (index out of range, too many components/windows, bad values). */
int dt_judgement_apply(dt_judgement *j, const dt_action *a);

/* The verdict of system name ("" or "target": j->verdict); NONE when the
 * system has none. */
dt_verdict dt_judgement_system_verdict(const dt_judgement *j, const char *name);

/* Short lower-case name of an action kind ("comp-add", ...) and back. */
const char *dt_action_name(dt_action_kind k);
int dt_action_kind_parse(const char *s, dt_action_kind *k);

/* Which actions change the model (and so clear has_fit): every kind except
 * DT_ACT_VERDICT and DT_ACT_NOTE; DT_ACT_FIT sets has_fit, DT_ACT_RESTORE
 * takes has_fit from the restored state.  A DT_ACT_FIT whose result has
 * status DT_OK gives the components its values; a failed fit is recorded
 * (has_fit = 1, fit.status != DT_OK) and leaves the components as they were.
 * Its fit.ncomp must equal the judgement's ncomp. */

/* An action of kind k with every other field zero (state NULL). */
void dt_action_init(dt_action *a, dt_action_kind k);

/* 1 when two judgements are the same state: every setting, component,
 * freeze, verdict, note and (when has_fit) the fit, compared exactly (NaN
 * equals NaN). */
int dt_judgement_same(const dt_judgement *a, const dt_judgement *b);
/* 1 when the systems and the systems' verdicts of a and b are the same. */
int dt_judgement_same_systems(const dt_judgement *a, const dt_judgement *b);
/* The same for two fit results (every field, NaN equals NaN). */
int dt_fit_result_same(const dt_fit_result *a, const dt_fit_result *b);

/* DT_FREEZE_* bits as letters in the order "N", "b", "v" ("" for none) and
 * back; buf holds at least 4 bytes.  Parse: DT_OK or DT_EINVAL. */
const char *dt_freeze_str(unsigned bits, char buf[4]);
int dt_freeze_parse(const char *s, unsigned *bits);

#endif
