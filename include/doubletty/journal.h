/* The session file: every judgement, kept.
 *
 * A session file is an append-only text record of every change a person makes
 * to the judgement of a spectrum: one line per change, written and fsync'd
 * before the change counts as done.  Opening a session replays the file into
 * one in-memory state per spectrum (target), so a session resumes exactly
 * where it stopped; readers (log, export, compare) use the same replay or the
 * line-by-line record reader.  The file format is described at the top of
 * src/core/journal_format.c.
 *
 * One writer at a time: opening for writing takes an exclusive advisory lock
 * and a second writer gets DT_ELOCK.  Read-only opens take no lock.  When an
 * append fails (disk full, file removed or made read-only, ...), the journal
 * enters a failed state: that append and every later one return an error, so
 * no judgement is accepted silently. */
#ifndef DOUBLETTY_JOURNAL_H
#define DOUBLETTY_JOURNAL_H
#include <stddef.h>
#include "doubletty/digest.h"
#include "doubletty/judge.h"
#include "doubletty/measure.h"
#include "doubletty/status.h"

#define DT_JOURNAL_VERSION 4       /* format version written by this program (reads 1 to 3 too) */
#define DT_JOURNAL_USER_MAX 64
#define DT_JOURNAL_TIME_MAX 32     /* "2025-06-01T10:00:00.123Z" */

/* One spectrum.  Its identity is the SHA-256 of its file's bytes, the HDU,
 * the table row and the doublet it is vetted for (the "#NAME" that may end
 * the path); the path itself is a hint for finding the file again, recorded
 * relative to the session file's directory when the file lies below it (else
 * as given).  Without a digest the path is the identity.  The journal never
 * opens, runs or writes the path. */
typedef struct dt_target {
  const char *path;              /* as the caller names the file [#DOUBLET] */
  int hdu;                       /* 1-based HDU; 0 = whole file / not FITS */
  long row;                      /* 1-based table row; 0 = not a row */
  char sha256[DT_SHA256_HEX];    /* digest of the file's bytes; "" = unknown */
  const char *name;              /* the target list's name for it; NULL or "" = none */
  char frame[12];                /* velocity frame of its velocities (frames.h); "" = unknown */
  char sky[48];                  /* sky position "RA,DEC" (ICRS degrees); "" = unknown */
} dt_target;

/* Flags of a target (dt_journal_entry.flags) and of a record. */
enum {
  DT_JFLAG_FILE_CHANGED = 1,     /* the input file's SHA-256 changed since an earlier record */
  DT_JFLAG_REPLAY_MISMATCH = 2,  /* on replay, a line's recorded state did not follow from
                                    its action (e.g. a damaged line before it); the recorded
                                    state was adopted */
  DT_JFLAG_REFIT_MISMATCH = 4    /* a refit disagreed with the recorded fit (set by callers
                                    through dt_journal_set_flag; not written to the file) */
};

/* The replayed state of one target. */
typedef struct dt_journal_entry {
  dt_target target;              /* path (the last recorded hint) and name owned by the
                                    journal; sha256 = last recorded */
  dt_judgement state;            /* the state after the last recorded change */
  int has_meas;
  dt_meas_summary meas;          /* measurements of the last change that carried them */
  char user[DT_JOURNAL_USER_MAX];        /* who made the last change ... */
  char time[DT_JOURNAL_TIME_MAX];        /* ... and when (UTC, ISO 8601) */
  char judged_by[DT_JOURNAL_USER_MAX];   /* who set the current verdict, "" if none */
  char judged_at[DT_JOURNAL_TIME_MAX];   /* when */
  unsigned flags;                /* DT_JFLAG_* */
  long nchanges;                 /* records of this target */
  long first_line, last_line;    /* 1-based line numbers in the file */
} dt_journal_entry;

typedef enum dt_journal_mode {
  DT_JOURNAL_RW = 0,             /* lock, create if missing, replay, append */
  DT_JOURNAL_READ_ONLY           /* replay only; no lock; the file must exist */
} dt_journal_mode;

