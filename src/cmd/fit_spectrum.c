/* doubletty fit: the first pass of one spectrum -- its settings
 * (resolution, window, systems), one doublet at a time or all of them
 * jointly -- and its rows (fit_rows.c). */
#include <errno.h>
#include <getopt.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <strings.h>
#include <time.h>
#include <sys/stat.h>
#include <unistd.h>

#include "fit_int.h"
#include "doubletty/elements.h"
#include "doubletty/model.h"
#include "doubletty/num.h"

/* A --window must hold enough pixels to fit a line in; otherwise the core
 * would report the window as masked, which misleads. */
#define FIT_MIN_WINDOW_PIX 10

/* Resolution of doublet d (lsf.h, first found): the command line's value
 * for it, else --resolution-table, else the list's, else the file's widths
 * per pixel, else its header.  *constant: a single value, over any widths
 * per pixel of the spectrum; *label: where it came from.  With widths per
 * pixel the judgement keeps R at the stronger line (or the header's) as
 * its nominal value. */
static int pick_resolution(const config *c, const dt_target_spec *t, const dt_spectrum *s,
                           const dt_doublet *d, dt_judgement *j, int *constant,
                           const char **label, dt_err *e) {
  double R = dt_lsf_per_get(&c->Rper, d->name), F = dt_lsf_per_get(&c->Fper, d->name), tR, tF;
  dt_target_resolution(t, d->name, &tR, &tF);
  j->resolution = 0;
  j->fwhm_kms = 0;
  *constant = 1;
  *label = "option";
  if (R > 0) j->resolution = R;
  else if (F > 0) j->fwhm_kms = F;
  else if (!c->rtable && (tR > 0 || tF > 0)) {
    j->resolution = tR;
    j->fwhm_kms = tR > 0 ? 0 : tF;
    *label = "list";
  } else if (s->lsf_fwhm_kms) {
    *constant = 0;
    *label = s->lsf_from;
    size_t ic = dt_spectrum_index(s, dt_wavelength(0.0, d->line[0].lambda0, j->vsys));
    double fw = ic < s->n ? s->lsf_fwhm_kms[ic] : NAN;
    j->resolution = isfinite(fw) && fw > 0 ? DT_C_KMS / fw : s->resolution;
  } else if (s->resolution > 0) {
    j->resolution = s->resolution;
    *label = "header";
  } else
    return dt_err_set(e, DT_EINVAL, NULL,
                      "no resolving power in the file: give --resolution R, --fwhm KMS or "
                      "--resolution-table FILE");
  return DT_OK;
}

/* The judgement of a first pass of doublet d at vsys: the window (option,
 * else the list's), the continuum order, the resolution (pick_resolution). */
static int setup_judgement(const config *c, const dt_target_spec *t, const dt_spectrum *s,
                           const dt_doublet *d, double vsys, dt_judgement *j, int *constant,
                           const char **label, dt_err *e) {
  snprintf(j->doublet, sizeof j->doublet, "%s", d->name);
  j->vsys = vsys;
  if (c->have_window) {
    j->vlo = c->vlo;
    j->vhi = c->vhi;
  } else if (t->has_window) {
    j->vlo = t->vlo;
    j->vhi = t->vhi;
  }
  if (c->have_order) j->cont_order = c->cont_order;
  return pick_resolution(c, t, s, d, j, constant, label, e);
}

/* Both lines of the doublet at vsys must fall inside the data. */
static int check_coverage(const dt_spectrum *s, const dt_doublet *d, double vsys,
                          dt_err *e) {
  double lo = s->wave[0], hi = s->wave[s->n - 1];
  for (int l = 0; l < 2; l++) {
    double lam = dt_wavelength(0.0, d->line[l].lambda0, vsys);
    if (lam < lo || lam > hi)
      return dt_err_set(e, DT_ERANGE, NULL,
                        "%s (%.2f A at vsys %g km/s) lies outside the data (%.2f-%.2f A)",
                        d->line[l].label, lam, vsys, lo, hi);
  }
  return DT_OK;
}

