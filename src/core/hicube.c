/* 21-cm cubes (hicube.h): the header through wcslib, the bytes through
 * cfitsio, and the sightline spectra, column densities and moments.
 *
 * The spectral axis is translated once to frequency (wcssptr to FREQ) at
 * the reference spatial pixel: spectral and celestial axes of radio cubes
 * are separable.  Velocities are then made per sightline, because the
 * frame conversion depends on the direction. */
#include "doubletty/hicube.h"

#include <ctype.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include <erfa.h>
#include <erfam.h>
#include <fitsio.h>
#include <gsl/gsl_sort.h>
#include <gsl/gsl_statistics_double.h>
#include <wcslib/wcs.h>
#include <wcslib/wcsfix.h>
#include <wcslib/wcshdr.h>

#include "doubletty/num.h"

struct dt_hicube {
  struct wcsprm *wcsv; /* from wcspih: nwcs of them, the first used */
  int nwcs;
  struct wcsprm *wcs;
  int naxis;
  long nax[4];
  size_t stride[4];
  int ilng, ilat, ispec;
  size_t nx, ny, nchan; /* lengths of the longitude, latitude and spectral axes */
  double *data;         /* the whole cube, NaN where blank */
  double *freq;         /* frequency of each channel [Hz] */
  double restfrq;       /* [Hz] */
  int jy;               /* 1: Jy/beam */
  double bmaj, bmin;    /* [arcsec] */
  int galactic;         /* celestial axes GLON/GLAT */
  dt_frame frame;
  dt_frame_obs obs;
  double world0[4];     /* world coordinates of the first pixel (a template) */
  char note[200];
};

const char *dt_hi_status_name(dt_hi_status s) {
  switch (s) {
  case DT_HI_OK: return "ok";
  case DT_HI_OUTSIDE: return "outside";
  case DT_HI_BLANKED: return "blanked";
  case DT_HI_NO_EMISSION: return "no-emission";
  case DT_HI_NO_RANGE: return "no-range";
  }
  return "";
}

void dt_hicube_close(dt_hicube *c) {
  if (!c) return;
  if (c->wcsv) wcsvfree(&c->nwcs, &c->wcsv);
  free(c->data);
  free(c->freq);
  free(c);
}

void dt_hicube_shape(const dt_hicube *c, size_t *nx, size_t *ny, size_t *nchan) {
  *nx = c->nx;
  *ny = c->ny;
  *nchan = c->nchan;
}
dt_frame dt_hicube_frame(const dt_hicube *c) { return c->frame; }
const char *dt_hicube_note(const dt_hicube *c) { return c->note; }

static int key_str(fitsfile *f, const char *key, char *v) {
  int st = 0;
  v[0] = '\0';
  fits_read_key(f, TSTRING, key, v, NULL, &st);
  fits_clear_errmsg();
  return st == 0;
}

static int key_dbl(fitsfile *f, const char *key, double *x) {
  int st = 0;
  fits_read_key(f, TDOUBLE, key, x, NULL, &st);
  fits_clear_errmsg();
  return st == 0 && isfinite(*x);
}

static void upper(char *s) {
  for (; *s; s++) *s = (char)toupper((unsigned char)*s);
}

/* Units and beam. */
static int read_unit(fitsfile *f, dt_hicube *c, dt_err *e) {
  char v[FLEN_VALUE], u[FLEN_VALUE];
  size_t n = 0;
  if (!key_str(f, "BUNIT", v))
    return dt_err_set(e, DT_EFORMAT, "BUNIT", "no BUNIT: the cube must be in K or Jy/beam");
  for (const char *p = v; *p; p++)
    if (!isspace((unsigned char)*p)) u[n++] = *p;
  u[n] = '\0';
  upper(u);
  if (!strcmp(u, "K")) return DT_OK;
  if (strcmp(u, "JY/BEAM") && strcmp(u, "JY/BM") && strcmp(u, "JY/BEAM/CHAN"))
    return dt_err_set(e, DT_EFORMAT, "BUNIT", "BUNIT '%s': doubletty reads cubes in K or Jy/beam", v);
  c->jy = 1;
  double a = 0, b = 0;
  if (!key_dbl(f, "BMAJ", &a) || !key_dbl(f, "BMIN", &b) || !(a > 0) || !(b > 0))
    return dt_err_set(e, DT_EFORMAT, "BMAJ", "a cube in Jy/beam needs the beam: BMAJ and BMIN "
                      "(degrees, > 0)");
  c->bmaj = 3600.0 * a;
  c->bmin = 3600.0 * b;
  return DT_OK;
}

