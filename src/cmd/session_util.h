/* Helpers shared by the session commands (log, export, compare). */
#ifndef DT_SESSION_UTIL_H
#define DT_SESSION_UTIL_H
#include <stddef.h>
#include "doubletty/journal.h"

/* "--name VALUE" or "--name=VALUE" at argv[*i]: 1 and *val set (advancing *i
 * past a separate value), 0 when argv[*i] is another option, -1 (message
 * printed) when the value is missing. */
int su_opt(const char *cmd, const char *name, int argc, char **argv, int *i, const char **val);

/* "path", "path (hdu 2)", "path (hdu 2, row 3)". */
const char *su_target_name(const dt_target *t, char *buf, size_t n);

/* Open a session read-only; errors and replay warnings go to stderr
 * ("doubletty: FILE: line N: ...").  NULL on error. */
dt_journal *su_open(const char *path);

/* A double for a table: "" for NaN, else the exact shortest form. */
const char *su_num(char *buf, size_t n, double x);

/* "2025-06-01T10:00:00.123Z" -> "2025-06-01 10:00:00Z" (seconds). */
const char *su_when(const char *iso, char *buf, size_t n);

/* The linked species of state s and their values, one line:
 * "linked CaII (b same): NaI logN 11.90 11.50 | CaII logN 12.20 11.90"
 * (log N per component; no values before a joint fit).  "" when nothing
 * is linked. */
const char *su_linked_text(const dt_judgement *s, char *buf, size_t n);

#endif
