/* The analysis of one spectrum under one judgement: the glue between a
 * dt_judgement (doublet, rest frame, resolution, windows, continuum settings,
 * components) and the numbers and arrays shown to a person or written to a
 * table.
 *
 * dt_analysis_run selects the pixels covering both lines' velocity windows,
 * builds the doublet model on them (kept and reused while the doublet, rest
 * frame, resolution and window stay the same), computes the continuum
 * (continuum.h: from the judgement's windows, or automatically; Legendre
 * order j->cont_order; order -1 = continuum fixed at 1), fits the
 * judgement's components (fit.h) and measures both lines (measure.h).
 * Buffers live in the dt_analysis and are reused run after run, so the
 * inspector can call it after every keystroke.
 *
 * Pixels used by the fit: unmasked pixels whose velocity relative to either
 * line (dt_velocity with the judgement's vsys) lies in [j->vlo, j->vhi].
 * The arrays returned by the accessors cover the selected range, pixels
 * [i0, i0 + n) of the spectrum (out->i0, out->n), and stay valid until the
 * next run or dt_analysis_free.
 *
 * Upper limits (W_limit, logN_limit): over the measurement window when
 * one is given in the options, otherwise over the judgement's whole
 * window [vlo, vhi] (where absorption may be); dt_analysis_measure_range
 * over its range.
 * Measurement window: opts.int_vlo..int_vhi when given; otherwise, with
 * components, from the lowest v - (2b + FWHM) to the highest v + (2b + FWHM)
 * (FWHM of the LSF in km/s), and without components +-max(FWHM, 3 pixels)
 * around v = 0, clipped to the judgement's window.  (A close doublet puts
 * the other line inside a wide window: Na I's lines are 304 km/s apart.
 * Each line is therefore measured with the other removed by the fitted
 * model's decomposition, and masked pixels filled from the model: see
 * dt_analysis_line's masked_frac and blend.)
 * With a joint continuum, the continuum shown and measured against is the
 * fixed continuum times the fitted polynomial; its error is that of the
 * fixed part only. */
#ifndef DOUBLETTY_ANALYSIS_H
#define DOUBLETTY_ANALYSIS_H
#include <stddef.h>
#include "doubletty/atomic.h"
#include "doubletty/fit.h"
#include "doubletty/judge.h"
#include "doubletty/profile.h"
#include "doubletty/spectrum.h"
#include "doubletty/status.h"

#define DT_ANALYSIS_CONT_MARGIN 1500.0  /* km/s */
/* Doppler parameter assumed for column-density limits [km/s]: cold gas.  A
 * smaller b puts a given W further up the curve of growth (a larger N), so
 * the limit of gas broader than this is conservative. */
#define DT_ANALYSIS_LIMIT_B 2.0
/* The box over which limits are measured is +- the FWHM of a line of this
 * b [km/s] seen through the LSF (measure.h, dt_measure_limit): it holds
 * >= 98% of the W of lines up to this b. */
#define DT_ANALYSIS_LIMIT_BOX_B 10.0

