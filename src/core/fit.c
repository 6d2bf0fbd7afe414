/* Fitting Voigt components to a doublet: the least-squares engine.
 *
 * The solver is GSL's gsl_multifit_nlinear: trust region, Levenberg-
 * Marquardt with geodesic acceleration (lmaccel; Transtrum & Sethna 2012,
 * arXiv:1201.5885), More scaling, modified-Cholesky linear solver.  The
 * acceleration keeps the first steps from overshooting into the wrong
 * valley of the curve of growth (a narrow saturated line where a broad thin
 * one belongs) -- the classic trap of Voigt fitting.  A solution that still
 * looks wrong (failed, chi2 more than 2 sigma above its expectation, or a
 * parameter at the edge of its range) is fitted once more from the start
 * with plain LM steps, and the better of the two is kept.
 *
 * We drive the iteration ourselves (init / iterate / test) so that an
 * iteration limit and a clock limit both apply and a fit can never hang.
 * Convergence: GSL's step and gradient tests, or a Newton decrement
 * g^T (J^T J)^-1 g below 1e-4 in chi2 (parameters within 0.01 sigma of the
 * minimum), or -- for parameters pushed against a bound, where the
 * transforms flatten and steps shrink for ever -- a negligible chi2 still to
 * be gained there.
 *
 * The residuals are
 *     r_m = (y_m - C_m P(x_m) F_m(theta)) / sigma_m
 * over the usable pixels m, with C the fixed continuum, P the optional joint
 * Legendre polynomial and F the model flux of model.h.  The Jacobian is
 * analytic: the model's dF/d(logN, b, v) times dtheta/du of the bounding
 * transforms (logistic maps, see fit.h), plus C P_j(x) F for the continuum
 * coefficients.  The model's Jacobian costs little more than its flux, so it
 * is computed with every residual evaluation and reused when GSL asks for
 * the Jacobian at the same point (it always does, at accepted steps).
 *
 * Memory: the workspace holds every per-pixel buffer at its maximum size.
 * GSL's own solver workspace depends on the exact (pixels, parameters)
 * pair, so a few of those are cached by size and created only when a new
 * size is seen -- never inside the iteration.
 *
 * Partial covering (cover.h): the model flux comes from dt_cover_eval,
 * which also gives dF/dC_k; each C_k is one more parameter (P_F) behind a
 * logistic map onto (0, 1).  Its error is read from the covariance with
 * the C_f columns of the Jacobian in C itself (the map's slope divided
 * out), so that a C_f at 1 keeps the curvature of chi2 in C as its error
 * rather than the vanishing slope of the map.  A C_f near 1 is the usual
 * case, not a suspicious one: it triggers no second run and no bound flag. */
#include "doubletty/fit.h"
#include "doubletty/cover.h"
#include "doubletty/legendre.h"

#include <gsl/gsl_blas.h>
#include <gsl/gsl_errno.h>
#include <gsl/gsl_linalg.h>
#include <gsl/gsl_multifit_nlinear.h>
#include <math.h>
#include <pthread.h>
#include <stdlib.h>
#include <string.h>
#include <time.h>

#include "gsl_quiet.h"
#include "lsq.h"

#define MAXPAR (4 * DT_MAX_COMP + DT_MAX_CONT)
#define BAD_RESIDUAL 1e100   /* stands in for a non-finite residual: the
                                trial step is then rejected by the solver */
#define XTOL 1e-8            /* relative step size test */
#define GTOL 1e-9            /* scaled gradient test */
#define GTOL_STALL 1e-5      /* scaled gradient test of unbounded parameters */
#define DEC_TOL 1e-4         /* Newton decrement [chi2] of a converged fit */
#define DEC_GATE 1.0         /* ... tested once an iteration gains less chi2 */
#define DEC_STALL 1e-3       /* ... accepted when no step can improve chi2 (the
                                model's own rounding and wing truncation make
                                chi2 noisy at about this level) */
#define NO_GAIN 1e-6         /* chi2 the last DT_FIT_STALL_ITERS iterations
                                together gain at most in a fit that is done
                                all the same (far below DEC_STALL: a fit
                                creeping along a parameter held at its bound
                                would otherwise run to the iteration limit) */
#define BOUND_MARGIN 1e-6    /* start values moved this far (relative) inside */
#define BOUND_FLAG 1e-2      /* a parameter this close (relative, in the
                                logistic's argument) is at a bound */
#define BOUND_GAIN 0.1       /* chi2 still to gain at a bound that is negligible */
#define ACCEL_AFTER 30       /* iterations before switching to geodesic acceleration */
#define SUSPECT_EDGE 0.05    /* a solution this close (relative) to a bound, */
#define FIRST_ACCEL 1
#define SUSPECT_CHI2 2.0     /* or with a chi2 this many sigma too high, is
                                checked by a second, accelerated run */

enum { P_N, P_B, P_V, P_C, P_F };

struct dt_fit_workspace {
  size_t max_pix, max_comp, max_cont;
  /* packed over the usable pixels */
  size_t *idx;
  double *y, *isig, *base, *leg;
  /* over all model pixels */
  double *mflux, *mjac;
  /* the current problem */
  const dt_fit_problem *prob;
  size_t nused, npar, ncomp, ncont;
  int ptype[MAXPAR];
  int pcomp[MAXPAR];           /* component (-1: shared b), or coefficient */
  double plo[MAXPAR], phi[MAXPAR];
  double dvdu[MAXPAR];
  double cinit[DT_MAX_CONT];    /* starting joint continuum coefficients */
  double jac_x[MAXPAR];        /* x of the model Jacobian in mjac */
  int jac_valid;
  dt_component init[DT_MAX_COMP];
  dt_component cur[DT_MAX_COMP];
  double ccur[DT_MAX_CONT];
  /* partial covering: allocated at the first covered problem */
  int covering;
  double cfinit[DT_MAX_COMP], cfcur[DT_MAX_COMP];
  double *cjac;                /* dF/dC_k over all model pixels */
  dt_cover_work *cw;
  dt_lsq_cache cache;
  dt_fit_info info;
};

static double now_seconds(void) {
  struct timespec ts;
  clock_gettime(CLOCK_MONOTONIC, &ts);
  return (double)ts.tv_sec + 1e-9 * (double)ts.tv_nsec;
}

