/* Joint fits of several doublets of one absorber: the least-squares engine.
 *
 * The residuals of every species s over its usable pixels m,
 *     r_{s,m} = (y_m - C_m F_s,m(theta)) / sigma_m,
 * are stacked into one vector and minimised together with GSL's
 * gsl_multifit_nlinear (trust region, Levenberg-Marquardt with geodesic
 * acceleration, More scaling, modified Cholesky: the settings of fit.c, for
 * the same reasons).  F_s is species s's doublet model (model.h) evaluated
 * at its components (log N_{s,k}, b_{s,k}, v_k); theta holds, per
 * component k, the shared v_k, the b parameters of the tie rule (joint.h)
 * and one log N per species.
 *
 * Jacobian: each model returns d F / d(log N, b, v) of its own components;
 * a shared v_k collects the v-derivatives of every species, a shared b_k
 * the b-derivatives, and the thermal parameters reach b_{s,k} through
 *     d b_s / d T      = k_B / (m_s m_u b_s)     [(km/s)/K, with the units]
 *     d b_s / d q      = 1 / (2 b_s)            (q = b_turb^2, fitted; see below)
 * (from b_s^2 = q + 2 k_B T / (m_s m_u)), all times the derivative
 * of the bounding transform (logistic maps as in fit.h).
 *
 * The iteration is driven as in fit.c: a run with geodesic acceleration,
 * a second plain-LM run from the start when the first looks suspicious
 * (failed, chi2 far too high, a parameter at a bound), the better kept;
 * iteration and clock limits; convergence by GSL's step and gradient tests
 * or a Newton decrement below 1e-4 in chi2.
 *
 * Memory: the workspace holds every per-pixel buffer at its largest size;
 * GSL's solver workspaces depend on the (pixels, parameters) pair and are
 * cached by size, made only for a size not seen before. */
#include "doubletty/joint.h"

#include <gsl/gsl_blas.h>
#include <gsl/gsl_errno.h>
#include <gsl/gsl_multifit_nlinear.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <time.h>

#include "gsl_quiet.h"
#include "lsq.h"

#define MAXPAR (DT_MAX_COMP * (2 + 2 * DT_JOINT_MAX_SPECIES))
#define BAD_RESIDUAL 1e100
#define XTOL 1e-8
#define GTOL 1e-9
#define DEC_TOL 1e-4
#define DEC_GATE 1.0
#define DEC_STALL 1e-3
#define BOUND_MARGIN 1e-6
#define SUSPECT_EDGE 0.05
#define SUSPECT_CHI2 2.0
#define ACCEL_AFTER 30
/* `thermal` fits q = b_turb^2 rather than b_turb: b_s^2 = q + 2 k_B T / m_s
 * is linear in q, so b_turb = 0 is neither a bound (which would flatten
 * the transform and shrink the errors of T with it) nor a saddle of chi2
 * (as it is for a signed b_turb, where every b_s is even in b_turb).  q may
 * go below 0 within its error (gas colder than the lightest species' b
 * allows); b_s^2 is held at B2_FLOOR at least. */
#define Q_MIN (-DT_FIT_B_MAX * DT_FIT_B_MAX)
#define Q_MAX (DT_FIT_B_MAX * DT_FIT_B_MAX)
#define B2_FLOOR 1e-4   /* (km/s)^2 */
/* (km/s)^2 per K of 2 k_B T / m for a mass of 1 u: 2 k_B / m_u in km^2 s^-2 K^-1 */
#define THERMAL_C (2.0 * DT_K_BOLTZMANN / DT_MASS_UNIT * 1e-6)

enum { P_V, P_B, P_BS, P_T, P_BT, P_N };

const char *dt_joint_btie_name(dt_joint_btie t) { return dt_btie_name(t); }

int dt_joint_btie_parse(const char *s, dt_joint_btie *t) { return dt_btie_parse(s, t); }

/* b^2 = b_turb^2 + 2 k_B T / (m u): km/s, K, u.  (Spitzer 1978, ch. 3, from memory.) */
double dt_joint_b_thermal(double T, double b_turb, double mass_u) {
  return sqrt(b_turb * b_turb + THERMAL_C * T / mass_u);
}

