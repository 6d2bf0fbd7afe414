/* GSL's default error handler aborts the process; the core reports its own
 * status codes instead.  dt_gsl_quiet turns the handler off once for the
 * process (the handler is a process-wide setting that threads working at
 * the same time must not swap back and forth).  Internal to the core. */
#ifndef DOUBLETTY_GSL_QUIET_H
#define DOUBLETTY_GSL_QUIET_H
void dt_gsl_quiet(void);
#endif
