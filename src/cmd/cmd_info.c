/* doubletty info — what was read from each spectrum file.
 *
 * For every spectrum (every row of a multi-row table unless --row picks
 * one) it prints a block of "key  value" lines: where the spectrum sits in
 * the file, how it was laid out, the vacuum wavelength range, pixel size,
 * median S/N, masked pixels, what happened to air wavelengths, the
 * resolving power if the header gave one, and which doublets of the atomic
 * table lie inside the range.  Blocks are separated by a blank line; the
 * first word of each line is a fixed key, so scripts can grep them.
 * --pixels adds every pixel after the block, with the block turned into
 * '#' comments: the output is then itself a text spectrum doubletty reads.
 *
 * A file that cannot be read gets one message on stderr; the others are
 * still shown, and the exit status is 1. */
#include <getopt.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "cli.h"
#include "commands.h"
#include "doubletty/atomic.h"
#include "doubletty/spectrum.h"

typedef struct info_opts {
  dt_read_opts read;
  int row_given;
  const char *atomic;
  double vsys;
  int pixels;
  int air;      /* --air: text spectra give air wavelengths */
} info_opts;

static void usage(FILE *f) {
  fprintf(f,
          "usage: doubletty info [options] FILE...\n"
          "Show what doubletty reads from each spectrum file.  FILE may carry an\n"
          "extension selector: spec.fits[1] (first extension) or spec.fits[NAME].\n\n"
          "options:\n"
          "  --row N           only row N (1-based) of a multi-row table; default: all rows\n"
          "  --wave-col NAME   table column names, instead of finding them by their\n"
          "  --flux-col NAME     usual names (WAVE, FLUX, IVAR/ERR/..., MASK)\n"
          "  --err-col NAME\n"
          "  --mask-col NAME\n"
          "  --atomic FILE     add (or replace) doublets from FILE\n"
          "  --vsys KMS        rest frame for the doublet coverage check (default 0)\n"
          "  --air             text spectra give air wavelengths (converted to vacuum)\n"
          "  --pixels          list every pixel (wave flux sigma mask) after the summary\n"
          CLI_FRAME_HELP
          "  -h, --help        this text\n");
}

