/* The automatic first pass: find doublet absorption, seed components, grow
 * the model while the BIC says so, and suggest a verdict.
 *
 * Everything works on the apparent column density profiles N_a(v) of the
 * two lines (Savage & Sembach 1991, ApJ 379, 245) over the same pixels.
 * Significance is judged on running sums over a box of about one LSF FWHM
 * (a matched filter for unresolved lines): S = sum N_a dv / sqrt(sum
 * (err dv)^2).  Runs of pixels with S above detect_sigma are "groups".
 *
 * Doublet coincidence test for a group seen in the stronger line over
 * [va, vb]: A = integral of N_a(v) of the stronger line there, B the same of
 * the weaker line over the same velocities.  Optically thin gas gives B = A;
 * saturation raises B/A towards f1 lambda1 / (f2 lambda2) (the ratio of the
 * lines' f lambda, ~2 for Na I), never beyond.  The group is confirmed when
 * B is itself significant (B >= CONFIRM_SIGMA sigma_B) and B/A is within
 * RATIO_SIGMA of that range; "odd" when B is significant but the ratio is
 * not plausible; "weak" when B is not significant.
 *
 * Because the lines of a close doublet fall in each other's windows, a
 * confirmed component at v also makes a group at v + Delta in the stronger
 * line's frame (Delta = the velocity of the weaker line's rest wavelength
 * seen from the stronger line's), and the stronger line's absorption shows
 * at v - Delta in the weaker line's frame; such groups are "explained" and
 * not held against the doublet.
 *
 * Black cores.  Where the flux reaches zero, N_a(v) is no measurement: the
 * optical depth is undefined, the flux is raised to a floor (measure.h) and
 * N_a is a lower limit with an error as large as itself, so a strongly
 * saturated or damped doublet can show no significant N_a at all although
 * both lines absorb at ten sigma.  When any pixel of either line's window
 * is at that floor, the same steps run on the absorption depth
 * D(v) = 1 - F/C instead (linear in the flux, its error sigma/C with the
 * continuum's added in quadrature), and the coincidence test compares
 * equivalent widths: W = (lambda/c) integral D dv of each line, both at
 * least detect_sigma, their ratio W1/W2 between 1 (saturated) and
 * f1 lambda1^2 / (f2 lambda2^2) (thin: the linear curve of growth, W
 * proportional to N f lambda^2; Spitzer 1978, Physical Processes in the
 * Interstellar Medium, ch. 3 -- from memory) within RATIO_SIGMA.  A
 * confirmed group is then seeded at the depth-weighted mean velocity of
 * both lines, each in its own frame (where a trough blends the two lines,
 * the two frames' centres lie about Delta/2 either side of the truth and
 * their mean is near it), and, if the group holds black pixels, fitted
 * twice: from the apparent column (a lower limit) and from the column whose
 * damping wings give the stronger line's W (damped_N), b held for a first
 * fit and then freed; the lower chi2 is kept.
 * Limits: a single line whose black trough is wider than the separation of
 * the doublet covers both lines' positions and cannot be told from a
 * doublet by the depth alone; a trough wider than the window leaves the
 * velocity to the fit (nothing in the window places it). */
#include "doubletty/autofit.h"

#include <gsl/gsl_cdf.h>
#include <gsl/gsl_math.h>   /* M_PI */
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "doubletty/measure.h"
#include "doubletty/model.h"

#define MAX_GROUPS 32
#define CONFIRM_SIGMA 2.0   /* weaker line's own significance to confirm */
#define RATIO_SIGMA 3.0     /* tolerance of the ratio test */
#define UNSURE_SIGMA 5.0    /* unconfirmed absorption this strong: unsure */
#define POOR_CHI2 3.0       /* reduced chi2 of a poor fit */
#define RESID_SIGMA 3.0     /* residual significance worth a new component */
#define DOUBT_SIGMA 3.0     /* chi2 this many sigma above dof: a poor model */
#define TRIAL_STALL 0.02    /* a trial of one more component ends when its last
                               DT_FIT_STALL_ITERS iterations gain less chi2
                               (the BIC margin is 10: common practice) */

enum { G_WEAK, G_CONFIRMED, G_ODD };

typedef struct group {
  size_t a, b;          /* pixel range [a, b] */
  double va, vb;        /* velocity range in the line's frame */
  double sig;           /* significance of the integral over the group */
  double v;             /* N_a-weighted mean velocity */
  double bseed;         /* Doppler parameter estimate [km/s] */
  double A, sA, B, sB;  /* integrals of N_a: stronger, weaker line */
  int kind;             /* G_* (stronger-line groups) */
  int explained;
} group;

void dt_autofit_opts_init(dt_autofit_opts *o) {
  memset(o, 0, sizeof *o);
  o->max_comp = DT_AUTOFIT_MAX_COMP;
  o->detect_sigma = 3.0;
  o->bic_min = 10.0;
}

/* A profile of each line over the selected pixels, NaN where it is not
 * measured: N_a(v) [cm^-2 (km/s)^-1] or the depth 1 - F/C, with 1-sigma
 * errors. */
typedef struct profile {
  const double *y[2], *e[2];
} profile;

typedef struct ctx {
  dt_analysis *a;
  const dt_doublet *d;
  size_t n;
  const double *vel[2];
  profile na;           /* apparent column density */
  profile dep;          /* absorption depth */
  const profile *p;     /* the one the groups are found in */
  int black;            /* pixels at the N_a floor: groups from the depth */
  const double *flux, *sigma, *cont;
  double floor_nsigma, floor_frac;  /* the N_a floor (measure.h defaults) */
  const unsigned char *used;
  double fwhm, pix;
  size_t box;
  double r_thin;        /* f lambda of the stronger over the weaker line */
  double delta;         /* weaker line's rest velocity in the stronger's frame */
  double vlo, vhi;
} ctx;