/* Frame, time and site of the cube. */
static int read_frame(fitsfile *f, dt_hicube *c, dt_err *e) {
  char v[FLEN_VALUE];
  double x;
  if (key_str(f, "SPECSYS", v)) {
    if (dt_frame_parse(v, &c->frame) || c->frame == DT_FRAME_UNSET)
      return dt_err_set(e, DT_EFORMAT, "SPECSYS", "SPECSYS '%s' is not a frame of FITS WCS Paper III", v);
  } else if (key_dbl(f, "VELREF", &x)) {
    if (dt_frame_from_velref((long)x, &c->frame))
      return dt_err_set(e, DT_EFORMAT, "VELREF", "VELREF %g is not 1, 2 or 3", x);
  } else {
    c->frame = DT_FRAME_LSRK;
    snprintf(c->note, sizeof c->note, "the cube gives no frame (SPECSYS, VELREF): LSRK assumed");
  }
  if (key_dbl(f, "MJD-OBS", &x)) {
    c->obs.has_time = 1;
    c->obs.mjd = x;
  } else if (key_str(f, "DATE-OBS", v) && dt_frame_parse_date(v, &x) == DT_OK) {
    c->obs.has_time = 1;
    c->obs.mjd = x;
  }
  double gx, gy, gz;
  if (key_dbl(f, "OBSGEO-X", &gx) && key_dbl(f, "OBSGEO-Y", &gy) && key_dbl(f, "OBSGEO-Z", &gz))
    dt_frame_site_from_xyz(gx, gy, gz, &c->obs);
  return DT_OK;
}

/* The WCS: celestial and spectral axes, channel frequencies. */
static int read_wcs(fitsfile *f, dt_hicube *c, dt_err *e) {
  char *hdr = NULL;
  int nkeys = 0, st = 0, nreject = 0;
  fits_hdr2str(f, 1, NULL, 0, &hdr, &nkeys, &st);
  if (st) {
    fits_clear_errmsg();
    return dt_err_set(e, DT_EFORMAT, "header", "cannot read the header");
  }
  int rc = wcspih(hdr, nkeys, WCSHDR_all, 0, &nreject, &c->nwcs, &c->wcsv);
  fits_free_memory(hdr, &st);
  if (rc || c->nwcs < 1) return dt_err_set(e, DT_EFORMAT, "WCS", "no world coordinate system in the header");
  c->wcs = &c->wcsv[0];
  int stat[NWCSFIX];
  wcsfix(7, NULL, c->wcs, stat); /* non-standard spellings of common keywords */
  if (c->wcs->restfrq == 0 && c->wcs->restwav == 0) c->wcs->restfrq = DT_HI_RESTFRQ_HZ;
  if ((rc = wcsset(c->wcs)))
    return dt_err_set(e, DT_EFORMAT, "WCS", "the world coordinate keywords are not valid (wcslib: %s)",
                      wcs_errmsg[rc]);
  c->naxis = c->wcs->naxis;
  c->ilng = c->wcs->lng;
  c->ilat = c->wcs->lat;
  c->ispec = c->wcs->spec;
  if (c->naxis < 3 || c->naxis > 4)
    return dt_err_set(e, DT_EFORMAT, "NAXIS", "%d axes: a 21-cm cube has 3 (or 4 with one of length 1)",
                      c->naxis);
  if (c->ilng < 0 || c->ilat < 0)
    return dt_err_set(e, DT_EFORMAT, "CTYPE", "no celestial axes (CTYPEn RA---xxx and DEC--xxx, or "
                      "GLON-xxx and GLAT-xxx)");
  if (c->ispec < 0)
    return dt_err_set(e, DT_EFORMAT, "CTYPE", "no spectral axis (CTYPEn FREQ, VRAD, VOPT, FELO, VELO, "
                      "WAVE ...)");
  if (!strncmp(c->wcs->lngtyp, "GLON", 4)) c->galactic = 1;
  else if (strncmp(c->wcs->lngtyp, "RA", 2))
    return dt_err_set(e, DT_EFORMAT, "CTYPE", "celestial axes %s/%s: doubletty reads RA/DEC or GLON/GLAT",
                      c->wcs->lngtyp, c->wcs->lattyp);
  if (!c->galactic && !strncmp(c->wcs->radesys, "FK4", 3))
    return dt_err_set(e, DT_EFORMAT, "RADESYS", "an FK4 cube: doubletty reads ICRS/FK5 J2000 or Galactic cubes");
  return DT_OK;
}

