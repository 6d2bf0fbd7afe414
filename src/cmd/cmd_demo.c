/* doubletty demo DIR: write the synthetic demo survey (see doubletty/demo.h).
 *
 * Parses the options, loads the atomic table for Na I and Ca II, calls
 * dt_demo_write and says what it wrote.  --about prints the invented
 * scenario from share/doubletty/demo-scenario.txt. */
#include <limits.h>
#include <getopt.h>
#include <stdio.h>
#include <string.h>

#include "cli.h"
#include "commands.h"
#include "demo.h"

static void usage(FILE *f) {
  fprintf(f,
          "usage: doubletty demo DIR [--count N] [--seed S] [--force]\n"
          "       doubletty demo --about\n\n"
          "Writes a synthetic survey of background quasars and galaxies seen through a\n"
          "fictional pair of galaxies into DIR: spectra in several file layouts,\n"
          "DIR/targets.list (the target list) and DIR/truth.csv (the injected absorption).\n"
          "The same options always give the same files.\n\n"
          "  --count N   number of sightlines (default %d, at most %d)\n"
          "  --seed S    random seed (default %lu)\n"
          "  --force     write into a non-empty directory that holds no earlier demo\n"
          "  --about     describe the invented scenario\n",
          DT_DEMO_DEFAULT_COUNT, DT_DEMO_MAX_COUNT, DT_DEMO_DEFAULT_SEED);
}

static int about(void) {
  char path[PATH_MAX + 32];
  snprintf(path, sizeof path, "%s/demo-scenario.txt", cli_datadir());
  FILE *f = fopen(path, "r");
  if (!f) {
    printf("The doubletty demo survey: synthetic spectra of background quasars and\n"
           "galaxies behind the Velloran Pair, a fictional interacting pair of galaxies\n"
           "at %.0f km/s.  (The longer description, %s, is not installed.)\n",
           DT_DEMO_VSYS, path);
    return 0;
  }
  char buf[4096];
  size_t n;
  while ((n = fread(buf, 1, sizeof buf, f)) > 0) fwrite(buf, 1, n, stdout);
  fclose(f);
  return 0;
}

int cmd_demo(int argc, char **argv) {
  dt_demo_opts o = dt_demo_opts_default();
  const char *dir = NULL;
  static const struct option longopts[] = {
      {"help", no_argument, NULL, 'h'},        {"about", no_argument, NULL, 'a'},
      {"force", no_argument, NULL, 'f'},       {"count", required_argument, NULL, 'c'},
      {"seed", required_argument, NULL, 's'},  {NULL, 0, NULL, 0}};
  int opt;
  long v;
  cli_getopt_reset();
  while ((opt = getopt_long(argc, argv, ":h", longopts, NULL)) != -1) {
    switch (opt) {
    case 'h': usage(stdout); return 0;
    case 'a': return about();
    case 'f': o.force = 1; break;
    case 'c':
      if (cli_parse_long("--count", optarg, &v)) return 2;
      if (v < 1 || v > DT_DEMO_MAX_COUNT) {
        cli_errorf("demo: --count: %ld is out of range 1..%d", v, DT_DEMO_MAX_COUNT);
        return 2;
      }
      o.count = (int)v;
      break;
    case 's':
      if (cli_parse_long("--seed", optarg, &v)) return 2;
      if (v < 0 || v > 4294967295L) {
        cli_errorf("demo: --seed: %ld is out of range 0..4294967295", v);
        return 2;
      }
      o.seed = (unsigned long)v;
      break;
    default: return cli_opt_error("demo", opt, argv);
    }
  }
  if (optind < argc) dir = argv[optind++];
  if (optind < argc) {
    cli_errorf("demo: only one directory, not '%s' and '%s'", dir, argv[optind]);
    return 2;
  }
  if (!dir) {
    cli_errorf("demo: no directory given");
    usage(stderr);
    return 2;
  }

  dt_atomic *at = cli_load_atomic(NULL);
  if (!at) return 1;
  o.nai = dt_atomic_find(at, "NaI");
  o.caii = dt_atomic_find(at, "CaII");
  if (!o.nai) {
    cli_errorf("the atomic table has no Na I doublet; the demo needs it");
    dt_atomic_free(at);
    return 1;
  }
  dt_demo_summary sum;
  dt_err e;
  int st = dt_demo_write(dir, &o, &sum, &e);
  dt_atomic_free(at);
  if (st != DT_OK) {
    cli_report(dir, &e);
    if (st == DT_EINVAL && strstr(e.what, "not empty"))
      fprintf(stderr, "doubletty: choose another directory, or add --force to write into it"
                      " anyway\n");
    return 1;
  }
  printf("wrote %d sightlines in %d files to %s\n", sum.nspectra, sum.nfiles, dir);
  printf("  %s/targets.list  %d targets (the list to vet)\n", dir, sum.ntargets);
  printf("  %s/truth.csv     %d injected components (what is really there)\n", dir,
         sum.ncomponents);
  printf("next: doubletty inspect --list %s/targets.list\n", dir);
  return 0;
}