dt_fit_workspace *dt_fit_alloc(size_t max_pix, size_t max_comp, size_t max_cont) {
  if (max_pix == 0 || max_comp > DT_MAX_COMP || max_cont > DT_MAX_CONT) return NULL;
  dt_fit_workspace *w = calloc(1, sizeof *w);
  if (!w) return NULL;
  w->max_pix = max_pix;
  w->max_comp = max_comp;
  w->max_cont = max_cont;
  size_t nc = max_cont ? max_cont : 1;
  size_t nj = max_comp ? 3 * max_comp : 1;
  w->idx = malloc(max_pix * sizeof *w->idx);
  w->y = malloc(max_pix * sizeof *w->y);
  w->isig = malloc(max_pix * sizeof *w->isig);
  w->base = malloc(max_pix * sizeof *w->base);
  w->leg = malloc(max_pix * nc * sizeof *w->leg);
  w->mflux = malloc(max_pix * sizeof *w->mflux);
  w->mjac = malloc(max_pix * nj * sizeof *w->mjac);
  if (!w->idx || !w->y || !w->isig || !w->base || !w->leg || !w->mflux || !w->mjac) {
    dt_fit_free(w);
    return NULL;
  }
  return w;
}

void dt_fit_free(dt_fit_workspace *w) {
  if (!w) return;
  dt_lsq_cache_free(&w->cache);
  free(w->idx);
  free(w->y);
  free(w->isig);
  free(w->base);
  free(w->leg);
  free(w->mflux);
  free(w->mjac);
  free(w->cjac);
  dt_cover_free(w->cw);
  free(w);
}

const dt_fit_info *dt_fit_last_info(const dt_fit_workspace *w) { return &w->info; }

/* Set cur[] and ccur[] from the internal vector x (x may be NULL for the
 * initial values), and dvdu[] for the Jacobian. */
static void set_params(dt_fit_workspace *w, const double *x) {
  memcpy(w->cur, w->init, w->ncomp * sizeof w->cur[0]);
  if (w->prob->tie_b)
    for (size_t k = 1; k < w->ncomp; k++) w->cur[k].b = w->init[0].b;
  for (size_t j = 0; j < w->ncont; j++)
    w->ccur[j] = w->cinit[j];
  memcpy(w->cfcur, w->cfinit, w->ncomp * sizeof w->cfcur[0]);
  if (!x) return;
  for (size_t i = 0; i < w->npar; i++) {
    int k = w->pcomp[i];
    if (w->ptype[i] == P_C) {
      w->ccur[k] = x[i];
      w->dvdu[i] = 1.0;
      continue;
    }
    if (w->ptype[i] == P_F) {
      w->cfcur[k] = dt_lsq_to_external(x[i], w->plo[i], w->phi[i], &w->dvdu[i]);
      continue;
    }
    double val = dt_lsq_to_external(x[i], w->plo[i], w->phi[i], &w->dvdu[i]);
    if (w->ptype[i] == P_B) { /* the logistic acts on ln b */
      val = exp(val);
      w->dvdu[i] *= val;
    }
    if (w->ptype[i] == P_N) w->cur[k].logN = val;
    else if (w->ptype[i] == P_V) w->cur[k].v = val;
    else if (k < 0)
      for (size_t c = 0; c < w->ncomp; c++) w->cur[c].b = val;
    else w->cur[k].b = val;
  }
}

static double poly_at(const dt_fit_workspace *w, size_t m) {
  if (w->ncont == 0) return 1.0;
  const double *l = w->leg + m * w->ncont;
  double s = 0;
  for (size_t j = 0; j < w->ncont; j++) s += w->ccur[j] * l[j];
  return s;
}

static int eval_model(dt_fit_workspace *w, int with_jac) {
  size_t n = dt_model_npix(w->prob->model);
  if (w->ncomp == 0) {
    for (size_t i = 0; i < n; i++) w->mflux[i] = 1.0;
    return DT_OK;
  }
  if (w->covering)
    return dt_cover_eval(w->cw, NULL, w->prob->cover_model, w->cur, w->cfcur, NULL, w->ncomp,
                         w->mflux, with_jac ? w->mjac : NULL, 3 * w->ncomp,
                         with_jac ? w->cjac : NULL);
  return dt_model_eval(w->prob->model, w->cur, w->ncomp, w->mflux,
                       with_jac ? w->mjac : NULL, 3 * w->ncomp);
}

/* The residuals: the model's flux only.  Half of the points GSL asks for
 * never get a Jacobian (rejected steps, and the points of the
 * finite-difference second derivative for the geodesic acceleration); at
 * an accepted point resid_df follows at once, and the model, which keeps
 * the state of its last evaluation, then adds only the Jacobian -- the
 * same numbers as computing both here. */
static int resid_f(const gsl_vector *x, void *params, gsl_vector *f) {
  dt_fit_workspace *w = params;
  set_params(w, x->data);
  w->jac_valid = 0;
  if (eval_model(w, 0) != DT_OK) {
    gsl_vector_set_all(f, BAD_RESIDUAL);
    return GSL_SUCCESS;
  }
  for (size_t m = 0; m < w->nused; m++) {
    double pred = w->base[m] * poly_at(w, m) * w->mflux[w->idx[m]];
    double r = (w->y[m] - pred) * w->isig[m];
    gsl_vector_set(f, m, isfinite(r) ? r : BAD_RESIDUAL);
  }
  return GSL_SUCCESS;
}

static int resid_df(const gsl_vector *x, void *params, gsl_matrix *J) {
  dt_fit_workspace *w = params;
  set_params(w, x->data);
  if (!(w->jac_valid && memcmp(w->jac_x, x->data, w->npar * sizeof w->jac_x[0]) == 0)) {
    w->jac_valid = 0;
    if (eval_model(w, 1) != DT_OK) {
      gsl_matrix_set_zero(J);
      return GSL_SUCCESS;
    }
    memcpy(w->jac_x, x->data, w->npar * sizeof w->jac_x[0]);
    w->jac_valid = 1;
  }
  size_t ldj = 3 * w->ncomp;
  for (size_t m = 0; m < w->nused; m++) {
    size_t i = w->idx[m];
    double poly = poly_at(w, m);
    double scale = -w->isig[m] * w->base[m];
    const double *jr = w->mjac + i * ldj;
    double *row = gsl_matrix_ptr(J, m, 0);
    for (size_t q = 0; q < w->npar; q++) {
      int k = w->pcomp[q];
      double d;
      switch (w->ptype[q]) {
      case P_C:
        d = scale * w->leg[m * w->ncont + (size_t)k] * w->mflux[i];
        break;
      case P_N:
        d = scale * poly * jr[3 * k + 0] * w->dvdu[q];
        break;
      case P_V:
        d = scale * poly * jr[3 * k + 2] * w->dvdu[q];
        break;
      case P_F:
        d = scale * poly * w->cjac[i * w->ncomp + (size_t)k] * w->dvdu[q];
        break;
      default: /* P_B */
        if (k >= 0) {
          d = scale * poly * jr[3 * k + 1] * w->dvdu[q];
        } else {
          double s = 0;
          for (size_t c = 0; c < w->ncomp; c++) s += jr[3 * c + 1];
          d = scale * poly * s * w->dvdu[q];
        }
      }
      row[q] = isfinite(d) ? d : 0.0;
    }
  }
  return GSL_SUCCESS;
}

