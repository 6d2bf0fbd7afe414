/* The dchi2 threshold of a column's profile-likelihood interval calibrated
 * by a parametric bootstrap of the likelihood ratio (calib.h): spectra
 * simulated from the best fit, each fitted free and with log N_k held,
 * the quantile of the chi2 differences.  The random stream is seeded from
 * the data, so the same fit always gets the same threshold. */
#include "doubletty/calib.h"

#include <gsl/gsl_cdf.h>
#include <gsl/gsl_randist.h>
#include <gsl/gsl_rng.h>
#include <gsl/gsl_sort.h>
#include <gsl/gsl_statistics_double.h>
#include <math.h>
#include <stdint.h>
#include <stdlib.h>
#include <string.h>

#include "gsl_quiet.h"

struct dt_calib_workspace {
  size_t cap;        /* pixels */
  size_t maxsim;
  double *model;     /* the best fit's flux [cap] */
  double *sim;       /* one simulated spectrum [cap] */
  double *stat;      /* lambda_m, sorted after a run [maxsim] */
  size_t nstat;
  gsl_rng *rng;
};

dt_calib_workspace *dt_calib_alloc(size_t max_pix, size_t nsim) {
  if (max_pix == 0) return NULL;
  if (nsim == 0) nsim = DT_CALIB_NSIM;
  dt_gsl_quiet();
  dt_calib_workspace *w = calloc(1, sizeof *w);
  if (!w) return NULL;
  w->cap = max_pix;
  w->maxsim = nsim;
  w->model = malloc(max_pix * sizeof *w->model);
  w->sim = malloc(max_pix * sizeof *w->sim);
  w->stat = malloc(nsim * sizeof *w->stat);
  w->rng = gsl_rng_alloc(gsl_rng_mt19937);
  if (!w->model || !w->sim || !w->stat || !w->rng) {
    dt_calib_free(w);
    return NULL;
  }
  return w;
}

void dt_calib_free(dt_calib_workspace *w) {
  if (!w) return;
  free(w->model);
  free(w->sim);
  free(w->stat);
  if (w->rng) gsl_rng_free(w->rng);
  free(w);
}

const double *dt_calib_last_stats(const dt_calib_workspace *cw, size_t *n) {
  if (!cw || !cw->nstat) {
    if (n) *n = 0;
    return NULL;
  }
  if (n) *n = cw->nstat;
  return cw->stat;
}

/* FNV-1a, 64 bits (Fowler, Noll & Vo; common practice), over n bytes. */
static uint64_t fnv1a(uint64_t h, const void *data, size_t n) {
  const unsigned char *b = data;
  for (size_t i = 0; i < n; i++) {
    h ^= b[i];
    h *= 1099511628211ULL;
  }
  return h;
}

/* The stream's seed: the best fit's components, continuum coefficients,
 * chi2, the pixel count and the component -- what the data decide. */
static unsigned long seed_of(const dt_fit_result *r, size_t npix, size_t k) {
  uint64_t h = 14695981039346656037ULL;
  for (size_t q = 0; q < r->ncomp; q++) {
    double v[3] = {r->comp[q].logN, r->comp[q].b, r->comp[q].v};
    h = fnv1a(h, v, sizeof v);
  }
  if (r->ncont) h = fnv1a(h, r->cont_coef, r->ncont * sizeof r->cont_coef[0]);
  h = fnv1a(h, &r->chi2, sizeof r->chi2);
  uint64_t nk[2] = {(uint64_t)npix, (uint64_t)k};
  h = fnv1a(h, nk, sizeof nk);
  return (unsigned long)(h ^ (h >> 32));
}

static int used(const dt_fit_problem *p, size_t i) {
  return !(p->mask && p->mask[i]) && isfinite(p->flux[i]) && p->sigma[i] > 0 &&
         isfinite(p->sigma[i]);
}

/* One fit of the simulated spectrum from the best fit, with frozen set
 * fz: its chi2 (INFINITY when it failed). */
static double fit_sim(dt_fit_workspace *fw, dt_fit_problem *q, const unsigned char *fz) {
  q->frozen = fz;
  dt_fit_result fr;
  int st = dt_fit_run(fw, q, &fr, NULL);
  if ((st != DT_OK && st != DT_ENOCONV) || !isfinite(fr.chi2)) return INFINITY;
  return fr.chi2;
}

/* A simulated spectrum's free fit: the lower chi2 of the fits from the
 * world's components and from component k narrower (b FREE_NARROW times)
 * with a higher column (FREE_DLOGN dex) -- along the flat part of the
 * curve of growth (W ~ b sqrt(ln tau0) held: a narrower line needs much
 * more column; common practice), the other valley of a saturated line's
 * likelihood.  A fit from the world alone stays in its own valley,
 * understates the test statistic where the two compete, and with it the
 * threshold (the 1-sigma coverage at R 40000, b 2 km/s, log N 13, S/N 30
 * was 59%, 66% with this start: tests/unit/test_interval_mc.c).  A
 * broader start with a lower column changed nothing there. */
#define FREE_NARROW 0.6
#define FREE_DLOGN 0.8
static double free_fit(dt_fit_workspace *fw, dt_fit_problem *q, const unsigned char *fz,
                       const dt_fit_result *r, size_t k, dt_component *start) {
  q->comp = r->comp;
  double c = fit_sim(fw, q, fz);
  memcpy(start, r->comp, r->ncomp * sizeof start[0]);
  start[k].b = fmax(start[k].b * FREE_NARROW, 1.05 * DT_FIT_B_MIN);
  start[k].logN = fmin(start[k].logN + FREE_DLOGN, DT_FIT_LOGN_MAX - 0.1);
  q->comp = start;
  double c2 = fit_sim(fw, q, fz);
  q->comp = r->comp;
  return c2 < c ? c2 : c;
}

