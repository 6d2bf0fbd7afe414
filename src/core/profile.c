/* Profile-likelihood intervals of log N (profile.h): refits with one
 * column held (from more than one b where a point would end the interval),
 * a bracket and regula falsi on each side, at dchi2 and at 9 dchi2. */
#include "doubletty/profile.h"

#include <math.h>
#include <string.h>
#include <time.h>

#define ACCEPT 0.1       /* a first probe this close (relative dchi2): done
                            (the end then within ~5% of the error) */
#define XTOL 0.02        /* dex */
#define MAX_STEPS 12     /* doublings per side */
#define MAX_ROOT 8       /* regula falsi iterations per side */
#define VERIFY 0.9       /* a point at this fraction of the target dchi2 or
                            more is refitted from the other b valley too */
#define B_SPREAD 5.0     /* the other valleys' b: b / B_SPREAD or less, ... */
#define B_NARROW 1.0     /* ... at most B_NARROW km/s (narrow, saturated) */
#define B_BROAD 50.0     /* b B_SPREAD or more, at least B_BROAD (broad, thin) */
#define PROFILE_MAX_ITER 15  /* iterations of one refit (it starts next to its optimum) */
#define PROFILE_ALT_ITER 30  /* ... of one from the other b valley (far from it), */
#define PROFILE_PEEK_ITER 6  /* of which the first few: it goes on only when
                                its chi2 is then within PEEK_DCHI2 */
#define PEEK_DCHI2 25.0
#define PEEK_START_DCHI2 100.0
#define PROFILE_TIME 0.1     /* seconds of one refit */
#define PROFILE_MAX_FITS 240 /* refits of one interval at most, for windows of up
                                to PROFILE_PIX pixels (larger ones: in
                                proportion fewer, at least PROFILE_MIN_FITS, so
                                the work is bounded without a clock) ... */
#define PROFILE_PIX 4000
#define PROFILE_MIN_FITS 16
#define PROFILE_WORK 8e6     /* ... and iterations x pixels of all its refits
                                (a deterministic stand-in for time: about
                                240 refits of 8 iterations on 4000 pixels;
                                beyond PROFILE_PIX pixels it shrinks as
                                sqrt(PROFILE_PIX / pixels)) */
#define PROFILE_BUDGET 2.0   /* ... and seconds when timed: then it is incomplete */
#define PROFILE_MOVES 3      /* restarts from a lower chi2 at most */
#define MAX_ALT 5            /* other minima kept */

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
  double chi0;
  int nfits;
  int maxfits;        /* refits allowed (PROFILE_MAX_FITS scaled by the window) */
  double work;        /* iterations x pixels of the refits so far */
  double maxwork;     /* ... allowed */
  double npix;        /* pixels of the window */
  double t0;          /* start [s] */
  double budget;      /* seconds it may take */
  int incomplete;     /* ran out of refits or time */
  int dir;            /* side being searched (+1, -1) */
  int deep;           /* DT_PROFILE_DEEP */
  unsigned flags;     /* DT_PROFILE_* */
  int quick;          /* DT_PROFILE_QUICK without DT_PROFILE_DEEP */
  int moved;          /* a chi2 below chi0 - DT_PROFILE_MOVE was found ... */
  dt_component mcomp[DT_MAX_COMP];  /* ... with these components */
  double mcont[DT_MAX_CONT];        /* and joint continuum */
  double mchi2;
  /* other local minima of the whole problem found from other starts
   * (other_valleys): the profile may dip to them beyond a barrier */
  int nalt;
  double alt_x[MAX_ALT], alt_chi2[MAX_ALT];
  dt_component alt_comp[MAX_ALT][DT_MAX_COMP];
  double alt_cont[MAX_ALT][DT_MAX_CONT];
} prof;

/* The scan of component k of p: its refits hold log N_k, with time_limit
 * each (fit.h), in one run (a high chi2 away from the optimum is the
 * point), their chi2 and parameters all that is used (no errors). */
