/* The curve of growth of one Voigt line and its inverse (cog.h).
 *
 * W = lambda0 (b/c) I with I = integral over x of 1 - exp(-tau0 H(a, x)),
 * the integrand even in x: 2 times [0, x1] (the Doppler core, adaptive
 * Gauss-Kronrod) plus [x1, inf) (the damping wings, GSL's semi-infinite
 * transform), x1 beyond the core's saturated part.  The inverse brackets
 * log N from the linear curve of growth (which never gives less W, so the
 * answer lies at or above it) and solves with Brent's method. */
#include "doubletty/cog.h"

#include <gsl/gsl_errno.h>
#include <gsl/gsl_integration.h>
#include <gsl/gsl_interp.h>
#include <gsl/gsl_roots.h>
#include <math.h>
#include <pthread.h>
#include <stdlib.h>

#include "doubletty/model.h"
#include "gsl_quiet.h"

#define COG_LIMIT 200   /* subintervals of the adaptive integration */
#define COG_EPS 1e-8    /* its relative tolerance */

typedef struct cog_par {
  double tau0, a;
} cog_par;

static double integrand(double x, void *p) {
  const cog_par *c = p;
  return -expm1(-c->tau0 * dt_voigt_H(c->a, x));
}

/* Doppler width dnu_D = b / lambda0 [s^-1] for b in km/s, lambda0 in A. */
static double dnu_d(const dt_line *l, double b) { return b * 1e5 / (l->lambda0 * 1e-8); }

double dt_cog_tau0(const dt_line *l, double logN, double b) {
  return pow(10.0, logN) * DT_SIGMA0 * l->f / (sqrt(M_PI) * dnu_d(l, b));
}

double dt_cog_W(const dt_line *l, double logN, double b) {
  if (!l || !(l->f > 0) || !(l->lambda0 > 0) || !(b > 0) || !isfinite(logN)) return NAN;
  cog_par c = {dt_cog_tau0(l, logN, b), l->gamma / (4.0 * M_PI * dnu_d(l, b))};
  dt_gsl_quiet();
  gsl_integration_workspace *w = gsl_integration_workspace_alloc(COG_LIMIT);
  if (!w) {
    return NAN;
  }
  gsl_function F = {integrand, &c};
  double x1 = 4.0 + (c.tau0 > 1 ? 2.0 * sqrt(log(c.tau0)) : 0.0);
  double i1 = 0, i2 = 0, err;
  gsl_integration_qag(&F, 0.0, x1, 0.0, COG_EPS, COG_LIMIT, GSL_INTEG_GAUSS31, w, &i1, &err);
  gsl_integration_qagiu(&F, x1, 0.0, COG_EPS, COG_LIMIT, w, &i2, &err);
  gsl_integration_workspace_free(w);
  return l->lambda0 * (b / DT_C_KMS) * 2.0 * (i1 + i2);
}

typedef struct inv_par {
  const dt_line *l;
  double b, lnW;
} inv_par;

static double inv_f(double logN, void *p) {
  const inv_par *q = p;
  return log(dt_cog_W(q->l, logN, q->b)) - q->lnW;
}

double dt_cog_logN(const dt_line *l, double W, double b) {
  if (!l || !(l->f > 0) || !(l->lambda0 > 0) || !(b > 0) || !(W > 0) || !isfinite(W))
    return NAN;
  /* linear curve of growth: W = lambda0^2 N sigma0 f / c, lambda0 in cm */
  double lin = log10(W * 1e-8 * DT_C_KMS * 1e5 / (l->lambda0 * 1e-8 * l->lambda0 * 1e-8 *
                                                   DT_SIGMA0 * l->f));
  inv_par q = {l, b, log(W)};
  double lo = lin - 1e-6, hi = lin + 0.5;
  if (inv_f(lo, &q) > 0) return lin;   /* rounding: as thin as it gets */
  int guard = 0;
  while (inv_f(hi, &q) < 0) {
    lo = hi;
    hi += 2.0;
    if (++guard > 20 || hi > DT_MODEL_LOGN_MAX) return NAN;
  }
  dt_gsl_quiet();
  gsl_root_fsolver *s = gsl_root_fsolver_alloc(gsl_root_fsolver_brent);
  if (!s) {
    return NAN;
  }
  gsl_function F = {inv_f, &q};
  double r = NAN;
  if (gsl_root_fsolver_set(s, &F, lo, hi) == GSL_SUCCESS) {
    for (int it = 0; it < 100; it++) {
      if (gsl_root_fsolver_iterate(s) != GSL_SUCCESS) break;
      r = gsl_root_fsolver_root(s);
      double a = gsl_root_fsolver_x_lower(s), c = gsl_root_fsolver_x_upper(s);
      if (gsl_root_test_interval(a, c, 1e-6, 0) == GSL_SUCCESS) break;
    }
  }
  gsl_root_fsolver_free(s);
  return r;
}

