/* Reading the session file: one record line at a time.
 *
 * READING.  Records are replayed in order: the action is applied to the
 * spectrum's state (dt_judgement_apply) and the result compared with the
 * recorded state; a full record replaces the state.  A damaged line (bad
 * check sum, unparsable field) is skipped with a warning naming the line, and
 * the rest stays valid; if a later record of the same spectrum then does not
 * follow from the replayed state, its recorded components, verdict and fit
 * are adopted and the spectrum is flagged (replay mismatch).  An incomplete
 * last line (no newline at the end: a write cut short) is skipped with a
 * warning; a writer first ends it with a newline so that new records start on
 * a line of their own (the damaged line then stays, skipped, in the record).
 * The same reading works on a session file's bytes in memory
 * (dt_journal_reader_open_mem, dt_journal_open_mem).
 *
 */
#include "doubletty/journal.h"
#include "journal_int.h"

#include <errno.h>
#include <math.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>

#include "doubletty/measure.h"
#include "doubletty/num.h"

#define HEADER_TAG DT_JN_HEADER_TAG

struct dt_journal_reader {
  FILE *f;
  char *line;
  size_t cap;
  long lineno;
  int version;
  size_t ndamaged; /* lines skipped as damaged */
};

/* ---------- reading: parse one record line ---------- */

static int unescape(char *s) {
  char *w = s;
  for (char *r = s; *r; r++) {
    if (*r != '\\') {
      *w++ = *r;
      continue;
    }
    r++;
    switch (*r) {
    case '\\': *w++ = '\\'; break;
    case 't': *w++ = '\t'; break;
    case 'n': *w++ = '\n'; break;
    case 'r': *w++ = '\r'; break;
    case 'x': {
      int v = 0;
      for (int i = 1; i <= 2; i++) {
        char c = r[i];
        int d = c >= '0' && c <= '9' ? c - '0' : c >= 'A' && c <= 'F' ? c - 'A' + 10
                : c >= 'a' && c <= 'f' ? c - 'a' + 10 : -1;
        if (d < 0) return -1;
        v = v * 16 + d;
      }
      if (v == 0) return -1;
      *w++ = (char)v;
      r += 2;
      break;
    }
    default: return -1;
    }
  }
  *w = '\0';
  return 0;
}

static int parse_num(const char *s, double *x) {
  char *end;
  if (!*s) return -1;
  *x = dt_num_strtod(s, &end);
  return *end ? -1 : 0;
}

/* "X" or "X+-E"; err may be NULL (then "+-E" is an error). */
static int parse_pm(const char *s, double *x, double *err, int *has_err) {
  char *end;
  if (!*s) return -1;
  *x = dt_num_strtod(s, &end);
  if (end == s) return -1;
  if (has_err) *has_err = 0;
  if (*end == '\0') {
    if (err) *err = NAN;
    return 0;
  }
  if (end[0] != '+' || end[1] != '-' || !err) return -1;
  const char *e = end + 2;
  *err = dt_num_strtod(e, &end);
  if (end == e || *end) return -1;
  if (has_err) *has_err = 1;
  return 0;
}

static int parse_long(const char *s, long lo, long hi, long *v) {
  char *end;
  if (!*s) return -1;
  errno = 0;
  long x = strtol(s, &end, 10);
  if (*end || errno || x < lo || x > hi) return -1;
  *v = x;
  return 0;
}

