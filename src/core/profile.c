/* Profile-likelihood intervals of log N (profile.h): refits with one
 * column held, a bracket and regula falsi on each side. */
#include "doubletty/profile.h"

#include <math.h>
#include <string.h>
#include <time.h>

#define ACCEPT 0.1       /* a first probe this close (relative dchi2): done
                            (the end then within ~5% of the error) */
#define XTOL 0.02        /* dex */
#define MAX_STEPS 12     /* doublings per side */
#define MAX_ROOT 8       /* regula falsi iterations per side */
#define PROFILE_MAX_ITER 15  /* iterations of one refit (it starts next to its optimum) */
#define PROFILE_TIME 0.1     /* seconds of one refit */
#define PROFILE_MAX_FITS 80  /* refits of one interval at most ... */
#define PROFILE_BUDGET 2.0   /* ... and seconds: then it is incomplete */

typedef struct prof {
  dt_fit_workspace *w;
  dt_fit_problem q;
  const dt_fit_result *r;
  size_t k;
  unsigned char frozen[DT_MAX_COMP];
  dt_component comp[DT_MAX_COMP];
  dt_component from[DT_MAX_COMP];   /* start of the next refit: the last
                                       solution on this side (continuation) */
  double cfrom[DT_MAX_CONT];
  double chi0, chimin, xmin;
  int nfits;
  double t0;          /* start [s] */
  double budget;      /* seconds it may take */
  int incomplete;     /* ran out of refits or time */
} prof;

static double now_s(void) {
  struct timespec ts;
  clock_gettime(CLOCK_MONOTONIC, &ts);
  return (double)ts.tv_sec + 1e-9 * (double)ts.tv_nsec;
}

/* chi2 of the profile at log N_k = x (the rest refitted, starting from
 * the last solution on this side). */
static double chi2_at(prof *P, double x) {
  if (P->nfits >= PROFILE_MAX_FITS || now_s() - P->t0 > P->budget) {
    P->incomplete = 1;
    return NAN;
  }
  memcpy(P->comp, P->from, P->r->ncomp * sizeof P->comp[0]);
  P->comp[P->k].logN = x;
  P->q.comp = P->comp;
  if (P->r->ncont) P->q.cont_init = P->cfrom;
  dt_fit_result fr;
  dt_fit_run(P->w, &P->q, &fr, NULL);
  P->nfits++;
  double c = fr.chi2;
  if (!isfinite(c)) return INFINITY;
  if (fr.status == DT_OK || fr.status == DT_ENOCONV) {
    memcpy(P->from, fr.comp, P->r->ncomp * sizeof P->from[0]);
    if (P->r->ncont) memcpy(P->cfrom, fr.cont_coef, P->r->ncont * sizeof P->cfrom[0]);
  }
  if (c < P->chimin) {
    P->chimin = c;
    P->xmin = x;
  }
  return c;
}

/* One side (dir +1 or -1): the end, or NaN when the profile stays below
 * dchi2 within reach. */
static double side(prof *P, double x0, double s, double dchi2, int dir) {
  memcpy(P->from, P->r->comp, P->r->ncomp * sizeof P->from[0]);
  if (P->r->ncont) memcpy(P->cfrom, P->r->cont_coef, P->r->ncont * sizeof P->cfrom[0]);
  double lim = dir > 0 ? fmin(x0 + DT_PROFILE_REACH, DT_FIT_LOGN_MAX - 0.01)
                       : fmax(x0 - DT_PROFILE_REACH, DT_FIT_LOGN_MIN + 0.01);
  double t = sqrt(dchi2);
  double xa = x0, ha = -t;                  /* inside: h = sqrt(d) - t < 0 */
  double step = s * t, xb = NAN, hb = NAN;
  for (int i = 0; i < MAX_STEPS; i++) {
    double x = x0 + dir * step;
    if (dir * (x - lim) > 0) x = lim;
    double d = chi2_at(P, x) - P->chi0;
    if (P->incomplete) return NAN;
    double h = sqrt(fmax(d, 0.0)) - t;
    if (i == 0 && fabs(d / dchi2 - 1.0) < ACCEPT) return x;
    if (h >= 0) {
      xb = x;
      hb = h;
      break;
    }
    xa = x;
    ha = h;
    if (x == lim) return NAN;
    /* next: extrapolate sqrt(dchi2) linearly from x0 (a parabola's
     * profile is linear there), 1.5 to 4 times further */
    double grow = d > 0 ? 1.15 * t / sqrt(d) : 4.0;
    step *= fmin(fmax(grow, 1.5), 4.0);
  }
  if (!isfinite(xb)) return NAN;
  /* regula falsi (Illinois) between xa (h < 0) and xb (h >= 0) */
  int last = 0;
  double xtol = fmin(XTOL, 0.1 * s);   /* a tenth of the error at least */
  for (int i = 0; i < MAX_ROOT && fabs(xb - xa) > xtol; i++) {
    double x = xb - hb * (xb - xa) / (hb - ha);
    double h = sqrt(fmax(chi2_at(P, x) - P->chi0, 0.0)) - t;
    if (P->incomplete) return NAN;
    if (fabs(h) < 0.05) return x;
    if (h >= 0) {
      xb = x;
      hb = h;
      if (last == 1) ha *= 0.5;
      last = 1;
    } else {
      xa = x;
      ha = h;
      if (last == -1) hb *= 0.5;
      last = -1;
    }
  }
  return 0.5 * (xa + xb);
}