/* Validate the problem and lay out the packed pixel arrays and the
 * parameter map.  Returns a dt_status. */
static int setup(dt_fit_workspace *w, const dt_fit_problem *p, dt_err *e) {
  if (!p->model || !p->flux || !p->sigma)
    return dt_err_set(e, DT_EINVAL, "fit", "incomplete fit problem");
  size_t n = dt_model_npix(p->model);
  if (n > w->max_pix)
    return dt_err_set(e, DT_EINVAL, "fit", "%zu pixels exceed the workspace (%zu)", n,
                      w->max_pix);
  if (p->ncomp > w->max_comp)
    return dt_err_set(e, DT_EINVAL, "fit", "%zu components exceed the workspace (%zu)",
                      p->ncomp, w->max_comp);
  if (p->ncont > w->max_cont)
    return dt_err_set(e, DT_EINVAL, "fit",
                      "%zu continuum coefficients exceed the workspace (%zu)", p->ncont,
                      w->max_cont);
  if (p->ncomp && !p->comp) return dt_err_set(e, DT_EINVAL, "fit", "no starting components");
  if (p->ncont && !p->wave)
    return dt_err_set(e, DT_EINVAL, "fit", "joint continuum needs the wavelengths");
  if (!(isfinite(p->vlo) && isfinite(p->vhi) && p->vlo < p->vhi))
    return dt_err_set(e, DT_EINVAL, "fit", "empty velocity window [%g, %g]", p->vlo, p->vhi);
  if (p->covering) {
    if (!p->cover_model || dt_model_npix(p->cover_model) != n)
      return dt_err_set(e, DT_EINVAL, "fit", "partial covering needs a second model");
    if (!w->cw) w->cw = dt_cover_alloc(w->max_pix, w->max_comp ? w->max_comp : 1);
    if (!w->cjac) w->cjac = malloc(w->max_pix * (w->max_comp ? w->max_comp : 1) * sizeof *w->cjac);
    if (!w->cw || !w->cjac) return dt_err_set(e, DT_ENOMEM, "fit", "out of memory");
  }
  w->prob = p;
  w->ncomp = p->ncomp;
  w->ncont = p->ncont;
  w->covering = p->covering != 0;
  for (size_t j = 0; j < p->ncont; j++)
    w->cinit[j] = p->cont_init ? p->cont_init[j] : (j == 0 ? 1.0 : 0.0);
  w->jac_valid = 0;

  /* components: starting values and free parameters */
  size_t q = 0;
  for (size_t k = 0; k < p->ncomp; k++) {
    dt_component c = p->comp[k];
    unsigned fr = p->frozen ? p->frozen[k] : 0;
    if (!isfinite(c.logN) || !isfinite(c.b) || !isfinite(c.v))
      return dt_err_set(e, DT_EINVAL, "fit", "component %zu has a non-finite value", k + 1);
    if (!(fr & DT_FREEZE_N)) {
      c.logN = dt_lsq_clamp_inside(c.logN, DT_FIT_LOGN_MIN, DT_FIT_LOGN_MAX, BOUND_MARGIN);
      w->ptype[q] = P_N; w->pcomp[q] = (int)k;
      w->plo[q] = DT_FIT_LOGN_MIN; w->phi[q] = DT_FIT_LOGN_MAX; q++;
    }
    int b_free = p->tie_b ? (k == 0 && !(p->frozen && (p->frozen[0] & DT_FREEZE_B)))
                          : !(fr & DT_FREEZE_B);
    if (b_free) {
      w->plo[q] = log(DT_FIT_B_MIN);
      w->phi[q] = log(DT_FIT_B_MAX);
      c.b = exp(dt_lsq_clamp_inside(log(c.b > DT_FIT_B_MIN ? c.b : DT_FIT_B_MIN), w->plo[q], w->phi[q],
                                    BOUND_MARGIN));
      w->ptype[q] = P_B; w->pcomp[q] = p->tie_b ? -1 : (int)k;
      q++;
    } else if (c.b <= 0 && (!p->tie_b || k == 0)) {
      return dt_err_set(e, DT_EINVAL, "fit", "component %zu has b <= 0", k + 1);
    }
    if (!(fr & DT_FREEZE_V)) {
      c.v = dt_lsq_clamp_inside(c.v, p->vlo, p->vhi, BOUND_MARGIN);
      w->ptype[q] = P_V; w->pcomp[q] = (int)k;
      w->plo[q] = p->vlo; w->phi[q] = p->vhi; q++;
    }
    w->init[k] = c;
    w->cfinit[k] = 1.0;
    if (w->covering) {
      /* fitted: from the given value inside (0, 1), else DT_CF_START;
       * held: the given value, or 1 (full covering) when there is none */
      double cf = p->cf ? p->cf[k] : NAN;
      if (!(fr & DT_FREEZE_CF)) {
        if (!(cf > 0.0 && cf < 1.0)) cf = DT_CF_START;
        w->ptype[q] = P_F; w->pcomp[q] = (int)k;
        w->plo[q] = 0.0; w->phi[q] = 1.0; q++;
        cf = dt_lsq_clamp_inside(cf, 0.0, 1.0, BOUND_MARGIN);
      } else if (!(cf > 0.0 && cf <= 1.0)) {
        cf = 1.0;
      }
      w->cfinit[k] = cf;
    }
  }
  for (size_t j = 0; j < p->ncont; j++) {
    w->ptype[q] = P_C; w->pcomp[q] = (int)j; q++;
  }
  w->npar = q;

  /* usable pixels, packed */
  size_t m = 0;
  double x0 = p->wave ? p->wave[0] : 0, x1 = p->wave ? p->wave[n - 1] : 1;
  for (size_t i = 0; i < n; i++) {
    if (p->mask && p->mask[i]) continue;
    double s = p->sigma[i], y = p->flux[i], c = p->cont ? p->cont[i] : 1.0;
    if (!(isfinite(s) && s > 0 && isfinite(y) && isfinite(c))) continue;
    w->idx[m] = i;
    w->y[m] = y;
    w->isig[m] = 1.0 / s;
    w->base[m] = c;
    if (p->ncont)
      dt_legendre(dt_legendre_x(p->wave[i], x0, x1), (int)p->ncont - 1, w->leg + m * p->ncont);
    m++;
  }
  w->nused = m;
  if (m < w->npar + 1)
    return dt_err_set(e, DT_EMASKED, "fit",
                      "%zu usable pixels for %zu free parameters", m, w->npar);
  return DT_OK;
}

