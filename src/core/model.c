/* The doublet absorption model: Voigt optical depths on a sub-pixel grid,
 * exp(-tau), a Gaussian line-spread function and averaging over pixels,
 * with the analytic Jacobian with respect to (logN, b, v) of each component.
 *
 * The discretisation (fixed in dt_model_alloc):
 *  - pixel edges lie half-way between pixel centres; the first and last
 *    pixels are symmetric about their centres;
 *  - the sub-pixel grid is uniform in y = ln(lambda): cells of width
 *    dy = (narrowest pixel, in ln lambda) / oversample, the first cell
 *    starting hw cells below the lower edge of the first pixel and the grid
 *    extending hw cells beyond the last pixel; each cell is represented by
 *    its centre, or by its mean near lines narrower than the cells (below);
 *  - the LSF is a Gaussian of constant velocity FWHM (c/R or the FWHM in
 *    km/s), sampled at the cell centres k*dy, k = -hw..hw with
 *    hw = ceil(DT_MODEL_LSF_NSIGMA * sigma / dy), and normalised to sum 1;
 *  - a pixel's value is the average of the convolved cell values over the
 *    pixel's [lo, hi] extent in ln lambda, each cell weighted by its
 *    overlap with the pixel (so unequal pixels are handled);
 *  - except when the pixels are much finer than the LSF (the rule above
 *    would give cells below sigma / (2 DT_MODEL_LSF_CELLS)): then the
 *    cells are sigma / DT_MODEL_LSF_CELLS wide (coarser), the
 *    grid reaches hw + 2 cells beyond the pixels, and a pixel's value is
 *    the mean over its extent of a piecewise-cubic interpolation of the
 *    convolved cells (pixel_weights), so that the matrix keeps
 *    ~2 DT_MODEL_LSF_NSIGMA DT_MODEL_LSF_CELLS entries per pixel however
 *    fine the pixels are.
 * Convolution and averaging are linear, so they are folded into one banded
 * matrix (row i = weights of the cells that reach pixel i), built once.
 *
 * Lines narrower than the cells.  Sampling exp(-tau) once per cell is the
 * midpoint rule with step dy; for a line of Doppler width b (velocity) it
 * is accurate only while c dy is below a fraction h of b (see sub_setup).
 * Survey spectra have cells of 5-15 km/s and cold gas b of 0.3-3 km/s, so
 * such a line is "narrow": every cell where it varies faster than the cell
 * resolves (its Gaussian core, and its damping wings while they are curved
 * on the scale of a cell) is represented by the mean of exp(-tau) over r
 * equal sub-cells instead of its centre value, with r chosen per cell from
 * what each narrow line nearby needs.  All lines (narrow or not) whose range
 * reaches such a cell are evaluated at its sub-cell centres, so blends are
 * exact; so are the derivatives (the cell mean of -exp(-tau) dtau/dp).  A
 * cell mean alone would put a narrow line at the cell's centre; so where a
 * line sits within its cell reaches the pixels too: through the LSF kernel
 * moved by the sub-cells' offsets (sub_moments), or without an LSF by
 * splitting cells at pixel edges (sub_edges).  The sub-cells of a cell are
 * fixed by the cell and r alone, and r depends on v only through the cell
 * that holds a line's centre, so between changes of r the model is one
 * smooth quadrature and its Jacobian is exact.
 *
 * Speed: each line of each component is evaluated only over the cells where
 * its optical depth can exceed tau_cut (the range follows from the Gaussian
 * core and the Lorentzian wing, then is verified against the exact Voigt
 * function, which falls monotonically away from the centre); elsewhere it is
 * exactly zero.  Within the range, w(z) comes from libcerf either at every
 * cell or, where that is cheaper, at the nodes of two small tables per line
 * (core: quintic Hermite in x; far wings: cubic Hermite in 1/x), built from
 * exact values and derivatives with the step chosen from the error bound so
 * that tau is off by at most 0.1 tau_cut.  Only pixels whose band meets the
 * ranges are touched; the rest have flux 1 and zero derivatives.  The
 * derivatives of tau are always kept, so a Jacobian asked for at the point
 * of the previous evaluation (what a least-squares solver does after
 * accepting a step) costs only the pixel sums.  All buffers are allocated in
 * dt_model_alloc; dt_model_eval never allocates. */
#include "doubletty/model.h"

#include <cerf.h>
#include <complex.h>
#include <math.h>
#include <stdlib.h>
#include <string.h>

#define PI 3.14159265358979323846
#define SQRT_PI 1.7724538509055160273
#define SQRT2 1.4142135623730950488
#define LN10 2.3025850929940456840
#define FWHM_PER_SIGMA 2.3548200450309493820 /* 2 sqrt(2 ln 2) */
#define MAX_FINE 20000000L                   /* refuse absurd grids */

