/* The velocity structure function of absorbers seen along pairs of
 * sightlines, its bootstrap errors and its power-law slope.
 *
 * For sightlines i with velocity v_i (1-sigma error s_i) at sky positions
 * separated by the great-circle angle theta_ij, pairs are binned by
 * projected separation r_ij = theta_ij [arcsec] x scale [kpc/arcsec], and
 *   order 1:  S1(r) = < |v_i - v_j| >
 *   order 2:  S2(r) = < (v_i - v_j)^2 - s_i^2 - s_j^2 >
 * over the pairs of a bin (order 2 with the measurement variances taken
 * out: for independent errors E[(v_i - v_j)^2] = S2_true + s_i^2 + s_j^2).
 * Pairs share sightlines, so they are not independent; the errors come
 * from a bootstrap over sightlines (Efron & Tibshirani 1993, "An
 * Introduction to the Bootstrap", ch. 6): sightlines are drawn with
 * replacement, a pair (i, j) then counts m_i m_j times (m: how often each
 * was drawn; a sightline paired with its own copy has r = 0 and is left
 * out), and the error of a bin is the standard deviation of its values
 * over the resamples.  A power law S = A r^g is fitted to the bins within
 * a range of r by weighted least squares in log10 S vs log10 r, weights
 * 1/sigma^2 with sigma = err / (S ln 10) (GSL gsl_fit_wlinear).
 *
 * For Kolmogorov turbulence S1 ~ r^(1/3) and S2 ~ r^(2/3) (common
 * practice; Kolmogorov 1941). */
#ifndef DOUBLETTY_VSF_H
#define DOUBLETTY_VSF_H
#include <stddef.h>
#include "doubletty/sphere.h"
#include "doubletty/status.h"

/* (dt_sphere_separation, the angle between sightlines: sky.h) */

typedef struct dt_vsf_point {
  double ra_deg, dec_deg;   /* ICRS position [deg] */
  double v, sigma;          /* velocity and its 1-sigma error [km/s] */
} dt_vsf_point;

typedef struct dt_vsf_bin {
  double r_lo, r_hi;        /* bin edges [kpc] */
  double r_mean;            /* mean separation of its pairs [kpc] (NaN: none) */
  long npairs;
  double vsf;               /* S1 [km/s] or S2 [km^2/s^2]; NaN without pairs */
  double err;               /* bootstrap error (NaN before dt_vsf_bootstrap) */
} dt_vsf_bin;

typedef struct dt_vsf dt_vsf;

/* Set up the pairs of n points for order 1 or 2 with separation scale
 * [kpc/arcsec] and bin edges [kpc] (nedge >= 2, increasing).  NULL when
 * out of memory or arguments are bad (e set). */
dt_vsf *dt_vsf_alloc(const dt_vsf_point *p, size_t n, int order, double kpc_per_arcsec,
                     const double *edges, size_t nedge, dt_err *e);
void dt_vsf_free(dt_vsf *w);

/* The smallest and largest separation of any two distinct points [kpc]
 * (NaN when n < 2), for choosing bins. */
void dt_vsf_range(const dt_vsf_point *p, size_t n, double kpc_per_arcsec, double *rmin, double *rmax);

/* The structure function of the sample into out[nedge-1] (err NaN). */
void dt_vsf_eval(const dt_vsf *w, dt_vsf_bin *out);

/* Bootstrap errors: nboot resamples of the sightlines drawn with GSL's
 * MT19937 generator seeded with seed; out[].err = standard deviation of
 * a bin's values over the resamples that have pairs in it.  progress (may
 * be NULL) is called after every resample with (arg, done, nboot).
 * DT_OK, DT_EINVAL (nboot < 2) or DT_ENOMEM. */
int dt_vsf_bootstrap(const dt_vsf *w, size_t nboot, unsigned long seed, dt_vsf_bin *out,
                     void (*progress)(void *arg, size_t done, size_t total), void *arg);

/* Fit S = A r^g over the bins whose r_mean lies in [rlo, rhi] and that
 * have S > 0 and a positive finite error.
 * Returned: *slope = g, *slope_err its 1-sigma error, *log_amp = log10 A,
 *           *nused the bins used.
 * DT_OK, or DT_ERANGE when fewer than two bins qualify. */
int dt_vsf_fit(const dt_vsf_bin *b, size_t nbin, double rlo, double rhi, double *slope,
               double *slope_err, double *log_amp, size_t *nused);

#endif
