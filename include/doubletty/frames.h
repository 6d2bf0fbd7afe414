/* Velocity frames of spectra (FITS WCS Paper III, Greisen et al. 2006,
 * A&A 446, 747, table 1: SPECSYS) and the Doppler factors between them.
 *
 * A frame is the rest frame of an observer.  Each frame F is described by
 * its Doppler factor D_F toward a direction n relative to the solar-system
 * barycentre: a wavelength measured in F becomes lambda_bary = D_F *
 * lambda_F.  Factors compose by multiplication, which is the relativistic
 * composition of velocities along the line of sight:
 *   lambda_to = (D_from / D_to) * lambda_from.
 *
 *   BARYCENT  D = 1.
 *   TOPOCENT  D = gamma (1 + beta.n) / (1 - Phi/c^2): beta the barycentric
 *             velocity of the observer (Earth's orbit and rotation) from
 *             ERFA (eraApco13: eraEpv00 + eraPvtob), Phi the gravitational
 *             potential (> 0) of the Sun and the Earth at the observer (Wright &
 *             Eastman 2014, PASP 126, 838, eq. 28 without Shapiro delay).
 *             UT1 - UTC and polar motion are taken as zero (their effect is
 *             below 0.1 m/s).  Needs the time and the site.
 *   GEOCENTR  as TOPOCENT for the geocentre (Earth's barycentric velocity,
 *             the Sun's potential).  Needs the time.
 *   HELIOCEN  D = 1 + beta_sun.n (beta_sun the Sun's barycentric velocity,
 *             eraEpv00).  Needs the time.
 *   LSRK      the Sun moves at 20 km/s toward RA 18h, Dec +30 (B1900)
 *             relative to the kinematic LSR (common practice; Gordon 1975,
 *             Methods of Experimental Physics 12C, section 6.1.5).
 *             The direction is carried from the mean equinox of B1900 to
 *             J2000 with the IAU 1976 precession (eraPmat76) and to ICRS
 *             with eraFk5hz; the FK4 E-terms and equinox offset (< 1
 *             arcsec, < 0.1 m/s) are neglected.
 *   LSRD      the Sun moves at (U, V, W) = (11.1, 12.24, 7.25) km/s in
 *             Galactic coordinates relative to the dynamical LSR (Schoenrich,
 *             Binney & Dehnen 2010, MNRAS 403, 1829); Galactic to ICRS by
 *             eraG2icrs.
 *   For the two LSR frames D = gamma (1 - V.n/c), V the solar motion: an
 *   observer at rest in the LSR moves at -V relative to the barycentre.
 *   GALACTOC and LOCALGRP have no agreed definition in Paper III and are
 *   not converted (DT_EINVAL). */
#ifndef DOUBLETTY_FRAMES_H
#define DOUBLETTY_FRAMES_H
#include "doubletty/status.h"

#define DT_C_KMS 299792.458          /* speed of light [km/s] (CODATA, exact) */

typedef enum dt_frame {
  DT_FRAME_UNSET = 0,
  DT_FRAME_TOPOCENT,
  DT_FRAME_GEOCENTR,
  DT_FRAME_BARYCENT,
  DT_FRAME_HELIOCEN,
  DT_FRAME_LSRK,
  DT_FRAME_LSRD,
  DT_FRAME_GALACTOC,
  DT_FRAME_LOCALGRP
} dt_frame;

/* Where the time and place of an observation are known. */
typedef struct dt_frame_obs {
  int has_time;
  double mjd;        /* UTC modified Julian date of the exposure midpoint */
  int has_site;
  double lon, lat;   /* geodetic longitude (east +) and latitude [deg], WGS84 */
  double height;     /* height above the ellipsoid [m] */
} dt_frame_obs;

/* The Paper III name of a frame ("BARYCENT", ...; "" for UNSET). */
const char *dt_frame_name(dt_frame f);

/* Parse a frame name, case-insensitively: the Paper III names, plus
 * "LSR" (= LSRK), "HELIO", "BARY", "TOPO", "GEO".  DT_EFORMAT otherwise. */
int dt_frame_parse(const char *text, dt_frame *f);

/* The frame of an AIPS VELREF value (1 LSR -> LSRK, 2 heliocentric ->
 * HELIOCEN, 3 observer -> TOPOCENT; 256 added for radio velocities is
 * ignored).  DT_EFORMAT for other values. */
int dt_frame_from_velref(long velref, dt_frame *f);

/* What a conversion into or out of f needs: bit 1 the time, bit 2 the
 * site, bit 4 a direction (every frame but BARYCENT). */
int dt_frame_needs(dt_frame f);

/* Doppler factor of frame f toward ICRS (ra, dec) [deg] relative to the
 * barycentre (see the top of this file): lambda_bary = *d * lambda_f.
 * obs gives the time and site where f needs them (may be NULL for the
 * others).  DT_EINVAL when f cannot be converted or obs lacks what f needs
 * (e->what says which). */
int dt_frame_doppler(dt_frame f, double ra, double dec, const dt_frame_obs *obs, double *d,
                     dt_err *e);

/* The factor k with lambda_to = k * lambda_from. */
int dt_frame_factor(dt_frame from, dt_frame to, double ra, double dec, const dt_frame_obs *obs,
                    double *k, dt_err *e);

/* Parse "LON,LAT,HEIGHT" (degrees east, degrees, metres).  DT_EFORMAT. */
int dt_frame_parse_site(const char *text, dt_frame_obs *obs);

/* Parse a FITS date "YYYY-MM-DD[Thh:mm:ss[.s...]]" (UTC) into an MJD.
 * DT_EFORMAT when malformed. */
int dt_frame_parse_date(const char *text, double *mjd);

/* Site from geocentric OBSGEO-X/Y/Z [m] (ITRS, WGS84 ellipsoid). */
int dt_frame_site_from_xyz(double x, double y, double z, dt_frame_obs *obs);

#endif
