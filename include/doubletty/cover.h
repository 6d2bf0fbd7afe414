/* Partial covering: components that hide only part of the background source.
 *
 * A component k that covers a fraction C_k (0 < C_k <= 1) of the source
 * leaves the normalised intensity
 *     I = 1 - C_k + C_k exp(-tau_k)
 * (Hamann et al. 1997, ApJ 478, 80, eq. 1; Barlow & Sargent 1997, AJ 113,
 * 136).  Both lines of a doublet share C_k, so the ratio of their depths
 * constrains it: for resolved lines the residual intensities I_1 (stronger)
 * and I_2 (weaker, tau_1 = 2 tau_2 for Na I D) give at line centre
 *     C = (I_2 - 1)^2 / (I_1 - 2 I_2 + 1)
 * (Hamann et al. 1997, eq. 3 for a 2:1 doublet; dt_cover_closed_form).  For
 * optically thin lines I ~ 1 - C tau: C is degenerate with N and the data
 * do not constrain it.
 *
 * The model.  The line-spread convolution and the pixel averaging of the
 * model (model.h) are linear and the kernel sums to one, so for ONE
 * covered component the pixel flux 1 - C + C <exp(-tau)> (the brackets:
 * LSF and pixel) is exact.  Several components are evaluated one by one
 * (covered) or together (uncovered) and combined as the product of the
 * pixel fluxes,
 *     F = <exp(-sum_u tau_u)> * prod_k (1 - C_k + C_k <exp(-tau_k)>),
 * whereas the true flux is the pixel average of the product.  The two are
 * the same for a single component and for components whose profiles (after
 * the LSF) do not overlap; for overlapping ones the product of averages
 * misses the covariance of the factors within the LSF and the pixel (even
 * for coincident components).  tests/unit/test_cover.c measures it against
 * the pixel average of the product: for two saturated components (tau0 4
 * and 8, b = 5 km/s, C = 0.6 and 0.7, LSF FWHM 10 km/s) the largest error
 * is 0.065 of the continuum when they coincide and about 0.04 up to 20
 * km/s apart, 1.7e-3 at 30 km/s and 2e-4 at 40 km/s (one component alone:
 * 2e-4, the reference's own sampling).  Blended covered components are
 * therefore an approximation; separated ones are exact.
 *
 * C_k is fitted on (0, 1) through a logistic map (fit.h); its 1-sigma error
 * is taken from the covariance in C itself (not through the map, whose
 * slope vanishes at 1), so a C_f pressed against 1 still gets an honest
 * error. */
#ifndef DOUBLETTY_COVER_H
#define DOUBLETTY_COVER_H
#include <stddef.h>
#include "doubletty/atomic.h"
#include "doubletty/model.h"

/* What the data say about a component's C_f. */
enum {
  DT_CF_NONE = 0,        /* covering off, or C_f consistent with 1 */
  DT_CF_PARTIAL,         /* 1 - C_f > DT_CF_NSIGMA sigma: partial covering */
  DT_CF_UNCONSTRAINED    /* the data do not measure C_f: see dt_cover_flag */
};
#define DT_CF_NSIGMA 3.0
#define DT_CF_ERR_MAX 0.3      /* absolute error of C_f */
#define DT_CF_REL_MAX 0.5      /* error relative to C_f */
#define DT_CF_TAU_THIN 0.5     /* central optical depth of the weaker line */
#define DT_CF_LOGN_ERR_MAX 1.0 /* error of log N [dex] */
#define DT_CF_RESOLVED 1.0     /* Doppler FWHM / LSF FWHM of a resolved line */
/* C_f a covered fit starts from when none is given. */
#define DT_CF_START 0.9

typedef struct dt_cover_work dt_cover_work;

/* Buffers for evaluating up to max_comp components on max_pix pixels.
 * NULL when out of memory or max_comp > DT_MAX_COMP. */
