/* Shared parts of the survey commands (see survey.h). */
#include "survey.h"

#include <getopt.h>
#include <langinfo.h>
#include <locale.h>
#include <math.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>

#include "../ui/grid.h"
#include "../ui/plot.h"
#include "cli.h"
#include "doubletty/num.h"

const dt_fig_page survey_page = {432, 324, 150};

int survey_opt(int opt, const char *arg, survey_opts *o) {
  switch (opt) {
  case 0x100: o->system = arg; return 1;
  case 0x101: o->doublet = arg; return 1;
  case 0x102: o->with = arg; return 1;
  case 0x103: o->figure = arg; return 1;
  case 0x104: o->force = 1; return 1;
  case 'o': o->out = arg; return 1;
  default: return 0;
  }
}

int survey_load(const char *cmd, char **files, int n, const survey_opts *o, dt_catalog *c) {
  dt_err e;
  dt_catalog_init(c);
  if (n < 1) {
    cli_errorf("%s: no catalogue given (a fit CSV, or an export CSV or FITS table)", cmd);
    return 2;
  }
  for (int i = 0; i < n; i++) {
    if (cli_check_not_dir(files[i])) return 1;
    if (dt_catalog_read(c, files[i], &e) != DT_OK) {
      cli_report(files[i], &e);
      return 1;
    }
  }
  if (o->with) {
    if (cli_check_not_dir(o->with)) return 1;
    if (dt_catalog_join(c, o->with, &e) != DT_OK) {
      cli_report(o->with, &e);
      return 1;
    }
  }
  if (dt_catalog_select(c, o->system, o->doublet, &e) != DT_OK) {
    cli_errorf("%s: %s; choose one with --doublet NAME", cmd, e.what);
    return 2;
  }
  if (c->n == 0) {
    cli_errorf("%s: no sightline of system '%s'%s%s in the catalogues", cmd, o->system ? o->system : "target",
               o->doublet ? " and doublet " : "", o->doublet ? o->doublet : "");
    return 1;
  }
  return 0;
}

int survey_need(const char *cmd, const dt_catalog *c, const char *col) {
  dt_err e;
  dt_err_clear(&e);
  if (dt_catalog_has(c, col, &e)) return 0;
  cli_errorf("%s: %s: no column '%s' (needed here)", cmd, e.where, col);
  return 1;
}

int survey_check_outputs(const char *cmd, const survey_opts *o, char **files, int n, cli_out *table,
                         cli_out *fig, dt_fig_format *fmt) {
  int rc = cli_out_check(table, cmd, o->out, o->force);
  if (rc) return rc;
  for (int i = 0; i < n; i++)
    if (cli_out_is_input(table, files[i])) return 2;
  if (o->with && cli_out_is_input(table, o->with)) return 2;
  if (!o->figure) return 0;
  if (!strcmp(o->figure, "-") || dt_fig_format_of(o->figure, fmt) != 0) {
    cli_errorf("%s: %s: cannot tell the figure's format from its name; use .pdf, .png or .svg", cmd, o->figure);
    return 2;
  }
  if ((rc = cli_out_check(fig, cmd, o->figure, o->force))) return rc;
  for (int i = 0; i < n; i++)
    if (cli_out_is_input(fig, files[i])) return 2;
  if (o->with && cli_out_is_input(fig, o->with)) return 2;
  if (o->out && !strcmp(o->out, o->figure)) {
    cli_errorf("%s: %s: the table and the figure cannot be the same file", cmd, o->figure);
    return 2;
  }
  return 0;
}

int survey_write_figure(const char *cmd, cli_out *fig, dt_fig_format fmt, survey_drawer draw, const void *what) {
  if (cli_out_open(fig)) return 1;
  if (draw(fig->f, fmt, &survey_page, what) != 0) {
    cli_errorf("%s: %s: cannot draw or write the figure", cmd, fig->path);
    cli_out_abort(fig);
    return 1;
  }
  return cli_out_commit(fig) ? 1 : 0;
}

/* ---- the terminal plot ---- */

