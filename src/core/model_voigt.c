/* The Voigt part of the model: w(z) (near the real axis from its Taylor
 * series on libcerf's values on the axis, elsewhere from libcerf), the
 * optical depth scale of a line, the cells where a line can exceed tau_cut,
 * and one line's optical depth and its derivatives over those cells.
 *
 * Within a line's range w(z) is computed either at every cell or,
 * where that is cheaper, from two small tables built from exact values and
 * derivatives: quintic Hermite in x in the core, cubic Hermite in 1/x in the
 * far wings, with steps chosen from the error bounds so that tau is off by
 * at most 0.1 tau_cut (model.h).  The same evaluation serves the sub-points
 * of cells sub-sampled for narrow lines (model_narrow.c). */
#include <cerf.h>
#include <complex.h>
#include <math.h>
#include <string.h>

#include "model_internal.h"

/* w(x + ia) near the real axis (0 <= a <= SERIES_AMAX, |x| <= SERIES_XMAX,
 * a |x| <= SERIES_AX) from the Taylor series about the real axis (w is
 * entire):
 *   w(x + ia) = sum_n (ia)^n / n! w^(n)(x),
 *   w(x) = exp(-x^2) + i Im w(x)    (A&S 7.1.3, 7.1.16; Im w(x) from libcerf),
 *   w'(x) = -2x w(x) + 2i/sqrt(pi),  w^(n+1)(x) = -2x w^(n)(x) - 2n w^(n-1)(x)
 * (A&S 7.1.20), summed until a term falls below SERIES_EPS of the sum: about
 * half the time of libcerf's w(z) for the small damping of the doublets
 * (tests/bench/bench_model.c); within 3e-12 of it (test_voigt.c: the far
 * wing's H, a difference of two terms, loses ~x^2 of the precision).
 * Elsewhere libcerf's w(z); the model's exact_wings reference keeps
 * libcerf everywhere. */
#define SERIES_AMAX 0.25
#define SERIES_XMAX 25.0
#define SERIES_AX 1.0
#define SERIES_EPS 1e-16
#define SERIES_NMAX 24
static const double INV_N1[SERIES_NMAX] = {   /* 1 / (n + 1) */
  1.0,       1.0 / 2,  1.0 / 3,  1.0 / 4,  1.0 / 5,  1.0 / 6,  1.0 / 7,  1.0 / 8,
  1.0 / 9,   1.0 / 10, 1.0 / 11, 1.0 / 12, 1.0 / 13, 1.0 / 14, 1.0 / 15, 1.0 / 16,
  1.0 / 17,  1.0 / 18, 1.0 / 19, 1.0 / 20, 1.0 / 21, 1.0 / 22, 1.0 / 23, 1.0 / 24};

double complex dt_faddeeva(double x, double a) {
  double ax = fabs(x);
  if (!(a >= 0 && a <= SERIES_AMAX && ax <= SERIES_XMAX && a * ax <= SERIES_AX))
    return w_of_z(cplx(x, a));
  double pr = exp(-x * x), pi = im_w_of_x(x);                     /* w^(n-1)(x) */
  double qr = -2.0 * x * pr, qi = -2.0 * x * pi + 2.0 / SQRT_PI;  /* w^(n)(x) */
  double sr = pr, si = pi;
  double cr = 0.0, ci = a;   /* (ia)^n / n! */
  for (int n = 1; n < SERIES_NMAX; n++) {
    double tr = cr * qr - ci * qi, ti = cr * qi + ci * qr;
    sr += tr;
    si += ti;
    if (fabs(tr) + fabs(ti) <= SERIES_EPS * (fabs(sr) + fabs(si))) break;
    double nr = -2.0 * x * qr - 2.0 * n * pr, ni = -2.0 * x * qi - 2.0 * n * pi;
    pr = qr;
    pi = qi;
    qr = nr;
    qi = ni;
    double f = a * INV_N1[n], t = cr;
    cr = -ci * f;
    ci = t * f;
  }
  return cplx(sr, si);
}

double dt_voigt_H(double a, double u) { return creal(dt_faddeeva(u, a)); }

void dt_voigt_HL(double a, double u, double *H, double *L) {
  double complex w = dt_faddeeva(u, a);
  *H = creal(w);
  *L = cimag(w);
}

