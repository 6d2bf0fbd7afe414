/* doubletty fit: the CSV table -- the run's settings as comment lines,
 * the columns, and the rows of each spectrum (see cmd_fit.c). */
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
#include "doubletty/cover.h"
#include "doubletty/export.h"
#include "doubletty/model.h"
#include "doubletty/num.h"

/* The CSV columns, in order (the first must stay "index" for merge). */
static const char *const COLUMNS[] = {
    "index", "file", "name", "hdu", "row", "object", "doublet", "system", "vsys", "status",
    "ncomp", "component", "v_kms", "v_err", "b_kms", "b_err", "logN", "logN_err",
    "logN_err_lo", "logN_err_hi", "logN_flag",
    "chi2_red", "dof", "bic", "W_mA", "W_err_mA", "W_sig", "logN_aod", "logN_aod_err",
    "W_weak_mA", "W_weak_err_mA", "logN_aod_weak", "logN_aod_weak_err", "saturated",
    "masked_frac", "W_limit_mA", "logN_limit", "suggested", "reason", "ra_deg", "dec_deg", "frame",
    "lsf_fwhm_kms", "lsf_source", "T_K", "T_err_K", "b_turb_kms", "b_turb_err_kms", "cf",
    "cf_err", "cf_flag"};
/* after the reason: position and velocity frame (pos_cells), the
 * line-spread function (lsf_cells), the columns of joint fits
 * (tail_cells), then the covering factor (cover_cells) */
#define NPOSCOLUMNS 3
#define NLSFCOLUMNS 2
#define NTAILCOLUMNS 4
#define NCOVERCOLUMNS 3
#define NCOLUMNS (sizeof COLUMNS / sizeof COLUMNS[0])

static void row_head(run *r, const dt_target_spec *t, const dt_spectrum *s, long row,
                     const char *doublet, const char *system, double vsys,
                     const char *status) {
  dt_csv *w = &r->csv;
  dt_csv_long(w, r->index);
  dt_csv_text(w, t->path);
  char stem[DT_TARGET_PATH_MAX];
  dt_csv_text(w, t->name[0] ? t->name : dt_export_stem(t->path, stem, sizeof stem));
  if (s && s->hdu > 0) dt_csv_long(w, s->hdu);
  else dt_csv_empty(w);
  if (row > 0) dt_csv_long(w, row);
  else dt_csv_empty(w);
  dt_csv_text(w, s ? s->object : "");
  dt_csv_text(w, doublet);
  dt_csv_text(w, system);
  dt_csv_fixed(w, vsys, 3);
  dt_csv_text(w, status);
}

/* ra_deg, dec_deg (ICRS) and the frame of the velocities; empty when unknown. */
static void pos_cells(dt_csv *w, const dt_spectrum *s) {
  if (s && s->has_pos) {
    dt_csv_fixed(w, s->ra, 8);
    dt_csv_fixed(w, s->dec, 8);
  } else {
    dt_csv_empty(w);
    dt_csv_empty(w);
  }
  dt_csv_text(w, s ? dt_frame_name(s->frame) : "");
}

/* T_K, T_err_K, b_turb_kms, b_turb_err_kms of component k of a joint fit
 * under the thermal rule (fr NULL, or another rule: empty). */
static void tail_cells(dt_csv *w, const dt_joint_result *fr, size_t k) {
  int th = fr && fr->btie == DT_JOINT_B_THERMAL && k < fr->ncomp;
  double v[4] = {NAN, NAN, NAN, NAN};
  if (th) {
    v[0] = fr->T[k];
    v[1] = fr->T_err[k];
    v[2] = fr->b_turb[k];
    v[3] = fr->b_turb_err[k];
  }
  for (int i = 0; i < 4; i++) {
    if (isfinite(v[i])) dt_csv_fixed(w, v[i], i < 2 ? 0 : 3);
    else dt_csv_empty(w);
  }
}

