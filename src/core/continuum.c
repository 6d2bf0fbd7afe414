/* The continuum under a doublet: weighted linear least squares of a Legendre
 * polynomial or a cubic B-spline to the pixels free of absorption.
 *
 * The idea: the continuum is linear in its coefficients, so one call of
 * gsl_multifit_wlinear gives the coefficients and their covariance; the
 * per-pixel uncertainty is the basis vector sandwiched by that covariance.
 * Without user windows the absorption is kept out twice: a velocity band
 * around each line is never used, and sigma-clipping with a robust scatter
 * drops what remains (narrow unrelated lines, sky residuals, cosmics).
 *
 * Flux units are arbitrary (often ~1e-17), so the fit works on flux divided
 * by the median |flux| of the candidate pixels and scales back afterwards;
 * the solver then sees numbers of order one.
 *
 * The solver: a Legendre polynomial on distinct wavelengths has full rank,
 * so its weighted problem is solved by Householder QR (gsl_linalg_QR_decomp,
 * QR_lssolve; the covariance (R^T R)^-1 from R by gsl_linalg_cholesky_invert),
 * cheaper than GSL's SVD for the usual three coefficients.  A B-spline may have a
 * basis function with no candidate under it (a gap wider than its support),
 * so the spline goes through gsl_multifit_wlinear's truncated SVD.  Each
 * candidate's basis values are computed once and serve every clipping pass. */
#include "doubletty/continuum.h"

#include <math.h>
#include <stdlib.h>
#include <string.h>

#include <gsl/gsl_blas.h>
#include <gsl/gsl_bspline.h>
#include <gsl/gsl_errno.h>
#include <gsl/gsl_linalg.h>
#include <gsl/gsl_multifit.h>
#include <gsl/gsl_statistics_double.h>

#include "doubletty/model.h"

struct dt_cont_work {
  size_t cap;                    /* pixels the buffers hold */
  double *X;                     /* cap x DT_CONT_MAX_COEF design matrix */
  double *rows;                  /* cap x ncoef: the basis at every candidate */
  double *res;                   /* weighted residuals of the QR solution */
  double *y, *wt;                /* scaled flux, weights (the spline's) of the fitted pixels */
  double *r;                     /* normalised residuals of the candidates */
  double *scratch;               /* for the median / MAD */
  size_t *cand;                  /* candidate pixel indices (region-relative) */
  unsigned char *keep, *keep_new;
  gsl_multifit_linear_workspace *lin;  /* the spline's SVD: made at its first fit */
  double qtau[DT_CONT_MAX_ORDER + 1];  /* Householder coefficients (QR) */
  double coef[DT_CONT_MAX_COEF];
  double cov[DT_CONT_MAX_COEF * DT_CONT_MAX_COEF];
  double basis[DT_CONT_MAX_COEF];
  gsl_vector *bvec;              /* B-spline basis values (ncoef of the spline) */
  gsl_bspline_workspace *bsp;
  size_t bsp_nbreak;
  /* the last fit */
  int have;
  dt_cont_kind kind;
  size_t ncoef;
  int order;
  double x_lo, x_hi;             /* Legendre mapping */
  double u_lam0;                 /* spline coordinate u = c ln(lambda/u_lam0) */
  double u_hi;                   /* ... runs over [0, u_hi] */
};

void dt_cont_opts_init(dt_cont_opts *o) {
  memset(o, 0, sizeof *o);
  o->kind = DT_CONT_LEGENDRE;
  o->order = 2;
  o->spline_kms = 300.0;
  o->exclude_lo = -150.0;
  o->exclude_hi = 150.0;
  o->clip_lo = 3.0;
  o->clip_hi = 3.0;
  o->max_iter = 10;
}

static void free_buffers(dt_cont_work *w) {
  free(w->X);
  free(w->rows);
  free(w->res);
  free(w->y);
  free(w->wt);
  free(w->r);
  free(w->scratch);
  free(w->cand);
  free(w->keep);
  free(w->keep_new);
  if (w->lin) gsl_multifit_linear_free(w->lin);
  w->X = w->rows = w->res = w->y = w->wt = w->r = w->scratch = NULL;
  w->cand = NULL;
  w->keep = w->keep_new = NULL;
  w->lin = NULL;
  w->cap = 0;
}

