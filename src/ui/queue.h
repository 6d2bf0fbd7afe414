/* The inspector's queue: the spectra to vet, in order, with their per-target
 * settings.
 *
 * Entries are kept compactly (paths in one string pool, no spectra): a
 * queue of a hundred thousand targets costs a few megabytes, and a spectrum
 * is read only when the inspector shows it.  Each entry also carries the
 * key it is recorded under in the session file: the path made absolute and
 * tidied lexically (no "." or ".." parts), so sessions written from
 * different working directories name a file the same way. */
#ifndef DT_UI_QUEUE_H
#define DT_UI_QUEUE_H
#include <stddef.h>
#include "doubletty/status.h"
#include "doubletty/spectrum.h"
#include "doubletty/targets.h"

typedef struct dt_qentry {
  size_t path;          /* offsets into the pool: file as read ... */
  size_t key;           /* ... and as recorded in the session */
  size_t name;          /* short name shown on screen ("" = none) */
  long row;             /* 1-based table row, 0 = not given */
  long line;            /* line of the list file (0: not from a list) */
  double vsys;          /* per-target settings (has_vsys / > 0 when given) */
  double resolution, fwhm_kms;
  char doublet[16];
  unsigned char has_vsys;
  unsigned char air;     /* wavelengths in air where the file does not say */
  unsigned char has_window;
  double vlo, vhi;       /* velocity window [km/s] when has_window */
  unsigned char has_pos; /* ra=/dec= of the list: */
  double ra, dec;        /*   ICRS [deg] */
  signed char frame;     /* frame= of the list (dt_frame; UNSET = not given) */
  unsigned char hyperfine; /* hfs=1 of the list: lines split into hyperfine components */
  signed char covering;  /* cover= of the list: 1 on, 0 off, -1 not given */
  size_t systems;        /* pool offset: the list line's target-window= and
                            system= as "target:VLO:VHI;NAME:VLO:VHI;..."
                            ("target" only when given; "" none) */
  signed char verdict;  /* cached verdict (dt_verdict), -1 = not known yet */
  size_t res_text;      /* pool offset: R=/fwhm= per doublet as written ("" none) */
  unsigned char res_is_fwhm;
} dt_qentry;

typedef struct dt_queue {
  dt_qentry *e;
  size_t n, cap;
  char *pool;
  size_t pool_len, pool_cap;
  char cwd[4096];
  int air;              /* every entry added from now on: wavelengths in air */
  dt_read_opts read;    /* frame options (out_frame, in_frame, site) for every entry */
} dt_queue;

void dt_queue_init(dt_queue *q);
void dt_queue_free(dt_queue *q);
/* Add one target (its path used as given for reading). */
int dt_queue_add(dt_queue *q, const dt_target_spec *t, dt_err *e);
/* Add a spectrum file; a multi-row FITS table becomes one entry per row
 * (the file is opened to count them).  An unreadable file is still added
 * (the inspector shows its error when it comes up). */
int dt_queue_add_file(dt_queue *q, const char *path, dt_err *e);
/* Add every target of a list file.  Bad lines are reported through report()
 * (if non-NULL) one by one and counted in *nbad; they are not added.
 * Returns DT_EIO when the list cannot be read. */
int dt_queue_add_list(dt_queue *q, const char *list, size_t *nbad,
                      void (*report)(const char *list, const dt_err *e), dt_err *e);

const char *dt_queue_path(const dt_queue *q, size_t i);
const char *dt_queue_key(const dt_queue *q, size_t i);
const char *dt_queue_name(const dt_queue *q, size_t i);
/* The resolving power or FWHM [km/s] entry i gives doublet (lsf.h:
 * an entry naming it, else the plain value); both 0: none. */
void dt_queue_resolution(const dt_queue *q, size_t i, const char *doublet, double *R, double *fwhm);
/* The list line's systems of entry i into o (after dt_system_opts_init). */
void dt_queue_systems(const dt_queue *q, size_t i, dt_system_opts *o);

/* Split a session name "FILE#DOUBLET" (as the inspector records targets)
 * into the file and the doublet; without a '#' after the last '/', the
 * doublet is "". */
void dt_queue_split_key(const char *key, char *path, size_t npath, char *doublet, size_t ndoublet);

/* Absolute, lexically tidied form of path relative to cwd ("" = the
 * process's directory) into out; returns out ("" when it does not fit). */
const char *dt_queue_canonical(const char *cwd, const char *path, char *out, size_t size);

#endif
