/* The log N intervals of an analysis' components (analysis.h):
 * covariance where chi2 is a parabola in log N, else the profile
 * likelihood (profile.c) with the shortcuts and the deeper search the
 * component's regime calls for, a move of the fit to a lower minimum the
 * search found, and with opts.calibrated the ends of a profile that is
 * not a parabola searched again at bootstrap-calibrated thresholds
 * (calib.c). */
#include "doubletty/analysis.h"

#include <math.h>
#include <string.h>

#include "doubletty/cog.h"
#include "doubletty/profile.h"

#include "analysis_priv.h"

/* The line-spread function's Doppler parameter: a Gaussian of the
 * analysis' FWHM is exp(-(v / b)^2) with b = FWHM / (2 sqrt(ln 2)). */
static double lsf_b(const dt_analysis *a) { return a->fwhm_kms / (2.0 * sqrt(log(2.0))); }

/* Another component lies within FWHM + 2 (b_k + b_j) of component k. */
static int blended(const dt_analysis *a, const dt_analysis_out *out, size_t k) {
  const dt_fit_result *r = &out->fit;
  const dt_component *c = &r->comp[k];
  for (size_t q = 0; q < r->ncomp; q++)
    if (q != k && fabs(r->comp[q].v - c->v) < a->fwhm_kms + 2.0 * (c->b + r->comp[q].b)) return 1;
  return 0;
}

/* Component k is in the linear regime, where chi2 is a parabola in log N
 * and the covariance error is the profile-likelihood interval (the
 * profile search would accept its first probe, at two refits) -- unless a
 * second valley in b lies within reach (dt_profile_other_valley, two
 * refits; an unresolved line fitted broad and thin may as well be narrow
 * and saturated): optically
 * thin at its fitted b (tau0 < LINEAR_TAU0, cog.h) with a covariance
 * error below LINEAR_ERR dex (so log N and N are linear to within a few
 * per cent over the interval), no saturation flag from the doublet ratios,
 * no parameter at a bound, and no other component within FWHM + 2 (b_k +
 * b_j) (a blend correlates the columns non-linearly). */
#define LINEAR_TAU0 0.3
#define LINEAR_ERR 0.1
static int linear_regime(const dt_analysis *a, const dt_analysis_out *out, size_t k) {
  const dt_fit_result *r = &out->fit;
  const dt_component *c = &r->comp[k];
  double e = r->err[k].logN;
  if (!(e > 0) || !(e < LINEAR_ERR) || out->saturated || out->fit_info.at_bound[k]) return 0;
  if (!(dt_cog_tau0(&a->d->line[0], c->logN, c->b) < LINEAR_TAU0)) return 0;
  return !blended(a, out, k);
}

/* The fit moves to a lower chi2 the profile search found (profile.h):
 * a run from those components (intervals deferred, measurements and
 * limits as usual), kept when its chi2 is lower, else the run of j again.
 * 1 when it moved. */
static int move_fit(dt_analysis *a, const dt_judgement *j, dt_analysis_out *out,
                    const dt_fit_result *lower) {
  if (lower->ncomp != j->ncomp || !isfinite(lower->chi2) || !(lower->chi2 < out->fit.chi2))
    return 0;
  dt_judgement jm = *j;
  memcpy(jm.comp, lower->comp, jm.ncomp * sizeof jm.comp[0]);
  int defer = a->opts.defer_intervals;
  a->opts.defer_intervals = 1;
  double chi0 = out->fit.chi2;
  dt_analysis_out o2;
  int st = dt_analysis_run(a, &jm, &o2, NULL);
  int moved = st == DT_OK && o2.fit.ncomp == j->ncomp && o2.fit.chi2 < chi0 - DT_PROFILE_MOVE;
  if (moved) *out = o2;
  else dt_analysis_run(a, j, out, NULL);   /* the analysis holds j's fit again */
  a->opts.defer_intervals = defer;
  return moved;
}

/* Component k may sit in the wrong valley of chi2 in b (two_b_valleys):
 * saturated at its fitted b (tau0 > 1) or unresolved (b below the LSF's
 * FWHM).  It is at risk so, or blended (another component within FWHM +
 * 2 (b_k + b_j)).  With
 * opts.outer_intervals its profile then starts with refits from the other
 * valleys (DT_PROFILE_DEEP), and in the linear regime two refits check
 * for a second valley (dt_profile_other_valley).  Without, the search
 * relies on the refits of the points that would end the interval: about
 * a third of the refits, for the first pass over a survey. */
