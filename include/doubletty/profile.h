/* Profile-likelihood intervals of a component's column density.
 *
 * For component k of a fit with chi2_0 at log N = x0, the profile
 *     chi2_p(x) = min over every other fitted parameter of chi2(log N_k = x)
 * (log N_k held at x, the rest refitted) gives the interval
 * {x : chi2_p(x) - chi2_0 <= dchi2}: dchi2 = 1 for 1 sigma, 9 for 3 sigma
 * (one parameter of interest; Wilks' theorem -- e.g. Press et al.,
 * Numerical Recipes, 3rd ed., sec. 15.6, from memory).  Unlike the
 * covariance matrix it follows the curve of growth: a saturated line whose
 * column the data cannot bound from above has no upper end.
 *
 * Both chi2_0 and chi2_p are minima over b, and in saturated or unresolved
 * lines chi2 has two valleys in b (small b with a large column on the flat
 * part of the curve of growth, large b with a small one; the data tell
 * them apart by little).  A refit that starts in the wrong valley gives a
 * chi2 too high: at chi2_0 the interval comes out too wide, at chi2_p too
 * narrow.  So:
 *   - with DT_PROFILE_DEEP, before the scan the whole problem is refitted
 *     from component k's b in the other valleys: narrow, min(b / 5,
 *     1 km/s), and broad, max(5 b, 50 km/s), and in a blend from the
 *     column shared equally with the nearest component and from the two
 *     split -+ b/2 and -+ b about their centre; a lower chi2 there is a
 *     better fit, other minima within 9 dchi2 widen the 3-sigma interval
 *     over them;
 *   - each refit of the scan starts from the last solution on its side
 *     (continuation); the first point that would end the interval (its
 *     dchi2 at least 0.9 of the target, before the regula falsi) is
 *     refitted again from the valley on its side (narrow b above the
 *     fit's column, broad b below; both with DT_PROFILE_DEEP; neither
 *     with DT_PROFILE_RESOLVED alone) and, in a blend (not with
 *     DT_PROFILE_ISOLATED), with the column handed to the nearest
 *     component, and keeps the lowest chi2 (such far starts run 6
 *     iterations first and go on only when chi2 is then within reach
 *     and -- with DT_PROFILE_QUICK -- the b have not come back within
 *     20% of the near refit's, whose valley they would end in); with
 *     DT_PROFILE_QUICK the near refits and the first iterations of the
 *     far ones take plain Levenberg-Marquardt steps;
 *   - a chi2 below chi2_0 - DT_PROFILE_MOVE found anywhere (no b at the
 *     edge of its range) means the fit was not the minimum: the reference
 *     moves there (a full refit from
 *     that point) and the search starts again (three times at most); the
 *     interval is then around the new minimum (moved = 1, *lower), which
 *     the caller should take as its fit.
 *
 * Search, each side: the first point at x0 +- s sqrt(dchi2), s the
 * covariance error (clipped to 0.001..0.5 dex); accepted when its dchi2 is
 * within 10% of the target (a parabolic profile: one refit per side);
 * otherwise the step grows (1.5 to 4 times, extrapolating sqrt(dchi2_p)
 * linearly from the best fit) until the profile rises above dchi2 (or the
 * search reaches DT_PROFILE_REACH dex or the fit's bounds: no end, a
 * limit), then regula falsi on sqrt(dchi2_p) (linear in x for a parabola)
 * to 0.02 dex or a tenth of the error (or sqrt(dchi2_p) within 0.05 of
 * sqrt(dchi2)).  With DT_PROFILE_OUTER the same search then runs to
 * 9 dchi2 (the 3-sigma interval for dchi2 = 1: lo3, hi3, flag3), its
 * first probes where a parabola through the dchi2 ends puts them. */
#ifndef DOUBLETTY_PROFILE_H
#define DOUBLETTY_PROFILE_H
#include <stddef.h>
#include "doubletty/fit.h"

#define DT_PROFILE_REACH 5.0   /* dex searched beyond the best fit each side */
#define DT_PROFILE_MOVE 0.5    /* chi2 this far below the fit's: a better fit */

