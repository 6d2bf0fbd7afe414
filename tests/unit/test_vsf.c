/* The velocity structure function (vsf.h): separations against astropy,
 * the pair sums and the bootstrap on small samples whose answer is known,
 * the power-law fit on exact power laws. */
#include <math.h>
#include <stdlib.h>

#include "doubletty/vsf.h"
#include "harness.h"

/* ra1, dec1, ra2, dec2 [deg] and the angle [rad] from astropy 5.2
 * (Debian python3-astropy): SkyCoord(ra1, dec1, frame='icrs')
 * .separation(SkyCoord(ra2, dec2)).to(u.rad). */
static const double sep_ref[][5] = {
    {150.0, 2.0, 150.0000002777778, 2.0, 4.8451836101594765e-09},
    {150, 2, 150, 2.000000000277778, 4.8481427206148453e-12},
    {10, -30, 190, 30, 3.1415926535897931},
    {0, 89.9999, 180, 89.9999, 3.4906585041464339e-06},
    {359.9999, 0, 0.0001, 0, 3.4906585029366307e-06},
    {12.3, 45.6, 12.31, 45.62, 0.00036980204376487537},
    {0, 0, 180, 0, 3.1415926535897931},
    {45, 10, 46, -10, 0.3494974763287535},
    {200.5, -60.25, 200.5001, -60.2501, 1.9483926384410298e-06},
};

int main(void) {
  for (size_t i = 0; i < sizeof sep_ref / sizeof sep_ref[0]; i++) {
    const double *c = sep_ref[i];
    double s = dt_sphere_separation(c[0], c[1], c[2], c[3]);
    /* relative 1e-9, or 2e-17 rad (4 micro-arcsec: the rounding of the
     * input degrees themselves, 2 ulp of 150 deg) */
    CHECK_CLOSE(s, c[4], fmax(1e-9 * c[4], 2e-17), "separation (%g,%g)-(%g,%g) = %.6g rad (astropy SkyCoord.separation)", c[0], c[1],
              c[2], c[3], c[4]);
  }
  CHECK(dt_sphere_separation(33, -7, 33, -7) == 0, "a point from itself: 0");

  /* A linear gradient along the equator: v = a x, x the offset [kpc].
   * Pairs at separation r differ by exactly a r, so S1 = a <r> in every
   * bin and the log-log slope is 1 (common practice: a shear flow). */
  enum { N = 40 };
  dt_vsf_point p[N];
  double a = 0.7, scale = 2.0; /* kpc per arcsec */
  for (int i = 0; i < N; i++) {
    double x = 3.0 * pow(1.13, i); /* kpc, uneven spacing */
    p[i].ra_deg = 30 + x / scale / 3600;
    p[i].dec_deg = 0;
    p[i].v = a * x;
    p[i].sigma = 0;
  }
  double edges[7] = {1, 3, 10, 30, 100, 300, 1000};
  dt_err e;
  dt_vsf *w = dt_vsf_alloc(p, N, 1, scale, edges, 7, &e);
  CHECK(w != NULL, "alloc");
  dt_vsf_bin b[6];
  dt_vsf_eval(w, b);
  int exact = 1;
  long pairs = 0;
  for (int k = 0; k < 6; k++) {
    pairs += b[k].npairs;
    if (b[k].npairs && fabs(b[k].vsf - a * b[k].r_mean) > 1e-9 * b[k].vsf) exact = 0;
  }
  CHECK(exact, "gradient: S1 = a <r> in every bin");
  CHECK(pairs > 100, "gradient: %ld pairs in the bins", pairs);
  CHECK(dt_vsf_bootstrap(w, 50, 7, b, NULL, NULL) == DT_OK, "bootstrap runs");
  double g, ge, la;
  size_t used;
  CHECK(dt_vsf_fit(b, 6, 1, 1000, &g, &ge, &la, &used) == DT_OK && used >= 3, "fit uses %zu bins", used);
  CHECK_CLOSE(g, 1.0, 1e-9, "gradient: slope exactly 1");
  CHECK_CLOSE(la, log10(a), 1e-9, "gradient: amplitude a");
  dt_vsf_free(w);

  /* order 2 with the variance correction on two points: (dv)^2 - s1^2 - s2^2 */
  dt_vsf_point two[2] = {{10, 0, 5, 3}, {10, 1.0 / 3600, -5, 4}};
  double e2[2] = {0.5, 1.5};
  w = dt_vsf_alloc(two, 2, 2, 1.0, e2, 2, &e);
  dt_vsf_eval(w, b);
  CHECK(b[0].npairs == 1, "one pair at 1 kpc");
  CHECK_CLOSE(b[0].vsf, 100.0 - 9.0 - 16.0, 1e-9, "order 2: 10^2 - 3^2 - 4^2");
  dt_vsf_free(w);

  /* fit of an exact power law with equal relative errors: g and A back */
  dt_vsf_bin pl[8];
  for (int k = 0; k < 8; k++) {
    pl[k].r_mean = 5 * pow(2, k);
    pl[k].vsf = 3.0 * pow(pl[k].r_mean, 2.0 / 3);
    pl[k].err = 0.1 * pl[k].vsf;
  }
  CHECK(dt_vsf_fit(pl, 8, 10, 200, &g, &ge, &la, &used) == DT_OK && used == 5, "fit range 10..200: 5 bins");
  CHECK_CLOSE(g, 2.0 / 3, 1e-12, "power law 2/3 recovered");
  CHECK_CLOSE(la, log10(3.0), 1e-12, "its amplitude");
  /* the slope's error of a weighted straight line: 1/sqrt(sum w (x - xbar_w)^2)
   * (e.g. Bevington & Robinson, "Data Reduction and Error Analysis", eq. 6.22) */
  double s = 0.1 / M_LN10, sx = 0, sxx = 0;
  for (int k = 1; k <= 5; k++) {
    double x = log10(pl[k].r_mean);
    sx += x;
    sxx += x * x;
  }
  double want = s / sqrt(sxx - sx * sx / 5);
  CHECK_CLOSE(ge, want, 1e-12, "slope error from the weights");
  CHECK(dt_vsf_fit(pl, 8, 1000, 2000, &g, &ge, &la, &used) == DT_ERANGE, "no bins in range: DT_ERANGE");
  double rmin, rmax;
  dt_vsf_range(p, N, scale, &rmin, &rmax);
  CHECK(rmin > 0 && rmax > rmin, "separation range");
  CHECK(dt_vsf_alloc(p, N, 3, scale, edges, 7, &e) == NULL, "order 3 refused");
  return dt_test_done();
}