/* Make room for n pixels (allocation happens only when n grows). */
static int ensure(dt_cont_work *w, size_t n, dt_err *e) {
  if (n <= w->cap && w->X) return DT_OK;
  if (n < DT_CONT_MAX_COEF) n = DT_CONT_MAX_COEF;
  free_buffers(w);
  w->X = malloc(n * DT_CONT_MAX_COEF * sizeof *w->X);
  w->rows = malloc(n * DT_CONT_MAX_COEF * sizeof *w->rows);
  w->res = malloc(n * sizeof *w->res);
  w->y = malloc(n * sizeof *w->y);
  w->wt = malloc(n * sizeof *w->wt);
  w->r = malloc(n * sizeof *w->r);
  w->scratch = malloc(n * sizeof *w->scratch);
  w->cand = malloc(n * sizeof *w->cand);
  w->keep = malloc(n);
  w->keep_new = malloc(n);
  if (!w->X || !w->rows || !w->res || !w->y || !w->wt || !w->r || !w->scratch || !w->cand ||
      !w->keep || !w->keep_new) {
    free_buffers(w);
    return dt_err_set(e, DT_ENOMEM, "continuum", "out of memory for %zu pixels", n);
  }
  w->cap = n;
  return DT_OK;
}

dt_cont_work *dt_cont_alloc(size_t nmax, dt_err *e) {
  dt_cont_work *w = calloc(1, sizeof *w);
  if (!w) {
    dt_err_set(e, DT_ENOMEM, "continuum", "out of memory");
    return NULL;
  }
  if (nmax > 0 && ensure(w, nmax, e) != DT_OK) {
    free(w);
    return NULL;
  }
  return w;
}

void dt_cont_free(dt_cont_work *w) {
  if (!w) return;
  free_buffers(w);
  if (w->bsp) gsl_bspline_free(w->bsp);
  if (w->bvec) gsl_vector_free(w->bvec);
  free(w);
}

/* Basis functions of the current shape at wavelength lam into w->basis. */
static void basis_at(dt_cont_work *w, double lam) {
  if (w->kind == DT_CONT_LEGENDRE) {
    dt_legendre(dt_legendre_x(lam, w->x_lo, w->x_hi), w->order, w->basis);
  } else {
    double u = DT_C_KMS * log(lam / w->u_lam0);
    /* B-splines vanish outside the breakpoints: clamp (constant extension) */
    if (u < 0.0) u = 0.0;
    if (u > w->u_hi) u = w->u_hi;
    gsl_bspline_eval(u, w->bvec, w->bsp);
    for (size_t k = 0; k < w->ncoef; k++) w->basis[k] = gsl_vector_get(w->bvec, k);
  }
}

/* Value and 1-sigma error of the fitted continuum at lam. */
static void eval_at(dt_cont_work *w, double lam, double *c, double *err) {
  basis_at(w, lam);
  size_t p = w->ncoef;
  double v = 0.0;
  for (size_t k = 0; k < p; k++) v += w->coef[k] * w->basis[k];
  *c = v;
  if (err) {
    double s = 0.0;
    for (size_t k = 0; k < p; k++) {
      double row = 0.0;
      for (size_t l = 0; l < p; l++) row += w->cov[k * p + l] * w->basis[l];
      s += w->basis[k] * row;
    }
    *err = s > 0 ? sqrt(s) : 0.0;
  }
}

int dt_cont_eval(dt_cont_work *w, double lambda, double *c, double *err) {
  if (!w || !w->have || !c) return DT_EINVAL;
  eval_at(w, lambda, c, err);
  return DT_OK;
}

/* Set up the spline basis over [lam_lo, lam_hi]; returns its coefficient
 * count, or 0 when out of memory. */
