/* Linked species in the judgement: linking and unlinking, the b rule, the
 * joint fit's result, and what each of them does to the rest of the state. */
#include <math.h>
#include <string.h>

#include "doubletty/judge.h"
#include "harness.h"

static dt_action link_act(const char *name, int on) {
  dt_action a;
  dt_action_init(&a, DT_ACT_LINK);
  strcpy(a.text, name);
  a.ival = on;
  return a;
}

/* apply must fail and leave the state exactly as it was */
static int rejected(dt_judgement *j, const dt_action *a) {
  dt_judgement before = *j;
  int rc = dt_judgement_apply(j, a);
  return rc == DT_EINVAL && memcmp(&before, j, sizeof before) == 0;
}

/* A joint fit of j's components and linked species (values made up for
 * the state machine: it checks where they go, not what they are). */
static dt_action joint_act(const dt_judgement *j) {
  dt_action a;
  dt_action_init(&a, DT_ACT_JOINT_FIT);
  a.fit.status = DT_OK;
  a.fit.ncomp = j->ncomp;
  for (size_t k = 0; k < j->ncomp; k++) {
    a.fit.comp[k] = (dt_component){.logN = 12.5 + 0.1 * (double)k, .b = 4.0, .v = -20.0 + 30.0 * (double)k};
    a.fit.err[k] = (dt_component){.logN = 0.05, .b = 0.5, .v = 1.0};
  }
  a.fit.chi2 = 101.5;
  a.fit.dof = 98;
  a.fit.npix = 120;
  dt_linked_fit_clear(&a.joint);
  a.joint.nspecies = j->nlinked;
  for (size_t s = 0; s < j->nlinked; s++) {
    strcpy(a.joint.sp[s].doublet, j->linked[s]);
    for (size_t k = 0; k < j->ncomp; k++) {
      a.joint.sp[s].logN[k] = 11.8 + 0.2 * (double)s;
      a.joint.sp[s].logN_err[k] = 0.07;
      a.joint.sp[s].b[k] = 4.0;
      a.joint.sp[s].b_err[k] = 0.5;
    }
  }
  return a;
}