static int check_window(const config *c, const dt_target_spec *t, const dt_judgement *j,
                        const dt_spectrum *s, dt_err *e) {
  if (!c->have_window && !t->has_window) return DT_OK;
  double pix = dt_spectrum_pixel_kms(s), npix = (j->vhi - j->vlo) / pix;
  if (pix > 0 && npix < FIT_MIN_WINDOW_PIX)
    return dt_err_set(e, DT_EINVAL, NULL,
                      "the velocity window %g:%g km/s spans %.1f pixels of %.1f km/s: too "
                      "narrow to fit a line (at least %d pixels); widen %s",
                      j->vlo, j->vhi, npix, pix, FIT_MIN_WINDOW_PIX,
                      c->have_window ? "--window" : "the list's window=");
  return DT_OK;
}

/* The systems of a spectrum: the command line's target range and
 * Milky-Way width over the list's, the command line's systems then the
 * list line's; the window widened to cover them unless one was given. */
static int setup_systems(const config *c, const dt_target_spec *t, const dt_spectrum *s,
                         const dt_doublet *d, dt_judgement *j, dt_system_set *set, dt_err *e) {
  dt_system_opts so = c->systems;
  if (!so.has_target && t->systems.has_target) {
    so.has_target = 1;
    so.target_vlo = t->systems.target_vlo;
    so.target_vhi = t->systems.target_vhi;
  }
  for (size_t k = 0; k < t->systems.nextra; k++) {
    int st = dt_system_opts_add(&so, &t->systems.extra[k], e);
    if (st != DT_OK) return st;
  }
  double fw = j->resolution > 0 ? DT_C_KMS / j->resolution : j->fwhm_kms;
  return dt_systems_setup(&so, j->vsys, s, d, fw, c->have_window || t->has_window, &j->vlo,
                          &j->vhi, set, e);
}

/* The first pass's options of the run: components asked for and seeds. */
static void autofit_opts_of(const config *c, dt_autofit_opts *fo) {
  dt_autofit_opts_init(fo);
  fo->ncomp = c->ncomp;
  fo->nseed = c->nseed;
  for (size_t k = 0; k < c->nseed; k++) fo->seed_v[k] = c->seed_v[k];
}

/* Row row of the input t (its file f, loaded once), read with the run's
 * options and the list line's own (air, position, frame). */
static int read_target(const config *c, const dt_target_spec *t, const dt_spectrum_file *f,
                       long row, dt_spectrum **s, dt_err *e) {
  dt_read_opts ro = c->ropts;
  ro.row = row;
  if (t->air) ro.air = 1;
  if (t->has_pos) ro.has_pos = 1, ro.ra = t->ra, ro.dec = t->dec;
  if (t->frame != DT_FRAME_UNSET) ro.in_frame = t->frame;
  return dt_spectrum_file_read(f, &ro, s, e);
}

/* An analysis of s: the worker's own, kept from the last spectrum, or a
 * new one (which becomes the worker's when it has none). */
static dt_analysis *analysis_for(run *r, const dt_spectrum *s) {
  if (r->an_slot && *r->an_slot && dt_analysis_rebind(*r->an_slot, s) == DT_OK) return *r->an_slot;
  dt_analysis *an = dt_analysis_alloc(s, r->atomic);
  if (an && r->an_slot && !*r->an_slot) *r->an_slot = an;
  return an;
}

static void analysis_done(run *r, dt_analysis *an) {
  if (!(r->an_slot && *r->an_slot == an)) dt_analysis_free(an);
}

