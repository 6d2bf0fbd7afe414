/* The demo's 21-cm cube: neutral hydrogen of the Velloran Pair (fictional)
 * and the tidal bridge between its two galaxies, as an invented radio
 * survey might map it, so that `doubletty hi` can be tried on the demo
 * sightlines at once.
 *
 * Each galaxy is an inclined exponential disc with a rotation curve
 * v = vsys + vrot tanh(R / R0) cos(phi) sin(i); the bridge a ridge along the
 * line between them whose velocity runs from one to the other.  Line
 * profiles are Gaussian; Gaussian noise is added from the demo's seed.
 * Axes: RA---SIN / DEC--SIN (20 arcsec pixels), VRAD (radio velocity,
 * LSRK, 4 km/s channels); brightness temperature in K. */
#include <fitsio.h>
#include <gsl/gsl_randist.h>
#include <gsl/gsl_rng.h>
#include <math.h>
#include <stdlib.h>

#include "demo_internal.h"
#include "doubletty/hicube.h"

#define NX 48
#define NY 40
#define NV 138
#define PIX_DEG (20.0 / 3600.0)
#define V0_KMS 250.0
#define DV_KMS 4.0

typedef struct disc {
  double x, y;          /* offset from the map centre [deg] (east, north) */
  double vsys, vrot;    /* [km/s] */
  double pa, incl;      /* position angle of the major axis, inclination [rad] */
  double scale, peak;   /* exponential scale [deg], peak T_B [K] */
  double disp;          /* line dispersion [km/s] */
} disc;

static double gauss(double v, double v0, double s) {
  double x = (v - v0) / s;
  return exp(-0.5 * x * x);
}

/* Add a disc's emission at map offset (x, y) to spec[NV]. */
static void add_disc(const disc *d, double x, double y, float *spec) {
  double dx = x - d->x, dy = y - d->y;
  double ca = cos(d->pa), sa = sin(d->pa);
  double maj = dx * sa + dy * ca, min = (-dx * ca + dy * sa) / cos(d->incl);
  double r = sqrt(maj * maj + min * min);
  double t = d->peak * exp(-r / d->scale);
  if (t < 1e-3) return;
  double cphi = r > 0 ? maj / r : 0;
  double vl = d->vsys + d->vrot * tanh(r / (0.4 * d->scale)) * cphi * sin(d->incl);
  for (int k = 0; k < NV; k++) spec[k] += (float)(t * gauss(V0_KMS + DV_KMS * k, vl, d->disp));
}

