/* Absorber systems: building a spectrum's set of named velocity ranges, the
 * fit window that covers them, which system a component belongs to, and the
 * suggested verdict of each system.
 *
 * The idea: the fit sees the whole window at once (blends ignore system
 * boundaries); the systems only partition its results.  Everything here is
 * a pure function of the settings and of a first pass's output, so the
 * command line, the inspector and the session all draw the same lines. */
#include "doubletty/systems.h"

#include <math.h>
#include <stdio.h>
#include <string.h>

#include "doubletty/model.h"
#include "doubletty/num.h"

#define POOR_CHI2 3.0  /* the first pass's reduced chi2 of a poor fit (autofit.c) */

void dt_system_opts_init(dt_system_opts *o) {
  memset(o, 0, sizeof *o);
  o->target_vlo = -DT_SYSTEM_TARGET_HALF;
  o->target_vhi = DT_SYSTEM_TARGET_HALF;
  o->mw_half = DT_SYSTEM_MW_HALF;
}

int dt_system_name_ok(const char *name) {
  size_t n = name ? strlen(name) : 0;
  if (n == 0 || n >= DT_SYSTEM_NAME_MAX) return DT_EINVAL;
  for (size_t i = 0; i < n; i++) {
    char c = name[i];
    int ok = (c >= 'a' && c <= 'z') || (c >= 'A' && c <= 'Z') || (c >= '0' && c <= '9') ||
             c == '-' || c == '_' || c == '.';
    if (!ok) return DT_EINVAL;
  }
  return DT_OK;
}

int dt_system_parse(const char *text, dt_system *s, dt_err *e) {
  const char *c1 = text ? strchr(text, ':') : NULL;
  const char *c2 = c1 ? strchr(c1 + 1, ':') : NULL;
  if (!c1 || !c2 || strchr(c2 + 1, ':'))
    return dt_err_set(e, DT_EINVAL, NULL, "'%s' is not NAME:VLO:VHI (e.g. mgii-1:-900:-700)",
                      text ? text : "");
  memset(s, 0, sizeof *s);
  size_t nl = (size_t)(c1 - text);
  if (nl >= sizeof s->name) nl = sizeof s->name - 1;
  memcpy(s->name, text, nl);
  s->name[nl] = '\0';
  if ((size_t)(c1 - text) >= DT_SYSTEM_NAME_MAX || dt_system_name_ok(s->name) != DT_OK)
    return dt_err_set(e, DT_EINVAL, NULL,
                      "system name '%.*s' must be 1-%d letters, digits, '-', '_' or '.'",
                      (int)(c1 - text), text, DT_SYSTEM_NAME_MAX - 1);
  char a[64], b[64];
  snprintf(a, sizeof a, "%.*s", (int)(c2 - c1 - 1), c1 + 1);
  snprintf(b, sizeof b, "%s", c2 + 1);
  if (dt_num_parse(a, &s->vlo) != DT_OK || dt_num_parse(b, &s->vhi) != DT_OK ||
      !isfinite(s->vlo) || !isfinite(s->vhi))
    return dt_err_set(e, DT_EINVAL, NULL, "system '%s': '%s:%s' are not two velocities",
                      s->name, a, b);
  if (!(s->vlo < s->vhi))
    return dt_err_set(e, DT_EINVAL, NULL, "system '%s': empty range %s:%s (VLO must be below VHI)",
                      s->name, a, b);
  return DT_OK;
}

int dt_system_opts_add(dt_system_opts *o, const dt_system *s, dt_err *e) {
  if (!strcmp(s->name, DT_SYSTEM_TARGET) || !strcmp(s->name, DT_SYSTEM_MW))
    return dt_err_set(e, DT_EINVAL, NULL,
                      "system name '%s' is reserved (the target's range is set apart; "
                      "the Milky Way's follows from vsys)", s->name);
  for (size_t k = 0; k < o->nextra; k++)
    if (!strcmp(o->extra[k].name, s->name))
      return dt_err_set(e, DT_EINVAL, NULL, "system '%s' given twice", s->name);
  if (o->nextra + 2 >= DT_MAX_SYSTEMS)
    return dt_err_set(e, DT_EINVAL, NULL, "at most %d systems of your own",
                      DT_MAX_SYSTEMS - 2);
  o->extra[o->nextra++] = *s;
  return DT_OK;
}

