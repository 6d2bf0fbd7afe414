/* Big inputs, scaled down to stay quick in the test suite, and the
 * generators of the full-size inputs for tests/bench/big_inputs.sh and
 * tests/scripts/big_inputs.sh.
 *
 * Checks (in process):
 *  - a FITS image of two million pixels reads completely, with the linear
 *    wavelength solution lambda = CRVAL1 + CDELT1 (p - CRPIX1) (FITS WCS
 *    Paper I, Greisen & Calabretta 2002, A&A 395, 1061) at the first and
 *    last pixels, and an analysis of its Na I window runs in a time that
 *    does not grow with the length of the spectrum;
 *  - a target list is streamed: reading a million-line list with
 *    dt_targets does not raise the peak memory of the process by more than
 *    a few megabytes, and the inspector's queue keeps 100 000 entries in a
 *    bounded number of bytes per entry;
 *  - a generated session (100 000 lines) replays without a warning into
 *    the final states its writer kept.
 *
 * Generators (full size in `make bench`):
 *   test_big_inputs --spectrum FILE NPIX
 *       a FITS image (float32 flux, an ERR extension, SPECRES 40000) of
 *       NPIX pixels from 3600 to 9800 A with a Na I doublet at rest;
 *   test_big_inputs --list DIR N SPECTRUM [FIELDS [LINKED]]
 *       DIR/targets.list naming N spectra s/specNNNNNNN.fits, each a
 *       symbolic link to SPECTRUM, with FIELDS (e.g. "vsys=512 R=3690")
 *       after each path; with LINKED (comma-separated 0-based indices)
 *       only those entries get their link -- a test that opens two of
 *       100 000 spectra need not make the other links, and any other
 *       spectrum the program tries to read is then missing;
 *   test_big_inputs --session FILE NLINES DIR SPECTRUM UNJUDGED
 *       a session of NLINES records over the spectra of --list DIR (ten
 *       records a spectrum: components, fits, nudges, a window, a note, a
 *       verdict), recorded under the names the inspector gives them
 *       (DIR/s/specNNNNNNN.fits#NaI, DIR absolute), with the SHA-256 of
 *       SPECTRUM; the last UNJUDGED spectra get no verdict. */
#include <errno.h>
#include <fitsio.h>
#include <gsl/gsl_randist.h>
#include <gsl/gsl_rng.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/resource.h>
#include <sys/stat.h>
#include <time.h>
#include <unistd.h>

#include "../../src/ui/queue.h"
#include "doubletty/analysis.h"
#include "doubletty/atomic.h"
#include "doubletty/digest.h"
#include "doubletty/journal.h"
#include "doubletty/model.h"
#include "doubletty/spectrum.h"
#include "doubletty/targets.h"
#include "harness.h"

static const char table[] =
    "NaI 5891.5833 0.6408 6.16e7 5897.5581 0.3201 6.14e7 Morton (2003) ApJS 149, 205\n";

#define WAVE0 3600.0
#define WAVE1 9800.0
#define SPEC_R 40000.0

static double now_s(void) {
  struct timespec ts;
  clock_gettime(CLOCK_MONOTONIC, &ts);
  return (double)ts.tv_sec + 1e-9 * (double)ts.tv_nsec;
}

static long peak_kb(void) {
  struct rusage ru;
  getrusage(RUSAGE_SELF, &ru);
  return ru.ru_maxrss; /* kilobytes on Linux */
}

/* ---- the spectrum ---- */

