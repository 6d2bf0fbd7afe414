/* Angles and the tangent-plane projection on the sky (see sphere.h). */
#include "doubletty/sphere.h"

#include <math.h>

#define DEG (M_PI / 180.0)

double dt_sphere_separation(double ra1, double dec1, double ra2, double dec2) {
  double dl = (ra2 - ra1) * DEG, d1 = dec1 * DEG, d2 = dec2 * DEG;
  double sdl = sin(dl), cdl = cos(dl), s1 = sin(d1), c1 = cos(d1), s2 = sin(d2), c2 = cos(d2);
  double a = c2 * sdl, b = c1 * s2 - s1 * c2 * cdl, c = s1 * s2 + c1 * c2 * cdl;
  return atan2(hypot(a, b), c);
}

int dt_sphere_gnomonic(double ra, double dec, double ra0, double dec0, double *xi, double *eta) {
  double da = (ra - ra0) * DEG, d = dec * DEG, d0 = dec0 * DEG;
  double cosc = sin(d0) * sin(d) + cos(d0) * cos(d) * cos(da);
  if (!(cosc > 0)) {
    *xi = *eta = NAN;
    return -1;
  }
  *xi = cos(d) * sin(da) / cosc / DEG;
  *eta = (cos(d0) * sin(d) - sin(d0) * cos(d) * cos(da)) / cosc / DEG;
  return 0;
}

int dt_sphere_centre(const double *ra, const double *dec, size_t n, double *ra0, double *dec0) {
  double x = 0, y = 0, z = 0;
  for (size_t i = 0; i < n; i++) {
    double a = ra[i] * DEG, d = dec[i] * DEG;
    x += cos(d) * cos(a);
    y += cos(d) * sin(a);
    z += sin(d);
  }
  double r = sqrt(x * x + y * y + z * z);
  if (!(r > 1e-12 * (double)n) || n == 0) return -1;
  *ra0 = atan2(y, x) / DEG;
  if (*ra0 < 0) *ra0 += 360;
  *dec0 = asin(z / r) / DEG;
  return 0;
}