static double chi2_now(dt_fit_workspace *w, double *flux_out, int *ok) {
  double chi2 = 0;
  *ok = eval_model(w, 0) == DT_OK;
  if (!*ok) return NAN;
  for (size_t m = 0; m < w->nused; m++) {
    double pred = w->base[m] * poly_at(w, m) * w->mflux[w->idx[m]];
    double r = (w->y[m] - pred) * w->isig[m];
    chi2 += r * r;
  }
  if (flux_out) {
    const dt_fit_problem *p = w->prob;
    size_t n = dt_model_npix(p->model);
    double x0 = p->wave ? p->wave[0] : 0, x1 = p->wave ? p->wave[n - 1] : 1;
    for (size_t i = 0; i < n; i++) {
      double poly = w->ncont ? dt_legendre_sum(w->ccur, w->ncont, dt_legendre_x(p->wave[i], x0, x1))
                             : 1.0;
      flux_out[i] = (p->cont ? p->cont[i] : 1.0) * poly * w->mflux[i];
    }
  }
  return chi2;
}

static void fill_result(dt_fit_workspace *w, dt_fit_result *r, double chi2) {
  r->ncomp = w->ncomp;
  memcpy(r->comp, w->cur, w->ncomp * sizeof r->comp[0]);
  r->ncont = w->ncont;
  memcpy(r->cont_coef, w->ccur, w->ncont * sizeof r->cont_coef[0]);
  r->chi2 = chi2;
  r->npix = w->nused;
  r->covering = w->covering;
  for (size_t k = 0; k < w->ncomp; k++) r->cf[k] = w->covering ? w->cfcur[k] : 1.0;
  r->dof = (long)w->nused - (long)w->npar;
  r->chi2_red = r->dof > 0 ? chi2 / (double)r->dof : NAN;
  r->bic = chi2 + (double)w->npar * log((double)w->nused);
}

/* GSL's default error handler aborts the process; the fit reports its own
 * status codes instead, so the handler is turned off -- once for the
 * process (pthread_once), because the handler is a process-wide setting
 * that threads fitting at the same time must not swap back and forth. */
static void gsl_handler_off(void) { gsl_set_error_handler_off(); }

void dt_gsl_quiet(void) {
  static pthread_once_t once = PTHREAD_ONCE_INIT;
  pthread_once(&once, gsl_handler_off);
}

/* Starting joint continuum coefficients: the model is linear in them, so
 * solve the weighted linear least-squares problem for the starting
 * components (normal equations, Cholesky; at most DT_MAX_CONT unknowns).
 * w->cur must hold the starting components and leg[] the polynomials. */
static void linear_cont_start(dt_fit_workspace *w) {
  size_t nc = w->ncont;
  if (nc == 0 || eval_model(w, 0) != DT_OK) return;
  double A[DT_MAX_CONT * DT_MAX_CONT] = {0}, b[DT_MAX_CONT] = {0}, c[DT_MAX_CONT];
  for (size_t m = 0; m < w->nused; m++) {
    double base = w->base[m] * w->mflux[w->idx[m]] * w->isig[m];
    double y = w->y[m] * w->isig[m];
    const double *l = w->leg + m * nc;
    for (size_t a = 0; a < nc; a++) {
      b[a] += base * l[a] * y;
      for (size_t q = 0; q <= a; q++) A[a * nc + q] += base * l[a] * base * l[q];
    }
  }
  for (size_t a = 0; a < nc; a++)
    for (size_t q = a + 1; q < nc; q++) A[a * nc + q] = A[q * nc + a];
  gsl_matrix_view Av = gsl_matrix_view_array(A, nc, nc);
  gsl_vector_view bv = gsl_vector_view_array(b, nc), cv = gsl_vector_view_array(c, nc);
  if (gsl_linalg_cholesky_decomp1(&Av.matrix) != GSL_SUCCESS ||
      gsl_linalg_cholesky_solve(&Av.matrix, &bv.vector, &cv.vector) != GSL_SUCCESS)
    return;
  for (size_t a = 0; a < nc; a++)
    if (!isfinite(c[a])) return;
  memcpy(w->cinit, c, nc * sizeof c[0]);
}

void dt_fit_chi2_coef(const dt_fit_workspace *w, double *coef) {
  memcpy(coef, w->ccur, w->ncont * sizeof coef[0]);
}

