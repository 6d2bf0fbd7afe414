/* doubletty vsf — how the absorbers' velocity varies with the separation
 * of sightlines: the structure function of order 1 or 2 from all pairs of
 * detected sightlines, bootstrap errors over sightlines, and a power-law
 * slope compared with Kolmogorov's (the statistics are in core vsf.h). */
#include <getopt.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "cli.h"
#include "commands.h"
#include "doubletty/csv.h"
#include "doubletty/num.h"
#include "doubletty/vsf.h"
#include "progress.h"
#include "survey.h"

static void usage(FILE *f) {
  fprintf(f,
          "usage: doubletty vsf CATALOGUE... (--distance-mpc D | --kpc-per-arcsec S) [options]\n"
          "The velocity structure function of the detected sightlines: over pairs at\n"
          "projected separation r, order 1 <|v_i - v_j|>, order 2 <(v_i - v_j)^2 - s_i^2 - s_j^2>,\n"
          "errors by bootstrap over sightlines, a power-law slope over --fit-range.\n\n"
          "options:\n"
          "  --distance-mpc D      distance [Mpc]: r = D x angle\n"
          "  --kpc-per-arcsec S    or the scale directly [kpc/arcsec]\n"
          "  --order 1|2           order (default 1)\n"
          "  --bins E0,E1,...      bin edges [kpc]\n"
          "  --nbins N             or N bins spaced evenly in log r over the pairs (default 8)\n"
          "  --bootstrap N         resamples of the sightlines (default 200)\n"
          "  --seed S              random seed of the bootstrap (default 1)\n"
          "  --velocity KIND       mean (N-weighted mean of the components, default),\n"
          "                        strongest (the component of largest N), aod (columns\n"
          "                        v_aod_kms, v_aod_err)\n"
          "  --fit-range R1:R2     fit the slope over bins with R1 <= r <= R2 [kpc] (default all)\n"
          "  --system NAME         which system: default target\n"
          "  --doublet NAME        the doublet, when the catalogues hold several\n"
          "  --with TABLE.csv      extra columns joined by 'name'\n"
          "  -o OUT.csv            write the table here (default: standard output)\n"
          "  --figure FILE         draw it into FILE (.pdf, .png, .svg)\n"
          "  --force               replace existing output files\n"
          "  -h, --help            this text\n"
          "output columns: r_lo_kpc,r_hi_kpc,r_mean_kpc,npairs,vsf,vsf_err\n");
}

static void on_progress(void *arg, size_t done, size_t total) {
  (void)total;
  cli_progress_update(arg, done);
}

static int draw(FILE *f, dt_fig_format fmt, const dt_fig_page *pg, const void *what) {
  return dt_fig_chart_write(f, fmt, pg, what);
}

/* The command's settings. */
typedef struct vsf_args {
  survey_opts so;
  double dist, scale, rlo, rhi;
  long order, nbins, nboot, seed;
  const char *bins;
  dt_velocity_kind vk;
  int have_nbins, have_range;
} vsf_args;

/* --fit-range R1:R2 (either end may be empty). */
static int parse_fit_range(char *arg, vsf_args *a) {
  char *colon = strchr(arg, ':');
  if (!colon) {
    cli_errorf("vsf: --fit-range: '%s' is not R1:R2 (e.g. 10:200)", arg);
    return 2;
  }
  *colon = 0;
  int bad = (*arg && cli_parse_double("--fit-range", arg, &a->rlo)) ||
            (colon[1] && cli_parse_double("--fit-range", colon + 1, &a->rhi));
  *colon = ':';
  if (bad) return 2;
  if (!(a->rhi > a->rlo)) {
    cli_errorf("vsf: --fit-range: '%s': R2 must be larger than R1", arg);
    return 2;
  }
  a->have_range = 1;
  return 0;
}

