/* The absorption model of a doublet: Voigt components seen through a
 * Gaussian line-spread function and integrated over pixels.
 *
 * A component (logN, b, v) gives each line of the doublet the optical depth
 *     tau(nu) = N * sigma0 * f * H(a, x) / (sqrt(pi) * dnu_D)
 * with sigma0 = pi e^2/(m_e c) = 0.02654008856 cm^2 s^-1, dnu_D = b/lambda0,
 * x = (nu_rest - nu0)/dnu_D, a = Gamma/(4 pi dnu_D) and H(a,x) = Re w(x + i a)
 * (w is the Faddeeva function, from libcerf).  nu_rest is the frequency in
 * the component's rest frame: lambda_rest = lambda / ((1+vsys/c)(1+v/c)).
 * Components add in tau; the normalised flux exp(-sum tau) is computed on a
 * sub-pixel grid uniform in ln(lambda), convolved with a Gaussian LSF of
 * constant velocity FWHM (c/R) and averaged back over each pixel.
 *
 * Both lines share N, b, v.  The model is normalised (continuum = 1); the
 * fitter multiplies by the continuum.
 *
 * Hyperfine structure (cfg.hfs, off by default): a line given components
 * (dv_h, s_h) is the sum of lines at lambda0 (1 + dv_h/c) with oscillator
 * strength s_h f, each with the component's N, b and v, evaluated like any
 * other line (narrow-line sub-sampling and Jacobian included).  A line
 * with one component at dv = 0, share 1 is the single line exactly.
 *
 * The discretisation: pixel edges lie half-way between pixel centres (the
 * first and last pixels are symmetric about their centres).  The sub-pixel
 * cells are uniform in ln(lambda), of width (narrowest pixel)/oversample
 * (or sigma_LSF/DT_MODEL_LSF_CELLS when that is coarser, see below),
 * starting a kernel half-width hw below the first pixel's lower edge (hw + 2
 * with the coarser cells) and reaching as far beyond the last pixel; each
 * cell is represented by its centre.
 * The LSF kernel is the Gaussian sampled at whole cells out to
 * hw = ceil(DT_MODEL_LSF_NSIGMA sigma / cell) and normalised to sum 1.  A
 * pixel's value is the mean of the convolved cells over the pixel's extent
 * in ln(lambda), each cell weighted by its overlap with the pixel.
 *
 * Lines narrower than the cells.  A line with optical depth scale t0 (see
 * above, tau = t0 H) is "narrow" when the cell is wider than h b,
 * h = min(0.7, 0.9/sqrt(ln t0)) (0.7 for t0 <= 1): the centre value would
 * then misjudge its equivalent width (several times over, or missing the
 * line altogether, for b of a tenth of a cell).  The cells around a narrow
 * line (its Doppler core, and its damping wings out to where they are
 * smooth on the scale of a cell) are represented instead by the mean of
 * exp(-tau) over r equal sub-cells, r
 * chosen from what the narrow lines nearby need, with every line evaluated
 * at the sub-cells.  Where a narrow line sits within its cell is kept too:
 * with an LSF of at least one cell (sigma), the departures of the sub-cells
 * from the cell mean reach the neighbouring cells through the kernel moved
 * by their offsets (its Hermite expansion); with no LSF or a narrower one,
 * a cell cut by a pixel edge gives each pixel what lies on its side.
 * model_narrow.c (sub_setup) gives the rules; the result: the equivalent width of
 * a narrow line within ~3e-4 of itself (tests/unit/test_model.c: b = 0.3-5
 * km/s, log N 10-15 on 0.5 and 1 A pixels), pixel values within ~1e-3 of
 * the depth beyond the grid's usual sampling of the convolved profile, and
 * a line's centroid following v within a cell.  An LSF narrower than one
 * cell carries the place of a narrow line only across pixel edges (errors
 * of a few per cent of its depth: such data want a larger oversample). */
#ifndef DOUBLETTY_MODEL_H
#define DOUBLETTY_MODEL_H
#include <stddef.h>
#include "doubletty/atomic.h"
#include "doubletty/hyperfine.h"
#include "doubletty/status.h"

#define DT_MAX_COMP 8
#define DT_SIGMA0 0.02654008856   /* pi e^2/(m_e c) = pi r_e c [cm^2 s^-1], CODATA 2018 */

typedef struct dt_component {
  double logN;   /* log10 column density [cm^-2] */
  double b;      /* Doppler parameter [km/s] */
  double v;      /* velocity [km/s] relative to vsys */
} dt_component;

