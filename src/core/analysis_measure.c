/* The analysis's measurements (analysis.h): each line's view with the
 * other line divided out and masked pixels filled from the fitted model,
 * equivalent widths and apparent columns over the measurement window,
 * limits over the range through the curve of growth, and the optical depth
 * the fitted components leave at the continuum regions. */
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "analysis_priv.h"
#include "doubletty/cog.h"
#include "doubletty/continuum.h"
#include "doubletty/legendre.h"
#include "doubletty/lsf.h"

#define BLEND_T 0.5       /* the other line transmits less: the pixel is taken
                             from the line's own model */

#define BLEND_DEPTH 0.01  /* the other line's model is this deep: divided out */

/* The measurement input over the selection: the spectrum's pixels against
 * the continuum of the last run. */
void dt_an_measure_input(const dt_analysis *a, dt_measure_input *in) {
  const dt_spectrum *s = a->s;
  in->n = a->n;
  in->wave = s->wave + a->i0;
  in->flux = s->flux + a->i0;
  in->sigma = s->sigma + a->i0;
  in->mask = s->mask + a->i0;
  in->cont = a->cont;
  in->cont_err = a->cont_err;
  in->vsys = a->vsys;
}

void dt_an_measure_opts(const dt_analysis *a, dt_measure_opts *mo) {
  dt_measure_opts_init(mo);
  if (a->opts.limit_nsigma > 0) mo->limit_nsigma = a->opts.limit_nsigma;
}

/* Whether the single-line models matter for measurements over [lo, hi]
 * (each line's frame): a pixel to fill (masked or unusable) there, or a
 * component whose image in the other line's frame (v shifted by the
 * lines' separation) comes within reach of it -- 3 FWHM + 5 b, and
 * everywhere for columns with damping wings (log N > 17). */
static int models_needed(const dt_analysis *a, double lo, double hi) {
  const dt_spectrum *s = a->s;
  for (size_t i = 0; i < a->n; i++) {
    size_t p = a->i0 + i;
    int bad = s->mask[p] || !isfinite(s->flux[p]) || !(s->sigma[p] > 0) || !isfinite(s->sigma[p]);
    if (!bad) continue;
    for (int l = 0; l < 2; l++)
      if (a->vel[l][i] >= lo && a->vel[l][i] <= hi) return 1;
  }
  const dt_doublet *d = a->d;
  for (size_t k = 0; k < a->ncomp; k++) {
    const dt_component *c = &a->comp[k];
    if (c->logN > 17.0) return 1;
    double reach = 3.0 * a->fwhm_kms + 5.0 * c->b;
    for (int l = 0; l < 2; l++) {
      /* component k's line 1-l seen from line l */
      double w = dt_wavelength(c->v, d->line[1 - l].lambda0, a->vsys);
      double v = dt_velocity(w, d->line[l].lambda0, a->vsys);
      if (v + reach >= lo && v - reach <= hi) return 1;
    }
  }
  return 0;
}

/* The transmission of each line alone under the last run's components
 * (a->ltr[l], normalised, through the LSF): models of the doublet with the
 * other line's f scaled to nothing, built when first needed and kept with
 * the main model.  1 everywhere without components. */