int dt_demo_write_cube(const char *path, unsigned long seed, dt_err *e) {
  const double deg = DEMO_TWO_PI / 360.0;
  disc a = {-0.035, 0.018, 478.0, 125.0, 30 * deg, 55 * deg, 0.024, 12.0, 9.0};
  disc b = {0.040, -0.022, 548.0, 95.0, 115 * deg, 40 * deg, 0.019, 10.0, 8.0};
  float *cube = calloc((size_t)NX * NY * NV, sizeof *cube);
  float *spec = malloc(NV * sizeof *spec);
  gsl_rng *r = gsl_rng_alloc(gsl_rng_mt19937);
  if (!cube || !spec || !r) {
    free(cube);
    free(spec);
    if (r) gsl_rng_free(r);
    return dt_err_set(e, DT_ENOMEM, NULL, "out of memory");
  }
  gsl_rng_set(r, mix_seed(seed, 0, 9));
  double bx = b.x - a.x, by = b.y - a.y, blen = sqrt(bx * bx + by * by);
  for (int j = 0; j < NY; j++)
    for (int i = 0; i < NX; i++) {
      /* offsets east and north (RA increases to the left: pixel x to -east) */
      double x = -(i - (NX - 1) / 2.0) * PIX_DEG, y = (j - (NY - 1) / 2.0) * PIX_DEG;
      for (int k = 0; k < NV; k++) spec[k] = 0;
      add_disc(&a, x, y, spec);
      add_disc(&b, x, y, spec);
      /* the bridge: a ridge 0.012 deg wide between the two discs */
      double t = ((x - a.x) * bx + (y - a.y) * by) / (blen * blen);
      if (t > 0 && t < 1) {
        double px = a.x + t * bx - x, py = a.y + t * by - y;
        double w = exp(-0.5 * (px * px + py * py) / (0.012 * 0.012));
        double vb = (a.vsys + 35.0) + t * ((b.vsys - 30.0) - (a.vsys + 35.0));
        double tb = 3.2 * w * (0.6 + 0.4 * sin(DEMO_TWO_PI * t));
        for (int k = 0; k < NV; k++) spec[k] += (float)(tb * gauss(V0_KMS + DV_KMS * k, vb, 14.0));
      }
      for (int k = 0; k < NV; k++)
        cube[((size_t)k * NY + (size_t)j) * NX + (size_t)i] = spec[k] + (float)gsl_ran_gaussian(r, 0.08);
    }
  gsl_rng_free(r);
  free(spec);

  fitsfile *f = NULL;
  int status = 0;
  long naxes[3] = {NX, NY, NV};
  fits_create_diskfile(&f, path, &status);
  fits_create_img(f, FLOAT_IMG, 3, naxes, &status);
  fits_write_key_str(f, "OBJECT", DT_DEMO_PAIR_NAME, "the pair and its tidal bridge in HI", &status);
  fits_write_key_str(f, "TELESCOP", "Marrowdene Array (fictional)", "", &status);
  fits_write_key_str(f, "ORIGIN", "doubletty demo", "synthetic data, not an observation", &status);
  fits_write_key_str(f, "BUNIT", "K", "brightness temperature", &status);
  fits_write_key_dbl(f, "BMAJ", 45.0 / 3600.0, -10, "beam major axis [deg]", &status);
  fits_write_key_dbl(f, "BMIN", 45.0 / 3600.0, -10, "beam minor axis [deg]", &status);
  fits_write_key_dbl(f, "BPA", 0.0, -6, "beam position angle [deg]", &status);
  fits_write_key_str(f, "CTYPE1", "RA---SIN", "", &status);
  fits_write_key_dbl(f, "CRVAL1", DEMO_PAIR_RA, -12, "", &status);
  fits_write_key_dbl(f, "CRPIX1", (NX + 1) / 2.0, -10, "", &status);
  fits_write_key_dbl(f, "CDELT1", -PIX_DEG, -12, "[deg]", &status);
  fits_write_key_str(f, "CUNIT1", "deg", "", &status);
  fits_write_key_str(f, "CTYPE2", "DEC--SIN", "", &status);
  fits_write_key_dbl(f, "CRVAL2", DEMO_PAIR_DEC, -12, "", &status);
  fits_write_key_dbl(f, "CRPIX2", (NY + 1) / 2.0, -10, "", &status);
  fits_write_key_dbl(f, "CDELT2", PIX_DEG, -12, "[deg]", &status);
  fits_write_key_str(f, "CUNIT2", "deg", "", &status);
  fits_write_key_str(f, "CTYPE3", "VRAD", "radio velocity", &status);
  fits_write_key_dbl(f, "CRVAL3", V0_KMS * 1e3, -12, "[m/s]", &status);
  fits_write_key_dbl(f, "CRPIX3", 1.0, -10, "", &status);
  fits_write_key_dbl(f, "CDELT3", DV_KMS * 1e3, -12, "[m/s]", &status);
  fits_write_key_str(f, "CUNIT3", "m/s", "", &status);
  fits_write_key_dbl(f, "RESTFRQ", DT_HI_RESTFRQ_HZ, -13, "HI rest frequency [Hz]", &status);
  fits_write_key_str(f, "SPECSYS", "LSRK", "kinematic local standard of rest", &status);
  fits_write_key_str(f, "RADESYS", "ICRS", "", &status);
  fits_write_comment(f, "Synthetic 21-cm cube of the doubletty demo survey: an invented", &status);
  fits_write_comment(f, "scenario (fictional galaxies, fictional telescope).", &status);
  fits_write_img(f, TFLOAT, 1, (LONGLONG)NX * NY * NV, cube, &status);
  int cs = 0;
  fits_close_file(f, &cs);
  free(cube);
  if (status || cs) {
    char txt[FLEN_STATUS];
    fits_get_errstatus(status ? status : cs, txt);
    return dt_err_set(e, DT_EIO, CUBE_FILE, "cannot write: %s", txt);
  }
  return DT_OK;
}
