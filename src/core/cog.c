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
#include <gsl/gsl_roots.h>
#include <math.h>

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
