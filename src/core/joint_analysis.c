/* The joint analysis of one spectrum over several doublets: the glue
 * between a judgement, the linked doublets and the joint fitter (joint.h).
 *
 * Stages of a run:
 *   species    the judgement's doublet first, then each linked name once;
 *   prepare    per species a dt_analysis (analysis.h) with the judgement's
 *              settings under that doublet's name and no components: the
 *              same pixel selection, fit mask and continuum as the
 *              single-doublet analysis, plus its upper limits; a species
 *              the spectrum does not cover is set aside with the reason;
 *   start      log N of each linked species from a fit of that species
 *              alone with v and b held at the judgement's components;
 *   fit        one doublet model per species on its pixels (kept while its
 *              settings stay the same), the joint fit, and each species'
 *              model, values, errors and detection flags.
 * The continuum windows of a judgement are wavelengths: they serve the
 * species whose continuum region (selection widened by the automatic
 * continuum's margin) they fall in; a species none falls in gets the
 * automatic continuum. */
#include "doubletty/joint.h"

#include <ctype.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "doubletty/elements.h"
#include "doubletty/hyperfine.h"
#include "doubletty/lsf.h"

typedef struct model_key {
  const dt_doublet *d;
  double vsys, resolution, fwhm, tau_cut;
  int oversample;
  const double *wave;
  size_t n;
  const dt_hyperfine *hfs;
  const double *lsf; /* widths per pixel (lsf.h); NULL: resolution/fwhm */
} model_key;

typedef struct species_slot {
  dt_analysis *an;
  dt_analysis_out aout;
  dt_model *m;
  model_key key;
  int have_model;
  size_t cap;
  double *model;
  unsigned char *mask;
} species_slot;

struct dt_joint_analysis {
  const dt_spectrum *s;
  const dt_atomic *t;
  dt_joint_opts opts;
  species_slot slot[DT_JOINT_MAX_SPECIES];
  dt_joint_workspace *jw;
  size_t jw_pix;
  dt_joint_species sp[DT_JOINT_MAX_SPECIES];
  dt_joint_problem prob;
};

void dt_joint_opts_init(dt_joint_opts *o) {
  memset(o, 0, sizeof *o);
  dt_analysis_opts_init(&o->an);
  o->detect_sigma = 3.0;
}

dt_joint_analysis *dt_joint_analysis_alloc(const dt_spectrum *s, const dt_atomic *t) {
  if (!s || !t) return NULL;
  dt_joint_analysis *ja = calloc(1, sizeof *ja);
  if (!ja) return NULL;
  ja->s = s;
  ja->t = t;
  dt_joint_opts_init(&ja->opts);
  return ja;
}

void dt_joint_analysis_free(dt_joint_analysis *ja) {
  if (!ja) return;
  for (size_t i = 0; i < DT_JOINT_MAX_SPECIES; i++) {
    species_slot *sl = &ja->slot[i];
    dt_analysis_free(sl->an);
    dt_model_free(sl->m);
    free(sl->model);
    free(sl->mask);
  }
  dt_joint_free(ja->jw);
  free(ja);
}

void dt_joint_analysis_set_opts(dt_joint_analysis *ja, const dt_joint_opts *o) {
  if (o) ja->opts = *o;
  else dt_joint_opts_init(&ja->opts);
  if (!(ja->opts.detect_sigma > 0)) ja->opts.detect_sigma = 3.0;
  for (size_t i = 0; i < DT_JOINT_MAX_SPECIES; i++) {
    ja->slot[i].have_model = 0;
    if (ja->slot[i].an) {
      dt_analysis_opts ao = ja->opts.an;
      ao.joint_cont = 0;
      dt_analysis_set_opts(ja->slot[i].an, &ao);
    }
  }
}

static int same_name(const char *a, const char *b) {
  for (;;) {
    while (*a == ' ') a++;
    while (*b == ' ') b++;
    if (tolower((unsigned char)*a) != tolower((unsigned char)*b)) return 0;
    if (!*a) return 1;
    a++;
    b++;
  }
}

