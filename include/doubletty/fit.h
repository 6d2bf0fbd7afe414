/* Fitting Voigt components (and optionally the continuum) to a spectrum.
 *
 * A non-linear least-squares fit (GSL gsl_multifit_nlinear, trust-region
 * Levenberg-Marquardt) of the doublet model of model.h, multiplied by a
 * continuum, to the unmasked pixels.  Every component shares (logN, b, v)
 * between the two lines of the doublet (the model does that).  The Jacobian
 * is analytic: the model's derivatives, chained through the bounding
 * transforms and the optional joint continuum polynomial.
 *
 * Bounds are smooth transforms, so the solver works on unbounded internal
 * parameters:
 *   logN = lo + (hi - lo) / (1 + exp(-u))      lo, hi = DT_FIT_LOGN_MIN/MAX
 *   ln b = lo + (hi - lo) / (1 + exp(-u))      lo, hi = ln DT_FIT_B_MIN/MAX
 *   v    = vlo + (vhi - vlo) / (1 + exp(-u))   the problem's velocity window
 * Starting values on or beyond a bound are moved just inside it.  Frozen
 * parameters (DT_FREEZE_* bits, below) keep their initial values and are
 * not fitted.  tie_b: all components share one b, starting from (and frozen
 * with) component 0's; its error is reported on component 0 only.
 *
 * Reported uncertainties are 1-sigma errors from the covariance matrix
 * (J^T J)^-1 at the solution, mapped back through the transforms; they are
 * NOT scaled by chi2_red: they assume the pixel sigmas are right.  Multiply
 * by sqrt(chi2_red) yourself if you trust the scatter more than the sigmas.
 * Near a bound the mapped error shrinks towards 0 and means little; the fit
 * info flags such parameters (at_bound).  A parameter the data do not
 * constrain at all (a singular covariance) gets an error of +infinity.
 *
 * Partial covering (problem.covering, cover.h) adds one covering factor
 * per component, 0 < C_f < 1 by the logistic map, its error from the
 * covariance in C_f itself.
 *
 * BIC = chi2 + k ln n (Schwarz 1978, Ann. Stat. 6, 461) with k the number of
 * fitted parameters (components and joint continuum) and n the number of
 * pixels used.
 *
 * A fit that does not converge within the iteration or time limit, or whose
 * chi2 is not finite, returns DT_ENOCONV with the result filled with the
 * best parameters reached (status DT_ENOCONV) -- never a silent NaN. */
#ifndef DOUBLETTY_FIT_H
#define DOUBLETTY_FIT_H
#include <stddef.h>
#include "doubletty/model.h"
#include "doubletty/status.h"

#define DT_MAX_CONT 8   /* continuum polynomial coefficients at most */

/* Parameters held at their initial values, per component (a judgement's
 * frozen[] and a problem's frozen use these bits). */
enum { DT_FREEZE_N = 1, DT_FREEZE_B = 2, DT_FREEZE_V = 4,
       DT_FREEZE_CF = 8 /* the covering factor (fit problems only) */ };

typedef struct dt_fit_result {
  int status;                      /* DT_OK, DT_ENOCONV, DT_EMASKED, ... */
  int niter;
  size_t ncomp;
  dt_component comp[DT_MAX_COMP];  /* best fit */
  dt_component err[DT_MAX_COMP];   /* 1-sigma errors (0 for frozen/tied-to; +infinity
                                      at a bound or unconstrained) */
  size_t ncont;                    /* continuum coefficients fitted jointly */
  double cont_coef[DT_MAX_CONT];
  double cont_err[DT_MAX_CONT];
  double chi2;
  long dof;
  double chi2_red;
  double bic;                      /* chi2 + k ln n */
  size_t npix;                     /* pixels used */
  /* Partial covering (cover.h): covering = 1 when each component's
   * covering factor was fitted; cf[k] in (0, 1] (1 without covering) and
   * its 1-sigma error, taken from the covariance in C_f itself (0 without
   * covering, +infinity when the data do not constrain it). */
  int covering;
  double cf[DT_MAX_COMP];
  double cf_err[DT_MAX_COMP];
} dt_fit_result;

/* Physical ranges of the bounding transforms. */
#define DT_FIT_LOGN_MIN 8.0        /* log10 N [cm^-2] */
#define DT_FIT_LOGN_MAX 23.0
#define DT_FIT_B_MIN 0.3           /* Doppler parameter [km/s] */
#define DT_FIT_B_MAX 300.0

/* Defaults used when the problem leaves a limit at 0. */
#define DT_FIT_MAX_ITER 200
#define DT_FIT_TIME_LIMIT 2.0      /* seconds per fit */

#define DT_FIT_STALL_ITERS 5

