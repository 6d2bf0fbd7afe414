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

#include <assert.h>
#include <errno.h>
#include <math.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>

#include "doubletty/digest.h"
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

#define MAX_FIELDS 80 /* >= dt_jn_nfields */
#define AT(base, off, type) ((type *)(void *)((char *)(base) + (off)))

/* What the parse of one line has seen. */
typedef struct pstate {
  unsigned seen[MAX_FIELDS];        /* per table field: a bit per number (bit 0 if plain) */
  int comp_err[DT_MAX_COMP];        /* component i carried errors */
  dt_component cerr[DT_MAX_COMP];   /* ... these */
  size_t ncomp_sp[DT_JUDGE_MAX_LINKED]; /* components of each linked species read */
  size_t nthermal;                  /* components of thermal= read */
  size_t ncf, nfcf;                 /* covering factors read (cf=, fcf=) */
  int cf_err;                       /* cf= carried errors */
  double cfe[DT_MAX_COMP];          /* ... these */
  double fcf[DT_MAX_COMP], fcfe[DT_MAX_COMP];
} pstate;

/* The table's field for key k in a part of the line (JP_ID before act=,
 * JP_ACT before "=>", JP_STATE after it: every part of the state). */
static const dt_jn_field *lookup(const char *k, int part, int *num) {
  for (size_t i = 0; i < dt_jn_nfields; i++) {
    const dt_jn_field *f = &dt_jn_fields[i];
    if (f->key[0] != k[0] || (part == JP_STATE ? f->part < JP_STATE : f->part != part)) continue;
    if (f->flags & JF_NUMBERED) {
      size_t n = strlen(f->key);
      if (!strncmp(k, f->key, n) && k[n] >= '1' && k[n] < '1' + f->hi && !k[n + 1]) {
        *num = k[n] - '1';
        return f;
      }
    } else if (!strcmp(k, f->key)) {
      *num = 0;
      return f;
    }
  }
  return NULL;
}

static void *part_base(dt_journal_record *rec, int part, int num) {
  switch (part) {
  case JP_ID: return rec;
  case JP_ACT: return &rec->action;
  case JP_FIT: return &rec->after.fit;
  case JP_MEAS: return &rec->meas.line[num];
  case JP_MEASX: return &rec->meas;
  case JP_JOINT: return &rec->after;
  default: return &rec->after;
  }
}

/* "C+-E,..." into the fit's continuum, "LO:HI,..." into the windows. */
static int read_list(const dt_jn_field *f, char *v, void *p) {
  size_t n = 0;
  int bad = 0;
  for (char *tok = *v || f->type == JT_CONT ? v : NULL; tok && !bad; n++) {
    char *comma = strchr(tok, ',');
    if (comma) *comma = '\0';
    if (n >= (size_t)f->hi) return -1;
    if (f->type == JT_CONT) {
      dt_fit_result *fit = p;
      int he = 0;
      bad = parse_pm(tok, &fit->cont_coef[n], &fit->cont_err[n], &he) || !he;
    } else {
      dt_judgement *s = p;
      char *colon = strchr(tok, ':');
      if (!colon) return -1;
      *colon = '\0';
      bad = parse_num(tok, &s->win[n].lo) || parse_num(colon + 1, &s->win[n].hi);
    }
    tok = comma ? comma + 1 : NULL;
  }
  if (f->type == JT_CONT) ((dt_fit_result *)p)->ncont = n;
  else ((dt_judgement *)p)->nwin = n;
  return bad ? -1 : 0;
}

/* A system name as judge.h takes it. */
static int sys_name_ok(const char *name) {
  dt_judgement t;
  dt_judgement_init(&t);
  dt_action a;
  dt_action_init(&a, DT_ACT_VERDICT);
  a.ival = DT_VERDICT_DETECTED;
  if (strlen(name) >= sizeof t.sysv[0].name || !strcmp(name, DT_JUDGE_TARGET) || !*name) return 0;
  memcpy(a.text, name, strlen(name) + 1);
  return dt_judgement_apply(&t, &a) == DT_OK;
}

/* "NAME:VERDICT,..." into the verdicts of systems, "NAME:VLO:VHI,..." into
 * the systems; -1 if bad (names checked, none repeated). */
