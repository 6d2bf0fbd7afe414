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

int cmd_fraction(int argc, char **argv) {
  survey_opts so = {0};
  const char *by = NULL, *bins = NULL;
  double thr = NAN, cl = 0.683;
  dt_threshold_kind kind = DT_THRESHOLD_NONE;
  dt_binom_method meth = DT_BINOM_WILSON;
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
    if (survey_opt(opt, optarg, &so)) continue;
    switch (opt) {
    case 'h': usage(stdout); return 0;
    case 1:
    case 2:
      if (survey_threshold("fraction", opt == 1 ? DT_THRESHOLD_W_MA : DT_THRESHOLD_LOGN, optarg, &kind, &thr)) return 2;
      break;
    case 3: by = optarg; break;
    case 4: bins = optarg; break;
    case 5:
      if (dt_binom_method_parse(optarg, &meth) != DT_OK) {
        cli_errorf("fraction: --interval: '%s' is not wilson, exact or jeffreys", optarg);
        return 2;
      }
      break;
    case 6:
      if (cli_parse_double("--cl", optarg, &cl)) return 2;
      if (!(cl > 0 && cl < 1)) {
        cli_errorf("fraction: --cl: %s is not between 0 and 1 (e.g. 0.683, 0.95)", optarg);
        return 2;
      }
      break;
    default: return cli_opt_error("fraction", opt, argv);
    }
  }
  if (!!by != !!bins) {
    cli_errorf("fraction: --by and --bins go together");
    return 2;
  }
  double *edges = NULL;
  size_t nedge = 0;
  if (bins && survey_parse_edges("fraction", "--bins", bins, &edges, &nedge)) return 2;
  char **files = argv + optind;
  int nfiles = argc - optind;
  cli_out tab, fig;
  dt_fig_format fmt = DT_FIG_PDF;
  int rc = survey_check_outputs("fraction", &so, files, nfiles, &tab, &fig, &fmt);
  if (rc) {
    free(edges);
    return rc;
  }
  dt_catalog c;
  if ((rc = survey_load("fraction", files, nfiles, &so, &c))) goto done;
  if (kind == DT_THRESHOLD_W_MA && (survey_need("fraction", &c, "W_mA") || survey_need("fraction", &c, "W_limit_mA")))
    rc = 1;
  if (kind == DT_THRESHOLD_LOGN && survey_need("fraction", &c, "logN_limit")) rc = 1;
  if (rc) goto done;

  size_t nbin = by ? nedge - 1 : 1;
  frac_row *row = calloc(nbin, sizeof *row);
  if (!row) {
    cli_errorf("out of memory");
    rc = 1;
    goto done;
  }
  for (size_t b = 0; b < nbin; b++) {
    row[b].lo = by ? edges[b] : NAN;
    row[b].hi = by ? edges[b + 1] : NAN;
  }
  long outside = 0;
  for (size_t i = 0; i < c.n; i++) {
    long b = 0;
    if (by) {
      double x;
      dt_err e;
      int r = dt_catalog_number(&c, i, by, &x, &e);
      if (r == DT_ENOTFOUND) {
        cli_errorf("fraction: --by: %s", e.what);
        rc = 1;
        break;
      }
      if (r != DT_OK) {
        cli_report(c.tab[c.s[i].table].path, &e);
        rc = 1;
        break;
      }
      if ((b = survey_bin(edges, nedge, x)) < 0) {
        outside++;
        continue;
      }
    }
    dt_count k = dt_sightline_count(&c.s[i], kind, thr);
    if (k == DT_COUNT_EXCLUDED) row[b].excluded++;
    else {
      row[b].n++;
      row[b].k += k == DT_COUNT_DETECTION;
    }
  }
  if (!rc) {
    for (size_t b = 0; b < nbin; b++) {
      row[b].f = row[b].n ? (double)row[b].k / (double)row[b].n : NAN;
      if (dt_binom_interval(row[b].k, row[b].n, cl, meth, &row[b].lower, &row[b].upper) != DT_OK)
        row[b].lower = row[b].upper = NAN;
    }
    if (outside)
      cli_errorf("fraction: note: %ld sightline%s outside the bins of %s or without a value", outside,
                 outside == 1 ? "" : "s", by);

    /* the table */
    int tty = !so.out && survey_stdout_tty();
    char thr_text[64] = "";
    if (kind == DT_THRESHOLD_W_MA) dt_num_snprintf(thr_text, sizeof thr_text, "W >= %g mA", thr);
    if (kind == DT_THRESHOLD_LOGN) dt_num_snprintf(thr_text, sizeof thr_text, "log N >= %g", thr);
    char note[160], fnote[160], fthr[64] = "";
    dt_num_snprintf(note, sizeof note, "%s%s%s intervals, %.1f%% confidence", thr_text, *thr_text ? "; " : "",
                    dt_binom_method_name(meth), 100 * cl);
    /* the figure's own typography: >= and mA as the signs */
    if (kind == DT_THRESHOLD_W_MA) dt_num_snprintf(fthr, sizeof fthr, "W \u2265 %g m\u00c5", thr);
    if (kind == DT_THRESHOLD_LOGN) dt_num_snprintf(fthr, sizeof fthr, "log N \u2265 %g", thr);
    dt_num_snprintf(fnote, sizeof fnote, "%s%s%s intervals, %.1f%% confidence;  k/n beside each point", fthr,
                    *fthr ? "; " : "", meth == DT_BINOM_EXACT ? "Clopper\u2013Pearson" : meth == DT_BINOM_WILSON ? "Wilson" : "Jeffreys", 100 * cl);
    if (tty) {
      double *x = malloc(4 * nbin * sizeof *x);
      if (x) {
        double *y = x + nbin, *lo = y + nbin, *hi = lo + nbin;
        for (size_t b = 0; b < nbin; b++) {
          x[b] = by ? 0.5 * (row[b].lo + row[b].hi) : 0;
          y[b] = row[b].f;
          lo[b] = row[b].lower;
          hi[b] = row[b].upper;
        }
        survey_tplot t = {note, by ? by : "whole sample", "detection fraction", 0, 0, nbin, x, y, lo, hi, 0, NULL, NULL, 1, 0, 1};
        survey_tplot_print(&t);
        free(x);
      }
    }
    if (cli_out_open(&tab)) rc = 1;
    else {
      dt_csv w;
      dt_csv_init(&w, tab.f);
      dt_csv_comment(&w, "program", "doubletty fraction " DT_VERSION);
      dt_csv_comment(&w, "system", so.system ? so.system : "target");
      dt_csv_comment(&w, "doublet", c.s[0].doublet);
      dt_csv_comment(&w, "threshold", thr_text);
      dt_csv_comment(&w, "interval", dt_binom_method_name(meth));
      char clt[32];
      dt_num_format(clt, sizeof clt, cl);
      dt_csv_comment(&w, "cl", clt);
      dt_csv_comment(&w, "by", by ? by : "");
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
        cli_out_abort(&tab);
        rc = 1;
      } else if (cli_out_commit(&tab)) {
        rc = 1;
      }
    }
    if (!rc && so.figure) {
      double *x = malloc(6 * nbin * sizeof *x);
      if (!x) {
        cli_errorf("out of memory");
        rc = 1;
      } else {
        double *y = x + nbin, *lo = y + nbin, *hi = lo + nbin, *xl = hi + nbin, *xh = xl + nbin;
        for (size_t b = 0; b < nbin; b++) {
          x[b] = by ? 0.5 * (row[b].lo + row[b].hi) : 0;
          xl[b] = by ? row[b].lo : NAN;
          xh[b] = by ? row[b].hi : NAN;
          y[b] = row[b].f;
          lo[b] = row[b].lower;
          hi[b] = row[b].upper;
        }
        static const char *const whole[1] = {"whole sample"};
        char title[128];
        snprintf(title, sizeof title, "Detection fraction: %s, system %s", c.s[0].doublet,
                 so.system ? so.system : "target");
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
        rc = survey_write_figure("fraction", &fig, fmt, draw, &ch);
        free(kn);
        free(knp);
        free(x);
      }
    }
  }
  free(row);
done:
  dt_catalog_free(&c);
  free(edges);
  return rc;
}