static double pixel_dv(const ctx *c, int l, size_t i) {
  const double *v = c->vel[l];
  if (c->n < 2) return 1.0;
  if (i == 0) return v[1] - v[0];
  if (i == c->n - 1) return v[i] - v[i - 1];
  return 0.5 * (v[i + 1] - v[i - 1]);
}

/* Integral of profile p of line l over velocities [va, vb] of its own frame. */
static void integrate(const ctx *c, const profile *p, int l, double va, double vb, double *sum,
                      double *err) {
  const double *y = p->y[l], *ye = p->e[l];
  double s = 0, e2 = 0;
  for (size_t i = 0; i < c->n; i++) {
    double v = c->vel[l][i];
    if (v < va || v > vb || !isfinite(y[i]) || !isfinite(ye[i])) continue;
    double dv = pixel_dv(c, l, i);
    s += y[i] * dv;
    e2 += ye[i] * ye[i] * dv * dv;
  }
  *sum = s;
  *err = sqrt(e2);
}

/* Groups of significant absorption in line l (profile c->p). */
static size_t find_groups(const ctx *c, int l, double thresh, group *g, size_t maxg) {
  const double *y = c->p->y[l], *ye = c->p->e[l];
  size_t ng = 0, h = c->box / 2;
  long start = -1;
  for (size_t i = 0; i <= c->n; i++) {
    int hit = 0;
    if (i < c->n && isfinite(y[i])) {
      double s = 0, e2 = 0;
      size_t lo = i > h ? i - h : 0, hi = i + h < c->n ? i + h : c->n - 1;
      for (size_t k = lo; k <= hi; k++) {
        if (!isfinite(y[k]) || !isfinite(ye[k])) continue;
        double dv = pixel_dv(c, l, k);
        s += y[k] * dv;
        e2 += ye[k] * ye[k] * dv * dv;
      }
      hit = e2 > 0 && s / sqrt(e2) > thresh;
    }
    if (hit && start < 0) start = (long)i;
    if (!hit && start >= 0) {
      if (ng < maxg) {
        group *q = &g[ng++];
        memset(q, 0, sizeof *q);
        q->a = (size_t)start;
        q->b = i - 1;
        q->va = c->vel[l][q->a] - 0.5 * fabs(pixel_dv(c, l, q->a));
        q->vb = c->vel[l][q->b] + 0.5 * fabs(pixel_dv(c, l, q->b));
      }
      start = -1;
    }
  }
  /* significance, mean velocity and width of each group */
  for (size_t k = 0; k < ng; k++) {
    group *q = &g[k];
    double s, e;
    integrate(c, c->p, l, q->va, q->vb, &s, &e);
    q->sig = e > 0 ? s / e : 0;
    double w = 0, m1 = 0, m2 = 0;
    for (size_t i = q->a; i <= q->b; i++) {
      double x = y[i];
      if (!isfinite(x) || x <= 0) continue;
      w += x;
      m1 += x * c->vel[l][i];
    }
    q->v = w > 0 ? m1 / w : 0.5 * (q->va + q->vb);
    for (size_t i = q->a; i <= q->b; i++) {
      double x = y[i];
      if (!isfinite(x) || x <= 0) continue;
      m2 += x * (c->vel[l][i] - q->v) * (c->vel[l][i] - q->v);
    }
    double var = w > 0 ? m2 / w : 0;
    double sl = c->fwhm / 2.3548;
    double bi = sqrt(2.0 * fmax(var - sl * sl, c->pix * c->pix));
    q->bseed = fmin(fmax(bi, 2.0), 80.0);
  }
  return ng;
}

/* Profile-weighted mean velocity of line l over [va, vb] (positive values
 * only); dflt when there is none.  *wsum (may be NULL) receives the
 * integral of the positive values over dv. */
static double centroid(const ctx *c, const profile *p, int l, double va, double vb,
                       double dflt, double *wsum) {
  double w = 0, m = 0;
  for (size_t i = 0; i < c->n; i++) {
    double v = c->vel[l][i], x = p->y[l][i];
    if (v < va || v > vb || !isfinite(x) || x <= 0) continue;
    double dv = fabs(pixel_dv(c, l, i));
    w += x * dv;
    m += x * dv * v;
  }
  if (wsum) *wsum = w;
  return w > 0 ? m / w : dflt;
}

static int overlaps(double a0, double a1, double b0, double b1) {
  return a0 <= b1 && b0 <= a1;
}

/* The doublet coincidence test of a stronger-line group.  A, B: integrals
 * of N_a; with black cores equivalent widths [Angstrom] instead (the header
 * comment). */