typedef struct dt_analysis_opts {
  size_t joint_cont;    /* 0: the continuum is fixed during the fit; k > 0:
                           k multiplicative Legendre coefficients are fitted
                           jointly with the components on top of it */
  int oversample;       /* model sub-samples per pixel (0: model default) */
  double tau_cut;       /* model wing truncation (0: model default) */
  double limit_nsigma;  /* significance of upper limits (default 3) */
  double limit_b;       /* b [km/s] of column limits (default DT_ANALYSIS_LIMIT_B) */
  struct dt_cog_cache *cog; /* curve-of-growth tables for the column limits,
                              shared between analyses and threads (cog.h);
                              NULL: the exact inverse each time */
  double int_vlo, int_vhi; /* measurement (integration) window [km/s];
                              int_vlo >= int_vhi: the judgement's vlo..vhi */
  double cont_margin_kms; /* automatic continuum: fitted over the selection
                              widened by this much on each side [km/s], with
                              each line's velocity window excluded (default
                              DT_ANALYSIS_CONT_MARGIN; 0: only the selection,
                              excluding the continuum module's default band) */
  int no_intervals;     /* 1: dt_analysis_run skips the profile-likelihood
                           intervals of log N (dt_analysis_intervals) */
  int no_measure;       /* 1: runs and evaluations leave the measurements
                           (lines, N_a profiles) out, measure_status
                           DT_EINVAL: a search whose many fits need only
                           chi2, model and residuals (dt_analysis_no_measure) */
  int defer_intervals;  /* 1: dt_analysis_run leaves the intervals of log N
                           to a later dt_analysis_run_intervals (the
                           inspector computes them after the frame) */
  int covariance_only;  /* 1: the intervals of log N are the covariance
                           matrix's (symmetric, no refits) for every
                           component, not only in the linear regime */
  int outer_intervals;  /* 1: the intervals of log N also get their 3-sigma
                           ends (lo3, hi3 at 9 dchi2; profile.h), and
                           components in a saturated, unresolved or blended
                           line are first refitted from the other valleys
                           of chi2 (DT_PROFILE_DEEP): a thorough search at
                           several times the refits */
  int calibrated;       /* 1: where the profile of log N is not a parabola
                           (a limit, lopsided halves, halves unlike the
                           covariance error) each end of the interval is
                           searched again at a threshold calibrated by a
                           parametric bootstrap (calib.h) instead of
                           Wilks' dchi2 -- for calls without a time budget
                           (dt_analysis_intervals, the first pass); 130
                           fits and up to two more searches per such
                           component.  0 (default): dchi2 */
  int max_iter;         /* fit iteration limit (0: fit default) */
  double time_limit;    /* fit time limit [s] (0: fit default) */
  double stall_chi2;    /* fit.h: a fit also ends when its last iterations
                           gain less chi2 than this (0: off; for trials) */
  double give_up_bic;   /* fit.h: a trial ends once its BIC cannot come
                           below this (0: off) */
  const dt_hyperfine *hyperfine; /* hyperfine components (hyperfine.h):
                           lines with a row in this table are modelled as
                           the sum of their components; NULL (default): every
                           line single.  Must outlive the analysis. */
  int lsf_constant;     /* 1: the model takes the judgement's R or FWHM even
                           where the spectrum has a line-spread width per
                           pixel; 0 (default): the widths per pixel
                           (dt_spectrum.lsf_fwhm_kms) win, each line seen at
                           its own wavelength (lsf.h says who sets which) */
} dt_analysis_opts;

/* Defaults as documented above. */
void dt_analysis_opts_init(dt_analysis_opts *o);

/* Measurements of one line of the doublet (see measure.h for the
 * definitions: integration over the measurement window, continuum error
 * included). */
typedef struct dt_analysis_line {
  const dt_line *line;      /* atomic data */
  double W, W_err;          /* equivalent width and 1-sigma error [Angstrom],
                               rest frame */
  double W_sig;             /* W / W_err */
  double logN_aod;          /* log10 apparent column density N_a [cm^-2]
                               (Savage & Sembach 1991); NaN if N_a <= 0 */
  double logN_aod_err;      /* its 1-sigma error [dex] */
  double W_limit;           /* upper limit on W anywhere in the range
                               (dt_measure_limit in measure.h) [Angstrom] */
  double v_limit;           /* the velocity where the limit is set [km/s] */
  double logN_limit;        /* log10 N [cm^-2] of W_limit on the full curve
                               of growth (cog.h) at b = opts.limit_b */
  size_t nsat;              /* saturated pixels in the window */
  size_t npix;              /* pixels in the window */
  double masked_frac;       /* fraction of the window's pixels masked (or
                               unusable), filled from the fitted model */
  int blend;                /* DT_BLEND_*: the other line of the doublet in
                               this line's window */
  double blend_frac;        /* fraction of the window's pixels taken from
                               the model because the other line is black */
} dt_analysis_line;

enum {
  DT_BLEND_NONE = 0,        /* the other line's model absorbs < 1% here */
  DT_BLEND_DIVIDED,         /* its fitted absorption was divided out */
  DT_BLEND_MODEL            /* it transmits < 50% somewhere: those pixels
                               come from this line's own fitted model */
};

