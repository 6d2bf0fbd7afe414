/* Survey catalogues read back: the CSV of `fit` and the CSV or FITS table
 * of `export`, one sightline (a system seen in one spectrum through one
 * doublet) per group of rows.
 *
 * A catalogue has one row per component; a system without components has
 * one row with an empty component (or component 0), carrying its limits.
 * Rows of one sightline share name, doublet and system, and in a `fit`
 * CSV, index.  Every column of the first row is kept as text, so a
 * command may bin by any column (dt_catalog_text); the columns the
 * statistics need are parsed once into dt_sightline.  Extra tables joined
 * by name (dt_catalog_join) add columns the same way.
 *
 * The verdict of a sightline is the column `verdict` where it is present
 * and not empty (a session's judgement), else `suggested` (the first
 * pass's).  Where there is no column `system`, every row is the target's
 * system, "target".
 *
 * The counting rule (dt_sightline_count) decides whether a sightline can
 * tell if absorption above a threshold is there:
 *   detected, W >= threshold                    -> a detection
 *   detected, W < threshold                     -> a non-detection
 *   not detected, limit <= threshold            -> a non-detection
 *   not detected, limit > threshold or unknown  -> left out
 *   unsure, unusable, not judged                -> left out
 * W is the stronger line's rest equivalent width (W_mA) and its limit
 * W_limit_mA [mA]; with a column-density threshold, the total of the
 * components' log N (log N_AOD without components) and logN_limit. */
#ifndef DOUBLETTY_CATALOG_H
#define DOUBLETTY_CATALOG_H
#include <stddef.h>
#include "doubletty/judge.h"
#include "doubletty/status.h"

typedef struct dt_catalog_comp {
  double v_kms, v_err;       /* velocity and its 1-sigma error [km/s] */
  double logN, logN_err;     /* log10 N [cm-2] and its 1-sigma error */
} dt_catalog_comp;

typedef struct dt_sightline {
  const char *name, *doublet, *system;
  size_t table;              /* the catalogue (or joined table) it came from */
  size_t row;                /* its first row in that table */
  dt_verdict verdict;
  double W_mA, W_limit_mA;   /* stronger line's rest W and its upper limit [mA] */
  double logN_aod, logN_limit;
  double ra_deg, dec_deg;    /* ICRS [deg]; NaN when not given */
  size_t ncomp;
  dt_catalog_comp *comp;
  long with_row;             /* row of the joined table; -1: none */
} dt_sightline;

typedef struct dt_catalog_table {
  char *path;
  size_t ncol, nrow;
  char **col;                /* column names */
  char **cell;               /* nrow * ncol texts ("" when empty) */
  long *line;                /* line (CSV) or row (FITS) of each row */
  int fits;                  /* 1: rows are FITS table rows */
} dt_catalog_table;

typedef struct dt_catalog {
  size_t n;                  /* sightlines */
  dt_sightline *s;
  size_t ntab;               /* catalogues read (then the joined table, if any) */
  dt_catalog_table *tab;
  long with_table;           /* index of the joined table; -1: none */
} dt_catalog;

/* Counting of one sightline against a threshold (see above). */
typedef enum dt_count {
  DT_COUNT_EXCLUDED = 0,
  DT_COUNT_NONDETECTION,
  DT_COUNT_DETECTION
} dt_count;

typedef enum dt_threshold_kind {
  DT_THRESHOLD_NONE = 0,     /* the verdict alone */
  DT_THRESHOLD_W_MA,         /* W [mA] */
  DT_THRESHOLD_LOGN          /* log10 N [cm-2] */
} dt_threshold_kind;

typedef enum dt_velocity_kind {
  DT_VELOCITY_MEAN = 0,      /* column-density weighted mean of the components */
  DT_VELOCITY_STRONGEST,     /* the component of largest N */
  DT_VELOCITY_AOD            /* the AOD centroid: columns v_aod_kms, v_aod_err */
} dt_velocity_kind;

/* An empty catalogue. */
void dt_catalog_init(dt_catalog *c);
void dt_catalog_free(dt_catalog *c);

/* Read one catalogue (CSV, or a FITS binary table: the first table HDU of
 * a file that begins with "SIMPLE") and add its sightlines.  Columns
 * `name` and `verdict` or `suggested` must be there; a sightline already
 * read (same name, doublet, system) is an error naming both places.
 * DT_OK, or DT_EIO / DT_EFORMAT / DT_ENOTFOUND / DT_ENOMEM with e's
 * `where` saying the line and column. */
int dt_catalog_read(dt_catalog *c, const char *path, dt_err *e);

/* Keep the sightlines of system `system` (NULL: "target") and of doublet
 * `doublet` (NULL: any, but then all must have the same doublet: a
 * catalogue of several doublets is DT_EINVAL naming two of them).
 * DT_OK, or DT_EINVAL. */
int dt_catalog_select(dt_catalog *c, const char *system, const char *doublet, dt_err *e);

/* Join the columns of the CSV table `path` (with a column `name`, one row
 * per name) to the sightlines of that name.  DT_OK, or an error as for
 * dt_catalog_read (a name twice in the table is DT_EFORMAT). */
int dt_catalog_join(dt_catalog *c, const char *path, dt_err *e);

/* 1 when every catalogue read has column `col` (or the joined table has
 * it); otherwise 0 with e naming the first file without it. */
int dt_catalog_has(const dt_catalog *c, const char *col, dt_err *e);

/* Text of column `col` for sightline i: its own row's, else the joined
 * table's ("" when the joined table has no row of that name); NULL when
 * neither has the column. */
const char *dt_catalog_text(const dt_catalog *c, size_t i, const char *col);

/* Column `col` of sightline i as a number: DT_OK (NaN when empty), or
 * DT_ENOTFOUND / DT_EFORMAT with e naming the file, line and column. */
int dt_catalog_number(const dt_catalog *c, size_t i, const char *col, double *x, dt_err *e);

/* Where sightline i comes from: "FILE line N" (or "FILE row N"), in buf. */
const char *dt_catalog_where(const dt_catalog *c, size_t i, char *buf, size_t size);

/* The counting rule (see above) for threshold `value` of kind `kind`. */
dt_count dt_sightline_count(const dt_sightline *s, dt_threshold_kind kind, double value);

/* Total log10 N of the components (log10 of the sum of N); logN_aod when
 * there are none; NaN when neither is known. */
double dt_sightline_logN(const dt_sightline *s);

/* The velocity of a sightline and its 1-sigma error [km/s].
 *   mean:      v = sum N_i v_i / sum N_i,
 *              sigma^2 = sum (N_i / sum N)^2 sigma_i^2 (N taken as exact);
 *   strongest: the component of largest log N;
 *   aod:       columns v_aod_kms and v_aod_err of the catalogue.
 * DT_OK; DT_ERANGE when there is no component (mean, strongest) or no
 * value (aod); DT_ENOTFOUND / DT_EFORMAT as for dt_catalog_number. */
int dt_sightline_velocity(const dt_catalog *c, size_t i, dt_velocity_kind kind, double *v,
                          double *sigma, dt_err *e);

#endif
