/* Partial covering (cover.h): the model flux of components that each cover
 * a fraction C_k of the source, with its Jacobian, and the flag of a
 * fitted C_f.
 *
 * The doublet model (model.c) is used as it is: the uncovered components
 * go through it together, each covered component alone through a second
 * model on the same pixels, and the pixel fluxes are combined as
 *     F = U prod_k G_k,   G_k = 1 - C_k + C_k F_k.
 * For one covered component this is exact (the LSF and the pixel average
 * are linear with unit weight); see cover.h for the overlapping case.
 * Derivatives: dF/dtheta_u = dU/dtheta_u prod G, dF/dtheta_k = U C_k
 * dF_k/dtheta_k prod_{j != k} G_j, dF/dC_k = U (F_k - 1) prod_{j != k} G_j,
 * the products without k taken from prefix and suffix products (no
 * division: a black line has G = 0). */
#include "doubletty/cover.h"
#include "doubletty/cog.h"

#include <math.h>
#include <stdlib.h>
#include <string.h>

struct dt_cover_work {
  size_t max_pix, max_comp;
  double *u, *ujac;      /* uncovered flux and Jacobian (3 per component) */
  double *fk, *jk;       /* each covered component: flux, Jacobian (3 each) */
};

dt_cover_work *dt_cover_alloc(size_t max_pix, size_t max_comp) {
  if (max_pix == 0 || max_comp == 0 || max_comp > DT_MAX_COMP) return NULL;
  dt_cover_work *w = calloc(1, sizeof *w);
  if (!w) return NULL;
  w->max_pix = max_pix;
  w->max_comp = max_comp;
  w->u = malloc(max_pix * sizeof *w->u);
  w->ujac = malloc(max_pix * 3 * max_comp * sizeof *w->ujac);
  w->fk = malloc(max_pix * max_comp * sizeof *w->fk);
  w->jk = malloc(max_pix * 3 * max_comp * sizeof *w->jk);
  if (!w->u || !w->ujac || !w->fk || !w->jk) {
    dt_cover_free(w);
    return NULL;
  }
  return w;
}

void dt_cover_free(dt_cover_work *w) {
  if (!w) return;
  free(w->u);
  free(w->ujac);
  free(w->fk);
  free(w->jk);
  free(w);
}

