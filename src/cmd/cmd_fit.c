/* doubletty fit — the automatic first pass over many spectra, as CSV.
 *
 * Inputs are taken in command-line order: FILE arguments, the targets of
 * --list files (with their per-target vsys, R, doublet, row) and the paths
 * of --files-from files.  Every input gets an index 0, 1, 2, ... in that
 * order; --shard K/N keeps the inputs with index % N == K, and each CSV row
 * carries the index, so `doubletty merge` can put shard outputs back into
 * input order exactly.  All of it is streamed: a list of a million targets
 * costs one line of memory.
 *
 * Every spectrum yields rows: one per fitted component, one with empty
 * component fields when there is none, and one with status "failed" and the
 * message in `reason` when it could not be fitted (so a merged table
 * accounts for every input).  Settings on the command line override those
 * of a target list; without either, R comes from the file's header.
 *
 * With --jobs N the inputs are fitted by N threads (batch.c): each input
 * is a task that writes its rows and messages into buffers of its own,
 * through a copy of the run with its own table writer; the buffers are
 * written out in input order as the tasks finish, so the output is the
 * same byte for byte whatever N, and only a window of inputs is in
 * memory at a time. */
#include <errno.h>
#include <getopt.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <strings.h>
#include <time.h>
#include <sys/stat.h>
#include <unistd.h>

#include "batch.h"
#include "cli.h"
#include "commands.h"
#include "outfile.h"
#include "doubletty/analysis.h"
#include "doubletty/atomic.h"
#include "doubletty/cog.h"
#include "doubletty/cover.h"
#include "doubletty/csv.h"
#include "doubletty/elements.h"
#include "doubletty/export.h"
#include "doubletty/autofit.h"
#include "doubletty/joint.h"
#include "doubletty/judge.h"
#include "doubletty/lsf.h"
#include "doubletty/model.h"
#include "doubletty/num.h"
#include "doubletty/spectrum.h"
#include "doubletty/systems.h"
#include "doubletty/targets.h"

/* The CSV columns, in order (the first must stay "index" for merge). */
static const char *const COLUMNS[] = {
    "index", "file", "name", "hdu", "row", "object", "doublet", "system", "vsys", "status",
    "ncomp", "component", "v_kms", "v_err", "b_kms", "b_err", "logN", "logN_err",
    "logN_err_lo", "logN_err_hi", "logN_flag",
    "chi2_red", "dof", "bic", "W_mA", "W_err_mA", "W_sig", "logN_aod", "logN_aod_err",
    "W_weak_mA", "W_weak_err_mA", "logN_aod_weak", "logN_aod_weak_err", "saturated",
    "masked_frac", "W_limit_mA", "logN_limit", "suggested", "reason", "ra_deg", "dec_deg", "frame",
    "lsf_fwhm_kms", "lsf_source", "T_K", "T_err_K", "b_turb_kms", "b_turb_err_kms", "cf",
    "cf_err", "cf_flag"};
/* after the reason: position and velocity frame (pos_cells), the
 * line-spread function (lsf_cells), the columns of joint fits
 * (tail_cells), then the covering factor (cover_cells) */
#define NPOSCOLUMNS 3
#define NLSFCOLUMNS 2
#define NTAILCOLUMNS 4
#define NCOVERCOLUMNS 3
#define NCOLUMNS (sizeof COLUMNS / sizeof COLUMNS[0])

/* Below this resolving power the line-spread function (c/R > 3000 km/s) is
 * wider than the doublet's separation a thousandfold: a fit returns its
 * parameters at their bounds, so such an R is refused as a mistake. */
#define FIT_MIN_R 100

/* --jobs: at most this many threads; inputs in flight per thread. */
#define FIT_MAX_JOBS 1024
#define FIT_WINDOW_PER_JOB 4

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
  const char *lsf_label;        /* the current spectrum's line-spread function: */
  double lsf_fwhm;              /*   where from, FWHM at the line [km/s] */
} run;

static void usage(FILE *f) {
  fprintf(f,
          "usage: doubletty fit [options] FILE...\n"
          "Automatic first pass: fit and measure each spectrum, write CSV.\n\n"
          "  --doublet NAME[,NAME]   doublet(s) of the atomic table (default NaI);\n"
          "                          several: each fitted on its own, rows per doublet\n"
          "  --joint                 fit the doublets of --doublet together: one\n"
          "                          velocity per component for all of them\n"
          "  --b-tie RULE            b across the doublets of --joint: same (default),\n"
          "                          thermal (T and b_turb per component) or free\n"
          "  --resolution R          resolving power (default: the file's header);\n"
          "                          per doublet: NaI:4800,CaII:3600 (and a plain R)\n"
          "  --fwhm KMS              line-spread FWHM in km/s instead of R (also per doublet)\n"
          "  --resolution-table FILE R at wavelengths (two columns: Angstrom, R), linear\n"
          "                          in between; over the list's R= and the files' own\n"
          "  --vsys KMS              rest frame of the absorber [km/s] (default 0)\n"
          "  --window VLO:VHI        velocity window around each line [km/s]\n"
          "                          (default: -600:600 widened to cover every system)\n"
          "  --target-window VLO:VHI the target system's range [km/s] (default -300:300)\n"
          "  --system NAME:VLO:VHI   another absorber system [km/s] (repeatable)\n"
          "  --milky-way HALF        Milky-Way system: -HALF..HALF km/s in the\n"
          "                          observer's frame (default 150; 0 = none)\n"
          "  --ncomp N               fit exactly N components\n"
          "  --seed-v V1,V2,...      start components at these velocities\n"
          "  --continuum-order K     Legendre order of the continuum; -1 = fixed at 1\n"
          "  --joint-continuum K     also fit K multiplicative Legendre coefficients\n"
          "                          of the continuum together with the components\n"
          "  --covering              fit a covering factor C_f per component (partial\n"
          "                          covering; a list line may say cover=1)\n"
          "  --limit-sigma S         significance of upper limits (default 3)\n"
          "  --limit-b KMS           Doppler parameter of column-density limits\n"
          "                          (full curve of growth; default 2)\n"
          "  --intervals M           log N intervals: profile (default: the profile\n"
          "                          likelihood where the lines are not thin) or\n"
          "                          covariance (symmetric, from the fit alone: faster)\n"
          "  --atomic FILE           extra atomic table (adds or replaces doublets)\n"
          "  --hyperfine             model Na I and K I lines as their hyperfine\n"
          "                          components (a list line may say hfs=1)\n"
          "  --hyperfine-table FILE  extra hyperfine table (adds or replaces lines)\n"
          "  --row N                 only row N of multi-row tables (default: all rows)\n"
          "  --wave-col C --flux-col C --err-col C --mask-col C   table columns\n"
          "  --list FILE             targets from a list file (path vsys= R= ...)\n"
          "  --files-from FILE       spectrum paths, one a line ('-': standard input)\n"
          "  --shard K/N             only inputs with index %% N == K (0 <= K < N)\n"
          "  --jobs N                fit with N threads (default: one per core)\n"
          "  -o, --output FILE       write the CSV to FILE (default: standard output)\n"
          "  --force                 replace FILE if it exists (never an input)\n"
          "  --air                   wavelengths are in air where a file does not say\n"
          "                          (converted to vacuum; a list line may say 'air')\n"
          CLI_FRAME_HELP
          "Command-line settings override a list's; they head the CSV as '# key=value'\n"
          "lines.  R below 100 is refused.  Summary on standard error;\n"
          "exit status 1 when any spectrum failed, 2 for bad options.\n");
}

/* ---- messages and progress ------------------------------------------- */

static void bar_clear(run *r) {
  if (r->bar_shown) {
    fputs("\r\033[K", stderr);
    r->bar_shown = 0;
  }
}

static double now_s(void) {
  struct timespec ts;
  clock_gettime(CLOCK_MONOTONIC, &ts);
  return (double)ts.tv_sec + 1e-9 * (double)ts.tv_nsec;
}

/* Redrawn at most ten times a second (and for the last input). */
static void bar_draw(run *r) {
  if (!r->progress) return;
  double t = now_s();
  long ndone = r->ninputs - r->inflight; /* inputs written out */
  if (r->bar_shown && t - r->bar_last < 0.1 && ndone != r->total) return;
  r->bar_last = t;
  long done = r->fitted + r->failed;
  if (r->total > 0) {
    int width = 30, fill = (int)(width * (double)ndone / (double)r->total);
    if (fill > width) fill = width;
    fprintf(stderr, "\r\033[Kfit [%.*s%*s] %ld/%ld inputs, %ld failed",
            fill, "==============================", width - fill, "", ndone,
            r->total, r->failed);
  } else {
    fprintf(stderr, "\r\033[Kfit: %ld inputs, %ld spectra, %ld failed", ndone, done,
            r->failed);
  }
  fflush(stderr);
  r->bar_shown = 1;
}

/* Message for spectrum `label` (file, with row when from a table). */
static void report(run *r, const char *file, long row, const dt_err *e) {
  if (!r->msg) bar_clear(r);
  dt_err e2 = *e;
  if (row > 0) {
    char where[sizeof e2.where + 32];
    int len = e->where[0] ? snprintf(where, sizeof where, "row %ld, %s", row, e->where)
                          : snprintf(where, sizeof where, "row %ld", row);
    size_t n = len < 0 ? 0 : (size_t)len;
    if (n >= sizeof e2.where) n = sizeof e2.where - 1;
    memcpy(e2.where, where, n);
    e2.where[n] = '\0';
  }
  cli_report_to(r->msg ? r->msg : stderr, file, &e2);
}

