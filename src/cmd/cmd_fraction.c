/* doubletty fraction — how often absorption is found: the detection
 * fraction of a survey, whole or in bins of any column, with binomial
 * confidence intervals.
 *
 * Each sightline is counted by the sensitivity-aware rule of catalog.h
 * (a non-detection whose limit lies above the threshold cannot tell, and
 * is left out and counted as such); the intervals come from binom.h. */
#include <getopt.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "cli.h"
#include "commands.h"
#include "doubletty/binom.h"
#include "doubletty/csv.h"
#include "doubletty/num.h"
#include "survey.h"

static void usage(FILE *f) {
  fprintf(f,
          "usage: doubletty fraction CATALOGUE... [options]\n"
          "The detection fraction of a survey, with binomial confidence intervals.\n"
          "A sightline counts only where it can tell: detected with W >= threshold is a\n"
          "detection; detected below it, or not detected with a limit <= threshold, a\n"
          "non-detection; not detected with a higher limit, unsure or unusable: left out\n"
          "(column 'excluded').  CATALOGUE: fit CSV, export CSV or FITS.\n\n"
          "options:\n"
          "  --threshold-mA W     threshold on the stronger line's rest W [mA]\n"
          "  --threshold-logN N   threshold on log10 N [cm-2] (components' total)\n"
          "                       (neither: the verdicts alone)\n"
          "  --by COLUMN          bin by this column (of the catalogue or of --with)\n"
          "  --bins E0,E1,...     the bin edges for --by\n"
          "  --interval METHOD    wilson (default), exact (Clopper-Pearson), jeffreys\n"
          "  --cl C               confidence level (default 0.683)\n"
          "  --system NAME        the system counted (default target)\n"
          "  --doublet NAME       the doublet, when the catalogues hold several\n"
          "  --with TABLE.csv     extra columns joined by 'name'\n"
          "  -o OUT.csv           write the table here (default: standard output)\n"
          "  --figure FILE        draw the fractions into FILE (.pdf, .png, .svg)\n"
          "  --force              replace existing output files\n"
          "  -h, --help           this text\n"
          "output columns: bin_lo,bin_hi,n,k,excluded,fraction,lower,upper\n");
}

typedef struct frac_row {
  double lo, hi;
  long n, k, excluded;
  double f, lower, upper;
} frac_row;

static int draw(FILE *f, dt_fig_format fmt, const dt_fig_page *pg, const void *what) {
  return dt_fig_chart_write(f, fmt, pg, what);
}

/* The command's settings. */
typedef struct frac_args {
  survey_opts so;
  const char *by, *bins;
  double thr, cl;
  dt_threshold_kind kind;
  dt_binom_method meth;
} frac_args;

/* The options: 0, 2 for bad ones, -1 after --help (exit 0). */
static int parse_args(int argc, char **argv, frac_args *a) {
  memset(a, 0, sizeof *a);
  a->thr = NAN;
  a->cl = 0.683;
  a->kind = DT_THRESHOLD_NONE;
  a->meth = DT_BINOM_WILSON;
  static const struct option longopts[] = {{"help", no_argument, NULL, 'h'},
                                           {"threshold-mA", required_argument, NULL, 1},
                                           {"threshold-logN", required_argument, NULL, 2},
                                           {"by", required_argument, NULL, 3},
                                           {"bins", required_argument, NULL, 4},
                                           {"interval", required_argument, NULL, 5},
                                           {"cl", required_argument, NULL, 6},
                                           SURVEY_LONGOPTS,
                                           {NULL, 0, NULL, 0}};
  int opt;
  cli_getopt_reset();
  while ((opt = getopt_long(argc, argv, ":ho:", longopts, NULL)) != -1) {
    if (survey_opt(opt, optarg, &a->so)) continue;
    switch (opt) {
    case 'h': usage(stdout); return -1;
    case 1:
    case 2:
      if (survey_threshold("fraction", opt == 1 ? DT_THRESHOLD_W_MA : DT_THRESHOLD_LOGN, optarg, &a->kind, &a->thr))
        return 2;
      break;
    case 3: a->by = optarg; break;
    case 4: a->bins = optarg; break;
    case 5:
      if (dt_binom_method_parse(optarg, &a->meth) != DT_OK) {
        cli_errorf("fraction: --interval: '%s' is not wilson, exact or jeffreys", optarg);
        return 2;
      }
      break;
    case 6:
      if (cli_parse_double("--cl", optarg, &a->cl)) return 2;
      if (!(a->cl > 0 && a->cl < 1)) {
        cli_errorf("fraction: --cl: %s is not between 0 and 1 (e.g. 0.683, 0.95)", optarg);
        return 2;
      }
      break;
    default: return cli_opt_error("fraction", opt, argv);
    }
  }
  if (!!a->by != !!a->bins) {
    cli_errorf("fraction: --by and --bins go together");
    return 2;
  }
  return 0;
}

/* Every sightline counted into its bin (rows, nbin of them) by the
 * counting rule, and each bin's fraction and interval.  0, or 1 after a
 * message. */
