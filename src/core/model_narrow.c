/* Lines narrower than the sub-pixel cells (model.h, "Lines narrower than
 * the cells").  Such a line is represented, in every cell where it varies
 * faster than the cell resolves, by the mean of exp(-tau) over r equal
 * sub-cells (sub_setup decides which lines are narrow and how finely they
 * must be sampled; sub_build lays out the sub-points of one evaluation).
 * A cell mean alone would put the line at the cell's centre, so its place
 * within the cell reaches the pixels too: through the LSF kernel moved by
 * the sub-cells' offsets (sub_moments), or, without an LSF, by splitting
 * cells at pixel edges (sub_edges).  fold turns the per-sub-point
 * derivatives into cell values for the Jacobian. */
#include <math.h>
#include <stdlib.h>
#include <string.h>

#include "model_internal.h"

/* Sub-points one narrow line can ask for on cells of dyv km/s when
 * b >= DT_MODEL_B_RESOLVED (bounds of the rules of sub_setup, sub_build):
 *  - core: at most 3 + 2 wc/dy cells of at most dy/dc + 1 sub-cells, with
 *    dc = h b < dy, i.e. 3 (dy/dc + 1) + 4 X/h, X/h largest at ln t0 max;
 *  - each wing: the n-th cell beyond at most SUB_KAPPA/n + 1, over at most
 *    SUB_KAPPA + 1 cells. */
double dt_model_sub_points_per_line(double dyv) {
  double hmin = SUB_H_SAT / sqrt(SUB_LNT_MAX), xg = sqrt(SUB_LNT_MAX + SUB_GAUSS_LN);
  double rcore = dyv / (hmin * DT_MODEL_B_RESOLVED) + 1.0;
  double core = 4.0 * xg / hmin + 3.0 * rcore;
  double wing = SUB_KAPPA * (log(SUB_KAPPA + 1.0) + 1.0) + SUB_KAPPA + 1.0;
  return core + 2.0 * wing;
}


/* Decide whether line s (t0, a, b set) is narrow on this grid and, if so,
 * how finely it must be sampled (all in ln lambda, c dy = cell in km/s).
 *
 * Core.  Over a whole line, the midpoint rule with step h (in Doppler
 * widths) integrates 1 - exp(-t0 H(a,x)) with an error set by the profile's
 * Fourier transform at 2 pi/h, which falls exponentially as h shrinks but
 * more slowly the sharper the edges of a saturated line (of width about
 * 1/(2 sqrt(ln t0))).  With h = min(0.7, 0.9/sqrt(ln t0)) the error of the
 * equivalent width stays below 3e-4 of it for t0 = 1e-3..1e8, a = 0..0.1
 * (worst over the position of the line on the grid; found by direct
 * computation, and checked in tests/unit/test_model.c against adaptive
 * integration).  A line whose cells are finer than that (dy <= h b/c) is
 * sampled as before; otherwise it is narrow, and the cells meeting its core
 * |x| <= X, X^2 = ln max(t0, 1) + ln 1e4 (beyond, the Gaussian part is
 * below 1e-4, absolutely and relative to t0), get sub-cells of h b.  All
 * core cells share that step, so the sub-cells form one uniform lattice
 * across the core and the whole-line accuracy above holds.
 *
 * Wings.  Beyond X the profile is the damping wing tau = A/V^2 at velocity
 * V from the centre, A = t0 a b^2/sqrt(pi).  For f = 1 - exp(-tau),
 * |f''| = exp(-tau) tau |6 - 4 tau| / V^2 <= min(6 tau, 1.21)/V^2, and the
 * midpoint rule on sub-cells of width w errs by at most w^2/24 max|f''|
 * (e.g. Press et al., Numerical Recipes, 3rd ed., sec. 4.1).  So a cell at
 * nearest distance V needs w <= max(V sqrt(24 e/1.21), V^2 sqrt(4 e/A)) for
 * an error e in its mean, or at least dc; e = SUB_EPS_W min(t0, 1), i.e.
 * relative to the depth of weak lines.  Cells are sub-sampled out to where
 * w reaches the cell width. */