static int read_systems(const dt_jn_field *f, char *v, dt_judgement *s) {
  size_t n = 0;
  for (char *tok = *v ? v : NULL; tok; n++) {
    char *comma = strchr(tok, ',');
    if (comma) *comma = '\0';
    if (n >= (size_t)f->hi) return -1;
    char *c1 = strchr(tok, ':');
    if (!c1) return -1;
    *c1 = '\0';
    if (!sys_name_ok(tok) && !(f->type == JT_SYSTEMS && n == 0 && !strcmp(tok, DT_JUDGE_TARGET)))
      return -1;
    for (size_t i = 0; i < n; i++)
      if (!strcmp(f->type == JT_SYSV ? s->sysv[i].name : s->sys[i].name, tok)) return -1;
    if (f->type == JT_SYSV) {
      dt_verdict vd;
      if (dt_verdict_parse(c1 + 1, &vd) != DT_OK || vd == DT_VERDICT_NONE) return -1;
      dt_jn_copy_str(s->sysv[n].name, sizeof s->sysv[n].name, tok);
      s->sysv[n].verdict = vd;
    } else {
      char *c2 = strchr(c1 + 1, ':');
      if (!c2) return -1;
      *c2 = '\0';
      dt_jn_copy_str(s->sys[n].name, sizeof s->sys[n].name, tok);
      if (parse_num(c1 + 1, &s->sys[n].vlo) || parse_num(c2 + 1, &s->sys[n].vhi) ||
          !(s->sys[n].vlo < s->sys[n].vhi))
        return -1;
    }
    tok = comma ? comma + 1 : NULL;
  }
  if (n == 0) return -1;
  if (f->type == JT_SYSV) s->nsysv = n;
  else if (strcmp(s->sys[0].name, DT_JUDGE_TARGET)) return -1; /* the target first */
  else s->nsys = n;
  return 0;
}

/* "C[+-E],..." of cf= into the state's covering factors (errors into ps),
 * "C+-E,..." of fcf= into ps; each C in (0, 1] (0 in cf=: none yet).
 * -1 if bad. */
static int read_cf(const dt_jn_field *f, char *v, dt_journal_record *rec, pstate *ps) {
  size_t n = 0;
  int nerr = 0;
  for (char *tok = v; tok; n++) {
    char *comma = strchr(tok, ',');
    if (comma) *comma = '\0';
    if (n >= DT_MAX_COMP) return -1;
    double x, err = NAN;
    int he = 0;
    /* 0 in cf=: a component without a covering factor yet */
    if (parse_pm(tok, &x, &err, &he) || !(x >= 0.0 && x <= 1.0) ||
        (x == 0.0 && (he || f->type == JT_FCF)))
      return -1;
    if (f->type == JT_FCF) {
      if (!he) return -1;
      ps->fcf[n] = x;
      ps->fcfe[n] = err;
    } else {
      rec->after.cf[n] = x;
      ps->cfe[n] = err;
    }
    nerr += he;
    tok = comma ? comma + 1 : NULL;
  }
  if (nerr != 0 && nerr != (int)n) return -1;
  if (f->type == JT_FCF) ps->nfcf = n;
  else ps->ncf = n, ps->cf_err = nerr > 0;
  return 0;
}

/* The covering fields between themselves and with the components and the
 * fit (fit: the fit is in the record). */
