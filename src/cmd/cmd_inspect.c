/* doubletty inspect -- vet spectra full-screen.
 *
 * Builds the queue (files on the command line, target lists, or the
 * spectra two sessions disagree on), opens the session journal (which
 * replays what was already judged) and hands over to the inspector
 * (src/ui/inspector.c).  Everything that can be wrong with the options or
 * the inputs is reported here, before the screen is taken over; unreadable
 * spectra are not fatal: the inspector shows them as such. */
#include <stdio.h>
#include <pwd.h>
#include <stdlib.h>
#include <unistd.h>
#include <string.h>

#include "../ui/inspector.h"
#include "../ui/queue.h"
#include "../ui/term.h"
#include "cli.h"
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
          "  --session FILE       session file (default ./doubletty.session)\n"
          "  --user NAME          who is judging (default $USER)\n"
          "  --read-only          look at a session without changing it\n"
          "  --only-disagreements S1 S2\n"
          "                       queue the spectra two sessions gave different verdicts\n"
          "  --doublet NAME       doublet when the list does not say (default NaI)\n"
          "  --resolution R       resolving power when neither list nor file says\n"
          "  --fwhm KMS           ... or the line-spread FWHM in km/s\n"
          "  --vsys KMS           rest frame when the list does not say\n"
          "  --atomic FILE        extra atomic data table\n"
          "  --ascii              plain ASCII drawing even in a UTF-8 locale\n"
          "  --no-colour          no colours (also when NO_COLOR is set)\n"
          "  --replay-keys FILE   run headless: keys from FILE (action or key names, one a\n"
          "                       line; 'type TEXT' types text), no terminal needed\n"
          "  --screen-dump FILE   with --replay-keys: write the last screen as text\n"
          "  --size WxH           with --replay-keys: screen size (default 100x32)\n"
          "  --bench              with --replay-keys: print the time per keystroke\n");
}

static void report_line(const char *list, const dt_err *e) { cli_report(list, e); }

static int need_arg(int i, int argc, const char *opt) {
  if (i + 1 >= argc) {
    cli_errorf("inspect: %s needs a value", opt);
    return 0;
  }
  return 1;
}

