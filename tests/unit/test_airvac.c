/* Air <-> vacuum conversion against tabulated wavelengths.
 *
 * Vacuum wavelengths of the Na I D lines from Morton 2003 (ApJS 149, 205,
 * Table 2); their air wavelengths as tabulated in the NIST Atomic Spectra
 * Database (lines of Na I: D2 5889.951 A, D1 5895.924 A). */
#include "doubletty/airvac.h"
#include "harness.h"

int main(void) {
  /* Morton 2003 (vacuum) <-> NIST ASD (air), to 0.002 A. */
  const double d2_vac = 5891.5833, d2_air = 5889.951;
  const double d1_vac = 5897.5581, d1_air = 5895.924;
  CHECK_CLOSE(dt_vac_to_air(d2_vac), d2_air, 0.002, "Na I D2: vacuum 5891.5833 -> air 5889.951");
  CHECK_CLOSE(dt_vac_to_air(d1_vac), d1_air, 0.002, "Na I D1: vacuum 5897.5581 -> air 5895.924");
  CHECK_CLOSE(dt_air_to_vac(d2_air), d2_vac, 0.002, "Na I D2: air 5889.951 -> vacuum 5891.5833");
  CHECK_CLOSE(dt_air_to_vac(d1_air), d1_vac, 0.002, "Na I D1: air 5895.924 -> vacuum 5897.5581");

  /* Morton 2000 eq. 8 evaluated by hand at s = 1e4/5891.5833 um^-1:
   * n - 1 = 2.7713e-4, so vac - air = 1.6323 A (worked example). */
  CHECK_CLOSE(d2_vac - dt_vac_to_air(d2_vac), 1.6323, 0.0005, "Na I D2: vac - air = 1.6323 A");

  /* The inverse is an inverse: round trips over the whole range where air
   * wavelengths are used, to 1e-8 A. */
  double worst = 0, worst_rel = 0;
  for (double lam = 2000.0; lam <= 30000.0; lam *= 1.0007) {
    double back = dt_air_to_vac(dt_vac_to_air(lam));
    double again = dt_vac_to_air(dt_air_to_vac(lam + 1.0));
    double d = fabs(back - lam), d2 = fabs(again - (lam + 1.0));
    if (d > worst) worst = d;
    if (d2 > worst) worst = d2;
    if (d / lam > worst_rel) worst_rel = d / lam;
  }
  CHECK(worst < 1e-8, "round trip vac->air->vac and air->vac->air within 1e-8 A (worst %.2g A)", worst);
  CHECK(worst_rel < 1e-12, "round trip relative error %.2g < 1e-12", worst_rel);

  /* Air wavelengths are shorter by n - 1 of standard air, about 2.7e-4 to
   * 3.0e-4 across the optical (common practice). */
  int shorter = 1;
  for (double lam = 3000.0; lam <= 10000.0; lam += 250.0) {
    double r = (lam - dt_vac_to_air(lam)) / lam;
    if (!(r > 2.70e-4 && r < 3.0e-4)) shorter = 0;
  }
  CHECK(shorter, "3000-10000 A: (vac - air)/vac between 2.70e-4 and 3.0e-4");

  /* Below 2000 A there are no air wavelengths (IAU convention). */
  CHECK(dt_vac_to_air(1215.67) == 1215.67, "Lyman alpha (below 2000 A) unchanged by vac->air");
  CHECK(dt_air_to_vac(1548.204) == 1548.204, "C IV 1548 (below 2000 A) unchanged by air->vac");
  CHECK(dt_vac_to_air(1999.9) == 1999.9, "just below 2000 A unchanged");
  CHECK(dt_vac_to_air(2000.0) < 2000.0, "2000 A itself converted");
  /* Mg II 2796.3543 (vacuum, Morton 2003) is above the limit: converted, and
   * back again. */
  CHECK(dt_vac_to_air(2796.3543) < 2796.3543, "Mg II 2796 converted to a shorter air wavelength");
  CHECK_CLOSE(dt_air_to_vac(dt_vac_to_air(2796.3543)), 2796.3543, 1e-9, "Mg II 2796 round trip");
  CHECK(isnan(dt_air_to_vac(NAN)) && isnan(dt_vac_to_air(NAN)), "NaN passes through");
  return dt_test_done();
}
