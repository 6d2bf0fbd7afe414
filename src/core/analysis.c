/* The analysis of one spectrum under one judgement: pixels, model,
 * continuum, fit and measurements, with buffers kept between runs.
 *
 * The inspector calls this after every keystroke, so the expensive pieces
 * are cached by the settings they depend on: the doublet model (doublet,
 * rest frame, resolution, window) and the continuum (also the continuum
 * windows and order).  A nudge of a component therefore costs one fit (or,
 * with dt_analysis_eval, one model evaluation) plus the O(n) measurements.
 *
 * Default measurement window (when the options give none): with components,
 * from the lowest v - (2b + FWHM) to the highest v + (2b + FWHM) of the
 * components, FWHM the LSF's in km/s; without, +-max(FWHM, 3 pixels) around
 * v = 0; clipped to the judgement's window.  A close doublet (Na I: the lines
 * are 304 km/s apart) puts the other line inside a wide window, which is why
 * the integration does not default to the whole window, and why each line
 * is measured on its own view (line_view: the other line divided out with
 * the fitted model, masked pixels filled from it).  Limits scan a box over
 * the range (measure.h, dt_measure_limit) and go through the curve of
 * growth (cog.h); the profile-likelihood intervals are profile.c's, run
 * from analysis_intervals.c. */
#include "doubletty/analysis.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "doubletty/cog.h"
#include "doubletty/cover.h"
#include "doubletty/continuum.h"
#include "doubletty/legendre.h"
#include "doubletty/lsf.h"
#include "doubletty/measure.h"
#include "doubletty/model.h"

#include "analysis_priv.h"

void dt_analysis_opts_init(dt_analysis_opts *o) {
  memset(o, 0, sizeof *o);
  o->limit_nsigma = 3.0;
  o->limit_b = DT_ANALYSIS_LIMIT_B;
  o->cont_margin_kms = DT_ANALYSIS_CONT_MARGIN;
}

dt_analysis *dt_analysis_alloc(const dt_spectrum *s, const dt_atomic *t) {
  if (!s || !t) return NULL;
  dt_analysis *a = calloc(1, sizeof *a);
  if (!a) return NULL;
  a->s = s;
  a->t = t;
  dt_analysis_opts_init(&a->opts);
  a->cw = dt_cont_alloc(0, NULL);
  if (!a->cw) {
    free(a);
    return NULL;
  }
  return a;
}

static void free_buffers(dt_analysis *a) {
  for (int l = 0; l < 2; l++) {
    free(a->vel[l]);
    free(a->na[l]);
    free(a->na_err[l]);
    free(a->ltr[l]);
    free(a->lflux[l]);
    free(a->lsig[l]);
    a->vel[l] = a->na[l] = a->na_err[l] = a->ltr[l] = a->lflux[l] = a->lsig[l] = NULL;
  }
  free(a->cont_fixed); free(a->cont_err); free(a->cont); free(a->model);
  free(a->resid); free(a->poly); free(a->tmp); free(a->used); free(a->fitmask);
  free(a->compmod);
  a->cont_fixed = a->cont_err = a->cont = a->model = a->resid = a->poly = a->tmp = NULL;
  a->used = a->fitmask = NULL;
  a->compmod = NULL;
  a->cap = 0;
}

void dt_analysis_free(dt_analysis *a) {
  if (!a) return;
  free_buffers(a);
  free(a->mwave);
  free(a->rcont);
  free(a->rerr);
  dt_model_free(a->m);
  dt_model_free(a->mc);
  dt_cover_free(a->cvw);
  dt_model_free(a->sm[0]);
  dt_model_free(a->sm[1]);
  dt_fit_free(a->fw);
  dt_calib_free(a->calw);
  dt_cont_free(a->cw);
  free(a);
}

int dt_analysis_rebind(dt_analysis *a, const dt_spectrum *s) {
  if (!a || !s) return DT_EINVAL;
  const size_t i0 = a->mkey.i0, n = a->mkey.n;
  int keep = a->have_model && a->mwave && !s->lsf_fwhm_kms && !a->mkey.lsf && i0 + n <= s->n &&
             memcmp(a->mwave, s->wave + i0, n * sizeof *a->mwave) == 0;
  a->s = s;
  a->have_run = a->have_cont = a->have_ltr = 0;
  if (!keep) a->have_model = a->have_sm = 0;
  memset(a->compmod_ok, 0, sizeof a->compmod_ok);
  memset(a->cog_cache, 0, sizeof a->cog_cache);
  a->covering = 0;
  return DT_OK;
}

void dt_analysis_set_opts(dt_analysis *a, const dt_analysis_opts *o) {
  if (o) a->opts = *o;
  else dt_analysis_opts_init(&a->opts);
  if (a->opts.joint_cont > DT_MAX_CONT) a->opts.joint_cont = DT_MAX_CONT;
  /* (a model is rebuilt when its key -- oversample, tau_cut, the hyperfine
   * table, the line-spread widths among them -- changes) */
  a->have_run = 0;
}

