/* Joint fits across doublets (joint.h, elements.h).
 *
 *   test_joint            the checks below
 *   test_joint --peer F   fit the problem in file F (written by
 *                         tests/py/joint_scipy.py) and print the results
 *                         for the comparison with its SciPy fit
 *   test_joint --masses   print the table of atomic weights (compared with
 *                         the periodictable package by joint_scipy.py)
 *
 * Checks:
 *  - the thermal Doppler parameter against the handbook form
 *    b = 0.12895 (T / A)^(1/2) km/s (T in K, A the mass in u; Draine 2011,
 *    Physics of the Interstellar and Intergalactic Medium, sec. 6.3 -- from
 *    memory), and element symbols taken from species names;
 *  - bad problems are refused with DT_EINVAL (no species, `thermal` without
 *    a mass, non-finite starts);
 *  - Monte Carlo, shared velocities (Na I and Ca II, same b): the joint fit
 *    against separate fits of each doublet (fit.h) on the same data: the
 *    errors of v and log N shrink, and the joint pulls (fit - truth)/error
 *    have mean 0 +- 3/sqrt(N) plus the second-order bias of nonlinear least
 *    squares (Box 1971, JRSS B 33, 171 -- from memory: the error over the
 *    scale on which the model bends) and standard deviation 1 +- 3/sqrt(2(N-1))
 *    (the sampling error of a unit normal's standard deviation: common
 *    practice);
 *  - Monte Carlo, `thermal` with Na I and K I (masses 22.99 and 39.10 u):
 *    T and b_turb recovered, the same pull statistics;
 *  - the analysis level on a spectrum holding Na I and Ca II but not K I:
 *    the species not covered and the unknown one are reported and left
 *    out, the others fitted with one velocity; a species of unknown mass
 *    under `thermal` is an error naming it; the joint first pass finds the
 *    components in the stronger species.
 * Synthetic spectra are made here with dt_model_eval (model.h; checked on
 * its own against SciPy in tests/scripts/model_scipy.sh) and Gaussian noise
 * (GSL mt19937, fixed seeds).  Atomic data: the built-in table (its lines
 * name their sources). */
#include <gsl/gsl_randist.h>
#include <gsl/gsl_rng.h>
#include <gsl/gsl_statistics_double.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <time.h>

#include "doubletty/atomic.h"
#include "doubletty/elements.h"
#include "doubletty/fit.h"
#include "doubletty/joint.h"
#include "doubletty/model.h"
#include "doubletty/spectrum.h"
#include "harness.h"

static double now(void) {
  struct timespec ts;
  clock_gettime(CLOCK_MONOTONIC, &ts);
  return (double)ts.tv_sec + 1e-9 * (double)ts.tv_nsec;
}

/* A species on its own pixel grid: both lines +-250 km/s, step in km/s. */
typedef struct synth {
  const dt_doublet *d;
  size_t n;
  double *wave, *truth, *flux, *sigma;
  dt_model *m;
} synth;

static int synth_make(synth *y, const dt_doublet *d, double R, double step_kms, double snr) {
  memset(y, 0, sizeof *y);
  y->d = d;
  double lo = d->line[0].lambda0 * (1 - 250 / DT_C_KMS);
  double hi = d->line[1].lambda0 * (1 + 250 / DT_C_KMS);
  if (lo > hi) {
    double t = lo;
    lo = d->line[1].lambda0 * (1 - 250 / DT_C_KMS);
    hi = t + (d->line[0].lambda0 - d->line[1].lambda0) + 500 * d->line[0].lambda0 / DT_C_KMS;
  }
  y->n = (size_t)(log(hi / lo) / (step_kms / DT_C_KMS)) + 1;
  y->wave = malloc(y->n * sizeof(double));
  y->truth = malloc(y->n * sizeof(double));
  y->flux = malloc(y->n * sizeof(double));
  y->sigma = malloc(y->n * sizeof(double));
  for (size_t i = 0; i < y->n; i++) {
    y->wave[i] = lo * exp((double)i * step_kms / DT_C_KMS);
    y->sigma[i] = 1.0 / snr;
  }
  dt_model_config cfg;
  memset(&cfg, 0, sizeof cfg);
  cfg.doublet = d;
  cfg.resolution = R;
  y->m = dt_model_alloc(y->wave, y->n, &cfg, DT_MAX_COMP, NULL);
  return y->m != NULL;
}

static void synth_truth(synth *y, const dt_component *c, size_t nc) {
  dt_model_eval(y->m, c, nc, y->truth, NULL, 0);
}

static void synth_noise(synth *y, gsl_rng *r) {
  for (size_t i = 0; i < y->n; i++) y->flux[i] = y->truth[i] + gsl_ran_gaussian(r, y->sigma[i]);
}

