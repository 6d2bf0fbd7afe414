/* Reading from memory: dt_spectrum_read_mem, dt_journal_open_mem and
 * dt_journal_reader_open_mem must give what the file readers give for a file
 * holding the same bytes -- the same spectrum or session, and for damaged
 * input the same error, word for word (except for cfitsio's own words in
 * parentheses: its memory and disk drivers fail differently on a file cut
 * inside a block).  The files are written here with
 * cfitsio and stdio; the wavelengths of the image are also checked against
 * the linear WCS of FITS WCS Paper I (Greisen & Calabretta 2002, A&A 395,
 * 1061): lambda = CRVAL1 + CDELT1 * (p - CRPIX1). */
#include <dirent.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>

#include <fitsio.h>

#include "doubletty/journal.h"
#include "doubletty/judge.h"
#include "doubletty/spectrum.h"
#include "fixtures.h"
#include "fixtures_fits.h"
#include "harness.h"

#define NPIX 40

static char dir[64];

#define tpath(name) dir_path(dir, (name))

/* A 1-D image with an uncertainty image and a mask image. */
static int write_image(const char *path) {
  fitsfile *f;
  int st = 0;
  long n = NPIX;
  float flux[NPIX], err[NPIX];
  short mask[NPIX];
  for (int i = 0; i < NPIX; i++) {
    flux[i] = 1.0f - 0.5f * expf(-0.5f * (float)((i - 20) * (i - 20)) / 4.0f);
    err[i] = 0.05f;
    mask[i] = i == 7;
  }
  double crval = 5880.0, cdelt = 0.25, crpix = 1.0, res = 3000.0;
  remove(path);
  fits_create_file(&f, path, &st);
  fits_create_img(f, FLOAT_IMG, 1, &n, &st);
  fits_write_key(f, TSTRING, "CTYPE1", "WAVE", NULL, &st);
  fits_write_key(f, TSTRING, "CUNIT1", "Angstrom", NULL, &st);
  fits_write_key(f, TDOUBLE, "CRVAL1", &crval, NULL, &st);
  fits_write_key(f, TDOUBLE, "CDELT1", &cdelt, NULL, &st);
  fits_write_key(f, TDOUBLE, "CRPIX1", &crpix, NULL, &st);
  fits_write_key(f, TDOUBLE, "SPECRES", &res, NULL, &st);
  fits_write_key(f, TSTRING, "OBJECT", "MEM-TEST", NULL, &st);
  fits_write_img(f, TFLOAT, 1, n, flux, &st);
  fits_create_img(f, FLOAT_IMG, 1, &n, &st);
  fits_write_key(f, TSTRING, "EXTNAME", "ERR", NULL, &st);
  fits_write_img(f, TFLOAT, 1, n, err, &st);
  fits_create_img(f, SHORT_IMG, 1, &n, &st);
  fits_write_key(f, TSTRING, "EXTNAME", "MASK", NULL, &st);
  fits_write_img(f, TSHORT, 1, n, mask, &st);
  fits_close_file(f, &st);
  return st;
}


/* Two error texts alike up to cfitsio's own explanation. */
static int same_what(const char *a, const char *b) {
  const char *pa = strstr(a, " (cfitsio:"), *pb = strstr(b, " (cfitsio:");
  size_t la = pa ? (size_t)(pa - a) : strlen(a), lb = pb ? (size_t)(pb - b) : strlen(b);
  return la == lb && !memcmp(a, b, la) && !pa == !pb;
}


/* Read path and its bytes with the same options; compare.  Returns the
 * file reader's status; *out (if non-NULL) gets the file's spectrum. */