static size_t spline_setup(dt_cont_work *w, double lam_lo, double lam_hi, double dkms) {
  double U = DT_C_KMS * log(lam_hi / lam_lo);
  size_t nbreak = (size_t)ceil(U / dkms) + 1;
  if (nbreak < 2) nbreak = 2;
  if (nbreak + 2 > DT_CONT_MAX_COEF) nbreak = DT_CONT_MAX_COEF - 2;
  if (!w->bsp || w->bsp_nbreak != nbreak) {
    if (w->bsp) gsl_bspline_free(w->bsp);
    if (w->bvec) gsl_vector_free(w->bvec);
    w->bsp = gsl_bspline_alloc(4, nbreak);
    w->bvec = w->bsp ? gsl_vector_alloc(gsl_bspline_ncoeffs(w->bsp)) : NULL;
    if (!w->bsp || !w->bvec) {
      if (w->bsp) gsl_bspline_free(w->bsp);
      w->bsp = NULL;
      w->bsp_nbreak = 0;
      return 0;
    }
    w->bsp_nbreak = nbreak;
  }
  w->u_lam0 = lam_lo;
  w->u_hi = U > 0 ? U : 1.0;
  gsl_bspline_knots_uniform(0.0, w->u_hi, w->bsp);
  return gsl_bspline_ncoeffs(w->bsp);
}

static int in_windows(double lam, const dt_cont_opts *o) {
  for (size_t k = 0; k < o->nwin; k++)
    if (lam >= o->win[k].lo && lam <= o->win[k].hi) return 1;
  return 0;
}

static int in_bands(double lam, const dt_cont_opts *o) {
  if (!o->doublet) return 0;
  for (int l = 0; l < 2; l++) {
    double v = dt_velocity(lam, o->doublet->line[l].lambda0, o->vsys);
    if (v >= o->exclude_lo && v <= o->exclude_hi) return 1;
  }
  return 0;
}

/* The Legendre problem by Householder QR: X (m x p) holds the rows scaled
 * by sqrt(weight), y likewise. */
static int solve_qr(dt_cont_work *w, size_t m, double *chi2) {
  size_t p = w->ncoef;
  gsl_matrix_view A = gsl_matrix_view_array(w->X, m, p);
  gsl_vector_view b = gsl_vector_view_array(w->y, m);
  gsl_vector_view tau = gsl_vector_view_array(w->qtau, p);
  gsl_vector_view cv = gsl_vector_view_array(w->coef, p);
  gsl_vector_view res = gsl_vector_view_array(w->res, m);
  int st = gsl_linalg_QR_decomp(&A.matrix, &tau.vector);
  if (st == GSL_SUCCESS)
    st = gsl_linalg_QR_lssolve(&A.matrix, &tau.vector, &b.vector, &cv.vector, &res.vector);
  if (st != GSL_SUCCESS) return st;
  gsl_blas_ddot(&res.vector, &res.vector, chi2);
  /* (X^T W X)^-1 = (R^T R)^-1: R^T is a Cholesky factor of X^T W X */
  gsl_matrix_view cov = gsl_matrix_view_array(w->cov, p, p);
  for (size_t k = 0; k < p; k++)
    for (size_t l = 0; l <= k; l++)
      gsl_matrix_set(&cov.matrix, k, l, gsl_matrix_get(&A.matrix, l, k));
  return gsl_linalg_cholesky_invert(&cov.matrix);
}

/* Weighted fit over the kept candidates; fills w->coef/cov and *chi2. */
static int solve(dt_cont_work *w, const dt_spectrum *s, size_t i0, size_t ncand,
                 double scale, double *chi2, size_t *nk, dt_err *e) {
  size_t p = w->ncoef, m = 0;
  int qr = w->kind == DT_CONT_LEGENDRE;
  for (size_t c = 0; c < ncand; c++) {
    if (!w->keep[c]) continue;
    size_t i = i0 + w->cand[c];
    double sg = s->sigma[i] / scale;
    double rw = qr ? 1.0 / sg : 1.0;   /* QR: rows scaled by sqrt(weight) */
    for (size_t k = 0; k < p; k++) w->X[m * p + k] = rw * w->rows[c * p + k];
    w->y[m] = rw * s->flux[i] / scale;
    if (!qr) w->wt[m] = 1.0 / (sg * sg);
    m++;
  }
  *nk = m;
  int st;
  if (qr) {
    st = solve_qr(w, m, chi2);
  } else {
    if (!w->lin) w->lin = gsl_multifit_linear_alloc(w->cap, DT_CONT_MAX_COEF);
    if (!w->lin) return dt_err_set(e, DT_ENOMEM, "continuum", "out of memory");
    gsl_matrix_view X = gsl_matrix_view_array(w->X, m, p);
    gsl_vector_view y = gsl_vector_view_array(w->y, m);
    gsl_vector_view wt = gsl_vector_view_array(w->wt, m);
    gsl_vector_view cv = gsl_vector_view_array(w->coef, p);
    gsl_matrix_view cov = gsl_matrix_view_array(w->cov, p, p);
    st = gsl_multifit_wlinear(&X.matrix, &wt.vector, &y.vector, &cv.vector, &cov.matrix, chi2,
                              w->lin);
  }
  if (st != GSL_SUCCESS || !isfinite(*chi2))
    return dt_err_set(e, DT_EINVAL, "continuum", "the least-squares fit failed (%s)",
                      gsl_strerror(st));
  return DT_OK;
}

