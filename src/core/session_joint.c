/* Linked species in the vetting session: link, unlink, the b rule, the
 * joint refit, and the analyses that show each linked species' lines.
 *
 * A linked species is one more doublet of the same absorber, fitted with
 * the main doublet's components: one velocity per component for all, b by
 * the judgement's rule, log N per species.  Every change goes through
 * dt_session_apply (check, refit, record, adopt) like any other, so the
 * session file holds the link and each joint fit's values (the fit is the
 * joint fitter's, joint.h, over the spectrum and every species).  Each linked
 * species has its own analysis of the spectrum, evaluated in the state's
 * components, for the inspector's panels. */
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "doubletty/joint.h"
#include "doubletty/model.h"
#include "doubletty/session.h"
#include "session_priv.h"

/* ------------------------------------------------------------ the species */

void dt_session_linked_free(dt_session *ss) {
  dt_joint_analysis_free(ss->jan);
  ss->jan = NULL;
  free(ss->jout);
  ss->jout = NULL;
  ss->jout_ok = 0;
  ss->jmsg[0] = '\0';
  for (size_t i = 0; i < DT_JUDGE_MAX_LINKED; i++) {
    dt_analysis_free(ss->lsp[i].an);
    ss->lsp[i].an = NULL;
    ss->lsp[i].ok = 0;
  }
}

/* The analysis of species k, made on first use. */
static dt_analysis *species_analysis(dt_session *ss, size_t k) {
  dt_session_species *sp = &ss->lsp[k];
  if (!sp->an && ss->loaded) {
    sp->an = dt_analysis_alloc(ss->spec, ss->atomic);
    if (sp->an) {
      dt_analysis_opts ao;
      dt_analysis_opts_init(&ao);
      ao.no_intervals = 1; /* a linked species' intervals come with its joint fit */
      ao.hyperfine = ss->hyperfine;
      ao.lsf_constant = ss->lsf_constant;
      ao.cog = ss->cog;
      dt_analysis_set_opts(sp->an, &ao);
    }
  }
  return sp->an;
}

/* The judgement of species k in state j: its doublet, j's settings and
 * components (velocities), its own log N and b from j's joint fit where
 * there is one, else starting guesses (log N 0.5 dex below the main
 * doublet's, the same b). */
static dt_judgement species_state(const dt_judgement *j, size_t k) {
  dt_judgement s = *j;
  snprintf(s.doublet, sizeof s.doublet, "%s", j->linked[k]);
  s.nlinked = 0;
  memset(s.linked, 0, sizeof s.linked);
  s.has_fit = s.has_joint = 0;
  for (size_t c = 0; c < s.ncomp; c++) {
    if (j->has_joint && isfinite(j->joint.sp[k].logN[c]) && isfinite(j->joint.sp[k].b[c])) {
      s.comp[c].logN = j->joint.sp[k].logN[c];
      s.comp[c].b = j->joint.sp[k].b[c];
    } else {
      s.comp[c].logN = j->comp[c].logN - 0.5;
    }
    s.frozen[c] = 0;
  }
  return s;
}

void dt_session_linked_eval(dt_session *ss, const dt_judgement *j) {
  for (size_t k = 0; k < DT_JUDGE_MAX_LINKED; k++) {
    dt_session_species *sp = &ss->lsp[k];
    sp->ok = 0;
    sp->msg[0] = '\0';
    if (k >= j->nlinked || !ss->loaded) continue;
    dt_analysis *an = species_analysis(ss, k);
    if (!an) {
      snprintf(sp->msg, sizeof sp->msg, "out of memory");
      continue;
    }
    dt_judgement s = species_state(j, k);
    dt_err e;
    dt_err_clear(&e);
    int rc = dt_analysis_eval(an, &s, &sp->out, &e);
    if (rc == DT_OK) sp->ok = 1;
    else snprintf(sp->msg, sizeof sp->msg, "%s: %.160s", j->linked[k], e.what[0] ? e.what : dt_status_str(rc));
  }
}

