/* doubletty figure — one velocity-stack figure per spectrum, for papers.
 *
 * From a session file: each spectrum in its final recorded state; from
 * spectrum files or a target list: the automatic first pass.  Either way
 * the state is opened by the session core (session.h), the same path the
 * inspector takes, and drawn from the same analysis arrays (analysis.h)
 * the screen draws: data, errors, mask, continuum, total model and each
 * component, for both lines of the doublet (src/fig/fig_stack.c). */
#include <errno.h>
#include <getopt.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>

#include "../fig/fig.h"
#include "../ui/queue.h"
#include "cli.h"
#include "commands.h"
#include "doubletty/lsf.h"
#include "doubletty/export.h"
#include "doubletty/journal.h"
#include "doubletty/num.h"
#include "doubletty/session.h"
#include "doubletty/systems.h"
#include "outfile.h"
#include "progress.h"

static void usage(FILE *f) {
  fprintf(f,
          "usage: doubletty figure (SESSION | FILE... | --list TARGETS) -o DIR [options]\n"
          "One velocity-stack figure per spectrum: both lines of the doublet, the data\n"
          "with 1-sigma errors, continuum, total model, each component, component ticks,\n"
          "masked pixels.  From a session file: each spectrum's final recorded state;\n"
          "from spectra or a list: the automatic first pass.\n\n"
          "options:\n"
          "  -o DIR              write the figures into DIR (created if missing)\n"
          "  --format FMT        pdf (default), png or svg\n"
          "  --list TARGETS      the spectra of a target list\n"
          "  --doublet NAME      doublet of spectra that do not name one (default NaI)\n"
          "  --force             replace existing figures\n"
          "  --hyperfine         model Na I and K I lines as their hyperfine components\n"
          "                      (as fit and inspect --hyperfine; a list line may say hfs=1)\n"
          "  --resolution-table FILE  R at wavelengths (two columns: Angstrom, R), linear\n"
          "                      in between; over the list's R= and the files' own\n"
          "  -h, --help          this text\n"
          "Each figure is DIR/NAME_DOUBLET.FMT (NAME: the list's name or the file's stem;\n"
          "_rowN for a table row); a page of 432 x 420 pt (PNG 900 x 875 pixels).\n");
}

/* The page of a two-line stack: 6 inches wide, 420 pt high; PNG at 150 dpi. */
static const dt_fig_page stack_page = {432, 420, 150};

typedef struct fig_job {
  const char *dir;
  dt_fig_format fmt;
  int force;
  char **used;   /* file names written so far (to keep them apart) */
  size_t nused;
  long written, failed;
  int hfs_all;               /* --hyperfine */
  const dt_hyperfine *hfs;   /* the table (NULL: not read) */
  dt_lsf_table *rtable; /* --resolution-table (NULL: none) */
} fig_job;

static void safe_name(const char *in, char *out, size_t n) {
  size_t k = 0;
  for (; *in && k + 1 < n; in++) {
    unsigned char c = (unsigned char)*in;
    out[k++] = (c == '/' || c == ' ' || c == '\\' || c < 32 || c == 127 || c == ':' || c == '#') ? '_' : (char)c;
  }
  out[k] = 0;
  if (!k) snprintf(out, n, "spectrum");
}

/* DIR/NAME_DOUBLET[_rowN][_SYSTEM][-K].EXT, unique within this run (the
 * target's figure has no system in its name). */