/* Optical depth scale and damping parameter of a line for (N, b):
 *   tau = N sigma0 f H(a,x) / (sqrt(pi) dnu_D),  dnu_D = b / lambda0,
 *   a = Gamma / (4 pi dnu_D)
 * (e.g. Spitzer 1978, Physical Processes in the Interstellar Medium, ch. 3)
 * with sigma0 [cm^2 s^-1], lambda0 [A], b [km/s], Gamma [s^-1]. */
void dt_model_line_scales(const dt_line *l, double N, double b, double *t0, double *a) {
  double lam_over_b = ANG_PER_KMS * l->lambda0 / b; /* 1/dnu_D [s] */
  *t0 = N * DT_SIGMA0 * l->f * lam_over_b / SQRT_PI;
  *a = l->gamma * lam_over_b / (4.0 * PI);
}

double dt_line_tau(const dt_line *l, const dt_component *c, double vsys, double lambda) {
  double t0, a;
  dt_model_line_scales(l, pow(10.0, c->logN), c->b, &t0, &a);
  double lc = dt_wavelength(c->v, l->lambda0, vsys);
  /* x = (nu_rest - nu0)/dnu_D = (c/b)(lambda0/lambda_rest - 1) = (c/b)(lc/lambda - 1) */
  double x = DT_C_KMS / c->b * (lc / lambda - 1.0);
  return t0 * dt_voigt_H(a, x);
}

/* Cells where a line with scale t0, damping a, centre lc and width b can
 * have tau > tau_cut.  Starting from |x| where the Gaussian core
 * t0 exp(-x^2) or the Lorentzian wing t0 a/(sqrt(pi) x^2) falls to tau_cut,
 * X is widened until the exact t0 H(a, X) <= tau_cut; H falls monotonically
 * in |x| (a convolution of two symmetric unimodal profiles), so nothing
 * beyond X exceeds the cut.  The range is the cells whose centre lies
 * within |x| <= X, or with overlap set (narrow lines, which may fit between
 * two centres) every cell that meets it. */
span dt_model_line_range(const dt_model *m, double t0, double a, double b, double lc,
                         int overlap) {
  span r = {0, -1};
  double tc = m->tau_cut;
  if (!(t0 > tc)) return r; /* H <= H(a,0) = erfcx(a) <= 1 */
  double X = fmax(sqrt(log(t0 / tc)), sqrt(t0 * a / (SQRT_PI * tc)));
  for (int it = 0; it < 200 && t0 * dt_voigt_H(a, X) > tc; it++) X *= 1.1;
  double u = X * b / DT_C_KMS; /* |x| <= X  <=>  lc/lambda in [1-u, 1+u] */
  double ylo = log(lc) - log1p(u);
  double yhi = u < 1 ? log(lc) - log1p(-u) : INFINITY;
  double jl = overlap ? floor((ylo - m->y0) / m->dy) : ceil((ylo - m->y0) / m->dy - 0.5);
  double jh = overlap ? ceil((yhi - m->y0) / m->dy) - 1.0 : floor((yhi - m->y0) / m->dy - 0.5);
  double top = (double)m->nf - 1;
  if (jl < 0) jl = 0;
  if (jh > top) jh = top;
  if (!(jl <= jh)) return r; /* also refuses NaN */
  r.lo = (long)jl;
  r.hi = (long)jh;
  return r;
}

/* The far wing, |x| > Xc, is interpolated by cubic Hermite polynomials in
 * s = 1/|x| with step h; the error is at most h^4/384 max|d^4 f/ds^4|.
 * There w(z) = i/(sqrt(pi) z) (1 + 1/(2z^2) + 3/(4z^4) + ...) (Abramowitz &
 * Stegun 1964, 7.1.23), so H = (a/sqrt(pi)) s^2 (1 + 3s^2/2 + 15s^4/4 + ...):
 * the s^2 term is reproduced exactly and the rest has |d^4/ds^4| < 400 a/sqrt(pi)
 * for s <= 1/4.  h^4 = 0.01 tau_cut sqrt(pi) / (t0 a) therefore keeps the error
 * in tau below 0.01 tau_cut.  Returns h (<= WING_HMAX). */
static double wing_step(double t0, double a, double tc) {
  double h = a > 0 ? pow(0.01 * tc * SQRT_PI / (t0 * a), 0.25) : WING_HMAX;
  return h < WING_HMAX ? h : WING_HMAX;
}

