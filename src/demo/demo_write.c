/* The demo survey, writing (see demo_plan.c for the scenario): each
 * sightline's pixels go to the layout it was planned with -- FITS images
 * with linear, log and air-wavelength axes, binary tables, rows of the
 * plate file, plain text -- through cfitsio and stdio, with no date in any
 * header, so equal options give equal bytes.  Then targets.list and
 * truth.csv, and the directory: created when missing, an earlier demo's
 * files replaced. */
#include <dirent.h>
#include <errno.h>
#include <fitsio.h>
#include <gsl/gsl_rng.h>
#include <limits.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <unistd.h>

#include "demo_internal.h"
#include "doubletty/airvac.h"
#include "doubletty/frames.h"

/* ---- writing ------------------------------------------------------------- */

typedef struct outdir {
  const char *dir;
  char path[PATH_MAX];
} outdir;

static const char *out_path(outdir *od, const char *name) {
  int n = snprintf(od->path, sizeof od->path, "%s/%s", od->dir, name);
  if (n < 0 || (size_t)n >= sizeof od->path) od->path[0] = '\0'; /* fails to open */
  return od->path;
}

static int fits_fail(int status, const char *file, dt_err *e) {
  char msg[FLEN_STATUS];
  fits_get_errstatus(status, msg);
  return dt_err_set(e, DT_EIO, file, "cannot write FITS file: %s", msg);
}

/* Open a new FITS file, replacing an old one; the name is not parsed as a
 * cfitsio extended file name. */
static int fits_new(outdir *od, const char *name, fitsfile **f, dt_err *e) {
  const char *path = out_path(od, name);
  if (unlink(path) != 0 && errno != ENOENT)
    return dt_err_set(e, DT_EIO, name, "cannot replace: %s", strerror(errno));
  int status = 0;
  if (fits_create_diskfile(f, path, &status)) return fits_fail(status, name, e);
  return DT_OK;
}

static void key_common(fitsfile *f, const sight *s, int *status) {
  fits_write_key_str(f, "OBJECT", s ? s->name : "Silverfen plate 731",
                     s ? "background source behind the Velloran Pair" : "fibre plate", status);
  fits_write_key_str(f, "TELESCOP", TELESCOPE, "", status);
  fits_write_key_str(f, "INSTRUME", INSTRUMENT, "", status);
  fits_write_key_str(f, "ORIGIN", "doubletty demo", "synthetic data, not an observation", status);
  if (s) {
    fits_write_key_dbl(f, "SPECRES", s->R, -10, "resolving power lambda/FWHM", status);
    fits_write_key_dbl(f, "SRC_Z", s->cont.z, -6, "redshift of the background source", status);
    fits_write_key_str(f, "SRC_TYPE", s->s.kind == 'Q' ? "quasar" : "galaxy", "", status);
  }
  fits_write_comment(f, "Synthetic spectrum of the doubletty demo survey: an invented", status);
  fits_write_comment(f, "scenario (fictional survey, instrument and galaxies); the", status);
  fits_write_comment(f, "injected absorption components are listed in truth.csv.", status);
}