double dt_system_obs_to_rel(double v_obs, double vsys) {
  /* (1 + v_obs/c) = (1 + vsys/c)(1 + v/c): the composition dt_velocity and
   * dt_wavelength use (model.h). */
  return DT_C_KMS * ((1.0 + v_obs / DT_C_KMS) / (1.0 + vsys / DT_C_KMS) - 1.0);
}

static int overlap(const dt_system *a, const dt_system *b) {
  return a->vlo < b->vhi && b->vlo < a->vhi;
}

static void add_note(dt_system_set *set, const char *fmt, double a, double b, const char *name) {
  size_t len = strlen(set->note);
  if (len + 2 >= sizeof set->note) return;
  if (len) {
    memcpy(set->note + len, "; ", 3);
    len += 2;
  }
  char lo[32], hi[32];
  dt_num_snprintf(lo, sizeof lo, "%.0f", a);
  dt_num_snprintf(hi, sizeof hi, "%.0f", b);
  snprintf(set->note + len, sizeof set->note - len, fmt, name, lo, hi);
}

int dt_systems_build(const dt_system_opts *o, double vsys, dt_system_set *out, dt_err *e) {
  memset(out, 0, sizeof *out);
  dt_system *t = &out->sys[0];
  snprintf(t->name, sizeof t->name, "%s", DT_SYSTEM_TARGET);
  t->vlo = o->has_target ? o->target_vlo : -DT_SYSTEM_TARGET_HALF;
  t->vhi = o->has_target ? o->target_vhi : DT_SYSTEM_TARGET_HALF;
  if (!(isfinite(t->vlo) && isfinite(t->vhi) && t->vlo < t->vhi))
    return dt_err_set(e, DT_EINVAL, "target", "empty target range");
  out->n = 1;
  for (size_t k = 0; k < o->nextra; k++) {
    const dt_system *s = &o->extra[k];
    for (size_t m = 0; m < out->n; m++)
      if (overlap(s, &out->sys[m]))
        return dt_err_set(e, DT_EINVAL, s->name,
                          "system '%s' (%g:%g km/s) overlaps system '%s' (%g:%g km/s)",
                          s->name, s->vlo, s->vhi, out->sys[m].name, out->sys[m].vlo,
                          out->sys[m].vhi);
    if (out->n + 1 >= DT_MAX_SYSTEMS)
      return dt_err_set(e, DT_EINVAL, s->name, "at most %d systems", DT_MAX_SYSTEMS);
    out->sys[out->n++] = *s;
  }
  if (o->no_mw) return DT_OK;
  double half = o->mw_half > 0 ? o->mw_half : DT_SYSTEM_MW_HALF;
  dt_system mw;
  memset(&mw, 0, sizeof mw);
  snprintf(mw.name, sizeof mw.name, "%s", DT_SYSTEM_MW);
  mw.vlo = dt_system_obs_to_rel(-half, vsys);
  mw.vhi = dt_system_obs_to_rel(half, vsys);
  for (size_t m = 0; m < out->n; m++)
    if (overlap(&mw, &out->sys[m])) {
      char fmt[96];
      snprintf(fmt, sizeof fmt, "%%s (%%s:%%s km/s) lies in the range of %s: not separated",
               out->sys[m].name);
      add_note(out, fmt, mw.vlo, mw.vhi, mw.name);
      out->mw_joined = 1;
      return DT_OK;
    }
  out->sys[out->n++] = mw;
  return DT_OK;
}

void dt_systems_window(const dt_system_set *set, double fwhm_kms, double def_lo, double def_hi,
                       double *vlo, double *vhi) {
  double m = fmax(DT_SYSTEM_MARGIN, 2.0 * (fwhm_kms > 0 ? fwhm_kms : 0.0));
  double lo = def_lo, hi = def_hi;
  for (size_t k = 0; k < set->n; k++) {
    if (set->sys[k].vlo - m < lo) lo = set->sys[k].vlo - m;
    if (set->sys[k].vhi + m > hi) hi = set->sys[k].vhi + m;
  }
  *vlo = lo;
  *vhi = hi;
}

static void drop(dt_system_set *set, size_t k) {
  memmove(&set->sys[k], &set->sys[k + 1], (set->n - k - 1) * sizeof set->sys[0]);
  set->n--;
}