static void synth_free(synth *y) {
  dt_model_free(y->m);
  free(y->wave);
  free(y->truth);
  free(y->flux);
  free(y->sigma);
}

static void species_from(dt_joint_species *sp, const synth *y, double mass) {
  memset(sp, 0, sizeof *sp);
  sp->model = y->m;
  sp->flux = y->flux;
  sp->sigma = y->sigma;
  sp->mass_u = mass;
}

/* pull statistics of one parameter */
static void pull_checks(const char *what, const double *pull, size_t n, double bias) {
  double mean = gsl_stats_mean(pull, 1, n), sd = gsl_stats_sd(pull, 1, n);
  double tm = 3.0 / sqrt((double)n) + bias, ts = 3.0 / sqrt(2.0 * ((double)n - 1));
  CHECK(fabs(mean) <= tm, "%s: |mean pull| <= %.3f (%.3f)", what, tm, mean);
  CHECK(fabs(sd - 1) <= ts, "%s: pull sd 1 +- %.3f (%.3f)", what, ts, sd);
}

static void check_basics(void) {
  /* b = 0.12895 sqrt(T/A) km/s (Draine 2011, sec. 6.3, from memory) */
  double T = 1e4, A = 22.98977;
  CHECK_REL(dt_joint_b_thermal(T, 0.0, A), 0.12895 * sqrt(T / A), 2e-4,
            "thermal b of Na at 10^4 K = 0.12895 sqrt(T/A) km/s");
  CHECK_REL(dt_joint_b_thermal(T, 3.0, A), sqrt(9.0 + pow(0.12895, 2) * T / A), 2e-4,
            "turbulent part added in quadrature");
  char sym[3];
  const char *names[][2] = {{"NaI", "Na"}, {"CaII", "Ca"}, {"KI", "K"}, {"CIV", "C"},
                            {"SiIV", "Si"}, {"OVI", "O"}, {"NV", "N"}, {"MgII", "Mg"}};
  for (size_t i = 0; i < sizeof names / sizeof names[0]; i++) {
    int st = dt_element_symbol(names[i][0], sym);
    CHECK(st == DT_OK && strcmp(sym, names[i][1]) == 0, "element of %s is %s (%s)", names[i][0],
          names[i][1], sym);
  }
  double m;
  dt_err e;
  CHECK(dt_element_mass_of("XqI", &m, &e) == DT_ENOTFOUND && strstr(e.what, "'Xq'"),
        "unknown element: not found, named (%s)", e.what);
  CHECK(dt_element_symbol("nai", sym) == DT_EINVAL, "a name without an element symbol");
  dt_joint_btie bt;
  CHECK(dt_joint_btie_parse("thermal", &bt) == DT_OK && bt == DT_JOINT_B_THERMAL &&
            strcmp(dt_joint_btie_name(bt), "thermal") == 0 &&
            dt_joint_btie_parse("Same", &bt) == DT_EINVAL,
        "b rules parse and print");
}

static void check_bad(const dt_atomic *t) {
  synth y;
  synth_make(&y, dt_atomic_find(t, "NaI"), 20000, 5, 50);
  dt_component c = {11.5, 5, 0};
  synth_truth(&y, &c, 1);
  memcpy(y.flux, y.truth, y.n * sizeof(double));
  dt_joint_workspace *w = dt_joint_alloc(2, 2 * y.n, 2);
  dt_joint_species sp[2];
  species_from(&sp[0], &y, 0.0);
  sp[0].logN[0] = 11.5;
  sp[0].b[0] = 5;
  dt_joint_problem p;
  memset(&p, 0, sizeof p);
  p.nspec = 1;
  p.sp = sp;
  p.ncomp = 1;
  p.v[0] = 0;
  p.b[0] = 5;
  p.vlo = -100;
  p.vhi = 100;
  dt_joint_result r;
  dt_err e;
  p.btie = DT_JOINT_B_THERMAL;
  CHECK(dt_joint_run(w, &p, &r, &e) == DT_EINVAL && strstr(e.what, "atomic mass"),
        "thermal without a mass is refused (%s)", e.what);
  p.btie = DT_JOINT_B_SAME;
  p.nspec = 0;
  CHECK(dt_joint_run(w, &p, &r, &e) == DT_EINVAL, "no species is refused");
  p.nspec = 1;
  p.v[0] = NAN;
  CHECK(dt_joint_run(w, &p, &r, &e) == DT_EINVAL, "a non-finite start is refused");
  p.v[0] = 0;
  p.vlo = 100;
  CHECK(dt_joint_run(w, &p, &r, &e) == DT_EINVAL, "an empty velocity range is refused");
  p.vlo = -100;
  CHECK(dt_joint_run(w, &p, &r, &e) == DT_OK && fabs(r.v[0]) < 1e-3 &&
            fabs(r.comp[0][0].logN - 11.5) < 1e-4,
        "noise-free data: the truth back (v %.2g, log N %.6f)", r.v[0], r.comp[0][0].logN);
  CHECK(dt_joint_alloc(DT_JOINT_MAX_SPECIES + 1, 10, 1) == NULL, "too many species: no workspace");
  dt_joint_free(w);
  synth_free(&y);
}

