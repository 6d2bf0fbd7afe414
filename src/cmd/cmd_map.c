/* doubletty map — where the sightlines are: every sightline on the tangent
 * plane about the sample's centre (core sky.h), marked detected, not
 * detected (with its limit) or left out by the counting rule of catalog.h,
 * detections coloured by velocity. */
#include <getopt.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "../ui/grid.h"
#include "../ui/plot.h"
#include "cli.h"
#include "commands.h"
#include "doubletty/csv.h"
#include "doubletty/hicube.h"
#include "doubletty/num.h"
#include "doubletty/sphere.h"
#include "survey.h"

static void usage(FILE *f) {
  fprintf(f,
          "usage: doubletty map CATALOGUE... [options]\n"
          "The sightlines on the sky (tangent-plane projection about their centre):\n"
          "detected (coloured by velocity), not detected (with the limit), left out.\n\n"
          "options:\n"
          "  --threshold-mA W     count by the rule of 'fraction' at W [mA] (default: verdicts)\n"
          "  --threshold-logN N   or at log10 N [cm-2]\n"
          "  --vmax V             colour scale -V..+V [km/s] (default: the largest |v|)\n"
          "  --hi CUBE            log N(HI) contours of a 21-cm cube beneath (figure)\n"
          "  --hi-window VLO:VHI  velocities integrated for them [km/s, barycentric]\n"
          "                       (default: every channel)\n"
          "  --system NAME        which system: default target\n"
          "  --doublet NAME       the doublet, when the catalogues hold several\n"
          "  --with TABLE.csv     extra columns joined by 'name'\n"
          "  -o OUT.csv           write the table here (default: standard output)\n"
          "  --figure FILE        draw the map into FILE (.pdf, .png, .svg)\n"
          "  --force              replace existing output files\n"
          "  -h, --help           this text\n"
          "output columns: name,ra_deg,dec_deg,x_arcmin,y_arcmin,status,v_kms,limit\n");
}

static int draw(FILE *f, dt_fig_format fmt, const dt_fig_page *pg, const void *what) {
  return dt_fig_map_write(f, fmt, pg, what);
}

static const char *const status_name[3] = {"detected", "not-detected", "left-out"};

/* The map in the terminal: one symbol per sightline, east to the left. */
static void tmap(const dt_fig_map_point *pt, size_t n, double half) {
  enum { W = 56, H = 24 };
  dt_plot p;
  dt_grid g;
  memset(&p, 0, sizeof p);
  memset(&g, 0, sizeof g);
  if (dt_plot_begin(&p, DT_PLOT_ASCII, W, H, -half, half, -half, half) != 0 || dt_grid_reset(&g, W + 2, H + 2) != 0) {
    dt_plot_free(&p);
    dt_grid_free(&g);
    return;
  }
  static const char *const sym[3] = {"*", "v", "x"};
  for (int pass = 2; pass >= 0; pass--)
    for (size_t i = 0; i < n; i++) {
      if ((int)pt[i].mark != pass || !isfinite(pt[i].x)) continue;
      int row = (int)lround((half - pt[i].y) / (2 * half) * (H - 1));
      dt_plot_mark(&p, -pt[i].x, row, sym[pass], DT_R_FLUX, 0); /* east left */
    }
  dt_plot_render(&p, &g, 1, 1);
  dt_grid_fill(&g, 0, 0, W + 2, 1, "-", DT_R_AXIS, 0, 0);
  dt_grid_fill(&g, 0, H + 1, W + 2, 1, "-", DT_R_AXIS, 0, 0);
  dt_grid_fill(&g, 0, 1, 1, H, "|", DT_R_AXIS, 0, 0);
  dt_grid_fill(&g, W + 1, 1, 1, H, "|", DT_R_AXIS, 0, 0);
  char row[4 * (W + 4)];
  printf("sky map (N up, E left; %.3g arcmin across): * detected, v not detected, x left out\n", 2 * half);
  for (int r = 0; r < H + 2; r++) printf("%s\n", dt_grid_row(&g, r, row, sizeof row));
  printf("\n");
  dt_plot_free(&p);
  dt_grid_free(&g);
}

