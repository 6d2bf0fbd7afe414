/* Messages at the edge and location of the bundled data. */
#include "cli.h"
#include "doubletty/lsf.h"
#include "doubletty/num.h"

#include <errno.h>
#include <math.h>
#include <limits.h>
#include <stdarg.h>
#include <stdlib.h>
#include <string.h>
#include <getopt.h>
#include <sys/stat.h>
#include <unistd.h>

#ifndef DT_DATADIR
#define DT_DATADIR "/usr/local/share/doubletty"
#endif

void cli_report_to(FILE *f, const char *file, const dt_err *e) {
  fprintf(f, "doubletty: ");
  if (file && *file) fprintf(f, "%s: ", file);
  if (e && e->where[0]) fprintf(f, "%s: ", e->where);
  fprintf(f, "%s\n", e && e->what[0] ? e->what : dt_status_str(e ? e->code : DT_EINVAL));
}

void cli_report(const char *file, const dt_err *e) { cli_report_to(stderr, file, e); }

void cli_errorf(const char *fmt, ...) {
  va_list ap;
  va_start(ap, fmt);
  fprintf(stderr, "doubletty: ");
  vfprintf(stderr, fmt, ap);
  fputc('\n', stderr);
  va_end(ap);
}

static int has_table(const char *dir) {
  char p[PATH_MAX + 16];
  snprintf(p, sizeof p, "%s/atomic.dat", dir);
  return access(p, R_OK) == 0;
}

const char *cli_datadir(void) {
  static char dir[PATH_MAX];
  const char *env = getenv("DOUBLETTY_DATA");
  if (env && *env) return env;
  char exe[PATH_MAX];
  ssize_t n = readlink("/proc/self/exe", exe, sizeof exe - 1);
  if (n > 0) {
    exe[n] = '\0';
    char *slash = strrchr(exe, '/');
    if (slash) {
      *slash = '\0';
      snprintf(dir, sizeof dir, "%.*s/../share/doubletty", (int)(sizeof dir - 32), exe);
      if (has_table(dir)) return dir;
    }
  }
  return DT_DATADIR;
}

/* Report a table that could not be read, with how to point to a good one. */
static void report_table(const char *path, const dt_err *e, const char *hint) {
  fprintf(stderr, "doubletty: %s: ", path);
  if (e->where[0]) fprintf(stderr, "%s: ", e->where);
  fprintf(stderr, "%s (%s)\n", e->what[0] ? e->what : dt_status_str(e->code), hint);
}

dt_atomic *cli_load_atomic(const char *user_table) {
  char path[PATH_MAX + 16];
  snprintf(path, sizeof path, "%s/atomic.dat", cli_datadir());
  const char *env = getenv("DOUBLETTY_DATA");
  int named = env && *env;
  dt_atomic *t = NULL;
  dt_err e;
  /* A table file named by DOUBLETTY_DATA, or found where doubletty was
   * installed, is used; without one, the table built into the program. */
  if (named || access(path, F_OK) == 0) {
    if (dt_atomic_load(path, &t, &e) != DT_OK) {
      report_table(path, &e, named ? "DOUBLETTY_DATA must name the directory holding atomic.dat; "
                                     "unset it to use the built-in table"
                                   : "repair or remove it to use the built-in table, or set "
                                     "DOUBLETTY_DATA to a directory holding a good atomic.dat");
      return NULL;
    }
  } else if (dt_atomic_load_builtin(&t, &e) != DT_OK) {
    cli_report("built-in atomic table", &e);
    return NULL;
  }
  if (user_table && dt_atomic_merge(t, user_table, &e) != DT_OK) {
    report_table(user_table, &e, "--atomic FILE must name a readable atomic table, in the format "
                                 "described in doubletty(1)");
    dt_atomic_free(t);
    return NULL;
  }
  return t;
}

dt_hyperfine *cli_load_hyperfine(const char *user_table) {
  char path[PATH_MAX + 16];
  snprintf(path, sizeof path, "%s/hyperfine.dat", cli_datadir());
  dt_hyperfine *t = NULL;
  dt_err e;
  /* A data directory from before the table had none: the built-in one. */
  if (access(path, F_OK) == 0) {
    if (dt_hyperfine_load(path, &t, &e) != DT_OK) {
      report_table(path, &e, "repair or remove it to use the built-in hyperfine table");
      return NULL;
    }
  } else if (dt_hyperfine_load_builtin(&t, &e) != DT_OK) {
    cli_report("built-in hyperfine table", &e);
    return NULL;
  }
  if (user_table && dt_hyperfine_merge(t, user_table, &e) != DT_OK) {
    report_table(user_table, &e, "--hyperfine-table FILE must name a readable hyperfine table, "
                                 "in the format described in doubletty(1)");
    dt_hyperfine_free(t);
    return NULL;
  }
  return t;
}

int cli_parse_double(const char *opt, const char *text, double *out) {
  if (dt_num_parse(text ? text : "", out) != DT_OK) {
    cli_errorf("%s: '%s' is not a number", opt, text ? text : "");
    return 1;
  }
  return 0;
}

int cli_parse_long(const char *opt, const char *text, long *out) {
  if (dt_num_parse_long(text ? text : "", LONG_MIN, LONG_MAX, out) != DT_OK) {
    cli_errorf("%s: '%s' is not a whole number", opt, text ? text : "");
    return 1;
  }
  return 0;
}

void cli_getopt_reset(void) {
  optind = 1;
  opterr = 0;
}

