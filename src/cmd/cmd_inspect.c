/* doubletty inspect -- vet spectra full-screen.
 *
 * Builds the queue (files on the command line, target lists, or the
 * spectra two sessions disagree on), opens the session journal (which
 * replays what was already judged) and hands over to the inspector
 * (src/ui/inspector.c).  Everything that can be wrong with the options or
 * the inputs is reported here, before the screen is taken over; unreadable
 * spectra are not fatal: the inspector shows them as such. */
#include <errno.h>
#include <getopt.h>
#include <math.h>
#include <stdio.h>
#include <pwd.h>
#include <stdlib.h>
#include <unistd.h>
#include <string.h>

#include "../ui/ui.h"
#include "cli.h"
#include "doubletty/lsf.h"
#include "doubletty/hicube.h"
#include "commands.h"
#include "doubletty/agree.h"
#include "doubletty/journal.h"

static void usage(FILE *f) {
  fprintf(f,
          "usage: doubletty inspect [options] FILE...\n"
          "       doubletty inspect [options] --list TARGETS\n"
          "       doubletty FILE...\n"
          "Vet spectra full-screen: one keystroke per judgement, every judgement\n"
          "appended to the session file ('doubletty keys' lists the keys).\n\n"
          "  --list FILE          target list: one spectrum a line (path [row=N] [vsys=]\n"
          "                       [R= | fwhm=] [doublet=] [name=]); may be repeated\n"
          "  --files-from FILE    spectrum paths, one a line ('-': standard input)\n"
          "  --session FILE       session file (default: doubletty.session beside the\n"
          "                       first --list, else in the working directory)\n"
          "  --user NAME          who is judging (default $USER)\n"
          "  --read-only          look at a session without changing it\n"
          "  --only-disagreements S1 S2\n"
          "                       queue the spectra two sessions gave different verdicts\n"
          "                       (with --list: only the list's entries among them)\n"
          "  --doublet NAME       doublet when the list does not say (default NaI)\n"
          "  --resolution R       resolving power when neither list nor file says (also\n"
          "                       per doublet: NaI:4800,CaII:3600)\n"
          "  --fwhm KMS           ... or the line-spread FWHM in km/s\n"
          "  --resolution-table FILE  R at wavelengths (two columns: Angstrom, R), linear\n"
          "                       in between; over the list's R= and the files' own\n"
          "  --vsys KMS           rest frame when the list does not say\n"
          "  --target-window VLO:VHI  the target system's range [km/s] (default -300:300)\n"
          "  --system NAME:VLO:VHI    another absorber system [km/s] (repeatable)\n"
          "  --milky-way HALF     Milky-Way system -HALF..HALF km/s in the observer's\n"
          "                       frame (default 150; 0 = none)\n"
          "  --atomic FILE        extra atomic data table\n"
          "  --hyperfine          model Na I and K I lines as their hyperfine components\n"
          "                       (a list line may say hfs=1)\n"
          "  --hyperfine-table FILE  extra hyperfine table (adds or replaces lines)\n"
          "  --covering           partial covering on a first look: a covering factor\n"
          "                       per component (a list line's cover=0|1 says otherwise)\n"
          CLI_FRAME_HELP
          "  --hi CUBE            show a 21-cm cube's spectrum at each sightline (a panel\n"
          "                       on the velocity axis) and N(HI) in the table\n"
          "  --ascii              plain ASCII drawing even in a UTF-8 locale\n"
          "  --no-colour          no colours (also when NO_COLOR is set)\n"
          "  --replay-keys FILE   run headless: keys from FILE (action or key names, one a\n"
          "                       line; 'type TEXT' types text), no terminal needed\n"
          "  --screen-dump FILE   with --replay-keys: write the last screen as text\n"
          "  --size WxH           with --replay-keys: screen size (default 100x32)\n"
          "  --bench              with --replay-keys: print the time per keystroke\n"
          "  --no-look-ahead      do not open the next spectra in the background\n"
          "  --fit-slice MS       a refit longer than MS ms (default 5) is drawn as far\n"
          "                       as it got and finished after the frame; 0: wait for it\n");
}

static void report_line(const char *list, const dt_err *e) { cli_report(list, e); }