static void prof_init(prof *P, dt_fit_workspace *w, const dt_fit_problem *p, size_t k,
                      double time_limit) {
  memset(P, 0, sizeof *P);
  P->w = w;
  P->q = *p;
  P->k = k;
  if (p->frozen) memcpy(P->frozen, p->frozen, p->ncomp);
  P->frozen[k] |= DT_FREEZE_N;
  P->q.frozen = P->frozen;
  P->q.time_limit = time_limit;
  P->q.single_run = 1;
  P->q.no_errors = 1;
}

static double now_s(void) {
  struct timespec ts;
  clock_gettime(CLOCK_MONOTONIC, &ts);
  return (double)ts.tv_sec + 1e-9 * (double)ts.tv_nsec;
}

/* The refits one interval may take: PROFILE_MAX_FITS, fewer in proportion
 * for a window of more than PROFILE_PIX pixels (a refit's cost grows with
 * them), never below PROFILE_MIN_FITS. */
static int max_fits(const dt_fit_problem *p) {
  size_t n = dt_model_npix(p->model);
  if (n <= PROFILE_PIX) return PROFILE_MAX_FITS;
  double m = (double)PROFILE_MAX_FITS * PROFILE_PIX / (double)n;
  return m < PROFILE_MIN_FITS ? PROFILE_MIN_FITS : (int)m;
}

static int out_of_budget(prof *P) {
  if (P->nfits >= P->maxfits || P->work > P->maxwork || now_s() - P->t0 > P->budget)
    P->incomplete = 1;
  return P->incomplete;
}

/* One refit from comp (cont coefficients cont) with the problem's frozen
 * set; chi2 (INFINITY when not finite), the solution into sol, csol. */
static double refit(prof *P, const dt_component *comp, const double *cont, int iter,
                    dt_component *sol, double *csol) {
  P->q.max_iter = iter;
  /* a start next to its optimum, and the first look from a far one:
   * plain steps (DT_PROFILE_QUICK: not in the thorough search, whose
   * refits go further out) */
  P->q.plain = (iter == PROFILE_MAX_ITER || iter == PROFILE_PEEK_ITER) && P->quick;
  memcpy(P->comp, comp, P->r->ncomp * sizeof P->comp[0]);
  P->q.comp = P->comp;
  if (P->r->ncont) P->q.cont_init = cont;
  if (P->r->covering) P->q.cf = P->r->cf; /* covering factors start at the reference's */
  dt_fit_result fr;
  dt_fit_run(P->w, &P->q, &fr, NULL);
  P->nfits++;
  P->work += (double)(fr.niter > 0 ? fr.niter : 1) * P->npix;
  if (!isfinite(fr.chi2) || (fr.status != DT_OK && fr.status != DT_ENOCONV)) return INFINITY;
  memcpy(sol, fr.comp, P->r->ncomp * sizeof sol[0]);
  if (P->r->ncont) memcpy(csol, fr.cont_coef, P->r->ncont * sizeof csol[0]);
  return fr.chi2;
}

/* Has a far start come back to the valley of near (every free b within
 * SAME_VALLEY in ln b of near's)?  It would end where near is. */
#define SAME_VALLEY 0.2
static int same_valley(const prof *P, const dt_component *sol, const dt_component *near) {
  for (size_t q = 0; q < P->r->ncomp; q++)
    if (!(P->frozen[q] & DT_FREEZE_B) && !(fabs(log(sol[q].b / near[q].b)) < SAME_VALLEY)) return 0;
  return 1;
}

/* A refit from a start far from its optimum (another valley): a few
 * iterations first, the rest only when chi2 is then below chi0 + reach
 * + PEEK_DCHI2 (most such starts end far above: cheap to drop) and the b
 * are not back in the valley of near (the refit from next to the optimum
 * at the same point, or NULL: that refit would end there too). */