/* species: j's doublet, then the linked names not yet listed. */
static int list_species(const dt_judgement *j, const char *const *linked, size_t nlinked,
                        dt_joint_out *out, dt_err *e) {
  snprintf(out->sp[0].doublet, sizeof out->sp[0].doublet, "%s", j->doublet);
  out->nspec = 1;
  for (size_t i = 0; i < nlinked; i++) {
    if (!linked || !linked[i] || !linked[i][0])
      return dt_err_set(e, DT_EINVAL, "linked doublets", "an empty doublet name");
    int dup = 0;
    for (size_t s = 0; s < out->nspec; s++) dup |= same_name(out->sp[s].doublet, linked[i]);
    if (dup) continue;
    if (out->nspec == DT_JOINT_MAX_SPECIES)
      return dt_err_set(e, DT_EINVAL, "linked doublets", "more than %d species",
                        DT_JOINT_MAX_SPECIES);
    snprintf(out->sp[out->nspec].doublet, sizeof out->sp[0].doublet, "%s", linked[i]);
    out->nspec++;
  }
  return DT_OK;
}

/* The resolution of doublet d: its own from the options, else j's. */
static void species_resolution(const dt_joint_analysis *ja, const dt_judgement *j,
                               const dt_doublet *d, double *R, double *fwhm) {
  *R = j->resolution;
  *fwhm = j->fwhm_kms;
  for (size_t i = 0; i < ja->opts.nres && i < DT_JOINT_MAX_SPECIES; i++)
    if (!strcmp(ja->opts.res[i].doublet, d->name) &&
        (ja->opts.res[i].resolution > 0 || ja->opts.res[i].fwhm_kms > 0)) {
      *R = ja->opts.res[i].resolution > 0 ? ja->opts.res[i].resolution : 0;
      *fwhm = *R > 0 ? 0 : ja->opts.res[i].fwhm_kms;
      return;
    }
}

/* The judgement as species s sees it: its doublet and resolution, no
 * components, the continuum windows that lie in its continuum region. */
static void species_judgement(const dt_joint_analysis *ja, const dt_judgement *j,
                              const dt_doublet *d, int own, dt_judgement *sj) {
  *sj = *j;
  snprintf(sj->doublet, sizeof sj->doublet, "%s", d->name);
  species_resolution(ja, j, d, &sj->resolution, &sj->fwhm_kms);
  sj->ncomp = 0;
  sj->has_fit = 0;
  memset(sj->frozen, 0, sizeof sj->frozen);
  if (own) return;
  double margin = ja->opts.an.cont_margin_kms > 0 ? ja->opts.an.cont_margin_kms : 0;
  double lo = INFINITY, hi = -INFINITY;
  for (int l = 0; l < 2; l++) {
    double a = dt_wavelength(j->vlo - margin, d->line[l].lambda0, j->vsys);
    double b = dt_wavelength(j->vhi + margin, d->line[l].lambda0, j->vsys);
    if (a < lo) lo = a;
    if (b > hi) hi = b;
  }
  size_t n = 0;
  for (size_t w = 0; w < j->nwin; w++)
    if (j->win[w].hi > lo && j->win[w].lo < hi) sj->win[n++] = j->win[w];
  sj->nwin = n;
}

static int ensure_slot(dt_joint_analysis *ja, size_t s, size_t n) {
  species_slot *sl = &ja->slot[s];
  if (!sl->an) {
    sl->an = dt_analysis_alloc(ja->s, ja->t);
    if (!sl->an) return DT_ENOMEM;
    dt_analysis_opts ao = ja->opts.an;
    ao.joint_cont = 0;
    dt_analysis_set_opts(sl->an, &ao);
  }
  if (n > sl->cap) {
    free(sl->model);
    free(sl->mask);
    sl->model = malloc(n * sizeof *sl->model);
    sl->mask = malloc(n);
    if (!sl->model || !sl->mask) {
      free(sl->model);
      free(sl->mask);
      sl->model = NULL;
      sl->mask = NULL;
      sl->cap = 0;
      return DT_ENOMEM;
    }
    sl->cap = n;
  }
  return DT_OK;
}

/* The doublet model of species s on its selected pixels, rebuilt only when
 * its settings change. */