/* The line-spread function of the fit: its FWHM at the stronger line and
 * where it came from (pick_resolution); empty for a failed spectrum. */
static void lsf_cells(dt_csv *w, const run *r, int ok) {
  if (ok && r->lsf_fwhm > 0) dt_csv_fixed(w, r->lsf_fwhm, 3);
  else dt_csv_empty(w);
  dt_csv_text(w, ok && r->lsf_label ? r->lsf_label : "");
}

/* cf, cf_err, cf_flag of component k of a covered fit; empty without
 * covering (fr NULL or not covering) or without a component. */
static void cover_cells(dt_csv *w, const dt_doublet *d, const dt_judgement *j,
                        const dt_fit_result *fr, size_t k) {
  if (!fr || !fr->covering || k >= fr->ncomp) {
    for (int i = 0; i < NCOVERCOLUMNS; i++) dt_csv_empty(w);
    return;
  }
  dt_csv_fixed(w, fr->cf[k], 4);
  dt_csv_fixed(w, fr->cf_err[k], 4);
  dt_csv_text(w, dt_cover_flag_name(dt_cover_flag(d, &fr->comp[k], fr->err[k].logN, fr->cf[k], fr->cf_err[k],
                                               dt_cover_lsf_fwhm(j->resolution, j->fwhm_kms))));
}

/* A row of a doublet without a fit: the head with status, empty cells up
 * to the reason, msg as the reason, and the trailing groups empty. */
static void message_row(run *r, const dt_target_spec *t, const dt_spectrum *s, long row,
                        const char *doublet, double vsys, const char *status, const char *msg) {
  row_head(r, t, s, row, doublet, "", vsys, status);
  /* ncomp .. suggested: empty */
  for (size_t k = 10; k + 1 + NPOSCOLUMNS + NLSFCOLUMNS + NTAILCOLUMNS + NCOVERCOLUMNS < NCOLUMNS;
       k++)
    dt_csv_empty(&r->csv);
  dt_csv_text(&r->csv, msg);
  pos_cells(&r->csv, s);
  lsf_cells(&r->csv, r, 0);
  tail_cells(&r->csv, NULL, 0);
  cover_cells(&r->csv, NULL, NULL, NULL, 0);
  dt_csv_end(&r->csv);
}

void fit_row_failed(run *r, const dt_target_spec *t, const dt_spectrum *s, long row,
                    const char *doublet, double vsys, const dt_err *e) {
  char msg[sizeof e->where + sizeof e->what + 4];
  if (e->where[0]) snprintf(msg, sizeof msg, "%s: %s", e->where, e->what);
  else snprintf(msg, sizeof msg, "%s", e->what[0] ? e->what : dt_status_str(e->code));
  message_row(r, t, s, row, doublet, vsys, "failed", msg);
}

/* The reason column: the first pass's words for the row's system in base, and
 * what a reader of the table must know about the fit (fewer components
 * than asked for, parameters pinned at the limits of their ranges), and for
 * the target why a default system is missing (note). */
static void honest_reason(const run *r, const dt_judgement *j, const dt_autofit_out *o,
                          const char *base, const char *note, char *buf, size_t n) {
  size_t len = (size_t)snprintf(buf, n, "%s", base);
  const config *c = r->cfg;
  if (c->ncomp > 0 && j->ncomp != (size_t)c->ncomp && len < n)
    len += (size_t)snprintf(buf + len, n - len, "%sasked for %d components but fitted %zu",
                            len ? "; " : "", c->ncomp, j->ncomp);
  int bound = 0;
  for (size_t k = 0; k < j->ncomp; k++) bound |= o->an.fit_info.at_bound[k] != 0;
  if (bound && len < n)
    len += (size_t)snprintf(buf + len, n - len, "%sparameters at the limit of their range",
                            len ? "; " : "");
  if (note && note[0] && len < n) len += (size_t)snprintf(buf + len, n - len, "%s%s", len ? "; " : "", note);
  char warn[160];
  if (dt_analysis_warning(&o->an, warn, sizeof warn) && len < n)
    snprintf(buf + len, n - len, "%s%s", len ? "; " : "", warn);
}

