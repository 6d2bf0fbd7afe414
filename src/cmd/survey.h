/* What the survey commands (fraction, vsf, map) share: reading the
 * catalogues with their options, writing a table and a figure through
 * outfile.c, and the plot drawn in the terminal. */
#ifndef DT_SURVEY_H
#define DT_SURVEY_H
#include <stdio.h>

#include "../fig/fig.h"
#include "doubletty/catalog.h"
#include "outfile.h"

typedef struct survey_opts {
  const char *system;   /* --system; NULL: target */
  const char *doublet;  /* --doublet (NULL: the one there is) */
  const char *with;     /* --with TABLE.csv */
  const char *out;      /* -o OUT.csv (NULL: standard output) */
  const char *figure;   /* --figure FILE */
  int force;
} survey_opts;

/* The long options every survey command takes (ids 0x100..0x104), to be
 * copied into a command's table, and their handling: 1 when opt was one of
 * them (stored in o), 0 otherwise. */
#define SURVEY_LONGOPTS                                           \
  {"system", required_argument, NULL, 0x100},                     \
      {"doublet", required_argument, NULL, 0x101},                \
      {"with", required_argument, NULL, 0x102},                   \
      {"figure", required_argument, NULL, 0x103},                 \
      {"force", no_argument, NULL, 0x104},                        \
      {"output", required_argument, NULL, 'o'}
int survey_opt(int opt, const char *arg, survey_opts *o);

/* --threshold-mA / --threshold-logN (which) of command cmd: one at a time,
 * a finite number.  0, or 1 with a message. */
int survey_threshold(const char *cmd, dt_threshold_kind which, const char *arg, dt_threshold_kind *kind,
                     double *thr);

/* Read the catalogues files[0..n) and the --with table, keep the chosen
 * system and doublet.  0, or the exit status after a message naming the
 * file and the place. */
int survey_load(const char *cmd, char **files, int n, const survey_opts *o, dt_catalog *c);
/* 0 when every catalogue has column col; else 1 after a message naming
 * the file and the column. */
int survey_need(const char *cmd, const dt_catalog *c, const char *col);

/* Check the output table and figure names before any work: 0 or the exit
 * status after a message (a figure of an unknown type included). */
int survey_check_outputs(const char *cmd, const survey_opts *o, char **files, int n, cli_out *table,
                         cli_out *fig, dt_fig_format *fmt);

/* The page of the survey figures: 6 x 4.5 inches (432 x 324 pt), PNG at
 * 150 dpi (900 x 675 pixels). */
extern const dt_fig_page survey_page;

/* Write a figure through its writer into fig (checked before).  0 or 1
 * after a message. */
typedef int (*survey_drawer)(FILE *f, dt_fig_format fmt, const dt_fig_page *pg, const void *what);
int survey_write_figure(const char *cmd, cli_out *fig, dt_fig_format fmt, survey_drawer draw,
                        const void *what);

/* A chart in the terminal (standard output) when it is one: the points
 * with their error bars, in braille where the locale speaks UTF-8, else in
 * ASCII.  log axes in x and y as asked. */
typedef struct survey_tplot {
  const char *title, *xlabel, *ylabel;
  int xlog, ylog;
  size_t n;
  const double *x, *y, *ylo, *yhi;
  size_t nline;                /* an extra line (fit), or 0 */
  const double *lx, *ly;
  int fixy;                    /* 1: the y range is [y0, y1] */
  double y0, y1;
} survey_tplot;
/* 1 when standard output is a terminal. */
int survey_stdout_tty(void);
void survey_tplot_print(const survey_tplot *t);

/* Bin edges "E0,E1,...": at least two finite numbers, strictly increasing.
 * 0 with *edges malloc'ed (caller frees), or 2 after a message. */
int survey_parse_edges(const char *cmd, const char *opt, const char *text, double **edges, size_t *n);
/* The bin of x among n edges: [e_i, e_i+1), the last bin closed; -1
 * outside or NaN. */
long survey_bin(const double *edges, size_t n, double x);
#endif