/* log N(HI) contours of a 21-cm cube on the map's tangent plane: the
 * column density of every spatial pixel (hicube.h), placed by the positions
 * of three pixels -- the cube's axes must run along RA and Dec (no rotation,
 * checked to 1% of a pixel step) -- at levels every 0.5 dex from 18.5 up to
 * the map's largest value.  *z is allocated. */
#define HI_MAX_LEVELS 12
static int hi_contours(const char *path, const dt_hi_opts *ho, double ra0, double dec0, dt_fig_contours *hc,
                       double **z, double *level, char *label, size_t nlabel) {
  dt_hicube *cube = NULL;
  dt_err e;
  dt_err_clear(&e);
  size_t nx = 0, ny = 0;
  if (dt_hicube_open(path, &cube, &e) != DT_OK || dt_hicube_column_map(cube, ho, z, &nx, &ny, &e) != DT_OK) {
    cli_errorf("map: %s: %s", path, e.what);
    dt_hicube_close(cube);
    return 1;
  }
  double p[3][2]; /* tangent-plane offsets [arcmin] of pixels (0,0), (1,0), (0,1) */
  const double pix[3][2] = {{0, 0}, {1, 0}, {0, 1}};
  int bad = nx < 2 || ny < 2;
  for (int k = 0; k < 3 && !bad; k++) {
    double ra = 0, dec = 0, xi = 0, eta = 0;
    bad = dt_hicube_pixel_world(cube, pix[k][0], pix[k][1], &ra, &dec) ||
          dt_sphere_gnomonic(ra, dec, ra0, dec0, &xi, &eta);
    p[k][0] = 60 * xi;
    p[k][1] = 60 * eta;
  }
  dt_hicube_close(cube);
  double dx = bad ? 0 : p[1][0] - p[0][0], dy = bad ? 0 : p[2][1] - p[0][1];
  if (bad || fabs(p[2][0] - p[0][0]) > 0.01 * fabs(dx) || fabs(p[1][1] - p[0][1]) > 0.01 * fabs(dy)) {
    cli_errorf("map: %s: the cube's pixels cannot be placed on the map (its axes must run along RA and Dec)", path);
    return 1;
  }
  double zmax = -INFINITY;
  for (size_t i = 0; i < nx * ny; i++)
    if (isfinite((*z)[i]) && (*z)[i] > zmax) zmax = (*z)[i];
  size_t nl = 0;
  for (double l = 18.5; l <= zmax && nl < HI_MAX_LEVELS; l += 0.5) level[nl++] = l;
  if (nl == 0) snprintf(label, nlabel, "log N(HI): none above 18.5");
  else dt_num_snprintf(label, nlabel, "log N(HI) %.1f-%.1f /0.5", level[0], level[nl - 1]);
  hc->nx = nx;
  hc->ny = ny;
  hc->x0 = p[0][0];
  hc->y0 = p[0][1];
  hc->dx = dx;
  hc->dy = dy;
  hc->z = *z;
  hc->nlevel = nl;
  hc->level = level;
  hc->label = label;
  return 0;
}

/* The centre of the sightlines with a position (a note for those
 * without).  0, or 1 after a message. */
static int map_centre(const dt_catalog *c, double *ra0, double *dec0) {
  double *ra = malloc((c->n ? c->n : 1) * sizeof *ra), *dec = malloc((c->n ? c->n : 1) * sizeof *dec);
  if (!ra || !dec) {
    free(ra);
    free(dec);
    cli_errorf("out of memory");
    return 1;
  }
  size_t npos = 0, nopos = 0;
  for (size_t i = 0; i < c->n; i++)
    if (isfinite(c->s[i].ra_deg) && isfinite(c->s[i].dec_deg) && fabs(c->s[i].dec_deg) <= 90) {
      ra[npos] = c->s[i].ra_deg;
      dec[npos++] = c->s[i].dec_deg;
    } else {
      nopos++;
    }
  int bad = dt_sphere_centre(ra, dec, npos, ra0, dec0) != 0;
  free(ra);
  free(dec);
  if (bad) {
    cli_errorf("map: no sightline with a position (columns ra_deg, dec_deg)");
    return 1;
  }
  if (nopos) cli_errorf("map: note: %zu sightline%s without a position left off the map", nopos, nopos == 1 ? "" : "s");
  return 0;
}