/* Fit one spectrum (one row of a table, or the only one) for one doublet. */
static void fit_one_doublet(run *r, const dt_target_spec *t, const dt_spectrum_file *f, long row,
                            const char *dname) {
  const config *c = r->cfg;
  dt_err e;
  dt_err_clear(&e);
  double vsys = c->have_vsys ? c->vsys : (t->has_vsys ? t->vsys : 0.0);
  dt_spectrum *s = NULL;
  dt_analysis *an = NULL;
  int st = read_target(c, t, f, row, &s, &e);
  const dt_doublet *d = NULL;
  if (st == DT_OK) {
    d = dt_atomic_find(r->atomic, dname);
    if (!d) st = dt_err_set(&e, DT_ENOTFOUND, NULL, "unknown doublet '%s'", dname);
  }
  dt_judgement j;
  dt_judgement_init(&j);
  int lsf_constant = 1;
  r->lsf_label = NULL;
  r->lsf_fwhm = 0;
  if (st == DT_OK) {
    st = setup_judgement(c, t, s, d, vsys, &j, &lsf_constant, &r->lsf_label, &e);
  }
  if (st == DT_OK) st = check_coverage(s, d, vsys, &e);
  if (st == DT_OK) st = check_window(c, t, &j, s, &e);
  dt_system_set set;
  memset(&set, 0, sizeof set);
  if (st == DT_OK) st = setup_systems(c, t, s, d, &j, &set, &e);
  dt_autofit_out o;
  memset(&o, 0, sizeof o);
  if (st == DT_OK) {
    an = analysis_for(r, s);
    if (!an) st = dt_err_set(&e, DT_ENOMEM, NULL, "out of memory");
  }
  if (st == DT_OK) {
    dt_analysis_opts ao;
    dt_analysis_opts_init(&ao);
    ao.limit_nsigma = c->limit_nsigma;
    ao.limit_b = c->limit_b;
    ao.cog = r->cog;
    ao.covariance_only = c->cov_only;
    ao.calibrated = c->calibrated;
    ao.joint_cont = (size_t)c->joint_cont;
    if (c->hyperfine || t->hyperfine) ao.hyperfine = r->hfs;
    j.hyperfine = c->hyperfine || t->hyperfine;
    ao.lsf_constant = lsf_constant;
    dt_analysis_set_opts(an, &ao);
    dt_autofit_opts fo;
    autofit_opts_of(c, &fo);
    st = dt_autofit_run(an, &j, &fo, &o, &e);
    if ((st == DT_OK || st == DT_ENOCONV) &&
        (c->covering || (t->has_covering && t->covering))) {
      /* partial covering: the first pass's components fitted again */
      int cs = dt_analysis_cover_refit(an, &j, &o.an, &e);
      if (cs != DT_OK) st = cs;
    }
  }
  long shown_row = s ? s->row : row;
  if (an) r->lsf_fwhm = dt_analysis_lsf_fwhm(an);
  if (st == DT_OK || st == DT_ENOCONV) {
    dt_system_result res[DT_MAX_SYSTEMS];
    dt_systems_results(an, &set, &j, &o, st, res);
    if (set.mw_joined) r->mw_joined++;
    fit_row_result(r, t, s, shown_row, &j, &o, st, &set, res);
    r->fitted++;
    if (st == DT_ENOCONV) r->noconv++;
  } else {
    fit_report(r, t->path, shown_row, &e);
    fit_row_failed(r, t, s, shown_row, d ? d->name : dname, vsys, &e);
    r->failed++;
  }
  analysis_done(r, an);
  dt_spectrum_free(s);
}

/* The doublets of an input: --doublet's, else the list line's (both may
 * be comma lists), else Na I.  Returns how many (0 after an error in e). */
static size_t doublet_names(const config *c, const dt_target_spec *t,
                            char names[DT_JOINT_MAX_SPECIES][16], dt_err *e) {
  if (c->ndoub) {
    memcpy(names, c->doub, sizeof c->doub);
    return c->ndoub;
  }
  const char *text = t->doublet[0] ? t->doublet : "NaI";
  size_t n = 0;
  char buf[sizeof t->doublet];
  snprintf(buf, sizeof buf, "%s", text);
  char *save = NULL;
  for (char *tok = strtok_r(buf, ",", &save); tok; tok = strtok_r(NULL, ",", &save)) {
    while (*tok == ' ') tok++;
    if (!*tok) continue;
    if (n == DT_JOINT_MAX_SPECIES) {
      dt_err_set(e, DT_EINVAL, "doublet", "more than %d doublets in '%s'", DT_JOINT_MAX_SPECIES,
                 text);
      return 0;
    }
    int dup = 0;
    for (size_t q = 0; q < n; q++) dup |= strcasecmp(names[q], tok) == 0;
    if (!dup) snprintf(names[n++], 16, "%s", tok);
  }
  if (n == 0) dt_err_set(e, DT_EINVAL, "doublet", "no doublet in '%s'", text);
  return n;
}

/* Fit one spectrum jointly over the doublets names[0..n): the first that
 * the spectrum covers leads (its settings, systems and window), the
 * first pass finds the components in the strongest, the rows come per
 * doublet in the order given. */