/* ---- one spectrum ---------------------------------------------------- */


static void row_head(run *r, const dt_target_spec *t, const dt_spectrum *s, long row,
                     const char *doublet, const char *system, double vsys,
                     const char *status) {
  dt_csv *w = &r->csv;
  dt_csv_long(w, r->index);
  dt_csv_text(w, t->path);
  char stem[DT_TARGET_PATH_MAX];
  dt_csv_text(w, t->name[0] ? t->name : dt_export_stem(t->path, stem, sizeof stem));
  if (s && s->hdu > 0) dt_csv_long(w, s->hdu);
  else dt_csv_empty(w);
  if (row > 0) dt_csv_long(w, row);
  else dt_csv_empty(w);
  dt_csv_text(w, s ? s->object : "");
  dt_csv_text(w, doublet);
  dt_csv_text(w, system);
  dt_csv_fixed(w, vsys, 3);
  dt_csv_text(w, status);
}

/* ra_deg, dec_deg (ICRS) and the frame of the velocities; empty when unknown. */
static void pos_cells(dt_csv *w, const dt_spectrum *s) {
  if (s && s->has_pos) {
    dt_csv_fixed(w, s->ra, 8);
    dt_csv_fixed(w, s->dec, 8);
  } else {
    dt_csv_empty(w);
    dt_csv_empty(w);
  }
  dt_csv_text(w, s ? dt_frame_name(s->frame) : "");
}

/* T_K, T_err_K, b_turb_kms, b_turb_err_kms of component k of a joint fit
 * under the thermal rule (fr NULL, or another rule: empty). */
static void tail_cells(dt_csv *w, const dt_joint_result *fr, size_t k) {
  int th = fr && fr->btie == DT_JOINT_B_THERMAL && k < fr->ncomp;
  double v[4] = {NAN, NAN, NAN, NAN};
  if (th) {
    v[0] = fr->T[k];
    v[1] = fr->T_err[k];
    v[2] = fr->b_turb[k];
    v[3] = fr->b_turb_err[k];
  }
  for (int i = 0; i < 4; i++) {
    if (isfinite(v[i])) dt_csv_fixed(w, v[i], i < 2 ? 0 : 3);
    else dt_csv_empty(w);
  }
}

/* The line-spread function of the fit: its FWHM at the stronger line and
 * where it came from (pick_resolution); empty for a failed spectrum. */
static void lsf_cells(dt_csv *w, const run *r, int ok) {
  if (ok && r->lsf_fwhm > 0) dt_csv_fixed(w, r->lsf_fwhm, 3);
  else dt_csv_empty(w);
  dt_csv_text(w, ok && r->lsf_label ? r->lsf_label : "");
}

/* cf, cf_err, cf_flag of component k of a covered fit; empty without
 * covering (fr NULL or not covering) or without a component. */
static void cover_cells(dt_csv *w, const dt_doublet *d, const dt_judgement *j,
                        const dt_fit_result *fr, size_t k) {
  if (!fr || !fr->covering || k >= fr->ncomp) {
    for (int i = 0; i < NCOVERCOLUMNS; i++) dt_csv_empty(w);
    return;
  }
  dt_csv_fixed(w, fr->cf[k], 4);
  dt_csv_fixed(w, fr->cf_err[k], 4);
  dt_csv_text(w, dt_cover_flag_name(dt_cover_flag(d, &fr->comp[k], fr->err[k].logN, fr->cf[k], fr->cf_err[k],
                                               dt_cover_lsf_fwhm(j->resolution, j->fwhm_kms))));
}

static void write_failed(run *r, const dt_target_spec *t, const dt_spectrum *s, long row,
                         const char *doublet, double vsys, const dt_err *e) {
  char msg[sizeof e->where + sizeof e->what + 4];
  if (e->where[0]) snprintf(msg, sizeof msg, "%s: %s", e->where, e->what);
  else snprintf(msg, sizeof msg, "%s", e->what[0] ? e->what : dt_status_str(e->code));
  row_head(r, t, s, row, doublet, "", vsys, "failed");
  /* ncomp .. suggested: empty */
  for (size_t k = 10; k + 1 + NPOSCOLUMNS + NLSFCOLUMNS + NTAILCOLUMNS + NCOVERCOLUMNS < NCOLUMNS;
       k++)
    dt_csv_empty(&r->csv);
  dt_csv_text(&r->csv, msg);
  pos_cells(&r->csv, s);
  lsf_cells(&r->csv, r, 0);
  tail_cells(&r->csv, NULL, 0);
  cover_cells(&r->csv, NULL, NULL, NULL, 0);
  dt_csv_end(&r->csv);
}

/* The reason column: the first pass's words for the row's system in base, and
 * what a reader of the table must know about the fit (fewer components
 * than asked for, parameters pinned at the limits of their ranges), and for
 * the target why a default system is missing (note). */
static void honest_reason(const run *r, const dt_judgement *j, const dt_autofit_out *o,
                          const char *base, const char *note, char *buf, size_t n) {
  size_t len = (size_t)snprintf(buf, n, "%s", base);
  const config *c = r->cfg;
  if (c->ncomp > 0 && j->ncomp != (size_t)c->ncomp && len < n)
    len += (size_t)snprintf(buf + len, n - len, "%sasked for %d components but fitted %zu",
                            len ? "; " : "", c->ncomp, j->ncomp);
  int bound = 0;
  for (size_t k = 0; k < j->ncomp; k++) bound |= o->an.fit_info.at_bound[k] != 0;
  if (bound && len < n)
    len += (size_t)snprintf(buf + len, n - len, "%sparameters at the limit of their range",
                            len ? "; " : "");
  if (note && note[0] && len < n) len += (size_t)snprintf(buf + len, n - len, "%s%s", len ? "; " : "", note);
  char warn[160];
  if (dt_analysis_warning(&o->an, warn, sizeof warn) && len < n)
    snprintf(buf + len, n - len, "%s%s", len ? "; " : "", warn);
}

/* The rows of one spectrum: one per component, in the fit's order, each
 * with its system, then one for each system without components (its
 * measurement over its range and its limit).  ncomp, chi2_red, dof and bic
 * are those of the spectrum's joint fit; W .. reason those of the row's
 * system. */
static void write_result(run *r, const dt_target_spec *t, const dt_spectrum *s, long row,
                         const dt_judgement *j, const dt_autofit_out *o, int st,
                         const dt_system_set *set, const dt_system_result *res) {
  const dt_analysis_out *an = &o->an;
  const dt_fit_result *fr = &an->fit;
  dt_csv *w = &r->csv;
  char reason[320];
  size_t nrows = j->ncomp;
  for (size_t k = 0; k < set->n; k++) nrows += res[k].ncomp == 0;
  size_t empty_sys = 0;
  for (size_t q = 0; q < nrows; q++) {
    size_t k, sk;
    if (q < j->ncomp) {
      k = q;
      sk = dt_systems_of(set, fr->comp[k].v);
    } else {
      k = (size_t)-1;
      while (res[empty_sys].ncomp) empty_sys++;
      sk = empty_sys++;
    }
    const dt_system_result *sr = &res[sk];
    row_head(r, t, s, row, j->doublet, set->sys[sk].name, j->vsys,
             st == DT_OK ? "ok" : "not-converged");
    dt_csv_long(w, (long)j->ncomp);
    if (k != (size_t)-1) {
      dt_csv_long(w, (long)k + 1);
      dt_csv_fixed(w, fr->comp[k].v, 3);
      dt_csv_fixed(w, fr->err[k].v, 3);
      dt_csv_fixed(w, fr->comp[k].b, 3);
      dt_csv_fixed(w, fr->err[k].b, 3);
      dt_csv_fixed(w, fr->comp[k].logN, 4);
      dt_csv_fixed(w, fr->err[k].logN, 4);
      const dt_profile_interval *pi = &an->logN_int[k];
      if (an->have_intervals && isfinite(pi->lo)) dt_csv_fixed(w, fr->comp[k].logN - pi->lo, 4);
      else dt_csv_empty(w);
      if (an->have_intervals && isfinite(pi->hi)) dt_csv_fixed(w, pi->hi - fr->comp[k].logN, 4);
      else dt_csv_empty(w);
      dt_csv_text(w, an->have_intervals && !pi->incomplete ? dt_profile_flag_name(pi->flag) : "");
    } else {
      for (int e = 0; e < 10; e++) dt_csv_empty(w);
    }
    dt_csv_fixed(w, fr->chi2_red, 4);
    dt_csv_long(w, fr->dof);
    dt_csv_fixed(w, fr->bic, 3);
    const dt_analysis_line *a = &sr->line[0], *b = &sr->line[1];
    dt_csv_fixed(w, 1e3 * a->W, 2);
    dt_csv_fixed(w, 1e3 * a->W_err, 2);
    dt_csv_fixed(w, a->W_sig, 2);
    dt_csv_fixed(w, a->logN_aod, 4);
    dt_csv_fixed(w, a->logN_aod_err, 4);
    dt_csv_fixed(w, 1e3 * b->W, 2);
    dt_csv_fixed(w, 1e3 * b->W_err, 2);
    dt_csv_fixed(w, b->logN_aod, 4);
    dt_csv_fixed(w, b->logN_aod_err, 4);
    dt_csv_text(w, dt_systems_saturated(sr->line) ? "1" : "0");
    dt_csv_fixed(w, a->masked_frac, 3);
    /* the limits are given unless the first pass calls the system detected */
    if (sr->suggested != DT_VERDICT_DETECTED) {
      dt_csv_fixed(w, 1e3 * a->W_limit, 2);
      dt_csv_fixed(w, a->logN_limit, 4);
    } else {
      dt_csv_empty(w);
      dt_csv_empty(w);
    }
    dt_csv_text(w, dt_verdict_name(sr->suggested));
    honest_reason(r, j, o, sr->reason, sk == 0 ? set->note : NULL, reason, sizeof reason);
    dt_csv_text(w, reason);
    pos_cells(w, s);
    lsf_cells(w, r, 1);
    tail_cells(w, NULL, 0);
    cover_cells(w, an->doublet, j, fr, k);
    dt_csv_end(w);
  }
}