/* Position, frame, time and (for topocentric spectra) the observatory. */
static void key_sky(fitsfile *f, const sight *s, int *status) {
  if (s->idx % 2) { /* every other one in sexagesimal text */
    char ra[32], dec[32];
    double h = s->ra / 15.0, d = fabs(s->dec);
    int hh = (int)h, hm = (int)((h - hh) * 60.0), dd = (int)d, dm = (int)((d - dd) * 60.0);
    double hs = (h - hh - hm / 60.0) * 3600.0, ds = (d - dd - dm / 60.0) * 3600.0;
    snprintf(ra, sizeof ra, "%02d:%02d:%07.4f", hh, hm, hs);
    snprintf(dec, sizeof dec, "%c%02d:%02d:%06.3f", s->dec < 0 ? '-' : '+', dd, dm, ds);
    fits_write_key_str(f, "RA", ra, "right ascension (ICRS) [h:m:s]", status);
    fits_write_key_str(f, "DEC", dec, "declination (ICRS) [d:m:s]", status);
  } else {
    fits_write_key_dbl(f, "RA", s->ra, -10, "right ascension (ICRS) [deg]", status);
    fits_write_key_dbl(f, "DEC", s->dec, -10, "declination (ICRS) [deg]", status);
  }
  fits_write_key_str(f, "RADESYS", "ICRS", "", status);
  const char *fr = dt_frame_name((dt_frame)s->frame);
  fits_write_key_str(f, "SPECSYS", fr,
                     s->frame == DT_FRAME_TOPOCENT   ? "topocentric: as observed"
                     : s->frame == DT_FRAME_BARYCENT ? "barycentric frame"
                                                     : "heliocentric frame",
                     status);
  fits_write_key_dbl(f, "MJD-OBS", s->mjd - 0.5 * s->exptime / 86400.0, -13,
                     "start of the exposure (UTC)", status);
  fits_write_key_dbl(f, "EXPTIME", s->exptime, -6, "exposure time [s]", status);
  if (s->frame == DT_FRAME_TOPOCENT) {
    fits_write_key_dbl(f, "OBSGEO-L", DEMO_SITE_LON, -8, "observatory longitude [deg east]", status);
    fits_write_key_dbl(f, "OBSGEO-B", DEMO_SITE_LAT, -8, "observatory latitude [deg]", status);
    fits_write_key_dbl(f, "OBSGEO-H", DEMO_SITE_H, -8, "observatory height [m]", status);
  }
}

/* Spectral axis keywords of an image HDU. */
static void key_axis(fitsfile *f, const sight *s, int *status) {
  int nm = (s->s.flags & F_NM) != 0;
  double scale = nm ? 0.1 : 1.0;
  const char *ctype = s->s.layout == L_IMG_AIR ? "AWAV" : (s->log_grid ? "WAVE-LOG" : "WAVE");
  fits_write_key_str(f, "CTYPE1", ctype,
                     s->s.layout == L_IMG_AIR ? "wavelength in standard air" : "vacuum wavelength",
                     status);
  fits_write_key_str(f, "CUNIT1", nm ? "nm" : "Angstrom", "", status);
  fits_write_key_dbl(f, "CRPIX1", 1.0, -15, "reference pixel", status);
  fits_write_key_dbl(f, "CRVAL1", s->w0 * scale * s->kfile, -15, "wavelength at the reference pixel",
                     status);
  double cdelt = (s->log_grid ? s->step * s->w0 : s->step) * s->kfile;
  if (s->s.flags & F_CD)
    fits_write_key_dbl(f, "CD1_1", cdelt * scale, -15, "pixel size at the reference pixel", status);
  else
    fits_write_key_dbl(f, "CDELT1", cdelt * scale, -15, "pixel size at the reference pixel", status);
  key_sky(f, s, status);
}

static int write_image(outdir *od, const sight *s, const pixels *p, dt_err *e) {
  fitsfile *f = NULL;
  int st = fits_new(od, s->file, &f, e);
  if (st != DT_OK) return st;
  int status = 0;
  long naxes[1] = {(long)p->n};
  float *buf = malloc(p->n * sizeof(float));
  if (!buf) {
    fits_close_file(f, &status);
    return dt_err_set(e, DT_ENOMEM, NULL, "out of memory");
  }
  int ivar = s->s.layout == L_IMG_LOG; /* log images carry inverse variance */
  fits_create_img(f, FLOAT_IMG, 1, naxes, &status);
  key_common(f, s, &status);
  fits_write_key_str(f, "BUNIT", FLUX_UNIT, "flux density", &status);
  key_axis(f, s, &status);
  for (size_t i = 0; i < p->n; i++) buf[i] = p->bad[i] ? NAN : (float)p->flux[i];
  fits_write_img(f, TFLOAT, 1, (LONGLONG)p->n, buf, &status);
  fits_create_img(f, FLOAT_IMG, 1, naxes, &status);
  fits_write_key_str(f, "EXTNAME", ivar ? "IVAR" : "ERR",
                     ivar ? "inverse variance of the flux" : "1-sigma uncertainty of the flux",
                     &status);
  fits_write_key_str(f, "BUNIT", ivar ? IVAR_UNIT : FLUX_UNIT, "", &status);
  key_axis(f, s, &status);
  for (size_t i = 0; i < p->n; i++)
    buf[i] = p->bad[i] ? 0.0f : (float)(ivar ? 1.0 / (p->sigma[i] * p->sigma[i]) : p->sigma[i]);
  fits_write_img(f, TFLOAT, 1, (LONGLONG)p->n, buf, &status);
  free(buf);
  int cstatus = 0;
  fits_close_file(f, &cstatus);
  if (status || cstatus) return fits_fail(status ? status : cstatus, s->file, e);
  return DT_OK;
}