struct dt_joint_workspace {
  size_t max_spec, max_pix, max_comp;
  /* packed over the usable pixels of all species */
  size_t *idx;                 /* pixel within its species */
  unsigned char *spx;          /* its species */
  double *y, *isig, *base;
  /* model flux and Jacobian of each species, at offsets off[s] */
  double *mflux, *mjac;
  size_t off[DT_JOINT_MAX_SPECIES + 1];
  const dt_joint_problem *prob;
  size_t nused, npar, nspec, ncomp;
  size_t used_sp[DT_JOINT_MAX_SPECIES];
  int ptype[MAXPAR], pcomp[MAXPAR], pspec[MAXPAR];
  double plo[MAXPAR], phi[MAXPAR], dvdu[MAXPAR];
  double x0[MAXPAR];
  double jac_x[MAXPAR];
  int jac_valid;
  /* current physical values */
  double v[DT_MAX_COMP], T[DT_MAX_COMP], bt[DT_MAX_COMP];
  dt_component cur[DT_JOINT_MAX_SPECIES][DT_MAX_COMP];
  double dbdT[DT_JOINT_MAX_SPECIES][DT_MAX_COMP], dbdbt[DT_JOINT_MAX_SPECIES][DT_MAX_COMP];
  dt_lsq_cache cache;
};

static double now_seconds(void) {
  struct timespec ts;
  clock_gettime(CLOCK_MONOTONIC, &ts);
  return (double)ts.tv_sec + 1e-9 * (double)ts.tv_nsec;
}

dt_joint_workspace *dt_joint_alloc(size_t max_spec, size_t max_pix, size_t max_comp) {
  if (max_spec == 0 || max_spec > DT_JOINT_MAX_SPECIES || max_pix == 0 ||
      max_comp > DT_MAX_COMP)
    return NULL;
  dt_joint_workspace *w = calloc(1, sizeof *w);
  if (!w) return NULL;
  w->max_spec = max_spec;
  w->max_pix = max_pix;
  w->max_comp = max_comp;
  size_t nj = max_comp ? 3 * max_comp : 1;
  w->idx = malloc(max_pix * sizeof *w->idx);
  w->spx = malloc(max_pix * sizeof *w->spx);
  w->y = malloc(max_pix * sizeof *w->y);
  w->isig = malloc(max_pix * sizeof *w->isig);
  w->base = malloc(max_pix * sizeof *w->base);
  w->mflux = malloc(max_pix * sizeof *w->mflux);
  w->mjac = malloc(max_pix * nj * sizeof *w->mjac);
  if (!w->idx || !w->spx || !w->y || !w->isig || !w->base || !w->mflux || !w->mjac) {
    dt_joint_free(w);
    return NULL;
  }
  return w;
}

void dt_joint_free(dt_joint_workspace *w) {
  if (!w) return;
  dt_lsq_cache_free(&w->cache);
  free(w->idx);
  free(w->spx);
  free(w->y);
  free(w->isig);
  free(w->base);
  free(w->mflux);
  free(w->mjac);
  free(w);
}

static void add_param(dt_joint_workspace *w, int type, size_t k, int s, double lo, double hi,
                      double start) {
  size_t q = w->npar++;
  w->ptype[q] = type;
  w->pcomp[q] = (int)k;
  w->pspec[q] = s;
  w->plo[q] = lo;
  w->phi[q] = hi;
  w->x0[q] = dt_lsq_to_internal(start, lo, hi, BOUND_MARGIN);
}

/* The physical values from the internal vector x, the derivatives of the
 * transforms, and each species' b under the rule. */