/* Resolution of doublet d (lsf.h, first found): the command line's value
 * for it, else --resolution-table, else the list's, else the file's widths
 * per pixel, else its header.  *constant: a single value, over any widths
 * per pixel of the spectrum; *label: where it came from.  With widths per
 * pixel the judgement keeps R at the stronger line (or the header's) as
 * its nominal value. */
static int pick_resolution(const config *c, const dt_target_spec *t, const dt_spectrum *s,
                           const dt_doublet *d, dt_judgement *j, int *constant,
                           const char **label, dt_err *e) {
  double R = dt_lsf_per_get(&c->Rper, d->name), F = dt_lsf_per_get(&c->Fper, d->name), tR, tF;
  dt_target_resolution(t, d->name, &tR, &tF);
  j->resolution = 0;
  j->fwhm_kms = 0;
  *constant = 1;
  *label = "option";
  if (R > 0) j->resolution = R;
  else if (F > 0) j->fwhm_kms = F;
  else if (!c->rtable && (tR > 0 || tF > 0)) {
    j->resolution = tR;
    j->fwhm_kms = tR > 0 ? 0 : tF;
    *label = "list";
  } else if (s->lsf_fwhm_kms) {
    *constant = 0;
    *label = s->lsf_from;
    size_t ic = dt_spectrum_index(s, dt_wavelength(0.0, d->line[0].lambda0, j->vsys));
    double fw = ic < s->n ? s->lsf_fwhm_kms[ic] : NAN;
    j->resolution = isfinite(fw) && fw > 0 ? DT_C_KMS / fw : s->resolution;
  } else if (s->resolution > 0) {
    j->resolution = s->resolution;
    *label = "header";
  } else
    return dt_err_set(e, DT_EINVAL, NULL,
                      "no resolving power in the file: give --resolution R, --fwhm KMS or "
                      "--resolution-table FILE");
  return DT_OK;
}

/* The judgement of a first pass of doublet d at vsys: the window (option,
 * else the list's), the continuum order, the resolution (pick_resolution). */
static int setup_judgement(const config *c, const dt_target_spec *t, const dt_spectrum *s,
                           const dt_doublet *d, double vsys, dt_judgement *j, int *constant,
                           const char **label, dt_err *e) {
  snprintf(j->doublet, sizeof j->doublet, "%s", d->name);
  j->vsys = vsys;
  if (c->have_window) {
    j->vlo = c->vlo;
    j->vhi = c->vhi;
  } else if (t->has_window) {
    j->vlo = t->vlo;
    j->vhi = t->vhi;
  }
  if (c->have_order) j->cont_order = c->cont_order;
  return pick_resolution(c, t, s, d, j, constant, label, e);
}

/* Both lines of the doublet at vsys must fall inside the data. */
static int check_coverage(const dt_spectrum *s, const dt_doublet *d, double vsys,
                          dt_err *e) {
  double lo = s->wave[0], hi = s->wave[s->n - 1];
  for (int l = 0; l < 2; l++) {
    double lam = dt_wavelength(0.0, d->line[l].lambda0, vsys);
    if (lam < lo || lam > hi)
      return dt_err_set(e, DT_ERANGE, NULL,
                        "%s (%.2f A at vsys %g km/s) lies outside the data (%.2f-%.2f A)",
                        d->line[l].label, lam, vsys, lo, hi);
  }
  return DT_OK;
}

/* A --window must hold enough pixels to fit a line in; otherwise the core
 * would report the window as masked, which misleads. */
#define FIT_MIN_WINDOW_PIX 10

static int check_window(const config *c, const dt_target_spec *t, const dt_judgement *j,
                        const dt_spectrum *s, dt_err *e) {
  if (!c->have_window && !t->has_window) return DT_OK;
  double pix = dt_spectrum_pixel_kms(s), npix = (j->vhi - j->vlo) / pix;
  if (pix > 0 && npix < FIT_MIN_WINDOW_PIX)
    return dt_err_set(e, DT_EINVAL, NULL,
                      "the velocity window %g:%g km/s spans %.1f pixels of %.1f km/s: too "
                      "narrow to fit a line (at least %d pixels); widen %s",
                      j->vlo, j->vhi, npix, pix, FIT_MIN_WINDOW_PIX,
                      c->have_window ? "--window" : "the list's window=");
  return DT_OK;
}

/* The systems of a spectrum: the command line's target range and
 * Milky-Way width over the list's, the command line's systems then the
 * list line's; the window widened to cover them unless one was given. */
static int setup_systems(const config *c, const dt_target_spec *t, const dt_spectrum *s,
                         const dt_doublet *d, dt_judgement *j, dt_system_set *set, dt_err *e) {
  dt_system_opts so = c->systems;
  if (!so.has_target && t->systems.has_target) {
    so.has_target = 1;
    so.target_vlo = t->systems.target_vlo;
    so.target_vhi = t->systems.target_vhi;
  }
  for (size_t k = 0; k < t->systems.nextra; k++) {
    int st = dt_system_opts_add(&so, &t->systems.extra[k], e);
    if (st != DT_OK) return st;
  }
  double fw = j->resolution > 0 ? DT_C_KMS / j->resolution : j->fwhm_kms;
  return dt_systems_setup(&so, j->vsys, s, d, fw, c->have_window || t->has_window, &j->vlo,
                          &j->vhi, set, e);
}

/* Fit one spectrum (one row of a table, or the only one) for one doublet. */
static void fit_one_doublet(run *r, const dt_target_spec *t, long row, const char *dname) {
  const config *c = r->cfg;
  dt_err e;
  dt_err_clear(&e);
  double vsys = c->have_vsys ? c->vsys : (t->has_vsys ? t->vsys : 0.0);
  dt_read_opts ro = c->ropts;
  ro.row = row;
  if (t->air) ro.air = 1;
  if (t->has_pos) ro.has_pos = 1, ro.ra = t->ra, ro.dec = t->dec;
  if (t->frame != DT_FRAME_UNSET) ro.in_frame = t->frame;
  dt_spectrum *s = NULL;
  dt_analysis *an = NULL;
  int st = dt_spectrum_read(t->path, &ro, &s, &e);
  const dt_doublet *d = NULL;
  if (st == DT_OK) {
    d = dt_atomic_find(r->atomic, dname);
    if (!d) st = dt_err_set(&e, DT_ENOTFOUND, NULL, "unknown doublet '%s'", dname);
  }
  dt_judgement j;
  dt_judgement_init(&j);
  int lsf_constant = 1;
  r->lsf_label = NULL;
  r->lsf_fwhm = 0;
  if (st == DT_OK) {
    st = setup_judgement(c, t, s, d, vsys, &j, &lsf_constant, &r->lsf_label, &e);
  }
  if (st == DT_OK) st = check_coverage(s, d, vsys, &e);
  if (st == DT_OK) st = check_window(c, t, &j, s, &e);
  dt_system_set set;
  memset(&set, 0, sizeof set);
  if (st == DT_OK) st = setup_systems(c, t, s, d, &j, &set, &e);
  dt_autofit_out o;
  memset(&o, 0, sizeof o);
  if (st == DT_OK) {
    an = dt_analysis_alloc(s, r->atomic);
    if (!an) st = dt_err_set(&e, DT_ENOMEM, NULL, "out of memory");
  }
  if (st == DT_OK) {
    dt_analysis_opts ao;
    dt_analysis_opts_init(&ao);
    ao.limit_nsigma = c->limit_nsigma;
    ao.limit_b = c->limit_b;
    ao.cog = r->cog;
    ao.covariance_only = c->cov_only;
    ao.joint_cont = (size_t)c->joint_cont;
    if (c->hyperfine || t->hyperfine) ao.hyperfine = r->hfs;
    j.hyperfine = c->hyperfine || t->hyperfine;
    ao.lsf_constant = lsf_constant;
    dt_analysis_set_opts(an, &ao);
    dt_autofit_opts fo;
    dt_autofit_opts_init(&fo);
    fo.ncomp = c->ncomp;
    fo.nseed = c->nseed;
    for (size_t k = 0; k < c->nseed; k++) fo.seed_v[k] = c->seed_v[k];
    st = dt_autofit_run(an, &j, &fo, &o, &e);
    if ((st == DT_OK || st == DT_ENOCONV) &&
        (c->covering || (t->has_covering && t->covering))) {
      /* partial covering: the first pass's components fitted again */
      int cs = dt_analysis_cover_refit(an, &j, &o.an, &e);
      if (cs != DT_OK) st = cs;
    }
  }
  long shown_row = s ? s->row : row;
  if (an) r->lsf_fwhm = dt_analysis_lsf_fwhm(an);
  if (st == DT_OK || st == DT_ENOCONV) {
    dt_system_result res[DT_MAX_SYSTEMS];
    dt_systems_results(an, &set, &j, &o, st, res);
    if (set.mw_joined) r->mw_joined++;
    write_result(r, t, s, shown_row, &j, &o, st, &set, res);
    r->fitted++;
    if (st == DT_ENOCONV) r->noconv++;
  } else {
    report(r, t->path, shown_row, &e);
    write_failed(r, t, s, shown_row, d ? d->name : dname, vsys, &e);
    r->failed++;
  }
  dt_analysis_free(an);
  dt_spectrum_free(s);
}