static int both(const char *label, const char *path, const dt_read_opts *o, dt_spectrum **out) {
  size_t len = 0;
  unsigned char *buf = slurp(path, &len);
  dt_spectrum *sf = NULL, *sm = NULL;
  dt_err ef, em;
  int rf = dt_spectrum_read(path, o, &sf, &ef);
  int rm = dt_spectrum_read_mem(buf, len, o, &sm, &em);
  if (rf == DT_OK) {
    CHECK(rm == DT_OK && same_spectrum_data(sf, sm, 0),
          "%s: memory and file give the same spectrum", label);
  } else {
    CHECK(rm == rf && !sm && !strcmp(ef.where, em.where) && same_what(ef.what, em.what),
          "%s: memory and file give the same error (%s: %s)", label, ef.where, ef.what);
    if (rm != rf || !same_what(ef.what, em.what))
      printf("       memory: %d %s: %s\n", rm, em.where, em.what);
  }
  dt_spectrum_free(sm);
  if (out)
    *out = sf;
  else
    dt_spectrum_free(sf);
  free(buf);
  return rf;
}

static void test_spectra(void) {
  const char *img = tpath("image.fits"), *rows = tpath("rows.fits");
  CHECK(write_image(img) == 0, "image written");
  CHECK(write_row_table(rows, 3, NPIX, 3930.0) == 0, "table written");

  dt_spectrum *s = NULL;
  CHECK(both("image", img, NULL, &s) == DT_OK, "image read");
  if (s) {
    double worst = 0;
    for (size_t i = 0; i < s->n; i++) /* pixel p = i + 1 */
      worst = fmax(worst, fabs(s->wave[i] - (5880.0 + 0.25 * ((double)(i + 1) - 1.0))));
    CHECK(worst < 1e-9, "image wavelengths follow CRVAL1 + CDELT1 (p - CRPIX1) (worst %.2g A)",
          worst);
    CHECK(s->has_sigma && s->mask[7] && s->n == NPIX, "uncertainty and mask images used");
    dt_spectrum_free(s);
  }
  dt_read_opts o = {0};
  o.hdu = 2;
  both("image, HDU 2 asked for", img, &o, NULL);
  o.hdu = 9;
  both("image, HDU 9 asked for", img, &o, NULL);
  o.hdu = 0;
  o.row = 2;
  both("image, row 2 asked for", img, &o, NULL);

  for (long r = 1; r <= 4; r++) {
    char label[32];
    snprintf(label, sizeof label, "table row %ld", r);
    o.row = r;
    both(label, rows, &o, NULL);
  }
  memset(&o, 0, sizeof o);
  o.flux_col = "NOPE";
  both("table, unknown column", rows, &o, NULL);

  /* cut short: inside the data, inside a header, not a whole block */
  size_t len = 0;
  unsigned char *buf = slurp(img, &len);
  const size_t cuts[] = {2880 + 100, 2880 + 1000, 2880 * 2 + 40, 2880 * 3 + 50, 2880, 100, 9};
  for (size_t k = 0; k < sizeof cuts / sizeof cuts[0]; k++) {
    char label[48];
    snprintf(label, sizeof label, "image cut at byte %zu", cuts[k]);
    spit(tpath("cut.fits"), buf, cuts[k]);
    CHECK(both(label, tpath("cut.fits"), NULL, NULL) != DT_OK, "%s: an error", label);
  }
  free(buf);

  /* text */
  const char *txt = tpath("s.txt");
  FILE *f = fopen(txt, "w");
  fprintf(f, "# wave flux sigma\nwave,flux,err\n");
  for (int i = 0; i < NPIX; i++) fprintf(f, "%.2f, %.4f, 0.05\n", 6000.0 + 0.3 * i, 1.0 + 0.001 * i);
  fclose(f);
  CHECK(both("text", txt, NULL, NULL) == DT_OK, "text read");
  o.row = 2;
  both("text, row 2 asked for", txt, &o, NULL);
  spit(txt, "5000 1 0.1\n5001 1 0.1\n5002 x 0.1\n", 33);
  both("text, line 3 damaged", txt, NULL, NULL);
  spit(txt, "5000 1\n5001 1\n5002 1", 20);
  both("text without a last newline", txt, NULL, NULL);
  spit(txt, "", 0);
  both("empty file", txt, NULL, NULL);
  spit(txt, "\x1f\x8b\x08\x00junk", 8);
  both("gzip bytes", txt, NULL, NULL);
  spit(txt, "5000 1\n\x01\x02\x03 binary", 17);
  both("binary bytes", txt, NULL, NULL);
}