static void set_params(dt_joint_workspace *w, const double *x) {
  const dt_joint_problem *p = w->prob;
  for (size_t q = 0; q < w->npar; q++) {
    double val = dt_lsq_to_external(x[q], w->plo[q], w->phi[q], &w->dvdu[q]);
    int k = w->pcomp[q], s = w->pspec[q];
    switch (w->ptype[q]) {
    case P_V: w->v[k] = val; break;
    case P_N: w->cur[s][k].logN = val; break;
    case P_B: /* ln b */
      val = exp(val);
      w->dvdu[q] *= val;
      for (size_t z = 0; z < w->nspec; z++) w->cur[z][k].b = val;
      break;
    case P_BS:
      val = exp(val);
      w->dvdu[q] *= val;
      w->cur[s][k].b = val;
      break;
    case P_T: /* ln T */
      val = exp(val);
      w->dvdu[q] *= val;
      w->T[k] = val;
      break;
    default: /* P_BT */
      w->bt[k] = val;
    }
  }
  for (size_t k = 0; k < w->ncomp; k++)
    for (size_t s = 0; s < w->nspec; s++) {
      w->cur[s][k].v = w->v[k];
      if (p->btie == DT_JOINT_B_THERMAL) {
        double c = THERMAL_C / p->sp[s].mass_u;
        double b2 = w->bt[k] + c * w->T[k];   /* bt holds q = b_turb^2 */
        int floor = !(b2 > B2_FLOOR);
        double b = sqrt(floor ? B2_FLOOR : b2);
        w->cur[s][k].b = b;
        w->dbdT[s][k] = floor ? 0.0 : 0.5 * c / b;
        w->dbdbt[s][k] = floor ? 0.0 : 0.5 / b;
      }
    }
}

static int eval_models(dt_joint_workspace *w, int with_jac) {
  size_t ldj = 3 * w->ncomp;
  for (size_t s = 0; s < w->nspec; s++) {
    size_t n = w->off[s + 1] - w->off[s];
    double *fl = w->mflux + w->off[s];
    if (w->ncomp == 0) {
      for (size_t i = 0; i < n; i++) fl[i] = 1.0;
      continue;
    }
    int st = dt_model_eval(w->prob->sp[s].model, w->cur[s], w->ncomp, fl,
                           with_jac ? w->mjac + w->off[s] * ldj : NULL, ldj);
    if (st != DT_OK) return st;
  }
  return DT_OK;
}

static int resid_f(const gsl_vector *x, void *params, gsl_vector *f) {
  dt_joint_workspace *w = params;
  set_params(w, x->data);
  w->jac_valid = 0;
  if (eval_models(w, 0) != DT_OK) {
    gsl_vector_set_all(f, BAD_RESIDUAL);
    return GSL_SUCCESS;
  }
  for (size_t m = 0; m < w->nused; m++) {
    double pred = w->base[m] * w->mflux[w->off[w->spx[m]] + w->idx[m]];
    double r = (w->y[m] - pred) * w->isig[m];
    gsl_vector_set(f, m, isfinite(r) ? r : BAD_RESIDUAL);
  }
  return GSL_SUCCESS;
}

static int resid_df(const gsl_vector *x, void *params, gsl_matrix *J) {
  dt_joint_workspace *w = params;
  set_params(w, x->data);
  if (!(w->jac_valid && memcmp(w->jac_x, x->data, w->npar * sizeof w->jac_x[0]) == 0)) {
    w->jac_valid = 0;
    if (eval_models(w, 1) != DT_OK) {
      gsl_matrix_set_zero(J);
      return GSL_SUCCESS;
    }
    memcpy(w->jac_x, x->data, w->npar * sizeof w->jac_x[0]);
    w->jac_valid = 1;
  }
  size_t ldj = 3 * w->ncomp;
  for (size_t m = 0; m < w->nused; m++) {
    int s = w->spx[m];
    double scale = -w->isig[m] * w->base[m];
    const double *jr = w->mjac + (w->off[s] + w->idx[m]) * ldj;
    double *row = gsl_matrix_ptr(J, m, 0);
    for (size_t q = 0; q < w->npar; q++) {
      int k = w->pcomp[q];
      double d = 0;
      switch (w->ptype[q]) {
      case P_V: d = jr[3 * k + 2]; break;
      case P_B: d = jr[3 * k + 1]; break;
      case P_BS: d = w->pspec[q] == s ? jr[3 * k + 1] : 0.0; break;
      case P_N: d = w->pspec[q] == s ? jr[3 * k + 0] : 0.0; break;
      case P_T: d = jr[3 * k + 1] * w->dbdT[s][k]; break;
      default: d = jr[3 * k + 1] * w->dbdbt[s][k]; break; /* P_BT */
      }
      d *= scale * w->dvdu[q];
      row[q] = isfinite(d) ? d : 0.0;
    }
  }
  return GSL_SUCCESS;
}

/* Validate, lay out the parameters (per component: v, the b parameters of
 * the rule, log N per species) and pack the usable pixels. */
