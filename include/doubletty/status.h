/* Status codes and error details shared by the whole core.
 *
 * Core functions return a dt_status (0 = success) and, where they take a
 * dt_err *, fill in where in the input the problem is and what it is.  They
 * never print and never exit: the commands and the UI compose the message
 * ("FILE: WHERE: WHAT") and decide what to do. */
#ifndef DOUBLETTY_STATUS_H
#define DOUBLETTY_STATUS_H

typedef enum dt_status {
  DT_OK = 0,
  DT_ENOMEM,     /* out of memory */
  DT_EIO,        /* cannot open, read or write */
  DT_EFORMAT,    /* the content is malformed */
  DT_ENOWCS,     /* no usable wavelength solution */
  DT_ERANGE,     /* requested lines/velocities not covered by the data */
  DT_EMASKED,    /* every pixel that matters is masked */
  DT_EINVAL,     /* an argument or option is out of its domain */
  DT_ENOCONV,    /* an iterative solver did not converge */
  DT_ELOCK,      /* a lock is held by someone else */
  DT_EVERSION,   /* a file of an unknown (future) version */
  DT_ENOTFOUND   /* a named thing (doublet, column, spectrum) does not exist */
} dt_status;

typedef struct dt_err {
  int code;           /* a dt_status */
  char where[96];     /* place in the input: "HDU 2", "line 17", "row 3, column FLUX"; may be "" */
  char what[224];     /* the problem, lower case, no trailing period */
} dt_err;

/* Short name of a status code ("malformed input", ...). */
const char *dt_status_str(int code);

/* Fill *e (if non-NULL) and return code.  where may be NULL. printf-style what. */
int dt_err_set(dt_err *e, int code, const char *where, const char *fmt, ...)
#if defined(__GNUC__)
    __attribute__((format(printf, 4, 5)))
#endif
    ;

/* Clear *e to code DT_OK and empty strings. */
void dt_err_clear(dt_err *e);

#endif