/* Monte Carlo: shared velocities, joint against separate fits. */
#define MC_SHARED 150
static void mc_shared(const dt_atomic *t) {
  synth y[2];
  CHECK(synth_make(&y[0], dt_atomic_find(t, "NaI"), 30000, 3.0, 60) &&
            synth_make(&y[1], dt_atomic_find(t, "CaII"), 30000, 3.0, 60),
        "shared: synthetic Na I and Ca II");
  dt_component tr[2][2] = {{{11.4, 5.0, -18.0}, {11.1, 7.0, 22.0}},
                           {{11.7, 5.0, -18.0}, {11.5, 7.0, 22.0}}};
  for (int s = 0; s < 2; s++) synth_truth(&y[s], tr[s], 2);
  size_t maxpix = y[0].n + y[1].n;
  dt_joint_workspace *w = dt_joint_alloc(2, maxpix, 2);
  dt_fit_workspace *fw = dt_fit_alloc(maxpix, 2, 0);
  gsl_rng *rng = gsl_rng_alloc(gsl_rng_mt19937);
  gsl_rng_set(rng, 20261202);
  static double pv[2 * MC_SHARED], pn[2][2 * MC_SHARED], pb[2 * MC_SHARED];
  double ratio_v = 0, ratio_n[2] = {0, 0}, bias_v = 0, bias_n[2] = {0, 0}, bias_b = 0;
  size_t np = 0, nfail = 0, nr = 0;
  double tj = 0, ts = 0;
  for (int it = 0; it < MC_SHARED; it++) {
    for (int s = 0; s < 2; s++) synth_noise(&y[s], rng);
    dt_joint_species sp[2];
    dt_joint_problem p;
    memset(&p, 0, sizeof p);
    for (int s = 0; s < 2; s++) {
      species_from(&sp[s], &y[s], 0);
      sp[s].logN[0] = 11.3;
      sp[s].logN[1] = 11.3;
    }
    p.nspec = 2;
    p.sp = sp;
    p.ncomp = 2;
    p.v[0] = -14;
    p.v[1] = 18;
    p.b[0] = p.b[1] = 6;
    p.vlo = -150;
    p.vhi = 150;
    dt_joint_result r;
    double t0 = now();
    int st = dt_joint_run(w, &p, &r, NULL);
    tj += now() - t0;
    dt_fit_result sr[2];
    int sst = DT_OK;
    for (int s = 0; s < 2; s++) {
      dt_component start[2] = {{11.3, 6, -14}, {11.3, 6, 18}};
      dt_fit_problem fp;
      memset(&fp, 0, sizeof fp);
      fp.model = y[s].m;
      fp.flux = y[s].flux;
      fp.sigma = y[s].sigma;
      fp.ncomp = 2;
      fp.comp = start;
      fp.vlo = -150;
      fp.vhi = 150;
      t0 = now();
      sst |= dt_fit_run(fw, &fp, &sr[s], NULL);
      ts += now() - t0;
    }
    if (st != DT_OK) {
      nfail++;
      continue;
    }
    for (int k = 0; k < 2; k++) {
      pv[np] = (r.v[k] - tr[0][k].v) / r.v_err[k];
      pb[np] = (r.comp[0][k].b - tr[0][k].b) / r.err[0][k].b;
      bias_v += r.v_err[k] / tr[0][k].b;
      bias_b += r.err[0][k].b / tr[0][k].b;
      for (int s = 0; s < 2; s++) {
        pn[s][np] = (r.comp[s][k].logN - tr[s][k].logN) / r.err[s][k].logN;
        bias_n[s] += r.err[s][k].logN * M_LN10;
      }
      np++;
    }
    if (sst == DT_OK) {
      for (int k = 0; k < 2; k++) {
        ratio_v += r.v_err[k] / fmin(sr[0].err[k].v, sr[1].err[k].v);
        for (int s = 0; s < 2; s++) ratio_n[s] += r.err[s][k].logN / sr[s].err[k].logN;
        nr++;
      }
    }
  }
  CHECK(nfail <= MC_SHARED / 50, "shared: at most 2%% of joint fits fail (%zu)", nfail);
  ratio_v /= (double)nr;
  ratio_n[0] /= (double)nr;
  ratio_n[1] /= (double)nr;
  /* both species constrain v: the joint error below the better separate one */
  CHECK(ratio_v < 0.9, "shared: v error joint / best separate < 0.9 (%.3f)", ratio_v);
  /* the weaker species gains most: its v and b come from both */
  CHECK(ratio_n[0] < 0.95 && ratio_n[1] < 0.99,
        "shared: log N errors joint / separate: Na I < 0.95 (%.3f), Ca II < 0.99 (%.3f)",
        ratio_n[0], ratio_n[1]);
  pull_checks("shared: v", pv, np, bias_v / (double)np);
  pull_checks("shared: b", pb, np, bias_b / (double)np);
  pull_checks("shared: log N (Na I)", pn[0], np, bias_n[0] / (double)np);
  pull_checks("shared: log N (Ca II)", pn[1], np, bias_n[1] / (double)np);
  printf("#    shared: %d sets, joint %.1f ms, two separate %.1f ms per set\n", MC_SHARED,
         1e3 * tj / MC_SHARED, 1e3 * ts / MC_SHARED);
  gsl_rng_free(rng);
  dt_joint_free(w);
  dt_fit_free(fw);
  for (int s = 0; s < 2; s++) synth_free(&y[s]);
}