int main(void) {
  dt_judgement j;
  dt_judgement_init(&j);
  CHECK(j.nlinked == 0 && j.btie == DT_BTIE_SAME && !j.has_joint,
        "defaults: nothing linked, one b for all");

  dt_btie m;
  int names = !strcmp(dt_btie_name(DT_BTIE_SAME), "same") &&
              !strcmp(dt_btie_name(DT_BTIE_THERMAL), "thermal") &&
              !strcmp(dt_btie_name(DT_BTIE_FREE), "free");
  for (int i = 0; i < DT_BTIE__COUNT; i++)
    if (dt_btie_parse(dt_btie_name((dt_btie)i), &m) != DT_OK || (int)m != i) names = 0;
  CHECK(names, "b rules same/thermal/free both ways");
  CHECK(dt_btie_parse("Thermal", &m) == DT_EINVAL && dt_btie_parse("", &m) == DT_EINVAL,
        "b rule names are exact");
  dt_action_kind k;
  CHECK(dt_action_kind_parse("link", &k) == DT_OK && k == DT_ACT_LINK &&
            dt_action_kind_parse("b-tie", &k) == DT_OK && k == DT_ACT_BTIE &&
            dt_action_kind_parse("joint-fit", &k) == DT_OK && k == DT_ACT_JOINT_FIT,
        "link, b-tie and joint-fit are action names");

  /* two components with a single-doublet fit */
  dt_action ca;
  dt_action_init(&ca, DT_ACT_COMP_ADD);
  ca.x[0] = 12.0, ca.x[1] = 5.0, ca.x[2] = -20.0;
  dt_judgement_apply(&j, &ca);
  ca.x[2] = 10.0;
  dt_judgement_apply(&j, &ca);
  dt_action fa = joint_act(&j);
  fa.kind = DT_ACT_FIT;
  CHECK(dt_judgement_apply(&j, &fa) == DT_OK && j.has_fit && !j.has_joint, "a single fit");

  dt_action a = link_act("CaII", 1);
  CHECK(dt_judgement_apply(&j, &a) == DT_OK && j.nlinked == 1 && !strcmp(j.linked[0], "CaII"),
        "link CaII");
  CHECK(!j.has_fit, "linking changes the model: the fit is gone");
  CHECK(rejected(&j, &a), "CaII linked twice is refused");
  a = link_act("NaI", 1);
  CHECK(rejected(&j, &a), "the main doublet cannot be linked to itself");
  a = link_act("KI", 0);
  CHECK(rejected(&j, &a), "unlinking a species that is not linked is refused");
  a = link_act("Ca II", 1);
  CHECK(rejected(&j, &a), "a name with a space is refused");
  a = link_act("ABCDEFGHIJKLMNOP", 1);
  CHECK(rejected(&j, &a), "a name of 16 bytes is refused (15 at most)");
  a = link_act("KI", 2);
  CHECK(rejected(&j, &a), "ival other than 0/1 is refused");
  a = link_act("KI", 1);
  dt_judgement_apply(&j, &a);
  a = link_act("MgII", 1);
  dt_judgement_apply(&j, &a);
  CHECK(j.nlinked == 3, "three species linked");
  a = link_act("FeII", 1);
  CHECK(rejected(&j, &a), "a fourth linked species is refused");
  a = link_act("KI", 0);
  CHECK(dt_judgement_apply(&j, &a) == DT_OK && j.nlinked == 2 && !strcmp(j.linked[0], "CaII") &&
            !strcmp(j.linked[1], "MgII"),
        "unlink KI keeps the others in order");

  dt_action bt;
  dt_action_init(&bt, DT_ACT_BTIE);
  bt.ival = DT_BTIE_THERMAL;
  CHECK(dt_judgement_apply(&j, &bt) == DT_OK && j.btie == DT_BTIE_THERMAL, "b rule thermal");
  bt.ival = DT_BTIE__COUNT;
  CHECK(rejected(&j, &bt), "an unknown b rule is refused");

  /* the joint fit */
  dt_action ja = joint_act(&j);
  for (size_t c = 0; c < j.ncomp; c++) ja.joint.T[c] = 8000.0, ja.joint.bturb[c] = 2.0;
  CHECK(dt_judgement_apply(&j, &ja) == DT_OK && j.has_fit && j.has_joint &&
            j.comp[1].v == ja.fit.comp[1].v && j.joint.sp[1].logN[1] == ja.joint.sp[1].logN[1] &&
            j.joint.T[0] == 8000.0,
        "a joint fit gives the components and every species' values");
  dt_judgement keep = j;
  dt_action bad = ja;
  strcpy(bad.joint.sp[0].doublet, "MgII");
  strcpy(bad.joint.sp[1].doublet, "CaII");
  CHECK(rejected(&j, &bad), "a joint fit with the species in another order is refused");
  bad = ja;
  bad.joint.nspecies = 1;
  CHECK(rejected(&j, &bad), "a joint fit missing a species is refused");
  bad = ja;
  bad.fit.ncomp = 1;
  CHECK(rejected(&j, &bad), "a joint fit with the wrong number of components is refused");

  dt_judgement other = keep;
  other.joint.sp[0].logN[0] += 1e-12;
  CHECK(!dt_judgement_same(&keep, &other), "a different linked log N is a different state");
  other = keep;
  other.joint.T[1] = 8001.0;
  CHECK(!dt_judgement_same(&keep, &other), "a different T is a different state");
  other = keep;
  other.btie = DT_BTIE_FREE;
  CHECK(!dt_judgement_same(&keep, &other), "a different b rule is a different state");
  other = keep;
  strcpy(other.linked[1], "KI");
  CHECK(!dt_judgement_same(&keep, &other), "a different linked species is a different state");
  other = keep;
  other.joint.sp[0].logN[5] = 99.0;
  CHECK(dt_judgement_same(&keep, &other), "values beyond the components do not matter");

  /* a single fit and model changes drop the joint part */
  dt_action nudge;
  dt_action_init(&nudge, DT_ACT_COMP_SET);
  nudge.index = 0;
  nudge.x[0] = 12.0, nudge.x[1] = 5.0, nudge.x[2] = -21.0;
  dt_judgement_apply(&j, &nudge);
  CHECK(!j.has_fit && !j.has_joint, "a nudge drops the joint fit");
  j = keep;
  fa = joint_act(&j);
  fa.kind = DT_ACT_FIT;
  CHECK(dt_judgement_apply(&j, &fa) == DT_OK && j.has_fit && !j.has_joint,
        "a single-doublet fit leaves no joint part");
  j = keep;
  dt_action note;
  dt_action_init(&note, DT_ACT_NOTE);
  strcpy(note.text, "both species");
  CHECK(dt_judgement_apply(&j, &note) == DT_OK && j.has_joint, "a note keeps the joint fit");

  /* restores check the linked part */
  dt_action ra;
  dt_action_init(&ra, DT_ACT_RESTORE);
  ra.state = &keep;
  j = keep;
  CHECK(dt_judgement_apply(&j, &ra) == DT_OK && dt_judgement_same(&j, &keep), "restore");
  dt_judgement broken = keep;
  strcpy(broken.linked[1], "CaII");
  ra.state = &broken;
  CHECK(rejected(&j, &ra), "a restore with a species linked twice is refused");
  broken = keep;
  strcpy(broken.linked[0], "NaI");
  strcpy(broken.joint.sp[0].doublet, "NaI");
  CHECK(rejected(&j, &ra), "a restore linking the main doublet is refused");
  broken = keep;
  broken.has_fit = 0;
  CHECK(rejected(&j, &ra), "a restore with a joint fit but no fit is refused");
  broken = keep;
  broken.btie = (dt_btie)7;
  CHECK(rejected(&j, &ra), "a restore with an unknown b rule is refused");

  /* switching the main doublet to a linked one unlinks it */
  j = keep;
  dt_action da;
  dt_action_init(&da, DT_ACT_DOUBLET);
  strcpy(da.text, "CaII");
  CHECK(dt_judgement_apply(&j, &da) == DT_OK && !strcmp(j.doublet, "CaII") && j.nlinked == 1 &&
            !strcmp(j.linked[0], "MgII"),
        "the new main doublet leaves the linked ones");
  return dt_test_done();
}
