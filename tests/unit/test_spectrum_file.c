/* A spectrum file loaded once (dt_spectrum_file_load): counting it and
 * reading it from its bytes must give what dt_spectrum_count and
 * dt_spectrum_read give for its path -- the same count, the same spectra,
 * the same error word for word -- and must not go back to the disk when
 * the bytes are held (the file is removed after loading to prove it).
 * Paths that cannot be held (missing, a directory, a named pipe, a file
 * over the size cap) keep the disk readers' behaviour.
 *
 * The table is written here with cfitsio: three rows of vector columns
 * WAVE, FLUX, IVAR; the flux read back is compared with the values
 * written (row r, pixel i: r + 0.01 i, stored as 32-bit floats; IVAR
 * 0 marks a pixel bad, "inverse variance" in the sense of the SDSS data
 * model, common practice). */
#include <dirent.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <unistd.h>

#include <fitsio.h>

#include "doubletty/spectrum.h"
#include "fixtures.h"
#include "fixtures_fits.h"
#include "harness.h"

#define NPIX 40
#define NROWS 3

static char dir[64];

#define tpath(name) dir_path(dir, (name))



static int same_err(int ra, const dt_err *a, int rb, const dt_err *b) {
  return ra == rb && !strcmp(a->where, b->where) && !strcmp(a->what, b->what);
}

/* What the disk readers say of path (count, then rows 1..nrows or the one
 * spectrum), kept to compare with a loaded file after path is gone. */
typedef struct {
  int rc_count;
  long count;
  dt_err ec;
  int rc[NROWS + 2];
  dt_spectrum *s[NROWS + 2];
  dt_err e[NROWS + 2];
} disk_view;

/* rows 0 (the first / only), 1 .. NROWS + 1 (one past the last) */
static void disk_look(const char *path, const dt_read_opts *base, disk_view *v) {
  memset(v, 0, sizeof *v);
  v->rc_count = dt_spectrum_count(path, base, &v->count, &v->ec);
  for (long r = 0; r <= NROWS + 1; r++) {
    dt_read_opts o = base ? *base : (dt_read_opts){0};
    o.row = r;
    v->rc[r] = dt_spectrum_read(path, &o, &v->s[r], &v->e[r]);
  }
}

static void disk_free(disk_view *v) {
  for (long r = 0; r <= NROWS + 1; r++) dt_spectrum_free(v->s[r]);
}

/* The loaded file f against the disk's view v of the same path; errors
 * only when errors_too (an error is worded by the disk reader, which needs
 * the file). */
static void compare(const char *label, const dt_spectrum_file *f, const dt_read_opts *base,
                    const disk_view *v, int errors_too) {
  long count = -1;
  dt_err e;
  int rc = dt_spectrum_file_count(f, base, &count, &e);
  if (v->rc_count == DT_OK)
    CHECK(rc == DT_OK && count == v->count, "%s: the same count (%ld, disk %ld)", label, count,
          v->count);
  else if (errors_too)
    CHECK(same_err(rc, &e, v->rc_count, &v->ec), "%s: counting, the same error (%s: %s)", label,
          v->ec.where, v->ec.what);
  if (errors_too && (rc != v->rc_count || (rc != DT_OK && strcmp(e.what, v->ec.what))))
    printf("       loaded: %d %s: %s\n", rc, e.where, e.what);
  for (long r = 0; r <= NROWS + 1; r++) {
    dt_read_opts o = base ? *base : (dt_read_opts){0};
    o.row = r;
    dt_spectrum *s = NULL;
    rc = dt_spectrum_file_read(f, &o, &s, &e);
    if (v->rc[r] == DT_OK)
      CHECK(rc == DT_OK && same_spectrum_data(s, v->s[r], 1), "%s, row %ld: the same spectrum",
            label, r);
    else if (errors_too) {
      CHECK(!s && same_err(rc, &e, v->rc[r], &v->e[r]), "%s, row %ld: the same error (%s: %s)",
            label, r, v->e[r].where, v->e[r].what);
      if (!same_err(rc, &e, v->rc[r], &v->e[r]))
        printf("       loaded: %d %s: %s\n", rc, e.where, e.what);
    }
    dt_spectrum_free(s);
  }
}