void dt_model_sub_setup(const dt_model *m, line_setup *s, double b) {
  s->narrow = 0;
  s->sr.lo = 0;
  s->sr.hi = -1;
  if (!(s->t0 > m->tau_cut)) return;
  double lt = s->t0 > 1.0 ? fmin(log(s->t0), SUB_LNT_MAX) : 0.0;
  double h = lt > 0 ? fmin(SUB_H_THIN, SUB_H_SAT / sqrt(lt)) : SUB_H_THIN;
  double byc = b / DT_C_KMS; /* b in ln lambda */
  s->dc = h * byc;
  if (!(s->dc < m->dy)) return;
  s->narrow = 1;
  s->yc = log(s->lc);
  s->wc = sqrt(lt + SUB_GAUSS_LN) * byc;
  double A = s->t0 * s->a * b * b / SQRT_PI; /* [km^2/s^2] */
  /* w = c2v V^2 in km/s becomes c2 d^2 with d = V/c, c2 = c2v c */
  double eps = SUB_EPS_W * fmin(s->t0, 1.0); /* of the line's depth, for weak lines */
  s->c2 = A > 0 ? sqrt(4.0 * eps / A) * DT_C_KMS : INFINITY;
  double reach = fmax(s->wc, fmin(SUB_KAPPA * m->dy, sqrt(m->dy / s->c2)));
  /* Distances are counted in whole cells from the cell holding the centre
   * (sub_build), so that the sub-cells change with v only when the centre
   * moves to another cell.  Cell jc + n is sub-sampled while (|n| - 1) dy,
   * the least its distance from the centre can be, is below reach. */
  double jcd = floor((s->yc - m->y0) / m->dy), nr = ceil(reach / m->dy);
  if (!(fabs(jcd) < 4e18)) return; /* not finite, or absurdly far */
  s->jc = (long)jcd;
  double jl = jcd - nr, jh = jcd + nr;
  double top = (double)m->nf - 1;
  if (jl < 0) jl = 0;
  if (jh > top) jh = top;
  if (!(jl <= jh)) return; /* (the caller clips to the line's range) */
  s->sr.lo = (long)jl;
  s->sr.hi = (long)jh;
}

/* Sub-cell width narrow line s needs at distance d (ln lambda) from its
 * centre (sub_setup). */
static double sub_width(const line_setup *s, double d) {
  if (d <= s->wc) return s->dc;
  double w = fmax(d / SUB_KAPPA, s->c2 * d * d);
  return w > s->dc ? w : s->dc;
}

/* The sub-sampled cells of this evaluation, their numbers of sub-cells and
 * the sub-cell centres.  r of a cell is the most any narrow line asks for
 * there; if all together exceed the buffer (possible only with many narrow
 * lines of b < DT_MODEL_B_RESOLVED or with cells over ~14 km/s) every r is
 * reduced in the same proportion. */