/* One option of the command's own: 0, 2 for a bad value. */
static int vsf_option(int opt, char *arg, vsf_args *a) {
  switch (opt) {
  case 1:
    if (cli_parse_double("--distance-mpc", arg, &a->dist)) return 2;
    if (!(a->dist > 0 && isfinite(a->dist))) {
      cli_errorf("vsf: --distance-mpc: %s is not a positive distance", arg);
      return 2;
    }
    return 0;
  case 2:
    if (cli_parse_double("--kpc-per-arcsec", arg, &a->scale)) return 2;
    if (!(a->scale > 0 && isfinite(a->scale))) {
      cli_errorf("vsf: --kpc-per-arcsec: %s is not a positive scale", arg);
      return 2;
    }
    return 0;
  case 3:
    if (cli_parse_long("--order", arg, &a->order)) return 2;
    if (a->order != 1 && a->order != 2) {
      cli_errorf("vsf: --order: %s is not 1 or 2", arg);
      return 2;
    }
    return 0;
  case 4: a->bins = arg; return 0;
  case 5:
    if (cli_parse_long("--nbins", arg, &a->nbins)) return 2;
    if (a->nbins < 1 || a->nbins > 200) {
      cli_errorf("vsf: --nbins: %s is not between 1 and 200", arg);
      return 2;
    }
    a->have_nbins = 1;
    return 0;
  case 6:
    if (cli_parse_long("--bootstrap", arg, &a->nboot)) return 2;
    if (a->nboot < 2 || a->nboot > 1000000) {
      cli_errorf("vsf: --bootstrap: %s is not between 2 and 1000000", arg);
      return 2;
    }
    return 0;
  case 7: return cli_parse_long("--seed", arg, &a->seed) ? 2 : 0;
  case 8:
    if (!strcmp(arg, "mean")) a->vk = DT_VELOCITY_MEAN;
    else if (!strcmp(arg, "strongest")) a->vk = DT_VELOCITY_STRONGEST;
    else if (!strcmp(arg, "aod")) a->vk = DT_VELOCITY_AOD;
    else {
      cli_errorf("vsf: --velocity: '%s' is not mean, strongest or aod", arg);
      return 2;
    }
    return 0;
  case 9: return parse_fit_range(arg, a);
  }
  return 2;
}

/* The options: 0, 2 for bad ones, -1 after --help (exit 0). */
static int parse_args(int argc, char **argv, vsf_args *a) {
  memset(a, 0, sizeof *a);
  a->dist = a->scale = NAN;
  a->rlo = -INFINITY;
  a->rhi = INFINITY;
  a->order = 1;
  a->nbins = 8;
  a->nboot = 200;
  a->seed = 1;
  a->vk = DT_VELOCITY_MEAN;
  static const struct option longopts[] = {{"help", no_argument, NULL, 'h'},
                                           {"distance-mpc", required_argument, NULL, 1},
                                           {"kpc-per-arcsec", required_argument, NULL, 2},
                                           {"order", required_argument, NULL, 3},
                                           {"bins", required_argument, NULL, 4},
                                           {"nbins", required_argument, NULL, 5},
                                           {"bootstrap", required_argument, NULL, 6},
                                           {"seed", required_argument, NULL, 7},
                                           {"velocity", required_argument, NULL, 8},
                                           {"fit-range", required_argument, NULL, 9},
                                           SURVEY_LONGOPTS,
                                           {NULL, 0, NULL, 0}};
  int opt;
  cli_getopt_reset();
  while ((opt = getopt_long(argc, argv, ":ho:", longopts, NULL)) != -1) {
    if (survey_opt(opt, optarg, &a->so)) continue;
    if (opt == 'h') {
      usage(stdout);
      return -1;
    }
    if (opt >= 1 && opt <= 9) {
      if (vsf_option(opt, optarg, a)) return 2;
      continue;
    }
    return cli_opt_error("vsf", opt, argv);
  }
  if (isfinite(a->dist) == isfinite(a->scale)) {
    cli_errorf("vsf: give the scale: --distance-mpc D or --kpc-per-arcsec S (one of them)");
    return 2;
  }
  if (a->bins && a->have_nbins) {
    cli_errorf("vsf: --bins or --nbins, not both");
    return 2;
  }
  /* D [Mpc] x 1000 kpc/Mpc x (pi / 648000) rad per arcsec (small angle) */
  if (isfinite(a->dist)) a->scale = a->dist * 1000.0 * M_PI / 648000.0;
  return 0;
}