enum {
  O_LIST = 256, O_SESSION, O_USER, O_READONLY, O_DIS, O_DOUBLET, O_RES, O_FWHM, O_RESTAB, O_VSYS,
  O_ATOMIC, O_ASCII, O_NOCOLOUR, O_REPLAY, O_DUMP, O_SIZE, O_BENCH, O_FROM, O_AIR,
  O_FRAME, O_INFRAME, O_SITE, O_HI, O_TWIN, O_SYSTEM, O_MW, O_NOAHEAD, O_SLICE, O_HFS, O_HFSTAB,
  O_COVER
};
static const struct option LONGOPTS[] = {
    {"help", no_argument, NULL, 'h'},
    {"list", required_argument, NULL, O_LIST},
    {"files-from", required_argument, NULL, O_FROM},
    {"session", required_argument, NULL, O_SESSION},
    {"user", required_argument, NULL, O_USER},
    {"read-only", no_argument, NULL, O_READONLY},
    {"only-disagreements", required_argument, NULL, O_DIS},
    {"doublet", required_argument, NULL, O_DOUBLET},
    {"resolution", required_argument, NULL, O_RES},
    {"resolution-table", required_argument, NULL, O_RESTAB},
    {"fwhm", required_argument, NULL, O_FWHM},
    {"vsys", required_argument, NULL, O_VSYS},
    {"target-window", required_argument, NULL, O_TWIN},
    {"system", required_argument, NULL, O_SYSTEM},
    {"milky-way", required_argument, NULL, O_MW},
    {"atomic", required_argument, NULL, O_ATOMIC},
    {"hyperfine", no_argument, NULL, O_HFS},
    {"hyperfine-table", required_argument, NULL, O_HFSTAB},
    {"air", no_argument, NULL, O_AIR},
    {"frame", required_argument, NULL, O_FRAME},
    {"in-frame", required_argument, NULL, O_INFRAME},
    {"site", required_argument, NULL, O_SITE},
    {"hi", required_argument, NULL, O_HI},
    {"ascii", no_argument, NULL, O_ASCII},
    {"no-colour", no_argument, NULL, O_NOCOLOUR},
    {"no-color", no_argument, NULL, O_NOCOLOUR},
    {"replay-keys", required_argument, NULL, O_REPLAY},
    {"screen-dump", required_argument, NULL, O_DUMP},
    {"size", required_argument, NULL, O_SIZE},
    {"bench", no_argument, NULL, O_BENCH},
    {"no-look-ahead", no_argument, NULL, O_NOAHEAD},
    {"fit-slice", required_argument, NULL, O_SLICE},
    {"covering", no_argument, NULL, O_COVER},
    {NULL, 0, NULL, 0}};

/* What the command line asks for, besides the inspector's own options. */
typedef struct {
  const char *session, *user, *atomic_file;
  const char *hfs_file;  /* --hyperfine-table */
  const char *dis[2];
  int read_only, air;
  dt_read_opts read;     /* --frame, --in-frame, --site, --resolution-table */
  dt_lsf_table *rtable;  /* --resolution-table */
  const char *hi;        /* --hi CUBE */
  const char **files, **lists, **from;
  size_t nfiles, nlists, nfrom;
} inspect_args;

/* "WxH" within the limits of a replayed screen. */
static int parse_size(const char *v, dt_inspect_opts *o) {
  char tail;
  if (sscanf(v, "%dx%d%c", &o->width, &o->height, &tail) != 2 || o->width < 1 ||
      o->height < 1) {
    cli_errorf("inspect: --size wants WIDTHxHEIGHT, e.g. 100x32, not '%s'", v);
    return 1;
  }
  if (o->width > 1000 || o->height > 1000) {
    cli_errorf("inspect: --size %s: at most 1000x1000 characters", v);
    return 1;
  }
  return 0;
}