/* Unit conversion for the optical depth and damping parameter with lambda
 * in Angstrom and b in km/s: lambda[cm]/b[cm/s] = 1e-8/1e5 lambda/b. */
#define ANG_PER_KMS 1e-13

/* Far wings: |x| > Xc is interpolated in s = 1/|x| on at most WING_KMAX
 * equal intervals of at most WING_HMAX, Xc >= WING_XMIN + 2a (see
 * wing_start).  Core: |x| <= Xc is interpolated in x on at most CORE_KMAX
 * intervals of at most CORE_HMAX.  Beyond those sizes w(z) is called at
 * every cell. */
#define WING_KMAX 512
#define WING_HMAX 0.05
#define WING_XMIN 4.0
#define CORE_KMAX 256
#define CORE_HMAX 0.25

/* Sub-sampling of cells near narrow lines (see sub_setup for the reasons):
 *  - core sub-cell width h b with h = min(SUB_H_THIN, SUB_H_SAT/sqrt(ln t0))
 *    Doppler widths, over |x| <= sqrt(ln max(t0, 1) + SUB_GAUSS_LN);
 *  - damping wings: sub-cells whose midpoint-rule error stays below
 *    SUB_EPS_W (SUB_KAPPA = sqrt(1.21 / (24 SUB_EPS_W)));
 *  - ln t0 is capped at SUB_LNT_MAX (t0 = 7.7e23, reached only by absurd
 *    columns, whose damping wings are black far beyond the capped core). */
#define SUB_H_THIN 0.7
#define SUB_H_SAT 0.9
#define SUB_GAUSS_LN 9.2103403719761836 /* ln 1e4 */
#define SUB_EPS_W 2e-5
#define SUB_KAPPA 50.2
#define SUB_LNT_MAX 55.0
#define SUB_LINE_CAP 2560.0 /* sub-points reserved per line at most */
/* Moments of sub-sampled cells through the LSF (sub_moments): at most
 * MOM_MAX terms, none when sigma < MOM_SMIN cells; cells per pass. */
#define MOM_MAX 16
#define MOM_SMIN 1.0
#define MOM_CHUNK 64

typedef struct span {
  long lo, hi; /* inclusive cell indices; lo > hi = empty */
} span;

/* Per line of a component, set up at the start of an evaluation. */
typedef struct line_setup {
  double lc;  /* observed line centre [A] */
  double t0;  /* N sigma0 f / (sqrt(pi) dnu_D): tau = t0 H(a, x) */
  double a;   /* damping parameter */
  double cb;  /* c / b */
  double dxdv_fac; /* dx/dv = dxdv_fac * r, r = lc/lambda */
  span r;
  /* narrow lines (sub_setup); widths and distances in ln(lambda) */
  int narrow;
  double yc;       /* ln lc */
  double dc;       /* sub-cell width in the core */
  double wc;       /* half-width of the core */
  double c2;       /* wing: sub-cell width may be c2 d^2 at distance d */
  long jc;         /* the cell holding the centre */
  span sr;         /* cells it sub-samples */
  size_t nsp;      /* sub-points in its range (any line) */
} line_setup;