int dt_fit_chi2(dt_fit_workspace *w, const dt_fit_problem *p, const dt_component *comp,
                const double *cont_coef, double *flux_out, double *chi2, size_t *npix) {
  /* Set up as a problem with every parameter frozen, so the values are
   * taken exactly as given; the joint polynomial is then applied with the
   * given coefficients. */
  if (p->ncont > w->max_cont || (p->ncont && !p->wave)) return DT_EINVAL;
  unsigned char all[DT_MAX_COMP];
  memset(all, DT_FREEZE_N | DT_FREEZE_B | DT_FREEZE_V | DT_FREEZE_CF, sizeof all);
  dt_fit_problem q = *p;
  q.comp = comp ? comp : p->comp;
  q.cont_init = cont_coef ? cont_coef : p->cont_init;
  q.frozen = all;
  q.tie_b = 0;
  q.vlo = -1.0;
  q.vhi = 1.0;
  q.ncont = 0;
  int st = setup(w, &q, NULL);
  if (st != DT_OK) return st;
  w->prob = p;
  w->ncont = p->ncont;
  if (p->ncont) {
    size_t n = dt_model_npix(p->model);
    double x0 = p->wave[0], x1 = p->wave[n - 1];
    for (size_t m = 0; m < w->nused; m++)
      dt_legendre(dt_legendre_x(p->wave[w->idx[m]], x0, x1), (int)p->ncont - 1,
                  w->leg + m * p->ncont);
  }
  memcpy(w->cur, w->init, w->ncomp * sizeof w->cur[0]);
  for (size_t j = 0; j < p->ncont; j++)
    w->cinit[j] = q.cont_init ? q.cont_init[j] : (j == 0 ? 1.0 : 0.0);
  if (!q.cont_init) {
    dt_gsl_quiet();
    linear_cont_start(w);
  }
  memcpy(w->ccur, w->cinit, p->ncont * sizeof w->ccur[0]);
  int ok;
  double c2 = chi2_now(w, flux_out, &ok);
  w->prob = NULL;
  if (!ok) return DT_EINVAL;
  if (chi2) *chi2 = c2;
  if (npix) *npix = w->nused;
  return DT_OK;
}

/* The Newton decrement: the decrease of chi2 a full Gauss-Newton step
 * would bring if chi2 were exactly quadratic, g^T (J^T J)^-1 g with
 * g = J^T f.  It measures, in units of chi2, how far the fit is from its
 * minimum (parameters within sqrt(decrement) sigma).  cov is scratch. */
/* g^T M^-1 g for M = J^T J (its lower triangle filled, overwritten by its
 * Cholesky factor); a singular M means a direction without curvature: not
 * converged (INFINITY). */
static double decrement_of(gsl_matrix *M, double *g) {
  size_t p = M->size1;
  double y[MAXPAR];
  gsl_vector_view gv = gsl_vector_view_array(g, p), yv = gsl_vector_view_array(y, p);
  if (gsl_linalg_cholesky_decomp1(M) != GSL_SUCCESS) return INFINITY;
  if (gsl_linalg_cholesky_solve(M, &gv.vector, &yv.vector) != GSL_SUCCESS) return INFINITY;
  double dec;
  gsl_blas_ddot(&gv.vector, &yv.vector, &dec);
  return isfinite(dec) ? fabs(dec) : INFINITY;
}

static double newton_decrement(gsl_multifit_nlinear_workspace *s, gsl_matrix *cov) {
  gsl_matrix *J = gsl_multifit_nlinear_jac(s);
  gsl_vector *f = gsl_multifit_nlinear_residual(s);
  double g[MAXPAR];
  gsl_vector_view gv = gsl_vector_view_array(g, J->size2);
  gsl_blas_dgemv(CblasTrans, 1.0, J, f, 0.0, &gv.vector);
  gsl_blas_dsyrk(CblasLower, CblasTrans, 1.0, J, 0.0, cov);   /* cov: p x p scratch */
  return decrement_of(cov, g);
}

/* The Newton decrement over the parameters q with !held[q] alone (the
 * others held where they are). */
static double free_decrement(gsl_multifit_nlinear_workspace *s, gsl_matrix *cov,
                             const int *held) {
  gsl_matrix *J = gsl_multifit_nlinear_jac(s);
  gsl_vector *f = gsl_multifit_nlinear_residual(s);
  size_t idx[MAXPAR], m = 0;
  for (size_t q = 0; q < J->size2; q++)
    if (!held[q]) idx[m++] = q;
  if (m == 0) return 0.0;
  double g[MAXPAR];
  gsl_matrix_view M = gsl_matrix_submatrix(cov, 0, 0, m, m);
  for (size_t i = 0; i < m; i++) {
    gsl_vector_const_view ci = gsl_matrix_const_column(J, idx[i]);
    gsl_blas_ddot(&ci.vector, f, &g[i]);
    for (size_t k = 0; k <= i; k++) {
      gsl_vector_const_view ck = gsl_matrix_const_column(J, idx[k]);
      double d;
      gsl_blas_ddot(&ci.vector, &ck.vector, &d);
      gsl_matrix_set(&M.matrix, i, k, d);
    }
  }
  return decrement_of(&M.matrix, g);
}

/* Gradient of chi2 with respect to the internal parameters, 2 J^T f. */
static void chi2_gradient(gsl_multifit_nlinear_workspace *s, double *g) {
  gsl_matrix *J = gsl_multifit_nlinear_jac(s);
  gsl_vector *f = gsl_multifit_nlinear_residual(s);
  for (size_t q = 0; q < J->size2; q++) {
    gsl_vector_const_view col = gsl_matrix_const_column(J, q);
    gsl_blas_ddot(&col.vector, f, &g[q]);
    g[q] *= 2.0;
  }
}

/* Which bound an internal parameter x of a bounded (logistic) one lies at:
 * -1 the lower, +1 the upper (within BOUND_FLAG of its range), 0 neither. */
static int bound_side(double x) {
  double sg = dt_lsq_to_external(x, 0.0, 1.0, NULL);
  return sg < BOUND_FLAG ? -1 : sg > 1.0 - BOUND_FLAG ? 1 : 0;
}

/* Extra convergence tests, after GSL's step and gradient tests:
 *  - parameters run against a bound: there the logistic flattens and the
 *    solver creeps towards the bound for ever.  The chi2 still to be gained
 *    by moving such a parameter all the way is about |dchi2/du| (for the
 *    logistic, distance / (dvalue/du) = 1/(1-s)); when that is below
 *    BOUND_GAIN and the other parameters pass a scaled gradient test, stop.
 *  - the Newton decrement is below DEC_TOL: the minimum is reached for all
 *    statistical purposes even if the steps are not yet tiny (long flat
 *    valleys of degenerate parameters, such as N and b of an unresolved
 *    saturated line).
 * Returns 3 or 4 (the reason) when converged, else 0. */