/* Frequency of every channel, through a copy of the WCS translated to FREQ. */
static int channel_freqs(dt_hicube *c, dt_err *e) {
  struct wcsprm w;
  w.flag = -1;
  if (wcssub(1, c->wcs, NULL, NULL, &w))
    return dt_err_set(e, DT_ENOMEM, NULL, "out of memory");
  char ctype[9] = "FREQ-???";
  int i = c->ispec, rc = wcssptr(&w, &i, ctype);
  if (!rc) rc = wcsset(&w);
  if (rc) {
    wcsfree(&w);
    return dt_err_set(e, DT_EFORMAT, "CTYPE", "the spectral axis '%.8s' cannot be translated to "
                      "frequency (wcslib: %s); RESTFRQ may be missing",
                      c->wcs->ctype[c->ispec], wcs_errmsg[rc]);
  }
  c->restfrq = w.restfrq > 0 ? w.restfrq : DT_HI_RESTFRQ_HZ;
  c->freq = malloc(c->nchan * sizeof *c->freq);
  if (!c->freq) {
    wcsfree(&w);
    return dt_err_set(e, DT_ENOMEM, NULL, "out of memory");
  }
  double pix[4], img[4], world[4], phi, theta;
  int stat;
  for (size_t k = 0; k < c->nchan; k++) {
    for (int a = 0; a < c->naxis; a++) pix[a] = w.crpix[a];
    pix[c->ispec] = (double)k + 1.0;
    rc = wcsp2s(&w, 1, c->naxis, pix, img, &phi, &theta, world, &stat);
    if (rc || !(world[c->ispec] > 0)) {
      wcsfree(&w);
      return dt_err_set(e, DT_EFORMAT, "CTYPE", "channel %zu has no valid frequency", k + 1);
    }
    c->freq[k] = world[c->ispec];
  }
  /* a template of world coordinates (the first pixel) for wcss2p */
  for (int a = 0; a < c->naxis; a++) pix[a] = 1.0;
  wcsp2s(c->wcs, 1, c->naxis, pix, img, &phi, &theta, c->world0, &stat);
  wcsfree(&w);
  return DT_OK;
}

int dt_hicube_open(const char *path, dt_hicube **out, dt_err *e) {
  *out = NULL;
  dt_err_clear(e);
  fitsfile *f = NULL;
  int st = 0;
  fits_open_diskfile(&f, path, READONLY, &st);
  if (st) {
    fits_clear_errmsg();
    return dt_err_set(e, DT_EIO, NULL, "cannot open as a FITS file");
  }
  dt_hicube *c = calloc(1, sizeof *c);
  if (!c) {
    fits_close_file(f, &st);
    return dt_err_set(e, DT_ENOMEM, NULL, "out of memory");
  }
  int rc = read_wcs(f, c, e);
  if (!rc) {
    int naxis = 0;
    long long nax[4] = {1, 1, 1, 1};
    fits_get_img_dim(f, &naxis, &st);
    if (!st && naxis == c->naxis) fits_get_img_sizell(f, naxis, nax, &st);
    if (st || naxis != c->naxis) {
      fits_clear_errmsg();
      rc = dt_err_set(e, DT_EFORMAT, "NAXIS", "the image axes do not match the WCS keywords");
    }
    size_t total = 1;
    for (int a = 0; !rc && a < c->naxis; a++) {
      c->nax[a] = (long)nax[a];
      c->stride[a] = total;
      if (nax[a] < 1) rc = dt_err_set(e, DT_EFORMAT, "NAXIS", "axis %d is empty", a + 1);
      else if (a != c->ilng && a != c->ilat && a != c->ispec && nax[a] != 1)
        rc = dt_err_set(e, DT_EFORMAT, "NAXIS", "axis %d (%s) has %lld pixels: only one is allowed "
                        "besides the celestial and spectral axes", a + 1, c->wcs->ctype[a], nax[a]);
      total *= (size_t)nax[a];
    }
    if (!rc && total > 400000000u)
      rc = dt_err_set(e, DT_EINVAL, "NAXIS", "%zu pixels: too large a cube", total);
    if (!rc) {
      c->nx = (size_t)c->nax[c->ilng];
      c->ny = (size_t)c->nax[c->ilat];
      c->nchan = (size_t)c->nax[c->ispec];
      if (c->nchan < 3) rc = dt_err_set(e, DT_EFORMAT, "NAXIS", "%zu channels: too few for a spectrum", c->nchan);
    }
    if (!rc) rc = read_unit(f, c, e);
    if (!rc) rc = read_frame(f, c, e);
    if (!rc) rc = channel_freqs(c, e);
    if (!rc) {
      c->data = malloc(total * sizeof *c->data);
      if (!c->data) rc = dt_err_set(e, DT_ENOMEM, NULL, "out of memory");
    }
    if (!rc) {
      double nan = NAN;
      int anynul = 0;
      fits_read_img(f, TDOUBLE, 1, (long long)total, &nan, c->data, &anynul, &st);
      if (st) {
        fits_clear_errmsg();
        rc = dt_err_set(e, DT_EFORMAT, "data", "truncated or damaged data");
      }
    }
  }
  st = 0;
  fits_close_file(f, &st);
  if (rc) {
    dt_hicube_close(c);
    return rc;
  }
  *out = c;
  return DT_OK;
}

