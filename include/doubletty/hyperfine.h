/* Hyperfine structure of lines: the table of components and its reader.
 *
 * A line of a doublet may be split into hyperfine components: each has a
 * velocity offset from the line's wavelength in the atomic table and a
 * share of its oscillator strength (the shares sum to 1).  With hyperfine
 * structure switched on, the model (model.h, dt_model_config.hfs) treats
 * such a line as the sum of its components, all with the component's N, b
 * and v.  Lines without a row stay single.
 *
 * Table format (share/doubletty/hyperfine.dat explains it at its top): one
 * line of a doublet per row, "DOUBLET WAVE DV:S [DV:S ...] SOURCE...", with
 * DOUBLET the doublet's name in the atomic table, WAVE the line's vacuum
 * wavelength [Angstrom] (it identifies the line, within
 * DT_HFS_MATCH_A), DV the offset [km/s, + = redder] and S the share of
 * each component, then the source of the values as free text (required);
 * '#' starts a comment. */
#ifndef DOUBLETTY_HYPERFINE_H
#define DOUBLETTY_HYPERFINE_H
#include <stddef.h>
#include "doubletty/atomic.h"
#include "doubletty/status.h"

#define DT_HFS_MAX 8           /* components of one line at most */
#define DT_HFS_MATCH_A 0.05    /* a row's WAVE finds a line within this [A] */
#define DT_HFS_DV_MAX 100.0    /* |offset| [km/s] accepted */
#define DT_HFS_SUM_TOL 1e-6    /* the shares must sum to 1 within this */

/* The components of one line. */
typedef struct dt_hfs_line {
  int n;                     /* 1..DT_HFS_MAX */
  double dv[DT_HFS_MAX];     /* offset from the line's wavelength [km/s] */
  double share[DT_HFS_MAX];  /* share of the oscillator strength (sum 1) */
} dt_hfs_line;

/* A row of the table. */
typedef struct dt_hfs_entry {
  char doublet[16];          /* as written in the table */
  double lambda0;            /* vacuum wavelength [A] of the line */
  dt_hfs_line comp;
  char source[128];          /* reference for the values */
} dt_hfs_entry;

typedef struct dt_hyperfine dt_hyperfine;

dt_hyperfine *dt_hyperfine_new(void);
void dt_hyperfine_free(dt_hyperfine *t);
/* Parse a table from memory: its rows are added to t, replacing rows of the
 * same doublet and line (wavelength within DT_HFS_MATCH_A).  A line given
 * twice within one text, a malformed row, shares that do not sum to 1 or a
 * missing source are DT_EFORMAT with e->where = "line N"; t is then left
 * unchanged. */
int dt_hyperfine_parse(dt_hyperfine *t, const char *text, size_t len, dt_err *e);
/* Add (or replace) rows from a file: DT_EIO when it cannot be read (e->where
 * empty), else as dt_hyperfine_parse.  The caller names the file in the
 * message. */
int dt_hyperfine_merge(dt_hyperfine *t, const char *path, dt_err *e);
/* A table from a file, or the one built into the program from
 * share/doubletty/hyperfine.dat. */
int dt_hyperfine_load(const char *path, dt_hyperfine **out, dt_err *e);
int dt_hyperfine_load_builtin(dt_hyperfine **out, dt_err *e);

size_t dt_hyperfine_count(const dt_hyperfine *t);
const dt_hfs_entry *dt_hyperfine_get(const dt_hyperfine *t, size_t i);
/* The components of line l (0 or 1) of doublet d: NULL when the table has
 * no row for it (the line stays single) or t is NULL. */
const dt_hfs_line *dt_hyperfine_find(const dt_hyperfine *t, const dt_doublet *d, int l);

#endif
