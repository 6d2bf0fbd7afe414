/* Tangent-plane projection and centre of directions (sphere.h) against
 * astropy's WCS (wcslib): RA---TAN/DEC--TAN with CRVAL the centre, CRPIX 0,
 * CDELT 1 deg, world_to_pixel with origin 1 gives the intermediate world
 * coordinates (xi, eta) in degrees. */
#include <math.h>

#include "doubletty/sphere.h"
#include "harness.h"

/* ra0, dec0, ra, dec, xi, eta [deg]: astropy 5.2 (Debian python3-astropy),
 * astropy.wcs.WCS ... wcs_world2pix([[ra, dec]], 1) */
static const double ref[][6] = {
    {150.1, 2.2, 150.3, 2.5, 0.199813192811758, 0.300017953627687},
    {150.1, 2.2, 149.7, 1.9, -0.399792049285706, -0.299956471469355},
    {150.1, 2.2, 150.1, 2.2, 0, 0},
    {150.1, 2.2, 151.0, 3.0, 0.898927910222983, 0.800421536110888},
    {0.5, -89.5, 10.0, -89.0, 0.165045855762379, 0.486300006348372},
    {0.5, -89.5, 200.0, -89.9, -0.0333824701949586, -0.594285470134382},
    {0.5, -89.5, 359.0, -88.0, -0.0523612136689021, 1.49965752547314},
    {359.9, 0.1, 0.2, 0.0, 0.300003198517728, -0.100000101539262},
    {359.9, 0.1, 359.5, -0.3, -0.400010763510747, -0.400013809820911},
};

int main(void) {
  for (size_t i = 0; i < sizeof ref / sizeof ref[0]; i++) {
    const double *r = ref[i];
    double xi, eta;
    int rc = dt_sphere_gnomonic(r[2], r[3], r[0], r[1], &xi, &eta);
    CHECK(rc == 0, "(%g,%g) about (%g,%g) projects", r[2], r[3], r[0], r[1]);
    CHECK_CLOSE(xi, r[4], 1e-12, "xi of (%g,%g) about (%g,%g) (astropy WCS TAN)", r[2], r[3], r[0], r[1]);
    CHECK_CLOSE(eta, r[5], 1e-12, "eta of (%g,%g) about (%g,%g) (astropy WCS TAN)", r[2], r[3], r[0], r[1]);
  }
  double xi, eta;
  CHECK(dt_sphere_gnomonic(180, 0, 0, 0, &xi, &eta) == -1 && isnan(xi), "the far side does not project");
  /* the centre of two points symmetric about (10, 0) is (10, 0); of points
   * around the pole, the pole (geometry, common practice) */
  double ra[4] = {9, 11, 0, 0}, dec[4] = {0, 0, 0, 0}, a, d;
  CHECK(dt_sphere_centre(ra, dec, 2, &a, &d) == 0, "centre of two");
  CHECK_CLOSE(a, 10, 1e-12, "centre RA 10");
  CHECK_CLOSE(d, 0, 1e-12, "centre Dec 0");
  double pra[4] = {0, 90, 180, 270}, pdec[4] = {80, 80, 80, 80};
  CHECK(dt_sphere_centre(pra, pdec, 4, &a, &d) == 0 && fabs(d - 90) < 1e-9, "centre of a ring about the pole: Dec 90");
  double ara[2] = {359.5, 0.5}, adec[2] = {1, 1};
  CHECK(dt_sphere_centre(ara, adec, 2, &a, &d) == 0 && fabs(a) < 1e-9 + 0 * d, "centre across RA 0 is 0, not 180");
  CHECK(dt_sphere_centre(ra, dec, 0, &a, &d) == -1, "no points: no centre");
  return dt_test_done();
}