typedef struct dt_analysis_out {
  const dt_doublet *doublet;
  size_t i0, n;             /* selected pixels [i0, i0 + n) of the spectrum */
  size_t nused;             /* pixels entering the fit */
  int fitted;               /* 1: components were fitted in this run */
  int fit_status;           /* DT_OK or the fit's failure (DT_ENOCONV ...) */
  dt_fit_result fit;        /* fit of the components (ncomp = 0: chi2 of the
                               continuum alone); with dt_analysis_eval the
                               judgement's components and their chi2 */
  int measure_status;        /* DT_OK or why the measurements failed (then
                               the line values are NaN) */
  double meas_vlo, meas_vhi; /* measurement window used [km/s] */
  dt_analysis_line line[2]; /* line[0] the stronger */
  int saturated;            /* the two lines' N_a disagree beyond their
                               errors (weaker line larger): saturation */
  int cont_order;           /* continuum order used (may be lower than asked
                               when the windows hold too few pixels) */
  dt_fit_info fit_info;     /* the fit's diagnostics (parameters at a bound,
                               convergence reason, time); zeros when nothing
                               was fitted */
  double cont_tau;          /* the fitted components' largest optical depth
                               (both lines, no LSF) at the inner edges of
                               the continuum regions: > DT_ANALYSIS_CONT_TAU
                               means damping wings reach them and pull the
                               continuum down (dt_analysis_warning); 0 with
                               no components or a fixed continuum */
  double cont_tau_at;       /* where [Angstrom] */
  int have_intervals;       /* 1: logN_int holds the components' intervals */
  dt_profile_interval logN_int[DT_MAX_COMP]; /* 1-sigma profile-likelihood
                               interval of each component's log N (profile.h) */
  double logN_dchi2[DT_MAX_COMP][2]; /* the dchi2 threshold of each
                               interval's lower [0] and upper [1] end: the
                               one asked, or calibrated (calib.h) */
  double logN_dchi2_3[DT_MAX_COMP][2]; /* ... of its 3-sigma ends */
} dt_analysis_out;

typedef struct dt_analysis dt_analysis;

/* An analysis of spectrum s with atomic table t (both must outlive it).
 * NULL when out of memory. */
dt_analysis *dt_analysis_alloc(const dt_spectrum *s, const dt_atomic *t);
void dt_analysis_free(dt_analysis *a);
/* The same analysis for another spectrum s (it must outlive the analysis;
 * the previous one need not): nothing of the last run is kept but the
 * workspaces, and the model when s has the same wavelengths over its
 * pixels and no line-spread width per pixel -- what a batch of spectra from
 * one instrument reuses.  The options stay.  DT_EINVAL when s is NULL. */
int dt_analysis_rebind(dt_analysis *a, const dt_spectrum *s);
/* Replace the options (NULL: defaults).  Takes effect at the next run. */
void dt_analysis_set_opts(dt_analysis *a, const dt_analysis_opts *o);

/* Continuum, fit of j's components (j->comp as starting values, j->frozen,
 * j->tie_b) and measurements.  j is not changed: to keep the fit, apply a
 * DT_ACT_FIT action with out->fit.  Returns DT_OK; DT_ENOTFOUND unknown
 * doublet; DT_ERANGE the doublet's windows are not covered by the
 * spectrum, or the continuum fitted beside them is not positive (no
 * unabsorbed flux there, e.g. damping wings over the whole spectrum); DT_EMASKED every pixel there is masked; DT_EINVAL bad settings
 * (e.g. vlo >= vhi, continuum order out of range); the fit's status (DT_ENOCONV) when the
 * fit failed -- out is then still complete, with the best parameters the
 * fit reached.  e may be NULL. */
int dt_analysis_run(dt_analysis *a, const dt_judgement *j, dt_analysis_out *out,
                    dt_err *e);