dt_cover_work *dt_cover_alloc(size_t max_pix, size_t max_comp);
void dt_cover_free(dt_cover_work *w);

/* Model flux of components with covering factors.
 *
 * Given: mu, the doublet model on the pixels for the uncovered components
 *   (may be NULL when all are covered); mc, a model on the same pixels with
 *   room for at least one component (the covered ones, one at a time);
 *   comp[ncomp]; cf[k], the covering factor of component k (0 < cf <= 1);
 *   covered[k] nonzero for a covered component (NULL: all covered).
 * Returned: flux[i] = U_i prod_k G_k,i (see the header comment) with
 *   G_k = 1 - C_k + C_k F_k; when jac is not NULL, jac[i*ldj + 3k + 0,1,2]
 *   = dflux_i/d(logN_k, b_k, v_k) and, when jac_cf is not NULL,
 *   jac_cf[i*ncomp + k] = dflux_i/dC_k (0 for uncovered components).
 * DT_OK, DT_EINVAL (sizes, cf out of (0, 1], a model missing), or the
 * model's error.  No allocation. */
int dt_cover_eval(dt_cover_work *w, dt_model *mu, dt_model *mc, const dt_component *comp,
                  const double *cf, const unsigned char *covered, size_t ncomp,
                  double *flux, double *jac, size_t ldj, double *jac_cf);

/* The flag of a component's C_f (DT_CF_*).
 *
 * Given: the doublet (NULL: no thin-line test); the component (logN, b)
 *   and the 1-sigma error of its log N (NaN: not tested); its cf and
 *   1-sigma error; the FWHM of the line-spread function [km/s] (0: not
 *   known, no resolution test; dt_cover_lsf_fwhm).
 * Returned: DT_CF_UNCONSTRAINED when the data do not measure C_f: err not
 *   finite, > DT_CF_ERR_MAX or > DT_CF_REL_MAX cf; the weaker line's
 *   central optical depth (dt_cog_tau0, no LSF) below DT_CF_TAU_THIN (thin:
 *   I ~ 1 - C tau, C and N degenerate); or a log N error above
 *   DT_CF_LOGN_ERR_MAX (the same degeneracy seen from N: a narrow black
 *   line covering little looks like a weak one).  Else DT_CF_PARTIAL when
 *   1 - cf > DT_CF_NSIGMA err; else DT_CF_NONE.
 *   An unresolved line -- Doppler FWHM 2 sqrt(ln 2) b below DT_CF_RESOLVED
 *   times the LSF's (narrower than the LSF) -- is unconstrained too: only the two equivalent
 *   widths are measured then, and W = C W(N, b) leaves C, N and b
 *   degenerate (Hamann et al. 1997 ask for resolved lines).
 * Notes: the thresholds are common practice (a 3-sigma detection; a doublet
 *   ratio within ~10% of its thin value cannot separate C from N). */
int dt_cover_flag(const dt_doublet *d, const dt_component *c, double logN_err, double cf,
                  double err, double lsf_fwhm_kms);

/* The LSF FWHM [km/s] of a resolving power R (c/R) or, with R <= 0, the
 * given FWHM; 0 when neither is positive. */
double dt_cover_lsf_fwhm(double resolution, double fwhm_kms);

/* "", "partial", "unconstrained" */
const char *dt_cover_flag_name(int flag);

/* Covering factor from the residual intensities at line centre of a
 * resolved doublet whose optical depths are in the ratio 2:1.
 *
 * Given: i1 (stronger line) and i2 (weaker), normalised to the continuum.
 * Returned: C = (1 - i2)^2 / (1 - 2 i2 + i1); NaN where the denominator is
 *   not positive (noise: the ratio outside its physical range).
 * References: Hamann et al. 1997, ApJ 478, 80, eq. 3 (from memory); the
 *   form follows from I = 1 - C + C exp(-tau) with tau_1 = 2 tau_2. */
double dt_cover_closed_form(double i1, double i2);

#endif