typedef struct dt_journal dt_journal;

/* Open (RW: create with a header line if missing or empty) and replay the
 * session file.  user names the person for appended records (NULL or "" =
 * "unknown").  Errors:
 *   DT_ELOCK     another process has it open for writing (e->what names the
 *                process id and its user when they can be found);
 *   DT_EVERSION  written by a newer program (unknown format version);
 *   DT_EFORMAT   not a session file (first line is not the header);
 *   DT_EIO       cannot open / read / create (e.g. a read-only file in RW).
 * Damaged lines do not fail the open: they are skipped and counted as
 * warnings (dt_journal_warning). */
int dt_journal_open(const char *path, dt_journal_mode mode, const char *user,
                    dt_journal **out, dt_err *e);
void dt_journal_close(dt_journal *j);

/* Replay a session file's bytes in memory (buf[0..len), only read) as a
 * read-only session: the same entries, warnings and errors as
 * dt_journal_open(..., DT_JOURNAL_READ_ONLY, ...) on a file holding these
 * bytes.  dt_journal_path gives "(memory)". */
int dt_journal_open_mem(const void *buf, size_t len, dt_journal **out, dt_err *e);

/* Record one change: action a was applied to target t, giving the state
 * *after (whose fit, for a DT_ACT_FIT, is the action's result).  meas (may be
 * NULL) are the measurements for that state.  The line is written with one
 * write(), then fsync'd, before this returns.  When *after does not follow
 * from the recorded state by a (first record of a target, or the caller's
 * state jumped), the whole state is written so replay reproduces it.
 * Returns DT_OK; DT_EINVAL (nothing written, the journal stays usable) for
 * an unknown action kind, a target without a path or an *after that no
 * judgement can be (dt_judgement_apply of a restore would refuse it);
 * DT_EIO when the journal is read-only, or when the write or the sync fails
 * or the session file was removed or replaced -- the journal is then failed
 * and every later append returns DT_EIO too.  The caller (a program, not
 * the library) should ignore SIGXFSZ so that a file-size limit gives EFBIG
 * here instead of killing the process. */
int dt_journal_append(dt_journal *j, const dt_target *t, const dt_action *a,
                      const dt_judgement *after, const dt_meas_summary *meas,
                      dt_err *e);

/* The replayed state of a spectrum, NULL if the session has no record of
 * it.  dt_journal_find looks by identity (digest, HDU, row, doublet) and,
 * when that finds nothing (no digest, or the file changed since), by the
 * path; dt_journal_lookup by the path only.  A path is compared both as this
 * session records it (relative to its directory when below it) and as
 * given.  Spectra whose files have the same bytes are one spectrum.  Entry
 * pointers stay valid until dt_journal_close. */
const dt_journal_entry *dt_journal_find(const dt_journal *j, const dt_target *t);
const dt_journal_entry *dt_journal_lookup(const dt_journal *j, const char *path,
                                          int hdu, long row);
/* Where to look for the file of a recorded path hint: a relative hint is
 * taken from the session file's directory (not from the current one), an
 * absolute one as it is.  Writes into buf (like snprintf; returns buf).
 * Only text: the file is not looked at. */
const char *dt_journal_resolve(const dt_journal *j, const char *hint, char *buf, size_t n);
/* Targets in the order they first appear in the file. */
size_t dt_journal_count(const dt_journal *j);
const dt_journal_entry *dt_journal_entry_at(const dt_journal *j, size_t i);

/* 1 when the entry's recorded file digest is known and differs from sha256. */
int dt_journal_file_changed(const dt_journal_entry *en, const char *sha256);

/* Set (on != 0) or clear a DT_JFLAG_* bit of a target's entry in memory.
 * DT_ENOTFOUND if the target has no record. */
int dt_journal_set_flag(dt_journal *j, const char *path, int hdu, long row,
                        unsigned flag, int on);

