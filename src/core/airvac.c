/* Air <-> vacuum wavelengths, IAU standard.
 *
 * Ground-based spectra are often calibrated in standard air (dry air at
 * 15 C, 101325 Pa, 0.045% CO2); doubletty works in vacuum throughout.  The
 * refractive index of standard air is the IAU-adopted formula of Morton 2000
 * (ApJS 130, 403, eq. 8, from the dispersion formula of Ciddor 1996,
 * Appl. Opt. 35, 1566):
 *
 *   n - 1 = 1e-8 * (8342.13 + 2406030 / (130 - s^2) + 15997 / (38.9 - s^2))
 *
 * with s = 1e4 / lambda_vac the vacuum wavenumber in inverse micrometres
 * (lambda in Angstrom), and lambda_air = lambda_vac / n.
 *
 * The inverse has no closed form in this formulation; dt_air_to_vac solves
 * lambda_vac = lambda_air * n(lambda_vac) by fixed-point iteration, which
 * contracts by a factor |lambda dn/dlambda| < 1e-5 per step and so reaches
 * double precision in three or four steps.
 *
 * By IAU convention air wavelengths are used only above 2000 A; shorter
 * wavelengths are returned unchanged by both functions.  (Between about
 * 1999.4 and 2000 A in air the mapping is therefore not one-to-one.) */
#include "doubletty/airvac.h"

#include <math.h>

/* Refractive index of standard air at vacuum wavelength lam [Angstrom]. */
static double air_index(double lam_vac) {
  double s = 1.0e4 / lam_vac; /* inverse micrometres */
  double s2 = s * s;
  return 1.0 + 1.0e-8 * (8342.13 + 2406030.0 / (130.0 - s2) + 15997.0 / (38.9 - s2));
}

double dt_vac_to_air(double lambda_vac) {
  if (!(lambda_vac >= DT_AIRVAC_MIN)) return lambda_vac; /* also NaN */
  if (isinf(lambda_vac)) return lambda_vac;
  return lambda_vac / air_index(lambda_vac);
}

double dt_air_to_vac(double lambda_air) {
  /* The air value of DT_AIRVAC_MIN vacuum is about 1999.35 A: below that no
   * vacuum wavelength >= DT_AIRVAC_MIN can map here. */
  if (!(lambda_air >= 0.999 * DT_AIRVAC_MIN)) return lambda_air;
  if (isinf(lambda_air)) return lambda_air;
  double vac = lambda_air * air_index(lambda_air);
  for (int it = 0; it < 30; it++) {
    double next = lambda_air * air_index(vac);
    double d = fabs(next - vac);
    vac = next;
    if (d <= 1e-15 * vac) break;
  }
  return vac >= DT_AIRVAC_MIN ? vac : lambda_air;
}