static int ensure_model(dt_joint_analysis *ja, size_t s, const dt_judgement *j,
                        const dt_doublet *d, const double *wave, size_t n, dt_err *e) {
  species_slot *sl = &ja->slot[s];
  model_key k;
  memset(&k, 0, sizeof k);
  k.d = d;
  k.vsys = j->vsys;
  species_resolution(ja, j, d, &k.resolution, &k.fwhm);
  k.tau_cut = ja->opts.an.tau_cut;
  k.oversample = ja->opts.an.oversample;
  k.wave = wave;
  k.n = n;
  k.hfs = j->hyperfine ? ja->opts.an.hyperfine : NULL;
  const dt_spectrum *sp = ja->s;
  if (!ja->opts.an.lsf_constant && sp->lsf_fwhm_kms && wave >= sp->wave &&
      wave < sp->wave + sp->n) {
    /* widths per pixel: each species' lines at their own wavelengths */
    size_t i0 = (size_t)(wave - sp->wave), bad = dt_lsf_first_bad(sp, i0, n);
    if (bad < n)
      return dt_err_set(e, DT_ERANGE, "resolution",
                        "no line-spread width at %.3f A from %.100s (outside the table, or no "
                        "usable value there)",
                        wave[bad], sp->lsf_from);
    k.lsf = sp->lsf_fwhm_kms + i0;
    k.resolution = k.fwhm = 0;
  }
  if (sl->have_model && memcmp(&k, &sl->key, sizeof k) == 0) return DT_OK;
  dt_model_free(sl->m);
  sl->have_model = 0;
  dt_model_config cfg;
  memset(&cfg, 0, sizeof cfg);
  cfg.doublet = d;
  cfg.vsys = j->vsys;
  cfg.resolution = k.resolution;
  cfg.fwhm_kms = k.fwhm;
  cfg.lsf_fwhm_kms = k.lsf;
  cfg.oversample = ja->opts.an.oversample;
  cfg.tau_cut = ja->opts.an.tau_cut;
  for (int l = 0; l < 2; l++) cfg.hfs[l] = dt_hyperfine_find(k.hfs, d, l);
  dt_err me;
  dt_err_clear(&me);
  sl->m = dt_model_alloc(wave, n, &cfg, DT_MAX_COMP, &me);
  if (!sl->m) {
    if (me.code == DT_OK) dt_err_set(&me, DT_ENOMEM, NULL, "out of memory");
    if (e) *e = me;
    return me.code;
  }
  sl->key = k;
  sl->have_model = 1;
  return DT_OK;
}

/* Starting log N of a linked species: its own fit with v and b held at
 * j's components (the first guess 12 where that fit fails). */
static void start_logN(dt_joint_analysis *ja, size_t s, const dt_judgement *j,
                       const dt_judgement *sj0, double *logN) {
  species_slot *sl = &ja->slot[s];
  dt_judgement sj = *sj0;
  sj.ncomp = j->ncomp;
  for (size_t k = 0; k < j->ncomp; k++) {
    sj.comp[k] = j->comp[k];
    sj.comp[k].logN = 12.0;
    sj.frozen[k] = DT_FREEZE_B | DT_FREEZE_V;
    logN[k] = 12.0;
  }
  sj.tie_b = 0;
  int was = dt_analysis_no_intervals(sl->an, 1);
  dt_analysis_out o;
  int st = dt_analysis_run(sl->an, &sj, &o, NULL);
  dt_analysis_no_intervals(sl->an, was);
  if (st != DT_OK) return;
  for (size_t k = 0; k < j->ncomp; k++)
    if (isfinite(o.fit.comp[k].logN)) logN[k] = o.fit.comp[k].logN;
}

/* prepare: species s's selection, continuum and limits (out->sp[s]). */
static int prepare_species(dt_joint_analysis *ja, size_t s, const dt_judgement *j,
                           dt_judgement *sj, dt_joint_out *out) {
  dt_joint_species_out *so = &out->sp[s];
  so->fit_index = -1;
  so->mass_u = NAN;
  so->logN_limit = so->W_limit = NAN;
  so->d = dt_atomic_find(ja->t, so->doublet);
  if (!so->d) {
    so->status = dt_err_set(&so->why, DT_ENOTFOUND, so->doublet, "unknown doublet '%s'",
                            so->doublet);
    return so->status;
  }
  double mass;
  if (dt_element_mass_of(so->d->name, &mass, NULL) == DT_OK) so->mass_u = mass;
  int st = ensure_slot(ja, s, 0);
  if (st) return so->status = dt_err_set(&so->why, st, NULL, "out of memory");
  species_judgement(ja, j, so->d, s == 0, sj);
  species_slot *sl = &ja->slot[s];
  dt_err_clear(&so->why);
  st = dt_analysis_eval(sl->an, sj, &sl->aout, &so->why);
  if (st != DT_OK) return so->status = st;
  so->i0 = sl->aout.i0;
  so->n = sl->aout.n;
  so->logN_limit = sl->aout.line[0].logN_limit;
  so->W_limit = sl->aout.line[0].W_limit;
  st = ensure_slot(ja, s, so->n);
  if (st) return so->status = dt_err_set(&so->why, st, NULL, "out of memory");
  so->status = DT_OK;
  return DT_OK;
}

