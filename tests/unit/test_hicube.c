/* 21-cm cubes (hicube.c) through the library API: a cube written here with
 * cfitsio holds a spatially uniform Gaussian line T0 exp(-(v-V0)^2/2S^2) on
 * a VRAD axis; the expected column density is the optically thin relation
 * N = 1.823e18 T0 S sqrt(2 pi) cm^-2 (Dickey & Lockman 1990, ARA&A 28, 215),
 * the moments V0 and S by definition of a Gaussian.  Checks the sample at a
 * position, the column-density map, pixel positions, and the refusals. */
#include <fitsio.h>
#include <math.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>

#include "harness.h"
#include "doubletty/hicube.h"

#define NX 9
#define NY 7
#define NV 101

static int write_cube(const char *path, const char *bunit) {
  fitsfile *f = NULL;
  int st = 0;
  long nax[3] = {NX, NY, NV};
  static float data[NV][NY][NX];
  for (int k = 0; k < NV; k++) {
    double v = -50.0 + k; /* km/s */
    double t = 20.0 * exp(-0.5 * (v - 10.0) * (v - 10.0) / 64.0);
    for (int j = 0; j < NY; j++)
      for (int i = 0; i < NX; i++) data[k][j][i] = (float)t;
  }
  data[50][0][0] = NAN; /* one blank pixel in a corner */
  unlink(path);
  fits_create_diskfile(&f, path, &st);
  fits_create_img(f, FLOAT_IMG, 3, nax, &st);
  fits_write_key_str(f, "CTYPE1", "RA---TAN", "", &st);
  double d;
  d = 200.0; fits_write_key_dbl(f, "CRVAL1", d, -12, "", &st);
  d = 5.0; fits_write_key_dbl(f, "CRPIX1", d, -12, "", &st);
  d = -0.01; fits_write_key_dbl(f, "CDELT1", d, -12, "", &st);
  fits_write_key_str(f, "CTYPE2", "DEC--TAN", "", &st);
  d = -30.0; fits_write_key_dbl(f, "CRVAL2", d, -12, "", &st);
  d = 4.0; fits_write_key_dbl(f, "CRPIX2", d, -12, "", &st);
  d = 0.01; fits_write_key_dbl(f, "CDELT2", d, -12, "", &st);
  fits_write_key_str(f, "CTYPE3", "VRAD", "", &st);
  d = -50000.0; fits_write_key_dbl(f, "CRVAL3", d, -12, "", &st);
  d = 1.0; fits_write_key_dbl(f, "CRPIX3", d, -12, "", &st);
  d = 1000.0; fits_write_key_dbl(f, "CDELT3", d, -12, "", &st);
  fits_write_key_str(f, "CUNIT3", "m/s", "", &st);
  d = DT_HI_RESTFRQ_HZ; fits_write_key_dbl(f, "RESTFRQ", d, -13, "", &st);
  fits_write_key_str(f, "SPECSYS", "BARYCENT", "", &st);
  if (bunit) fits_write_key_str(f, "BUNIT", bunit, "", &st);
  fits_write_img(f, TFLOAT, 1, (LONGLONG)NX * NY * NV, data, &st);
  int cs = 0;
  fits_close_file(f, &cs);
  return st || cs;
}

int main(void) {
  char path[] = "/tmp/dt-test-hicube-XXXXXX";
  int fd = mkstemp(path);
  CHECK(fd >= 0, "temporary file");
  if (fd < 0) return dt_test_done();
  close(fd);
  CHECK(write_cube(path, "K") == 0, "cube written");
  dt_hicube *c = NULL;
  dt_err e;
  CHECK(dt_hicube_open(path, &c, &e) == DT_OK, "cube opens");
  if (!c) return dt_test_done();
  size_t nx, ny, nv;
  dt_hicube_shape(c, &nx, &ny, &nv);
  CHECK(nx == NX && ny == NY && nv == NV, "shape %zu x %zu x %zu", nx, ny, nv);
  CHECK(dt_hicube_frame(c) == DT_FRAME_BARYCENT, "frame from SPECSYS");
  double want = log10(1.823e18 * 20.0 * 8.0 * sqrt(2 * M_PI));
  dt_hi_opts o;
  memset(&o, 0, sizeof o);
  o.frame = DT_FRAME_BARYCENT;
  dt_hi_sample s;
  CHECK(dt_hicube_sample(c, 200.0, -30.0, &o, &s, &e) == DT_OK && s.status == DT_HI_OK, "sample at the centre");
  CHECK_CLOSE(s.logN, want, 0.002, "log N(HI) = log(1.823e18 T0 S sqrt(2 pi))");
  CHECK_CLOSE(s.v, 10.0, 0.2, "intensity-weighted velocity = V0");
  CHECK_CLOSE(s.sigma, 8.0, 0.2, "dispersion = S");
  CHECK_CLOSE(s.tpeak, 20.0, 0.01, "peak T_B");
  dt_hi_sample_free(&s);
  CHECK(dt_hicube_sample(c, 210.0, -30.0, &o, &s, &e) == DT_OK && s.status == DT_HI_OUTSIDE, "10 deg away: outside");
  dt_hi_sample_free(&s);
  double ra, dec;
  CHECK(dt_hicube_pixel_world(c, 0, 0, &ra, &dec) == 0, "pixel (0,0) has a position");
  CHECK(dt_hicube_sample(c, ra, dec, &o, &s, &e) == DT_OK && s.status == DT_HI_BLANKED, "on the blank pixel: blanked");
  dt_hi_sample_free(&s);
  double *map = NULL;
  CHECK(dt_hicube_column_map(c, &o, &map, &nx, &ny, &e) != DT_OK, "a map needs a window");
  o.has_window = 1;
  o.vlo = -50;
  o.vhi = 50;
  CHECK(dt_hicube_column_map(c, &o, &map, &nx, &ny, &e) == DT_OK && map, "column-density map");
  if (map) {
    int good = 0;
    for (size_t i = 1; i < nx * ny; i++) good += fabs(map[i] - want) < 0.002;
    CHECK(good == NX * NY - 1, "every pixel but the blank one has the analytic N(HI) (%d)", good);
    CHECK(isnan(map[0]), "the blank pixel is NaN in the map");
    free(map);
  }
  dt_hicube_close(c);
  CHECK(write_cube(path, NULL) == 0, "cube without BUNIT written");
  CHECK(dt_hicube_open(path, &c, &e) == DT_EFORMAT && strstr(e.what, "BUNIT"), "no BUNIT: refused (%s)", e.what);
  CHECK(write_cube(path, "mJy") == 0, "cube in mJy written");
  CHECK(dt_hicube_open(path, &c, &e) == DT_EFORMAT && strstr(e.what, "K or Jy/beam"), "BUNIT mJy: refused");
  unlink(path);
  return dt_test_done();
}
