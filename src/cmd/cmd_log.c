/* doubletty log — a session file's audit trail, readable.
 *
 * One line per recorded change, in the order of the file:
 *   WHEN  WHO  SPECTRUM  ACTION  WHAT  => RESULT
 * where RESULT is the state after the change (components, chi2_red of the
 * fit, verdict).  Filters select by spectrum (a glob pattern, or a plain
 * substring of the path), by user and by action; they combine with "and".
 * Damaged lines are reported on stderr with their line number and the trail
 * goes on.
 *
 * --verify replays the session and, for every spectrum whose final state
 * holds a fit, reads the spectrum, refits it from the recorded state and
 * reports whether the refit reproduces the recorded fit within the stated
 * tolerance (DT_REFIT_TOL_SIGMA), and whether the file's SHA-256 still is
 * the one recorded.  A relative spectrum path is looked up from the current
 * directory, then from the session file's directory.  Spectra are only
 * read. */
#include <fnmatch.h>
#include <getopt.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "cli.h"
#include "doubletty/lsf.h"
#include "doubletty/num.h"
#include "commands.h"
#include "doubletty/analysis.h"
#include "doubletty/atomic.h"
#include "doubletty/digest.h"
#include "doubletty/journal.h"
#include "doubletty/session.h"
#include "doubletty/spectrum.h"
#include "doubletty/utf8.h"
#include "session_util.h"

static void usage(FILE *f) {
  fprintf(f,
          "usage: doubletty log SESSION [options]\n"
          "Print the audit trail of a session file: when, who, which spectrum, what was\n"
          "done and the state after it, one change a line.\n\n"
          "options:\n"
          "  --target PATTERN  only spectra whose path or list name matches PATTERN\n"
          "                    (a glob such as 'demo/q0*.fits', any part of the path,\n"
          "                    or a whole list name such as VPQ06)\n"
          "  --user NAME       only changes made by NAME\n"
          "  --action NAMES    only these actions (comma-separated), e.g. verdict,note\n"
          "  --system NAME     only verdicts of the absorber system NAME (target,\n"
          "                    milky-way, or a system of the list or the run)\n"
          "  --verify          instead of the trail: refit every spectrum whose final\n"
          "                    state has a fit and report whether the refit reproduces\n"
          "                    it (within 0.1 sigma) and whether the file is unchanged\n"
          "  --atomic FILE     with --verify: add (or replace) doublets from FILE\n"
          "  --resolution-table FILE  with --verify: the R(lambda) table the fits used\n"
          "  -h, --help        this text\n\n"
          "actions: window-add window-remove comp-add comp-remove comp-set freeze tie-b\n"
          "         cont-order doublet resolution vsys vwindow fit verdict note restore autofit\n"
          "         link b-tie joint-fit\n");
}

static void comp_text(char *buf, size_t n, const dt_component *c, const dt_component *err) {
  if (err && isfinite(err->logN))
    snprintf(buf, n, "logN %.2f+-%.2f b %.1f+-%.1f v %+.1f+-%.1f", c->logN, err->logN, c->b,
             err->b, c->v, err->v);
  else
    snprintf(buf, n, "logN %.2f b %.1f v %+.1f", c->logN, c->b, c->v);
}

/* What the action did, in words and numbers. */
/* Controls (C0, DEL, C1) and bytes that are not UTF-8 become '?', one per
 * byte, in place. */
static void printable(char *s) {
  size_t len = strlen(s);
  for (size_t p = 0; p < len;) {
    uint32_t cp;
    size_t u = dt_utf8_decode(s + p, len - p, &cp);
    if (dt_utf8_is_control(cp)) memset(s + p, '?', u);
    p += u;
  }
}

/* A joint fit: the main doublet's components, then each linked species'
 * log N and b per component (the velocities are shared), then T and b_turb
 * under the rule "thermal". */
