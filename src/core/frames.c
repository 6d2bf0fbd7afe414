/* Velocity frames: the Doppler factor of each Paper III frame relative to
 * the solar-system barycentre, computed with ERFA (the IAU SOFA
 * algorithms), and the small parsers for what the conversions need (frame
 * names, VELREF, dates, sites).  The conventions are stated in frames.h. */
#include "doubletty/frames.h"

#include <ctype.h>
#include <math.h>
#include <stdio.h>
#include <string.h>

#include <erfa.h>
#include <erfam.h>

#include "doubletty/num.h"
#include "doubletty/sky.h"

/* Gravitational parameters [m^3 s^-2]: IAU 2015 Resolution B3 (nominal
 * solar and terrestrial mass parameters). */
#define GM_SUN 1.3271244e20
#define GM_EARTH 3.986004e14
#define C_MS ERFA_CMPS

static const char *const names[] = {"",         "TOPOCENT", "GEOCENTR", "BARYCENT", "HELIOCEN",
                                    "LSRK",     "LSRD",     "GALACTOC", "LOCALGRP"};

const char *dt_frame_name(dt_frame f) {
  return (f >= DT_FRAME_UNSET && f <= DT_FRAME_LOCALGRP) ? names[f] : "";
}

int dt_frame_parse(const char *text, dt_frame *f) {
  char b[16];
  size_t n = 0;
  const char *p = text ? text : "";
  while (isspace((unsigned char)*p)) p++;
  for (; *p && !isspace((unsigned char)*p); p++) {
    if (n + 1 >= sizeof b) return DT_EFORMAT;
    b[n++] = (char)toupper((unsigned char)*p);
  }
  while (isspace((unsigned char)*p)) p++;
  if (*p) return DT_EFORMAT;
  b[n] = '\0';
  for (int k = DT_FRAME_TOPOCENT; k <= DT_FRAME_LOCALGRP; k++)
    if (!strcmp(b, names[k])) {
      *f = (dt_frame)k;
      return DT_OK;
    }
  static const struct { const char *alias; dt_frame f; } al[] = {
      {"LSR", DT_FRAME_LSRK},      {"HELIO", DT_FRAME_HELIOCEN}, {"BARY", DT_FRAME_BARYCENT},
      {"TOPO", DT_FRAME_TOPOCENT}, {"GEO", DT_FRAME_GEOCENTR}};
  for (size_t k = 0; k < sizeof al / sizeof al[0]; k++)
    if (!strcmp(b, al[k].alias)) {
      *f = al[k].f;
      return DT_OK;
    }
  return DT_EFORMAT;
}

int dt_frame_from_velref(long velref, dt_frame *f) {
  /* AIPS memo 27 (Greisen): 1 LSR, 2 heliocentric, 3 observer; +256 radio */
  switch (velref % 256) {
  case 1: *f = DT_FRAME_LSRK; return DT_OK;
  case 2: *f = DT_FRAME_HELIOCEN; return DT_OK;
  case 3: *f = DT_FRAME_TOPOCENT; return DT_OK;
  default: return DT_EFORMAT;
  }
}

int dt_frame_needs(dt_frame f) {
  switch (f) {
  case DT_FRAME_TOPOCENT: return 1 | 2 | 4;
  case DT_FRAME_GEOCENTR:
  case DT_FRAME_HELIOCEN: return 1 | 4;
  case DT_FRAME_BARYCENT: return 0;
  default: return 4;
  }
}

/* The Sun's motion relative to the LSR frame f, as an ICRS vector [km/s]. */
static void solar_motion(dt_frame f, double v[3]) {
  if (f == DT_FRAME_LSRK) {
    /* 20 km/s toward RA 18h, Dec +30 at the mean equinox of B1900 */
    double d0, d1, p[3][3], u[3], w[3], r, dd, rh, dh;
    eraS2c(270.0 * ERFA_DD2R, 30.0 * ERFA_DD2R, u);
    eraEpb2jd(1900.0, &d0, &d1);
    eraPmat76(d0, d1, p); /* J2000 -> mean equinox of B1900 */
    eraTrxp(p, u, w);     /* B1900 -> J2000 */
    eraC2s(w, &r, &dd);
    eraFk5hz(r, dd, ERFA_DJ00, 0.0, &rh, &dh);
    eraS2c(rh, dh, u);
    eraSxp(20.0, u, v);
  } else {
    /* (U, V, W) toward (l, b) = (0, 0), (90, 0), b = 90 */
    static const double uvw[3] = {11.1, 12.24, 7.25};
    double l, b, ra, dec, u[3];
    double speed = eraPm((double *)uvw);
    eraC2s((double *)uvw, &l, &b);
    eraG2icrs(l, b, &ra, &dec);
    eraS2c(ra, dec, u);
    eraSxp(speed, u, v);
  }
}

