/* Numbers in files: parsed and written the same in every locale.
 *
 * Every number doubletty reads from or writes to a file (session, CSV,
 * target lists, atomic table, text spectra, FITS header strings) goes
 * through this module, so a comma-decimal locale (de_DE, fr_FR, ...) set by
 * the user's environment or by a program embedding the core cannot change a
 * byte of output nor make a written file unreadable.  Only the screen may
 * use the user's locale.  The functions switch the calling thread to the
 * "C" locale for the duration of the call (POSIX uselocale), so they are
 * safe in threads and leave the caller's locale as it was. */
#ifndef DOUBLETTY_NUM_H
#define DOUBLETTY_NUM_H
#include <stddef.h>
#include <stdio.h>

/* strtod in the "C" locale: '.' is the decimal point whatever the locale.
 * errno is set as by strtod alone (0 or ERANGE). */
double dt_num_strtod(const char *s, char **end);

/* strtoll (base 10) in the "C" locale: the leading integer of s; errno as
 * by strtoll alone. */
long long dt_num_strtoll(const char *s, char **end);

/* Strict parse of a whole string as a double ("1.5", "-2e3", "nan", "inf"
 * are accepted; leading/trailing blanks, empty text, trailing characters
 * and out-of-range values are not).  DT_OK or DT_EINVAL (*x unchanged). */
int dt_num_parse(const char *s, double *x);

/* Strict parse of a whole string as a base-10 long in [lo, hi].
 * DT_OK or DT_EINVAL (*x unchanged). */
int dt_num_parse_long(const char *s, long lo, long hi, long *x);

/* The fewest significant digits (at least 6) that read back to the same
 * double: readable for round numbers, exact always; "nan", "inf", "-inf".
 * out holds at least 32 bytes. */
void dt_num_format(char *out, size_t size, double x);

/* snprintf / fprintf in the "C" locale (for fixed-precision columns such
 * as "%.3f").  Return what snprintf / fprintf return. */
int dt_num_snprintf(char *out, size_t size, const char *fmt, ...)
#if defined(__GNUC__)
    __attribute__((format(printf, 3, 4)))
#endif
    ;
int dt_num_fprintf(FILE *f, const char *fmt, ...)
#if defined(__GNUC__)
    __attribute__((format(printf, 2, 3)))
#endif
    ;

/* Run fn(arg) with the calling thread in the "C" locale and return what it
 * returns.  For calls into libraries that convert numbers with the process
 * locale: cfitsio (4.2) even keeps the decimal point of the locale of its
 * first conversion, so a program that switches locales would read header
 * numbers wrongly; every cfitsio call made this way sees '.'. */
int dt_num_with_c_locale(int (*fn)(void *arg), void *arg);

#endif
