/* Where the line-spread function comes from: the resolution as a function
 * of wavelength (a table of R at points, read from a file), the width per
 * pixel a spectrum carries (dt_spectrum.lsf_fwhm_kms, from a FITS column or
 * a table), and resolving powers or widths given per doublet
 * ("NaI:4800,CaII:3600").  The model takes either one width for its window
 * or one per pixel (model.h, dt_model_config.lsf_fwhm_kms).
 *
 * Which source wins, for one doublet of one spectrum (first found; the
 * commands decide, the analysis takes the widths per pixel unless told
 * otherwise, dt_analysis_opts.lsf_constant):
 *   fit:            --resolution/--fwhm (the entry naming the doublet, then
 *                   a plain one), --resolution-table, the list's R=/fwhm=
 *                   (named, then plain), the file's widths per pixel (FITS
 *                   column), the file header's R; none: an error;
 *   inspect/figure: --resolution-table, the list's R=/fwhm=,
 *                   --resolution/--fwhm (a default for targets that say
 *                   nothing), the file's widths per pixel, the header's R.
 * Whatever the user says (options, list) beats what the file says. */
#ifndef DOUBLETTY_LSF_H
#define DOUBLETTY_LSF_H
#include <stddef.h>

#include "doubletty/spectrum.h"
#include "doubletty/status.h"

/* ---- R(lambda) tables ----
 * A text file of two columns, wavelength [Angstrom, vacuum, as the
 * spectrum's after reading] and resolving power R = lambda / FWHM, one
 * point a line; '#' starts a comment, blank lines are skipped.  At least 2
 * points, wavelengths strictly increasing, R > 0 and finite.  Between the
 * points R is interpolated linearly in wavelength (GSL gsl_interp_linear);
 * outside them there is no value. */
#define DT_LSF_TABLE_MAX 100000

typedef struct dt_lsf_table dt_lsf_table;

/* Read a table.  Errors name the file and the line ("line 7: R = -2 is not
 * a positive resolving power", "wavelengths must increase: 5000 after
 * 5100"). */
int dt_lsf_table_read(const char *path, dt_lsf_table **out, dt_err *e);
/* The same from bytes in memory; name is used in messages. */
int dt_lsf_table_read_mem(const char *buf, size_t len, const char *name, dt_lsf_table **out,
                          dt_err *e);
void dt_lsf_table_free(dt_lsf_table *t);
const char *dt_lsf_table_name(const dt_lsf_table *t);
/* R at wavelength lambda [A]: DT_OK, or DT_ERANGE outside the table (e
 * names the file, the wavelength and the range covered; e may be NULL). */
int dt_lsf_table_R(const dt_lsf_table *t, double lambda, double *R, dt_err *e);
/* Give spectrum s the width of the table at each pixel: lsf_fwhm_kms[i] =
 * c / R(wave[i]) (NaN outside the table: a model reaching such a pixel
 * fails with a message naming the table and the wavelength), lsf_from =
 * "table NAME".  Replaces any width the file gave. */
int dt_lsf_table_apply(const dt_lsf_table *t, dt_spectrum *s, dt_err *e);

/* The first pixel of s[i0, i0+n) without a usable width (not finite or
 * <= 0), or n when all have one (s without widths: n). */
size_t dt_lsf_first_bad(const dt_spectrum *s, size_t i0, size_t n);

/* ---- values per doublet ----
 * "4800" (every doublet) or "NaI:4800,CaII:3600" (and a plain value among
 * them for the others: "NaI:4800,3000"); doublet names are matched
 * ignoring case and spaces. */
#define DT_LSF_PER_MAX 8
typedef struct dt_lsf_per {
  int n;
  struct {
    char doublet[16]; /* "" = every doublet not named */
    double value;
  } e[DT_LSF_PER_MAX];
} dt_lsf_per;

/* Parse text into p; values must be finite and > 0 (what: "R" or "fwhm",
 * used in messages).  Errors: DT_EINVAL with e->what naming the part. */
int dt_lsf_per_parse(const char *text, const char *what, dt_lsf_per *p, dt_err *e);
/* The value for doublet (an entry naming it, else the plain one), or 0. */
double dt_lsf_per_get(const dt_lsf_per *p, const char *doublet);

#endif