static int ensure_cap(dt_analysis *a, size_t n) {
  if (n <= a->cap) return DT_OK;
  free_buffers(a);
  int bad = 0;
#define GET(p, cnt) do { (p) = malloc((cnt) * sizeof *(p)); bad |= !(p); } while (0)
  for (int l = 0; l < 2; l++) {
    GET(a->vel[l], n);
    GET(a->na[l], n);
    GET(a->na_err[l], n);
    GET(a->ltr[l], n);
    GET(a->lflux[l], n);
    GET(a->lsig[l], n);
  }
  GET(a->cont_fixed, n); GET(a->cont_err, n); GET(a->cont, n); GET(a->model, n);
  GET(a->resid, n); GET(a->poly, n); GET(a->tmp, n); GET(a->used, n); GET(a->fitmask, n);
  GET(a->compmod, n * DT_MAX_COMP);
#undef GET
  if (bad) {
    free_buffers(a);
    return DT_ENOMEM;
  }
  a->cap = n;
  a->have_cont = 0;
  return DT_OK;
}

static int ensure_rcap(dt_analysis *a, size_t n) {
  if (n <= a->rcap) return DT_OK;
  free(a->rcont);
  free(a->rerr);
  a->rcont = malloc(n * sizeof *a->rcont);
  a->rerr = malloc(n * sizeof *a->rerr);
  if (!a->rcont || !a->rerr) {
    free(a->rcont);
    free(a->rerr);
    a->rcont = a->rerr = NULL;
    a->rcap = 0;
    return DT_ENOMEM;
  }
  a->rcap = n;
  return DT_OK;
}

/* LSF FWHM in km/s of the judgement's settings (0: none). */
static double lsf_fwhm(const dt_judgement *j) {
  if (j->resolution > 0) return DT_C_KMS / j->resolution;
  if (j->fwhm_kms > 0) return j->fwhm_kms;
  return 0;
}

/* prepare, stage 1: the judgement's settings are usable; *dp: its doublet. */
static int check_settings(const dt_analysis *a, const dt_judgement *j, const dt_doublet **dp,
                          dt_err *e) {
  const dt_doublet *d = dt_atomic_find(a->t, j->doublet);
  if (!d) return dt_err_set(e, DT_ENOTFOUND, "doublet", "unknown doublet '%s'", j->doublet);
  *dp = d;
  if (!(isfinite(j->vlo) && isfinite(j->vhi) && j->vlo < j->vhi))
    return dt_err_set(e, DT_EINVAL, "window", "empty velocity window [%g, %g] km/s", j->vlo,
                      j->vhi);
  if (!isfinite(j->vsys) || !isfinite(j->resolution) || !isfinite(j->fwhm_kms))
    return dt_err_set(e, DT_EINVAL, "settings", "non-finite rest frame or resolution");
  if (j->ncomp > DT_MAX_COMP)
    return dt_err_set(e, DT_EINVAL, "components", "more than %d components", DT_MAX_COMP);
  if (j->cont_order < -1 || j->cont_order > DT_CONT_MAX_ORDER)
    return dt_err_set(e, DT_EINVAL, "continuum", "continuum order %d outside -1..%d",
                      j->cont_order, DT_CONT_MAX_ORDER);
  if (a->s->n < 2) return dt_err_set(e, DT_ERANGE, "spectrum", "fewer than 2 pixels");
  return DT_OK;
}

/* prepare, stage 2: the pixels i0..i1-1 covering both lines' windows (each
 * at least half covered), their velocities and the fit mask. */
