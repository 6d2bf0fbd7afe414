/* doubletty compare — two sessions' verdicts side by side.
 *
 * Spectra are matched by (path, HDU, row).  For those with a verdict in both
 * sessions it prints the agreement matrix (rows: the first session), the
 * observed and chance agreement, Cohen's kappa with its standard error
 * (Cohen 1960) and the large-sample one of Fleiss, Cohen & Everitt (1969),
 * then every spectrum the two disagree on, with who judged it and when.
 * `doubletty inspect --only-disagreements S1 S2` opens that list. */
#include <getopt.h>
#include <math.h>
#include <stdio.h>
#include <string.h>

#include "cli.h"
#include "commands.h"
#include "doubletty/agree.h"
#include "doubletty/journal.h"
#include "session_util.h"

static void usage(FILE *f) {
  fprintf(f,
          "usage: doubletty compare SESSION1 SESSION2\n"
          "Compare the verdicts of two session files: agreement matrix, observed\n"
          "agreement, Cohen's kappa with its standard error, and the spectra the two\n"
          "disagree on (open them with: doubletty inspect --only-disagreements S1 S2).\n\n"
          "With verdicts of several absorber systems (target, milky-way, ...), one\n"
          "comparison per system, the target first.\n\n"
          "options:\n"
          "  --system NAME  only the verdicts of system NAME\n"
          "  -h, --help     this text\n");
}

static const char *const CAT[DT_AGREE_NCAT] = {"detected", "not-detected", "unsure", "unusable"};

static size_t judged(const dt_journal *j, const char *sys) {
  size_t n = 0;
  for (size_t i = 0; i < dt_journal_count(j); i++)
    if (dt_agree_category(dt_judgement_system_verdict(&dt_journal_entry_at(j, i)->state, sys)) >= 0) n++;
  return n;
}

/* The names of the systems other than the target with a verdict in j,
 * added to names (n of cap). */
static void other_systems(const dt_journal *j, char (*names)[DT_JUDGE_SYS_NAME], size_t *n, size_t cap) {
  for (size_t i = 0; i < dt_journal_count(j); i++) {
    const dt_judgement *s = &dt_journal_entry_at(j, i)->state;
    for (size_t k = 0; k < s->nsysv && k < DT_JUDGE_MAX_SYS; k++) {
      size_t m = 0;
      while (m < *n && strcmp(names[m], s->sysv[k].name)) m++;
      if (m == *n && *n < cap) snprintf(names[(*n)++], DT_JUDGE_SYS_NAME, "%s", s->sysv[k].name);
    }
  }
}