/* Monte Carlo: `thermal` with Na I and K I recovers T and b_turb. */
#define MC_THERMAL 150
static void mc_thermal(const dt_atomic *t) {
  double mNa, mK;
  dt_element_mass_of("NaI", &mNa, NULL);
  dt_element_mass_of("KI", &mK, NULL);
  synth y[2];
  CHECK(synth_make(&y[0], dt_atomic_find(t, "NaI"), 100000, 1.0, 150) &&
            synth_make(&y[1], dt_atomic_find(t, "KI"), 100000, 1.0, 150),
        "thermal: synthetic Na I and K I");
  const double T = 8000, bt = 1.0;   /* b_turb well below the thermal part */
  dt_component tr[2] = {{11.3, dt_joint_b_thermal(T, bt, mNa), 5.0},
                        {11.2, dt_joint_b_thermal(T, bt, mK), 5.0}};
  for (int s = 0; s < 2; s++) synth_truth(&y[s], &tr[s], 1);
  dt_joint_workspace *w = dt_joint_alloc(2, y[0].n + y[1].n, 1);
  gsl_rng *rng = gsl_rng_alloc(gsl_rng_mt19937);
  gsl_rng_set(rng, 7701);
  static double pT[MC_THERMAL], pB[MC_THERMAL], pbs[2][MC_THERMAL];
  double bias_T = 0, bias_b[2] = {0, 0}, relT = 0, meanT = 0;
  size_t np = 0, nfail = 0;
  for (int it = 0; it < MC_THERMAL; it++) {
    for (int s = 0; s < 2; s++) synth_noise(&y[s], rng);
    dt_joint_species sp[2];
    species_from(&sp[0], &y[0], mNa);
    species_from(&sp[1], &y[1], mK);
    sp[0].logN[0] = 11.0;
    sp[1].logN[0] = 11.0;
    dt_joint_problem p;
    memset(&p, 0, sizeof p);
    p.nspec = 2;
    p.sp = sp;
    p.ncomp = 1;
    p.btie = DT_JOINT_B_THERMAL;
    p.v[0] = 3;
    p.b[0] = 2.5;
    p.b_turb[0] = -1;
    p.vlo = -100;
    p.vhi = 100;
    dt_joint_result r;
    if (dt_joint_run(w, &p, &r, NULL) != DT_OK || !isfinite(r.T_err[0])) {
      nfail++;
      continue;
    }
    pT[np] = (r.T[0] - T) / r.T_err[0];
    pB[np] = (r.b_turb2[0] - bt * bt) / r.b_turb2_err[0];
    for (int s = 0; s < 2; s++) {
      pbs[s][np] = (r.comp[s][0].b - tr[s].b) / r.err[s][0].b;
      bias_b[s] += r.err[s][0].b / tr[s].b;
    }
    bias_T += r.T_err[0] / T;
    relT += r.T_err[0] / T;
    meanT += r.T[0];
    np++;
  }
  CHECK(nfail <= MC_THERMAL / 50, "thermal: at most 2%% of fits fail (%zu)", nfail);
  meanT /= (double)np;
  printf("#    thermal: T %.0f K, mean fitted %.0f K, mean relative error of T %.3f\n", T, meanT,
         relT / (double)np);
  CHECK(relT / (double)np < 0.35, "thermal: T measured to better than 35%% (%.3f)",
        relT / (double)np);
  pull_checks("thermal: T", pT, np, bias_T / (double)np);
  pull_checks("thermal: b_turb^2", pB, np, 0.0);   /* the model is linear in it */
  pull_checks("thermal: b of Na I", pbs[0], np, bias_b[0] / (double)np);
  pull_checks("thermal: b of K I", pbs[1], np, bias_b[1] / (double)np);
  gsl_rng_free(rng);
  dt_joint_free(w);
  for (int s = 0; s < 2; s++) synth_free(&y[s]);
}

