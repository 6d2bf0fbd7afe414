/* The inspector's look-ahead thread (see prefetch.h).
 *
 * A few slots, each a queue entry in one of the states asked, being made
 * and made.  The thread makes the oldest asked slot; the inspector takes
 * a made slot (or waits for the one being made, which is sooner than
 * starting over).  One mutex guards the slots; one condition variable
 * wakes the thread (something asked, or stop) and the inspector (a slot
 * made).  Every string of a target is copied into its slot, so the thread
 * shares nothing with the inspector but the read-only atomic table. */
#include "prefetch.h"

#include <pthread.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>

#include "doubletty/targets.h"

#define PF_SLOTS 3

typedef enum { PF_FREE, PF_ASKED, PF_MAKING, PF_MADE } pf_state;

typedef struct {
  pf_state state;
  unsigned long age;               /* order of asking */
  size_t idx;
  int first;
  dt_session_target t;             /* its strings point into the slot */
  char path[DT_TARGET_PATH_MAX], key[DT_SESSION_KEY_MAX], name[256];
  int have_st;                     /* the file as it was before it was read */
  struct stat st;
  dt_session_ahead *made;
} pf_slot;

/* The file of a target path (a FITS "[ext]" selector left out). */
static int file_stat(const char *path, struct stat *st) {
  char buf[DT_TARGET_PATH_MAX];
  snprintf(buf, sizeof buf, "%s", path);
  size_t n = strlen(buf);
  char *br = n && buf[n - 1] == ']' ? strrchr(buf, '[') : NULL;
  if (br && br != buf) *br = '\0';
  return stat(buf, st) == 0;
}

/* Is the file still what was read: the same file, size and times?  What is
 * shown must be the file as it is when shown (a file replaced or removed
 * after it was made ahead is read again). */
static int same_file(const struct stat *a, const struct stat *b) {
  return a->st_dev == b->st_dev && a->st_ino == b->st_ino && a->st_size == b->st_size &&
         a->st_mode == b->st_mode && a->st_mtim.tv_sec == b->st_mtim.tv_sec &&
         a->st_mtim.tv_nsec == b->st_mtim.tv_nsec && a->st_ctim.tv_sec == b->st_ctim.tv_sec &&
         a->st_ctim.tv_nsec == b->st_ctim.tv_nsec;
}

struct dt_prefetch {
  const dt_atomic *atomic;
  pthread_mutex_t mu;
  pthread_cond_t cv;
  pthread_t thr;
  int stop;
  unsigned long clock;
  pf_slot slot[PF_SLOTS];
};

static pf_slot *oldest(dt_prefetch *p, pf_state st) {
  pf_slot *best = NULL;
  for (int k = 0; k < PF_SLOTS; k++)
    if (p->slot[k].state == st && (!best || p->slot[k].age < best->age)) best = &p->slot[k];
  return best;
}

static void *worker(void *arg) {
  dt_prefetch *p = arg;
  pthread_mutex_lock(&p->mu);
  for (;;) {
    pf_slot *s = NULL;
    while (!p->stop && !(s = oldest(p, PF_ASKED))) pthread_cond_wait(&p->cv, &p->mu);
    if (p->stop) break;
    s->state = PF_MAKING;
    pthread_mutex_unlock(&p->mu);
    s->have_st = file_stat(s->path, &s->st) && S_ISREG(s->st.st_mode);
    dt_session_ahead *a = s->have_st ? dt_session_ahead_make(p->atomic, &s->t, s->first) : NULL;
    pthread_mutex_lock(&p->mu);
    s->made = a;
    s->state = a ? PF_MADE : PF_FREE;
    pthread_cond_broadcast(&p->cv);
  }
  pthread_mutex_unlock(&p->mu);
  return NULL;
}

dt_prefetch *dt_prefetch_start(const dt_atomic *atomic) {
  if (dt_spectrum_threads_init() != DT_OK) return NULL; /* FITS reads on one thread only */
  dt_prefetch *p = calloc(1, sizeof *p);
  if (!p) return NULL;
  p->atomic = atomic;
  if (pthread_mutex_init(&p->mu, NULL)) goto fail;
  if (pthread_cond_init(&p->cv, NULL)) {
    pthread_mutex_destroy(&p->mu);
    goto fail;
  }
  if (pthread_create(&p->thr, NULL, worker, p)) {
    pthread_cond_destroy(&p->cv);
    pthread_mutex_destroy(&p->mu);
    goto fail;
  }
  return p;
fail:
  free(p);
  return NULL;
}

void dt_prefetch_want(dt_prefetch *p, size_t idx, const dt_session_target *t, int first) {
  if (!p) return;
  pthread_mutex_lock(&p->mu);
  pf_slot *s = NULL;
  for (int k = 0; k < PF_SLOTS && !s; k++)
    if (p->slot[k].state != PF_FREE && p->slot[k].idx == idx) s = &p->slot[k];
  if (s) { /* asked before: keep it, as the newest */
    s->age = ++p->clock;
    pthread_mutex_unlock(&p->mu);
    return;
  }
  s = oldest(p, PF_FREE);
  if (!s) s = oldest(p, PF_MADE);
  if (!s) s = oldest(p, PF_ASKED);
  if (!s) { /* all being made: cannot happen with one thread and > 1 slot */
    pthread_mutex_unlock(&p->mu);
    return;
  }
  dt_session_ahead_free(s->made);
  s->made = NULL;
  s->idx = idx;
  s->first = first;
  s->age = ++p->clock;
  s->t = *t;
  s->t.ahead = NULL;
  snprintf(s->path, sizeof s->path, "%s", t->path ? t->path : "");
  snprintf(s->key, sizeof s->key, "%s", t->key ? t->key : "");
  snprintf(s->name, sizeof s->name, "%s", t->name ? t->name : "");
  s->t.path = s->path;
  s->t.key = s->key;
  s->t.name = s->name;
  s->state = PF_ASKED;
  pthread_cond_broadcast(&p->cv);
  pthread_mutex_unlock(&p->mu);
}

dt_session_ahead *dt_prefetch_take(dt_prefetch *p, size_t idx) {
  if (!p) return NULL;
  dt_session_ahead *a = NULL;
  pthread_mutex_lock(&p->mu);
  for (int k = 0; k < PF_SLOTS; k++) {
    pf_slot *s = &p->slot[k];
    if (s->state == PF_FREE || s->idx != idx) continue;
    while (s->state == PF_MAKING) pthread_cond_wait(&p->cv, &p->mu);
    struct stat now;
    if (s->state == PF_MADE && s->idx == idx && file_stat(s->path, &now) && same_file(&now, &s->st)) {
      a = s->made;
      s->made = NULL;
    }
    dt_session_ahead_free(s->made);
    s->made = NULL;
    if (s->idx == idx) s->state = PF_FREE; /* asked but not begun: opened by the caller */
    break;
  }
  pthread_mutex_unlock(&p->mu);
  return a;
}

void dt_prefetch_stop(dt_prefetch *p) {
  if (!p) return;
  pthread_mutex_lock(&p->mu);
  p->stop = 1;
  pthread_cond_broadcast(&p->cv);
  pthread_mutex_unlock(&p->mu);
  pthread_join(p->thr, NULL);
  for (int k = 0; k < PF_SLOTS; k++) dt_session_ahead_free(p->slot[k].made);
  pthread_cond_destroy(&p->cv);
  pthread_mutex_destroy(&p->mu);
  free(p);
}