/* Profile-likelihood intervals of log N at dchi2 (1: 1 sigma) for every
 * component of out->fit, the fit of the last dt_analysis_run with j, into
 * out->logN_int (have_intervals = 1).  dt_analysis_run does this itself
 * (dchi2 = 1) after a successful fit unless opts.no_intervals, within
 * DT_ANALYSIS_RUN_INTERVAL_S seconds in all (an interval it cannot finish
 * in time is marked incomplete: the covariance error stands); the first
 * pass (autofit.h) does it once for its final fit.  Costs one to a few
 * dozen refits per component (one per side where the profile is a
 * parabola); none in the linear regime (optically thin at the fitted b,
 * tau0 < 0.3; covariance error < 0.1 dex; no saturation flag, bound or
 * neighbour within FWHM + 2 (b_k + b_j)), where the covariance error is
 * the interval.  With opts.outer_intervals each interval also holds its
 * ends at 9 dchi2 (lo3, hi3: 3 sigma).  With opts.calibrated (and dchi2
 * <= 4) the ends of profiles that are not parabolas are searched again at
 * thresholds from a parametric bootstrap (calib.h; out->logN_dchi2 and
 * logN_dchi2_3 say which).  When a refit of the search finds a chi2 below the fit's (the
 * fit sat in a local minimum: profile.h), this call -- not the runs' own
 * intervals -- moves the fit there: out is then the run from the better
 * components (out->fit differs from j->comp; take it) and the intervals
 * are the new fit's.  DT_OK; DT_EINVAL no successful fit to take it from. */
int dt_analysis_intervals(dt_analysis *a, const dt_judgement *j, dt_analysis_out *out,
                          double dchi2);
#define DT_ANALYSIS_RUN_INTERVAL_S 0.01
/* Warnings a reader of the measurements must see, as one line of text
 * into buf: damping wings in the continuum regions (cont_tau above
 * DT_ANALYSIS_CONT_TAU), a line whose window is partly taken from the
 * model because the other line is black there.  Returns 1 when there is
 * any, else 0 with buf "". */
int dt_analysis_warning(const dt_analysis_out *o, char *buf, size_t n);
#define DT_ANALYSIS_CONT_TAU 0.01

/* Switch the intervals of dt_analysis_run off (1) or on (0) without
 * touching the other options; returns the previous setting.  Off, the runs
 * also skip the upper limits (W_limit, logN_limit NaN): a search that
 * runs many fits measures them once at the end (dt_analysis_remeasure). */
int dt_analysis_no_intervals(dt_analysis *a, int off);

/* Switch the measurements of runs and evaluations off (1) or on (0);
 * returns the previous setting (opts.no_measure). */
int dt_analysis_no_measure(dt_analysis *a, int off);

/* Set the fits' time limit [s] (opts.time_limit: 0 the fit's default, < 0
 * none) without touching the other options; returns the previous one. */
double dt_analysis_time_limit(dt_analysis *a, double seconds);

/* Set opts.stall_chi2 alone; returns the previous value. */
double dt_analysis_stall(dt_analysis *a, double chi2);
/* Set opts.give_up_bic alone; returns the previous value. */
double dt_analysis_give_up(dt_analysis *a, double bic);

/* The intervals dt_analysis_run computes itself unless opts.defer_intervals,
 * within its time (DT_ANALYSIS_RUN_INTERVAL_S), for out of the last run of
 * j.  DT_OK; DT_EINVAL when out holds no successful fit of j. */
int dt_analysis_run_intervals(dt_analysis *a, const dt_judgement *j, dt_analysis_out *out);
/* The measurements of out->line again, limits included, for the state of
 * the last run or eval (out must be that run's).  DT_OK or the
 * measurement's error; DT_EINVAL before any run. */
int dt_analysis_remeasure(dt_analysis *a, dt_analysis_out *out);

/* The same without fitting: the model of j's components as they are, its
 * chi2, the continuum and the measurements (e.g. to show a restored state
 * or a component being nudged). */
int dt_analysis_eval(dt_analysis *a, const dt_judgement *j, dt_analysis_out *out,
                     dt_err *e);

