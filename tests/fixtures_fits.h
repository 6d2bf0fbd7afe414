/* Shared FITS test fixtures (cfitsio): a multi-row table of spectra, and
 * the comparison of two spectra read from the same data. */
#ifndef DT_TEST_FIXTURES_FITS_H
#define DT_TEST_FIXTURES_FITS_H
#include <fitsio.h>
#include <stdio.h>
#include <string.h>

#include "doubletty/spectrum.h"

/* A binary table (EXTNAME ROWS) of nrows spectra of npix <= 64 pixels,
 * one per row: WAVE [Angstrom] lam0 + 0.5 i, FLUX row + 0.01 i, IVAR 400
 * (0 at pixel 3 of row 2).  The cfitsio status. */
static inline int write_row_table(const char *path, long nrows, int npix, double lam0) {
  fitsfile *f;
  int st = 0;
  char *ttype[] = {"WAVE", "FLUX", "IVAR"};
  char form[3][8];
  snprintf(form[0], sizeof form[0], "%dD", npix);
  snprintf(form[1], sizeof form[1], "%dE", npix);
  snprintf(form[2], sizeof form[2], "%dE", npix);
  char *tform[] = {form[0], form[1], form[2]};
  char *tunit[] = {"Angstrom", "", ""};
  if (npix > 64) return -1;
  remove(path);
  fits_create_file(&f, path, &st);
  fits_create_tbl(f, BINARY_TBL, nrows, 3, ttype, tform, tunit, "ROWS", &st);
  for (long r = 1; r <= nrows; r++) {
    double w[64];
    float fl[64], iv[64];
    for (int i = 0; i < npix; i++) {
      w[i] = lam0 + 0.5 * i;
      fl[i] = (float)(r + 0.01 * i);
      iv[i] = i == 3 && r == 2 ? 0.0f : 400.0f;
    }
    fits_write_col(f, TDOUBLE, 1, r, 1, npix, w, &st);
    fits_write_col(f, TFLOAT, 2, r, 1, npix, fl, &st);
    fits_write_col(f, TFLOAT, 3, r, 1, npix, iv, &st);
  }
  fits_close_file(f, &st);
  return st;
}

/* Byte for byte the same pixels, and the same metadata (frame too when
 * with_frame). */
static inline int same_spectrum_data(const dt_spectrum *a, const dt_spectrum *b, int with_frame) {
  if (!a || !b) return 0;
  size_t nd = a->n * sizeof(double);
  int same = a->n == b->n && !memcmp(a->wave, b->wave, nd) && !memcmp(a->flux, b->flux, nd) &&
             !memcmp(a->sigma, b->sigma, nd) && !memcmp(a->mask, b->mask, a->n) &&
             a->has_sigma == b->has_sigma && a->resolution == b->resolution &&
             !strcmp(a->layout, b->layout) && a->hdu == b->hdu && a->row == b->row &&
             a->air == b->air && !strcmp(a->object, b->object) &&
             !strcmp(a->extname, b->extname) && !strcmp(a->sigma_from, b->sigma_from) &&
             !strcmp(a->unit, b->unit);
  if (!same || !with_frame) return same;
  return a->frame == b->frame && a->frame_kms == b->frame_kms &&
         !strcmp(a->frame_from, b->frame_from) && !strcmp(a->frame_note, b->frame_note);
}
#endif