/* "logN=X[+-E],b=X[+-E],v=X[+-E][,frozen=LETTERS]" */
static int parse_comp(char *s, dt_component *c, dt_component *err, int *has_err,
                      unsigned *frozen) {
  int seen = 0, nerr = 0;
  *frozen = 0;
  dt_component e = {NAN, NAN, NAN};
  for (char *tok = s; tok;) {
    char *comma = strchr(tok, ',');
    if (comma) *comma = '\0';
    char *eq = strchr(tok, '=');
    if (!eq) return -1;
    *eq = '\0';
    const char *v = eq + 1;
    double *dst = NULL, *edst = NULL;
    int bit = 0, he = 0;
    if (!strcmp(tok, "logN")) dst = &c->logN, edst = &e.logN, bit = 1;
    else if (!strcmp(tok, "b")) dst = &c->b, edst = &e.b, bit = 2;
    else if (!strcmp(tok, "v")) dst = &c->v, edst = &e.v, bit = 4;
    else if (!strcmp(tok, "frozen")) {
      if (dt_freeze_parse(v, frozen) != DT_OK || (seen & 8)) return -1;
      seen |= 8;
    } else return -1;
    if (dst) {
      if ((seen & bit) || parse_pm(v, dst, edst, &he)) return -1;
      seen |= bit;
      nerr += he;
    }
    tok = comma ? comma + 1 : NULL;
  }
  if ((seen & 7) != 7 || (nerr != 0 && nerr != 3)) return -1;
  if (err) *err = e;
  *has_err = nerr == 3;
  return 0;
}

static int fail(dt_err *e, const char *fmt, const char *arg) {
  char what[200];
  snprintf(what, sizeof what, fmt, arg);
  return dt_err_set(e, DT_EFORMAT, NULL, "%s", what);
}