int dt_cont_fit(dt_cont_work *w, const dt_spectrum *s, size_t i0, size_t i1,
                const dt_cont_opts *o, double *cont, double *cont_err,
                unsigned char *used, dt_cont_result *r, dt_err *e) {
  dt_cont_opts def;
  if (!o) {
    dt_cont_opts_init(&def);
    o = &def;
  }
  if (!w || !s || !cont || !r)
    return dt_err_set(e, DT_EINVAL, "continuum", "missing argument");
  memset(r, 0, sizeof *r);
  w->have = 0;
  if (i1 <= i0 || i1 > s->n)
    return dt_err_set(e, DT_EINVAL, "continuum", "empty or invalid pixel range %zu..%zu",
                      i0, i1);
  if (o->kind == DT_CONT_LEGENDRE && (o->order < 0 || o->order > DT_CONT_MAX_ORDER))
    return dt_err_set(e, DT_EINVAL, "continuum", "polynomial order %d is outside 0..%d",
                      o->order, DT_CONT_MAX_ORDER);
  if (o->kind == DT_CONT_SPLINE && !(o->spline_kms > 0))
    return dt_err_set(e, DT_EINVAL, "continuum",
                      "spline breakpoint spacing must be positive (got %g km/s)",
                      o->spline_kms);
  if (o->kind != DT_CONT_LEGENDRE && o->kind != DT_CONT_SPLINE)
    return dt_err_set(e, DT_EINVAL, "continuum", "unknown continuum kind %d", (int)o->kind);
  for (size_t k = 0; k < o->nwin; k++)
    if (!(o->win[k].lo < o->win[k].hi))
      return dt_err_set(e, DT_EINVAL, "continuum window", "window %zu is empty (%g..%g A)",
                        k + 1, o->win[k].lo, o->win[k].hi);
  if (o->nwin == 0 && !(o->clip_lo > 0 && o->clip_hi > 0))
    return dt_err_set(e, DT_EINVAL, "continuum", "clipping thresholds must be positive");

  size_t n = i1 - i0;
  int st = ensure(w, n, e);
  if (st != DT_OK) return st;

  /* candidates: usable pixels in the windows, or outside the line bands */
  size_t ncand = 0;
  for (size_t k = 0; k < n; k++) {
    size_t i = i0 + k;
    if (used) used[k] = 0;
    if (s->mask && s->mask[i]) continue;
    if (!isfinite(s->flux[i]) || !isfinite(s->sigma[i]) || !(s->sigma[i] > 0)) continue;
    int take = o->nwin ? in_windows(s->wave[i], o) : !in_bands(s->wave[i], o);
    if (take) w->cand[ncand++] = k;
  }
  r->ncand = ncand;
  if (ncand == 0)
    return dt_err_set(e, DT_EMASKED, "continuum",
                      o->nwin ? "no unmasked pixel in the continuum windows"
                              : "no unmasked pixel outside the lines for the continuum");

  /* shape and its coefficient count, lowered when pixels are too few */
  w->kind = o->kind;
  w->order = o->order;
  w->x_lo = s->wave[i0];
  w->x_hi = s->wave[i1 - 1];
  if (w->kind == DT_CONT_SPLINE) {
    w->ncoef = spline_setup(w, s->wave[i0], s->wave[i1 - 1], o->spline_kms);
    if (w->ncoef == 0) return dt_err_set(e, DT_ENOMEM, "continuum", "out of memory");
  } else {
    w->ncoef = (size_t)w->order + 1;
  }
  if (ncand < w->ncoef) {
    if (!o->allow_lower) {
      if (w->kind == DT_CONT_SPLINE)
        return dt_err_set(e, DT_EINVAL, "continuum",
                          "%zu usable continuum pixel%s, too few for a spline with %zu "
                          "coefficients",
                          ncand, ncand == 1 ? "" : "s", w->ncoef);
      return dt_err_set(e, DT_EINVAL, "continuum",
                        "%zu usable continuum pixel%s, too few for a polynomial of order "
                        "%d (needs %zu)",
                        ncand, ncand == 1 ? "" : "s", w->order, w->ncoef);
    }
    w->kind = DT_CONT_LEGENDRE;
    w->order = (int)ncand - 1;
    if (w->order > DT_CONT_MAX_ORDER) w->order = DT_CONT_MAX_ORDER;
    w->ncoef = (size_t)w->order + 1;
    r->lowered = 1;
  }

  /* flux scale: median |flux| of the candidates */
  for (size_t c = 0; c < ncand; c++) w->scratch[c] = fabs(s->flux[i0 + w->cand[c]]);
  double scale = gsl_stats_median(w->scratch, 1, ncand);
  if (!(scale > 0) || !isfinite(scale)) scale = 1.0;

  /* the basis at every candidate, once */
  for (size_t c = 0; c < ncand; c++) {
    basis_at(w, s->wave[i0 + w->cand[c]]);
    memcpy(w->rows + c * w->ncoef, w->basis, w->ncoef * sizeof w->basis[0]);
  }

  memset(w->keep, 1, ncand);
  double chi2 = 0.0;
  size_t nk = 0;
  int iter = 0;
  int maxit = o->nwin ? 1 : (o->max_iter > 0 ? o->max_iter : 1);
  for (;;) {
    st = solve(w, s, i0, ncand, scale, &chi2, &nk, e);
    if (st != DT_OK) return st;
    iter++;
    if (iter >= maxit) break;
    /* normalised residuals of every candidate, robust scatter of the kept */
    size_t m = 0;
    for (size_t c = 0; c < ncand; c++) {
      size_t i = i0 + w->cand[c];
      const double *row = w->rows + c * w->ncoef;
      double model = 0.0;
      for (size_t k = 0; k < w->ncoef; k++) model += w->coef[k] * row[k];
      w->r[c] = (s->flux[i] / scale - model) / (s->sigma[i] / scale);
      if (w->keep[c]) w->scratch[m++] = w->r[c];
    }
    double sc = gsl_stats_mad(w->scratch, 1, m, w->y);   /* y is free now */
    if (!(sc > 1e-6)) sc = 1e-6;
    size_t nnew = 0, changed = 0;
    for (size_t c = 0; c < ncand; c++) {
      w->keep_new[c] = w->r[c] >= -o->clip_lo * sc && w->r[c] <= o->clip_hi * sc;
      nnew += w->keep_new[c];
      changed += w->keep_new[c] != w->keep[c];
    }
    if (!changed || nnew < w->ncoef) break;
    memcpy(w->keep, w->keep_new, ncand);
  }

  /* back to flux units */
  size_t p = w->ncoef;
  for (size_t k = 0; k < p; k++) w->coef[k] *= scale;
  for (size_t k = 0; k < p * p; k++) w->cov[k] *= scale * scale;
  w->have = 1;

  for (size_t k = 0; k < n; k++)
    eval_at(w, s->wave[i0 + k], &cont[k], cont_err ? &cont_err[k] : NULL);
  if (used)
    for (size_t c = 0; c < ncand; c++) used[w->cand[c]] = w->keep[c];

  r->kind = w->kind;
  r->order = w->kind == DT_CONT_LEGENDRE ? w->order : -1;
  r->ncoef = p;
  if (w->kind == DT_CONT_LEGENDRE)
    for (size_t k = 0; k < p; k++) r->coef[k] = w->coef[k];
  r->x_lo = w->x_lo;
  r->x_hi = w->x_hi;
  r->nused = nk;
  r->niter = iter;
  r->chi2 = chi2;
  r->chi2_red = nk > p ? chi2 / (double)(nk - p) : 0.0;
  return DT_OK;
}