/* One option: 0 done, 1 bad value (message printed). */
static int inspect_option(int opt, const char *v, int argc, char **argv, inspect_args *a,
                          dt_inspect_opts *o) {
  switch (opt) {
  case O_LIST: a->lists[a->nlists++] = v; return 0;
  case O_FROM: a->from[a->nfrom++] = v; return 0;
  case O_SESSION: a->session = v; return 0;
  case O_USER:
    if (!*v) {
      cli_errorf("inspect: --user needs a name");
      return 1;
    }
    a->user = v;
    return 0;
  case O_READONLY: a->read_only = 1; return 0;
  case O_DIS:
    /* the second session is the next argument */
    if (optind >= argc || (argv[optind][0] == '-' && argv[optind][1])) {
      cli_errorf("inspect: --only-disagreements needs two session files");
      return 1;
    }
    a->dis[0] = v;
    a->dis[1] = argv[optind++];
    return 0;
  case O_DOUBLET: o->doublet = v; return 0;
  case O_RES:
  case O_FWHM: {
    /* a plain value, or values per doublet (lsf.h) */
    int fw = opt == O_FWHM;
    if (!strchr(v, ':')) {
      double *x = fw ? &o->fwhm_kms : &o->resolution;
      if (cli_parse_double(fw ? "--fwhm" : "--resolution", v, x)) return 1;
      if (!(*x > 0) || !isfinite(*x)) {
        cli_errorf(fw ? "inspect: --fwhm must be a positive width in km/s, not '%s'"
                      : "inspect: --resolution must be a positive resolving power, not '%s'",
                   v);
        return 1;
      }
      return 0;
    }
    if (cli_opt_per_doublet(fw ? "inspect: --fwhm" : "inspect: --resolution", v,
                            fw ? "the FWHM" : "R", &o->res_per))
      return 1;
    o->res_per_fwhm = fw;
    double x = dt_lsf_per_get(&o->res_per, "");
    if (fw) o->fwhm_kms = x;
    else o->resolution = x;
    return 0;
  }
  case O_RESTAB:
    return cli_opt_resolution_table("inspect", v, &a->rtable, &a->read);
  case O_VSYS:
    if (cli_parse_double("--vsys", v, &o->vsys)) return 1;
    o->has_vsys = 1;
    return 0;
  case O_TWIN:
  case O_SYSTEM:
  case O_MW: return cli_system_option(opt == O_TWIN ? "--target-window" : opt == O_SYSTEM ? "--system" : "--milky-way",
                                      v, &o->systems);
  case O_ATOMIC: a->atomic_file = v; return 0;
  case O_HFS: o->hyperfine_all = 1; return 0;
  case O_HFSTAB: a->hfs_file = v; o->hyperfine_all = 1; return 0;
  case O_AIR: a->air = 1; return 0;
  case O_FRAME: return cli_opt_frame("inspect", v, &a->read);
  case O_INFRAME: return cli_opt_in_frame("inspect", v, &a->read);
  case O_SITE: return cli_opt_site("inspect", v, &a->read);
  case O_HI: a->hi = v; return 0;
  case O_ASCII: o->ascii = 1; return 0;
  case O_NOCOLOUR: o->colour = 0; return 0;
  case O_REPLAY: o->replay = v; return 0;
  case O_DUMP: o->dump = v; return 0;
  case O_SIZE: return parse_size(v, o);
  case O_BENCH: o->bench = 1; return 0;
  case O_NOAHEAD: o->no_look_ahead = 1; return 0;
  case O_SLICE:
    if (cli_parse_double("--fit-slice", v, &o->fit_slice_ms)) return 1;
    if (!(o->fit_slice_ms >= 0) || o->fit_slice_ms > 1e6) {
      cli_errorf("--fit-slice: '%s' is not a time in ms from 0 to 1e6", v);
      return 1;
    }
    return 0;
  case O_COVER: o->covering = 1; return 0;
  }
  return 1;
}

/* 0 to go on, else the exit status (-1: --help shown). */
static int parse_args(int argc, char **argv, inspect_args *a, dt_inspect_opts *o) {
  cli_getopt_reset();
  int opt;
  while ((opt = getopt_long(argc, argv, ":h", LONGOPTS, NULL)) != -1) {
    if (opt == 'h') {
      usage(stdout);
      return -1;
    }
    if (opt == '?' || opt == ':') return cli_opt_error("inspect", opt, argv);
    if (inspect_option(opt, optarg, argc, argv, a, o)) return 2;
  }
  for (int i = optind; i < argc; i++) a->files[a->nfiles++] = argv[i];
  return 0;
}

/* Targets from a file of paths, one a line ('-': standard input). */
static int add_files_from(dt_queue *q, const char *path) {
  FILE *f = strcmp(path, "-") ? fopen(path, "r") : stdin;
  if (!f) {
    cli_errorf("%s: cannot open: %s", path, strerror(errno));
    return 1;
  }
  char *line = NULL;
  size_t cap = 0;
  ssize_t len;
  int rc = 0;
  dt_err e;
  while (!rc && (len = getline(&line, &cap, f)) != -1) {
    while (len > 0 && (line[len - 1] == '\n' || line[len - 1] == '\r')) line[--len] = '\0';
    char *p = line;
    while (*p == ' ' || *p == '\t') p++;
    if (!*p || *p == '#') continue;
    if (dt_queue_add_file(q, p, &e)) {
      cli_report(p, &e);
      rc = 1;
    }
  }
  if (!rc && ferror(f)) {
    cli_errorf("%s: read error: %s", path, strerror(errno));
    rc = 1;
  }
  free(line);
  if (f != stdin) fclose(f);
  return rc;
}

