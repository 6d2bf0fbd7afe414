/* The absorption model of a doublet: Voigt components seen through a
 * Gaussian line-spread function and integrated over pixels.
 *
 * A component (logN, b, v) gives each line of the doublet the optical depth
 *     tau(nu) = N * sigma0 * f * H(a, x) / (sqrt(pi) * dnu_D)
 * with sigma0 = pi e^2/(m_e c) = 0.02654008854 cm^2 s^-1, dnu_D = b/lambda0,
 * x = (nu_rest - nu0)/dnu_D, a = Gamma/(4 pi dnu_D) and H(a,x) = Re w(x + i a)
 * (w is the Faddeeva function, from libcerf).  nu_rest is the frequency in
 * the component's rest frame: lambda_rest = lambda / ((1+vsys/c)(1+v/c)).
 * Components add in tau; the normalised flux exp(-sum tau) is computed on a
 * sub-pixel grid uniform in ln(lambda), convolved with a Gaussian LSF of
 * constant velocity FWHM (c/R) and averaged back over each pixel.
 *
 * Both lines share N, b, v.  The model is normalised (continuum = 1); the
 * fitter multiplies by the continuum. */
#ifndef DOUBLETTY_MODEL_H
#define DOUBLETTY_MODEL_H
#include <stddef.h>
#include "doubletty/atomic.h"
#include "doubletty/status.h"

#define DT_MAX_COMP 8
#define DT_SIGMA0 0.02654008854   /* pi e^2 / (m_e c) [cm^2 s^-1] (CODATA) */

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
                         (0 = default 1e-7): the truncation error bound */
} dt_model_config;

typedef struct dt_model dt_model;

/* Allocate a model on n pixel centres wave[] (vacuum Angstrom, strictly
 * increasing; typically the fit window of a spectrum), for up to max_comp
 * components.  All work arrays are allocated here, none in dt_model_eval. */
dt_model *dt_model_alloc(const double *wave, size_t n, const dt_model_config *cfg,
                         size_t max_comp, dt_err *e);
void dt_model_free(dt_model *m);
size_t dt_model_npix(const dt_model *m);

/* Normalised model flux on the pixels, and optionally its Jacobian:
 * jac[i*ldj + 3k + 0,1,2] = d flux_i / d(logN_k, b_k, v_k).  jac may be NULL.
 * Returns DT_EINVAL for ncomp > max_comp or non-physical b (<= 0). */
int dt_model_eval(dt_model *m, const dt_component *comp, size_t ncomp,
                  double *flux, double *jac, size_t ldj);

/* Voigt function H(a, u) = Re w(u + i a) (libcerf). */
double dt_voigt_H(double a, double u);

/* Unconvolved, untruncated optical depth of one line of one component at a
 * vacuum wavelength (reference evaluation; slow). */
double dt_line_tau(const dt_line *l, const dt_component *c, double vsys,
                   double lambda);

/* Velocity [km/s] of wavelength lambda relative to line centre lambda0
 * redshifted by vsys, and back: v = c (lambda/(lambda0 (1+vsys/c)) - 1). */
double dt_velocity(double lambda, double lambda0, double vsys);
double dt_wavelength(double v, double lambda0, double vsys);

#endif
