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

const char *su_linked_text(const dt_judgement *s, char *buf, size_t n) {
  size_t k = 0;
  buf[0] = '\0';
  if (s->nlinked == 0) return buf;
#define PUT(...) (k += (size_t)snprintf(buf + k, k < n ? n - k : 0, __VA_ARGS__))
  for (size_t i = 0; i < s->nlinked && i < DT_JUDGE_MAX_LINKED; i++) PUT("%s%s", i ? "," : "linked ", s->linked[i]);
  PUT(" (b %s)", dt_btie_name(s->btie));
  if (!s->has_joint) {
    PUT(": no joint fit yet");
    return buf;
  }
  PUT(": %s logN", s->doublet);
  for (size_t c = 0; c < s->ncomp && c < DT_MAX_COMP; c++) PUT(" %.2f", s->comp[c].logN);
  for (size_t i = 0; i < s->joint.nspecies && i < DT_JUDGE_MAX_LINKED; i++) {
    PUT(" | %s logN", s->joint.sp[i].doublet);
    for (size_t c = 0; c < s->ncomp && c < DT_MAX_COMP; c++) PUT(" %.2f", s->joint.sp[i].logN[c]);
  }
#undef PUT
  if (k >= n && n > 4) memcpy(buf + n - 4, "...", 4);
  return buf;
}