/* ---- tables: the inverse by interpolation ----
 *
 * ln W on a grid of log N every COG_TABLE_STEP dex, from where the core's
 * optical depth is COG_TABLE_TAU_LO (the linear part, W = W_lin to 1e-4) to
 * COG_TABLE_LOGN_HI (or where the integration stops giving a rising W);
 * the inverse log N(ln W) by Steffen's monotone cubic
 * (GSL gsl_interp_steffen: the curve of growth rises strictly, and the
 * interpolant neither overshoots nor turns back).  Outside the table the
 * exact inverse is taken. */
#define COG_TABLE_STEP 0.04
#define COG_TABLE_TAU_LO 1e-4
#define COG_TABLE_LOGN_HI 22.5
#define COG_CACHE_MAX 32

struct dt_cog_table {
  dt_line line;
  double b;
  size_t n;
  double *lnW, *logN;
  gsl_interp *interp;
};

dt_cog_table *dt_cog_table_alloc(const dt_line *l, double b) {
  if (!l || !(l->f > 0) || !(l->lambda0 > 0) || !(b > 0)) return NULL;
  double lo = log10(COG_TABLE_TAU_LO / dt_cog_tau0(l, 0.0, b));
  if (!(lo < COG_TABLE_LOGN_HI)) return NULL;
  size_t n = (size_t)ceil((COG_TABLE_LOGN_HI - lo) / COG_TABLE_STEP) + 1;
  dt_cog_table *t = calloc(1, sizeof *t);
  if (!t) return NULL;
  t->line = *l;
  t->b = b;
  t->lnW = malloc(n * sizeof *t->lnW);
  t->logN = malloc(n * sizeof *t->logN);
  int ok = t->lnW && t->logN;
  /* the table ends early where the integration no longer gives a rising W
   * (far out on the damping part, beyond any limit of interest) */
  size_t m = 0;
  for (; ok && m < n; m++) {
    t->logN[m] = lo + COG_TABLE_STEP * (double)m;
    t->lnW[m] = log(dt_cog_W(l, t->logN[m], b));
    if (!isfinite(t->lnW[m]) || (m > 0 && !(t->lnW[m] > t->lnW[m - 1]))) break;
  }
  ok = ok && m >= 8 && (t->interp = gsl_interp_alloc(gsl_interp_steffen, m));
  dt_gsl_quiet();
  if (ok) ok = gsl_interp_init(t->interp, t->lnW, t->logN, m) == GSL_SUCCESS;
  t->n = m;
  if (!ok) {
    dt_cog_table_free(t);
    return NULL;
  }
  return t;
}

void dt_cog_table_free(dt_cog_table *t) {
  if (!t) return;
  gsl_interp_free(t->interp);
  free(t->lnW);
  free(t->logN);
  free(t);
}

double dt_cog_table_logN(const dt_cog_table *t, double W) {
  if (!(W > 0) || !isfinite(W)) return NAN;
  double x = log(W);
  if (x < t->lnW[0] || x > t->lnW[t->n - 1]) return dt_cog_logN(&t->line, W, t->b);
  return gsl_interp_eval(t->interp, t->lnW, t->logN, x, NULL);
}

struct dt_cog_cache {
  pthread_mutex_t lock;
  size_t n;
  dt_cog_table *t[COG_CACHE_MAX];
};

dt_cog_cache *dt_cog_cache_alloc(void) {
  dt_cog_cache *c = calloc(1, sizeof *c);
  if (c && pthread_mutex_init(&c->lock, NULL)) {
    free(c);
    return NULL;
  }
  return c;
}

void dt_cog_cache_free(dt_cog_cache *c) {
  if (!c) return;
  for (size_t i = 0; i < c->n; i++) dt_cog_table_free(c->t[i]);
  pthread_mutex_destroy(&c->lock);
  free(c);
}

double dt_cog_cache_logN(dt_cog_cache *c, const dt_line *l, double W, double b) {
  if (!c) return dt_cog_logN(l, W, b);
  const dt_cog_table *t = NULL;
  pthread_mutex_lock(&c->lock);
  for (size_t i = 0; i < c->n && !t; i++)
    if (c->t[i]->b == b && c->t[i]->line.lambda0 == l->lambda0 && c->t[i]->line.f == l->f &&
        c->t[i]->line.gamma == l->gamma)
      t = c->t[i];
  if (!t && c->n < COG_CACHE_MAX && (c->t[c->n] = dt_cog_table_alloc(l, b))) t = c->t[c->n++];
  pthread_mutex_unlock(&c->lock);
  /* a table, once made, is only read */
  return t ? dt_cog_table_logN(t, W) : dt_cog_logN(l, W, b);
}