/* ---- positions ---- */

static double sep_deg(double ra1, double de1, double ra2, double de2) {
  return eraSeps(ra1 * ERFA_DD2R, de1 * ERFA_DD2R, ra2 * ERFA_DD2R, de2 * ERFA_DD2R) / ERFA_DD2R;
}

/* ICRS -> pixel (0-based along the longitude and latitude axes). */
static int world_to_pixel(const dt_hicube *c, double ra, double dec, double *x, double *y) {
  double lon = ra, lat = dec;
  if (c->galactic) {
    double l, b;
    eraIcrs2g(ra * ERFA_DD2R, dec * ERFA_DD2R, &l, &b);
    lon = l / ERFA_DD2R;
    lat = b / ERFA_DD2R;
  }
  double world[4], img[4], pix[4], phi, theta;
  int stat = 0;
  memcpy(world, c->world0, sizeof world);
  world[c->ilng] = lon;
  world[c->ilat] = lat;
  if (wcss2p(c->wcs, 1, c->naxis, world, &phi, &theta, img, pix, &stat) || stat) return -1;
  *x = pix[c->ilng] - 1.0;
  *y = pix[c->ilat] - 1.0;
  return isfinite(*x) && isfinite(*y) ? 0 : -1;
}

int dt_hicube_pixel_world(const dt_hicube *c, double i, double j, double *ra, double *dec) {
  double pix[4], img[4], world[4], phi, theta;
  int stat = 0;
  for (int a = 0; a < c->naxis; a++) pix[a] = 1.0;
  pix[c->ilng] = i + 1.0;
  pix[c->ilat] = j + 1.0;
  if (wcsp2s(c->wcs, 1, c->naxis, pix, img, &phi, &theta, world, &stat) || stat) return -1;
  double lon = world[c->ilng], lat = world[c->ilat];
  if (c->galactic) {
    double r, d;
    eraG2icrs(lon * ERFA_DD2R, lat * ERFA_DD2R, &r, &d);
    lon = r / ERFA_DD2R;
    lat = d / ERFA_DD2R;
  }
  *ra = lon;
  *dec = lat;
  return 0;
}

static double at(const dt_hicube *c, size_t i, size_t j, size_t k) {
  return c->data[i * c->stride[c->ilng] + j * c->stride[c->ilat] + k * c->stride[c->ispec]];
}

/* T_B [K] of a value of the cube in channel k. */
static double to_kelvin(const dt_hicube *c, double v, size_t k) {
  if (!c->jy) return v;
  double nu = c->freq[k] * 1e-9;
  return 1.222e6 * v / (nu * nu * c->bmaj * c->bmin);
}

/* ---- one spectrum ---- */

static int cmp_dbl(const void *a, const void *b) {
  double x = *(const double *)a, y = *(const double *)b;
  return (x > y) - (x < y);
}

