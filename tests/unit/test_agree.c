/* Cohen's kappa and its standard errors against published worked examples
 * and a Monte Carlo experiment; the comparison of two sessions' verdicts. */
#include <gsl/gsl_randist.h>
#include <gsl/gsl_rng.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>

#include "doubletty/agree.h"
#include "doubletty/journal.h"
#include "harness.h"

/* Standard deviation of kappa over many tables of n subjects drawn from the
 * cell probabilities p (k x k). */
static double mc_sd(const double *p, size_t k, unsigned n, int reps, gsl_rng *r) {
  double s = 0, s2 = 0;
  unsigned cnt[DT_AGREE_MAXCAT * DT_AGREE_MAXCAT];
  double t[DT_AGREE_MAXCAT * DT_AGREE_MAXCAT];
  int used = 0;
  for (int i = 0; i < reps; i++) {
    gsl_ran_multinomial(r, k * k, n, p, cnt);
    for (size_t c = 0; c < k * k; c++) t[c] = cnt[c];
    dt_kappa kp;
    if (dt_kappa_compute(t, k, &kp, NULL) != DT_OK || !isfinite(kp.kappa)) continue;
    s += kp.kappa;
    s2 += kp.kappa * kp.kappa;
    used++;
  }
  double m = s / used;
  return sqrt((s2 / used - m * m) * used / (used - 1.0));
}

static void add_verdict(dt_journal *j, const char *path, dt_verdict v) {
  dt_target t = {.path = path, .hdu = 1, .row = 0, .sha256 = ""};
  dt_judgement s;
  dt_judgement_init(&s);
  dt_action a;
  dt_action_init(&a, DT_ACT_VERDICT);
  a.ival = (int)v;
  dt_judgement_apply(&s, &a);
  dt_err e;
  if (dt_journal_append(j, &t, &a, &s, NULL, &e) != DT_OK) printf("append failed: %s\n", e.what);
}

