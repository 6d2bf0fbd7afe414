/* Calibrated thresholds of the profile likelihood of a column density.
 *
 * The profile-likelihood interval of log N_k (profile.h) is the set of x
 * where chi2_p(x) - chi2_0 <= dchi2, with dchi2 = 1 for 1 sigma by Wilks'
 * theorem.  Where the likelihood in (N, b) is flat or has two valleys (a
 * saturated or unresolved line, a blend) the statistic
 *     lambda = chi2(log N_k held at its true value) - chi2(all free)
 * does not follow the chi-square distribution with one degree of freedom,
 * and the interval at dchi2 = 1 covers the truth more or less often than
 * 68.27%.
 *
 * Parametric bootstrap of the likelihood ratio (Davison & Hinkley 1997,
 * "Bootstrap Methods and their Application", ch. 4 on parametric
 * bootstrap tests and ch. 5 on confidence limits from inverted tests;
 * Hall 1992, "The Bootstrap and Edgeworth Expansion", ch. 3 -- chapters
 * from memory): a fit stands in for the truth -- the best fit, or, to
 * test a value x of log N_k (an end of the interval), the data's fit with
 * log N_k held at x; M spectra are simulated from it (its model plus
 * Gaussian noise of each pixel's sigma); each is fitted free (from the
 * world's parameters and from the other valley, the lower chi2) and with
 * log N_k held at the world's value; the quantile of lambda_m at the level of dchi2 under chi2_1
 * (68.27% for dchi2 = 1) is the calibrated threshold of that test.
 *
 * The 3-sigma threshold (level 99.73%, dchi2 = 9) would need thousands of
 * simulations.  It is extrapolated instead by the scale the core found:
 * if lambda ~ c chi2_1 (the scaled chi-square of a Bartlett correction,
 * Bartlett 1937, Proc. R. Soc. A 160, 268; its bootstrap estimate,
 * Rocke 1989, JASA 84, 598 -- from memory), every quantile scales by c;
 * the 3-sigma threshold is 9 dchi2 max(c, 1): never narrower than Wilks'
 * (the tail of a two-valleyed profile is heavier than its core tells).
 *
 * Deterministic: the random stream (GSL's MT19937) is seeded from the
 * data (a hash of the world's parameters, chi2, the pixel count and k),
 * so a rerun, or a run on another thread, gives the same threshold. */
#ifndef DOUBLETTY_CALIB_H
#define DOUBLETTY_CALIB_H
#include <stddef.h>
#include "doubletty/fit.h"

#define DT_CALIB_NSIM 32       /* simulated spectra per calibration (default) */
#define DT_CALIB_MAX_ITER 40   /* iterations of each of their fits */
#define DT_CALIB_SCALE_MIN 0.25 /* the scale c kept within these (a few */
#define DT_CALIB_SCALE_MAX 9.0  /* dozen simulations do not tell more) */

typedef struct dt_calib_workspace dt_calib_workspace;

/* Workspace for problems of up to max_pix pixels and up to nsim
 * simulations (0: DT_CALIB_NSIM).  NULL when out of memory. */
dt_calib_workspace *dt_calib_alloc(size_t max_pix, size_t nsim);
void dt_calib_free(dt_calib_workspace *w);

typedef struct dt_calib_result {
  double dchi2;      /* threshold at the confidence level of the asked
                        dchi2 under chi2_1 */
  double dchi2_3;    /* threshold at the level of 9 dchi2 (extrapolated,
                        see above) */
  double scale;      /* c = dchi2 / asked, clipped to
                        DT_CALIB_SCALE_MIN..MAX */
  int nsim;          /* simulations that gave a statistic */
  int nfits;         /* fits run */
} dt_calib_result;

/* The calibrated threshold for component k's log N.
 *
 * Given:    cw     workspace (pixels >= the problem's)
 *           fw     fit workspace for the problem (its last-run
 *                  diagnostics change)
 *           p      the problem as fitted (data, sigmas, mask, frozen set)
 *           r      its best fit (status DT_OK)
 *           k      the component (log N not frozen)
 *           x      the log N_k [cm^-2] tested: the world simulated is the
 *                  data's fit with log N_k held at x (from r); NaN: r
 *                  itself (x its log N_k)
 *           dchi2  the uncalibrated threshold (1: 1 sigma), > 0
 *           nsim   simulations (0: DT_CALIB_NSIM; at most the workspace's)
 * Returned: out    thresholds (on failure dchi2 and dchi2_3 are the
 *                  uncalibrated dchi2, 9 dchi2, scale 1)
 * Status:   DT_OK; DT_EINVAL bad arguments (or log N_k frozen);
 *           DT_ENOCONV fewer than half the simulations gave a statistic.
 * Notes:    lambda_m is max(0, chi2_held - min(chi2_free, chi2_held)): a
 *           free fit stuck above the held one counts as 0.  Every fit
 *           starts at the world's parameters -- the free one also from
 *           component k 0.6 times as broad with 0.8 dex more column (the
 *           other valley of a saturated line), keeping the lower chi2 --
 *           and runs at most DT_CALIB_MAX_ITER iterations and no clock.
 *           3 nsim fits in all (one more for the world at x); no
 *           allocation.
 * References: Davison & Hinkley 1997, chs. 4-5; Hall 1992, ch. 3;
 *           Bartlett 1937; Rocke 1989 (from memory, see above). */
int dt_calib_logN(dt_calib_workspace *cw, dt_fit_workspace *fw, const dt_fit_problem *p,
                  const dt_fit_result *r, size_t k, double x, double dchi2, size_t nsim,
                  dt_calib_result *out);

/* The statistics of the last dt_calib_logN on cw, sorted ascending
 * (*n of them); NULL before any. */
const double *dt_calib_last_stats(const dt_calib_workspace *cw, size_t *n);

#endif
