/* doubletty hi — the 21-cm comparison: sample a neutral-hydrogen cube at
 * the sky position of every sightline and write N(HI), velocity,
 * dispersion and peak brightness temperature as CSV (hicube.h).
 *
 * The sightlines are spectrum files (their RA/DEC keywords or columns) or a
 * target list (ra=/dec= over the files', vsys=, name=).  The spectra are
 * read only for their positions, names and frames; a sightline whose
 * spectrum cannot be read or has no position gets a status row, as do
 * those outside the cube or on blank pixels.  Velocities are in the output
 * frame (--frame, default BARYCENT) relative to vsys. */
#include <getopt.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "cli.h"
#include "commands.h"
#include "doubletty/csv.h"
#include "doubletty/export.h"
#include "doubletty/hicube.h"
#include "doubletty/num.h"
#include "doubletty/spectrum.h"
#include "doubletty/targets.h"
#include "outfile.h"

static void usage(FILE *f) {
  fprintf(f,
          "usage: doubletty hi CUBE.fits (FILE... | --list TARGETS) [options] -o OUT.csv\n"
          "Sample a 21-cm cube (K or Jy/beam; any projection; FREQ, VRAD, VOPT, VELO ...\n"
          "spectral axis) at the sky position of every sightline.  Columns:\n"
          "name,ra_deg,dec_deg,frame,logN_HI,logN_HI_err,v_HI_kms,sigma_HI_kms,T_peak_K,status\n"
          "N(HI) = 1.823e18 * integral T_B dv (optically thin): a lower limit where the\n"
          "gas is optically thick, and diluted by the beam for small clouds.\n\n"
          "options:\n"
          "  --list FILE        target list (path [ra= dec=] [vsys=] [name=] ...)\n"
          "  --vsys KMS         velocities relative to KMS where the list does not say\n"
          "  --window VLO:VHI   velocity range [km/s, relative to vsys] (default:\n"
          "                     automatic, around the brightest channel)\n"
          "  --aperture ARCSEC  mean over pixels within this radius (default: the value\n"
          "                     interpolated at the position)\n"
          CLI_FRAME_HELP
          "  -o, --output FILE  the CSV (default: standard output)\n"
          "  --force            replace FILE if it exists\n"
          "  -h, --help         this text\n");
}

typedef struct hi_run {
  dt_hicube *cube;
  dt_hi_opts ho;
  dt_read_opts ro;
  int have_vsys;
  double vsys;
  dt_csv csv;
  long rows, failed;
} hi_run;

static void row(hi_run *r, const char *name, const dt_spectrum *s, const dt_target_spec *t,
                const dt_hi_sample *hs, const char *status) {
  dt_csv *w = &r->csv;
  dt_csv_text(w, name);
  int has = t && t->has_pos ? 1 : s && s->has_pos;
  double ra = t && t->has_pos ? t->ra : s ? s->ra : NAN, dec = t && t->has_pos ? t->dec : s ? s->dec : NAN;
  if (has) {
    dt_csv_fixed(w, ra, 8);
    dt_csv_fixed(w, dec, 8);
  } else {
    dt_csv_empty(w);
    dt_csv_empty(w);
  }
  dt_csv_text(w, dt_frame_name(r->ho.frame));
  int ok = hs && hs->status == DT_HI_OK;
  dt_csv_fixed(w, ok ? hs->logN : NAN, 4);
  dt_csv_fixed(w, ok ? hs->logN_err : NAN, 4);
  dt_csv_fixed(w, ok ? hs->v : NAN, 2);
  dt_csv_fixed(w, ok ? hs->sigma : NAN, 2);
  dt_csv_fixed(w, hs && isfinite(hs->tpeak) ? hs->tpeak : NAN, 3);
  dt_csv_text(w, status);
  dt_csv_end(w);
  r->rows++;
}