static void fit_joint(run *r, const dt_target_spec *t, const dt_spectrum_file *f, long row,
                      char names[DT_JOINT_MAX_SPECIES][16], size_t n) {
  const config *c = r->cfg;
  dt_err e;
  dt_err_clear(&e);
  double vsys = c->have_vsys ? c->vsys : (t->has_vsys ? t->vsys : 0.0);
  int lsf_constant = 1;
  r->lsf_label = NULL;
  r->lsf_fwhm = 0;
  dt_spectrum *s = NULL;
  int st = read_target(c, t, f, row, &s, &e);
  /* the lead: the first known doublet the spectrum covers */
  size_t lead = n;
  dt_err first_e;
  dt_err_clear(&first_e);
  for (size_t q = 0; st == DT_OK && q < n && lead == n; q++) {
    const dt_doublet *d = dt_atomic_find(r->atomic, names[q]);
    dt_err ce;
    if (!d) dt_err_set(&ce, DT_ENOTFOUND, NULL, "unknown doublet '%s'", names[q]);
    else if (check_coverage(s, d, vsys, &ce) == DT_OK) lead = q;
    if (q == 0 && lead != 0) first_e = ce;
  }
  if (st == DT_OK && lead == n)
    st = dt_err_set(&e, DT_ERANGE, NULL, "none of the doublets is covered (%s: %s)", names[0],
                    first_e.what);
  const dt_doublet *d = st == DT_OK ? dt_atomic_find(r->atomic, names[lead]) : NULL;
  dt_judgement j;
  dt_judgement_init(&j);
  if (st == DT_OK) {
    st = setup_judgement(c, t, s, d, vsys, &j, &lsf_constant, &r->lsf_label, &e);
    /* the lead doublet's width at its stronger line (lsf_fwhm_kms) */
    r->lsf_fwhm = j.resolution > 0 ? DT_C_KMS / j.resolution : j.fwhm_kms;
  }
  if (st == DT_OK) st = check_window(c, t, &j, s, &e);
  dt_system_set set;
  memset(&set, 0, sizeof set);
  if (st == DT_OK) st = setup_systems(c, t, s, d, &j, &set, &e);
  dt_joint_analysis *ja = NULL;
  dt_joint_out *o = NULL;
  size_t strongest = 0;
  const char *linked[DT_JOINT_MAX_SPECIES];
  size_t nl = 0;
  for (size_t q = 0; q < n; q++)
    if (q != lead) linked[nl++] = names[q];
  if (st == DT_OK) {
    ja = dt_joint_analysis_alloc(s, r->atomic);
    o = malloc(sizeof *o);
    if (!ja || !o) st = dt_err_set(&e, DT_ENOMEM, NULL, "out of memory");
  }
  if (st == DT_OK) {
    dt_joint_opts jo;
    dt_joint_opts_init(&jo);
    jo.an.limit_nsigma = c->limit_nsigma;
    jo.an.limit_b = c->limit_b;
    jo.an.cog = r->cog;
    jo.an.covariance_only = c->cov_only;
    jo.an.calibrated = c->calibrated;
    if (c->hyperfine || t->hyperfine) jo.an.hyperfine = r->hfs;
    j.hyperfine = c->hyperfine || t->hyperfine;
    jo.an.lsf_constant = lsf_constant;
    /* each doublet's own resolution (--resolution NaI:4800,CaII:3600, the
     * list's R=, the file's widths at its lines) */
    for (size_t q = 0; q < n && jo.nres < DT_JOINT_MAX_SPECIES; q++) {
      const dt_doublet *dq = dt_atomic_find(r->atomic, names[q]);
      dt_judgement *rj = malloc(sizeof *rj);
      int cq;
      const char *lq;
      dt_err eq;
      if (dq && rj) {
        *rj = j;
        if (pick_resolution(c, t, s, dq, rj, &cq, &lq, &eq) == DT_OK) {
          snprintf(jo.res[jo.nres].doublet, sizeof jo.res[0].doublet, "%s", dq->name);
          jo.res[jo.nres].resolution = rj->resolution;
          jo.res[jo.nres].fwhm_kms = rj->fwhm_kms;
          jo.nres++;
        }
      }
      free(rj);
    }
    dt_joint_analysis_set_opts(ja, &jo);
    dt_autofit_opts fo;
    autofit_opts_of(c, &fo);
    st = dt_joint_autofit_run(ja, &j, linked, nl, c->btie, &fo, 1, o, &strongest, &e);
  }
  long shown_row = s ? s->row : row;
  if (st == DT_OK || st == DT_ENOCONV) {
    char why[200], fitted[120] = "";
    for (size_t i = 0; i < o->nspec; i++)
      if (o->sp[i].fit_index >= 0) {
        size_t len = strlen(fitted);
        snprintf(fitted + len, sizeof fitted - len, "%s%s", len ? "+" : "", o->sp[i].d->name);
      }
    snprintf(why, sizeof why, "joint fit of %s (b %s); components from %s", fitted,
             dt_joint_btie_name(c->btie),
             o->sp[strongest].d ? o->sp[strongest].d->name : o->sp[strongest].doublet);
    if (set.mw_joined) r->mw_joined++;
    /* rows in the order the doublets were given (o->sp: the lead first) */
    for (size_t q = 0; q < n; q++) {
      size_t i = 0;
      if (q != lead) /* as given to the analysis (which skips a name given twice) */
        for (i = 1; i < o->nspec && strcmp(o->sp[i].doublet, names[q]); i++) {}
      if (i >= o->nspec) continue;
      const dt_joint_species_out *so = &o->sp[i];
      if (so->status == DT_OK && so->fit_index >= 0)
        fit_row_joint(r, t, s, shown_row, &j, o, i, st, &set, why);
      else
        fit_row_joint_missing(r, t, s, shown_row, so->d ? so->d->name : names[q], vsys, &so->why);
    }
    r->fitted++;
    if (st == DT_ENOCONV) r->noconv++;
  } else {
    fit_report(r, t->path, shown_row, &e);
    for (size_t q = 0; q < n; q++) {
      const dt_doublet *dq = dt_atomic_find(r->atomic, names[q]);
      fit_row_failed(r, t, s, shown_row, dq ? dq->name : names[q], vsys, &e);
    }
    r->failed++;
  }
  free(o);
  dt_joint_analysis_free(ja);
  dt_spectrum_free(s);
}

