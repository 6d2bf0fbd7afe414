/* The judgement of one spectrum and the actions that change it.
 *
 * dt_judgement_apply is the only way a judgement changes, for the inspector
 * and for the replay of a session file alike.  It validates the action first
 * and changes nothing when the action does not fit the state, so a rejected
 * key press or a damaged session line can never leave a half-changed state. */
#include "doubletty/judge.h"

#include <assert.h>
#include <math.h>
#include <stdio.h>
#include <string.h>

#include "doubletty/status.h"

static const char *const verdict_names[] = {"none", "detected", "not-detected", "unsure",
                                            "unusable"};

const char *dt_verdict_name(dt_verdict v) {
  if ((int)v < 0 || (size_t)v >= sizeof verdict_names / sizeof verdict_names[0]) return "?";
  return verdict_names[v];
}

int dt_verdict_parse(const char *s, dt_verdict *v) {
  if (!s) return DT_EINVAL;
  for (size_t i = 0; i < sizeof verdict_names / sizeof verdict_names[0]; i++)
    if (!strcmp(s, verdict_names[i])) {
      *v = (dt_verdict)i;
      return DT_OK;
    }
  return DT_EINVAL;
}

static const char *const action_names[DT_ACT__COUNT] = {
    [DT_ACT_WINDOW_ADD] = "window-add",   [DT_ACT_WINDOW_REMOVE] = "window-remove",
    [DT_ACT_COMP_ADD] = "comp-add",       [DT_ACT_COMP_REMOVE] = "comp-remove",
    [DT_ACT_COMP_SET] = "comp-set",       [DT_ACT_FREEZE] = "freeze",
    [DT_ACT_TIE_B] = "tie-b",             [DT_ACT_CONT_ORDER] = "cont-order",
    [DT_ACT_DOUBLET] = "doublet",         [DT_ACT_RESOLUTION] = "resolution",
    [DT_ACT_VSYS] = "vsys",               [DT_ACT_VWINDOW] = "vwindow",
    [DT_ACT_FIT] = "fit",                 [DT_ACT_VERDICT] = "verdict",
    [DT_ACT_NOTE] = "note",               [DT_ACT_RESTORE] = "restore", [DT_ACT_AUTOFIT] = "autofit",
    [DT_ACT_LINK] = "link",               [DT_ACT_BTIE] = "b-tie",
    [DT_ACT_JOINT_FIT] = "joint-fit",
    [DT_ACT_COVERING] = "covering",
};

static const char *const btie_names[DT_BTIE__COUNT] = {"same", "thermal", "free"};

const char *dt_btie_name(dt_btie m) {
  if ((int)m < 0 || m >= DT_BTIE__COUNT) return "?";
  return btie_names[m];
}

int dt_btie_parse(const char *s, dt_btie *m) {
  if (!s) return DT_EINVAL;
  for (int i = 0; i < DT_BTIE__COUNT; i++)
    if (!strcmp(s, btie_names[i])) {
      *m = (dt_btie)i;
      return DT_OK;
    }
  return DT_EINVAL;
}

const char *dt_action_name(dt_action_kind k) {
  if ((int)k < 0 || k >= DT_ACT__COUNT) return "?";
  return action_names[k];
}

int dt_action_kind_parse(const char *s, dt_action_kind *k) {
  if (!s) return DT_EINVAL;
  for (int i = 0; i < DT_ACT__COUNT; i++)
    if (!strcmp(s, action_names[i])) {
      *k = (dt_action_kind)i;
      return DT_OK;
    }
  return DT_EINVAL;
}

void dt_action_init(dt_action *a, dt_action_kind k) {
  memset(a, 0, sizeof *a);
  a->kind = k;
  a->state = NULL;
}

void dt_judgement_init(dt_judgement *j) {
  memset(j, 0, sizeof *j);
  strcpy(j->doublet, "NaI");
  j->vsys = 0.0;
  j->resolution = 3000.0;
  j->fwhm_kms = 0.0;
  j->vlo = -600.0;
  j->vhi = 600.0;
  j->cont_order = 2;
  j->verdict = DT_VERDICT_NONE;
  dt_linked_fit_clear(&j->joint);
}