/* Each sightline on the tangent plane about (ra0, dec0) with its mark by
 * the counting rule, its velocity (detections) and limit (non-detections);
 * *vabs the largest |v|, *half the largest offset [arcmin]. */
static void place_points(const dt_catalog *c, dt_threshold_kind kind, double thr, double ra0, double dec0,
                         dt_fig_map_point *pt, double *vabs, double *half) {
  size_t far = 0;
  for (size_t i = 0; i < c->n; i++) {
    const dt_sightline *s = &c->s[i];
    dt_fig_map_point *q = &pt[i];
    q->label = s->name;
    q->x = q->y = q->v_kms = q->limit = NAN;
    double xi, eta;
    if (isfinite(s->ra_deg) && isfinite(s->dec_deg) && fabs(s->dec_deg) <= 90) {
      if (dt_sphere_gnomonic(s->ra_deg, s->dec_deg, ra0, dec0, &xi, &eta) == 0 && hypot(xi, eta) < 60) {
        q->x = 60 * xi;
        q->y = 60 * eta;
        *half = fmax(*half, fmax(fabs(q->x), fabs(q->y)));
      } else {
        far++;
      }
    }
    dt_count k = dt_sightline_count(s, kind, thr);
    q->mark = k == DT_COUNT_DETECTION      ? DT_FIG_MARK_DETECTED
              : k == DT_COUNT_NONDETECTION ? DT_FIG_MARK_NOT_DETECTED
                                           : DT_FIG_MARK_LEFT_OUT;
    if (k == DT_COUNT_DETECTION) {
      double v, sv;
      dt_err e;
      if (dt_sightline_velocity(c, i, DT_VELOCITY_MEAN, &v, &sv, &e) == DT_OK) {
        q->v_kms = v;
        *vabs = fmax(*vabs, fabs(v));
      }
    }
    if (s->verdict == DT_VERDICT_NOT_DETECTED) q->limit = kind == DT_THRESHOLD_LOGN ? s->logN_limit : s->W_limit_mA;
  }
  if (far)
    cli_errorf("map: note: %zu sightline%s more than 60 deg from the centre left off the map", far, far == 1 ? "" : "s");
}

/* The table: one row per sightline.  0, or 1 after a message. */
static int write_table(const dt_catalog *c, const dt_fig_map_point *pt, dt_threshold_kind kind, double ra0,
                       double dec0, cli_out *tab) {
  if (cli_out_open(tab)) return 1;
  dt_csv w;
  dt_csv_init(&w, tab->f);
  char num[64];
  dt_csv_comment(&w, "program", "doubletty map " DT_VERSION);
  dt_num_format(num, sizeof num, ra0);
  dt_csv_comment(&w, "centre_ra_deg", num);
  dt_num_format(num, sizeof num, dec0);
  dt_csv_comment(&w, "centre_dec_deg", num);
  dt_csv_comment(&w, "projection", "gnomonic (TAN); x east, y north");
  dt_csv_comment(&w, "limit", kind == DT_THRESHOLD_LOGN ? "logN_limit" : "W_limit_mA");
  const char *head[] = {"name", "ra_deg", "dec_deg", "x_arcmin", "y_arcmin", "status", "v_kms", "limit"};
  for (int h = 0; h < 8; h++) dt_csv_text(&w, head[h]);
  dt_csv_end(&w);
  for (size_t i = 0; i < c->n; i++) {
    dt_csv_text(&w, c->s[i].name);
    dt_csv_num(&w, c->s[i].ra_deg);
    dt_csv_num(&w, c->s[i].dec_deg);
    dt_csv_fixed(&w, pt[i].x, 4);
    dt_csv_fixed(&w, pt[i].y, 4);
    dt_csv_text(&w, status_name[pt[i].mark]);
    dt_csv_fixed(&w, pt[i].v_kms, 3);
    dt_csv_num(&w, pt[i].limit);
    dt_csv_end(&w);
  }
  if (dt_csv_error(&w)) {
    cli_errorf("map: cannot write the table");
    cli_out_abort(tab);
    return 1;
  }
  return cli_out_commit(tab) ? 1 : 0;
}

