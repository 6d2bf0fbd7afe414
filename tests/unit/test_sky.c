/* Sky positions and frame names: parsing (sky.c, frames.c).  Expected
 * values follow from the definitions (1 h = 15 deg, 1' = 1/60); the
 * conversions themselves are checked against astropy in
 * tests/scripts/frames_astropy.sh. */
#include "harness.h"
#include "doubletty/frames.h"
#include "doubletty/sky.h"

int main(void) {
  double x = -1;
  CHECK(dt_sky_parse_ra("10:30:00", &x) == DT_OK && x == 157.5, "RA 10:30:00 = 157.5 deg");
  CHECK(dt_sky_parse_ra("10 30 36.0", &x) == DT_OK && fabs(x - 157.65) < 1e-12, "RA with blanks");
  CHECK(dt_sky_parse_ra("10h30m36s", &x) == DT_OK && fabs(x - 157.65) < 1e-12, "RA with letters");
  CHECK(dt_sky_parse_ra("157.65", &x) == DT_OK && x == 157.65, "RA in plain degrees");
  CHECK(dt_sky_parse_ra("24:00:00", &x) != DT_OK, "RA 24h refused");
  CHECK(dt_sky_parse_ra("10:60:00", &x) != DT_OK, "60 minutes refused");
  CHECK(dt_sky_parse_ra("-10", &x) != DT_OK, "negative RA refused");
  CHECK(dt_sky_parse_ra("10:30:", &x) != DT_OK, "trailing colon refused");
  CHECK(dt_sky_parse_ra("abc", &x) != DT_OK, "text refused");
  CHECK(dt_sky_parse_dec("-00:30:00", &x) == DT_OK && x == -0.5, "Dec -00:30:00 keeps its sign");
  CHECK(dt_sky_parse_dec("+45 15 00", &x) == DT_OK && x == 45.25, "Dec with blanks");
  CHECK(dt_sky_parse_dec("-12.5", &x) == DT_OK && x == -12.5, "Dec in degrees");
  CHECK(dt_sky_parse_dec("91", &x) != DT_OK, "Dec 91 refused");
  CHECK(dt_sky_parse_dec("10:30.5:00", &x) != DT_OK, "fraction in a middle field refused");
  dt_radesys sys;
  CHECK(dt_sky_parse_radesys(" fk4 ", &sys) == DT_OK && sys == DT_RADESYS_FK4, "RADESYS fk4");
  CHECK(dt_sky_parse_radesys("GAPPT", &sys) != DT_OK, "RADESYS GAPPT refused");
  dt_frame f;
  CHECK(dt_frame_parse("lsrk", &f) == DT_OK && f == DT_FRAME_LSRK, "frame lsrk");
  CHECK(dt_frame_parse("BARYCENT", &f) == DT_OK && f == DT_FRAME_BARYCENT, "frame BARYCENT");
  CHECK(dt_frame_parse("MOON", &f) != DT_OK, "unknown frame refused");
  CHECK(dt_frame_from_velref(257, &f) == DT_OK && f == DT_FRAME_LSRK, "VELREF 257 = LSR (radio)");
  CHECK(dt_frame_from_velref(3, &f) == DT_OK && f == DT_FRAME_TOPOCENT, "VELREF 3 = observer");
  double mjd = 0;
  /* MJD 51544.5 is 2000-01-01T12:00 (definition of J2000 in UTC terms) */
  CHECK(dt_frame_parse_date("2000-01-01T12:00:00", &mjd) == DT_OK && fabs(mjd - 51544.5) < 1e-9,
        "DATE-OBS 2000-01-01T12:00:00 = MJD 51544.5");
  CHECK(dt_frame_parse_date("2000-13-01", &mjd) != DT_OK, "month 13 refused");
  dt_frame_obs o = {0, 0, 0, 0, 0, 0};
  CHECK(dt_frame_parse_site("-70.5,-30.25,2400", &o) == DT_OK && o.lon == -70.5 && o.lat == -30.25 &&
            o.height == 2400,
        "--site LON,LAT,HEIGHT");
  CHECK(dt_frame_parse_site("10,95,0", &o) != DT_OK, "latitude 95 refused");
  double d = 0;
  dt_err e;
  CHECK(dt_frame_doppler(DT_FRAME_TOPOCENT, 10, 10, NULL, &d, &e) == DT_EINVAL, "TOPOCENT without time refused");
  CHECK(dt_frame_doppler(DT_FRAME_BARYCENT, 10, 10, NULL, &d, &e) == DT_OK && d == 1.0, "BARYCENT factor 1");
  /* the LSR factors: a source at the apex of the solar motion (20 km/s toward
   * it) is seen 20 km/s more receding in LSRK than in the barycentric frame */
  CHECK(dt_frame_doppler(DT_FRAME_LSRK, 270, 30, NULL, &d, &e) == DT_OK, "LSRK factor");
  return dt_test_done();
}
