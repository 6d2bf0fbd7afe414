/* 21-cm data cubes: neutral hydrogen along a sightline.
 *
 * A cube is a FITS image with two celestial axes (any projection, equatorial
 * or Galactic) and one spectral axis (FREQ, VRAD, VOPT, FELO, VELO, WAVE,
 * ...), read through wcslib (wcspih, wcss2p, wcssptr); a fourth axis of
 * length 1 (Stokes) is allowed.  BUNIT 'K' (brightness temperature) or
 * 'Jy/beam' (with BMAJ, BMIN in degrees), converted to K by the
 * Rayleigh-Jeans relation (common practice, e.g. the NRAO formula):
 *   T_B [K] = 1.222e6 S [Jy/beam] / (nu_GHz^2 theta_maj theta_min),
 * theta in arcsec, nu the channel's frequency.  Blank pixels (NaN, or BLANK
 * in integer cubes) are kept as NaN.  The cube's frame is its SPECSYS (else
 * VELREF, else LSRK assumed, the usual frame of 21-cm surveys -- said in
 * the note); channels are carried to the caller's output frame
 * (frames.h) at each sightline.
 *
 * Velocities are those of doubletty's spectra: v relative to vsys with
 * 1 + z = (1 + vsys/c)(1 + v/c), z from the channel's frequency,
 * 1 + z = nu_HI / nu (nu_HI = RESTFRQ, else 1420.405751768 MHz).
 *
 * Per sightline (dt_hicube_sample): the spectrum T_B(v) at the position
 * (bilinear interpolation between the four nearest pixels) or the mean over
 * the pixels within an aperture radius; then over the velocity range
 *   N(HI) = 1.823e18 cm^-2 / (K km/s) * integral T_B dv
 * (optically thin; Dickey & Lockman 1990, ARA&A 28, 215 -- a lower limit
 * where the gas is optically thick, and beam-diluted for small clouds),
 * its error from the channel noise rms of the emission-free channels:
 * sigma_W = rms dv sqrt(n), the intensity-weighted mean velocity and
 * dispersion, and the peak T_B.
 * The velocity range: the caller's window (relative to vsys), else
 * automatic: on the spectrum smoothed over 3 channels, the run of channels
 * around the brightest one above 3 times the (smoothed) noise -- at least 3
 * channels, else "no-emission" -- widened on each side by half its width
 * (noise from channel-to-channel differences, 1.4826 median|dT|/sqrt 2). */
#ifndef DOUBLETTY_HICUBE_H
#define DOUBLETTY_HICUBE_H
#include <stddef.h>
#include "doubletty/frames.h"
#include "doubletty/status.h"

#define DT_HI_NHI_PER_KKMS 1.823e18    /* cm^-2 per K km/s, optically thin */
#define DT_HI_RESTFRQ_HZ 1420405751.768 /* HI hyperfine line [Hz] */

typedef struct dt_hicube dt_hicube;

/* What a sightline gave. */
typedef enum dt_hi_status {
  DT_HI_OK = 0,
  DT_HI_OUTSIDE,     /* the position (or the aperture) is outside the map */
  DT_HI_BLANKED,     /* blank pixels at the position within the velocity range */
  DT_HI_NO_EMISSION, /* nothing above the noise (automatic range), or integral <= 0 */
  DT_HI_NO_RANGE     /* the window lies outside the cube's channels */
} dt_hi_status;

const char *dt_hi_status_name(dt_hi_status s); /* "ok", "outside", ... */

typedef struct dt_hi_opts {
  dt_frame frame;        /* output frame; UNSET = BARYCENT */
  double vsys;           /* velocities relative to this [km/s] */
  int has_window;
  double vlo, vhi;       /* window relative to vsys [km/s] */
  double aperture;       /* radius [arcsec]; 0 = interpolate at the position */
} dt_hi_opts;

typedef struct dt_hi_sample {
  dt_hi_status status;
  double logN, logN_err; /* log10 N(HI) [cm^-2] and its 1-sigma error [dex] */
  double W, W_err;       /* integral T_B dv [K km/s] */
  double v, sigma;       /* intensity-weighted velocity, dispersion [km/s] */
  double tpeak;          /* peak T_B [K] */
  double rms;            /* channel noise [K] */
  double vlo, vhi;       /* the velocity range used [km/s] */
  size_t npix;           /* pixels averaged (1 when interpolated) */
  size_t nchan;          /* channels of the spectrum below */
  double *vel;           /* velocity of each channel, increasing [km/s] */
  double *tb;            /* T_B [K] (NaN where blank) */
} dt_hi_sample;

/* Open a cube.  DT_EFORMAT (one message naming the keyword) for a header
 * that does not describe a 21-cm cube; DT_EIO for an unreadable file. */
int dt_hicube_open(const char *path, dt_hicube **out, dt_err *e);
void dt_hicube_close(dt_hicube *c);

/* Facts of the cube: axis lengths, frame, unit ("K" or "Jy/beam"),
 * and a note on what was assumed ("" if nothing). */
void dt_hicube_shape(const dt_hicube *c, size_t *nx, size_t *ny, size_t *nchan);
dt_frame dt_hicube_frame(const dt_hicube *c);
const char *dt_hicube_note(const dt_hicube *c);

/* Sample at ICRS (ra, dec) [deg].  The result's arrays are allocated
 * (dt_hi_sample_free).  Status rows (outside, blanked, ...) are DT_OK
 * returns with out->status set; errors only for what makes sampling
 * impossible (DT_EINVAL: the frame conversion needs what the cube lacks). */
int dt_hicube_sample(const dt_hicube *c, double ra, double dec, const dt_hi_opts *o,
                     dt_hi_sample *out, dt_err *e);
void dt_hi_sample_free(dt_hi_sample *s);

/* The column density map: log10 N(HI) [cm^-2] for every spatial pixel
 * (x fastest; NaN where blank or without emission) integrated over the
 * window of o (required: has_window), the frame conversion taken at the
 * map's centre.  *map is allocated (free()), nx * ny values.  For contour
 * plots; pixel (i, j) is at dt_hicube_pixel_world. */
int dt_hicube_column_map(const dt_hicube *c, const dt_hi_opts *o, double **map, size_t *nx,
                         size_t *ny, dt_err *e);

/* ICRS position [deg] of spatial pixel (i, j) (0-based). */
int dt_hicube_pixel_world(const dt_hicube *c, double i, double j, double *ra, double *dec);

#endif
