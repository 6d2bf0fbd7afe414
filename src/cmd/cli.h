/* Helpers shared by the subcommands: messages at the edge, data files. */
#ifndef DT_CLI_H
#define DT_CLI_H
#include <stdio.h>
#include "doubletty/atomic.h"
#include "doubletty/hyperfine.h"
#include "doubletty/spectrum.h"
#include "doubletty/status.h"
#include "doubletty/systems.h"

/* Print "doubletty: FILE: WHERE: WHAT" (parts omitted when empty) on stderr. */
void cli_report(const char *file, const dt_err *e);
/* The same on stream f. */
void cli_report_to(FILE *f, const char *file, const dt_err *e);
/* printf-style "doubletty: ..." on stderr. */
void cli_errorf(const char *fmt, ...)
#if defined(__GNUC__)
    __attribute__((format(printf, 1, 2)))
#endif
    ;
/* Directory holding atomic.dat etc.: $DOUBLETTY_DATA, else ../share/doubletty
 * beside the executable, else the compiled-in install path. */
const char *cli_datadir(void);
/* Load the atomic table (atomic.dat of cli_datadir() when DOUBLETTY_DATA
 * names it or it exists, else the table built into the program), plus an
 * optional user table (NULL = none).  Prints the error, with how to point
 * to a good table, and returns NULL on failure. */
dt_atomic *cli_load_atomic(const char *user_table);
/* Load the hyperfine table (hyperfine.dat of cli_datadir() when it exists,
 * else the table built into the program), plus an optional user table
 * (NULL = none).  Prints the error naming the file and line and returns
 * NULL on failure. */
dt_hyperfine *cli_load_hyperfine(const char *user_table);

/* Parse a double / long option value; print an error naming the option and
 * return nonzero when the text is not a number. */
int cli_parse_double(const char *opt, const char *text, double *out);
int cli_parse_long(const char *opt, const char *text, long *out);

/* Before a command's getopt_long loop: start at argv[1], no messages from
 * getopt itself (the option string must begin with ':'). */
void cli_getopt_reset(void);
/* After getopt_long returned '?' or ':': print one line naming the option
 * ("unknown option", "needs a value", "takes no value") and the hint
 * "try 'doubletty CMD --help'"; returns the exit status 2. */
int cli_opt_error(const char *cmd, int c, char **argv);

/* The velocity-frame options shared by every command that reads spectra:
 * --frame NAME (output frame), --in-frame NAME (the files' frame, over
 * what they say), --site LON,LAT,HEIGHT (where a file gives no site).
 * Each fills r; on a bad value prints one line naming the option and
 * returns nonzero. */
#define CLI_FRAME_HELP                                                                       \
  "  --frame NAME      velocity frame of every output (default BARYCENT): TOPOCENT,\n"         \
  "                    GEOCENTR, BARYCENT, HELIOCEN, LSRK, LSRD\n"                             \
  "  --in-frame NAME   the spectra's frame, over what the files say (SPECSYS, VELREF)\n"       \
  "  --site LON,LAT,H  observatory (deg east, deg, m) where a file gives no OBSGEO-*\n"
int cli_opt_frame(const char *cmd, const char *text, dt_read_opts *r);
int cli_opt_in_frame(const char *cmd, const char *text, dt_read_opts *r);
int cli_opt_site(const char *cmd, const char *text, dt_read_opts *r);

/* Resolution per line (lsf.h).  --resolution-table FILE: read into *t
 * (the caller frees it with dt_lsf_table_free; a second one replaces the
 * first) and set r->lsf_table; --resolution/--fwhm with values per doublet
 * ("NaI:4800,CaII:3600", "3000"): parsed into p.  1 after a message naming
 * the option, the file and the place. */
struct dt_lsf_table;
struct dt_lsf_per;
int cli_opt_resolution_table(const char *cmd, const char *path, struct dt_lsf_table **t,
                             dt_read_opts *r);
int cli_opt_per_doublet(const char *opt, const char *text, const char *what, struct dt_lsf_per *p);

/* 1 after "PATH: is a directory, not a file" when path names a directory. */
int cli_check_not_dir(const char *path);

/* A velocity range VLO:VHI [km/s] of option opt (VLO < VHI, both finite);
 * 1 with a message when it is not one. */
int cli_parse_range(const char *opt, const char *text, double *lo, double *hi);

/* --target-window VLO:VHI, --system NAME:VLO:VHI or --milky-way HALF (opt)
 * with value v into o; 1 after a message when the value is bad. */
int cli_system_option(const char *opt, const char *v, dt_system_opts *o);
/* The user's systems overlap neither the target nor each other: 0, else 1
 * after a message. */
int cli_systems_check(const dt_system_opts *o);

#endif
