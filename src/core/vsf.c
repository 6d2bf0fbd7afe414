/* The velocity structure function (see vsf.h).
 *
 * The pairs that fall in a bin are listed once (which bin, the two
 * sightlines, the pair's value), so the sample and every bootstrap resample
 * are sums over that list weighted by how often each sightline was drawn:
 * a resample costs one pass over the pairs, no new separations. */
#include "doubletty/vsf.h"

#include <gsl/gsl_fit.h>
#include <gsl/gsl_rng.h>
#include <math.h>
#include <stdint.h>
#include <stdlib.h>

struct dt_vsf {
  size_t n, npair, nbin;
  uint32_t *pi, *pj;   /* the two sightlines of each pair */
  uint32_t *bin;       /* its bin */
  double *f;           /* |dv| or dv^2 - s_i^2 - s_j^2 */
  double *r;           /* separation [kpc] */
  double *edges;
};

#define DEG (M_PI / 180.0)

static double sep_kpc(const dt_vsf_point *a, const dt_vsf_point *b, double scale) {
  return dt_sphere_separation(a->ra_deg, a->dec_deg, b->ra_deg, b->dec_deg) / DEG * 3600.0 * scale;
}

void dt_vsf_range(const dt_vsf_point *p, size_t n, double scale, double *rmin, double *rmax) {
  *rmin = *rmax = NAN;
  for (size_t i = 0; i < n; i++)
    for (size_t j = i + 1; j < n; j++) {
      double r = sep_kpc(&p[i], &p[j], scale);
      if (!(r > 0)) continue;
      if (!(*rmin <= r)) *rmin = r;
      if (!(*rmax >= r)) *rmax = r;
    }
}

static long find_bin(const double *e, size_t ne, double r) {
  if (!(r >= e[0] && r <= e[ne - 1])) return -1;
  size_t lo = 0, hi = ne - 1; /* e[lo] <= r, bins [e_k, e_k+1), the last one closed */
  while (hi - lo > 1) {
    size_t mid = (lo + hi) / 2;
    if (r >= e[mid]) lo = mid;
    else hi = mid;
  }
  return (long)lo;
}

void dt_vsf_free(dt_vsf *w) {
  if (!w) return;
  free(w->pi);
  free(w->pj);
  free(w->bin);
  free(w->f);
  free(w->r);
  free(w->edges);
  free(w);
}

dt_vsf *dt_vsf_alloc(const dt_vsf_point *p, size_t n, int order, double scale, const double *edges, size_t nedge,
                     dt_err *e) {
  if ((order != 1 && order != 2) || !(scale > 0) || nedge < 2 || n > UINT32_MAX) {
    dt_err_set(e, DT_EINVAL, NULL, "bad structure function arguments");
    return NULL;
  }
  for (size_t k = 1; k < nedge; k++)
    if (!(edges[k] > edges[k - 1])) {
      dt_err_set(e, DT_EINVAL, NULL, "the bin edges must increase");
      return NULL;
    }
  dt_vsf *w = calloc(1, sizeof *w);
  if (!w) goto nomem;
  w->n = n;
  w->nbin = nedge - 1;
  if (!(w->edges = malloc(nedge * sizeof *w->edges))) goto nomem;
  for (size_t k = 0; k < nedge; k++) w->edges[k] = edges[k];
  /* first count, then fill */
  size_t cap = 0;
  for (int pass = 0; pass < 2; pass++) {
    size_t m = 0;
    for (size_t i = 0; i < n; i++)
      for (size_t j = i + 1; j < n; j++) {
        double r = sep_kpc(&p[i], &p[j], scale);
        long b = r > 0 ? find_bin(edges, nedge, r) : -1;
        if (b < 0) continue;
        if (pass) {
          double dv = p[i].v - p[j].v;
          w->pi[m] = (uint32_t)i;
          w->pj[m] = (uint32_t)j;
          w->bin[m] = (uint32_t)b;
          w->r[m] = r;
          w->f[m] = order == 1 ? fabs(dv) : dv * dv - p[i].sigma * p[i].sigma - p[j].sigma * p[j].sigma;
        }
        m++;
      }
    if (!pass) {
      cap = m ? m : 1;
      w->pi = malloc(cap * sizeof *w->pi);
      w->pj = malloc(cap * sizeof *w->pj);
      w->bin = malloc(cap * sizeof *w->bin);
      w->r = malloc(cap * sizeof *w->r);
      w->f = malloc(cap * sizeof *w->f);
      if (!w->pi || !w->pj || !w->bin || !w->r || !w->f) goto nomem;
    } else {
      w->npair = m;
    }
  }
  return w;
nomem:
  dt_vsf_free(w);
  dt_err_set(e, DT_ENOMEM, NULL, "out of memory for the pairs");
  return NULL;
}

/* The bins' values for sightline multiplicities m (NULL: each once) into
 * val[nbin] (NaN without pairs); sw, swr: work arrays of nbin. */
