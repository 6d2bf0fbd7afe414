/* The line-spread function and the pixels: a Gaussian LSF of constant
 * velocity width sampled at whole cells, and the averaging of the convolved
 * cells over each pixel's extent in ln(lambda).  Both are linear, so they
 * are folded into one banded matrix built once in dt_model_alloc (row i =
 * weights of the cells that reach pixel i); dt_model_eval applies it to
 * 1 - exp(-tau) and to the derivatives, only where lines live.
 *
 * Pixels much finer than the LSF are read from coarser cells of
 * sigma / DT_MODEL_LSF_CELLS by integrating the piecewise-cubic interpolant
 * of the convolved cells over each pixel (pixel_weights), which keeps the
 * band a fixed number of cells wide however fine the pixels.  The kernel
 * moved by a fraction of a cell (its Hermite expansion, for narrow lines
 * within their cells, model_narrow.c) is tabulated here too. */
#include <math.h>
#include <stdlib.h>
#include <string.h>

#include "model_internal.h"

/* Pixels finer than the LSF (m->interp): the weights with which pixel
 * [ylo, yhi] (ln lambda) reads the convolved cells, the mean over the pixel
 * of the piecewise-cubic interpolant through the cell centres (node j at
 * u = (y - y0)/dy - 1/2 = j).  Between nodes J and J+1 (t = u - J in
 * [0, 1]) it is the Lagrange cubic through nodes J-1..J+2, basis
 *   l0 = -t(t-1)(t-2)/6, l1 = (t+1)(t-1)(t-2)/2,
 *   l2 = -(t+1)t(t-2)/2, l3 = (t+1)t(t-1)/6
 * (four-point Lagrange interpolation, Abramowitz & Stegun 1964, 25.2.13,
 * from memory), integrated exactly: lagrange_int gives the integrals from 0
 * to t.  Its error is below (9/16)/24 max|f''''| dy^4, for a profile
 * smoothed by a Gaussian of DT_MODEL_LSF_CELLS = 8 cells some 2e-5 of its
 * depth; piecewise-linear interpolation would err by up to
 * dy^2/8 max|f''|, 2e-3 of the depth.  The weights go to w[clo..chi] and
 * sum to 1. */
static void lagrange_int(double t, double out[4]) {
  double t2 = t * t, t3 = t2 * t, t4 = t2 * t2;
  out[0] = -(0.25 * t4 - t3 + t2) / 6.0;
  out[1] = (0.25 * t4 - 2.0 / 3.0 * t3 - 0.5 * t2 + 2.0 * t) / 2.0;
  out[2] = -(0.25 * t4 - t3 / 3.0 - t2) / 2.0;
  out[3] = (0.25 * t4 - 0.5 * t2) / 6.0;
}

static void pixel_weights(const dt_model *m, double ylo, double yhi, long clo, long chi,
                          double *w) {
  double ua = (ylo - m->y0) / m->dy - 0.5, ub = (yhi - m->y0) / m->dy - 0.5;
  long Ja = (long)floor(ua), Jb = (long)floor(ub);
  for (long J = Ja; J <= Jb; J++) {
    double ta = J == Ja ? ua - (double)J : 0.0, tb = J == Jb ? ub - (double)J : 1.0;
    if (!(tb > ta)) continue;
    double fa[4], fb[4];
    lagrange_int(ta, fa);
    lagrange_int(tb, fb);
    for (int k = 0; k < 4; k++) {
      long j = J - 1 + k;
      if (j >= clo && j <= chi) w[j] += (fb[k] - fa[k]) / (ub - ua);
    }
  }
}

/* The kernel g[0..2hw] (cell offsets -hw..hw): the Gaussian LSF of
 * sig_cells cells sampled at whole cells and normalised to sum 1; g0 is its
 * centre weight. */
