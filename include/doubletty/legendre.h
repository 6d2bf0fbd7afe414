/* Legendre polynomials for the continuum: one basis for the continuum fit
 * (continuum.h), the fit's joint continuum (fit.h) and the analysis.
 *
 * A polynomial over a wavelength range [lo, hi] is sum_k c_k P_k(x) with
 * x = 2 (lambda - lo)/(hi - lo) - 1, so that the range maps onto [-1, 1]. */
#ifndef DOUBLETTY_LEGENDRE_H
#define DOUBLETTY_LEGENDRE_H
#include <stddef.h>

/* x of wavelength lambda over [lo, hi]: 2 (lambda - lo)/(hi - lo) - 1, or 0
 * when hi <= lo (a single point). */
double dt_legendre_x(double lambda, double lo, double hi);

/* Legendre polynomials P_0..P_order at x into p[0..order] (nothing for
 * order < 0).
 *
 * Given: x (any; the polynomials are orthogonal on [-1, 1]), order >= 0.
 * Returned: p[k] = P_k(x).
 * Notes: on [-1, 1] GSL's gsl_sf_legendre_Pl_array; outside (a continuum
 *   extrapolated beyond its region), where GSL refuses the argument, the same
 *   recurrence directly, so the values are continuous across x = +-1.
 * References: Bonnet's recurrence (n+1) P_{n+1} = (2n+1) x P_n - n P_{n-1},
 *   Abramowitz & Stegun 1964, 22.7.10. */
void dt_legendre(double x, int order, double *p);

#define DT_LEGENDRE_MAX_ORDER 64   /* dt_legendre_sum: ncoef <= this + 1 */

/* sum_{k < ncoef} coef[k] P_k(x), summed from k = 0; 1 for ncoef = 0 (no
 * polynomial). */
double dt_legendre_sum(const double *coef, size_t ncoef, double x);

#endif