static void print_block(const char *file, const dt_spectrum *s, long nrows, const dt_atomic *t,
                        const info_opts *o) {
  const char *p = o->pixels ? "# " : "";
  size_t n = s->n, nmask = dt_spectrum_nmasked(s);
  printf("%sspectrum    %s", p, file);
  if (s->row > 0) printf("  row %ld", s->row);
  printf("\n%slayout      %s\n", p, s->layout);
  if (s->hdu > 0) {
    printf("%shdu         %d ([%d])", p, s->hdu, s->hdu - 1);
    if (s->extname[0]) printf(" EXTNAME '%s'", s->extname);
    printf("\n");
  }
  if (s->row > 0) printf("%srow         %ld of %ld\n", p, s->row, nrows);
  if (s->object[0]) printf("%sobject      %s\n", p, s->object);
  printf("%spixels      %zu\n", p, n);
  printf("%smasked      %zu (%.1f%%)\n", p, nmask, 100.0 * (double)nmask / (double)n);
  printf("%swavelength  %.4f .. %.4f A vacuum (file unit: %s)\n", p, s->wave[0], s->wave[n - 1],
         s->unit[0] ? s->unit : "Angstrom");
  printf("%sair         %s\n", p,
         s->air ? (s->air_from == DT_AIRVAC_CALLER ? "air as declared, converted to vacuum (IAU, Morton 2000)"
                                                   : "converted air to vacuum (IAU, Morton 2000)")
         : s->air_from == DT_AIRVAC_ASSUMED ? "no: assumed vacuum (the file does not say)"
                                            : "no (vacuum in the file)");
  printf("%spixel-size  %.3f km/s\n", p, dt_spectrum_pixel_kms(s));
  printf("%smedian-snr  %.2f\n", p, dt_spectrum_median_snr(s));
  printf("%ssigma       %s\n", p,
         s->has_sigma ? s->sigma_from : "estimated from the pixel-to-pixel scatter");
  if (s->has_pos)
    printf("%sposition    %.8f %+.8f deg ICRS (%s)\n", p, s->ra, s->dec, s->pos_from);
  else
    printf("%sposition    none (no RA/DEC keywords or columns, no ra=/dec=)\n", p);
  if (s->frame == s->frame_in)
    printf("%sframe       %s (%s%s)\n", p, dt_frame_name(s->frame), s->frame_from,
           strcmp(s->frame_from, "assumed") ? "" : ": the file does not say");
  else
    printf("%sframe       %s, converted from %s (%s): %+.6f km/s\n", p, dt_frame_name(s->frame),
           dt_frame_name(s->frame_in), s->frame_from, s->frame_kms);
  if (s->obs.has_time) printf("%sobserved    MJD %.6f UTC (midpoint)\n", p, s->obs.mjd);
  if (s->obs.has_site)
    printf("%ssite        %.6f %+.6f deg, %.1f m\n", p, s->obs.lon, s->obs.lat, s->obs.height);
  if (s->frame_note[0]) printf("%sframe-note  %s\n", p, s->frame_note);
  if (s->resolution > 0)
    printf("%sresolution  R = %.0f (header)\n", p, s->resolution);
  else
    printf("%sresolution  none in the header\n", p);
  if (s->lsf_fwhm_kms) { /* widths per pixel (lsf.h) */
    double lo = INFINITY, hi = 0;
    size_t none = 0;
    for (size_t i = 0; i < s->n; i++) {
      double w = s->lsf_fwhm_kms[i];
      if (isfinite(w) && w > 0) {
        lo = fmin(lo, w);
        hi = fmax(hi, w);
      } else {
        none++;
      }
    }
    if (hi > 0)
      printf("%sline-spread per pixel from %s: R %.0f-%.0f (FWHM %.2f-%.2f km/s)", p, s->lsf_from,
             DT_C_KMS / hi, DT_C_KMS / lo, lo, hi);
    else
      printf("%sline-spread per pixel from %s: no usable value", p, s->lsf_from);
    if (none && hi > 0) printf(", %zu pixel%s without", none, none == 1 ? "" : "s");
    printf("\n");
  }

  /* Doublets whose two lines both fall inside the range, at --vsys. */
  double z1 = 1.0 + o->vsys / DT_C_KMS;
  char covered[512] = "", partly[512] = "";
  size_t uc = 0, up = 0;
  for (size_t k = 0; t && k < dt_atomic_count(t); k++) {
    const dt_doublet *d = dt_atomic_get(t, k);
    int in[2];
    for (int j = 0; j < 2; j++) {
      double lam = d->line[j].lambda0 * z1;
      in[j] = lam >= s->wave[0] && lam <= s->wave[n - 1];
    }
    if (in[0] && in[1] && uc < sizeof covered - 20)
      uc += (size_t)snprintf(covered + uc, sizeof covered - uc, "%s%s", uc ? " " : "", d->name);
    else if ((in[0] || in[1]) && up < sizeof partly - 40)
      up += (size_t)snprintf(partly + up, sizeof partly - up, "%s%s (%s only)", up ? ", " : "",
                             d->name, d->line[in[0] ? 0 : 1].label);
  }
  printf("%sdoublets    %s", p, uc ? covered : "none");
  if (o->vsys != 0) printf("  (at vsys %+.1f km/s)", o->vsys);
  printf("\n");
  if (up) printf("%spartly      %s\n", p, partly);
  if (o->pixels)
    for (size_t i = 0; i < n; i++)
      printf("%.17g %.17g %.17g %d\n", s->wave[i], s->flux[i], s->sigma[i], s->mask[i] ? 1 : 0);
}