/* Where the far-wing interpolation starts.  Of w(z) = exp(-z^2) erfc(-iz)
 * the part exp(-z^2), of size exp(a^2 - x^2), has d^4/ds^4 ~ 16 x^12 exp(-x^2);
 * Xc is raised until its interpolation error is below 1e-3 tau_cut, so that
 * only the smooth asymptotic part is interpolated; that part is analytic in s
 * for s < 1/a, hence Xc >= 4 + 2a. */
static double wing_start(double t0, double a, double tc, double h) {
  double X = WING_XMIN + 2.0 * a, h4 = h * h * h * h;
  for (int it = 0; it < 400; it++, X += 0.25) {
    double x2 = X * X, x4 = x2 * x2;
    double bound = t0 * exp(a * a - x2) * (1.0 + 16.0 / 384.0 * x4 * x4 * x4 * h4);
    if (bound <= 1e-3 * tc) break;
  }
  return X;
}

/* Table of the wing interpolant on s in [smin, smax] with k intervals: for
 * each the cubic (in t = (s - s_k)/h) through the exact values and
 * s-derivatives of H = Re w, Re w' and Im w' at both ends, from libcerf's
 * w(z) and
 *   w'(z) = -2z w(z) + 2i/sqrt(pi),  w''(z) = -2 w(z) - 2z w'(z),
 * with d/ds = -x^2 d/dx.  Returns 1/h. */
static double wing_table(dt_model *m, double a, double smin, double smax, int K) {
  const double h = (smax - smin) / K;
  double f0[3] = {0}, d0[3] = {0};
  for (int k = 0; k <= K; k++) {
    double sk = k == K ? smax : smin + k * h;
    double x = 1.0 / sk;
    double complex z = cplx(x, a);
    double complex w = dt_faddeeva(x, a);
    double complex w1 = -2.0 * z * w + cplx(0.0, 2.0 / SQRT_PI);
    double complex w2 = -2.0 * w - 2.0 * z * w1;
    double hx2 = -h * x * x;
    double f1[3] = {creal(w), creal(w1), cimag(w1)};
    double d1[3] = {hx2 * creal(w1), hx2 * creal(w2), hx2 * cimag(w2)};
    if (k > 0) {
      double *c = m->wing[k - 1];
      for (int q = 0; q < 3; q++) {
        c[4 * q + 0] = f0[q];
        c[4 * q + 1] = d0[q];
        c[4 * q + 2] = -3.0 * f0[q] - 2.0 * d0[q] + 3.0 * f1[q] - d1[q];
        c[4 * q + 3] = 2.0 * f0[q] + d0[q] - 2.0 * f1[q] + d1[q];
      }
    }
    memcpy(f0, f1, sizeof f0);
    memcpy(d0, d1, sizeof d0);
  }
  return 1.0 / h;
}

/* Table of the core interpolant on x in [0, Xc] (H is even in x, so the
 * table serves both sides): for each interval the quintic Hermite polynomial
 * in t = (x - x_k)/h through the exact values and first two x-derivatives
 * of H = Re w, Re w' and Im w' at both ends, from libcerf's w(z) and
 *   w^(n+1)(z) = -2z w^(n)(z) - 2n w^(n-1)(z),  w'(z) = -2z w(z) + 2i/sqrt(pi).
 * Error bound h^6/46080 max|f^(6)| (|d^6 exp(-x^2)/dx^6| <= 120), so
 * h <= (38.4 tau_cut/t0)^(1/6) keeps the error in tau below 0.1 tau_cut. */