const char *dt_freeze_str(unsigned bits, char buf[4]) {
  size_t n = 0;
  if (bits & DT_FREEZE_N) buf[n++] = 'N';
  if (bits & DT_FREEZE_B) buf[n++] = 'b';
  if (bits & DT_FREEZE_V) buf[n++] = 'v';
  buf[n] = '\0';
  return buf;
}

int dt_freeze_parse(const char *s, unsigned *bits) {
  unsigned b = 0;
  for (; s && *s; s++) {
    unsigned f = *s == 'N' ? DT_FREEZE_N : *s == 'b' ? DT_FREEZE_B : *s == 'v' ? DT_FREEZE_V : 0;
    if (!f || (b & f)) return DT_EINVAL;
    b |= f;
  }
  if (!s) return DT_EINVAL;
  *bits = b;
  return DT_OK;
}

static int finite3(const double *x) { return isfinite(x[0]) && isfinite(x[1]) && isfinite(x[2]); }

static int comp_ok(const double *x) { return finite3(x) && x[1] > 0.0; }

/* "" and "target" name the target system. */
static int is_target(const char *name) { return !name[0] || !strcmp(name, DT_JUDGE_TARGET); }

/* A system name: 1..31 of letters, digits, '-', '_', '.' (systems.h). */
static int sys_name_ok(const char *name) {
  size_t n = strnlen(name, DT_JUDGE_SYS_NAME);
  if (n == 0 || n >= DT_JUDGE_SYS_NAME) return 0;
  for (size_t i = 0; i < n; i++) {
    char c = name[i];
    if (!((c >= 'a' && c <= 'z') || (c >= 'A' && c <= 'Z') || (c >= '0' && c <= '9') ||
          c == '-' || c == '_' || c == '.'))
      return 0;
  }
  return 1;
}

/* Set (NONE: clear) the verdict of a system other than the target; -1 for
 * a bad name or too many systems (nothing changed). */
static int set_system_verdict(dt_judgement *j, const char *name, dt_verdict v) {
  if (!sys_name_ok(name)) return -1;
  size_t k = 0;
  while (k < j->nsysv && strcmp(j->sysv[k].name, name)) k++;
  if (v == DT_VERDICT_NONE) {
    if (k < j->nsysv) {
      memmove(&j->sysv[k], &j->sysv[k + 1], (j->nsysv - k - 1) * sizeof j->sysv[0]);
      j->nsysv--;
    }
    return 0;
  }
  if (k == j->nsysv) {
    if (j->nsysv >= DT_JUDGE_MAX_SYS) return -1;
    memcpy(j->sysv[k].name, name, strlen(name) + 1);
    j->nsysv++;
  }
  j->sysv[k].verdict = v;
  return 0;
}

dt_verdict dt_judgement_system_verdict(const dt_judgement *j, const char *name) {
  if (is_target(name)) return j->verdict;
  for (size_t k = 0; k < j->nsysv && k < DT_JUDGE_MAX_SYS; k++)
    if (!strcmp(j->sysv[k].name, name)) return j->sysv[k].verdict;
  return DT_VERDICT_NONE;
}

/* A doublet name: 1..15 of letters, digits, '-', '_', '.'. */
static int doublet_name_ok(const char *name, size_t size) {
  size_t n = strnlen(name, size);
  if (n == 0 || n >= DT_JUDGE_DOUBLET) return 0;
  for (size_t i = 0; i < n; i++) {
    char c = name[i];
    if (!((c >= 'a' && c <= 'z') || (c >= 'A' && c <= 'Z') || (c >= '0' && c <= '9') ||
          c == '-' || c == '_' || c == '.'))
      return 0;
  }
  return 1;
}

int dt_judgement_linked_index(const dt_judgement *j, const char *name) {
  for (size_t i = 0; i < j->nlinked && i < DT_JUDGE_MAX_LINKED; i++)
    if (!strcmp(j->linked[i], name)) return (int)i;
  return -1;
}

void dt_linked_fit_clear(dt_linked_fit *jf) {
  memset(jf, 0, sizeof *jf);
  for (size_t k = 0; k < DT_MAX_COMP; k++) {
    jf->T[k] = jf->T_err[k] = jf->bturb[k] = jf->bturb_err[k] = NAN;
    for (size_t s = 0; s < DT_JUDGE_MAX_LINKED; s++)
      jf->sp[s].logN[k] = jf->sp[s].logN_err[k] = jf->sp[s].b[k] = jf->sp[s].b_err[k] = NAN;
  }
}