void dt_model_sub_build(dt_model *m, int nl) {
  line_setup *ls = m->ls;
  int nn = 0;
  for (int l = 0; l < nl; l++)
    if (ls[l].narrow && ls[l].sr.lo <= ls[l].sr.hi) m->sub[nn++] = ls[l].sr;
  m->nsub = dt_model_merge_spans(m->sub, nn);
  m->np = 0;
  for (int l = 0; l < nl; l++) ls[l].nsp = 0;
  if (m->nsub == 0) return;
  const double dy = m->dy;
  double total = 0;
  size_t ncell = 0, base = 0;
  for (int u = 0; u < m->nsub; u++) {
    m->sbase[u] = base;
    size_t *rr = m->sfirst + base; /* holds r for now */
    for (long j = m->sub[u].lo; j <= m->sub[u].hi; j++) {
      double r = 1.0;
      for (int l = 0; l < nl; l++) {
        const line_setup *s = &ls[l];
        if (!s->narrow || j < s->sr.lo || j > s->sr.hi) continue;
        long na = labs(j - s->jc);
        double d = na > 1 ? (double)(na - 1) * dy : 0.0;
        double rl = ceil(dy / sub_width(s, d));
        if (rl > r) r = rl;
      }
      if (r > (double)m->pmax) r = (double)m->pmax;
      rr[j - m->sub[u].lo] = (size_t)r;
      total += r;
      ncell++;
    }
    base += (size_t)(m->sub[u].hi - m->sub[u].lo + 2);
  }
  /* ncell <= pmax: each line sub-samples at most 3 + 2 X/h + 2 (SUB_KAPPA + 1)
   * cells, well below what sub_points_per_line reserves. */
  double scale = total > (double)m->pmax ? ((double)m->pmax - ncell) / (total - ncell) : 1.0;
  size_t p = 0;
  for (int u = 0; u < m->nsub; u++) {
    size_t *rr = m->sfirst + m->sbase[u];
    long len = m->sub[u].hi - m->sub[u].lo + 1;
    for (long t = 0; t < len; t++) {
      size_t r = rr[t];
      if (scale < 1.0) r = 1 + (size_t)floor((double)(r - 1) * scale);
      rr[t] = p;
      double lo = m->y0 + (m->sub[u].lo + t) * dy, w = dy / (double)r;
      for (size_t i = 0; i < r; i++) m->sinv[p++] = exp(-(lo + (i + 0.5) * w));
    }
    rr[len] = p;
  }
  m->np = p;
  for (int l = 0; l < nl; l++) {
    const span r = ls[l].r;
    for (int u = 0; u < m->nsub; u++) {
      long a = r.lo > m->sub[u].lo ? r.lo : m->sub[u].lo;
      long b = r.hi < m->sub[u].hi ? r.hi : m->sub[u].hi;
      if (a <= b) ls[l].nsp += *sub_first(m, u, b + 1) - *sub_first(m, u, a);
    }
  }
}

/* The sub-sampled cells: exp(-tau) at their sub-points, and the means over
 * the sub-points as the cells' values. */
void dt_model_sub_means(dt_model *m) {
  for (int u = 0; u < m->nsub; u++)
    for (long j = m->sub[u].lo; j <= m->sub[u].hi; j++) {
      size_t p0 = *sub_first(m, u, j), p1 = *sub_first(m, u, j + 1);
      double sd = 0, se = 0, w = 1.0 / (double)(p1 - p0);
      for (size_t p = p0; p < p1; p++) {
        double t = m->stau[p], ee, dd;
        if (t < 0.5) {
          dd = -expm1(-t);
          ee = 1.0 - dd;
        } else {
          ee = exp(-t);
          dd = 1.0 - ee;
        }
        m->sex[p] = ee;
        sd += dd;
        se += ee;
      }
      m->dep[j] = sd * w;
      m->ex[j] = se * w;
    }
}

/* For the Jacobian, turn q (d tau_k/dp per cell) into the cell values of
 * exp(-tau) d tau_k/dp: times exp(-tau) at ordinary cells, the mean over
 * the sub-points at sub-sampled ones. */
void dt_model_fold(dt_model *m, size_t ncomp) {
  const size_t nf = m->nf;
  for (size_t k = 0; k < ncomp; k++) {
    double *qk = m->q + k * nf * 3;
    const double *sqk = m->sq + k * m->pmax * 3;
    for (int c = 0; c < m->ncspan[k]; c++) {
      long j = m->cspan[k][c].lo;
      const long B = m->cspan[k][c].hi;
      int u = 0;
      while (j <= B) {
        while (u < m->nsub && m->sub[u].hi < j) u++;
        long end = u < m->nsub ? (m->sub[u].lo > j ? m->sub[u].lo - 1 : m->sub[u].hi) : B;
        if (end > B) end = B;
        if (u < m->nsub && m->sub[u].lo <= j) {
          for (; j <= end; j++) {
            size_t p0 = *sub_first(m, u, j), p1 = *sub_first(m, u, j + 1);
            double s0 = 0, s1 = 0, s2 = 0;
            for (size_t p = p0; p < p1; p++) {
              double e = m->sex[p];
              s0 += e * sqk[3 * p];
              s1 += e * sqk[3 * p + 1];
              s2 += e * sqk[3 * p + 2];
            }
            double w = 1.0 / (double)(p1 - p0);
            qk[3 * j] = s0 * w;
            qk[3 * j + 1] = s1 * w;
            qk[3 * j + 2] = s2 * w;
          }
        } else {
          for (; j <= end; j++) {
            double e = m->ex[j];
            qk[3 * j] *= e;
            qk[3 * j + 1] *= e;
            qk[3 * j + 2] *= e;
          }
        }
      }
    }
  }
  m->folded = 1;
}