int survey_stdout_tty(void) { return isatty(STDOUT_FILENO); }

static double tr(double v, int log) { return log ? (v > 0 ? log10(v) : NAN) : v; }

static void label_of(double v, int log, char *buf, size_t n) {
  dt_num_snprintf(buf, n, "%.3g", log ? pow(10, v) : v);
}

void survey_tplot_print(const survey_tplot *t) {
  enum { W = 60, H = 14, LM = 9 };
  setlocale(LC_CTYPE, "");
  const char *cs = nl_langinfo(CODESET);
  int utf8 = cs && (!strcmp(cs, "UTF-8") || !strcmp(cs, "utf8"));
  size_t n = t->n + t->nline;
  double *x = malloc((4 * t->n + 2 * t->nline + 1) * sizeof *x);
  if (!x) return;
  double *y = x + t->n, *lx = y + t->n, *ly = lx + t->nline, *e = ly + t->nline;
  (void)e;
  double x0 = NAN, x1 = NAN, y0 = NAN, y1 = NAN;
  for (size_t i = 0; i < t->n; i++) {
    x[i] = tr(t->x[i], t->xlog);
    y[i] = tr(t->y[i], t->ylog);
    double a[3] = {y[i], t->ylo ? tr(t->ylo[i], t->ylog) : NAN, t->yhi ? tr(t->yhi[i], t->ylog) : NAN};
    for (int k = 0; k < 3; k++)
      if (isfinite(a[k]) && isfinite(x[i])) {
        if (!(y0 <= a[k])) y0 = a[k];
        if (!(y1 >= a[k])) y1 = a[k];
      }
    if (isfinite(x[i]) && isfinite(y[i])) {
      if (!(x0 <= x[i])) x0 = x[i];
      if (!(x1 >= x[i])) x1 = x[i];
    }
  }
  for (size_t i = 0; i < t->nline; i++) {
    lx[i] = tr(t->lx[i], t->xlog);
    ly[i] = tr(t->ly[i], t->ylog);
  }
  if (!isfinite(x0) || !isfinite(y0)) {
    printf("(nothing to plot)\n");
    free(x);
    return;
  }
  double dx = x1 > x0 ? 0.04 * (x1 - x0) : 0.5, dy = y1 > y0 ? 0.08 * (y1 - y0) : 0.5;
  x0 -= dx, x1 += dx, y0 -= dy, y1 += dy;
  if (t->fixy) y0 = tr(t->y0, t->ylog), y1 = tr(t->y1, t->ylog);
  dt_plot p;
  dt_grid g;
  memset(&p, 0, sizeof p);
  memset(&g, 0, sizeof g);
  if (dt_plot_begin(&p, utf8 ? DT_PLOT_BRAILLE : DT_PLOT_ASCII, W, H, x0, x1, y0, y1) != 0 ||
      dt_grid_reset(&g, LM + W + 1, H + 2) != 0) {
    dt_plot_free(&p);
    dt_grid_free(&g);
    free(x);
    return;
  }
  if (t->nline) dt_plot_line(&p, lx, ly, NULL, t->nline, DT_R_MODEL, 0);
  for (size_t i = 0; i < t->n; i++) {
    if (!t->ylo || !t->yhi || !isfinite(y[i])) continue;
    double ex[2] = {x[i], x[i]}, ey[2] = {tr(t->ylo[i], t->ylog), tr(t->yhi[i], t->ylog)};
    if (!isfinite(ey[0])) ey[0] = y0;
    dt_plot_line(&p, ex, ey, NULL, 2, DT_R_SIGMA, 0);
  }
  /* each point a marker of its own, over the error bars and the line */
  for (size_t i = 0; i < t->n; i++) {
    if (!isfinite(x[i]) || !isfinite(y[i]) || y[i] < y0 || y[i] > y1) continue;
    int row = (int)lround((y1 - y[i]) / (y1 - y0) * (H - 1));
    dt_plot_mark(&p, x[i], row, utf8 ? "\u25cf" : "o", DT_R_FLUX, DT_A_BOLD);
  }
  dt_plot_render(&p, &g, LM, 0);
  char buf[32];
  label_of(y1, t->ylog, buf, sizeof buf);
  dt_grid_text(&g, 0, 0, buf, DT_R_LABEL, 0, LM - 1);
  label_of(y0, t->ylog, buf, sizeof buf);
  dt_grid_text(&g, 0, H - 1, buf, DT_R_LABEL, 0, LM - 1);
  for (int r = 0; r < H; r++) dt_grid_text(&g, LM - 1, r, utf8 ? "\u2502" : "|", DT_R_AXIS, 0, 1);
  dt_grid_fill(&g, LM, H, W, 1, utf8 ? "\u2500" : "-", DT_R_AXIS, 0, 0);
  label_of(x0, t->xlog, buf, sizeof buf);
  dt_grid_text(&g, LM, H + 1, buf, DT_R_LABEL, 0, -1);
  label_of(x1, t->xlog, buf, sizeof buf);
  dt_grid_text(&g, LM + W - (int)strlen(buf), H + 1, buf, DT_R_LABEL, 0, -1);
  if (t->title) printf("%s\n", t->title);
  if (t->ylabel) printf("%s%s\n", t->ylabel, t->ylog ? " (log scale)" : "");
  char row[4 * (LM + W + 2) + 8];
  for (int r = 0; r < H + 2; r++) {
    dt_grid_row(&g, r, row, sizeof row);
    size_t l = strlen(row);
    while (l && row[l - 1] == ' ') row[--l] = 0;
    printf("%s\n", row);
  }
  if (t->xlabel) printf("%*s%s%s\n", LM, "", t->xlabel, t->xlog ? " (log scale)" : "");
  printf("\n");
  dt_plot_free(&p);
  dt_grid_free(&g);
  free(x);
  (void)n;
}