int cmd_info(int argc, char **argv) {
  info_opts o;
  memset(&o, 0, sizeof o);
  int nfiles = 0;
  char **files = calloc((size_t)argc + 1, sizeof *files);
  if (!files) {
    cli_errorf("info: out of memory");
    return 1;
  }
  static const struct option longopts[] = {
      {"help", no_argument, NULL, 'h'},           {"pixels", no_argument, NULL, 'p'},
      {"row", required_argument, NULL, 'r'},      {"vsys", required_argument, NULL, 'v'},
      {"wave-col", required_argument, NULL, 'W'}, {"flux-col", required_argument, NULL, 'F'},
      {"err-col", required_argument, NULL, 'E'},  {"mask-col", required_argument, NULL, 'M'},
      {"atomic", required_argument, NULL, 'A'},   {"air", no_argument, NULL, 'a'},
      {"frame", required_argument, NULL, 1001},   {"in-frame", required_argument, NULL, 1002},
      {"site", required_argument, NULL, 1003},    {NULL, 0, NULL, 0}};
  int opt;
  cli_getopt_reset();
  while ((opt = getopt_long(argc, argv, ":h", longopts, NULL)) != -1) {
    const char *v = optarg;
    switch (opt) {
    case 'h': usage(stdout); free(files); return 0;
    case 'p': o.pixels = 1; break;
    case 'a': o.read.air = 1; o.air = 1; break;
    case 'r':
      if (cli_parse_long("--row", v, &o.read.row)) goto usage_error;
      if (o.read.row < 1) {
        cli_errorf("info: --row %ld: rows count from 1", o.read.row);
        goto usage_error;
      }
      o.row_given = 1;
      break;
    case 'v':
      if (cli_parse_double("--vsys", v, &o.vsys)) goto usage_error;
      if (!isfinite(o.vsys) || fabs(o.vsys) >= DT_C_KMS) {
        cli_errorf("info: --vsys %s: not a velocity below the speed of light", v);
        goto usage_error;
      }
      break;
    case 'W': o.read.wave_col = v; break;
    case 'F': o.read.flux_col = v; break;
    case 'E': o.read.err_col = v; break;
    case 'M': o.read.mask_col = v; break;
    case 'A': o.atomic = v; break;
    case 1001: if (cli_opt_frame("info", v, &o.read)) goto usage_error; break;
    case 1002: if (cli_opt_in_frame("info", v, &o.read)) goto usage_error; break;
    case 1003: if (cli_opt_site("info", v, &o.read)) goto usage_error; break;
    default: free(files); return cli_opt_error("info", opt, argv);
    }
  }
  for (int i = optind; i < argc; i++) files[nfiles++] = argv[i];
  if (nfiles == 0) {
    cli_errorf("info: no spectrum file given");
    goto usage_error;
  }

  dt_atomic *table = cli_load_atomic(o.atomic);
  if (!table) {
    free(files);
    return 1;
  }
  int status = 0, shown = 0;
  for (int f = 0; f < nfiles; f++) {
    dt_err e;
    long count = 1;
    if (dt_spectrum_count(files[f], &o.read, &count, &e) != DT_OK) {
      cli_report(files[f], &e);
      status = 1;
      continue;
    }
    long first = 1, last = count;
    if (o.row_given) first = last = o.read.row;
    for (long r = first; r <= last; r++) {
      dt_read_opts ro = o.read;
      ro.row = count > 1 || o.row_given ? r : 0;
      dt_spectrum *s = NULL;
      if (dt_spectrum_read(files[f], &ro, &s, &e) != DT_OK) {
        cli_report(files[f], &e);
        status = 1;
        continue;
      }
      if (shown++) printf("\n");
      print_block(files[f], s, count, table, &o);
      dt_spectrum_free(s);
    }
  }
  fflush(stdout);
  dt_atomic_free(table);
  free(files);
  return status;

usage_error:
  fprintf(stderr, "try 'doubletty info --help'\n");
  free(files);
  return 2;
}