int cmd_inspect(int argc, char **argv) {
  dt_inspect_opts o;
  dt_inspect_opts_init(&o);
  const char *session = "doubletty.session", *user = NULL, *atomic_file = NULL;
  const char *dis[2] = {NULL, NULL};
  int read_only = 0;
  const char **files = calloc((size_t)argc + 1, sizeof *files);
  const char **lists = calloc((size_t)argc + 1, sizeof *lists);
  size_t nfiles = 0, nlists = 0;
  int rc = 2;
  dt_atomic *atomic = NULL;
  dt_queue q;
  dt_queue_init(&q);
  dt_journal *jn = NULL;
  if (!files || !lists) {
    cli_errorf("out of memory");
    goto out;
  }

  for (int i = 1; i < argc; i++) {
    const char *a = argv[i];
    if (!strcmp(a, "-h") || !strcmp(a, "--help")) {
      usage(stdout);
      rc = 0;
      goto out;
    } else if (!strcmp(a, "--list")) {
      if (!need_arg(i, argc, a)) goto out;
      lists[nlists++] = argv[++i];
    } else if (!strcmp(a, "--session")) {
      if (!need_arg(i, argc, a)) goto out;
      session = argv[++i];
    } else if (!strcmp(a, "--user")) {
      if (!need_arg(i, argc, a)) goto out;
      user = argv[++i];
      if (!*user) {
        cli_errorf("inspect: --user needs a name");
        goto out;
      }
    } else if (!strcmp(a, "--read-only")) {
      read_only = 1;
    } else if (!strcmp(a, "--only-disagreements")) {
      if (i + 2 >= argc) {
        cli_errorf("inspect: --only-disagreements needs two session files");
        goto out;
      }
      dis[0] = argv[++i];
      dis[1] = argv[++i];
    } else if (!strcmp(a, "--doublet")) {
      if (!need_arg(i, argc, a)) goto out;
      o.doublet = argv[++i];
    } else if (!strcmp(a, "--resolution")) {
      if (!need_arg(i, argc, a) || cli_parse_double(a, argv[++i], &o.resolution)) goto out;
      if (!(o.resolution > 0)) {
        cli_errorf("inspect: --resolution must be a positive resolving power, not '%s'", argv[i]);
        goto out;
      }
    } else if (!strcmp(a, "--fwhm")) {
      if (!need_arg(i, argc, a) || cli_parse_double(a, argv[++i], &o.fwhm_kms)) goto out;
      if (!(o.fwhm_kms > 0)) {
        cli_errorf("inspect: --fwhm must be a positive width in km/s, not '%s'", argv[i]);
        goto out;
      }
    } else if (!strcmp(a, "--vsys")) {
      if (!need_arg(i, argc, a) || cli_parse_double(a, argv[++i], &o.vsys)) goto out;
      o.has_vsys = 1;
    } else if (!strcmp(a, "--atomic")) {
      if (!need_arg(i, argc, a)) goto out;
      atomic_file = argv[++i];
    } else if (!strcmp(a, "--ascii")) {
      o.ascii = 1;
    } else if (!strcmp(a, "--no-colour") || !strcmp(a, "--no-color")) {
      o.colour = 0;
    } else if (!strcmp(a, "--replay-keys")) {
      if (!need_arg(i, argc, a)) goto out;
      o.replay = argv[++i];
    } else if (!strcmp(a, "--screen-dump")) {
      if (!need_arg(i, argc, a)) goto out;
      o.dump = argv[++i];
    } else if (!strcmp(a, "--size")) {
      if (!need_arg(i, argc, a)) goto out;
      char tail;
      if (sscanf(argv[++i], "%dx%d%c", &o.width, &o.height, &tail) != 2 || o.width < 1 || o.height < 1 ||
          o.width > 1000 || o.height > 1000) {
        cli_errorf("inspect: --size wants WIDTHxHEIGHT, e.g. 100x32, not '%s'", argv[i]);
        goto out;
      }
    } else if (!strcmp(a, "--bench")) {
      o.bench = 1;
    } else if (!strcmp(a, "--")) {
      for (i++; i < argc; i++) files[nfiles++] = argv[i];
    } else if (a[0] == '-' && a[1]) {
      cli_errorf("inspect: unknown option '%s'", a);
      usage(stderr);
      goto out;
    } else {
      files[nfiles++] = a;
    }
  }
  const char *nc = getenv("NO_COLOR"); /* the common convention for "no colours, please" */
  if (nc && *nc) o.colour = 0;
  if (o.resolution > 0 && o.fwhm_kms > 0) {
    cli_errorf("inspect: give --resolution or --fwhm, not both");
    goto out;
  }
  if ((o.dump || o.bench || (o.width && o.height)) && !o.replay) {
    cli_errorf("inspect: --screen-dump, --size and --bench go with --replay-keys");
    goto out;
  }
  if (!nfiles && !nlists && !dis[0]) {
    cli_errorf("inspect: no spectra: give FILEs, --list TARGETS or --only-disagreements S1 S2");
    usage(stderr);
    goto out;
  }

  atomic = cli_load_atomic(atomic_file);
  if (!atomic) {
    rc = 1;
    goto out;
  }
  if (o.doublet && !dt_atomic_find(atomic, o.doublet)) {
    cli_errorf("inspect: --doublet: unknown doublet '%s'", o.doublet);
    goto out;
  }

  /* the queue */
  dt_err e;
  for (size_t i = 0; i < nfiles; i++)
    if (dt_queue_add_file(&q, files[i], &e)) {
      cli_report(files[i], &e);
      rc = 1;
      goto out;
    }
  size_t bad_lines = 0;
  for (size_t i = 0; i < nlists; i++) {
    size_t nbad = 0;
    dt_err_clear(&e);
    if (dt_queue_add_list(&q, lists[i], &nbad, report_line, &e)) {
      cli_report(lists[i], &e);
      rc = e.code == DT_EFORMAT ? 2 : 1;
      goto out;
    }
    bad_lines += nbad;
  }
  if (bad_lines) {
    cli_errorf("inspect: %zu bad line%s in the target list%s; nothing opened", bad_lines,
               bad_lines == 1 ? "" : "s", nlists == 1 ? "" : "s");
    goto out;
  }
  for (size_t i = 0; i < q.n; i++) {
    const char *d = q.e[i].doublet;
    if (d[0] && !dt_atomic_find(atomic, d)) {
      dt_err_set(&e, DT_EFORMAT, NULL, "line %ld: unknown doublet '%s'", q.e[i].line, d);
      cli_report(dt_queue_path(&q, i), &e);
      goto out;
    }
  }
  if (dis[0]) {
    dt_journal *s1 = NULL, *s2 = NULL;
    dt_err_clear(&e);
    if (dt_journal_open(dis[0], DT_JOURNAL_READ_ONLY, NULL, &s1, &e)) {
      cli_report(dis[0], &e);
      rc = 1;
      goto out;
    }
    if (dt_journal_open(dis[1], DT_JOURNAL_READ_ONLY, NULL, &s2, &e)) {
      cli_report(dis[1], &e);
      dt_journal_close(s1);
      rc = 1;
      goto out;
    }
    dt_target *tl = NULL;
    size_t nt = 0;
    int st = dt_agree_disagreements(s1, s2, &tl, &nt, &e);
    if (st == DT_OK)
      for (size_t i = 0; i < nt && st == DT_OK; i++) {
        dt_target_spec t;
        dt_target_spec_init(&t, NULL);
        char where[sizeof t.path + 64];
        dt_journal_resolve(s1, tl[i].path, where, sizeof where);
        dt_queue_split_key(where, t.path, sizeof t.path, t.doublet, sizeof t.doublet);
        t.row = tl[i].row;
        st = dt_queue_add(&q, &t, &e);
      }
    free(tl);
    dt_journal_close(s1);
    dt_journal_close(s2);
    if (st != DT_OK) {
      cli_report(NULL, &e);
      rc = 1;
      goto out;
    }
    if (nt == 0 && q.n == 0) {
      printf("the two sessions agree on every spectrum both judged: nothing to look at\n");
      rc = 0;
      goto out;
    }
  }
  if (q.n == 0) {
    cli_errorf("inspect: the target list is empty");
    goto out;
  }

  /* the terminal before the session: no session file is created for a
     screen we cannot use */
  char msg[512];
  dt_term_opts to = {o.colour, o.ascii, o.replay != NULL, o.width, o.height};
  if (dt_term_check(&to, msg, sizeof msg)) {
    cli_errorf("inspect: %s", msg);
    rc = 1;
    goto out;
  }

  /* the session */
  if (!user) user = getenv("USER");
  if (!user || !*user) user = getenv("LOGNAME");
  if (!user || !*user) {
    /* no name in the environment (cron, a bare ssh command): the account's */
    struct passwd *pw = getpwuid(getuid());
    if (pw && pw->pw_name && *pw->pw_name) user = pw->pw_name;
  }
  if (!user || !*user) user = "unknown";
  dt_err_clear(&e);
  if (dt_journal_open(session, read_only ? DT_JOURNAL_READ_ONLY : DT_JOURNAL_RW, user, &jn, &e)) {
    cli_report(session, &e);
    if (e.code == DT_ELOCK) fprintf(stderr, "doubletty: (use --read-only to look without judging)\n");
    rc = 1;
    goto out;
  }

  msg[0] = '\0';
  rc = dt_inspect_run(&q, atomic, jn, &o, msg, sizeof msg);
  if (msg[0]) cli_errorf("inspect: %s", msg);
  if (jn && dt_journal_failed(jn)) {
    cli_report(session, dt_journal_error(jn));
    fprintf(stderr, "doubletty: the session file could not be written: judgements after that were refused\n");
    if (rc == 0) rc = 1;
  }

out:
  if (jn) dt_journal_close(jn);
  dt_queue_free(&q);
  dt_atomic_free(atomic);
  free(files);
  free(lists);
  return rc;
}