/* ---- several doublets ------------------------------------------------ */

/* The doublets of an input: --doublet's, else the list line's (both may
 * be comma lists), else Na I.  Returns how many (0 after an error in e). */
static size_t doublet_names(const config *c, const dt_target_spec *t,
                            char names[DT_JOINT_MAX_SPECIES][16], dt_err *e) {
  if (c->ndoub) {
    memcpy(names, c->doub, sizeof c->doub);
    return c->ndoub;
  }
  const char *text = t->doublet[0] ? t->doublet : "NaI";
  size_t n = 0;
  char buf[sizeof t->doublet];
  snprintf(buf, sizeof buf, "%s", text);
  char *save = NULL;
  for (char *tok = strtok_r(buf, ",", &save); tok; tok = strtok_r(NULL, ",", &save)) {
    while (*tok == ' ') tok++;
    if (!*tok) continue;
    if (n == DT_JOINT_MAX_SPECIES) {
      dt_err_set(e, DT_EINVAL, "doublet", "more than %d doublets in '%s'", DT_JOINT_MAX_SPECIES,
                 text);
      return 0;
    }
    int dup = 0;
    for (size_t q = 0; q < n; q++) dup |= strcasecmp(names[q], tok) == 0;
    if (!dup) snprintf(names[n++], 16, "%s", tok);
  }
  if (n == 0) dt_err_set(e, DT_EINVAL, "doublet", "no doublet in '%s'", text);
  return n;
}

/* Is any parameter of component k of a joint fit within 1% of the end of
 * its range (the logistic transforms of joint.h: log N, ln b, ln T)? */
static int joint_at_bound(const dt_joint_result *fr, size_t k) {
  const double nlo = DT_FIT_LOGN_MIN, nhi = DT_FIT_LOGN_MAX, m = 0.01;
  const double blo = log(DT_FIT_B_MIN), bhi = log(DT_FIT_B_MAX);
  for (size_t s = 0; s < fr->nspec; s++) {
    double n = fr->comp[s][k].logN, b = log(fr->comp[s][k].b);
    if (n < nlo + m * (nhi - nlo) || n > nhi - m * (nhi - nlo)) return 1;
    if (fr->btie != DT_JOINT_B_THERMAL && (b < blo + m * (bhi - blo) || b > bhi - m * (bhi - blo)))
      return 1;
  }
  if (fr->btie == DT_JOINT_B_THERMAL) {
    double t = log(fr->T[k]), tlo = log(DT_JOINT_T_MIN), thi = log(DT_JOINT_T_MAX);
    if (t < tlo + m * (thi - tlo) || t > thi - m * (thi - tlo)) return 1;
  }
  return 0;
}

/* The rows of one species of a joint fit: one per component (its values,
 * the joint fit's chi2, dof and BIC, the doublet's detection and, when not
 * detected, its limit; the component's N/sigma in the reason), or one with
 * empty component fields when there is none. */
static void write_joint_species(run *r, const dt_target_spec *t, const dt_spectrum *s, long row,
                                const dt_judgement *j, const dt_joint_out *o, size_t q, int st,
                                const dt_system_set *set, const char *why) {
  const dt_joint_species_out *so = &o->sp[q];
  const dt_joint_result *fr = &o->fit;
  dt_csv *w = &r->csv;
  size_t nrows = so->ncomp ? so->ncomp : 1;
  for (size_t k = 0; k < nrows; k++) {
    int has = k < so->ncomp;
    size_t sk = has ? dt_systems_of(set, so->comp[k].v) : 0;
    row_head(r, t, s, row, so->d ? so->d->name : so->doublet, set->sys[sk].name, j->vsys,
             st == DT_OK ? "ok" : "not-converged");
    dt_csv_long(w, (long)so->ncomp);
    if (has) {
      dt_csv_long(w, (long)k + 1);
      dt_csv_fixed(w, so->comp[k].v, 3);
      dt_csv_fixed(w, so->err[k].v, 3);
      dt_csv_fixed(w, so->comp[k].b, 3);
      dt_csv_fixed(w, so->err[k].b, 3);
      dt_csv_fixed(w, so->comp[k].logN, 4);
      dt_csv_fixed(w, so->err[k].logN, 4);
      for (int e = 0; e < 3; e++) dt_csv_empty(w);  /* no profile intervals */
    } else {
      for (int e = 0; e < 10; e++) dt_csv_empty(w);
    }
    dt_csv_fixed(w, fr->chi2_red, 4);
    dt_csv_long(w, fr->dof);
    dt_csv_fixed(w, fr->bic, 3);
    for (int e = 0; e < 11; e++) dt_csv_empty(w);   /* W_mA .. masked_frac */
    /* the verdict and limits per doublet, as a single fit gives them per
     * system: detected when any of its components is significant */
    int det = so->any_detected;
    if (!det) {
      dt_csv_fixed(w, 1e3 * so->W_limit, 2);
      dt_csv_fixed(w, so->logN_limit, 4);
    } else {
      dt_csv_empty(w);
      dt_csv_empty(w);
    }
    dt_csv_text(w, det ? "detected" : "not-detected");
    char reason[320];
    size_t len = (size_t)snprintf(reason, sizeof reason, "%s", why);
    if (has && len < sizeof reason)
      len += (size_t)snprintf(reason + len, sizeof reason - len, "; N/sigma %.1f%s",
                              so->N_sig[k], so->detected[k] ? "" : " (not significant)");
    if (has && joint_at_bound(fr, k) && len < sizeof reason)
      snprintf(reason + len, sizeof reason - len, "; parameters at the limit of their range");
    dt_csv_text(w, reason);
    pos_cells(w, s);
    lsf_cells(w, r, 1);
    tail_cells(w, has ? fr : NULL, k);
    cover_cells(w, NULL, NULL, NULL, 0);
    dt_csv_end(w);
  }
}

/* A species set aside (not covered, unknown): one row saying why. */
static void write_joint_missing(run *r, const dt_target_spec *t, const dt_spectrum *s, long row,
                                const char *name, double vsys, const dt_err *why) {
  char msg[sizeof why->where + sizeof why->what + 48];
  if (why->where[0]) snprintf(msg, sizeof msg, "left out of the joint fit: %s: %s", why->where, why->what);
  else snprintf(msg, sizeof msg, "left out of the joint fit: %s", why->what);
  row_head(r, t, s, row, name, "", vsys,
           why->code == DT_ERANGE || why->code == DT_EMASKED ? "not-covered" : "failed");
  for (size_t k = 10; k + 1 + NPOSCOLUMNS + NLSFCOLUMNS + NTAILCOLUMNS + NCOVERCOLUMNS < NCOLUMNS;
       k++)
    dt_csv_empty(&r->csv);
  dt_csv_text(&r->csv, msg);
  pos_cells(&r->csv, s);
  lsf_cells(&r->csv, r, 0);
  tail_cells(&r->csv, NULL, 0);
  cover_cells(&r->csv, NULL, NULL, NULL, 0);
  dt_csv_end(&r->csv);
}

/* Fit one spectrum jointly over the doublets names[0..n): the first that
 * the spectrum covers leads (its settings, systems and window), the
 * first pass finds the components in the strongest, the rows come per
 * doublet in the order given. */