/* UTC MJD -> TT as a two-part Julian date. */
static int tt_of(double mjd, double *tt1, double *tt2) {
  double tai1, tai2;
  if (eraUtctai(ERFA_DJM0, mjd, &tai1, &tai2) < 0) return -1;
  eraTaitt(tai1, tai2, tt1, tt2);
  return 0;
}

int dt_frame_doppler(dt_frame f, double ra, double dec, const dt_frame_obs *obs, double *d,
                     dt_err *e) {
  double n[3];
  dt_sky_unit(ra, dec, n);
  int need = dt_frame_needs(f);
  if (f == DT_FRAME_UNSET || f == DT_FRAME_GALACTOC || f == DT_FRAME_LOCALGRP)
    return dt_err_set(e, DT_EINVAL, NULL, "the frame %s has no agreed definition: doubletty does "
                      "not convert it", f == DT_FRAME_UNSET ? "(none)" : dt_frame_name(f));
  if ((need & 1) && !(obs && obs->has_time))
    return dt_err_set(e, DT_EINVAL, NULL, "%s needs the time of the observation (DATE-OBS or "
                      "MJD-OBS)", dt_frame_name(f));
  if ((need & 2) && !(obs && obs->has_site))
    return dt_err_set(e, DT_EINVAL, NULL, "%s needs the site of the observation (OBSGEO-X/Y/Z, "
                      "OBSGEO-L/B/H or --site LON,LAT,HEIGHT)", dt_frame_name(f));
  switch (f) {
  case DT_FRAME_BARYCENT:
    *d = 1.0;
    return DT_OK;
  case DT_FRAME_LSRK:
  case DT_FRAME_LSRD: {
    double v[3];
    solar_motion(f, v);
    double beta = eraPdp(v, n) / DT_C_KMS, b2 = eraPdp(v, v) / (DT_C_KMS * DT_C_KMS);
    *d = (1.0 - beta) / sqrt(1.0 - b2);
    return DT_OK;
  }
  case DT_FRAME_TOPOCENT: {
    eraASTROM a;
    double eo;
    int j = eraApco13(ERFA_DJM0, obs->mjd, 0.0, obs->lon * ERFA_DD2R, obs->lat * ERFA_DD2R,
                      obs->height, 0.0, 0.0, 0.0, 0.0, 0.0, 0.0, &a, &eo);
    if (j < 0) return dt_err_set(e, DT_EINVAL, NULL, "the date MJD %.5f is out of range", obs->mjd);
    double xyz[3];
    if (eraGd2gc(1, obs->lon * ERFA_DD2R, obs->lat * ERFA_DD2R, obs->height, xyz))
      return dt_err_set(e, DT_EINVAL, NULL, "the site (latitude %g, height %g m) is not valid",
                        obs->lat, obs->height);
    /* a.v: barycentric velocity of the observer [c]; a.bm1 = sqrt(1 - v^2);
     * a.em: distance Sun - observer [au] */
    double phi = GM_SUN / (a.em * ERFA_DAU) + GM_EARTH / eraPm(xyz);
    *d = (1.0 + eraPdp(a.v, n)) / a.bm1 / (1.0 - phi / (C_MS * C_MS));
    return DT_OK;
  }
  case DT_FRAME_GEOCENTR:
  case DT_FRAME_HELIOCEN: {
    double tt1, tt2, pvh[2][3], pvb[2][3], v[3];
    if (tt_of(obs->mjd, &tt1, &tt2) || eraEpv00(tt1, tt2, pvh, pvb) < 0)
      return dt_err_set(e, DT_EINVAL, NULL, "the date MJD %.5f is out of range", obs->mjd);
    if (f == DT_FRAME_GEOCENTR) {
      double s = ERFA_DAU / ERFA_DAYSEC / C_MS; /* au/day -> c */
      eraSxp(s, pvb[1], v);
      double b2 = eraPdp(v, v);
      double phi = GM_SUN / (eraPm(pvh[0]) * ERFA_DAU);
      *d = (1.0 + eraPdp(v, n)) / sqrt(1.0 - b2) / (1.0 - phi / (C_MS * C_MS));
    } else {
      /* the Sun's barycentric velocity = Earth's barycentric - heliocentric */
      eraPmp(pvb[1], pvh[1], v);
      *d = 1.0 + eraPdp(v, n) * ERFA_DAU / ERFA_DAYSEC / C_MS;
    }
    return DT_OK;
  }
  default:
    return dt_err_set(e, DT_EINVAL, NULL, "unknown frame");
  }
}

