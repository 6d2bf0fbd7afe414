/* The session file's fields of linked species (format version 4).
 *
 * The field table (journal_format.c) names these fields; their values are
 * written and read here:
 *   link     doublet=NAME link=1|0            (action: link or unlink)
 *   b-tie    rule=same|thermal|free           (action: the b rule)
 *   joint-fit                                 (action; values in the state)
 *   linked=NAME,...   b-rule=RULE             (state; left out when none / same)
 *   joint=N  sp1= .. spN=NAME:logN+-E/b+-E,...   thermal=T+-E/bturb+-E,...
 * sp1..spN are the linked species in their order, one logN/b pair per
 * component (log10 cm^-2, km/s); thermal= (the b rule thermal) gives each
 * component's temperature [K] and turbulent b [km/s].  Numbers go through
 * num.h with the fewest digits that read back exactly. */
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "doubletty/journal.h"
#include "doubletty/num.h"
#include "journal_int.h"

#define AT(base, off, type) ((type *)(void *)((char *)(base) + (off)))
#define AT_C(base, off, type) ((const type *)(const void *)((const char *)(base) + (off)))

static void put_num(dt_jn_put_fn put, void *ctx, double x) {
  char t[40];
  dt_num_format(t, sizeof t, x);
  put(ctx, t);
}

static void put_pm(dt_jn_put_fn put, void *ctx, double x, double e) {
  put_num(put, ctx, x);
  put(ctx, "+-");
  put_num(put, ctx, e);
}

/* "X+-E/Y+-E" pairs, one per component, separated by commas. */
static void put_pairs(dt_jn_put_fn put, void *ctx, size_t n, const double *x, const double *xe,
                      const double *y, const double *ye) {
  for (size_t k = 0; k < n && k < DT_MAX_COMP; k++) {
    if (k) put(ctx, ",");
    put_pm(put, ctx, x[k], xe[k]);
    put(ctx, "/");
    put_pm(put, ctx, y[k], ye[k]);
  }
}

int dt_jn_write_joint(const dt_jn_field *f, const dt_judgement *s, const dt_action *a, int num,
                      dt_jn_put_fn put, void *ctx) {
  switch (f->type) {
  case JT_LINKED:
    if (s->nlinked == 0) return -1;
    for (size_t i = 0; i < s->nlinked && i < DT_JUDGE_MAX_LINKED; i++) {
      if (i) put(ctx, ",");
      put(ctx, s->linked[i]);
    }
    return 0;
  case JT_BTIE:
    if (s->btie == DT_BTIE_SAME) return -1;
    put(ctx, dt_btie_name(s->btie));
    return 0;
  case JT_BTIE_INT:
    put(ctx, dt_btie_name((dt_btie)a->ival));
    return 0;
  case JT_SPECIES: {
    if (!s->has_joint || num < 0 || (size_t)num >= s->joint.nspecies) return -1;
    const dt_linked_species *sp = &s->joint.sp[num];
    put(ctx, sp->doublet);
    put(ctx, ":");
    put_pairs(put, ctx, s->ncomp, sp->logN, sp->logN_err, sp->b, sp->b_err);
    return 0;
  }
  case JT_THERMAL:
    if (!s->has_joint || s->btie != DT_BTIE_THERMAL || s->ncomp == 0) return -1;
    put_pairs(put, ctx, s->ncomp, s->joint.T, s->joint.T_err, s->joint.bturb,
              s->joint.bturb_err);
    return 0;
  default: return -1;
  }
}

/* "X+-E" with both parts. */
static int read_pm(const char *s, double *x, double *e) {
  char *end;
  *x = dt_num_strtod(s, &end);
  if (end == s || end[0] != '+' || end[1] != '-') return -1;
  const char *p = end + 2;
  *e = dt_num_strtod(p, &end);
  return end == p || *end ? -1 : 0;
}

/* "X+-E/Y+-E,..." into the arrays; the number of pairs into *n. */
static int read_pairs(char *v, double *x, double *xe, double *y, double *ye, size_t *n) {
  size_t k = 0;
  for (char *tok = *v ? v : NULL; tok; k++) {
    char *comma = strchr(tok, ',');
    if (comma) *comma = '\0';
    char *slash = strchr(tok, '/');
    if (k >= DT_MAX_COMP || !slash) return -1;
    *slash = '\0';
    if (read_pm(tok, &x[k], &xe[k]) || read_pm(slash + 1, &y[k], &ye[k])) return -1;
    tok = comma ? comma + 1 : NULL;
  }
  *n = k;
  return k ? 0 : -1;
}