static void describe_joint(const dt_journal_record *r, char *buf, size_t n) {
  const dt_judgement *s = &r->after;
  const dt_fit_result *f = &s->fit;
  char c[160];
  size_t k = f->status == DT_OK
                 ? (size_t)snprintf(buf, n, "fitted jointly (b %s) in %d iterations", dt_btie_name(s->btie), f->niter)
                 : (size_t)snprintf(buf, n, "joint fit failed (%s)", dt_status_str(f->status));
  k += (size_t)snprintf(buf + k, k < n ? n - k : 0, " | %s", s->doublet);
  for (size_t i = 0; i < f->ncomp && k < n; i++) {
    comp_text(c, sizeof c, &f->comp[i], &f->err[i]);
    k += (size_t)snprintf(buf + k, n - k, "%s %s", i ? ";" : ":", c);
  }
  for (size_t sp = 0; sp < s->joint.nspecies && sp < DT_JUDGE_MAX_LINKED && k < n; sp++) {
    const dt_linked_species *js = &s->joint.sp[sp];
    k += (size_t)snprintf(buf + k, n - k, " | %s", js->doublet);
    for (size_t i = 0; i < s->ncomp && k < n; i++)
      k += (size_t)snprintf(buf + k, n - k, "%s logN %.2f+-%.2f b %.1f+-%.1f", i ? ";" : ":", js->logN[i],
                            js->logN_err[i], js->b[i], js->b_err[i]);
  }
  if (s->btie == DT_BTIE_THERMAL && k < n) {
    k += (size_t)snprintf(buf + k, n - k, " | thermal");
    for (size_t i = 0; i < s->ncomp && k < n; i++)
      k += (size_t)snprintf(buf + k, n - k, "%s T %.0f+-%.0f K b_turb %.1f+-%.1f", i ? ";" : ":", s->joint.T[i],
                            s->joint.T_err[i], s->joint.bturb[i], s->joint.bturb_err[i]);
  }
}

