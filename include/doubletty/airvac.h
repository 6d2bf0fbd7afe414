/* Air <-> vacuum wavelengths with the IAU standard formula
 * (Morton 2000, ApJS 130, 403, eqs. 7-8; refractive index of Ciddor 1996).
 *
 * Wavelengths in Angstrom.  Air wavelengths are conventionally used only
 * above 2000 A (DT_AIRVAC_MIN): both functions return shorter wavelengths
 * (and non-finite values) unchanged.  dt_air_to_vac inverts dt_vac_to_air
 * by iteration to double precision. */
#ifndef DOUBLETTY_AIRVAC_H
#define DOUBLETTY_AIRVAC_H

#define DT_AIRVAC_MIN 2000.0   /* [Angstrom, vacuum] below: no conversion */

double dt_vac_to_air(double lambda_vac_angstrom);
double dt_air_to_vac(double lambda_air_angstrom);
#endif