/* One system's comparison: matrix, kappa, disagreements. */
static void print_report(const dt_agree_report *r, const char *s1, const char *s2, const dt_journal *j1,
                         const dt_journal *j2, int heading) {
  const char *sys = !strcmp(r->system, DT_JUDGE_TARGET) ? "" : r->system;
  if (heading) printf("== system %s ==\n", r->system);
  printf("session 1  %s  (%zu spectra, %zu with a verdict)\n", s1, dt_journal_count(j1), judged(j1, sys));
  printf("session 2  %s  (%zu spectra, %zu with a verdict)\n", s2, dt_journal_count(j2), judged(j2, sys));
  printf("with a verdict in both: %zu   only in session 1: %zu   only in session 2: %zu\n\n",
         r->nboth, r->nonly1, r->nonly2);
  if (!r->nboth) {
    printf("no spectrum has a verdict in both sessions: nothing to compare\n");
  } else {
    printf("agreement matrix (rows: session 1, columns: session 2)\n");
    printf("%-14s", "");
    for (int c = 0; c < DT_AGREE_NCAT; c++) printf("%14s", CAT[c]);
    printf("%10s\n", "total");
    double col[DT_AGREE_NCAT] = {0};
    for (int a = 0; a < DT_AGREE_NCAT; a++) {
      double row = 0;
      printf("%-14s", CAT[a]);
      for (int b = 0; b < DT_AGREE_NCAT; b++) {
        double v = r->matrix[a * DT_AGREE_NCAT + b];
        printf("%14.0f", v);
        row += v;
        col[b] += v;
      }
      printf("%10.0f\n", row);
    }
    printf("%-14s", "total");
    for (int b = 0; b < DT_AGREE_NCAT; b++) printf("%14.0f", col[b]);
    printf("%10zu\n\n", r->nboth);
    const dt_kappa *k = &r->kappa;
    printf("observed agreement p_o   %.4f\n", k->po);
    printf("chance agreement   p_e   %.4f\n", k->pe);
    if (isnan(k->kappa)) {
      printf("Cohen's kappa            undefined (both used a single category: p_e = 1)\n");
    } else {
      printf("Cohen's kappa            %.4f +- %.4f  (standard error, Cohen 1960)\n", k->kappa, k->se);
      printf("                         +- %.4f  (large-sample standard error, Fleiss, Cohen & Everitt 1969)\n",
             k->se_fce);
      if (isfinite(k->z))
        printf("test of kappa = 0        z = %.2f  (standard error under kappa = 0: %.4f)\n", k->z, k->se0);
    }
  }
  printf("\ndisagreements: %zu\n", r->ndisagree);
  char name[4200], w1[40], w2[40];
  for (size_t i = 0; i < r->ndisagree; i++) {
    const dt_journal_entry *a = r->disagree[i].a, *b = r->disagree[i].b;
    printf("  %s\n    1: %-13s %s  %s\n    2: %-13s %s  %s\n",
           su_target_name(&a->target, name, sizeof name),
           dt_verdict_name(dt_judgement_system_verdict(&a->state, sys)), a->judged_by,
           su_when(a->judged_at, w1, sizeof w1), dt_verdict_name(dt_judgement_system_verdict(&b->state, sys)),
           b->judged_by, su_when(b->judged_at, w2, sizeof w2));
    char l1[600], l2[600];
    if (a->state.nlinked) printf("    1: %s\n", su_linked_text(&a->state, l1, sizeof l1));
    if (b->state.nlinked) printf("    2: %s\n", su_linked_text(&b->state, l2, sizeof l2));
  }
}

int cmd_compare(int argc, char **argv) {
  const char *s[2] = {NULL, NULL};
  const char *only = NULL;
  int ns = 0;
  static const struct option longopts[] = {{"help", no_argument, NULL, 'h'},
                                           {"system", required_argument, NULL, 's'},
                                           {NULL, 0, NULL, 0}};
  int opt;
  cli_getopt_reset();
  while ((opt = getopt_long(argc, argv, ":h", longopts, NULL)) != -1) {
    if (opt == 's') {
      only = optarg;
      continue;
    }
    if (opt != 'h') return cli_opt_error("compare", opt, argv);
    usage(stdout);
    return 0;
  }
  for (int i = optind; i < argc; i++) {
    if (ns == 2) {
      cli_errorf("compare: two session files, not more ('%s' is extra)", argv[i]);
      return 2;
    }
    s[ns++] = argv[i];
  }
  if (ns != 2) {
    usage(stderr);
    return 2;
  }
  dt_journal *j1 = su_open(s[0]);
  if (!j1) return 1;
  dt_journal *j2 = su_open(s[1]);
  if (!j2) {
    dt_journal_close(j1);
    return 1;
  }
  /* the target first, then every other system either session judged */
  char names[2 * DT_JUDGE_MAX_SYS + 1][DT_JUDGE_SYS_NAME];
  size_t nn = 0;
  snprintf(names[nn++], DT_JUDGE_SYS_NAME, "%s", only ? only : DT_JUDGE_TARGET);
  if (!only) {
    other_systems(j1, names, &nn, sizeof names / sizeof names[0]);
    other_systems(j2, names, &nn, sizeof names / sizeof names[0]);
  }
  for (size_t k = 0; k < nn; k++) {
    dt_agree_report r;
    dt_err e;
    if (dt_agree_sessions_system(j1, j2, names[k], &r, &e) != DT_OK) {
      cli_report(NULL, &e);
      dt_journal_close(j1);
      dt_journal_close(j2);
      return 1;
    }
    if (k) printf("\n");
    print_report(&r, s[0], s[1], j1, j2, nn > 1 || only);
    dt_agree_report_free(&r);
  }
  int status = fflush(stdout) != 0 ? 1 : 0;
  dt_journal_close(j1);
  dt_journal_close(j2);
  return status;
}