static int select_pixels(dt_analysis *a, const dt_judgement *j, const dt_doublet *d,
                         dt_analysis_out *out, size_t *i1p, dt_err *e) {
  const dt_spectrum *s = a->s;
  double lo = INFINITY, hi = -INFINITY;
  for (int l = 0; l < 2; l++) {
    const dt_line *ln = &d->line[l];
    double wl = dt_wavelength(j->vlo, ln->lambda0, j->vsys);
    double wh = dt_wavelength(j->vhi, ln->lambda0, j->vsys);
    double cl = fmax(wl, s->wave[0]), ch = fmin(wh, s->wave[s->n - 1]);
    if (!(ch - cl >= 0.5 * (wh - wl)))
      return dt_err_set(e, DT_ERANGE, ln->label,
                        "window %g..%g km/s (%.2f-%.2f A) is not covered by the spectrum "
                        "(%.2f-%.2f A)",
                        j->vlo, j->vhi, wl, wh, s->wave[0], s->wave[s->n - 1]);
    if (wl < lo) lo = wl;
    if (wh > hi) hi = wh;
  }
  size_t i0 = dt_spectrum_index(s, lo), i1 = dt_spectrum_index(s, hi);
  if (i1 < s->n && s->wave[i1] == hi) i1++;
  if (i1 <= i0 + 1) return dt_err_set(e, DT_ERANGE, d->name, "fewer than 2 pixels in the window");
  size_t n = i1 - i0;
  int st = ensure_cap(a, n);
  if (st) return dt_err_set(e, st, NULL, "out of memory");

  /* velocities, fit mask */
  size_t nused = 0;
  for (size_t i = 0; i < n; i++) {
    double w = s->wave[i0 + i];
    int inwin = 0;
    for (int l = 0; l < 2; l++) {
      a->vel[l][i] = dt_velocity(w, d->line[l].lambda0, j->vsys);
      if (a->vel[l][i] >= j->vlo && a->vel[l][i] <= j->vhi) inwin = 1;
    }
    int ok = inwin && !s->mask[i0 + i] && isfinite(s->flux[i0 + i]) &&
             isfinite(s->sigma[i0 + i]) && s->sigma[i0 + i] > 0;
    a->fitmask[i] = !ok;
    a->used[i] = (unsigned char)ok;
    nused += (size_t)ok;
  }
  if (nused == 0)
    return dt_err_set(e, DT_EMASKED, d->name, "every pixel in the window is masked");
  out->i0 = i0;
  out->n = n;
  out->nused = nused;
  a->i0 = i0;
  a->n = n;
  a->fwhm_kms = lsf_fwhm(j);
  *i1p = i1;
  return DT_OK;
}

/* The second model of partial covering (and the buffers to combine the
 * components), on the pixels and settings of a->m; kept with it. */
static int ensure_cover_model(dt_analysis *a, const dt_doublet *d, dt_err *e) {
  if (!a->cvw || a->cvw_cap < a->n) {
    dt_cover_free(a->cvw);
    a->cvw = dt_cover_alloc(a->n, DT_MAX_COMP);
    a->cvw_cap = a->n;
    if (!a->cvw) return dt_err_set(e, DT_ENOMEM, NULL, "out of memory");
  }
  if (a->mc) return DT_OK;
  dt_model_config cfg;
  memset(&cfg, 0, sizeof cfg);
  cfg.doublet = d;
  cfg.vsys = a->mkey.vsys;
  cfg.resolution = a->mkey.resolution;
  cfg.fwhm_kms = a->mkey.fwhm;
  cfg.lsf_fwhm_kms = a->mkey.lsf;
  for (int l = 0; l < 2; l++) cfg.hfs[l] = dt_hyperfine_find(a->mkey.hfs, d, l);
  cfg.oversample = a->opts.oversample;
  cfg.tau_cut = a->opts.tau_cut;
  dt_err me;
  dt_err_clear(&me);
  a->mc = dt_model_alloc(a->s->wave + a->i0, a->n, &cfg, 1, &me);
  if (!a->mc) {
    if (me.code == DT_OK) dt_err_set(&me, DT_ENOMEM, NULL, "out of memory");
    if (e) *e = me;
    return me.code;
  }
  return DT_OK;
}

/* prepare, stage 3: the model (and the fit workspace), rebuilt only when
 * its settings change. */
