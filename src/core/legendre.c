/* Legendre polynomials (legendre.h): GSL on [-1, 1], the same recurrence
 * beyond it, the mapping of a wavelength range onto [-1, 1] and a series. */
#include "doubletty/legendre.h"

#include <assert.h>
#include <gsl/gsl_sf_legendre.h>

double dt_legendre_x(double lambda, double lo, double hi) {
  return hi > lo ? 2.0 * (lambda - lo) / (hi - lo) - 1.0 : 0.0;
}

void dt_legendre(double x, int order, double *p) {
  if (order < 0) return;
  if (order >= 1 && !(x < -1.0 || x > 1.0)) {
    gsl_sf_legendre_Pl_array(order, x, p);
    return;
  }
  p[0] = 1.0;
  if (order >= 1) p[1] = x;
  for (int n = 1; n < order; n++)
    p[n + 1] = ((2.0 * n + 1.0) * x * p[n] - n * p[n - 1]) / (n + 1.0);
}

double dt_legendre_sum(const double *coef, size_t ncoef, double x) {
  if (ncoef == 0) return 1.0;
  assert(ncoef <= DT_LEGENDRE_MAX_ORDER + 1);
  double pl[DT_LEGENDRE_MAX_ORDER + 1];
  dt_legendre(x, (int)ncoef - 1, pl);
  double s = 0;
  for (size_t k = 0; k < ncoef; k++) s += coef[k] * pl[k];
  return s;
}