int cli_opt_error(const char *cmd, int c, char **argv) {
  const char *arg = optind > 0 ? argv[optind - 1] : "";
  char shortopt[3] = {'-', (char)optopt, '\0'};
  /* a long option names itself in argv; a short one only through optopt */
  const char *name = (arg && !strncmp(arg, "--", 2)) || !optopt ? arg : shortopt;
  char bare[128];
  snprintf(bare, sizeof bare, "%s", name ? name : "");
  char *eq = strchr(bare, '=');
  if (c == ':') {
    cli_errorf("%s: option '%s' needs a value", cmd, bare);
  } else if (eq && optopt) {
    *eq = '\0';
    cli_errorf("%s: option '%s' takes no value", cmd, bare);
  } else {
    if (eq) *eq = '\0'; /* "--bogus=1": the option is "--bogus" */
    cli_errorf("%s: unknown option '%s'", cmd, bare);
  }
  fprintf(stderr, "try 'doubletty %s --help'\n", cmd);
  return 2;
}

int cli_check_not_dir(const char *path) {
  struct stat st;
  if (path && strcmp(path, "-") && stat(path, &st) == 0 && S_ISDIR(st.st_mode)) {
    cli_errorf("%s: is a directory, not a file", path);
    return 1;
  }
  return 0;
}


int cli_system_option(const char *opt, const char *v, dt_system_opts *o) {
  dt_err e;
  if (!strcmp(opt, "--system")) {
    dt_system y;
    if (dt_system_parse(v, &y, &e) != DT_OK || dt_system_opts_add(o, &y, &e) != DT_OK) {
      cli_errorf("--system: %s", e.what);
      return 1;
    }
    return 0;
  }
  if (!strcmp(opt, "--milky-way")) {
    double x;
    if (cli_parse_double(opt, v, &x)) return 1;
    if (!isfinite(x) || x < 0 || x > 5000) {
      cli_errorf("--milky-way: %s is not a half width in km/s (0..5000; 0 = no Milky-Way system)", v);
      return 1;
    }
    o->no_mw = x == 0;
    o->mw_half = x;
    return 0;
  }
  /* --target-window VLO:VHI */
  if (cli_parse_range(opt, v, &o->target_vlo, &o->target_vhi)) return 1;
  o->has_target = 1;
  return 0;
}

int cli_parse_range(const char *opt, const char *text, double *lo, double *hi) {
  const char *colon = text ? strchr(text, ':') : NULL;
  if (!colon) {
    cli_errorf("%s: '%s' is not VLO:VHI (e.g. -400:300)", opt, text ? text : "");
    return 1;
  }
  char a[64], b[64];
  snprintf(a, sizeof a, "%.*s", (int)(colon - text), text);
  snprintf(b, sizeof b, "%s", colon + 1);
  if (cli_parse_double(opt, a, lo) || cli_parse_double(opt, b, hi)) return 1;
  if (!isfinite(*lo) || !isfinite(*hi) || *lo >= *hi) {
    cli_errorf("%s: empty velocity window %s (VLO must be below VHI)", opt, text);
    return 1;
  }
  return 0;
}

int cli_systems_check(const dt_system_opts *o) {
  if (o->nextra == 0) return 0;
  dt_system_opts so = *o;
  dt_system_set tmp;
  dt_err e;
  so.no_mw = 1;
  if (dt_systems_build(&so, 0.0, &tmp, &e) != DT_OK) {
    cli_errorf("--system: %s", e.what);
    return 1;
  }
  return 0;
}

static int frame_value(const char *cmd, const char *opt, const char *text, dt_frame *f) {
  if (dt_frame_parse(text, f) || *f == DT_FRAME_GALACTOC || *f == DT_FRAME_LOCALGRP) {
    cli_errorf("%s: %s %s: not a frame doubletty converts (TOPOCENT, GEOCENTR, BARYCENT, "
               "HELIOCEN, LSRK, LSRD)", cmd, opt, text);
    return 1;
  }
  return 0;
}

int cli_opt_frame(const char *cmd, const char *text, dt_read_opts *r) {
  return frame_value(cmd, "--frame", text, &r->out_frame);
}

int cli_opt_in_frame(const char *cmd, const char *text, dt_read_opts *r) {
  return frame_value(cmd, "--in-frame", text, &r->in_frame);
}

int cli_opt_resolution_table(const char *cmd, const char *path, dt_lsf_table **t,
                             dt_read_opts *r) {
  dt_err e;
  dt_lsf_table *nt = NULL;
  if (cli_check_not_dir(path)) return 1;
  if (dt_lsf_table_read(path, &nt, &e) != DT_OK) {
    cli_errorf("%s: --resolution-table %s: %s%s%s", cmd, path, e.where, e.where[0] ? ": " : "",
               e.what);
    return 1;
  }
  dt_lsf_table_free(*t);
  *t = nt;
  r->lsf_table = nt;
  return 0;
}

int cli_opt_per_doublet(const char *opt, const char *text, const char *what, dt_lsf_per *p) {
  dt_err e;
  if (dt_lsf_per_parse(text, what, p, &e) != DT_OK) {
    cli_errorf("%s: %s", opt, e.what);
    return 1;
  }
  return 0;
}

int cli_opt_site(const char *cmd, const char *text, dt_read_opts *r) {
  dt_frame_obs o;
  memset(&o, 0, sizeof o);
  if (dt_frame_parse_site(text, &o)) {
    cli_errorf("%s: --site %s: not LON,LAT,HEIGHT (degrees east, degrees, metres)", cmd, text);
    return 1;
  }
  r->has_site = 1;
  r->site_lon = o.lon;
  r->site_lat = o.lat;
  r->site_height = o.height;
  return 0;
}