static void fill_table_arrays(const pixels *p, float *flux, float *ivar) {
  for (size_t i = 0; i < p->n; i++) {
    flux[i] = (float)(p->bad[i] ? 0.0 : p->flux[i]);
    ivar[i] = p->bad[i] ? 0.0f : (float)(1.0 / (p->sigma[i] * p->sigma[i]));
  }
}

static int write_table(outdir *od, const sight *s, const pixels *p, dt_err *e) {
  fitsfile *f = NULL;
  int st = fits_new(od, s->file, &f, e);
  if (st != DT_OK) return st;
  int status = 0;
  float *flux = malloc(p->n * sizeof(float)), *ivar = malloc(p->n * sizeof(float));
  if (!flux || !ivar) {
    free(flux);
    free(ivar);
    fits_close_file(f, &status);
    return dt_err_set(e, DT_ENOMEM, NULL, "out of memory");
  }
  fill_table_arrays(p, flux, ivar);
  char *ttype[] = {"WAVE", "FLUX", "IVAR", "MASK"};
  char *tform[] = {"1D", "1E", "1E", "1J"};
  char *tunit[] = {"Angstrom", FLUX_UNIT, IVAR_UNIT, ""};
  fits_create_img(f, BYTE_IMG, 0, NULL, &status);
  key_common(f, s, &status);
  fits_create_tbl(f, BINARY_TBL, (LONGLONG)p->n, 4, ttype, tform, tunit, "SPECTRUM", &status);
  key_common(f, s, &status);
  key_sky(f, s, &status);
  fits_write_comment(f, "WAVE: vacuum wavelength, heliocentric. MASK bits: 1 cosmic-ray", &status);
  fits_write_comment(f, "hit, 2 detector defect; IVAR = 0 marks pixels without data.", &status);
  fits_write_col(f, TDOUBLE, 1, 1, 1, (LONGLONG)p->n, p->wfile, &status);
  fits_write_col(f, TFLOAT, 2, 1, 1, (LONGLONG)p->n, flux, &status);
  fits_write_col(f, TFLOAT, 3, 1, 1, (LONGLONG)p->n, ivar, &status);
  fits_write_col(f, TINT, 4, 1, 1, (LONGLONG)p->n, p->mask, &status);
  free(flux);
  free(ivar);
  int cstatus = 0;
  fits_close_file(f, &cstatus);
  if (status || cstatus) return fits_fail(status ? status : cstatus, s->file, e);
  return DT_OK;
}

/* The plate file: one row per fibre, spectra in vector columns. */
static int plate_open(outdir *od, size_t n, double R, fitsfile **f, dt_err *e) {
  int st = fits_new(od, PLATE_FILE, f, e);
  if (st != DT_OK) return st;
  int status = 0;
  char fw[24], fe[24], fj[24];
  snprintf(fw, sizeof fw, "%zuD", n);
  snprintf(fe, sizeof fe, "%zuE", n);
  snprintf(fj, sizeof fj, "%zuJ", n);
  char *ttype[] = {"FIBRE", "TARGET", "WAVE", "FLUX", "IVAR", "MASK", "RA", "DEC"};
  char *tform[] = {"1J", "16A", fw, fe, fe, fj, "1D", "1D"};
  char *tunit[] = {"", "", "Angstrom", FLUX_UNIT, IVAR_UNIT, "", "deg", "deg"};
  fits_create_img(*f, BYTE_IMG, 0, NULL, &status);
  key_common(*f, NULL, &status);
  fits_create_tbl(*f, BINARY_TBL, 0, 8, ttype, tform, tunit, "FIBRES", &status);
  key_common(*f, NULL, &status);
  fits_write_key_str(*f, "RADESYS", "ICRS", "fibre positions RA, DEC (ICRS)", &status);
  fits_write_key_str(*f, "SPECSYS", "HELIOCEN", "heliocentric frame", &status);
  fits_write_key_dbl(*f, "MJD-OBS", 62840.6, -13, "start of the exposure (UTC)", &status);
  fits_write_key_dbl(*f, "EXPTIME", 2400.0, -6, "exposure time [s]", &status);
  fits_write_key_dbl(*f, "SPECRES", R, -10, "resolving power lambda/FWHM", &status);
  fits_write_comment(*f, "One fibre per row. WAVE: vacuum wavelength, heliocentric.", &status);
  fits_write_comment(*f, "MASK bits: 1 cosmic-ray hit, 2 detector defect; IVAR = 0", &status);
  fits_write_comment(*f, "marks pixels without data.", &status);
  if (status) {
    int cs = 0;
    fits_close_file(*f, &cs);
    *f = NULL;
    return fits_fail(status, PLATE_FILE, e);
  }
  return DT_OK;
}