static int setup(dt_joint_workspace *w, const dt_joint_problem *p, dt_err *e) {
  if (p->nspec == 0 || p->nspec > w->max_spec || !p->sp)
    return dt_err_set(e, DT_EINVAL, "joint fit", "%zu species (1..%zu allowed)", p->nspec,
                      w->max_spec);
  if (p->ncomp > w->max_comp)
    return dt_err_set(e, DT_EINVAL, "joint fit", "%zu components exceed the workspace (%zu)",
                      p->ncomp, w->max_comp);
  if (!(isfinite(p->vlo) && isfinite(p->vhi) && p->vlo < p->vhi))
    return dt_err_set(e, DT_EINVAL, "joint fit", "empty velocity window [%g, %g]", p->vlo,
                      p->vhi);
  if (p->btie != DT_JOINT_B_SAME && p->btie != DT_JOINT_B_THERMAL &&
      p->btie != DT_JOINT_B_FREE)
    return dt_err_set(e, DT_EINVAL, "joint fit", "unknown b rule %d", (int)p->btie);
  size_t total = 0;
  w->off[0] = 0;
  for (size_t s = 0; s < p->nspec; s++) {
    const dt_joint_species *sp = &p->sp[s];
    if (!sp->model || !sp->flux || !sp->sigma)
      return dt_err_set(e, DT_EINVAL, "joint fit", "species %zu is incomplete", s + 1);
    if (p->btie == DT_JOINT_B_THERMAL && !(sp->mass_u > 0 && isfinite(sp->mass_u)))
      return dt_err_set(e, DT_EINVAL, "joint fit",
                        "species %zu has no atomic mass (needed by the thermal b rule)", s + 1);
    total += dt_model_npix(sp->model);
    w->off[s + 1] = total;
  }
  if (total > w->max_pix)
    return dt_err_set(e, DT_EINVAL, "joint fit", "%zu pixels exceed the workspace (%zu)", total,
                      w->max_pix);
  w->prob = p;
  w->nspec = p->nspec;
  w->ncomp = p->ncomp;
  w->npar = 0;
  w->jac_valid = 0;

  double lbmin = log(DT_FIT_B_MIN), lbmax = log(DT_FIT_B_MAX);
  double ltmin = log(DT_JOINT_T_MIN), ltmax = log(DT_JOINT_T_MAX);
  double mmean = 0;
  for (size_t s = 0; s < p->nspec; s++) mmean += p->sp[s].mass_u / (double)p->nspec;
  for (size_t k = 0; k < p->ncomp; k++) {
    if (!isfinite(p->v[k]))
      return dt_err_set(e, DT_EINVAL, "joint fit", "component %zu: non-finite velocity", k + 1);
    /* held values stay at their starts (set here; set_params changes
       * only the fitted ones) */
    unsigned fz = p->frozen ? p->frozen[k] : 0;
    w->v[k] = p->v[k];
    if (!(fz & DT_FREEZE_V)) add_param(w, P_V, k, -1, p->vlo, p->vhi, p->v[k]);
    double b0 = p->b[k];
    switch (p->btie) {
    case DT_JOINT_B_SAME:
      if (!(b0 > 0 && isfinite(b0)))
        return dt_err_set(e, DT_EINVAL, "joint fit", "component %zu: b must be > 0", k + 1);
      for (size_t s = 0; s < p->nspec; s++) w->cur[s][k].b = b0;
      if (!(fz & DT_FREEZE_B)) add_param(w, P_B, k, -1, lbmin, lbmax, log(fmax(b0, DT_FIT_B_MIN)));
      break;
    case DT_JOINT_B_FREE:
      for (size_t s = 0; s < p->nspec; s++) {
        double bs = p->sp[s].b[k];
        if (!(bs > 0 && isfinite(bs)))
          return dt_err_set(e, DT_EINVAL, "joint fit", "species %zu, component %zu: b must be > 0",
                            s + 1, k + 1);
        w->cur[s][k].b = bs;
        if (!(fz & DT_FREEZE_B)) add_param(w, P_BS, k, (int)s, lbmin, lbmax, log(fmax(bs, DT_FIT_B_MIN)));
      }
      break;
    default: { /* thermal: T and b_turb, from b when not given */
      double T0 = p->T[k], bt0 = p->b_turb[k];
      if (!(T0 > 0) || !(bt0 >= 0)) {
        if (!(b0 > 0 && isfinite(b0)))
          return dt_err_set(e, DT_EINVAL, "joint fit",
                            "component %zu: no starting T, b_turb or b", k + 1);
        /* half of b^2 thermal (at the mean mass), half turbulent */
        if (!(T0 > 0)) T0 = 0.5 * b0 * b0 * mmean / THERMAL_C;
        if (!(bt0 >= 0)) bt0 = b0 / sqrt(2.0);
      }
      if (!isfinite(T0) || !isfinite(bt0))
        return dt_err_set(e, DT_EINVAL, "joint fit", "component %zu: non-finite T or b_turb",
                          k + 1);
      w->T[k] = fmin(fmax(T0, DT_JOINT_T_MIN), DT_JOINT_T_MAX);
      w->bt[k] = bt0 * bt0;
      if (!(fz & DT_FREEZE_B)) {
        add_param(w, P_T, k, -1, ltmin, ltmax, log(w->T[k]));
        add_param(w, P_BT, k, -1, Q_MIN, Q_MAX, bt0 * bt0);
      }
    }
    }
    for (size_t s = 0; s < p->nspec; s++) {
      double l = p->sp[s].logN[k];
      if (!isfinite(l))
        return dt_err_set(e, DT_EINVAL, "joint fit", "species %zu, component %zu: non-finite log N",
                          s + 1, k + 1);
      w->cur[s][k].logN = l;
      if (!(s == 0 && (fz & DT_FREEZE_N))) add_param(w, P_N, k, (int)s, DT_FIT_LOGN_MIN, DT_FIT_LOGN_MAX, l);
    }
  }

  size_t m = 0;
  for (size_t s = 0; s < p->nspec; s++) {
    const dt_joint_species *sp = &p->sp[s];
    size_t n = w->off[s + 1] - w->off[s], m0 = m;
    for (size_t i = 0; i < n; i++) {
      if (sp->mask && sp->mask[i]) continue;
      double sg = sp->sigma[i], y = sp->flux[i], c = sp->cont ? sp->cont[i] : 1.0;
      if (!(isfinite(sg) && sg > 0 && isfinite(y) && isfinite(c))) continue;
      w->idx[m] = i;
      w->spx[m] = (unsigned char)s;
      w->y[m] = y;
      w->isig[m] = 1.0 / sg;
      w->base[m] = c;
      m++;
    }
    w->used_sp[s] = m - m0;
  }
  w->nused = m;
  if (m < w->npar + 1)
    return dt_err_set(e, DT_EMASKED, "joint fit", "%zu usable pixels for %zu free parameters",
                      m, w->npar);
  return DT_OK;
}

