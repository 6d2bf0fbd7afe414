/* Where a spectrum was observed and in which velocity frame its
 * wavelengths are: the FITS header keywords that say so, and the
 * conversion of the wavelengths to the frame the caller wants (sky.h,
 * frames.h).  The keywords are listed in spectrum.h. */
#include <ctype.h>
#include <math.h>
#include <stdio.h>
#include <string.h>

#include "doubletty/num.h"
#include "doubletty/sky.h"
#include "spectrum_fits_priv.h"

/* A keyword of the current HDU, else of the primary header: as text (buf
 * of FLEN_VALUE) and, when it is a number, as *x (*isnum = 1).  Returns 1
 * found, 0 absent.  cfitsio's "not a number" leaves *isnum 0. */
static int key_any(fctx *c, const char *key, char *buf, double *x, int *isnum) {
  int st = 0, here = 0;
  fits_get_hdu_num(c->f, &here);
  *isnum = 0;
  for (int pass = 0; pass < 2; pass++) {
    if (pass == 1) {
      if (here == 1) break;
      int type;
      fits_movabs_hdu(c->f, 1, &type, &st);
      if (st) {
        fits_clear_errmsg();
        st = 0;
        break;
      }
    }
    char card_val[FLEN_VALUE], com[FLEN_COMMENT];
    st = 0;
    fits_read_keyword(c->f, key, card_val, com, &st);
    if (st == 0 && card_val[0]) {
      /* strip quotes of a string value */
      if (card_val[0] == '\'') {
        st = 0;
        fits_read_key(c->f, TSTRING, key, buf, NULL, &st);
        if (st) buf[0] = '\0';
      } else {
        snprintf(buf, FLEN_VALUE, "%s", card_val);
        char *end = NULL;
        double v = dt_num_strtod(buf, &end);
        while (end && isspace((unsigned char)*end)) end++;
        /* FITS writes exponents with D as well as E */
        if (end && (*end == 'D' || *end == 'd')) {
          char tmp[FLEN_VALUE];
          snprintf(tmp, sizeof tmp, "%s", buf);
          tmp[end - buf] = 'E';
          v = dt_num_strtod(tmp, &end);
          end = tmp + (end - tmp);
        }
        if (end && *end == '\0' && isfinite(v)) *x = v, *isnum = 1;
      }
      fits_clear_errmsg();
      if (pass == 1) {
        int type;
        st = 0;
        fits_movabs_hdu(c->f, here, &type, &st);
      }
      return 1;
    }
    fits_clear_errmsg();
  }
  if (here != 1) {
    int type;
    st = 0;
    fits_movabs_hdu(c->f, here, &type, &st);
    fits_clear_errmsg();
  }
  return 0;
}

static int bad_key(dt_err *e, const char *where, const char *key, const char *val, const char *why) {
  return dt_err_set(e, DT_EFORMAT, where, "keyword %s = '%.30s': %s", key, val, why);
}