static int plate_row(fitsfile *f, const sight *s, const pixels *p, dt_err *e) {
  int status = 0;
  float *flux = malloc(p->n * sizeof(float)), *ivar = malloc(p->n * sizeof(float));
  if (!flux || !ivar) {
    free(flux);
    free(ivar);
    return dt_err_set(e, DT_ENOMEM, NULL, "out of memory");
  }
  fill_table_arrays(p, flux, ivar);
  int fibre = 100 + 7 * s->idx;
  char *target[1] = {(char *)s->name};
  LONGLONG row = s->row;
  fits_write_col(f, TINT, 1, row, 1, 1, &fibre, &status);
  fits_write_col(f, TSTRING, 2, row, 1, 1, target, &status);
  fits_write_col(f, TDOUBLE, 3, row, 1, (LONGLONG)p->n, p->wfile, &status);
  fits_write_col(f, TFLOAT, 4, row, 1, (LONGLONG)p->n, flux, &status);
  fits_write_col(f, TFLOAT, 5, row, 1, (LONGLONG)p->n, ivar, &status);
  fits_write_col(f, TINT, 6, row, 1, (LONGLONG)p->n, p->mask, &status);
  double ra = s->ra, dec = s->dec;
  fits_write_col(f, TDOUBLE, 7, row, 1, 1, &ra, &status);
  fits_write_col(f, TDOUBLE, 8, row, 1, 1, &dec, &status);
  free(flux);
  free(ivar);
  if (status) return fits_fail(status, PLATE_FILE, e);
  return DT_OK;
}

static int io_fail(const char *name, dt_err *e) {
  return dt_err_set(e, DT_EIO, name, "cannot write: %s", strerror(errno));
}

static int write_text(outdir *od, const sight *s, const pixels *p, dt_err *e) {
  FILE *f = fopen(out_path(od, s->file), "w");
  if (!f) return io_fail(s->file, e);
  fprintf(f, "# %s: synthetic spectrum of the doubletty demo survey (invented scenario)\n",
          s->name);
  fprintf(f, "# background %s at z = %.4f behind the Velloran Pair (fictional)\n",
          s->s.kind == 'Q' ? "quasar" : "galaxy", s->cont.z);
  fprintf(f, "# %s, %s, resolving power R = %.0f\n", SURVEY, INSTRUMENT, s->R);
  fprintf(f, "# columns: vacuum wavelength [Angstrom, heliocentric]  flux  1-sigma error"
             "  [%s]\n", FLUX_UNIT);
  for (size_t i = 0; i < p->n; i++)
    fprintf(f, "%.4f %.5e %.4e\n", p->wfile[i], p->flux[i], p->sigma[i]);
  if (ferror(f)) {
    int err = errno;
    fclose(f);
    errno = err;
    return io_fail(s->file, e);
  }
  if (fclose(f) != 0) return io_fail(s->file, e);
  return DT_OK;
}

/* ---- lists --------------------------------------------------------------- */

static void describe_defects(const sight *s, char *buf, size_t len) {
  size_t used = 0;
  buf[0] = '\0';
  for (int j = 0; j < s->nbad && used < len; j++)
    used += (size_t)snprintf(buf + used, len - used, "%s%s:%.2fx%d", used ? ";" : "",
                             bad_name[s->bad[j].kind], s->bad[j].lam, s->bad[j].npix);
  for (int j = 0; j < s->nsky && used < len; j++)
    used += (size_t)snprintf(buf + used, len - used, "%s%s:%.2f", used ? ";" : "",
                             sky_name[s->sky[j].kind], dt_air_to_vac(sky_air[s->sky[j].line]) / s->ktopo);
}