static int ensure_model(dt_analysis *a, const dt_judgement *j, const dt_doublet *d, dt_err *e) {
  const size_t i0 = a->i0, n = a->n;
  model_key mk;
  memset(&mk, 0, sizeof mk);
  mk.doublet = d; mk.vsys = j->vsys; mk.resolution = j->resolution; mk.fwhm = j->fwhm_kms;
  mk.vlo = j->vlo; mk.vhi = j->vhi; mk.tau_cut = a->opts.tau_cut;
  mk.oversample = a->opts.oversample; mk.i0 = i0; mk.n = n;
  mk.hfs = j->hyperfine ? a->opts.hyperfine : NULL; /* split lines: the judgement says */
  if (!a->opts.lsf_constant && a->s->lsf_fwhm_kms) {
    /* widths per pixel: every pixel of the window needs one */
    size_t bad = dt_lsf_first_bad(a->s, i0, n);
    if (bad < n)
      return dt_err_set(e, DT_ERANGE, "resolution",
                        "no line-spread width at %.3f A from %.100s (outside the table, or no "
                        "usable value there)",
                        a->s->wave[i0 + bad], a->s->lsf_from);
    mk.lsf = a->s->lsf_fwhm_kms + i0;
    mk.resolution = mk.fwhm = 0;
    size_t ic = dt_spectrum_index(a->s, dt_wavelength(0.0, d->line[0].lambda0, j->vsys));
    if (ic < i0) ic = i0;
    if (ic > i0 + n - 1) ic = i0 + n - 1;
    a->fwhm_kms = a->s->lsf_fwhm_kms[ic];
  }
  if (a->have_model && memcmp(&mk, &a->mkey, sizeof mk) == 0)
    return j->covering ? ensure_cover_model(a, d, e) : DT_OK;
  dt_model_free(a->m);
  dt_model_free(a->mc);
  a->mc = NULL;
  a->have_model = 0;
  dt_model_config cfg;
  memset(&cfg, 0, sizeof cfg);
  cfg.doublet = d;
  cfg.vsys = j->vsys;
  cfg.resolution = mk.resolution;
  cfg.fwhm_kms = mk.fwhm;
  cfg.lsf_fwhm_kms = mk.lsf;
  cfg.oversample = a->opts.oversample;
  cfg.tau_cut = a->opts.tau_cut;
  for (int l = 0; l < 2; l++) cfg.hfs[l] = dt_hyperfine_find(mk.hfs, d, l);
  dt_err me;
  dt_err_clear(&me);
  a->m = dt_model_alloc(a->s->wave + i0, n, &cfg, DT_MAX_COMP, &me);
  if (!a->m) {
    if (me.code == DT_OK) dt_err_set(&me, DT_ENOMEM, NULL, "out of memory");
    if (e) *e = me;
    return me.code;
  }
  if (!a->fw || a->fw_cap < n) {
    dt_fit_free(a->fw);
    a->fw = dt_fit_alloc(n, DT_MAX_COMP, DT_MAX_CONT);
    a->fw_cap = n;
    if (!a->fw) return dt_err_set(e, DT_ENOMEM, NULL, "out of memory");
  }
  /* its wavelengths, to know a spectrum on the same pixels (rebind) */
  if (a->mwave_cap < n) {
    free(a->mwave);
    a->mwave = malloc(n * sizeof *a->mwave);
    a->mwave_cap = a->mwave ? n : 0;
  }
  if (a->mwave) memcpy(a->mwave, a->s->wave + i0, n * sizeof *a->mwave);
  a->mkey = mk;
  a->have_model = 1;
  return j->covering ? ensure_cover_model(a, d, e) : DT_OK;
}

/* The continuum's region r0..r1-1: the selection i0..i1-1, widened to take
 * in the user windows.  The automatic continuum needs the spectrum around
 * the lines: the selection widened by the margin on both sides, with each
 * line's whole velocity window excluded (absorption may be anywhere in it;
 * sigma clipping takes care of anything else). */
static void cont_region(const dt_spectrum *s, const cont_key *ck, size_t i0, size_t i1,
                        size_t *r0p, size_t *r1p) {
  size_t r0 = i0, r1 = i1;
  if (ck->nwin == 0 && ck->margin > 0) {
    double f = ck->margin / DT_C_KMS;
    r0 = dt_spectrum_index(s, s->wave[i0] * (1.0 - f));
    r1 = dt_spectrum_index(s, s->wave[i1 - 1] * (1.0 + f));
    if (r0 > i0) r0 = i0;
    if (r1 < i1) r1 = i1;
  }
  for (size_t k = 0; k < ck->nwin; k++) {
    size_t w0 = dt_spectrum_index(s, ck->win[k].lo), w1 = dt_spectrum_index(s, ck->win[k].hi);
    if (w1 <= w0) continue;
    if (w0 < r0) r0 = w0;
    if (w1 > r1) r1 = w1;
  }
  *r0p = r0;
  *r1p = r1;
}

/* The fitted continuum over the selection (order >= 0). */
static int fit_continuum(dt_analysis *a, const dt_judgement *j, const dt_doublet *d,
                         const cont_key *ck, size_t i1, dt_err *e) {
  const dt_spectrum *s = a->s;
  const size_t i0 = a->i0, n = a->n;
  size_t r0, r1;
  cont_region(s, ck, i0, i1, &r0, &r1);
  int st = ensure_rcap(a, r1 - r0);
  if (st) return dt_err_set(e, st, NULL, "out of memory");
  dt_cont_opts co;
  dt_cont_opts_init(&co);
  co.kind = DT_CONT_LEGENDRE;
  co.order = j->cont_order;
  co.nwin = ck->nwin;
  co.win = ck->win;
  co.doublet = d;
  co.vsys = j->vsys;
  if (ck->margin > 0) {
    co.exclude_lo = j->vlo;
    co.exclude_hi = j->vhi;
  }
  co.allow_lower = 1;
  dt_cont_result cr;
  st = dt_cont_fit(a->cw, s, r0, r1, &co, a->rcont, a->rerr, NULL, &cr, &a->cont_e);
  if (st != DT_OK) {
    a->cont_status = st;
    if (e) *e = a->cont_e;
    return st;
  }
  int bad = 0;
  for (size_t i = 0; i < n; i++) {
    a->cont_fixed[i] = a->rcont[i0 - r0 + i];
    a->cont_err[i] = a->rerr[i0 - r0 + i];
    if (!(a->cont_fixed[i] > 0) || !isfinite(a->cont_fixed[i])) bad = 1;
  }
  /* The settings were valid (checked above) and the fit itself worked,
   * so a continuum at or below zero says something about the data: the
   * pixels it was fitted to hold no flux, as when the lines (damping
   * wings, a black trough) or anything else absorb the whole spectrum
   * around them.  That is a property of this spectrum, not a bad
   * argument: DT_ERANGE, the lines not covered by usable data. */
  if (bad) {
    a->cont_status = DT_ERANGE;
    return dt_err_set(e, DT_ERANGE, "continuum",
                      "no continuum beside the lines: the continuum fitted to %zu "
                      "pixels is not positive everywhere in the window (%s)",
                      cr.nused,
                      ck->nwin ? "are the continuum windows free of absorption?"
                               : "no unabsorbed flux near them; give continuum windows");
  }
  a->cont_order_used = cr.order;
  return DT_OK;
}