/* out->sp[s] from the joint result (species index f in the fit). */
static void species_result(dt_joint_analysis *ja, size_t s, size_t f, dt_joint_out *out) {
  dt_joint_species_out *so = &out->sp[s];
  species_slot *sl = &ja->slot[s];
  const dt_joint_result *r = &out->fit;
  so->fit_index = (int)f;
  so->wave = dt_analysis_wave(sl->an);
  so->flux = dt_analysis_flux(sl->an);
  so->sigma = dt_analysis_sigma(sl->an);
  so->cont = dt_analysis_continuum(sl->an);
  so->used = dt_analysis_used(sl->an);
  so->model = sl->model;
  if (dt_joint_eval(&ja->prob, r, f, sl->model) != DT_OK)
    for (size_t i = 0; i < so->n; i++) sl->model[i] = NAN;
  so->npix = r->npix_sp[f];
  so->chi2 = r->chi2_sp[f];
  so->ncomp = r->ncomp;
  so->any_detected = 0;
  for (size_t k = 0; k < r->ncomp; k++) {
    so->comp[k] = r->comp[f][k];
    so->err[k] = r->err[f][k];
    double el = so->err[k].logN;
    so->N_sig[k] = el > 0 && isfinite(el) ? 1.0 / (log(10.0) * el) : 0.0;
    /* a column at the lower end of its range has a flattened transform and
     * a meaningless small error: never a detection */
    int low = so->comp[k].logN < DT_FIT_LOGN_MIN + 0.01 * (DT_FIT_LOGN_MAX - DT_FIT_LOGN_MIN);
    so->detected[k] = r->status == DT_OK && !low && so->N_sig[k] >= ja->opts.detect_sigma;
    so->any_detected |= so->detected[k];
  }
}

static int run_joint(dt_joint_analysis *ja, const dt_judgement *j, const char *const *linked,
                     size_t nlinked, dt_joint_btie btie, const dt_joint_out *start,
                     dt_joint_out *out, dt_err *e);

/* The species of a previous run named like species name, with a fit of
 * ncomp components; NULL when there is none. */
static const dt_joint_species_out *start_species(const dt_joint_out *start, const char *name,
                                                 size_t ncomp) {
  if (!start || start->fit.ncomp != ncomp ||
      (start->fit_status != DT_OK && start->fit_status != DT_ENOCONV))
    return NULL;
  for (size_t q = 0; q < start->nspec; q++) {
    const dt_joint_species_out *so = &start->sp[q];
    if (so->fit_index >= 0 && so->ncomp == ncomp && same_name(so->doublet, name)) return so;
  }
  return NULL;
}

int dt_joint_analysis_run(dt_joint_analysis *ja, const dt_judgement *j,
                          const char *const *linked, size_t nlinked, dt_joint_btie btie,
                          dt_joint_out *out, dt_err *e) {
  return dt_joint_analysis_run_from(ja, j, linked, nlinked, btie, NULL, out, e);
}

int dt_joint_analysis_run_from(dt_joint_analysis *ja, const dt_judgement *j,
                               const char *const *linked, size_t nlinked, dt_joint_btie btie,
                               const dt_joint_out *start, dt_joint_out *out, dt_err *e) {
  dt_err_clear(e);
  /* out may be start: keep what is needed of it first */
  dt_joint_out *prev = NULL;
  if (start) {
    prev = malloc(sizeof *prev);
    if (!prev) return dt_err_set(e, DT_ENOMEM, NULL, "out of memory");
    *prev = *start;
    start = prev;
  }
  int st = run_joint(ja, j, linked, nlinked, btie, start, out, e);
  free(prev);
  return st;
}

