/* Fitting Voigt components (and optionally the continuum) to a spectrum.
 * Declarations of the workspace API are added by the fitting module;
 * the result type is fixed here because the session log and the UI use it. */
#ifndef DOUBLETTY_FIT_H
#define DOUBLETTY_FIT_H
#include <stddef.h>
#include "doubletty/model.h"

#define DT_MAX_CONT 8   /* continuum polynomial coefficients at most */

typedef struct dt_fit_result {
  int status;                      /* DT_OK, DT_ENOCONV, DT_EMASKED, ... */
  int niter;
  size_t ncomp;
  dt_component comp[DT_MAX_COMP];  /* best fit */
  dt_component err[DT_MAX_COMP];   /* 1-sigma errors (0 for frozen/tied-to) */
  size_t ncont;                    /* continuum coefficients fitted jointly */
  double cont_coef[DT_MAX_CONT];
  double cont_err[DT_MAX_CONT];
  double chi2;
  long dof;
  double chi2_red;
  double bic;                      /* chi2 + k ln n */
  size_t npix;                     /* pixels used */
} dt_fit_result;

#endif