static void classify(const ctx *c, group *q, double detect_sigma) {
  if (!c->black) {
    integrate(c, &c->na, 0, q->va, q->vb, &q->A, &q->sA);
    integrate(c, &c->na, 1, q->va, q->vb, &q->B, &q->sB);
    double rho = q->A > 0 ? q->B / q->A : 1.0;
    if (rho < 1.0) rho = 1.0;
    if (rho > c->r_thin) rho = c->r_thin;
    double tol = RATIO_SIGMA * sqrt(q->sB * q->sB + rho * rho * q->sA * q->sA);
    int consistent = fabs(q->B - rho * q->A) <= tol;
    int bsig = q->sB > 0 && q->B >= CONFIRM_SIGMA * q->sB;
    q->kind = !bsig ? G_WEAK : consistent ? G_CONFIRMED : G_ODD;
    return;
  }
  /* W = (lambda0 / c) integral (1 - F/C) dv, rest frame [Angstrom] */
  const dt_line *l0 = &c->d->line[0], *l1 = &c->d->line[1];
  integrate(c, &c->dep, 0, q->va, q->vb, &q->A, &q->sA);
  integrate(c, &c->dep, 1, q->va, q->vb, &q->B, &q->sB);
  double k0 = l0->lambda0 / DT_C_KMS, k1 = l1->lambda0 / DT_C_KMS;
  q->A *= k0;
  q->sA *= k0;
  q->B *= k1;
  q->sB *= k1;
  /* stronger over weaker: 1 (saturated) .. f1 lambda1^2 / (f2 lambda2^2) */
  double rmax = (l0->f * l0->lambda0 * l0->lambda0) / (l1->f * l1->lambda0 * l1->lambda0);
  if (rmax < 1) rmax = 1;
  double rho = q->B > 0 ? q->A / q->B : 1.0;
  if (rho < 1.0) rho = 1.0;
  if (rho > rmax) rho = rmax;
  double tol = RATIO_SIGMA * sqrt(q->sA * q->sA + rho * rho * q->sB * q->sB);
  int consistent = fabs(q->A - rho * q->B) <= tol;
  int asig = q->sA > 0 && q->A >= detect_sigma * q->sA;
  int bsig = q->sB > 0 && q->B >= detect_sigma * q->sB;
  q->kind = !(asig && bsig) ? G_WEAK : consistent ? G_CONFIRMED : G_ODD;
  if (q->kind == G_CONFIRMED) {
    /* a doublet: the depth-weighted mean velocity of both lines, each in
       its own frame (the header comment) */
    double w0, w1;
    double v0 = centroid(c, &c->dep, 0, q->va, q->vb, q->v, &w0);
    double v1 = centroid(c, &c->dep, 1, q->va, q->vb, q->v, &w1);
    if (w0 + w1 > 0) q->v = (w0 * v0 + w1 * v1) / (w0 + w1);
  }
}

/* Seed column density from an integral of N_a [cm^-2]. */
static double seed_logN(double N) {
  double x = N > 0 ? log10(N) : 10.0;
  if (x < 9.0) x = 9.0;
  if (x > 21.0) x = 21.0;
  return x;
}

/* Pixel i at the floor of the apparent optical depth (measure.h): black. */
static int is_black(const ctx *c, size_t i) {
  double fl = fmax(c->floor_nsigma * c->sigma[i], c->floor_frac * c->cont[i]);
  return c->used[i] && !(c->flux[i] >= fl);
}

/* Column density [cm^-2] of a line whose damping wings alone give it the
 * rest-frame equivalent width W [Angstrom].  Far from the core the optical
 * depth is tau = A / dnu^2 with A = N sigma0 f Gamma / (4 pi^2) (Lorentzian
 * wing), and integral (1 - exp(-A/x^2)) dx = 2 sqrt(pi A), so
 *     N = pi W_nu^2 / (sigma0 f Gamma),   W_nu = c W / lambda^2
 * (the square-root part of the curve of growth; e.g. Spitzer 1978,
 * Physical Processes in the Interstellar Medium, ch. 3 -- from memory).
 * sigma0 = pi e^2 / (m_e c) [cm^2 s^-1], c in cm/s, lambda and W in cm. */
static double damped_N(double W, const dt_line *ln) {
  double lam = ln->lambda0 * 1e-8, wnu = DT_C_KMS * 1e5 * (W * 1e-8) / (lam * lam);
  if (!(W > 0) || !(ln->f > 0) || !(ln->gamma > 0)) return 0;
  return M_PI * wnu * wnu / (DT_SIGMA0 * ln->f * ln->gamma);
}

/* Starting component of a group found in the depth (black cores): at the
 * group's velocity (classify), the column from the apparent column (a lower
 * limit) and, when the group holds black pixels, *logN_damp from its
 * damping wings (0 otherwise). */
static void depth_seed(const ctx *c, const group *q, dt_component *s, double *logN_damp) {
  s->v = q->v;
  double A, sA, B, sB;
  integrate(c, &c->na, 0, q->va, q->vb, &A, &sA);
  integrate(c, &c->na, 1, q->va, q->vb, &B, &sB);
  s->logN = seed_logN(fmax(A, B));
  s->b = q->bseed;
  *logN_damp = 0;
  int black = 0;
  for (size_t i = 0; i < c->n && !black; i++) {
    int in0 = c->vel[0][i] >= q->va && c->vel[0][i] <= q->vb;
    int in1 = c->vel[1][i] >= q->va && c->vel[1][i] <= q->vb;
    black = (in0 || in1) && is_black(c, i);
  }
  if (!black) return;
  double Nd = damped_N(q->A, &c->d->line[0]);  /* q->A: W of the stronger line */
  if (Nd > 0 && log10(Nd) > s->logN) *logN_damp = seed_logN(Nd);
}

/* Velocity of the most significant absorption left in the residuals of
 * both lines together; returns 0 when nothing is left above RESID_SIGMA. */