static char *figure_path(fig_job *job, const char *name, const char *doublet, long row, const char *sys) {
  char base[400], stem[200], sysname[64] = "";
  safe_name(name, stem, sizeof stem);
  if (sys && sys[0]) {
    sysname[0] = '_';
    safe_name(sys, sysname + 1, sizeof sysname - 1);
  }
  if (row > 0) snprintf(base, sizeof base, "%s_%s_row%ld%s", stem, doublet, row, sysname);
  else snprintf(base, sizeof base, "%s_%s%s", stem, doublet, sysname);
  size_t len = strlen(job->dir) + strlen(base) + 32;
  char *path = malloc(len);
  if (!path) return NULL;
  for (int k = 1;; k++) {
    if (k == 1) snprintf(path, len, "%s/%s.%s", job->dir, base, dt_fig_format_ext(job->fmt));
    else snprintf(path, len, "%s/%s-%d.%s", job->dir, base, k, dt_fig_format_ext(job->fmt));
    int clash = 0;
    for (size_t i = 0; i < job->nused; i++)
      if (!strcmp(job->used[i], path)) clash = 1;
    if (!clash) break;
  }
  char **u = realloc(job->used, (job->nused + 1) * sizeof *u);
  if (!u) {
    free(path);
    return NULL;
  }
  job->used = u;
  job->used[job->nused++] = path;
  return path;
}

static int draw_stack(FILE *f, dt_fig_format fmt, const dt_fig_stack *s) {
  return dt_fig_stack_write(f, fmt, &stack_page, s);
}

/* Draw the loaded state of session ss into its figure files: one per
 * absorber system, over the system's range widened by SYS_MARGIN_KMS on
 * each side (the target's over the whole window when it is the only one). */
#define SYS_MARGIN_KMS 100.0
static void draw_system(fig_job *job, dt_session *ss, const char *name, long row, size_t k,
                        dt_fig_panel *panel);

static void draw_target(fig_job *job, dt_session *ss, const char *shown, const char *name, long row) {
  if (!ss->loaded) {
    cli_errorf("figure: %s: %s", shown, ss->load_msg);
    job->failed++;
    return;
  }
  if (!ss->an_ok || !ss->out.doublet) {
    cli_errorf("figure: %s: no analysis to draw: %s", shown, ss->an_msg[0] ? ss->an_msg : "unknown reason");
    job->failed++;
    return;
  }
  dt_analysis *an = ss->an;
  const dt_judgement *j = &ss->j;
  size_t n = ss->out.n, nc = j->ncomp;
  const double *comp[DT_MAX_COMP];
  double comp_v[DT_MAX_COMP];
  for (size_t k = 0; k < nc && k < DT_MAX_COMP; k++) {
    comp[k] = dt_analysis_component_model(an, k);
    comp_v[k] = j->comp[k].v;
  }
  int have_comp = 1;
  for (size_t k = 0; k < nc; k++)
    if (!comp[k]) have_comp = 0;
  dt_fig_panel panel[2];
  for (int l = 0; l < 2; l++) {
    dt_fig_panel *p = &panel[l];
    memset(p, 0, sizeof *p);
    p->label = ss->out.doublet->line[l].label;
    p->n = n;
    p->v = dt_analysis_velocity(an, l);
    p->flux = dt_analysis_flux(an);
    p->err = dt_analysis_sigma(an);
    p->masked = dt_analysis_mask(an);
    p->cont = dt_analysis_continuum(an);
    p->model = dt_analysis_model(an);
    p->ncomp = have_comp ? nc : 0;
    p->comp = have_comp ? comp : NULL;
    p->comp_v = comp_v;
  }
  if (!panel[0].v || !panel[0].flux) {
    cli_errorf("figure: %s: no analysis arrays", shown);
    job->failed++;
    return;
  }
  size_t nsys = ss->systems.n ? ss->systems.n : 1;
  for (size_t k = 0; k < nsys; k++) draw_system(job, ss, name, row, k, panel);
}