static int two_b_valleys(const dt_analysis *a, const dt_analysis_out *out, size_t k) {
  const dt_component *c = &out->fit.comp[k];
  return out->saturated || dt_cog_tau0(&a->d->line[0], c->logN, c->b) > 1.0 || c->b < a->fwhm_kms;
}

static int at_risk(const dt_analysis *a, const dt_analysis_out *out, size_t k) {
  return two_b_valleys(a, out, k) || blended(a, out, k);
}

/* The scan's shortcuts for component k (profile.h): DT_PROFILE_ISOLATED
 * when no other component lies within FWHM + 2 (b_k + b_j) (no blend to
 * hand the column to), DT_PROFILE_RESOLVED when its b, not at a bound and
 * not tied, exceeds the line-spread function's b (FWHM / (2 sqrt(ln 2)))
 * by two errors and is measured to 20% (a narrow saturated line or a
 * broad thin one would have another width than the observed). */
#define RESOLVED_BERR 0.2
static unsigned scan_flags(const dt_analysis *a, const dt_analysis_out *out, size_t k,
                           int tie_b) {
  const dt_fit_result *r = &out->fit;
  const dt_component *c = &r->comp[k];
  unsigned fl = blended(a, out, k) ? 0 : DT_PROFILE_ISOLATED;
  double be = r->err[k].b, binst = lsf_b(a);
  if (!tie_b && !(out->fit_info.at_bound[k] & DT_FREEZE_B) && be > 0 &&
      be < RESOLVED_BERR * c->b && c->b - 2.0 * be > binst)
    fl |= DT_PROFILE_RESOLVED;
  return fl;
}

/* Component k's profile is not a parabola, so dchi2 = 1 (Wilks) need not
 * give 68% (calib.h): its interval is a limit, its two halves differ by
 * more than LOPSIDED of the longer, or either half differs from the
 * covariance error (the parabola's half-width) by more than LOPSIDED of
 * it.  (A saturated line with a profile that is a parabola all the same
 * is left alone: most of a survey's, measured to a few hundredths of a
 * dex.) */
#define LOPSIDED 0.25
static int not_parabolic(const dt_analysis_out *out, size_t k) {
  const dt_profile_interval *pi = &out->logN_int[k];
  if (pi->flag != DT_PROFILE_BOUNDED) return 1;
  double up = pi->hi - pi->best, dn = pi->best - pi->lo, e = out->fit.err[k].logN;
  if (fabs(up - dn) > LOPSIDED * fmax(up, dn)) return 1;
  return !(fabs(up - e) <= LOPSIDED * e && fabs(dn - e) <= LOPSIDED * e);
}

/* The flag of an interval [lo, hi] (NaN: no end there), as profile.h. */
static int ends_flag(double lo, double hi) {
  return isfinite(lo) ? (isfinite(hi) ? DT_PROFILE_BOUNDED : DT_PROFILE_LOWER_LIMIT)
                      : (isfinite(hi) ? DT_PROFILE_UPPER_LIMIT : DT_PROFILE_UNBOUNDED);
}

/* An end searched again at a higher threshold (out = 1) lies outward of
 * the old one (dir +1 the upper end, -1 the lower; NaN, no end, is the
 * farthest), at a lower one inward: a new end on the wrong side is the
 * search's, not the threshold's (another valley seen or missed), and the
 * old end stands. */
static int moved_right(double old, double nw, int dir, int out) {
  double o = isfinite(old) ? dir * old : INFINITY, n = isfinite(nw) ? dir * nw : INFINITY;
  return out ? n >= o : n <= o;
}

/* The curve-of-growth companion of component k (common practice: a
 * saturated or unresolved line's equivalent width is met both by a narrow
 * line with a large column -- on the flat or damped part of the curve of
 * growth -- and by a broad one with a small column, and at R of a few
 * thousand the two can fit about equally): for a line fitted narrower than
 * the line-spread function (b below its FWHM / (2 sqrt(ln 2))), b
 * COG_SPREAD times broader with the column that keeps the stronger line's
 * W (cog.h).  (The other way, a broad fit's narrow companion, is the
 * profile scan's: its refits from the narrow valley at the ends.)  Unless
 * its chi2 there, the profile alone, lies COG_START_DCHI2 or more above
 * the fit's (a resolved line, whose shape tells b), the whole problem is
 * refitted from there (COG_PEEK_ITER iterations first, the
 * rest -- COG_MAX_ITER more -- only when chi2 is then within COG_PEEK_DCHI2
 * of the fit's and b has not come back within 20% of the fit's).  Returns
 * 1 when that found a lower chi2 (*lower, the fit to move to); else 0, with
 * the companion's log N_k, its chi2 above the fit's and its covariance
 * error in cx, cd, ce (cd INFINITY: none). */