void dt_systems_clip(dt_system_set *set, double vlo, double vhi) {
  for (size_t k = 0; k < set->n;) {
    dt_system *s = &set->sys[k];
    double lo = fmax(s->vlo, vlo), hi = fmin(s->vhi, vhi);
    if (k > 0 && !(hi - lo >= 0.5 * (s->vhi - s->vlo))) {
      add_note(set, "%s (%s:%s km/s) lies outside the velocity window", s->vlo, s->vhi, s->name);
      drop(set, k);
      continue;
    }
    if (lo < hi) {
      s->vlo = lo;
      s->vhi = hi;
    } else { /* the target outside the window: the whole window */
      s->vlo = vlo;
      s->vhi = vhi;
    }
    k++;
  }
}

void dt_systems_drop_uncovered(dt_system_set *set, const dt_spectrum *s, const dt_doublet *d,
                               double vsys) {
  if (!s || !d || s->n < 2) return;
  for (size_t k = 1; k < set->n;) {
    const dt_system *y = &set->sys[k];
    int ok = 1;
    for (int l = 0; l < 2; l++) {
      double wl = dt_wavelength(y->vlo, d->line[l].lambda0, vsys);
      double wh = dt_wavelength(y->vhi, d->line[l].lambda0, vsys);
      if (wl < s->wave[0] || wh > s->wave[s->n - 1]) ok = 0;
    }
    if (ok) {
      k++;
      continue;
    }
    add_note(set, "%s (%s:%s km/s) is not covered by the spectrum", y->vlo, y->vhi, y->name);
    drop(set, k);
  }
}

int dt_systems_find(const dt_system_set *set, const char *name) {
  for (size_t k = 0; k < set->n; k++)
    if (!strcmp(set->sys[k].name, name)) return (int)k;
  return -1;
}

size_t dt_systems_of(const dt_system_set *set, double v) {
  size_t best = 0;
  double dbest = INFINITY;
  for (size_t k = 0; k < set->n; k++) {
    const dt_system *s = &set->sys[k];
    double d = v < s->vlo ? s->vlo - v : v > s->vhi ? v - s->vhi : 0.0;
    if (d < dbest) { /* strict: the earlier system wins a tie */
      dbest = d;
      best = k;
    }
  }
  return best;
}

/* The first pass's coincidence test (autofit.c) on a system's equivalent
 * widths: both lines at 3 sigma or more, W1 = rho W2 within 3 combined
 * sigma for some rho between 1 (saturated) and f1 lambda1^2 / (f2
 * lambda2^2) (optically thin; the linear curve of growth, Spitzer 1978). */
static int doublet_in_w(const dt_analysis_line *m) {
  if (!m || !m[0].line || !m[1].line) return 0;
  double A = m[0].W, sA = m[0].W_err, B = m[1].W, sB = m[1].W_err;
  if (!(sA > 0 && sB > 0 && A >= 3.0 * sA && B >= 3.0 * sB)) return 0;
  const dt_line *l0 = m[0].line, *l1 = m[1].line;
  double rmax = (l0->f * l0->lambda0 * l0->lambda0) / (l1->f * l1->lambda0 * l1->lambda0);
  if (rmax < 1) rmax = 1;
  double rho = A / B;
  if (rho < 1.0) rho = 1.0;
  if (rho > rmax) rho = rmax;
  return fabs(A - rho * B) <= 3.0 * sqrt(sA * sA + rho * rho * sB * sB);
}

/* Is absorption in the stronger line's velocity scale at v the weaker line
 * of a fitted component?  The weaker line of gas at velocity u shows at
 * u + delta in that scale, delta = c (lambda2/lambda1 - 1) (304 km/s for
 * Na I D); within 2b + FWHM of it the absorption is that component's. */
static int weak_line_of_component(const dt_judgement *j, const dt_autofit_out *o, double v) {
  const dt_doublet *d = o->an.doublet;
  if (!d) return 0;
  double delta = DT_C_KMS * (d->line[1].lambda0 / d->line[0].lambda0 - 1.0);
  double fw = j->resolution > 0 ? DT_C_KMS / j->resolution : j->fwhm_kms > 0 ? j->fwhm_kms : 0.0;
  for (size_t c = 0; c < j->ncomp; c++)
    if (fabs(v - (j->comp[c].v + delta)) <= 2.0 * j->comp[c].b + fw) return 1;
  return 0;
}