/* The detected sightlines with a velocity and a position into pt (*n of
 * them); notes for those left out.  0, or 1 after a message. */
static int collect_points(const dt_catalog *c, dt_velocity_kind vk, dt_vsf_point *pt, size_t *n) {
  size_t nopos = 0, novel = 0;
  *n = 0;
  for (size_t i = 0; i < c->n; i++) {
    const dt_sightline *s = &c->s[i];
    if (s->verdict != DT_VERDICT_DETECTED) continue;
    double v, sv;
    dt_err e;
    int r = dt_sightline_velocity(c, i, vk, &v, &sv, &e);
    if (r == DT_ERANGE) {
      novel++;
      continue;
    }
    if (r != DT_OK) {
      cli_report(c->tab[s->table].path, &e);
      return 1;
    }
    if (!isfinite(s->ra_deg) || !isfinite(s->dec_deg) || fabs(s->dec_deg) > 90) {
      nopos++;
      continue;
    }
    pt[(*n)++] = (dt_vsf_point){s->ra_deg, s->dec_deg, v, sv};
  }
  if (nopos) cli_errorf("vsf: note: %zu detected sightline%s without a position left out", nopos, nopos == 1 ? "" : "s");
  if (novel) cli_errorf("vsf: note: %zu detected sightline%s without a velocity left out", novel, novel == 1 ? "" : "s");
  if (*n < 2) {
    cli_errorf("vsf: %zu detected sightline%s with position and velocity; pairs need at least two", *n,
               *n == 1 ? "" : "s");
    return 1;
  }
  return 0;
}

/* nbins edges even in log r over the pairs' separations.  0, or 1 after a
 * message. */
static int log_edges(const dt_vsf_point *pt, size_t n, double scale, long nbins, double **edges, size_t *nedge) {
  double r0, r1;
  dt_vsf_range(pt, n, scale, &r0, &r1);
  if (!(r1 > 0)) {
    cli_errorf("vsf: all the sightlines are at one position; no separations");
    return 1;
  }
  if (!(r1 > r0)) r0 = r1 / 2, r1 *= 1.5;
  *nedge = (size_t)nbins + 1;
  *edges = malloc(*nedge * sizeof **edges);
  if (!*edges) {
    cli_errorf("out of memory");
    return 1;
  }
  for (size_t k = 0; k < *nedge; k++)
    (*edges)[k] = r0 * pow(r1 / r0, (double)k / (double)nbins) * (k == 0 ? 1 - 1e-9 : k == *nedge - 1 ? 1 + 1e-9 : 1);
  return 0;
}

/* The result: bins, the slope and the two lines drawn with them. */
typedef struct vsf_result {
  dt_vsf_bin *bin;
  size_t nb, n;          /* bins, sightlines */
  int fit_ok;
  double g, ge, la;      /* slope, its error, log10 amplitude */
  double lx[2], ly[2];   /* the fitted line */
  double kx[2], ky[2];   /* the Kolmogorov reference */
  double ymid;
  char range[96];
} vsf_result;

/* The slope over the fit range (printed), and the lines for the plots: the
 * Kolmogorov reference through the fit at the middle of its range (or
 * through the bins' geometric mean), and the fitted line. */