static int single_line_models(dt_analysis *a, double lo, double hi) {
  /* valid: the models' values (any range), or ones for a range within */
  if (a->have_ltr && (a->ltr_exact || (lo >= a->ltr_lo && hi <= a->ltr_hi))) return DT_OK;
  const size_t n = a->n;
  a->have_ltr = 0;
  a->ltr_exact = 0;
  a->ltr_lo = lo;
  a->ltr_hi = hi;
  if (a->ncomp == 0 || !models_needed(a, lo, hi)) {
    for (int l = 0; l < 2; l++)
      for (size_t i = 0; i < n; i++) a->ltr[l][i] = 1.0;
    a->have_ltr = 1;
    return DT_OK;
  }
  if (!a->have_sm || memcmp(&a->smkey, &a->mkey, sizeof a->mkey) != 0 || a->ncomp > a->sm_cap) {
    for (int l = 0; l < 2; l++) {
      dt_model_free(a->sm[l]);
      a->sm[l] = NULL;
    }
    a->have_sm = 0;
    for (int l = 0; l < 2; l++) {
      a->sd[l] = *a->d;
      a->sd[l].line[1 - l].f *= 1e-30;
      dt_model_config cfg;
      memset(&cfg, 0, sizeof cfg);
      cfg.doublet = &a->sd[l];
      cfg.vsys = a->mkey.vsys;
      cfg.resolution = a->mkey.resolution;
      cfg.fwhm_kms = a->mkey.fwhm;
      cfg.lsf_fwhm_kms = a->mkey.lsf;
      cfg.oversample = a->opts.oversample;
      cfg.tau_cut = a->opts.tau_cut;
      for (int h = 0; h < 2; h++) cfg.hfs[h] = dt_hyperfine_find(a->mkey.hfs, &a->sd[l], h);
      /* sized for the components at hand: a model's buffers grow with
       * its capacity, and most spectra have one or two */
      a->sm[l] = dt_model_alloc(a->s->wave + a->i0, n, &cfg, a->ncomp, NULL);
      if (!a->sm[l]) return DT_ENOMEM;
    }
    a->smkey = a->mkey;
    a->sm_cap = a->ncomp;
    a->have_sm = 1;
  }
  for (int l = 0; l < 2; l++) {
    /* covered components one by one through the same model (cover.h) */
    int st = a->covering && a->cvw
                 ? dt_cover_eval(a->cvw, NULL, a->sm[l], a->comp, a->cf, NULL, a->ncomp,
                                 a->ltr[l], NULL, 0, NULL)
                 : dt_model_eval(a->sm[l], a->comp, a->ncomp, a->ltr[l], NULL, 0);
    if (st != DT_OK) return DT_EINVAL;
  }
  a->have_ltr = 1;
  a->ltr_exact = 1;
  return DT_OK;
}

/* log10 N of the limit on the curve of growth at the assumed b, cached:
 * the runs of a first pass measure the same limit again and again. */
static double limit_logN(dt_analysis *a, int l, double W) {
  if (!(W > 0)) return NAN;
  double b = a->opts.limit_b > 0 ? a->opts.limit_b : DT_ANALYSIS_LIMIT_B;
  const dt_line *ln = &a->d->line[l];
  if (a->cog_cache[l].line == ln && a->cog_cache[l].W == W && a->cog_cache[l].b == b)
    return a->cog_cache[l].logN;
  double r = dt_cog_cache_logN(a->opts.cog, ln, W, b);
  a->cog_cache[l].line = ln;
  a->cog_cache[l].W = W;
  a->cog_cache[l].b = b;
  a->cog_cache[l].logN = r;
  return r;
}

/* Line l as the measurement sees it: the other line's fitted absorption
 * divided out -- flux and sigma times T_l / T, T the whole model's
 * transmission (model / continuum); without an LSF that is 1 / T_other,
 * and with one it returns exactly the line's own model where the data
 * follow the model -- and taken from the line's own model
 * (continuum * T_l) where the data cannot say: masked or unusable pixels,
 * and pixels where the other line's model transmits less than BLEND_T.
 * Counts over the pixels whose centres lie in [v1, v2]. */
