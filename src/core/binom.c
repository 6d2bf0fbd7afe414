/* Binomial proportion intervals: Wilson, Clopper-Pearson, Jeffreys (see
 * binom.h for the formulas and their sources). */
#include "doubletty/binom.h"

#include <gsl/gsl_cdf.h>
#include <math.h>
#include <string.h>

#include "doubletty/status.h"

static const char *const names[] = {"wilson", "exact", "jeffreys"};

const char *dt_binom_method_name(dt_binom_method m) {
  return (unsigned)m < 3 ? names[m] : "?";
}

int dt_binom_method_parse(const char *s, dt_binom_method *m) {
  for (int i = 0; i < 3; i++)
    if (s && !strcmp(s, names[i])) {
      *m = (dt_binom_method)i;
      return DT_OK;
    }
  return DT_EINVAL;
}

int dt_binom_interval(long k, long n, double cl, dt_binom_method m, double *lo, double *hi) {
  *lo = *hi = NAN;
  if (n < 1 || k < 0 || k > n || !(cl > 0 && cl < 1)) return DT_EINVAL;
  double a = 1 - cl, dk = (double)k, dn = (double)n, p = dk / dn;
  switch (m) {
  case DT_BINOM_WILSON: {
    /* BCD eq. (4): centre (k + z^2/2)/(n + z^2), half width
     * z sqrt(n)/(n + z^2) sqrt(p q + z^2/(4n)) */
    double z = gsl_cdf_ugaussian_Pinv(1 - a / 2), z2 = z * z;
    double centre = (dk + z2 / 2) / (dn + z2);
    double half = z * sqrt(dn) / (dn + z2) * sqrt(p * (1 - p) + z2 / (4 * dn));
    *lo = centre - half;
    *hi = centre + half;
    if (k == 0) *lo = 0; /* exact in theory; rounding could leave -1e-17 */
    if (k == n) *hi = 1;
    break;
  }
  case DT_BINOM_EXACT:
    *lo = k == 0 ? 0 : gsl_cdf_beta_Pinv(a / 2, dk, dn - dk + 1);
    *hi = k == n ? 1 : gsl_cdf_beta_Pinv(1 - a / 2, dk + 1, dn - dk);
    break;
  case DT_BINOM_JEFFREYS:
    *lo = k == 0 ? 0 : gsl_cdf_beta_Pinv(a / 2, dk + 0.5, dn - dk + 0.5);
    *hi = k == n ? 1 : gsl_cdf_beta_Pinv(1 - a / 2, dk + 0.5, dn - dk + 0.5);
    break;
  default: return DT_EINVAL;
  }
  if (*lo < 0) *lo = 0;
  if (*hi > 1) *hi = 1;
  return DT_OK;
}