static double chi2_now(dt_joint_workspace *w, double *chi2_sp, int *ok) {
  *ok = eval_models(w, 0) == DT_OK;
  if (!*ok) return NAN;
  double chi2 = 0;
  for (size_t s = 0; s < w->nspec; s++) chi2_sp[s] = 0;
  for (size_t m = 0; m < w->nused; m++) {
    double r = (w->y[m] - w->base[m] * w->mflux[w->off[w->spx[m]] + w->idx[m]]) * w->isig[m];
    chi2_sp[w->spx[m]] += r * r;
    chi2 += r * r;
  }
  return chi2;
}

/* Newton decrement g^T (J^T J)^-1 g (see fit.c); cov is scratch.  The
 * inverse is GSL's rank-revealing one (gsl_multifit_nlinear_covar), so a
 * direction the data do not constrain does not stop the test. */
static double newton_decrement(gsl_multifit_nlinear_workspace *s, gsl_matrix *cov) {
  gsl_matrix *J = gsl_multifit_nlinear_jac(s);
  gsl_vector *f = gsl_multifit_nlinear_residual(s);
  size_t p = J->size2;
  double g[MAXPAR], y[MAXPAR];
  gsl_vector_view gv = gsl_vector_view_array(g, p), yv = gsl_vector_view_array(y, p);
  gsl_blas_dgemv(CblasTrans, 1.0, J, f, 0.0, &gv.vector);
  if (gsl_multifit_nlinear_covar(J, 1e-11, cov) != GSL_SUCCESS) return INFINITY;
  gsl_blas_dsymv(CblasLower, 1.0, cov, &gv.vector, 0.0, &yv.vector);
  double dec;
  gsl_blas_ddot(&gv.vector, &yv.vector, &dec);
  return isfinite(dec) ? fabs(dec) : INFINITY;
}