int dt_journal_parse(char *line, dt_journal_record *rec, dt_err *e) {
  size_t len = strlen(line);
  if (len && line[len - 1] == '\n') line[--len] = '\0';
  /* the check sum first: nothing in a damaged line is trusted */
  char *last = strrchr(line, '\t');
  if (!last || strncmp(last, "\tsum=", 5) != 0 || strlen(last + 5) != 8)
    return dt_err_set(e, DT_EFORMAT, NULL, "no check sum at the end: damaged line");
  char *end;
  unsigned long sum = strtoul(last + 5, &end, 16);
  if (*end || sum != dt_jn_fnv1a32(line, (size_t)(last - line)))
    return dt_err_set(e, DT_EFORMAT, NULL,
                      "check sum does not match: the line was altered or damaged");
  *last = '\0';

  memset(rec, 0, sizeof *rec);
  dt_judgement_init(&rec->after);
  dt_meas_summary_clear(&rec->meas);
  dt_action *a = &rec->action;

  /* split into fields */
  char *fld[160];
  size_t nf = 0;
  for (char *p = line;;) {
    if (nf == sizeof fld / sizeof fld[0]) return dt_err_set(e, DT_EFORMAT, NULL, "too many fields");
    fld[nf++] = p;
    char *t = strchr(p, '\t');
    if (!t) break;
    *t = '\0';
    p = t + 1;
  }
  /* time */
  size_t tl = strlen(fld[0]);
  if (tl < 20 || tl >= DT_JOURNAL_TIME_MAX || fld[0][4] != '-' || fld[0][10] != 'T' ||
      fld[0][tl - 1] != 'Z')
    return fail(e, "'%.40s' is not a UTC time stamp", fld[0]);
  memcpy(rec->time, fld[0], tl + 1);

  enum { HAVE_USER = 1, HAVE_FILE = 2, HAVE_ACT = 4, HAVE_ARROW = 8, HAVE_VERDICT = 16,
         HAVE_NCOMP = 32, HAVE_FIT = 64 };
  unsigned have = 0;
  /* action fields seen (bit per key) */
  unsigned ahave = 0;
  enum { A_LO = 1, A_HI = 2, A_I = 4, A_LOGN = 8, A_B = 16, A_V = 32, A_FROZEN = 64,
         A_TIE = 128, A_ORDER = 256, A_DOUBLET = 512, A_R = 1024, A_FWHM = 2048,
         A_VSYS = 4096, A_VLO = 8192, A_VHI = 16384, A_VERDICT = 32768, A_NOTE = 65536 };
  unsigned fhave = 0; /* full-state fields */
  size_t ncomp = 0, ncseen = 0, nfseen = 0;
  unsigned cseen = 0, fseen = 0;
  int comp_err[DT_MAX_COMP] = {0};
  dt_component cerr[DT_MAX_COMP];
  dt_fit_result *fit = &rec->after.fit;
  int fit_status_set = 0;
  for (size_t i = 1; i < nf; i++) {
    char *f = fld[i];
    if (!strcmp(f, "=>")) {
      if (!(have & HAVE_ACT) || (have & HAVE_ARROW)) return fail(e, "misplaced '%s'", "=>");
      have |= HAVE_ARROW;
      continue;
    }
    char *eq = strchr(f, '=');
    if (!eq || eq == f) return fail(e, "field '%.40s' is not KEY=VALUE", f);
    *eq = '\0';
    char *k = f, *v = eq + 1;
    long lv;
    int bad = 0;
    if (!(have & HAVE_ARROW)) {
      if (!(have & HAVE_ACT)) { /* identity */
        if (!strcmp(k, "user")) {
          if (unescape(v)) bad = 1;
          else dt_jn_copy_str(rec->user, sizeof rec->user, v);
          have |= HAVE_USER;
        } else if (!strcmp(k, "file")) {
          if (unescape(v) || !*v) bad = 1;
          rec->target.path = v;
          have |= HAVE_FILE;
        } else if (!strcmp(k, "name")) {
          if (unescape(v) || !*v) bad = 1;
          rec->target.name = v;
        } else if (!strcmp(k, "hdu")) {
          if (parse_long(v, 0, 100000, &lv)) bad = 1;
          else rec->target.hdu = (int)lv;
        } else if (!strcmp(k, "row")) {
          if (parse_long(v, 0, 1L << 62, &lv)) bad = 1;
          else rec->target.row = lv;
        } else if (!strcmp(k, "sha256")) {
          if (*v && !dt_digest_is_hex(v)) bad = 1;
          else dt_jn_copy_str(rec->target.sha256, sizeof rec->target.sha256, v);
        } else if (!strcmp(k, "was")) {
          if (!dt_digest_is_hex(v)) bad = 1;
          else {
            dt_jn_copy_str(rec->sha256_was, sizeof rec->sha256_was, v);
            rec->flags |= DT_JFLAG_FILE_CHANGED;
          }
        } else if (!strcmp(k, "act")) {
          dt_action_kind kind;
          if (dt_action_kind_parse(v, &kind) != DT_OK) return fail(e, "unknown action '%.40s'", v);
          dt_action_init(a, kind);
          have |= HAVE_ACT;
        } else {
          return fail(e, "unknown field '%.40s'", k);
        }
      } else { /* action fields */
        unsigned bit = 0;
        if (!strcmp(k, "lo")) bit = A_LO, bad = parse_num(v, &a->x[0]);
        else if (!strcmp(k, "hi")) bit = A_HI, bad = parse_num(v, &a->x[1]);
        else if (!strcmp(k, "i")) {
          bit = A_I;
          bad = parse_long(v, 1, 1000, &lv);
          if (!bad) a->index = (int)lv - 1;
        } else if (!strcmp(k, "logN")) bit = A_LOGN, bad = parse_num(v, &a->x[0]);
        else if (!strcmp(k, "b")) bit = A_B, bad = parse_num(v, &a->x[1]);
        else if (!strcmp(k, "v")) bit = A_V, bad = parse_num(v, &a->x[2]);
        else if (!strcmp(k, "frozen")) {
          unsigned fb;
          bit = A_FROZEN;
          bad = dt_freeze_parse(v, &fb) != DT_OK;
          a->ival = (int)fb;
        } else if (!strcmp(k, "tie")) {
          bit = A_TIE;
          bad = parse_long(v, 0, 1, &lv);
          a->ival = (int)lv;
        } else if (!strcmp(k, "order")) {
          bit = A_ORDER;
          bad = parse_long(v, -1, DT_MAX_CONT - 1, &lv);
          a->ival = (int)lv;
        } else if (!strcmp(k, "doublet")) {
          bit = A_DOUBLET;
          bad = unescape(v) || strlen(v) >= sizeof a->text;
          if (!bad) dt_jn_copy_str(a->text, sizeof a->text, v);
        } else if (!strcmp(k, "R")) bit = A_R, bad = parse_num(v, &a->x[0]);
        else if (!strcmp(k, "fwhm")) bit = A_FWHM, bad = parse_num(v, &a->x[1]);
        else if (!strcmp(k, "vsys")) bit = A_VSYS, bad = parse_num(v, &a->x[0]);
        else if (!strcmp(k, "vlo")) bit = A_VLO, bad = parse_num(v, &a->x[0]);
        else if (!strcmp(k, "vhi")) bit = A_VHI, bad = parse_num(v, &a->x[1]);
        else if (!strcmp(k, "verdict")) {
          dt_verdict vd;
          bit = A_VERDICT;
          bad = dt_verdict_parse(v, &vd) != DT_OK;
          a->ival = (int)vd;
        } else if (!strcmp(k, "note")) {
          bit = A_NOTE;
          bad = unescape(v) || strlen(v) >= sizeof a->text;
          if (!bad) dt_jn_copy_str(a->text, sizeof a->text, v);
        } else {
          return fail(e, "unknown field '%.40s'", k);
        }
        if (ahave & bit) return fail(e, "field '%.40s' given twice", k);
        ahave |= bit;
      }
    } else { /* the state after */
      if (!strcmp(k, "verdict")) {
        bad = dt_verdict_parse(v, &rec->after.verdict) != DT_OK;
        have |= HAVE_VERDICT;
      } else if (!strcmp(k, "ncomp")) {
        bad = parse_long(v, 0, DT_MAX_COMP, &lv);
        ncomp = (size_t)lv;
        have |= HAVE_NCOMP;
      } else if ((k[0] == 'c' || k[0] == 'f') && k[1] >= '1' && k[1] <= '9' && k[2] == '\0') {
        size_t idx = (size_t)(k[1] - '1');
        if (idx >= DT_MAX_COMP) return fail(e, "component field '%.40s' out of range", k);
        unsigned fz = 0;
        int he = 0;
        if (k[0] == 'c') {
          if (cseen & (1u << idx)) return fail(e, "field '%.40s' given twice", k);
          bad = parse_comp(v, &rec->after.comp[idx], &cerr[idx], &he, &fz);
          rec->after.frozen[idx] = (unsigned char)fz;
          comp_err[idx] = he;
          cseen |= 1u << idx;
          ncseen++;
        } else {
          if (fseen & (1u << idx)) return fail(e, "field '%.40s' given twice", k);
          bad = parse_comp(v, &fit->comp[idx], &fit->err[idx], &he, &fz) || !he || fz;
          fseen |= 1u << idx;
          nfseen++;
        }
      } else if (!strcmp(k, "tie-b")) {
        bad = parse_long(v, 0, 1, &lv);
        rec->after.tie_b = (int)lv;
      } else if (!strcmp(k, "fit")) {
        bad = dt_jn_status_parse(v, &fit->status) != 0;
        if (bad && !parse_long(v, -1000, 1000, &lv)) fit->status = (int)lv, bad = 0;
        fit_status_set = 1;
        have |= HAVE_FIT;
      } else if (!strcmp(k, "niter")) {
        bad = parse_long(v, -1, 1L << 30, &lv);
        fit->niter = (int)lv;
      } else if (!strcmp(k, "chi2")) bad = parse_num(v, &fit->chi2);
      else if (!strcmp(k, "dof")) {
        bad = parse_long(v, -(1L << 40), 1L << 40, &lv);
        fit->dof = lv;
      } else if (!strcmp(k, "chi2r")) bad = parse_num(v, &fit->chi2_red);
      else if (!strcmp(k, "bic")) bad = parse_num(v, &fit->bic);
      else if (!strcmp(k, "npix")) {
        bad = parse_long(v, 0, 1L << 40, &lv);
        fit->npix = (size_t)lv;
      } else if (!strcmp(k, "cont")) {
        size_t n = 0;
        for (char *tok = v; tok && !bad;) {
          char *comma = strchr(tok, ',');
          if (comma) *comma = '\0';
          int he = 0;
          if (n >= DT_MAX_CONT) bad = 1;
          else bad = parse_pm(tok, &fit->cont_coef[n], &fit->cont_err[n], &he) || !he;
          n++;
          tok = comma ? comma + 1 : NULL;
        }
        fit->ncont = n;
      } else if ((k[0] == 'W' || !strncmp(k, "Wlim", 4) || !strncmp(k, "logNa", 5) ||
                  !strncmp(k, "logNlim", 7)) &&
                 (k[strlen(k) - 1] == '1' || k[strlen(k) - 1] == '2')) {
        int l = k[strlen(k) - 1] - '1';
        dt_meas_line *ml = &rec->meas.line[l];
        size_t kl = strlen(k) - 1;
        if (kl == 1 && k[0] == 'W') bad = parse_pm(v, &ml->w, &ml->w_err, NULL);
        else if (kl == 4 && !strncmp(k, "Wlim", 4)) bad = parse_num(v, &ml->w_lim);
        else if (kl == 5 && !strncmp(k, "logNa", 5))
          bad = parse_pm(v, &ml->logN_aod, &ml->logN_aod_err, NULL);
        else if (kl == 7 && !strncmp(k, "logNlim", 7)) bad = parse_num(v, &ml->logN_lim);
        else return fail(e, "unknown field '%.40s'", k);
        rec->has |= DT_REC_MEAS;
      } else if (!strcmp(k, "nsigma")) {
        bad = parse_num(v, &rec->meas.nsigma);
        rec->has |= DT_REC_MEAS;
      } else if (!strcmp(k, "saturated")) {
        bad = parse_long(v, 0, 1, &lv);
        rec->meas.saturated = (int)lv;
      } else if (!strcmp(k, "suggested")) {
        bad = dt_verdict_parse(v, &rec->meas.suggested) != DT_OK;
      } else if (!strcmp(k, "full")) {
        bad = parse_long(v, 1, 1, &lv);
        rec->has |= DT_REC_FULL;
      } else if (!strcmp(k, "doublet")) {
        bad = unescape(v) || !*v || strlen(v) >= sizeof rec->after.doublet;
        if (!bad) dt_jn_copy_str(rec->after.doublet, sizeof rec->after.doublet, v);
        fhave |= 1;
      } else if (!strcmp(k, "vsys")) bad = parse_num(v, &rec->after.vsys), fhave |= 2;
      else if (!strcmp(k, "R")) bad = parse_num(v, &rec->after.resolution), fhave |= 4;
      else if (!strcmp(k, "fwhm")) bad = parse_num(v, &rec->after.fwhm_kms), fhave |= 8;
      else if (!strcmp(k, "vlo")) bad = parse_num(v, &rec->after.vlo), fhave |= 16;
      else if (!strcmp(k, "vhi")) bad = parse_num(v, &rec->after.vhi), fhave |= 32;
      else if (!strcmp(k, "order")) {
        bad = parse_long(v, -1, DT_MAX_CONT - 1, &lv);
        rec->after.cont_order = (int)lv;
        fhave |= 64;
      } else if (!strcmp(k, "windows")) {
        size_t n = 0;
        for (char *tok = *v ? v : NULL; tok && !bad;) {
          char *comma = strchr(tok, ',');
          if (comma) *comma = '\0';
          char *colon = strchr(tok, ':');
          if (!colon || n >= DT_MAX_WINDOWS) bad = 1;
          else {
            *colon = '\0';
            bad = parse_num(tok, &rec->after.win[n].lo) ||
                  parse_num(colon + 1, &rec->after.win[n].hi);
          }
          n++;
          tok = comma ? comma + 1 : NULL;
        }
        rec->after.nwin = n;
        fhave |= 128;
      } else if (!strcmp(k, "note")) {
        bad = unescape(v) || strlen(v) >= sizeof rec->after.note;
        if (!bad) dt_jn_copy_str(rec->after.note, sizeof rec->after.note, v);
        fhave |= 256;
      } else {
        return fail(e, "unknown field '%.40s'", k);
      }
    }
    if (bad) return fail(e, "bad value in field '%.40s'", k);
  }
  if (!(have & HAVE_USER)) return fail(e, "no %s field", "user=");
  if (!(have & HAVE_FILE)) return fail(e, "no %s field", "file=");
  if (!(have & HAVE_ACT)) return fail(e, "no %s field", "act=");
  if (!(have & HAVE_ARROW)) return fail(e, "no %s field", "'=>'");
  if (!(have & HAVE_VERDICT)) return fail(e, "no %s field", "verdict=");
  if (!(have & HAVE_NCOMP)) return fail(e, "no %s field", "ncomp=");
  if (ncseen != ncomp || (ncomp && cseen != (1u << ncomp) - 1))
    return fail(e, "%s", "components c1.. do not match ncomp");
  rec->after.ncomp = ncomp;

  /* the action's required fields */
  static const unsigned need[DT_ACT__COUNT] = {
      [DT_ACT_WINDOW_ADD] = A_LO | A_HI, [DT_ACT_WINDOW_REMOVE] = A_I,
      [DT_ACT_COMP_ADD] = A_LOGN | A_B | A_V, [DT_ACT_COMP_REMOVE] = A_I,
      [DT_ACT_COMP_SET] = A_I | A_LOGN | A_B | A_V, [DT_ACT_FREEZE] = A_I | A_FROZEN,
      [DT_ACT_TIE_B] = A_TIE, [DT_ACT_CONT_ORDER] = A_ORDER, [DT_ACT_DOUBLET] = A_DOUBLET,
      [DT_ACT_RESOLUTION] = A_R | A_FWHM, [DT_ACT_VSYS] = A_VSYS,
      [DT_ACT_VWINDOW] = A_VLO | A_VHI, [DT_ACT_VERDICT] = A_VERDICT, [DT_ACT_NOTE] = A_NOTE,
  };
  if (ahave != need[a->kind])
    return fail(e, "the fields of action '%s' are incomplete or wrong", dt_action_name(a->kind));

  /* the fit */
  if (fit_status_set) {
    rec->after.has_fit = 1;
    fit->ncomp = ncomp;
    if (nfseen) {
      if (nfseen != ncomp || fseen != (1u << ncomp) - 1)
        return fail(e, "%s", "fitted components f1.. do not match ncomp");
    } else {
      for (size_t i = 0; i < ncomp; i++) {
        if (!comp_err[i]) return fail(e, "%s", "fitted components have no errors");
        fit->comp[i] = rec->after.comp[i];
        fit->err[i] = cerr[i];
      }
    }
  } else if (nfseen || fit->ncont) {
    return fail(e, "%s", "fit values without fit=");
  }
  if (rec->has & DT_REC_FULL) {
    if (fhave != 511) return fail(e, "%s", "a full state lacks some of its fields");
  } else if (fhave) {
    return fail(e, "%s", "state settings without full=1");
  }
  if (a->kind == DT_ACT_RESTORE || a->kind == DT_ACT_AUTOFIT) {
    if (!(rec->has & DT_REC_FULL)) return fail(e, "%s", a->kind == DT_ACT_AUTOFIT ? "autofit without the full state" : "restore without the full state");
    a->state = &rec->after;
  }
  if (a->kind == DT_ACT_FIT) {
    if (!rec->after.has_fit) return fail(e, "%s", "fit action without fit values");
    a->fit = rec->after.fit;
  }
  return DT_OK;
}

