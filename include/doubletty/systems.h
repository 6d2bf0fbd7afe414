/* Absorber systems: the named velocity ranges of one spectrum.
 *
 * A sightline holds several absorbers: the gas of the target (around its
 * systemic velocity vsys), the Milky Way's own gas (around 0 km/s in the
 * observer's frame) and, now and then, an intervening absorber.  A system is
 * a name and a velocity range [vlo, vhi] in km/s relative to vsys -- the
 * velocities every output uses.  Each system has its own components,
 * measurements, upper limit, suggested verdict and verdict.
 *
 * The set of a spectrum (dt_systems_build):
 *   target     [target_vlo, target_vhi] (default -300..300 km/s);
 *   milky-way  the observer-frame range [-mw_half, +mw_half] (default 150
 *              km/s) carried into the frame of vsys by the relativistic
 *              composition of velocities used everywhere (model.h):
 *                (1 + v_obs/c) = (1 + vsys/c) (1 + v/c),
 *              i.e. v = c ((1 + v_obs/c) / (1 + vsys/c) - 1), about -vsys;
 *              present only when it overlaps neither the target nor a
 *              system of the user (the note says so when it does);
 *   NAME       the user's systems (system=NAME:VLO:VHI in a list, --system),
 *              in the order given; they may not overlap the target or each
 *              other.
 *
 * Components are fitted together over one window covering every system
 * (blends do not respect boundaries), but each component belongs to one
 * system: the one whose range contains its velocity; a component between
 * ranges (or outside all of them) belongs to the nearest range, the earlier
 * in the set on a tie (the target comes first).
 *
 * The fit window: without a window of the user, the default window
 * (-600..600 km/s) widened to take in every system plus a margin of
 * max(150 km/s, 2 FWHM) on each side, so that components at a range's edge
 * keep their wings in the fit.  With a window of the user, the window stays
 * as given and the systems are clipped to it; a system outside it is left
 * out (noted). */
#ifndef DOUBLETTY_SYSTEMS_H
#define DOUBLETTY_SYSTEMS_H
#include <stddef.h>
#include "doubletty/analysis.h"
#include "doubletty/atomic.h"
#include "doubletty/autofit.h"
#include "doubletty/judge.h"
#include "doubletty/spectrum.h"
#include "doubletty/status.h"

#define DT_MAX_SYSTEMS 8
#define DT_SYSTEM_NAME_MAX 32
#define DT_SYSTEM_NOTE_MAX 160
#define DT_SYSTEM_TARGET "target"
#define DT_SYSTEM_MW "milky-way"
#define DT_SYSTEM_TARGET_HALF 300.0  /* default target range +- [km/s] */
#define DT_SYSTEM_MW_HALF 150.0      /* default Milky-Way range +- [km/s], observer frame */
#define DT_SYSTEM_MARGIN 150.0       /* least fit margin beyond a system [km/s] */

typedef struct dt_system {
  char name[DT_SYSTEM_NAME_MAX];
  double vlo, vhi;             /* range [km/s] relative to vsys */
} dt_system;

typedef struct dt_system_opts {
  int has_target;              /* target range given (else -+300 km/s) */
  double target_vlo, target_vhi;
  double mw_half;              /* Milky-Way half width [km/s] (<= 0: 150) */
  int no_mw;                   /* 1: no Milky-Way system */
  size_t nextra;               /* systems of the user */
  dt_system extra[DT_MAX_SYSTEMS];
} dt_system_opts;

typedef struct dt_system_set {
  size_t n;                    /* systems, [0] always the target */
  dt_system sys[DT_MAX_SYSTEMS];
  char note[DT_SYSTEM_NOTE_MAX]; /* why a default system is absent, "" if none */
  int mw_joined;               /* 1: the Milky Way lies in another system's range */
} dt_system_set;

void dt_system_opts_init(dt_system_opts *o);

/* A system name: 1..31 characters of letters, digits, '-', '_', '.'.
 * DT_OK or DT_EINVAL. */
int dt_system_name_ok(const char *name);

/* "NAME:VLO:VHI" into s (name checked, VLO < VHI finite).  DT_OK or
 * DT_EINVAL with e->what naming the problem. */
int dt_system_parse(const char *text, dt_system *s, dt_err *e);

/* Add a user system to the options: DT_EINVAL for a repeated name, a
 * reserved name ("target", "milky-way") or too many systems. */
int dt_system_opts_add(dt_system_opts *o, const dt_system *s, dt_err *e);

/* The Milky Way's observer-frame velocity v_obs seen in the frame of vsys
 * [km/s]: c ((1 + v_obs/c) / (1 + vsys/c) - 1). */
double dt_system_obs_to_rel(double v_obs, double vsys);

/* The set for rest frame vsys (see the header comment).  DT_EINVAL when a
 * user system overlaps the target or another one (e names them). */
int dt_systems_build(const dt_system_opts *o, double vsys, dt_system_set *out, dt_err *e);

/* The fit window [*vlo, *vhi] covering every system plus the margin
 * max(DT_SYSTEM_MARGIN, 2 fwhm_kms), at least [def_lo, def_hi]. */
void dt_systems_window(const dt_system_set *set, double fwhm_kms, double def_lo, double def_hi,
                       double *vlo, double *vhi);