/* The rows of one spectrum: one per component, in the fit's order, each
 * with its system, then one for each system without components (its
 * measurement over its range and its limit).  ncomp, chi2_red, dof and bic
 * are those of the spectrum's joint fit; W .. reason those of the row's
 * system. */
void fit_row_result(run *r, const dt_target_spec *t, const dt_spectrum *s, long row,
                    const dt_judgement *j, const dt_autofit_out *o, int st,
                    const dt_system_set *set, const dt_system_result *res) {
  const dt_analysis_out *an = &o->an;
  const dt_fit_result *fr = &an->fit;
  dt_csv *w = &r->csv;
  char reason[320];
  size_t nrows = j->ncomp;
  for (size_t k = 0; k < set->n; k++) nrows += res[k].ncomp == 0;
  size_t empty_sys = 0;
  for (size_t q = 0; q < nrows; q++) {
    size_t k, sk;
    if (q < j->ncomp) {
      k = q;
      sk = dt_systems_of(set, fr->comp[k].v);
    } else {
      k = (size_t)-1;
      while (res[empty_sys].ncomp) empty_sys++;
      sk = empty_sys++;
    }
    const dt_system_result *sr = &res[sk];
    row_head(r, t, s, row, j->doublet, set->sys[sk].name, j->vsys,
             st == DT_OK ? "ok" : "not-converged");
    dt_csv_long(w, (long)j->ncomp);
    if (k != (size_t)-1) {
      dt_csv_long(w, (long)k + 1);
      dt_csv_fixed(w, fr->comp[k].v, 3);
      dt_csv_fixed(w, fr->err[k].v, 3);
      dt_csv_fixed(w, fr->comp[k].b, 3);
      dt_csv_fixed(w, fr->err[k].b, 3);
      dt_csv_fixed(w, fr->comp[k].logN, 4);
      dt_csv_fixed(w, fr->err[k].logN, 4);
      const dt_profile_interval *pi = &an->logN_int[k];
      if (an->have_intervals && isfinite(pi->lo)) dt_csv_fixed(w, fr->comp[k].logN - pi->lo, 4);
      else dt_csv_empty(w);
      if (an->have_intervals && isfinite(pi->hi)) dt_csv_fixed(w, pi->hi - fr->comp[k].logN, 4);
      else dt_csv_empty(w);
      dt_csv_text(w, an->have_intervals && !pi->incomplete ? dt_profile_flag_name(pi->flag) : "");
    } else {
      for (int e = 0; e < 10; e++) dt_csv_empty(w);
    }
    dt_csv_fixed(w, fr->chi2_red, 4);
    dt_csv_long(w, fr->dof);
    dt_csv_fixed(w, fr->bic, 3);
    const dt_analysis_line *a = &sr->line[0], *b = &sr->line[1];
    dt_csv_fixed(w, 1e3 * a->W, 2);
    dt_csv_fixed(w, 1e3 * a->W_err, 2);
    dt_csv_fixed(w, a->W_sig, 2);
    dt_csv_fixed(w, a->logN_aod, 4);
    dt_csv_fixed(w, a->logN_aod_err, 4);
    dt_csv_fixed(w, 1e3 * b->W, 2);
    dt_csv_fixed(w, 1e3 * b->W_err, 2);
    dt_csv_fixed(w, b->logN_aod, 4);
    dt_csv_fixed(w, b->logN_aod_err, 4);
    dt_csv_text(w, dt_systems_saturated(sr->line) ? "1" : "0");
    dt_csv_fixed(w, a->masked_frac, 3);
    /* the limits are given unless the first pass calls the system detected */
    if (sr->suggested != DT_VERDICT_DETECTED) {
      dt_csv_fixed(w, 1e3 * a->W_limit, 2);
      dt_csv_fixed(w, a->logN_limit, 4);
    } else {
      dt_csv_empty(w);
      dt_csv_empty(w);
    }
    dt_csv_text(w, dt_verdict_name(sr->suggested));
    honest_reason(r, j, o, sr->reason, sk == 0 ? set->note : NULL, reason, sizeof reason);
    dt_csv_text(w, reason);
    pos_cells(w, s);
    lsf_cells(w, r, 1);
    tail_cells(w, NULL, 0);
    cover_cells(w, an->doublet, j, fr, k);
    dt_csv_end(w);
  }
}

