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
#define DT_JUDGE_MAX_LINKED 3    /* species fitted jointly besides j->doublet */
#define DT_JUDGE_DOUBLET 16      /* bytes of a doublet name, with the NUL */

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

/* How the Doppler b of a component is shared between linked species:
 * one b for all (SAME); b^2 = b_turb^2 + 2kT/m per species from one
 * temperature T and turbulent part b_turb (THERMAL); one b per species
 * (FREE).  The velocity of a component is always shared. */
typedef enum dt_btie { DT_BTIE_SAME = 0, DT_BTIE_THERMAL, DT_BTIE_FREE, DT_BTIE__COUNT } dt_btie;

/* "same", "thermal", "free" and back (DT_OK or DT_EINVAL). */
const char *dt_btie_name(dt_btie m);
int dt_btie_parse(const char *s, dt_btie *m);

/* One linked species' values in a joint fit: per component log N [cm^-2]
 * and b [km/s] with their 1-sigma errors (b of SAME is the shared b, of
 * THERMAL the b its T and b_turb give). */
typedef struct dt_linked_species {
  char doublet[DT_JUDGE_DOUBLET];
  double logN[DT_MAX_COMP], logN_err[DT_MAX_COMP];
  double b[DT_MAX_COMP], b_err[DT_MAX_COMP];
} dt_linked_species;

/* What a joint fit adds to the main doublet's dt_fit_result (whose
 * components, chi2, dof and npix are those of the joint fit): the linked
 * species in the judgement's order and, for THERMAL, each component's T [K]
 * and b_turb [km/s] with errors (NaN otherwise). */
typedef struct dt_linked_fit {
  size_t nspecies;
  dt_linked_species sp[DT_JUDGE_MAX_LINKED];
  double T[DT_MAX_COMP], T_err[DT_MAX_COMP];
  double bturb[DT_MAX_COMP], bturb_err[DT_MAX_COMP];
} dt_linked_fit;

typedef struct dt_judgement {
  char doublet[DT_JUDGE_DOUBLET]; /* doublet name, e.g. "NaI" */
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
  int hyperfine;              /* 1: lines with hyperfine components in the
                                 analysis's table (hyperfine.h) are modelled
                                 as those components; 0: every line single */
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
  size_t nlinked;             /* species fitted jointly with doublet */
  char linked[DT_JUDGE_MAX_LINKED][DT_JUDGE_DOUBLET];
  dt_btie btie;               /* how linked species share b */
  int has_fit;                /* fit below is the result for the state above */
  dt_fit_result fit;
  int has_joint;              /* joint below completes fit (a joint fit of
                                 every linked species; only with has_fit) */
  dt_linked_fit joint;
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
  DT_ACT_LINK,           /* text: doublet name; ival 1 link, 0 unlink */
  DT_ACT_BTIE,           /* ival: dt_btie */
  DT_ACT_JOINT_FIT,      /* fit and joint: a joint fit of the main and the
                            linked species; components take fit's values */
  DT_ACT_COVERING,       /* ival: 0/1, partial covering off/on */
  DT_ACT__COUNT
} dt_action_kind;

typedef struct dt_action {
  dt_action_kind kind;
  int index;
  int ival;
  double x[3];
  char text[DT_NOTE_MAX];
  dt_fit_result fit;                 /* DT_ACT_FIT, DT_ACT_JOINT_FIT */
  dt_linked_fit joint;                /* DT_ACT_JOINT_FIT */
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

/* Which actions change the model (and so clear has_fit and has_joint):
 * every kind except DT_ACT_VERDICT and DT_ACT_NOTE; DT_ACT_FIT sets has_fit
 * (and clears has_joint), DT_ACT_JOINT_FIT sets both, DT_ACT_RESTORE takes
 * them from the restored state.  DT_ACT_LINK refuses the main doublet, a
 * species linked twice, a fourth one, and unlinking one that is not linked;
 * DT_ACT_JOINT_FIT refuses a result whose species are not the linked ones
 * in their order (and any when none is linked or there is no component);
 * its T and b_turb are kept only under the thermal rule (else NaN).  A DT_ACT_FIT whose result has
 * status DT_OK gives the components its values; a failed fit is recorded
 * (has_fit = 1, fit.status != DT_OK) and leaves the components as they were.
 * Its fit.ncomp must equal the judgement's ncomp. */

/* An action of kind k with every other field zero (state NULL). */
void dt_action_init(dt_action *a, dt_action_kind k);

/* 1 when two judgements are the same state: every setting, component,
 * freeze, verdict, note, linked species and b rule, and (when has_fit) the
 * fit and (when has_joint) the joint fit, compared exactly (NaN equals
 * NaN). */
int dt_judgement_same(const dt_judgement *a, const dt_judgement *b);
/* 1 when the systems and the systems' verdicts of a and b are the same. */
int dt_judgement_same_systems(const dt_judgement *a, const dt_judgement *b);
/* The same for two fit results (every field, NaN equals NaN). */
int dt_fit_result_same(const dt_fit_result *a, const dt_fit_result *b);
/* The same for two joint fits (the species' values, T and b_turb of the
 * first ncomp components). */
int dt_linked_fit_same(const dt_linked_fit *a, const dt_linked_fit *b, size_t ncomp);
/* A joint fit with no species and every value NaN. */
void dt_linked_fit_clear(dt_linked_fit *jf);
/* The index of species name among j's linked ones, -1 if not linked. */
int dt_judgement_linked_index(const dt_judgement *j, const char *name);

/* DT_FREEZE_* bits as letters in the order "N", "b", "v" ("" for none) and
 * back; buf holds at least 4 bytes.  Parse: DT_OK or DT_EINVAL. */
const char *dt_freeze_str(unsigned bits, char buf[4]);
int dt_freeze_parse(const char *s, unsigned *bits);

#endif