/* ------------------------------------------------------------ the joint fit */

/* The joint analysis' result as the judgement records it: the main
 * doublet's components (sp[0]) as a fit result, the linked species' log N
 * and b, and T and b_turb of the thermal rule. */
static int joint_take(const dt_judgement *j, const dt_joint_out *out, dt_fit_result *fit, dt_linked_fit *jf,
                      char *msg, size_t n) {
  if (out->nspec != 1 + j->nlinked || out->sp[0].status != DT_OK) return snprintf(msg, n, "joint fit: no result"), DT_EINVAL;
  for (size_t k = 1; k < out->nspec; k++)
    if (out->sp[k].status != DT_OK || out->sp[k].ncomp != j->ncomp) {
      snprintf(msg, n, "joint fit: %s left out (%.200s)", out->sp[k].doublet,
               out->sp[k].why.what[0] ? out->sp[k].why.what : dt_status_str(out->sp[k].status));
      return out->sp[k].status != DT_OK ? out->sp[k].status : DT_EINVAL;
    }
  const dt_joint_result *r = &out->fit;
  if (dt_joint_species_fit(out, 0, fit) != DT_OK) return snprintf(msg, n, "joint fit: no result"), DT_EINVAL;
  dt_linked_fit_clear(jf);
  jf->nspecies = j->nlinked;
  for (size_t k = 0; k < j->nlinked; k++) {
    const dt_joint_species_out *so = &out->sp[k + 1];
    dt_linked_species *sp = &jf->sp[k];
    snprintf(sp->doublet, sizeof sp->doublet, "%s", j->linked[k]);
    for (size_t c = 0; c < j->ncomp; c++) {
      sp->logN[c] = so->comp[c].logN;
      sp->logN_err[c] = so->err[c].logN;
      sp->b[c] = so->comp[c].b;
      sp->b_err[c] = so->err[c].b;
    }
  }
  for (size_t c = 0; j->btie == DT_BTIE_THERMAL && c < j->ncomp; c++) {
    jf->T[c] = r->T[c];
    jf->T_err[c] = r->T_err[c];
    jf->bturb[c] = r->b_turb[c];
    jf->bturb_err[c] = r->b_turb_err[c];
  }
  return DT_OK;
}

/* The joint fit of state j (joint.h): the main doublet's components into
 * *fit, every linked species' values into *jf.  Returns DT_OK or the
 * failure, with msg saying why. */
static int joint_run(dt_session *ss, const dt_judgement *j, dt_fit_result *fit, dt_linked_fit *jf,
                     char *msg, size_t n) {
  if (!ss->jan) {
    ss->jan = dt_joint_analysis_alloc(ss->spec, ss->atomic);
    if (!ss->jan) return snprintf(msg, n, "out of memory"), DT_ENOMEM;
    dt_joint_opts jo;
    dt_joint_opts_init(&jo);
    jo.an.hyperfine = ss->hyperfine;
    jo.an.lsf_constant = ss->lsf_constant;
    jo.an.cog = ss->cog;
    dt_joint_analysis_set_opts(ss->jan, &jo);
  }
  if (!ss->jout && !(ss->jout = malloc(sizeof *ss->jout))) return snprintf(msg, n, "out of memory"), DT_ENOMEM;
  dt_joint_out *out = ss->jout;
  const char *names[DT_JUDGE_MAX_LINKED];
  for (size_t k = 0; k < j->nlinked; k++) names[k] = j->linked[k];
  dt_err e;
  dt_err_clear(&e);
  /* from the last joint fit of this spectrum: a refit after a nudge is one joint fit */
  int rc = dt_joint_analysis_run_from(ss->jan, j, names, j->nlinked, j->btie,
                                      ss->jout_ok ? out : NULL, out, &e);
  ss->jout_ok = rc == DT_OK || rc == DT_ENOCONV;
  if (rc == DT_OK || rc == DT_ENOCONV) { /* a fit that did not converge is recorded as such */
    int t = joint_take(j, out, fit, jf, msg, n);
    if (t != DT_OK) rc = t;
    else if (rc != DT_OK) snprintf(msg, n, "the joint fit did not converge: %.200s", e.what);
  } else {
    snprintf(msg, n, "joint fit: %.250s", e.what[0] ? e.what : dt_status_str(rc));
  }
  return rc;
}

