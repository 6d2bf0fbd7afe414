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
          "  --pixels          list every pixel (wave flux sigma mask) after the summary\n"
          "  -h, --help        this text\n");
}

/* Option value from "--opt VALUE" or "--opt=VALUE"; NULL if absent. */
static const char *opt_value(const char *name, int argc, char **argv, int *i) {
  size_t len = strlen(name);
  if (strncmp(argv[*i], name, len) != 0) return NULL;
  if (argv[*i][len] == '=') return argv[*i] + len + 1;
  if (argv[*i][len] != '\0') return NULL;
  if (*i + 1 >= argc) {
    cli_errorf("info: %s needs a value", name);
    return "";
  }
  return argv[++*i];
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
         s->air ? "converted air to vacuum (IAU, Morton 2000)" : "no (vacuum in the file)");
  printf("%spixel-size  %.3f km/s\n", p, dt_spectrum_pixel_kms(s));
  printf("%smedian-snr  %.2f\n", p, dt_spectrum_median_snr(s));
  printf("%ssigma       %s\n", p,
         s->has_sigma ? s->sigma_from : "estimated from the pixel-to-pixel scatter");
  if (s->resolution > 0)
    printf("%sresolution  R = %.0f (header)\n", p, s->resolution);
  else
    printf("%sresolution  none in the header\n", p);

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
  int only_files = 0;
  for (int i = 1; i < argc; i++) {
    const char *a = argv[i], *v;
    if (only_files || a[0] != '-' || a[1] == '\0') {
      files[nfiles++] = argv[i];
      continue;
    }
    if (!strcmp(a, "--")) {
      only_files = 1;
    } else if (!strcmp(a, "-h") || !strcmp(a, "--help")) {
      usage(stdout);
      free(files);
      return 0;
    } else if (!strcmp(a, "--pixels")) {
      o.pixels = 1;
    } else if ((v = opt_value("--row", argc, argv, &i))) {
      if (!*v || cli_parse_long("--row", v, &o.read.row)) goto usage_error;
      if (o.read.row < 1) {
        cli_errorf("info: --row %ld: rows count from 1", o.read.row);
        goto usage_error;
      }
      o.row_given = 1;
    } else if ((v = opt_value("--vsys", argc, argv, &i))) {
      if (!*v || cli_parse_double("--vsys", v, &o.vsys)) goto usage_error;
      if (!isfinite(o.vsys) || fabs(o.vsys) >= DT_C_KMS) {
        cli_errorf("info: --vsys %s: not a velocity below the speed of light", v);
        goto usage_error;
      }
    } else if ((v = opt_value("--wave-col", argc, argv, &i))) {
      if (!*v) goto usage_error;
      o.read.wave_col = v;
    } else if ((v = opt_value("--flux-col", argc, argv, &i))) {
      if (!*v) goto usage_error;
      o.read.flux_col = v;
    } else if ((v = opt_value("--err-col", argc, argv, &i))) {
      if (!*v) goto usage_error;
      o.read.err_col = v;
    } else if ((v = opt_value("--mask-col", argc, argv, &i))) {
      if (!*v) goto usage_error;
      o.read.mask_col = v;
    } else if ((v = opt_value("--atomic", argc, argv, &i))) {
      if (!*v) goto usage_error;
      o.atomic = v;
    } else {
      cli_errorf("info: unknown option '%s'", a);
      goto usage_error;
    }
  }
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
  fprintf(stderr, "(see: doubletty info --help)\n");
  free(files);
  return 2;
}