static void line_view(dt_analysis *a, int l, double v1, double v2, dt_analysis_line *L) {
  const dt_spectrum *s = a->s;
  const size_t n = a->n, i0 = a->i0;
  const double *To = a->ltr[1 - l], *Tl = a->ltr[l];
  double *F = a->lflux[l], *S = a->lsig[l];
  /* the noise of a filled pixel: the mean sigma of the usable ones near */
  double ssum = 0;
  size_t sn = 0;
  for (size_t i = 0; i < n; i++)
    if (a->used[i] || (!s->mask[i0 + i] && s->sigma[i0 + i] > 0 && isfinite(s->sigma[i0 + i]))) {
      ssum += s->sigma[i0 + i];
      sn++;
    }
  double sfill = sn ? ssum / (double)sn : 1.0;
  size_t nwin = 0, nmask = 0, nblend = 0, ndiv = 0;
  for (size_t i = 0; i < n; i++) {
    double f = s->flux[i0 + i], sg = s->sigma[i0 + i], C = a->cont[i];
    int bad = s->mask[i0 + i] || !isfinite(f) || !(sg > 0) || !isfinite(sg);
    double v = a->vel[l][i];
    int in = v >= v1 && v <= v2;
    nwin += (size_t)in;
    if (bad) {
      F[i] = C * Tl[i];
      S[i] = isfinite(sg) && sg > 0 ? sg : sfill;
      nmask += (size_t)in;
    } else if (To[i] < BLEND_T) {
      F[i] = C * Tl[i];
      S[i] = sg;
      nblend += (size_t)in;
    } else if (To[i] < 1.0) {
      /* T_l / T, except where the pixel is nearly black (both ratios of
       * tiny numbers): there 1 / T_other */
      double T = a->model[i] / C, q = T > 0.05 ? Tl[i] / T : 1.0 / To[i];
      if (!(q > 0 && q <= 1.0 / BLEND_T * 1.5)) q = 1.0 / To[i];
      F[i] = f * q;
      S[i] = sg * q;
      if (in && To[i] < 1.0 - BLEND_DEPTH) ndiv++;
    } else {
      F[i] = f;
      S[i] = sg;
    }
  }
  L->masked_frac = nwin ? (double)nmask / (double)nwin : 0.0;
  L->blend_frac = nwin ? (double)nblend / (double)nwin : 0.0;
  L->blend = nblend ? DT_BLEND_MODEL : ndiv ? DT_BLEND_DIVIDED : DT_BLEND_NONE;
}

/* Both lines over [v1, v2] (each in its own frame), their limits over
 * [l1, l2], against the continuum and model of the last run: the
 * measurement of dt_analysis_run and dt_analysis_measure_range alike.  Each line is measured on its view
 * (line_view): the other line of the doublet removed by the fitted model,
 * masked pixels filled from it.  L[l] NaN when it fails. */
int dt_an_measure_lines(dt_analysis *a, double v1, double v2, double l1, double l2, int full,
                        dt_analysis_line L[2], int *saturated, dt_err *e) {
  const dt_doublet *d = a->d;
  dt_measure_opts mo;
  dt_an_measure_opts(a, &mo);
  int st = single_line_models(a, fmin(v1, full ? l1 : v1), fmax(v2, full ? l2 : v2));
  if (st != DT_OK) {
    *saturated = 0;
    for (int l = 0; l < 2; l++) {
      memset(&L[l], 0, sizeof L[l]);
      L[l].line = &d->line[l];
      L[l].W = L[l].W_err = L[l].W_sig = L[l].logN_aod = L[l].logN_aod_err = NAN;
      L[l].W_limit = L[l].logN_limit = L[l].v_limit = NAN;
    }
    return dt_err_set(e, st, "measure", "the single-line models cannot be evaluated");
  }
  double fw = a->fwhm_kms, bl = DT_ANALYSIS_LIMIT_BOX_B;
  double pix = fabs(a->vel[0][a->n - 1] - a->vel[0][0]) / (double)(a->n - 1);
  /* the box of the limit: +- the FWHM of a line of b = LIMIT_BOX_B seen
   * through the LSF (Gaussian widths in quadrature; 2 sqrt(ln 2) b is the
   * FWHM of the Doppler profile; +- FWHM holds 98% of a Gaussian's area),
   * at least 1.5 pixels */
  double hw = fmax(sqrt(fw * fw + 4.0 * log(2.0) * bl * bl), 1.5 * pix);
  dt_line_measure m[2];
  int status = DT_OK;
  for (int l = 0; l < 2; l++) {
    dt_analysis_line *o = &L[l];
    memset(o, 0, sizeof *o);
    o->line = &d->line[l];
    line_view(a, l, v1, v2, o);
    dt_measure_input in;
    dt_an_measure_input(a, &in);
    in.flux = a->lflux[l];
    in.sigma = a->lsig[l];
    in.mask = NULL;
    int sl = dt_measure_line(&in, &d->line[l], v1, v2, &mo, &m[l], NULL, NULL,
                             status == DT_OK ? e : NULL);
    if (sl == DT_OK) {
      o->W = m[l].W;
      o->W_err = m[l].W_err;
      o->W_sig = m[l].signif;
      o->logN_aod = m[l].logNa;
      o->logN_aod_err = m[l].logNa_err;
      o->nsat = m[l].nfloor;
      o->npix = m[l].npix;
      double wl, vat;
      if (!full) {
        o->W_limit = o->v_limit = o->logN_limit = NAN;
      } else if (dt_measure_limit(&in, &d->line[l], l1, l2, hw, mo.limit_nsigma, &wl, &vat, NULL) ==
          DT_OK) {
        o->W_limit = wl;
        o->v_limit = vat;
        o->logN_limit = limit_logN(a, l, wl);
      } else {
        o->W_limit = o->v_limit = o->logN_limit = NAN;
      }
    } else {
      if (status == DT_OK) status = sl;
      o->W = o->W_err = o->W_sig = o->logN_aod = o->logN_aod_err = NAN;
      o->W_limit = o->logN_limit = o->v_limit = NAN;
    }
  }
  *saturated = status == DT_OK ? dt_measure_saturated(&m[0], &m[1], d, &mo) : 0;
  return status;
}