/* The linked species and the b rule (state_ok): names valid, none the main
 * doublet, none twice; a joint fit names exactly the linked species. */
static int linked_ok(const dt_judgement *s) {
  if (s->nlinked > DT_JUDGE_MAX_LINKED || (int)s->btie < 0 || s->btie >= DT_BTIE__COUNT) return 0;
  for (size_t i = 0; i < s->nlinked; i++) {
    if (!doublet_name_ok(s->linked[i], sizeof s->linked[i]) || !strcmp(s->linked[i], s->doublet))
      return 0;
    for (size_t k = 0; k < i; k++)
      if (!strcmp(s->linked[k], s->linked[i])) return 0;
  }
  if (!s->has_joint) return 1;
  if (!s->has_fit || s->nlinked == 0 || s->ncomp == 0 || s->joint.nspecies != s->nlinked)
    return 0;
  for (size_t i = 0; i < s->nlinked; i++)
    if (strncmp(s->joint.sp[i].doublet, s->linked[i], DT_JUDGE_DOUBLET)) return 0;
  return 1;
}

/* Link (on) or unlink species name; -1 when it does not fit the state. */
static int set_link(dt_judgement *j, const char *name, int on) {
  if (!doublet_name_ok(name, DT_NOTE_MAX)) return -1;
  int k = dt_judgement_linked_index(j, name);
  if (on) {
    if (k >= 0 || !strcmp(name, j->doublet) || j->nlinked >= DT_JUDGE_MAX_LINKED) return -1;
    memcpy(j->linked[j->nlinked++], name, strlen(name) + 1);
    return 0;
  }
  if (k < 0) return -1;
  memmove(&j->linked[k], &j->linked[k + 1], (j->nlinked - (size_t)k - 1) * sizeof j->linked[0]);
  j->nlinked--;
  memset(j->linked[j->nlinked], 0, sizeof j->linked[0]);
  return 0;
}

/* A fit result's components as components (DT_ACT_FIT, DT_ACT_JOINT_FIT). */
static int take_fit(dt_judgement *j, const dt_fit_result *fit) {
  if (fit->ncomp != j->ncomp || fit->ncont > DT_MAX_CONT) return -1;
  if (fit->status == DT_OK) {
    for (size_t i = 0; i < j->ncomp; i++) {
      const dt_component *c = &fit->comp[i];
      double x[3] = {c->logN, c->b, c->v};
      if (!comp_ok(x)) return -1;
    }
    memcpy(j->comp, fit->comp, j->ncomp * sizeof j->comp[0]);
    if (fit->covering) {
      for (size_t i = 0; i < j->ncomp; i++)
        if (!(fit->cf[i] > 0.0 && fit->cf[i] <= 1.0)) return -1;
      memcpy(j->cf, fit->cf, j->ncomp * sizeof j->cf[0]);
    }
  }
  j->fit = *fit;
  j->has_fit = 1;
  return 0;
}

/* The state a judgement may be in (used to check restored states). */
static int state_ok(const dt_judgement *s) {
  if (!linked_ok(s)) return 0;
  if (s->ncomp > DT_MAX_COMP || s->nwin > DT_MAX_WINDOWS) return 0;
  if (memchr(s->doublet, '\0', sizeof s->doublet) == NULL || s->doublet[0] == '\0') return 0;
  if (memchr(s->note, '\0', sizeof s->note) == NULL) return 0;
  if ((int)s->verdict < DT_VERDICT_NONE || s->verdict > DT_VERDICT_UNUSABLE) return 0;
  if (s->cont_order < -1 || s->cont_order >= DT_MAX_CONT) return 0;
  if (!(s->vlo < s->vhi)) return 0;
  for (size_t i = 0; i < s->ncomp; i++)
    if (s->frozen[i] > (DT_FREEZE_N | DT_FREEZE_B | DT_FREEZE_V) || !(s->cf[i] >= 0.0) ||
        s->cf[i] > 1.0)
      return 0;
  if (s->covering != 0 && s->covering != 1) return 0;
  if (s->hyperfine != 0 && s->hyperfine != 1) return 0;
  if (s->has_fit && s->fit.ncomp != s->ncomp) return 0;
  if (s->nsys > DT_JUDGE_MAX_SYS || s->nsysv > DT_JUDGE_MAX_SYS) return 0;
  for (size_t i = 0; i < s->nsys; i++)
    if (!sys_name_ok(s->sys[i].name) || !(s->sys[i].vlo < s->sys[i].vhi)) return 0;
  for (size_t i = 0; i < s->nsysv; i++)
    if (!sys_name_ok(s->sysv[i].name) || s->sysv[i].verdict <= DT_VERDICT_NONE ||
        s->sysv[i].verdict > DT_VERDICT_UNUSABLE)
      return 0;
  return 1;
}