static void slope_and_lines(const vsf_args *a, vsf_result *r) {
  const dt_vsf_bin *bin = r->bin;
  size_t nb = r->nb, used = 0;
  r->g = r->ge = r->la = NAN;
  r->fit_ok = dt_vsf_fit(bin, nb, a->rlo, a->rhi, &r->g, &r->ge, &r->la, &used) == DT_OK;
  double kol = a->order == 1 ? 1.0 / 3 : 2.0 / 3;
  if (a->have_range) dt_num_snprintf(r->range, sizeof r->range, "%g:%g", a->rlo, a->rhi);
  else snprintf(r->range, sizeof r->range, "all");
  if (r->fit_ok)
    dt_num_fprintf(stderr, "vsf: slope %.3f +/- %.3f over %s kpc (%zu bins); Kolmogorov %s\n", r->g, r->ge, r->range,
                   used, a->order == 1 ? "1/3" : "2/3");
  else
    cli_errorf("vsf: note: no slope: fewer than two bins with a positive value and error in the fit range");
  double rmin = NAN, rmax = NAN;
  for (size_t k = 0; k < nb; k++)
    if (bin[k].npairs && bin[k].r_mean >= a->rlo && bin[k].r_mean <= a->rhi) {
      if (!(rmin <= bin[k].r_mean)) rmin = bin[k].r_mean;
      if (!(rmax >= bin[k].r_mean)) rmax = bin[k].r_mean;
    }
  double rmid = sqrt(rmin * rmax);
  r->ymid = r->fit_ok ? pow(10, r->la) * pow(rmid, r->g) : NAN;
  if (!r->fit_ok) { /* geometric mean of the positive bins */
    double sl = 0;
    int k2 = 0;
    for (size_t k = 0; k < nb; k++)
      if (bin[k].vsf > 0) sl += log10(bin[k].vsf), k2++;
    r->ymid = k2 ? pow(10, sl / k2) : NAN;
  }
  r->lx[0] = r->kx[0] = rmin, r->lx[1] = r->kx[1] = rmax;
  for (int k = 0; k < 2; k++) {
    r->ly[k] = r->fit_ok ? pow(10, r->la) * pow(r->lx[k], r->g) : NAN;
    r->ky[k] = r->ymid * pow(r->kx[k] / rmid, kol);
  }
}

/* The plot in the terminal. */
static void print_plot(const vsf_args *a, const vsf_result *r) {
  size_t nb = r->nb;
  double *x = malloc(4 * nb * sizeof *x);
  if (!x) return;
  double *y = x + nb, *lo = y + nb, *hi = lo + nb;
  for (size_t k = 0; k < nb; k++) {
    x[k] = r->bin[k].r_mean;
    y[k] = r->bin[k].vsf;
    lo[k] = r->bin[k].vsf - r->bin[k].err;
    hi[k] = r->bin[k].vsf + r->bin[k].err;
  }
  char title[128];
  if (r->fit_ok)
    dt_num_snprintf(title, sizeof title, "structure function, order %ld: slope %.2f +/- %.2f (Kolmogorov %s)", a->order,
                    r->g, r->ge, a->order == 1 ? "1/3" : "2/3");
  else snprintf(title, sizeof title, "structure function, order %ld", a->order);
  survey_tplot t = {title, "separation r [kpc]", a->order == 1 ? "S1 [km/s]" : "S2 [km2/s2]", 1, 1, nb, x, y, lo, hi,
                    r->fit_ok ? 2 : 0, r->lx, r->ly, 0, 0, 0};
  survey_tplot_print(&t);
  free(x);
}

