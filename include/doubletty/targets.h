/* Target lists: the queue of spectra a person vets, one per line.
 *
 *   # comment
 *   path[ext] [row=N] [vsys=KMS] [R=R | fwhm=KMS] [doublet=NAME] [name=TEXT]
 *             [window=VLO:VHI] [target-window=VLO:VHI] [system=NAME:VLO:VHI]...
 *             [air] [ra=RA dec=DEC] [frame=NAME] [hfs=0|1] [cover=0|1]
 *
 * Fields are separated by blanks; '#' starts a comment anywhere on a line
 * (outside quotes); blank lines are ignored.  A relative path is taken
 * relative to the directory of the list file.  A path may carry a FITS
 * extension selector "file.fits[2]".  The flag "air" says the file's
 * wavelengths are in air (used when the file itself does not say);
 * window=VLO:VHI the velocity window [km/s] around the rest frame for the
 * fit and the measurements.  ra= and dec= (given together) give the sky
 * position, ICRS, in degrees or sexagesimal (hours for ra), over the
 * file's; frame= the velocity frame of the file's wavelengths
 * (frames.h), over what the file says; hfs=1 models the lines with
 * hyperfine structure (hyperfine.h) as their components; cover=1 fits a covering factor per
 * component (partial covering, cover.h), cover=0 (the default) does not
 * (a command's option may turn it on for every line).
 *
 * Quoting: a path or value holding blanks, '#', '"' or '\' is written
 * between double quotes, inside which \" stands for '"' and \\ for '\'
 * (no other escapes); a '#' or a blank inside quotes is an ordinary
 * character.  Quotes may cover part of a field: name="Sightline 7" and
 * "name=Sightline 7" are the same (the first '=' of a field after the path
 * ends the key, quoted or not).  Examples:
 *
 *   "night 2/star #4.fits"  vsys=-12 name="Fen 1234 \"B\""
 *   spectra/a.txt  R=48000  air
 *
 * Unknown keys, repeated keys, malformed values, an unterminated quote, a
 * backslash before anything but '"' or '\' inside quotes and lines longer
 * than DT_TARGET_LINE_MAX are errors naming the line.
 *
 * The reader streams: it holds one line at a time, so a list of any length
 * costs the same memory; opening the spectra is the caller's business. */
#ifndef DOUBLETTY_TARGETS_H
#define DOUBLETTY_TARGETS_H
#include <stddef.h>
#include "doubletty/frames.h"
#include "doubletty/status.h"
#include "doubletty/systems.h"

#define DT_TARGET_PATH_MAX 4096
#define DT_TARGET_LINE_MAX 8192
#define DT_TARGET_NAME_MAX 64

typedef struct dt_target_spec {
  char path[DT_TARGET_PATH_MAX];  /* resolved path, with any "[ext]" selector */
  long row;                       /* 1-based row of a multi-row table; 0 = not given */
  int has_vsys;
  double vsys;                    /* rest frame [km/s] */
  double resolution;              /* resolving power R; 0 = not given */
  double fwhm_kms;                /* LSF FWHM [km/s]; 0 = not given */
  char res_text[128];             /* R= or fwhm= as written when it names
                                     doublets ("NaI:4800,CaII:3600", lsf.h);
                                     resolution/fwhm_kms then hold its plain
                                     value (0: none); "" = a plain value */
  int res_is_fwhm;                /* res_text holds fwhm= values */
  char doublet[16];               /* "" = not given */
  char name[DT_TARGET_NAME_MAX];  /* "" = not given */
  int has_window;                 /* window=VLO:VHI given: */
  double vlo, vhi;                /* velocity window for fit and measurement [km/s] */
  dt_system_opts systems;         /* target-window= (has_target) and system= */
  long line;                      /* line number in the list (0 = not from a list) */
  int air;                        /* 1: wavelengths in air (flag "air", or
                                     dt_targets_set_air); for dt_read_opts.air */
  int has_pos;                    /* ra= and dec= given: */
  double ra, dec;                 /*   ICRS [deg], for dt_read_opts.ra/dec */
  dt_frame frame;                 /* frame= (UNSET: not given), for
                                     dt_read_opts.in_frame */
  int hyperfine;                  /* hfs=1: lines split into their hyperfine
                                     components (analysis.h, opts.hyperfine) */
  int has_covering;               /* cover= given: */
  int covering;                   /*   1 partial covering on, 0 off */
} dt_target_spec;

/* The resolving power R or the FWHM [km/s] the target gives doublet
 * (named or plain entry of R=/fwhm=; lsf.h); both 0: none. */
void dt_target_resolution(const dt_target_spec *t, const char *doublet, double *R, double *fwhm);

/* A target with nothing but a path (as given, not resolved). */
void dt_target_spec_init(dt_target_spec *t, const char *path);

/* Parse one line (without or with its trailing newline).  basedir (may be
 * NULL or "") is prefixed to a relative path.  *got = 1 when the line holds
 * a target, 0 for a blank or comment line.  Errors: DT_EFORMAT with
 * e->where = "line N" (lineno) and e->what naming the problem. */
int dt_targets_parse_line(const char *line, const char *basedir, long lineno,
                          dt_target_spec *t, int *got, dt_err *e);

/* Write text as one field of a list line: unchanged when it needs no
 * quotes, else between double quotes with '"' and '\' escaped, so that
 * dt_targets_parse_line reads it back as it was.  DT_OK, or DT_EINVAL when
 * out (size bytes) is too small. */
int dt_targets_quote(char *out, size_t size, const char *text);

typedef struct dt_targets dt_targets;

/* Open a list file for streaming.  DT_EIO when it cannot be opened. */
int dt_targets_open(const char *path, dt_targets **out, dt_err *e);
/* The next target: DT_OK with *got = 1, or *got = 0 at the end of the list.
 * A bad line is DT_EFORMAT ("line N"); reading may continue after it. */
int dt_targets_next(dt_targets *l, dt_target_spec *t, int *got, dt_err *e);
/* Mark every target read from now on as having air wavelengths (air = 1),
 * as an "air" flag on each line would; air = 0 leaves it to the lines. */
void dt_targets_set_air(dt_targets *l, int air);
/* Line number of the last line read. */
long dt_targets_lineno(const dt_targets *l);
void dt_targets_close(dt_targets *l);

#endif
