/* doubletty export — the final state of every spectrum of a session, as a
 * CSV file or a FITS binary table.
 *
 * One row per component (a spectrum without components gets one row with
 * component 0 and empty component fields), the spectrum's columns repeated
 * on each (the table and both writers are in the core: src/core/export.c).
 *
 * The output is written to a temporary file beside it and moved into place
 * at the end, so a failed export leaves no half file; an existing file is
 * never replaced without --force, and never when it is the session itself. */
#include <errno.h>
#include <getopt.h>

#include "doubletty/hicube.h"
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <strings.h>
#include <sys/stat.h>
#include <unistd.h>

#include "cli.h"
#include "commands.h"
#include "doubletty/digest.h"
#include "doubletty/export.h"
#include "doubletty/journal.h"
#include "session_util.h"

static void usage(FILE *f) {
  fprintf(f,
          "usage: doubletty export SESSION -o FILE.csv|FILE.fits [--force]\n"
          "Write the final state of every spectrum in a session file: verdict, note,\n"
          "components with errors, chi2, equivalent widths, apparent column densities,\n"
          "upper limits, who judged it and when.  One row per component.\n\n"
          "options:\n"
          "  -o FILE        output; the format follows the name: .csv, or .fits/.fit/.fts\n"
          "                 ('-o -' writes CSV to standard output)\n"
          "  --force        replace FILE if it exists\n"
          "  --hi CUBE      join the 21-cm columns of CUBE at each spectrum's position\n"
          "                 (logN_HI, logN_HI_err, v_HI_kms, sigma_HI_kms, T_peak_K,\n"
          "                 HI_status)\n"
          "  -h, --help     this text\n");
}

/* ---- the command ---- */

static int ends_with(const char *s, const char *suffix) {
  size_t n = strlen(s), m = strlen(suffix);
  return n > m && !strcasecmp(s + n - m, suffix);
}

/* Read the session and its digest from the same bytes: digest, replay,
 * digest again (a writer may be appending meanwhile). */
static dt_journal *load_with_digest(const char *session, char sha[DT_SHA256_HEX]) {
  for (int attempt = 0; attempt < 5; attempt++) {
    dt_err e;
    char sha2[DT_SHA256_HEX];
    if (dt_digest_file(session, sha, &e) != DT_OK) {
      cli_report(session, &e);
      return NULL;
    }
    dt_journal *j = su_open(session);
    if (!j) return NULL;
    if (dt_digest_file(session, sha2, &e) == DT_OK && !strcmp(sha, sha2)) return j;
    dt_journal_close(j);
  }
  cli_errorf("%s: the session keeps changing while it is read; try again", session);
  return NULL;
}

/* After the output is written: damaged lines of the session make the
 * export incomplete, and the exit status says so. */
static int damaged(const char *session, const dt_journal *j) {
  size_t nw = dt_journal_warning_count(j);
  if (!nw) return 0;
  cli_errorf("export: %s: %zu line%s damaged or inconsistent (see above); the export "
             "holds what could be read",
             session, nw, nw == 1 ? "" : "s");
  return 1;
}