int dt_frame_factor(dt_frame from, dt_frame to, double ra, double dec, const dt_frame_obs *obs,
                    double *k, dt_err *e) {
  if (from == to) {
    *k = 1.0;
    return DT_OK;
  }
  double d1, d2;
  int rc = dt_frame_doppler(from, ra, dec, obs, &d1, e);
  if (!rc) rc = dt_frame_doppler(to, ra, dec, obs, &d2, e);
  if (rc) return rc;
  *k = d1 / d2;
  return DT_OK;
}

int dt_frame_parse_site(const char *text, dt_frame_obs *obs) {
  double v[3];
  const char *p = text ? text : "";
  for (int i = 0; i < 3; i++) {
    char *end = NULL;
    v[i] = dt_num_strtod(p, &end);
    if (end == p || !isfinite(v[i])) return DT_EFORMAT;
    p = end;
    while (isspace((unsigned char)*p)) p++;
    if (i < 2) {
      if (*p != ',') return DT_EFORMAT;
      p++;
    }
  }
  if (*p || v[1] < -90 || v[1] > 90 || v[0] < -360 || v[0] > 360 || v[2] < -1e4 || v[2] > 1e5)
    return DT_EFORMAT;
  obs->has_site = 1;
  obs->lon = v[0];
  obs->lat = v[1];
  obs->height = v[2];
  return DT_OK;
}

int dt_frame_parse_date(const char *text, double *mjd) {
  int y, mo, d, h = 0, mi = 0, n = 0;
  double s = 0;
  const char *p = text ? text : "";
  while (isspace((unsigned char)*p)) p++;
  if (sscanf(p, "%4d-%2d-%2d%n", &y, &mo, &d, &n) != 3) return DT_EFORMAT;
  p += n;
  if (*p == 'T') {
    int m = 0;
    if (sscanf(p + 1, "%2d:%2d%n", &h, &mi, &m) != 2) return DT_EFORMAT;
    p += 1 + m;
    if (*p == ':') {
      char *end = NULL;
      s = dt_num_strtod(p + 1, &end);
      if (end == p + 1 || !(s >= 0 && s < 61)) return DT_EFORMAT;
      p = end;
    }
  }
  while (isspace((unsigned char)*p)) p++;
  if (*p) return DT_EFORMAT;
  double d1, d2;
  if (eraDtf2d("UTC", y, mo, d, h, mi, s, &d1, &d2) != 0) return DT_EFORMAT;
  *mjd = (d1 - ERFA_DJM0) + d2;
  return DT_OK;
}

int dt_frame_site_from_xyz(double x, double y, double z, dt_frame_obs *obs) {
  double xyz[3] = {x, y, z}, lon, lat, h;
  if (eraGc2gd(1, xyz, &lon, &lat, &h) != 0) return DT_EFORMAT;
  if (h < -1e4 || h > 1e5) return DT_EFORMAT;
  obs->has_site = 1;
  obs->lon = lon / ERFA_DD2R;
  obs->lat = lat / ERFA_DD2R;
  obs->height = h;
  return DT_OK;
}
