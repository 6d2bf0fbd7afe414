/* Joint fits of several doublets (species) of one absorber.
 *
 * The same clouds absorb in every species they hold: a component k has one
 * velocity v_k for all species, a column density N_{s,k} per species s,
 * and a Doppler parameter b_{s,k} tied across the species by a rule
 * (dt_joint_btie):
 *   same     one b_k per component for every species;
 *   thermal  per component a temperature T_k and a turbulent part
 *            b_turb,k; each species s of atomic mass m_s [u] then has
 *              b_{s,k}^2 = b_turb,k^2 + 2 k_B T_k / (m_s m_u)
 *            (the Maxwellian Doppler width added in quadrature to a
 *            Gaussian turbulent one; Spitzer 1978, Physical Processes in
 *            the Interstellar Medium, ch. 3 -- from memory);
 *   free     one b_{s,k} per species and component.
 * k_B = 1.380649e-23 J/K (exact since the 2019 SI) and m_u =
 * 1.66053906660e-27 kg (CODATA 2018).  Masses: elements.h.
 *
 * Each species keeps its own doublet model (model.h) on its own pixels
 * with its own fixed continuum; the residuals of all species are fitted
 * together (GSL gsl_multifit_nlinear, trust-region Levenberg-Marquardt as
 * fit.h).  Bounds are smooth transforms as in fit.h:
 *   log N     logistic in [DT_FIT_LOGN_MIN, DT_FIT_LOGN_MAX]
 *   ln b      logistic in [ln DT_FIT_B_MIN, ln DT_FIT_B_MAX]   (same, free)
 *   v         logistic in the problem's [vlo, vhi]
 *   ln T      logistic in [ln DT_JOINT_T_MIN, ln DT_JOINT_T_MAX] (thermal)
 *   q         logistic in [-DT_FIT_B_MAX^2, DT_FIT_B_MAX^2]      (thermal)
 * where q = b_turb^2: b_s^2 = q + 2 k_B T / (m_s m_u) is linear in q, so
 * b_turb = 0 is an inner point, neither a bound nor a saddle; q may come
 * out below 0 within its error (b_s^2 is held at 1e-4 (km/s)^2 at least).
 * The Jacobian is analytic: each model's d flux / d(log N, b, v) chained
 * through the tie (d b_s / d q = 1 / (2 b_s), d b_s / d T =
 * k_B / (m_s m_u b_s)) and the transforms.  Errors are 1-sigma from the
 * covariance (J^T J)^-1 at the solution, mapped back through the
 * transforms, not scaled by chi2_red (as fit.h); the b of each species
 * under `thermal` gets its error from the covariance of (T, q).
 * BIC = chi2 + k ln n over all species' pixels (Schwarz 1978).
 *
 * The analysis level (dt_joint_analysis_*) does for a spectrum what
 * analysis.h does for one doublet: for the judgement's doublet and each
 * linked doublet it selects the pixels of that doublet's velocity window
 * and computes its continuum exactly as dt_analysis_run would (it runs a
 * dt_analysis per species), then fits all species jointly, starting from
 * the judgement's components. */
#ifndef DOUBLETTY_JOINT_H
#define DOUBLETTY_JOINT_H
#include <stddef.h>
#include "doubletty/analysis.h"
#include "doubletty/atomic.h"
#include "doubletty/autofit.h"
#include "doubletty/fit.h"
#include "doubletty/judge.h"
#include "doubletty/model.h"
#include "doubletty/spectrum.h"
#include "doubletty/status.h"

#define DT_JOINT_MAX_SPECIES 6       /* species in one joint fit */

#define DT_K_BOLTZMANN 1.380649e-23  /* Boltzmann constant [J/K], exact (SI 2019) */
#define DT_MASS_UNIT 1.66053906660e-27 /* atomic mass constant m_u [kg], CODATA 2018 */

/* Temperature range of the `thermal` rule [K]. */
#define DT_JOINT_T_MIN 1.0
#define DT_JOINT_T_MAX 1e7

/* How b is shared: the judgement's rule (judge.h, dt_btie) --
 * same: one b per component for all species; thermal: per component T and
 * b_turb; free: one b per species and component. */
typedef dt_btie dt_joint_btie;
#define DT_JOINT_B_SAME DT_BTIE_SAME
#define DT_JOINT_B_THERMAL DT_BTIE_THERMAL
#define DT_JOINT_B_FREE DT_BTIE_FREE