static void fit_joint(run *r, const dt_target_spec *t, long row,
                      char names[DT_JOINT_MAX_SPECIES][16], size_t n) {
  const config *c = r->cfg;
  dt_err e;
  dt_err_clear(&e);
  double vsys = c->have_vsys ? c->vsys : (t->has_vsys ? t->vsys : 0.0);
  int lsf_constant = 1;
  r->lsf_label = NULL;
  r->lsf_fwhm = 0;
  dt_read_opts ro = c->ropts;
  ro.row = row;
  if (t->air) ro.air = 1;
  if (t->has_pos) ro.has_pos = 1, ro.ra = t->ra, ro.dec = t->dec;
  if (t->frame != DT_FRAME_UNSET) ro.in_frame = t->frame;
  dt_spectrum *s = NULL;
  int st = dt_spectrum_read(t->path, &ro, &s, &e);
  /* the lead: the first known doublet the spectrum covers */
  size_t lead = n;
  dt_err first_e;
  dt_err_clear(&first_e);
  for (size_t q = 0; st == DT_OK && q < n && lead == n; q++) {
    const dt_doublet *d = dt_atomic_find(r->atomic, names[q]);
    dt_err ce;
    if (!d) dt_err_set(&ce, DT_ENOTFOUND, NULL, "unknown doublet '%s'", names[q]);
    else if (check_coverage(s, d, vsys, &ce) == DT_OK) lead = q;
    if (q == 0 && lead != 0) first_e = ce;
  }
  if (st == DT_OK && lead == n)
    st = dt_err_set(&e, DT_ERANGE, NULL, "none of the doublets is covered (%s: %s)", names[0],
                    first_e.what);
  const dt_doublet *d = st == DT_OK ? dt_atomic_find(r->atomic, names[lead]) : NULL;
  dt_judgement j;
  dt_judgement_init(&j);
  if (st == DT_OK) {
    st = setup_judgement(c, t, s, d, vsys, &j, &lsf_constant, &r->lsf_label, &e);
    /* the lead doublet's width at its stronger line (lsf_fwhm_kms) */
    r->lsf_fwhm = j.resolution > 0 ? DT_C_KMS / j.resolution : j.fwhm_kms;
  }
  if (st == DT_OK) st = check_window(c, t, &j, s, &e);
  dt_system_set set;
  memset(&set, 0, sizeof set);
  if (st == DT_OK) st = setup_systems(c, t, s, d, &j, &set, &e);
  dt_joint_analysis *ja = NULL;
  dt_joint_out *o = NULL;
  size_t strongest = 0;
  const char *linked[DT_JOINT_MAX_SPECIES];
  size_t nl = 0;
  for (size_t q = 0; q < n; q++)
    if (q != lead) linked[nl++] = names[q];
  if (st == DT_OK) {
    ja = dt_joint_analysis_alloc(s, r->atomic);
    o = malloc(sizeof *o);
    if (!ja || !o) st = dt_err_set(&e, DT_ENOMEM, NULL, "out of memory");
  }
  if (st == DT_OK) {
    dt_joint_opts jo;
    dt_joint_opts_init(&jo);
    jo.an.limit_nsigma = c->limit_nsigma;
    jo.an.limit_b = c->limit_b;
    jo.an.cog = r->cog;
    jo.an.covariance_only = c->cov_only;
    if (c->hyperfine || t->hyperfine) jo.an.hyperfine = r->hfs;
    j.hyperfine = c->hyperfine || t->hyperfine;
    jo.an.lsf_constant = lsf_constant;
    /* each doublet's own resolution (--resolution NaI:4800,CaII:3600, the
     * list's R=, the file's widths at its lines) */
    for (size_t q = 0; q < n && jo.nres < DT_JOINT_MAX_SPECIES; q++) {
      const dt_doublet *dq = dt_atomic_find(r->atomic, names[q]);
      dt_judgement *rj = malloc(sizeof *rj);
      int cq;
      const char *lq;
      dt_err eq;
      if (dq && rj) {
        *rj = j;
        if (pick_resolution(c, t, s, dq, rj, &cq, &lq, &eq) == DT_OK) {
          snprintf(jo.res[jo.nres].doublet, sizeof jo.res[0].doublet, "%s", dq->name);
          jo.res[jo.nres].resolution = rj->resolution;
          jo.res[jo.nres].fwhm_kms = rj->fwhm_kms;
          jo.nres++;
        }
      }
      free(rj);
    }
    dt_joint_analysis_set_opts(ja, &jo);
    dt_autofit_opts fo;
    dt_autofit_opts_init(&fo);
    fo.ncomp = c->ncomp;
    fo.nseed = c->nseed;
    for (size_t k = 0; k < c->nseed; k++) fo.seed_v[k] = c->seed_v[k];
    st = dt_joint_autofit_run(ja, &j, linked, nl, c->btie, &fo, 1, o, &strongest, &e);
  }
  long shown_row = s ? s->row : row;
  if (st == DT_OK || st == DT_ENOCONV) {
    char why[200], fitted[120] = "";
    for (size_t i = 0; i < o->nspec; i++)
      if (o->sp[i].fit_index >= 0) {
        size_t len = strlen(fitted);
        snprintf(fitted + len, sizeof fitted - len, "%s%s", len ? "+" : "", o->sp[i].d->name);
      }
    snprintf(why, sizeof why, "joint fit of %s (b %s); components from %s", fitted,
             dt_joint_btie_name(c->btie),
             o->sp[strongest].d ? o->sp[strongest].d->name : o->sp[strongest].doublet);
    if (set.mw_joined) r->mw_joined++;
    /* rows in the order the doublets were given (o->sp: the lead first) */
    for (size_t q = 0; q < n; q++) {
      size_t i = 0;
      if (q != lead) /* as given to the analysis (which skips a name given twice) */
        for (i = 1; i < o->nspec && strcmp(o->sp[i].doublet, names[q]); i++) {}
      if (i >= o->nspec) continue;
      const dt_joint_species_out *so = &o->sp[i];
      if (so->status == DT_OK && so->fit_index >= 0)
        write_joint_species(r, t, s, shown_row, &j, o, i, st, &set, why);
      else
        write_joint_missing(r, t, s, shown_row, so->d ? so->d->name : names[q], vsys, &so->why);
    }
    r->fitted++;
    if (st == DT_ENOCONV) r->noconv++;
  } else {
    report(r, t->path, shown_row, &e);
    for (size_t q = 0; q < n; q++) {
      const dt_doublet *dq = dt_atomic_find(r->atomic, names[q]);
      write_failed(r, t, s, shown_row, dq ? dq->name : names[q], vsys, &e);
    }
    r->failed++;
  }
  free(o);
  dt_joint_analysis_free(ja);
  dt_spectrum_free(s);
}

/* Fit one spectrum: jointly, or each doublet on its own. */
static void fit_one(run *r, const dt_target_spec *t, long row) {
  const config *c = r->cfg;
  char names[DT_JOINT_MAX_SPECIES][16];
  dt_err e;
  dt_err_clear(&e);
  size_t n = doublet_names(c, t, names, &e);
  if (n == 0) {
    report(r, t->path, row, &e);
    write_failed(r, t, NULL, row, t->doublet, c->have_vsys ? c->vsys : t->vsys, &e);
    r->failed++;
    return;
  }
  if (c->joint) {
    fit_joint(r, t, row, names, n);
    return;
  }
  /* counted once per spectrum: fitted when every doublet was, failed
   * when any failed */
  long fitted = r->fitted, failed = r->failed, noconv = r->noconv, mw = r->mw_joined;
  for (size_t q = 0; q < n; q++) fit_one_doublet(r, t, row, names[q]);
  if (n > 1) {
    int anyfail = r->failed > failed;
    r->failed = failed + anyfail;
    r->fitted = fitted + !anyfail;
    r->noconv = noconv + (r->noconv > noconv);
    r->mw_joined = mw + (r->mw_joined > mw);
  }
}

/* One input: every row of a multi-row table (or --row), else the spectrum. */
static void fit_input(run *r, const dt_target_spec *t) {
  const config *c = r->cfg;
  long row = c->row > 0 ? c->row : t->row;
  if (row > 0) {
    fit_one(r, t, row);
    return;
  }
  long count = 1;
  dt_err e;
  if (dt_spectrum_count(t->path, &c->ropts, &count, &e) != DT_OK) {
    const char *dname = c->doublet ? c->doublet : (t->doublet[0] ? t->doublet : "NaI");
    double vsys = c->have_vsys ? c->vsys : (t->has_vsys ? t->vsys : 0.0);
    report(r, t->path, 0, &e);
    write_failed(r, t, NULL, 0, dname, vsys, &e);
    r->failed++;
    return;
  }
  if (count <= 1) {
    fit_one(r, t, 0);
    return;
  }
  for (long k = 1; k <= count; k++) fit_one(r, t, k);
}

/* ---- inputs as tasks of the pool -------------------------------------- */

/* One input in flight: a copy of the run whose table writer and messages
 * go to buffers of their own, the target, and (for a bad list line) the
 * error to report instead of fitting. */
typedef struct {
  run r;
  dt_target_spec t;
  int bad;
  dt_err err;
  char *out, *msg;              /* the buffers of r.csv and r.msg */
  size_t nout, nmsg;
} fit_task;

/* On a worker: fit the input (or report its bad line) into the buffers. */
static void task_work(void *ctx, void *arg) {
  (void)ctx;
  fit_task *k = arg;
  run *r = &k->r;
  if (k->bad) {
    report(r, k->t.path, 0, &k->err);
    write_failed(r, &k->t, NULL, 0, r->cfg->doublet ? r->cfg->doublet : "", NAN, &k->err);
    r->failed++;
  } else {
    fit_input(r, &k->t);
  }
}

/* On the main thread, in input order: the task's rows and messages out. */
static void task_done(void *ctx, void *arg) {
  run *r = ctx;
  fit_task *k = arg;
  fclose(k->r.csv.f);
  fclose(k->r.msg);
  if (k->nmsg) {
    bar_clear(r);
    fwrite(k->msg, 1, k->nmsg, stderr);
  }
  fwrite(k->out, 1, k->nout, r->csv.f);
  r->fitted += k->r.fitted;
  r->failed += k->r.failed;
  r->noconv += k->r.noconv;
  r->mw_joined += k->r.mw_joined;
  r->inflight--;
  free(k->out);
  free(k->msg);
  free(k);
  bar_draw(r);
}