typedef struct run_state {
  dt_lsq_slot *slot;
  double chi2;
  const char *why;
  double x[MAXPAR];
} run_state;

/* One run of the solver from x0 (see fit.c's solve: the same loop without
 * the bound-stall test -- parameters against a bound end by the decrement
 * or the gradient test). */
static void solve(dt_joint_workspace *w, gsl_multifit_nlinear_fdf *fdf, int accel, int max_iter,
                  double tlim, double t0, int *iter, run_state *rs) {
  int iter0 = *iter;
  double xbuf[MAXPAR];
  memcpy(xbuf, w->x0, w->npar * sizeof xbuf[0]);
  gsl_vector_view xv = gsl_vector_view_array(xbuf, w->npar);
  rs->why = NULL;
  rs->chi2 = INFINITY;
  rs->slot = dt_lsq_get(&w->cache, w->nused, w->npar, accel);
  if (!rs->slot) {
    rs->why = "out of memory";
    return;
  }
  dt_lsq_slot *slot = rs->slot;
  int stalls = 0, done = 0, n = 0;
  double chi2 = INFINITY;
  if (gsl_multifit_nlinear_init(&xv.vector, fdf, slot->w) != GSL_SUCCESS)
    rs->why = "the solver could not start";
  while (!rs->why && !done) {
    if (*iter - iter0 >= max_iter) {
      rs->why = "no convergence within the iteration limit";
      break;
    }
    if (tlim > 0 && now_seconds() - t0 > tlim) {
      rs->why = "no convergence within the time limit";
      break;
    }
    int gs = gsl_multifit_nlinear_iterate(slot->w);
    (*iter)++;
    n++;
    if (gs == GSL_ENOPROG) {
      double dd = newton_decrement(slot->w, slot->cov);
      if (dd <= DEC_STALL) break;
      if (++stalls >= 3 || n == 1) {
        rs->why = "the solver made no progress";
        break;
      }
      continue;
    }
    if (gs != GSL_SUCCESS) {
      rs->why = "the solver failed";
      break;
    }
    stalls = 0;
    if (!accel && n == ACCEL_AFTER) {
      dt_lsq_slot *acc = dt_lsq_get(&w->cache, w->nused, w->npar, 1);
      if (acc) {
        gsl_vector_memcpy(&xv.vector, gsl_multifit_nlinear_position(slot->w));
        if (gsl_multifit_nlinear_init(&xv.vector, fdf, acc->w) == GSL_SUCCESS) {
          slot = acc;
          continue;
        }
        gsl_multifit_nlinear_init(&xv.vector, fdf, slot->w);
      }
    }
    int info = 0;
    double fn = gsl_blas_dnrm2(gsl_multifit_nlinear_residual(slot->w));
    double drop = chi2 - fn * fn;
    chi2 = fn * fn;
    if (gsl_multifit_nlinear_test(XTOL, GTOL, 0.0, &info, slot->w) == GSL_SUCCESS)
      done = 1;
    else if (drop < DEC_GATE && newton_decrement(slot->w, slot->cov) <= DEC_TOL)
      done = 1;
  }
  rs->slot = slot;
  memcpy(rs->x, gsl_multifit_nlinear_position(slot->w)->data, w->npar * sizeof rs->x[0]);
  double fn = gsl_blas_dnrm2(gsl_multifit_nlinear_residual(slot->w));
  rs->chi2 = fn * fn;
  if (!rs->why && !(isfinite(rs->chi2) && rs->chi2 < BAD_RESIDUAL))
    rs->why = "the fit reached a non-finite chi2";
}

static int suspicious(const dt_joint_workspace *w, const run_state *rs) {
  if (rs->why) return 1;
  double dof = (double)w->nused - (double)w->npar;
  if (dof > 0 && rs->chi2 > dof + SUSPECT_CHI2 * sqrt(2.0 * dof)) return 1;
  for (size_t q = 0; q < w->npar; q++) {
    double s = dt_lsq_to_external(rs->x[q], 0.0, 1.0, NULL);
    if (s < SUSPECT_EDGE || s > 1.0 - SUSPECT_EDGE) return 1;
  }
  return 0;
}