/* "same", "thermal", "free" and back (DT_OK or DT_EINVAL): dt_btie_name
 * and dt_btie_parse. */
const char *dt_joint_btie_name(dt_joint_btie t);
int dt_joint_btie_parse(const char *s, dt_joint_btie *t);

/* Thermal Doppler parameter [km/s] of a species of mass m_u [u] at
 * temperature T [K] with turbulent part b_turb [km/s]:
 * sqrt(b_turb^2 + 2 k_B T / (m_u DT_MASS_UNIT)). */
double dt_joint_b_thermal(double T, double b_turb, double mass_u);

/* ---- The low level: species already on their pixels ---------------- */

typedef struct dt_joint_species {
  dt_model *model;                 /* this species' doublet model on its pixels */
  const double *flux;              /* data over the model's pixels */
  const double *sigma;             /* 1-sigma errors (> 0 where used) */
  const unsigned char *mask;       /* nonzero = not fitted; NULL = none */
  const double *cont;              /* fixed continuum; NULL = 1 */
  double mass_u;                   /* atomic mass [u]; needed for `thermal` */
  double logN[DT_MAX_COMP];        /* starting log N per component */
  double b[DT_MAX_COMP];           /* starting b per component (`free`) */
} dt_joint_species;

typedef struct dt_joint_problem {
  size_t nspec;                    /* 1 .. DT_JOINT_MAX_SPECIES */
  const dt_joint_species *sp;      /* nspec species */
  size_t ncomp;                    /* components (0: chi2 of the continua) */
  double v[DT_MAX_COMP];           /* starting velocities [km/s] */
  double b[DT_MAX_COMP];           /* starting b [km/s] (`same`; `thermal`
                                      when T/b_turb are not given) */
  double T[DT_MAX_COMP];           /* starting T [K] (`thermal`; <= 0: from b) */
  double b_turb[DT_MAX_COMP];      /* starting b_turb [km/s] (`thermal`; < 0: from b) */
  dt_joint_btie btie;
  const unsigned char *frozen;     /* DT_FREEZE_* bits per component (NULL:
                                      none), held at their starting values:
                                      v; b (under `thermal` T and b_turb);
                                      N of species 0 only (the main doublet's
                                      column; the others' are always fitted) */
  double vlo, vhi;                 /* velocity bounds [km/s], vlo < vhi */
  int max_iter;                    /* 0: DT_FIT_MAX_ITER */
  double time_limit;               /* seconds; 0: 4 x DT_FIT_TIME_LIMIT; < 0 none */
} dt_joint_problem;

typedef struct dt_joint_result {
  int status;                      /* DT_OK, DT_ENOCONV, DT_EMASKED, ... */
  int niter;
  dt_joint_btie btie;
  size_t nspec, ncomp;
  double v[DT_MAX_COMP], v_err[DT_MAX_COMP];       /* shared velocities */
  double T[DT_MAX_COMP], T_err[DT_MAX_COMP];       /* [K]; NaN unless thermal */
  double b_turb[DT_MAX_COMP], b_turb_err[DT_MAX_COMP]; /* [km/s]; NaN unless thermal:
                                      sqrt(max(q, 0)) of the fitted q =
                                      b_turb^2, and the upward 1-sigma step
                                      sqrt(max(q, 0) + sigma_q) - b_turb */
  double b_turb2[DT_MAX_COMP], b_turb2_err[DT_MAX_COMP]; /* q = b_turb^2 as fitted
                                      [(km/s)^2], may be < 0 within its
                                      error; NaN unless thermal */
  /* each species' components as fitted (v the shared one; b by the rule)
   * and their 1-sigma errors; [s][k] */
  dt_component comp[DT_JOINT_MAX_SPECIES][DT_MAX_COMP];
  dt_component err[DT_JOINT_MAX_SPECIES][DT_MAX_COMP];
  double chi2;
  long dof;
  double chi2_red;
  double bic;                      /* chi2 + nparam ln npix */
  size_t npix;                     /* pixels used, all species */
  size_t nparam;                   /* fitted parameters */
  double chi2_sp[DT_JOINT_MAX_SPECIES];  /* each species' share of chi2 */
  size_t npix_sp[DT_JOINT_MAX_SPECIES];  /* and of the pixels */
} dt_joint_result;