/* Clip the systems to a window of the user [vlo, vhi]; a system other than
 * the target with less than half its range inside is left out (noted). */
void dt_systems_clip(dt_system_set *set, double vlo, double vhi);

/* Leave out systems other than the target whose range, in either line of
 * doublet d at rest frame vsys, is not covered by spectrum s (noted). */
void dt_systems_drop_uncovered(dt_system_set *set, const dt_spectrum *s, const dt_doublet *d,
                               double vsys);

/* Index of a system by name, -1 if absent. */
int dt_systems_find(const dt_system_set *set, const char *name);

/* The system a velocity v belongs to (see the header comment); 0 for an
 * empty set. */
size_t dt_systems_of(const dt_system_set *set, double v);

/* The suggested verdict of system k after the first pass o (with status st,
 * DT_OK or DT_ENOCONV) of judgement j, by the first pass's own rules applied
 * to what lies in the system, by autofit.h: a confirmed doublet candidate there
 * -> detected ("doublet confirmed"; unsure "poor fit (chi2_red X)" when
 * chi2_red > 3); components there without a confirmed candidate -> unsure
 * ("components without a confirmed doublet") unless the system's measured
 * equivalent widths meas (may be NULL) pass the first pass's coincidence
 * test (both lines at 3 sigma, ratio between 1 and f1 lambda1^2 / (f2
 * lambda2^2) within 3 sigma) -> detected ("doublet confirmed in W");
 * a strong unconfirmed candidate (not where the weaker line of a fitted
 * component falls in the stronger line's velocity scale: at v + c
 * (lambda2/lambda1 - 1) within 2b + FWHM)
 * -> unsure ("unconfirmed absorption"); a fit that did not converge with
 * components there -> unsure; otherwise not-detected ("no confirmed
 * absorption").  Candidates belong to systems like components.  reason holds
 * at least 64 bytes. */
dt_verdict dt_systems_suggest(const dt_system_set *set, size_t k, const dt_judgement *j,
                              const dt_autofit_out *o, int st, const dt_analysis_line *meas,
                              char *reason, size_t nreason);

/* The whole set-up for one spectrum: the set for rest frame vsys from o,
 * then with a window of the user (has_window: [*vlo, *vhi] as given) the
 * systems clipped to it, else the systems the spectrum s does not cover
 * (either line of d) left out and *vlo, *vhi widened to cover the rest
 * (dt_systems_window with the defaults *vlo, *vhi).  Errors as
 * dt_systems_build. */
int dt_systems_setup(const dt_system_opts *o, double vsys, const dt_spectrum *s,
                     const dt_doublet *d, double fwhm_kms, int has_window, double *vlo,
                     double *vhi, dt_system_set *set, dt_err *e);

/* What one system holds after a first pass. */
typedef struct dt_system_result {
  size_t ncomp;                /* components belonging to it */
  dt_verdict suggested;
  char reason[64];
  double mvlo, mvhi;           /* measured over [km/s]: around its components
                                  (v -+ (2b + FWHM), clipped to the range),
                                  or its whole range when it has none */
  int measure_status;          /* DT_OK or why line[] is NaN */
  dt_analysis_line line[2];    /* dt_analysis_measure_range; [0] the stronger */
} dt_system_result;

/* Measurements of system k of set from the analysis a (its last run):
 * around the components of j belonging to it (v -+ (2b + FWHM), clipped to
 * its range) or over its whole range when it has none; *mvlo, *mvhi the
 * range measured, *ncomp its components.  The status of
 * dt_analysis_measure_range. */
int dt_systems_measure(dt_analysis *a, const dt_system_set *set, const dt_judgement *j, size_t k,
                       dt_analysis_line out[2], double *mvlo, double *mvhi, size_t *ncomp);

/* Saturation of a system's measurement from both lines (l[0] the
 * stronger): the weaker line's apparent column above the stronger's by
 * more than 2 combined sigma (Savage & Sembach 1991), or the equivalent
 * width ratio W_s / W_w below its optically thin value f_s lambda_s^2 /
 * (f_w lambda_w^2) by more than 2 combined sigma (the stronger line
 * detected at 3 sigma), or a black (floored) pixel in either window -- the
 * rule of dt_measure_saturated (measure.h).  1 or 0. */
int dt_systems_saturated(const dt_analysis_line l[2]);

/* Per system k of set: components, suggested verdict (dt_systems_suggest)
 * and measurements from the analysis a holding the first pass's final state
 * (o, status st; j the judgement with the fitted components).  res holds
 * set->n entries. */
void dt_systems_results(dt_analysis *a, const dt_system_set *set, const dt_judgement *j,
                        const dt_autofit_out *o, int st, dt_system_result *res);

/* The systems of a recorded state: its own (j->nsys > 0), else the
 * defaults for its rest frame clipped to its window (a state recorded
 * before systems were). */
void dt_systems_of_judgement(const dt_judgement *j, dt_system_set *set);

/* The systems of set written into j (j->sys, j->nsys; at most
 * DT_JUDGE_MAX_SYS). */
void dt_systems_to_judgement(const dt_system_set *set, dt_judgement *j);

/* "name:vlo:vhi;..." of the set, numbers through num.h (settings lines). */
void dt_systems_format(const dt_system_set *set, char *buf, size_t n);

#endif