static int make_spectrum(const char *path, long npix) {
  dt_atomic *t = dt_atomic_new();
  dt_err e;
  if (!t || dt_atomic_parse(t, table, sizeof table - 1, &e) != DT_OK) return 1;
  double cdelt = (WAVE1 - WAVE0) / (double)(npix - 1);
  float *flux = malloc((size_t)npix * sizeof *flux), *err = malloc((size_t)npix * sizeof *err);
  if (!flux || !err) return 1;
  /* the doublet, through the model, on the pixels within +-40 A of it */
  long p0 = (long)((5850.0 - WAVE0) / cdelt), p1 = (long)((5940.0 - WAVE0) / cdelt);
  if (p0 < 0) p0 = 0;
  if (p1 > npix) p1 = npix;
  size_t nw = (size_t)(p1 - p0);
  double *w = malloc(nw * sizeof *w), *m = malloc(nw * sizeof *m);
  if (!w || !m) return 1;
  for (size_t i = 0; i < nw; i++) w[i] = WAVE0 + cdelt * (double)(p0 + (long)i);
  dt_model_config cfg;
  memset(&cfg, 0, sizeof cfg);
  cfg.doublet = dt_atomic_find(t, "NaI");
  cfg.resolution = SPEC_R;
  cfg.oversample = 1;
  dt_model *mod = dt_model_alloc(w, nw, &cfg, 2, &e);
  dt_component c[2] = {{12.6, 8.0, -30.0}, {12.1, 12.0, 25.0}};
  if (!mod || dt_model_eval(mod, c, 2, m, NULL, 0) != DT_OK) {
    fprintf(stderr, "model: %s\n", e.what);
    return 1;
  }
  gsl_rng *r = gsl_rng_alloc(gsl_rng_mt19937);
  gsl_rng_set(r, 77);
  for (long i = 0; i < npix; i++) {
    double cont = 100.0 * (1.0 + 0.2 * ((double)i / (double)npix - 0.5));
    double f = (i >= p0 && i < p1) ? m[i - p0] : 1.0;
    err[i] = (float)(cont / 40.0);
    flux[i] = (float)(cont * f + gsl_ran_gaussian_ziggurat(r, cont / 40.0));
  }
  gsl_rng_free(r);
  dt_model_free(mod);
  free(w);
  free(m);
  dt_atomic_free(t);

  char name[4200];
  snprintf(name, sizeof name, "!%s", path); /* '!': replace an existing file */
  fitsfile *f;
  int st = 0;
  long naxes[1] = {npix};
  fits_create_file(&f, name, &st);
  fits_create_img(f, FLOAT_IMG, 1, naxes, &st);
  double crval = WAVE0, crpix = 1.0, specres = SPEC_R;
  fits_update_key(f, TSTRING, "CTYPE1", "WAVE", "vacuum wavelength", &st);
  fits_update_key(f, TSTRING, "CUNIT1", "Angstrom", NULL, &st);
  fits_update_key(f, TDOUBLE, "CRVAL1", &crval, NULL, &st);
  fits_update_key(f, TDOUBLE, "CRPIX1", &crpix, NULL, &st);
  fits_update_key(f, TDOUBLE, "CDELT1", &cdelt, NULL, &st);
  fits_update_key(f, TDOUBLE, "SPECRES", &specres, "resolving power", &st);
  fits_update_key(f, TSTRING, "OBJECT", "BIG-SYNTHETIC", NULL, &st);
  fits_write_img(f, TFLOAT, 1, npix, flux, &st);
  fits_create_img(f, FLOAT_IMG, 1, naxes, &st);
  fits_update_key(f, TSTRING, "EXTNAME", "ERR", "1-sigma uncertainty", &st);
  fits_write_img(f, TFLOAT, 1, npix, err, &st);
  fits_close_file(f, &st);
  free(flux);
  free(err);
  if (st) {
    char txt[FLEN_STATUS];
    fits_get_errstatus(st, txt);
    fprintf(stderr, "%s: %s\n", path, txt);
    return 1;
  }
  return 0;
}

/* ---- the list ---- */

/* 1 when entry i is to be linked: every entry when linked is NULL, else
 * those named in the comma-separated list. */
static int linked_entry(const char *linked, long i) {
  if (!linked) return 1;
  for (const char *q = linked; *q;) {
    char *end;
    long k = strtol(q, &end, 10);
    if (end == q) return 0;
    if (k == i) return 1;
    q = *end == ',' ? end + 1 : end;
  }
  return 0;
}