typedef struct dt_joint_workspace dt_joint_workspace;

/* Workspace for up to max_spec species with max_pix pixels in all and
 * max_comp components; everything the iterations need is allocated here
 * (dt_joint_run does not allocate, apart from GSL's solver for a new
 * problem size, cached).  NULL when out of memory or out of range. */
dt_joint_workspace *dt_joint_alloc(size_t max_spec, size_t max_pix, size_t max_comp);
void dt_joint_free(dt_joint_workspace *w);

/* Fit.  r is always filled (status = return value).  DT_OK; DT_EINVAL a
 * malformed problem (sizes beyond the workspace, non-finite or out-of-
 * range starting values, a mass <= 0 under `thermal`, vlo >= vhi);
 * DT_EMASKED fewer usable pixels than parameters + 1; DT_ENOCONV the
 * solver failed or ran out of iterations or time (r holds the best
 * parameters reached).  e may be NULL. */
int dt_joint_run(dt_joint_workspace *w, const dt_joint_problem *p, dt_joint_result *r,
                 dt_err *e);

/* The model of species s under the result r (cont * exp(-tau) through the
 * LSF) over that species' pixels, into flux_out (the model's npix values).
 * DT_OK; DT_EINVAL for s out of range or r unusable. */
int dt_joint_eval(const dt_joint_problem *p, const dt_joint_result *r, size_t s,
                  double *flux_out);

/* ---- The analysis level: a spectrum, a judgement, linked doublets --- */

typedef struct dt_joint_opts {
  dt_analysis_opts an;             /* each species' analysis (continuum
                                      margin, oversample, limits ...);
                                      an.joint_cont is not used: the
                                      continua are fixed in the joint fit */
  double detect_sigma;             /* N / sigma_N of a detection (0: 3) */
  int max_iter;                    /* 0: DT_FIT_MAX_ITER */
  double time_limit;               /* seconds; 0: the low level's default */
  /* A resolution of a species' own (resolving power R, or when that is
   * <= 0 an LSF FWHM [km/s]), by doublet name as the atomic table spells
   * it; a species not named takes the main judgement's.  Widths per pixel
   * of the spectrum (an.lsf_constant 0) come before both. */
  size_t nres;
  struct {
    char doublet[16];
    double resolution, fwhm_kms;
  } res[DT_JOINT_MAX_SPECIES];
} dt_joint_opts;

void dt_joint_opts_init(dt_joint_opts *o);

/* One species of a joint analysis. */
typedef struct dt_joint_species_out {
  char doublet[16];                /* the name as given */
  const dt_doublet *d;             /* its atomic data; NULL when unknown */
  int status;                      /* DT_OK: in the joint fit; otherwise why
                                      not: DT_ENOTFOUND unknown doublet,
                                      DT_ERANGE window not covered by the
                                      spectrum, DT_EMASKED all masked, ... */
  dt_err why;                      /* the reason when status != DT_OK */
  int fit_index;                   /* its index s in fit.comp[s]; -1 not fitted */
  double mass_u;                   /* [u]; NaN when the element is unknown */
  size_t i0, n;                    /* selected pixels [i0, i0 + n) of the spectrum */
  /* over those n pixels, valid until the next run or free (NULL when
   * status != DT_OK): */
  const double *wave;              /* [Angstrom] */
  const double *flux, *sigma;
  const double *cont;              /* the fixed continuum */
  const double *model;             /* cont * joint model of this species */
  const unsigned char *used;       /* 1 = in the fit */
  size_t npix;                     /* pixels in the fit */
  double chi2;                     /* its share of the joint chi2 */
  size_t ncomp;
  dt_component comp[DT_MAX_COMP];  /* log N, b, v (v shared) */
  dt_component err[DT_MAX_COMP];   /* their 1-sigma errors */
  double N_sig[DT_MAX_COMP];       /* N / sigma_N = 1 / (ln 10 sigma_logN) */
  int detected[DT_MAX_COMP];       /* N_sig >= detect_sigma */
  int any_detected;                /* some component detected */
  double logN_limit;               /* upper limit of log N [cm^-2] over the
                                      judgement's window, from the stronger
                                      line (analysis.h logN_limit at
                                      opts.an.limit_b); NaN when unmeasured */
  double W_limit;                  /* the equivalent-width limit behind it [A] */
} dt_joint_species_out;