typedef struct dt_fit_problem {
  dt_model *model;               /* the doublet model on the fit pixels */
  const double *wave;            /* pixel centres [Angstrom] (the model's);
                                    needed only when ncont > 0 */
  const double *flux;            /* data over the model's pixels */
  const double *sigma;           /* 1-sigma errors (> 0 where used) */
  const unsigned char *mask;     /* nonzero = not fitted; NULL = none */
  const double *cont;            /* fixed multiplicative continuum; NULL = 1 */
  /* Joint continuum: ncont Legendre coefficients c_j fitted together with
   * the components; the fitted flux is
   *   cont_i * sum_j c_j P_j(x_i) * model_i,
   * x mapped linearly from [wave[0], wave[n-1]] to [-1, 1].  ncont = 0: no
   * joint continuum.  cont_init: starting coefficients (NULL: the linear
   * least-squares solution for the starting components). */
  size_t ncont;
  const double *cont_init;
  size_t ncomp;                  /* components (0 allowed: chi2 of the continuum) */
  const dt_component *comp;      /* starting values, inside the bounds */
  const unsigned char *frozen;   /* DT_FREEZE_* bits per component; NULL = none */
  int tie_b;                     /* 1: one b for all components */
  double vlo, vhi;               /* velocity bounds [km/s], vlo < vhi */
  int max_iter;                  /* 0: DT_FIT_MAX_ITER */
  int single_run;                /* 1: no second, accelerated run when the
                                    solution looks suspicious (near a bound
                                    or a high chi2) -- for refits that start
                                    next to an optimum on purpose */
  double stall_chi2;             /* > 0: also converged when the last
                                    DT_FIT_STALL_ITERS iterations together
                                    lowered chi2 by less than this (a trial
                                    whose chi2 is all that is asked; 0: off) */
  double give_up_bic;            /* > 0: a trial that must bring the BIC (chi2
                                    + parameters x ln pixels) below this ends,
                                    reported as stalled, once it clearly
                                    cannot: well above it and far more than
                                    its last gain and its Newton decrement
                                    (the chi2 a Gauss-Newton step would still
                                    gain) away; 0: off */
  int plain;                     /* 1: plain Levenberg-Marquardt steps from the
                                    start (no geodesic acceleration, which
                                    costs a model evaluation per iteration):
                                    for a start next to the optimum */
  int no_errors;                 /* 1: no covariance errors (err, cont_err and
                                    cf_err stay 0) -- for refits whose chi2
                                    and parameters are all that is asked */
  double time_limit;             /* seconds (monotonic clock); 0: DT_FIT_TIME_LIMIT;
                                    < 0: none (the iteration limit still holds) */
  /* Partial covering (cover.h).  covering = 1: every component has its own
   * covering factor C_f, fitted on (0, 1) through a logistic map, starting
   * from cf[k] (NULL, or a value outside (0, 1): DT_CF_START); held at
   * cf[k] with the DT_FREEZE_CF bit (NULL or outside (0, 1]: 1).  cover_model: a second model on the same pixels
   * (and with the same settings) as model, with room for one component;
   * required with covering. */
  int covering;
  const double *cf;
  dt_model *cover_model;
} dt_fit_problem;

/* Extra diagnostics of the last run (optional, dt_fit_last_info). */
typedef struct dt_fit_info {
  int at_bound[DT_MAX_COMP];     /* DT_FREEZE_* style bits: parameter within
                                    1% of its range from a bound (ln b for b) */
  int reason;                    /* 1 small step, 2 small gradient (GSL tests),
                                    6 stalled (stall_chi2, give_up_bic),
                                    3 converged with parameters at bounds,
                                    7 nothing left to gain (the last
                                    DT_FIT_STALL_ITERS iterations together
                                    lowered chi2 by less than 1e-6) */
  size_t nparam;                 /* fitted parameters */
  double seconds;                /* duration of the fit */
  int timed_out;                 /* 1: a run stopped at the time limit */
  int stalled;                   /* 1: the kept run ended by stall_chi2 or give_up_bic */
} dt_fit_info;

typedef struct dt_fit_workspace dt_fit_workspace;

/* Workspace for fits of up to max_pix pixels, max_comp components and
 * max_cont joint continuum coefficients.  Everything the iterations need is
 * allocated here; dt_fit_run does not allocate.  NULL when out of memory or
 * the sizes are out of range (max_comp > DT_MAX_COMP, max_cont > DT_MAX_CONT). */
dt_fit_workspace *dt_fit_alloc(size_t max_pix, size_t max_comp, size_t max_cont);
void dt_fit_free(dt_fit_workspace *w);

/* Fit.  r is always filled (status = return value).  Returns DT_OK;
 * DT_EINVAL for a malformed problem (sizes beyond the workspace, non-finite
 * starting values, vlo >= vhi); DT_EMASKED when there are fewer usable
 * pixels than free parameters + 1; DT_ENOCONV when the solver fails, runs
 * out of iterations or time, or reaches a non-finite chi2.  e may be NULL. */
int dt_fit_run(dt_fit_workspace *w, const dt_fit_problem *p, dt_fit_result *r,
               dt_err *e);

/* chi2 and model of given parameters without fitting: flux_out (may be
 * NULL) receives cont * joint-continuum * model over the model's pixels.
 * comp NULL: p->comp; cont_coef NULL: p->cont_init, or when that is NULL
 * too the linear least-squares coefficients for these components. */
int dt_fit_chi2(dt_fit_workspace *w, const dt_fit_problem *p,
                const dt_component *comp, const double *cont_coef,
                double *flux_out, double *chi2, size_t *npix);
/* The joint continuum coefficients (p->ncont of them) the last dt_fit_chi2
 * used, into coef. */
void dt_fit_chi2_coef(const dt_fit_workspace *w, double *coef);

/* Diagnostics of the last dt_fit_run on this workspace. */
const dt_fit_info *dt_fit_last_info(const dt_fit_workspace *w);

/* Does a refit reproduce a recorded fit?  Agreement: same status and number
 * of components, every fitted parameter within tol_sigma of the recorded
 * value in units of the larger of the two 1-sigma errors (or within 1e-6
 * absolute when both errors are 0), and chi2 within tol_sigma * sqrt(2 dof)
 * (the standard deviation of chi2).  Returns 1 when they agree; otherwise 0
 * with why (may be NULL) naming the first difference. */
int dt_fit_check_refit(const dt_fit_result *recorded, const dt_fit_result *refit,
                       double tol_sigma, char *why, size_t nwhy);

/* The stated tolerance of a refit: every parameter within 0.1 of its
 * 1-sigma error, chi2 within 0.1 of its standard deviation. */
#define DT_REFIT_TOL_SIGMA 0.1

#endif