int dt_profile_logN(dt_fit_workspace *w, const dt_fit_problem *p, const dt_fit_result *r,
                    size_t k, double dchi2, double budget, dt_profile_interval *out) {
  if (!w || !p || !r || !out || k >= r->ncomp || r->ncomp != p->ncomp || !(dchi2 > 0))
    return DT_EINVAL;
  memset(out, 0, sizeof *out);
  double x0 = r->comp[k].logN;
  out->best = x0;
  if (p->frozen && (p->frozen[k] & DT_FREEZE_N)) {
    out->lo = out->hi = x0;
    return DT_OK;
  }
  prof P;
  memset(&P, 0, sizeof P);
  P.w = w;
  P.q = *p;
  P.r = r;
  P.k = k;
  if (p->frozen) memcpy(P.frozen, p->frozen, p->ncomp);
  P.frozen[k] |= DT_FREEZE_N;
  P.q.frozen = P.frozen;
  if (r->ncont) P.q.cont_init = r->cont_coef;
  if (r->covering) P.q.cf = r->cf;
  /* refits start next to an optimum: a short leash */
  P.q.max_iter = PROFILE_MAX_ITER;
  P.q.time_limit = PROFILE_TIME;
  P.q.single_run = 1;   /* a high chi2 away from the optimum is the point */
  P.chi0 = P.chimin = r->chi2;
  P.xmin = x0;
  P.t0 = now_s();
  P.budget = budget > 0 ? fmin(budget, PROFILE_BUDGET) : PROFILE_BUDGET;
  double s = r->err[k].logN;
  if (!(s > 0) || !isfinite(s)) s = 0.3;
  s = fmin(fmax(s, 0.001), 0.5);
  double lo = NAN, hi = NAN;
  for (int pass = 0; pass < 2; pass++) {
    hi = side(&P, x0, s, dchi2, +1);
    lo = side(&P, x0, s, dchi2, -1);
    /* a lower minimum found on the way: the reference moves there, once */
    if (pass == 0 && P.chimin < P.chi0 - 0.1 * dchi2) {
      P.chi0 = P.chimin;
      x0 = P.xmin;
      continue;
    }
    break;
  }
  out->best = x0;
  out->lo = lo;
  out->hi = hi;
  out->flag = isfinite(lo) ? (isfinite(hi) ? DT_PROFILE_BOUNDED : DT_PROFILE_LOWER_LIMIT)
                           : (isfinite(hi) ? DT_PROFILE_UPPER_LIMIT : DT_PROFILE_UNBOUNDED);
  out->nfits = P.nfits;
  out->incomplete = P.incomplete;
  if (P.incomplete) {
    out->lo = out->hi = NAN;
    out->flag = DT_PROFILE_BOUNDED;
  }
  return DT_OK;
}

const char *dt_profile_flag_name(int flag) {
  switch (flag) {
  case DT_PROFILE_LOWER_LIMIT: return "lower-limit";
  case DT_PROFILE_UPPER_LIMIT: return "upper-limit";
  case DT_PROFILE_UNBOUNDED: return "unconstrained";
  default: return "";
  }
}