static int make_list(const char *dir, long n, const char *spectrum, const char *fields,
                     const char *linked) {
  char p[4200], target[4096];
  if (spectrum[0] != '/') {
    if (!getcwd(target, sizeof target)) return 1;
    size_t k = strlen(target);
    snprintf(target + k, sizeof target - k, "/%s", spectrum);
  } else {
    snprintf(target, sizeof target, "%s", spectrum);
  }
  snprintf(p, sizeof p, "%s/s", dir);
  if (mkdir(p, 0755) != 0 && errno != EEXIST) {
    perror(p);
    return 1;
  }
  snprintf(p, sizeof p, "%s/targets.list", dir);
  FILE *f = fopen(p, "w");
  if (!f) {
    perror(p);
    return 1;
  }
  fprintf(f, "# %ld spectra (synthetic big-input test)\n", n);
  for (long i = 0; i < n; i++) {
    snprintf(p, sizeof p, "%s/s/spec%07ld.fits", dir, i);
    if (linked_entry(linked, i) && symlink(target, p) != 0 && errno != EEXIST) {
      perror(p);
      fclose(f);
      return 1;
    }
    fprintf(f, "s/spec%07ld.fits %s\n", i, fields ? fields : "");
  }
  return fclose(f) == 0 ? 0 : 1;
}

/* ---- the session ---- */

static void fake_fit(dt_judgement *j, gsl_rng *r, dt_action *a) {
  dt_action_init(a, DT_ACT_FIT);
  dt_fit_result *fr = &a->fit;
  memset(fr, 0, sizeof *fr);
  fr->status = DT_OK;
  fr->niter = 5 + (int)gsl_rng_uniform_int(r, 20);
  fr->ncomp = j->ncomp;
  for (size_t k = 0; k < j->ncomp; k++) {
    fr->comp[k] = j->comp[k];
    fr->comp[k].logN += 0.01 * gsl_ran_gaussian(r, 1.0);
    fr->comp[k].v += gsl_ran_gaussian(r, 1.0);
    fr->err[k].logN = 0.05;
    fr->err[k].b = 1.5;
    fr->err[k].v = 2.0;
  }
  fr->dof = 200;
  fr->chi2 = 200 + gsl_ran_gaussian(r, 20.0);
  fr->chi2_red = fr->chi2 / 200.0;
  fr->bic = fr->chi2 + 3.0 * (double)j->ncomp * log(203.0);
  fr->npix = 203;
}

/* Writes the session; keeps each spectrum's final state in *final (if
 * non-NULL, ntarg entries). */
