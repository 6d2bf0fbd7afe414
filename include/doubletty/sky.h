/* Sky positions: right ascension and declination as doubletty carries them.
 *
 * Every position is kept in ICRS degrees.  Positions come from text
 * (degrees, or sexagesimal "hh:mm:ss.s" / "hh mm ss.s" / "12h34m56.7s" for
 * right ascension and "+dd:mm:ss" / "-dd mm ss" / "+12d34m56s" for
 * declination) and a frame of reference (FITS WCS Paper II, Calabretta &
 * Greisen 2002, A&A 395, 1077, section 3.1: RADESYS ICRS, FK5, FK4,
 * FK4-NO-E, GAPPT; without RADESYS, FK4 when EQUINOX < 1984, FK5 when
 * EQUINOX >= 1984, ICRS when neither is given).  Conversions to ICRS use
 * ERFA (the IAU SOFA algorithms). */
#ifndef DOUBLETTY_SKY_H
#define DOUBLETTY_SKY_H
#include "doubletty/status.h"

/* A reference system of equatorial coordinates. */
typedef enum dt_radesys {
  DT_RADESYS_ICRS = 0,
  DT_RADESYS_FK5,      /* mean equator and equinox EQUINOX (Julian) */
  DT_RADESYS_FK4,      /* mean equator and equinox EQUINOX (Besselian), with E-terms */
  DT_RADESYS_FK4_NO_E  /* FK4 without the E-terms of aberration */
} dt_radesys;

/* Parse right ascension text.  Given: text, either a decimal number of
 * degrees ("150.25") or sexagesimal HOURS with ':' or blanks or h/m/s
 * letters as separators ("10:01:00.0", "10 01 00", "10h01m00s").
 * Returned: *deg in [0, 360).  DT_EFORMAT when the text is not a right
 * ascension (minutes or seconds >= 60, hours >= 24, degrees outside
 * [0, 360)). */
int dt_sky_parse_ra(const char *text, double *deg);

/* Parse declination text: decimal degrees or sexagesimal degrees with a
 * sign ("-05:30:00", "-5 30 0", "-05d30m00s").  A minus sign on a zero
 * degree field ("-00:30:00") counts.  DT_EFORMAT outside [-90, 90]. */
int dt_sky_parse_dec(const char *text, double *deg);

/* Parse a RADESYS value ("ICRS", "FK5", "FK4", "FK4-NO-E").  DT_EFORMAT for
 * anything else (GAPPT is apparent place: not accepted). */
int dt_sky_parse_radesys(const char *text, dt_radesys *sys);

/* Convert a position to ICRS.
 * Given: sys and equinox (years: Julian for FK5, Besselian for FK4; 0 =
 *   the system's standard equinox, J2000 or B1950), ra, dec [deg].
 *   epoch (Besselian year of the observation, 0 = the equinox), used by
 *   FK4 for the rotation of the FK4 frame (no proper motion is known).
 * Returned: *ra_icrs, *dec_icrs [deg].
 * Notes: FK4 (B1950) -> FK5 J2000 by eraFk45z (Standish 1982; Aoki et al.
 *   1983), which removes the E-terms of aberration itself.  FK4 at another
 *   equinox, and FK4-NO-E, are not supported (DT_EINVAL).  FK5 at an
 *   equinox other than J2000 is first precessed with the IAU 1976 model
 *   (eraPmat76).  FK5 J2000 -> ICRS by the frame rotation of eraFk5hz at
 *   J2000 (Hipparcos/ICRS vs FK5, Feissel & Mignard 1998).  Accuracy a few
 *   milliarcseconds, far below what velocity frames need. */
int dt_sky_to_icrs(dt_radesys sys, double equinox, double epoch, double ra, double dec,
                   double *ra_icrs, double *dec_icrs);

/* Unit vector toward (ra, dec) [deg] in the ICRS axes. */
void dt_sky_unit(double ra, double dec, double n[3]);

#endif