/* Hand input r->index to the pool (t, or the bad line's error e). */
static void submit(run *r, const dt_target_spec *t, const char *file, const dt_err *e) {
  fit_task *k = malloc(sizeof *k);
  FILE *out = NULL, *msg = NULL;
  if (k) {
    out = open_memstream(&k->out, &k->nout);
    msg = open_memstream(&k->msg, &k->nmsg);
  }
  if (!k || !out || !msg) {
    if (out) fclose(out), free(k->out);
    if (msg) fclose(msg), free(k->msg);
    free(k);
    r->oom = 1;
    return;
  }
  k->r = *r;
  k->r.msg = msg;
  k->r.progress = 0;
  k->r.bar_shown = 0;
  k->r.pool = NULL;
  k->r.fitted = k->r.failed = k->r.noconv = k->r.mw_joined = 0;
  dt_csv_init(&k->r.csv, out);
  k->r.csv.one_line = r->csv.one_line;
  k->bad = e != NULL;
  if (t) k->t = *t;
  else dt_target_spec_init(&k->t, file);
  if (e) k->err = *e;
  else dt_err_clear(&k->err);
  r->inflight++;
  batch_submit(r->pool, k);
}

/* Next input of the run: counts it, and fits it when it is in our shard. */
static void take(run *r, const dt_target_spec *t) {
  if (r->oom || r->clash || (r->clash = cli_out_is_input(r->outf, t->path))) return;
  r->index = r->ninputs++;
  if (r->index % r->cfg->shard_n == r->cfg->shard_k) submit(r, t, NULL, NULL);
  bar_draw(r);
}

/* A bad line of a list is an input too (it has an index in every shard). */
static void take_bad(run *r, const char *file, const dt_err *e) {
  if (r->oom) return;
  r->index = r->ninputs++;
  if (r->index % r->cfg->shard_n == r->cfg->shard_k) submit(r, NULL, file, e);
  bar_draw(r);
}

static void run_list(run *r, const char *path) {
  dt_targets *l = NULL;
  dt_err e;
  struct stat st;
  if (stat(path, &st) == 0 && S_ISDIR(st.st_mode)) {
    dt_err_set(&e, DT_EIO, NULL, "is a directory, not a target list");
    take_bad(r, path, &e);
    return;
  }
  if (dt_targets_open(path, &l, &e) != DT_OK) {
    take_bad(r, path, &e);
    return;
  }
  if (r->cfg->air) dt_targets_set_air(l, 1);
  dt_target_spec *t = malloc(sizeof *t);
  if (!t) {
    dt_err_set(&e, DT_ENOMEM, NULL, "out of memory");
    take_bad(r, path, &e);
    dt_targets_close(l);
    return;
  }
  for (;;) {
    int got = 0;
    int st = dt_targets_next(l, t, &got, &e);
    if (st != DT_OK) {
      take_bad(r, path, &e);
      continue;
    }
    if (!got || r->clash || r->oom) break;
    take(r, t);
  }
  free(t);
  dt_targets_close(l);
}

static void run_files_from(run *r, const char *path) {
  FILE *f = strcmp(path, "-") ? fopen(path, "r") : stdin;
  dt_err e;
  if (!f) {
    dt_err_set(&e, DT_EIO, NULL, "cannot open: %s", strerror(errno));
    take_bad(r, path, &e);
    return;
  }
  dt_target_spec *t = malloc(sizeof *t);
  char *line = NULL;
  size_t cap = 0;
  ssize_t len;
  while (t && !r->clash && !r->oom && (len = getline(&line, &cap, f)) != -1) {
    while (len > 0 && (line[len - 1] == '\n' || line[len - 1] == '\r')) line[--len] = '\0';
    char *p = line;
    while (*p == ' ' || *p == '\t') p++;
    if (!*p || *p == '#') continue;
    dt_target_spec_init(t, p);
    take(r, t);
  }
  free(line);
  free(t);
  if (f != stdin) fclose(f);
}

/* ---- options ---------------------------------------------------------- */

static int parse_shard(const char *text, long *k, long *n) {
  const char *slash = text ? strchr(text, '/') : NULL;
  char a[32], b[32];
  if (!slash) {
    cli_errorf("--shard: '%s' is not K/N (e.g. 0/4)", text ? text : "");
    return 1;
  }
  snprintf(a, sizeof a, "%.*s", (int)(slash - text), text);
  snprintf(b, sizeof b, "%s", slash + 1);
  if (cli_parse_long("--shard", a, k) || cli_parse_long("--shard", b, n)) return 1;
  if (*n < 1 || *k < 0 || *k >= *n) {
    cli_errorf("--shard %s: need 0 <= K < N and N >= 1", text);
    return 1;
  }
  return 0;
}

static int parse_seeds(const char *text, config *c) {
  char buf[512];
  snprintf(buf, sizeof buf, "%s", text ? text : "");
  c->nseed = 0;
  char *save = NULL;
  for (char *tok = strtok_r(buf, ",", &save); tok; tok = strtok_r(NULL, ",", &save)) {
    if (c->nseed == DT_MAX_COMP) {
      cli_errorf("--seed-v: at most %d velocities", DT_MAX_COMP);
      return 1;
    }
    double v;
    if (cli_parse_double("--seed-v", tok, &v)) return 1;
    if (!isfinite(v)) {
      cli_errorf("--seed-v: '%s' is not a finite velocity", tok);
      return 1;
    }
    c->seed_v[c->nseed++] = v;
  }
  if (c->nseed == 0) {
    cli_errorf("--seed-v: no velocity given");
    return 1;
  }
  return 0;
}

/* --doublet NAME[,NAME...]: at most DT_JOINT_MAX_SPECIES names, each once. */
static int parse_doublets(const char *text, config *c) {
  char buf[256];
  snprintf(buf, sizeof buf, "%s", text ? text : "");
  c->doublet = text;
  c->ndoub = 0;
  char *save = NULL;
  for (char *tok = strtok_r(buf, ",", &save); tok; tok = strtok_r(NULL, ",", &save)) {
    while (*tok == ' ') tok++;
    if (!*tok) continue;
    if (c->ndoub == DT_JOINT_MAX_SPECIES) {
      cli_errorf("--doublet: at most %d doublets", DT_JOINT_MAX_SPECIES);
      return 1;
    }
    if (strlen(tok) >= sizeof c->doub[0]) {
      cli_errorf("--doublet: '%s' is too long for a doublet name", tok);
      return 1;
    }
    for (size_t q = 0; q < c->ndoub; q++)
      if (strcasecmp(c->doub[q], tok) == 0) {
        cli_errorf("--doublet: '%s' is named twice", tok);
        return 1;
      }
    snprintf(c->doub[c->ndoub++], sizeof c->doub[0], "%s", tok);
  }
  if (c->ndoub == 0) {
    cli_errorf("--doublet: no doublet named");
    return 1;
  }
  return 0;
}

/* The run's settings as "# key=value" lines above the header: what was
 * asked for, so that `merge` can refuse shards run differently.  Every
 * setting is written (empty when not given), in a fixed order. */
static void write_settings(dt_csv *w, const config *c) {
  char buf[1024];
  dt_csv_comment(w, "program", "doubletty fit " DT_VERSION);
  snprintf(buf, sizeof buf, "%ld/%ld", c->shard_k, c->shard_n);
  dt_csv_comment(w, "shard", buf);
  dt_csv_comment(w, "doublet", c->doublet ? c->doublet : "");
  /* a plain value as a number (as before), values per doublet as given */
  buf[0] = '\0';
  if (c->have_R) {
    if (strchr(c->R_text, ':')) snprintf(buf, sizeof buf, "%s", c->R_text);
    else dt_num_format(buf, sizeof buf, dt_lsf_per_get(&c->Rper, ""));
  }
  dt_csv_comment(w, "resolution", buf);
  buf[0] = '\0';
  if (c->have_fwhm) {
    if (strchr(c->F_text, ':')) snprintf(buf, sizeof buf, "%s", c->F_text);
    else dt_num_format(buf, sizeof buf, dt_lsf_per_get(&c->Fper, ""));
  }
  dt_csv_comment(w, "fwhm", buf);
  dt_csv_comment(w, "resolution-table", c->rtable ? dt_lsf_table_name(c->rtable) : "");
  buf[0] = '\0';
  if (c->have_vsys) dt_num_format(buf, sizeof buf, c->vsys);
  dt_csv_comment(w, "vsys", buf);
  buf[0] = '\0';
  if (c->have_window) {
    char lo[40], hi[40];
    dt_num_format(lo, sizeof lo, c->vlo);
    dt_num_format(hi, sizeof hi, c->vhi);
    snprintf(buf, sizeof buf, "%s:%s", lo, hi);
  }
  dt_csv_comment(w, "window", buf);
  snprintf(buf, sizeof buf, "%d", c->ncomp);
  dt_csv_comment(w, "ncomp", buf);
  size_t len = 0;
  buf[0] = '\0';
  for (size_t k = 0; k < c->nseed && len + 48 < sizeof buf; k++) {
    if (k) buf[len++] = ',';
    dt_num_format(buf + len, sizeof buf - len, c->seed_v[k]);
    len = strlen(buf);
  }
  dt_csv_comment(w, "seed-v", buf);
  buf[0] = '\0';
  if (c->have_order) snprintf(buf, sizeof buf, "%d", c->cont_order);
  dt_csv_comment(w, "continuum-order", buf);
  snprintf(buf, sizeof buf, "%d", c->joint_cont);
  dt_csv_comment(w, "joint-continuum", buf);
  dt_num_format(buf, sizeof buf, c->limit_nsigma);
  dt_csv_comment(w, "limit-sigma", buf);
  dt_num_format(buf, sizeof buf, c->limit_b);
  dt_csv_comment(w, "limit-b", buf);
  dt_csv_comment(w, "intervals", c->cov_only ? "covariance" : "profile");
  dt_csv_comment(w, "covering", c->covering ? "yes" : "");
  dt_csv_comment(w, "atomic", c->atomic_file ? c->atomic_file : "");
  if (c->hyperfine) /* only when asked for: without it the header is as before */
    dt_csv_comment(w, "hyperfine", c->hfs_file ? c->hfs_file : "yes");
  snprintf(buf, sizeof buf, "%ld", c->row);
  dt_csv_comment(w, "row", c->row ? buf : "");
  snprintf(buf, sizeof buf, "%s:%s:%s:%s", c->ropts.wave_col ? c->ropts.wave_col : "",
           c->ropts.flux_col ? c->ropts.flux_col : "", c->ropts.err_col ? c->ropts.err_col : "",
           c->ropts.mask_col ? c->ropts.mask_col : "");
  dt_csv_comment(w, "columns", buf);
  dt_csv_comment(w, "air", c->air ? "yes" : "");
  dt_csv_comment(w, "frame", dt_frame_name(c->ropts.out_frame ? c->ropts.out_frame : DT_FRAME_BARYCENT));
  dt_csv_comment(w, "in-frame", dt_frame_name(c->ropts.in_frame));
  buf[0] = '\0';
  if (c->ropts.has_site)
    dt_num_snprintf(buf, sizeof buf, "%.6f,%.6f,%.1f", c->ropts.site_lon, c->ropts.site_lat, c->ropts.site_height);
  dt_csv_comment(w, "site", buf);
  buf[0] = '\0';
  if (c->systems.has_target) {
    char lo[40], hi[40];
    dt_num_format(lo, sizeof lo, c->systems.target_vlo);
    dt_num_format(hi, sizeof hi, c->systems.target_vhi);
    snprintf(buf, sizeof buf, "%s:%s", lo, hi);
  }
  dt_csv_comment(w, "target-window", buf);
  buf[0] = '\0';
  if (c->have_mw) dt_num_format(buf, sizeof buf, c->systems.mw_half);
  dt_csv_comment(w, "milky-way", buf);
  dt_system_set us;
  memset(&us, 0, sizeof us);
  us.n = c->systems.nextra;
  memcpy(us.sys, c->systems.extra, us.n * sizeof us.sys[0]);
  dt_systems_format(&us, buf, sizeof buf);
  dt_csv_comment(w, "systems", buf);
  dt_csv_comment(w, "joint", c->joint ? "yes" : "");
  dt_csv_comment(w, "b-tie", c->joint ? dt_joint_btie_name(c->btie) : "");
}

