/* Agreement between two raters: the agreement matrix and Cohen's kappa.
 *
 * With p_ij the proportion of subjects put in category i by the first rater
 * and j by the second, p_i. and p_.j the margins:
 *   p_o = sum_i p_ii,   p_e = sum_i p_i. p_.i,   kappa = (p_o - p_e) / (1 - p_e)
 * (Cohen 1960, Educational and Psychological Measurement 20, 37).
 * Standard errors:
 *   Cohen (1960):  se = sqrt(p_o (1 - p_o) / (n (1 - p_e)^2))
 *   Fleiss, Cohen & Everitt (1969, Psychological Bulletin 72, 323), large
 *   sample, with q = 1 - kappa:
 *     se^2 = [ sum_i p_ii (1 - (p_i. + p_.i) q)^2
 *              + q^2 sum_{i != j} p_ij (p_.i + p_j.)^2
 *              - (kappa - p_e q)^2 ] / (n (1 - p_e)^2)
 *   and when the true kappa is 0:
 *     se0^2 = [ p_e + p_e^2 - sum_i p_i. p_.i (p_i. + p_.i) ] / (n (1 - p_e)^2). */
#include "doubletty/agree.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

int dt_kappa_compute(const double *table, size_t k, dt_kappa *out, dt_err *e) {
  if (k < 2 || k > DT_AGREE_MAXCAT)
    return dt_err_set(e, DT_EINVAL, NULL, "kappa needs 2 to %d categories, not %zu",
                      DT_AGREE_MAXCAT, k);
  double n = 0.0;
  for (size_t i = 0; i < k * k; i++) {
    if (!isfinite(table[i]) || table[i] < 0.0)
      return dt_err_set(e, DT_EINVAL, NULL, "agreement table cell %zu,%zu is not a count",
                        i / k + 1, i % k + 1);
    n += table[i];
  }
  if (!(n > 0.0)) return dt_err_set(e, DT_EINVAL, NULL, "agreement table is empty");

  double p[DT_AGREE_MAXCAT * DT_AGREE_MAXCAT], row[DT_AGREE_MAXCAT] = {0},
                                              col[DT_AGREE_MAXCAT] = {0};
  for (size_t i = 0; i < k; i++)
    for (size_t j = 0; j < k; j++) {
      p[i * k + j] = table[i * k + j] / n;
      row[i] += p[i * k + j];
      col[j] += p[i * k + j];
    }
  double po = 0.0, pe = 0.0;
  for (size_t i = 0; i < k; i++) {
    po += p[i * k + i];
    pe += row[i] * col[i];
  }
  dt_kappa r = {.k = k, .n = n, .po = po, .pe = pe};
  double den = 1.0 - pe;
  if (den <= 1e-15) {
    /* Both raters used one and the same category only: chance agreement is
     * complete and kappa is undefined. */
    r.kappa = r.se = r.se_fce = r.se0 = r.z = NAN;
  } else {
    double kappa = (po - pe) / den, q = 1.0 - kappa;
    r.kappa = kappa;
    r.se = sqrt(po * (1.0 - po) / (n * den * den));
    double a = 0.0, b = 0.0, s3 = 0.0;
    for (size_t i = 0; i < k; i++) {
      double t = 1.0 - (row[i] + col[i]) * q;
      a += p[i * k + i] * t * t;
      s3 += row[i] * col[i] * (row[i] + col[i]);
      for (size_t j = 0; j < k; j++)
        if (j != i) b += p[i * k + j] * (col[i] + row[j]) * (col[i] + row[j]);
    }
    double c = kappa - pe * q;
    double v = (a + q * q * b - c * c) / (n * den * den);
    double v0 = (pe + pe * pe - s3) / (n * den * den);
    r.se_fce = sqrt(v > 0.0 ? v : 0.0);
    r.se0 = sqrt(v0 > 0.0 ? v0 : 0.0);
    r.z = r.se0 > 0.0 ? kappa / r.se0 : NAN;
  }
  *out = r;
  return DT_OK;
}