/* ---------- the record reader ---------- */

static int read_header(dt_journal_reader *r, dt_err *e) {
  ssize_t n = getline(&r->line, &r->cap, r->f);
  if (n < 0) {
    if (ferror(r->f)) return dt_err_set(e, DT_EIO, "line 1", "read error: %s", strerror(errno));
    return dt_err_set(e, DT_EFORMAT, NULL, "empty file: not a doubletty session file");
  }
  r->lineno = 1;
  size_t tag = strlen(HEADER_TAG);
  if (strncmp(r->line, HEADER_TAG, tag) != 0 || r->line[tag] != ' ')
    return dt_err_set(e, DT_EFORMAT, "line 1",
                      "not a doubletty session file (no '" HEADER_TAG "' header)");
  char *end;
  errno = 0;
  long v = strtol(r->line + tag + 1, &end, 10);
  if (end == r->line + tag + 1 || errno || (*end != '\t' && *end != '\n' && *end != '\0') ||
      v < 1)
    return dt_err_set(e, DT_EFORMAT, "line 1", "bad session format version");
  if (v > DT_JOURNAL_VERSION)
    return dt_err_set(e, DT_EVERSION, "line 1",
                      "session format version %ld is newer than this program reads (%d); "
                      "use a newer doubletty",
                      v, DT_JOURNAL_VERSION);
  r->version = (int)v;
  return DT_OK;
}

