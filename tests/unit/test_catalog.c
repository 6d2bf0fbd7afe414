/* Survey catalogues (catalog.h): reading fit/export CSV tables, grouping
 * rows into sightlines, the verdict's precedence, the counting rule, joins
 * and the errors for bad input. */
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>

#include "doubletty/catalog.h"
#include "harness.h"

static char dir[64];

static const char *put(const char *name, const char *text) {
  static char path[128];
  snprintf(path, sizeof path, "%s/%s", dir, name);
  FILE *f = fopen(path, "w");
  fputs(text, f);
  fclose(f);
  return path;
}

/* A fit CSV in the newer layout: system column, W_limit_mA, positions. */
static const char *FIT =
    "# program=doubletty fit\n"
    "# limit-sigma=3\n"
    "index,file,name,doublet,system,status,ncomp,component,v_kms,v_err,logN,logN_err,W_mA,W_limit_mA,"
    "logN_aod,logN_limit,ra_deg,dec_deg,suggested,reason\n"
    "0,a.fits,A,NaI,target,ok,2,1,10,2,12.0,0.1,300,,12.2,,150.0,2.0,detected,\"doublet, confirmed\"\n"
    "0,a.fits,A,NaI,target,ok,2,2,40,4,12.0,0.1,300,,12.2,,150.0,2.0,detected,\"doublet, confirmed\"\n"
    "0,a.fits,A,NaI,milky-way,ok,1,1,0,1,12.5,0.1,500,,12.5,,150.0,2.0,detected,\n"
    "1,b.fits,B,NaI,target,ok,0,,,,,,20,60,,11.9,150.1,2.0,not-detected,no absorption\n"
    "2,c.fits,C,NaI,target,ok,0,,,,,,20,250,,12.6,150.2,2.0,not-detected,no absorption\n"
    "3,d.fits,D,NaI,target,ok,1,1,-5,3,11.5,0.2,80,,11.4,,150.3,2.0,detected,weak\n"
    "4,e.fits,E,NaI,target,failed,0,,,,,,,,,,150.4,2.0,unusable,fit failed\n"
    "5,f.fits,F,NaI,target,ok,1,1,5,3,11.7,0.2,90,,11.6,,150.5,2.0,unsure,one line only\n";