/* One sightline: the spectrum's position (or the list's), then the cube. */
static void one(hi_run *r, const dt_target_spec *t, const char *path) {
  dt_read_opts ro = r->ro;
  ro.row = t ? t->row : 0;
  if (t && t->air) ro.air = 1;
  if (t && t->has_pos) ro.has_pos = 1, ro.ra = t->ra, ro.dec = t->dec;
  if (t && t->frame != DT_FRAME_UNSET) ro.in_frame = t->frame;
  char stem[DT_TARGET_PATH_MAX];
  const char *name = t && t->name[0] ? t->name : dt_export_stem(path, stem, sizeof stem);
  dt_spectrum *s = NULL;
  dt_err e;
  dt_err_clear(&e);
  /* the spectrum is read for its position; its frame does not matter here */
  ro.out_frame = DT_FRAME_UNSET;
  ro.in_frame = DT_FRAME_BARYCENT;
  if (dt_spectrum_read(path, &ro, &s, &e) != DT_OK && !(t && t->has_pos)) {
    cli_report(path, &e);
    row(r, name, NULL, t, NULL, "unreadable");
    r->failed++;
    return;
  }
  if (!(s && s->has_pos) && !(t && t->has_pos)) {
    row(r, name, s, t, NULL, "no-position");
    dt_spectrum_free(s);
    return;
  }
  double ra = t && t->has_pos ? t->ra : s->ra, dec = t && t->has_pos ? t->dec : s->dec;
  dt_hi_opts ho = r->ho;
  ho.vsys = r->have_vsys ? r->vsys : (t && t->has_vsys ? t->vsys : 0.0);
  dt_hi_sample hs;
  if (dt_hicube_sample(r->cube, ra, dec, &ho, &hs, &e) != DT_OK) {
    cli_report(path, &e);
    row(r, name, s, t, NULL, "failed");
    r->failed++;
  } else {
    row(r, name, s, t, &hs, dt_hi_status_name(hs.status));
  }
  dt_hi_sample_free(&hs);
  dt_spectrum_free(s);
}