static double first_vac(const sight *s) {
  return s->s.layout == L_IMG_AIR ? dt_air_to_vac(s->w0) : s->w0 * s->kfile;
}

static double last_vac(const sight *s) {
  double n1 = (double)(s->n - 1);
  double w = s->log_grid ? s->w0 * exp(s->step * n1) : s->w0 + s->step * n1;
  return s->s.layout == L_IMG_AIR ? dt_air_to_vac(w) : w * s->kfile;
}

static int write_lists(outdir *od, const sight *sl, int count, const dt_demo_opts *o,
                       dt_demo_summary *sum, dt_err *e) {
  FILE *f = fopen(out_path(od, "targets.list"), "w");
  if (!f) return io_fail("targets.list", e);
  fprintf(f, "%s\n", LIST_FIRST_LINE);
  fprintf(f, "# Sightlines of the %s through the Velloran Pair,\n", SURVEY);
  fprintf(f, "# a fictional interacting pair of galaxies at %.0f km/s heliocentric.\n",
          DT_DEMO_VSYS);
  fprintf(f, "# Made by: doubletty demo --count %d --seed %lu.  Injected components: truth.csv.\n",
          count, o->seed);
  for (int k = 0; k < count; k++) {
    const sight *s = &sl[k];
    for (int d = 0; d < 1 + ((s->s.flags & F_WIDE) && o->caii ? 1 : 0); d++) {
      char rowtxt[24] = "", skytxt[80] = "";
      if (s->row) snprintf(rowtxt, sizeof rowtxt, " row=%ld", s->row);
      /* a text file has no header: the list gives its position and frame */
      if (s->s.layout == L_TEXT)
        snprintf(skytxt, sizeof skytxt, " ra=%.5f dec=%+.5f frame=HELIOCEN", s->ra, s->dec);
      fprintf(f, "%-15s%s%s vsys=%.0f R=%.0f doublet=%s name=%s\n", s->file, rowtxt, skytxt,
              DT_DEMO_VSYS, s->R, d ? o->caii->name : o->nai->name, s->name);
      sum->ntargets++;
    }
  }
  if (ferror(f)) {
    fclose(f);
    return io_fail("targets.list", e);
  }
  if (fclose(f) != 0) return io_fail("targets.list", e);

  f = fopen(out_path(od, "truth.csv"), "w");
  if (!f) return io_fail("truth.csv", e);
  fprintf(f, "# doubletty demo survey: the injected (synthetic) absorption, one line per"
             " component;\n# a sightline without any has one line with origin none."
             " v_helio heliocentric [km/s];\n# v_rel relative to vsys = %.0f km/s as"
             " (1+v_helio/c) = (1+vsys/c)(1+v_rel/c); logN [cm^-2]; b [km/s];\n"
             "# wave_min/wave_max: first/last pixel centre, vacuum [Angstrom], in the file's"
             " frame (column frame);\n# snr per"
             " pixel on the continuum near Na I D; defects: KIND:WAVE(vacuum, heliocentric)"
             "[xPIXELS];\n# ra_deg/dec_deg: position (ICRS); frame: of the file's wavelengths"
             " (v_helio stays heliocentric).\n",
          DT_DEMO_VSYS);
  fprintf(f, "file,row,name,source,z_source,layout,npix,wave_min,wave_max,R,snr,defects,"
             "doublet,origin,v_helio,v_rel,logN,b,ra_deg,dec_deg,frame\n");
  for (int k = 0; k < count; k++) {
    const sight *s = &sl[k];
    char defects[256];
    describe_defects(s, defects, sizeof defects);
    char head[512];
    snprintf(head, sizeof head, "%s,%ld,%s,%s,%.4f,%s,%zu,%.6f,%.6f,%.0f,%.1f,%s", s->file,
             s->row, s->name, s->s.kind == 'Q' ? "quasar" : "galaxy", s->cont.z,
             layout_name[s->s.layout], s->n, first_vac(s), last_vac(s), s->R, s->snr, defects);
    char tail[96];
    snprintf(tail, sizeof tail, "%.5f,%.5f,%s", s->ra, s->dec, dt_frame_name((dt_frame)s->frame));
    if (s->ncomp == 0) fprintf(f, "%s,%s,none,,,,,%s\n", head, o->nai->name, tail);
    for (int j = 0; j < s->ncomp; j++) {
      const demo_comp *c = &s->comp[j];
      double vrel = DT_C_KMS * ((1.0 + c->c.v / DT_C_KMS) / (1.0 + DT_DEMO_VSYS / DT_C_KMS) - 1.0);
      fprintf(f, "%s,%s,%s,%.2f,%.2f,%.3f,%.2f,%s\n", head, c->caii ? o->caii->name : o->nai->name,
              c->origin == O_MW ? "milky-way" : "pair", c->c.v, vrel, c->c.logN, c->c.b, tail);
      sum->ncomponents++;
    }
  }
  if (ferror(f)) {
    fclose(f);
    return io_fail("truth.csv", e);
  }
  if (fclose(f) != 0) return io_fail("truth.csv", e);
  return DT_OK;
}