typedef struct dt_joint_out {
  size_t nspec;                    /* species: [0] the judgement's doublet,
                                      then the linked ones in order given */
  dt_joint_species_out sp[DT_JOINT_MAX_SPECIES];
  size_t nfit;                     /* species in the joint fit */
  int fit_status;                  /* DT_OK or the fit's failure */
  dt_joint_result fit;             /* the joint fit (species by fit_index) */
} dt_joint_out;

typedef struct dt_joint_analysis dt_joint_analysis;

/* A joint analysis of spectrum s with atomic table t (both outlive it).
 * NULL when out of memory. */
dt_joint_analysis *dt_joint_analysis_alloc(const dt_spectrum *s, const dt_atomic *t);
void dt_joint_analysis_free(dt_joint_analysis *ja);
/* Replace the options (NULL: defaults); effective at the next run. */
void dt_joint_analysis_set_opts(dt_joint_analysis *ja, const dt_joint_opts *o);

/* Fit j's components jointly over j's doublet and the linked doublets
 * (nlinked names; a name equal to j's doublet or given twice is skipped;
 * at most DT_JOINT_MAX_SPECIES species in all).  Each species uses j's
 * rest frame, resolution, velocity window and continuum order; j's
 * continuum windows serve the species whose continuum region they lie in,
 * the others get the automatic continuum.  Starting values: v and b from
 * j->comp; log N of j's doublet from j->comp, of every other species from
 * a fit of that species alone with v and b held at j's.  j->frozen and
 * j->tie_b are not used.  A linked species the spectrum does not cover
 * (or with every pixel masked) is reported in out->sp[] with its status
 * and left out; the others are fitted.
 * Returns DT_OK; DT_EINVAL bad arguments (too many species, `thermal`
 * with a species of unknown mass -- e names it); j's own doublet's error
 * (DT_ENOTFOUND, DT_ERANGE, ...) when it cannot be analysed; the fit's
 * status (DT_ENOCONV) with out complete.  e may be NULL. */
int dt_joint_analysis_run(dt_joint_analysis *ja, const dt_judgement *j,
                          const char *const *linked, size_t nlinked, dt_joint_btie btie,
                          dt_joint_out *out, dt_err *e);

/* The same, starting the linked species from a previous run's values
 * (start, typically the last out; may be out itself): where start has a
 * fit of as many components as j and a species of the same name, its
 * log N (and b under `free`) start from start's instead of a fit of that
 * species alone, and under `thermal` T and b_turb from start's.  A refit
 * after a nudge then costs one joint fit.  start NULL: as
 * dt_joint_analysis_run. */
int dt_joint_analysis_run_from(dt_joint_analysis *ja, const dt_judgement *j,
                               const char *const *linked, size_t nlinked, dt_joint_btie btie,
                               const dt_joint_out *start, dt_joint_out *out, dt_err *e);

/* Species q of out (out->sp[q], fitted) as a single-doublet fit result:
 * its components and errors, the joint fit's status, iterations, chi2,
 * dof, BIC and pixels (all species'), no joint continuum.  For recording
 * the joint values in a judgement (DT_ACT_FIT); note that a single-doublet
 * refit of that judgement (dt_analysis_verify_fit) need not reproduce
 * them.  DT_OK; DT_EINVAL when species q was not fitted. */
int dt_joint_species_fit(const dt_joint_out *out, size_t q, dt_fit_result *r);

/* The joint first pass.  The species of largest significance (the
 * stronger line's equivalent width over j's window divided by its error)
 * is searched by the single-doublet first pass (autofit.h, with opts);
 * its components' velocities then seed a joint fit over all species as
 * dt_joint_analysis_run does.  bic_search = 1: components are then added
 * (at the largest residual of any species) while the joint BIC
 * drops by more than opts->bic_min (0: 10), up to opts->max_comp.  On success j->ncomp/comp take
 * the joint components of j's own doublet (frozen bits cleared, has_fit 0:
 * j->fit is a single-doublet fit and is not set here).  *strongest: the
 * index in out->sp of the species searched.  Errors as
 * dt_joint_analysis_run.  e may be NULL. */
int dt_joint_autofit_run(dt_joint_analysis *ja, dt_judgement *j, const char *const *linked,
                         size_t nlinked, dt_joint_btie btie, const dt_autofit_opts *opts,
                         int bic_search, dt_joint_out *out, size_t *strongest, dt_err *e);

#endif
