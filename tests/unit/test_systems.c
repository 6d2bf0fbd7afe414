/* Absorber systems: the default set (target, Milky Way in the frame of
 * vsys), user systems, overlap rules, the fit window, which system a
 * component belongs to, target-list fields. */
#include <math.h>
#include <stdio.h>
#include <string.h>

#include "doubletty/systems.h"
#include "doubletty/targets.h"
#include "harness.h"

static dt_system sys(const char *name, double lo, double hi) {
  dt_system s;
  memset(&s, 0, sizeof s);
  snprintf(s.name, sizeof s.name, "%s", name);
  s.vlo = lo;
  s.vhi = hi;
  return s;
}

int main(void) {
  dt_err e;
  dt_system_opts o;
  dt_system_set set;

  /* Observer-frame velocities seen from vsys: the optical Doppler
   * convention relative to the wavelength of the rest frame.  References:
   * astropy 5.2 u.doppler_optical(lambda0 (1 + vsys/c)) applied to
   * lambda0 (1 + v_obs/c) (computed with /usr/bin/python3, astropy 5.2.1). */
  CHECK_CLOSE(dt_system_obs_to_rel(-150, 512), -660.8713321065768, 1e-8, "v_obs -150 at vsys 512");
  CHECK_CLOSE(dt_system_obs_to_rel(150, 512), -361.3828130250291, 1e-8, "v_obs +150 at vsys 512");
  CHECK_CLOSE(dt_system_obs_to_rel(0, 512), -511.12707256581956, 1e-8, "v_obs 0 at vsys 512");
  CHECK_CLOSE(dt_system_obs_to_rel(0, -3000), 3030.3242207050957, 1e-8, "v_obs 0 at vsys -3000");
  CHECK_CLOSE(dt_system_obs_to_rel(150, 12000), -11393.927390315506, 1e-7, "v_obs 150 at vsys 12000");

  /* defaults at vsys 512: target -300..300 and the Milky Way apart */
  dt_system_opts_init(&o);
  CHECK(dt_systems_build(&o, 512, &set, &e) == DT_OK && set.n == 2, "vsys 512: two systems");
  CHECK(!strcmp(set.sys[0].name, "target") && set.sys[0].vlo == -300 && set.sys[0].vhi == 300,
        "target -300..300");
  CHECK(!strcmp(set.sys[1].name, "milky-way") && !set.note[0], "milky-way present, no note");
  CHECK_CLOSE(set.sys[1].vlo, -660.8713321065768, 1e-8, "milky-way from v_obs -150");
  CHECK_CLOSE(set.sys[1].vhi, -361.3828130250291, 1e-8, "milky-way to v_obs +150");

  /* overlap: at vsys 0 (and at vsys 400: -550..-250 meets -300) no Milky Way, with a note */
  CHECK(dt_systems_build(&o, 0, &set, &e) == DT_OK && set.n == 1 && strstr(set.note, "milky-way") &&
            strstr(set.note, "target"),
        "vsys 0: milky-way in the target's range, noted: '%s'", set.note);
  CHECK(dt_systems_build(&o, 400, &set, &e) == DT_OK && set.n == 1, "vsys 400: overlap at the edge");
  CHECK(dt_systems_build(&o, 460, &set, &e) == DT_OK && set.n == 2, "vsys 460: apart");
  o.has_target = 1;
  o.target_vlo = -100;
  o.target_vhi = 100;
  CHECK(dt_systems_build(&o, 300, &set, &e) == DT_OK && set.n == 2,
        "narrower target range: vsys 300 separates the Milky Way");
  dt_system_opts_init(&o);
  o.no_mw = 1;
  CHECK(dt_systems_build(&o, 512, &set, &e) == DT_OK && set.n == 1 && !set.note[0], "no_mw");

  /* user systems: parsed, checked, ordered after the target */
  dt_system s;
  CHECK(dt_system_parse("mgii-1:-1200:-900", &s, &e) == DT_OK && !strcmp(s.name, "mgii-1") &&
            s.vlo == -1200 && s.vhi == -900, "parse NAME:VLO:VHI");
  CHECK(dt_system_parse("x:5:1", &s, &e) == DT_EINVAL && strstr(e.what, "empty"), "VLO > VHI refused");
  CHECK(dt_system_parse("x:a:1", &s, &e) == DT_EINVAL, "not a number refused");
  CHECK(dt_system_parse("bad name:1:2", &s, &e) == DT_EINVAL && strstr(e.what, "name"), "bad name refused");
  CHECK(dt_system_parse("x:1", &s, &e) == DT_EINVAL, "two fields refused");
  dt_system_opts_init(&o);
  s = sys("target", 400, 500);
  CHECK(dt_system_opts_add(&o, &s, &e) == DT_EINVAL && strstr(e.what, "reserved"), "reserved name");
  s = sys("abs", 400, 500);
  CHECK(dt_system_opts_add(&o, &s, &e) == DT_OK && dt_system_opts_add(&o, &s, &e) == DT_EINVAL,
        "a repeated name refused");
  CHECK(dt_systems_build(&o, 512, &set, &e) == DT_OK && set.n == 3 &&
            !strcmp(set.sys[1].name, "abs") && !strcmp(set.sys[2].name, "milky-way"),
        "order: target, user, milky-way");
  s = sys("abs2", 250, 450);
  dt_system_opts_add(&o, &s, &e);
  CHECK(dt_systems_build(&o, 512, &set, &e) == DT_EINVAL && strstr(e.what, "overlaps"),
        "overlapping user systems refused: %s", e.what);
  dt_system_opts_init(&o);
  s = sys("near-mw", -700, -600);
  dt_system_opts_add(&o, &s, &e);
  CHECK(dt_systems_build(&o, 512, &set, &e) == DT_OK && set.n == 2 &&
            dt_systems_find(&set, "milky-way") < 0 && strstr(set.note, "near-mw"),
        "milky-way meeting a user system is left out, noted");

  /* membership: inside a range, else the nearest, the earlier on a tie */
  dt_system_opts_init(&o);
  dt_systems_build(&o, 512, &set, &e); /* target -300..300, mw -661..-361 */
  CHECK(dt_systems_of(&set, 0) == 0 && dt_systems_of(&set, -512) == 1, "inside");
  CHECK(dt_systems_of(&set, -320) == 0 && dt_systems_of(&set, -350) == 1, "between: the nearest");
  dt_system_set two = set;
  two.sys[1].vlo = -500;
  two.sys[1].vhi = -400;  /* target -300..300: -350 lies 50 from both */
  CHECK(dt_systems_of(&two, -350) == 0, "exactly between: the earlier (target)");
  CHECK(dt_systems_of(&set, 900) == 0 && dt_systems_of(&set, -900) == 1, "outside all: the nearest");

  /* the fit window covers every system plus the margin */
  double lo, hi;
  dt_systems_window(&set, 100.0, -600, 600, &lo, &hi);
  CHECK_CLOSE(lo, set.sys[1].vlo - 200.0, 1e-9, "window low: milky-way - 2 FWHM");
  CHECK(hi == 600, "window high: the default");
  dt_systems_window(&set, 10.0, -600, 600, &lo, &hi);
  CHECK_CLOSE(lo, set.sys[1].vlo - 150.0, 1e-9, "window low: milky-way - 150 km/s");
  /* a user window: systems clipped, one outside dropped */
  dt_systems_clip(&set, -400, 400);
  CHECK(set.n == 1 && strstr(set.note, "outside"), "clip: milky-way outside -400:400 left out");
  dt_systems_build(&o, 512, &set, &e);
  dt_systems_clip(&set, -200, 200);
  CHECK(set.sys[0].vlo == -200 && set.sys[0].vhi == 200, "clip: the target to the window");

  /* the target list fields */
  dt_target_spec t;
  int got;
  CHECK(dt_targets_parse_line("a.fits vsys=512 target-window=-200:250 system=mg:-1500:-1200 "
                              "system=ca:900:1100", NULL, 3, &t, &got, &e) == DT_OK && got,
        "list line with systems parses");
  CHECK(t.systems.has_target && t.systems.target_vlo == -200 && t.systems.target_vhi == 250,
        "target-window");
  CHECK(t.systems.nextra == 2 && !strcmp(t.systems.extra[1].name, "ca") &&
            t.systems.extra[1].vhi == 1100, "two systems");
  CHECK(dt_targets_parse_line("a.fits system=mg:-1:1 system=mg:3:4", NULL, 3, &t, &got, &e) ==
            DT_EFORMAT && strstr(e.what, "twice") && !strcmp(e.where, "line 3"),
        "repeated system name: '%s'", e.what);
  CHECK(dt_targets_parse_line("a.fits system=mg:1", NULL, 4, &t, &got, &e) == DT_EFORMAT &&
            strstr(e.what, "NAME:VLO:VHI"), "malformed system: '%s'", e.what);
  CHECK(dt_targets_parse_line("a.fits target-window=5:1", NULL, 4, &t, &got, &e) == DT_EFORMAT &&
            strstr(e.what, "target-window"), "bad target-window: '%s'", e.what);
  CHECK(dt_targets_parse_line("a.fits target-window=-1:1 target-window=-2:2", NULL, 4, &t, &got,
                              &e) == DT_EFORMAT, "target-window twice");

  dt_systems_build(&o, 512, &set, &e);
  char buf[256];
  dt_systems_format(&set, buf, sizeof buf);
  CHECK(!strncmp(buf, "target:-300:300;milky-way:-660.87", 33), "format: %s", buf);
  return dt_test_done();
}