/* Noise from channel-to-channel differences: 1.4826 median|dT| / sqrt(2). */
static double diff_noise(const double *t, size_t n, double *buf) {
  size_t m = 0;
  for (size_t i = 0; i + 1 < n; i++)
    if (isfinite(t[i]) && isfinite(t[i + 1])) buf[m++] = fabs(t[i + 1] - t[i]);
  if (m == 0) return 0;
  qsort(buf, m, sizeof *buf, cmp_dbl);
  double med = m % 2 ? buf[m / 2] : 0.5 * (buf[m / 2 - 1] + buf[m / 2]);
  return 1.4826 * med / sqrt(2.0);
}

/* Measure a spectrum (velocities increasing) into s. */
static void measure(const double *vel, const double *tb, size_t n, const dt_hi_opts *o,
                    dt_hi_sample *s, double *buf) {
  s->logN = s->logN_err = s->W = s->W_err = s->v = s->sigma = s->tpeak = s->rms = NAN;
  size_t lo = 0, hi = 0; /* [lo, hi) */
  double noise0 = diff_noise(tb, n, buf);
  if (o->has_window) {
    lo = n;
    for (size_t k = 0; k < n; k++)
      if (vel[k] >= o->vlo && vel[k] <= o->vhi) {
        if (lo == n) lo = k;
        hi = k + 1;
      }
    if (lo == n || hi - lo < 2) {
      s->status = DT_HI_NO_RANGE;
      return;
    }
  } else {
    /* on the spectrum smoothed over three channels (a single noisy channel
     * is not emission): the brightest channel, and the run around it above
     * three times the smoothed noise, at least three channels long */
    double *sm = buf + n;
    for (size_t k = 0; k < n; k++) {
      double acc = 0;
      int cnt = 0, blank = 0;
      for (size_t q = k > 0 ? k - 1 : 0; q <= k + 1 && q < n; q++) {
        if (!isfinite(tb[q])) blank = 1;
        acc += tb[q];
        cnt++;
      }
      sm[k] = blank ? NAN : acc / cnt;
    }
    size_t kp = n;
    for (size_t k = 0; k < n; k++)
      if (isfinite(sm[k]) && (kp == n || sm[k] > sm[kp])) kp = k;
    if (kp == n) {
      s->status = DT_HI_BLANKED;
      return;
    }
    double thr = 3.0 * noise0 / sqrt(3.0);
    size_t a = kp, b = kp;
    while (a > 0 && isfinite(sm[a - 1]) && sm[a - 1] > thr) a--;
    while (b + 1 < n && isfinite(sm[b + 1]) && sm[b + 1] > thr) b++;
    if (!(sm[kp] > thr) || b - a + 1 < 3) {
      s->rms = noise0;
      s->status = DT_HI_NO_EMISSION;
      return;
    }
    size_t half = (b - a + 1 + 1) / 2;
    lo = a > half ? a - half : 0;
    hi = b + 1 + half < n ? b + 1 + half : n;
  }
  s->vlo = vel[lo];
  s->vhi = vel[hi - 1];
  for (size_t k = lo; k < hi; k++)
    if (!isfinite(tb[k])) {
      s->status = DT_HI_BLANKED;
      return;
    }
  /* rms of the emission-free channels (outside the range), about zero */
  double ss = 0;
  size_t m = 0;
  for (size_t k = 0; k < n; k++)
    if ((k < lo || k >= hi) && isfinite(tb[k])) ss += tb[k] * tb[k], m++;
  s->rms = m >= 5 ? sqrt(ss / (double)m) : noise0;
  double W = 0, W1 = 0, dv2 = 0, tp = -INFINITY;
  for (size_t k = lo; k < hi; k++) {
    /* channel width: half the distance between its neighbours */
    double dv = 0.5 * (vel[k + 1 < n ? k + 1 : k] - vel[k > 0 ? k - 1 : k]);
    if (k == 0 || k + 1 == n) dv *= 2.0;
    W += tb[k] * dv;
    W1 += tb[k] * vel[k] * dv;
    dv2 += dv * dv;
    if (tb[k] > tp) tp = tb[k];
  }
  s->tpeak = tp;
  s->W = W;
  s->W_err = s->rms * sqrt(dv2);
  if (!(W > 0)) {
    s->status = DT_HI_NO_EMISSION;
    return;
  }
  double vm = W1 / W, W2 = 0;
  for (size_t k = lo; k < hi; k++) {
    double dv = 0.5 * (vel[k + 1 < n ? k + 1 : k] - vel[k > 0 ? k - 1 : k]);
    if (k == 0 || k + 1 == n) dv *= 2.0;
    W2 += tb[k] * (vel[k] - vm) * (vel[k] - vm) * dv;
  }
  s->v = vm;
  s->sigma = W2 > 0 ? sqrt(W2 / W) : 0;
  s->logN = log10(DT_HI_NHI_PER_KKMS * W);
  s->logN_err = s->W_err / (W * M_LN10);
  s->status = DT_HI_OK;
}