dt_verdict dt_systems_suggest(const dt_system_set *set, size_t k, const dt_judgement *j,
                              const dt_autofit_out *o, int st, const dt_analysis_line *meas,
                              char *reason, size_t nreason) {
  size_t ncomp = 0, nconf = 0, nunconf = 0;
  for (size_t c = 0; c < j->ncomp; c++)
    if (dt_systems_of(set, j->comp[c].v) == k) ncomp++;
  for (size_t c = 0; c < o->ncand && c < DT_MAX_COMP; c++) {
    if (dt_systems_of(set, o->cand_v[c]) != k) continue;
    if (o->cand_confirmed[c]) nconf++;
    else if (!weak_line_of_component(j, o, o->cand_v[c])) nunconf++;
  }
  const dt_fit_result *fr = &o->an.fit;
  if (st == DT_ENOCONV && ncomp > 0) {
    snprintf(reason, nreason, "fit did not converge");
    return DT_VERDICT_UNSURE;
  }
  int wconf = ncomp > 0 && doublet_in_w(meas);
  if (nconf > 0 || wconf) {
    if (fr->dof > 0 && fr->chi2_red > POOR_CHI2) {
      dt_num_snprintf(reason, nreason, "poor fit (chi2_red %.1f)", fr->chi2_red);
      return DT_VERDICT_UNSURE;
    }
    snprintf(reason, nreason, nconf ? "doublet confirmed" : "doublet confirmed in W");
    return DT_VERDICT_DETECTED;
  }
  if (ncomp > 0) {
    snprintf(reason, nreason, "components without a confirmed doublet");
    return DT_VERDICT_UNSURE;
  }
  if (nunconf > 0) {
    snprintf(reason, nreason, "unconfirmed absorption");
    return DT_VERDICT_UNSURE;
  }
  snprintf(reason, nreason, "no confirmed absorption");
  return DT_VERDICT_NOT_DETECTED;
}

void dt_systems_format(const dt_system_set *set, char *buf, size_t n) {
  size_t len = 0;
  if (n) buf[0] = '\0';
  for (size_t k = 0; k < set->n && len + 1 < n; k++) {
    char lo[40], hi[40];
    dt_num_format(lo, sizeof lo, set->sys[k].vlo);
    dt_num_format(hi, sizeof hi, set->sys[k].vhi);
    int w = snprintf(buf + len, n - len, "%s%s:%s:%s", k ? ";" : "", set->sys[k].name, lo, hi);
    if (w < 0) break;
    len += (size_t)w;
  }
}

int dt_systems_setup(const dt_system_opts *o, double vsys, const dt_spectrum *s,
                     const dt_doublet *d, double fwhm_kms, int has_window, double *vlo,
                     double *vhi, dt_system_set *set, dt_err *e) {
  int st = dt_systems_build(o, vsys, set, e);
  if (st != DT_OK) return st;
  if (has_window) {
    dt_systems_clip(set, *vlo, *vhi);
    return DT_OK;
  }
  dt_systems_drop_uncovered(set, s, d, vsys);
  dt_systems_window(set, fwhm_kms, *vlo, *vhi, vlo, vhi);
  return DT_OK;
}

static double judgement_fwhm(const dt_judgement *j) {
  return j->resolution > 0 ? DT_C_KMS / j->resolution : j->fwhm_kms > 0 ? j->fwhm_kms : 0.0;
}

int dt_systems_measure(dt_analysis *a, const dt_system_set *set, const dt_judgement *j, size_t k,
                       dt_analysis_line out[2], double *mvlo, double *mvhi, size_t *ncomp) {
  double fw = judgement_fwhm(j);
  const dt_system *y = &set->sys[k];
  double lo = INFINITY, hi = -INFINITY;
  size_t n = 0;
  for (size_t c = 0; c < j->ncomp; c++) {
    if (dt_systems_of(set, j->comp[c].v) != k) continue;
    n++;
    double hw = 2.0 * j->comp[c].b + fw;
    if (j->comp[c].v - hw < lo) lo = j->comp[c].v - hw;
    if (j->comp[c].v + hw > hi) hi = j->comp[c].v + hw;
  }
  if (n == 0 || !(lo < hi)) {
    lo = y->vlo;
    hi = y->vhi;
  } else { /* clipped to the range, unless the range misses the components */
    double cl = fmax(lo, y->vlo), ch = fmin(hi, y->vhi);
    if (cl < ch) {
      lo = cl;
      hi = ch;
    }
  }
  *mvlo = lo;
  *mvhi = hi;
  *ncomp = n;
  return dt_analysis_measure_range(a, lo, hi, out, NULL);
}