int dt_fits_frame_keys(fctx *c, dt_spectrum *s, const char *where, dt_err *e) {
  char v[FLEN_VALUE], w[FLEN_VALUE];
  double x = 0, y = 0;
  int isnum = 0, isnum2 = 0;
  /* --- position --- */
  static const char *const pairs[][2] = {{"RA", "DEC"},          {"OBJRA", "OBJDEC"},
                                         {"RA_OBJ", "DEC_OBJ"},  {"RA_TARG", "DEC_TARG"},
                                         {"PLUG_RA", "PLUG_DEC"}};
  for (size_t k = 0; k < sizeof pairs / sizeof pairs[0] && !s->has_pos; k++) {
    if (!key_any(c, pairs[k][0], v, &x, &isnum)) continue;
    if (!key_any(c, pairs[k][1], w, &y, &isnum2))
      return dt_err_set(e, DT_EFORMAT, where, "keyword %s without %s", pairs[k][0], pairs[k][1]);
    double ra = x, dec = y;
    if (!isnum && dt_sky_parse_ra(v, &ra))
      return bad_key(e, where, pairs[k][0], v, "not a right ascension (degrees or hh:mm:ss)");
    if (isnum && !(ra >= 0 && ra < 360))
      return bad_key(e, where, pairs[k][0], v, "degrees outside [0, 360)");
    if (!isnum2 && dt_sky_parse_dec(w, &dec))
      return bad_key(e, where, pairs[k][1], w, "not a declination (degrees or +dd:mm:ss)");
    if (isnum2 && !(dec >= -90 && dec <= 90))
      return bad_key(e, where, pairs[k][1], w, "degrees outside [-90, 90]");
    /* the RA/DEC frame: RADESYS and EQUINOX (FITS WCS Paper II, section 3.1) */
    double equinox = 0;
    int has_eq = key_any(c, "EQUINOX", w, &equinox, &isnum2);
    if (has_eq && !isnum2) return bad_key(e, where, "EQUINOX", w, "not a number");
    if (!has_eq) {
      has_eq = key_any(c, "EPOCH", w, &equinox, &isnum2) && isnum2;
      if (!has_eq) equinox = 0;
    }
    dt_radesys sys = DT_RADESYS_ICRS;
    if (key_any(c, "RADESYS", w, &y, &isnum2) || key_any(c, "RADECSYS", w, &y, &isnum2)) {
      if (dt_sky_parse_radesys(w, &sys))
        return bad_key(e, where, "RADESYS", w, "not ICRS, FK5 or FK4");
    } else if (has_eq) {
      sys = equinox < 1984.0 ? DT_RADESYS_FK4 : DT_RADESYS_FK5;
    }
    const char *sysname = sys == DT_RADESYS_FK4 ? "FK4" : sys == DT_RADESYS_FK5 ? "FK5" : "ICRS";
    if (sys == DT_RADESYS_FK4_NO_E)
      return dt_err_set(e, DT_EINVAL, where, "RADESYS FK4-NO-E: doubletty converts ICRS, FK5 and "
                        "FK4 (B1950)");
    if (dt_sky_to_icrs(sys, equinox, 0, ra, dec, &s->ra, &s->dec))
      return dt_err_set(e, DT_EINVAL, where, "%s with EQUINOX %g: doubletty converts FK4 at "
                        "B1950 only", sysname, equinox);
    s->has_pos = 1;
    if (sys == DT_RADESYS_ICRS)
      snprintf(s->pos_from, sizeof s->pos_from, "keywords %s/%s", pairs[k][0], pairs[k][1]);
    else
      snprintf(s->pos_from, sizeof s->pos_from, "keywords %s/%s (%s %c%g)", pairs[k][0],
               pairs[k][1], sysname, sys == DT_RADESYS_FK4 ? 'B' : 'J',
               equinox > 0 ? equinox : (sys == DT_RADESYS_FK4 ? 1950.0 : 2000.0));
  }
  /* --- frame --- */
  if (key_any(c, "SPECSYS", v, &x, &isnum)) {
    if (dt_frame_parse(v, &s->frame_in) || s->frame_in == DT_FRAME_UNSET) {
      char u[FLEN_VALUE];
      snprintf(u, sizeof u, "%s", v);
      for (char *p = u; *p; p++) *p = (char)toupper((unsigned char)*p);
      if (strstr(u, "SOURCE") || strstr(u, "CMBDIPOL")) {
        /* a Paper III frame doubletty does not convert: only a declared
         * frame (frame=, --in-frame) lets the spectrum be read */
        s->frame_in = DT_FRAME_UNSET;
        snprintf(s->frame_from, sizeof s->frame_from, "SPECSYS '%.20s'", u);
      } else {
        return bad_key(e, where, "SPECSYS", v, "not a frame of FITS WCS Paper III (TOPOCENT, "
                       "GEOCENTR, BARYCENT, HELIOCEN, LSRK, LSRD, GALACTOC, LOCALGRP)");
      }
    } else {
      snprintf(s->frame_from, sizeof s->frame_from, "SPECSYS");
    }
  } else if (key_any(c, "VELREF", v, &x, &isnum)) {
    if (!isnum || dt_frame_from_velref((long)x, &s->frame_in))
      return bad_key(e, where, "VELREF", v, "not 1 (LSR), 2 (heliocentric) or 3 (observer)");
    snprintf(s->frame_from, sizeof s->frame_from, "VELREF");
  }
  /* --- time: the midpoint where given, else the start plus half the exposure --- */
  double mjd = 0;
  int has_t = 0, mid = 0;
  if (key_any(c, "MJD-AVG", v, &mjd, &isnum)) {
    if (!isnum) return bad_key(e, where, "MJD-AVG", v, "not a number");
    has_t = mid = 1;
  } else if (key_any(c, "DATE-AVG", v, &x, &isnum)) {
    if (dt_frame_parse_date(v, &mjd)) return bad_key(e, where, "DATE-AVG", v, "not a date YYYY-MM-DDThh:mm:ss");
    has_t = mid = 1;
  } else if (key_any(c, "MJD-OBS", v, &mjd, &isnum)) {
    if (!isnum) return bad_key(e, where, "MJD-OBS", v, "not a number");
    has_t = 1;
  } else if (key_any(c, "DATE-OBS", v, &x, &isnum)) {
    if (dt_frame_parse_date(v, &mjd)) return bad_key(e, where, "DATE-OBS", v, "not a date YYYY-MM-DDThh:mm:ss");
    has_t = 1;
  }
  if (has_t && !mid) {
    double t = 0;
    if ((key_any(c, "EXPTIME", v, &t, &isnum) && isnum) || (key_any(c, "EXPOSURE", v, &t, &isnum) && isnum)) {
      if (!(t >= 0 && t < 1e7)) return bad_key(e, where, "EXPTIME", v, "not an exposure time in seconds");
      mjd += 0.5 * t / 86400.0;
    }
  }
  if (has_t) {
    if (!(mjd > 0 && mjd < 200000)) return dt_err_set(e, DT_EFORMAT, where, "observation date MJD %g out of range", mjd);
    s->obs.has_time = 1;
    s->obs.mjd = mjd;
  }
  /* --- site --- */
  double gx, gy, gz;
  if (key_any(c, "OBSGEO-X", v, &gx, &isnum)) {
    int n1 = isnum;
    if (!key_any(c, "OBSGEO-Y", v, &gy, &isnum) || !isnum || !n1 || !key_any(c, "OBSGEO-Z", w, &gz, &isnum2) || !isnum2)
      return dt_err_set(e, DT_EFORMAT, where, "OBSGEO-X/Y/Z: all three must be numbers (metres)");
    if (dt_frame_site_from_xyz(gx, gy, gz, &s->obs))
      return dt_err_set(e, DT_EFORMAT, where, "OBSGEO-X/Y/Z = %g, %g, %g m is not a place on Earth", gx, gy, gz);
  } else if (key_any(c, "OBSGEO-L", v, &gx, &isnum)) {
    int n1 = isnum;
    if (!key_any(c, "OBSGEO-B", v, &gy, &isnum) || !isnum || !n1 || !key_any(c, "OBSGEO-H", w, &gz, &isnum2) || !isnum2)
      return dt_err_set(e, DT_EFORMAT, where, "OBSGEO-L/B/H: all three must be numbers (deg, deg, m)");
    if (gy < -90 || gy > 90 || gz < -1e4 || gz > 1e5)
      return dt_err_set(e, DT_EFORMAT, where, "OBSGEO-L/B/H = %g, %g, %g is not a place on Earth", gx, gy, gz);
    s->obs.has_site = 1;
    s->obs.lon = gx;
    s->obs.lat = gy;
    s->obs.height = gz;
  }
  return DT_OK;
}