static int core_table(dt_model *m, double t0, double a, double Xc, double *invh) {
  double h = pow(38.4 * m->tau_cut / t0, 1.0 / 6.0);
  if (h > CORE_HMAX) h = CORE_HMAX;
  double kd = ceil(Xc / h);
  if (kd > CORE_KMAX) return -1;
  int K = (int)kd;
  h = Xc / K;
  double f0[3] = {0}, d0[3] = {0}, e0[3] = {0};
  for (int k = 0; k <= K; k++) {
    double complex z = cplx(k * h, a);
    double complex w = dt_faddeeva(k * h, a);
    double complex w1 = -2.0 * z * w + cplx(0.0, 2.0 / SQRT_PI);
    double complex w2 = -2.0 * z * w1 - 2.0 * w;
    double complex w3 = -2.0 * z * w2 - 4.0 * w1;
    double f1[3] = {creal(w), creal(w1), cimag(w1)};
    double d1[3] = {h * creal(w1), h * creal(w2), h * cimag(w2)};
    double e1[3] = {h * h * creal(w2), h * h * creal(w3), h * h * cimag(w3)};
    if (k > 0) {
      double *c = m->core[k - 1];
      for (int q = 0; q < 3; q++) {
        double D = f1[q] - f0[q];
        c[6 * q + 0] = f0[q];
        c[6 * q + 1] = d0[q];
        c[6 * q + 2] = 0.5 * e0[q];
        c[6 * q + 3] = 10.0 * D - 6.0 * d0[q] - 4.0 * d1[q] - 1.5 * e0[q] + 0.5 * e1[q];
        c[6 * q + 4] = -15.0 * D + 8.0 * d0[q] + 7.0 * d1[q] + 1.5 * e0[q] - e1[q];
        c[6 * q + 5] = 6.0 * D - 3.0 * d0[q] - 3.0 * d1[q] - 0.5 * e0[q] + 0.5 * e1[q];
      }
    }
    memcpy(f0, f1, sizeof f0);
    memcpy(d0, d1, sizeof d0);
    memcpy(e0, e1, sizeof e0);
  }
  *invh = 1.0 / h;
  return K;
}

/* ---- evaluation of one line ------------------------------------------- */

/* How H = Re w(x + ia) and its derivatives are obtained for one line. */
typedef struct voigt_src {
  double a, Xc;     /* |x| <= Xc: core table (kcore > 0) or w(z) */
  double cinvh;
  int kcore, kwing; /* wing table for Xc < |x| <= xw when kwing > 0 */
  int exact;        /* w(z) from libcerf at every point (reference) */
  double smin, winvh, xw;
} voigt_src;

/* H(a, x) and, with deriv, Hx = dH/dx and Ha = dH/da. */
static inline double voigt_at(const dt_model *m, const voigt_src *v, double x, int deriv,
                              double *Hx, double *Ha) {
  const double a = v->a, ax = fabs(x);
  double H;
  /* w(-x + ia) = conj w(x + ia): H even in x, Re w' odd, Im w' even. */
  if (ax <= v->Xc && v->kcore > 0) {
    double u = ax * v->cinvh;
    int k = (int)u;
    if (k > v->kcore - 1) k = v->kcore - 1;
    double t = u - k;
    const double *c = m->core[k];
    H = c[0] + t * (c[1] + t * (c[2] + t * (c[3] + t * (c[4] + t * c[5]))));
    if (deriv) {
      double wr = c[6] + t * (c[7] + t * (c[8] + t * (c[9] + t * (c[10] + t * c[11]))));
      double wi = c[12] + t * (c[13] + t * (c[14] + t * (c[15] + t * (c[16] + t * c[17]))));
      *Hx = x < 0 ? -wr : wr;
      *Ha = -wi;
    }
  } else if (ax > v->Xc && v->kwing > 0 && ax <= v->xw) {
    double u = (1.0 / ax - v->smin) * v->winvh;
    int k = (int)u;
    if (k < 0) k = 0;
    if (k > v->kwing - 1) k = v->kwing - 1;
    double t = u - k;
    const double *c = m->wing[k];
    H = c[0] + t * (c[1] + t * (c[2] + t * c[3]));
    if (deriv) {
      double wr = c[4] + t * (c[5] + t * (c[6] + t * c[7]));
      double wi = c[8] + t * (c[9] + t * (c[10] + t * c[11]));
      *Hx = x < 0 ? -wr : wr;
      *Ha = -wi;
    }
  } else {
    double complex w = v->exact ? w_of_z(cplx(x, a)) : dt_faddeeva(x, a);
    H = creal(w);
    if (deriv) {
      /* w'(z) = -2 z w(z) + 2i/sqrt(pi), z = x + i a, H = Re w, L = Im w:
       *   dH/dx = Re w' = 2(a L - x H),  dH/da = -Im w' = 2(x L + a H) - 2/sqrt(pi) */
      double L = cimag(w);
      *Hx = 2.0 * (a * L - x * H);
      *Ha = 2.0 * (x * L + a * H) - 2.0 / SQRT_PI;
    }
  }
  return H;
}

/* Optical depth of one line of component k over its cells, added to the
 * total; with qk, also d tau/d(logN, b, v) added to qk[3j + 0,1,2].  The
 * same at the sub-points of sub-sampled cells in its range (stau, and sqk
 * when qk is given). */