int dt_judgement_apply(dt_judgement *j, const dt_action *a) {
  assert(j && a);
  int model_change = 1;
  switch (a->kind) {
  case DT_ACT_WINDOW_ADD:
    if (j->nwin >= DT_MAX_WINDOWS || !isfinite(a->x[0]) || !isfinite(a->x[1]) ||
        !(a->x[0] < a->x[1]))
      return DT_EINVAL;
    j->win[j->nwin].lo = a->x[0];
    j->win[j->nwin].hi = a->x[1];
    j->nwin++;
    break;
  case DT_ACT_WINDOW_REMOVE:
    if (a->index < 0 || (size_t)a->index >= j->nwin) return DT_EINVAL;
    memmove(&j->win[a->index], &j->win[a->index + 1],
            (j->nwin - (size_t)a->index - 1) * sizeof j->win[0]);
    j->nwin--;
    break;
  case DT_ACT_COMP_ADD:
    if (j->ncomp >= DT_MAX_COMP || !comp_ok(a->x)) return DT_EINVAL;
    j->comp[j->ncomp] = (dt_component){.logN = a->x[0], .b = a->x[1], .v = a->x[2]};
    j->frozen[j->ncomp] = 0;
    j->cf[j->ncomp] = 0.0;
    j->ncomp++;
    break;
  case DT_ACT_COMP_REMOVE: {
    if (a->index < 0 || (size_t)a->index >= j->ncomp) return DT_EINVAL;
    size_t i = (size_t)a->index, rest = j->ncomp - i - 1;
    memmove(&j->comp[i], &j->comp[i + 1], rest * sizeof j->comp[0]);
    memmove(&j->frozen[i], &j->frozen[i + 1], rest * sizeof j->frozen[0]);
    memmove(&j->cf[i], &j->cf[i + 1], rest * sizeof j->cf[0]);
    j->ncomp--;
    j->frozen[j->ncomp] = 0;
    j->cf[j->ncomp] = 0.0;
    break;
  }
  case DT_ACT_COMP_SET:
    if (a->index < 0 || (size_t)a->index >= j->ncomp || !comp_ok(a->x)) return DT_EINVAL;
    j->comp[a->index] = (dt_component){.logN = a->x[0], .b = a->x[1], .v = a->x[2]};
    break;
  case DT_ACT_FREEZE:
    if (a->index < 0 || (size_t)a->index >= j->ncomp || a->ival < 0 ||
        a->ival > (DT_FREEZE_N | DT_FREEZE_B | DT_FREEZE_V))
      return DT_EINVAL;
    j->frozen[a->index] = (unsigned char)a->ival;
    break;
  case DT_ACT_TIE_B:
    if (a->ival != 0 && a->ival != 1) return DT_EINVAL;
    j->tie_b = a->ival;
    break;
  case DT_ACT_CONT_ORDER:
    if (a->ival < -1 || a->ival >= DT_MAX_CONT) return DT_EINVAL;
    j->cont_order = a->ival;
    break;
  case DT_ACT_DOUBLET: {
    size_t n = strnlen(a->text, sizeof a->text);
    if (n == 0 || n >= sizeof j->doublet) return DT_EINVAL;
    memcpy(j->doublet, a->text, n + 1);
    if (dt_judgement_linked_index(j, j->doublet) >= 0) set_link(j, j->doublet, 0);
    break;
  }
  case DT_ACT_LINK:
    if ((a->ival != 0 && a->ival != 1) || set_link(j, a->text, a->ival)) return DT_EINVAL;
    break;
  case DT_ACT_BTIE:
    if (a->ival < 0 || a->ival >= DT_BTIE__COUNT) return DT_EINVAL;
    j->btie = (dt_btie)a->ival;
    break;
  case DT_ACT_JOINT_FIT: {
    dt_judgement t = *j;
    t.has_joint = 1;
    t.joint = a->joint;
    if (t.btie != DT_BTIE_THERMAL) /* T and b_turb belong to the thermal rule alone */
      for (size_t k = 0; k < DT_MAX_COMP; k++)
        t.joint.T[k] = t.joint.T_err[k] = t.joint.bturb[k] = t.joint.bturb_err[k] = NAN;
    if (take_fit(&t, &a->fit) || !linked_ok(&t)) return DT_EINVAL;
    *j = t;
    return DT_OK;
  }
  case DT_ACT_RESOLUTION:
    if (!isfinite(a->x[0]) || !isfinite(a->x[1]) || a->x[0] < 0.0 || a->x[1] < 0.0)
      return DT_EINVAL;
    j->resolution = a->x[0];
    j->fwhm_kms = a->x[1];
    break;
  case DT_ACT_VSYS:
    if (!isfinite(a->x[0])) return DT_EINVAL;
    j->vsys = a->x[0];
    break;
  case DT_ACT_VWINDOW:
    if (!isfinite(a->x[0]) || !isfinite(a->x[1]) || !(a->x[0] < a->x[1])) return DT_EINVAL;
    j->vlo = a->x[0];
    j->vhi = a->x[1];
    break;
  case DT_ACT_FIT:
    if (take_fit(j, &a->fit)) return DT_EINVAL;
    j->has_joint = 0;
    return DT_OK;
  case DT_ACT_VERDICT:
    if (a->ival < DT_VERDICT_NONE || a->ival > DT_VERDICT_UNUSABLE) return DT_EINVAL;
    if (is_target(a->text)) j->verdict = (dt_verdict)a->ival;
    else if (set_system_verdict(j, a->text, (dt_verdict)a->ival)) return DT_EINVAL;
    model_change = 0;
    break;
  case DT_ACT_NOTE: {
    size_t n = strnlen(a->text, sizeof a->text);
    if (n >= sizeof j->note) return DT_EINVAL;
    memcpy(j->note, a->text, n + 1);
    model_change = 0;
    break;
  }
  case DT_ACT_COVERING:
    if (a->ival != 0 && a->ival != 1) return DT_EINVAL;
    j->covering = a->ival;
    break;
  case DT_ACT_RESTORE:
  case DT_ACT_AUTOFIT:
    if (!a->state || !state_ok(a->state)) return DT_EINVAL;
    if (a->state != j) *j = *a->state;
    return DT_OK;
  default:
    return DT_EINVAL;
  }
  if (model_change) j->has_fit = j->has_joint = 0;
  assert(j->ncomp <= DT_MAX_COMP && j->nwin <= DT_MAX_WINDOWS);
  return DT_OK;
}