typedef struct dt_model_config {
  const dt_doublet *doublet;
  double vsys;        /* rest frame [km/s]: redshift 1+z = 1 + vsys/c */
  double resolution;  /* resolving power R = lambda/FWHM; used when > 0 */
  double fwhm_kms;    /* LSF FWHM [km/s], used when resolution <= 0;
                         both <= 0: no instrumental broadening */
  int oversample;     /* sub-samples per pixel (>= 1; 0 = default 5) */
  double tau_cut;     /* wings are evaluated until tau < tau_cut
                         (0 = default DT_MODEL_TAU_CUT): the truncation
                         error bound */
  int exact_wings;    /* 1: call w(z) at every sub-pixel cell (reference,
                         slow); 0: interpolate w(z) from exact values at
                         nodes where that is cheaper (error in tau below
                         0.1 tau_cut) */
  const dt_hfs_line *hfs[2]; /* hyperfine components of line[0], line[1]
                         (hyperfine.h; copied by dt_model_alloc); NULL: the
                         line is single.  A split line is the sum of its
                         components: the same N, b, v, f times the share,
                         wavelength lambda0 (1 + dv/c) */
  const double *lsf_fwhm_kms; /* optional: the LSF FWHM [km/s] at each of
                         the n pixels (finite, > 0), which then replaces
                         resolution and fwhm_kms: pixel i is the spectrum
                         seen through the Gaussian of its own width, so
                         each line is broadened as at its own wavelength
                         (see "Resolution per pixel" below).  NULL: the
                         constant width above, exactly as without it. */
} dt_model_config;

/* Defaults used when the config leaves a field at 0.
 *
 * Accuracy of dt_model_eval: a line is evaluated only where its tau can
 * exceed tau_cut, and w(z) is interpolated from exact values (quintic
 * Hermite in the core, cubic in 1/x in the far wings) with errors of at most
 * 0.1 tau_cut in tau; so each line changes exp(-tau), and hence the pixel
 * flux, by at most 1.1 tau_cut.  The default 1e-5 is a thousand times below
 * the noise of S/N = 100 data and loses under 1e-3 of the equivalent width
 * of any line with central tau above 0.01; 1e-7 costs about four times as
 * much (tests/bench/bench_model.c). */
#define DT_MODEL_OVERSAMPLE 5
#define DT_MODEL_TAU_CUT 1e-5
/* The Gaussian LSF kernel is cut at this many standard deviations and
 * renormalised (the weight dropped is 2*Phi(-4.5) = 6.8e-6). */
#define DT_MODEL_LSF_NSIGMA 4.5
/* Pixels much finer than the LSF.  When (narrowest pixel)/oversample would
 * be finer than sigma_LSF / (2 DT_MODEL_LSF_CELLS), the cells are
 * sigma_LSF / DT_MODEL_LSF_CELLS instead, and each pixel is the mean over
 * its extent of the piecewise-cubic interpolant through the convolved cell
 * centres (for a pixel narrower than a cell, nearly its value at the pixel
 * centre).  The pixel operator then keeps about
 * 2 DT_MODEL_LSF_NSIGMA DT_MODEL_LSF_CELLS + 4 entries per pixel however
 * fine the pixels (instead of growing as sigma / pixel width; at most about
 * twice that where the finer cells are kept), and the flux stays within
 * ~3e-5 of a direct high-resolution convolution (test_model.c, with a line
 * narrower than these cells, which is sub-sampled as below). */
#define DT_MODEL_LSF_CELLS 8

/* Resolution per pixel (cfg.lsf_fwhm_kms).  Row i of the pixel operator is
 * built as above with the Gaussian of pixel i's own sigma_i (sampled at
 * whole cells, cut at ceil(DT_MODEL_LSF_NSIGMA sigma_i / cell) and
 * normalised to sum 1): flux_i = mean over pixel i of (G_sigma_i *
 * exp(-tau)), the LSF as an instrument's calibration gives it at each
 * pixel.  The cells follow from the narrowest sigma, the band width from
 * the widest.  An array of equal widths gives the constant model (to
 * rounding).  Narrow lines: their corrections go through the kernel of the
 * pixel holding each cell (moved within the cell, tabulated at widths 2%
 * apart and interpolated, ~5e-5 of the correction), or at pixel edges
 * through each pixel's centre weight; the moved kernels are used when the
 * narrowest LSF is at least one cell, the pixel edges otherwise.  Cost: an
 * evaluation with its Jacobian took 1.0-2.1 times as long as with one
 * width (narrow lines on pixels finer than the LSF the most).  The
 * accuracy stated above holds
 * (tests/unit/test_model_lsf.c; tests/py/lsf_numpy.py against a direct
 * convolution with the varying Gaussian). */

typedef struct dt_model dt_model;