void dt_systems_results(dt_analysis *a, const dt_system_set *set, const dt_judgement *j,
                        const dt_autofit_out *o, int st, dt_system_result *res) {
  for (size_t k = 0; k < set->n; k++) {
    dt_system_result *r = &res[k];
    memset(r, 0, sizeof *r);
    r->measure_status = dt_systems_measure(a, set, j, k, r->line, &r->mvlo, &r->mvhi, &r->ncomp);
    r->suggested = dt_systems_suggest(set, k, j, o, st, r->measure_status == DT_OK ? r->line : NULL,
                                      r->reason, sizeof r->reason);
  }
}

void dt_systems_of_judgement(const dt_judgement *j, dt_system_set *set) {
  memset(set, 0, sizeof *set);
  if (j->nsys > 0) {
    for (size_t k = 0; k < j->nsys && k < DT_MAX_SYSTEMS; k++) {
      snprintf(set->sys[k].name, sizeof set->sys[k].name, "%s", j->sys[k].name);
      set->sys[k].vlo = j->sys[k].vlo;
      set->sys[k].vhi = j->sys[k].vhi;
    }
    set->n = j->nsys < DT_MAX_SYSTEMS ? j->nsys : DT_MAX_SYSTEMS;
    return;
  }
  dt_system_opts o;
  dt_system_opts_init(&o);
  if (dt_systems_build(&o, j->vsys, set, NULL) != DT_OK) return;
  if (j->vlo < j->vhi) dt_systems_clip(set, j->vlo, j->vhi);
}

void dt_systems_to_judgement(const dt_system_set *set, dt_judgement *j) {
  j->nsys = set->n < DT_JUDGE_MAX_SYS ? set->n : DT_JUDGE_MAX_SYS;
  for (size_t k = 0; k < j->nsys; k++) {
    snprintf(j->sys[k].name, sizeof j->sys[k].name, "%s", set->sys[k].name);
    j->sys[k].vlo = set->sys[k].vlo;
    j->sys[k].vhi = set->sys[k].vhi;
  }
}

/* Saturation from the two lines' measurements, both relations with their
 * errors (l[0] the stronger line s, l[1] the weaker w):
 *  - apparent columns: in unresolved saturated structure N_a(s) falls
 *    below N_a(w) (Savage & Sembach 1991, ApJ 379, 245); flagged when
 *    N_a(w) - N_a(s) > SAT_NSIGMA sqrt(sigma_s^2 + sigma_w^2), the columns
 *    and their errors from log N_a +- sigma_log: sigma_N = N sigma_log / log10(e);
 *  - equivalent widths: W_s / W_w is f_s lambda_s^2 / (f_w lambda_w^2)
 *    (= rho, ~2 for Na I) on the linear curve of growth and falls towards
 *    1 on the flat part (Spitzer 1978, Physical Processes in the
 *    Interstellar Medium, sec. 3.4, from memory); flagged when the
 *    stronger line is significant (W_s >= 3 sigma) and
 *    rho W_w - W_s > SAT_NSIGMA sqrt((rho sigma_Ww)^2 + sigma_Ws^2);
 *  - and any floored (black) pixel in either line's window.
 * The rule of dt_measure_saturated (measure.h) on a system's window. */
#define SAT_NSIGMA 2.0
int dt_systems_saturated(const dt_analysis_line l[2]) {
  if (l[0].nsat > 0 || l[1].nsat > 0) return 1;
  if (isfinite(l[0].logN_aod) && isfinite(l[1].logN_aod)) {
    double ns = pow(10.0, l[0].logN_aod), nw = pow(10.0, l[1].logN_aod);
    double es = ns * l[0].logN_aod_err / M_LOG10E, ew = nw * l[1].logN_aod_err / M_LOG10E;
    double den = hypot(es, ew);
    if (den > 0 && (nw - ns) / den > SAT_NSIGMA) return 1;
  }
  const dt_line *ls = l[0].line, *lw = l[1].line;
  double Ws = l[0].W, Ww = l[1].W, sWs = l[0].W_err, sWw = l[1].W_err;
  if (!ls || !lw || !isfinite(Ws) || !isfinite(Ww) || !(sWs > 0) || !(sWw > 0)) return 0;
  double rho = ls->f * ls->lambda0 * ls->lambda0 / (lw->f * lw->lambda0 * lw->lambda0);
  double den = hypot(rho * sWw, sWs);
  return Ws >= 3.0 * sWs && (rho * Ww - Ws) / den > SAT_NSIGMA;
}
