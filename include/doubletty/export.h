/* The final state of a session as a table: one row per component of every
 * spectrum, written as CSV (csv.h conventions) or as a FITS binary table.
 *
 * One table of columns (name, type, unit) drives both writers, so the two
 * outputs always have the same columns in the same order.  Each row holds
 * the spectrum's verdict, note, who judged it and when, the components with
 * the 1-sigma errors of the fit that gave them (empty when they were
 * changed by hand after the fit), the fit's chi2, and the measurements last
 * recorded (equivalent widths in mA as W_mA, apparent column densities,
 * upper limits), and with partial covering (cover.h) each component's
 * covering factor cf, its error cf_err and flag cf_flag (empty without; the
 * flag's test for thin lines takes the lines from the built-in atomic
 * table, and is left out for a doublet not in it).  A spectrum judged "not detected" is exported as its
 * limits, with no component rows.  The FITS table (cfitsio) carries TUNITn
 * for every physical column astropy parses strictly, TCOMMn for the log
 * column densities, and header keywords (ASCII only) for the program
 * version and the SHA-256 of the session file. */
#ifndef DOUBLETTY_EXPORT_H
#define DOUBLETTY_EXPORT_H
#include <stdio.h>
#include "doubletty/digest.h"
#include "doubletty/journal.h"
#include "doubletty/status.h"

/* The name column of a spectrum without a list name: the file's stem (no
 * directory, no "[ext]" selector, no extension; ".gz"/".fz" count with the
 * extension before them).  Written into buf (n bytes), returned. */
const char *dt_export_stem(const char *file, char *buf, size_t n);

/* Write the table of session j as CSV to f.  DT_OK or DT_EIO. */
int dt_export_csv(FILE *f, const dt_journal *j);

/* The same, with the 21-cm columns of cube (hicube.h) joined after the
 * others: logN_HI, logN_HI_err, v_HI_kms, sigma_HI_kms, T_peak_K,
 * HI_status -- sampled at each spectrum's recorded position (sky=) in its
 * recorded frame (frame=; BARYCENT when none), velocities relative to its
 * vsys; HI_status "no-position" when the record has no position. */
struct dt_hicube;
int dt_export_csv_hi(FILE *f, const dt_journal *j, const struct dt_hicube *cube);
/* The FITS table with the same 21-cm columns joined (TUNITn km s-1, K). */
int dt_export_fits_hi(const char *path, const dt_journal *j, const char *session,
                      const char *sha, const char *version, const struct dt_hicube *cube, dt_err *e);

/* Write the table of session j as a FITS binary table to the file path
 * (created, or replaced: the caller owns the name, a temporary file).
 * session: the session's file name (its last part goes to SESSFILE);
 * sha: its SHA-256 (SESSSHA); version: the program's (DTVERSN).
 * DT_OK or DT_EIO with e saying what cfitsio reported. */
int dt_export_fits(const char *path, const dt_journal *j, const char *session,
                   const char *sha, const char *version, dt_err *e);

#endif