static int write_session(const char *path, long nlines, const char *dir, const char *sha,
                         long unjudged, dt_judgement *final) {
  FILE *f = fopen(path, "w");
  if (!f) {
    perror(path);
    return 1;
  }
  fprintf(f, "doubletty-session 1\tcreated=2025-03-01T08:00:00.000Z\tprogram=doubletty test\n");
  long ntarg = nlines / 10;
  size_t cap = 1 << 16;
  char *buf = malloc(cap);
  gsl_rng *r = gsl_rng_alloc(gsl_rng_mt19937);
  gsl_rng_set(r, 4242);
  long written = 0;
  for (long ti = 0; ti < ntarg; ti++) {
    char key[4300];
    snprintf(key, sizeof key, "%s/s/spec%07ld.fits#NaI", dir, ti);
    dt_target t = {.path = key, .hdu = 0, .row = 0};
    snprintf(t.sha256, sizeof t.sha256, "%s", sha);
    /* a session identifies a spectrum by its file's digest: give each of these
     * (one file under many names) a digest of its own */
    snprintf(t.sha256 + 56, 9, "%08x", (unsigned)(ti & 0x7fffffff));
    dt_judgement j;
    dt_judgement_init(&j);
    j.vsys = 512;
    j.resolution = 3690;
    for (int step = 0; step < 10; step++) {
      dt_action a;
      int meas = 0;
      switch (step) {
      case 0:
        dt_action_init(&a, DT_ACT_COMP_ADD);
        a.x[0] = 12.0 + gsl_rng_uniform(r);
        a.x[1] = 10.0;
        a.x[2] = -100 + 200 * gsl_rng_uniform(r);
        break;
      case 1:
      case 4:
      case 8: fake_fit(&j, r, &a); meas = 1; break;
      case 2:
        dt_action_init(&a, DT_ACT_COMP_SET);
        a.index = 0;
        a.x[0] = j.comp[0].logN + 0.02;
        a.x[1] = j.comp[0].b + 0.5;
        a.x[2] = j.comp[0].v - 2;
        break;
      case 3:
        dt_action_init(&a, DT_ACT_WINDOW_ADD);
        a.x[0] = 5860.0 + gsl_rng_uniform(r);
        a.x[1] = a.x[0] + 5.0;
        break;
      case 5:
        dt_action_init(&a, DT_ACT_CONT_ORDER);
        a.ival = 1;
        break;
      case 6:
        dt_action_init(&a, DT_ACT_NOTE);
        snprintf(a.text, sizeof a.text, "checked against the sky spectrum; field %ld", ti % 97);
        break;
      case 7:
        dt_action_init(&a, DT_ACT_COMP_ADD);
        a.x[0] = 11.5;
        a.x[1] = 6.0;
        a.x[2] = j.comp[0].v + 40;
        break;
      default:
        if (ti >= ntarg - unjudged) {
          dt_action_init(&a, DT_ACT_FREEZE);
          a.index = 0;
          a.ival = DT_FREEZE_B;
        } else {
          dt_action_init(&a, DT_ACT_VERDICT);
          a.ival = 1 + (int)(ti % 3);
        }
        break;
      }
      if (dt_judgement_apply(&j, &a) != DT_OK) {
        fprintf(stderr, "generator: action %s refused\n", dt_action_name(a.kind));
        return 1;
      }
      dt_meas_summary m;
      dt_meas_summary_clear(&m);
      if (meas) {
        m.line[0].w = 0.3;
        m.line[0].w_err = 0.03;
        m.line[1].w = 0.18;
        m.line[1].w_err = 0.03;
        m.line[0].logN_aod = 12.4;
        m.line[0].logN_aod_err = 0.05;
        m.nsigma = 3;
        m.suggested = DT_VERDICT_DETECTED;
      }
      char tm[32];
      long sec = 8 * 3600 + written / 20;
      snprintf(tm, sizeof tm, "2025-03-%02ldT%02ld:%02ld:%02ld.%03ldZ", 1 + (sec / 86400) % 28,
               (sec / 3600) % 24, (sec / 60) % 60, sec % 60, written % 1000);
      size_t n = dt_journal_format(buf, cap, tm, "surveyor", &t, &a, &j, meas ? &m : NULL, step == 0, NULL);
      if (n >= cap) return 1;
      fwrite(buf, 1, n, f);
      written++;
    }
    if (final) final[ti] = j;
  }
  free(buf);
  gsl_rng_free(r);
  return fclose(f) == 0 ? 0 : 1;
}

static int make_session(const char *path, long nlines, const char *dir, const char *spectrum,
                        long unjudged) {
  char sha[DT_SHA256_HEX];
  dt_err e;
  if (dt_digest_file(spectrum, sha, &e) != DT_OK) {
    fprintf(stderr, "%s: %s\n", spectrum, e.what);
    return 1;
  }
  return write_session(path, nlines, dir, sha, unjudged, NULL);
}

/* ---- the scaled-down checks ---- */

static char tmpdir[64];