/* ---- sessions ------------------------------------------------------------ */

static int record(dt_journal *j, const char *path, long row, dt_judgement *state, dt_action *a) {
  dt_judgement after = *state;
  if (dt_judgement_apply(&after, a) != DT_OK) return -1;
  dt_target t = {.path = path, .hdu = 1, .row = row};
  dt_err e;
  int rc = dt_journal_append(j, &t, a, &after, NULL, &e);
  if (rc == DT_OK) *state = after;
  return rc;
}

static int write_session(const char *path) {
  dt_journal *j;
  dt_err e;
  remove(path);
  if (dt_journal_open(path, DT_JOURNAL_RW, "reader-test", &j, &e) != DT_OK) return -1;
  dt_judgement s1, s2;
  dt_judgement_init(&s1);
  dt_judgement_init(&s2);
  snprintf(s1.doublet, sizeof s1.doublet, "NaI");
  snprintf(s2.doublet, sizeof s2.doublet, "CaII");
  int bad = 0;
  dt_action a;
  dt_action_init(&a, DT_ACT_COMP_ADD);
  a.x[0] = 12.5, a.x[1] = 8.0, a.x[2] = 30.0;
  bad |= record(j, "survey/a.fits", 0, &s1, &a);
  dt_action_init(&a, DT_ACT_NOTE);
  snprintf(a.text, sizeof a.text, "wing\tblended\\ with sky");
  bad |= record(j, "survey/b.fits", 2, &s2, &a);
  dt_action_init(&a, DT_ACT_VERDICT);
  a.ival = DT_VERDICT_DETECTED;
  bad |= record(j, "survey/a.fits", 0, &s1, &a);
  dt_action_init(&a, DT_ACT_VERDICT);
  a.ival = DT_VERDICT_UNSURE;
  bad |= record(j, "survey/b.fits", 2, &s2, &a);
  dt_journal_close(j);
  return bad;
}

static int same_entry(const dt_journal_entry *a, const dt_journal_entry *b) {
  return a && b && !strcmp(a->target.path, b->target.path) && a->target.hdu == b->target.hdu &&
         a->target.row == b->target.row && a->state.verdict == b->state.verdict &&
         a->state.ncomp == b->state.ncomp &&
         !memcmp(a->state.comp, b->state.comp, sizeof a->state.comp) &&
         !strcmp(a->state.note, b->state.note) && a->nchanges == b->nchanges &&
         a->first_line == b->first_line && a->last_line == b->last_line && a->flags == b->flags &&
         !strcmp(a->user, b->user) && !strcmp(a->time, b->time) &&
         !strcmp(a->judged_by, b->judged_by);
}