static double far_refit(prof *P, const dt_component *comp, const double *cont, double reach,
                        const dt_component *near, dt_component *sol, double *csol) {
  if (P->quick) {
    /* DT_PROFILE_QUICK: a start whose chi2 alone lies PEEK_START_DCHI2
     * beyond the reach is not refitted (it ends far above, or back in
     * the valley of near) */
    double c0;
    size_t npix;
    if (dt_fit_chi2(P->w, &P->q, comp, P->r->ncont ? cont : NULL, NULL, &c0, &npix) == DT_OK &&
        !(c0 < P->chi0 + reach + PEEK_START_DCHI2)) {
      memcpy(sol, comp, P->r->ncomp * sizeof sol[0]);
      if (P->r->ncont) memcpy(csol, cont, P->r->ncont * sizeof csol[0]);
      return c0;
    }
  }
  double c = refit(P, comp, cont, PROFILE_PEEK_ITER, sol, csol);
  if (!(c < P->chi0 + reach + PEEK_DCHI2)) return c;
  if (near && isfinite(c) && same_valley(P, sol, near)) return c;
  dt_component s2[DT_MAX_COMP];
  double c2[DT_MAX_CONT];
  memcpy(s2, sol, P->r->ncomp * sizeof s2[0]);
  if (P->r->ncont) memcpy(c2, csol, P->r->ncont * sizeof c2[0]);
  double d = refit(P, s2, c2, PROFILE_ALT_ITER - PROFILE_PEEK_ITER, sol, csol);
  if (!isfinite(d)) {   /* keep the first stage */
    memcpy(sol, s2, P->r->ncomp * sizeof s2[0]);
    if (P->r->ncont) memcpy(csol, c2, P->r->ncont * sizeof c2[0]);
    return c;
  }
  return d;
}

/* Remember a solution below the reference (a better fit), unless a b sits
 * at the edge of its range. */
static void note_lower(prof *P, double c, const dt_component *comp, const double *cont) {
  if (!(c < P->chi0 - DT_PROFILE_MOVE) || (P->moved && c >= P->mchi2)) return;
  /* not to a b at the edge of its range: a degenerate narrow solution the
   * fit's bounds hold, which the interval covers instead */
  for (size_t q = 0; q < P->r->ncomp; q++)
    if (comp[q].b < 1.1 * DT_FIT_B_MIN || comp[q].b > DT_FIT_B_MAX / 1.1) return;
  P->moved = 1;
  P->mchi2 = c;
  memcpy(P->mcomp, comp, P->r->ncomp * sizeof P->mcomp[0]);
  if (P->r->ncont) memcpy(P->mcont, cont, P->r->ncont * sizeof P->mcont[0]);
}

/* Component k's b (all of them with one tied b) moved to the other
 * valley: i = 0 narrow, min(b / B_SPREAD, B_NARROW); i = 1 broad,
 * max(b B_SPREAD, B_BROAD); kept inside the fit's range. */
static void other_b(const prof *P, dt_component *c, int i) {
  for (size_t q = 0; q < P->r->ncomp; q++) {
    if (q != P->k && !P->q.tie_b) continue;
    if (P->frozen[q] & DT_FREEZE_B) continue;
    double b = i == 0 ? fmin(c[q].b / B_SPREAD, B_NARROW) : fmax(c[q].b * B_SPREAD, B_BROAD);
    c[q].b = fmin(fmax(b, 1.05 * DT_FIT_B_MIN), DT_FIT_B_MAX / 1.05);
  }
}

/* The free (log N) component nearest to k in velocity; k if none. */
static size_t nearest(const prof *P, const dt_component *c) {
  size_t k = P->k, j = k;
  double dv = INFINITY;
  for (size_t q = 0; q < P->r->ncomp; q++) {
    if (q == k || (P->frozen[q] & DT_FREEZE_N)) continue;
    double d = fabs(c[q].v - c[k].v);
    if (d < dv) {
      dv = d;
      j = q;
    }
  }
  return j;
}