/* Exact comparison of doubles where NaN equals NaN. */
static int same_d(double a, double b) { return a == b || (isnan(a) && isnan(b)); }

static int same_comp(const dt_component *a, const dt_component *b) {
  return same_d(a->logN, b->logN) && same_d(a->b, b->b) && same_d(a->v, b->v);
}

int dt_fit_result_same(const dt_fit_result *a, const dt_fit_result *b) {
  if (a->status != b->status || a->niter != b->niter || a->ncomp != b->ncomp ||
      a->ncont != b->ncont || a->dof != b->dof || a->npix != b->npix)
    return 0;
  if (a->ncomp > DT_MAX_COMP || a->ncont > DT_MAX_CONT) return 0;
  for (size_t i = 0; i < a->ncomp; i++)
    if (!same_comp(&a->comp[i], &b->comp[i]) || !same_comp(&a->err[i], &b->err[i])) return 0;
  for (size_t i = 0; i < a->ncont; i++)
    if (!same_d(a->cont_coef[i], b->cont_coef[i]) || !same_d(a->cont_err[i], b->cont_err[i]))
      return 0;
  if (a->covering != b->covering) return 0;
  for (size_t i = 0; a->covering && i < a->ncomp; i++)
    if (!same_d(a->cf[i], b->cf[i]) || !same_d(a->cf_err[i], b->cf_err[i])) return 0;
  return same_d(a->chi2, b->chi2) && same_d(a->chi2_red, b->chi2_red) && same_d(a->bic, b->bic);
}

