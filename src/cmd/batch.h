/* An ordered pool of worker threads for batch commands.
 *
 * Tasks are handed in one at a time by the calling thread; up to `jobs`
 * workers run them at once, and each finished task is handed back to the
 * caller, on the caller's thread, in the order the tasks were submitted.
 * At most `window` tasks are in flight (submitted and not yet handed back):
 * submitting blocks while the window is full, so memory stays bounded
 * however many tasks a run has.  With one job no thread is started: each
 * task runs and is handed back inside batch_submit. */
#ifndef DOUBLETTY_BATCH_H
#define DOUBLETTY_BATCH_H
#include <stddef.h>

typedef struct batch batch;

/* Runs on a worker thread (any worker; tasks of one batch never share one);
 * worker: which one, 0 .. jobs - 1 (workspaces kept per worker). */
typedef void (*batch_work_fn)(void *ctx, void *task, int worker);
/* Runs on the caller's thread, once per task, in submission order. */
typedef void (*batch_done_fn)(void *ctx, void *task);

/* Start a pool of `jobs` workers (>= 1) with at most `window` tasks in
 * flight (at least `jobs`).  NULL when memory or threads are lacking. */
batch *batch_start(int jobs, size_t window, batch_work_fn work, batch_done_fn done, void *ctx);
/* Queue a task; hands back every finished task at the head of the queue. */
void batch_submit(batch *b, void *task);
/* Hand back every task, stop the workers, free the pool (NULL: nothing). */
void batch_finish(batch *b);
/* The number of online processors (at least 1). */
int batch_cores(void);

#endif