/* Held parameters (DT_FREEZE_* bits, as a person holds them in the
 * inspector): a held value comes back exactly as given with error 0, the
 * other species' columns are still fitted, and the degrees of freedom grow
 * by the number held (common practice: held parameters are not counted). */
static void check_held(const dt_atomic *t) {
  synth y[2];
  CHECK(synth_make(&y[0], dt_atomic_find(t, "NaI"), 30000, 3.0, 60) &&
            synth_make(&y[1], dt_atomic_find(t, "CaII"), 30000, 3.0, 60),
        "held: synthetic Na I and Ca II");
  dt_component tr[2][1] = {{{11.4, 5.0, -18.0}}, {{11.7, 5.0, -18.0}}};
  for (int s = 0; s < 2; s++) synth_truth(&y[s], tr[s], 1);
  gsl_rng *rng = gsl_rng_alloc(gsl_rng_mt19937);
  gsl_rng_set(rng, 7);
  for (int s = 0; s < 2; s++) synth_noise(&y[s], rng);
  dt_joint_workspace *w = dt_joint_alloc(2, y[0].n + y[1].n, 1);
  for (int rule = 0; rule < 3; rule++) {
    dt_joint_species sp[2];
    dt_joint_problem p;
    memset(&p, 0, sizeof p);
    for (int s = 0; s < 2; s++) {
      species_from(&sp[s], &y[s], s ? 40.078 : 22.98976928);
      sp[s].logN[0] = 11.2;
      sp[s].b[0] = 6;
    }
    p.nspec = 2;
    p.sp = sp;
    p.ncomp = 1;
    p.v[0] = -15;
    p.b[0] = 6;
    p.btie = rule == 0 ? DT_JOINT_B_SAME : rule == 1 ? DT_JOINT_B_FREE : DT_JOINT_B_THERMAL;
    p.vlo = -150;
    p.vhi = 150;
    dt_joint_result all, held;
    int st = dt_joint_run(w, &p, &all, NULL);
    unsigned char fz[1] = {DT_FREEZE_V | DT_FREEZE_N | DT_FREEZE_B};
    p.frozen = fz;
    int st2 = dt_joint_run(w, &p, &held, NULL);
    size_t nb = rule == 0 ? 1 : 2; /* b parameters of the rule */
    CHECK(st == DT_OK && st2 == DT_OK && held.v[0] == -15 && held.v_err[0] == 0 &&
              held.comp[0][0].logN == 11.2 && held.err[0][0].logN == 0 &&
              held.comp[0][0].b == held.comp[0][0].b && held.err[0][0].b == 0,
          "rule %d: v, N (main) and b held at their starts with error 0 (v %g, N %g, b %g)", rule,
          held.v[0], held.comp[0][0].logN, held.comp[0][0].b);
    CHECK(held.comp[1][0].logN != 11.2 && held.err[1][0].logN > 0 &&
              isfinite(held.err[1][0].logN),
          "rule %d: the linked species' N is still fitted (%g +- %g)", rule,
          held.comp[1][0].logN, held.err[1][0].logN);
    CHECK(held.nparam + 2 + nb == all.nparam && held.dof == all.dof + (long)(2 + nb),
          "rule %d: %zu parameters held, dof %ld -> %ld", rule, 2 + nb, all.dof, held.dof);
  }
  dt_joint_free(w);
  gsl_rng_free(rng);
  for (int s = 0; s < 2; s++) synth_free(&y[s]);
}


/* A spectrum 3900-6000 A holding Na I and Ca II absorption at the same
 * velocities (not reaching K I at 7667 A). */
static dt_spectrum *two_species_spectrum(const dt_atomic *t, const dt_component *na,
                                         const dt_component *ca, size_t nc, unsigned long seed) {
  size_t n = 0;
  const double step = 4.0 / DT_C_KMS, lo = 3900, hi = 6000;
  n = (size_t)(log(hi / lo) / step);
  dt_spectrum *s = dt_spectrum_alloc(n);
  if (!s) return NULL;
  gsl_rng *rng = gsl_rng_alloc(gsl_rng_mt19937);
  gsl_rng_set(rng, seed);
  double *m = malloc(n * sizeof(double));
  for (size_t i = 0; i < n; i++) {
    s->wave[i] = lo * exp((double)i * step);
    s->flux[i] = 1.0;
    s->sigma[i] = 0.02;
    s->mask[i] = 0;
  }
  const char *names[2] = {"NaI", "CaII"};
  const dt_component *cc[2] = {na, ca};
  for (int q = 0; q < 2; q++) {
    dt_model_config cfg;
    memset(&cfg, 0, sizeof cfg);
    cfg.doublet = dt_atomic_find(t, names[q]);
    cfg.resolution = 20000;
    dt_model *md = dt_model_alloc(s->wave, n, &cfg, DT_MAX_COMP, NULL);
    dt_model_eval(md, cc[q], nc, m, NULL, 0);
    for (size_t i = 0; i < n; i++) s->flux[i] *= m[i];
    dt_model_free(md);
  }
  for (size_t i = 0; i < n; i++) s->flux[i] += gsl_ran_gaussian(rng, 0.02);
  s->has_sigma = 1;
  s->resolution = 20000;
  free(m);
  gsl_rng_free(rng);
  return s;
}

