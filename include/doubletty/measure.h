/* Model-independent measurements of each line of a doublet over a velocity
 * window: equivalent width, apparent optical depth column, upper limits.
 *
 * Pure functions over arrays of a region of pixels (wavelength, flux, sigma,
 * mask, continuum and its uncertainty); no allocation, no I/O.
 *
 * Integration: pixel edges lie halfway between neighbouring centres (the
 * first and last pixel symmetric about their centre); a pixel contributes
 * the fraction of its width that lies inside the window [v1, v2] (velocity
 * relative to the line redshifted by vsys, dt_velocity in model.h).  Masked
 * pixels contribute nothing and are counted in nmasked.
 *
 * Equivalent width (rest frame, Angstrom):
 *     W = sum_i (1 - F_i/C_i) dlambda_i / (1 + vsys/c)
 *     sigma_W,flux^2 = sum_i (sigma_i/C_i dlambda_i)^2 / (1 + vsys/c)^2
 *     sigma_W,cont   = sum_i F_i sigma_C,i / C_i^2 dlambda_i / (1 + vsys/c)
 * The continuum term is summed linearly: the continuum error is a smooth
 * curve, so it is taken as fully correlated across the window (conservative;
 * common practice, e.g. Sembach & Savage 1992, ApJS 83, 147 -- from memory).
 * sigma_W = sqrt(sigma_W,flux^2 + sigma_W,cont^2); significance W/sigma_W.
 *
 * Apparent optical depth (Savage & Sembach 1991, ApJ 379, 245):
 *     tau_a(v) = ln(C/F)
 *     N_a(v)   = 3.768e14 tau_a(v) / (f lambda)   [cm^-2 (km/s)^-1, lambda in A]
 *     N_a      = sum_i N_a(v_i) dv_i              [cm^-2]
 * (3.768e14 = m_e c / (pi e^2) in these units; computed from DT_SIGMA0.)
 * Errors: sigma_tau,i = sigma_i/F_i (flux, added in quadrature) and
 * sigma_C,i/C_i (continuum, summed linearly as for W).
 * Saturated pixels: where F < floor = max(floor_nsigma * sigma, floor_frac * C)
 * (including F <= 0) the flux is raised to the floor and the pixel counted in
 * nfloor; N_a is then a lower limit.
 *
 * Saturation flag of a doublet (dt_measure_saturated), from both ratios:
 * for unresolved saturated structure N_a of the stronger line falls below
 * that of the weaker line (Savage & Sembach 1991), and the ratio of the
 * equivalent widths W_s/W_w falls from its optically thin value
 * R = f_s lambda_s^2 / (f_w lambda_w^2) (~2 for Na I; the linear curve of
 * growth) towards 1.  The flag is set when N_a(weak) - N_a(strong) exceeds
 * sat_nsigma times the combined error, or when the stronger line is
 * significant (W_s >= 3 sigma) and R W_w - W_s exceeds sat_nsigma times
 * sqrt((R sigma_Ww)^2 + sigma_Ws^2), or when either line has floored
 * pixels.
 *
 * Upper limits: W_limit = limit_nsigma * sigma_W (the noise of the window, as
 * measured), and the column on the linear part of the curve of growth,
 *     N_limit = 1.13e20 W_limit / (f lambda^2)   [cm^-2, W and lambda in A]
 * (= m_e c^2/(pi e^2) W/(f lambda^2); e.g. Spitzer 1978, Physical Processes
 * in the Interstellar Medium, eq. 3-48; computed from DT_SIGMA0 and c). */
#ifndef DOUBLETTY_MEASURE_H
#define DOUBLETTY_MEASURE_H
#include <stddef.h>
#include "doubletty/atomic.h"
#include "doubletty/judge.h"
#include "doubletty/status.h"

typedef struct dt_measure_opts {
  double limit_nsigma;   /* upper limits at this many sigma (default 3) */
  double floor_nsigma;   /* saturated below this many sigma of flux (default 1) */
  double floor_frac;     /* ... or below this fraction of C (default 0.001) */
  double sat_nsigma;     /* doublet N_a disagreement threshold (default 2) */
} dt_measure_opts;

void dt_measure_opts_init(dt_measure_opts *o);

/* Arrays over a region of n pixels (any part of a spectrum). */
typedef struct dt_measure_input {
  size_t n;
  const double *wave;            /* vacuum Angstrom, strictly increasing */
  const double *flux;
  const double *sigma;           /* 1-sigma flux error */
  const unsigned char *mask;     /* nonzero = masked; NULL = none */
  const double *cont;            /* continuum (> 0) */
  const double *cont_err;        /* its 1-sigma error; NULL = exact */
  double vsys;                   /* [km/s] */
} dt_measure_input;

typedef struct dt_line_measure {
  double v1, v2;         /* integration window [km/s] */
  double W, W_err;       /* rest-frame equivalent width and error [Angstrom] */
  double W_err_flux;     /* its parts: flux noise ... */
  double W_err_cont;     /* ... and continuum */
  double signif;         /* W / W_err (0 when W_err = 0) */
  double Na, Na_err;     /* apparent column and error [cm^-2] */
  double logNa;          /* log10 Na; NAN when Na <= 0 */
  double logNa_err;      /* 0.4343 Na_err / Na; NAN when Na <= 0 */
  double W_limit;        /* limit_nsigma * W_err [Angstrom] */
  double logN_limit;     /* log10 of the curve-of-growth column limit */
  size_t npix;           /* pixels touching the window (masked included) */
  size_t nmasked;        /* of which masked */
  size_t nfloor;         /* of which saturated (floored) */
  double coverage;       /* fraction of [v1, v2] covered by the region's pixels */
} dt_line_measure;