int dt_session_joint_into(dt_session *ss, dt_judgement *j) {
  ss->jmsg[0] = '\0';
  if (j->nlinked == 0 || j->ncomp == 0 || !ss->loaded) return -1;
  ss->nfits++;
  dt_action a;
  dt_action_init(&a, DT_ACT_JOINT_FIT);
  char msg[300] = "";
  int rc = joint_run(ss, j, &a.fit, &a.joint, msg, sizeof msg);
  if ((rc != DT_OK && rc != DT_ENOCONV) || a.fit.ncomp != j->ncomp) {
    dt_session_analyse_state(ss, j, 0); /* shown as it stands */
    snprintf(ss->jmsg, sizeof ss->jmsg, "%s", msg[0] ? msg : "the joint fit failed");
    snprintf(ss->an_msg, sizeof ss->an_msg, "%s", ss->jmsg);
    return -1;
  }
  ss->jmsg[0] = '\0';
  if (dt_judgement_apply(j, &a) != DT_OK) return -1;
  dt_session_analyse_state(ss, j, 0); /* every species shown in the joint values */
  return 0;
}

/* Does joint fit `now` reproduce the recorded joint state j?  1 yes; 0
 * with why naming the first difference. */
static int joint_agrees(const dt_judgement *j, const dt_fit_result *fit, const dt_linked_fit *now,
                        double tol_sigma, char *why, size_t n) {
  if (!dt_fit_check_refit(&j->fit, fit, tol_sigma, why, n)) return 0;
  for (size_t k = 0; k < j->nlinked; k++)
    for (size_t c = 0; c < j->ncomp; c++) {
      const dt_linked_species *a = &j->joint.sp[k], *b = &now->sp[k];
      double tol = tol_sigma * fmax(a->logN_err[c], b->logN_err[c]);
      if (!(fabs(a->logN[c] - b->logN[c]) <= fmax(tol, 1e-6))) {
        snprintf(why, n, "%s log N of component %zu: %.3f recorded, %.3f now", j->linked[k], c + 1,
                 a->logN[c], b->logN[c]);
        return 0;
      }
    }
  return 1;
}

int dt_session_joint_verify(dt_session *ss, const dt_judgement *j, char *why, size_t n) {
  why[0] = '\0';
  dt_judgement again = *j;
  if (dt_session_joint_into(ss, &again)) {
    snprintf(why, n, "the joint refit failed");
    return 0;
  }
  return joint_agrees(j, &again.fit, &again.joint, DT_REFIT_TOL_SIGMA, why, n);
}

int dt_linked_verify(const dt_spectrum *sp, const dt_atomic *at, const dt_judgement *recorded,
                     double tol_sigma, int *agrees, char *why, size_t nwhy, dt_err *e) {
  *agrees = 1;
  if (nwhy) why[0] = '\0';
  if (!recorded->has_joint) return DT_OK;
  dt_joint_analysis *ja = dt_joint_analysis_alloc(sp, at);
  dt_joint_out *out = malloc(sizeof *out);
  if (!ja || !out) {
    dt_joint_analysis_free(ja);
    free(out);
    return dt_err_set(e, DT_ENOMEM, NULL, "out of memory");
  }
  const char *names[DT_JUDGE_MAX_LINKED];
  for (size_t k = 0; k < recorded->nlinked; k++) names[k] = recorded->linked[k];
  int rc = dt_joint_analysis_run(ja, recorded, names, recorded->nlinked, recorded->btie, out, e);
  if (rc == DT_OK || rc == DT_ENOCONV) {
    dt_fit_result fit;
    dt_linked_fit now;
    char msg[300];
    rc = joint_take(recorded, out, &fit, &now, msg, sizeof msg);
    if (rc != DT_OK) dt_err_set(e, rc, NULL, "%s", msg);
    else *agrees = joint_agrees(recorded, &fit, &now, tol_sigma, why, nwhy);
  }
  dt_joint_analysis_free(ja);
  free(out);
  return rc;
}