void dt_model_lsf_kernel(dt_model *m, double *g, double sig_cells) {
  const int hw = m->hw;
  double gsum = 0;
  for (int k = -hw; k <= hw; k++) {
    double t = hw ? k / sig_cells : 0.0;
    g[k + hw] = exp(-0.5 * t * t);
    gsum += g[k + hw];
  }
  for (int k = 0; k <= 2 * hw; k++) g[k] /= gsum;
  m->g0 = g[hw];
}

/* Resolution per pixel: the kernel of sig_cells cells in g[0..2hw], cut
 * where the constant kernel of that width would be (ceil(NSIGMA sigma)
 * cells, zeros beyond up to hw) and normalised to sum 1; g0 its centre. */
static void kernel_cut(dt_model *m, double *g, double sig_cells) {
  const int hw = m->hw;
  double cut = ceil(DT_MODEL_LSF_NSIGMA * sig_cells), gsum = 0;
  for (int k = -hw; k <= hw; k++) {
    double t = k / sig_cells;
    g[k + hw] = fabs((double)k) <= cut ? exp(-0.5 * t * t) : 0.0;
    gsum += g[k + hw];
  }
  for (int k = 0; k <= 2 * hw; k++) g[k] /= gsum;
  m->g0 = g[hw];
}

/* Resolution per pixel: the moved kernels of the narrow-line corrections
 * (dt_model_moment_kernel) for every width, tabulated at widths a factor
 * 1 + KT_STEP apart from the narrowest; each cell takes the width of the
 * pixel holding its centre (the nearest pixel for cells beyond them) and
 * interpolates linearly between the two tabulated kernels around it.  The
 * number of terms is the narrowest kernel's (m->nmom); wider kernels need
 * fewer, their further rows are zero.  Nothing without widths per pixel or
 * without moments (an LSF below MOM_SMIN cells: pixel edges, g0pix). */
int dt_model_moment_table(dt_model *m) {
  const int nm_all = m->nmom, hw = m->hw;
  if (!m->sigpix || nm_all == 0) return DT_OK;
  const size_t kw = (size_t)(2 * hw + 1), nf = m->nf, n = m->n;
  double smin = INFINITY, smax = 0;
  for (size_t i = 0; i < n; i++) {
    smin = fmin(smin, m->sigpix[i]);
    smax = fmax(smax, m->sigpix[i]);
  }
  const double lstep = log1p(KT_STEP);
  int nkt = 1 + (int)ceil(log(smax / smin) / lstep - 1e-9);
  if (nkt < 1) nkt = 1;
  m->hkt = calloc((size_t)(nkt + 1) * (size_t)nm_all * kw, sizeof *m->hkt);
  m->kc = malloc(nf * sizeof *m->kc);
  m->tc = malloc(nf * sizeof *m->tc);
  if (!m->hkt || !m->kc || !m->tc) return DT_ENOMEM;
  m->nkt = nkt;
  for (int k = 0; k <= nkt; k++) { /* one more, never weighted, for k + 1 */
    double s = k == 0 ? smin : smin * exp(k * lstep);
    kernel_cut(m, m->gloc, s);
    dt_model_moment_kernel(m, m->gloc, s);
    for (int q = 0; q < m->nmom && q < nm_all; q++)
      memcpy(m->hkt + ((size_t)k * (size_t)nm_all + (size_t)q) * kw, m->hk + (size_t)q * kw,
             kw * sizeof *m->hkt);
  }
  m->nmom = nm_all;
  size_t i = 0;
  for (size_t c = 0; c < nf; c++) {
    double yc = m->y0 + ((double)c + 0.5) * m->dy;
    while (i + 1 < n && m->pedge[i + 1] <= yc) i++;
    double u = m->sigpix[i] > smin ? log(m->sigpix[i] / smin) / lstep : 0.0;
    int k = (int)floor(u);
    if (k >= nkt) k = nkt - 1;
    m->kc[c] = k;
    m->tc[c] = u - k;
  }
  return DT_OK;
}