static int extra_converged(dt_fit_workspace *w, gsl_multifit_nlinear_workspace *s,
                           gsl_matrix *cov, double chi2, double last_drop) {
  const double *x = gsl_multifit_nlinear_position(s)->data;
  int at[MAXPAR], nbound = 0;
  for (size_t q = 0; q < w->npar; q++) {
    at[q] = w->ptype[q] == P_C ? 0 : bound_side(x[q]);
    nbound += at[q] != 0;
  }
  /* (the decrement costs a J^T J: only worth it once the steps gain
   * little -- or in a plain run, which starts next to its optimum, where a
   * quarter of the scan refits end after their first step) */
  int gate = last_drop < DEC_GATE || w->prob->plain;
  if (nbound == 0) return gate && newton_decrement(s, cov) <= DEC_TOL ? 4 : 0;
  double g[MAXPAR];
  chi2_gradient(s, g);
  double phi = 0.5 * chi2 > 1 ? 0.5 * chi2 : 1;
  /* every parameter at a bound presses against it (chi2 falls towards the
   * bound, by at most BOUND_GAIN still): one that would rather move inwards
   * only looks flat through the logistic */
  for (size_t q = 0; q < w->npar; q++)
    if (at[q] && (fabs(g[q]) > BOUND_GAIN || at[q] * g[q] > 0)) return 0;
  int flat = 1;
  for (size_t q = 0; q < w->npar && flat; q++) {
    double xs = fabs(x[q]) > 1 ? fabs(x[q]) : 1;
    if (!at[q] && 0.5 * fabs(g[q]) * xs > GTOL_STALL * phi) flat = 0;
  }
  if (flat) return 3;
  /* ... or the others at their minimum for all statistical purposes:
   * their Newton decrement alone below DEC_TOL, as without bounds */
  return gate && free_decrement(s, cov, at) <= DEC_TOL ? 3 : 0;
}

/* A trial (prob->give_up_bic > 0) that cannot pass: from its second
 * iteration on, its BIC lies GIVE_UP_GAP or more above the mark and more
 * than GIVE_UP_DEC times the Newton decrement and GIVE_UP_DROP times the
 * last iteration's gain above it.  (The decrement alone misjudges a
 * curved valley, or a parameter running to its bound; the factors were
 * chosen so that no trial accepted in the benchmark, demo and recovery
 * surveys -- 142 of 233 -- would have been given up.) */
#define GIVE_UP_GAP 15.0
#define GIVE_UP_DEC 10.0
#define GIVE_UP_DROP 20.0
static int hopeless(dt_fit_workspace *w, dt_lsq_slot *slot, int n, double chi2, double drop) {
  if (!(w->prob->give_up_bic > 0) || n < 2) return 0;
  double gap = chi2 + (double)w->npar * log((double)w->nused) - w->prob->give_up_bic;
  if (!(gap > GIVE_UP_GAP) || !(gap > GIVE_UP_DROP * drop)) return 0;
  return gap > GIVE_UP_DEC * newton_decrement(slot->w, slot->cov);
}

/* The C_f columns of the final Jacobian in C itself: divided by the
 * logistic's slope (the solver is done with J).  cf_ext[q] = 1 for the
 * columns so changed; a slope that underflowed leaves the column (its
 * error then comes out infinite, as it should for a C_f the map has
 * frozen). */
static void cover_columns(dt_fit_workspace *w, gsl_matrix *J, int *cf_ext) {
  for (size_t q = 0; q < w->npar; q++) {
    if (w->ptype[q] != P_F || !(w->dvdu[q] > 1e-300)) continue;
    gsl_vector_view col = gsl_matrix_column(J, q);
    gsl_vector_scale(&col.vector, 1.0 / w->dvdu[q]);
    cf_ext[q] = 1;
  }
}

/* One run of the solver from x0 (internal parameters), at most max_iter
 * iterations.  accel: geodesic acceleration from the start; otherwise plain
 * LM, switching to it after ACCEL_AFTER iterations.  rs->slot receives the
 * solver holding the final state, rs->why NULL when converged or the
 * reason; *iter is increased by the iterations done. */
typedef struct run_state {
  dt_lsq_slot *slot;
  int info;
  double chi2;
  const char *why;
  double x[MAXPAR];   /* final internal parameters */
} run_state;

static void solve(dt_fit_workspace *w, gsl_multifit_nlinear_fdf *fdf, const double *x0,
                  int accel, int max_iter, double tlim, double t0, int *iter, run_state *rs) {
  int iter0 = *iter;
  double xbuf[MAXPAR];
  memcpy(xbuf, x0, w->npar * sizeof xbuf[0]);
  gsl_vector_view xv = gsl_vector_view_array(xbuf, w->npar);
  rs->why = NULL;
  rs->info = 0;
  rs->chi2 = INFINITY;
  rs->slot = dt_lsq_get(&w->cache, w->nused, w->npar, accel);
  if (!rs->slot) {
    rs->why = "out of memory";
    return;
  }
  dt_lsq_slot *slot = rs->slot;
  int stalls = 0, done = 0, n = 0;
  double chi2 = INFINITY;
  double gain[DT_FIT_STALL_ITERS] = {0};   /* the last iterations' drops of chi2 */
  if (gsl_multifit_nlinear_init(&xv.vector, fdf, slot->w) != GSL_SUCCESS)
    rs->why = "the solver could not start";
  while (!rs->why && !done) {
    if (*iter - iter0 >= max_iter) { rs->why = "no convergence within the iteration limit"; break; }
    if (tlim > 0 && now_seconds() - t0 > tlim) {
      rs->why = "no convergence within the time limit";
      w->info.timed_out = 1;
      break;
    }
    int gs = gsl_multifit_nlinear_iterate(slot->w);
    (*iter)++;
    n++;
    if (gs == GSL_ENOPROG) {
      /* No step reduces chi2: at (or numerically at) the minimum, or stuck. */
      if (newton_decrement(slot->w, slot->cov) <= DEC_STALL) {
        rs->info = 5;
        break;
      }
      if (++stalls >= 3 || n == 1) { rs->why = "the solver made no progress"; break; }
      continue;
    }
    if (gs != GSL_SUCCESS) { rs->why = "the solver failed"; break; }
    stalls = 0;
    if (!accel && n == ACCEL_AFTER) {
      /* Slow progress: a curved valley (degenerate N, b, v of unresolved or
       * blended lines, or a parameter against a bound).  Continue with
       * geodesic acceleration (Transtrum & Sethna 2012, arXiv:1201.5885),
       * GSL's lmaccel, from the current point. */
      dt_lsq_slot *acc = dt_lsq_get(&w->cache, w->nused, w->npar, 1);
      if (acc) {
        gsl_vector_memcpy(&xv.vector, gsl_multifit_nlinear_position(slot->w));
        if (gsl_multifit_nlinear_init(&xv.vector, fdf, acc->w) == GSL_SUCCESS) {
          slot = acc;
          continue;   /* a fresh solver has no step to test yet */
        }
        gsl_multifit_nlinear_init(&xv.vector, fdf, slot->w);
      }
    }
    int info = 0;
    double fn = gsl_blas_dnrm2(gsl_multifit_nlinear_residual(slot->w));
    double drop = chi2 - fn * fn;
    chi2 = fn * fn;
    gain[n % DT_FIT_STALL_ITERS] = drop;
    if (gsl_multifit_nlinear_test(XTOL, GTOL, 0.0, &info, slot->w) == GSL_SUCCESS) {
      done = 1;
    } else if ((info = extra_converged(w, slot->w, slot->cov, chi2, drop)) != 0) {
      done = 1;
    } else if (hopeless(w, slot, n, chi2, drop)) {
      info = 6;   /* a trial that cannot pass: stalled */
      done = 1;
    } else if (n >= DT_FIT_STALL_ITERS) {
      double g = 0;
      for (int k = 0; k < DT_FIT_STALL_ITERS; k++) g += gain[k];
      if (g < NO_GAIN) {
        info = 7;   /* nothing left to gain */
        done = 1;
      } else if (w->prob->stall_chi2 > 0 && g < w->prob->stall_chi2) {
        info = 6;
        done = 1;
      }
    }
    rs->info = info;
  }
  rs->slot = slot;
  memcpy(rs->x, gsl_multifit_nlinear_position(slot->w)->data, w->npar * sizeof rs->x[0]);
  double fn = gsl_blas_dnrm2(gsl_multifit_nlinear_residual(slot->w));
  rs->chi2 = fn * fn;
  if (!rs->why && !(isfinite(rs->chi2) && rs->chi2 < BAD_RESIDUAL))
    rs->why = "the fit reached a non-finite chi2";
}

