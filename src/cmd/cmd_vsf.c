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

int cmd_vsf(int argc, char **argv) {
  survey_opts so = {0};
  double dist = NAN, scale = NAN, rlo = -INFINITY, rhi = INFINITY;
  long order = 1, nbins = 8, nboot = 200, seed = 1;
  const char *bins = NULL;
  dt_velocity_kind vk = DT_VELOCITY_MEAN;
  int have_nbins = 0, have_range = 0;
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
    if (survey_opt(opt, optarg, &so)) continue;
    switch (opt) {
    case 'h': usage(stdout); return 0;
    case 1:
      if (cli_parse_double("--distance-mpc", optarg, &dist)) return 2;
      if (!(dist > 0 && isfinite(dist))) {
        cli_errorf("vsf: --distance-mpc: %s is not a positive distance", optarg);
        return 2;
      }
      break;
    case 2:
      if (cli_parse_double("--kpc-per-arcsec", optarg, &scale)) return 2;
      if (!(scale > 0 && isfinite(scale))) {
        cli_errorf("vsf: --kpc-per-arcsec: %s is not a positive scale", optarg);
        return 2;
      }
      break;
    case 3:
      if (cli_parse_long("--order", optarg, &order)) return 2;
      if (order != 1 && order != 2) {
        cli_errorf("vsf: --order: %s is not 1 or 2", optarg);
        return 2;
      }
      break;
    case 4: bins = optarg; break;
    case 5:
      if (cli_parse_long("--nbins", optarg, &nbins)) return 2;
      if (nbins < 1 || nbins > 200) {
        cli_errorf("vsf: --nbins: %s is not between 1 and 200", optarg);
        return 2;
      }
      have_nbins = 1;
      break;
    case 6:
      if (cli_parse_long("--bootstrap", optarg, &nboot)) return 2;
      if (nboot < 2 || nboot > 1000000) {
        cli_errorf("vsf: --bootstrap: %s is not between 2 and 1000000", optarg);
        return 2;
      }
      break;
    case 7:
      if (cli_parse_long("--seed", optarg, &seed)) return 2;
      break;
    case 8:
      if (!strcmp(optarg, "mean")) vk = DT_VELOCITY_MEAN;
      else if (!strcmp(optarg, "strongest")) vk = DT_VELOCITY_STRONGEST;
      else if (!strcmp(optarg, "aod")) vk = DT_VELOCITY_AOD;
      else {
        cli_errorf("vsf: --velocity: '%s' is not mean, strongest or aod", optarg);
        return 2;
      }
      break;
    case 9: {
      char *colon = strchr(optarg, ':');
      if (!colon) {
        cli_errorf("vsf: --fit-range: '%s' is not R1:R2 (e.g. 10:200)", optarg);
        return 2;
      }
      *colon = 0;
      int bad = (*optarg && cli_parse_double("--fit-range", optarg, &rlo)) ||
                (colon[1] && cli_parse_double("--fit-range", colon + 1, &rhi));
      *colon = ':';
      if (bad) return 2;
      if (!(rhi > rlo)) {
        cli_errorf("vsf: --fit-range: '%s': R2 must be larger than R1", optarg);
        return 2;
      }
      have_range = 1;
      break;
    }
    default: return cli_opt_error("vsf", opt, argv);
    }
  }
  if (isfinite(dist) == isfinite(scale)) {
    cli_errorf("vsf: give the scale: --distance-mpc D or --kpc-per-arcsec S (one of them)");
    return 2;
  }
  if (bins && have_nbins) {
    cli_errorf("vsf: --bins or --nbins, not both");
    return 2;
  }
  /* D [Mpc] x 1000 kpc/Mpc x (pi / 648000) rad per arcsec (small angle) */
  if (isfinite(dist)) scale = dist * 1000.0 * M_PI / 648000.0;
  double *edges = NULL;
  size_t nedge = 0;
  if (bins && survey_parse_edges("vsf", "--bins", bins, &edges, &nedge)) return 2;
  if (bins && !(edges[0] >= 0)) {
    cli_errorf("vsf: --bins: separations are not negative");
    free(edges);
    return 2;
  }
  char **files = argv + optind;
  int nfiles = argc - optind;
  cli_out tab, fig;
  dt_fig_format fmt = DT_FIG_PDF;
  int rc = survey_check_outputs("vsf", &so, files, nfiles, &tab, &fig, &fmt);
  if (rc) {
    free(edges);
    return rc;
  }
  dt_catalog c;
  dt_vsf_point *pt = NULL;
  dt_vsf_bin *bin = NULL;
  dt_vsf *w = NULL;
  if ((rc = survey_load("vsf", files, nfiles, &so, &c))) goto done;
  if (survey_need("vsf", &c, "ra_deg") || survey_need("vsf", &c, "dec_deg")) {
    rc = 1;
    goto done;
  }
  if (vk == DT_VELOCITY_AOD && (survey_need("vsf", &c, "v_aod_kms") || survey_need("vsf", &c, "v_aod_err"))) {
    rc = 1;
    goto done;
  }
  /* the detected sightlines with a velocity and a position */
  pt = malloc((c.n ? c.n : 1) * sizeof *pt);
  if (!pt) {
    cli_errorf("out of memory");
    rc = 1;
    goto done;
  }
  size_t n = 0, nopos = 0, novel = 0;
  for (size_t i = 0; i < c.n; i++) {
    const dt_sightline *s = &c.s[i];
    if (s->verdict != DT_VERDICT_DETECTED) continue;
    double v, sv;
    dt_err e;
    int r = dt_sightline_velocity(&c, i, vk, &v, &sv, &e);
    if (r == DT_ERANGE) {
      novel++;
      continue;
    }
    if (r != DT_OK) {
      cli_report(c.tab[s->table].path, &e);
      rc = 1;
      goto done;
    }
    if (!isfinite(s->ra_deg) || !isfinite(s->dec_deg) || fabs(s->dec_deg) > 90) {
      nopos++;
      continue;
    }
    pt[n++] = (dt_vsf_point){s->ra_deg, s->dec_deg, v, sv};
  }
  if (nopos) cli_errorf("vsf: note: %zu detected sightline%s without a position left out", nopos, nopos == 1 ? "" : "s");
  if (novel) cli_errorf("vsf: note: %zu detected sightline%s without a velocity left out", novel, novel == 1 ? "" : "s");
  if (n < 2) {
    cli_errorf("vsf: %zu detected sightline%s with position and velocity; pairs need at least two", n,
               n == 1 ? "" : "s");
    rc = 1;
    goto done;
  }
  if (!bins) {
    double r0, r1;
    dt_vsf_range(pt, n, scale, &r0, &r1);
    if (!(r1 > 0)) {
      cli_errorf("vsf: all the sightlines are at one position; no separations");
      rc = 1;
      goto done;
    }
    if (!(r1 > r0)) r0 = r1 / 2, r1 *= 1.5;
    nedge = (size_t)nbins + 1;
    edges = malloc(nedge * sizeof *edges);
    if (!edges) {
      cli_errorf("out of memory");
      rc = 1;
      goto done;
    }
    for (size_t k = 0; k < nedge; k++)
      edges[k] = r0 * pow(r1 / r0, (double)k / (double)nbins) * (k == 0 ? 1 - 1e-9 : k == nedge - 1 ? 1 + 1e-9 : 1);
  }
  dt_err e;
  if (!(w = dt_vsf_alloc(pt, n, (int)order, scale, edges, nedge, &e))) {
    cli_errorf("vsf: %s", e.what);
    rc = 1;
    goto done;
  }
  size_t nb = nedge - 1;
  bin = calloc(nb, sizeof *bin);
  if (!bin) {
    cli_errorf("out of memory");
    rc = 1;
    goto done;
  }
  dt_vsf_eval(w, bin);
  cli_progress pr;
  cli_progress_start(&pr, "vsf: bootstrap", (size_t)nboot, 0);
  if (dt_vsf_bootstrap(w, (size_t)nboot, (unsigned long)seed, bin, on_progress, &pr) != DT_OK) {
    cli_progress_end(&pr);
    cli_errorf("vsf: out of memory in the bootstrap");
    rc = 1;
    goto done;
  }
  cli_progress_end(&pr);
  double g = NAN, ge = NAN, la = NAN;
  size_t used = 0;
  int fit_ok = dt_vsf_fit(bin, nb, rlo, rhi, &g, &ge, &la, &used) == DT_OK;
  double kol = order == 1 ? 1.0 / 3 : 2.0 / 3;
  char range[96];
  if (have_range) dt_num_snprintf(range, sizeof range, "%g:%g", rlo, rhi);
  else snprintf(range, sizeof range, "all");
  if (fit_ok)
    dt_num_fprintf(stderr, "vsf: slope %.3f +/- %.3f over %s kpc (%zu bins); Kolmogorov %s\n", g, ge, range, used,
                   order == 1 ? "1/3" : "2/3");
  else
    cli_errorf("vsf: note: no slope: fewer than two bins with a positive value and error in the fit range");

  /* the Kolmogorov reference through the fit at the middle of its range
   * (or through the bins' mean), and the fitted line, for the plots */
  double rmin = NAN, rmax = NAN, lx[2], ly[2], kx[2], ky[2];
  for (size_t k = 0; k < nb; k++)
    if (bin[k].npairs && bin[k].r_mean >= rlo && bin[k].r_mean <= rhi) {
      if (!(rmin <= bin[k].r_mean)) rmin = bin[k].r_mean;
      if (!(rmax >= bin[k].r_mean)) rmax = bin[k].r_mean;
    }
  double rmid = sqrt(rmin * rmax), ymid = fit_ok ? pow(10, la) * pow(rmid, g) : NAN;
  if (!fit_ok) { /* geometric mean of the positive bins */
    double sl = 0;
    int k2 = 0;
    for (size_t k = 0; k < nb; k++)
      if (bin[k].vsf > 0) sl += log10(bin[k].vsf), k2++;
    ymid = k2 ? pow(10, sl / k2) : NAN;
  }
  lx[0] = kx[0] = rmin, lx[1] = kx[1] = rmax;
  for (int k = 0; k < 2; k++) {
    ly[k] = fit_ok ? pow(10, la) * pow(lx[k], g) : NAN;
    ky[k] = ymid * pow(kx[k] / rmid, kol);
  }
  const char *unit = order == 1 ? "km/s" : "km\xc2\xb2/s\xc2\xb2";
  char ylab[96];
  snprintf(ylab, sizeof ylab, order == 1 ? "S1(r) = <|\xce\x94v|> [%s]" : "S2(r) = <\xce\x94v\xc2\xb2> \xe2\x88\x92 \xcf\x83\xc2\xb2 [%s]", unit);

  int tty = !so.out && survey_stdout_tty();
  if (tty) {
    double *x = malloc(4 * nb * sizeof *x);
    if (x) {
      double *y = x + nb, *lo = y + nb, *hi = lo + nb;
      for (size_t k = 0; k < nb; k++) {
        x[k] = bin[k].r_mean;
        y[k] = bin[k].vsf;
        lo[k] = bin[k].vsf - bin[k].err;
        hi[k] = bin[k].vsf + bin[k].err;
      }
      char title[128];
      if (fit_ok) dt_num_snprintf(title, sizeof title, "structure function, order %ld: slope %.2f +/- %.2f (Kolmogorov %s)",
                                  order, g, ge, order == 1 ? "1/3" : "2/3");
      else snprintf(title, sizeof title, "structure function, order %ld", order);
      survey_tplot t = {title, "separation r [kpc]", order == 1 ? "S1 [km/s]" : "S2 [km2/s2]", 1, 1, nb, x, y, lo, hi,
                        fit_ok ? 2 : 0, lx, ly, 0, 0, 0};
      survey_tplot_print(&t);
      free(x);
    }
  }
  if (cli_out_open(&tab)) {
    rc = 1;
    goto done;
  }
  dt_csv cw;
  dt_csv_init(&cw, tab.f);
  char num[64];
  dt_csv_comment(&cw, "program", "doubletty vsf " DT_VERSION);
  dt_csv_comment(&cw, "system", so.system ? so.system : "target");
  dt_csv_comment(&cw, "doublet", c.s[0].doublet);
  snprintf(num, sizeof num, "%ld", order);
  dt_csv_comment(&cw, "order", num);
  dt_csv_comment(&cw, "velocity", vk == DT_VELOCITY_MEAN ? "mean" : vk == DT_VELOCITY_STRONGEST ? "strongest" : "aod");
  dt_num_format(num, sizeof num, scale);
  dt_csv_comment(&cw, "kpc_per_arcsec", num);
  snprintf(num, sizeof num, "%zu", n);
  dt_csv_comment(&cw, "sightlines", num);
  snprintf(num, sizeof num, "%ld", nboot);
  dt_csv_comment(&cw, "bootstrap", num);
  snprintf(num, sizeof num, "%ld", seed);
  dt_csv_comment(&cw, "seed", num);
  dt_csv_comment(&cw, "fit_range_kpc", range);
  dt_num_format(num, sizeof num, g);
  dt_csv_comment(&cw, "slope", fit_ok ? num : "");
  dt_num_format(num, sizeof num, ge);
  dt_csv_comment(&cw, "slope_err", fit_ok ? num : "");
  dt_csv_comment(&cw, "kolmogorov", order == 1 ? "1/3" : "2/3");
  const char *head[] = {"r_lo_kpc", "r_hi_kpc", "r_mean_kpc", "npairs", "vsf", "vsf_err"};
  for (int h = 0; h < 6; h++) dt_csv_text(&cw, head[h]);
  dt_csv_end(&cw);
  for (size_t k = 0; k < nb; k++) {
    dt_csv_num(&cw, bin[k].r_lo);
    dt_csv_num(&cw, bin[k].r_hi);
    dt_csv_num(&cw, bin[k].r_mean);
    dt_csv_long(&cw, bin[k].npairs);
    dt_csv_num(&cw, bin[k].vsf);
    dt_csv_num(&cw, bin[k].err);
    dt_csv_end(&cw);
  }
  if (dt_csv_error(&cw)) {
    cli_errorf("vsf: cannot write the table");
    cli_out_abort(&tab);
    rc = 1;
    goto done;
  }
  if (cli_out_commit(&tab)) {
    rc = 1;
    goto done;
  }
  if (so.figure) {
    double *x = malloc(6 * nb * sizeof *x);
    if (!x) {
      cli_errorf("out of memory");
      rc = 1;
      goto done;
    }
    double *y = x + nb, *lo = y + nb, *hi = lo + nb, *xl = hi + nb, *xh = xl + nb;
    for (size_t k = 0; k < nb; k++) {
      x[k] = bin[k].r_mean;
      y[k] = bin[k].vsf;
      lo[k] = bin[k].vsf - bin[k].err;
      hi[k] = bin[k].vsf + bin[k].err;
      xl[k] = bin[k].r_lo > 0 ? bin[k].r_lo : NAN;
      xh[k] = bin[k].r_hi;
    }
    char fitlab[96], kollab[64], title[128], note[160];
    dt_num_snprintf(fitlab, sizeof fitlab, "power law: slope %.2f \xc2\xb1 %.2f", g, ge);
    snprintf(kollab, sizeof kollab, "Kolmogorov: slope %s", order == 1 ? "1/3" : "2/3");
    snprintf(title, sizeof title, "Velocity structure function: %s, system %s", c.s[0].doublet,
             so.system ? so.system : "target");
    dt_num_snprintf(note, sizeof note, "%zu sightlines; %s velocity; errors: %ld bootstrap resamples of the sightlines", n,
                    vk == DT_VELOCITY_MEAN ? "N-weighted mean" : vk == DT_VELOCITY_STRONGEST ? "strongest component" : "AOD",
                    nboot);
    dt_fig_series s[3] = {
        {"bins (mean r, bin width, 1\xcf\x83)", nb, x, y, lo, hi, xl, xh, DT_FIG_POINTS, 5, 0, NULL},
        {fitlab, 2, lx, ly, NULL, NULL, NULL, NULL, DT_FIG_LINE, 6, 0, NULL},
        {kollab, 2, kx, ky, NULL, NULL, NULL, NULL, DT_FIG_LINE | DT_FIG_DASHED, 0, 0, NULL},
    };
    dt_fig_chart ch = {title, "projected separation r [kpc]", ylab, 1, 1, NAN, NAN, NAN, NAN, note, NULL, 0,
                       fit_ok ? 3 : 1, s};
    if (!fit_ok && isfinite(ymid)) { /* no fit: the bins and the reference */
      s[1] = s[2];
      ch.nseries = 2;
    }
    rc = survey_write_figure("vsf", &fig, fmt, draw, &ch);
    free(x);
  }
done:
  dt_vsf_free(w);
  free(bin);
  free(pt);
  dt_catalog_free(&c);
  free(edges);
  return rc;
}
