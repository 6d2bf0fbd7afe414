/* One-dimensional spectra as the rest of doubletty sees them.
 *
 * Whatever the file layout (FITS image, FITS table, plain text), a spectrum is
 * read into vacuum wavelengths in Angstrom, strictly increasing, with flux, a
 * 1-sigma uncertainty and a mask.  Air wavelengths are converted on reading. */
#ifndef DOUBLETTY_SPECTRUM_H
#define DOUBLETTY_SPECTRUM_H
#include <stddef.h>
#include "doubletty/status.h"

typedef struct dt_spectrum {
  size_t n;
  double *wave;          /* vacuum wavelength [Angstrom], strictly increasing */
  double *flux;          /* flux, arbitrary units (finite where not masked) */
  double *sigma;         /* 1-sigma uncertainty, > 0 and finite where not masked */
  unsigned char *mask;   /* nonzero = masked: never fitted, shown as masked */
  int has_sigma;         /* 0: no uncertainty in the file (sigma estimated) */
  double resolution;     /* resolving power R read from the header, 0 if none */
  char layout[32];       /* "image-linear", "image-log", "table-columns",
                            "table-rows", "text" */
  int hdu;               /* 1-based HDU number (primary = 1); 0 for text */
  long row;              /* 1-based table row; 0 when not a row of a table */
  int air;               /* 1 if the file gave air wavelengths (now converted) */
  char object[72];       /* OBJECT keyword or "" */
} dt_spectrum;

typedef struct dt_read_opts {
  const char *wave_col;  /* column-name overrides for tables; NULL = find by */
  const char *flux_col;  /*   common names, case-insensitively               */
  const char *err_col;
  const char *mask_col;
  int hdu;               /* 1-based HDU; 0 = from "FILE[ext]" or the first with data */
  long row;              /* 1-based row of a multi-row table; 0 = the first */
} dt_read_opts;

/* Read one spectrum.  path may carry an extension selector "FILE[2]" or
 * "FILE[NAME]".  opts may be NULL.  On error *out is NULL and e says where. */
int dt_spectrum_read(const char *path, const dt_read_opts *opts,
                     dt_spectrum **out, dt_err *e);

/* Number of spectra in a file: rows of a multi-row table, otherwise 1. */
int dt_spectrum_count(const char *path, const dt_read_opts *opts,
                      long *count, dt_err *e);

dt_spectrum *dt_spectrum_alloc(size_t n);
void dt_spectrum_free(dt_spectrum *s);

/* Validate: strictly increasing finite wavelengths, at least one unmasked
 * pixel.  Readers call it; DT_EFORMAT / DT_EMASKED with e filled. */
int dt_spectrum_validate(const dt_spectrum *s, dt_err *e);

/* Median signal-to-noise (flux/sigma) over unmasked pixels; 0 if none. */
double dt_spectrum_median_snr(const dt_spectrum *s);

/* Median pixel size in km/s. */
double dt_spectrum_pixel_kms(const dt_spectrum *s);

/* Number of masked pixels. */
size_t dt_spectrum_nmasked(const dt_spectrum *s);

/* Index of the first pixel with wave >= lam (n if none). */
size_t dt_spectrum_index(const dt_spectrum *s, double lam);

#endif