/* prepare, stage 4: the continuum, refitted only when its settings change
 * (fixed at 1 for order -1). */
static int ensure_continuum(dt_analysis *a, const dt_judgement *j, const dt_doublet *d,
                            size_t i1, dt_err *e) {
  const size_t i0 = a->i0, n = a->n;
  cont_key ck;
  memset(&ck, 0, sizeof ck);
  ck.doublet = d; ck.vsys = j->vsys; ck.order = j->cont_order; ck.i0 = i0; ck.n = n;
  ck.vlo = j->vlo; ck.vhi = j->vhi; ck.margin = a->opts.cont_margin_kms;
  ck.nwin = j->nwin < DT_MAX_WINDOWS ? j->nwin : DT_MAX_WINDOWS;
  memcpy(ck.win, j->win, ck.nwin * sizeof ck.win[0]);
  if (a->have_cont && memcmp(&ck, &a->ckey, sizeof ck) == 0) return DT_OK;
  a->have_cont = 0;
  a->cont_status = DT_OK;
  dt_err_clear(&a->cont_e);
  if (j->cont_order < 0) {
    for (size_t i = 0; i < n; i++) {
      a->cont_fixed[i] = 1.0;
      a->cont_err[i] = 0.0;
    }
    a->cont_order_used = -1;
  } else {
    int st = fit_continuum(a, j, d, &ck, i1, e);
    if (st != DT_OK) return st;
  }
  a->ckey = ck;
  a->have_cont = 1;
  return DT_OK;
}

/* Choose the pixels, check coverage and masking, (re)build the model and
 * the continuum.  Everything the fit and the measurements need. */
static int prepare(dt_analysis *a, const dt_judgement *j, dt_analysis_out *out, dt_err *e) {
  dt_err_clear(e);
  memset(out, 0, sizeof *out);
  out->fit_status = DT_OK;
  a->have_run = 0;
  const dt_doublet *d = NULL;
  int st = check_settings(a, j, &d, e);
  out->doublet = d;
  if (st != DT_OK) return st;
  size_t i1 = 0;
  st = select_pixels(a, j, d, out, &i1, e);
  if (st != DT_OK) return st;
  st = ensure_model(a, j, d, e);
  if (st != DT_OK) return st;
  st = ensure_continuum(a, j, d, i1, e);
  if (st != DT_OK) return st;
  out->cont_order = a->cont_order_used;
  return DT_OK;
}

void dt_an_fill_problem(dt_analysis *a, const dt_judgement *j, dt_fit_problem *p) {
  memset(p, 0, sizeof *p);
  p->model = a->m;
  p->wave = a->s->wave + a->i0;
  p->flux = a->s->flux + a->i0;
  p->sigma = a->s->sigma + a->i0;
  p->mask = a->fitmask;
  p->cont = j->cont_order < 0 ? NULL : a->cont_fixed;
  p->ncont = a->opts.joint_cont;
  p->ncomp = j->ncomp;
  p->comp = j->comp;
  p->frozen = j->frozen;
  p->tie_b = j->tie_b;
  p->vlo = j->vlo;
  p->vhi = j->vhi;
  p->max_iter = a->opts.max_iter;
  p->time_limit = a->opts.time_limit;
  p->stall_chi2 = a->opts.stall_chi2;
  p->give_up_bic = a->opts.give_up_bic;
  p->covering = j->covering;
  p->cf = j->cf;
  p->cover_model = j->covering ? a->mc : NULL;
}

/* The covering factors the measurements and the component models of the
 * next finish() use: the fit's, or the judgement's (0: none yet, 1). */
static void keep_cover(dt_analysis *a, int covering, const double *cf, size_t ncomp) {
  a->covering = covering;
  for (size_t k = 0; k < ncomp; k++)
    a->cf[k] = covering && cf[k] > 0.0 && cf[k] <= 1.0 ? cf[k] : 1.0;
}