static int count_rows(const frac_args *a, const dt_catalog *c, const double *edges, size_t nedge, frac_row *row,
                      size_t nbin) {
  for (size_t b = 0; b < nbin; b++) {
    row[b].lo = a->by ? edges[b] : NAN;
    row[b].hi = a->by ? edges[b + 1] : NAN;
  }
  long outside = 0;
  for (size_t i = 0; i < c->n; i++) {
    long b = 0;
    if (a->by) {
      double x;
      dt_err e;
      int r = dt_catalog_number(c, i, a->by, &x, &e);
      if (r == DT_ENOTFOUND) {
        cli_errorf("fraction: --by: %s", e.what);
        return 1;
      }
      if (r != DT_OK) {
        cli_report(c->tab[c->s[i].table].path, &e);
        return 1;
      }
      if ((b = survey_bin(edges, nedge, x)) < 0) {
        outside++;
        continue;
      }
    }
    dt_count k = dt_sightline_count(&c->s[i], a->kind, a->thr);
    if (k == DT_COUNT_EXCLUDED) row[b].excluded++;
    else {
      row[b].n++;
      row[b].k += k == DT_COUNT_DETECTION;
    }
  }
  for (size_t b = 0; b < nbin; b++) {
    row[b].f = row[b].n ? (double)row[b].k / (double)row[b].n : NAN;
    if (dt_binom_interval(row[b].k, row[b].n, a->cl, a->meth, &row[b].lower, &row[b].upper) != DT_OK)
      row[b].lower = row[b].upper = NAN;
  }
  if (outside)
    cli_errorf("fraction: note: %ld sightline%s outside the bins of %s or without a value", outside,
               outside == 1 ? "" : "s", a->by);
  return 0;
}

/* Each bin's point for the plots: middle of the bin (0 for the whole
 * sample), fraction and interval. */
static void points(const frac_args *a, const frac_row *row, size_t nbin, double *x, double *y, double *lo,
                   double *hi) {
  for (size_t b = 0; b < nbin; b++) {
    x[b] = a->by ? 0.5 * (row[b].lo + row[b].hi) : 0;
    y[b] = row[b].f;
    lo[b] = row[b].lower;
    hi[b] = row[b].upper;
  }
}

/* The table with its settings (thr_text: the threshold in words).  0, or 1
 * after a message. */
static int write_table(const frac_args *a, const dt_catalog *c, const frac_row *row, size_t nbin,
                       const char *thr_text, cli_out *tab) {
  if (cli_out_open(tab)) return 1;
  dt_csv w;
  dt_csv_init(&w, tab->f);
  dt_csv_comment(&w, "program", "doubletty fraction " DT_VERSION);
  dt_csv_comment(&w, "system", a->so.system ? a->so.system : "target");
  dt_csv_comment(&w, "doublet", c->s[0].doublet);
  dt_csv_comment(&w, "threshold", thr_text);
  dt_csv_comment(&w, "interval", dt_binom_method_name(a->meth));
  char clt[32];
  dt_num_format(clt, sizeof clt, a->cl);
  dt_csv_comment(&w, "cl", clt);
  dt_csv_comment(&w, "by", a->by ? a->by : "");
  const char *head[] = {"bin_lo", "bin_hi", "n", "k", "excluded", "fraction", "lower", "upper"};
  for (size_t h = 0; h < 8; h++) dt_csv_text(&w, head[h]);
  dt_csv_end(&w);
  for (size_t b = 0; b < nbin; b++) {
    dt_csv_num(&w, row[b].lo);
    dt_csv_num(&w, row[b].hi);
    dt_csv_long(&w, row[b].n);
    dt_csv_long(&w, row[b].k);
    dt_csv_long(&w, row[b].excluded);
    dt_csv_fixed(&w, row[b].f, 6);
    dt_csv_fixed(&w, row[b].lower, 6);
    dt_csv_fixed(&w, row[b].upper, 6);
    dt_csv_end(&w);
  }
  if (dt_csv_error(&w)) {
    cli_errorf("fraction: cannot write the table");
    cli_out_abort(tab);
    return 1;
  }
  return cli_out_commit(tab) ? 1 : 0;
}

