/* Sky positions: parsing right ascension and declination, and bringing
 * them to ICRS with ERFA.
 *
 * Text is either a decimal number of degrees or three sexagesimal fields
 * (hours for right ascension, degrees for declination) separated by ':',
 * blanks or the letters h/d/m/s; the reference systems are those of FITS
 * WCS Paper II (Calabretta & Greisen 2002, A&A 395, 1077). */
#include "doubletty/sky.h"

#include <ctype.h>
#include <math.h>
#include <stdio.h>
#include <string.h>

#include <erfa.h>
#include <erfam.h>

#include "doubletty/num.h"

/* Split text into up to three non-negative numbers separated by ':',
 * blanks or the letters h, d, m, s; *sign -1 for a leading '-'; *sexa 1
 * when the text is sexagesimal (more than one field, or a unit letter).
 * Returns the number of fields, or -1 when the text is not of this form. */
static int split_sexa(const char *text, double f[3], int *sign, int *sexa) {
  const char *p = text;
  while (isspace((unsigned char)*p)) p++;
  *sign = 1;
  *sexa = 0;
  if (*p == '+' || *p == '-') {
    if (*p == '-') *sign = -1;
    p++;
  }
  int n = 0;
  while (*p) {
    if (n == 3 || !(isdigit((unsigned char)*p) || *p == '.')) return -1;
    char *end = NULL;
    double x = dt_num_strtod(p, &end);
    if (end == p || !isfinite(x) || x < 0) return -1;
    f[n++] = x;
    p = end;
    int colon = 0, letter = 0;
    while (*p == ':' || isspace((unsigned char)*p) || (*p && strchr("hdmsHDMS", *p))) {
      if (*p == ':') colon++;
      else if (!isspace((unsigned char)*p)) letter = 1;
      p++;
    }
    if (letter) *sexa = 1;
    if (colon > 1 || (colon && !*p)) return -1;
    if (*p && p == end) return -1; /* no separator between numbers */
  }
  if (n == 0) return -1;
  if (n > 1) *sexa = 1;
  return n;
}

static int sexa_value(const char *text, double scale, double *out) {
  double f[3] = {0, 0, 0};
  int sign, sexa;
  int n = split_sexa(text, f, &sign, &sexa);
  if (n < 0) return DT_EFORMAT;
  if (!sexa) {
    *out = sign * f[0];
    return 1; /* plain degrees */
  }
  for (int k = 0; k < n - 1; k++)
    if (f[k] != floor(f[k])) return DT_EFORMAT; /* only the last field may have a fraction */
  if ((n > 1 && f[1] >= 60) || (n > 2 && f[2] >= 60)) return DT_EFORMAT;
  *out = sign * scale * (f[0] + f[1] / 60.0 + f[2] / 3600.0);
  return 2; /* sexagesimal */
}

int dt_sky_parse_ra(const char *text, double *deg) {
  double v = 0;
  if (!text) return DT_EFORMAT;
  const char *p = text;
  while (isspace((unsigned char)*p)) p++;
  if (*p == '-' || *p == '+') return DT_EFORMAT;
  int k = sexa_value(text, 15.0, &v);
  if (k < 0 || k == DT_EFORMAT) return DT_EFORMAT;
  if (!(v >= 0 && v < 360)) return DT_EFORMAT;
  *deg = v;
  return DT_OK;
}

int dt_sky_parse_dec(const char *text, double *deg) {
  double v = 0;
  if (!text) return DT_EFORMAT;
  int k = sexa_value(text, 1.0, &v);
  if (k < 0 || k == DT_EFORMAT) return DT_EFORMAT;
  if (!(v >= -90 && v <= 90)) return DT_EFORMAT;
  *deg = v;
  return DT_OK;
}

int dt_sky_parse_radesys(const char *text, dt_radesys *sys) {
  char b[24];
  size_t n = 0;
  for (const char *p = text ? text : ""; *p && n + 1 < sizeof b; p++)
    if (!isspace((unsigned char)*p)) b[n++] = (char)toupper((unsigned char)*p);
  b[n] = '\0';
  if (!strcmp(b, "ICRS")) *sys = DT_RADESYS_ICRS;
  else if (!strcmp(b, "FK5")) *sys = DT_RADESYS_FK5;
  else if (!strcmp(b, "FK4")) *sys = DT_RADESYS_FK4;
  else if (!strcmp(b, "FK4-NO-E")) *sys = DT_RADESYS_FK4_NO_E;
  else return DT_EFORMAT;
  return DT_OK;
}

void dt_sky_unit(double ra, double dec, double n[3]) {
  eraS2c(ra * ERFA_DD2R, dec * ERFA_DD2R, n);
}

int dt_sky_to_icrs(dt_radesys sys, double equinox, double epoch, double ra, double dec,
                   double *ra_icrs, double *dec_icrs) {
  double r = ra * ERFA_DD2R, d = dec * ERFA_DD2R, r5 = r, d5 = d;
  switch (sys) {
  case DT_RADESYS_ICRS:
    *ra_icrs = ra;
    *dec_icrs = dec;
    return DT_OK;
  case DT_RADESYS_FK4_NO_E:
    return DT_EINVAL;
  case DT_RADESYS_FK4:
    if (equinox != 0 && fabs(equinox - 1950.0) > 1e-9) return DT_EINVAL;
    /* FK4 B1950 -> FK5 J2000 at the epoch of observation (no proper motion) */
    eraFk45z(r, d, epoch > 0 ? epoch : 1950.0, &r5, &d5);
    break;
  case DT_RADESYS_FK5:
    if (equinox != 0 && fabs(equinox - 2000.0) > 1e-9) {
      /* mean equator and equinox of date -> J2000: the transpose of the IAU
       * 1976 precession matrix from J2000 to the equinox */
      double djm0, djm, p[3][3], v[3], w[3];
      eraEpj2jd(equinox, &djm0, &djm);
      eraPmat76(djm0, djm, p);
      eraS2c(r, d, v);
      eraTrxp(p, v, w);
      eraC2s(w, &r5, &d5);
    }
    break;
  }
  /* FK5 J2000 -> ICRS: the Hipparcos frame rotation, no spin at J2000 */
  double rh, dh;
  eraFk5hz(r5, d5, ERFA_DJ00, 0.0, &rh, &dh);
  *ra_icrs = eraAnp(rh) / ERFA_DD2R;
  *dec_icrs = dh / ERFA_DD2R;
  return DT_OK;
}