int dt_judgement_same(const dt_judgement *a, const dt_judgement *b) {
  if (strncmp(a->doublet, b->doublet, sizeof a->doublet) != 0) return 0;
  if (!same_d(a->vsys, b->vsys) || !same_d(a->resolution, b->resolution) ||
      !same_d(a->fwhm_kms, b->fwhm_kms) || !same_d(a->vlo, b->vlo) || !same_d(a->vhi, b->vhi))
    return 0;
  if (a->cont_order != b->cont_order || a->nwin != b->nwin || a->ncomp != b->ncomp ||
      a->tie_b != b->tie_b || a->verdict != b->verdict || a->has_fit != b->has_fit)
    return 0;
  if (a->nwin > DT_MAX_WINDOWS || a->ncomp > DT_MAX_COMP) return 0;
  for (size_t i = 0; i < a->nwin; i++)
    if (!same_d(a->win[i].lo, b->win[i].lo) || !same_d(a->win[i].hi, b->win[i].hi)) return 0;
  for (size_t i = 0; i < a->ncomp; i++)
    if (!same_comp(&a->comp[i], &b->comp[i]) || a->frozen[i] != b->frozen[i]) return 0;
  if (a->covering != b->covering || a->hyperfine != b->hyperfine) return 0;
  for (size_t i = 0; a->covering && i < a->ncomp; i++)
    if (!same_d(a->cf[i], b->cf[i])) return 0;
  if (strncmp(a->note, b->note, sizeof a->note) != 0) return 0;
  if (a->has_fit && !dt_fit_result_same(&a->fit, &b->fit)) return 0;
  if (a->nlinked != b->nlinked || a->btie != b->btie || a->has_joint != b->has_joint ||
      a->nlinked > DT_JUDGE_MAX_LINKED)
    return 0;
  for (size_t i = 0; i < a->nlinked; i++)
    if (strncmp(a->linked[i], b->linked[i], DT_JUDGE_DOUBLET)) return 0;
  if (a->has_joint && !dt_linked_fit_same(&a->joint, &b->joint, a->ncomp)) return 0;
  return dt_judgement_same_systems(a, b);
}

int dt_linked_fit_same(const dt_linked_fit *a, const dt_linked_fit *b, size_t ncomp) {
  if (a->nspecies != b->nspecies || a->nspecies > DT_JUDGE_MAX_LINKED || ncomp > DT_MAX_COMP)
    return 0;
  for (size_t k = 0; k < ncomp; k++)
    if (!same_d(a->T[k], b->T[k]) || !same_d(a->T_err[k], b->T_err[k]) ||
        !same_d(a->bturb[k], b->bturb[k]) || !same_d(a->bturb_err[k], b->bturb_err[k]))
      return 0;
  for (size_t s = 0; s < a->nspecies; s++) {
    const dt_linked_species *p = &a->sp[s], *q = &b->sp[s];
    if (strncmp(p->doublet, q->doublet, DT_JUDGE_DOUBLET)) return 0;
    for (size_t k = 0; k < ncomp; k++)
      if (!same_d(p->logN[k], q->logN[k]) || !same_d(p->logN_err[k], q->logN_err[k]) ||
          !same_d(p->b[k], q->b[k]) || !same_d(p->b_err[k], q->b_err[k]))
        return 0;
  }
  return 1;
}

int dt_judgement_same_systems(const dt_judgement *a, const dt_judgement *b) {
  if (a->nsys != b->nsys || a->nsysv != b->nsysv || a->nsys > DT_JUDGE_MAX_SYS ||
      a->nsysv > DT_JUDGE_MAX_SYS)
    return 0;
  for (size_t i = 0; i < a->nsys; i++)
    if (strcmp(a->sys[i].name, b->sys[i].name) || !same_d(a->sys[i].vlo, b->sys[i].vlo) ||
        !same_d(a->sys[i].vhi, b->sys[i].vhi))
      return 0;
  for (size_t i = 0; i < a->nsysv; i++)
    if (strcmp(a->sysv[i].name, b->sysv[i].name) || a->sysv[i].verdict != b->sysv[i].verdict)
      return 0;
  return 1;
}
