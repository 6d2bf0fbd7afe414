/* doubletty fit, inside: the run's settings and state shared by its
 * parts -- cmd_fit.c (options, inputs, the pool of threads), fit_spectrum.c
 * (the first pass of one spectrum, single or joint) and fit_rows.c (the
 * CSV table: settings, columns, rows). */
#ifndef DOUBLETTY_FIT_INT_H
#define DOUBLETTY_FIT_INT_H
#include <stdio.h>

#include "batch.h"
#include "cli.h"
#include "outfile.h"
#include "doubletty/analysis.h"
#include "doubletty/atomic.h"
#include "doubletty/autofit.h"
#include "doubletty/cog.h"
#include "doubletty/csv.h"
#include "doubletty/hyperfine.h"
#include "doubletty/joint.h"
#include "doubletty/judge.h"
#include "doubletty/lsf.h"
#include "doubletty/spectrum.h"
#include "doubletty/systems.h"
#include "doubletty/targets.h"

typedef enum { SRC_FILE, SRC_LIST, SRC_FILES_FROM } src_kind;
typedef struct {
  src_kind kind;
  const char *arg;
} source;

typedef struct {
  const char *doublet;          /* NULL: target's, else NaI (as given: may be a list) */
  size_t ndoub;                 /* --doublet split at commas (0: not given) */
  char doub[DT_JOINT_MAX_SPECIES][16];
  int joint;                    /* --joint: one fit over all the doublets */
  dt_joint_btie btie;           /* --b-tie */
  int have_btie;
  int have_R, have_fwhm, have_vsys, have_window, have_order;
  double R, fwhm, vsys, vlo, vhi;
  int cont_order;
  int ncomp;
  size_t nseed;
  double seed_v[DT_MAX_COMP];
  double limit_nsigma;
  double limit_b;               /* b of column-density limits [km/s] */
  int joint_cont;               /* Legendre coefficients fitted with the components */
  dt_read_opts ropts;
  dt_lsf_per Rper, Fper;        /* --resolution, --fwhm (per doublet or plain) */
  const char *R_text, *F_text;  /* as given */
  dt_lsf_table *rtable;         /* --resolution-table (ropts.lsf_table) */
  long row;                     /* --row: only this row of tables */
  long shard_k, shard_n;
  const char *out_path;
  const char *atomic_file;
  int force;                    /* replace an existing output file */
  long jobs;                    /* worker threads (0: one per core) */
  int air;                      /* text spectra give air wavelengths */
  dt_system_opts systems;       /* --target-window, --system, --milky-way */
  int cov_only;                 /* --intervals covariance */
  int calibrated;               /* --intervals calibrated */
  int have_mw;                  /* --milky-way given */
  int hyperfine;                /* --hyperfine: every target's lines split */
  const char *hfs_file;         /* --hyperfine-table FILE */
  int covering;                 /* --covering: a covering factor per component */
} config;

typedef struct {
  dt_csv csv;                   /* the output table (a task's: its buffer) */
  FILE *msg;                    /* a task's messages (NULL: standard error) */
  const cli_out *outf;          /* the output file, to refuse it as an input */
  int clash;                    /* an input is the output file: stop */
  const dt_atomic *atomic;
  const config *cfg;
  long index;                   /* of the current input */
  long ninputs;                 /* inputs seen (all shards) */
  long total;                   /* inputs known in advance (-1 unknown) */
  long fitted, failed, noconv;
  long mw_joined;               /* spectra whose Milky Way lies in the target's range */
  int progress;                 /* draw a progress line on stderr */
  int bar_shown;
  double bar_last;              /* when it was last drawn [s, monotonic] */
  batch *pool;                  /* the workers */
  long inflight;                /* inputs handed to the pool, not yet written */
  int oom;                      /* a task could not be set up: stop */
  dt_cog_cache *cog;            /* curve-of-growth tables of the limits, shared */
  const dt_hyperfine *hfs;      /* hyperfine table (NULL: could not be read) */
  dt_analysis **ans;            /* the run's: an analysis per worker, kept
                                   from spectrum to spectrum (NULL: none) */
  dt_analysis **an_slot;        /* a task's: its worker's (NULL: its own) */
  const char *lsf_label;        /* the current spectrum's line-spread function: */
  double lsf_fwhm;              /*   where from, FWHM at the line [km/s] */
} run;

/* fit_spectrum.c: every row (or the --row) of one input. */
void fit_input(run *r, const dt_target_spec *t);

/* cmd_fit.c: a message about an input on the run's message stream. */
void fit_report(run *r, const char *file, long row, const dt_err *e);

/* fit_rows.c: the settings lines and the header; the rows of a spectrum
 * that failed, of a single doublet's first pass (every system), of one
 * species of a joint fit, and of a species left out of one. */
void fit_write_header(dt_csv *w, const config *c);
void fit_row_failed(run *r, const dt_target_spec *t, const dt_spectrum *s, long row,
                    const char *doublet, double vsys, const dt_err *e);
void fit_row_result(run *r, const dt_target_spec *t, const dt_spectrum *s, long row,
                    const dt_judgement *j, const dt_autofit_out *o, int st,
                    const dt_system_set *set, const dt_system_result *res);
void fit_row_joint(run *r, const dt_target_spec *t, const dt_spectrum *s, long row,
                   const dt_judgement *j, const dt_joint_out *o, size_t q, int st,
                   const dt_system_set *set, const char *why);
void fit_row_joint_missing(run *r, const dt_target_spec *t, const dt_spectrum *s, long row,
                           const char *name, double vsys, const dt_err *why);
#endif