static int run_joint(dt_joint_analysis *ja, const dt_judgement *j, const char *const *linked,
                     size_t nlinked, dt_joint_btie btie, const dt_joint_out *start,
                     dt_joint_out *out, dt_err *e) {
  memset(out, 0, sizeof *out);
  out->fit_status = DT_EINVAL;
  if (!ja || !j) return dt_err_set(e, DT_EINVAL, NULL, "no analysis or judgement");
  if (j->ncomp > DT_MAX_COMP)
    return dt_err_set(e, DT_EINVAL, "components", "more than %d components", DT_MAX_COMP);
  int st = list_species(j, linked, nlinked, out, e);
  if (st) return st;

  /* prepare every species; j's own must work, the others may be set aside */
  dt_judgement sj[DT_JOINT_MAX_SPECIES];
  size_t total = 0;
  for (size_t s = 0; s < out->nspec; s++) {
    st = prepare_species(ja, s, j, &sj[s], out);
    if (st != DT_OK && s == 0) {
      if (e) *e = out->sp[0].why;
      return st;
    }
    if (st == DT_ENOMEM) {
      if (e) *e = out->sp[s].why;
      return st;
    }
    if (st == DT_OK) total += out->sp[s].n;
  }
  if (btie == DT_JOINT_B_THERMAL)
    for (size_t s = 0; s < out->nspec; s++)
      if (out->sp[s].status == DT_OK && !isfinite(out->sp[s].mass_u)) {
        char sym[3] = "";
        dt_element_symbol(out->sp[s].d->name, sym);
        return dt_err_set(e, DT_EINVAL, out->sp[s].doublet,
                          "the thermal b rule needs the atomic mass of '%s', and element "
                          "'%s' has none in the table",
                          out->sp[s].d->name, sym);
      }
  if (btie != DT_JOINT_B_SAME && btie != DT_JOINT_B_THERMAL && btie != DT_JOINT_B_FREE)
    return dt_err_set(e, DT_EINVAL, "b rule", "unknown b rule %d", (int)btie);

  /* the joint problem */
  if (!ja->jw || ja->jw_pix < total) {
    dt_joint_free(ja->jw);
    ja->jw = dt_joint_alloc(DT_JOINT_MAX_SPECIES, total, DT_MAX_COMP);
    ja->jw_pix = total;
    if (!ja->jw) {
      ja->jw_pix = 0;
      return dt_err_set(e, DT_ENOMEM, NULL, "out of memory");
    }
  }
  dt_joint_problem *p = &ja->prob;
  memset(p, 0, sizeof *p);
  p->btie = btie;
  p->frozen = j->frozen; /* held values stay (the main doublet's N, v, b) */
  p->ncomp = j->ncomp;
  p->vlo = j->vlo;
  p->vhi = j->vhi;
  p->max_iter = ja->opts.max_iter;
  p->time_limit = ja->opts.time_limit;
  for (size_t k = 0; k < j->ncomp; k++) {
    p->v[k] = j->comp[k].v;
    p->b[k] = j->comp[k].b;
    p->T[k] = 0;
    p->b_turb[k] = -1;
    if (start && start->fit.ncomp == j->ncomp && start->fit.btie == DT_JOINT_B_THERMAL &&
        btie == DT_JOINT_B_THERMAL && isfinite(start->fit.T[k]) &&
        isfinite(start->fit.b_turb[k])) {
      p->T[k] = start->fit.T[k];
      p->b_turb[k] = start->fit.b_turb[k];
    }
  }
  size_t nf = 0;
  size_t fidx[DT_JOINT_MAX_SPECIES];
  for (size_t s = 0; s < out->nspec; s++) {
    dt_joint_species_out *so = &out->sp[s];
    if (so->status != DT_OK) continue;
    species_slot *sl = &ja->slot[s];
    const double *wave = dt_analysis_wave(sl->an);
    st = ensure_model(ja, s, j, so->d, wave, so->n, e);
    if (st) return st;
    double logN[DT_MAX_COMP], bstart[DT_MAX_COMP];
    const dt_joint_species_out *ps = s ? start_species(start, so->doublet, j->ncomp) : NULL;
    for (size_t k = 0; k < j->ncomp; k++) bstart[k] = j->comp[k].b;
    if (s == 0) {
      for (size_t k = 0; k < j->ncomp; k++) logN[k] = j->comp[k].logN;
    } else if (ps) {
      for (size_t k = 0; k < j->ncomp; k++) {
        logN[k] = ps->comp[k].logN;
        if (btie == DT_JOINT_B_FREE) bstart[k] = ps->comp[k].b;
      }
    } else if (j->ncomp) {
      start_logN(ja, s, j, &sj[s], logN);
    }
    const unsigned char *used = dt_analysis_used(sl->an);
    for (size_t i = 0; i < so->n; i++) sl->mask[i] = !used[i];
    dt_joint_species *sp = &ja->sp[nf];
    memset(sp, 0, sizeof *sp);
    sp->model = sl->m;
    sp->flux = dt_analysis_flux(sl->an);
    sp->sigma = dt_analysis_sigma(sl->an);
    sp->mask = sl->mask;
    sp->cont = dt_analysis_continuum(sl->an);
    sp->mass_u = so->mass_u;
    for (size_t k = 0; k < j->ncomp; k++) {
      sp->logN[k] = logN[k];
      sp->b[k] = bstart[k];
    }
    fidx[nf] = s;
    nf++;
  }
  p->nspec = nf;
  p->sp = ja->sp;
  out->nfit = nf;
  st = dt_joint_run(ja->jw, p, &out->fit, e);
  out->fit_status = st;
  if (st != DT_OK && st != DT_ENOCONV) return st;
  for (size_t f = 0; f < nf; f++) species_result(ja, fidx[f], f, out);
  return st;
}