enum {
  O_DOUBLET = 256, O_RESTAB, O_RES, O_FWHM, O_VSYS, O_WINDOW, O_NCOMP, O_SEEDV, O_CORDER, O_JOINT,
  O_LIMSIG, O_ATOMIC, O_ROW, O_WCOL, O_FCOL, O_ECOL, O_MCOL, O_LIST, O_FROM, O_SHARD,
  O_FORCE, O_AIR, O_FRAME, O_INFRAME, O_SITE, O_TWIN, O_SYSTEM, O_MW, O_LIMB, O_JOBS, O_INTERVALS,
  O_HFS, O_HFSTAB,
  O_JOINTFIT, O_BTIE,
  O_COVER
};
static const struct option LONGOPTS[] = {
    {"help", no_argument, NULL, 'h'},
    {"doublet", required_argument, NULL, O_DOUBLET},
    {"resolution", required_argument, NULL, O_RES},
    {"resolution-table", required_argument, NULL, O_RESTAB},
    {"fwhm", required_argument, NULL, O_FWHM},
    {"vsys", required_argument, NULL, O_VSYS},
    {"window", required_argument, NULL, O_WINDOW},
    {"ncomp", required_argument, NULL, O_NCOMP},
    {"seed-v", required_argument, NULL, O_SEEDV},
    {"continuum-order", required_argument, NULL, O_CORDER},
    {"joint-continuum", required_argument, NULL, O_JOINT},
    {"limit-sigma", required_argument, NULL, O_LIMSIG},
    {"limit-b", required_argument, NULL, O_LIMB},
    {"atomic", required_argument, NULL, O_ATOMIC},
    {"row", required_argument, NULL, O_ROW},
    {"wave-col", required_argument, NULL, O_WCOL},
    {"flux-col", required_argument, NULL, O_FCOL},
    {"err-col", required_argument, NULL, O_ECOL},
    {"mask-col", required_argument, NULL, O_MCOL},
    {"list", required_argument, NULL, O_LIST},
    {"files-from", required_argument, NULL, O_FROM},
    {"shard", required_argument, NULL, O_SHARD},
    {"output", required_argument, NULL, 'o'},
    {"force", no_argument, NULL, O_FORCE},
    {"air", no_argument, NULL, O_AIR},
    {"frame", required_argument, NULL, O_FRAME},
    {"in-frame", required_argument, NULL, O_INFRAME},
    {"site", required_argument, NULL, O_SITE},
    {"target-window", required_argument, NULL, O_TWIN},
    {"system", required_argument, NULL, O_SYSTEM},
    {"milky-way", required_argument, NULL, O_MW},
    {"jobs", required_argument, NULL, O_JOBS},
    {"intervals", required_argument, NULL, O_INTERVALS},
    {"hyperfine", no_argument, NULL, O_HFS},
    {"hyperfine-table", required_argument, NULL, O_HFSTAB},
    {"joint", no_argument, NULL, O_JOINTFIT},
    {"b-tie", required_argument, NULL, O_BTIE},
    {"covering", no_argument, NULL, O_COVER},
    {NULL, 0, NULL, 0}};

/* A positive finite option number into *out; 1 after a message otherwise. */
static int positive(const char *opt, const char *v, const char *what, double *out) {
  double x;
  if (cli_parse_double(opt, v, &x)) return 1;
  if (!(x > 0) || !isfinite(x)) {
    cli_errorf("%s: %s must be positive (got %s)", opt, what, v);
    return 1;
  }
  *out = x;
  return 0;
}

/* A whole option number in [lo, hi] into *out; 1 after a message otherwise. */
static int ranged(const char *opt, const char *v, long lo, long hi, long *out) {
  if (cli_parse_long(opt, v, out)) return 1;
  if (*out < lo || *out > hi) {
    cli_errorf("%s: %ld is outside %ld..%ld", opt, *out, lo, hi);
    return 1;
  }
  return 0;
}

/* One option of getopt_long: 0 done, 1 bad value (message printed). */
static int fit_option(int opt, const char *v, config *c, source *src, size_t *nsrc,
                      int *only_files) {
  long l;
  switch (opt) {
  case O_DOUBLET: return parse_doublets(v, c);
  case O_JOINTFIT: c->joint = 1; return 0;
  case O_BTIE:
    if (dt_joint_btie_parse(v, &c->btie) != DT_OK) {
      cli_errorf("--b-tie: '%s' is not same, thermal or free", v);
      return 1;
    }
    c->have_btie = 1;
    return 0;
  case O_RES:
    if (cli_opt_per_doublet("--resolution", v, "R", &c->Rper)) return 1;
    for (int k = 0; k < c->Rper.n; k++)
      if (c->Rper.e[k].value < FIT_MIN_R) {
        cli_errorf("--resolution: R = %g is below %g: a resolving power that low smears a "
                   "doublet beyond fitting (did you mean a FWHM? use --fwhm KMS)",
                   c->Rper.e[k].value, (double)FIT_MIN_R);
        return 1;
      }
    c->R_text = v;
    c->have_R = 1;
    return 0;
  case O_FWHM:
    c->have_fwhm = 1;
    c->F_text = v;
    return cli_opt_per_doublet("--fwhm", v, "the FWHM", &c->Fper);
  case O_RESTAB:
    return cli_opt_resolution_table("fit", v, &c->rtable, &c->ropts);
  case O_VSYS:
    if (cli_parse_double("--vsys", v, &c->vsys)) return 1;
    if (!isfinite(c->vsys) || c->vsys <= -DT_C_KMS) {
      cli_errorf("--vsys: %s km/s is not a velocity", v);
      return 1;
    }
    c->have_vsys = 1;
    return 0;
  case O_WINDOW:
    c->have_window = 1;
    return cli_parse_range("--window", v, &c->vlo, &c->vhi);
  case O_NCOMP:
    if (ranged("--ncomp", v, 0, DT_MAX_COMP, &l)) return 1;
    c->ncomp = (int)l;
    return 0;
  case O_SEEDV: return parse_seeds(v, c);
  case O_CORDER:
    if (ranged("--continuum-order", v, -1, DT_MAX_CONT - 1, &l)) return 1;
    c->cont_order = (int)l;
    c->have_order = 1;
    return 0;
  case O_JOINT:
    if (ranged("--joint-continuum", v, 0, DT_MAX_CONT, &l)) return 1;
    c->joint_cont = (int)l;
    return 0;
  case O_COVER: c->covering = 1; return 0;
  case O_LIMSIG: return positive("--limit-sigma", v, "the significance", &c->limit_nsigma);
  case O_LIMB: return positive("--limit-b", v, "the Doppler parameter", &c->limit_b);
  case O_ATOMIC: c->atomic_file = v; return 0;
  case O_HFS: c->hyperfine = 1; return 0;
  case O_HFSTAB: c->hfs_file = v; c->hyperfine = 1; return 0;
  case O_ROW:
    if (cli_parse_long("--row", v, &l)) return 1;
    if (l < 1) {
      cli_errorf("--row: rows are numbered from 1 (got %ld)", l);
      return 1;
    }
    c->row = l;
    return 0;
  case O_WCOL: c->ropts.wave_col = v; return 0;
  case O_FCOL: c->ropts.flux_col = v; return 0;
  case O_ECOL: c->ropts.err_col = v; return 0;
  case O_MCOL: c->ropts.mask_col = v; return 0;
  case O_LIST:
  case O_FROM:
    src[(*nsrc)++] = (source){opt == O_LIST ? SRC_LIST : SRC_FILES_FROM, v};
    *only_files = 0;
    return 0;
  case O_SHARD: return parse_shard(v, &c->shard_k, &c->shard_n);
  case 'o': c->out_path = v; return 0;
  case O_FORCE: c->force = 1; return 0;
  case O_AIR: c->air = 1; c->ropts.air = 1; return 0;
  case O_FRAME: return cli_opt_frame("fit", v, &c->ropts);
  case O_INFRAME: return cli_opt_in_frame("fit", v, &c->ropts);
  case O_SITE: return cli_opt_site("fit", v, &c->ropts);
  case O_TWIN: return cli_system_option("--target-window", v, &c->systems);
  case O_SYSTEM: return cli_system_option("--system", v, &c->systems);
  case O_MW:
    c->have_mw = 1;
    return cli_system_option("--milky-way", v, &c->systems);
  case O_JOBS: return ranged("--jobs", v, 1, FIT_MAX_JOBS, &c->jobs);
  case O_INTERVALS:
    if (strcmp(v, "profile") && strcmp(v, "covariance")) {
      cli_errorf("--intervals: '%s' is not profile or covariance", v);
      return 1;
    }
    c->cov_only = !strcmp(v, "covariance");
    return 0;
  }
  return 1;
}