#define COG_SPREAD 5.0
#define COG_PEEK_ITER 6
#define COG_PEEK_DCHI2 25.0
#define COG_START_DCHI2 100.0 /* its start at most this far above the fit's */
#define COG_MAX_ITER 30       /* iterations of the rest */
#define COG_SAME_VALLEY 0.2   /* in ln b */
static int companion(dt_analysis *a, const dt_fit_problem *p0, const dt_analysis_out *out,
                     size_t k, dt_fit_result *lower, double *cx, double *cd, double *ce) {
  const dt_fit_result *r = &out->fit;
  const dt_component *c = &r->comp[k];
  const dt_line *line = &a->d->line[0];
  *cd = INFINITY;
  if (!(c->b < lsf_b(a))) return 0;
  double b2 = fmin(c->b * COG_SPREAD, DT_FIT_B_MAX / 1.05);
  double n2 = dt_cog_logN(line, dt_cog_W(line, c->logN, c->b), b2);
  if (!isfinite(n2) || !(n2 > DT_FIT_LOGN_MIN) || !(n2 < DT_FIT_LOGN_MAX)) return 0;
  dt_component start[DT_MAX_COMP];
  memcpy(start, r->comp, r->ncomp * sizeof start[0]);
  start[k].b = b2;
  start[k].logN = n2;
  dt_fit_problem q = *p0;
  q.comp = start;
  q.cont_init = r->ncont ? r->cont_coef : NULL;
  q.single_run = 1;
  q.time_limit = -1;
  /* a companion that starts this far above fits another profile (a
   * resolved line's): no refit */
  double c0;
  size_t npix;
  if (dt_fit_chi2(a->fw, &q, start, q.cont_init, NULL, &c0, &npix) != DT_OK ||
      !(c0 < r->chi2 + COG_START_DCHI2))
    return 0;
  q.max_iter = COG_PEEK_ITER;
  int st = dt_fit_run(a->fw, &q, lower, NULL);
  /* back in the fit's own valley (b within 20%): it would end there */
  if (fabs(log(lower->comp[k].b / c->b)) < COG_SAME_VALLEY) return 0;
  if (st == DT_ENOCONV && lower->chi2 < r->chi2 + COG_PEEK_DCHI2) {
    memcpy(start, lower->comp, r->ncomp * sizeof start[0]);
    double cont[DT_MAX_CONT];
    if (r->ncont) memcpy(cont, lower->cont_coef, r->ncont * sizeof cont[0]);
    q.cont_init = r->ncont ? cont : NULL;
    q.max_iter = COG_MAX_ITER;
    st = dt_fit_run(a->fw, &q, lower, NULL);
  }
  if ((st != DT_OK && st != DT_ENOCONV) || !isfinite(lower->chi2) || lower->ncomp != r->ncomp)
    return 0;
  /* not a degenerate solution held at a bound of b */
  if (lower->comp[k].b < 1.1 * DT_FIT_B_MIN || lower->comp[k].b > DT_FIT_B_MAX / 1.1) return 0;
  lower->status = DT_OK;
  if (lower->chi2 < r->chi2 - DT_PROFILE_MOVE) return 1;
  if (fabs(lower->comp[k].logN - c->logN) > 0.1) {   /* another valley, not this one */
    *cx = lower->comp[k].logN;
    *cd = fmax(lower->chi2 - r->chi2, 0.0);
    *ce = lower->err[k].logN > 0 ? lower->err[k].logN : 0.0;
  }
  return 0;
}

/* An interval's ends (NaN: none, left open) widened to cover the
 * companion's valley (log N x, chi2 d above the fit's, error e) where it
 * lies below the threshold: x -+ e sqrt(threshold - d). */
static void cover_companion(double *lo, double *hi, double x, double d, double e, double t) {
  if (!(d < t)) return;
  double h = e * sqrt(t - d);
  if (isfinite(*lo)) *lo = fmin(*lo, x - h);
  if (isfinite(*hi)) *hi = fmax(*hi, x + h);
}

