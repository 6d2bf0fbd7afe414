/* Air <-> vacuum wavelengths with the IAU standard formula
 * (Morton 2000, ApJS 130, 403, eqs. 7-8; refractive index of Ciddor 1996). */
#ifndef DOUBLETTY_AIRVAC_H
#define DOUBLETTY_AIRVAC_H
double dt_vac_to_air(double lambda_vac_angstrom);
double dt_air_to_vac(double lambda_air_angstrom);
#endif