enum {
  DT_PROFILE_BOUNDED = 0,      /* both ends found */
  DT_PROFILE_LOWER_LIMIT,      /* no upper end within reach: lo is a lower limit */
  DT_PROFILE_UPPER_LIMIT,      /* no lower end: hi is an upper limit */
  DT_PROFILE_UNBOUNDED         /* neither end */
};

typedef struct dt_profile_interval {
  double lo, hi;               /* log N ends [cm^-2] at dchi2; NaN where
                                  there is none */
  double best;                 /* log N of the reference minimum */
  int flag;                    /* DT_PROFILE_* */
  double lo3, hi3;             /* ends at 9 dchi2 (3 sigma for dchi2 = 1);
                                  NaN where there is none or incomplete3 */
  int flag3;                   /* DT_PROFILE_* of lo3, hi3 */
  int nfits;                   /* refits spent */
  int incomplete;              /* 1: the search ran out of refits (240) or
                                  time (2 s) before the dchi2 ends: lo, hi,
                                  lo3, hi3 NaN, flags BOUNDED: no interval
                                  (use the covariance error) */
  int incomplete3;             /* 1: ... before the 9 dchi2 ends (lo3, hi3
                                  NaN, flag3 BOUNDED) */
  int moved;                   /* 1: a lower chi2 was found (see above):
                                  best and the interval are the new
                                  minimum's */
} dt_profile_interval;

/* The flag as written in tables: "" (bounded), "lower-limit",
 * "upper-limit", "unconstrained". */
const char *dt_profile_flag_name(int flag);

/* flags of dt_profile_logN */
enum {
  DT_PROFILE_DEEP = 1,   /* refit the whole problem from the other valleys
                            first (a better fit, minima beyond a barrier) */
  DT_PROFILE_OUTER = 2,  /* also the ends at 9 dchi2 (lo3, hi3; else NaN,
                            incomplete3) */
  DT_PROFILE_RESOLVED = 4, /* the caller knows the line resolved, its b well
                            measured (wider than the line-spread function by
                            2 sigma): without DEEP the points that would end
                            the interval are not refitted from the other b
                            valley (a narrow saturated or broad thin line
                            would not have the observed width) */
  DT_PROFILE_ISOLATED = 8, /* no other component overlaps k: ... nor with
                            the column handed to the nearest one */
  DT_PROFILE_QUICK = 16    /* (without DEEP) plain Levenberg-Marquardt steps
                            for the refits next to the optimum and the first
                            look from another valley, and a far start back
                            in the near refit's valley stops: the first
                            pass's search over a survey */
};

/* The interval of component k for the problem p (as fitted) and its best
 * fit r (status DT_OK), in at most budget seconds (more than the 2 s cap:
 * the cap; beyond it the interval is incomplete); budget 0: no clock, only
 * the count of refits bounds the work (the same result under any load).  A component
 * whose log N is frozen gets lo = hi = lo3 = hi3 = its value.  When a chi2
 * below r->chi2 - DT_PROFILE_MOVE turns up, out->moved = 1 and *lower
 * (may be NULL) receives the minimum the interval is around (status DT_OK,
 * or DT_ENOCONV when no full refit settled there).  Uses w for the
 * refits (its last-run diagnostics change).  DT_OK; DT_EINVAL bad
 * arguments. */
int dt_profile_logN(dt_fit_workspace *w, const dt_fit_problem *p, const dt_fit_result *r,
                    size_t k, double dchi2, double budget, unsigned flags,
                    dt_profile_interval *out, dt_fit_result *lower);

/* Is there a second valley in b within reach of a parabolic profile?
 * Component k of fit r (problem p) with covariance half-width h3 [dex] at
 * dchi2 = d3 (3 sigma and 9): one refit at x0 + h3 from the narrow b
 * (saturated) and one at x0 - h3 from the broad b (above), log N_k held, the rest
 * refitted.  1 when either comes out below 0.9 d3 above r->chi2 (the
 * profile is lower than the parabola there: scan it), else 0. */
int dt_profile_other_valley(dt_fit_workspace *w, const dt_fit_problem *p, const dt_fit_result *r,
                            size_t k, double h3, double d3);

#endif