static void test_spectrum(void) {
  char p[128];
  snprintf(p, sizeof p, "%s/big.fits", tmpdir);
  const long npix = 2000000;
  double t0 = now_s();
  int rc = make_spectrum(p, npix);
  CHECK(rc == 0, "a %ld-pixel FITS spectrum written (%.2f s)", npix, now_s() - t0);
  if (rc) return;
  dt_spectrum *s = NULL;
  dt_err e;
  t0 = now_s();
  rc = dt_spectrum_read(p, NULL, &s, &e);
  double tread = now_s() - t0;
  CHECK(rc == DT_OK && s && s->n == (size_t)npix, "read back with every pixel (%zu, %.2f s)", s ? s->n : 0,
        tread);
  if (rc != DT_OK) return;
  /* FITS WCS Paper I: lambda(p) = CRVAL1 + CDELT1 (p - CRPIX1), p = 1..N */
  double cdelt = (WAVE1 - WAVE0) / (double)(npix - 1);
  CHECK_CLOSE(s->wave[0], WAVE0, 1e-9, "first pixel at CRVAL1");
  CHECK_CLOSE(s->wave[npix - 1], WAVE0 + cdelt * (double)(npix - 1), 1e-6, "last pixel at CRVAL1 + CDELT1 (N - 1)");
  CHECK(s->has_sigma && dt_spectrum_nmasked(s) == 0, "uncertainty found, nothing masked");
  CHECK(tread < 10.0, "reading 2 million pixels takes under 10 s (%.2f s)", tread);

  dt_atomic *t = dt_atomic_new();
  dt_atomic_parse(t, table, sizeof table - 1, &e);
  dt_analysis *a = dt_analysis_alloc(s, t);
  dt_judgement j;
  dt_judgement_init(&j);
  j.resolution = SPEC_R;
  j.vlo = -300;
  j.vhi = 300;
  j.ncomp = 2;
  j.comp[0] = (dt_component){12.5, 10.0, -25.0};
  j.comp[1] = (dt_component){12.0, 10.0, 20.0};
  dt_analysis_out out;
  t0 = now_s();
  rc = dt_analysis_run(a, &j, &out, &e);
  double tan = now_s() - t0;
  CHECK(rc == DT_OK, "the Na I window of the long spectrum analysed (%s, %zu pixels, %.2f s)",
        dt_status_str(rc), out.n, tan);
  CHECK(out.n < 100000, "only the window's pixels are selected (%zu of %ld)", out.n, npix);
  /* the components written by --spectrum, within 4 of the reported errors
     (six parameters: a 3-sigma miss somewhere has a 1.6% chance), and
     chi2 within 5 standard deviations of its dof (mean dof, variance 2 dof) */
  {
    const dt_component want[2] = {{12.6, 8.0, -30.0}, {12.1, 12.0, 25.0}};
    int near = out.fit.ncomp == 2;
    for (size_t k = 0; near && k < 2; k++)
      near = fabs(out.fit.comp[k].logN - want[k].logN) <= 4 * out.fit.err[k].logN &&
             fabs(out.fit.comp[k].b - want[k].b) <= 4 * out.fit.err[k].b &&
             fabs(out.fit.comp[k].v - want[k].v) <= 4 * out.fit.err[k].v;
    CHECK(near, "the two written components recovered within 4 sigma (logN %.3f, %.3f)",
          out.fit.comp[0].logN, out.fit.comp[1].logN);
    double dof = (double)out.fit.dof;
    CHECK(dof > 0 && fabs(out.fit.chi2 - dof) <= 5 * sqrt(2 * dof), "chi2 %.1f for %.0f degrees of freedom",
          out.fit.chi2, dof);
  }
  dt_analysis_free(a);
  dt_atomic_free(t);
  dt_spectrum_free(s);
  unlink(p);
}

static void test_list(void) {
  char p[128];
  snprintf(p, sizeof p, "%s/million.list", tmpdir);
  FILE *f = fopen(p, "w");
  const long n = 1000000;
  for (long i = 0; i < n; i++)
    fprintf(f, "survey/field%03ld/spec%07ld.fits vsys=%ld R=%ld name=T%07ld\n", i % 500, i, 300 + i % 400,
            2000 + i % 3000, i);
  fclose(f);
  long kb0 = peak_kb();
  dt_targets *l;
  dt_err e;
  int rc = dt_targets_open(p, &l, &e);
  dt_target_spec *ts = malloc(sizeof *ts);
  long count = 0, bad = 0;
  double t0 = now_s();
  while (rc == DT_OK) {
    int got = 0;
    int st = dt_targets_next(l, ts, &got, &e);
    if (st == DT_EFORMAT) {
      bad++;
      continue;
    }
    if (st != DT_OK || !got) break;
    count++;
  }
  double dt = now_s() - t0;
  if (rc == DT_OK) dt_targets_close(l);
  free(ts);
  long grown = peak_kb() - kb0;
  CHECK(count == n && bad == 0, "a %ld-line list streamed (%ld targets, %.2f s)", n, count, dt);
  CHECK(grown < 4096, "... raising the peak memory by %ld kB (< 4 MB: one line at a time)", grown);

  /* the queue keeps entries compactly */
  f = fopen(p, "w");
  const long nq = 100000;
  for (long i = 0; i < nq; i++) fprintf(f, "s/spec%07ld.fits vsys=512 R=3690\n", i);
  fclose(f);
  dt_queue q;
  dt_queue_init(&q);
  size_t nbad = 0;
  t0 = now_s();
  rc = dt_queue_add_list(&q, p, &nbad, NULL, &e);
  dt = now_s() - t0;
  CHECK(rc == DT_OK && q.n == (size_t)nq && nbad == 0, "a %ld-entry queue built (%.2f s)", nq, dt);
  size_t bytes = q.cap * sizeof *q.e + q.pool_cap;
  size_t pathlen = strlen(dt_queue_path(&q, 0)) + strlen(dt_queue_key(&q, 0)) + 2;
  CHECK(bytes / (size_t)nq < 2 * (sizeof *q.e + pathlen),
        "... in %zu bytes per entry (entry %zu + paths %zu; no spectrum loaded)", bytes / (size_t)nq, sizeof *q.e,
        pathlen);
  dt_queue_free(&q);
  unlink(p);
}