/* The figure: one point per bin with its interval and k/n. */
static int write_fig(const frac_args *a, const dt_catalog *c, const frac_row *row, size_t nbin, const double *edges,
                     size_t nedge, const char *fnote, cli_out *fig, dt_fig_format fmt) {
  double *x = malloc(6 * nbin * sizeof *x);
  if (!x) {
    cli_errorf("out of memory");
    return 1;
  }
  const char *by = a->by;
  double *y = x + nbin, *lo = y + nbin, *hi = lo + nbin, *xl = hi + nbin, *xh = xl + nbin;
  points(a, row, nbin, x, y, lo, hi);
  for (size_t b = 0; b < nbin; b++) {
    xl[b] = by ? row[b].lo : NAN;
    xh[b] = by ? row[b].hi : NAN;
  }
  static const char *const whole[1] = {"whole sample"};
  char title[128];
  snprintf(title, sizeof title, "Detection fraction: %s, system %s", c->s[0].doublet,
           a->so.system ? a->so.system : "target");
  char (*kn)[32] = calloc(nbin, sizeof *kn);
  const char **knp = calloc(nbin, sizeof *knp);
  for (size_t b = 0; kn && knp && b < nbin; b++) {
    snprintf(kn[b], sizeof kn[b], "%ld/%ld", row[b].k, row[b].n);
    knp[b] = kn[b];
  }
  dt_fig_series s = {NULL, nbin, x, y, lo, hi, by ? xl : NULL, by ? xh : NULL, DT_FIG_POINTS, 5, 0,
                     kn && knp ? knp : NULL};
  dt_fig_chart ch = {title, by ? by : "", "detection fraction", 0, 0,
                     by ? edges[0] : -0.6, by ? edges[nedge - 1] : 0.6, 0, 1.05,
                     fnote, by ? NULL : whole, by ? 0 : 1, 1, &s};
  int rc = survey_write_figure("fraction", fig, fmt, draw, &ch);
  free(kn);
  free(knp);
  free(x);
  return rc;
}

/* The plot in the terminal. */
static void print_plot(const frac_args *a, const frac_row *row, size_t nbin, const char *note) {
  double *x = malloc(4 * nbin * sizeof *x);
  if (!x) return;
  double *y = x + nbin, *lo = y + nbin, *hi = lo + nbin;
  points(a, row, nbin, x, y, lo, hi);
  survey_tplot t = {note, a->by ? a->by : "whole sample", "detection fraction", 0, 0, nbin, x, y, lo, hi, 0, NULL, NULL,
                    1, 0, 1};
  survey_tplot_print(&t);
  free(x);
}

int cmd_fraction(int argc, char **argv) {
  frac_args a;
  int rc = parse_args(argc, argv, &a);
  if (rc) return rc < 0 ? 0 : rc;
  double *edges = NULL;
  size_t nedge = 0;
  if (a.bins && survey_parse_edges("fraction", "--bins", a.bins, &edges, &nedge)) return 2;
  char **files = argv + optind;
  int nfiles = argc - optind;
  cli_out tab, fig;
  dt_fig_format fmt = DT_FIG_PDF;
  rc = survey_check_outputs("fraction", &a.so, files, nfiles, &tab, &fig, &fmt);
  if (rc) {
    free(edges);
    return rc;
  }
  dt_catalog c;
  frac_row *row = NULL;
  if ((rc = survey_load("fraction", files, nfiles, &a.so, &c))) goto done;
  if ((a.kind == DT_THRESHOLD_W_MA &&
       (survey_need("fraction", &c, "W_mA") || survey_need("fraction", &c, "W_limit_mA"))) ||
      (a.kind == DT_THRESHOLD_LOGN && survey_need("fraction", &c, "logN_limit"))) {
    rc = 1;
    goto done;
  }
  size_t nbin = a.by ? nedge - 1 : 1;
  row = calloc(nbin, sizeof *row);
  if (!row) {
    cli_errorf("out of memory");
    rc = 1;
    goto done;
  }
  if ((rc = count_rows(&a, &c, edges, nedge, row, nbin))) goto done;

  /* the threshold in words: plain for the table and the terminal, the
   * figure's own typography (>= and mA as the signs) for the figure */
  char thr_text[64] = "", note[160], fnote[160], fthr[64] = "";
  dt_binom_method meth = a.meth;
  if (a.kind == DT_THRESHOLD_W_MA) dt_num_snprintf(thr_text, sizeof thr_text, "W >= %g mA", a.thr);
  if (a.kind == DT_THRESHOLD_LOGN) dt_num_snprintf(thr_text, sizeof thr_text, "log N >= %g", a.thr);
  dt_num_snprintf(note, sizeof note, "%s%s%s intervals, %.1f%% confidence", thr_text, *thr_text ? "; " : "",
                  dt_binom_method_name(meth), 100 * a.cl);
  if (a.kind == DT_THRESHOLD_W_MA) dt_num_snprintf(fthr, sizeof fthr, "W \u2265 %g m\u00c5", a.thr);
  if (a.kind == DT_THRESHOLD_LOGN) dt_num_snprintf(fthr, sizeof fthr, "log N \u2265 %g", a.thr);
  dt_num_snprintf(fnote, sizeof fnote, "%s%s%s intervals, %.1f%% confidence;  k/n beside each point", fthr,
                  *fthr ? "; " : "",
                  meth == DT_BINOM_EXACT    ? "Clopper\u2013Pearson"
                  : meth == DT_BINOM_WILSON ? "Wilson"
                                            : "Jeffreys",
                  100 * a.cl);
  if (!a.so.out && survey_stdout_tty()) print_plot(&a, row, nbin, note);
  if ((rc = write_table(&a, &c, row, nbin, thr_text, &tab))) goto done;
  if (a.so.figure) rc = write_fig(&a, &c, row, nbin, edges, nedge, fnote, &fig, fmt);
done:
  free(row);
  dt_catalog_free(&c);
  free(edges);
  return rc;
}
