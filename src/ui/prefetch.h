/* The inspector's look-ahead: one background thread opens the spectra the
 * person is likely to move to next (reads each file, its digest and runs
 * its first pass: dt_session_ahead_make) while the current one is being
 * judged.  The session itself stays on the inspector's thread, the only
 * writer of the session file; the thread touches no journal. */
#ifndef DT_UI_PREFETCH_H
#define DT_UI_PREFETCH_H
#include <stddef.h>
#include "doubletty/atomic.h"
#include "doubletty/session.h"

typedef struct dt_prefetch dt_prefetch;

/* Start the thread; NULL when it cannot start (then nothing is made ahead). */
dt_prefetch *dt_prefetch_start(const dt_atomic *atomic);
/* Ask for queue entry idx (target t, copied; first: run the first pass
 * too) to be made ahead; asks beyond the few kept push out the oldest. */
void dt_prefetch_want(dt_prefetch *p, size_t idx, const dt_session_target *t, int first);
/* What was made for entry idx (waits while it is being made), for the
 * caller to pass to dt_session_load and free; NULL when it was not asked
 * for or not begun (then the caller opens the target itself). */
dt_session_ahead *dt_prefetch_take(dt_prefetch *p, size_t idx);
/* Stop the thread and free everything (NULL: nothing). */
void dt_prefetch_stop(dt_prefetch *p);

#endif
