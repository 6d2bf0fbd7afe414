/* The session core with absorber systems, without a terminal: a sightline
 * at vsys 512 km/s whose only gas is the Milky Way's gets two systems, the
 * window widened to hold both, the first pass suggested per system (the
 * target not detected, the Milky Way detected); the verdict of the selected
 * system is recorded with its name, undone and redone, and replayed; a
 * window of the user leaves the Milky Way out (noted); a session file of
 * format version 2 refuses another system's verdict with a message and
 * takes the target's. */
#include <gsl/gsl_randist.h>
#include <gsl/gsl_rng.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>

#include "doubletty/num.h"
#include "doubletty/session.h"
#include "fixtures.h"
#include "harness.h"

/* Na I D, Morton (2003, ApJS 149, 205). */
static const char table[] = "NaI 5891.5833 0.6408 6.16e7 5897.5581 0.3201 6.14e7 Morton (2003) ApJS 149, 205\n";

/* Gas at rest in the observer's frame (the Milky Way's): Gaussian optical
 * depths at the lines' own wavelengths, central depths in the ratio of
 * f lambda (2.0 for Na I D, Morton 2003), b 8 km/s, S/N 50. */
static void write_spectrum(const char *path) {
  FILE *f = fopen(path, "w");
  gsl_rng *r = gsl_rng_alloc(gsl_rng_mt19937);
  gsl_rng_set(r, 512);
  const double l0[2] = {5891.5833, 5897.5581}, tau0[2] = {1.0, 0.5}, c = 299792.458;
  for (double w = 5850; w <= 5950; w += 0.05) {
    double tau = 0;
    for (int k = 0; k < 2; k++) {
      double v = (w / l0[k] - 1) * c;
      tau += tau0[k] * exp(-(v * v) / (8.0 * 8.0));
    }
    char a[40], b[40];
    dt_num_format(a, sizeof a, w);
    dt_num_format(b, sizeof b, 100.0 * exp(-tau) + gsl_ran_gaussian(r, 2.0));
    fprintf(f, "%s %s 2\n", a, b);
  }
  gsl_rng_free(r);
  fclose(f);
}

static void target(dt_session_target *t, const char *path) {
  dt_session_target_init(t, path, path, 0);
  t->initial.resolution = 20000;
  t->initial.vsys = 512;
}

static int file_has(const char *path, const char *text) {
  size_t n;
  char *b = (char *)slurp(path, &n);
  int ok = b && strstr(b, text) != NULL;
  free(b);
  return ok;
}