int dt_cover_eval(dt_cover_work *w, dt_model *mu, dt_model *mc, const dt_component *comp,
                  const double *cf, const unsigned char *covered, size_t ncomp,
                  double *flux, double *jac, size_t ldj, double *jac_cf) {
  if (!w || !mc || !flux || ncomp > w->max_comp || (ncomp && (!comp || !cf)) ||
      (jac && ldj < 3 * ncomp))
    return DT_EINVAL;
  size_t n = dt_model_npix(mc);
  if (n > w->max_pix || (mu && dt_model_npix(mu) != n)) return DT_EINVAL;

  /* split: uncovered together, covered one by one */
  dt_component ucomp[DT_MAX_COMP];
  size_t uidx[DT_MAX_COMP], cidx[DT_MAX_COMP], nu = 0, nc = 0;
  for (size_t k = 0; k < ncomp; k++) {
    if (!covered || covered[k]) {
      if (!(cf[k] > 0.0 && cf[k] <= 1.0)) return DT_EINVAL;
      cidx[nc++] = k;
    } else {
      uidx[nu] = k;
      ucomp[nu++] = comp[k];
    }
  }
  if (nu && !mu) return DT_EINVAL;
  if (nu) {
    int st = dt_model_eval(mu, ucomp, nu, w->u, jac ? w->ujac : NULL, 3 * nu);
    if (st != DT_OK) return st;
  } else {
    for (size_t i = 0; i < n; i++) w->u[i] = 1.0;
  }
  for (size_t c = 0; c < nc; c++) {
    int st = dt_model_eval(mc, &comp[cidx[c]], 1, w->fk + c * n, jac ? w->jk + c * 3 * n : NULL,
                           3);
    if (st != DT_OK) return st;
  }

  for (size_t i = 0; i < n; i++) {
    double g[DT_MAX_COMP], pre[DT_MAX_COMP + 1], suf[DT_MAX_COMP + 1];
    for (size_t c = 0; c < nc; c++) {
      double C = cf[cidx[c]];
      g[c] = 1.0 - C + C * w->fk[c * n + i];
    }
    pre[0] = 1.0;
    for (size_t c = 0; c < nc; c++) pre[c + 1] = pre[c] * g[c];
    suf[nc] = 1.0;
    for (size_t c = nc; c-- > 0;) suf[c] = suf[c + 1] * g[c];
    double U = w->u[i];
    flux[i] = U * pre[nc];
    if (!jac) continue;
    double *row = jac + i * ldj;
    for (size_t q = 0; q < nu; q++)
      for (int p = 0; p < 3; p++)
        row[3 * uidx[q] + (size_t)p] = w->ujac[i * 3 * nu + 3 * q + (size_t)p] * pre[nc];
    for (size_t c = 0; c < nc; c++) {
      size_t k = cidx[c];
      double excl = U * pre[c] * suf[c + 1];
      const double *jr = w->jk + c * 3 * n + i * 3;
      for (int p = 0; p < 3; p++) row[3 * k + (size_t)p] = excl * cf[k] * jr[p];
    }
    if (jac_cf) {
      double *rc = jac_cf + i * ncomp;
      for (size_t q = 0; q < nu; q++) rc[uidx[q]] = 0.0;
      for (size_t c = 0; c < nc; c++)
        rc[cidx[c]] = U * pre[c] * suf[c + 1] * (w->fk[c * n + i] - 1.0);
    }
  }
  return DT_OK;
}

double dt_cover_lsf_fwhm(double resolution, double fwhm_kms) {
  if (resolution > 0) return DT_C_KMS / resolution;
  return fwhm_kms > 0 ? fwhm_kms : 0.0;
}

int dt_cover_flag(const dt_doublet *d, const dt_component *c, double logN_err, double cf,
                  double err, double lsf_fwhm_kms) {
  if (!(isfinite(err) && err <= DT_CF_ERR_MAX && err <= DT_CF_REL_MAX * cf) || !isfinite(cf))
    return DT_CF_UNCONSTRAINED;
  if (logN_err > DT_CF_LOGN_ERR_MAX) return DT_CF_UNCONSTRAINED;
  /* Doppler FWHM = 2 sqrt(ln 2) b */
  if (c && lsf_fwhm_kms > 0 && !(2.0 * sqrt(log(2.0)) * c->b >= DT_CF_RESOLVED * lsf_fwhm_kms))
    return DT_CF_UNCONSTRAINED;
  if (d && c) {
    double t0 = dt_cog_tau0(&d->line[0], c->logN, c->b);
    double t1 = dt_cog_tau0(&d->line[1], c->logN, c->b);
    if (!(fmin(t0, t1) >= DT_CF_TAU_THIN)) return DT_CF_UNCONSTRAINED;
  }
  if (1.0 - cf > DT_CF_NSIGMA * err) return DT_CF_PARTIAL;
  return DT_CF_NONE;
}

const char *dt_cover_flag_name(int flag) {
  switch (flag) {
  case DT_CF_PARTIAL: return "partial";
  case DT_CF_UNCONSTRAINED: return "unconstrained";
  default: return "";
  }
}

double dt_cover_closed_form(double i1, double i2) {
  /* Hamann et al. 1997, eq. 3: with x = exp(-tau_2), 1 - I_2 = C (1 - x)
   * and I_1 - 2 I_2 + 1 = C (1 - x)^2. */
  double den = 1.0 - 2.0 * i2 + i1;
  if (!(den > 0.0)) return NAN;
  return (1.0 - i2) * (1.0 - i2) / den;
}