void dt_model_eval_line(dt_model *m, const line_setup *s, double b, double *qk, double *sqk) {
  const double t0 = s->t0, a = s->a, cb = s->cb, lc = s->lc;
  const double *invlam = m->invlam;
  double *tau = m->tau;
  if (s->r.lo > s->r.hi) return;
  /* x falls along the cells.  The far wings (|x| > Xc) and the core are
   * each interpolated when they hold clearly more cells than their table
   * has nodes; otherwise w(z) is called at every cell.  Sub-points reach
   * the outer edges of the range's end cells. */
  double xfirst, xlast;
  if (s->nsp) {
    xfirst = cb * (lc * exp(-(m->y0 + s->r.lo * m->dy)) - 1.0);
    xlast = cb * (lc * exp(-(m->y0 + (s->r.hi + 1) * m->dy)) - 1.0);
  } else {
    xfirst = cb * (lc * invlam[s->r.lo] - 1.0);
    xlast = cb * (lc * invlam[s->r.hi] - 1.0);
  }
  double xmax = fmax(fabs(xfirst), fabs(xlast));
  double cells_per_x = 1.0 / (cb * m->dy); /* about: dx/dj = -cb r dy */
  voigt_src v = {.a = a, .Xc = INFINITY, .kcore = -1, .kwing = 0, .xw = xmax, .exact = m->exact};
  if (!m->exact) {
    double hw = wing_step(t0, a, m->tau_cut);
    v.Xc = wing_start(t0, a, m->tau_cut, hw);
    double xin = fmin(v.Xc, xmax);
    double wing_cells = (double)(s->r.hi - s->r.lo + 1) - 2.0 * xin * cells_per_x;
    double kw = ceil((1.0 / v.Xc - 1.0 / xmax) / hw);
    if (xmax > 1.5 * v.Xc && kw <= WING_KMAX && wing_cells > 2.0 * (kw + 1)) {
      v.kwing = (int)kw;
      v.smin = 1.0 / xmax;
      v.winvh = wing_table(m, a, v.smin, 1.0 / v.Xc, v.kwing);
    } else {
      v.Xc = xmax; /* everything is core */
    }
    /* core cells (both sides) and sub-points against table nodes (one side) */
    double nodes = v.Xc * fmax(pow(t0 / (38.4 * m->tau_cut), 1.0 / 6.0), 1.0 / CORE_HMAX) + 1.0;
    if (2.0 * v.Xc * cells_per_x + (double)s->nsp > 1.3 * nodes)
      v.kcore = core_table(m, t0, a, v.Xc, &v.cinvh);
  }
  const double dxdv = s->dxdv_fac;
  const int deriv = qk != NULL;
  for (long j = s->r.lo; j <= s->r.hi; j++) {
    double r = lc * invlam[j];
    double x = cb * (r - 1.0);
    double Hx = 0, Ha = 0;
    double tj = t0 * voigt_at(m, &v, x, deriv, &Hx, &Ha);
    tau[j] += tj;
    if (deriv) {
      /* tau = t0 H(a, x) with t0, a and x proportional to 1/b:
       *   dtau/db = -(tau + t0 (a dH/da + x dH/dx)) / b;
       * x = (c/b)(lc/lambda - 1) with lc proportional to (1 + v/c). */
      double *qq = qk + 3 * j;
      qq[0] += LN10 * tj;
      qq[1] -= (tj + t0 * (a * Ha + x * Hx)) / b;
      qq[2] += t0 * Hx * dxdv * r;
    }
  }
  if (!s->nsp) return;
  for (int u = 0; u < m->nsub; u++) {
    long ja = s->r.lo > m->sub[u].lo ? s->r.lo : m->sub[u].lo;
    long jb = s->r.hi < m->sub[u].hi ? s->r.hi : m->sub[u].hi;
    if (ja > jb) continue;
    size_t p1 = *sub_first(m, u, jb + 1);
    for (size_t p = *sub_first(m, u, ja); p < p1; p++) {
      double r = lc * m->sinv[p];
      double x = cb * (r - 1.0);
      double Hx = 0, Ha = 0;
      double tj = t0 * voigt_at(m, &v, x, deriv, &Hx, &Ha);
      m->stau[p] += tj;
      if (deriv) {
        double *qq = sqk + 3 * p;
        qq[0] += LN10 * tj;
        qq[1] -= (tj + t0 * (a * Ha + x * Hx)) / b;
        qq[2] += t0 * Hx * dxdv * r;
      }
    }
  }
}