/* A reader of a session file's bytes in memory (through a stdio stream). */
int dt_journal_reader_open_mem(const void *buf, size_t len, dt_journal_reader **out, dt_err *e) {
  *out = NULL;
  if (!buf && len) return dt_err_set(e, DT_EINVAL, NULL, "no bytes to read");
  dt_journal_reader *r = calloc(1, sizeof *r);
  if (!r) return dt_err_set(e, DT_ENOMEM, NULL, "out of memory");
  /* fmemopen cannot open zero bytes: an empty file then reads from "/dev/null" */
  r->f = len ? fmemopen((void *)buf, len, "r") : fopen("/dev/null", "r");
  if (!r->f) {
    int err = errno;
    free(r);
    return dt_err_set(e, DT_EIO, NULL, "cannot read from memory: %s", strerror(err));
  }
  int rc = read_header(r, e);
  if (rc != DT_OK) {
    dt_journal_reader_close(r);
    return rc;
  }
  *out = r;
  return DT_OK;
}

int dt_journal_reader_open(const char *path, dt_journal_reader **out, dt_err *e) {
  *out = NULL;
  dt_journal_reader *r = calloc(1, sizeof *r);
  if (!r) return dt_err_set(e, DT_ENOMEM, NULL, "out of memory");
  r->f = fopen(path, "r");
  if (!r->f) {
    int err = errno;
    free(r);
    return dt_err_set(e, DT_EIO, NULL, "cannot open for reading: %s", strerror(err));
  }
  struct stat st;
  if (fstat(fileno(r->f), &st) == 0 && S_ISDIR(st.st_mode)) {
    dt_journal_reader_close(r);
    return dt_err_set(e, DT_EIO, NULL, "is a directory, not a session file");
  }
  int rc = read_header(r, e);
  if (rc != DT_OK) {
    dt_journal_reader_close(r);
    return rc;
  }
  *out = r;
  return DT_OK;
}