/* A doublet name as judge.h takes it: apply a link to a blank judgement. */
static int name_ok(const char *name) {
  if (strlen(name) >= DT_JUDGE_DOUBLET) return 0;
  dt_judgement t;
  dt_judgement_init(&t);
  t.doublet[0] = '-'; /* no real doublet: any name may be linked */
  t.doublet[1] = '\0';
  dt_action a;
  dt_action_init(&a, DT_ACT_LINK);
  a.ival = 1;
  memcpy(a.text, name, strlen(name) + 1);
  return dt_judgement_apply(&t, &a) == DT_OK;
}

int dt_jn_read_joint(const dt_jn_field *f, char *v, int num, dt_journal_record *rec,
                     size_t *ncomp_sp, size_t *nthermal) {
  dt_judgement *s = &rec->after;
  dt_btie m;
  switch (f->type) {
  case JT_LINKED: {
    size_t n = 0;
    for (char *tok = *v ? v : NULL; tok; n++) {
      char *comma = strchr(tok, ',');
      if (comma) *comma = '\0';
      if (n >= DT_JUDGE_MAX_LINKED || !name_ok(tok)) return -1;
      memcpy(s->linked[n], tok, strlen(tok) + 1);
      tok = comma ? comma + 1 : NULL;
    }
    s->nlinked = n;
    return n ? 0 : -1;
  }
  case JT_BTIE:
    if (dt_btie_parse(v, &m) != DT_OK) return -1;
    s->btie = m;
    return 0;
  case JT_BTIE_INT:
    if (dt_btie_parse(v, &m) != DT_OK) return -1;
    *AT(&rec->action, f->off, int) = (int)m;
    return 0;
  case JT_SPECIES: {
    if (num < 0 || num >= DT_JUDGE_MAX_LINKED) return -1;
    char *colon = strchr(v, ':');
    if (!colon) return -1;
    *colon = '\0';
    if (!name_ok(v)) return -1;
    dt_linked_species *sp = &s->joint.sp[num];
    memcpy(sp->doublet, v, strlen(v) + 1);
    return read_pairs(colon + 1, sp->logN, sp->logN_err, sp->b, sp->b_err, &ncomp_sp[num]);
  }
  case JT_THERMAL:
    return read_pairs(v, s->joint.T, s->joint.T_err, s->joint.bturb, s->joint.bturb_err,
                      nthermal);
  default: return -1;
  }
}

const char *dt_jn_check_joint(dt_journal_record *rec, int has_joint, const size_t *ncomp_sp,
                              size_t nthermal) {
  dt_judgement *s = &rec->after;
  for (size_t i = 0; i < s->nlinked; i++) {
    for (size_t k = 0; k < i; k++)
      if (!strcmp(s->linked[k], s->linked[i])) return "a species is linked twice";
    if ((rec->has & DT_REC_FULL) && !strcmp(s->linked[i], s->doublet))
      return "the main doublet is linked to itself";
  }
  if (!has_joint) {
    for (int i = 0; i < DT_JUDGE_MAX_LINKED; i++)
      if (ncomp_sp[i]) return "linked species' values without joint=";
    if (nthermal) return "thermal= without joint=";
    if (rec->action.kind == DT_ACT_JOINT_FIT) return "joint-fit action without its values";
    return NULL;
  }
  if (!s->has_fit) return "joint= without fit=";
  if (s->joint.nspecies != s->nlinked) return "joint= does not match linked=";
  for (size_t i = 0; i < DT_JUDGE_MAX_LINKED; i++) {
    if (i < s->nlinked && (ncomp_sp[i] != s->ncomp || strcmp(s->joint.sp[i].doublet, s->linked[i])))
      return "sp1.. do not name each linked species with every component";
    if (i >= s->nlinked && ncomp_sp[i]) return "more sp fields than linked species";
  }
  if ((s->btie == DT_BTIE_THERMAL) != (nthermal != 0) || (nthermal && nthermal != s->ncomp))
    return "thermal= does not match the b rule and the components";
  s->has_joint = 1;
  if (rec->action.kind == DT_ACT_JOINT_FIT) {
    rec->action.fit = s->fit;
    rec->action.joint = s->joint;
  }
  return NULL;
}