static void fill_values(dt_joint_workspace *w, dt_joint_result *r, double chi2) {
  const dt_joint_problem *p = w->prob;
  r->btie = p->btie;
  r->nspec = w->nspec;
  r->ncomp = w->ncomp;
  for (size_t k = 0; k < w->ncomp; k++) {
    r->v[k] = w->v[k];
    r->T[k] = r->T_err[k] = r->b_turb[k] = r->b_turb_err[k] = NAN;
    r->b_turb2[k] = r->b_turb2_err[k] = NAN;
    if (p->btie == DT_JOINT_B_THERMAL) {
      r->T[k] = w->T[k];
      r->T_err[k] = r->b_turb_err[k] = r->b_turb2_err[k] = 0; /* held; else the fit's */
      r->b_turb2[k] = w->bt[k];
      r->b_turb[k] = sqrt(fmax(w->bt[k], 0.0));
    }
    for (size_t s = 0; s < w->nspec; s++) r->comp[s][k] = w->cur[s][k];
  }
  r->chi2 = chi2;
  r->npix = w->nused;
  r->nparam = w->npar;
  r->dof = (long)w->nused - (long)w->npar;
  r->chi2_red = r->dof > 0 ? chi2 / (double)r->dof : NAN;
  r->bic = chi2 + (double)w->npar * log((double)w->nused);
  for (size_t s = 0; s < w->nspec; s++) r->npix_sp[s] = w->used_sp[s];
}

/* 1-sigma errors from (J^T J)^-1, mapped through the transforms; the b of
 * each species under `thermal` from the covariance of (T, b_turb). */
static void fill_errors(dt_joint_workspace *w, dt_lsq_slot *slot, dt_joint_result *r) {
  gsl_matrix *J = gsl_multifit_nlinear_jac(slot->w);
  gsl_multifit_nlinear_covar(J, 1e-11, slot->cov);
  const gsl_matrix *C = slot->cov;
  int qT[DT_MAX_COMP], qB[DT_MAX_COMP];
  for (size_t k = 0; k < DT_MAX_COMP; k++) qT[k] = qB[k] = -1; /* -1: held */
  for (size_t q = 0; q < w->npar; q++) {
    double var = gsl_matrix_get(C, q, q);
    double err = (var > 0 && isfinite(var)) ? sqrt(var) * fabs(w->dvdu[q]) : INFINITY;
    int k = w->pcomp[q], s = w->pspec[q];
    switch (w->ptype[q]) {
    case P_V:
      r->v_err[k] = err;
      for (size_t z = 0; z < w->nspec; z++) r->err[z][k].v = err;
      break;
    case P_N: r->err[s][k].logN = err; break;
    case P_B:
      for (size_t z = 0; z < w->nspec; z++) r->err[z][k].b = err;
      break;
    case P_BS: r->err[s][k].b = err; break;
    case P_T: r->T_err[k] = err; qT[k] = (int)q; break;
    default: /* q = b_turb^2 */
      r->b_turb2_err[k] = err;
      qB[k] = (int)q;
      /* the upward 1-sigma excursion of b_turb = sqrt(q): sigma_q / (2 b_turb)
       * for q >> sigma_q, sqrt(sigma_q) about q = 0 */
      r->b_turb_err[k] = isfinite(err) ? sqrt(fmax(r->b_turb2[k], 0.0) + err) - r->b_turb[k]
                                       : INFINITY;
      break;
    }
  }
  if (w->prob->btie != DT_JOINT_B_THERMAL) return;
  for (size_t k = 0; k < w->ncomp; k++) {
    if (qT[k] < 0 || qB[k] < 0) continue; /* b held: no error */
    size_t a = (size_t)qT[k], b = (size_t)qB[k];
    double vT = gsl_matrix_get(C, a, a) * w->dvdu[a] * w->dvdu[a];
    double vB = gsl_matrix_get(C, b, b) * w->dvdu[b] * w->dvdu[b];
    double cTB = gsl_matrix_get(C, a, b) * w->dvdu[a] * w->dvdu[b];
    for (size_t s = 0; s < w->nspec; s++) {
      double gT = w->dbdT[s][k], gB = w->dbdbt[s][k];
      double var = gT * gT * vT + gB * gB * vB + 2.0 * gT * gB * cTB;
      r->err[s][k].b = (var >= 0 && isfinite(var)) ? sqrt(var) : INFINITY;
    }
  }
}