int dt_joint_species_fit(const dt_joint_out *out, size_t q, dt_fit_result *r) {
  memset(r, 0, sizeof *r);
  if (!out || q >= out->nspec || out->sp[q].fit_index < 0) return DT_EINVAL;
  const dt_joint_species_out *so = &out->sp[q];
  const dt_joint_result *f = &out->fit;
  r->status = f->status;
  r->niter = f->niter;
  r->ncomp = so->ncomp;
  memcpy(r->comp, so->comp, so->ncomp * sizeof r->comp[0]);
  memcpy(r->err, so->err, so->ncomp * sizeof r->err[0]);
  r->chi2 = f->chi2;
  r->dof = f->dof;
  r->chi2_red = f->chi2_red;
  r->bic = f->bic;
  r->npix = f->npix;
  return DT_OK;
}

/* ---- the joint first pass ------------------------------------------- */

/* The significance of species s's absorption: the stronger line's W over
 * the judgement's window divided by its error (0 when unmeasured). */
static double significance(dt_joint_analysis *ja, size_t s, const dt_judgement *j) {
  dt_analysis_line l[2];
  if (dt_analysis_measure_range(ja->slot[s].an, j->vlo, j->vhi, l, NULL) != DT_OK) return 0;
  return isfinite(l[0].W_sig) ? l[0].W_sig : 0;
}

/* Velocity of the largest |residual| over the fitted species (relative to
 * the line of the doublet whose window holds it, the stronger first). */
static int worst_residual(const dt_joint_out *out, const dt_judgement *j, double *v) {
  double best = 0;
  int found = 0;
  for (size_t s = 0; s < out->nspec; s++) {
    const dt_joint_species_out *so = &out->sp[s];
    if (so->status != DT_OK || so->fit_index < 0 || !so->model) continue;
    for (size_t i = 0; i < so->n; i++) {
      if (!so->used[i]) continue;
      double r = fabs(so->flux[i] - so->model[i]) / so->sigma[i];
      if (!(r > best)) continue;
      for (int l = 0; l < 2; l++) {
        double vv = dt_velocity(so->wave[i], so->d->line[l].lambda0, j->vsys);
        if (vv >= j->vlo && vv <= j->vhi) {
          best = r;
          *v = vv;
          found = 1;
          break;
        }
      }
    }
  }
  return found;
}

/* j's components from the joint fit: its own doublet's (species 0). */
static void take_components(const dt_joint_out *out, dt_judgement *j) {
  const dt_joint_species_out *so = &out->sp[0];
  j->ncomp = so->ncomp;
  for (size_t k = 0; k < so->ncomp; k++) j->comp[k] = so->comp[k];
  memset(j->frozen, 0, sizeof j->frozen);
  j->has_fit = 0;
}