static void describe(const dt_journal_record *r, char *buf, size_t n) {
  const dt_action *a = &r->action;
  char fz[4], c[160];
  switch (a->kind) {
  case DT_ACT_WINDOW_ADD: snprintf(buf, n, "continuum window %.2f-%.2f A", a->x[0], a->x[1]); break;
  case DT_ACT_WINDOW_REMOVE: snprintf(buf, n, "continuum window %d", a->index + 1); break;
  case DT_ACT_COMP_ADD:
    comp_text(c, sizeof c, &(dt_component){a->x[0], a->x[1], a->x[2]}, NULL);
    snprintf(buf, n, "%s", c);
    break;
  case DT_ACT_COMP_REMOVE: snprintf(buf, n, "component %d", a->index + 1); break;
  case DT_ACT_COMP_SET:
    comp_text(c, sizeof c, &(dt_component){a->x[0], a->x[1], a->x[2]}, NULL);
    snprintf(buf, n, "component %d to %s", a->index + 1, c);
    break;
  case DT_ACT_FREEZE:
    if (a->ival) snprintf(buf, n, "component %d: %s frozen", a->index + 1, dt_freeze_str((unsigned)a->ival, fz));
    else snprintf(buf, n, "component %d: all free", a->index + 1);
    break;
  case DT_ACT_TIE_B: snprintf(buf, n, "%s", a->ival ? "b tied across components" : "b untied"); break;
  case DT_ACT_COVERING:
    snprintf(buf, n, "%s", a->ival ? "partial covering on" : "partial covering off");
    break;
  case DT_ACT_CONT_ORDER:
    if (a->ival < 0) snprintf(buf, n, "continuum fixed at 1");
    else snprintf(buf, n, "continuum order %d", a->ival);
    break;
  case DT_ACT_DOUBLET: snprintf(buf, n, "doublet %s", a->text); break;
  case DT_ACT_RESOLUTION:
    if (a->x[0] > 0) snprintf(buf, n, "resolving power %.0f", a->x[0]);
    else snprintf(buf, n, "line-spread FWHM %.1f km/s", a->x[1]);
    break;
  case DT_ACT_VSYS: snprintf(buf, n, "vsys %+.1f km/s", a->x[0]); break;
  case DT_ACT_VWINDOW: snprintf(buf, n, "velocity window %+.0f..%+.0f km/s", a->x[0], a->x[1]); break;
  case DT_ACT_FIT: {
    const dt_fit_result *f = &a->fit;
    size_t k = 0;
    if (f->status == DT_OK)
      k = (size_t)snprintf(buf, n, "fitted in %d iterations", f->niter);
    else
      k = (size_t)snprintf(buf, n, "fit failed (%s)", dt_status_str(f->status));
    for (size_t i = 0; i < f->ncomp && k < n; i++) {
      comp_text(c, sizeof c, &f->comp[i], &f->err[i]);
      k += (size_t)snprintf(buf + k, n - k, "%s %s", i ? ";" : ":", c);
    }
    break;
  }
  case DT_ACT_VERDICT:
    if (a->text[0] && strcmp(a->text, DT_JUDGE_TARGET))
      snprintf(buf, n, "%s: %s", a->text, dt_verdict_name((dt_verdict)a->ival));
    else
      snprintf(buf, n, "%s", dt_verdict_name((dt_verdict)a->ival));
    break;
  case DT_ACT_NOTE: {
    /* the note on one line, quoted: \\, \", \t, \n escapes; controls (C0,
       DEL, C1) and bytes that are not UTF-8 as \xHH, one per byte; a long
       note is cut between characters */
    size_t k = 0, len = strlen(a->text);
    if (n < 8) break;
    buf[k++] = '"';
    for (size_t p = 0; p < len && k + 6 < n;) {
      const char *c = a->text + p;
      uint32_t cp;
      size_t u = dt_utf8_decode(c, len - p, &cp);
      if (*c == '\\') k += (size_t)snprintf(buf + k, n - k, "\\\\");
      else if (*c == '"') k += (size_t)snprintf(buf + k, n - k, "\\\"");
      else if (*c == '\n') k += (size_t)snprintf(buf + k, n - k, "\\n");
      else if (*c == '\t') k += (size_t)snprintf(buf + k, n - k, "\\t");
      else if (dt_utf8_is_control(cp)) {
        if (k + 4 * u + 2 > n) break;
        for (size_t i = 0; i < u; i++) k += (size_t)snprintf(buf + k, n - k, "\\x%02X", (unsigned char)c[i]);
      } else if (k + u + 2 > n) {
        break;
      } else {
        memcpy(buf + k, c, u);
        k += u;
      }
      p += u;
    }
    buf[k++] = '"';
    buf[k] = '\0';
    break;
  }
  case DT_ACT_LINK: snprintf(buf, n, "%s %s", a->ival ? "linked" : "unlinked", a->text); break;
  case DT_ACT_BTIE: snprintf(buf, n, "b of linked species: %s", dt_btie_name((dt_btie)a->ival)); break;
  case DT_ACT_JOINT_FIT: describe_joint(r, buf, n); break;
  case DT_ACT_RESTORE: snprintf(buf, n, "state restored (undo/redo)"); break;
  case DT_ACT_AUTOFIT: snprintf(buf, n, "automatic first pass"); break;
  default: snprintf(buf, n, "?"); break;
  }
}

static void result(const dt_journal_record *r, char *buf, size_t n) {
  const dt_judgement *s = &r->after;
  size_t k = (size_t)snprintf(buf, n, "%zu component%s", s->ncomp, s->ncomp == 1 ? "" : "s");
  if (s->has_fit && k < n) {
    if (s->fit.status == DT_OK) k += (size_t)snprintf(buf + k, n - k, ", chi2_red %.3f", s->fit.chi2_red);
    else k += (size_t)snprintf(buf + k, n - k, ", fit failed");
  }
  if (k < n) {
    if (s->verdict == DT_VERDICT_NONE) k += (size_t)snprintf(buf + k, n - k, ", no verdict");
    else k += (size_t)snprintf(buf + k, n - k, ", %s", dt_verdict_name(s->verdict));
  }
  for (size_t i = 0; i < s->nsysv && i < DT_JUDGE_MAX_SYS && k < n; i++)
    k += (size_t)snprintf(buf + k, n - k, "%s%s: %s", i ? ", " : "; ", s->sysv[i].name,
                          dt_verdict_name(s->sysv[i].verdict));
  if (s->nlinked && k < n) {
    char lt[600];
    k += (size_t)snprintf(buf + k, n - k, "; %s", su_linked_text(s, lt, sizeof lt));
  }
  if ((r->flags & DT_JFLAG_FILE_CHANGED) && k < n)
    snprintf(buf + k, n - k, " [input file changed since its last record]");
}