/* Nonzero (a dt_status) once an append has failed; the error says why. */
int dt_journal_failed(const dt_journal *j);
const dt_err *dt_journal_error(const dt_journal *j);
int dt_journal_read_only(const dt_journal *j);
const char *dt_journal_path(const dt_journal *j);
const char *dt_journal_user(const dt_journal *j);
long dt_journal_nrecords(const dt_journal *j);   /* records read + appended */

/* Lines skipped on replay (damaged, incomplete last line, ...): the count,
 * and the first few messages ("line 17: ...").  i < min(count, 64). */
size_t dt_journal_warning_count(const dt_journal *j);
const char *dt_journal_warning(const dt_journal *j, size_t i);

/* ---- line-by-line reading (the audit trail) ---- */

enum { DT_REC_FULL = 1,          /* the record carries the whole state */
       DT_REC_MEAS = 2 };        /* the record carries measurements */

typedef struct dt_journal_record {
  long line;                     /* 1-based line number */
  char time[DT_JOURNAL_TIME_MAX];
  char user[DT_JOURNAL_USER_MAX];
  dt_target target;              /* path and name valid until the next read */
  dt_action action;              /* DT_ACT_FIT: fit = after.fit;
                                    DT_ACT_JOINT_FIT: fit and joint = after's;
                                    DT_ACT_RESTORE: state = &after */
  dt_judgement after;            /* the recorded state after the change: components,
                                    freezes, tie, verdict, linked species, b rule,
                                    fit and joint fit always; the other
                                    settings only when has & DT_REC_FULL */
  unsigned has;                  /* DT_REC_* */
  dt_meas_summary meas;          /* when has & DT_REC_MEAS */
  unsigned flags;                /* DT_JFLAG_FILE_CHANGED as recorded */
  char sha256_was[DT_SHA256_HEX];  /* the earlier digest when the file changed */
} dt_journal_record;

typedef struct dt_journal_reader dt_journal_reader;

/* Open a session file for reading and check its header line (DT_EFORMAT,
 * DT_EVERSION, DT_EIO as for dt_journal_open). */
int dt_journal_reader_open(const char *path, dt_journal_reader **out, dt_err *e);
/* The same on a session file's bytes in memory; buf must stay valid and
 * unchanged until dt_journal_reader_close. */
int dt_journal_reader_open_mem(const void *buf, size_t len, dt_journal_reader **out, dt_err *e);
/* Next record.  DT_OK: *rec filled.  DT_ENOTFOUND: end of file.
 * DT_EFORMAT: this line is damaged or incomplete and was skipped (e says
 * which line and why); reading may continue.  DT_EIO: read error (stop). */
int dt_journal_reader_next(dt_journal_reader *r, dt_journal_record *rec, dt_err *e);
int dt_journal_reader_version(const dt_journal_reader *r);
/* The format version of an open session file (appends keep it). */
int dt_journal_version(const dt_journal *j);
/* Lines skipped so far as damaged or incomplete (each one a DT_EFORMAT from
 * dt_journal_reader_next). */
size_t dt_journal_reader_damaged(const dt_journal_reader *r);
void dt_journal_reader_close(dt_journal_reader *r);

/* Write one record as a line into buf (with the trailing newline and the
 * terminating NUL).  Returns the line length, or the length needed when it
 * is >= size (like snprintf).  full: write the whole state.  Exposed for
 * tests and tools; appends go through dt_journal_append. */
size_t dt_journal_format(char *buf, size_t size, const char *time, const char *user,
                         const dt_target *t, const dt_action *a,
                         const dt_judgement *after, const dt_meas_summary *meas,
                         int full, const char *sha256_was);

/* Parse one line (without or with its newline) into *rec.  DT_EFORMAT with
 * e->what saying why.  rec->target.path points into line, which is modified. */
int dt_journal_parse(char *line, dt_journal_record *rec, dt_err *e);

#endif
