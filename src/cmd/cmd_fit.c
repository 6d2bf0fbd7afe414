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
#include "fit_int.h"

/* Below this resolving power the line-spread function (c/R > 3000 km/s) is
 * wider than the doublet's separation a thousandfold: a fit returns its
 * parameters at their bounds, so such an R is refused as a mistake. */
#define FIT_MIN_R 100

/* --jobs: at most this many threads; inputs in flight per thread (a few
 * kilobytes each: enough that one slow spectrum at the head, whose rows
 * must go out first, does not leave the other threads idle). */
#define FIT_MAX_JOBS 1024
#define FIT_WINDOW_PER_JOB 32



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
          "                          likelihood where the lines are not thin),\n"
          "                          calibrated (profile, its threshold from simulated\n"
          "                          spectra where it is not a parabola: slower) or\n"
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
void fit_report(run *r, const char *file, long row, const dt_err *e) {
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

/* ---- several doublets ------------------------------------------------ */

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
static void task_work(void *ctx, void *arg, int worker) {
  const run *m = ctx;
  fit_task *k = arg;
  run *r = &k->r;
  r->an_slot = m->ans ? &m->ans[worker] : NULL;
  if (k->bad) {
    fit_report(r, k->t.path, 0, &k->err);
    fit_row_failed(r, &k->t, NULL, 0, r->cfg->doublet ? r->cfg->doublet : "", NAN, &k->err);
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
    if (strcmp(v, "profile") && strcmp(v, "covariance") && strcmp(v, "calibrated")) {
      cli_errorf("--intervals: '%s' is not profile, calibrated or covariance", v);
      return 1;
    }
    c->cov_only = !strcmp(v, "covariance");
    c->calibrated = !strcmp(v, "calibrated");
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

/* Options that do not go together, and seeds outside the window: 1 after
 * a message. */
static int check_config(const config *c) {
  if (c->have_btie && !c->joint) {
    cli_errorf("fit: --b-tie applies to joint fits: give --joint too");
    return 1;
  }
  if (c->joint && c->joint_cont > 0) {
    cli_errorf("fit: --joint fits with fixed continua: --joint-continuum is not available with it");
    return 1;
  }
  if (c->joint && c->covering) {
    cli_errorf("fit: partial covering is fitted for one doublet at a time: --covering is not "
               "available with --joint");
    return 1;
  }
  if (c->have_R && c->have_fwhm) {
    cli_errorf("fit: give --resolution or --fwhm, not both");
    return 1;
  }
  if (cli_systems_check(&c->systems)) return 1; /* no overlaps among the systems */
  if (c->ncomp > 0 && c->nseed > 0 && (size_t)c->ncomp != c->nseed) {
    cli_errorf("fit: --ncomp %d disagrees with %zu --seed-v velocities", c->ncomp, c->nseed);
    return 1;
  }
  if (c->nseed > 0) {
    dt_judgement tmp;
    dt_judgement_init(&tmp);
    double lo = c->have_window ? c->vlo : tmp.vlo, hi = c->have_window ? c->vhi : tmp.vhi;
    for (size_t k = 0; k < c->nseed; k++)
      if (c->seed_v[k] <= lo || c->seed_v[k] >= hi) {
        cli_errorf("--seed-v: %g km/s lies outside the velocity window %g:%g", c->seed_v[k],
                   lo, hi);
        return 1;
      }
  }
  return 0;
}

/* Every --doublet known to the table, and for the thermal rule its
 * element's mass: 1 after a message. */
static int check_doublets(const config *c, const dt_atomic *atomic) {
  for (size_t q = 0; q < c->ndoub; q++)
    if (!dt_atomic_find(atomic, c->doub[q])) {
      char known[256] = "";
      for (size_t k = 0; k < dt_atomic_count(atomic); k++) {
        size_t len = strlen(known);
        snprintf(known + len, sizeof known - len, "%s%s", k ? ", " : "",
                 dt_atomic_get(atomic, k)->name);
      }
      cli_errorf("--doublet: unknown doublet '%s' (known: %s)", c->doub[q], known);
      return 1;
    }
  if (c->joint && c->btie == DT_JOINT_B_THERMAL)
    for (size_t q = 0; q < c->ndoub; q++) {
      double m;
      dt_err me;
      if (dt_element_mass_of(dt_atomic_find(atomic, c->doub[q])->name, &m, &me) != DT_OK) {
        cli_errorf("--b-tie thermal: %s", me.what);
        return 1;
      }
    }
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
  if (check_config(&c)) goto done;
  atomic = cli_load_atomic(c.atomic_file);
  if (!atomic) goto done;
  if (check_doublets(&c, atomic)) goto done;
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
  fit_write_header(&r.csv, &c);
  int jobs = c.jobs > 0 ? (int)c.jobs : batch_cores();
  /* a FITS library built without thread support reads on one thread only */
  if (jobs > 1 && dt_spectrum_threads_init() != DT_OK) jobs = 1;
  /* each worker keeps its analysis (workspaces, and the model of spectra
   * on the same pixels) from one spectrum to the next */
  r.ans = calloc((size_t)jobs, sizeof *r.ans); /* NULL: one per spectrum */
  r.pool = batch_start(jobs, (size_t)jobs * FIT_WINDOW_PER_JOB, task_work, task_done, &r);
  if (!r.pool) {
    cli_errorf("fit: cannot start %d threads: out of memory or threads", jobs);
    free(r.ans);
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
  for (int k = 0; r.ans && k < jobs; k++) dt_analysis_free(r.ans[k]);
  free(r.ans);
  r.ans = NULL;
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
