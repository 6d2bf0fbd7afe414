/* Progress lines with an estimate of the time left (see progress.h). */
#include "progress.h"

#include <math.h>
#include <stdio.h>
#include <time.h>
#include <unistd.h>

static double now(void) {
  struct timespec ts;
  clock_gettime(CLOCK_MONOTONIC, &ts);
  return (double)ts.tv_sec + 1e-9 * (double)ts.tv_nsec;
}

void cli_progress_start(cli_progress *p, const char *label, size_t total, int force_off) {
  p->label = label;
  p->total = total;
  p->on = !force_off && isatty(STDERR_FILENO);
  p->t0 = now();
  p->shown = -1;
  p->drawn = 0;
}

double cli_progress_eta(size_t done, size_t total, double elapsed) {
  if (!done || done > total) return NAN;
  return elapsed * (double)(total - done) / (double)done;
}

const char *cli_progress_format(double s, char *buf, size_t size) {
  if (!isfinite(s) || s < 0) snprintf(buf, size, "?");
  else if (s < 60) snprintf(buf, size, "%.0fs", s);
  else if (s < 3600) snprintf(buf, size, "%dm%02ds", (int)(s / 60), (int)fmod(s, 60));
  else snprintf(buf, size, "%dh%02dm", (int)(s / 3600), (int)fmod(s / 60, 60));
  return buf;
}

void cli_progress_update(cli_progress *p, size_t done) {
  if (!p->on) return;
  double t = now();
  if (p->shown >= 0 && t - p->shown < 0.25 && done < p->total) return;
  p->shown = t;
  char eta[32];
  cli_progress_format(cli_progress_eta(done, p->total, t - p->t0), eta, sizeof eta);
  fprintf(stderr, "\r%s  %zu/%zu  (%3.0f%%)  about %s left\033[K", p->label, done, p->total,
          p->total ? 100.0 * (double)done / (double)p->total : 100.0, eta);
  fflush(stderr);
  p->drawn = 1;
}

void cli_progress_end(cli_progress *p) {
  if (p->on && p->drawn) {
    fprintf(stderr, "\r\033[K");
    fflush(stderr);
  }
  p->drawn = 0;
}