typedef struct dt_doublet_measure {
  dt_line_measure line[2];   /* [0] stronger, [1] weaker (as in dt_doublet) */
  double ratio;              /* N_a(weak) / N_a(strong); NAN if undefined */
  double excess_sigma;       /* (N_a(weak) - N_a(strong)) / combined error */
  int saturated;             /* see the header comment */
} dt_doublet_measure;

/* Measure one line over [v1, v2].  Na_v and Na_v_err (may be NULL; length
 * in->n) receive the N_a(v) profile [cm^-2 (km/s)^-1] on every pixel of the
 * region inside the window, NAN elsewhere and on masked pixels.
 * Errors: DT_EINVAL (v1 >= v2, n == 0, non-positive continuum, bad line),
 * DT_ERANGE (no pixel of the region inside the window; a window only
 * partly covered is measured over the covered part, see coverage), DT_EMASKED (every pixel in the
 * window masked). */
int dt_measure_line(const dt_measure_input *in, const dt_line *line, double v1,
                    double v2, const dt_measure_opts *o, dt_line_measure *out,
                    double *Na_v, double *Na_v_err, dt_err *e);

/* The upper limit on a line's rest-frame equivalent width anywhere in
 * [v1, v2]: the box [vc - hw, vc + hw] is moved over every pixel centre vc
 * inside [v1, v2] (and vc = v1, v2), its W(vc) and sigma_W(vc) measured as
 * by dt_measure_line, and
 *     W_limit = max over vc of W(vc) + nsigma sigma_W(vc),
 * *v_at the vc where the maximum is.  For a line of true width W_t centred
 * at v_t in the range whose profile the box holds, W(v_t) is Gaussian about
 * W_t, so P(W_t > W(v_t) + n sigma) = Phi(-n); the maximum is at least
 * that term, so W_t exceeds W_limit with probability at most Phi(-n)
 * wherever the line lies (a one-sided confidence bound that holds at the
 * unknown position; common practice for a bound valid over a search).
 * Boxes are clipped to the region's pixels only.  DT_OK; DT_EINVAL bad
 * arguments; DT_ERANGE no box measurable. */
int dt_measure_limit(const dt_measure_input *in, const dt_line *line, double v1, double v2,
                     double hw, double nsigma, double *W_limit, double *v_at, dt_err *e);

/* Both lines of a doublet over the same velocity window, and the
 * saturation test.  The profiles are not returned (use dt_measure_line). */
int dt_measure_doublet(const dt_measure_input *in, const dt_doublet *d, double v1,
                       double v2, const dt_measure_opts *o, dt_doublet_measure *out,
                       dt_err *e);

/* The saturation flag above from the two lines' measurements (s the
 * stronger line of d, w the weaker). */
int dt_measure_saturated(const dt_line_measure *s, const dt_line_measure *w,
                         const dt_doublet *d, const dt_measure_opts *o);

/* Constants of the formulas above, from DT_SIGMA0 and DT_C_KMS. */
double dt_aod_const(void);        /* ~3.768e14 */
double dt_cog_const(void);        /* ~1.13e20  */

/* Column density [cm^-2] on the linear curve of growth for a rest-frame
 * equivalent width W [Angstrom] of a line (f, lambda0 in Angstrom). */
double dt_cog_linear_N(double W, const dt_line *line);

/* The summary of a doublet's measurements kept with a judgement (the session
 * file records it with a change), per line of the doublet. */
typedef struct dt_meas_line {
  double w, w_err;               /* rest-frame equivalent width, 1 sigma [Angstrom] */
  double w_lim;                  /* upper limit on W [Angstrom]; NaN = none */
  double logN_aod, logN_aod_err; /* apparent column density log10 N_a [cm^-2]; NaN = none */
  double logN_lim;               /* upper limit on log10 N [cm^-2]; NaN = none */
} dt_meas_line;

typedef struct dt_meas_summary {
  dt_meas_line line[2];          /* [0] the stronger line, [1] the weaker */
  double nsigma;                 /* the limits are nsigma upper limits (e.g. 3) */
  int saturated;                 /* the two lines' N_a disagree: hidden saturation */
  dt_verdict suggested;          /* the automatic suggestion; NONE = none */
} dt_meas_summary;

/* Fill every value of *m with NaN, saturated 0, suggested NONE. */
void dt_meas_summary_clear(dt_meas_summary *m);

/* The summary of an analysis run (analysis.h): both lines' W, limits and
 * N_a (NaN when the measurement failed), its saturation flag, the limits'
 * significance nsigma and an automatic suggestion (NONE if none). */
struct dt_analysis_out;
void dt_meas_summary_from_analysis(const struct dt_analysis_out *o, double nsigma,
                                   dt_verdict suggested, dt_meas_summary *m);

#endif