static int residual_seed(const ctx *c, dt_component *out) {
  const double *r = dt_analysis_residual(c->a);
  const double *model = dt_analysis_model(c->a);
  const double *flux = dt_analysis_flux(c->a);
  if (!r || !model || !flux) return 0;
  size_t h = c->box / 2;
  double best = 0;
  size_t bi = 0;
  int found = 0;
  for (size_t i = 0; i < c->n; i++) {
    double v = c->vel[0][i];
    if (v < c->vlo || v > c->vhi || !c->used[i]) continue;
    /* the weaker line's pixel at the same velocity */
    size_t lo = 0, hi = c->n - 1;
    while (lo < hi) {
      size_t mid = (lo + hi) / 2;
      if (c->vel[1][mid] < v) lo = mid + 1;
      else hi = mid;
    }
    double sum = 0;
    size_t cnt = 0;
    for (int l = 0; l < 2; l++) {
      size_t ctr = l == 0 ? i : lo;
      size_t a = ctr > h ? ctr - h : 0, b = ctr + h < c->n ? ctr + h : c->n - 1;
      for (size_t k = a; k <= b; k++)
        if (c->used[k]) {
          sum += r[k];
          cnt++;
        }
    }
    if (cnt == 0) continue;
    double z = sum / sqrt((double)cnt);
    if (z < best) {
      best = z;
      bi = i;
      found = 1;
    }
  }
  if (!found || best > -RESID_SIGMA) return 0;
  /* column from the missing optical depth of the stronger line */
  double tau = 0;
  size_t a = bi > h ? bi - h : 0, b = bi + h < c->n ? bi + h : c->n - 1;
  for (size_t k = a; k <= b; k++) {
    if (!c->used[k] || !(model[k] > 0)) continue;
    double f = flux[k] / model[k];
    if (f < 0.05) f = 0.05;
    if (f < 1) tau += -log(f) * fabs(pixel_dv(c, 0, k));
  }
  const dt_line *ln = &c->d->line[0];
  double N = 3.768e14 * tau / (ln->f * ln->lambda0); /* Savage & Sembach 1991 */
  out->logN = seed_logN(N);
  out->b = fmax(c->fwhm / 3.0, 5.0);
  out->v = c->vel[0][bi];
  return 1;
}

/* Fit components comp (nc) on the settings of base; freeze: DT_FREEZE_*
 * bits held on every component (0: all free). */
static int fit_frozen(dt_analysis *a, const dt_judgement *base, const dt_component *comp,
                      size_t nc, unsigned char freeze, dt_analysis_out *out, dt_err *e) {
  dt_judgement w = *base;
  w.ncomp = nc;
  memcpy(w.comp, comp, nc * sizeof comp[0]);
  memset(w.frozen, freeze, sizeof w.frozen);
  w.has_fit = 0;
  /* the search's fits: no measurements (hold_state measures the one kept) */
  int was = dt_analysis_no_measure(a, 1);
  int st = dt_analysis_run(a, &w, out, e);
  dt_analysis_no_measure(a, was);
  return st;
}

static int fit_with(dt_analysis *a, const dt_judgement *base, const dt_component *comp,
                    size_t nc, dt_analysis_out *out, dt_err *e) {
  return fit_frozen(a, base, comp, nc, 0, out, e);
}

/* Make the analysis hold the state of a fit result again (model, residuals)
 * after another fit was tried. */
static void restore_state(dt_analysis *a, const dt_judgement *base, const dt_analysis_out *r) {
  dt_judgement w = *base;
  w.ncomp = r->fit.ncomp;
  memcpy(w.comp, r->fit.comp, w.ncomp * sizeof w.comp[0]);
  memset(w.frozen, 0, sizeof w.frozen);
  w.has_fit = 0;
  dt_analysis_out tmp;
  int was = dt_analysis_no_measure(a, 1);
  (void)dt_analysis_eval(a, &w, &tmp, NULL);
  dt_analysis_no_measure(a, was);
}

static int by_sig(const void *x, const void *y) {
  const group *a = x, *b = y;
  return (a->sig < b->sig) - (a->sig > b->sig);
}

/* What the search for candidates found (step 2). */
typedef struct candidates {
  group g0[MAX_GROUPS], g1[MAX_GROUPS];  /* groups in the stronger, weaker line */
  size_t n0, n1;
  size_t nconf;              /* confirmed doublets */
  int odd, weak, weak_only;  /* unconfirmed absorption of UNSURE_SIGMA */
  const group *strongest_unconf;
} candidates;

/* The fit as it grows (steps 4 and 5). */
typedef struct pass_fit {
  dt_analysis_out best;
  int st;                    /* its status */
  dt_err fe;                 /* its error, if any */
  double doubt_dchi2;        /* > 0: a rejected extra component improved chi2
                                by this much (see doubtful_model) ... */
  double doubt_short;        /* ... and missed the BIC margin by this much */
} pass_fit;

/* Step 1b: the context of the first pass, the analysis holding the state of
 * an0 (no components); work: 4 an0.n doubles for the depth profiles. */