/* Fit one spectrum: jointly, or each doublet on its own. */
static void fit_one(run *r, const dt_target_spec *t, const dt_spectrum_file *f, long row) {
  const config *c = r->cfg;
  char names[DT_JOINT_MAX_SPECIES][16];
  dt_err e;
  dt_err_clear(&e);
  size_t n = doublet_names(c, t, names, &e);
  if (n == 0) {
    fit_report(r, t->path, row, &e);
    fit_row_failed(r, t, NULL, row, t->doublet, c->have_vsys ? c->vsys : t->vsys, &e);
    r->failed++;
    return;
  }
  if (c->joint) {
    fit_joint(r, t, f, row, names, n);
    return;
  }
  /* counted once per spectrum: fitted when every doublet was, failed
   * when any failed */
  long fitted = r->fitted, failed = r->failed, noconv = r->noconv, mw = r->mw_joined;
  for (size_t q = 0; q < n; q++) fit_one_doublet(r, t, f, row, names[q]);
  if (n > 1) {
    int anyfail = r->failed > failed;
    r->failed = failed + anyfail;
    r->fitted = fitted + !anyfail;
    r->noconv = noconv + (r->noconv > noconv);
    r->mw_joined = mw + (r->mw_joined > mw);
  }
}

/* One input: every row of a multi-row table (or --row), else the spectrum.
 * Its file is read from the disk once, for the count and every row. */
void fit_input(run *r, const dt_target_spec *t) {
  const config *c = r->cfg;
  long row = c->row > 0 ? c->row : t->row;
  long count = 1;
  dt_err e;
  dt_spectrum_file *f = NULL;
  int st = dt_spectrum_file_load(t->path, &f, &e);
  if (st == DT_OK && row <= 0) st = dt_spectrum_file_count(f, &c->ropts, &count, &e);
  if (st != DT_OK) {
    const char *dname = c->doublet ? c->doublet : (t->doublet[0] ? t->doublet : "NaI");
    double vsys = c->have_vsys ? c->vsys : (t->has_vsys ? t->vsys : 0.0);
    fit_report(r, t->path, 0, &e);
    fit_row_failed(r, t, NULL, 0, dname, vsys, &e);
    r->failed++;
  } else if (row > 0) {
    fit_one(r, t, f, row);
  } else if (count <= 1) {
    fit_one(r, t, f, 0);
  } else {
    for (long k = 1; k <= count; k++) fit_one(r, t, f, k);
  }
  dt_spectrum_file_free(f);
}