struct dt_model {
  const dt_doublet *dbl;
  double s;         /* 1 + vsys/c */
  double tau_cut;
  int ovs;
  size_t n, nf, max_comp;
  double y0, dy;    /* cell j spans [y0 + j dy, y0 + (j+1) dy] in ln(lambda/A) */
  double sigma_kms; /* LSF sigma; 0 = none */
  int hw;           /* kernel half-width in cells */
  double *invlam;   /* 1/lambda at the cell centres [1/A] */
  long *m0, *m1;    /* band of pixel i: cells m0[i]..m1[i] */
  size_t *off;      /* start of row i in coef */
  double *coef;     /* banded pixel operator (LSF convolution + averaging) */
  double *tau;      /* total optical depth per cell */
  double *dep;      /* 1 - exp(-tau) (sub-sampled cells: its mean) */
  double *ex;       /* exp(-tau) (sub-sampled cells: its mean) */
  double *q;        /* per component k: q[(k*nf + j)*3 + p] = d tau_k / d p;
                       after fold the cell value of exp(-tau) d tau_k / d p */
  int exact;        /* no wing interpolation */
  double wing[WING_KMAX][12]; /* per interval: cubic coefficients of H, Re w', Im w' */
  double core[CORE_KMAX][18]; /* per interval: quintic coefficients of H, Re w', Im w' */
  span prev[2 * DT_MAX_COMP]; /* cells where tau was set by the last evaluation */
  int nprev;
  /* The last evaluation's components and flux: a Jacobian asked for at the
   * parameters of the previous call (as a least-squares solver does after
   * accepting a step) reuses the optical depths and their derivatives. */
  dt_component last[DT_MAX_COMP];
  size_t nlast;
  int have_last;
  double *last_flux;
  line_setup ls[2 * DT_MAX_COMP];
  span uni[2 * DT_MAX_COMP];    /* union of all line ranges, disjoint, sorted */
  span cspan[DT_MAX_COMP][2];   /* each component's own ranges */
  int ncspan[DT_MAX_COMP];
  /* Sub-sampled cells of the last evaluation: the disjoint sorted spans
   * sub[0..nsub-1]; cell j of span u has the sub-points
   * sfirst[sbase[u] + j - lo] .. sfirst[sbase[u] + j - lo + 1] - 1. */
  span sub[2 * DT_MAX_COMP];
  int nsub;
  size_t sbase[2 * DT_MAX_COMP];
  size_t *sfirst;   /* pmax + 2 DT_MAX_COMP entries */
  size_t pmax, np;  /* sub-points reserved, used */
  double *sinv;     /* 1/lambda at each sub-point [1/A] */
  double *stau;     /* total optical depth at each sub-point */
  double *sex;      /* exp(-stau) */
  double *sq;       /* per component k: sq[(k*pmax + p)*3 + i] = d tau_k / d p_i */
  int folded;       /* q has been through fold (for the Jacobian) */
  /* For the moments of sub-sampled cells (sub_moments): the pixel averaging
   * alone (pixel i = sum of pw[pwoff[i] + c - pc0[i]] * cell c over
   * c = pc0[i]..pc1[i]), nmom kernel terms hk[(n-1)(2hw+1) + k + hw],
   * moments of a chunk of cells and scratch on the cells. */
  long *pc0, *pc1;
  size_t *pwoff;
  int nmom;
  double *pw, *hk, *mom, *scr;
  double *pedge; /* ln lambda of pixel edges: pixel i spans pedge[i]..pedge[i+1] */
  double g0;     /* the kernel's centre weight */
  int interp;    /* cells of sigma / DT_MODEL_LSF_CELLS, read by interpolation */
  size_t ncoef;  /* entries of coef */
};

double dt_velocity(double lambda, double lambda0, double vsys) {
  return DT_C_KMS * (lambda / (lambda0 * (1.0 + vsys / DT_C_KMS)) - 1.0);
}

double dt_wavelength(double v, double lambda0, double vsys) {
  return lambda0 * (1.0 + vsys / DT_C_KMS) * (1.0 + v / DT_C_KMS);
}

/* x + i y without CMPLX (not every C library provides it); a complex is
 * laid out as double[2] (C11 6.2.5). */
static inline double complex cplx(double x, double y) {
  double complex z;
  ((double *)&z)[0] = x;
  ((double *)&z)[1] = y;
  return z;
}

double dt_voigt_H(double a, double u) { return creal(w_of_z(cplx(u, a))); }

/* Optical depth scale and damping parameter of a line for (N, b):
 *   tau = N sigma0 f H(a,x) / (sqrt(pi) dnu_D),  dnu_D = b / lambda0,
 *   a = Gamma / (4 pi dnu_D)
 * (e.g. Spitzer 1978, Physical Processes in the Interstellar Medium, ch. 3)
 * with sigma0 [cm^2 s^-1], lambda0 [A], b [km/s], Gamma [s^-1]. */
static void line_scales(const dt_line *l, double N, double b, double *t0, double *a) {
  double lam_over_b = ANG_PER_KMS * l->lambda0 / b; /* 1/dnu_D [s] */
  *t0 = N * DT_SIGMA0 * l->f * lam_over_b / SQRT_PI;
  *a = l->gamma * lam_over_b / (4.0 * PI);
}

double dt_line_tau(const dt_line *l, const dt_component *c, double vsys, double lambda) {
  double t0, a;
  line_scales(l, pow(10.0, c->logN), c->b, &t0, &a);
  double lc = dt_wavelength(c->v, l->lambda0, vsys);
  /* x = (nu_rest - nu0)/dnu_D = (c/b)(lambda0/lambda_rest - 1) = (c/b)(lc/lambda - 1) */
  double x = DT_C_KMS / c->b * (lc / lambda - 1.0);
  return t0 * dt_voigt_H(a, x);
}

size_t dt_model_npix(const dt_model *m) { return m ? m->n : 0; }

void dt_model_get_info(const dt_model *m, dt_model_info *info) {
  memset(info, 0, sizeof *info);
  if (!m) return;
  info->npix = m->n;
  info->nfine = m->nf;
  info->oversample = m->ovs;
  info->step_kms = DT_C_KMS * m->dy;
  info->lnlam0 = m->y0;
  info->lsf_sigma_kms = m->sigma_kms;
  info->lsf_halfwidth = m->hw;
  info->tau_cut = m->tau_cut;
  info->interpolated = m->interp;
  info->ncoef = m->ncoef;
}

