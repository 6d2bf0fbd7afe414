/* Private to the core: reading a small text file whole (atomic and
 * hyperfine tables, resolution tables, catalogues), and walking a table's
 * lines.  Messages name the problem; the caller names the file. */
#ifndef DOUBLETTY_TEXTFILE_H
#define DOUBLETTY_TEXTFILE_H
#include <stddef.h>

#include "doubletty/status.h"

/* The whole file into *buf (malloc'd, NUL-terminated; *len bytes before
 * the NUL).  A file larger than max bytes is refused as "larger than N MiB:
 * not WHAT" (DT_EFORMAT); DT_EIO when it cannot be opened or read,
 * DT_ENOMEM. */
int dt_text_slurp(const char *path, size_t max, const char *what, char **buf, size_t *len,
                  dt_err *e);

/* Each line of text[0..len) that holds anything but blanks once a '#' and
 * what follows it are cut off, handed to fn (in place, NUL-terminated,
 * leading blanks skipped) with its number and "line N" for messages; stops
 * at fn's first status other than DT_OK and returns it.  text is modified.
 * A NUL byte inside a line is DT_EFORMAT ("contains a NUL byte"). */
typedef int (*dt_text_line_fn)(void *ctx, char *line, long lineno, const char *where, dt_err *e);
int dt_text_lines(char *text, size_t len, dt_text_line_fn fn, void *ctx, dt_err *e);

/* Split off the next white-space separated token of *s (in place; *s
 * moves past it); NULL when only blanks are left. */
char *dt_text_token(char **s);

#endif