int main(void) {
  char dir[] = "/tmp/dt-sessys-XXXXXX";
  if (!mkdtemp(dir)) return 1;
  char spec[128], sess[128], old[128];
  snprintf(spec, sizeof spec, "%s/s.txt", dir);
  snprintf(sess, sizeof sess, "%s/a.session", dir);
  snprintf(old, sizeof old, "%s/v2.session", dir);
  write_spectrum(spec);
  dt_atomic *at = dt_atomic_new();
  CHECK(dt_atomic_parse(at, table, sizeof table - 1, NULL) == DT_OK, "atomic table");
  dt_journal *jn = NULL;
  CHECK(dt_journal_open(sess, DT_JOURNAL_RW, "tester", &jn, NULL) == DT_OK, "session file opened");
  dt_session *ss = dt_session_alloc(at, jn);

  dt_session_target t;
  target(&t, spec);
  CHECK(dt_session_load(ss, &t) == DT_OK && ss->loaded, "loaded");
  CHECK(ss->systems.n == 2 && !strcmp(ss->systems.sys[0].name, "target") &&
            !strcmp(ss->systems.sys[1].name, "milky-way"),
        "two systems: target, milky-way");
  /* -660.87 km/s: v_obs = -150 seen from vsys 512 (astropy u.doppler_optical, test_systems.c) */
  CHECK(ss->j.vlo <= -660.87 - 150 && ss->j.vhi >= 600, "the window covers the Milky Way (%g..%g)",
        ss->j.vlo, ss->j.vhi);
  CHECK(ss->j.nsys == 2, "the state carries the systems");
  CHECK(ss->has_sysres && ss->sysres[1].suggested == DT_VERDICT_DETECTED,
        "milky-way suggested detected (%s)", ss->has_sysres ? ss->sysres[1].reason : "-");
  CHECK(ss->sysres[0].suggested == DT_VERDICT_NOT_DETECTED && ss->suggested == DT_VERDICT_NOT_DETECTED,
        "the target suggested not-detected (%s)", ss->reason);
  CHECK(ss->sysres[0].ncomp == 0 && ss->sysres[1].ncomp >= 1, "the components belong to the Milky Way");
  CHECK(isfinite(ss->sysres[0].line[0].W_limit) && ss->sysres[0].line[0].W_limit > 0,
        "the target carries its limit");

  /* the verdict of the selected system */
  CHECK(dt_session_select_system(ss, 1) == DT_OK && ss->selsys == 1, "s selects milky-way");
  CHECK(dt_session_verdict(ss, DT_VERDICT_DETECTED) == DT_OK, "milky-way judged");
  CHECK(ss->j.verdict == DT_VERDICT_NONE &&
            dt_judgement_system_verdict(&ss->j, "milky-way") == DT_VERDICT_DETECTED,
        "the target's verdict untouched, the Milky Way's recorded");
  CHECK(file_has(sess, "\tsystem=milky-way\t=>\t") && file_has(sess, "\tsystems=target:-300:300,milky-way:"),
        "the file has the system's verdict and the systems");
  CHECK(dt_session_undo(ss) == DT_OK && ss->j.nsysv == 0, "undo takes it back");
  CHECK(dt_session_redo(ss) == DT_OK && ss->j.nsysv == 1, "redo brings it again");
  CHECK(dt_session_select_system(ss, 1) == DT_OK && ss->selsys == 0, "s again: the target");
  CHECK(dt_session_verdict(ss, DT_VERDICT_NOT_DETECTED) == DT_OK && ss->j.verdict == DT_VERDICT_NOT_DETECTED,
        "the target judged");
  /* the Milky Way's absorption is the Milky Way's, not the target's */
  CHECK(ss->has_sysmeas && ss->sysmeas[1].line[0].W > 5 * ss->sysmeas[1].line[0].W_err,
        "milky-way measured: W %.1f +- %.1f mA", 1e3 * ss->sysmeas[1].line[0].W, 1e3 * ss->sysmeas[1].line[0].W_err);
  const dt_journal_entry *en = dt_journal_lookup(jn, spec, 0, 0);
  CHECK(en && en->has_meas && en->meas.line[0].w == ss->sysmeas[0].line[0].W &&
            en->meas.line[0].w != ss->out.line[0].W,
        "the recorded W is the target system's (%.1f mA), not the whole spectrum's (%.1f mA)",
        en ? 1e3 * en->meas.line[0].w : NAN, 1e3 * ss->out.line[0].W);
  dt_session_free(ss);
  dt_journal_close(jn);

  /* replay */
  CHECK(dt_journal_open(sess, DT_JOURNAL_RW, "tester", &jn, NULL) == DT_OK && dt_journal_warning_count(jn) == 0,
        "reopened without warnings");
  ss = dt_session_alloc(at, jn);
  CHECK(dt_session_load(ss, &t) == DT_OK && ss->systems.n == 2 && ss->j.verdict == DT_VERDICT_NOT_DETECTED &&
            dt_judgement_system_verdict(&ss->j, "milky-way") == DT_VERDICT_DETECTED,
        "resumed: both verdicts, both systems");
  dt_session_free(ss);
  dt_journal_close(jn);

  /* a window of the user: the Milky Way outside it is left out, noted */
  ss = dt_session_alloc(at, NULL);
  t.has_window = 1;
  t.initial.vlo = -400;
  t.initial.vhi = 400;
  CHECK(dt_session_load(ss, &t) == DT_OK && ss->systems.n == 1 && strstr(ss->systems.note, "outside"),
        "window -400:400: the target only (%s)", ss->systems.note);
  CHECK(dt_session_select_system(ss, 1) == DT_ENOTFOUND, "s with one system says so");
  dt_session_free(ss);
  t.has_window = 0;
  t.initial.vlo = -600;
  t.initial.vhi = 600;

  /* a session file of format version 2 */
  FILE *f = fopen(old, "w");
  fputs("doubletty-session 2\tcreated=2025-06-01T10:00:00.000Z\tprogram=doubletty 0.1.0\n", f);
  fclose(f);
  CHECK(dt_journal_open(old, DT_JOURNAL_RW, "tester", &jn, NULL) == DT_OK && dt_journal_version(jn) == 2,
        "a version-2 file opens");
  ss = dt_session_alloc(at, jn);
  CHECK(dt_session_load(ss, &t) == DT_OK && ss->systems.n == 2, "loaded with two systems");
  dt_session_select_system(ss, 1);
  CHECK(dt_session_verdict(ss, DT_VERDICT_DETECTED) == DT_EINVAL && strstr(ss->msg, "format version 2") &&
            strstr(ss->msg, "new session file"),
        "another system's verdict refused: %s", ss->msg);
  CHECK(dt_session_writable(ss), "... and the session stays writable");
  dt_session_select_system(ss, 1);
  CHECK(dt_session_verdict(ss, DT_VERDICT_NOT_DETECTED) == DT_OK, "the target's verdict is taken");
  dt_session_free(ss);
  dt_journal_close(jn);
  CHECK(file_has(old, "doubletty-session 2\t") && !file_has(old, "system") && file_has(old, "verdict=not-detected"),
        "the file stays version 2, without system fields");

  dt_atomic_free(at);
  unlink(spec);
  unlink(sess);
  unlink(old);
  rmdir(dir);
  return dt_test_done();
}