int dt_joint_autofit_run(dt_joint_analysis *ja, dt_judgement *j, const char *const *linked,
                         size_t nlinked, dt_joint_btie btie, const dt_autofit_opts *opts,
                         int bic_search, dt_joint_out *out, size_t *strongest, dt_err *e) {
  dt_err_clear(e);
  memset(out, 0, sizeof *out);
  if (!ja || !j) return dt_err_set(e, DT_EINVAL, NULL, "no analysis or judgement");
  int st = list_species(j, linked, nlinked, out, e);
  if (st) return st;
  dt_judgement sj[DT_JOINT_MAX_SPECIES];
  size_t best = 0;
  double best_sig = -1;
  for (size_t s = 0; s < out->nspec; s++) {
    st = prepare_species(ja, s, j, &sj[s], out);
    if (st != DT_OK && s == 0) {
      if (e) *e = out->sp[0].why;
      return st;
    }
    if (st != DT_OK) continue;
    double sig = significance(ja, s, j);
    if (sig > best_sig) {
      best_sig = sig;
      best = s;
    }
  }
  if (strongest) *strongest = best;

  /* components in the strongest species */
  dt_autofit_out *ao = malloc(sizeof *ao);
  if (!ao) return dt_err_set(e, DT_ENOMEM, NULL, "out of memory");
  dt_judgement fj = sj[best];
  st = dt_autofit_run(ja->slot[best].an, &fj, opts, ao, e);
  free(ao);
  if (st != DT_OK && st != DT_ENOCONV) return st;

  /* j's components at those velocities; its columns from its own fit with
   * v and b held (the linked species get theirs in the joint run) */
  dt_judgement jj = *j;
  jj.ncomp = fj.ncomp;
  for (size_t k = 0; k < fj.ncomp; k++) jj.comp[k] = fj.comp[k];
  if (best != 0 && jj.ncomp > 0) {
    double logN[DT_MAX_COMP];
    start_logN(ja, 0, &jj, &sj[0], logN);
    for (size_t k = 0; k < jj.ncomp; k++) jj.comp[k].logN = logN[k];
  }
  st = dt_joint_analysis_run(ja, &jj, linked, nlinked, btie, out, e);
  if (st != DT_OK && st != DT_ENOCONV) return st;
  if (strongest) *strongest = best;

  /* grow by the joint BIC */
  size_t maxc = opts && opts->max_comp ? opts->max_comp : DT_AUTOFIT_MAX_COMP;
  if (maxc > DT_MAX_COMP) maxc = DT_MAX_COMP;
  double margin = opts && opts->bic_min > 0 ? opts->bic_min : 10.0;
  if (opts && (opts->ncomp > 0 || opts->nseed > 0)) bic_search = 0;
  while (bic_search && st == DT_OK && jj.ncomp < maxc) {
    double v;
    if (!worst_residual(out, &jj, &v)) break;
    dt_judgement tj = jj;
    take_components(out, &tj);
    tj.comp[tj.ncomp] = (dt_component){12.0, 5.0, v};
    tj.ncomp++;
    dt_joint_out *trial = malloc(sizeof *trial);
    if (!trial) return dt_err_set(e, DT_ENOMEM, NULL, "out of memory");
    int ts = dt_joint_analysis_run(ja, &tj, linked, nlinked, btie, trial, NULL);
    int better = ts == DT_OK && trial->fit.bic < out->fit.bic - margin;
    if (!better) {
      free(trial);
      break;
    }
    jj = tj;
    /* run again (from the trial's values) to leave the analysis and out's
     * arrays in the kept state */
    st = dt_joint_analysis_run_from(ja, &jj, linked, nlinked, btie, trial, out, e);
    free(trial);
  }
  if (st == DT_OK || st == DT_ENOCONV) {
    if (out->sp[0].fit_index >= 0) take_components(out, &jj);
    j->ncomp = jj.ncomp;
    memcpy(j->comp, jj.comp, sizeof j->comp);
    memset(j->frozen, 0, sizeof j->frozen);
    j->has_fit = 0;
  }
  return st;
}