static int check_cover(dt_journal_record *rec, const pstate *ps, int fit, dt_err *e) {
  dt_judgement *s = &rec->after;
  if (!s->covering) {
    if (ps->ncf || ps->nfcf) return fail(e, "%s", "covering factors without covering=1");
    return DT_OK;
  }
  if (ps->ncf != s->ncomp) return fail(e, "%s", "covering factors cf= do not match ncomp");
  if (!fit) {
    if (ps->cf_err || ps->nfcf) return fail(e, "%s", "covering factor errors without a fit");
    return DT_OK;
  }
  /* a fit of a covered state is a covered fit (switching covering
   * clears the fit) */
  dt_fit_result *r = &s->fit;
  r->covering = 1;
  for (size_t i = 0; i < DT_MAX_COMP; i++) r->cf[i] = 1.0;
  if (s->ncomp && !ps->nfcf && !ps->cf_err)
    return fail(e, "%s", "a covered fit without the errors of its covering factors");
  if (ps->nfcf) {
    if (ps->nfcf != s->ncomp || ps->cf_err)
      return fail(e, "%s", "covering factors fcf= do not match the fit");
    memcpy(r->cf, ps->fcf, s->ncomp * sizeof r->cf[0]);
    memcpy(r->cf_err, ps->fcfe, s->ncomp * sizeof r->cf_err[0]);
  } else {
    memcpy(r->cf, s->cf, s->ncomp * sizeof r->cf[0]);
    memcpy(r->cf_err, ps->cfe, s->ncomp * sizeof r->cf_err[0]);
  }
  return DT_OK;
}

/* Read value v of field f (number num) into the record; -1 if bad. */
static int read_value(const dt_jn_field *f, char *v, int num, dt_journal_record *rec, pstate *ps) {
  void *p = part_base(rec, f->part, num);
  long lv = 0;
  unsigned fb = 0;
  int he = 0;
  dt_verdict vd;
  switch (f->type) {
  case JT_TEXT:
    if (unescape(v) || ((f->flags & JF_NONEMPTY) && !*v)) return -1;
    if (f->part != JP_ID && strlen(v) >= (size_t)f->hi) return -1; /* a user is cut */
    dt_jn_copy_str(AT(p, f->off, char), (size_t)f->hi, v);
    return 0;
  case JT_PTR:
    if (unescape(v) || ((f->flags & JF_NONEMPTY) && !*v)) return -1;
    *AT(p, f->off, const char *) = v;
    return 0;
  case JT_NUM: return parse_num(v, AT(p, f->off, double));
  case JT_PM: return parse_pm(v, AT(p, f->off, double), AT(p, f->off2, double), NULL);
  case JT_INT:
  case JT_INDEX:
    if (parse_long(v, f->lo, f->hi, &lv)) return -1;
    *AT(p, f->off, int) = (int)lv - (f->type == JT_INDEX);
    return 0;
  case JT_LONG: return parse_long(v, f->lo, f->hi, AT(p, f->off, long));
  case JT_SIZE:
    if (parse_long(v, f->lo, f->hi, &lv)) return -1;
    *AT(p, f->off, size_t) = (size_t)lv;
    return 0;
  case JT_FREEZE:
    if (dt_freeze_parse(v, &fb) != DT_OK) return -1;
    *AT(p, f->off, int) = (int)fb;
    return 0;
  case JT_VERDICT: return dt_verdict_parse(v, AT(p, f->off, dt_verdict)) != DT_OK ? -1 : 0;
  case JT_VERDICT_INT:
    if (dt_verdict_parse(v, &vd) != DT_OK) return -1;
    *AT(p, f->off, int) = (int)vd;
    return 0;
  case JT_SHA:
    if ((*v || (f->flags & JF_NONEMPTY)) && !dt_digest_is_hex(v)) return -1;
    dt_jn_copy_str(AT(p, f->off, char), DT_SHA256_HEX, v);
    return 0;
  case JT_STATUS:
    if (!dt_jn_status_parse(v, AT(p, f->off, int))) return 0;
    if (parse_long(v, -1000, 1000, &lv)) return -1;
    *AT(p, f->off, int) = (int)lv;
    return 0;
  case JT_COMP:
    if (parse_comp(v, &rec->after.comp[num], &ps->cerr[num], &he, &fb)) return -1;
    rec->after.frozen[num] = (unsigned char)fb;
    ps->comp_err[num] = he;
    return 0;
  case JT_FCOMP:
    return parse_comp(v, &rec->after.fit.comp[num], &rec->after.fit.err[num], &he, &fb) || !he ||
                   fb
               ? -1
               : 0;
  case JT_CONT:
  case JT_WINDOWS: return read_list(f, v, p);
  case JT_SYSV:
  case JT_SYSTEMS:
    return read_systems(f, v, p);
  case JT_CF:
  case JT_FCF: return read_cf(f, v, rec, ps);
  case JT_FULL:
    if (parse_long(v, 1, 1, &lv)) return -1;
    rec->has |= DT_REC_FULL;
    return 0;
  case JT_LINKED:
  case JT_BTIE:
  case JT_BTIE_INT:
  case JT_SPECIES:
  case JT_THERMAL: return dt_jn_read_joint(f, v, num, rec, ps->ncomp_sp, &ps->nthermal);
  default: return -1;
  }
}