/* A verdict of system name ("target": one without a system). */
static int verdict_of_system(const dt_action *a, const char *name) {
  if (a->kind != DT_ACT_VERDICT) return 0;
  const char *sys = a->text[0] ? a->text : DT_JUDGE_TARGET;
  return !strcmp(sys, name);
}

/* Comma-separated action names -> bit set; -1 with a message when unknown. */
static long parse_actions(const char *list) {
  long set = 0;
  char *copy = strdup(list), *save = NULL;
  if (!copy) return -1;
  for (char *tok = strtok_r(copy, ",", &save); tok; tok = strtok_r(NULL, ",", &save)) {
    dt_action_kind k;
    if (dt_action_kind_parse(tok, &k) != DT_OK) {
      cli_errorf("log: --action: unknown action '%s' (see doubletty log --help)", tok);
      free(copy);
      return -1;
    }
    set |= 1L << k;
  }
  free(copy);
  if (!set) cli_errorf("log: --action: no action named");
  return set ? set : -1;
}

/* A spectrum matches by its path (a glob, or a part of it) or by its list
 * name (a glob, or the whole name). */
static int target_matches(const char *pattern, const dt_target *t) {
  const char *name = t->name ? t->name : "";
  if (strpbrk(pattern, "*?["))
    return fnmatch(pattern, t->path, 0) == 0 || (*name && fnmatch(pattern, name, 0) == 0);
  return strstr(t->path, pattern) != NULL || !strcmp(name, pattern);
}

/* Does the file of a spectrum path exist (an extension selector "[..]"
 * aside)? */
static int exists(const char *path) {
  char plain[4200];
  int len = snprintf(plain, sizeof plain, "%s", path);
  if (len < 0 || (size_t)len >= sizeof plain) return 0; /* no such file name */
  size_t n = (size_t)len;
  char *lb = strrchr(plain, '[');
  if (lb && n && plain[n - 1] == ']') *lb = '\0';
  FILE *f = fopen(plain, "rb");
  if (f) fclose(f);
  return f != NULL;
}

/* The spectrum file of a recorded path: a relative one first from the
 * session's directory (where the session records it from), then from the
 * current directory; a trailing
 * "#NAME" after the file name (the doublet a spectrum was vetted for, as the
 * inspector records it) is not part of the file name. */
static const char *locate(const char *path, const char *session, char *buf, size_t n) {
  char bare[4200];
  snprintf(bare, sizeof bare, "%s", path);
  const char *slash = strrchr(bare, '/');
  char *hash = strrchr(slash ? slash : bare, '#');
  for (int pass = 0; pass < 2; pass++) {
    if (pass == 1) {
      if (!hash) break;
      *hash = '\0';
    }
    const char *ss = strrchr(session, '/');
    if (bare[0] != '/' && ss) {
      snprintf(buf, n, "%.*s/%s", (int)(ss - session), session, bare);
      if (exists(buf)) return buf;
    }
    if (exists(bare)) {
      snprintf(buf, n, "%s", bare);
      return buf;
    }
  }
  return path;
}