/* The joint polynomial per pixel (1 without), continuum = fixed * poly. */
static void set_continuum(dt_analysis *a, const double *coef, size_t ncoef) {
  size_t n = a->n;
  const double *w = a->s->wave + a->i0;
  for (size_t i = 0; i < n; i++) {
    double poly = dt_legendre_sum(coef, ncoef, dt_legendre_x(w[i], w[0], w[n - 1]));
    a->poly[i] = poly;
    a->cont[i] = a->cont_fixed[i] * poly;
  }
}


/* Residuals, measurements; the model must be in a->model. */
static void finish(dt_analysis *a, const dt_judgement *j, const dt_component *comp,
                   size_t ncomp, dt_analysis_out *out) {
  const dt_spectrum *s = a->s;
  size_t n = a->n, i0 = a->i0;
  for (size_t i = 0; i < n; i++) {
    double r = (s->flux[i0 + i] - a->model[i]) / s->sigma[i0 + i];
    a->resid[i] = (s->mask[i0 + i] || !isfinite(r)) ? 0.0 : r;
  }
  a->ncomp = ncomp;
  memcpy(a->comp, comp, ncomp * sizeof comp[0]);
  memset(a->compmod_ok, 0, sizeof a->compmod_ok);

  a->have_ltr = 0;
  dt_an_continuum_tau(a, j, out->doublet, comp, ncomp, out);
  a->d = out->doublet;
  a->vsys = j->vsys;
  a->jvlo = j->vlo;
  a->jvhi = j->vhi;
  a->have_run = 1;

  /* measurement window */
  double v1 = a->opts.int_vlo, v2 = a->opts.int_vhi;
  if (!(v1 < v2)) {
    double fw = a->fwhm_kms;
    if (ncomp > 0) {
      v1 = INFINITY;
      v2 = -INFINITY;
      for (size_t k = 0; k < ncomp; k++) {
        double hw = 2.0 * comp[k].b + fw;
        if (comp[k].v - hw < v1) v1 = comp[k].v - hw;
        if (comp[k].v + hw > v2) v2 = comp[k].v + hw;
      }
    } else {
      double pix = fabs(a->vel[0][n - 1] - a->vel[0][0]) / (double)(n - 1);
      double hw = fmax(fw, 3.0 * pix);
      v1 = -hw;
      v2 = hw;
    }
    if (v1 < j->vlo) v1 = j->vlo;
    if (v2 > j->vhi) v2 = j->vhi;
    if (!(v1 < v2)) { v1 = j->vlo; v2 = j->vhi; }
  }
  out->meas_vlo = v1;
  out->meas_vhi = v2;
  if (a->opts.no_measure) {   /* a search's fit: chi2, model and residuals only */
    out->measure_status = DT_EINVAL;
    return;
  }
  /* limits: where absorption may be, the whole window unless a
   * measurement window was given */
  int given = a->opts.int_vlo < a->opts.int_vhi;
  a->mv1 = v1;
  a->mv2 = v2;
  a->ml1 = given ? v1 : j->vlo;
  a->ml2 = given ? v2 : j->vhi;
  out->measure_status = dt_an_measure_lines(a, v1, v2, a->ml1, a->ml2, !a->opts.no_intervals,
                                      out->line, &out->saturated, NULL);

  /* the N_a(v) profile over the whole window, for plots and the first pass */
  dt_measure_input in;
  dt_an_measure_input(a, &in);
  dt_measure_opts mo;
  dt_an_measure_opts(a, &mo);
  const dt_doublet *d = out->doublet;
  for (int l = 0; l < 2; l++) {
    dt_line_measure pm;
    if (dt_measure_line(&in, &d->line[l], j->vlo, j->vhi, &mo, &pm, a->na[l], a->na_err[l],
                        NULL) != DT_OK) {
      for (size_t i = 0; i < n; i++) a->na[l][i] = a->na_err[l][i] = NAN;
    }
  }
}

/* Fitted parameters counted for BIC and dof when nothing is fitted. */
static size_t count_free(const dt_judgement *j, size_t joint) {
  size_t k = joint;
  for (size_t c = 0; c < j->ncomp; c++) {
    unsigned fr = j->frozen[c];
    k += !(fr & DT_FREEZE_N) + !(fr & DT_FREEZE_V);
    if (j->tie_b ? c == 0 && !(j->frozen[0] & DT_FREEZE_B) : !(fr & DT_FREEZE_B)) k++;
    k += j->covering != 0;
  }
  return k;
}