/* ------------------------------------------------------------ the actions */

static int covers(const dt_spectrum *sp, const dt_doublet *d, double vsys) {
  for (int l = 0; l < 2; l++) {
    double w = dt_wavelength(0, d->line[l].lambda0, vsys);
    if (sp->n == 0 || w < sp->wave[0] || w > sp->wave[sp->n - 1]) return 0;
  }
  return 1;
}

size_t dt_session_linkable(const dt_session *ss, const dt_doublet **out, size_t max) {
  size_t n = 0;
  if (!ss->loaded) return 0;
  const dt_doublet *main = dt_atomic_find(ss->atomic, ss->j.doublet);
  for (size_t i = 0; i < dt_atomic_count(ss->atomic) && n < max; i++) {
    const dt_doublet *d = dt_atomic_get(ss->atomic, i);
    if (d != main && covers(ss->spec, d, ss->j.vsys)) out[n++] = d;
  }
  return n;
}

int dt_session_link(dt_session *ss, const char *name) {
  dt_session_finish_fit(ss);
  if (!ss->loaded) {
    dt_session_say(ss, DT_TONE_WARN, "no data: nothing can be linked");
    return DT_EINVAL;
  }
  const dt_doublet *d = dt_atomic_find(ss->atomic, name);
  int on = dt_judgement_linked_index(&ss->j, d ? d->name : name) < 0;
  if (on && !d) {
    dt_session_say(ss, DT_TONE_WARN, "%s is not in the table of doublets", name);
    return DT_ENOTFOUND;
  }
  if (on && d == dt_atomic_find(ss->atomic, ss->j.doublet)) {
    dt_session_say(ss, DT_TONE_WARN, "%s is the doublet being vetted", d->name);
    return DT_EINVAL;
  }
  if (on && !covers(ss->spec, d, ss->j.vsys)) {
    dt_session_say(ss, DT_TONE_WARN, "the spectrum does not cover the lines of %s", d->name);
    return DT_ERANGE;
  }
  if (on && ss->j.nlinked >= DT_JUDGE_MAX_LINKED) {
    dt_session_say(ss, DT_TONE_WARN, "%d species are linked already: unlink one first", DT_JUDGE_MAX_LINKED);
    return DT_EINVAL;
  }
  dt_action a;
  dt_action_init(&a, DT_ACT_LINK);
  snprintf(a.text, sizeof a.text, "%s", d ? d->name : name);
  a.ival = on;
  int rc = dt_session_apply(ss, &a);
  if (rc != DT_OK) return rc;
  const char *how = !on ? "unlinked" : ss->j.has_joint ? "linked: fitted jointly"
                    : ss->j.ncomp == 0 ? "linked: no component to fit jointly yet" : "linked, not fitted";
  dt_session_say(ss, ss->an_msg[0] ? DT_TONE_WARN : DT_TONE_GOOD, "%s %s%s%.300s", a.text, how,
                 ss->an_msg[0] ? " - " : "", ss->an_msg);
  return rc;
}

int dt_session_btie_next(dt_session *ss) {
  dt_session_finish_fit(ss);
  dt_action a;
  dt_action_init(&a, DT_ACT_BTIE);
  a.ival = (ss->j.btie + 1) % DT_BTIE__COUNT;
  int rc = dt_session_apply(ss, &a);
  if (rc == DT_OK)
    dt_session_say(ss, DT_TONE_GOOD, "b of linked species: %s%s", dt_btie_name(ss->j.btie),
                   ss->j.nlinked ? "" : " (no species linked yet)");
  return rc;
}
