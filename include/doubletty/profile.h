/* Profile-likelihood intervals of a component's column density.
 *
 * For component k of a fit with chi2_0 at log N = x0, the profile
 *     chi2_p(x) = min over every other fitted parameter of chi2(log N_k = x)
 * (log N_k held at x, the rest refitted from the best fit) gives the
 * interval {x : chi2_p(x) - chi2_0 <= dchi2}: dchi2 = 1 for 1 sigma, 9 for
 * 3 sigma (one parameter of interest; Wilks' theorem -- e.g. Press et al.,
 * Numerical Recipes, 3rd ed., sec. 15.6, from memory).  Unlike the
 * covariance matrix it follows the curve of growth: a saturated line whose
 * column the data cannot bound from above has no upper end.
 *
 * Search, each side: the first point at x0 +- s sqrt(dchi2), s the
 * covariance error (clipped to 0.001..0.5 dex); accepted when its dchi2 is
 * within 10% of the target (a parabolic profile: one refit per side);
 * otherwise the step grows (1.5 to 4 times, extrapolating sqrt(dchi2_p)
 * linearly from the best fit) until the profile rises above dchi2 (or the
 * search reaches DT_PROFILE_REACH dex or the fit's bounds: no end, a
 * limit), then regula falsi on sqrt(dchi2_p) (linear in x for a parabola)
 * to 0.02 dex or a tenth of the error (or sqrt(dchi2_p) within 0.05 of
 * sqrt(dchi2)).  Each refit starts from the last solution on its side (the
 * first from the best fit); a lower chi2 found on
 * the way (the fit was in a local minimum) becomes the reference and the
 * search restarts from it once. */
#ifndef DOUBLETTY_PROFILE_H
#define DOUBLETTY_PROFILE_H
#include <stddef.h>
#include "doubletty/fit.h"

#define DT_PROFILE_REACH 5.0   /* dex searched beyond the best fit each side */

enum {
  DT_PROFILE_BOUNDED = 0,      /* both ends found */
  DT_PROFILE_LOWER_LIMIT,      /* no upper end within reach: lo is a lower limit */
  DT_PROFILE_UPPER_LIMIT,      /* no lower end: hi is an upper limit */
  DT_PROFILE_UNBOUNDED         /* neither end */
};

typedef struct dt_profile_interval {
  double lo, hi;               /* log N ends [cm^-2]; NaN where there is none */
  double best;                 /* log N of the reference minimum */
  int flag;                    /* DT_PROFILE_* */
  int nfits;                   /* refits spent */
  int incomplete;              /* 1: the search ran out of refits (80) or
                                  time (2 s); lo, hi NaN, flag BOUNDED:
                                  no interval (use the covariance error) */
} dt_profile_interval;

/* The flag as written in tables: "" (bounded), "lower-limit",
 * "upper-limit", "unconstrained". */
const char *dt_profile_flag_name(int flag);

/* The interval of component k for the problem p (as fitted) and its best
 * fit r (status DT_OK), in at most budget seconds (0, or more than the
 * 2 s cap: the cap; beyond it the interval is incomplete).  A component whose log N is frozen gets
 * lo = hi = its value.  Uses w for the refits (its last-run diagnostics
 * change).  DT_OK; DT_EINVAL bad arguments. */
int dt_profile_logN(dt_fit_workspace *w, const dt_fit_problem *p, const dt_fit_result *r,
                    size_t k, double dchi2, double budget, dt_profile_interval *out);

#endif
