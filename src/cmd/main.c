/* doubletty: entry point and subcommand dispatch. */
#include <stdio.h>
#include <string.h>
#include <sys/stat.h>

#include <gsl/gsl_errno.h>

#include "commands.h"

typedef struct {
  const char *name;
  int (*run)(int, char **);
  const char *help;
} command;

static const command commands[] = {
    {"inspect", cmd_inspect, "vet spectra full-screen, one keystroke per judgement"},
    {"fit", cmd_fit, "automatic first pass: fit and measure, write CSV"},
    {"info", cmd_info, "what was read from each spectrum file"},
    {"demo", cmd_demo, "write the demo survey into a directory"},
    {"merge", cmd_merge, "join the CSV outputs of fit shards in order"},
    {"keys", cmd_keys, "print the inspector's key table"},
    {"log", cmd_log, "print a session file's audit trail"},
    {"export", cmd_export, "final state per spectrum of a session, as CSV or FITS"},
    {"compare", cmd_compare, "two sessions' verdicts side by side, Cohen's kappa"},
    {"fraction", cmd_fraction, "detection fraction of a survey with binomial intervals"},
    {"vsf", cmd_vsf, "velocity structure function of sightline pairs, bootstrap errors"},
    {"map", cmd_map, "the sightlines on the sky: detections, limits, velocities"},
    {"figure", cmd_figure, "a velocity-stack figure per spectrum (PDF, PNG, SVG)"},
    {"hi", cmd_hi, "21-cm cube at every sightline: N(HI), velocity, dispersion"},
};

/* Levenshtein distance of two short words (insert, delete, substitute);
 * words beyond 31 characters count as far from everything. */
static int edit_distance(const char *a, const char *b) {
  size_t n = strlen(a), m = strlen(b);
  if (n > 31 || m > 31) return 99;
  int d[32][32];
  for (size_t i = 0; i <= n; i++) d[i][0] = (int)i;
  for (size_t j = 0; j <= m; j++) d[0][j] = (int)j;
  for (size_t i = 1; i <= n; i++)
    for (size_t j = 1; j <= m; j++) {
      int sub = d[i - 1][j - 1] + (a[i - 1] != b[j - 1]);
      int del = d[i - 1][j] + 1, ins = d[i][j - 1] + 1;
      d[i][j] = sub < del ? (sub < ins ? sub : ins) : (del < ins ? del : ins);
    }
  return d[n][m];
}

static int is_file(const char *path) {
  struct stat st;
  return stat(path, &st) == 0 && !S_ISDIR(st.st_mode);
}

static void usage(FILE *f) {
  fprintf(f, "usage: doubletty COMMAND [options] ...\n"
             "       doubletty FILE...          (same as: doubletty inspect FILE...,\n"
             "                                   when FILE exists)\n\n"
             "commands:\n");
  for (size_t i = 0; i < sizeof commands / sizeof commands[0]; i++)
    fprintf(f, "  %-9s %s\n", commands[i].name, commands[i].help);
  fprintf(f, "\n'doubletty COMMAND --help' describes a command; 'man doubletty' all of them.\n");
}

int main(int argc, char **argv) {
  /* The core reports GSL's errors as status codes: GSL's process-wide
   * handler (abort by default) is turned off here, before any thread. */
  gsl_set_error_handler_off();
  if (argc < 2) {
    usage(stderr);
    return 2;
  }
  if (!strcmp(argv[1], "-h") || !strcmp(argv[1], "--help") || !strcmp(argv[1], "help")) {
    usage(stdout);
    return 0;
  }
  if (!strcmp(argv[1], "--version") || !strcmp(argv[1], "version")) {
    printf("doubletty %s\n", DT_VERSION);
    return 0;
  }
  for (size_t i = 0; i < sizeof commands / sizeof commands[0]; i++)
    if (!strcmp(argv[1], commands[i].name)) return commands[i].run(argc - 1, argv + 1);
  /* The bare form "doubletty FILE..." (options of inspect first allowed) opens
   * the inspector; anything else that is not a command is a mistake. */
  if (argv[1][0] == '-' || is_file(argv[1])) return cmd_inspect(argc, argv);
  const char *best = NULL;
  int bestd = 3;
  for (size_t i = 0; i < sizeof commands / sizeof commands[0]; i++) {
    int d = edit_distance(argv[1], commands[i].name);
    if (d < bestd) {
      bestd = d;
      best = commands[i].name;
    }
  }
  if (best)
    fprintf(stderr, "doubletty: unknown command '%s' (did you mean '%s'?)\n", argv[1], best);
  else
    fprintf(stderr, "doubletty: unknown command '%s' (and no such file)\n", argv[1]);
  fprintf(stderr, "try 'doubletty --help'\n");
  return 2;
}