static void setup_ctx(ctx *c, dt_analysis *a, const dt_judgement *j,
                      const dt_analysis_out *an0, double *work) {
  memset(c, 0, sizeof *c);
  c->a = a;
  c->d = an0->doublet;
  c->n = an0->n;
  c->used = dt_analysis_used(a);
  c->flux = dt_analysis_flux(a);
  c->sigma = dt_analysis_sigma(a);
  c->cont = dt_analysis_continuum(a);
  const double *cerr = dt_analysis_continuum_err(a);
  dt_measure_opts mo;
  dt_measure_opts_init(&mo);
  c->floor_nsigma = mo.floor_nsigma;
  c->floor_frac = mo.floor_frac;
  for (int l = 0; l < 2; l++) {
    c->vel[l] = dt_analysis_velocity(a, l);
    c->na.y[l] = dt_analysis_na_profile(a, l);
    c->na.e[l] = dt_analysis_na_profile_err(a, l);
    /* the depth where N_a is measured (the line's window, used pixels) */
    double *y = work + (size_t)(2 * l) * c->n, *ye = y + c->n;
    for (size_t i = 0; i < c->n; i++) {
      double C = c->cont[i];
      if (!isfinite(c->na.y[l][i]) || !(C > 0)) {
        y[i] = ye[i] = NAN;
        continue;
      }
      double sc = isfinite(cerr[i]) ? cerr[i] : 0.0;
      y[i] = 1.0 - c->flux[i] / C;
      ye[i] = hypot(c->sigma[i] / C, c->flux[i] * sc / (C * C));
      if (is_black(c, i)) c->black = 1;
    }
    c->dep.y[l] = y;
    c->dep.e[l] = ye;
  }
  c->p = c->black ? &c->dep : &c->na;
  c->fwhm = dt_analysis_lsf_fwhm(a); /* the judgement's, or the width per pixel at the line */
  c->pix = fabs(c->vel[0][c->n - 1] - c->vel[0][0]) / (double)(c->n - 1);
  double bw = c->fwhm > 0 ? c->fwhm / c->pix : 3.0;
  c->box = bw < 1 ? 1 : bw > 31 ? 31 : (size_t)lround(bw);
  const dt_line *l0 = &c->d->line[0], *l1 = &c->d->line[1];
  c->r_thin = (l0->f * l0->lambda0) / (l1->f * l1->lambda0);
  if (c->r_thin < 1) c->r_thin = 1;
  c->delta = dt_velocity(l1->lambda0, l0->lambda0, 0.0);
  c->vlo = j->vlo;
  c->vhi = j->vhi;
}

/* Step 2: groups in both lines and the coincidence test; the candidates
 * (confirmed, and unconfirmed of UNSURE_SIGMA) are listed in o. */
static void find_candidates(const ctx *c, double detect_sigma, candidates *cd,
                            dt_autofit_out *o) {
  group *g0 = cd->g0, *g1 = cd->g1;
  size_t n0 = find_groups(c, 0, detect_sigma, g0, MAX_GROUPS);
  size_t n1 = find_groups(c, 1, detect_sigma, g1, MAX_GROUPS);
  cd->n0 = n0;
  cd->n1 = n1;
  qsort(g0, n0, sizeof g0[0], by_sig);
  for (size_t k = 0; k < n0; k++) {
    group *q = &g0[k];
    if (q->explained) continue;
    classify(c, q, detect_sigma);
    if (q->kind != G_CONFIRMED) continue;
    /* its weaker line, seen in the stronger line's frame, and the stronger
       line seen in the weaker's frame */
    for (size_t m = 0; m < n0; m++)
      if (m != k && g0[m].kind != G_CONFIRMED &&
          overlaps(g0[m].va, g0[m].vb, q->va + c->delta, q->vb + c->delta))
        g0[m].explained = 1;
    for (size_t m = 0; m < n1; m++)
      if (overlaps(g1[m].va, g1[m].vb, q->va, q->vb) ||
          overlaps(g1[m].va, g1[m].vb, q->va - c->delta, q->vb - c->delta))
        g1[m].explained = 1;
  }
  cd->nconf = 0;
  cd->odd = cd->weak = cd->weak_only = 0;
  cd->strongest_unconf = NULL;
  for (size_t k = 0; k < n0; k++) {
    const group *q = &g0[k];
    if (q->explained) continue;
    if (q->kind == G_CONFIRMED) {
      if (o->ncand < DT_MAX_COMP) {
        o->cand_v[o->ncand] = q->v;
        o->cand_confirmed[o->ncand++] = 1;
      }
      cd->nconf++;
    } else if (q->sig >= UNSURE_SIGMA) {
      if (q->kind == G_ODD) cd->odd = 1;
      else cd->weak = 1;
      if (!cd->strongest_unconf) cd->strongest_unconf = q;
      if (o->ncand < DT_MAX_COMP) {
        o->cand_v[o->ncand] = q->v;
        o->cand_confirmed[o->ncand++] = 0;
      }
    }
  }
  for (size_t m = 0; m < n1; m++) {
    if (g1[m].explained) continue;
    /* absorption only where the weaker line would be */
    int seen = 0;
    for (size_t k = 0; k < n0; k++)
      if (overlaps(g0[k].va, g0[k].vb, g1[m].va, g1[m].vb)) seen = 1;
    if (!seen && g1[m].sig >= UNSURE_SIGMA) cd->weak_only = 1;
  }
}

/* Step 3: the seeds, from the given velocities or from the confirmed
 * groups (else the strongest unconfirmed one); with black cores, alt gets
 * the damped columns (*have_alt).  Returns their number. */
