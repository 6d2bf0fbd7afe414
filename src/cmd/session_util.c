/* Helpers shared by the session commands: options, names, opening. */
#include "session_util.h"

#include <math.h>
#include <stdio.h>
#include <string.h>

#include "cli.h"
#include "doubletty/num.h"

int su_opt(const char *cmd, const char *name, int argc, char **argv, int *i, const char **val) {
  size_t len = strlen(name);
  if (strncmp(argv[*i], name, len) != 0) return 0;
  if (argv[*i][len] == '=') {
    *val = argv[*i] + len + 1;
    return 1;
  }
  if (argv[*i][len] != '\0') return 0;
  if (*i + 1 >= argc) {
    cli_errorf("%s: %s needs a value", cmd, name);
    return -1;
  }
  *val = argv[++*i];
  return 1;
}

const char *su_target_name(const dt_target *t, char *buf, size_t n) {
  if (t->hdu > 0 && t->row > 0) snprintf(buf, n, "%s (hdu %d, row %ld)", t->path, t->hdu, t->row);
  else if (t->hdu > 0) snprintf(buf, n, "%s (hdu %d)", t->path, t->hdu);
  else if (t->row > 0) snprintf(buf, n, "%s (row %ld)", t->path, t->row);
  else snprintf(buf, n, "%s", t->path);
  return buf;
}

dt_journal *su_open(const char *path) {
  dt_journal *j;
  dt_err e;
  if (dt_journal_open(path, DT_JOURNAL_READ_ONLY, NULL, &j, &e) != DT_OK) {
    cli_report(path, &e);
    return NULL;
  }
  size_t nw = dt_journal_warning_count(j);
  for (size_t i = 0; i < nw && dt_journal_warning(j, i); i++)
    fprintf(stderr, "doubletty: %s: %s\n", path, dt_journal_warning(j, i));
  if (nw > 64) fprintf(stderr, "doubletty: %s: ... %zu damaged lines in all\n", path, nw);
  return j;
}

const char *su_num(char *buf, size_t n, double x) {
  if (isnan(x)) buf[0] = '\0';
  else dt_num_format(buf, n, x);
  return buf;
}

const char *su_when(const char *iso, char *buf, size_t n) {
  /* YYYY-MM-DDTHH:MM:SS[.mmm]Z */
  if (strlen(iso) >= 20 && iso[10] == 'T') snprintf(buf, n, "%.10s %.8sZ", iso, iso + 11);
  else snprintf(buf, n, "%s", iso);
  return buf;
}