int cmd_hi(int argc, char **argv) {
  enum { O_LIST = 256, O_VSYS, O_WINDOW, O_APER, O_FRAME, O_INFRAME, O_SITE, O_FORCE };
  static const struct option longopts[] = {
      {"help", no_argument, NULL, 'h'},        {"list", required_argument, NULL, O_LIST},
      {"vsys", required_argument, NULL, O_VSYS}, {"window", required_argument, NULL, O_WINDOW},
      {"aperture", required_argument, NULL, O_APER}, {"frame", required_argument, NULL, O_FRAME},
      {"in-frame", required_argument, NULL, O_INFRAME}, {"site", required_argument, NULL, O_SITE},
      {"output", required_argument, NULL, 'o'}, {"force", no_argument, NULL, O_FORCE},
      {NULL, 0, NULL, 0}};
  hi_run r;
  memset(&r, 0, sizeof r);
  const char *out_path = NULL;
  int force = 0;
  const char **lists = calloc((size_t)argc + 1, sizeof *lists);
  size_t nlists = 0;
  if (!lists) {
    cli_errorf("hi: out of memory");
    return 1;
  }
  int opt;
  cli_getopt_reset();
  while ((opt = getopt_long(argc, argv, ":ho:", longopts, NULL)) != -1) {
    const char *v = optarg;
    switch (opt) {
    case 'h': usage(stdout); free(lists); return 0;
    case O_LIST: lists[nlists++] = v; break;
    case O_VSYS:
      if (cli_parse_double("--vsys", v, &r.vsys)) goto usage_error;
      if (!(fabs(r.vsys) < 0.5 * DT_C_KMS)) {
        cli_errorf("hi: --vsys %s: not a velocity in km/s", v);
        goto usage_error;
      }
      r.have_vsys = 1;
      break;
    case O_WINDOW:
      if (cli_parse_range("hi: --window", v, &r.ho.vlo, &r.ho.vhi)) goto usage_error;
      r.ho.has_window = 1;
      break;
    case O_APER:
      if (cli_parse_double("--aperture", v, &r.ho.aperture)) goto usage_error;
      if (!(r.ho.aperture > 0 && r.ho.aperture < 36000)) {
        cli_errorf("hi: --aperture %s: not a radius in arcsec (0 < r < 36000)", v);
        goto usage_error;
      }
      break;
    case O_FRAME: if (cli_opt_frame("hi", v, &r.ro)) goto usage_error; break;
    case O_INFRAME: if (cli_opt_in_frame("hi", v, &r.ro)) goto usage_error; break;
    case O_SITE: if (cli_opt_site("hi", v, &r.ro)) goto usage_error; break;
    case 'o': out_path = v; break;
    case O_FORCE: force = 1; break;
    default: free(lists); return cli_opt_error("hi", opt, argv);
    }
  }
  if (optind >= argc) {
    cli_errorf("hi: no cube given");
    goto usage_error;
  }
  const char *cube_path = argv[optind++];
  if (optind >= argc && nlists == 0) {
    cli_errorf("hi: no sightlines: give spectrum files or --list");
    goto usage_error;
  }
  r.ho.frame = r.ro.out_frame != DT_FRAME_UNSET ? r.ro.out_frame : DT_FRAME_BARYCENT;
  cli_out out;
  int st = cli_out_check(&out, "hi", out_path, force);
  if (st) {
    free(lists);
    return st;
  }
  if (cli_out_is_input(&out, cube_path)) {
    free(lists);
    return 1;
  }
  dt_err e;
  if (dt_hicube_open(cube_path, &r.cube, &e) != DT_OK) {
    cli_report(cube_path, &e);
    free(lists);
    return 1;
  }
  if (cli_out_open(&out)) {
    dt_hicube_close(r.cube);
    free(lists);
    return 1;
  }
  dt_csv_init(&r.csv, out.f);
  dt_csv_comment(&r.csv, "cube", cube_path);
  dt_csv_comment(&r.csv, "frame", dt_frame_name(r.ho.frame));
  dt_csv_comment(&r.csv, "cube-frame", dt_frame_name(dt_hicube_frame(r.cube)));
  char buf[96] = "";
  if (r.ho.has_window) dt_num_snprintf(buf, sizeof buf, "%g:%g", r.ho.vlo, r.ho.vhi);
  dt_csv_comment(&r.csv, "window", buf[0] ? buf : "automatic");
  buf[0] = '\0';
  if (r.ho.aperture > 0) dt_num_snprintf(buf, sizeof buf, "%g", r.ho.aperture);
  dt_csv_comment(&r.csv, "aperture-arcsec", buf);
  dt_csv_comment(&r.csv, "caution", "N(HI) optically thin: a lower limit where the gas is optically "
                                    "thick, beam-diluted for small clouds");
  static const char *const cols[] = {"name", "ra_deg", "dec_deg", "frame", "logN_HI", "logN_HI_err",
                                     "v_HI_kms", "sigma_HI_kms", "T_peak_K", "status"};
  for (size_t k = 0; k < sizeof cols / sizeof cols[0]; k++) dt_csv_text(&r.csv, cols[k]);
  dt_csv_end(&r.csv);
  int status = 0;
  for (int i = optind; i < argc; i++) one(&r, NULL, argv[i]);
  for (size_t l = 0; l < nlists; l++) {
    dt_targets *tl = NULL;
    if (dt_targets_open(lists[l], &tl, &e) != DT_OK) {
      cli_report(lists[l], &e);
      status = 1;
      continue;
    }
    dt_target_spec t;
    int got = 0;
    for (;;) {
      int rc = dt_targets_next(tl, &t, &got, &e);
      if (rc != DT_OK) {
        cli_report(lists[l], &e);
        status = 1;
        continue;
      }
      if (!got) break;
      one(&r, &t, t.path);
    }
    dt_targets_close(tl);
  }
  if (dt_csv_error(&r.csv)) {
    cli_errorf("hi: writing %s failed", out_path ? out_path : "standard output");
    cli_out_abort(&out);
    dt_hicube_close(r.cube);
    free(lists);
    return 1;
  }
  if (cli_out_commit(&out)) status = 1;
  fprintf(stderr, "doubletty: hi: %ld sightlines, %ld failed; N(HI) assumes optically thin gas: "
                  "a lower limit where it is optically thick%s%s\n",
          r.rows, r.failed, dt_hicube_note(r.cube)[0] ? "; " : "", dt_hicube_note(r.cube));
  dt_hicube_close(r.cube);
  free(lists);
  return status || r.failed ? 1 : 0;

usage_error:
  fprintf(stderr, "try 'doubletty hi --help'\n");
  free(lists);
  return 2;
}