/* Is any parameter of component k of a joint fit within 1% of the end of
 * its range (the logistic transforms of joint.h: log N, ln b, ln T)? */
static int joint_at_bound(const dt_joint_result *fr, size_t k) {
  const double nlo = DT_FIT_LOGN_MIN, nhi = DT_FIT_LOGN_MAX, m = 0.01;
  const double blo = log(DT_FIT_B_MIN), bhi = log(DT_FIT_B_MAX);
  for (size_t s = 0; s < fr->nspec; s++) {
    double n = fr->comp[s][k].logN, b = log(fr->comp[s][k].b);
    if (n < nlo + m * (nhi - nlo) || n > nhi - m * (nhi - nlo)) return 1;
    if (fr->btie != DT_JOINT_B_THERMAL && (b < blo + m * (bhi - blo) || b > bhi - m * (bhi - blo)))
      return 1;
  }
  if (fr->btie == DT_JOINT_B_THERMAL) {
    double t = log(fr->T[k]), tlo = log(DT_JOINT_T_MIN), thi = log(DT_JOINT_T_MAX);
    if (t < tlo + m * (thi - tlo) || t > thi - m * (thi - tlo)) return 1;
  }
  return 0;
}

/* The rows of one species of a joint fit: one per component (its values,
 * the joint fit's chi2, dof and BIC, the doublet's detection and, when not
 * detected, its limit; the component's N/sigma in the reason), or one with
 * empty component fields when there is none. */
void fit_row_joint(run *r, const dt_target_spec *t, const dt_spectrum *s, long row,
                   const dt_judgement *j, const dt_joint_out *o, size_t q, int st,
                   const dt_system_set *set, const char *why) {
  const dt_joint_species_out *so = &o->sp[q];
  const dt_joint_result *fr = &o->fit;
  dt_csv *w = &r->csv;
  size_t nrows = so->ncomp ? so->ncomp : 1;
  for (size_t k = 0; k < nrows; k++) {
    int has = k < so->ncomp;
    size_t sk = has ? dt_systems_of(set, so->comp[k].v) : 0;
    row_head(r, t, s, row, so->d ? so->d->name : so->doublet, set->sys[sk].name, j->vsys,
             st == DT_OK ? "ok" : "not-converged");
    dt_csv_long(w, (long)so->ncomp);
    if (has) {
      dt_csv_long(w, (long)k + 1);
      dt_csv_fixed(w, so->comp[k].v, 3);
      dt_csv_fixed(w, so->err[k].v, 3);
      dt_csv_fixed(w, so->comp[k].b, 3);
      dt_csv_fixed(w, so->err[k].b, 3);
      dt_csv_fixed(w, so->comp[k].logN, 4);
      dt_csv_fixed(w, so->err[k].logN, 4);
      for (int e = 0; e < 3; e++) dt_csv_empty(w);  /* no profile intervals */
    } else {
      for (int e = 0; e < 10; e++) dt_csv_empty(w);
    }
    dt_csv_fixed(w, fr->chi2_red, 4);
    dt_csv_long(w, fr->dof);
    dt_csv_fixed(w, fr->bic, 3);
    for (int e = 0; e < 11; e++) dt_csv_empty(w);   /* W_mA .. masked_frac */
    /* the verdict and limits per doublet, as a single fit gives them per
     * system: detected when any of its components is significant */
    int det = so->any_detected;
    if (!det) {
      dt_csv_fixed(w, 1e3 * so->W_limit, 2);
      dt_csv_fixed(w, so->logN_limit, 4);
    } else {
      dt_csv_empty(w);
      dt_csv_empty(w);
    }
    dt_csv_text(w, det ? "detected" : "not-detected");
    char reason[320];
    size_t len = (size_t)snprintf(reason, sizeof reason, "%s", why);
    if (has && len < sizeof reason)
      len += (size_t)snprintf(reason + len, sizeof reason - len, "; N/sigma %.1f%s",
                              so->N_sig[k], so->detected[k] ? "" : " (not significant)");
    if (has && joint_at_bound(fr, k) && len < sizeof reason)
      snprintf(reason + len, sizeof reason - len, "; parameters at the limit of their range");
    dt_csv_text(w, reason);
    pos_cells(w, s);
    lsf_cells(w, r, 1);
    tail_cells(w, has ? fr : NULL, k);
    cover_cells(w, NULL, NULL, NULL, 0);
    dt_csv_end(w);
  }
}