static size_t seed_components(const ctx *c, const dt_autofit_opts *op, const dt_judgement *j,
                              const candidates *cd, dt_component *seed, dt_component *alt,
                              int *have_alt) {
  size_t ns = 0;
  *have_alt = 0;
  if (op->nseed > 0) {
    /* Around each given velocity (within 2 FWHM + 20 km/s): the column from
     * the apparent optical depth, at least what 3 sigma of noise allows,
     * and the velocity moved to the centroid of significant absorption. */
    for (size_t k = 0; k < op->nseed; k++) {
      double hw = 2.0 * fmax(c->fwhm, 3 * c->pix) + 20.0, v = op->seed_v[k];
      double A, sA, B, sB;
      integrate(c, &c->na, 0, v - hw, v + hw, &A, &sA);
      integrate(c, &c->na, 1, v - hw, v + hw, &B, &sB);
      if (A > 3.0 * sA) v = centroid(c, &c->na, 0, v - hw, v + hw, v, NULL);
      seed[ns].logN = seed_logN(fmax(fmax(A, B), 3.0 * sA));
      seed[ns].b = fmax(c->fwhm / 3.0, 5.0);
      seed[ns].v = v;
      ns++;
    }
  } else {
    for (size_t k = 0; k < cd->n0 && ns < op->max_comp; k++) {
      const group *q = &cd->g0[k];
      if (q->explained || q->kind != G_CONFIRMED) continue;
      if (c->black) {
        double ld;
        depth_seed(c, q, &seed[ns], &ld);
        alt[ns] = seed[ns];
        if (ld > 0) {   /* b of an unresolved line: the core is black anyway */
          alt[ns].logN = ld;
          alt[ns].b = fmax(c->fwhm / 3.0, 5.0);
          *have_alt = 1;
        }
      } else {
        seed[ns].logN = seed_logN(fmax(q->A, q->B));
        seed[ns].b = q->bseed;
        seed[ns].v = q->v;
      }
      ns++;
    }
    const group *su = cd->strongest_unconf;
    if (ns == 0 && su) {
      if (c->black) {
        double ld;
        depth_seed(c, su, &seed[0], &ld);
      } else {
        seed[0].logN = seed_logN(su->A);
        seed[0].b = su->bseed;
        seed[0].v = su->v;
      }
      ns = 1;
    }
  }
  size_t want = op->ncomp > 0 ? (size_t)op->ncomp : 0;
  if (want && ns > want) ns = want;
  for (size_t k = 0; k < ns; k++) {
    if (seed[k].v < j->vlo) seed[k].v = j->vlo;
    if (seed[k].v > j->vhi) seed[k].v = j->vhi;
    alt[k].v = seed[k].v;
  }
  return ns;
}

/* Black cores: the column lies anywhere between the apparent column and
 * the damped one (alt); fit from the latter too and keep the better fit in
 * f.  In a black core b is not measured (the core is black whatever it
 * is) and a free b wanders to its bound and stalls the solver: place the
 * column and velocity with b held first, then free it, and keep the held
 * fit when the free one does not converge. */
static void fit_damped(dt_analysis *a, const dt_judgement *base, const dt_component *alt,
                       size_t ns, pass_fit *f) {
  dt_analysis_out trial;
  dt_err te;
  dt_err_clear(&te);
  int ts = fit_frozen(a, base, alt, ns, DT_FREEZE_B, &trial, &te);
  if (ts == DT_OK) {
    dt_component from[DT_MAX_COMP];
    memcpy(from, trial.fit.comp, ns * sizeof from[0]);
    dt_analysis_out freed;
    dt_err fre;
    dt_err_clear(&fre);
    if (fit_with(a, base, from, ns, &freed, &fre) == DT_OK) trial = freed;
    else restore_state(a, base, &trial);
  }
  int better = (ts == DT_OK && (f->st != DT_OK || trial.fit.chi2 < f->best.fit.chi2)) ||
               (ts == DT_ENOCONV && f->st == DT_ENOCONV && trial.fit.chi2 < f->best.fit.chi2);
  if (better) {
    f->best = trial;
    f->st = ts;
    f->fe = te;
  } else {
    restore_state(a, base, &f->best);  /* the grown fits read the residuals */
  }
}

/* Step 4a: the first fit from the ns seeds (one retry from broader lines
 * if it does not converge; the damped columns too with black cores), or the
 * zero-component "fit" that gives chi2 and BIC.  f->best starts as an0.
 * Returns an error that ends the pass (in *e), else DT_OK with the fit's
 * own status in f->st. */
static int first_fit(dt_analysis *a, const dt_judgement *base, dt_component *seed,
                     const dt_component *alt, size_t ns, int have_alt, pass_fit *f,
                     dt_err *e) {
  f->st = DT_OK;
  dt_err_clear(&f->fe);
  if (ns == 0) {
    f->st = dt_analysis_run(a, base, &f->best, &f->fe);
    if (f->st != DT_OK) {
      if (e) *e = f->fe;
      return f->st;
    }
    return DT_OK;
  }
  f->st = fit_with(a, base, seed, ns, &f->best, &f->fe);
  if (f->st == DT_ENOCONV) {   /* one retry from broader lines */
    for (size_t k = 0; k < ns; k++) seed[k].b = fmin(seed[k].b * 2.0 + 5.0, 150.0);
    dt_analysis_out again;
    int st2 = fit_with(a, base, seed, ns, &again, &f->fe);
    if (st2 == DT_OK || st2 == DT_ENOCONV) {
      f->best = again;
      f->st = st2;
    }
  }
  if (f->st != DT_OK && f->st != DT_ENOCONV) {
    if (e) *e = f->fe;
    return f->st;
  }
  if (have_alt) fit_damped(a, base, alt, ns, f);
  return DT_OK;
}

/* A model whose chi2 lies well above its degrees of freedom
 * (chi2 - dof > DOUBT_SIGMA sqrt(2 dof), chi2 having mean dof and variance
 * 2 dof for a right model). */