static int verify(const char *session, const char *pattern, const char *atomic_file,
                  const dt_lsf_table *rtable) {
  dt_journal *j = su_open(session);
  if (!j) return 1;
  dt_atomic *at = cli_load_atomic(atomic_file);
  /* the hyperfine table: states recorded with hfs=1 are refitted split */
  dt_hyperfine *ht = at ? cli_load_hyperfine(NULL) : NULL;
  if (!at || !ht) {
    dt_atomic_free(at);
    dt_journal_close(j);
    return 1;
  }
  long nfit = 0, nok = 0, nbad = 0, nfail = 0, nchanged = 0;
  char name[4200], where[4400], why[200], sha[DT_SHA256_HEX];
  for (size_t i = 0; i < dt_journal_count(j); i++) {
    const dt_journal_entry *en = dt_journal_entry_at(j, i);
    if (pattern && !target_matches(pattern, &en->target)) continue;
    su_target_name(&en->target, name, sizeof name);
    const char *file = locate(en->target.path, session, where, sizeof where);
    dt_err e;
    if (en->target.sha256[0]) {
      if (dt_digest_file(file, sha, &e) != DT_OK) {
        printf("cannot check  %s: %s\n", name, e.what);
        nfail++;
        continue;
      }
      if (strcmp(sha, en->target.sha256) != 0) {
        printf("CHANGED   %s: the file's SHA-256 is not the one recorded\n", name);
        nchanged++;
      }
    }
    if (!en->state.has_fit) continue;
    nfit++;
    dt_read_opts ro;
    memset(&ro, 0, sizeof ro);
    ro.lsf_table = rtable;
    ro.hdu = en->target.hdu;
    ro.row = en->target.row;
    /* the frame and position the fit was made in, as recorded */
    if (en->target.frame[0] && dt_frame_parse(en->target.frame, &ro.out_frame) != DT_OK)
      ro.out_frame = DT_FRAME_UNSET;
    char sky[sizeof en->target.sky];
    snprintf(sky, sizeof sky, "%s", en->target.sky);
    char *comma = strchr(sky, ',');
    if (comma) {
      *comma = '\0';
      if (dt_num_parse(sky, &ro.ra) == DT_OK && dt_num_parse(comma + 1, &ro.dec) == DT_OK) ro.has_pos = 1;
    }
    dt_spectrum *sp = NULL;
    if (dt_spectrum_read(file, &ro, &sp, &e) != DT_OK) {
      printf("cannot refit  %s: %s%s%s\n", name, e.where, e.where[0] ? ": " : "", e.what);
      nfail++;
      continue;
    }
    dt_analysis *an = dt_analysis_alloc(sp, at);
    if (!an) {
      dt_spectrum_free(sp);
      printf("cannot refit  %s: out of memory\n", name);
      nfail++;
      continue;
    }
    dt_analysis_opts o;
    dt_analysis_opts_init(&o);
    o.joint_cont = en->state.fit.ncont;
    o.hyperfine = ht;
    dt_analysis_set_opts(an, &o);
    int agrees = 0;
    int vrc = en->state.has_joint /* refitted jointly, every species compared */
                  ? dt_linked_verify(sp, at, &en->state, DT_REFIT_TOL_SIGMA, &agrees, why, sizeof why, &e)
                  : dt_analysis_verify_fit(an, &en->state, DT_REFIT_TOL_SIGMA, &agrees, why, sizeof why, &e);
    if (vrc != DT_OK) {
      printf("cannot refit  %s: %s\n", name, e.what);
      nfail++;
    } else if (agrees) {
      printf("reproduced    %s  (chi2_red %.3f%s)\n", name, en->state.fit.chi2_red,
             en->state.has_joint ? ", joint fit" : "");
      nok++;
    } else {
      printf("MISMATCH      %s: %s\n", name, why);
      nbad++;
    }
    dt_analysis_free(an);
    dt_spectrum_free(sp);
  }
  printf("%ld fits: %ld reproduced within %.1f sigma, %ld differ, %ld could not be refitted or "
         "checked; %ld files changed\n",
         nfit, nok, DT_REFIT_TOL_SIGMA, nbad, nfail, nchanged);
  dt_hyperfine_free(ht);
  dt_atomic_free(at);
  dt_journal_close(j);
  return (nbad || nfail || nchanged) ? 1 : 0;
}