/* Channel velocities relative to vsys in the output frame, at (ra, dec). */
static int velocities(const dt_hicube *c, double ra, double dec, const dt_hi_opts *o, double *vel,
                      dt_err *e) {
  dt_frame out = o->frame != DT_FRAME_UNSET ? o->frame : DT_FRAME_BARYCENT;
  double k = 1;
  int helio_bary = (c->frame == DT_FRAME_HELIOCEN && out == DT_FRAME_BARYCENT) ||
                   (c->frame == DT_FRAME_BARYCENT && out == DT_FRAME_HELIOCEN);
  if (!(helio_bary && !c->obs.has_time)) {
    dt_err fe;
    if (dt_frame_factor(c->frame, out, ra, dec, &c->obs, &k, &fe))
      return dt_err_set(e, DT_EINVAL, NULL, "cannot convert the cube's %s to %s: %s",
                        dt_frame_name(c->frame), dt_frame_name(out), fe.what);
  }
  double zs = 1.0 + o->vsys / DT_C_KMS;
  for (size_t j = 0; j < c->nchan; j++) {
    double onez = k * c->restfrq / c->freq[j];
    vel[j] = DT_C_KMS * (onez / zs - 1.0);
  }
  return DT_OK;
}

void dt_hi_sample_free(dt_hi_sample *s) {
  if (!s) return;
  free(s->vel);
  free(s->tb);
  s->vel = s->tb = NULL;
  s->nchan = 0;
}

/* Reverse both arrays when the velocities decrease. */
static void increasing(double *vel, double *tb, size_t n) {
  if (n < 2 || vel[1] > vel[0]) return;
  for (size_t i = 0, j = n - 1; i < j; i++, j--) {
    double t = vel[i];
    vel[i] = vel[j];
    vel[j] = t;
    t = tb[i];
    tb[i] = tb[j];
    tb[j] = t;
  }
}