/* The start for a blend: the column component k gives up (or takes) at
 * log N_k = x goes to (comes from) its nearest free neighbour -- where a
 * single component took the absorption of two, the other can take it
 * back.  0 when there is no neighbour. */
static int exchange(const prof *P, dt_component *c, double x) {
  size_t k = P->k, j = nearest(P, c);
  if (j == k) return 0;
  double tot = pow(10.0, c[k].logN) + pow(10.0, c[j].logN);
  double nj = fmax(tot - pow(10.0, x), 1e-3 * tot);
  c[j].logN = fmin(fmax(log10(nj), DT_FIT_LOGN_MIN + 0.1), DT_FIT_LOGN_MAX - 0.1);
  c[k].logN = x;
  return 1;
}

/* chi2 of the profile at log N_k = x (the rest refitted, starting from the
 * last solution on this side; a point at VERIFY target or more also from
 * the other b valleys and, in a blend, with the column exchanged with the
 * nearest component).  NaN when out of budget. */
static double chi2_at(prof *P, double x, double target) {
  if (out_of_budget(P)) return NAN;
  dt_component start[DT_MAX_COMP], sol[DT_MAX_COMP], best[DT_MAX_COMP];
  double csol[DT_MAX_CONT], cbest[DT_MAX_CONT];
  memcpy(start, P->from, P->r->ncomp * sizeof start[0]);
  start[P->k].logN = x;
  double c = refit(P, start, P->cfrom, PROFILE_MAX_ITER, best, cbest);
  if (c - P->chi0 >= VERIFY * target) {
    for (int i = 0; i < 3; i++) {
      /* without DEEP only the valley on this side: higher columns go
       * with narrower lines, lower with broader ones */
      if (i < 2 && !P->deep && ((i == 0) != (P->dir > 0) || (P->flags & DT_PROFILE_RESOLVED)))
        continue;
      if (i == 2 && (P->flags & DT_PROFILE_ISOLATED)) break;
      if (out_of_budget(P)) return NAN;
      dt_component alt[DT_MAX_COMP];
      memcpy(alt, P->from, P->r->ncomp * sizeof alt[0]);
      if (i < 2) {
        alt[P->k].logN = x;
        other_b(P, alt, i);
      } else if (!exchange(P, alt, x)) {
        break;
      }
      /* (a column exchanged keeps the b: no test of the valley by b; only
       * with DT_PROFILE_QUICK) */
      double ca = far_refit(P, alt, P->cfrom, target, i < 2 && P->quick && isfinite(c) ? best : NULL,
                            sol, csol);
      if (ca < c) {
        c = ca;
        memcpy(best, sol, P->r->ncomp * sizeof best[0]);
        if (P->r->ncont) memcpy(cbest, csol, P->r->ncont * sizeof cbest[0]);
      }
    }
  }
  if (isfinite(c)) {
    memcpy(P->from, best, P->r->ncomp * sizeof P->from[0]);
    if (P->r->ncont) memcpy(P->cfrom, cbest, P->r->ncont * sizeof P->cfrom[0]);
    note_lower(P, c, best, cbest);
  }
  return c;
}

/* One side (dir +1 or -1) at dchi2: the end; NaN when the profile stays
 * below dchi2 within reach (or the search stopped: P->incomplete,
 * P->moved). */