/* Load path and compare with what the disk says; then remove the file and
 * compare again: every spectrum and count still there came from the
 * bytes. */
static void held(const char *label, const char *path, const char *file, const dt_read_opts *o,
                 size_t want_bytes) {
  disk_view v;
  disk_look(path, o, &v);
  dt_spectrum_file *f = NULL;
  dt_err e;
  CHECK(dt_spectrum_file_load(path, &f, &e) == DT_OK && f, "%s: loaded", label);
  if (!f) {
    disk_free(&v);
    return;
  }
  CHECK(dt_spectrum_file_bytes(f) == (long long)want_bytes, "%s: its %zu bytes held (%lld)", label,
        want_bytes, dt_spectrum_file_bytes(f));
  compare(label, f, o, &v, 1);
  size_t len = 0;
  unsigned char *keep = slurp(file, &len);
  remove(file);
  char gone[200];
  snprintf(gone, sizeof gone, "%s, file removed", label);
  compare(gone, f, o, &v, 0);
  dt_spectrum_file_free(f);
  spit(file, keep, len); /* back for the next case */
  free(keep);
  disk_free(&v);
}

/* Paths kept by name: nothing held, and every answer as the disk's. */
static void by_name(const char *label, const char *path) {
  disk_view v;
  disk_look(path, NULL, &v);
  dt_spectrum_file *f = NULL;
  dt_err e;
  CHECK(dt_spectrum_file_load(path, &f, &e) == DT_OK && f, "%s: loaded (by name)", label);
  if (f) {
    CHECK(dt_spectrum_file_bytes(f) == -1, "%s: kept by name, no bytes held", label);
    compare(label, f, NULL, &v, 1);
  }
  dt_spectrum_file_free(f);
  disk_free(&v);
}

static void test_table(void) {
  const char *rows = tpath("rows.fits");
  CHECK(write_row_table(rows, NROWS, NPIX, 5880.0) == 0, "table written");
  size_t len = 0;
  free(slurp(rows, &len));

  /* the values written come back, row by row, from the bytes alone */
  dt_spectrum_file *f = NULL;
  dt_err e;
  CHECK(dt_spectrum_file_load(rows, &f, &e) == DT_OK, "table loaded");
  size_t keep_len = 0;
  unsigned char *keep = slurp(rows, &keep_len);
  remove(rows);
  long count = 0;
  CHECK(f && dt_spectrum_file_count(f, NULL, &count, &e) == DT_OK && count == NROWS,
        "table without its file: %d rows counted (%ld)", NROWS, count);
  for (long r = 1; f && r <= NROWS; r++) {
    dt_read_opts o = {0};
    o.row = r;
    dt_spectrum *s = NULL;
    int rc = dt_spectrum_file_read(f, &o, &s, &e);
    double worst = 0;
    for (size_t i = 0; s && i < s->n; i++)
      worst = fmax(worst, fabs(s->flux[i] - (double)(float)(r + 0.01 * (double)i)));
    CHECK(rc == DT_OK && s && s->n == NPIX && s->row == r && worst == 0 &&
              s->mask[3] == (r == 2) && !strcmp(s->layout, "table-rows"),
          "row %ld read from the bytes: the flux written, IVAR 0 masked", r);
    dt_spectrum_free(s);
  }
  dt_spectrum_file_free(f);
  spit(rows, keep, keep_len);
  free(keep);

  held("table", rows, rows, NULL, len);
  dt_read_opts o = {0};
  o.flux_col = "NOPE";
  held("table, unknown flux column", rows, rows, &o, len);
  o.flux_col = NULL;
  o.hdu = 1;
  held("table, HDU 1 asked for", rows, rows, &o, len);
  char sel[160];
  snprintf(sel, sizeof sel, "%s[1]", rows);
  held("table as FILE[1]", sel, rows, NULL, len);
  snprintf(sel, sizeof sel, "%s[ROWS]", rows);
  held("table as FILE[ROWS]", sel, rows, NULL, len);
  snprintf(sel, sizeof sel, "%s[7]", rows);
  held("table as FILE[7]", sel, rows, NULL, len);
  snprintf(sel, sizeof sel, "%s[NONE]", rows);
  held("table as FILE[NONE]", sel, rows, NULL, len);

  /* cut short: the disk reader's error, cfitsio's words included */
  unsigned char *buf = slurp(rows, &len);
  const size_t cuts[] = {2880 + 100, 2880 * 2 + 40, 2880, 100};
  for (size_t k = 0; buf && k < sizeof cuts / sizeof cuts[0]; k++) {
    char label[48];
    snprintf(label, sizeof label, "table cut at byte %zu", cuts[k]);
    const char *cut = tpath("cut.fits");
    spit(cut, buf, cuts[k] < len ? cuts[k] : len);
    disk_view v;
    disk_look(cut, NULL, &v);
    dt_spectrum_file *fc = NULL;
    dt_spectrum_file_load(cut, &fc, &e);
    CHECK(fc && v.rc[0] != DT_OK, "%s: an error on disk", label);
    if (fc) compare(label, fc, NULL, &v, 1);
    dt_spectrum_file_free(fc);
    disk_free(&v);
  }
  free(buf);
}