int dt_hicube_sample(const dt_hicube *c, double ra, double dec, const dt_hi_opts *o,
                     dt_hi_sample *s, dt_err *e) {
  memset(s, 0, sizeof *s);
  s->logN = s->logN_err = s->v = s->sigma = s->tpeak = s->rms = s->W = s->W_err = NAN;
  size_t n = c->nchan;
  s->vel = malloc(n * sizeof *s->vel);
  s->tb = malloc(n * sizeof *s->tb);
  double *buf = malloc(2 * n * sizeof *buf);
  if (!s->vel || !s->tb || !buf) {
    free(buf);
    dt_hi_sample_free(s);
    return dt_err_set(e, DT_ENOMEM, NULL, "out of memory");
  }
  s->nchan = n;
  int rc = velocities(c, ra, dec, o, s->vel, e);
  if (rc) {
    free(buf);
    dt_hi_sample_free(s);
    return rc;
  }
  double x, y;
  if (world_to_pixel(c, ra, dec, &x, &y) || x < -0.5 || y < -0.5 || x > (double)c->nx - 0.5 ||
      y > (double)c->ny - 0.5) {
    s->status = DT_HI_OUTSIDE;
    for (size_t k = 0; k < n; k++) s->tb[k] = NAN;
    free(buf);
    return DT_OK;
  }
  if (o->aperture > 0) {
    /* mean over the pixels whose centres lie within the radius */
    double r = o->aperture / 3600.0, ra1, de1, ra2, de2;
    size_t ci = (size_t)lround(x), cj = (size_t)lround(y);
    dt_hicube_pixel_world(c, (double)ci, (double)cj, &ra1, &de1);
    dt_hicube_pixel_world(c, (double)ci + 1, (double)cj + 1, &ra2, &de2);
    double scale = sep_deg(ra1, de1, ra2, de2) / M_SQRT2; /* deg per pixel */
    long reach = scale > 0 ? (long)ceil(r / scale) + 1 : 1;
    for (size_t k = 0; k < n; k++) s->tb[k] = 0;
    size_t npix = 0;
    for (long j = (long)cj - reach; j <= (long)cj + reach; j++)
      for (long i = (long)ci - reach; i <= (long)ci + reach; i++) {
        if (i < 0 || j < 0 || i >= (long)c->nx || j >= (long)c->ny) continue;
        double pr, pd;
        if (dt_hicube_pixel_world(c, (double)i, (double)j, &pr, &pd)) continue;
        if (sep_deg(pr, pd, ra, dec) > r && !(i == (long)ci && j == (long)cj)) continue;
        for (size_t k = 0; k < n; k++) s->tb[k] += to_kelvin(c, at(c, (size_t)i, (size_t)j, k), k);
        npix++;
      }
    for (size_t k = 0; k < n; k++) s->tb[k] /= (double)npix; /* NaN stays NaN: blank */
    s->npix = npix;
  } else {
    /* bilinear between the four nearest pixel centres */
    double xc = x < 0 ? 0 : x > (double)c->nx - 1 ? (double)c->nx - 1 : x;
    double yc = y < 0 ? 0 : y > (double)c->ny - 1 ? (double)c->ny - 1 : y;
    size_t i0 = (size_t)floor(xc), j0 = (size_t)floor(yc);
    size_t i1 = i0 + 1 < c->nx ? i0 + 1 : i0, j1 = j0 + 1 < c->ny ? j0 + 1 : j0;
    double fx = xc - (double)i0, fy = yc - (double)j0;
    double w[4] = {(1 - fx) * (1 - fy), fx * (1 - fy), (1 - fx) * fy, fx * fy};
    size_t ii[4] = {i0, i1, i0, i1}, jj[4] = {j0, j0, j1, j1};
    for (size_t k = 0; k < n; k++) {
      double t = 0;
      for (int q = 0; q < 4; q++)
        if (w[q] > 0) t += w[q] * at(c, ii[q], jj[q], k);
      s->tb[k] = to_kelvin(c, t, k);
    }
    s->npix = 1;
  }
  increasing(s->vel, s->tb, n);
  size_t finite = 0;
  for (size_t k = 0; k < n; k++) finite += isfinite(s->tb[k]) != 0;
  if (finite == 0) s->status = DT_HI_BLANKED;
  else measure(s->vel, s->tb, n, o, s, buf);
  free(buf);
  return DT_OK;
}

int dt_hicube_column_map(const dt_hicube *c, const dt_hi_opts *o, double **map, size_t *nx,
                         size_t *ny, dt_err *e) {
  *map = NULL;
  if (!o->has_window) return dt_err_set(e, DT_EINVAL, NULL, "a column-density map needs a velocity window");
  size_t n = c->nchan;
  double ra, dec;
  if (dt_hicube_pixel_world(c, 0.5 * (double)(c->nx - 1), 0.5 * (double)(c->ny - 1), &ra, &dec))
    return dt_err_set(e, DT_EFORMAT, NULL, "the map centre has no sky position");
  double *vel = malloc(n * sizeof *vel), *tb = malloc(n * sizeof *tb), *buf = malloc(2 * n * sizeof *buf);
  double *m = malloc(c->nx * c->ny * sizeof *m);
  int rc = (!vel || !tb || !buf || !m) ? dt_err_set(e, DT_ENOMEM, NULL, "out of memory") : DT_OK;
  if (!rc) rc = velocities(c, ra, dec, o, vel, e);
  if (!rc) {
    double *v2 = malloc(n * sizeof *v2);
    if (!v2) rc = dt_err_set(e, DT_ENOMEM, NULL, "out of memory");
    for (size_t j = 0; !rc && j < c->ny; j++)
      for (size_t i = 0; i < c->nx; i++) {
        memcpy(v2, vel, n * sizeof *v2);
        for (size_t k = 0; k < n; k++) tb[k] = to_kelvin(c, at(c, i, j, k), k);
        increasing(v2, tb, n);
        dt_hi_sample s;
        memset(&s, 0, sizeof s);
        measure(v2, tb, n, o, &s, buf);
        m[j * c->nx + i] = s.status == DT_HI_OK ? s.logN : NAN;
      }
    free(v2);
  }
  free(vel);
  free(tb);
  free(buf);
  if (rc) {
    free(m);
    return rc;
  }
  *map = m;
  *nx = c->nx;
  *ny = c->ny;
  return DT_OK;
}