/* The world of the test of log N_k = x: the data's fit with log N_k held
 * at x, from the best fit r; 0 when it failed. */
static int world_at(dt_fit_workspace *fw, const dt_fit_problem *p, const dt_fit_result *r,
                    size_t k, double x, dt_fit_result *wr) {
  unsigned char fz[DT_MAX_COMP];
  memset(fz, 0, sizeof fz);
  if (p->frozen) memcpy(fz, p->frozen, p->ncomp);
  fz[k] |= DT_FREEZE_N;
  dt_component start[DT_MAX_COMP];
  memcpy(start, r->comp, r->ncomp * sizeof start[0]);
  start[k].logN = x;
  dt_fit_problem q = *p;
  q.frozen = fz;
  q.comp = start;
  q.cont_init = r->ncont ? r->cont_coef : NULL;
  if (r->covering) q.cf = r->cf;
  q.max_iter = 2 * DT_CALIB_MAX_ITER;
  q.time_limit = -1;
  q.single_run = 1;
  int st = dt_fit_run(fw, &q, wr, NULL);
  return (st == DT_OK || st == DT_ENOCONV) && isfinite(wr->chi2);
}

int dt_calib_logN(dt_calib_workspace *cw, dt_fit_workspace *fw, const dt_fit_problem *p,
                  const dt_fit_result *best, size_t k, double x, double dchi2, size_t nsim,
                  dt_calib_result *out) {
  const dt_fit_result *r = best;
  if (out) {
    memset(out, 0, sizeof *out);
    out->dchi2 = dchi2;
    out->dchi2_3 = 9.0 * dchi2;
    out->scale = 1.0;
  }
  if (!cw || !fw || !p || !r || !out || k >= r->ncomp || r->ncomp != p->ncomp ||
      !(dchi2 > 0) || !isfinite(dchi2) || !p->model || !p->flux || !p->sigma || isinf(x))
    return DT_EINVAL;
  if (p->frozen && (p->frozen[k] & DT_FREEZE_N)) return DT_EINVAL;
  size_t n = dt_model_npix(p->model);
  if (n > cw->cap) return DT_EINVAL;
  if (nsim == 0) nsim = DT_CALIB_NSIM;
  if (nsim > cw->maxsim) nsim = cw->maxsim;
  cw->nstat = 0;
  dt_fit_result wr;
  if (!isnan(x)) {
    out->nfits++;
    if (!world_at(fw, p, best, k, x, &wr)) return DT_ENOCONV;
    r = &wr;
  }

  /* the simulated world's truth: the best fit's flux on every pixel */
  dt_fit_problem q = *p;
  q.frozen = NULL;
  if (r->covering) q.cf = r->cf;
  double chi2;
  size_t npix;
  if (dt_fit_chi2(fw, &q, r->comp, r->ncont ? r->cont_coef : NULL, cw->model, &chi2, &npix) !=
      DT_OK)
    return DT_EINVAL;

  unsigned char free_fz[DT_MAX_COMP], held_fz[DT_MAX_COMP];
  memset(free_fz, 0, sizeof free_fz);
  if (p->frozen) memcpy(free_fz, p->frozen, p->ncomp);
  memcpy(held_fz, free_fz, sizeof held_fz);
  held_fz[k] |= DT_FREEZE_N;

  q.flux = cw->sim;
  q.comp = r->comp;                   /* log N_k at the best fit's: the truth */
  q.cont_init = r->ncont ? r->cont_coef : NULL;
  q.max_iter = DT_CALIB_MAX_ITER;
  q.time_limit = -1;                  /* no clock: the same answer under any load */
  q.single_run = 1;
  q.no_errors = 1;                    /* their chi2 is all that is used */
  gsl_rng_set(cw->rng, seed_of(r, npix, k));
  dt_component start[DT_MAX_COMP];
  for (size_t m = 0; m < nsim; m++) {
    /* F_i = model_i + sigma_i z_i, z_i ~ N(0, 1); unused pixels as they are */
    for (size_t i = 0; i < n; i++)
      cw->sim[i] = used(p, i) ? cw->model[i] + p->sigma[i] * gsl_ran_gaussian_ziggurat(cw->rng, 1.0)
                              : p->flux[i];
    double cf = free_fit(fw, &q, free_fz, r, k, start);
    double ch = fit_sim(fw, &q, held_fz);
    out->nfits += 3;
    if (!isfinite(ch)) continue;
    double lam = ch - fmin(cf, ch);   /* the held solution lies in the free fit's space */
    cw->stat[cw->nstat++] = lam > 0 ? lam : 0.0;
  }
  out->nsim = (int)cw->nstat;
  if (2 * cw->nstat < nsim) return DT_ENOCONV;

  /* the quantile at the level of dchi2 under chi2_1 (0.6827 for 1) */
  gsl_sort(cw->stat, 1, cw->nstat);
  double level = gsl_cdf_chisq_P(dchi2, 1.0);
  double t = gsl_stats_quantile_from_sorted_data(cw->stat, 1, cw->nstat, level);
  double c = t / dchi2;
  if (!(c >= DT_CALIB_SCALE_MIN)) c = DT_CALIB_SCALE_MIN;
  if (c > DT_CALIB_SCALE_MAX) c = DT_CALIB_SCALE_MAX;
  out->scale = c;
  out->dchi2 = c * dchi2;
  out->dchi2_3 = 9.0 * dchi2 * (c > 1.0 ? c : 1.0);
  return DT_OK;
}
