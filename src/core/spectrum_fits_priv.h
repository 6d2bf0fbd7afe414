/* Private glue between the two halves of the FITS reader: spectrum_fits.c
 * (opening, choosing and checking the HDU, images) and spectrum_fits_table.c
 * (tables).  Not part of the public interface. */
#ifndef DT_SPECTRUM_FITS_PRIV_H
#define DT_SPECTRUM_FITS_PRIV_H
#include <fitsio.h>

#include "spectrum_priv.h"

/* An open FITS file (on disk or in memory) and facts of its primary header. */
typedef struct fctx {
  fitsfile *f;
  const char *file;
  const unsigned char *mem; /* the file's bytes when read from memory, else NULL */
  void *mem_ptr;            /* cfitsio keeps the addresses of these two for */
  size_t mem_size;          /*   as long as the memory file is open */
  unsigned char *padded;    /* mem copied into whole blocks, or NULL */
  long long fsize;
  /* values from the primary header, used when the spectrum's HDU lacks them */
  double prim_res;
  int prim_air;             /* AIRORVAC: 1 air, 0 vacuum, -1 not given */
  char prim_object[72];
} fctx;

/* What an uncertainty or mask HDU / column holds, from its name. */
typedef enum { AUX_NONE, AUX_SIGMA, AUX_IVAR, AUX_VAR, AUX_MASK } aux_kind;

extern const char *const dt_fits_aux_text[]; /* indexed by aux_kind */

/* A cfitsio status as a dt_err (truncated, damaged, out of memory). */
int dt_fits_err(dt_err *e, int status, const char *where, const char *doing);
/* A keyword as text (buf of FLEN_VALUE): 1 found, 0 absent. */
int dt_fits_key_str(fitsfile *f, const char *key, char *buf);
/* Classify an EXTNAME or column name by its words (MASK only if allow_mask). */
aux_kind dt_fits_classify(const char *name, int allow_mask);
/* EXTNAME, OBJECT, resolving power and AIRORVAC of the current HDU, with
 * the primary header as fallback. */
void dt_fits_common_keys(fctx *c, dt_spectrum *s);
/* Is the current HDU's data entirely inside the file? */
int dt_fits_check_complete(fctx *c, int hdu, dt_err *e);

/* Position, frame, time and site keywords of the current HDU (primary
 * header as fallback) into s (spectrum_frame.c).  DT_EFORMAT for a
 * malformed value, naming the keyword. */
int dt_fits_frame_keys(fctx *c, dt_spectrum *s, const char *where, dt_err *e);

/* The table in the current HDU (spectrum_fits_table.c). */
int dt_fits_read_table(fctx *c, int hdu, const dt_read_opts *o, dt_spectrum **out, dt_err *e);
int dt_fits_count_rows(fctx *c, int hdu, const dt_read_opts *o, long *count, dt_err *e);

#endif