static void check_analysis(void) {
  dt_atomic *t;
  dt_atomic_load_builtin(&t, NULL);
  /* a doublet of an element without a mass in the table, near 5000 A */
  const char *extra = "XqI 5000.0 0.5 1e8 5010.0 0.25 1e8 test doublet\n";
  CHECK(dt_atomic_parse(t, extra, strlen(extra), NULL) == DT_OK, "a doublet without a mass added");
  dt_component na[2] = {{11.6, 4.0, -30.0}, {11.3, 6.0, 25.0}};
  dt_component ca[2] = {{12.1, 4.0, -30.0}, {11.8, 6.0, 25.0}};
  dt_spectrum *s = two_species_spectrum(t, na, ca, 2, 99);
  dt_joint_analysis *ja = dt_joint_analysis_alloc(s, t);
  dt_judgement j;
  dt_judgement_init(&j);
  strcpy(j.doublet, "NaI");
  j.resolution = 20000;
  j.vlo = -200;
  j.vhi = 200;
  j.cont_order = 1;
  j.ncomp = 2;
  j.comp[0] = (dt_component){11.5, 5.0, -26.0};
  j.comp[1] = (dt_component){11.5, 5.0, 20.0};
  const char *linked[] = {"CaII", "KI", "FooI", "nai"};
  static dt_joint_out out;
  dt_err e;
  double t0 = now();
  int st = dt_joint_analysis_run(ja, &j, linked, 4, DT_JOINT_B_FREE, &out, &e);
  double t1 = now();
  dt_joint_analysis_run(ja, &j, linked, 4, DT_JOINT_B_FREE, &out, NULL);
  printf("#    analysis: first run %.1f ms, again %.1f ms\n", 1e3 * (t1 - t0), 1e3 * (now() - t1));
  CHECK(st == DT_OK, "analysis: joint run (%s)", st ? e.what : "ok");
  CHECK(out.nspec == 4 && out.nfit == 2, "analysis: 4 species listed (duplicate skipped), 2 fitted");
  CHECK(out.sp[0].status == DT_OK && out.sp[1].status == DT_OK, "analysis: Na I and Ca II fitted");
  CHECK(out.sp[2].status == DT_ERANGE && strstr(out.sp[2].why.what, "not covered"),
        "analysis: K I not covered (%s)", out.sp[2].why.what);
  CHECK(out.sp[3].status == DT_ENOTFOUND, "analysis: unknown doublet reported (%s)",
        out.sp[3].why.what);
  int okv = 1, okp = 1;
  for (size_t k = 0; k < 2; k++) {
    okv &= out.sp[0].comp[k].v == out.sp[1].comp[k].v;
    const dt_component *tr[2] = {na, ca};
    for (int q = 0; q < 2; q++) {
      const dt_component *c = &out.sp[q].comp[k], *er = &out.sp[q].err[k];
      okp &= fabs(c->v - tr[q][k].v) < 4 * er->v && fabs(c->logN - tr[q][k].logN) < 4 * er->logN;
    }
  }
  CHECK(okv, "analysis: one velocity per component for both species");
  CHECK(okp, "analysis: v and log N within 4 sigma of the truth");
  double chi = 0;
  size_t nu = 0;
  for (int q = 0; q < 2; q++)
    for (size_t i = 0; i < out.sp[q].n; i++)
      if (out.sp[q].used[i]) {
        double r = (out.sp[q].flux[i] - out.sp[q].model[i]) / out.sp[q].sigma[i];
        chi += r * r;
        nu++;
      }
  CHECK(fabs(chi - out.fit.chi2) < 1e-6 * out.fit.chi2 && nu == out.fit.npix,
        "analysis: the species' models give the fit's chi2 (%.2f over %zu pixels)", chi, nu);
  CHECK(out.sp[0].any_detected && out.sp[1].any_detected, "analysis: both species detected");
  dt_fit_result fr1;
  CHECK(dt_joint_species_fit(&out, 1, &fr1) == DT_OK && fr1.ncomp == 2 &&
            fr1.comp[1].logN == out.sp[1].comp[1].logN && fr1.chi2 == out.fit.chi2 &&
            dt_joint_species_fit(&out, 2, &fr1) == DT_EINVAL,
        "analysis: a species' values as a fit result (none for one not fitted)");
  /* a refit from the last result: the same minimum */
  static dt_joint_out again;
  again = out;
  double t2 = now();
  st = dt_joint_analysis_run_from(ja, &j, linked, 4, DT_JOINT_B_FREE, &again, &again, &e);
  double t3 = now();
  int same = st == DT_OK && again.fit.ncomp == out.fit.ncomp;
  for (size_t k = 0; same && k < out.fit.ncomp; k++)
    for (int q = 0; q < 2; q++)
      same &= fabs(again.sp[q].comp[k].logN - out.sp[q].comp[k].logN) < 0.01 * out.sp[q].err[k].logN &&
              fabs(again.sp[q].comp[k].v - out.sp[q].comp[k].v) < 0.01 * out.sp[q].err[k].v;
  CHECK(same, "analysis: a refit from the last result finds the same minimum (%.1f ms)",
        1e3 * (t3 - t2));

  /* continuum windows near Na I serve Na I; Ca II gets the automatic continuum */
  dt_judgement jw = j;
  jw.nwin = 2;
  jw.win[0] = (dt_window){5870.0, 5884.0};
  jw.win[1] = (dt_window){5903.0, 5915.0};
  st = dt_joint_analysis_run(ja, &jw, linked, 1, DT_JOINT_B_SAME, &out, &e);
  int okw = st == DT_OK && out.nfit == 2;
  for (size_t k = 0; okw && k < 2; k++)
    okw &= fabs(out.sp[1].comp[k].logN - ca[k].logN) < 4 * out.sp[1].err[k].logN;
  double cmin = 1e9, cmax = -1e9;
  for (size_t i = 0; okw && i < out.sp[1].n; i++) {
    cmin = fmin(cmin, out.sp[1].cont[i]);
    cmax = fmax(cmax, out.sp[1].cont[i]);
  }
  CHECK(okw && cmin > 0.98 && cmax < 1.02,
        "analysis: Na I's continuum windows leave Ca II its own continuum (%.3f-%.3f)", cmin, cmax);
  /* thermal with a species without a mass: an error naming it */
  const char *lx[] = {"XqI"};
  j.vlo = -150;
  j.vhi = 150;
  st = dt_joint_analysis_run(ja, &j, lx, 1, DT_JOINT_B_THERMAL, &out, &e);
  CHECK(st == DT_EINVAL && strstr(e.what, "mass") && strstr(e.what, "Xq"),
        "analysis: thermal with an unknown mass refused (%s)", e.what);
  /* j's own doublet not covered */
  strcpy(j.doublet, "KI");
  st = dt_joint_analysis_run(ja, &j, linked, 1, DT_JOINT_B_SAME, &out, &e);
  CHECK(st == DT_ERANGE, "analysis: the judgement's own doublet not covered is an error (%s)",
        e.what);

  /* the joint first pass: Ca II is the stronger species */
  strcpy(j.doublet, "NaI");
  j.ncomp = 0;
  j.vlo = -200;
  j.vhi = 200;
  size_t strongest = 99;
  st = dt_joint_autofit_run(ja, &j, linked, 1, DT_JOINT_B_SAME, NULL, 1, &out, &strongest, &e);
  CHECK(st == DT_OK && strongest == 1, "first pass: components found in Ca II (strongest %zu)",
        strongest);
  int found = 0;
  for (size_t k = 0; k < j.ncomp; k++)
    for (int q = 0; q < 2; q++) found += fabs(j.comp[k].v - na[q].v) < 3.0;
  CHECK(j.ncomp == 2 && found == 2, "first pass: two components at the true velocities (%zu)",
        j.ncomp);
  CHECK(out.sp[0].fit_index >= 0 && out.sp[1].fit_index >= 0 && out.sp[0].any_detected,
        "first pass: Na I confirmed in the joint fit");
  dt_joint_analysis_free(ja);
  dt_spectrum_free(s);
  dt_atomic_free(t);
}