int main(void) {
  snprintf(dir, sizeof dir, "/tmp/dt-test.catalogXXXXXX");
  CHECK(mkdtemp(dir) != NULL, "temporary directory");
  dt_catalog c;
  dt_err e;
  dt_catalog_init(&c);
  CHECK(dt_catalog_read(&c, put("fit.csv", FIT), &e) == DT_OK, "fit CSV reads (%s %s)", e.where, e.what);
  CHECK(c.n == 7, "7 sightlines: A twice (two systems), B..F (got %zu)", c.n);
  CHECK(c.s[0].ncomp == 2 && c.s[0].comp[1].v_kms == 40, "A target has its two components");
  CHECK(!strcmp(c.s[1].system, "milky-way") && c.s[1].ncomp == 1, "A milky-way is its own sightline");
  CHECK(c.s[2].ncomp == 0 && c.s[2].W_limit_mA == 60 && c.s[2].verdict == DT_VERDICT_NOT_DETECTED,
        "B: no components, limit 60 mA, not detected");
  CHECK(!strcmp(dt_catalog_text(&c, 0, "reason"), "doublet, confirmed"), "quoted field with a comma");
  /* log10(10^12 + 10^12) = 12.30103 */
  CHECK_CLOSE(dt_sightline_logN(&c.s[0]), 12 + log10(2.0), 1e-12, "total log N of two components");
  double v, sv;
  CHECK(dt_sightline_velocity(&c, 0, DT_VELOCITY_MEAN, &v, &sv, &e) == DT_OK, "mean velocity");
  CHECK_CLOSE(v, 25, 1e-12, "N-weighted mean of 10 and 40 with equal N");
  CHECK_CLOSE(sv, sqrt(4 + 16) / 2, 1e-12, "its error: sqrt(sum (w_i sigma_i)^2)");
  CHECK(dt_sightline_velocity(&c, 2, DT_VELOCITY_MEAN, &v, &sv, &e) == DT_ERANGE, "no components: no velocity");
  CHECK(dt_sightline_velocity(&c, 0, DT_VELOCITY_AOD, &v, &sv, &e) == DT_ENOTFOUND, "aod needs v_aod_kms");

  CHECK(dt_catalog_select(&c, NULL, NULL, &e) == DT_OK && c.n == 6, "target system: 6 sightlines");
  /* the counting rule at 100 mA: A detection (300), B non-detection (limit
   * 60), C left out (limit 250), D non-detection (80 < 100), E, F left out */
  static const dt_count want100[6] = {DT_COUNT_DETECTION, DT_COUNT_NONDETECTION, DT_COUNT_EXCLUDED,
                                      DT_COUNT_NONDETECTION, DT_COUNT_EXCLUDED, DT_COUNT_EXCLUDED};
  for (size_t i = 0; i < c.n; i++)
    CHECK(dt_sightline_count(&c.s[i], DT_THRESHOLD_W_MA, 100) == want100[i], "W >= 100 mA: %s", c.s[i].name);
  /* at 50 mA: D becomes a detection, B (limit 60 > 50) is left out */
  CHECK(dt_sightline_count(&c.s[3], DT_THRESHOLD_W_MA, 50) == DT_COUNT_DETECTION, "D detected at 50 mA");
  CHECK(dt_sightline_count(&c.s[1], DT_THRESHOLD_W_MA, 50) == DT_COUNT_EXCLUDED, "B left out at 50 mA");
  CHECK(dt_sightline_count(&c.s[1], DT_THRESHOLD_W_MA, 60) == DT_COUNT_NONDETECTION, "limit == threshold counts");
  CHECK(dt_sightline_count(&c.s[0], DT_THRESHOLD_LOGN, 12.3) == DT_COUNT_DETECTION, "A: log N 12.301 >= 12.3");
  CHECK(dt_sightline_count(&c.s[0], DT_THRESHOLD_LOGN, 12.31) == DT_COUNT_NONDETECTION, "A below 12.31");
  CHECK(dt_sightline_count(&c.s[2], DT_THRESHOLD_LOGN, 12.7) == DT_COUNT_NONDETECTION, "C limit 12.6 <= 12.7");
  CHECK(dt_sightline_count(&c.s[2], DT_THRESHOLD_NONE, 0) == DT_COUNT_NONDETECTION, "no threshold: verdict");

  /* a joined table */
  CHECK(dt_catalog_join(&c, put("with.csv", "name,b_kpc\nB,12.5\nA,3\nZ,9\n"), &e) == DT_OK, "join reads");
  double x;
  CHECK(dt_catalog_number(&c, 0, "b_kpc", &x, &e) == DT_OK && x == 3, "A's b_kpc joined");
  CHECK(dt_catalog_number(&c, 2, "b_kpc", &x, &e) == DT_OK && isnan(x), "C has no row: empty");
  CHECK(dt_catalog_number(&c, 0, "nothing", &x, &e) == DT_ENOTFOUND && strstr(e.what, "nothing"),
        "an unknown column is named: %s", e.what);
  CHECK(dt_catalog_has(&c, "W_limit_mA", &e), "W_limit_mA present");
  dt_catalog_free(&c);

  /* a joined table naming a sightline twice: refused, unless both rows say
   * the same (a sightline listed once per doublet) */
  dt_catalog_init(&c);
  CHECK(dt_catalog_read(&c, put("c2.csv", "name,doublet,system,component,W_mA,W_limit_mA,suggested\n"
                                          "A,NaI,target,,10,40,not-detected\n"), &e) == DT_OK, "read again");
  CHECK(dt_catalog_join(&c, put("w2.csv", "name,b_kpc\nA,3\nA,4\n"), &e) == DT_EFORMAT && strstr(e.what, "again"),
        "a name twice with different values is refused: %s", e.what);
  CHECK(dt_catalog_join(&c, put("w3.csv", "name,b_kpc\nA,3\nA,3\n"), &e) == DT_OK &&
            dt_catalog_number(&c, 0, "b_kpc", &x, &e) == DT_OK && x == 3,
        "the same row twice is one row");
  dt_catalog_free(&c);

  /* export layout: verdict over suggested; W_lim_mA accepted; no system column */
  dt_catalog_init(&c);
  CHECK(dt_catalog_read(&c, put("exp.csv",
                                "file,name,verdict,doublet,component,v_kms,v_err,logN,logN_err,W_mA,W_lim_mA,suggested\n"
                                "x.fits,X,not-detected,NaI,0,,,,,10,40,detected\n"
                                "y.fits,Y,,NaI,1,3,1,12,0.1,200,,detected\n"), &e) == DT_OK,
        "export CSV reads (%s)", e.what);
  CHECK(c.n == 2 && c.s[0].verdict == DT_VERDICT_NOT_DETECTED, "the session's verdict wins over suggested");
  CHECK(c.s[1].verdict == DT_VERDICT_DETECTED, "an empty verdict falls back to suggested");
  CHECK(c.s[0].W_limit_mA == 40 && c.s[0].ncomp == 0, "W_lim_mA read as the limit; component 0 is none");
  CHECK(!strcmp(c.s[0].system, "target"), "no system column: target");
  CHECK(!dt_catalog_has(&c, "ra_deg", &e) && strstr(e.what, "ra_deg") && strstr(e.where, "exp.csv"),
        "a missing column names file and column");
  /* the same sightline again, from another file */
  CHECK(dt_catalog_read(&c, put("exp2.csv", "name,suggested,doublet\nY,detected,NaI\n"), &e) == DT_EFORMAT &&
            strstr(e.what, "exp.csv"), "a repeated sightline names the first place: %s", e.what);
  CHECK(c.n == 2, "the bad file added nothing");
  dt_catalog_free(&c);

  /* bad inputs */
  dt_catalog_init(&c);
  CHECK(dt_catalog_read(&c, put("bad1.csv", "name,suggested\nA,maybe\n"), &e) == DT_EFORMAT &&
            strstr(e.where, "line 2"), "unknown verdict: %s: %s", e.where, e.what);
  CHECK(dt_catalog_read(&c, put("bad2.csv", "name,W_mA\nA,1\n"), &e) == DT_ENOTFOUND, "no verdict column");
  CHECK(dt_catalog_read(&c, put("bad3.csv", "name,suggested,W_mA\nA,detected,abc\n"), &e) == DT_EFORMAT &&
            strstr(e.where, "column W_mA"), "a bad number: %s: %s", e.where, e.what);
  CHECK(dt_catalog_read(&c, put("bad4.csv", "name,suggested\nA,detected,3\n"), &e) == DT_EFORMAT,
        "too many fields");
  CHECK(dt_catalog_read(&c, put("bad5.csv", "name,suggested\n\"A,detected\n"), &e) == DT_EFORMAT,
        "an open quote");
  CHECK(dt_catalog_read(&c, put("bad6.csv", "# only comments\n"), &e) == DT_EFORMAT, "no header");
  CHECK(dt_catalog_read(&c, "/nonexistent/x.csv", &e) == DT_EIO, "a missing file");
  CHECK(dt_catalog_read(&c, put("two.csv", "name,suggested,doublet\nA,detected,NaI\nB,detected,CaII\n"), &e) ==
            DT_OK, "two doublets read");
  CHECK(dt_catalog_select(&c, NULL, NULL, &e) == DT_EINVAL && strstr(e.what, "CaII"), "two doublets: %s", e.what);
  dt_catalog_free(&c);
  char cmd[128];
  snprintf(cmd, sizeof cmd, "rm -rf %s", dir);
  if (system(cmd) != 0) return 1;
  return dt_test_done();
}
