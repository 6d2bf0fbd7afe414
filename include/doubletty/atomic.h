/* Atomic data of resonance doublets, read from a small text table.
 *
 * Each doublet has two lines (the stronger first); each line its vacuum
 * wavelength, oscillator strength f and damping constant Gamma.
 *
 * Table format (share/doubletty/atomic.dat explains it at its top): one
 * doublet per line, "NAME WAVE F GAMMA WAVE F GAMMA SOURCE...", a one-word
 * name of at most 15 characters, wavelengths in vacuum Angstrom, Gamma in
 * s^-1, then the source of the values as free text (required); '#' starts a
 * comment.  The lines may come in either order. */
#ifndef DOUBLETTY_ATOMIC_H
#define DOUBLETTY_ATOMIC_H
#include <stddef.h>
#include "doubletty/status.h"

#define DT_C_KMS 299792.458          /* speed of light [km/s] (CODATA, exact) */

typedef struct dt_line {
  char label[16];       /* e.g. "NaI 5891" */
  double lambda0;       /* vacuum wavelength [Angstrom] */
  double f;             /* oscillator strength */
  double gamma;         /* damping constant [s^-1] */
} dt_line;

typedef struct dt_doublet {
  char name[16];        /* e.g. "NaI" (matched ignoring case and spaces) */
  dt_line line[2];      /* line[0] is the stronger (larger f*lambda) */
  char source[64];      /* reference for the values */
} dt_doublet;

typedef struct dt_atomic dt_atomic;

/* Load a table; a malformed line is DT_EFORMAT with e->where = "line N". */
int dt_atomic_load(const char *path, dt_atomic **out, dt_err *e);
/* Add (or replace, by name) doublets from another table file. */
int dt_atomic_merge(dt_atomic *t, const char *path, dt_err *e);
/* Parse a table from memory (used by the loaders and the fuzzer): its
 * doublets are added to t, replacing any of the same name.  A doublet named
 * twice within one text is an error.  On any error t is left unchanged. */
int dt_atomic_parse(dt_atomic *t, const char *text, size_t len, dt_err *e);
/* The default table, built into the program from share/doubletty/atomic.dat
 * at build time: its text (len bytes, not NUL-terminated) and a table
 * loaded from it.  Used when no table file is found, so a program moved
 * away from its data directory still knows its doublets. */
const char *dt_atomic_builtin_text(size_t *len);
int dt_atomic_load_builtin(dt_atomic **out, dt_err *e);
dt_atomic *dt_atomic_new(void);
void dt_atomic_free(dt_atomic *t);

size_t dt_atomic_count(const dt_atomic *t);
const dt_doublet *dt_atomic_get(const dt_atomic *t, size_t i);
/* Two doublet names are the same ignoring case and white space ("Na I" =
 * "nai"): 1, else 0. */
int dt_atomic_name_eq(const char *a, const char *b);
/* By name: "NaI", "Na I", "nai" all match; NULL if unknown. */
const dt_doublet *dt_atomic_find(const dt_atomic *t, const char *name);

#endif