/* The disagreements of two sessions, each with the settings its first
 * session recorded (doublet, vsys, resolution): a malloc'd array. */
static int load_disagreements(const char *const dis[2], dt_target_spec **out, size_t *n) {
  dt_journal *s[2] = {NULL, NULL};
  dt_err e;
  dt_err_clear(&e);
  *out = NULL;
  *n = 0;
  for (int k = 0; k < 2; k++)
    if (dt_journal_open(dis[k], DT_JOURNAL_READ_ONLY, NULL, &s[k], &e)) {
      cli_report(dis[k], &e);
      dt_journal_close(s[0]);
      return 1;
    }
  dt_agree_report r;
  int st = dt_agree_sessions(s[0], s[1], &r, &e);
  if (st == DT_OK && r.ndisagree) {
    *out = calloc(r.ndisagree, sizeof **out);
    if (!*out) st = dt_err_set(&e, DT_ENOMEM, NULL, "out of memory");
  }
  for (size_t i = 0; st == DT_OK && i < r.ndisagree; i++) {
    const dt_journal_entry *en = r.disagree[i].a;
    const dt_judgement *j = &en->state;
    dt_target_spec *t = &(*out)[i];
    dt_target_spec_init(t, NULL);
    char where[sizeof t->path + 64]; /* the recorded path hint, found beside the session */
    dt_journal_resolve(s[0], en->target.path, where, sizeof where);
    dt_queue_split_key(where, t->path, sizeof t->path, t->doublet, sizeof t->doublet);
    if (en->target.name && en->target.name[0]) snprintf(t->name, sizeof t->name, "%s", en->target.name);
    if (!t->doublet[0]) snprintf(t->doublet, sizeof t->doublet, "%s", j->doublet);
    t->row = en->target.row;
    t->has_vsys = 1;
    t->vsys = j->vsys;
    t->has_window = 1; /* the velocity window the first session judged in */
    t->vlo = j->vlo;
    t->vhi = j->vhi;
    if (j->resolution > 0) t->resolution = j->resolution;
    else if (j->fwhm_kms > 0) t->fwhm_kms = j->fwhm_kms;
    (*n)++;
  }
  if (st == DT_OK) dt_agree_report_free(&r);
  dt_journal_close(s[0]);
  dt_journal_close(s[1]);
  if (st != DT_OK) {
    cli_report(NULL, &e);
    free(*out);
    *out = NULL;
    return 1;
  }
  return 0;
}

/* Index of the disagreement that queue entry i is, or n when it is none. */
static size_t find_disagreement(const dt_queue *q, size_t i, const dt_target_spec *d,
                                size_t n, const char *default_doublet) {
  const dt_qentry *x = &q->e[i];
  const char *dbl = x->doublet[0] ? x->doublet : default_doublet;
  char canon[DT_TARGET_PATH_MAX];
  for (size_t k = 0; k < n; k++) {
    if (d[k].row != x->row || strcmp(d[k].doublet, dbl)) continue;
    dt_queue_canonical(q->cwd, d[k].path, canon, sizeof canon);
    if (!strcmp(canon, dt_queue_key(q, i))) return k;
  }
  return n;
}

/* Queue the disagreements: alone, or (with lists) only the list entries
 * that are disagreements, in list order, with the list's settings. */
static int queue_disagreements(dt_queue *q, const inspect_args *a, const char *dflt) {
  dt_target_spec *d;
  size_t n;
  if (load_disagreements(a->dis, &d, &n)) return 1;
  dt_err e;
  int rc = 0;
  if (!a->nlists && !a->nfiles && !a->nfrom) {
    for (size_t k = 0; k < n && !rc; k++)
      if (dt_queue_add(q, &d[k], &e)) rc = 1;
  } else {
    /* keep the queued entries that are disagreements, in their order */
    size_t kept = 0;
    for (size_t i = 0; i < q->n; i++)
      if (find_disagreement(q, i, d, n, dflt) < n) q->e[kept++] = q->e[i];
    q->n = kept;
  }
  free(d);
  if (rc) cli_report(NULL, &e);
  if (!rc && q->n == 0) {
    printf("the two sessions agree on every spectrum both judged%s: nothing to look at\n",
           a->nlists ? " in the list" : "");
    return -1;
  }
  return rc;
}