static unsigned seen_of(const pstate *ps, const char *key, int part) {
  for (size_t i = 0; i < dt_jn_nfields; i++)
    if (dt_jn_fields[i].part == part && !strcmp(dt_jn_fields[i].key, key)) return ps->seen[i];
  return 0;
}

/* Is any field of a part there?  Are all its required ones? */
static int part_seen(const pstate *ps, int part, int required_only, int all) {
  for (size_t i = 0; i < dt_jn_nfields; i++) {
    const dt_jn_field *f = &dt_jn_fields[i];
    if (f->part != part || (required_only && !(f->flags & JF_REQ))) continue;
    if (!all && ps->seen[i]) return 1;
    if (all && !ps->seen[i]) return 0;
  }
  return all;
}

/* The rules between fields, once the line is read. */
static int check_record(dt_journal_record *rec, const pstate *ps, dt_err *e) {
  dt_action *a = &rec->action;
  dt_fit_result *fit = &rec->after.fit;
  size_t ncomp = rec->after.ncomp;
  unsigned all = ncomp ? (1u << ncomp) - 1 : 0;
  if (seen_of(ps, "c", JP_STATE) != all)
    return fail(e, "%s", "components c1.. do not match ncomp");
  for (size_t i = 0; i < dt_jn_nfields; i++) {
    const dt_jn_field *f = &dt_jn_fields[i];
    int has = (f->acts & (1u << a->kind)) != 0;
    if (f->part == JP_ACT && ((ps->seen[i] && !has) || (!ps->seen[i] && has && !(f->flags & JF_OMIT))))
      return fail(e, "the fields of action '%s' are incomplete or wrong", dt_action_name(a->kind));
  }
  if (seen_of(ps, "was", JP_ID)) rec->flags |= DT_JFLAG_FILE_CHANGED;
  if (part_seen(ps, JP_MEAS, 0, 0) || part_seen(ps, JP_MEASX, 0, 0)) rec->has |= DT_REC_MEAS;
  if (seen_of(ps, "fit", JP_FIT)) {
    unsigned fseen = seen_of(ps, "f", JP_FIT);
    rec->after.has_fit = 1;
    fit->ncomp = ncomp;
    if (fseen && fseen != all) return fail(e, "%s", "fitted components f1.. do not match ncomp");
    for (size_t i = 0; !fseen && i < ncomp; i++) {
      if (!ps->comp_err[i]) return fail(e, "%s", "fitted components have no errors");
      fit->comp[i] = rec->after.comp[i];
      fit->err[i] = ps->cerr[i];
    }
  } else if (part_seen(ps, JP_FIT, 0, 0)) {
    return fail(e, "%s", "fit values without fit=");
  }
  const char *jwhy = dt_jn_check_joint(rec, seen_of(ps, "joint", JP_JOINT) != 0, ps->ncomp_sp,
                                      ps->nthermal);
  if (jwhy) return fail(e, "%s", jwhy);
  int cst = check_cover(rec, ps, seen_of(ps, "fit", JP_FIT) != 0, e);
  if (cst != DT_OK) return cst;
  if (rec->has & DT_REC_FULL) {
    if (!part_seen(ps, JP_FULL, 1, 1)) return fail(e, "%s", "a full state lacks some of its fields");
  } else if (part_seen(ps, JP_FULL, 0, 0)) {
    return fail(e, "%s", "state settings without full=1");
  }
  if (a->kind == DT_ACT_RESTORE || a->kind == DT_ACT_AUTOFIT) {
    if (!(rec->has & DT_REC_FULL))
      return fail(e, "%s", a->kind == DT_ACT_AUTOFIT ? "autofit without the full state"
                                                     : "restore without the full state");
    a->state = &rec->after;
  }
  if (a->kind == DT_ACT_FIT) {
    if (!rec->after.has_fit) return fail(e, "%s", "fit action without fit values");
    a->fit = rec->after.fit;
  }
  return DT_OK;
}