static const struct option LONGOPTS[] = {{"help", no_argument, NULL, 'h'},
                                         {"target", required_argument, NULL, 't'},
                                         {"user", required_argument, NULL, 'u'},
                                         {"action", required_argument, NULL, 'a'},
                                         {"atomic", required_argument, NULL, 'A'},
                                         {"verify", no_argument, NULL, 'v'},
                                         {"system", required_argument, NULL, 's'},
                                         {"resolution-table", required_argument, NULL, 'T'},
                                         {NULL, 0, NULL, 0}};

int cmd_log(int argc, char **argv) {
  const char *session = NULL, *pattern = NULL, *user = NULL, *actions = NULL, *atomic = NULL;
  const char *system = NULL;
  int do_verify = 0, opt;
  dt_lsf_table *rtable = NULL;
  cli_getopt_reset();
  while ((opt = getopt_long(argc, argv, ":h", LONGOPTS, NULL)) != -1) {
    switch (opt) {
    case 'h': usage(stdout); return 0;
    case 't': pattern = optarg; break;
    case 'u': user = optarg; break;
    case 'a': actions = optarg; break;
    case 'A': atomic = optarg; break;
    case 'v': do_verify = 1; break;
    case 's': system = optarg; break;
    case 'T':
      if (cli_opt_resolution_table("log", optarg, &rtable, &(dt_read_opts){0})) return 2;
      break;
    default: dt_lsf_table_free(rtable); return cli_opt_error("log", opt, argv);
    }
  }
  if (optind < argc) session = argv[optind++];
  if (optind < argc) {
    cli_errorf("log: one session file at a time ('%s' is extra)", argv[optind]);
    return 2;
  }
  if (!session) {
    usage(stderr);
    return 2;
  }
  long actset = -1;
  if (actions && (actset = parse_actions(actions)) < 0) return 2;
  if (do_verify) {
    if (user || actions || system) {
      cli_errorf("log: --verify checks final states; --user, --action and --system do not apply");
      return 2;
    }
    int vrc = verify(session, pattern, atomic, rtable);
    dt_lsf_table_free(rtable);
    return vrc;
  }
  if (rtable) {
    dt_lsf_table_free(rtable);
    cli_errorf("log: --resolution-table goes with --verify");
    return 2;
  }

  dt_journal_reader *rd;
  dt_err e;
  if (dt_journal_reader_open(session, &rd, &e) != DT_OK) {
    cli_report(session, &e);
    return 1;
  }
  dt_journal_record *rec = malloc(sizeof *rec);
  if (!rec) {
    dt_journal_reader_close(rd);
    cli_errorf("out of memory");
    return 1;
  }
  int rc, status = 0;
  long shown = 0, damaged = 0;
  char name[4200], what[2400], res[1024], when[40];
  while ((rc = dt_journal_reader_next(rd, rec, &e)) != DT_ENOTFOUND) {
    if (rc == DT_EFORMAT) {
      fflush(stdout);
      cli_report(session, &e);
      damaged++;
      continue;
    }
    if (rc != DT_OK) {
      cli_report(session, &e);
      status = 1;
      break;
    }
    if (pattern && !target_matches(pattern, &rec->target)) continue;
    if (user && strcmp(user, rec->user) != 0) continue;
    if (actions && !(actset & (1L << rec->action.kind))) continue;
    if (system && !verdict_of_system(&rec->action, system)) continue;
    printable(rec->user); /* one line per record, nothing the terminal obeys */
    printable((char *)rec->target.path);
    describe(rec, what, sizeof what);
    result(rec, res, sizeof res);
    printf("%s  %s  %s  %s  %s  => %s\n", su_when(rec->time, when, sizeof when), rec->user,
           su_target_name(&rec->target, name, sizeof name), dt_action_name(rec->action.kind),
           what, res);
    shown++;
  }
  if (fflush(stdout) != 0 || ferror(stdout)) {
    cli_errorf("log: cannot write the output");
    status = 1;
  }
  if (damaged) {
    fprintf(stderr, "doubletty: %s: %ld damaged line%s skipped\n", session, damaged,
            damaged == 1 ? "" : "s");
    status = 1;
  }
  free(rec);
  dt_journal_reader_close(rd);
  return status;
}