/* The queue: files, lists, files-from, then the disagreement filter.
 * 0, -1 (nothing to do, exit 0) or the exit status. */
/* The first name of a doublet list "NAME[,NAME...]" (the first is vetted,
 * the others linked) that the table lacks, into buf; 0 when all are known. */
static int unknown_doublet(const dt_atomic *atomic, const char *list, char *buf, size_t n) {
  for (const char *p = list; p; p = strchr(p, ',') ? strchr(p, ',') + 1 : NULL) {
    snprintf(buf, n, "%.*s", (int)strcspn(p, ","), p);
    if (!dt_atomic_find(atomic, buf)) return 1;
  }
  return 0;
}

static int build_queue(dt_queue *q, const inspect_args *a, const dt_atomic *atomic,
                       const dt_inspect_opts *o) {
  dt_err e;
  q->air = a->air; /* --air: every spectrum queued, where its file does not say */
  q->read = a->read;
  for (size_t i = 0; i < a->nfiles; i++)
    if (dt_queue_add_file(q, a->files[i], &e)) {
      cli_report(a->files[i], &e);
      return 1;
    }
  for (size_t i = 0; i < a->nfrom; i++)
    if (add_files_from(q, a->from[i])) return 1;
  size_t bad_lines = 0;
  for (size_t i = 0; i < a->nlists; i++) {
    size_t nbad = 0;
    dt_err_clear(&e);
    if (cli_check_not_dir(a->lists[i])) return 2;
    if (dt_queue_add_list(q, a->lists[i], &nbad, report_line, &e)) {
      cli_report(a->lists[i], &e);
      return e.code == DT_EFORMAT ? 2 : 1;
    }
    bad_lines += nbad;
  }
  if (bad_lines) {
    cli_errorf("inspect: %zu bad line%s in the target list%s; nothing opened", bad_lines,
               bad_lines == 1 ? "" : "s", a->nlists == 1 ? "" : "s");
    return 2;
  }
  for (size_t i = 0; i < q->n; i++) {
    char d[64];
    if (q->e[i].doublet[0] && unknown_doublet(atomic, q->e[i].doublet, d, sizeof d)) {
      dt_err_set(&e, DT_EFORMAT, NULL, "line %ld: unknown doublet '%s'", q->e[i].line, d);
      cli_report(dt_queue_path(q, i), &e);
      return 2;
    }
  }
  if (a->dis[0]) {
    int r = queue_disagreements(q, a, o->doublet ? o->doublet : "NaI");
    if (r) return r;
  }
  if (q->n == 0) {
    cli_errorf("inspect: the target list is empty");
    return 2;
  }
  return 0;
}

/* Who is judging: --user, $USER, $LOGNAME, the account, "unknown". */
static const char *judge_name(const char *user) {
  if (!user) user = getenv("USER");
  if (!user || !*user) user = getenv("LOGNAME");
  if (!user || !*user) {
    /* no name in the environment (cron, a bare ssh command): the account's */
    struct passwd *pw = getpwuid(getuid());
    if (pw && pw->pw_name && *pw->pw_name) user = pw->pw_name;
  }
  return user && *user ? user : "unknown";
}

/* The default session: beside the (first) target list, else in the
 * working directory. */
static const char *default_session(const inspect_args *a, char *buf, size_t n) {
  if (!a->nlists) return "doubletty.session";
  const char *l = a->lists[0], *slash = strrchr(l, '/');
  if (!slash) return "doubletty.session";
  snprintf(buf, n, "%.*s/doubletty.session", (int)(slash - l), l);
  return buf;
}

/* Option combinations: 0 when they make sense, else 2 after a message. */
static int check_args(const inspect_args *a, const dt_inspect_opts *o) {
  if (o->resolution > 0 && o->fwhm_kms > 0) {
    cli_errorf("inspect: give --resolution or --fwhm, not both");
    return 2;
  }
  if ((o->dump || o->bench || (o->width && o->height)) && !o->replay) {
    cli_errorf("inspect: --screen-dump, --size and --bench go with --replay-keys");
    return 2;
  }
  if (!a->nfiles && !a->nlists && !a->nfrom && !a->dis[0]) {
    cli_errorf("inspect: no spectra: give FILEs, --list TARGETS, --files-from FILE or "
               "--only-disagreements S1 S2");
    fprintf(stderr, "try 'doubletty inspect --help'\n");
    return 2;
  }
  return 0;
}