/* What dt_model_alloc derived from the pixels and the config. */
typedef struct dt_model_info {
  size_t npix;          /* pixels */
  size_t nfine;         /* points of the sub-pixel grid (including padding) */
  int oversample;       /* as used */
  double step_kms;      /* sub-pixel step = c * d(ln lambda) [km/s] */
  double lnlam0;        /* ln(lambda [A]) of the lower edge of fine cell 0 */
  double lsf_sigma_kms; /* Gaussian LSF sigma [km/s]; 0 = none */
  int lsf_halfwidth;    /* kernel half-width in sub-pixel steps */
  double tau_cut;       /* as used */
  int interpolated;     /* 1: cells of sigma_LSF / DT_MODEL_LSF_CELLS read by
                           interpolation (pixels much finer than the LSF) */
  size_t ncoef;         /* entries of the banded pixel operator (8 bytes each) */
  int lsf_per_pixel;    /* 1: widths per pixel (lsf_sigma_kms is the
                           narrowest, lsf_sigma_max_kms the widest) */
  double lsf_sigma_max_kms;
} dt_model_info;

/* Allocate a model on n >= 2 pixel centres wave[] (vacuum Angstrom, strictly
 * increasing; typically the fit window of a spectrum), for up to max_comp
 * components.  All work arrays are allocated here, none in dt_model_eval.
 * cfg->doublet is referenced, not copied: it must outlive the model. */
dt_model *dt_model_alloc(const double *wave, size_t n, const dt_model_config *cfg,
                         size_t max_comp, dt_err *e);
void dt_model_free(dt_model *m);
size_t dt_model_npix(const dt_model *m);
void dt_model_get_info(const dt_model *m, dt_model_info *info);
/* Total optical depth on the sub-pixel grid from the last dt_model_eval
 * (info.nfine values, cell j centred at ln(lambda) = lnlam0 + (j+0.5) step/c;
 * zero where every line is below tau_cut).  Always the value at the cell
 * centre, also where the model uses a cell's mean (narrow lines).  For
 * tests and diagnostics. */
const double *dt_model_fine_tau(const dt_model *m);

/* Components outside these limits are refused by dt_model_eval. */
#define DT_MODEL_B_MIN 1e-4     /* km/s */
#define DT_MODEL_LOGN_MAX 30.0  /* log10 cm^-2 */
/* Lines narrower than the sub-pixel cells are sub-sampled (see above); the
 * buffers for that are sized in dt_model_alloc so that every component with
 * b >= DT_MODEL_B_RESOLVED [km/s] gets the full sampling on cells of up to
 * ~14 km/s.  Narrower components are still evaluated; only when they (or
 * many narrow components at once on coarser cells) would need more
 * sub-points than reserved is the sub-sampling of that evaluation coarsened
 * in proportion, with correspondingly larger errors. */
#define DT_MODEL_B_RESOLVED 0.3

/* Normalised model flux on the pixels, and optionally its Jacobian:
 * jac[i*ldj + 3k + 0,1,2] = d flux_i / d(logN_k, b_k, v_k).  jac may be NULL.
 * Returns DT_EINVAL for ncomp > max_comp, ldj < 3 ncomp, or a non-physical
 * component (b < DT_MODEL_B_MIN, logN > DT_MODEL_LOGN_MAX, |v| >= c, or
 * anything not finite).  The work of the last evaluation is kept: asking for
 * the Jacobian at the same components again costs only the pixel sums. */
int dt_model_eval(dt_model *m, const dt_component *comp, size_t ncomp,
                  double *flux, double *jac, size_t ldj);

/* The Voigt function H(a, u) = Re w(u + i a).
 *
 * Given: a >= 0, the damping parameter Gamma/(4 pi dnu_D); u, the distance
 *   from the line centre in Doppler widths.
 * Returned: H(a, u); integral over u is sqrt(pi), H(0, u) = exp(-u^2).
 * Notes: w is the Faddeeva function: near the real axis (a <= 0.25,
 *   |u| <= 25, a |u| <= 1: every doublet's core) its Taylor series in a
 *   from libcerf's Im w(u) on the axis, elsewhere libcerf's w_of_z; it
 *   meets H(a, 0) = erfcx(a) and H(0, u) = exp(-u^2) to 1e-12 relative,
 *   and w_of_z to 3e-12 (tests/unit/test_voigt.c).  dt_model_eval
 *   interpolates it in tables (model_voigt.c); this is the exact value.
 * References: Armstrong 1967, JQSRT 7, 61 (H as Re w, from memory);
 *   Abramowitz & Stegun 1964, 7.1.3 (w), 7.1.20 (its derivatives). */
double dt_voigt_H(double a, double u);
/* H(a, u) and L(a, u) = Im w(u + i a), the same way. */
void dt_voigt_HL(double a, double u, double *H, double *L);

/* Unconvolved, untruncated optical depth of one line of one component at a
 * vacuum wavelength (reference evaluation; slow). */
double dt_line_tau(const dt_line *l, const dt_component *c, double vsys,
                   double lambda);

/* Velocity [km/s] of wavelength lambda relative to line centre lambda0
 * redshifted by vsys, and back: v = c (lambda/(lambda0 (1+vsys/c)) - 1). */
double dt_velocity(double lambda, double lambda0, double vsys);
double dt_wavelength(double v, double lambda0, double vsys);

#endif
