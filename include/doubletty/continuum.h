/* The continuum under a doublet: a smooth curve fitted to the flux where
 * there is no absorption, with its 1-sigma uncertainty per pixel.
 *
 * Two shapes: a Legendre polynomial P_0..P_K in x, where x maps the fitted
 * region's wavelength span linearly onto [-1, 1]; or a cubic smoothing
 * B-spline with uniform breakpoints (GSL bspline).  Either is linear in its
 * coefficients and is fitted by weighted linear least squares
 * (gsl_multifit_wlinear, weights 1/sigma^2).  The per-pixel uncertainty is
 *     sigma_C(lambda)^2 = B(lambda)^T Cov B(lambda)
 * with B the basis functions and Cov the coefficient covariance from the
 * weights alone (NOT rescaled by chi2_red: the flux errors are trusted).
 *
 * Which pixels are fitted:
 *   - user windows (wavelength ranges): every unmasked pixel of the region
 *     whose centre lies in a window (velocity windows: convert with
 *     dt_wavelength from model.h first);
 *   - automatic (no windows): every unmasked pixel of the region outside a
 *     velocity band around each line of the doublet, then iterative
 *     sigma-clipping: fit, compute normalised residuals r = (F - C)/sigma,
 *     estimate their scatter s robustly (1.4826 * median absolute deviation),
 *     drop pixels with r < -clip_lo*s or r > clip_hi*s (all candidate pixels
 *     are re-tested each round, so a pixel may come back), refit; stop when the
 *     kept set no longer changes or after max_iter rounds.
 *
 * Too few pixels: a polynomial of order K needs K+1 usable pixels (a spline
 * its number of coefficients).  With fewer, dt_cont_fit fails with DT_EINVAL
 * and a message saying how many pixels there are and how many are needed --
 * unless opts.allow_lower is set, in which case the polynomial order is
 * lowered to (usable pixels - 1) (a spline falls back to a polynomial) and
 * result.lowered is set so the caller can show it.  No usable pixel at all
 * is DT_EMASKED.
 *
 * Workspaces are allocated once and reused for any number of fits; a fit on
 * more pixels than the workspace was made for enlarges it (allocation only
 * there, never inside the clipping loop when sizes repeat). */
#ifndef DOUBLETTY_CONTINUUM_H
#define DOUBLETTY_CONTINUUM_H
#include <stddef.h>
#include "doubletty/atomic.h"
#include "doubletty/legendre.h"   /* the polynomial basis, dt_legendre */
#include "doubletty/spectrum.h"
#include "doubletty/status.h"
#include "doubletty/window.h"

#define DT_CONT_MAX_ORDER 7       /* Legendre order at most (DT_MAX_CONT - 1) */
#define DT_CONT_MAX_COEF 64       /* spline coefficients at most */

typedef enum dt_cont_kind {
  DT_CONT_LEGENDRE = 0,           /* Legendre polynomial of order opts.order */
  DT_CONT_SPLINE                  /* cubic B-spline, breakpoints every spline_kms */
} dt_cont_kind;

typedef struct dt_cont_opts {
  dt_cont_kind kind;
  int order;              /* Legendre order 0..DT_CONT_MAX_ORDER (default 2) */
  double spline_kms;      /* spline breakpoint spacing [km/s] (default 300) */
  /* user windows; nwin == 0 selects the automatic continuum */
  size_t nwin;
  const dt_window *win;   /* vacuum Angstrom, lo < hi */
  /* automatic mode: exclusion band [exclude_lo, exclude_hi] km/s around each
     line of the doublet (velocities relative to vsys, see dt_velocity) */
  const dt_doublet *doublet;   /* NULL: nothing excluded */
  double vsys;            /* [km/s] */
  double exclude_lo;      /* default -150 km/s */
  double exclude_hi;      /* default +150 km/s */
  double clip_lo;         /* reject below -clip_lo * scatter (default 3; an
                             asymmetric choice biases the continuum) */
  double clip_hi;         /* reject above +clip_hi * scatter (default 3.0) */
  int max_iter;           /* clipping rounds at most (default 10) */
  int allow_lower;        /* 1: too few pixels lowers the order (flagged) */
} dt_cont_opts;

/* Defaults as documented above: Legendre order 2, automatic, no doublet. */
void dt_cont_opts_init(dt_cont_opts *o);

typedef struct dt_cont_result {
  dt_cont_kind kind;      /* what was actually fitted */
  int order;              /* Legendre order used (may be < requested); -1 spline */
  int lowered;            /* 1: the order was lowered for lack of pixels */
  size_t ncoef;           /* coefficients fitted */
  double coef[DT_CONT_MAX_ORDER + 1];   /* Legendre coefficients (kind LEGENDRE) */
  double x_lo, x_hi;      /* wavelengths mapped to x = -1 and +1 [Angstrom] */
  size_t ncand;           /* candidate pixels (in windows / outside the bands) */
  size_t nused;           /* pixels in the final fit (after clipping) */
  int niter;              /* clipping rounds done (1 for user windows) */
  double chi2;            /* of the final fit over the used pixels */
  double chi2_red;        /* chi2 / (nused - ncoef); 0 when nused == ncoef */
} dt_cont_result;

typedef struct dt_cont_work dt_cont_work;

/* A workspace for regions of up to nmax pixels (0 = grow on demand). */
dt_cont_work *dt_cont_alloc(size_t nmax, dt_err *e);
void dt_cont_free(dt_cont_work *w);

/* Fit the continuum of spectrum s over the pixel range [i0, i1) (the
 * region; the Legendre x maps the region's first..last wavelength onto
 * [-1, 1]), evaluate it on every pixel of the region into cont[0..i1-i0)
 * and its 1-sigma uncertainty into cont_err[] (may be NULL).  used[] (may be
 * NULL) receives 1 for pixels in the final fit, 0 otherwise.  The workspace
 * keeps the fit for dt_cont_eval.  Errors: DT_EINVAL (bad options, empty
 * region, too few pixels), DT_EMASKED (no usable pixel), DT_ENOMEM. */
int dt_cont_fit(dt_cont_work *w, const dt_spectrum *s, size_t i0, size_t i1,
                const dt_cont_opts *o, double *cont, double *cont_err,
                unsigned char *used, dt_cont_result *r, dt_err *e);

/* The last fitted continuum at any wavelength (outside the region the
 * polynomial is extrapolated and the spline held at its end value, which the
 * caller should avoid) and its 1-sigma error (err may be
 * NULL).  DT_EINVAL when nothing has been fitted yet.  (Not const: spline
 * evaluation uses scratch space of the workspace.) */
int dt_cont_eval(dt_cont_work *w, double lambda, double *c, double *err);


#endif