/* The profile intervals (not the covariance's: no refits) of the
 * components whose profile is not a parabola, each end again at its own
 * calibrated threshold (calib.h): the test of log N_k = the end, its
 * world the data's fit held there, inverted (an end belongs to the
 * interval when its dchi2 is below that test's threshold; one step of
 * the inversion, from the uncalibrated end).  An end is searched again
 * only where its threshold differs from dchi2 by more than CALIB_SAME of
 * it; its 3-sigma end (outer_intervals) only where that threshold grew
 * (it never shrinks below 9 dchi2).  A limit's open side stays open.  An
 * end whose new search does not finish, or finds a lower chi2, stays. */
#define CALIB_SAME 0.02
#define CALIB_MAX_DCHI2 4.0   /* beyond (95%), DT_CALIB_NSIM simulations put
                                 too few in the tail: Wilks' threshold stands */
static void calibrate(dt_analysis *a, const dt_judgement *j, dt_analysis_out *out, double dchi2) {
  if (!a->calw || a->calw_cap < a->n) {
    dt_calib_free(a->calw);
    a->calw = dt_calib_alloc(a->n, 0);
    a->calw_cap = a->calw ? a->n : 0;
    if (!a->calw) return;
  }
  dt_fit_problem p;
  dt_an_fill_problem(a, j, &p);
  const dt_fit_result *r = &out->fit;
  for (size_t k = 0; k < r->ncomp; k++) {
    dt_profile_interval *pi = &out->logN_int[k];
    if (pi->nfits == 0 || pi->incomplete || pi->moved || !not_parabolic(out, k)) continue;
    dt_profile_interval res = *pi;
    unsigned fl = scan_flags(a, out, k, p.tie_b);
    if (a->opts.outer_intervals) fl |= at_risk(a, out, k) ? DT_PROFILE_DEEP : 0;
    for (int side = 0; side < 2; side++) {   /* 0 lower end, 1 upper */
      double end = side ? pi->hi : pi->lo;
      if (!isfinite(end)) continue;
      dt_calib_result cr;
      if (dt_calib_logN(a->calw, a->fw, &p, r, k, end, dchi2, 0, &cr) != DT_OK) continue;
      if (fabs(cr.dchi2 - dchi2) <= CALIB_SAME * dchi2) continue;
      int outer = a->opts.outer_intervals && cr.dchi2_3 > 9.0 * dchi2;
      dt_profile_interval ci;
      dt_profile_logN(a->fw, &p, r, k, cr.dchi2, 0, fl | (outer ? DT_PROFILE_OUTER : 0), &ci,
                      NULL);
      if (ci.incomplete || ci.moved) continue;
      res.nfits += ci.nfits;
      int dir = side ? +1 : -1;
      double *e1 = side ? &res.hi : &res.lo, n1 = side ? ci.hi : ci.lo;
      if (moved_right(*e1, n1, dir, cr.dchi2 > dchi2)) {
        *e1 = n1;
        out->logN_dchi2[k][side] = cr.dchi2;
      }
      double *e3 = side ? &res.hi3 : &res.lo3, n3 = side ? ci.hi3 : ci.lo3;
      if (outer && !ci.incomplete3 && !res.incomplete3 && moved_right(*e3, n3, dir, 1)) {
        *e3 = n3;
        out->logN_dchi2_3[k][side] = cr.dchi2_3;
      }
    }
    res.flag = ends_flag(res.lo, res.hi);
    if (!res.incomplete3) res.flag3 = ends_flag(res.lo3, res.hi3);
    *pi = res;
  }
}

/* A refit that turned up a better minimum restarts the intervals from it,
 * at most MAX_MOVES times (each move lowers chi2 by DT_PROFILE_MOVE or
 * more, so this ends anyway) -- with no time budget only (explicit calls,
 * the first pass: the caller then takes out->fit); a run's intervals
 * (budget > 0: the inspector's keystrokes, whose judgement holds its own
 * fit) keep the fit and count such an interval as incomplete. */