/* The table with its settings.  0, or 1 after a message. */
static int write_table(const vsf_args *a, const dt_catalog *c, const vsf_result *r, cli_out *tab) {
  if (cli_out_open(tab)) return 1;
  dt_csv cw;
  dt_csv_init(&cw, tab->f);
  char num[64];
  dt_csv_comment(&cw, "program", "doubletty vsf " DT_VERSION);
  dt_csv_comment(&cw, "system", a->so.system ? a->so.system : "target");
  dt_csv_comment(&cw, "doublet", c->s[0].doublet);
  snprintf(num, sizeof num, "%ld", a->order);
  dt_csv_comment(&cw, "order", num);
  dt_csv_comment(&cw, "velocity",
                 a->vk == DT_VELOCITY_MEAN ? "mean" : a->vk == DT_VELOCITY_STRONGEST ? "strongest" : "aod");
  dt_num_format(num, sizeof num, a->scale);
  dt_csv_comment(&cw, "kpc_per_arcsec", num);
  snprintf(num, sizeof num, "%zu", r->n);
  dt_csv_comment(&cw, "sightlines", num);
  snprintf(num, sizeof num, "%ld", a->nboot);
  dt_csv_comment(&cw, "bootstrap", num);
  snprintf(num, sizeof num, "%ld", a->seed);
  dt_csv_comment(&cw, "seed", num);
  dt_csv_comment(&cw, "fit_range_kpc", r->range);
  dt_num_format(num, sizeof num, r->g);
  dt_csv_comment(&cw, "slope", r->fit_ok ? num : "");
  dt_num_format(num, sizeof num, r->ge);
  dt_csv_comment(&cw, "slope_err", r->fit_ok ? num : "");
  dt_csv_comment(&cw, "kolmogorov", a->order == 1 ? "1/3" : "2/3");
  const char *head[] = {"r_lo_kpc", "r_hi_kpc", "r_mean_kpc", "npairs", "vsf", "vsf_err"};
  for (int h = 0; h < 6; h++) dt_csv_text(&cw, head[h]);
  dt_csv_end(&cw);
  for (size_t k = 0; k < r->nb; k++) {
    const dt_vsf_bin *b = &r->bin[k];
    dt_csv_num(&cw, b->r_lo);
    dt_csv_num(&cw, b->r_hi);
    dt_csv_num(&cw, b->r_mean);
    dt_csv_long(&cw, b->npairs);
    dt_csv_num(&cw, b->vsf);
    dt_csv_num(&cw, b->err);
    dt_csv_end(&cw);
  }
  if (dt_csv_error(&cw)) {
    cli_errorf("vsf: cannot write the table");
    cli_out_abort(tab);
    return 1;
  }
  return cli_out_commit(tab) ? 1 : 0;
}

/* The figure: the bins, the fitted power law and the reference. */
static int write_fig(const vsf_args *a, const dt_catalog *c, vsf_result *r, cli_out *fig, dt_fig_format fmt) {
  size_t nb = r->nb;
  double *x = malloc(6 * nb * sizeof *x);
  if (!x) {
    cli_errorf("out of memory");
    return 1;
  }
  double *y = x + nb, *lo = y + nb, *hi = lo + nb, *xl = hi + nb, *xh = xl + nb;
  for (size_t k = 0; k < nb; k++) {
    const dt_vsf_bin *b = &r->bin[k];
    x[k] = b->r_mean;
    y[k] = b->vsf;
    lo[k] = b->vsf - b->err;
    hi[k] = b->vsf + b->err;
    xl[k] = b->r_lo > 0 ? b->r_lo : NAN;
    xh[k] = b->r_hi;
  }
  const char *unit = a->order == 1 ? "km/s" : "km\xc2\xb2/s\xc2\xb2";
  char ylab[96], fitlab[96], kollab[64], title[128], note[160];
  snprintf(ylab, sizeof ylab,
           a->order == 1 ? "S1(r) = <|\xce\x94v|> [%s]" : "S2(r) = <\xce\x94v\xc2\xb2> \xe2\x88\x92 \xcf\x83\xc2\xb2 [%s]",
           unit);
  dt_num_snprintf(fitlab, sizeof fitlab, "power law: slope %.2f \xc2\xb1 %.2f", r->g, r->ge);
  snprintf(kollab, sizeof kollab, "Kolmogorov: slope %s", a->order == 1 ? "1/3" : "2/3");
  snprintf(title, sizeof title, "Velocity structure function: %s, system %s", c->s[0].doublet,
           a->so.system ? a->so.system : "target");
  dt_num_snprintf(note, sizeof note, "%zu sightlines; %s velocity; errors: %ld bootstrap resamples of the sightlines",
                  r->n,
                  a->vk == DT_VELOCITY_MEAN       ? "N-weighted mean"
                  : a->vk == DT_VELOCITY_STRONGEST ? "strongest component"
                                                   : "AOD",
                  a->nboot);
  dt_fig_series s[3] = {
      {"bins (mean r, bin width, 1\xcf\x83)", nb, x, y, lo, hi, xl, xh, DT_FIG_POINTS, 5, 0, NULL},
      {fitlab, 2, r->lx, r->ly, NULL, NULL, NULL, NULL, DT_FIG_LINE, 6, 0, NULL},
      {kollab, 2, r->kx, r->ky, NULL, NULL, NULL, NULL, DT_FIG_LINE | DT_FIG_DASHED, 0, 0, NULL},
  };
  dt_fig_chart ch = {title, "projected separation r [kpc]", ylab, 1, 1, NAN, NAN, NAN, NAN, note, NULL, 0,
                     r->fit_ok ? 3 : 1, s};
  if (!r->fit_ok && isfinite(r->ymid)) { /* no fit: the bins and the reference */
    s[1] = s[2];
    ch.nseries = 2;
  }
  int rc = survey_write_figure("vsf", fig, fmt, draw, &ch);
  free(x);
  return rc;
}

