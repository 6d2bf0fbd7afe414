/* The automatic first pass: triage of a spectrum before a person looks.
 *
 * 1. Measure the apparent optical depth profiles of both lines (analysis.h
 *    with no components).  Find velocity intervals where the stronger
 *    line's N_a(v) is significant.
 * 2. Doublet coincidence test: keep an interval only if the weaker line
 *    shows absorption at the same velocity with a plausible ratio: the
 *    stronger line's integrated optical depth over the interval should be
 *    between about 1 (saturated) and f1 lambda1 / (f2 lambda2) (optically
 *    thin, ~2 for Na I) times the weaker's, within the errors.
 * 3. Seed one component at the optical-depth-weighted velocity of each
 *    confirmed interval and fit; then add components (at the velocity of the
 *    largest residual) while the BIC improves by more than a threshold, up
 *    to a maximum.
 * 4. Suggest a verdict with a reason of a few words:
 *      detected       "doublet confirmed"
 *      not-detected   "no significant absorption" (nothing above
 *                     detect_sigma), "no confirmed absorption" (only weak
 *                     single-line candidates, below 5 sigma)
 *      unsure         "single line, no doublet partner" (5 sigma or more in
 *                     one line only), "implausible doublet ratio", "poor fit
 *                     (chi2_red X)" (confirmed, but chi2_red > 3), "fit did
 *                     not converge"
 *    A doubtful model (chi2 well above its dof while one more component,
 *    rejected by the BIC margin, improves chi2 significantly) adds
 *    "; +1 comp: chi2 -X, BIC short Y" to the reason.
 *    The reported fit gets its profile-likelihood intervals of log N
 *    (analysis.h, dt_analysis_intervals) once, at the end; the search's
 *    fits skip them.
 * Black cores: when pixels of either line reach zero flux (the floor of
 * the apparent optical depth, measure.h) N_a is no measurement there, and
 * steps 1-3 run on the depth 1 - F/C instead: both lines' equivalent
 * widths at detect_sigma or more over the same velocities, their ratio
 * W1/W2 between 1 and f1 lambda1^2 / (f2 lambda2^2) within the errors; the
 * seed at the depth-weighted velocity of both lines, with the column both
 * from the apparent column and from the damping wings (the better fit is
 * kept).
 * Options fix the number of components or give seed velocities instead:
 * around a seed the velocity moves to the centroid of significant
 * absorption within 2 FWHM + 20 km/s, and the column starts from the
 * apparent column there.  The verdict comes from the coincidence test in
 * every case. */
#ifndef DOUBLETTY_AUTOFIT_H
#define DOUBLETTY_AUTOFIT_H
#include <stddef.h>
#include "doubletty/analysis.h"
#include "doubletty/judge.h"
#include "doubletty/status.h"

#define DT_AUTOFIT_MAX_COMP 4   /* default maximum of the BIC search */

typedef struct dt_autofit_opts {
  int ncomp;                   /* > 0: fit exactly this many components */
  size_t nseed;                /* > 0: start from components at these */
  double seed_v[DT_MAX_COMP];  /*   velocities [km/s] (no search)      */
  size_t max_comp;             /* BIC search maximum (0: DT_AUTOFIT_MAX_COMP) */
  double detect_sigma;         /* significance of absorption (0: 3) */
  double bic_min;              /* BIC must drop by more than this to accept
                                  another component (0: 10) */
} dt_autofit_opts;

void dt_autofit_opts_init(dt_autofit_opts *o);

typedef struct dt_autofit_out {
  dt_verdict suggested;        /* DETECTED, NOT_DETECTED or UNSURE */
  char reason[64];             /* a few words, e.g. "doublet confirmed"; a
                                  doubtful model adds "; +1 comp: chi2 -X,
                                  BIC short Y" (doubt_* below) */
  double doubt_dchi2;          /* > 0: the fit's chi2 lies more than 3 sigma
                                  above its dof, and one more component,
                                  rejected by the BIC margin, lowered chi2 by
                                  this much -- more than chance would (0.1%
                                  point of chi2 for its extra parameters) */
  double doubt_bic;            /* by how much that component missed the
                                  margin (BIC units) */
  size_t ncand;                /* absorption intervals found in line 0 ... */
  double cand_v[DT_MAX_COMP];  /* ... their velocities [km/s] */
  int cand_confirmed[DT_MAX_COMP]; /* 1: the weaker line confirms it */
  dt_analysis_out an;          /* the final analysis (fit and measurements) */
} dt_autofit_out;

/* Run the first pass on analysis a for the settings in *j (doublet, vsys,
 * resolution, window, continuum).  On success j->ncomp/comp take the
 * fitted components (frozen bits cleared, tie_b kept), j->fit/has_fit the
 * fit; j->verdict and j->note are not touched.  opts may be NULL
 * (defaults).  Errors as dt_analysis_run; a final fit that did not
 * converge is DT_ENOCONV with o filled and the verdict UNSURE.  e may be
 * NULL. */
int dt_autofit_run(dt_analysis *a, dt_judgement *j, const dt_autofit_opts *opts,
                   dt_autofit_out *o, dt_err *e);

#endif
