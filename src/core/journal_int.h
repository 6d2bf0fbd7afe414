/* Private to the session-file module (journal_*.c): helpers shared by the
 * writer, the reader and the in-memory session. */
#ifndef DOUBLETTY_JOURNAL_INT_H
#define DOUBLETTY_JOURNAL_INT_H
#include <stddef.h>
#include <stdint.h>
#include "doubletty/journal.h"

#define DT_JN_HEADER_TAG "doubletty-session"

/* FNV-1a 32-bit hash of n bytes (the line check sum). */
uint32_t dt_jn_fnv1a32(const char *p, size_t n);
/* Copy at most size-1 bytes of src (NULL = "") and end with a NUL. */
void dt_jn_copy_str(char *dst, size_t size, const char *src);
/* Exact equality of components, NaN equal to NaN. */
int dt_jn_same_comp(const dt_component *a, const dt_component *b);
/* Fit status code <-> its token in the file ("ok", "no-convergence", ...). */
const char *dt_jn_status_token(int code, char *tmp, size_t n);
int dt_jn_status_parse(const char *s, int *code);
/* Lines read so far by a record reader (the header counts as line 1). */
long dt_jn_reader_lineno(const dt_journal_reader *r);

/* ---- finding a spectrum's record (journal_index.c) ---- */

/* Keys (text + HDU + row) to values (entry indices). */
typedef struct dt_jn_index {
  struct dt_jn_key *slot;
  size_t nslot, nkey;
} dt_jn_index;
/* The value of a key, -1 if it has none. */
long dt_jn_index_get(const dt_jn_index *x, const char *key, int hdu, long row);
/* Give a key a value (a key that has one keeps it).  DT_OK or DT_ENOMEM. */
int dt_jn_index_add(dt_jn_index *x, const char *key, int hdu, long row, size_t val);
void dt_jn_index_free(dt_jn_index *x);

/* The doublet of a recorded path: what follows "#" after the file name. */
const char *dt_jn_doublet_of(const char *path);
/* Identity key "S:DIGEST#DOUBLET", NULL when the digest is unknown (or out
 * of memory); path key "P:PATH" (NULL = out of memory).  Written into buf
 * (n bytes) when it fits, else into malloc'd memory the caller frees (the
 * result is then not buf). */
char *dt_jn_id_key(const dt_target *t, char *buf, size_t n);
char *dt_jn_path_key(const char *path, char *buf, size_t n);
/* The absolute directory of a session file (malloc'd; NULL = root or
 * unknown). */
char *dt_jn_session_dir(const char *session);
/* The hint recorded for a spectrum path: relative to dir (or to rdir, the
 * same directory with links resolved) when it lies below it, else as given.
 * malloc'd; NULL = out of memory. */
char *dt_jn_path_hint(const char *dir, const char *rdir, const char *path);

/* ---- the field table (journal_format.c): one description of every field,
 * walked by the writer and by the parser ---- */

enum { JP_ID, JP_ACT, JP_STATE, JP_FIT, JP_MEAS, JP_MEASX, JP_FULL,
       JP_JOINT }; /* parts of a record */
enum {
  JT_TEXT,        /* escaped text into a char array of hi bytes */
  JT_PTR,         /* escaped text, a const char * into the line */
  JT_NUM,         /* double */
  JT_PM,          /* double +- double (off, off2); the error may be missing */
  JT_INT,         /* int in [lo, hi] */
  JT_LONG,        /* long in [lo, hi] */
  JT_SIZE,        /* size_t in [lo, hi] */
  JT_INDEX,       /* 1-based in the file, an int 0-based in memory */
  JT_FREEZE,      /* letters N, b, v: int bits */
  JT_VERDICT,     /* dt_verdict */
  JT_VERDICT_INT, /* a verdict kept in an int (the action's ival) */
  JT_SHA,         /* 64 hex digits into char[DT_SHA256_HEX]; may be empty */
  JT_STATUS,      /* fit status token */
  JT_COMP,        /* component cN: logN=X[+-E],b=..,v=..[,frozen=..] */
  JT_FCOMP,       /* fitted component fN (with errors) */
  JT_CONT,        /* continuum coefficients C+-E,... */
  JT_WINDOWS,     /* continuum windows LO:HI,... */
  JT_FULL,        /* full=1: the settings follow */
  JT_SYSV,        /* verdicts of systems: NAME:VERDICT,... */
  JT_SYSTEMS,     /* system ranges: NAME:VLO:VHI,... */
  JT_LINKED,      /* linked species: NAME,... */
  JT_BTIE,        /* b rule (dt_btie): same, thermal, free */
  JT_BTIE_INT,    /* a b rule kept in an int (the action's ival) */
  JT_SPECIES,     /* a linked species' fit spN: NAME:logN+-E/b+-E,... per component */
  JT_THERMAL      /* T and b_turb per component: T+-E/b+-E,... */,
  JT_CF,          /* covering factors of the components: C[+-E],... */
  JT_FCF          /* covering factors of a fit that differs from them: C+-E,... */
};
/* The format version that brought partial covering (act=covering,
 * covering=, cf=, fcf=): 4.  Older files are appended to without it. */
#if DT_JOURNAL_VERSION >= 4
#define DT_JN_COVER_VERSION 4
#else
#define DT_JN_COVER_VERSION DT_JOURNAL_VERSION
#endif
enum {
  JF_REQ = 1,      /* required (for JP_FULL: when full=1; JP_FIT: when the fit is there) */
  JF_NONEMPTY = 2, /* text that may not be empty */
  JF_OMIT = 4,     /* left out when empty, zero or NaN */
  JF_NUMBERED = 8, /* KEY1 .. KEYn, n = hi */
  JF_V3 = 16,      /* new in format version 3 (absorber systems) */
  JF_V4 = 32       /* new in format version 4 (linked species) */
};
typedef struct dt_jn_field {
  const char *key;
  unsigned char part, type, flags;
  size_t off, off2; /* where the value (and its error) lives in its part */
  long lo, hi;      /* integer range; text: buffer size in hi; numbered: count */
  unsigned acts;    /* JP_ACT: the actions (bit per kind) that have the field */
} dt_jn_field;
extern const dt_jn_field dt_jn_fields[];
extern const size_t dt_jn_nfields;

/* ---- linked species (journal_joint.c) ---- */

/* Write the value of a JT_LINKED, JT_BTIE, JT_BTIE_INT, JT_SPECIES or
 * JT_THERMAL field of state s (action a) into buf like snprintf; returns
 * -1 when the field is left out.  put: the writer's "KEY=" and text. */
typedef void (*dt_jn_put_fn)(void *ctx, const char *s);
int dt_jn_write_joint(const dt_jn_field *f, const dt_judgement *s, const dt_action *a, int num,
                      dt_jn_put_fn put, void *ctx);
/* Read such a field's value v (modified) into rec; -1 if bad.  ncomp[s]
 * receives the number of components read for species s (JT_SPECIES) and
 * nthermal those of JT_THERMAL. */
int dt_jn_read_joint(const dt_jn_field *f, char *v, int num, dt_journal_record *rec,
                     size_t *ncomp_sp, size_t *nthermal);
/* Checks of a record's linked part once the line is read: the joint fit
 * names every linked species with every component.  NULL when fine, else
 * why not. */
const char *dt_jn_check_joint(dt_journal_record *rec, int has_joint, const size_t *ncomp_sp,
                              size_t nthermal);

#endif