/* --peer FILE: the problem written by tests/py/joint_scipy.py. */
static int peer(const char *path) {
  FILE *f = fopen(path, "r");
  if (!f) {
    perror(path);
    return 2;
  }
  dt_atomic *t;
  dt_atomic_load_builtin(&t, NULL);
  char key[32], rule[16] = "same";
  double R = 0, vlo = -200, vhi = 200;
  size_t nc = 0, ns = 0, npix[DT_JOINT_MAX_SPECIES];
  double v0[DT_MAX_COMP], b0[DT_MAX_COMP], n0[DT_JOINT_MAX_SPECIES][DT_MAX_COMP];
  char names[DT_JOINT_MAX_SPECIES][16];
  synth y[DT_JOINT_MAX_SPECIES];
  while (fscanf(f, "%31s", key) == 1) {
    if (strcmp(key, "btie") == 0) {
      if (fscanf(f, "%15s", rule) != 1) return 2;
    } else if (strcmp(key, "resolution") == 0) {
      if (fscanf(f, "%lf", &R) != 1) return 2;
    } else if (strcmp(key, "vrange") == 0) {
      if (fscanf(f, "%lf %lf", &vlo, &vhi) != 2) return 2;
    } else if (strcmp(key, "comp") == 0) {
      if (fscanf(f, "%lf %lf", &v0[nc], &b0[nc]) != 2) return 2;
      nc++;
    } else if (strcmp(key, "species") == 0) {
      if (fscanf(f, "%15s %zu", names[ns], &npix[ns]) != 2) return 2;
      for (size_t k = 0; k < nc; k++)
        if (fscanf(f, "%lf", &n0[ns][k]) != 1) return 2;
      synth *q = &y[ns];
      memset(q, 0, sizeof *q);
      q->d = dt_atomic_find(t, names[ns]);
      q->n = npix[ns];
      q->wave = malloc(q->n * sizeof(double));
      q->flux = malloc(q->n * sizeof(double));
      q->sigma = malloc(q->n * sizeof(double));
      q->truth = NULL;
      for (size_t i = 0; i < q->n; i++)
        if (fscanf(f, "%lf %lf %lf", &q->wave[i], &q->flux[i], &q->sigma[i]) != 3) return 2;
      dt_model_config cfg;
      memset(&cfg, 0, sizeof cfg);
      cfg.doublet = q->d;
      cfg.resolution = R;
      q->m = dt_model_alloc(q->wave, q->n, &cfg, DT_MAX_COMP, NULL);
      if (!q->d || !q->m) return 2;
      ns++;
    }
  }
  fclose(f);
  dt_joint_species sp[DT_JOINT_MAX_SPECIES];
  dt_joint_problem p;
  memset(&p, 0, sizeof p);
  size_t tot = 0;
  for (size_t s = 0; s < ns; s++) {
    double mass;
    dt_element_mass_of(names[s], &mass, NULL);
    species_from(&sp[s], &y[s], mass);
    for (size_t k = 0; k < nc; k++) {
      sp[s].logN[k] = n0[s][k];
      sp[s].b[k] = b0[k];
    }
    tot += y[s].n;
  }
  p.nspec = ns;
  p.sp = sp;
  p.ncomp = nc;
  for (size_t k = 0; k < nc; k++) {
    p.v[k] = v0[k];
    p.b[k] = b0[k];
    p.b_turb[k] = -1;
  }
  dt_joint_btie_parse(rule, &p.btie);
  p.vlo = vlo;
  p.vhi = vhi;
  dt_joint_workspace *w = dt_joint_alloc(ns, tot, nc);
  dt_joint_result r;
  dt_err e;
  int st = dt_joint_run(w, &p, &r, &e);
  printf("status %d\nchi2 %.10g\n", st, r.chi2);
  for (size_t k = 0; k < nc; k++) {
    printf("v%zu %.10g %.10g\n", k, r.v[k], r.v_err[k]);
    if (p.btie == DT_JOINT_B_THERMAL) {
      printf("T%zu %.10g %.10g\n", k, r.T[k], r.T_err[k]);
      printf("bturb%zu %.10g %.10g\n", k, r.b_turb[k], r.b_turb_err[k]);
      printf("q%zu %.10g %.10g\n", k, r.b_turb2[k], r.b_turb2_err[k]);
    }
    for (size_t s = 0; s < ns; s++) {
      printf("logN_%s_%zu %.10g %.10g\n", names[s], k, r.comp[s][k].logN, r.err[s][k].logN);
      printf("b_%s_%zu %.10g %.10g\n", names[s], k, r.comp[s][k].b, r.err[s][k].b);
    }
  }
  dt_joint_free(w);
  for (size_t s = 0; s < ns; s++) {
    dt_model_free(y[s].m);
    free(y[s].wave);
    free(y[s].flux);
    free(y[s].sigma);
  }
  dt_atomic_free(t);
  return st == DT_OK ? 0 : 1;
}

int main(int argc, char **argv) {
  if (argc == 3 && strcmp(argv[1], "--peer") == 0) return peer(argv[2]);
  if (argc == 2 && strcmp(argv[1], "--masses") == 0) {
    double m;
    for (size_t i = 0; i < dt_element_count(); i++) {
      const char *sym = dt_element_get(i, &m);
      printf("%s %.6f\n", sym, m);
    }
    return 0;
  }
  dt_atomic *t;
  dt_atomic_load_builtin(&t, NULL);
  check_basics();
  check_bad(t);
  check_held(t);
  double t0 = now();
  mc_shared(t);
  mc_thermal(t);
  printf("#    Monte Carlo: %.2f s\n", now() - t0);
  check_analysis();
  dt_atomic_free(t);
  return dt_test_done();
}
