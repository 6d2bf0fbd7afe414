/* Agreement between two people's verdicts.
 *
 * Two session files judge (partly) the same spectra.  For the spectra with a
 * verdict in both, the verdicts form a k x k agreement matrix; from it come
 * the observed agreement p_o, the agreement expected by chance p_e and
 * Cohen's kappa = (p_o - p_e) / (1 - p_e) (Cohen 1960, Educational and
 * Psychological Measurement 20, 37), with its standard errors. */
#ifndef DOUBLETTY_AGREE_H
#define DOUBLETTY_AGREE_H
#include <stddef.h>
#include "doubletty/journal.h"
#include "doubletty/status.h"

#define DT_AGREE_MAXCAT 8
#define DT_AGREE_NCAT 4   /* verdict categories: detected, not-detected, unsure, unusable */

typedef struct dt_kappa {
  size_t k;          /* categories */
  double n;          /* subjects (sum of the table) */
  double po;         /* observed proportion of agreement */
  double pe;         /* proportion expected by chance from the margins */
  double kappa;      /* NaN when p_e = 1 (both raters used one category only) */
  double se;         /* standard error of kappa, Cohen (1960):
                        sqrt(p_o (1 - p_o) / (n (1 - p_e)^2)) */
  double se_fce;     /* large-sample standard error of Fleiss, Cohen & Everitt
                        (1969, Psychological Bulletin 72, 323) */
  double se0;        /* standard error when the true kappa is 0 (Fleiss, Cohen &
                        Everitt 1969), for the test of kappa = 0 */
  double z;          /* kappa / se0 */
} dt_kappa;

/* Kappa of a k x k table of counts (row-major: table[i*k + j] = subjects put in
 * category i by the first rater and j by the second).  DT_EINVAL for k < 2 or
 * k > DT_AGREE_MAXCAT, a negative or non-finite count, or an empty table. */
int dt_kappa_compute(const double *table, size_t k, dt_kappa *out, dt_err *e);

/* Matrix category of a verdict (0..DT_AGREE_NCAT-1), -1 for DT_VERDICT_NONE. */
int dt_agree_category(dt_verdict v);

typedef struct dt_agree_pair {
  const dt_journal_entry *a;     /* the target in the first session */
  const dt_journal_entry *b;     /* ... in the second (NULL if not judged there) */
} dt_agree_pair;

typedef struct dt_agree_report {
  double matrix[DT_AGREE_NCAT * DT_AGREE_NCAT];   /* rows: first session */
  size_t nboth;                   /* spectra with a verdict in both */
  size_t nonly1, nonly2;          /* spectra with a verdict in one session only */
  int has_kappa;                  /* 0 when nboth == 0 */
  dt_kappa kappa;
  dt_agree_pair *disagree;        /* verdicts differ; first session's order */
  size_t ndisagree;
  char system[32];                /* the absorber system compared */
} dt_agree_report;

/* Compare the verdicts of two sessions, matching spectra by identity (the
 * file's digest, HDU, row and doublet; by the path when a digest is missing:
 * dt_journal_find).
 * The report points into both journals: keep them open while using it. */
int dt_agree_sessions(const dt_journal *s1, const dt_journal *s2,
                      dt_agree_report *r, dt_err *e);
void dt_agree_report_free(dt_agree_report *r);

/* The same for the verdicts of one absorber system, as
 * dt_judgement_system_verdict (judge.h) gives them; "target" or "" is
 * dt_agree_sessions. */
int dt_agree_sessions_system(const dt_journal *s1, const dt_journal *s2, const char *system,
                             dt_agree_report *r, dt_err *e);

/* The spectra two sessions disagree on (both have a verdict and they
 * differ), in the first session's order, as a malloc'd array of targets
 * (free() it; paths point into s1 and stay valid while s1 is open; they are
 * the recorded hints: dt_journal_resolve gives the file's path).
 * *n = 0 and *out = NULL when there are none. */
int dt_agree_disagreements(const dt_journal *s1, const dt_journal *s2,
                           dt_target **out, size_t *n, dt_err *e);

#endif