int dt_spectrum_settle_frame(dt_spectrum *s, const dt_read_opts *o, dt_err *e) {
  if (o && o->has_pos) {
    s->has_pos = 1;
    s->ra = o->ra;
    s->dec = o->dec;
    snprintf(s->pos_from, sizeof s->pos_from, "list");
  }
  if (o && o->in_frame != DT_FRAME_UNSET) {
    s->frame_in = o->in_frame;
    snprintf(s->frame_from, sizeof s->frame_from, "list/option");
  }
  if (s->frame_in == DT_FRAME_UNSET && s->frame_from[0])
    return dt_err_set(e, DT_EINVAL, NULL, "%s: doubletty does not convert this frame; declare the "
                      "spectrum's frame with frame= in the list or --in-frame", s->frame_from);
  if (s->frame_in == DT_FRAME_UNSET) {
    s->frame_in = DT_FRAME_BARYCENT;
    snprintf(s->frame_from, sizeof s->frame_from, "assumed");
  }
  if (!s->obs.has_site && o && o->has_site) {
    s->obs.has_site = 1;
    s->obs.lon = o->site_lon;
    s->obs.lat = o->site_lat;
    s->obs.height = o->site_height;
  }
  dt_frame out = (o && o->out_frame != DT_FRAME_UNSET) ? o->out_frame : DT_FRAME_BARYCENT;
  s->frame = s->frame_in;
  s->frame_kms = 0;
  if (!strcmp(s->frame_from, "assumed"))
    snprintf(s->frame_note, sizeof s->frame_note, "no frame in the file (SPECSYS, VELREF): BARYCENT assumed");
  if (out == s->frame_in) {
    int need = dt_frame_needs(s->frame_in);
    if (((need & 1) && !s->obs.has_time) || ((need & 2) && !s->obs.has_site))
      snprintf(s->frame_note, sizeof s->frame_note,
               "%s spectrum used as it is: no %s to convert it to another frame",
               dt_frame_name(s->frame_in), !s->obs.has_time ? "time" : "site");
    return DT_OK;
  }
  const char *fin = dt_frame_name(s->frame_in), *fout = dt_frame_name(out);
  /* The Sun moves at most about 13 m/s around the barycentre: between these
   * two frames a spectrum that lacks what the exact conversion needs is
   * used as it is, and says so. */
  int helio_bary = (s->frame_in == DT_FRAME_HELIOCEN && out == DT_FRAME_BARYCENT) ||
                   (s->frame_in == DT_FRAME_BARYCENT && out == DT_FRAME_HELIOCEN);
  if (helio_bary && (!s->has_pos || !s->obs.has_time)) {
    snprintf(s->frame_note, sizeof s->frame_note,
             "%s taken as %s (no %s to convert; the two differ by less than 0.015 km/s)", fin, fout,
             !s->has_pos ? "position" : "time");
    s->frame = out;
    return DT_OK;
  }
  if (!s->has_pos)
    return dt_err_set(e, DT_EINVAL, NULL,
                      "%s (%s) to %s needs the sky position (RA/DEC keywords or ra=/dec= in the "
                      "list); or choose --frame %s",
                      fin, s->frame_from, fout, fin);
  double k = 1;
  dt_err fe;
  dt_err_clear(&fe);
  if (dt_frame_factor(s->frame_in, out, s->ra, s->dec, &s->obs, &k, &fe))
    return dt_err_set(e, DT_EINVAL, NULL, "cannot convert %s (%s) to %s: %s; or choose --frame %s",
                      fin, s->frame_from, fout, fe.what, fin);
  for (size_t i = 0; i < s->n; i++) s->wave[i] *= k;
  s->frame = out;
  s->frame_kms = DT_C_KMS * (k - 1.0);
  return DT_OK;
}