int cmd_map(int argc, char **argv) {
  survey_opts so = {0};
  double thr = NAN, vmax = NAN;
  const char *hi_path = NULL;
  dt_hi_opts ho;
  memset(&ho, 0, sizeof ho);
  ho.has_window = 1; /* every channel unless --hi-window */
  ho.vlo = -1e6;
  ho.vhi = 1e6;
  dt_threshold_kind kind = DT_THRESHOLD_NONE;
  static const struct option longopts[] = {{"help", no_argument, NULL, 'h'},
                                           {"threshold-mA", required_argument, NULL, 1},
                                           {"threshold-logN", required_argument, NULL, 2},
                                           {"vmax", required_argument, NULL, 3},
                                           {"hi", required_argument, NULL, 4},
                                           {"hi-window", required_argument, NULL, 5},
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
      if (survey_threshold("map", opt == 1 ? DT_THRESHOLD_W_MA : DT_THRESHOLD_LOGN, optarg, &kind, &thr)) return 2;
      break;
    case 3:
      if (cli_parse_double("--vmax", optarg, &vmax)) return 2;
      if (!(vmax > 0 && isfinite(vmax))) {
        cli_errorf("map: --vmax: %s is not a positive velocity", optarg);
        return 2;
      }
      break;
    case 4: hi_path = optarg; break;
    case 5:
      if (cli_parse_range("map: --hi-window", optarg, &ho.vlo, &ho.vhi)) return 2;
      break;
    default: return cli_opt_error("map", opt, argv);
    }
  }
  char **files = argv + optind;
  int nfiles = argc - optind;
  cli_out tab, fig;
  dt_fig_format fmt = DT_FIG_PDF;
  int rc = survey_check_outputs("map", &so, files, nfiles, &tab, &fig, &fmt);
  if (rc) return rc;
  if (hi_path && !so.figure) {
    cli_errorf("map: --hi draws contours into the figure: give --figure FILE too");
    return 2;
  }
  dt_catalog c;
  dt_fig_contours hc;
  double *hz = NULL, hlevel[HI_MAX_LEVELS];
  char hlabel[160];
  dt_fig_map_point *pt = NULL;
  if ((rc = survey_load("map", files, nfiles, &so, &c))) goto done;
  if (survey_need("map", &c, "ra_deg") || survey_need("map", &c, "dec_deg") ||
      (kind == DT_THRESHOLD_W_MA && (survey_need("map", &c, "W_mA") || survey_need("map", &c, "W_limit_mA"))) ||
      (kind == DT_THRESHOLD_LOGN && survey_need("map", &c, "logN_limit"))) {
    rc = 1;
    goto done;
  }
  pt = calloc(c.n, sizeof *pt);
  if (!pt) {
    cli_errorf("out of memory");
    rc = 1;
    goto done;
  }
  double ra0, dec0;
  if ((rc = map_centre(&c, &ra0, &dec0))) goto done;
  double vabs = 0, half = 0;
  place_points(&c, kind, thr, ra0, dec0, pt, &vabs, &half);
  if (!isfinite(vmax)) vmax = vabs > 0 ? vabs : 100;

  /* the contours first: a cube that cannot be drawn stops before any output */
  if (hi_path && (rc = hi_contours(hi_path, &ho, ra0, dec0, &hc, &hz, hlevel, hlabel, sizeof hlabel))) goto done;
  if (!so.out && survey_stdout_tty()) tmap(pt, c.n, half > 0 ? half * 1.05 : 1);
  if ((rc = write_table(&c, pt, kind, ra0, dec0, &tab))) goto done;
  if (so.figure) {
    char title[128], centre[128];
    snprintf(title, sizeof title, "Sightlines: %s, system %s", c.s[0].doublet, so.system ? so.system : "target");
    dt_num_snprintf(centre, sizeof centre, "centre RA %.4f\xc2\xb0 Dec %+.4f\xc2\xb0 (ICRS), gnomonic projection%s", ra0,
                    dec0, kind == DT_THRESHOLD_LOGN ? "; limits: log N" : "; limits: W [m\xc3\x85]");
    dt_fig_map m = {title, centre, vmax, "", c.n, pt, NULL};
    if (hi_path) m.contours = &hc;
    rc = survey_write_figure("map", &fig, fmt, draw, &m);
  }
done:
  free(hz);
  free(pt);
  dt_catalog_free(&c);
  return rc;
}
