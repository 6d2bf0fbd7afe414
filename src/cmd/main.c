/* doubletty: entry point and subcommand dispatch. */
#include <stdio.h>
#include <string.h>

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
};

static void usage(FILE *f) {
  fprintf(f, "usage: doubletty COMMAND [options] ...\n"
             "       doubletty FILE...          (same as: doubletty inspect FILE...)\n\n"
             "commands:\n");
  for (size_t i = 0; i < sizeof commands / sizeof commands[0]; i++)
    fprintf(f, "  %-9s %s\n", commands[i].name, commands[i].help);
  fprintf(f, "\n'doubletty COMMAND --help' describes a command; 'man doubletty' all of them.\n");
}

int main(int argc, char **argv) {
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
  if (argv[1][0] == '-' && argv[1][1] != '\0' && strcmp(argv[1], "--list") != 0) {
    fprintf(stderr, "doubletty: unknown option '%s'\n", argv[1]);
    usage(stderr);
    return 2;
  }
  /* Anything else is a spectrum file (or inspector option): open the inspector. */
  return cmd_inspect(argc, argv);
}