/* ---- the directory ------------------------------------------------------- */

static int mkdir_parents(const char *dir, dt_err *e) {
  char p[PATH_MAX];
  if (snprintf(p, sizeof p, "%s", dir) >= (int)sizeof p)
    return dt_err_set(e, DT_EINVAL, NULL, "directory name too long");
  for (char *c = p + 1; *c; c++) {
    if (*c != '/') continue;
    *c = '\0';
    if (mkdir(p, 0777) != 0 && errno != EEXIST)
      return dt_err_set(e, DT_EIO, NULL, "cannot create directory %s: %s", p, strerror(errno));
    *c = '/';
  }
  if (mkdir(p, 0777) != 0 && errno != EEXIST)
    return dt_err_set(e, DT_EIO, NULL, "cannot create directory: %s", strerror(errno));
  return DT_OK;
}

/* 1 when dir/targets.list was written by an earlier demo. */
static int earlier_demo(outdir *od) {
  FILE *f = fopen(out_path(od, "targets.list"), "r");
  if (!f) return 0;
  char line[128];
  int yes = fgets(line, sizeof line, f) && !strncmp(line, LIST_FIRST_LINE, strlen(LIST_FIRST_LINE));
  fclose(f);
  return yes;
}

/* Remove the files an earlier demo listed: the first field of each list
 * line, without an extension selector, when it is a plain name inside dir. */
static void remove_earlier(outdir *od) {
  FILE *f = fopen(out_path(od, "targets.list"), "r");
  if (!f) return;
  char line[1024];
  while (fgets(line, sizeof line, f)) {
    char *p = line + strspn(line, " \t");
    size_t len = strcspn(p, " \t\r\n#[");
    if (len == 0 || len >= 256 || p[0] == '.') continue;
    char name[256];
    memcpy(name, p, len);
    name[len] = '\0';
    if (strchr(name, '/')) continue;
    unlink(out_path(od, name));
  }
  fclose(f);
  unlink(out_path(od, "truth.csv"));
}

static int prepare_dir(outdir *od, int force, dt_err *e) {
  struct stat sb;
  if (stat(od->dir, &sb) != 0) {
    if (errno != ENOENT)
      return dt_err_set(e, DT_EIO, NULL, "cannot use as directory: %s", strerror(errno));
    int st = mkdir_parents(od->dir, e);
    if (st != DT_OK) return st;
    if (stat(od->dir, &sb) != 0)
      return dt_err_set(e, DT_EIO, NULL, "cannot create directory: %s", strerror(errno));
  }
  if (!S_ISDIR(sb.st_mode)) return dt_err_set(e, DT_EINVAL, NULL, "exists and is not a directory");
  DIR *d = opendir(od->dir);
  if (!d) return dt_err_set(e, DT_EIO, NULL, "cannot read directory: %s", strerror(errno));
  int empty = 1;
  struct dirent *de;
  while ((de = readdir(d)) != NULL)
    if (strcmp(de->d_name, ".") && strcmp(de->d_name, "..")) {
      empty = 0;
      break;
    }
  closedir(d);
  if (access(od->dir, W_OK | X_OK) != 0)
    return dt_err_set(e, DT_EIO, NULL, "cannot write into directory: %s", strerror(errno));
  if (!empty) {
    if (earlier_demo(od)) remove_earlier(od);
    else if (!force)
      return dt_err_set(e, DT_EINVAL, NULL,
                        "directory is not empty and holds no earlier demo survey");
  }
  return DT_OK;
}