int cmd_vsf(int argc, char **argv) {
  vsf_args a;
  int rc = parse_args(argc, argv, &a);
  if (rc) return rc < 0 ? 0 : rc;
  double *edges = NULL;
  size_t nedge = 0;
  if (a.bins && survey_parse_edges("vsf", "--bins", a.bins, &edges, &nedge)) return 2;
  if (a.bins && !(edges[0] >= 0)) {
    cli_errorf("vsf: --bins: separations are not negative");
    free(edges);
    return 2;
  }
  char **files = argv + optind;
  int nfiles = argc - optind;
  cli_out tab, fig;
  dt_fig_format fmt = DT_FIG_PDF;
  rc = survey_check_outputs("vsf", &a.so, files, nfiles, &tab, &fig, &fmt);
  if (rc) {
    free(edges);
    return rc;
  }
  dt_catalog c;
  dt_vsf_point *pt = NULL;
  dt_vsf *w = NULL;
  vsf_result r;
  memset(&r, 0, sizeof r);
  if ((rc = survey_load("vsf", files, nfiles, &a.so, &c))) goto done;
  if (survey_need("vsf", &c, "ra_deg") || survey_need("vsf", &c, "dec_deg") ||
      (a.vk == DT_VELOCITY_AOD && (survey_need("vsf", &c, "v_aod_kms") || survey_need("vsf", &c, "v_aod_err")))) {
    rc = 1;
    goto done;
  }
  pt = malloc((c.n ? c.n : 1) * sizeof *pt);
  if (!pt) {
    cli_errorf("out of memory");
    rc = 1;
    goto done;
  }
  if ((rc = collect_points(&c, a.vk, pt, &r.n))) goto done;
  if (!a.bins && (rc = log_edges(pt, r.n, a.scale, a.nbins, &edges, &nedge))) goto done;
  dt_err e;
  if (!(w = dt_vsf_alloc(pt, r.n, (int)a.order, a.scale, edges, nedge, &e))) {
    cli_errorf("vsf: %s", e.what);
    rc = 1;
    goto done;
  }
  r.nb = nedge - 1;
  r.bin = calloc(r.nb, sizeof *r.bin);
  if (!r.bin) {
    cli_errorf("out of memory");
    rc = 1;
    goto done;
  }
  dt_vsf_eval(w, r.bin);
  cli_progress pr;
  cli_progress_start(&pr, "vsf: bootstrap", (size_t)a.nboot, 0);
  int bst = dt_vsf_bootstrap(w, (size_t)a.nboot, (unsigned long)a.seed, r.bin, on_progress, &pr);
  cli_progress_end(&pr);
  if (bst != DT_OK) {
    cli_errorf("vsf: out of memory in the bootstrap");
    rc = 1;
    goto done;
  }
  slope_and_lines(&a, &r);
  if (!a.so.out && survey_stdout_tty()) print_plot(&a, &r);
  if ((rc = write_table(&a, &c, &r, &tab))) goto done;
  if (a.so.figure) rc = write_fig(&a, &c, &r, &fig, fmt);
done:
  dt_vsf_free(w);
  free(r.bin);
  free(pt);
  dt_catalog_free(&c);
  free(edges);
  return rc;
}