static void draw_system(fig_job *job, dt_session *ss, const char *name, long row, size_t k,
                        dt_fig_panel *panel) {
  const dt_judgement *j = &ss->j;
  size_t nc = j->ncomp;
  const dt_system *y = ss->systems.n ? &ss->systems.sys[k] : NULL;
  const char *sysname = y ? y->name : "target";
  double vlo = j->vlo, vhi = j->vhi;
  if (y && ss->systems.n > 1) {
    vlo = fmax(j->vlo, y->vlo - SYS_MARGIN_KMS);
    vhi = fmin(j->vhi, y->vhi + SYS_MARGIN_KMS);
  }
  size_t ncs = 0; /* components of this system */
  for (size_t c = 0; c < nc; c++) ncs += !y || dt_systems_of(&ss->systems, j->comp[c].v) == k;
  char title[300], sub[300];
  snprintf(title, sizeof title, "%s   %s   system %s", name, j->doublet, sysname);
  dt_verdict v = k ? dt_judgement_system_verdict(j, sysname) : j->verdict;
  const char *verdict = v != DT_VERDICT_NONE ? dt_verdict_name(v) : NULL;
  dt_verdict sug = k < DT_MAX_SYSTEMS && ss->has_sysres ? ss->sysres[k].suggested
                   : ss->has_suggest && k == 0      ? ss->suggested
                                                    : DT_VERDICT_NONE;
  char fit[96] = "";
  if (ncs) dt_num_snprintf(fit, sizeof fit, "; %zu component%s, \xcf\x87\xc2\xb2/dof = %.2f", ncs, ncs == 1 ? "" : "s",
                           ss->out.fit.chi2_red);
  dt_num_snprintf(sub, sizeof sub, "%s%s%s; v relative to %.1f km/s%s", verdict ? "verdict: " : "",
                  verdict ? verdict : "first pass, suggested: ",
                  verdict ? "" : (sug != DT_VERDICT_NONE ? dt_verdict_name(sug) : "none"), j->vsys, fit);
  dt_fig_stack st = {title, sub, vlo, vhi, 1, 2, panel};
  char *path = figure_path(job, name, j->doublet, row, k ? sysname : NULL);
  if (!path) {
    cli_errorf("out of memory");
    job->failed++;
    return;
  }
  cli_out o;
  if (cli_out_check(&o, "figure", path, job->force) || cli_out_open(&o)) {
    job->failed++;
    return;
  }
  if (draw_stack(o.f, job->fmt, &st) != 0) {
    cli_errorf("figure: %s: cannot draw or write the figure", path);
    cli_out_abort(&o);
    job->failed++;
    return;
  }
  if (cli_out_commit(&o)) job->failed++;
  else job->written++;
}

static int make_dir(const char *dir) {
  struct stat st;
  if (stat(dir, &st) == 0) {
    if (S_ISDIR(st.st_mode)) return 0;
    cli_errorf("figure: %s: exists and is not a directory", dir);
    return 2;
  }
  if (mkdir(dir, 0777) != 0) {
    cli_errorf("figure: %s: cannot create the directory: %s", dir, strerror(errno));
    return 1;
  }
  return 0;
}

static void report_list(const char *list, const dt_err *e) { cli_report(list, e); }

/* Every spectrum of a session, in its final state. */
static void draw_session(fig_job *job, dt_session *ss, dt_journal *jn, cli_progress *pr) {
  size_t n = dt_journal_count(jn);
  cli_progress_start(pr, "figure", n, 0);
  for (size_t i = 0; i < n; i++) {
    const dt_journal_entry *en = dt_journal_entry_at(jn, i);
    char path[4096], dbl[32], stem[256];
    dt_queue_split_key(en->target.path, path, sizeof path, dbl, sizeof dbl);
    dt_session_target t;
    dt_session_target_init(&t, path, en->target.path, en->target.row);
    t.name = en->target.name ? en->target.name : "";
    t.initial = en->state; /* its hfs= says whether lines are split */
    t.hyperfine = job->hfs;
    t.read.lsf_table = job->rtable;
    dt_session_load(ss, &t);
    const char *name = t.name[0] ? t.name : dt_export_stem(path, stem, sizeof stem);
    draw_target(job, ss, path, name, en->target.row);
    cli_progress_update(pr, i + 1);
  }
}