void dt_model_free(dt_model *m) {
  if (!m) return;
  free(m->invlam);
  free(m->m0);
  free(m->m1);
  free(m->off);
  free(m->coef);
  free(m->tau);
  free(m->dep);
  free(m->ex);
  free(m->q);
  free(m->last_flux);
  free(m->sfirst);
  free(m->sinv);
  free(m->stau);
  free(m->sex);
  free(m->sq);
  free(m->pc0);
  free(m->pc1);
  free(m->pwoff);
  free(m->pw);
  free(m->hk);
  free(m->mom);
  free(m->scr);
  free(m->pedge);
  free(m);
}

/* Sub-points one narrow line can ask for on cells of dyv km/s when
 * b >= DT_MODEL_B_RESOLVED (bounds of the rules of sub_setup, sub_build):
 *  - core: at most 3 + 2 wc/dy cells of at most dy/dc + 1 sub-cells, with
 *    dc = h b < dy, i.e. 3 (dy/dc + 1) + 4 X/h, X/h largest at ln t0 max;
 *  - each wing: the n-th cell beyond at most SUB_KAPPA/n + 1, over at most
 *    SUB_KAPPA + 1 cells. */
static double sub_points_per_line(double dyv) {
  double hmin = SUB_H_SAT / sqrt(SUB_LNT_MAX), xg = sqrt(SUB_LNT_MAX + SUB_GAUSS_LN);
  double rcore = dyv / (hmin * DT_MODEL_B_RESOLVED) + 1.0;
  double core = 4.0 * xg / hmin + 3.0 * rcore;
  double wing = SUB_KAPPA * (log(SUB_KAPPA + 1.0) + 1.0) + SUB_KAPPA + 1.0;
  return core + 2.0 * wing;
}

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