#define MAX_MOVES 3
static int intervals(dt_analysis *a, const dt_judgement *j, dt_analysis_out *out, double dchi2,
                     double budget) {
  out->have_intervals = 0;
  if (!a->have_run || !a->fw || out->fit.status != DT_OK || out->fit.ncomp != j->ncomp ||
      !(dchi2 > 0))
    return DT_EINVAL;
  int keep = -1;   /* the interval already found around a moved fit */
  for (int moves = 0;; moves++) {
    dt_fit_problem p;
    dt_an_fill_problem(a, j, &p);
    const dt_fit_result *r = &out->fit;
    int again = 0;
    for (size_t k = 0; k < r->ncomp && !again; k++) {
      if ((int)k == keep) continue;
      dt_profile_interval *pi = &out->logN_int[k];
      double h = r->err[k].logN * sqrt(dchi2);
      double h3 = dchi2 < 9.0 ? 3.0 * h : h;
      double t3 = dchi2 < 9.0 ? 9.0 * dchi2 : dchi2;
      double cx = NAN, cd = INFINITY, ce = 0;
      dt_fit_result lower;
      if (budget == 0 && !a->opts.covariance_only && two_b_valleys(a, out, k) &&
          !blended(a, out, k) && companion(a, &p, out, k, &lower, &cx, &cd, &ce) &&
          moves < MAX_MOVES && move_fit(a, j, out, &lower)) {
        again = 1;   /* a better fit in the other valley: all again */
        keep = -1;
        break;
      }
      if (a->opts.covariance_only ||
          (cd >= t3 && linear_regime(a, out, k) &&
           !(a->opts.outer_intervals && at_risk(a, out, k) &&
             dt_profile_other_valley(a->fw, &p, r, k, h3, dchi2 < 9.0 ? 9.0 * dchi2 : dchi2)))) {
        /* the covariance interval is the profile's here (see above), or
         * was asked for */
        memset(pi, 0, sizeof *pi);
        pi->best = r->comp[k].logN;
        pi->lo = pi->best - h;
        pi->hi = pi->best + h;
        pi->lo3 = pi->best - h3;
        pi->hi3 = pi->best + h3;
        pi->incomplete3 = !a->opts.outer_intervals;
        continue;
      }
      lower.status = DT_EINVAL;
      unsigned fl = scan_flags(a, out, k, p.tie_b) | DT_PROFILE_QUICK;
      /* the thorough search starts from the other valleys where at risk;
       * so does the calibrated one for a lone line whose valley in b may
       * lie elsewhere (its thresholds hold around the best fit only: a fit
       * left in the other valley covers too often) -- not in a blend,
       * whose own fit covers well and whose split starts over-cover
       * (README, Measurements) */
      if (a->opts.outer_intervals)
        fl |= DT_PROFILE_OUTER | (at_risk(a, out, k) ? DT_PROFILE_DEEP : 0);
      else if (a->opts.calibrated && budget == 0 && two_b_valleys(a, out, k) &&
               !blended(a, out, k))
        fl |= DT_PROFILE_DEEP;
      dt_profile_logN(a->fw, &p, r, k, dchi2, budget, fl, pi, &lower);
      if (!pi->incomplete && !pi->moved) {
        cover_companion(&pi->lo, &pi->hi, cx, cd, ce, dchi2);
        pi->flag = ends_flag(pi->lo, pi->hi);
        if (!pi->incomplete3) {
          cover_companion(&pi->lo3, &pi->hi3, cx, cd, ce, t3);
          pi->flag3 = ends_flag(pi->lo3, pi->hi3);
        }
      }
      if (budget == 0 && pi->moved && moves < MAX_MOVES && lower.status == DT_OK) {
        dt_profile_interval found = *pi;
        if (move_fit(a, j, out, &lower)) {
          /* the others' intervals were around the old fit: again */
          out->logN_int[k] = found;
          keep = (int)k;
          again = 1;
        }
      }
    }
    if (!again) break;
  }
  for (size_t k = 0; k < out->fit.ncomp; k++)
    for (int side = 0; side < 2; side++) {
      out->logN_dchi2[k][side] = dchi2;
      out->logN_dchi2_3[k][side] = dchi2 < 9.0 ? 9.0 * dchi2 : dchi2;
    }
  if (budget == 0 && dchi2 <= CALIB_MAX_DCHI2 && a->opts.calibrated && !a->opts.covariance_only)
    calibrate(a, j, out, dchi2);
  out->have_intervals = 1;
  return DT_OK;
}

int dt_analysis_intervals(dt_analysis *a, const dt_judgement *j, dt_analysis_out *out,
                          double dchi2) {
  return intervals(a, j, out, dchi2, 0);
}

int dt_analysis_run_intervals(dt_analysis *a, const dt_judgement *j, dt_analysis_out *out) {
  if (!out->fit.ncomp) return DT_EINVAL;
  return intervals(a, j, out, 1.0, DT_ANALYSIS_RUN_INTERVAL_S / (double)out->fit.ncomp);
}

