/* Private glue between the spectrum readers (spectrum.c, spectrum_fits.c,
 * spectrum_text.c): not part of the public interface. */
#ifndef DT_SPECTRUM_PRIV_H
#define DT_SPECTRUM_PRIV_H
#include <stddef.h>
#include "doubletty/spectrum.h"

/* Which HDU the caller asked for: a 1-based number, an EXTNAME, or neither
 * (the first HDU holding data). */
typedef struct dt_hdu_sel {
  int number;        /* 1-based; 0 = not by number */
  const char *name;  /* EXTNAME; NULL = not by name */
} dt_hdu_sel;

/* Finish a spectrum filled by a reader: check the wavelengths (finite,
 * strictly monotonic; decreasing ones are reversed), mask bad pixels,
 * estimate sigma when the file had none, reject an all-masked spectrum.
 * Errors name the place as "<prefix>, <label> N" ("HDU 2, row 17",
 * "line 17"), N being line_of[i] when line_of is given, else i + 1. */
int dt_spectrum_finish(dt_spectrum *s, const char *prefix, const char *label,
                       const long *line_of, dt_err *e);

int dt_spectrum_read_fits(const char *file, const dt_hdu_sel *sel, const dt_read_opts *o,
                          dt_spectrum **out, dt_err *e);
int dt_spectrum_count_fits(const char *file, const dt_hdu_sel *sel, const dt_read_opts *o,
                           long *count, dt_err *e);
int dt_spectrum_read_text(const char *file, const dt_read_opts *o, dt_spectrum **out, dt_err *e);

/* The same readers on a file's bytes in memory (buf is only read, and
 * must stay valid during the call); the results, errors included, are
 * those of the file readers on a file holding these bytes. */
int dt_spectrum_read_fits_mem(const void *buf, size_t len, const dt_hdu_sel *sel,
                              const dt_read_opts *o, dt_spectrum **out, dt_err *e);
int dt_spectrum_count_fits_mem(const void *buf, size_t len, const dt_hdu_sel *sel,
                               const dt_read_opts *o, long *count, dt_err *e);
int dt_spectrum_read_text_mem(const void *buf, size_t len, const dt_read_opts *o,
                              dt_spectrum **out, dt_err *e);

/* Settle air or vacuum once the file has had its say (s->air_from =
 * DT_AIRVAC_FILE when it did): else the caller's o->air, else vacuum
 * assumed.  Air wavelengths are then converted to vacuum (airvac.c). */
void dt_spectrum_settle_air(dt_spectrum *s, const dt_read_opts *o);

/* Settle position and frame once the file has had its say (spectrum.h,
 * "Positions and frames"), and convert the wavelengths to the output
 * frame (spectrum_frame.c).  DT_EINVAL when the conversion is impossible. */
int dt_spectrum_settle_frame(dt_spectrum *s, const dt_read_opts *o, dt_err *e);

/* Wavelength unit -> factor to Angstrom.  Empty/NULL = Angstrom.  Returns 0
 * and fills *scale and the canonical name, or -1 for an unknown unit. */
int dt_spectrum_unit_scale(const char *unit, double *scale, char *canon, size_t canon_size);

/* Case-insensitive equality, ignoring leading/trailing blanks of a. */
int dt_spectrum_name_eq(const char *a, const char *b);

#endif