dt_model *dt_model_alloc(const double *wave, size_t n, const dt_model_config *cfg,
                         size_t max_comp, dt_err *e) {
  dt_err_clear(e);
  if (!wave || !cfg || !cfg->doublet) {
    dt_err_set(e, DT_EINVAL, NULL, "model: no pixels or no doublet given");
    return NULL;
  }
  if (n < 2) {
    dt_err_set(e, DT_EINVAL, NULL, "model: need at least 2 pixels, got %zu", n);
    return NULL;
  }
  if (max_comp > DT_MAX_COMP) {
    dt_err_set(e, DT_EINVAL, NULL, "model: at most %d components, asked for %zu", DT_MAX_COMP,
               max_comp);
    return NULL;
  }
  for (size_t i = 0; i < n; i++) {
    if (!isfinite(wave[i]) || wave[i] <= 0 || (i > 0 && !(wave[i] > wave[i - 1]))) {
      dt_err_set(e, DT_EINVAL, NULL,
                 "model: pixel wavelengths must be positive and strictly increasing (pixel %zu)",
                 i);
      return NULL;
    }
  }
  double edge0 = wave[0] - 0.5 * (wave[1] - wave[0]);
  if (!(edge0 > 0)) {
    dt_err_set(e, DT_EINVAL, NULL, "model: first pixel extends to non-positive wavelength");
    return NULL;
  }
  if (!isfinite(cfg->vsys) || fabs(cfg->vsys) >= DT_C_KMS) {
    dt_err_set(e, DT_EINVAL, NULL, "model: systemic velocity %g km/s out of range", cfg->vsys);
    return NULL;
  }
  if (!isfinite(cfg->resolution) || !isfinite(cfg->fwhm_kms)) {
    dt_err_set(e, DT_EINVAL, NULL, "model: resolution or LSF width is not a number");
    return NULL;
  }
  if (cfg->oversample < 0 || cfg->oversample > 1000) {
    dt_err_set(e, DT_EINVAL, NULL, "model: oversampling %d outside 1..1000", cfg->oversample);
    return NULL;
  }
  if (!(cfg->tau_cut >= 0 && cfg->tau_cut < 1)) {
    dt_err_set(e, DT_EINVAL, NULL, "model: tau cut %g outside [0, 1)", cfg->tau_cut);
    return NULL;
  }
  for (int j = 0; j < 2; j++) {
    const dt_line *l = &cfg->doublet->line[j];
    if (!(l->lambda0 > 0) || !(l->f > 0) || !(l->gamma >= 0) || !isfinite(l->gamma)) {
      dt_err_set(e, DT_EINVAL, NULL, "model: doublet %s has unusable atomic data",
                 cfg->doublet->name);
      return NULL;
    }
  }

  dt_model *m = calloc(1, sizeof *m);
  double *lo = NULL, *hi = NULL, *g = NULL;
  long *clo = NULL, *chi = NULL;
  if (!m) goto nomem;
  m->dbl = cfg->doublet;
  m->s = 1.0 + cfg->vsys / DT_C_KMS;
  m->tau_cut = cfg->tau_cut > 0 ? cfg->tau_cut : DT_MODEL_TAU_CUT;
  m->ovs = cfg->oversample > 0 ? cfg->oversample : DT_MODEL_OVERSAMPLE;
  m->exact = cfg->exact_wings != 0;
  m->n = n;
  m->max_comp = max_comp;
  double fwhm = cfg->resolution > 0 ? DT_C_KMS / cfg->resolution
                                    : (cfg->fwhm_kms > 0 ? cfg->fwhm_kms : 0.0);
  m->sigma_kms = fwhm / FWHM_PER_SIGMA;

  /* Pixel edges in ln(lambda): half-way between centres. */
  lo = malloc(n * sizeof *lo);
  hi = malloc(n * sizeof *hi);
  clo = malloc(n * sizeof *clo);
  chi = malloc(n * sizeof *chi);
  if (!lo || !hi || !clo || !chi) goto nomem;
  double minw = INFINITY;
  for (size_t i = 0; i < n; i++) {
    double el = i == 0 ? edge0 : 0.5 * (wave[i - 1] + wave[i]);
    double eh = i == n - 1 ? wave[n - 1] + 0.5 * (wave[n - 1] - wave[n - 2])
                           : 0.5 * (wave[i] + wave[i + 1]);
    lo[i] = log(el);
    hi[i] = log(eh);
    if (hi[i] - lo[i] < minw) minw = hi[i] - lo[i];
  }
  m->dy = minw / m->ovs;
  double sig_cells = m->sigma_kms / (DT_C_KMS * m->dy);
  /* Pixels much finer than the LSF (cells below sigma / (2 LSF_CELLS)):
   * cells of sigma / DT_MODEL_LSF_CELLS sample the convolved profile well
   * enough, and the pixels read it by interpolation (pixel_weights); the
   * matrix then holds about 2 DT_MODEL_LSF_NSIGMA DT_MODEL_LSF_CELLS
   * entries per pixel instead of that times sig_cells / DT_MODEL_LSF_CELLS.
   * Between sigma / (2 LSF_CELLS) and sigma / LSF_CELLS (e.g. 0.5 A pixels
   * at R 3000) the cells are left as they are: at most twice the entries,
   * and no change for a few per cent coarser cells. */
  m->interp = m->sigma_kms > 0 && sig_cells > 2.0 * DT_MODEL_LSF_CELLS;
  if (m->interp) {
    m->dy = m->sigma_kms / DT_C_KMS / DT_MODEL_LSF_CELLS;
    sig_cells = DT_MODEL_LSF_CELLS;
  }
  double hwd = m->sigma_kms > 0 ? ceil(DT_MODEL_LSF_NSIGMA * sig_cells) : 0.0;
  /* interpolation reaches two cell centres beyond a pixel's ends */
  double pad = hwd + (m->interp ? 2.0 : 0.0);
  double nfd = ceil((hi[n - 1] - lo[0]) / m->dy) + 2.0 * pad + 1.0;
  if (!(minw > 0) || !isfinite(nfd) || nfd > (double)MAX_FINE || hwd > (double)MAX_FINE / 4) {
    dt_err_set(e, DT_EINVAL, NULL,
               "model: sub-pixel grid would be too large (pixels span a factor %g in "
               "wavelength, narrowest is %g km/s, LSF sigma %g km/s)",
               exp(hi[n - 1] - lo[0]), DT_C_KMS * minw, m->sigma_kms);
    goto fail;
  }
  m->hw = (int)hwd;
  m->nf = (size_t)nfd;
  m->y0 = lo[0] - pad * m->dy;
  const size_t nf = m->nf;
  const int hw = m->hw;

  g = malloc((size_t)(2 * hw + 1) * sizeof *g);
  m->invlam = malloc(nf * sizeof *m->invlam);
  m->m0 = malloc(n * sizeof *m->m0);
  m->m1 = malloc(n * sizeof *m->m1);
  m->off = malloc(n * sizeof *m->off);
  m->tau = calloc(nf, sizeof *m->tau);
  m->dep = calloc(nf, sizeof *m->dep);
  m->ex = calloc(nf, sizeof *m->ex);
  m->q = calloc((max_comp ? max_comp : 1) * nf * 3, sizeof *m->q);
  m->last_flux = malloc(n * sizeof *m->last_flux);
  /* Sub-points for narrow lines: the bound for b >= DT_MODEL_B_RESOLVED,
   * at most SUB_LINE_CAP per line (sub_setup coarsens beyond; malloc, so
   * pages never used are never touched). */
  size_t kc = max_comp ? max_comp : 1;
  double ppl = fmin(sub_points_per_line(DT_C_KMS * m->dy), SUB_LINE_CAP);
  m->pmax = 2 * kc * (size_t)ppl;
  m->sfirst = malloc((m->pmax + 2 * DT_MAX_COMP + 1) * sizeof *m->sfirst);
  m->sinv = malloc(m->pmax * sizeof *m->sinv);
  m->stau = malloc(m->pmax * sizeof *m->stau);
  m->sex = malloc(m->pmax * sizeof *m->sex);
  m->sq = malloc(kc * m->pmax * 3 * sizeof *m->sq);
  m->pc0 = malloc(n * sizeof *m->pc0);
  m->pc1 = malloc(n * sizeof *m->pc1);
  m->pwoff = malloc(n * sizeof *m->pwoff);
  m->hk = malloc((size_t)MOM_MAX * (size_t)(2 * hw + 1) * sizeof *m->hk);
  m->mom = malloc(MOM_CHUNK * 3 * MOM_MAX * sizeof *m->mom);
  m->scr = malloc(3 * nf * sizeof *m->scr);
  m->pedge = malloc((n + 1) * sizeof *m->pedge);
  if (!g || !m->invlam || !m->m0 || !m->m1 || !m->off || !m->tau || !m->dep || !m->ex || !m->q ||
      !m->last_flux || !m->sfirst || !m->sinv || !m->stau || !m->sex || !m->sq || !m->pc0 ||
      !m->pc1 || !m->pwoff || !m->hk || !m->mom || !m->scr ||
      !m->pedge)
    goto nomem;

  /* The kernel, sampled at whole cells and normalised. */
  double gsum = 0;
  for (int k = -hw; k <= hw; k++) {
    double t = hw ? k / sig_cells : 0.0;
    g[k + hw] = exp(-0.5 * t * t);
    gsum += g[k + hw];
  }
  for (int k = 0; k <= 2 * hw; k++) g[k] /= gsum;
  m->g0 = g[hw];
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
  for (size_t j = 0; j < nf; j++) m->invlam[j] = exp(-(m->y0 + (j + 0.5) * m->dy));
  for (size_t i = 0; i < n; i++) m->pedge[i] = lo[i];
  m->pedge[n] = hi[n - 1];

  /* Bands: pixel i reads cells clo..chi (those it overlaps, or with
   * interpolation the nodes its interpolant uses); the kernel widens that
   * by hw. */
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
    clo[i] = a;
    chi[i] = b;
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
  if (!m->coef || !m->pw) goto nomem;
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
    for (long j = clo[i]; j <= chi[i]; j++) {
      double p = pwi[j];
      if (p == 0) continue;
      /* convolved cell j = sum_k g[k] * cell(j - k) */
      for (int k = -hw; k <= hw; k++) row[j - k - m->m0[i]] += p * g[k + hw];
    }
  }
  free(clo);
  free(chi);
  free(g);
  free(lo);
  free(hi);
  return m;