int main(void) {
  dt_kappa k;
  dt_err e;

  /* Fleiss (1981), Statistical Methods for Rates and Proportions, 2nd ed.,
   * Table 13.1 (= Fleiss, Levin & Paik 2003, Table 18.1): two diagnosticians,
   * 100 subjects, three categories; proportions x 100.  Published: kappa =
   * 0.68, standard error under kappa = 0 of 0.076 (from memory). */
  double fleiss[9] = {75, 1, 4, 5, 4, 1, 0, 0, 10};
  CHECK(dt_kappa_compute(fleiss, 3, &k, &e) == DT_OK, "kappa of the Fleiss example");
  CHECK_CLOSE(k.po, 0.89, 1e-12, "Fleiss example: observed agreement 0.89 (table sum of diagonal)");
  CHECK_CLOSE(k.pe, 0.66, 1e-12, "Fleiss example: chance agreement 0.66 (from the margins)");
  CHECK_CLOSE(k.kappa, 0.68, 0.005, "Fleiss example: kappa 0.68 (published, 2 decimals)");
  CHECK_CLOSE(k.se0, 0.076, 0.0006, "Fleiss example: null standard error 0.076 (from memory)");

  /* Cohen (1960), Educational and Psychological Measurement 20, 37, the
   * worked example: 200 subjects, three categories, p_o = .70, p_c = .41,
   * kappa = .492, sigma_kappa = .055 (from memory; counts rebuilt from the
   * published proportions). */
  double cohen[9] = {88, 14, 18, 10, 40, 10, 2, 6, 12};
  CHECK(dt_kappa_compute(cohen, 3, &k, &e) == DT_OK, "kappa of Cohen's example");
  CHECK_CLOSE(k.po, 0.70, 1e-12, "Cohen example: p_o = .70");
  CHECK_CLOSE(k.pe, 0.41, 1e-12, "Cohen example: p_c = .41");
  CHECK_CLOSE(k.kappa, 0.492, 0.0005, "Cohen example: kappa = .492");
  CHECK_CLOSE(k.se, 0.055, 0.0006, "Cohen example: standard error .055 (Cohen 1960 formula)");
  CHECK_CLOSE(k.z, k.kappa / k.se0, 1e-12, "z = kappa / se0");

  /* Monte Carlo: the large-sample standard errors of Fleiss, Cohen & Everitt
   * (1969) against the scatter of kappa over 20000 simulated tables. */
  gsl_rng *r = gsl_rng_alloc(gsl_rng_mt19937);
  gsl_rng_set(r, 20240601);
  double p[9];
  for (int i = 0; i < 9; i++) p[i] = cohen[i] / 200.0;
  double sd = mc_sd(p, 3, 200, 20000, r);
  CHECK_REL(k.se_fce, sd, 0.05, "Fleiss-Cohen-Everitt standard error vs Monte Carlo scatter (%.4f)", sd);
  /* independent raters with the same margins: kappa = 0 */
  double row[3] = {.60, .30, .10}, col[3] = {.50, .30, .20}, q[9], t0[9];
  for (int i = 0; i < 3; i++)
    for (int j = 0; j < 3; j++) q[i * 3 + j] = row[i] * col[j], t0[i * 3 + j] = 200 * q[i * 3 + j];
  dt_kappa k0;
  dt_kappa_compute(t0, 3, &k0, &e);
  CHECK_CLOSE(k0.kappa, 0.0, 1e-12, "independent raters: kappa 0");
  double sd0 = mc_sd(q, 3, 200, 20000, r);
  CHECK_REL(k0.se0, sd0, 0.05, "null standard error vs Monte Carlo scatter under independence (%.4f)", sd0);
  CHECK_REL(k0.se_fce, k0.se0, 1e-9, "at kappa = 0 the two standard errors agree");
  gsl_rng_free(r);

  /* edges */
  double perfect[4] = {10, 0, 0, 15};
  dt_kappa_compute(perfect, 2, &k, &e);
  CHECK_CLOSE(k.kappa, 1.0, 1e-12, "perfect agreement: kappa 1");
  CHECK_CLOSE(k.se_fce, 0.0, 1e-12, "perfect agreement: no spread");
  double one[4] = {10, 0, 0, 0};
  CHECK(dt_kappa_compute(one, 2, &k, &e) == DT_OK && isnan(k.kappa),
        "one category only: kappa undefined (NaN), not an error");
  double empty[4] = {0, 0, 0, 0};
  CHECK(dt_kappa_compute(empty, 2, &k, &e) == DT_EINVAL, "empty table: %s", e.what);
  double neg[4] = {1, -1, 0, 3};
  CHECK(dt_kappa_compute(neg, 2, &k, &e) == DT_EINVAL, "negative count: %s", e.what);
  CHECK(dt_kappa_compute(neg, 1, &k, &e) == DT_EINVAL, "one category: %s", e.what);
  CHECK(dt_agree_category(DT_VERDICT_NONE) == -1 && dt_agree_category(DT_VERDICT_UNUSABLE) == 3,
        "verdict categories");

  /* two sessions */
  char dir[] = "/tmp/dt-agree-XXXXXX";
  CHECK(mkdtemp(dir) != NULL, "temp dir");
  char p1[64], p2[64];
  snprintf(p1, sizeof p1, "%s/alice.session", dir);
  snprintf(p2, sizeof p2, "%s/bob.session", dir);
  dt_journal *j1, *j2;
  CHECK(dt_journal_open(p1, DT_JOURNAL_RW, "alice", &j1, &e) == DT_OK, "open session 1");
  CHECK(dt_journal_open(p2, DT_JOURNAL_RW, "bob", &j2, &e) == DT_OK, "open session 2");
  add_verdict(j1, "s1.fits", DT_VERDICT_DETECTED);
  add_verdict(j1, "s2.fits", DT_VERDICT_DETECTED);
  add_verdict(j1, "s3.fits", DT_VERDICT_NOT_DETECTED);
  add_verdict(j1, "s4.fits", DT_VERDICT_UNSURE);
  add_verdict(j1, "s5.fits", DT_VERDICT_DETECTED); /* only alice */
  add_verdict(j1, "s6.fits", DT_VERDICT_DETECTED);
  add_verdict(j1, "s6.fits", DT_VERDICT_NONE);     /* withdrawn: not judged */
  add_verdict(j2, "s4.fits", DT_VERDICT_NOT_DETECTED);
  add_verdict(j2, "s3.fits", DT_VERDICT_NOT_DETECTED);
  add_verdict(j2, "s2.fits", DT_VERDICT_UNSURE);
  add_verdict(j2, "s1.fits", DT_VERDICT_DETECTED);
  add_verdict(j2, "s7.fits", DT_VERDICT_UNUSABLE); /* only bob */
  add_verdict(j2, "s6.fits", DT_VERDICT_UNUSABLE);
  dt_agree_report rep;
  CHECK(dt_agree_sessions(j1, j2, &rep, &e) == DT_OK, "compare sessions");
  CHECK(rep.nboth == 4 && rep.nonly1 == 1 && rep.nonly2 == 2, "4 judged by both, 1 and 2 by one only (%zu %zu %zu)",
        rep.nboth, rep.nonly1, rep.nonly2);
  CHECK(rep.matrix[0 * 4 + 0] == 1 && rep.matrix[0 * 4 + 2] == 1 && rep.matrix[1 * 4 + 1] == 1 &&
            rep.matrix[2 * 4 + 1] == 1,
        "agreement matrix cells");
  CHECK(rep.ndisagree == 2 && !strcmp(rep.disagree[0].a->target.path, "s2.fits") &&
            !strcmp(rep.disagree[1].a->target.path, "s4.fits"),
        "disagreements in the first session's order");
  /* kappa of this 4x4 table by hand: p_o = 2/4; margins alice (2,1,1,0),
   * bob (1,2,1,0): p_e = (2+2+1)/16 = 5/16; kappa = (1/2 - 5/16)/(11/16) = 3/11 */
  CHECK_CLOSE(rep.kappa.kappa, 3.0 / 11.0, 1e-12, "kappa of the session pair (3/11 by hand)");
  dt_agree_report_free(&rep);
  dt_target *dis;
  size_t nd;
  CHECK(dt_agree_disagreements(j1, j2, &dis, &nd, &e) == DT_OK && nd == 2 &&
            !strcmp(dis[0].path, "s2.fits") && dis[0].hdu == 1,
        "disagreement targets for a second look");
  free(dis);
  dt_journal_close(j1);
  dt_journal_close(j2);
  unlink(p1);
  unlink(p2);
  rmdir(dir);
  return dt_test_done();
}