static int in_doubt(const dt_fit_result *cur) {
  double dof = (double)cur->dof;
  return cur->dof > 0 && cur->chi2 - dof > DOUBT_SIGMA * sqrt(2.0 * dof);
}

/* A model in doubt (in_doubt) while a model with more components, rejected by
 * the BIC margin, improves chi2 by more than the 0.1% point of chi2 with as
 * many degrees of freedom as it adds (3 per component: 16.27 for 3, from
 * gsl_cdf_chisq_Qinv; Wilks' theorem -- common practice). */
static int doubtful_model(const dt_fit_result *cur, const dt_fit_result *more) {
  if (cur->dof <= 0 || more->dof <= 0 || !isfinite(cur->chi2) || !isfinite(more->chi2))
    return 0;
  if (!in_doubt(cur)) return 0;
  double dk = (double)(cur->dof - more->dof);
  if (!(dk > 0)) return 0;
  return cur->chi2 - more->chi2 > gsl_cdf_chisq_Qinv(1e-3, dk);
}

/* Step 4b: add components at the strongest residual while the BIC improves
 * by bic_min (or, with want > 0, up to want components whatever the BIC);
 * the analysis holds the state of f->best (the last successful run). */
static void grow_by_bic(const ctx *c, dt_analysis *a, const dt_judgement *base,
                        const dt_judgement *j, const dt_autofit_opts *op, size_t want,
                        pass_fit *f) {
  size_t cap = want ? want : op->max_comp;
  while (f->st == DT_OK && f->best.fit.ncomp < cap) {
    dt_component next[DT_MAX_COMP];
    size_t nc = f->best.fit.ncomp;
    memcpy(next, f->best.fit.comp, nc * sizeof next[0]);
    if (!residual_seed(c, &next[nc])) {
      if (!want) break;
      next[nc].logN = nc ? f->best.fit.comp[0].logN - 0.5 : 11.0;
      next[nc].b = fmax(c->fwhm / 3.0, 5.0);
      next[nc].v = 0.5 * (j->vlo + j->vhi);
    }
    /* a trial for the BIC ends once it gains little more (its chi2
     * decides); one kept is then fitted to the end from where it stopped
     * (a fixed number of components: each fitted to the end at once) */
    dt_analysis_out trial;
    double was = dt_analysis_stall(a, want ? 0.0 : TRIAL_STALL);
    /* ... or once it cannot pass the BIC margin -- unless the model is in
     * doubt, where the trial's whole gain is reported */
    double gave = dt_analysis_give_up(a, want || in_doubt(&f->best.fit) ? 0.0
                                                : f->best.fit.bic - op->bic_min);
    int ts = fit_with(a, base, next, nc + 1, &trial, &f->fe);
    dt_analysis_stall(a, was);
    dt_analysis_give_up(a, gave);
    int accept = ts == DT_OK && (want || trial.fit.bic < f->best.fit.bic - op->bic_min);
    if (accept && trial.fit_info.stalled) {
      dt_analysis_out full;
      int fs = fit_with(a, base, trial.fit.comp, nc + 1, &full, &f->fe);
      if (fs == DT_OK || fs == DT_ENOCONV) {
        trial = full;
        ts = fs;
        accept = ts == DT_OK && (want || trial.fit.bic < f->best.fit.bic - op->bic_min);
      }
    }
    if (!accept && ts == DT_OK && !want && doubtful_model(&f->best.fit, &trial.fit)) {
      f->doubt_dchi2 = f->best.fit.chi2 - trial.fit.chi2;
      f->doubt_short = trial.fit.bic - (f->best.fit.bic - op->bic_min);
    }
    if (!accept) {
      if (want) {   /* a fixed number: keep the attempt even if it failed */
        f->best = trial;
        f->st = ts;
      }
      break;
    }
    f->best = trial;
    f->st = ts;
  }
}

/* Make sure the analysis holds the state we report (best). */
static void hold_state(dt_analysis *a, const dt_judgement *base, dt_analysis_out *best) {
  if (best->fit.ncomp == 0) return;
  dt_judgement fin = *base;
  fin.ncomp = best->fit.ncomp;
  memcpy(fin.comp, best->fit.comp, fin.ncomp * sizeof fin.comp[0]);
  fin.has_fit = 1;
  fin.fit = best->fit;
  dt_analysis_out tmp;
  if (dt_analysis_eval(a, &fin, &tmp, NULL) == DT_OK) {
    tmp.fit = best->fit;
    tmp.fit_status = best->fit_status;
    tmp.fit_info = best->fit_info;
    tmp.fitted = 1;
    *best = tmp;
  }
}

/* Step 5: the suggested verdict and its reason. */
static void verdict(const candidates *cd, const pass_fit *f, dt_autofit_out *o) {
  const char *why;
  char buf[64];
  if (f->st == DT_ENOCONV) {
    o->suggested = DT_VERDICT_UNSURE;
    why = "fit did not converge";
  } else if (cd->nconf > 0) {
    if (f->best.fit.dof > 0 && f->best.fit.chi2_red > POOR_CHI2) {
      o->suggested = DT_VERDICT_UNSURE;
      snprintf(buf, sizeof buf, "poor fit (chi2_red %.1f)", f->best.fit.chi2_red);
      why = buf;
    } else {
      o->suggested = DT_VERDICT_DETECTED;
      why = "doublet confirmed";
    }
  } else if (cd->odd) {
    why = "implausible doublet ratio";
  } else if (cd->weak || cd->weak_only) {
    why = "single line, no doublet partner";
  } else {
    o->suggested = DT_VERDICT_NOT_DETECTED;
    why = cd->n0 > 0 ? "no confirmed absorption" : "no significant absorption";
  }
  if (f->doubt_dchi2 > 0 && f->st == DT_OK) {
    o->doubt_dchi2 = f->doubt_dchi2;
    o->doubt_bic = f->doubt_short;
    char tmp[160];
    int len = snprintf(tmp, sizeof tmp, "%s; +1 comp: chi2 -%.1f, BIC short %.1f", why,
                       f->doubt_dchi2, f->doubt_short);
    size_t k = len < 0 ? 0 : (size_t)len;
    if (k >= sizeof o->reason) k = sizeof o->reason - 1;
    memcpy(o->reason, tmp, k);
    o->reason[k] = '\0';
  } else {
    snprintf(o->reason, sizeof o->reason, "%s", why);
  }
}