int dt_analysis_run(dt_analysis *a, const dt_judgement *j, dt_analysis_out *out, dt_err *e) {
  int st = prepare(a, j, out, e);
  if (st != DT_OK) return st;
  dt_fit_problem p;
  dt_an_fill_problem(a, j, &p);
  dt_err fe;
  dt_err_clear(&fe);
  int fst = dt_fit_run(a->fw, &p, &out->fit, &fe);
  out->fit_status = fst;
  out->fit_info = *dt_fit_last_info(a->fw);
  out->fitted = j->ncomp > 0 || p.ncont > 0;
  if (fst != DT_OK && fst != DT_ENOCONV) {
    if (e) *e = fe;
    return fst;
  }
  /* the model at the fit's parameters (the best reached if it failed) */
  size_t npix;
  double chi2;
  dt_fit_problem q = p;
  q.frozen = NULL;
  if (out->fit.covering) q.cf = out->fit.cf;
  dt_fit_chi2(a->fw, &q, out->fit.comp, out->fit.cont_coef, a->model, &chi2, &npix);
  set_continuum(a, out->fit.cont_coef, out->fit.ncont);
  keep_cover(a, out->fit.covering, out->fit.cf, out->fit.ncomp);
  finish(a, j, out->fit.comp, out->fit.ncomp, out);
  /* a run (a keystroke of the inspector) spends little on them; the
   * first pass and explicit calls what they need */
  if (fst == DT_OK && !a->opts.no_intervals && !a->opts.defer_intervals && out->fit.ncomp > 0)
    dt_analysis_run_intervals(a, j, out);
  if (fst != DT_OK) {
    if (e) *e = fe;
    return fst;
  }
  return DT_OK;
}

int dt_analysis_remeasure(dt_analysis *a, dt_analysis_out *out) {
  if (!a->have_run) return DT_EINVAL;
  out->measure_status = dt_an_measure_lines(a, a->mv1, a->mv2, a->ml1, a->ml2, 1, out->line,
                                      &out->saturated, NULL);
  return out->measure_status;
}

int dt_analysis_no_measure(dt_analysis *a, int off) {
  int was = a->opts.no_measure;
  a->opts.no_measure = off;
  return was;
}

int dt_analysis_no_intervals(dt_analysis *a, int off) {
  int was = a->opts.no_intervals;
  a->opts.no_intervals = off;
  return was;
}

double dt_analysis_time_limit(dt_analysis *a, double seconds) {
  double was = a->opts.time_limit;
  a->opts.time_limit = seconds;
  return was;
}

double dt_analysis_stall(dt_analysis *a, double chi2) {
  double was = a->opts.stall_chi2;
  a->opts.stall_chi2 = chi2;
  return was;
}

double dt_analysis_give_up(dt_analysis *a, double bic) {
  double was = a->opts.give_up_bic;
  a->opts.give_up_bic = bic;
  return was;
}

int dt_analysis_eval(dt_analysis *a, const dt_judgement *j, dt_analysis_out *out, dt_err *e) {
  int st = prepare(a, j, out, e);
  if (st != DT_OK) return st;
  dt_fit_problem p;
  dt_an_fill_problem(a, j, &p);
  /* the joint polynomial: the recorded fit's, else 1 -- never the least-
   * squares polynomial of the data against these components, which bends
   * into any absorption the components do not model (with none, into all
   * of it, hiding it from the first pass) */
  double unit[DT_MAX_CONT] = {1.0};
  const double *coef = p.ncont ? unit : NULL;
  if (p.ncont && j->has_fit && j->fit.ncont == p.ncont) coef = j->fit.cont_coef;
  double chi2 = NAN;
  size_t npix = 0;
  st = dt_fit_chi2(a->fw, &p, j->comp, coef, a->model, &chi2, &npix);
  if (st != DT_OK) return dt_err_set(e, st, "components", "the model cannot be evaluated");
  dt_fit_result *r = &out->fit;
  memset(r, 0, sizeof *r);
  r->status = DT_OK;
  r->ncomp = j->ncomp;
  memcpy(r->comp, j->comp, j->ncomp * sizeof r->comp[0]);
  if (j->has_fit && j->fit.ncomp == j->ncomp) memcpy(r->err, j->fit.err, sizeof r->err);
  r->ncont = p.ncont;
  if (p.ncont) dt_fit_chi2_coef(a->fw, r->cont_coef);
  size_t k = count_free(j, p.ncont);
  r->chi2 = chi2;
  r->npix = npix;
  r->dof = (long)npix - (long)k;
  r->chi2_red = r->dof > 0 ? chi2 / (double)r->dof : NAN;
  r->bic = chi2 + (double)k * log((double)npix);
  r->covering = j->covering;
  for (size_t c = 0; c < j->ncomp; c++) {
    r->cf[c] = j->covering && j->cf[c] > 0.0 ? j->cf[c] : 1.0;
    if (j->covering && j->has_fit && j->fit.covering && j->fit.ncomp == j->ncomp)
      r->cf_err[c] = j->fit.cf_err[c];
  }
  out->fit_status = DT_OK;
  out->fitted = 0;
  set_continuum(a, r->cont_coef, p.ncont);
  keep_cover(a, j->covering, r->cf, j->ncomp);
  finish(a, j, j->comp, j->ncomp, out);
  return DT_OK;
}