static double side_from(prof *P, double x0, const dt_component *comp, const double *cont,
                        double d0, double s, double dchi2, int dir) {
  memcpy(P->from, comp, P->r->ncomp * sizeof P->from[0]);
  if (P->r->ncont) memcpy(P->cfrom, cont, P->r->ncont * sizeof P->cfrom[0]);
  P->dir = dir;
  double lim = dir > 0 ? fmin(x0 + DT_PROFILE_REACH, DT_FIT_LOGN_MAX - 0.01)
                       : fmax(x0 - DT_PROFILE_REACH, DT_FIT_LOGN_MIN + 0.01);
  double t = sqrt(dchi2);
  double xa = x0, ha = sqrt(fmax(d0, 0.0)) - t;   /* inside: h = sqrt(d) - t < 0 */
  double step = s * t, xb = NAN, hb = NAN;
  for (int i = 0; i < MAX_STEPS; i++) {
    double x = x0 + dir * step;
    if (dir * (x - lim) > 0) x = lim;
    double d = chi2_at(P, x, dchi2) - P->chi0;
    if (P->incomplete || P->moved) return NAN;
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
    double h = sqrt(fmax(chi2_at(P, x, INFINITY) - P->chi0, 0.0)) - t;   /* continuation only */
    if (P->incomplete || P->moved) return NAN;
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

/* One side from the reference minimum. */
static double side(prof *P, double x0, double s, double dchi2, int dir) {
  return side_from(P, x0, P->r->comp, P->r->cont_coef, 0.0, s, dchi2, dir);
}

/* The interval [*lo, *hi] at dchi2 widened over the other minima inside
 * it (chi2 within dchi2 of the reference) that lie beyond an end: the
 * search goes on outward from each (NaN: no end there). */
static void extend(prof *P, double s, double dchi2, double *lo, double *hi) {
  for (int i = 0; i < P->nalt && !P->moved && !P->incomplete; i++) {
    double d = P->alt_chi2[i] - P->chi0, x = P->alt_x[i];
    if (!(d < dchi2)) continue;
    if (isfinite(*hi) && x > *hi)
      *hi = side_from(P, x, P->alt_comp[i], P->alt_cont[i], d, s, dchi2, +1);
    else if (isfinite(*lo) && x < *lo)
      *lo = side_from(P, x, P->alt_comp[i], P->alt_cont[i], d, s, dchi2, -1);
  }
}

static int flag_of(double lo, double hi) {
  return isfinite(lo) ? (isfinite(hi) ? DT_PROFILE_BOUNDED : DT_PROFILE_LOWER_LIMIT)
                      : (isfinite(hi) ? DT_PROFILE_UPPER_LIMIT : DT_PROFILE_UNBOUNDED);
}

/* The whole problem (log N_k free) refitted from component k's b in the
 * other valleys: a lower chi2 is a better fit (P->moved). */
static void other_valleys(prof *P, const dt_fit_problem *p) {
  dt_fit_problem save = P->q;
  P->q.frozen = p->frozen;
  P->nalt = 0;
  size_t k = P->k;
  for (int i = 0; i < 5 && !out_of_budget(P); i++) {
    dt_component alt[DT_MAX_COMP], sol[DT_MAX_COMP];
    double csol[DT_MAX_CONT];
    memcpy(alt, P->r->comp, P->r->ncomp * sizeof alt[0]);
    if (i < 2) {
      other_b(P, alt, i);
    } else {
      /* a blend (k and its nearest free neighbour j): the column shared
       * equally where they are (i = 2), or the two split about their
       * column-weighted centre by -+ b / 2 and -+ b (i = 3, 4), b the
       * larger of the two, each with b / 2 -- where one component took
       * the absorption of two */
      size_t j = nearest(P, alt);
      if (j == k) break;
      double nk = pow(10.0, alt[k].logN), nj = pow(10.0, alt[j].logN);
      double half = log10(0.5 * (nk + nj));
      if (i == 2) {
        exchange(P, alt, half);
      } else {
        double vc = (nk * alt[k].v + nj * alt[j].v) / (nk + nj);
        double b = fmax(alt[k].b, alt[j].b), d = (i == 3 ? 0.5 : 1.0) * b;
        double sgn = alt[k].v <= alt[j].v ? -1.0 : 1.0;
        alt[k].logN = alt[j].logN = half;
        if (!(P->frozen[k] & DT_FREEZE_V)) alt[k].v = vc + sgn * d;
        if (!(P->frozen[j] & DT_FREEZE_V)) alt[j].v = vc - sgn * d;
        if (!P->q.tie_b) {
          if (!(P->frozen[k] & DT_FREEZE_B)) alt[k].b = fmax(0.5 * b, 1.05 * DT_FIT_B_MIN);
          if (!(P->frozen[j] & DT_FREEZE_B)) alt[j].b = fmax(0.5 * b, 1.05 * DT_FIT_B_MIN);
        }
      }
    }
    double c = far_refit(P, alt, P->r->cont_coef, 9.0, NULL, sol, csol);
    note_lower(P, c, sol, csol);
    if (isfinite(c) && fabs(sol[k].logN - P->r->comp[k].logN) > XTOL && P->nalt < MAX_ALT) {
      int n = P->nalt++;
      P->alt_x[n] = sol[k].logN;
      P->alt_chi2[n] = c;
      memcpy(P->alt_comp[n], sol, P->r->ncomp * sizeof sol[0]);
      if (P->r->ncont) memcpy(P->alt_cont[n], csol, P->r->ncont * sizeof csol[0]);
    }
  }
  P->q = save;
}

int dt_profile_logN(dt_fit_workspace *w, const dt_fit_problem *p, const dt_fit_result *r,
                    size_t k, double dchi2, double budget, unsigned flags,
                    dt_profile_interval *out, dt_fit_result *lower) {
  if (!w || !p || !r || !out || k >= r->ncomp || r->ncomp != p->ncomp || !(dchi2 > 0))
    return DT_EINVAL;
  memset(out, 0, sizeof *out);
  double x0 = r->comp[k].logN;
  out->best = x0;
  if (p->frozen && (p->frozen[k] & DT_FREEZE_N)) {
    out->lo = out->hi = out->lo3 = out->hi3 = x0;
    return DT_OK;
  }
  prof P;
  /* With a time budget (the inspector's keystrokes) every refit has a
   * short clock too; without one (batch fits) only the counts bound the
   * work, so the result does not depend on the machine's load (fit --jobs
   * N writes the same bytes as --jobs 1). */
  prof_init(&P, w, p, k, budget > 0 ? PROFILE_TIME : -1);
  P.deep = (flags & DT_PROFILE_DEEP) != 0;
  P.flags = flags;
  P.quick = (flags & DT_PROFILE_QUICK) && !(flags & DT_PROFILE_DEEP);
  P.t0 = now_s();
  P.budget = budget > 0 ? fmin(budget, PROFILE_BUDGET) : INFINITY;
  P.maxfits = max_fits(p);
  P.npix = (double)dt_model_npix(p->model);
  P.maxwork = P.npix > PROFILE_PIX ? PROFILE_WORK * sqrt(PROFILE_PIX / P.npix) : PROFILE_WORK;
  double s = r->err[k].logN;
  if (!(s > 0) || !isfinite(s)) s = 0.3;
  s = fmin(fmax(s, 0.001), 0.5);

  dt_fit_result ref = *r;   /* the reference minimum: r, or a lower one found */
  double lo = NAN, hi = NAN, lo3 = NAN, hi3 = NAN;
  int inc1 = 0;
  for (int move = 0;; move++) {
    P.r = &ref;
    P.chi0 = ref.chi2;
    P.moved = 0;
    x0 = ref.comp[k].logN;
    if (flags & DT_PROFILE_DEEP) other_valleys(&P, p);
    lo = hi = lo3 = hi3 = NAN;
    if (!P.moved && !P.incomplete) hi = side(&P, x0, s, dchi2, +1);
    if (!P.moved && !P.incomplete) lo = side(&P, x0, s, dchi2, -1);
    inc1 = P.incomplete;
    if (!P.moved && !P.incomplete && dchi2 < 9.0 && (flags & DT_PROFILE_OUTER)) {
      /* first probes where a parabola through the 1-sigma ends puts the
       * 3-sigma ones */
      double sh = isfinite(hi) ? fmax((hi - x0) / sqrt(dchi2), 0.5 * s) : s;
      double sl = isfinite(lo) ? fmax((x0 - lo) / sqrt(dchi2), 0.5 * s) : s;
      hi3 = side(&P, x0, sh, 9.0 * dchi2, +1);
      if (!P.moved && !P.incomplete) lo3 = side(&P, x0, sl, 9.0 * dchi2, -1);
      extend(&P, s, 9.0 * dchi2, &lo3, &hi3);
    }
    if (!P.moved || P.incomplete || move == PROFILE_MOVES) break;
    /* a lower chi2: the reference moves there (a full refit from it, or
     * the point itself if that does not go lower) and the scan restarts */
    out->moved = 1;
    dt_fit_problem q = *p;
    q.comp = P.mcomp;
    if (ref.ncont) q.cont_init = P.mcont;
    dt_fit_result fr;
    dt_fit_run(w, &q, &fr, NULL);
    P.nfits++;
    if (isfinite(fr.chi2) && fr.chi2 < P.mchi2 + 0.01 &&
        (fr.status == DT_OK || fr.status == DT_ENOCONV)) {
      ref = fr;
    } else {
      memcpy(ref.comp, P.mcomp, ref.ncomp * sizeof ref.comp[0]);
      if (ref.ncont) memcpy(ref.cont_coef, P.mcont, ref.ncont * sizeof ref.cont_coef[0]);
      ref.chi2 = P.mchi2;
      ref.status = DT_ENOCONV;
    }
  }
  if (out->moved && lower) *lower = ref;
  out->best = x0;
  out->nfits = P.nfits;
  if (inc1 || (P.moved && P.incomplete)) {
    /* no interval at dchi2: the covariance error stands */
    out->lo = out->hi = out->lo3 = out->hi3 = NAN;
    out->incomplete = out->incomplete3 = 1;
    return DT_OK;
  }
  out->lo = lo;
  out->hi = hi;
  out->flag = flag_of(lo, hi);
  if (dchi2 >= 9.0) {
    out->lo3 = lo;
    out->hi3 = hi;
    out->flag3 = out->flag;
  } else if (P.incomplete || !(flags & DT_PROFILE_OUTER)) {
    out->lo3 = out->hi3 = NAN;
    out->incomplete3 = 1;
  } else {
    out->lo3 = lo3;
    out->hi3 = hi3;
    out->flag3 = flag_of(lo3, hi3);
  }
  return DT_OK;
}

int dt_profile_other_valley(dt_fit_workspace *w, const dt_fit_problem *p, const dt_fit_result *r,
                            size_t k, double h3, double d3) {
  if (!w || !p || !r || k >= r->ncomp || r->ncomp != p->ncomp || !(h3 > 0) || !isfinite(h3) ||
      !(d3 > 0))
    return 0;
  if (p->frozen && (p->frozen[k] & DT_FREEZE_N)) return 0;
  prof P;
  /* two refits bounded by their iterations: the same answer whatever the
   * machine's load */
  prof_init(&P, w, p, k, -1);
  P.r = r;
  for (int i = 0; i < 2; i++) {
    dt_component alt[DT_MAX_COMP], sol[DT_MAX_COMP];
    double csol[DT_MAX_CONT];
    memcpy(alt, r->comp, r->ncomp * sizeof alt[0]);
    alt[k].logN = r->comp[k].logN + (i == 0 ? h3 : -h3);
    other_b(&P, alt, i);
    P.chi0 = r->chi2;
    double c = far_refit(&P, alt, r->cont_coef, d3, NULL, sol, csol);
    if (c - r->chi2 < VERIFY * d3) return 1;
  }
  return 0;
}

const char *dt_profile_flag_name(int flag) {
  switch (flag) {
  case DT_PROFILE_LOWER_LIMIT: return "lower-limit";
  case DT_PROFILE_UPPER_LIMIT: return "upper-limit";
  case DT_PROFILE_UNBOUNDED: return "unconstrained";
  default: return "";
  }
}