int dt_analysis_measure_range(dt_analysis *a, double vlo, double vhi, dt_analysis_line out[2],
                              dt_err *e) {
  dt_err_clear(e);
  if (!a || !out) return dt_err_set(e, DT_EINVAL, "measure", "missing argument");
  if (!a->have_run)
    return dt_err_set(e, DT_EINVAL, "measure", "no analysis run to measure against");
  if (!(isfinite(vlo) && isfinite(vhi) && vlo < vhi))
    return dt_err_set(e, DT_EINVAL, "measure", "empty velocity range [%g, %g] km/s", vlo, vhi);
  int sat;
  return dt_an_measure_lines(a, vlo, vhi, vlo, vhi, 1, out, &sat, e);
}

/* The components' optical depth (both lines, no LSF) at wavelength lam. */
static double tau_at(const dt_analysis *a, const dt_doublet *d, const dt_component *comp,
                     size_t ncomp, double vsys, double lam) {
  double t = 0;
  for (size_t k = 0; k < ncomp; k++)
    for (int l = 0; l < 2; l++) t += dt_line_tau(&d->line[l], &comp[k], vsys, lam);
  (void)a;
  return t;
}

/* The largest optical depth of the components at the inner edges of the
 * continuum regions (where damping wings are deepest there): the automatic
 * continuum's regions begin where the lines' windows end; user windows at
 * both their ends. */
void dt_an_continuum_tau(const dt_analysis *a, const dt_judgement *j, const dt_doublet *d,
                         const dt_component *comp, size_t ncomp, dt_analysis_out *out) {
  out->cont_tau = 0;
  out->cont_tau_at = NAN;
  if (ncomp == 0 || j->cont_order < 0) return;
  double edge[2 * DT_MAX_WINDOWS];
  size_t ne = 0;
  if (j->nwin == 0) {
    double lo = INFINITY, hi = -INFINITY;
    for (int l = 0; l < 2; l++) {
      lo = fmin(lo, dt_wavelength(j->vlo, d->line[l].lambda0, j->vsys));
      hi = fmax(hi, dt_wavelength(j->vhi, d->line[l].lambda0, j->vsys));
    }
    edge[ne++] = lo;
    edge[ne++] = hi;
  } else {
    for (size_t k = 0; k < j->nwin && k < DT_MAX_WINDOWS; k++) {
      edge[ne++] = j->win[k].lo;
      edge[ne++] = j->win[k].hi;
    }
  }
  for (size_t e = 0; e < ne; e++) {
    double t = tau_at(a, d, comp, ncomp, j->vsys, edge[e]);
    if (t > out->cont_tau) {
      out->cont_tau = t;
      out->cont_tau_at = edge[e];
    }
  }
}

int dt_analysis_warning(const dt_analysis_out *o, char *buf, size_t n) {
  size_t len = 0;
  if (n) buf[0] = '\0';
  if (o->cont_tau > DT_ANALYSIS_CONT_TAU && len < n)
    len += (size_t)snprintf(buf + len, n - len,
                            "damping wings reach the continuum (tau %.2g at %.1f A): widen "
                            "the window", o->cont_tau, o->cont_tau_at);
  for (int l = 0; l < 2 && len < n; l++)
    if (o->line[l].blend == DT_BLEND_MODEL && o->line[l].line)
      len += (size_t)snprintf(buf + len, n - len, "%s%s blended: %.0f%% of its window from "
                              "the model", len ? "; " : "", o->line[l].line->label,
                              100 * o->line[l].blend_frac);
  return len > 0;
}