double dt_analysis_lsf_fwhm(const dt_analysis *a) { return a ? a->fwhm_kms : 0.0; }

const char *dt_analysis_lsf_source(const dt_analysis *a) {
  return a && a->have_model && a->mkey.lsf ? a->s->lsf_from : NULL;
}

const double *dt_analysis_wave(const dt_analysis *a) {
  return a->have_run ? a->s->wave + a->i0 : NULL;
}
const double *dt_analysis_flux(const dt_analysis *a) {
  return a->have_run ? a->s->flux + a->i0 : NULL;
}
const double *dt_analysis_sigma(const dt_analysis *a) {
  return a->have_run ? a->s->sigma + a->i0 : NULL;
}
const unsigned char *dt_analysis_mask(const dt_analysis *a) {
  return a->have_run ? a->s->mask + a->i0 : NULL;
}
const unsigned char *dt_analysis_used(const dt_analysis *a) {
  return a->have_run ? a->used : NULL;
}
const double *dt_analysis_velocity(const dt_analysis *a, int line) {
  return a->have_run && (line == 0 || line == 1) ? a->vel[line] : NULL;
}
const double *dt_analysis_continuum(const dt_analysis *a) {
  return a->have_run ? a->cont : NULL;
}
const double *dt_analysis_continuum_err(const dt_analysis *a) {
  return a->have_run ? a->cont_err : NULL;
}
const double *dt_analysis_model(const dt_analysis *a) {
  return a->have_run ? a->model : NULL;
}
const double *dt_analysis_residual(const dt_analysis *a) {
  return a->have_run ? a->resid : NULL;
}
const double *dt_analysis_na_profile(const dt_analysis *a, int line) {
  return a->have_run && (line == 0 || line == 1) ? a->na[line] : NULL;
}
const double *dt_analysis_na_profile_err(const dt_analysis *a, int line) {
  return a->have_run && (line == 0 || line == 1) ? a->na_err[line] : NULL;
}

const double *dt_analysis_component_model(dt_analysis *a, size_t k) {
  if (!a->have_run || k >= a->ncomp) return NULL;
  double *out = a->compmod + k * a->cap;
  if (!a->compmod_ok[k]) {
    if (dt_model_eval(a->m, &a->comp[k], 1, a->tmp, NULL, 0) != DT_OK) return NULL;
    /* a covering factor C: 1 - C + C F (exact for one component, cover.h) */
    double C = a->covering ? a->cf[k] : 1.0;
    for (size_t i = 0; i < a->n; i++) out[i] = a->cont[i] * (1.0 - C + C * a->tmp[i]);
    a->compmod_ok[k] = 1;
  }
  return out;
}

/* ---------- partial covering after a first pass ---------- */

int dt_analysis_cover_refit(dt_analysis *a, dt_judgement *j, dt_analysis_out *out, dt_err *e) {
  dt_action *act = malloc(sizeof *act);
  if (!act) return dt_err_set(e, DT_ENOMEM, NULL, "out of memory");
  dt_action_init(act, DT_ACT_COVERING);
  act->ival = 1;
  int st = dt_judgement_apply(j, act);
  if (st == DT_OK && j->ncomp > 0) {
    st = dt_analysis_run(a, j, out, e);
    if (st == DT_OK) dt_analysis_intervals(a, j, out, 1.0);
    if (st == DT_OK || st == DT_ENOCONV) {
      dt_action_init(act, DT_ACT_FIT);
      act->fit = out->fit;
      dt_judgement_apply(j, act);
    }
  }
  free(act);
  return st;
}

/* ---------- does a refit reproduce a recorded fit ---------- */

int dt_analysis_verify_fit(dt_analysis *a, const dt_judgement *recorded, double tol_sigma,
                           int *agrees, char *why, size_t nwhy, dt_err *e) {
  *agrees = 1;
  if (why && nwhy) why[0] = '\0';
  if (!recorded->has_fit) return DT_OK;
  dt_analysis_out *out = malloc(sizeof *out);
  if (!out) return dt_err_set(e, DT_ENOMEM, NULL, "out of memory");
  /* the fit starts from the recorded components (the recorded optimum for a
   * successful fit), so a reproducible fit returns to it */
  int rc = dt_analysis_run(a, recorded, out, e);
  if (rc != DT_OK && !(out->fitted && rc == out->fit.status)) {
    free(out);
    return rc;
  }
  if (rc != DT_OK) dt_err_clear(e);
  *agrees = dt_fit_check_refit(&recorded->fit, &out->fit, tol_sigma, why, nwhy);
  free(out);
  return DT_OK;
}
