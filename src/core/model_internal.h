/* Private to the model (model.c, model_voigt.c, model_narrow.c,
 * model_lsf.c): the workspace behind dt_model, the tuning constants of the
 * discretisation and the stages the files share.  See model.c for the
 * whole picture; each file's header describes its part.
 *
 * The parts:
 *   model.c         the sub-pixel grid (dt_model_alloc in stages), the
 *                   evaluation loop (dt_model_eval), spans of cells;
 *   model_voigt.c   w(z) and the Voigt function: line scales, the cells a
 *                   line reaches, the core and wing tables, one line's
 *                   optical depth and derivatives;
 *   model_narrow.c  lines narrower than the cells: sub-cell averaging and
 *                   the corrections that keep a line's place in its cell;
 *   model_lsf.c     the banded line-spread + pixel operator (coarse cells
 *                   read by cubic pixel integration) and its application. */
#ifndef DOUBLETTY_MODEL_INTERNAL_H
#define DOUBLETTY_MODEL_INTERNAL_H
#include <complex.h>
#include <stddef.h>

#include "doubletty/model.h"

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
/* Widths per pixel: the moved kernels tabulated at widths a factor 1 +
 * KT_STEP apart and interpolated linearly in between (relative error of
 * the corrections ~KT_STEP^2/8, 5e-5) */
#define KT_STEP 0.02

/* Lines one component can have: both lines of the doublet, each split into
 * up to DT_HFS_MAX hyperfine components. */
#define LINES_PER_COMP (2 * DT_HFS_MAX)
#define MAX_LINES (LINES_PER_COMP * DT_MAX_COMP)

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
  /* The lines one component gives: line[l] of the doublet split into its
   * hyperfine components (one at dv = 0, share 1 when single); nlc in all,
   * the lines of component k are ls[k nlc .. k nlc + nlc - 1]. */
  dt_hfs_line hfs[2];
  int nlc;
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
  span prev[MAX_LINES]; /* cells where tau was set by the last evaluation */
  int nprev;
  /* The last evaluation's components and flux: a Jacobian asked for at the
   * parameters of the previous call (as a least-squares solver does after
   * accepting a step) reuses the optical depths and their derivatives. */
  dt_component last[DT_MAX_COMP];
  size_t nlast;
  int have_last;
  double *last_flux;
  line_setup ls[MAX_LINES];
  span uni[MAX_LINES];          /* union of all line ranges, disjoint, sorted */
  span cspan[DT_MAX_COMP][LINES_PER_COMP]; /* each component's own ranges */
  int ncspan[DT_MAX_COMP];
  /* Sub-sampled cells of the last evaluation: the disjoint sorted spans
   * sub[0..nsub-1]; cell j of span u has the sub-points
   * sfirst[sbase[u] + j - lo] .. sfirst[sbase[u] + j - lo + 1] - 1. */
  span sub[MAX_LINES];
  int nsub;
  size_t sbase[MAX_LINES];
  size_t *sfirst;   /* pmax + MAX_LINES + 1 entries */
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
  /* Resolution per pixel (cfg.lsf_fwhm_kms; NULL sigpix: constant) */
  double *sigpix;       /* LSF sigma of each pixel [cells] */
  double sigma_max_kms; /* the widest (sigma_kms: the narrowest) */
  double *gloc;         /* a kernel of 2 hw + 1 weights */
  double *g0pix;        /* each pixel's kernel centre weight */
  /* the moved kernels of the narrow-line corrections, tabulated at widths
   * sigma_min (1 + KT_STEP)^k, k < nkt: nkt x nmom x (2 hw + 1) in hkt; cell
   * c uses kernel kc[c] and kc[c] + 1 with weights 1 - tc[c], tc[c] */
  double *hkt, *tc;
  int *kc, nkt;
};

/* x + i y without CMPLX (not every C library provides it); a complex is
 * laid out as double[2] (C11 6.2.5). */
static inline double complex cplx(double x, double y) {
  double complex z;
  ((double *)&z)[0] = x;
  ((double *)&z)[1] = y;
  return z;
}

/* w(x + ia), a >= 0: near the real axis by a series (model_voigt.c), else
 * libcerf's w_of_z. */
double complex dt_faddeeva(double x, double a);

/* First sub-point of cell j of sub-sampled span u (model_narrow.c). */
static inline size_t *sub_first(const dt_model *m, int u, long j) {
  return m->sfirst + m->sbase[u] + (size_t)(j - m->sub[u].lo);
}

/* model.c: merge the spans sp[0..n-1] (in place) into sorted disjoint
 * spans; returns their number. */
int dt_model_merge_spans(span *sp, int n);

/* model_voigt.c */
void dt_model_line_scales(const dt_line *l, double N, double b, double *t0, double *a);
span dt_model_line_range(const dt_model *m, double t0, double a, double b, double lc,
                         int overlap);
void dt_model_eval_line(dt_model *m, const line_setup *s, double b, double *qk, double *sqk);

/* model_narrow.c */
double dt_model_sub_points_per_line(double dyv);
void dt_model_sub_setup(const dt_model *m, line_setup *s, double b);
void dt_model_sub_build(dt_model *m, int nl);
void dt_model_sub_means(dt_model *m);
void dt_model_fold(dt_model *m, size_t ncomp);
void dt_model_sub_corrections(dt_model *m, long k, double *out, size_t ld);

/* model_lsf.c */
void dt_model_lsf_kernel(dt_model *m, double *g, double sig_cells);
void dt_model_moment_kernel(dt_model *m, const double *g, double sig_cells);
int dt_model_pixel_operator(dt_model *m, const double *lo, const double *hi, const double *g);
void dt_model_apply_flux(const dt_model *m, int nu, double *flux);
void dt_model_moments_pix(dt_model *m, long j0, long j1, int nv, double *out, size_t ld);
int dt_model_moment_table(dt_model *m);
void dt_model_apply_jac(const dt_model *m, size_t ncomp, double *jac, size_t ldj);

/* The first i in [0, n) with a[i] >= x (n if none), a sorted ascending:
 * the first pixel whose band or cells reach cell x. */
static inline size_t dt_model_first_reaching(const long *a, size_t n, long x) {
  size_t lo = 0, hi = n;
  while (lo < hi) {
    size_t mid = lo + (hi - lo) / 2;
    if (a[mid] < x)
      lo = mid + 1;
    else
      hi = mid;
  }
  return lo;
}

#endif