/* Resolution per pixel: what sub_moments does through one kernel, here
 * with the kernel of each cell's width (dt_model_moment_table): the
 * moments of cells j0..j1 (m->mom, nv planes) convolved at the cells they
 * reach, then each pixel's share of them taken off out[i*ld + v]. */
void dt_model_moments_pix(dt_model *m, long j0, long j1, int nv, double *out, size_t ld) {
  const int hw = m->hw, nm = m->nmom;
  const size_t kw = (size_t)(2 * hw + 1), nf = m->nf, kstride = (size_t)nm * kw;
  long A = j0 - hw, B = j1 + hw;
  if (A < 0) A = 0;
  if (B > (long)nf - 1) B = (long)nf - 1;
  for (long c = A; c <= B; c++) {
    const double *h0 = m->hkt + (size_t)m->kc[c] * kstride, *h1 = h0 + kstride;
    const double t = m->tc[c];
    long ja = c - hw > j0 ? c - hw : j0, jb = c + hw < j1 ? c + hw : j1;
    for (int v = 0; v < nv; v++) {
      double s0 = 0, s1 = 0;
      for (long j = ja; j <= jb; j++) {
        const double *mv = m->mom + (size_t)(j - j0) * 3 * MOM_MAX + (size_t)v * MOM_MAX;
        const size_t k = (size_t)(c - j + hw);
        for (int q = 0; q < nm; q++) {
          s0 += mv[q] * h0[(size_t)q * kw + k];
          s1 += mv[q] * h1[(size_t)q * kw + k];
        }
      }
      m->scr[(size_t)v * nf + (size_t)c] = t > 0 ? (1.0 - t) * s0 + t * s1 : s0;
    }
  }
  for (size_t i = dt_model_first_reaching(m->pc1, m->n, A); i < m->n && m->pc0[i] <= B; i++) {
    long c0 = m->pc0[i] > A ? m->pc0[i] : A, c1 = m->pc1[i] < B ? m->pc1[i] : B;
    const double *pw = m->pw + m->pwoff[i] - m->pc0[i];
    for (int v = 0; v < nv; v++) {
      const double *sv = m->scr + (size_t)v * nf;
      double acc = 0;
      for (long c = c0; c <= c1; c++) acc += pw[c] * sv[c];
      out[i * ld + (size_t)v] -= acc;
    }
  }
}

/* The kernel moved by a fraction of a cell, for the moments of sub-sampled
 * cells (model_narrow.c), in m->hk and m->nmom. */
void dt_model_moment_kernel(dt_model *m, const double *g, double sig_cells) {
  const int hw = m->hw;
  /* Content moved by t cells reaches cell j + k with the weight
   *   g(k - t) = g(k) exp(x tau - tau^2/2) = g(k) sum_n He_n(x) tau^n / n!,
   * x = k/s, tau = t/s, s = sigma in cells (the generating function of the
   * probabilists' Hermite polynomials He_n(x) = 2^(-n/2) H_n(x/sqrt 2);
   * Abramowitz & Stegun 1964, ch. 22, eq. 22.9.17 from memory).  With
   * |t| <= 1/2 and |He_n(x)| exp(-x^2/4) <= 1.09 sqrt(n!) (Cramer's
   * inequality, A&S 22.14.17 from memory) the terms after n are below
   * (1/(2s))^(n+1)/sqrt((n+1)!); enough are kept
   * for 1e-8.  Each row is made to sum to zero, so that moving content
   * never changes its total (the equivalent width). */
  m->nmom = 0;
  if (hw > 0 && sig_cells >= MOM_SMIN) {
    int nm = 1;
    double lf = 0; /* ln (n+1)! */
    for (nm = 1; nm < MOM_MAX; nm++) {
      lf += log(nm + 1.0);
      if ((nm + 1) * log(0.5 / sig_cells) - 0.5 * lf <= log(1e-8)) break;
    }
    m->nmom = nm;
    for (int k = -hw; k <= hw; k++) {
      double x = k / sig_cells, he0 = 1.0, he1 = x, fac = 1.0 / sig_cells;
      for (int q = 1; q <= nm; q++) {
        m->hk[(size_t)(q - 1) * (size_t)(2 * hw + 1) + (size_t)(k + hw)] = g[k + hw] * he1 * fac;
        double he2 = x * he1 - q * he0; /* He_{q+1} = x He_q - q He_{q-1} */
        he0 = he1;
        he1 = he2;
        fac /= (q + 1) * sig_cells;
      }
    }
    for (int q = 0; q < nm; q++) {
      double *row = m->hk + (size_t)q * (size_t)(2 * hw + 1), sum = 0;
      for (int k = 0; k <= 2 * hw; k++) sum += row[k];
      for (int k = 0; k <= 2 * hw; k++) row[k] -= sum * g[k];
    }
  }
}