static void eval_weighted(const dt_vsf *w, const unsigned *m, double *val, double *sw, double *swr, long *np) {
  for (size_t b = 0; b < w->nbin; b++) sw[b] = swr[b] = val[b] = 0, np[b] = 0;
  for (size_t k = 0; k < w->npair; k++) {
    double wt = m ? (double)m[w->pi[k]] * (double)m[w->pj[k]] : 1.0;
    if (wt == 0) continue;
    uint32_t b = w->bin[k];
    sw[b] += wt;
    val[b] += wt * w->f[k];
    swr[b] += wt * w->r[k];
    np[b]++;
  }
  for (size_t b = 0; b < w->nbin; b++) {
    val[b] = sw[b] > 0 ? val[b] / sw[b] : NAN;
    swr[b] = sw[b] > 0 ? swr[b] / sw[b] : NAN;
  }
}

void dt_vsf_eval(const dt_vsf *w, dt_vsf_bin *out) {
  double *tmp = malloc(3 * w->nbin * sizeof *tmp);
  long *np = malloc(w->nbin * sizeof *np);
  for (size_t b = 0; b < w->nbin; b++) {
    out[b].r_lo = w->edges[b];
    out[b].r_hi = w->edges[b + 1];
    out[b].r_mean = out[b].vsf = out[b].err = NAN;
    out[b].npairs = 0;
  }
  if (!tmp || !np) {
    free(tmp);
    free(np);
    return;
  }
  eval_weighted(w, NULL, tmp, tmp + w->nbin, tmp + 2 * w->nbin, np);
  for (size_t b = 0; b < w->nbin; b++) {
    out[b].vsf = tmp[b];
    out[b].r_mean = tmp[2 * w->nbin + b];
    out[b].npairs = np[b];
  }
  free(tmp);
  free(np);
}

int dt_vsf_bootstrap(const dt_vsf *w, size_t nboot, unsigned long seed, dt_vsf_bin *out,
                     void (*progress)(void *, size_t, size_t), void *arg) {
  if (nboot < 2) return DT_EINVAL;
  size_t nb = w->nbin;
  unsigned *m = malloc((w->n ? w->n : 1) * sizeof *m);
  double *val = malloc(3 * nb * sizeof *val), *s1 = calloc(nb, sizeof *s1), *s2 = calloc(nb, sizeof *s2);
  long *np = malloc(nb * sizeof *np), *cnt = calloc(nb, sizeof *cnt);
  gsl_rng *rng = gsl_rng_alloc(gsl_rng_mt19937);
  int rc = DT_OK;
  if (!m || !val || !s1 || !s2 || !np || !cnt || !rng) {
    rc = DT_ENOMEM;
    goto out;
  }
  gsl_rng_set(rng, seed);
  for (size_t it = 0; it < nboot; it++) {
    for (size_t i = 0; i < w->n; i++) m[i] = 0;
    for (size_t i = 0; i < w->n; i++) m[gsl_rng_uniform_int(rng, w->n)]++;
    eval_weighted(w, m, val, val + nb, val + 2 * nb, np);
    /* running sums about the sample value keep the variance accurate */
    for (size_t b = 0; b < nb; b++)
      if (isfinite(val[b])) {
        double d = val[b] - out[b].vsf;
        s1[b] += d;
        s2[b] += d * d;
        cnt[b]++;
      }
    if (progress) progress(arg, it + 1, nboot);
  }
  for (size_t b = 0; b < nb; b++) {
    double k = (double)cnt[b];
    out[b].err = cnt[b] >= 2 && isfinite(out[b].vsf) ? sqrt(fmax(0, (s2[b] - s1[b] * s1[b] / k) / (k - 1))) : NAN;
  }
out:
  gsl_rng_free(rng);
  free(m);
  free(val);
  free(s1);
  free(s2);
  free(np);
  free(cnt);
  return rc;
}

int dt_vsf_fit(const dt_vsf_bin *b, size_t nbin, double rlo, double rhi, double *slope, double *slope_err,
               double *log_amp, size_t *nused) {
  double x[512], y[512], wt[512];
  size_t k = 0;
  *slope = *slope_err = *log_amp = NAN;
  for (size_t i = 0; i < nbin && k < 512; i++) {
    const dt_vsf_bin *q = &b[i];
    if (!(q->r_mean >= rlo && q->r_mean <= rhi) || !(q->vsf > 0) || !(q->err > 0) || !isfinite(q->err)) continue;
    double s = q->err / (q->vsf * M_LN10);
    x[k] = log10(q->r_mean);
    y[k] = log10(q->vsf);
    wt[k] = 1 / (s * s);
    k++;
  }
  *nused = k;
  if (k < 2) return DT_ERANGE;
  double c0, c1, c00, c01, c11, chisq;
  gsl_fit_wlinear(x, 1, wt, 1, y, 1, k, &c0, &c1, &c00, &c01, &c11, &chisq);
  *slope = c1;
  *slope_err = sqrt(c11);
  *log_amp = c0;
  return DT_OK;
}