/* Every spectrum of a list or of files, as the first pass leaves it
 * (doublet d0 where the list does not say).  0, or 1 after a message. */
static int draw_queue(fig_job *job, dt_session *ss, const dt_atomic *atomic, const char *list, char **in, int nin,
                      const char *d0, cli_progress *pr) {
  int rc = 0;
  dt_queue q;
  dt_queue_init(&q);
  dt_err e;
  size_t nbad = 0;
  if (list) {
    if (dt_queue_add_list(&q, list, &nbad, report_list, &e) != DT_OK) {
      cli_report(list, &e);
      rc = 1;
    } else if (nbad) {
      job->failed += (long)nbad;
    }
  } else {
    for (int i = 0; i < nin && !rc; i++) {
      if (cli_check_not_dir(in[i])) rc = 1;
      else if (dt_queue_add_file(&q, in[i], &e) != DT_OK) {
        cli_report(in[i], &e);
        rc = 1;
      }
    }
  }
  cli_progress_start(pr, "figure", q.n, 0);
  for (size_t i = 0; !rc && i < q.n; i++) {
    const dt_qentry *qe = &q.e[i];
    const char *dn = qe->doublet[0] ? qe->doublet : d0;
    const dt_doublet *dd = dt_atomic_find(atomic, dn);
    char key[4200], stem[256];
    snprintf(key, sizeof key, "%s#%s", dt_queue_key(&q, i), dd ? dd->name : dn);
    dt_session_target t;
    dt_session_target_init(&t, dt_queue_path(&q, i), key, qe->row);
    t.name = dt_queue_name(&q, i);
    t.air = qe->air;
    snprintf(t.initial.doublet, sizeof t.initial.doublet, "%s", dd ? dd->name : dn);
    if (qe->has_vsys) t.initial.vsys = qe->vsys;
    if (qe->has_window) {
      t.initial.vlo = qe->vlo;
      t.initial.vhi = qe->vhi;
    }
    t.initial.resolution = qe->resolution;
    t.initial.fwhm_kms = qe->resolution > 0 ? 0 : qe->fwhm_kms;
    t.hyperfine = job->hfs;
    t.initial.hyperfine = job->hfs_all || qe->hyperfine;
    /* resolution (lsf.h): the table, else the list's for the doublet, else
     * the file's widths per pixel or header */
    double qR = 0, qF = 0;
    if (!job->rtable) dt_queue_resolution(&q, i, t.initial.doublet, &qR, &qF);
    t.initial.resolution = qR;
    t.initial.fwhm_kms = qR > 0 ? 0 : qF;
    t.lsf_constant = qR > 0 || qF > 0;
    t.read.lsf_table = job->rtable;
    dt_session_load(ss, &t);
    const char *name = t.name && t.name[0] ? t.name : dt_export_stem(t.path, stem, sizeof stem);
    draw_target(job, ss, t.path, name, qe->row);
    cli_progress_update(pr, i + 1);
  }
  dt_queue_free(&q);
  return rc;
}

