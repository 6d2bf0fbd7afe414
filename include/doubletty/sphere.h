/* Geometry of the sky sphere: the angle between two directions and the
 * tangent-plane (gnomonic) projection about a centre. */
#ifndef DOUBLETTY_SPHERE_H
#define DOUBLETTY_SPHERE_H
#include <stddef.h>

/* The great-circle angle between two directions [rad].
 *
 * Given:    ra1, dec1, ra2, dec2   [deg]
 * Returned: the angle in [0, pi]
 * Notes:    the Vincenty form of the great-circle distance (the special
 *           case of Vincenty 1975, Survey Review 23, 88, for a sphere),
 *           atan2(sqrt(a^2 + b^2), c) with
 *             a = cos d2 sin dl, b = cos d1 sin d2 - sin d1 cos d2 cos dl,
 *             c = sin d1 sin d2 + cos d1 cos d2 cos dl,
 *           accurate at every angle, 0 and pi included (the arccos of the
 *           dot product loses half the digits below an arcsecond); the
 *           form astropy uses for SkyCoord.separation. */
double dt_sphere_separation(double ra1, double dec1, double ra2, double dec2);

/* The gnomonic (tangent-plane, FITS "TAN") projection about (ra0, dec0).
 *
 * Given:    ra, dec, ra0, dec0  [deg]
 * Returned: *xi  [deg] towards east (increasing RA),
 *           *eta [deg] towards north;
 *           0, or -1 when the point is 90 deg or more from the centre
 *           (not on the tangent plane's side of the sphere).
 * Notes:    with cos c = sin d0 sin d + cos d0 cos d cos(a - a0):
 *             xi  = cos d sin(a - a0) / cos c,
 *             eta = (cos d0 sin d - sin d0 cos d cos(a - a0)) / cos c,
 *           converted from radians to degrees.
 * References: Calabretta & Greisen 2002, A&A 395, 1077 (section 5.1.3, TAN);
 *           Green 1985, "Spherical Astronomy", section 13.2. */
int dt_sphere_gnomonic(double ra, double dec, double ra0, double dec0, double *xi, double *eta);

/* The centre of n directions: the direction of the sum of their unit
 * vectors [deg].  -1 when n = 0 or the sum vanishes. */
int dt_sphere_centre(const double *ra, const double *dec, size_t n, double *ra0, double *dec0);

#endif