/* ---- entry points -------------------------------------------------------- */

dt_demo_opts dt_demo_opts_default(void) {
  dt_demo_opts o = {NULL, NULL, DT_DEMO_DEFAULT_COUNT, DT_DEMO_DEFAULT_SEED, 0};
  return o;
}

int dt_demo_write(const char *dir, const dt_demo_opts *o, dt_demo_summary *sum, dt_err *e) {
  dt_demo_summary dummy;
  if (!sum) sum = &dummy;
  memset(sum, 0, sizeof *sum);
  dt_err_clear(e);
  if (!dir || !*dir) return dt_err_set(e, DT_EINVAL, NULL, "no directory given");
  if (!o || !o->nai) return dt_err_set(e, DT_EINVAL, NULL, "the Na I doublet is required");
  if (o->count < 1 || o->count > DT_DEMO_MAX_COUNT)
    return dt_err_set(e, DT_EINVAL, NULL, "count must be 1..%d, not %d", DT_DEMO_MAX_COUNT,
                      o->count);
  outdir od = {dir, ""};
  if (strlen(dir) + 40 >= sizeof od.path)
    return dt_err_set(e, DT_EINVAL, NULL, "directory name too long");
  int st = prepare_dir(&od, o->force, e);
  if (st != DT_OK) return st;

  /* Plan every sightline; the plate's fibres share one grid and R. */
  sight *sl = calloc((size_t)o->count, sizeof *sl);
  if (!sl) return dt_err_set(e, DT_ENOMEM, NULL, "out of memory");
  gsl_rng *r = gsl_rng_alloc(gsl_rng_mt19937);
  if (!r) {
    free(sl);
    return dt_err_set(e, DT_ENOMEM, NULL, "out of memory");
  }
  gsl_rng_set(r, mix_seed(o->seed, 0, 3));
  double plate_R = round_to(unif(r, 2200.0, 3000.0), 10.0);
  double plate_w0 = 5590.0 + unif(r, -5.0, 5.0), plate_w1 = 6310.0 + unif(r, -5.0, 5.0);
  gsl_rng_free(r);
  long nrows = 0;
  size_t plate_n = 0;
  for (int k = 0; k < o->count; k++) {
    if (dt_demo_plan_sight(k, o, &sl[k], plate_R, plate_w0, plate_w1, &nrows) != DT_OK) {
      free(sl);
      return dt_err_set(e, DT_ENOMEM, NULL, "out of memory");
    }
    if (sl[k].row) plate_n = sl[k].n;
  }

  st = write_lists(&od, sl, o->count, o, sum, e);
  fitsfile *plate = NULL;
  if (st == DT_OK && nrows > 0) {
    st = plate_open(&od, plate_n, plate_R, &plate, e);
    if (st == DT_OK) sum->nfiles++;
  }
  for (int k = 0; k < o->count && st == DT_OK; k++) {
    const sight *s = &sl[k];
    pixels p;
    st = dt_demo_make_pixels(s, o, &p, e);
    if (st != DT_OK) {
      dt_demo_pixels_free(&p);
      break;
    }
    switch (s->s.layout) {
    case L_ROWS: st = plate_row(plate, s, &p, e); break;
    case L_TABLE: st = write_table(&od, s, &p, e); break;
    case L_TEXT: st = write_text(&od, s, &p, e); break;
    default: st = write_image(&od, s, &p, e); break;
    }
    dt_demo_pixels_free(&p);
    if (st == DT_OK) {
      sum->nspectra++;
      if (s->s.layout != L_ROWS) sum->nfiles++;
    }
  }
  if (plate) {
    int status = 0;
    fits_close_file(plate, &status);
    if (status && st == DT_OK) st = fits_fail(status, PLATE_FILE, e);
  }
  if (st == DT_OK) {
    const char *cube = out_path(&od, CUBE_FILE);
    if (unlink(cube) != 0 && errno != ENOENT) st = dt_err_set(e, DT_EIO, CUBE_FILE, "cannot replace: %s", strerror(errno));
    if (st == DT_OK) st = dt_demo_write_cube(cube, o->seed, e);
    if (st == DT_OK) sum->nfiles++;
  }
  free(sl);
  return st;
}