/* Pixel i's averaging weights over cells pc0[i]..pc1[i] (pw), and its row of
 * the banded operator (coef): the weights through the kernel.  Bands: pixel
 * i reads the cells it overlaps, or with interpolation the nodes its
 * interpolant uses; the kernel widens that by hw.  lo, hi: the pixel edges
 * in ln(lambda). */
int dt_model_pixel_operator(dt_model *m, const double *lo, const double *hi, const double *g) {
  const size_t n = m->n, nf = m->nf;
  const int hw = m->hw;
  const long *clo = m->pc0, *chi = m->pc1;
  size_t total = 0;
  for (size_t i = 0; i < n; i++) {
    long a = (long)floor((lo[i] - m->y0) / m->dy);
    long b = (long)ceil((hi[i] - m->y0) / m->dy) - 1;
    if (m->interp) {
      a = (long)floor((lo[i] - m->y0) / m->dy - 0.5) - 1;
      b = (long)floor((hi[i] - m->y0) / m->dy - 0.5) + 2;
    }
    if (a < hw) a = hw;
    if (b > (long)nf - 1 - hw) b = (long)nf - 1 - hw;
    if (b < a) b = a;
    m->pc0[i] = a;
    m->pc1[i] = b;
    m->m0[i] = a - hw;
    m->m1[i] = b + hw;
    m->off[i] = total;
    total += (size_t)(m->m1[i] - m->m0[i] + 1);
  }
  m->coef = calloc(total, sizeof *m->coef);
  size_t ptotal = 0;
  for (size_t i = 0; i < n; i++) {
    m->pwoff[i] = ptotal;
    ptotal += (size_t)(chi[i] - clo[i] + 1);
  }
  m->pw = calloc(ptotal, sizeof *m->pw);
  if (!m->coef || !m->pw) return DT_ENOMEM;
  m->ncoef = total;
  for (size_t i = 0; i < n; i++) {
    double *row = m->coef + m->off[i], *pwi = m->pw + m->pwoff[i] - clo[i];
    if (m->interp) {
      pixel_weights(m, lo[i], hi[i], clo[i], chi[i], pwi);
    } else {
      double wsum = 0;
      for (long j = clo[i]; j <= chi[i]; j++) {
        double cl = m->y0 + j * m->dy, ch = cl + m->dy;
        double ov = fmin(hi[i], ch) - fmax(lo[i], cl);
        if (ov > 0) wsum += ov;
      }
      for (long j = clo[i]; j <= chi[i]; j++) {
        double cl = m->y0 + j * m->dy, ch = cl + m->dy;
        double ov = fmin(hi[i], ch) - fmax(lo[i], cl);
        if (ov > 0) pwi[j] = ov / wsum;
      }
    }
    const double *gi = g;
    if (m->sigpix) { /* this pixel's own width */
      kernel_cut(m, m->gloc, m->sigpix[i]);
      gi = m->gloc;
      m->g0pix[i] = m->g0;
    }
    for (long j = clo[i]; j <= chi[i]; j++) {
      double p = pwi[j];
      if (p == 0) continue;
      /* convolved cell j = sum_k g[k] * cell(j - k) */
      for (int k = -hw; k <= hw; k++) row[j - k - m->m0[i]] += p * gi[k + hw];
    }
  }
  return DT_OK;
}