/* A solution worth a second opinion: a failure, a chi2 far above its
 * expectation (more than SUSPECT_CHI2 standard deviations of the chi2
 * distribution, dof + k sqrt(2 dof)), or a parameter near the end of its
 * range (a column of 10^8, b of 0.3 km/s, a component at the window's
 * edge): where a long first step that overshot into a wrong valley ends. */
static int suspicious(const dt_fit_workspace *w, const run_state *rs) {
  if (rs->why) return 1;
  double dof = (double)w->nused - (double)w->npar;
  if (dof > 0 && rs->chi2 > dof + SUSPECT_CHI2 * sqrt(2.0 * dof)) return 1;
  const double *x = gsl_multifit_nlinear_position(rs->slot->w)->data;
  for (size_t q = 0; q < w->npar; q++) {
    if (w->ptype[q] == P_C || w->ptype[q] == P_F) continue;
    double s = dt_lsq_to_external(x[q], 0.0, 1.0, NULL);
    if (s < SUSPECT_EDGE || s > 1.0 - SUSPECT_EDGE) return 1;
  }
  return 0;
}

int dt_fit_run(dt_fit_workspace *w, const dt_fit_problem *p, dt_fit_result *r, dt_err *e) {
  double t0 = now_seconds();
  dt_err_clear(e);
  memset(r, 0, sizeof *r);
  memset(&w->info, 0, sizeof w->info);
  int st = setup(w, p, e);
  if (st != DT_OK) {
    r->status = st;
    r->chi2 = r->chi2_red = r->bic = NAN;
    return st;
  }
  w->info.nparam = w->npar;
  set_params(w, NULL);
  if (w->ncont && !p->cont_init) {
    dt_gsl_quiet();
    linear_cont_start(w);
    set_params(w, NULL);
  }

  if (w->npar == 0) { /* nothing to fit: the chi2 of the given state */
    int ok;
    double chi2 = chi2_now(w, NULL, &ok);
    fill_result(w, r, chi2);
    r->status = (ok && isfinite(chi2)) ? DT_OK : DT_ENOCONV;
    if (r->status != DT_OK) dt_err_set(e, DT_ENOCONV, "fit", "the model is not finite");
    w->info.seconds = now_seconds() - t0;
    return r->status;
  }

  double x0[MAXPAR];
  for (size_t q = 0; q < w->npar; q++) {
    int k = w->pcomp[q];
    switch (w->ptype[q]) {
    case P_N: x0[q] = dt_lsq_to_internal(w->init[k].logN, w->plo[q], w->phi[q], BOUND_MARGIN); break;
    case P_B: x0[q] = dt_lsq_to_internal(log(w->init[k < 0 ? 0 : k].b), w->plo[q], w->phi[q], BOUND_MARGIN); break;
    case P_V: x0[q] = dt_lsq_to_internal(w->init[k].v, w->plo[q], w->phi[q], BOUND_MARGIN); break;
    case P_F: x0[q] = dt_lsq_to_internal(w->cfinit[k], w->plo[q], w->phi[q], BOUND_MARGIN); break;
    default: x0[q] = w->ccur[k];
    }
  }
  gsl_multifit_nlinear_fdf fdf;
  fdf.f = resid_f;
  fdf.df = resid_df;
  fdf.fvv = NULL;
  fdf.n = w->nused;
  fdf.p = w->npar;
  fdf.params = w;
  int max_iter = p->max_iter > 0 ? p->max_iter : DT_FIT_MAX_ITER;
  double tlim = p->time_limit == 0 ? DT_FIT_TIME_LIMIT : p->time_limit;

  dt_gsl_quiet();
  int iter = 0;
  run_state rs;
  solve(w, &fdf, x0, p->plain ? 0 : FIRST_ACCEL, max_iter, tlim, t0, &iter, &rs);
  if (rs.slot && !p->single_run && suspicious(w, &rs)) {
    /* Plain LM's long first steps can overshoot into a wrong valley; the
     * geodesic-accelerated steps are shorter where the model bends.  Try
     * again from the start that way and keep the better fit. */
    run_state ra;
    solve(w, &fdf, x0, !FIRST_ACCEL, max_iter, tlim, t0, &iter, &ra);
    if (ra.slot && ((!ra.why && (rs.why || ra.chi2 < rs.chi2)) || (ra.why && rs.why && ra.chi2 < rs.chi2)))
      rs = ra;
  }
  if (!rs.slot) {
    r->status = DT_ENOMEM;
    return dt_err_set(e, DT_ENOMEM, "fit", "out of memory");
  }
  dt_lsq_slot *slot = rs.slot;
  const char *why = rs.why;
  /* Both runs may have ended in the same solver (the plain run switches to
   * the accelerated one): put the chosen state back if it was overwritten. */
  if (memcmp(gsl_multifit_nlinear_position(slot->w)->data, rs.x, w->npar * sizeof rs.x[0])) {
    gsl_vector_view xv = gsl_vector_view_array(rs.x, w->npar);
    gsl_multifit_nlinear_init(&xv.vector, &fdf, slot->w);
  }

  /* The state at the chosen solver's current (best accepted) position. */
  gsl_vector *xs = gsl_multifit_nlinear_position(slot->w);
  set_params(w, xs->data);
  double chi2 = rs.chi2;
  fill_result(w, r, chi2);
  r->niter = iter;

  /* 1-sigma errors: (J^T J)^-1 of the weighted residuals, not scaled by
   * chi2_red; mapped through the transforms.  A parameter at a bound
   * (BOUND_FLAG) is held there: its column is dropped, so it has no error
   * (infinite, as one the data do not constrain), and the others' errors
   * do not depend on how far into the logistic's flat end the solver
   * crept before it stopped. */
  gsl_matrix *J = gsl_multifit_nlinear_jac(slot->w);
  int cf_ext[MAXPAR] = {0};
  if (w->covering) cover_columns(w, J, cf_ext);
  int held[MAXPAR] = {0};   /* at a bound (not the continuum, not a C_f) */
  for (size_t q = 0; q < w->npar; q++) {
    held[q] = w->ptype[q] != P_C && w->ptype[q] != P_F && bound_side(xs->data[q]);
    if (held[q] && !p->no_errors) {
      gsl_vector_view col = gsl_matrix_column(J, q);
      gsl_vector_set_zero(&col.vector);
    }
  }
  if (!p->no_errors) gsl_multifit_nlinear_covar(J, 1e-11, slot->cov);
  for (size_t q = 0; q < w->npar; q++) {
    double err = 0.0;
    if (!p->no_errors && held[q]) {
      err = INFINITY;
    } else if (!p->no_errors) {
      double var = gsl_matrix_get(slot->cov, q, q);
      double slope = cf_ext[q] ? 1.0 : fabs(w->dvdu[q]);
      err = (var > 0 && isfinite(var)) ? sqrt(var) * slope : INFINITY;
    }
    int k = w->pcomp[q];
    switch (w->ptype[q]) {
    case P_N: r->err[k].logN = err; break;
    case P_V: r->err[k].v = err; break;
    case P_B: r->err[k < 0 ? 0 : k].b = err; break;
    case P_F: r->cf_err[k] = err; break;
    default: r->cont_err[k] = err;
    }
    if (held[q]) {
      int bit = w->ptype[q] == P_N ? DT_FREEZE_N : w->ptype[q] == P_B ? DT_FREEZE_B
                                                                        : DT_FREEZE_V;
      if (k < 0)
        for (size_t c = 0; c < w->ncomp; c++) w->info.at_bound[c] |= bit;
      else w->info.at_bound[k] |= bit;
    }
  }
  w->info.reason = rs.info;
  w->info.stalled = rs.info == 6;
  w->info.seconds = now_seconds() - t0;
  if (why) {
    r->status = DT_ENOCONV;
    return dt_err_set(e, DT_ENOCONV, "fit", "%s (%d iterations)", why, iter);
  }
  r->status = DT_OK;
  return DT_OK;
}