/* The check sum first: nothing in a damaged line is trusted.  Cuts it off. */
static int check_sum(char *line, dt_err *e) {
  size_t len = strlen(line);
  if (len && line[len - 1] == '\n') line[--len] = '\0';
  char *last = strrchr(line, '\t');
  if (!last || strncmp(last, "\tsum=", 5) != 0 || strlen(last + 5) != 8)
    return dt_err_set(e, DT_EFORMAT, NULL, "no check sum at the end: damaged line");
  char *end;
  unsigned long sum = strtoul(last + 5, &end, 16);
  if (*end || sum != dt_jn_fnv1a32(line, (size_t)(last - line)))
    return dt_err_set(e, DT_EFORMAT, NULL,
                      "check sum does not match: the line was altered or damaged");
  *last = '\0';
  return DT_OK;
}

int dt_journal_parse(char *line, dt_journal_record *rec, dt_err *e) {
  int rc = check_sum(line, e);
  if (rc != DT_OK) return rc;
  memset(rec, 0, sizeof *rec);
  dt_judgement_init(&rec->after);
  dt_meas_summary_clear(&rec->meas);
  pstate ps;
  memset(&ps, 0, sizeof ps);
  assert(dt_jn_nfields <= MAX_FIELDS);

  char *tab = strchr(line, '\t');
  if (tab) *tab = '\0';
  size_t tl = strlen(line);
  if (tl < 20 || tl >= DT_JOURNAL_TIME_MAX || line[4] != '-' || line[10] != 'T' ||
      line[tl - 1] != 'Z')
    return fail(e, "'%.40s' is not a UTC time stamp", line);
  memcpy(rec->time, line, tl + 1);

  int part = JP_ID, nf = 1;
  for (char *f = tab ? tab + 1 : NULL; f; nf++) {
    if (nf == 160) return dt_err_set(e, DT_EFORMAT, NULL, "too many fields");
    if ((tab = strchr(f, '\t')) != NULL) *tab = '\0';
    char *next = tab ? tab + 1 : NULL;
    if (!strcmp(f, "=>")) {
      if (part != JP_ACT) return fail(e, "misplaced '%s'", "=>");
      part = JP_STATE;
      f = next;
      continue;
    }
    char *eq = strchr(f, '=');
    if (!eq || eq == f) return fail(e, "field '%.40s' is not KEY=VALUE", f);
    *eq = '\0';
    char *k = f, *v = eq + 1;
    if (part == JP_ID && !strcmp(k, "act")) {
      dt_action_kind kind;
      if (dt_action_kind_parse(v, &kind) != DT_OK) return fail(e, "unknown action '%.40s'", v);
      dt_action_init(&rec->action, kind);
      part = JP_ACT;
      f = next;
      continue;
    }
    int num;
    const dt_jn_field *fd = lookup(k, part, &num);
    if (!fd) return fail(e, "unknown field '%.40s'", k);
    unsigned *seen = &ps.seen[fd - dt_jn_fields];
    if (*seen & (1u << num)) return fail(e, "field '%.40s' given twice", k);
    *seen |= 1u << num;
    if (read_value(fd, v, num, rec, &ps)) return fail(e, "bad value in field '%.40s'", k);
    f = next;
  }
  for (size_t i = 0; i < dt_jn_nfields; i++)
    if (dt_jn_fields[i].part == JP_ID && (dt_jn_fields[i].flags & JF_REQ) && !ps.seen[i])
      return fail(e, "no %s= field", dt_jn_fields[i].key);
  if (part == JP_ID) return fail(e, "no %s field", "act=");
  if (part == JP_ACT) return fail(e, "no %s field", "'=>'");
  for (size_t i = 0; i < dt_jn_nfields; i++)
    if (dt_jn_fields[i].part == JP_STATE && (dt_jn_fields[i].flags & JF_REQ) && !ps.seen[i])
      return fail(e, "no %s= field", dt_jn_fields[i].key);
  return check_record(rec, &ps, e);
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
