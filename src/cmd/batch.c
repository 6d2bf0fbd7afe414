/* An ordered pool of worker threads (see batch.h).
 *
 * The idea: a ring of `window` slots holds the tasks in flight in
 * submission order.  Sequence numbers head <= next <= tail say which slots
 * wait to be handed back (head..tail), and which of them wait for a worker
 * (next..tail).  Workers take the task at `next`, run it without the lock,
 * and mark its slot done; the caller hands back tasks from `head` while
 * they are done.  One mutex guards the counters and flags; two condition
 * variables wake workers (work queued) and the caller (a task done). */
#include "batch.h"

#include <pthread.h>
#include <stdlib.h>
#include <unistd.h>

typedef struct {
  void *task;
  int done;
} slot;

struct batch {
  int jobs;
  size_t window;
  batch_work_fn work;
  batch_done_fn done;
  void *ctx;
  slot *ring;
  size_t head, next, tail;       /* sequence numbers, ring index = seq % window */
  int stop;
  pthread_mutex_t mu;
  pthread_cond_t have_work, have_done;
  pthread_t *thr;
  int nthr;
  struct worker_arg {
    struct batch *b;
    int id;
  } *args;                       /* each worker's */
};

int batch_cores(void) {
  long n = sysconf(_SC_NPROCESSORS_ONLN);
  return n < 1 ? 1 : n > 4096 ? 4096 : (int)n;
}

static void *worker(void *arg) {
  const struct worker_arg *wa = arg;
  batch *b = wa->b;
  pthread_mutex_lock(&b->mu);
  for (;;) {
    while (b->next == b->tail && !b->stop) pthread_cond_wait(&b->have_work, &b->mu);
    if (b->next == b->tail) break; /* stopping and nothing left */
    slot *s = &b->ring[b->next++ % b->window];
    pthread_mutex_unlock(&b->mu);
    b->work(b->ctx, s->task, wa->id);
    pthread_mutex_lock(&b->mu);
    s->done = 1;
    pthread_cond_signal(&b->have_done);
  }
  pthread_mutex_unlock(&b->mu);
  return NULL;
}

batch *batch_start(int jobs, size_t window, batch_work_fn work, batch_done_fn done, void *ctx) {
  if (jobs < 1) jobs = 1;
  if (window < (size_t)jobs) window = (size_t)jobs;
  batch *b = calloc(1, sizeof *b);
  if (!b) return NULL;
  b->jobs = jobs;
  b->window = window;
  b->work = work;
  b->done = done;
  b->ctx = ctx;
  if (jobs == 1) return b;
  b->ring = calloc(window, sizeof *b->ring);
  b->thr = calloc((size_t)jobs, sizeof *b->thr);
  b->args = calloc((size_t)jobs, sizeof *b->args);
  if (!b->ring || !b->thr || !b->args) goto fail;
  if (pthread_mutex_init(&b->mu, NULL)) goto fail;
  if (pthread_cond_init(&b->have_work, NULL)) {
    pthread_mutex_destroy(&b->mu);
    goto fail;
  }
  if (pthread_cond_init(&b->have_done, NULL)) {
    pthread_cond_destroy(&b->have_work);
    pthread_mutex_destroy(&b->mu);
    goto fail;
  }
  for (; b->nthr < jobs; b->nthr++) {
    b->args[b->nthr].b = b;
    b->args[b->nthr].id = b->nthr;
    if (pthread_create(&b->thr[b->nthr], NULL, worker, &b->args[b->nthr])) break;
  }
  if (b->nthr == 0) {
    pthread_cond_destroy(&b->have_done);
    pthread_cond_destroy(&b->have_work);
    pthread_mutex_destroy(&b->mu);
    goto fail;
  }
  return b;
fail:
  free(b->ring);
  free(b->thr);
  free(b->args);
  free(b);
  return NULL;
}

/* How long drain() waits: not at all, until a slot is free, until all
 * tasks are handed back. */
enum { WAIT_NONE, WAIT_SLOT, WAIT_ALL };

/* Hand back the finished tasks at the head, waiting as `wait` says.
 * Called and returns with the lock held; drops it around each hand-back. */
static void drain(batch *b, int wait) {
  while (b->head < b->tail) {
    slot *s = &b->ring[b->head % b->window];
    if (!s->done) {
      if (wait == WAIT_NONE || (wait == WAIT_SLOT && b->tail - b->head < b->window)) return;
      pthread_cond_wait(&b->have_done, &b->mu);
      continue;
    }
    void *task = s->task;
    s->task = NULL;
    s->done = 0;
    b->head++;
    pthread_mutex_unlock(&b->mu);
    b->done(b->ctx, task);
    pthread_mutex_lock(&b->mu);
  }
}

void batch_submit(batch *b, void *task) {
  if (!b->ring) { /* one job: here and now */
    b->work(b->ctx, task, 0);
    b->done(b->ctx, task);
    return;
  }
  pthread_mutex_lock(&b->mu);
  drain(b, WAIT_SLOT);
  slot *s = &b->ring[b->tail++ % b->window];
  s->task = task;
  s->done = 0;
  pthread_cond_signal(&b->have_work);
  drain(b, WAIT_NONE);
  pthread_mutex_unlock(&b->mu);
}

void batch_finish(batch *b) {
  if (!b) return;
  if (b->ring) {
    pthread_mutex_lock(&b->mu);
    drain(b, WAIT_ALL);
    b->stop = 1;
    pthread_cond_broadcast(&b->have_work);
    pthread_mutex_unlock(&b->mu);
    for (int k = 0; k < b->nthr; k++) pthread_join(b->thr[k], NULL);
    pthread_cond_destroy(&b->have_done);
    pthread_cond_destroy(&b->have_work);
    pthread_mutex_destroy(&b->mu);
  }
  free(b->ring);
  free(b->thr);
  free(b->args);
  free(b);
}