static void test_text(void) {
  const char *txt = tpath("s.txt");
  FILE *f = fopen(txt, "w");
  fprintf(f, "# wave flux sigma\nwave,flux,err\n");
  for (int i = 0; i < NPIX; i++) fprintf(f, "%.2f, %.4f, 0.05\n", 6000.0 + 0.3 * i, 1.0 + 0.001 * i);
  fclose(f);
  size_t len = 0;
  free(slurp(txt, &len));
  held("text", txt, txt, NULL, len);
  char sel[160];
  snprintf(sel, sizeof sel, "%s[1]", txt);
  held("text as FILE[1]", sel, txt, NULL, len);
  spit(txt, "5000 1 0.1\n5001 1 0.1\n5002 x 0.1\n", 33);
  held("text, line 3 damaged", txt, txt, NULL, 33);
  spit(txt, "", 0);
  held("empty file", txt, txt, NULL, 0);
  spit(txt, "\x1f\x8b\x08\x00junk", 8);
  held("gzip bytes", txt, txt, NULL, 8);
}

static void test_by_name(void) {
  by_name("missing file", tpath("missing.fits"));
  char sel[160];
  snprintf(sel, sizeof sel, "%s[2]", tpath("missing.fits"));
  by_name("missing file[2]", sel);
  by_name("directory", dir);
  by_name("empty path", "");
  const char *fifo = tpath("pipe");
  if (mkfifo(fifo, 0600) == 0)
    by_name("named pipe", fifo);
  else
    CHECK(0, "named pipe made");
  by_name("device", "/dev/null");
  /* over the cap: a sparse file, so nothing is written to the disk */
  const char *big = tpath("big.fits");
  FILE *f = fopen(big, "w");
  int made = f && ftruncate(fileno(f), (off_t)DT_SPECTRUM_LOAD_MAX + 2880) == 0;
  if (f) fclose(f);
  CHECK(made, "a sparse file over the cap made");
  if (made) by_name("file over the cap", big);
}

int main(void) {
  snprintf(dir, sizeof dir, "/tmp/dt-specfile.XXXXXX");
  if (!mkdtemp(dir)) return 1;
  test_table();
  test_text();
  test_by_name();
  remove_dir(dir);
  return dt_test_done();
}