int dt_journal_reader_next(dt_journal_reader *r, dt_journal_record *rec, dt_err *e) {
  for (;;) {
    errno = 0;
    ssize_t n = getline(&r->line, &r->cap, r->f);
    if (n < 0) {
      if (ferror(r->f)) {
        char where[32];
        snprintf(where, sizeof where, "line %ld", r->lineno + 1);
        return dt_err_set(e, DT_EIO, where, "read error: %s", strerror(errno));
      }
      return DT_ENOTFOUND;
    }
    r->lineno++;
    char where[32];
    where[0] = '\0';
    if ((size_t)n != strlen(r->line) || r->line[n - 1] != '\n')
      snprintf(where, sizeof where, "line %ld", r->lineno);
    if ((size_t)n != strlen(r->line) || r->line[n - 1] != '\n') r->ndamaged++;
    if ((size_t)n != strlen(r->line))
      return dt_err_set(e, DT_EFORMAT, where, "NUL byte in the line: damaged line skipped");
    if (r->line[n - 1] != '\n')
      return dt_err_set(e, DT_EFORMAT, where,
                        "incomplete last line (no newline at the end of the file, a write "
                        "cut short): skipped");
    if (r->line[0] == '\n' || r->line[0] == '#') continue;
    int rc = dt_journal_parse(r->line, rec, e);
    if (rc != DT_OK) {
      r->ndamaged++;
      snprintf(where, sizeof where, "line %ld", r->lineno);
      if (e) {
        char what[sizeof e->what];
        snprintf(what, sizeof what, "%.190s: damaged line skipped", e->what);
        dt_err_set(e, rc, where, "%s", what);
      }
      return rc;
    }
    rec->line = r->lineno;
    return DT_OK;
  }
}

int dt_journal_reader_version(const dt_journal_reader *r) { return r->version; }
long dt_jn_reader_lineno(const dt_journal_reader *r) { return r->lineno; }
size_t dt_journal_reader_damaged(const dt_journal_reader *r) { return r->ndamaged; }

void dt_journal_reader_close(dt_journal_reader *r) {
  if (!r) return;
  if (r->f) fclose(r->f);
  free(r->line);
  free(r);
}
