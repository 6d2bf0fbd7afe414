/* Private to the fitters (fit.c, joint.c): what both need around GSL's
 * trust-region least squares.
 *
 * A small cache of gsl_multifit_nlinear workspaces (and covariance
 * matrices), keyed by the problem's size (n residuals, p parameters) and
 * whether geodesic acceleration is on: a workspace is allocated the first
 * time a size turns up and reused after; the least recently used one makes
 * room.  Allocated only in dt_lsq_get, so a fitter that has seen its sizes
 * runs without allocating.
 *
 * The bounding transforms: a parameter v in (lo, hi) is fitted as the
 * unbounded u = ln((v - lo)/(hi - v)), v = lo + (hi - lo)/(1 + e^-u)
 * (a logistic map, common practice for box bounds in unconstrained
 * solvers). */
#ifndef DOUBLETTY_LSQ_H
#define DOUBLETTY_LSQ_H
#include <stddef.h>

#include <gsl/gsl_matrix.h>
#include <gsl/gsl_multifit_nlinear.h>

#define DT_LSQ_CACHE 6

typedef struct dt_lsq_slot {
  size_t n, p;
  int accel;
  gsl_multifit_nlinear_workspace *w;
  gsl_matrix *cov;
  unsigned long used;
} dt_lsq_slot;

typedef struct dt_lsq_cache {
  dt_lsq_slot slot[DT_LSQ_CACHE];
  unsigned long tick;
} dt_lsq_cache;

/* The workspace for n residuals and p parameters, Levenberg-Marquardt
 * (with geodesic acceleration when accel), More scaling, modified Cholesky
 * solver; NULL when out of memory.  The cache starts zeroed. */
dt_lsq_slot *dt_lsq_get(dt_lsq_cache *c, size_t n, size_t p, int accel);
void dt_lsq_cache_free(dt_lsq_cache *c);

/* u -> v on (lo, hi), with dv/du into *deriv (may be NULL). */
double dt_lsq_to_external(double u, double lo, double hi, double *deriv);
/* v moved at least margin (hi - lo) inside the bounds. */
double dt_lsq_clamp_inside(double v, double lo, double hi, double margin);
/* v (clamped inside by margin) -> u. */
double dt_lsq_to_internal(double v, double lo, double hi, double margin);

#endif