int survey_parse_edges(const char *cmd, const char *opt, const char *text, double **edges, size_t *n) {
  size_t cap = 1;
  for (const char *s = text; *s; s++) cap += *s == ',';
  double *e = malloc(cap * sizeof *e);
  char *copy = strdup(text);
  if (!e || !copy) {
    free(e);
    free(copy);
    cli_errorf("out of memory");
    return 2;
  }
  size_t k = 0;
  char *save = NULL;
  for (char *tok = strtok_r(copy, ",", &save); tok; tok = strtok_r(NULL, ",", &save)) {
    if (dt_num_parse(tok, &e[k]) != DT_OK || !isfinite(e[k])) {
      cli_errorf("%s: %s: '%s' is not a number", cmd, opt, tok);
      goto bad;
    }
    if (k && !(e[k] > e[k - 1])) {
      cli_errorf("%s: %s: the edges must increase ('%s' after %g)", cmd, opt, tok, e[k - 1]);
      goto bad;
    }
    k++;
  }
  if (k < 2) {
    cli_errorf("%s: %s: at least two edges (one bin), e.g. 0,50,100", cmd, opt);
    goto bad;
  }
  free(copy);
  *edges = e;
  *n = k;
  return 0;
bad:
  free(copy);
  free(e);
  return 2;
}

long survey_bin(const double *edges, size_t n, double x) {
  if (!isfinite(x) || x < edges[0] || x > edges[n - 1]) return -1;
  for (size_t i = 0; i + 1 < n; i++)
    if (x < edges[i + 1]) return (long)i;
  return (long)n - 2; /* x == the last edge */
}

int survey_threshold(const char *cmd, dt_threshold_kind which, const char *arg, dt_threshold_kind *kind,
                     double *thr) {
  if (*kind != DT_THRESHOLD_NONE) {
    cli_errorf("%s: one threshold at a time (--threshold-mA or --threshold-logN)", cmd);
    return 1;
  }
  if (cli_parse_double(which == DT_THRESHOLD_W_MA ? "--threshold-mA" : "--threshold-logN", arg, thr)) return 1;
  if (!isfinite(*thr)) {
    cli_errorf("%s: the threshold must be a finite number", cmd);
    return 1;
  }
  *kind = which;
  return 0;
}