int cmd_export(int argc, char **argv) {
  const char *session = NULL, *out = NULL;
  const char *hi = NULL;
  int force = 0, opt;
  static const struct option longopts[] = {{"help", no_argument, NULL, 'h'},
                                           {"output", required_argument, NULL, 'o'},
                                           {"force", no_argument, NULL, 'f'},
                                           {"hi", required_argument, NULL, 'H'},
                                           {NULL, 0, NULL, 0}};
  cli_getopt_reset();
  while ((opt = getopt_long(argc, argv, ":ho:", longopts, NULL)) != -1) {
    switch (opt) {
    case 'h': usage(stdout); return 0;
    case 'o': out = optarg; break;
    case 'f': force = 1; break;
    case 'H': hi = optarg; break;
    default: return cli_opt_error("export", opt, argv);
    }
  }
  if (optind < argc) session = argv[optind++];
  if (optind < argc) {
    cli_errorf("export: one session file at a time ('%s' is extra)", argv[optind]);
    return 2;
  }
  if (!session || !out || !*out) {
    if (session && !out) cli_errorf("export: no output file (-o FILE.csv or -o FILE.fits)");
    usage(stderr);
    return 2;
  }
  int to_stdout = !strcmp(out, "-");
  struct stat so, ss;
  if (!to_stdout && stat(session, &ss) == 0 && stat(out, &so) == 0 && so.st_dev == ss.st_dev &&
      so.st_ino == ss.st_ino) {
    cli_errorf("export: %s: that is the session file itself; choose another output", out);
    return 2;
  }
  int fits = !to_stdout && (ends_with(out, ".fits") || ends_with(out, ".fit") || ends_with(out, ".fts"));
  if (!to_stdout && !fits && !ends_with(out, ".csv")) {
    cli_errorf("export: %s: cannot tell the format from the name; use .csv or .fits", out);
    return 2;
  }
  if (!to_stdout && lstat(out, &so) == 0) {
    if (!force) {
      cli_errorf("export: %s: file exists; use --force to replace it", out);
      return 1;
    }
    if (S_ISDIR(so.st_mode)) {
      cli_errorf("export: %s: is a directory", out);
      return 1;
    }
  }

  dt_hicube *cube = NULL;
  if (hi) {
    dt_err he;
    if (dt_hicube_open(hi, &cube, &he) != DT_OK) {
      cli_report(hi, &he);
      return 1;
    }
  }
  char sha[DT_SHA256_HEX];
  dt_journal *j = load_with_digest(session, sha);
  if (!j) {
    dt_hicube_close(cube);
    return 1;
  }

  int status = 0;
  if (to_stdout) {
    if ((cube ? dt_export_csv_hi(stdout, j, cube) : dt_export_csv(stdout, j)) != DT_OK || fflush(stdout) != 0) {
      cli_errorf("export: cannot write to standard output");
      status = 1;
    }
    status |= damaged(session, j);
    dt_journal_close(j);
    dt_hicube_close(cube);
    return status;
  }

  /* a temporary file beside the output, moved into place at the end */
  size_t len = strlen(out);
  char *tmp = malloc(len + 16);
  if (!tmp) {
    dt_journal_close(j);
    dt_hicube_close(cube);
    cli_errorf("out of memory");
    return 1;
  }
  snprintf(tmp, len + 16, "%s.tmp-XXXXXX", out);
  int fd = mkstemp(tmp);
  if (fd < 0) {
    cli_errorf("export: %s: cannot create: %s", out, strerror(errno));
    free(tmp);
    dt_journal_close(j);
    dt_hicube_close(cube);
    return 1;
  }
  dt_err e;
  dt_err_clear(&e);
  int rc;
  if (fits) {
    close(fd);
    rc = cube ? dt_export_fits_hi(tmp, j, session, sha, DT_VERSION, cube, &e)
              : dt_export_fits(tmp, j, session, sha, DT_VERSION, &e);
  } else {
    FILE *f = fdopen(fd, "w");
    rc = f ? (cube ? dt_export_csv_hi(f, j, cube) : dt_export_csv(f, j)) : DT_EIO;
    if (f && (fflush(f) != 0 || fsync(fileno(f)) != 0)) rc = DT_EIO;
    if (f) {
      if (fclose(f) != 0) rc = DT_EIO;
    } else {
      close(fd);
    }
    if (rc != DT_OK) dt_err_set(&e, DT_EIO, NULL, "cannot write: %s", strerror(errno));
  }
  if (rc == DT_OK) {
    mode_t um = umask(0);
    umask(um);
    (void)chmod(tmp, 0666 & ~um);
    if (force) {
      if (rename(tmp, out) != 0) rc = dt_err_set(&e, DT_EIO, NULL, "cannot move into place: %s", strerror(errno));
    } else if (link(tmp, out) != 0) {
      int err = errno;
      if (err == EEXIST) rc = dt_err_set(&e, DT_EIO, NULL, "file exists; use --force to replace it");
      else if (access(out, F_OK) != 0 && rename(tmp, out) == 0) rc = DT_OK; /* no hard links here */
      else rc = dt_err_set(&e, DT_EIO, NULL, "cannot move into place: %s", strerror(err));
    }
  }
  unlink(tmp); /* after link(), or on failure; after rename() it is gone already */
  if (rc != DT_OK) {
    cli_report(out, &e);
    status = 1;
  }
  free(tmp);
  if (!status) status = damaged(session, j);
  dt_journal_close(j);
  dt_hicube_close(cube);
  return status;
}
