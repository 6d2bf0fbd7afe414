/* The fitters' shared least-squares parts: the workspace cache and the
 * bounding transforms (lsq.h). */
#include "lsq.h"

#include <math.h>

dt_lsq_slot *dt_lsq_get(dt_lsq_cache *c, size_t n, size_t p, int accel) {
  dt_lsq_slot *best = &c->slot[0];
  c->tick++;
  for (int i = 0; i < DT_LSQ_CACHE; i++) {
    dt_lsq_slot *s = &c->slot[i];
    if (s->w && s->n == n && s->p == p && s->accel == accel) {
      s->used = c->tick;
      return s;
    }
    if (!s->w || s->used < best->used) best = s;
    if (!s->w) break;
  }
  if (best->w) gsl_multifit_nlinear_free(best->w);
  if (best->cov) gsl_matrix_free(best->cov);
  best->w = NULL;
  best->cov = NULL;
  gsl_multifit_nlinear_parameters par = gsl_multifit_nlinear_default_parameters();
  par.trs = accel ? gsl_multifit_nlinear_trs_lmaccel : gsl_multifit_nlinear_trs_lm;
  par.scale = gsl_multifit_nlinear_scale_more;
  par.solver = gsl_multifit_nlinear_solver_mcholesky;
  best->w = gsl_multifit_nlinear_alloc(gsl_multifit_nlinear_trust, &par, n, p);
  best->cov = gsl_matrix_alloc(p, p);
  if (!best->w || !best->cov) {
    if (best->w) gsl_multifit_nlinear_free(best->w);
    if (best->cov) gsl_matrix_free(best->cov);
    best->w = NULL;
    best->cov = NULL;
    return NULL;
  }
  best->n = n;
  best->p = p;
  best->accel = accel;
  best->used = c->tick;
  return best;
}

void dt_lsq_cache_free(dt_lsq_cache *c) {
  for (int i = 0; i < DT_LSQ_CACHE; i++) {
    if (c->slot[i].w) gsl_multifit_nlinear_free(c->slot[i].w);
    if (c->slot[i].cov) gsl_matrix_free(c->slot[i].cov);
    c->slot[i].w = NULL;
    c->slot[i].cov = NULL;
  }
}

double dt_lsq_to_external(double u, double lo, double hi, double *deriv) {
  double s;
  if (u >= 0) {
    double e = exp(-u);
    s = 1.0 / (1.0 + e);
  } else {
    double e = exp(u);
    s = e / (1.0 + e);
  }
  if (deriv) *deriv = (hi - lo) * s * (1.0 - s);
  return lo + (hi - lo) * s;
}

double dt_lsq_clamp_inside(double v, double lo, double hi, double margin) {
  double m = margin * (hi - lo);
  if (v < lo + m) v = lo + m;
  if (v > hi - m) v = hi - m;
  return v;
}

double dt_lsq_to_internal(double v, double lo, double hi, double margin) {
  v = dt_lsq_clamp_inside(v, lo, hi, margin);
  return log((v - lo) / (hi - v));
}
