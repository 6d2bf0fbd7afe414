/* Target list parser: good lines, comments, and every bad line reported
 * with its line number; streaming a long list. */
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>

#include "doubletty/targets.h"
#include "harness.h"
#include "../../src/ui/queue.h"

static int parse(const char *line, const char *base, dt_target_spec *t, int *got, dt_err *e) {
  dt_err_clear(e);
  return dt_targets_parse_line(line, base, 7, t, got, e);
}

static void bad_line(const char *line, const char *want_what) {
  dt_target_spec t;
  dt_err e;
  int got = -1;
  int rc = parse(line, NULL, &t, &got, &e);
  CHECK(rc == DT_EFORMAT && !strcmp(e.where, "line 7") && strstr(e.what, want_what) && got == 0,
        "bad line '%s' -> line 7: '%s' (got rc %d, where '%s', what '%s')", line, want_what, rc,
        e.where, e.what);
}

int main(void) {
  dt_target_spec t;
  dt_err e;
  int got;

  /* a full line */
  int rc = parse("spec/a.fits[2]  row=3 vsys=512.5 R=3500 doublet=NaI name=QSO-J1\n", "/data", &t, &got, &e);
  CHECK(rc == DT_OK && got == 1, "full line parses");
  CHECK(!strcmp(t.path, "/data/spec/a.fits[2]"), "relative path joined to the list directory: %s", t.path);
  CHECK(t.row == 3 && t.has_vsys && t.vsys == 512.5 && t.resolution == 3500 && t.fwhm_kms == 0,
        "row, vsys, R");
  CHECK(!strcmp(t.doublet, "NaI") && !strcmp(t.name, "QSO-J1") && t.line == 7, "doublet, name, line");

  /* absolute path, fwhm, tabs, trailing comment, CRLF */
  rc = parse("\t/abs/b.txt\tfwhm=85  # a comment\r\n", "/data", &t, &got, &e);
  CHECK(rc == DT_OK && got == 1 && !strcmp(t.path, "/abs/b.txt") && t.fwhm_kms == 85 &&
            t.resolution == 0 && t.row == 0 && !t.has_vsys && !t.doublet[0],
        "absolute path kept, fwhm, comment and CRLF stripped");

  /* base directory "." or none: path as written */
  rc = parse("c.fits", ".", &t, &got, &e);
  CHECK(rc == DT_OK && got && !strcmp(t.path, "c.fits"), "base '.' leaves the path alone");
  rc = parse("c.fits", "dir/", &t, &got, &e);
  CHECK(rc == DT_OK && got && !strcmp(t.path, "dir/c.fits"), "base with a trailing slash");
  rc = parse("c.fits vsys=-120", NULL, &t, &got, &e);
  CHECK(rc == DT_OK && got && t.has_vsys && t.vsys == -120, "negative vsys");

  /* comments and blank lines */
  const char *empty[] = {"", "\n", "   \t ", "# just a comment", "   # indented comment\n"};
  for (size_t i = 0; i < sizeof empty / sizeof empty[0]; i++) {
    rc = parse(empty[i], NULL, &t, &got, &e);
    CHECK(rc == DT_OK && got == 0, "blank/comment line %zu holds no target", i);
  }

  /* every kind of bad line names line 7 and the problem */
  bad_line("a.fits speed=3", "unknown key 'speed'");
  bad_line("a.fits row", "not key=value");
  bad_line("a.fits row=0", "row must be");
  bad_line("a.fits row=-2", "row must be");
  bad_line("a.fits row=2.5", "row must be");
  bad_line("a.fits row=", "has no value");
  bad_line("a.fits vsys=fast", "vsys must be");
  bad_line("a.fits vsys=nan", "vsys must be");
  bad_line("a.fits vsys=1e9", "vsys must be");
  bad_line("a.fits R=-3000", "R must be");
  bad_line("a.fits R=0", "R must be");
  bad_line("a.fits fwhm=inf", "fwhm must be");
  bad_line("a.fits R=3000 fwhm=80", "not both");
  bad_line("a.fits vsys=1 vsys=2", "given twice");
  bad_line("a.fits doublet=ABCDEFGHIJKLMNOPQRSTUVWXYZ", "too long");
  bad_line("a.fits name=0123456789012345678901234567890123456789012345678901234567890123456789", "too long");
  bad_line("a.fits =3", "unknown key ''");
  bad_line("a.fits\x01 row=1", "control character");
  {
    static char huge[DT_TARGET_LINE_MAX + 64];
    memset(huge, 'x', sizeof huge - 1);
    huge[sizeof huge - 1] = '\0';
    bad_line(huge, "longer than");
  }

  /* a velocity window per line */
  rc = parse("w.fits window=-250:350.5 vsys=512", "/d", &t, &got, &e);
  CHECK(rc == DT_OK && got && t.has_window && t.vlo == -250 && t.vhi == 350.5,
        "window=-250:350.5 read: %d %g %g (%s)", t.has_window, t.vlo, t.vhi, e.what);
  rc = parse("w.fits vsys=512", "/d", &t, &got, &e);
  CHECK(rc == DT_OK && !t.has_window, "no window= leaves the default");
  bad_line("w.fits window=300:-300", "VLO < VHI");
  bad_line("w.fits window=-300", "VLO:VHI");
  bad_line("w.fits window=a:b", "VLO:VHI");

  /* quoting: blanks, '#', '"' and '\' in paths and values */
  rc = parse("\"night 2/star #4.fits\"  name=\"Fen 1234 \\\"B\\\"\" vsys=-12 # comment", "/d", &t, &got, &e);
  CHECK(rc == DT_OK && got && !strcmp(t.path, "/d/night 2/star #4.fits"),
        "quoted path with a blank and a '#': %s (%s)", t.path, e.what);
  CHECK(rc == DT_OK && !strcmp(t.name, "Fen 1234 \"B\"") && t.has_vsys && t.vsys == -12,
        "quoted name with escaped quotes, fields after it: [%s]", t.name);
  rc = parse("\"name=a b\"", NULL, &t, &got, &e);
  CHECK(rc == DT_OK && got && !strcmp(t.path, "name=a b"), "a quoted first field is the path: %s", t.path);
  rc = parse("a\" \"b.fits \"name=Sightline 7\"", NULL, &t, &got, &e);
  CHECK(rc == DT_OK && got && !strcmp(t.path, "a b.fits") && !strcmp(t.name, "Sightline 7"),
        "quotes around part of a field, and around key=value: [%s] [%s]", t.path, t.name);
  rc = parse("c.fits name=\"x\\\\y\"", NULL, &t, &got, &e);
  CHECK(rc == DT_OK && !strcmp(t.name, "x\\y"), "escaped backslash: [%s]", t.name);
  rc = parse("c.fits name=\"a=b\"", NULL, &t, &got, &e);
  CHECK(rc == DT_OK && !strcmp(t.name, "a=b"), "a quoted '=' belongs to the value: [%s]", t.name);
  bad_line("\"a b.fits name=x", "unterminated quote: the '\"' at column 1");
  bad_line("a.fits name=\"x y", "column 13");
  bad_line("a.fits name=\"x\\", "found the end of the line");
  bad_line("a.fits name=\"x\\ny\"", "backslash must be followed");
  bad_line("\"\" vsys=3", "empty path");
  bad_line("a.fits \"vsys\"", "not key=value");
  bad_line("a.fits fast", "neither key=value nor the flag air");
  /* the air flag, and air for every target of a list */
  rc = parse("a.txt R=48000 air", NULL, &t, &got, &e);
  CHECK(rc == DT_OK && got && t.air == 1 && t.resolution == 48000, "flag air");
  rc = parse("a.txt R=48000", NULL, &t, &got, &e);
  CHECK(rc == DT_OK && got && t.air == 0, "no flag: air = 0");
  bad_line("a.fits air air", "given twice");
  bad_line("a.fits air=yes", "air is a flag");
  /* hfs=0|1: lines with hyperfine structure */
  rc = parse("a.txt hfs=1 R=90000", NULL, &t, &got, &e);
  CHECK(rc == DT_OK && got && t.hyperfine == 1 && t.resolution == 90000, "hfs=1");
  rc = parse("a.txt hfs=0", NULL, &t, &got, &e);
  CHECK(rc == DT_OK && got && t.hyperfine == 0, "hfs=0");
  rc = parse("a.txt", NULL, &t, &got, &e);
  CHECK(rc == DT_OK && got && t.hyperfine == 0, "no hfs: single lines");
  bad_line("a.fits hfs=yes", "hfs must be 0 or 1");
  bad_line("a.fits hfs=1 hfs=1", "given twice");
  bad_line("a.fits hfs", "not key=value");
  /* dt_targets_quote writes what the parser reads back */
  {
    const char *texts[] = {"plain.fits", "a b", "#x", "q\"uote", "back\\slash", "k=v", "", "\"\\#\" \t"};
    for (size_t i = 0; i < sizeof texts / sizeof texts[0]; i++) {
      char q[128], line[300];
      int qrc = dt_targets_quote(q, sizeof q, texts[i]);
      snprintf(line, sizeof line, "p.fits name=%s", q);
      rc = parse(line, NULL, &t, &got, &e);
      int same = qrc == DT_OK && rc == DT_OK && got && !strcmp(t.name, texts[i]);
      if (!texts[i][0]) same = qrc == DT_OK && !strcmp(q, "\"\"") && rc == DT_EFORMAT; /* name="" has no value */
      CHECK(same, "quote round trip %zu: [%s] -> %s", i, texts[i], q);
    }
    char q[128];
    CHECK(dt_targets_quote(q, sizeof q, "plain.fits") == DT_OK && !strcmp(q, "plain.fits"),
          "no quotes when none are needed");
    CHECK(dt_targets_quote(q, 5, "a b") == DT_EINVAL && dt_targets_quote(q, 6, "a b") == DT_OK,
          "too small a buffer is refused, an exact one accepted");
  }

  /* streaming a file: errors name the line, reading goes on after them */
  char path[] = "/tmp/dt-test-targets-XXXXXX";
  int fd = mkstemp(path);
  CHECK(fd >= 0, "temporary list");
  FILE *f = fdopen(fd, "w");
  fprintf(f, "# demo list\n\nsub/one.fits vsys=300\nbad.fits colour=red\n  two.txt R=2000 # ok\n");
  fwrite("nul\0byte\n", 1, 9, f);
  fwrite("three.fits\n", 1, 11, f);
  fclose(f);
  dt_targets *l;
  rc = dt_targets_open(path, &l, &e);
  CHECK(rc == DT_OK, "open list");
  const char *dir = "/tmp";
  rc = dt_targets_next(l, &t, &got, &e);
  CHECK(rc == DT_OK && got && t.line == 3 && !strncmp(t.path, dir, 4) && strstr(t.path, "/sub/one.fits"),
        "first target on line 3: %s", t.path);
  rc = dt_targets_next(l, &t, &got, &e);
  CHECK(rc == DT_EFORMAT && !strcmp(e.where, "line 4") && strstr(e.what, "colour"),
        "bad key reported on line 4 (%s: %s)", e.where, e.what);
  rc = dt_targets_next(l, &t, &got, &e);
  CHECK(rc == DT_OK && got && t.line == 5 && t.resolution == 2000, "reading goes on: line 5");
  rc = dt_targets_next(l, &t, &got, &e);
  CHECK(rc == DT_EFORMAT && !strcmp(e.where, "line 6") && strstr(e.what, "NUL"), "NUL byte on line 6");
  rc = dt_targets_next(l, &t, &got, &e);
  CHECK(rc == DT_OK && got && t.line == 7 && strstr(t.path, "three.fits"), "last line without a newline");
  rc = dt_targets_next(l, &t, &got, &e);
  CHECK(rc == DT_OK && got == 0, "end of list");
  dt_targets_close(l);
  /* dt_targets_set_air marks every target as air */
  rc = dt_targets_open(path, &l, &e);
  dt_targets_set_air(l, 1);
  rc = dt_targets_next(l, &t, &got, &e);
  CHECK(rc == DT_OK && got && t.line == 3 && t.air == 1, "air for all: the first target is air");
  dt_targets_close(l);
  rc = dt_targets_open(path, &l, &e);
  rc = dt_targets_next(l, &t, &got, &e);
  CHECK(rc == DT_OK && got && t.air == 0, "without it: not air");
  dt_targets_close(l);

  rc = dt_targets_open("/nonexistent/dir/list", &l, &e);
  CHECK(rc == DT_EIO && strstr(e.what, "cannot open"), "missing list file: %s", e.what);

  /* a long list streams in constant memory and quickly */
  f = fopen(path, "w");
  for (int i = 0; i < 100000; i++) fprintf(f, "spectra/s%06d.fits row=%d vsys=512 R=3000 name=t%d\n", i, i % 7 + 1, i);
  fclose(f);
  rc = dt_targets_open(path, &l, &e);
  long n = 0, rowsum = 0;
  while ((rc = dt_targets_next(l, &t, &got, &e)) == DT_OK && got) {
    n++;
    rowsum += t.row;
  }
  CHECK(rc == DT_OK && n == 100000 && dt_targets_lineno(l) == 100000, "100000 targets streamed (%ld)", n);
  CHECK(rowsum == 100000L / 7 * 28 + (1 + 2 + 3 + 4 + 5), "every row read (%ld)", rowsum);
  dt_targets_close(l);
  unlink(path);

  /* session names of queue entries: absolute and tidied, the same from
     any working directory */
  char c[512];
  CHECK(!strcmp(dt_queue_canonical("/home/ann/survey", "spec/./q1.fits", c, sizeof c), "/home/ann/survey/spec/q1.fits"),
        "relative path made absolute: %s", c);
  CHECK(!strcmp(dt_queue_canonical("/home/bob", "../ann/survey//spec/q1.fits", c, sizeof c),
                "/home/ann/survey/spec/q1.fits"),
        "'..' and '//' resolved: %s", c);
  CHECK(!strcmp(dt_queue_canonical("/x", "/data/a/../b/t.fits[2]", c, sizeof c), "/data/b/t.fits[2]"),
        "absolute path tidied, extension selector kept: %s", c);
  CHECK(!strcmp(dt_queue_canonical("/", "../../q.fits", c, sizeof c), "/q.fits"), "'..' stops at the root: %s", c);
  char fp[64], d[16];
  dt_queue_split_key("/data/b/t.fits[2]#CaII", fp, sizeof fp, d, sizeof d);
  CHECK(!strcmp(fp, "/data/b/t.fits[2]") && !strcmp(d, "CaII"), "session name split into file and doublet");
  dt_queue_split_key("/data/x#y/t.fits", fp, sizeof fp, d, sizeof d);
  CHECK(!strcmp(fp, "/data/x#y/t.fits") && !d[0], "a '#' in a directory name is not a doublet");

  /* a queue of many targets stays compact */
  dt_queue q;
  dt_queue_init(&q);
  int qrc = DT_OK;
  for (int i = 0; i < 100000 && qrc == DT_OK; i++) {
    dt_target_spec_init(&t, NULL);
    snprintf(t.path, sizeof t.path, "spectra/s%06d.fits", i);
    t.row = i % 3;
    qrc = dt_queue_add(&q, &t, &e);
  }
  CHECK(qrc == DT_OK && q.n == 100000, "100000 entries queued");
  size_t bytes = q.cap * sizeof q.e[0] + q.pool_cap;
  CHECK(bytes < 40u * 1000 * 1000, "... in %zu bytes (no spectra, no fixed-size paths)", bytes);
  CHECK(!strcmp(dt_queue_path(&q, 12345), "spectra/s012345.fits") && q.e[12345].row == 12345 % 3,
        "entry 12345 kept its path and row");
  dt_queue_free(&q);
  return dt_test_done();
}
