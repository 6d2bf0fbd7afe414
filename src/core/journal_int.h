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

#endif