/* Open the session and run the inspector; the exit status. */
static int run_session(dt_queue *q, const dt_atomic *atomic, const inspect_args *a,
                       dt_inspect_opts *o) {
  /* the terminal before the session: no session file is created for a
     screen we cannot use */
  char msg[512];
  if (dt_inspect_check(o, msg, sizeof msg)) {
    cli_errorf("inspect: %s", msg);
    return 1;
  }
  char defpath[DT_TARGET_PATH_MAX];
  const char *session = a->session ? a->session : default_session(a, defpath, sizeof defpath);
  dt_journal *jn = NULL;
  dt_err e;
  dt_err_clear(&e);
  if (dt_journal_open(session, a->read_only ? DT_JOURNAL_READ_ONLY : DT_JOURNAL_RW,
                      judge_name(a->user), &jn, &e)) {
    cli_report(session, &e);
    if (e.code == DT_ELOCK)
      fprintf(stderr, "doubletty: (use --read-only to look without judging)\n");
    return 1;
  }
  o->session_path = session;
  msg[0] = '\0';
  int rc = dt_inspect_run(q, atomic, jn, o, msg, sizeof msg);
  if (msg[0]) cli_errorf("inspect: %s", msg);
  if (dt_journal_failed(jn)) {
    cli_report(session, dt_journal_error(jn));
    fprintf(stderr, "doubletty: the session file could not be written: judgements after "
                    "that were refused\n");
    if (rc == 0) rc = 1;
  }
  dt_journal_close(jn);
  return rc;
}

int cmd_inspect(int argc, char **argv) {
  dt_inspect_opts o;
  dt_inspect_opts_init(&o);
  inspect_args a;
  memset(&a, 0, sizeof a);
  a.files = calloc((size_t)argc + 1, sizeof *a.files);
  a.lists = calloc((size_t)argc + 1, sizeof *a.lists);
  a.from = calloc((size_t)argc + 1, sizeof *a.from);
  int rc = 2;
  dt_atomic *atomic = NULL;
  dt_hicube *cube = NULL;
  dt_hyperfine *hfs = NULL;
  dt_queue q;
  dt_queue_init(&q);
  if (!a.files || !a.lists || !a.from) {
    cli_errorf("out of memory");
    goto out;
  }
  rc = parse_args(argc, argv, &a, &o);
  if (rc) {
    if (rc < 0) rc = 0;
    goto out;
  }
  const char *nc = getenv("NO_COLOR"); /* the common convention for "no colours, please" */
  if (nc && *nc) o.colour = 0;
  if ((rc = check_args(&a, &o))) goto out;
  if (cli_systems_check(&o.systems)) {
    rc = 2;
    goto out;
  }
  atomic = cli_load_atomic(a.atomic_file);
  if (!atomic) {
    rc = 1;
    goto out;
  }
  char unk[64];
  if (o.doublet && unknown_doublet(atomic, o.doublet, unk, sizeof unk)) {
    cli_errorf("inspect: --doublet: unknown doublet '%s'", unk);
    rc = 2;
    goto out;
  }
  rc = build_queue(&q, &a, atomic, &o);
  if (rc) {
    if (rc < 0) rc = 0;
    goto out;
  }
  /* the hyperfine table, always: a state recorded with hfs=1 is shown as
   * it was fitted, and --hyperfine or a list's hfs=1 turn it on for a
   * first look */
  hfs = cli_load_hyperfine(a.hfs_file);
  if (!hfs) {
    rc = 1;
    goto out;
  }
  o.hyperfine = hfs;
  if (a.hi) {
    dt_err e;
    if (dt_hicube_open(a.hi, &cube, &e) != DT_OK) {
      cli_report(a.hi, &e);
      rc = 1;
      goto out;
    }
    o.hi = cube;
  }
  rc = run_session(&q, atomic, &a, &o);
out:
  dt_hicube_close(cube);
  dt_hyperfine_free(hfs);
  dt_queue_free(&q);
  dt_atomic_free(atomic);
  dt_lsf_table_free(a.rtable);
  free(a.files);
  free(a.lists);
  free(a.from);
  return rc;
}