/* Moments.  A sub-sampled cell stands for its mean, which the kernel,
 * sampled at cell centres, places at the cell's centre; but a line narrower
 * than the cell may sit anywhere in it, and with an LSF that matters.  So
 * the content of each sub-sampled cell also reaches cell j + k through the
 * kernel moved by the offsets t of its sub-points (alloc):
 *   sum_n hk_n(k) mu_n,  mu_n = mean over the sub-points of (d - m) t^n,
 * d = 1 - exp(-tau) at the sub-point, m its cell mean, t in cells.  Only
 * the departure from the mean moves: a cell of uniform content is treated
 * like any other cell (which keeps saturated stretches at zero flux), a
 * narrow line at offset t0 acts as if at t0.  Without an LSF (or one below
 * MOM_SMIN cells, nmom = 0) the pixel mean of cell means is already right.
 *
 * For cells j0..j1 of sub-span u: the moments, through the kernel into scr,
 * then each pixel they reach loses its share in out[i*ld].  With sqk (the
 * Jacobian of component k) the same for the derivatives: d = exp(-tau)
 * dtau/dp at the sub-points, m = their cell mean (q after fold), 3 at once
 * into out[i*ld + 0..2]. */
static void sub_moments(dt_model *m, int u, long j0, long j1, const double *sqk, const double *qk,
                        double *out, size_t ld) {
  const int hw = m->hw, nm = m->nmom, nv = sqk ? 3 : 1;
  const size_t kw = (size_t)(2 * hw + 1), nf = m->nf;
  double *mom = m->mom; /* [cell][v][n] */
  for (long j = j0; j <= j1; j++) {
    size_t p0 = *sub_first(m, u, j), p1 = *sub_first(m, u, j + 1);
    double w = 1.0 / (double)(p1 - p0), *mj = mom + (size_t)(j - j0) * 3 * MOM_MAX;
    memset(mj, 0, (size_t)nv * MOM_MAX * sizeof *mj);
    for (size_t p = p0; p < p1; p++) {
      double t = ((double)(p - p0) + 0.5) * w - 0.5;
      for (int v = 0; v < nv; v++) {
        double x = sqk ? m->sex[p] * sqk[3 * p + v] - qk[3 * j + v]
                       : (1.0 - m->sex[p]) - m->dep[j];
        double *mv = mj + v * MOM_MAX;
        for (int q = 0; q < nm; q++) {
          x *= t;
          mv[q] += x;
        }
      }
    }
    for (int v = 0; v < nv; v++)
      for (int q = 0; q < nm; q++) mj[v * MOM_MAX + q] *= w;
  }
  if (m->sigpix) { /* widths per pixel: each cell through its pixel's kernel (model_lsf.c) */
    dt_model_moments_pix(m, j0, j1, nv, out, ld);
    return;
  }
  /* through the kernel: plane v of scr over cells A..B */
  long A = j0 - hw, B = j1 + hw;
  if (A < 0) A = 0;
  if (B > (long)nf - 1) B = (long)nf - 1;
  for (int v = 0; v < nv; v++)
    memset(m->scr + (size_t)v * nf + A, 0, (size_t)(B - A + 1) * sizeof *m->scr);
  for (long j = j0; j <= j1; j++) {
    const double *mj = mom + (size_t)(j - j0) * 3 * MOM_MAX;
    long k0 = A - (j - hw) > 0 ? A - (j - hw) : 0;
    long k1 = B - (j - hw) < 2 * hw ? B - (j - hw) : 2 * hw;
    for (int v = 0; v < nv; v++) {
      double *sv = m->scr + (size_t)v * nf + (j - hw);
      for (int q = 0; q < nm; q++) {
        const double mu = mj[v * MOM_MAX + q], *hq = m->hk + (size_t)q * kw;
        if (mu == 0) continue;
        for (long k = k0; k <= k1; k++) sv[k] += mu * hq[k];
      }
    }
  }
  /* pixels whose cells meet A..B (pc0, pc1 increase with i) */
  size_t a = dt_model_first_reaching(m->pc1, m->n, A);
  for (size_t i = a; i < m->n && m->pc0[i] <= B; i++) {
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

/* With no LSF, or one narrower than MOM_SMIN cells (nmom = 0), the
 * kernel does not carry a line's place within its cell, but a pixel edge
 * may cut the cell: the pixel value is the mean of its convolved cells by
 * overlap, while a narrow line lies on one side of the edge.  So each such
 * cell is split at the edge by its sub-points (the sub-cell the edge cuts
 * by its fraction on each side), and of the part of its content the kernel
 * leaves in the cell (g0, all of it without an LSF) each pixel gets what
 * lies on its side instead of its overlap share.  For content spread
 * evenly nothing changes; each pixel's share stays >= 0.  Values as in
 * sub_moments. */
static void sub_edges(dt_model *m, int u, long j0, long j1, const double *sqk, const double *qk,
                      double *out, size_t ld) {
  const int nv = sqk ? 3 : 1;
  const double g0 = m->g0;
  /* pixels i, i+1 sharing a cell c of j0..j1: c = pc1[i] = pc0[i+1] */
  size_t a = dt_model_first_reaching(m->pc1, m->n, j0);
  for (size_t i = a; i + 1 < m->n && m->pc1[i] <= j1; i++) {
    long c = m->pc1[i];
    if (m->pc0[i + 1] != c) continue;
    double cl = m->y0 + c * m->dy, ye = m->pedge[i + 1];
    double f = (ye - cl) / m->dy; /* fraction of the cell below the edge */
    if (!(f > 0 && f < 1)) continue;
    size_t p0 = *sub_first(m, u, c), p1 = *sub_first(m, u, c + 1);
    double r = (double)(p1 - p0), wl = ye - m->pedge[i], wr = m->pedge[i + 2] - ye;
    for (int v = 0; v < nv; v++) {
      double left = 0;
      for (size_t p = p0; p < p1; p++) {
        double fp = f * r - (double)(p - p0); /* of sub-cell p below the edge */
        if (fp <= 0) break;
        double x = sqk ? m->sex[p] * sqk[3 * p + v] : 1.0 - m->sex[p];
        left += (fp < 1 ? fp : 1.0) * x;
      }
      double mean = sqk ? qk[3 * c + v] : m->dep[c];
      if (m->sigpix) { /* widths per pixel: each pixel's own centre weight */
        double x = (left / r - f * mean) * m->dy;
        out[i * ld + (size_t)v] -= m->g0pix[i] * x / wl;
        out[(i + 1) * ld + (size_t)v] += m->g0pix[i + 1] * x / wr;
        continue;
      }
      double d = g0 * (left / r - f * mean) * m->dy; /* content moved below the edge */
      out[i * ld + (size_t)v] -= d / wl;
      out[(i + 1) * ld + (size_t)v] += d / wr;
    }
  }
}

/* The corrections for every sub-sampled cell (k < 0, the flux) or for those
 * in the ranges of component k (its Jacobian; its q is valid only there),
 * sub_moments in chunks of MOM_CHUNK cells. */
void dt_model_sub_corrections(dt_model *m, long k, double *out, size_t ld) {
  const double *sqk = k < 0 ? NULL : m->sq + (size_t)k * m->pmax * 3;
  const double *qk = k < 0 ? NULL : m->q + (size_t)k * m->nf * 3;
  int nc = k < 0 ? 1 : m->ncspan[k];
  for (int u = 0; u < m->nsub; u++)
    for (int c = 0; c < nc; c++) {
      long lo = m->sub[u].lo, hi = m->sub[u].hi;
      if (k >= 0) {
        if (m->cspan[k][c].lo > lo) lo = m->cspan[k][c].lo;
        if (m->cspan[k][c].hi < hi) hi = m->cspan[k][c].hi;
      }
      if (lo > hi) continue;
      if (!m->nmom) {
        sub_edges(m, u, lo, hi, sqk, qk, out, ld);
        continue;
      }
      for (long j0 = lo; j0 <= hi; j0 += MOM_CHUNK) {
        long j1 = j0 + MOM_CHUNK - 1 < hi ? j0 + MOM_CHUNK - 1 : hi;
        sub_moments(m, u, j0, j1, sqk, qk, out, ld);
      }
    }
}