/* Open path read-only and its bytes from memory; compare everything. */
static void both_sessions(const char *label, const char *path) {
  size_t len = 0;
  unsigned char *buf = slurp(path, &len);
  dt_journal *jf = NULL, *jm = NULL;
  dt_err ef, em;
  int rf = dt_journal_open(path, DT_JOURNAL_READ_ONLY, NULL, &jf, &ef);
  int rm = dt_journal_open_mem(buf, len, &jm, &em);
  if (rf != DT_OK) {
    CHECK(rm == rf && !jm && !strcmp(ef.where, em.where) && !strcmp(ef.what, em.what),
          "%s: memory and file give the same error (%s: %s)", label, ef.where, ef.what);
  } else {
    int same = rm == DT_OK && dt_journal_count(jf) == dt_journal_count(jm) &&
               dt_journal_warning_count(jf) == dt_journal_warning_count(jm) &&
               dt_journal_nrecords(jf) == dt_journal_nrecords(jm);
    for (size_t i = 0; same && i < dt_journal_count(jf); i++)
      same = same_entry(dt_journal_entry_at(jf, i), dt_journal_entry_at(jm, i));
    for (size_t i = 0; same && i < dt_journal_warning_count(jf) && i < 64; i++)
      same = !strcmp(dt_journal_warning(jf, i), dt_journal_warning(jm, i));
    CHECK(same, "%s: memory and file replay to the same session (%zu targets, %zu warnings)",
          label, dt_journal_count(jf), dt_journal_warning_count(jf));
    CHECK(jm && dt_journal_read_only(jm) && !strcmp(dt_journal_path(jm), "(memory)"),
          "%s: the session from memory is read-only", label);
    if (jm) {
      dt_target t = {.path = "x"};
      dt_action a;
      dt_action_init(&a, DT_ACT_VERDICT);
      dt_judgement after;
      dt_judgement_init(&after);
      CHECK(dt_journal_append(jm, &t, &a, &after, NULL, &em) == DT_EIO,
            "%s: appending to it is refused", label);
    }
  }
  dt_journal_close(jf);
  dt_journal_close(jm);

  /* the record reader */
  dt_journal_reader *r1 = NULL, *r2 = NULL;
  rf = dt_journal_reader_open(path, &r1, &ef);
  rm = dt_journal_reader_open_mem(buf, len, &r2, &em);
  int same = rf == rm && (rf != DT_OK || dt_journal_reader_version(r1) == dt_journal_reader_version(r2));
  int nrec = 0;
  static dt_journal_record a, b;
  while (same && rf == DT_OK) {
    int k1 = dt_journal_reader_next(r1, &a, &ef);
    int k2 = dt_journal_reader_next(r2, &b, &em);
    same = k1 == k2;
    if (!same) break;
    if (k1 == DT_OK)
      same = a.line == b.line && !strcmp(a.time, b.time) && !strcmp(a.user, b.user) &&
             !strcmp(a.target.path, b.target.path) && a.action.kind == b.action.kind &&
             a.after.verdict == b.after.verdict && a.after.ncomp == b.after.ncomp;
    else if (k1 == DT_EFORMAT)
      same = !strcmp(ef.where, em.where) && !strcmp(ef.what, em.what);
    else
      break;
    nrec++;
  }
  CHECK(same, "%s: the record reader gives the same records from memory (%d read)", label, nrec);
  dt_journal_reader_close(r1);
  dt_journal_reader_close(r2);
  free(buf);
}

static void test_sessions(void) {
  const char *ses = tpath("s.session");
  CHECK(write_session(ses) == 0, "session written through the journal");
  both_sessions("session", ses);

  size_t len = 0;
  char *buf = (char *)slurp(ses, &len);
  /* a line with a wrong check sum, then an incomplete last line */
  char *l3 = buf;
  for (int k = 0; k < 2 && l3; k++) l3 = strchr(l3, '\n') ? strchr(l3, '\n') + 1 : NULL;
  if (l3) l3[30] = l3[30] == 'a' ? 'b' : 'a';
  spit(tpath("damaged.session"), buf, len - 10);
  both_sessions("damaged session", tpath("damaged.session"));
  spit(tpath("h.session"), buf, (size_t)(strchr(buf, '\n') - buf) + 1);
  both_sessions("header only", tpath("h.session"));
  spit(tpath("e.session"), "", 0);
  both_sessions("empty file", tpath("e.session"));
  spit(tpath("v.session"), "doubletty-session 99\tcreated=x\n", 32);
  both_sessions("a future version", tpath("v.session"));
  spit(tpath("n.session"), "not a session\n", 14);
  both_sessions("not a session", tpath("n.session"));
  free(buf);
}

int main(void) {
  snprintf(dir, sizeof dir, "/tmp/dt-memread.XXXXXX");
  if (!mkdtemp(dir)) return 1;
  test_spectra();
  test_sessions();
  remove_dir(dir);
  return dt_test_done();
}
