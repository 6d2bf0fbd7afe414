/* The judgement state machine: every action, its validation, and names. */
#include <math.h>
#include <string.h>

#include "doubletty/judge.h"
#include "harness.h"

static dt_action act(dt_action_kind k, int index, int ival, double x0, double x1, double x2) {
  dt_action a;
  dt_action_init(&a, k);
  a.index = index;
  a.ival = ival;
  a.x[0] = x0;
  a.x[1] = x1;
  a.x[2] = x2;
  return a;
}

/* apply must fail and leave the state exactly as it was */
static int rejected(dt_judgement *j, dt_action a) {
  dt_judgement before = *j;
  int rc = dt_judgement_apply(j, &a);
  return rc == DT_EINVAL && memcmp(&before, j, sizeof before) == 0;
}

int main(void) {
  dt_judgement j;
  dt_judgement_init(&j);
  CHECK(!strcmp(j.doublet, "NaI") && j.vsys == 0 && j.resolution == 3000 && j.vlo == -600 &&
            j.vhi == 600 && j.cont_order == 2 && j.ncomp == 0 && j.nwin == 0 &&
            j.verdict == DT_VERDICT_NONE && !j.has_fit && j.note[0] == '\0',
        "defaults: NaI, vsys 0, R 3000, window -600..600, order 2, nothing judged");

  /* names both ways */
  int names_ok = 1;
  for (int k = 0; k < DT_ACT__COUNT; k++) {
    dt_action_kind back;
    const char *n = dt_action_name((dt_action_kind)k);
    if (dt_action_kind_parse(n, &back) != DT_OK || back != (dt_action_kind)k) names_ok = 0;
    for (const char *p = n; *p; p++)
      if (!((*p >= 'a' && *p <= 'z') || *p == '-')) names_ok = 0;
  }
  CHECK(names_ok, "every action name is lower-case-hyphenated and parses back");
  dt_action_kind kk;
  CHECK(dt_action_kind_parse("comp-add", &kk) == DT_OK && kk == DT_ACT_COMP_ADD, "comp-add");
  CHECK(dt_action_kind_parse("jump", &kk) == DT_EINVAL, "unknown action name rejected");
  dt_verdict v;
  const char *vn[] = {"none", "detected", "not-detected", "unsure", "unusable"};
  int vok = 1;
  for (int i = 0; i < 5; i++)
    if (strcmp(dt_verdict_name((dt_verdict)i), vn[i]) || dt_verdict_parse(vn[i], &v) || (int)v != i) vok = 0;
  CHECK(vok, "verdict names none/detected/not-detected/unsure/unusable both ways");
  CHECK(dt_verdict_parse("Detected", &v) == DT_EINVAL, "verdict names are case-sensitive");
  char fz[4];
  unsigned bits;
  CHECK(!strcmp(dt_freeze_str(DT_FREEZE_N | DT_FREEZE_V, fz), "Nv"), "freeze letters");
  CHECK(dt_freeze_parse("bN", &bits) == DT_OK && bits == (DT_FREEZE_N | DT_FREEZE_B), "freeze parse");
  CHECK(dt_freeze_parse("", &bits) == DT_OK && bits == 0, "no freeze");
  CHECK(dt_freeze_parse("NN", &bits) == DT_EINVAL && dt_freeze_parse("x", &bits) == DT_EINVAL,
        "bad freeze letters rejected");

  /* components */
  dt_action a = act(DT_ACT_COMP_ADD, 0, 0, 12.5, 10.0, 300.0);
  CHECK(dt_judgement_apply(&j, &a) == DT_OK && j.ncomp == 1 && j.comp[0].logN == 12.5 &&
            j.comp[0].b == 10.0 && j.comp[0].v == 300.0,
        "comp-add: logN, b, v");
  a = act(DT_ACT_COMP_ADD, 0, 0, 13.0, 5.0, -20.0);
  dt_judgement_apply(&j, &a);
  CHECK(rejected(&j, act(DT_ACT_COMP_ADD, 0, 0, 13.0, 0.0, 0.0)), "b = 0 rejected");
  CHECK(rejected(&j, act(DT_ACT_COMP_ADD, 0, 0, NAN, 5.0, 0.0)), "NaN logN rejected");
  CHECK(rejected(&j, act(DT_ACT_COMP_SET, 2, 0, 13.0, 5.0, 0.0)), "comp-set out of range rejected");
  CHECK(rejected(&j, act(DT_ACT_COMP_REMOVE, -1, 0, 0, 0, 0)), "negative index rejected");
  a = act(DT_ACT_FREEZE, 1, DT_FREEZE_B, 0, 0, 0);
  CHECK(dt_judgement_apply(&j, &a) == DT_OK && j.frozen[1] == DT_FREEZE_B, "freeze b of component 2");
  CHECK(rejected(&j, act(DT_ACT_FREEZE, 1, 8, 0, 0, 0)), "unknown freeze bit rejected");
  a = act(DT_ACT_COMP_REMOVE, 0, 0, 0, 0, 0);
  CHECK(dt_judgement_apply(&j, &a) == DT_OK && j.ncomp == 1 && j.comp[0].v == -20.0 &&
            j.frozen[0] == DT_FREEZE_B && j.frozen[1] == 0,
        "comp-remove shifts the rest, with their freezes");
  a = act(DT_ACT_COMP_SET, 0, 0, 13.2, 6.0, -25.0);
  CHECK(dt_judgement_apply(&j, &a) == DT_OK && j.comp[0].logN == 13.2 && j.comp[0].v == -25.0,
        "comp-set (a nudge)");
  int filled = 1;
  for (int i = 1; i < DT_MAX_COMP; i++) {
    a = act(DT_ACT_COMP_ADD, 0, 0, 12.0, 8.0, 10.0 * i);
    if (dt_judgement_apply(&j, &a) != DT_OK) filled = 0;
  }
  CHECK(filled && j.ncomp == DT_MAX_COMP, "up to DT_MAX_COMP components");
  CHECK(rejected(&j, act(DT_ACT_COMP_ADD, 0, 0, 12.0, 8.0, 0.0)), "one too many rejected");

  /* windows */
  dt_judgement w;
  dt_judgement_init(&w);
  a = act(DT_ACT_WINDOW_ADD, 0, 0, 5860.0, 5870.0, 0);
  CHECK(dt_judgement_apply(&w, &a) == DT_OK && w.nwin == 1 && w.win[0].lo == 5860.0, "window-add");
  CHECK(rejected(&w, act(DT_ACT_WINDOW_ADD, 0, 0, 5870.0, 5860.0, 0)), "reversed window rejected");
  a = act(DT_ACT_WINDOW_ADD, 0, 0, 5910.0, 5920.0, 0);
  dt_judgement_apply(&w, &a);
  a = act(DT_ACT_WINDOW_REMOVE, 0, 0, 0, 0, 0);
  CHECK(dt_judgement_apply(&w, &a) == DT_OK && w.nwin == 1 && w.win[0].lo == 5910.0, "window-remove");
  CHECK(rejected(&w, act(DT_ACT_WINDOW_REMOVE, 1, 0, 0, 0, 0)), "window index out of range rejected");

  /* settings */
  a = act(DT_ACT_TIE_B, 0, 1, 0, 0, 0);
  CHECK(dt_judgement_apply(&w, &a) == DT_OK && w.tie_b == 1, "tie-b");
  CHECK(rejected(&w, act(DT_ACT_TIE_B, 0, 2, 0, 0, 0)), "tie-b 2 rejected");
  a = act(DT_ACT_CONT_ORDER, 0, -1, 0, 0, 0);
  CHECK(dt_judgement_apply(&w, &a) == DT_OK && w.cont_order == -1, "continuum fixed at 1 (order -1)");
  CHECK(rejected(&w, act(DT_ACT_CONT_ORDER, 0, DT_MAX_CONT, 0, 0, 0)), "order too high rejected");
  a = act(DT_ACT_RESOLUTION, 0, 0, 0.0, 45.0, 0);
  CHECK(dt_judgement_apply(&w, &a) == DT_OK && w.resolution == 0 && w.fwhm_kms == 45.0, "resolution by FWHM");
  CHECK(rejected(&w, act(DT_ACT_RESOLUTION, 0, 0, -1.0, 0, 0)), "negative R rejected");
  a = act(DT_ACT_VSYS, 0, 0, 512.5, 0, 0);
  CHECK(dt_judgement_apply(&w, &a) == DT_OK && w.vsys == 512.5, "vsys");
  a = act(DT_ACT_VWINDOW, 0, 0, -300, 200, 0);
  CHECK(dt_judgement_apply(&w, &a) == DT_OK && w.vlo == -300 && w.vhi == 200, "velocity window");
  CHECK(rejected(&w, act(DT_ACT_VWINDOW, 0, 0, 200, 200, 0)), "empty velocity window rejected");
  a = act(DT_ACT_DOUBLET, 0, 0, 0, 0, 0);
  strcpy(a.text, "CaII");
  CHECK(dt_judgement_apply(&w, &a) == DT_OK && !strcmp(w.doublet, "CaII"), "doublet");
  a.text[0] = '\0';
  CHECK(rejected(&w, a), "empty doublet name rejected");
  strcpy(a.text, "a-name-much-too-long");
  CHECK(rejected(&w, a), "overlong doublet name rejected");

  /* fit, verdict, note and has_fit */
  dt_judgement f;
  dt_judgement_init(&f);
  a = act(DT_ACT_COMP_ADD, 0, 0, 12.5, 10.0, 300.0);
  dt_judgement_apply(&f, &a);
  dt_action fa;
  dt_action_init(&fa, DT_ACT_FIT);
  fa.fit.status = DT_OK;
  fa.fit.ncomp = 1;
  fa.fit.comp[0] = (dt_component){12.7, 14.0, 305.0};
  fa.fit.err[0] = (dt_component){0.1, 2.0, 1.5};
  fa.fit.chi2_red = 1.05;
  CHECK(dt_judgement_apply(&f, &fa) == DT_OK && f.has_fit && f.comp[0].logN == 12.7 &&
            f.comp[0].v == 305.0 && f.fit.err[0].b == 2.0,
        "fit: components take the fitted values");
  a = act(DT_ACT_VERDICT, 0, DT_VERDICT_DETECTED, 0, 0, 0);
  CHECK(dt_judgement_apply(&f, &a) == DT_OK && f.verdict == DT_VERDICT_DETECTED && f.has_fit,
        "verdict keeps the fit");
  CHECK(rejected(&f, act(DT_ACT_VERDICT, 0, 9, 0, 0, 0)), "unknown verdict rejected");
  dt_action na;
  dt_action_init(&na, DT_ACT_NOTE);
  strcpy(na.text, "sky residual near 5893");
  CHECK(dt_judgement_apply(&f, &na) == DT_OK && !strcmp(f.note, "sky residual near 5893") && f.has_fit,
        "note replaces the note and keeps the fit");
  dt_judgement keep = f;
  a = act(DT_ACT_COMP_SET, 0, 0, 12.8, 14.0, 305.0);
  CHECK(dt_judgement_apply(&f, &a) == DT_OK && !f.has_fit, "a nudge clears the fit");
  fa.fit.status = DT_ENOCONV;
  fa.fit.comp[0] = (dt_component){20.0, 1.0, 0.0};
  CHECK(dt_judgement_apply(&f, &fa) == DT_OK && f.has_fit && f.fit.status == DT_ENOCONV &&
            f.comp[0].logN == 12.8,
        "a failed fit is recorded and leaves the components");
  fa.fit.ncomp = 2;
  CHECK(rejected(&f, fa), "fit with another number of components rejected");

  /* restore and sameness */
  dt_action ra;
  dt_action_init(&ra, DT_ACT_RESTORE);
  ra.state = &keep;
  CHECK(dt_judgement_apply(&f, &ra) == DT_OK && dt_judgement_same(&f, &keep), "restore (undo)");
  dt_judgement bad = keep;
  bad.ncomp = DT_MAX_COMP + 1;
  ra.state = &bad;
  CHECK(rejected(&f, ra), "restore of an impossible state rejected");
  ra.state = NULL;
  CHECK(rejected(&f, ra), "restore without a state rejected");
  dt_judgement other = keep;
  other.note[0] = 'S';
  CHECK(!dt_judgement_same(&keep, &other), "a different note is a different state");
  other = keep;
  other.fit.chi2_red = 1.06;
  CHECK(!dt_judgement_same(&keep, &other), "a different fit is a different state");
  other.has_fit = 0;
  keep.has_fit = 0;
  CHECK(dt_judgement_same(&keep, &other), "without a fit the fit values do not matter");
  dt_action unknown;
  dt_action_init(&unknown, DT_ACT__COUNT);
  CHECK(rejected(&f, unknown), "unknown action kind rejected");
  return dt_test_done();
}