/* Measurements of both lines (out[0] the stronger) over the velocity range
 * [vlo, vhi] km/s relative to the judgement's vsys, each line in its own
 * frame, against the continuum and the fitted model of the last
 * dt_analysis_run or dt_analysis_eval (nothing is refitted).  The run's
 * own measurements (out->line) come from the same code over out->meas_vlo
 * .. meas_vhi.  Returns DT_OK; DT_EINVAL no run yet or an empty range;
 * the measurement's error (DT_ERANGE range outside the data, DT_EMASKED)
 * with out[] NaN.  e may be NULL. */
int dt_analysis_measure_range(dt_analysis *a, double vlo, double vhi, dt_analysis_line out[2],
                              dt_err *e);

/* Arrays over the selected pixels (n values) of the last run; NULL before
 * a successful run. */
/* The line-spread function of the last run: its FWHM [km/s] at the
 * stronger line's centre (v = 0), and where it came from: the spectrum's
 * lsf_from when the widths per pixel were used ("table FILE", "column
 * LSF_FWHM (FWHM, Angstrom)"), NULL when the judgement's R or FWHM was. */
double dt_analysis_lsf_fwhm(const dt_analysis *a);
const char *dt_analysis_lsf_source(const dt_analysis *a);

const double *dt_analysis_wave(const dt_analysis *a);       /* [Angstrom] */
const double *dt_analysis_flux(const dt_analysis *a);
const double *dt_analysis_sigma(const dt_analysis *a);
const unsigned char *dt_analysis_mask(const dt_analysis *a); /* spectrum mask */
const unsigned char *dt_analysis_used(const dt_analysis *a); /* 1 = in the fit */
/* Velocity [km/s] of each pixel relative to line 0 or 1 (rest frame vsys). */
const double *dt_analysis_velocity(const dt_analysis *a, int line);
const double *dt_analysis_continuum(const dt_analysis *a);     /* incl. joint part */
const double *dt_analysis_continuum_err(const dt_analysis *a); /* 1 sigma */
/* Total model flux: continuum * exp(-sum tau) through the LSF. */
const double *dt_analysis_model(const dt_analysis *a);
/* Model flux of component k alone (continuum * its own absorption),
 * computed on first request after a run; NULL for k out of range. */
const double *dt_analysis_component_model(dt_analysis *a, size_t k);
/* (flux - model) / sigma; 0 at masked pixels. */
const double *dt_analysis_residual(const dt_analysis *a);
/* Apparent column density profile N_a(v) [cm^-2 (km/s)^-1] of a line and its
 * 1-sigma error, over the selected pixels: the line's velocity window
 * [j->vlo, j->vhi]; NaN outside it and at masked pixels. */
const double *dt_analysis_na_profile(const dt_analysis *a, int line);
const double *dt_analysis_na_profile_err(const dt_analysis *a, int line);

/* Partial covering after a first pass (cover.h): j's components fitted
 * again with a covering factor each -- j->covering is set (a
 * DT_ACT_COVERING), the fit run from j's components, its log N intervals
 * computed (dchi2 = 1) and the fit applied to j (a DT_ACT_FIT).  The first
 * pass itself is best run without covering: its thin trial components
 * would leave C_f and N degenerate.  DT_OK (also with no components: then
 * only covering is set), DT_ENOCONV (the best fit reached is applied), or
 * the analysis' error (j then has covering set and no fit).  e may be NULL. */
int dt_analysis_cover_refit(dt_analysis *a, dt_judgement *j, dt_analysis_out *out, dt_err *e);

/* Refit a recorded state with an analysis of its spectrum (analysis.h; its
 * options must be those the fit was made with -- e.g. joint_cont = the
 * recorded fit's ncont) and compare with dt_fit_check_refit (fit.h).  *agrees
 * is 1 when the refit reproduces the recorded fit (or the state has none),
 * else 0 with why naming the difference.  Returns DT_OK, or the analysis'
 * error (unknown doublet, range not covered, ...) with e filled. */
int dt_analysis_verify_fit(dt_analysis *a, const dt_judgement *recorded, double tol_sigma,
                           int *agrees, char *why, size_t nwhy, dt_err *e);

#endif