nomem:
  dt_err_set(e, DT_ENOMEM, NULL, "model: out of memory");
fail:
  free(clo);
  free(chi);
  free(g);
  free(lo);
  free(hi);
  dt_model_free(m);
  return NULL;
}

/* Cells where a line with scale t0, damping a, centre lc and width b can
 * have tau > tau_cut.  Starting from |x| where the Gaussian core
 * t0 exp(-x^2) or the Lorentzian wing t0 a/(sqrt(pi) x^2) falls to tau_cut,
 * X is widened until the exact t0 H(a, X) <= tau_cut; H falls monotonically
 * in |x| (a convolution of two symmetric unimodal profiles), so nothing
 * beyond X exceeds the cut.  The range is the cells whose centre lies
 * within |x| <= X, or with overlap set (narrow lines, which may fit between
 * two centres) every cell that meets it. */
static span line_range(const dt_model *m, double t0, double a, double b, double lc, int overlap) {
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

/* First pixel whose band reaches cell c (bands are sorted at both ends). */
static size_t first_pixel(const dt_model *m, long c) {
  size_t a = 0, b = m->n;
  while (a < b) {
    size_t mid = a + (b - a) / 2;
    if (m->m1[mid] < c)
      a = mid + 1;
    else
      b = mid;
  }
  return a;
}

/* Merge the spans sp[0..n-1] (in place) into sorted disjoint spans. */
static int merge_spans(span *sp, int n) {
  for (int i = 1; i < n; i++) {
    span t = sp[i];
    int j = i - 1;
    while (j >= 0 && sp[j].lo > t.lo) {
      sp[j + 1] = sp[j];
      j--;
    }
    sp[j + 1] = t;
  }
  int k = 0;
  for (int i = 0; i < n; i++) {
    if (k > 0 && sp[i].lo <= sp[k - 1].hi + 1) {
      if (sp[i].hi > sp[k - 1].hi) sp[k - 1].hi = sp[i].hi;
    } else {
      sp[k++] = sp[i];
    }
  }
  return k;
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
    double complex w = w_of_z(z);
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
    double complex w = w_of_z(z);
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

/* ---- narrow lines ---------------------------------------------------- */

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
static void sub_setup(const dt_model *m, line_setup *s, double b) {
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

static size_t *sub_first(dt_model *m, int u, long j) {
  return m->sfirst + m->sbase[u] + (size_t)(j - m->sub[u].lo);
}

/* The sub-sampled cells of this evaluation, their numbers of sub-cells and
 * the sub-cell centres.  r of a cell is the most any narrow line asks for
 * there; if all together exceed the buffer (possible only with many narrow
 * lines of b < DT_MODEL_B_RESOLVED or with cells over ~14 km/s) every r is
 * reduced in the same proportion. */
static void sub_build(dt_model *m, int nl) {
  line_setup *ls = m->ls;
  int nn = 0;
  for (int l = 0; l < nl; l++)
    if (ls[l].narrow && ls[l].sr.lo <= ls[l].sr.hi) m->sub[nn++] = ls[l].sr;
  m->nsub = merge_spans(m->sub, nn);
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

/* ---- evaluation of one line ------------------------------------------- */

/* How H = Re w(x + ia) and its derivatives are obtained for one line. */
typedef struct voigt_src {
  double a, Xc;     /* |x| <= Xc: core table (kcore > 0) or w(z) */
  double cinvh;
  int kcore, kwing; /* wing table for Xc < |x| <= xw when kwing > 0 */
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
    double complex w = w_of_z(cplx(x, a));
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
static void eval_line(dt_model *m, const line_setup *s, double b, double *qk, double *sqk) {
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
  voigt_src v = {.a = a, .Xc = INFINITY, .kcore = -1, .kwing = 0, .xw = xmax};
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

const double *dt_model_fine_tau(const dt_model *m) { return m ? m->tau : NULL; }

/* For the Jacobian, turn q (d tau_k/dp per cell) into the cell values of
 * exp(-tau) d tau_k/dp: times exp(-tau) at ordinary cells, the mean over
 * the sub-points at sub-sampled ones. */
static void fold(dt_model *m, size_t ncomp) {
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
  size_t a = 0, b = m->n;
  while (a < b) {
    size_t mid = a + (b - a) / 2;
    if (m->pc1[mid] < A)
      a = mid + 1;
    else
      b = mid;
  }
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
  size_t a = 0, b = m->n;
  while (a < b) {
    size_t mid = a + (b - a) / 2;
    if (m->pc1[mid] < j0)
      a = mid + 1;
    else
      b = mid;
  }
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
      double d = g0 * (left / r - f * mean) * m->dy; /* content moved below the edge */
      out[i * ld + (size_t)v] -= d / wl;
      out[(i + 1) * ld + (size_t)v] += d / wr;
    }
  }
}

/* The corrections for every sub-sampled cell (k < 0, the flux) or for those
 * in the ranges of component k (its Jacobian; its q is valid only there),
 * sub_moments in chunks of MOM_CHUNK cells. */
static void sub_corrections(dt_model *m, long k, double *out, size_t ld) {
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

int dt_model_eval(dt_model *m, const dt_component *comp, size_t ncomp, double *flux, double *jac,
                  size_t ldj) {
  if (!m || !flux || (ncomp && !comp) || ncomp > m->max_comp) return DT_EINVAL;
  if (jac && ldj < 3 * ncomp) return DT_EINVAL;
  for (size_t k = 0; k < ncomp; k++) {
    const dt_component *c = &comp[k];
    if (!(c->logN <= DT_MODEL_LOGN_MAX) || !(c->b >= DT_MODEL_B_MIN) || !isfinite(c->logN) ||
        !isfinite(c->b) || !isfinite(c->v) || fabs(c->v) >= DT_C_KMS)
      return DT_EINVAL;
    for (int l = 0; l < 2; l++) { /* cannot happen within the limits above */
      double t0, a;
      line_scales(&m->dbl->line[l], pow(10.0, c->logN), c->b, &t0, &a);
      if (!isfinite(t0) || !isfinite(a) || !isfinite(DT_C_KMS / c->b)) return DT_EINVAL;
    }
  }
  const size_t n = m->n, nf = m->nf;
  const dt_doublet *d = m->dbl;
  if (m->have_last && ncomp == m->nlast &&
      (ncomp == 0 || memcmp(comp, m->last, ncomp * sizeof *comp) == 0)) {
    memcpy(flux, m->last_flux, n * sizeof *flux);
    goto jacobian;
  }
  m->have_last = 0;
  m->folded = 0;

  /* Clear what the last evaluation left, so tau is zero outside the ranges. */
  for (int u = 0; u < m->nprev; u++)
    memset(m->tau + m->prev[u].lo, 0, (size_t)(m->prev[u].hi - m->prev[u].lo + 1) * sizeof(double));

  /* Set up every line of every component and find where it matters. */
  int nl = 0;
  for (size_t k = 0; k < ncomp; k++) {
    const dt_component *c = &comp[k];
    double N = pow(10.0, c->logN);
    for (int l = 0; l < 2; l++) {
      line_setup *s = &m->ls[2 * k + l];
      const dt_line *li = &d->line[l];
      line_scales(li, N, c->b, &s->t0, &s->a);
      s->lc = li->lambda0 * m->s * (1.0 + c->v / DT_C_KMS);
      s->cb = DT_C_KMS / c->b;
      s->dxdv_fac = 1.0 / (c->b * (1.0 + c->v / DT_C_KMS));
      sub_setup(m, s, c->b);
      s->r = line_range(m, s->t0, s->a, c->b, s->lc, s->narrow);
      if (s->sr.lo < s->r.lo) s->sr.lo = s->r.lo;
      if (s->sr.hi > s->r.hi) s->sr.hi = s->r.hi;
      if (s->r.lo <= s->r.hi) m->uni[nl++] = s->r;
    }
    int nc = 0;
    for (int l = 0; l < 2; l++)
      if (m->ls[2 * k + l].r.lo <= m->ls[2 * k + l].r.hi) m->cspan[k][nc++] = m->ls[2 * k + l].r;
    m->ncspan[k] = merge_spans(m->cspan[k], nc);
  }
  int nu = merge_spans(m->uni, nl);
  memcpy(m->prev, m->uni, (size_t)nu * sizeof(span));
  m->nprev = nu;
  sub_build(m, (int)(2 * ncomp));
  const size_t np = m->np;
  if (np) {
    memset(m->stau, 0, np * sizeof *m->stau);
    for (size_t k = 0; k < ncomp; k++) memset(m->sq + k * m->pmax * 3, 0, np * 3 * sizeof *m->sq);
  }

  /* Optical depth and its derivatives on the cells (the derivatives cost
   * little next to w(z), and a Jacobian usually follows at the same point). */
  for (size_t k = 0; k < ncomp; k++) {
    double *qk = m->q + k * nf * 3, *sqk = m->sq + k * m->pmax * 3;
    for (int u = 0; u < m->ncspan[k]; u++)
      memset(qk + 3 * m->cspan[k][u].lo, 0,
             (size_t)(m->cspan[k][u].hi - m->cspan[k][u].lo + 1) * 3 * sizeof(double));
    eval_line(m, &m->ls[2 * k], comp[k].b, qk, sqk);
    eval_line(m, &m->ls[2 * k + 1], comp[k].b, qk, sqk);
  }
  for (int u = 0; u < nu; u++)
    for (long j = m->uni[u].lo; j <= m->uni[u].hi; j++) {
      double t = m->tau[j];
      if (t < 0.5) {
        double dd = -expm1(-t);
        m->dep[j] = dd;
        m->ex[j] = 1.0 - dd;
      } else {
        double ee = exp(-t);
        m->ex[j] = ee;
        m->dep[j] = 1.0 - ee;
      }
    }
  /* Sub-sampled cells: the means over their sub-points instead. */
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

  /* Through the LSF and onto the pixels: flux = 1 - B (1 - exp(-tau)). */
  for (size_t i = 0; i < n; i++) flux[i] = 1.0;
  for (int u = 0; u < nu; u++) {
    const long A = m->uni[u].lo, B = m->uni[u].hi;
    for (size_t i = first_pixel(m, A); i < n && m->m0[i] <= B; i++) {
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
  if (m->nsub) sub_corrections(m, -1, flux, 1);
  if (m->nsub || m->interp) {
    /* the corrections keep 0 <= flux <= 1 only to ~1e-7 for an LSF of
     * about one cell (their kernels have small negative lobes there), and
     * cubic interpolation overshoots by up to ~1e-5 of a line's depth */
    for (size_t i = 0; i < n; i++) flux[i] = flux[i] < 0 ? 0.0 : (flux[i] > 1 ? 1.0 : flux[i]);
  }
  memcpy(m->last_flux, flux, n * sizeof *flux);
  if (ncomp) memcpy(m->last, comp, ncomp * sizeof *comp);
  m->nlast = ncomp;
  m->have_last = 1;

jacobian:
  if (!jac) return DT_OK;
  if (!m->folded) fold(m, ncomp);

  /* d flux / dp = B (-exp(-tau) dtau/dp), only where component k lives. */
  for (size_t i = 0; i < n; i++) memset(jac + i * ldj, 0, 3 * ncomp * sizeof(double));
  for (size_t k = 0; k < ncomp; k++) {
    const double *qk = m->q + k * nf * 3;
    for (int u = 0; u < m->ncspan[k]; u++) {
      const long A = m->cspan[k][u].lo, B = m->cspan[k][u].hi;
      for (size_t i = first_pixel(m, A); i < n && m->m0[i] <= B; i++) {
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
  /* and through the moments of sub-sampled cells */
  if (m->nsub)
    for (size_t k = 0; k < ncomp; k++)
      sub_corrections(m, (long)k, jac + 3 * k, ldj);
  return DT_OK;
}