/* Options and sources: 0 to run, else the exit status (0 after --help is -1). */
static int parse_args(int argc, char **argv, config *c, source *src, size_t *nsrc,
                      int *only_files) {
  cli_getopt_reset();
  int opt;
  while ((opt = getopt_long(argc, argv, ":ho:", LONGOPTS, NULL)) != -1) {
    if (opt == 'h') {
      usage(stdout);
      return -1;
    }
    if (opt == '?' || opt == ':') return cli_opt_error("fit", opt, argv);
    if (fit_option(opt, optarg, c, src, nsrc, only_files)) return 2;
  }
  for (int i = optind; i < argc; i++) src[(*nsrc)++] = (source){SRC_FILE, argv[i]};
  return 0;
}

int cmd_fit(int argc, char **argv) {
  config c;
  memset(&c, 0, sizeof c);
  c.shard_n = 1;
  c.limit_nsigma = 3.0;
  dt_system_opts_init(&c.systems);
  c.limit_b = DT_ANALYSIS_LIMIT_B;
  source *src = calloc((size_t)argc + 1, sizeof *src);
  size_t nsrc = 0;
  int rc = 2;
  dt_atomic *atomic = NULL;
  dt_cog_cache *cog = NULL; /* made once, shared by the threads */
  dt_hyperfine *hfs = NULL;
  if (!src) {
    cli_errorf("out of memory");
    return 2;
  }
  int only_files = 1;
  int prc = parse_args(argc, argv, &c, src, &nsrc, &only_files);
  if (prc) {
    rc = prc < 0 ? 0 : prc;
    goto done;
  }
  if (nsrc == 0) {
    cli_errorf("fit: no spectrum given");
    usage(stderr);
    goto done;
  }
  if (c.have_btie && !c.joint) {
    cli_errorf("fit: --b-tie applies to joint fits: give --joint too");
    goto done;
  }
  if (c.joint && c.joint_cont > 0) {
    cli_errorf("fit: --joint fits with fixed continua: --joint-continuum is not available with it");
    goto done;
  }
  if (c.joint && c.covering) {
    cli_errorf("fit: partial covering is fitted for one doublet at a time: --covering is not "
               "available with --joint");
    goto done;
  }
  if (c.have_R && c.have_fwhm) {
    cli_errorf("fit: give --resolution or --fwhm, not both");
    goto done;
  }
  if (cli_systems_check(&c.systems)) goto done; /* no overlaps among the systems */
  if (c.ncomp > 0 && c.nseed > 0 && (size_t)c.ncomp != c.nseed) {
    cli_errorf("fit: --ncomp %d disagrees with %zu --seed-v velocities", c.ncomp, c.nseed);
    goto done;
  }
  if (c.nseed > 0) {
    dt_judgement tmp;
    dt_judgement_init(&tmp);
    double lo = c.have_window ? c.vlo : tmp.vlo, hi = c.have_window ? c.vhi : tmp.vhi;
    for (size_t k = 0; k < c.nseed; k++)
      if (c.seed_v[k] <= lo || c.seed_v[k] >= hi) {
        cli_errorf("--seed-v: %g km/s lies outside the velocity window %g:%g", c.seed_v[k],
                   lo, hi);
        goto done;
      }
  }
  atomic = cli_load_atomic(c.atomic_file);
  if (!atomic) goto done;
  for (size_t q = 0; q < c.ndoub; q++)
    if (!dt_atomic_find(atomic, c.doub[q])) {
      char known[256] = "";
      for (size_t k = 0; k < dt_atomic_count(atomic); k++) {
        size_t len = strlen(known);
        snprintf(known + len, sizeof known - len, "%s%s", k ? ", " : "",
                 dt_atomic_get(atomic, k)->name);
      }
      cli_errorf("--doublet: unknown doublet '%s' (known: %s)", c.doub[q], known);
      goto done;
    }
  if (c.joint && c.btie == DT_JOINT_B_THERMAL)
    for (size_t q = 0; q < c.ndoub; q++) {
      double m;
      dt_err me;
      if (dt_element_mass_of(dt_atomic_find(atomic, c.doub[q])->name, &m, &me) != DT_OK) {
        cli_errorf("--b-tie thermal: %s", me.what);
        goto done;
      }
    }
  /* The hyperfine table: for --hyperfine, and for list lines that may say
   * hfs=1. */
  if (c.hyperfine || !only_files) {
    hfs = cli_load_hyperfine(c.hfs_file);
    if (!hfs) goto done;
  }
  cli_out of;
  if ((rc = cli_out_check(&of, "fit", c.out_path, c.force))) goto done;
  rc = 2;
  for (size_t k = 0; k < nsrc; k++)
    if (cli_out_is_input(&of, src[k].arg)) goto done;
  if (cli_out_open(&of)) {
    rc = 1;
    goto done;
  }
  run r;
  memset(&r, 0, sizeof r);
  dt_csv_init(&r.csv, of.f);
  r.csv.one_line = 1; /* merge reads the table line by line */
  r.outf = &of;
  r.atomic = atomic;
  r.cfg = &c;
  r.total = only_files ? (long)nsrc : -1;
  r.progress = isatty(STDERR_FILENO);
  r.cog = cog = dt_cog_cache_alloc(); /* NULL (out of memory): the exact inverse */
  r.hfs = hfs;
  write_settings(&r.csv, &c);
  for (size_t k = 0; k < NCOLUMNS; k++) dt_csv_text(&r.csv, COLUMNS[k]);
  dt_csv_end(&r.csv);
  int jobs = c.jobs > 0 ? (int)c.jobs : batch_cores();
  /* a FITS library built without thread support reads on one thread only */
  if (jobs > 1 && dt_spectrum_threads_init() != DT_OK) jobs = 1;
  r.pool = batch_start(jobs, (size_t)jobs * FIT_WINDOW_PER_JOB, task_work, task_done, &r);
  if (!r.pool) {
    cli_errorf("fit: cannot start %d threads: out of memory or threads", jobs);
    cli_out_abort(&of);
    rc = 1;
    goto done;
  }
  for (size_t k = 0; k < nsrc && !r.clash && !r.oom; k++) {
    if (src[k].kind == SRC_FILE) {
      dt_target_spec t;
      dt_target_spec_init(&t, src[k].arg);
      take(&r, &t);
    } else if (src[k].kind == SRC_LIST) {
      run_list(&r, src[k].arg);
    } else {
      run_files_from(&r, src[k].arg);
    }
    fflush(of.f);
  }
  batch_finish(r.pool);
  bar_clear(&r);
  if (r.oom) {
    cli_errorf("fit: out of memory after %ld inputs", r.ninputs);
    cli_out_abort(&of);
    rc = 1;
    goto done;
  }
  if (r.clash) {
    cli_out_abort(&of);
    rc = 2;
    goto done;
  }
  if (cli_out_commit(&of)) r.failed++;
  if (r.noconv)
    fprintf(stderr, "doubletty: fitted %ld spectra, %ld failed (%ld fits did not converge)\n",
            r.fitted, r.failed, r.noconv);
  else
    fprintf(stderr, "doubletty: fitted %ld spectra, %ld failed\n", r.fitted, r.failed);
  if (r.mw_joined)
    fprintf(stderr,
            "doubletty: in %ld spectra the Milky Way lies in the target's range (vsys too "
            "small to separate them): no milky-way system there (see 'reason')\n",
            r.mw_joined);
  rc = r.failed ? 1 : 0;
done:
  dt_cog_cache_free(cog);
  dt_hyperfine_free(hfs);
  dt_atomic_free(atomic);
  dt_lsf_table_free(c.rtable);
  free(src);
  return rc;
}