/* ---------- refit check ---------- */

static int param_agrees(double rec, double now, double erec, double enow, double tol) {
  if (!isfinite(rec) || !isfinite(now)) return isnan(rec) && isnan(now);
  double s = fmax(isfinite(erec) ? erec : 0.0, isfinite(enow) ? enow : 0.0);
  if (s <= 0.0) return fabs(rec - now) <= 1e-6;
  return fabs(rec - now) <= tol * s;
}

int dt_fit_check_refit(const dt_fit_result *recorded, const dt_fit_result *refit,
                       double tol_sigma, char *why, size_t nwhy) {
  char tmp[8];
  if (!why) {
    why = tmp;
    nwhy = sizeof tmp;
  }
  why[0] = '\0';
  if (recorded->status != refit->status) {
    snprintf(why, nwhy, "fit status differs (recorded %d, now %d)", recorded->status,
             refit->status);
    return 0;
  }
  if (recorded->ncomp != refit->ncomp) {
    snprintf(why, nwhy, "number of components differs (recorded %zu, now %zu)",
             recorded->ncomp, refit->ncomp);
    return 0;
  }
  if (recorded->status != DT_OK) return 1;
  static const char *names[3] = {"logN", "b", "v"};
  for (size_t i = 0; i < recorded->ncomp && i < DT_MAX_COMP; i++) {
    const dt_component *a = &recorded->comp[i], *b = &refit->comp[i];
    const dt_component *ea = &recorded->err[i], *eb = &refit->err[i];
    double va[3] = {a->logN, a->b, a->v}, vb[3] = {b->logN, b->b, b->v};
    double sa[3] = {ea->logN, ea->b, ea->v}, sb[3] = {eb->logN, eb->b, eb->v};
    for (int p = 0; p < 3; p++)
      if (!param_agrees(va[p], vb[p], sa[p], sb[p], tol_sigma)) {
        snprintf(why, nwhy, "component %zu %s: recorded %.6g, refit %.6g", i + 1, names[p],
                 va[p], vb[p]);
        return 0;
      }
  }
  if (recorded->covering != refit->covering) {
    snprintf(why, nwhy, "partial covering %s in the refit", refit->covering ? "on" : "off");
    return 0;
  }
  for (size_t i = 0; recorded->covering && i < recorded->ncomp && i < DT_MAX_COMP; i++)
    if (!param_agrees(recorded->cf[i], refit->cf[i], recorded->cf_err[i], refit->cf_err[i],
                      tol_sigma)) {
      snprintf(why, nwhy, "component %zu C_f: recorded %.6g, refit %.6g", i + 1,
               recorded->cf[i], refit->cf[i]);
      return 0;
    }
  double sd = tol_sigma * sqrt(2.0 * (double)(recorded->dof > 0 ? recorded->dof : 1));
  if (!(fabs(recorded->chi2 - refit->chi2) <= sd)) {
    snprintf(why, nwhy, "chi2: recorded %.6g, refit %.6g", recorded->chi2, refit->chi2);
    return 0;
  }
  return 1;
}