static void test_session(void) {
  char p[128];
  snprintf(p, sizeof p, "%s/big.session", tmpdir);
  const long nlines = 100000, ntarg = nlines / 10, unjudged = 7;
  dt_judgement *final = malloc((size_t)ntarg * sizeof *final);
  const char *sha = "ba7816bf8f01cfea414140de5dae2223b00361a396177a9cb410ff61f20015ad";
  int rc = write_session(p, nlines, "/data/survey", sha, unjudged, final);
  CHECK(rc == 0, "a %ld-line session generated", nlines);
  dt_journal *j;
  dt_err e;
  double t0 = now_s();
  rc = dt_journal_open(p, DT_JOURNAL_RW, "tester", &j, &e);
  double dt = now_s() - t0;
  CHECK(rc == DT_OK, "opened for writing (replayed) in %.2f s", dt);
  if (rc != DT_OK) {
    free(final);
    return;
  }
  CHECK(dt_journal_nrecords(j) == nlines && dt_journal_count(j) == (size_t)ntarg &&
            dt_journal_warning_count(j) == 0,
        "%ld records, %ld spectra, no warning (%zu)", dt_journal_nrecords(j), ntarg, dt_journal_warning_count(j));
  long same = 0, judged = 0;
  for (long i = 0; i < ntarg; i++) {
    char key[128];
    snprintf(key, sizeof key, "/data/survey/s/spec%07ld.fits#NaI", i);
    const dt_journal_entry *en = dt_journal_lookup(j, key, 0, 0);
    if (en && dt_judgement_same(&en->state, &final[i])) same++;
    if (en && en->state.verdict != DT_VERDICT_NONE) judged++;
  }
  CHECK(same == ntarg, "every spectrum's replayed state is the written one (%ld of %ld)", same, ntarg);
  CHECK(judged == ntarg - unjudged, "%ld judged, %ld left", judged, ntarg - judged);
  CHECK(dt < 10.0, "replay of %ld lines well under 10 s (%.2f s)", nlines, dt);
  dt_journal_close(j);
  unlink(p);
  free(final);
}

int main(int argc, char **argv) {
  if (argc >= 2 && !strcmp(argv[1], "--spectrum") && argc == 4) return make_spectrum(argv[2], atol(argv[3]));
  if (argc >= 2 && !strcmp(argv[1], "--list") && argc >= 5 && argc <= 7)
    return make_list(argv[2], atol(argv[3]), argv[4], argc >= 6 ? argv[5] : "",
                     argc == 7 ? argv[6] : NULL);
  if (argc >= 2 && !strcmp(argv[1], "--session") && argc == 7)
    return make_session(argv[2], atol(argv[3]), argv[4], argv[5], atol(argv[6]));
  if (argc >= 2) {
    fprintf(stderr, "usage: test_big_inputs [--spectrum FILE NPIX | --list DIR N SPECTRUM [FIELDS [LINKED]] |\n"
                    "                        --session FILE NLINES DIR SPECTRUM UNJUDGED]\n");
    return 2;
  }
  snprintf(tmpdir, sizeof tmpdir, "/tmp/dt-big.XXXXXX");
  if (!mkdtemp(tmpdir)) {
    printf("FAIL - temporary directory\n");
    return 1;
  }
  test_list(); /* first: its memory check reads the process's peak */
  test_spectrum();
  test_session();
  rmdir(tmpdir);
  return dt_test_done();
}