int dt_joint_run(dt_joint_workspace *w, const dt_joint_problem *p, dt_joint_result *r,
                 dt_err *e) {
  double t0 = now_seconds();
  dt_err_clear(e);
  memset(r, 0, sizeof *r);
  r->chi2 = r->chi2_red = r->bic = NAN;
  int st = setup(w, p, e);
  if (st != DT_OK) {
    r->status = st;
    w->prob = NULL;
    return st;
  }
  set_params(w, w->x0);
  if (w->npar == 0) {
    int ok;
    double chi2 = chi2_now(w, r->chi2_sp, &ok);
    fill_values(w, r, chi2);
    r->status = ok && isfinite(chi2) ? DT_OK : DT_ENOCONV;
    w->prob = NULL;
    if (r->status != DT_OK) return dt_err_set(e, DT_ENOCONV, "joint fit", "the model is not finite");
    return DT_OK;
  }
  gsl_multifit_nlinear_fdf fdf;
  fdf.f = resid_f;
  fdf.df = resid_df;
  fdf.fvv = NULL;
  fdf.n = w->nused;
  fdf.p = w->npar;
  fdf.params = w;
  int max_iter = p->max_iter > 0 ? p->max_iter : DT_FIT_MAX_ITER;
  double tlim = p->time_limit == 0 ? 4.0 * DT_FIT_TIME_LIMIT : p->time_limit;
  dt_gsl_quiet();
  int iter = 0;
  run_state rs, ra;
  solve(w, &fdf, 1, max_iter, tlim, t0, &iter, &rs);
  if (rs.slot && suspicious(w, &rs)) {
    solve(w, &fdf, 0, max_iter, tlim, t0, &iter, &ra);
    if (ra.slot && ((!ra.why && (rs.why || ra.chi2 < rs.chi2)) ||
                    (ra.why && rs.why && ra.chi2 < rs.chi2)))
      rs = ra;
  }
  if (!rs.slot) {
    r->status = DT_ENOMEM;
    w->prob = NULL;
    return dt_err_set(e, DT_ENOMEM, "joint fit", "out of memory");
  }
  dt_lsq_slot *slot = rs.slot;
  if (memcmp(gsl_multifit_nlinear_position(slot->w)->data, rs.x, w->npar * sizeof rs.x[0])) {
    gsl_vector_view xv = gsl_vector_view_array(rs.x, w->npar);
    gsl_multifit_nlinear_init(&xv.vector, &fdf, slot->w);
  }
  set_params(w, gsl_multifit_nlinear_position(slot->w)->data);
  int ok;
  double chi2 = chi2_now(w, r->chi2_sp, &ok);
  if (!ok) chi2 = rs.chi2;
  fill_values(w, r, chi2);
  r->niter = iter;
  fill_errors(w, slot, r);
  w->prob = NULL;
  if (rs.why) {
    r->status = DT_ENOCONV;
    return dt_err_set(e, DT_ENOCONV, "joint fit", "%s (%d iterations)", rs.why, iter);
  }
  r->status = DT_OK;
  return DT_OK;
}

int dt_joint_eval(const dt_joint_problem *p, const dt_joint_result *r, size_t s,
                  double *flux_out) {
  if (!p || !r || s >= p->nspec || s >= r->nspec || r->ncomp > DT_MAX_COMP || !flux_out)
    return DT_EINVAL;
  const dt_joint_species *sp = &p->sp[s];
  size_t n = dt_model_npix(sp->model);
  if (r->ncomp == 0) {
    for (size_t i = 0; i < n; i++) flux_out[i] = 1.0;
  } else {
    int st = dt_model_eval(sp->model, r->comp[s], r->ncomp, flux_out, NULL, 3 * r->ncomp);
    if (st != DT_OK) return st;
  }
  if (sp->cont)
    for (size_t i = 0; i < n; i++) flux_out[i] *= sp->cont[i];
  return DT_OK;
}
