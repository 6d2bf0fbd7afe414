/* Progress of a long run on standard error: "LABEL  i/n  (xx%)  about Ns
 * left", redrawn in place at most a few times a second, and only when
 * standard error is a terminal (a log file or a pipe gets nothing). */
#ifndef DT_PROGRESS_H
#define DT_PROGRESS_H
#include <stddef.h>

typedef struct cli_progress {
  const char *label;
  size_t total;
  int on;           /* standard error is a terminal */
  double t0, shown; /* start, last redraw (monotonic seconds) */
  int drawn;        /* a line is on screen */
} cli_progress;

/* Start counting to total.  force_off: never draw (e.g. --quiet). */
void cli_progress_start(cli_progress *p, const char *label, size_t total, int force_off);
/* done items of total are finished. */
void cli_progress_update(cli_progress *p, size_t done);
/* Clear the line. */
void cli_progress_end(cli_progress *p);
/* The estimate of the time left [s] after done of total items in elapsed
 * seconds (linear extrapolation); NaN before the first item. */
double cli_progress_eta(size_t done, size_t total, double elapsed);
/* "12s", "3m05s", "1h02m" into buf. */
const char *cli_progress_format(double seconds, char *buf, size_t size);
#endif