/* Steps 2 to 6 of dt_autofit_run, the analysis holding the state of an0
 * (no components); work: 4 an0.n doubles for the depth profiles.
 * find candidates -> seed -> fit -> grow by BIC -> verdict -> the
 * judgement takes the fit. */
static int first_pass(dt_analysis *a, dt_judgement *j, const dt_judgement *base,
                      const dt_autofit_opts *op, const dt_analysis_out *an0, double *work,
                      int intervals_off, dt_autofit_out *o, dt_err *e) {
  ctx c;
  setup_ctx(&c, a, j, an0, work);
  candidates cd;
  find_candidates(&c, op->detect_sigma, &cd, o);

  dt_component seed[DT_MAX_COMP], alt[DT_MAX_COMP];  /* alt: damped columns */
  int have_alt;
  size_t ns = seed_components(&c, op, j, &cd, seed, alt, &have_alt);

  size_t want = op->ncomp > 0 ? (size_t)op->ncomp : 0;
  pass_fit f;
  f.best = *an0;
  f.doubt_dchi2 = f.doubt_short = 0;
  int st = first_fit(a, base, seed, alt, ns, have_alt, &f, e);
  if (st != DT_OK) return st;
  int grow = want ? ns < want : (ns > 0 && op->nseed == 0);
  if (grow) grow_by_bic(&c, a, base, j, op, want, &f);
  hold_state(a, base, &f.best);
  /* the profile-likelihood intervals, once, for the fit reported */
  if (f.st == DT_OK && f.best.fit.ncomp > 0 && !intervals_off) {
    dt_judgement fin = *base;
    fin.ncomp = f.best.fit.ncomp;
    memcpy(fin.comp, f.best.fit.comp, fin.ncomp * sizeof fin.comp[0]);
    dt_analysis_intervals(a, &fin, &f.best, 1.0);
  }
  verdict(&cd, &f, o);
  /* the limits, once, for the state reported unless it is a detection (the
   * analysis holds it after hold_state, or f.best is the run of no
   * components) */
  if (intervals_off == 0 && o->suggested != DT_VERDICT_DETECTED) dt_analysis_remeasure(a, &f.best);
  o->an = f.best;

  /* 6. the judgement takes the components and the fit */
  j->ncomp = f.best.fit.ncomp;
  memcpy(j->comp, f.best.fit.comp, j->ncomp * sizeof j->comp[0]);
  memset(j->frozen, 0, sizeof j->frozen);
  j->fit = f.best.fit;
  j->has_fit = 1;
  if (f.st != DT_OK) {
    dt_err_set(e, f.st, "fit", "%s", f.fe.what[0] ? f.fe.what : "the fit did not converge");
    return f.st;
  }
  return DT_OK;
}

int dt_autofit_run(dt_analysis *a, dt_judgement *j, const dt_autofit_opts *opts,
                   dt_autofit_out *o, dt_err *e) {
  dt_autofit_opts op;
  if (opts) op = *opts;
  else dt_autofit_opts_init(&op);
  if (op.max_comp == 0) op.max_comp = DT_AUTOFIT_MAX_COMP;
  if (op.max_comp > DT_MAX_COMP) op.max_comp = DT_MAX_COMP;
  if (!(op.detect_sigma > 0)) op.detect_sigma = 3.0;
  if (!(op.bic_min > 0)) op.bic_min = 10.0;
  if (op.ncomp > DT_MAX_COMP || op.ncomp < 0 || op.nseed > DT_MAX_COMP)
    return dt_err_set(e, DT_EINVAL, "components", "at most %d components", DT_MAX_COMP);
  memset(o, 0, sizeof *o);
  o->suggested = DT_VERDICT_UNSURE;

  /* 1. the profiles without components */
  dt_judgement base = *j;
  base.ncomp = 0;
  memset(base.frozen, 0, sizeof base.frozen);
  base.has_fit = 0;
  dt_analysis_out an0;
  /* the search's many fits skip the intervals and limits; the reported
   * state gets them */
  int off = dt_analysis_no_intervals(a, 1);
  int st = dt_analysis_eval(a, &base, &an0, e);
  if (st != DT_OK) {
    dt_analysis_no_intervals(a, off);
    return st;
  }
  /* the depth profiles of both lines with their errors */
  double *work = malloc(4 * an0.n * sizeof *work);
  if (!work) {
    dt_analysis_no_intervals(a, off);
    return dt_err_set(e, DT_ENOMEM, NULL, "out of memory");
  }
  st = first_pass(a, j, &base, &op, &an0, work, off, o, e);
  dt_analysis_no_intervals(a, off);
  free(work);
  return st;
}