int cmd_figure(int argc, char **argv) {
  const char *dir = NULL, *list = NULL, *doublet = NULL;
  fig_job job;
  memset(&job, 0, sizeof job);
  job.fmt = DT_FIG_PDF;
  static const struct option longopts[] = {{"help", no_argument, NULL, 'h'},
                                           {"output", required_argument, NULL, 'o'},
                                           {"format", required_argument, NULL, 1},
                                           {"list", required_argument, NULL, 2},
                                           {"doublet", required_argument, NULL, 3},
                                           {"force", no_argument, NULL, 4},
                                           {"hyperfine", no_argument, NULL, 5},
                                           {"resolution-table", required_argument, NULL, 6},
                                           {NULL, 0, NULL, 0}};
  int opt;
  cli_getopt_reset();
  while ((opt = getopt_long(argc, argv, ":ho:", longopts, NULL)) != -1) {
    switch (opt) {
    case 'h': usage(stdout); return 0;
    case 'o': dir = optarg; break;
    case 1:
      if (dt_fig_format_parse(optarg, &job.fmt) != 0) {
        cli_errorf("figure: --format: '%s' is not pdf, png or svg", optarg);
        return 2;
      }
      break;
    case 2: list = optarg; break;
    case 3: doublet = optarg; break;
    case 4: job.force = 1; break;
    case 5: job.hfs_all = 1; break;
    case 6:
      if (cli_opt_resolution_table("figure", optarg, &job.rtable, &(dt_read_opts){0})) {
        dt_lsf_table_free(job.rtable);
        return 2;
      }
      break;
    default: return cli_opt_error("figure", opt, argv);
    }
  }
  int nin = argc - optind;
  char **in = argv + optind;
  if (!dir || !*dir) {
    cli_errorf("figure: no output directory (-o DIR)");
    return 2;
  }
  if (!list && nin == 0) {
    cli_errorf("figure: nothing to draw: give a session file, spectrum files or --list TARGETS");
    return 2;
  }
  if (list && nin) {
    cli_errorf("figure: --list or files, not both ('%s' is extra)", in[0]);
    return 2;
  }
  job.dir = dir;
  dt_atomic *atomic = cli_load_atomic(NULL);
  if (!atomic) return 1;
  if (doublet && !dt_atomic_find(atomic, doublet)) {
    cli_errorf("figure: --doublet: unknown doublet '%s'", doublet);
    dt_atomic_free(atomic);
    return 2;
  }
  /* the hyperfine table, always: sessions' states say hfs=1 where their
   * lines were split; --hyperfine or a list's hfs=1 for a queue */
  dt_hyperfine *hfs = cli_load_hyperfine(NULL);
  if (!hfs) {
    dt_atomic_free(atomic);
    return 1;
  }
  job.hfs = hfs;
  int rc = 0;
  /* a session file: its first line says so */
  dt_journal *jn = NULL;
  if (!list && nin == 1) {
    dt_err e;
    int jr = dt_journal_open(in[0], DT_JOURNAL_READ_ONLY, NULL, &jn, &e);
    if (jr != DT_OK && jr != DT_EFORMAT) {
      cli_report(in[0], &e);
      dt_hyperfine_free(hfs);
      dt_atomic_free(atomic);
      return 1;
    }
    if (jr != DT_OK) jn = NULL;
  }
  if ((rc = make_dir(dir))) {
    if (jn) dt_journal_close(jn);
    dt_hyperfine_free(hfs);
    dt_atomic_free(atomic);
    return rc;
  }
  dt_session *ss = dt_session_alloc(atomic, jn);
  if (!ss) {
    cli_errorf("out of memory");
    if (jn) dt_journal_close(jn);
    dt_hyperfine_free(hfs);
    dt_atomic_free(atomic);
    return 1;
  }
  const char *d0 = doublet ? doublet : "NaI";
  cli_progress pr;
  if (jn) draw_session(&job, ss, jn, &pr);
  else rc = draw_queue(&job, ss, atomic, list, in, nin, d0, &pr);
  cli_progress_end(&pr);
  if (!rc)
    fprintf(stderr, "doubletty: figure: %ld figure%s written into %s%s", job.written, job.written == 1 ? "" : "s", dir,
            job.failed ? "" : "\n");
  if (!rc && job.failed) fprintf(stderr, ", %ld failed\n", job.failed);
  if (job.failed) rc = 1;
  for (size_t i = 0; i < job.nused; i++) free(job.used[i]);
  free(job.used);
  dt_session_free(ss);
  if (jn) dt_journal_close(jn);
  dt_hyperfine_free(hfs);
  dt_atomic_free(atomic);
  dt_lsf_table_free(job.rtable);
  return rc;
}
