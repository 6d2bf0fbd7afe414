/* doubletty keys -- print the inspector's key table.
 *
 * One action a line, "ACTION<TAB>KEY<TAB>HELP", straight from the table in
 * src/ui/keymap.c that the inspector itself uses; `--man` prints the same
 * table as the troff section of the manual page (which a test compares with
 * share/doubletty.1). */
#include <stdio.h>
#include <string.h>

#include "../ui/ui.h"
#include "commands.h"
#include "cli.h"

/* troff-safe text: backslash and minus escaped, a leading dot or quote
 * protected. */
static void troff(FILE *f, const char *s) {
  if (*s == '.' || *s == '\'') fputs("\\&", f);
  for (; *s; s++) {
    if (*s == '\\') fputs("\\e", f);
    else if (*s == '-') fputs("\\-", f);
    else fputc(*s, f);
  }
}

static void usage(FILE *f) {
  fprintf(f, "usage: doubletty keys [--man]\n"
             "  print the inspector's keys, one action a line: ACTION<TAB>KEY<TAB>HELP\n"
             "  --man   the same table as a troff section (for the manual page)\n");
}

int cmd_keys(int argc, char **argv) {
  int man = 0;
  for (int i = 1; i < argc; i++) {
    if (!strcmp(argv[i], "--man")) man = 1;
    else if (!strcmp(argv[i], "-h") || !strcmp(argv[i], "--help")) {
      usage(stdout);
      return 0;
    } else {
      cli_errorf("keys: unknown argument '%s'", argv[i]);
      usage(stderr);
      return 2;
    }
  }
  size_t n;
  const dt_keybind *t = dt_keymap_table(&n);
  const char *group = NULL;
  for (size_t i = 0; i < n; i++) {
    char kn[32];
    dt_keymap_keyname(t[i].key, kn, sizeof kn);
    if (!man) {
      printf("%s\t%s\t%s\n", t[i].name, kn, t[i].help);
      continue;
    }
    if (!group || strcmp(group, t[i].group)) {
      group = t[i].group;
      printf(".SS ");
      troff(stdout, group);
      printf("\n");
    }
    printf(".TP 10\n.B ");
    troff(stdout, kn);
    printf("\n\\fI");
    troff(stdout, t[i].name);
    printf("\\fR: ");
    troff(stdout, t[i].help);
    printf("\n");
  }
  if (fflush(stdout) != 0 || ferror(stdout)) {
    cli_errorf("keys: cannot write the output");
    return 1;
  }
  return 0;
}