/* A species set aside (not covered, unknown): one row saying why. */
void fit_row_joint_missing(run *r, const dt_target_spec *t, const dt_spectrum *s, long row,
                           const char *name, double vsys, const dt_err *why) {
  char msg[sizeof why->where + sizeof why->what + 48];
  if (why->where[0]) snprintf(msg, sizeof msg, "left out of the joint fit: %s: %s", why->where, why->what);
  else snprintf(msg, sizeof msg, "left out of the joint fit: %s", why->what);
  message_row(r, t, s, row, name, vsys,
              why->code == DT_ERANGE || why->code == DT_EMASKED ? "not-covered" : "failed", msg);
}

/* The run's settings as "# key=value" lines above the header: what was
 * asked for, so that `merge` can refuse shards run differently.  Every
 * setting is written (empty when not given), in a fixed order. */
static void write_settings(dt_csv *w, const config *c) {
  char buf[1024];
  dt_csv_comment(w, "program", "doubletty fit " DT_VERSION);
  snprintf(buf, sizeof buf, "%ld/%ld", c->shard_k, c->shard_n);
  dt_csv_comment(w, "shard", buf);
  dt_csv_comment(w, "doublet", c->doublet ? c->doublet : "");
  /* a plain value as a number (as before), values per doublet as given */
  buf[0] = '\0';
  if (c->have_R) {
    if (strchr(c->R_text, ':')) snprintf(buf, sizeof buf, "%s", c->R_text);
    else dt_num_format(buf, sizeof buf, dt_lsf_per_get(&c->Rper, ""));
  }
  dt_csv_comment(w, "resolution", buf);
  buf[0] = '\0';
  if (c->have_fwhm) {
    if (strchr(c->F_text, ':')) snprintf(buf, sizeof buf, "%s", c->F_text);
    else dt_num_format(buf, sizeof buf, dt_lsf_per_get(&c->Fper, ""));
  }
  dt_csv_comment(w, "fwhm", buf);
  dt_csv_comment(w, "resolution-table", c->rtable ? dt_lsf_table_name(c->rtable) : "");
  buf[0] = '\0';
  if (c->have_vsys) dt_num_format(buf, sizeof buf, c->vsys);
  dt_csv_comment(w, "vsys", buf);
  buf[0] = '\0';
  if (c->have_window) {
    char lo[40], hi[40];
    dt_num_format(lo, sizeof lo, c->vlo);
    dt_num_format(hi, sizeof hi, c->vhi);
    snprintf(buf, sizeof buf, "%s:%s", lo, hi);
  }
  dt_csv_comment(w, "window", buf);
  snprintf(buf, sizeof buf, "%d", c->ncomp);
  dt_csv_comment(w, "ncomp", buf);
  size_t len = 0;
  buf[0] = '\0';
  for (size_t k = 0; k < c->nseed && len + 48 < sizeof buf; k++) {
    if (k) buf[len++] = ',';
    dt_num_format(buf + len, sizeof buf - len, c->seed_v[k]);
    len = strlen(buf);
  }
  dt_csv_comment(w, "seed-v", buf);
  buf[0] = '\0';
  if (c->have_order) snprintf(buf, sizeof buf, "%d", c->cont_order);
  dt_csv_comment(w, "continuum-order", buf);
  snprintf(buf, sizeof buf, "%d", c->joint_cont);
  dt_csv_comment(w, "joint-continuum", buf);
  dt_num_format(buf, sizeof buf, c->limit_nsigma);
  dt_csv_comment(w, "limit-sigma", buf);
  dt_num_format(buf, sizeof buf, c->limit_b);
  dt_csv_comment(w, "limit-b", buf);
  dt_csv_comment(w, "intervals", c->cov_only ? "covariance" : c->calibrated ? "calibrated" : "profile");
  dt_csv_comment(w, "covering", c->covering ? "yes" : "");
  dt_csv_comment(w, "atomic", c->atomic_file ? c->atomic_file : "");
  if (c->hyperfine) /* only when asked for: without it the header is as before */
    dt_csv_comment(w, "hyperfine", c->hfs_file ? c->hfs_file : "yes");
  snprintf(buf, sizeof buf, "%ld", c->row);
  dt_csv_comment(w, "row", c->row ? buf : "");
  snprintf(buf, sizeof buf, "%s:%s:%s:%s", c->ropts.wave_col ? c->ropts.wave_col : "",
           c->ropts.flux_col ? c->ropts.flux_col : "", c->ropts.err_col ? c->ropts.err_col : "",
           c->ropts.mask_col ? c->ropts.mask_col : "");
  dt_csv_comment(w, "columns", buf);
  dt_csv_comment(w, "air", c->air ? "yes" : "");
  dt_csv_comment(w, "frame", dt_frame_name(c->ropts.out_frame ? c->ropts.out_frame : DT_FRAME_BARYCENT));
  dt_csv_comment(w, "in-frame", dt_frame_name(c->ropts.in_frame));
  buf[0] = '\0';
  if (c->ropts.has_site)
    dt_num_snprintf(buf, sizeof buf, "%.6f,%.6f,%.1f", c->ropts.site_lon, c->ropts.site_lat, c->ropts.site_height);
  dt_csv_comment(w, "site", buf);
  buf[0] = '\0';
  if (c->systems.has_target) {
    char lo[40], hi[40];
    dt_num_format(lo, sizeof lo, c->systems.target_vlo);
    dt_num_format(hi, sizeof hi, c->systems.target_vhi);
    snprintf(buf, sizeof buf, "%s:%s", lo, hi);
  }
  dt_csv_comment(w, "target-window", buf);
  buf[0] = '\0';
  if (c->have_mw) dt_num_format(buf, sizeof buf, c->systems.mw_half);
  dt_csv_comment(w, "milky-way", buf);
  dt_system_set us;
  memset(&us, 0, sizeof us);
  us.n = c->systems.nextra;
  memcpy(us.sys, c->systems.extra, us.n * sizeof us.sys[0]);
  dt_systems_format(&us, buf, sizeof buf);
  dt_csv_comment(w, "systems", buf);
  dt_csv_comment(w, "joint", c->joint ? "yes" : "");
  dt_csv_comment(w, "b-tie", c->joint ? dt_joint_btie_name(c->btie) : "");
}

void fit_write_header(dt_csv *w, const config *c) {
  write_settings(w, c);
  for (size_t k = 0; k < NCOLUMNS; k++) dt_csv_text(w, COLUMNS[k]);
  dt_csv_end(w);
}