int dt_agree_category(dt_verdict v) {
  switch (v) {
  case DT_VERDICT_DETECTED: return 0;
  case DT_VERDICT_NOT_DETECTED: return 1;
  case DT_VERDICT_UNSURE: return 2;
  case DT_VERDICT_UNUSABLE: return 3;
  default: return -1;
  }
}

static int judged(const dt_journal_entry *en, const char *sys) {
  return en && dt_agree_category(dt_judgement_system_verdict(&en->state, sys)) >= 0;
}

/* The entry of s for the spectrum of a: the same identity (digest, HDU,
 * row, doublet); by the path only when either has no digest. */
static const dt_journal_entry *partner(const dt_journal *s, const dt_journal_entry *a) {
  const dt_journal_entry *b = dt_journal_find(s, &a->target);
  if (b && a->target.sha256[0] && b->target.sha256[0] &&
      strcmp(a->target.sha256, b->target.sha256) != 0)
    return NULL; /* the same name, other bytes: another spectrum */
  return b;
}

int dt_agree_sessions(const dt_journal *s1, const dt_journal *s2, dt_agree_report *r,
                      dt_err *e) {
  return dt_agree_sessions_system(s1, s2, "", r, e);
}

int dt_agree_sessions_system(const dt_journal *s1, const dt_journal *s2, const char *sys,
                             dt_agree_report *r, dt_err *e) {
  memset(r, 0, sizeof *r);
  if (!sys || !strcmp(sys, DT_JUDGE_TARGET)) sys = "";
  snprintf(r->system, sizeof r->system, "%s", sys[0] ? sys : DT_JUDGE_TARGET);
  size_t n1 = dt_journal_count(s1);
  if (n1) {
    r->disagree = malloc(n1 * sizeof *r->disagree);
    if (!r->disagree) return dt_err_set(e, DT_ENOMEM, NULL, "out of memory");
  }
  for (size_t i = 0; i < n1; i++) {
    const dt_journal_entry *a = dt_journal_entry_at(s1, i);
    if (!judged(a, sys)) continue;
    const dt_journal_entry *b = partner(s2, a);
    if (!judged(b, sys)) {
      r->nonly1++;
      continue;
    }
    int ca = dt_agree_category(dt_judgement_system_verdict(&a->state, sys)),
        cb = dt_agree_category(dt_judgement_system_verdict(&b->state, sys));
    r->matrix[ca * DT_AGREE_NCAT + cb] += 1.0;
    r->nboth++;
    if (ca != cb) r->disagree[r->ndisagree++] = (dt_agree_pair){a, b};
  }
  size_t n2 = dt_journal_count(s2);
  for (size_t i = 0; i < n2; i++) {
    const dt_journal_entry *b = dt_journal_entry_at(s2, i);
    if (!judged(b, sys)) continue;
    if (!judged(partner(s1, b), sys))
      r->nonly2++;
  }
  if (r->nboth > 0) {
    int rc = dt_kappa_compute(r->matrix, DT_AGREE_NCAT, &r->kappa, e);
    if (rc != DT_OK) {
      dt_agree_report_free(r);
      return rc;
    }
    r->has_kappa = 1;
  }
  return DT_OK;
}

void dt_agree_report_free(dt_agree_report *r) {
  if (!r) return;
  free(r->disagree);
  r->disagree = NULL;
  r->ndisagree = 0;
}

int dt_agree_disagreements(const dt_journal *s1, const dt_journal *s2, dt_target **out,
                           size_t *n, dt_err *e) {
  *out = NULL;
  *n = 0;
  dt_agree_report r;
  int rc = dt_agree_sessions(s1, s2, &r, e);
  if (rc != DT_OK) return rc;
  if (r.ndisagree) {
    *out = malloc(r.ndisagree * sizeof **out);
    if (!*out) {
      dt_agree_report_free(&r);
      return dt_err_set(e, DT_ENOMEM, NULL, "out of memory");
    }
    for (size_t i = 0; i < r.ndisagree; i++) (*out)[i] = r.disagree[i].a->target;
    *n = r.ndisagree;
  }
  dt_agree_report_free(&r);
  return DT_OK;
}