/* Through the LSF and onto the pixels: flux = 1 - B (1 - exp(-tau)), only
 * over the nu spans of cells where lines live (m->uni). */
void dt_model_apply_flux(const dt_model *m, int nu, double *flux) {
  const size_t n = m->n;
  for (size_t i = 0; i < n; i++) flux[i] = 1.0;
  for (int u = 0; u < nu; u++) {
    const long A = m->uni[u].lo, B = m->uni[u].hi;
    for (size_t i = dt_model_first_reaching(m->m1, n, A); i < n && m->m0[i] <= B; i++) {
      long j0 = m->m0[i] > A ? m->m0[i] : A, j1 = m->m1[i] < B ? m->m1[i] : B;
      const double *row = m->coef + m->off[i] + (j0 - m->m0[i]), *dp = m->dep + j0;
      const long len = j1 - j0 + 1;
      double a0 = 0, a1 = 0, a2 = 0, a3 = 0;
      long t = 0;
      for (; t + 3 < len; t += 4) {
        a0 += row[t] * dp[t];
        a1 += row[t + 1] * dp[t + 1];
        a2 += row[t + 2] * dp[t + 2];
        a3 += row[t + 3] * dp[t + 3];
      }
      for (; t < len; t++) a0 += row[t] * dp[t];
      flux[i] -= (a0 + a1) + (a2 + a3);
    }
  }
}

/* The Jacobian: d flux / dp = B (-exp(-tau) dtau/dp), only where component k
 * lives (q after dt_model_fold). */
void dt_model_apply_jac(const dt_model *m, size_t ncomp, double *jac, size_t ldj) {
  const size_t n = m->n, nf = m->nf;
  for (size_t i = 0; i < n; i++) memset(jac + i * ldj, 0, 3 * ncomp * sizeof(double));
  for (size_t k = 0; k < ncomp; k++) {
    const double *qk = m->q + k * nf * 3;
    for (int u = 0; u < m->ncspan[k]; u++) {
      const long A = m->cspan[k][u].lo, B = m->cspan[k][u].hi;
      for (size_t i = dt_model_first_reaching(m->m1, n, A); i < n && m->m0[i] <= B; i++) {
        long j0 = m->m0[i] > A ? m->m0[i] : A, j1 = m->m1[i] < B ? m->m1[i] : B;
        const double *row = m->coef + m->off[i] + (j0 - m->m0[i]);
        const double *qp = qk + 3 * j0;
        const long len = j1 - j0 + 1;
        double s0 = 0, s1 = 0, s2 = 0, r0 = 0, r1 = 0, r2 = 0;
        long t = 0;
        for (; t + 1 < len; t += 2) {
          double w0 = row[t], w1 = row[t + 1];
          s0 += w0 * qp[3 * t];
          s1 += w0 * qp[3 * t + 1];
          s2 += w0 * qp[3 * t + 2];
          r0 += w1 * qp[3 * t + 3];
          r1 += w1 * qp[3 * t + 4];
          r2 += w1 * qp[3 * t + 5];
        }
        if (t < len) {
          double w0 = row[t];
          s0 += w0 * qp[3 * t];
          s1 += w0 * qp[3 * t + 1];
          s2 += w0 * qp[3 * t + 2];
        }
        double *ji = jac + i * ldj + 3 * k;
        ji[0] -= s0 + r0;
        ji[1] -= s1 + r1;
        ji[2] -= s2 + r2;
      }
    }
  }
}
