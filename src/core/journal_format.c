/* The session file format and its writer: one line per change.
 *
 * FORMAT (version 4).  UTF-8/ASCII text, one record per line, fields
 * separated by one TAB.  The first line is the header:
 *
 *   doubletty-session 4<TAB>created=2025-06-01T10:00:00.000Z<TAB>program=doubletty 0.1.0
 *
 * A program that finds a larger version number refuses the file (it neither
 * reads nor appends).  Every other line is one change to one spectrum:
 *
 *   TIME  user=U  file=PATH  hdu=H  row=R  sha256=HEX  [was=HEX]  [name=TEXT]
 *   [frame=NAME]  [sky=RA,DEC]
 *   act=ACTION  [action fields]  =>  [state fields]  sum=XXXXXXXX
 *
 * TIME is UTC, ISO 8601 with milliseconds and a Z.  A spectrum is identified
 * by sha256 (the digest of the file's bytes when the change was made), HDU
 * (1-based, 0 = whole file), ROW (1-based, 0 = not a table row) and the
 * doublet named after a '#' at the end of PATH; when sha256 is empty
 * (unknown), by PATH, HDU and ROW.  PATH is a hint for finding the file: it
 * is relative to the session file's directory when the file lies below it,
 * else as the program was given it.  name= is the target list's name for the
 * spectrum (left out when there is none); frame= the velocity frame its
 * velocities are in (frames.h) and sky= its ICRS position in degrees, each
 * left out when unknown; was= is the earlier digest when the
 * file changed since the last record of the same spectrum (a record whose
 * digest is new is matched to the spectrum by its path).
 *
 * Version 4 adds linked species (fields marked JF_V4, written and read in
 * journal_joint.c, which describes them): the actions link, b-tie and
 * joint-fit, the state's linked= and b-rule=, and a joint fit's joint=,
 * sp1..sp3= and thermal=; and hfs=1 among the full state's fields when
 * the lines are modelled with their hyperfine components.  Files of
 * versions 1 to 3 are read unchanged and appended in their own version; a
 * change that links species, or a state with hyperfine structure, cannot
 * be written to them.
 *
 * Version 3 adds the absorber systems: system= of a verdict, verdicts= and
 * systems= (the fields marked JF_V3).  A version-2 file is read (its
 * verdicts are the target's) and appended in version 2 without systems=; a
 * verdict of another system cannot be written to it.
 *
 * Partial covering (cover.h) adds act=covering cover=0|1, and in the state,
 * written only when covering is on: covering=1 and cf=C[+-E],... (each
 * component's covering factor, with the fit's error while the components
 * are the fit's), and fcf=C+-E,... for a fit whose components differ from
 * them (a failed fit).  Files without covering are unchanged; a file of an
 * older version than DT_JN_COVER_VERSION is not given them.
 *
 * Version 1 differs only there: no name=, and PATH (always as given) with
 * HDU and ROW is the identity.  Version-1 files are read (records with a
 * digest are matched by it), and appends to them stay in version 1.
 *
 * The fields are described once, in the table dt_jn_fields below (key, type,
 * where the value lives, which actions have it); the writer and the parser
 * both walk it.  ACTION and its fields (indices are 1-based):
 *   window-add lo= hi= [Angstrom]    window-remove i=
 *   comp-add logN= b= v=             comp-remove i=
 *   comp-set i= logN= b= v=          freeze i= frozen=LETTERS (N, b, v; empty = none)
 *   tie-b tie=0|1                    cont-order order=K (-1 = continuum fixed at 1)
 *   doublet doublet=NAME             resolution R= fwhm= [km/s]
 *   vsys vsys= [km/s]                vwindow vlo= vhi= [km/s]
 *   verdict verdict=none|detected|not-detected|unsure|unusable [system=NAME]
 *   note note=TEXT                   fit, restore, autofit (no fields: see the state)
 *   link doublet=NAME link=1|0       b-tie rule=same|thermal|free
 *   joint-fit (no fields: see the state)
 * The field "=>" separates the action from the state after it, which always
 * gives: verdict= (the target system's); verdicts=NAME:VERDICT,... (the
 * other absorber systems' verdicts, left out when there are none); ncomp=N; c1= .. cN= as "logN=X,b=X,v=X[,frozen=LETTERS]"
 * (with "+-ERR" after each value when the fit gave these very values);
 * tie-b=1 when b is tied; and when a fit belongs to the state: fit=STATUS
 * (ok, no-convergence, ...), niter=, chi2=, dof=, chi2r=, bic=, npix=,
 * cont=C+-E,... (continuum coefficients fitted jointly), and f1= .. fN= when
 * the fitted components differ from c1..cN (a failed fit).  Measurements,
 * when recorded: W1= W2= (rest equivalent width +- error [Angstrom], line 1 the
 * stronger), Wlim1= Wlim2= [Angstrom], logNa1= logNa2= (apparent column
 * density, log10 cm^-2, +- error), logNlim1= logNlim2= (each left out when
 * not measured), nsigma= (of the limits; always present with measurements),
 * saturated=1, suggested=VERDICT.  With full=1 the state is complete:
 * doublet=, vsys=, R=, fwhm=, vlo=, vhi=, order=, windows=LO:HI,..., note=
 * and systems=NAME:VLO:VHI,... (the absorber systems, the target first;
 * left out: the defaults for vsys, systems.h) follow too; this is written for the first record of a spectrum, for every
 * restore (undo/redo), and whenever the state does not follow from the
 * previous record by the action.  The last field, sum=, is the FNV-1a 32-bit
 * hash (8 hex digits) of every byte of the line before "<TAB>sum=".
 * Numbers are written with the fewest digits that read back exactly, so a
 * replay restores fitted values bit for bit.  In text values a backslash,
 * TAB, newline, carriage return and other control bytes are written as \\,
 * \t, \n, \r and \xHH.  Blank lines and lines starting with '#' are ignored.
 *
 */
#include "doubletty/journal.h"
#include "journal_int.h"

#include <math.h>
#include <stdarg.h>
#include <stdint.h>
#include <stddef.h>
#include <stdio.h>
#include <string.h>

#include "doubletty/digest.h"
#include "doubletty/num.h"

/* ---------- small helpers ---------- */

uint32_t dt_jn_fnv1a32(const char *p, size_t n) {
  uint32_t h = 2166136261u;
  for (size_t i = 0; i < n; i++) {
    h ^= (unsigned char)p[i];
    h *= 16777619u;
  }
  return h;
}

void dt_jn_copy_str(char *dst, size_t size, const char *src) {
  size_t n = src ? strnlen(src, size - 1) : 0;
  if (n) memcpy(dst, src, n);
  dst[n] = '\0';
}

static const struct {
  int code;
  const char *name;
} status_tokens[] = {
    {DT_OK, "ok"},           {DT_ENOMEM, "no-memory"},       {DT_EIO, "io-error"},
    {DT_EFORMAT, "malformed"}, {DT_ENOWCS, "no-wcs"},        {DT_ERANGE, "out-of-range"},
    {DT_EMASKED, "all-masked"}, {DT_EINVAL, "invalid"},      {DT_ENOCONV, "no-convergence"},
    {DT_ELOCK, "locked"},    {DT_EVERSION, "version"},       {DT_ENOTFOUND, "not-found"},
};

const char *dt_jn_status_token(int code, char *tmp, size_t n) {
  for (size_t i = 0; i < sizeof status_tokens / sizeof status_tokens[0]; i++)
    if (status_tokens[i].code == code) return status_tokens[i].name;
  snprintf(tmp, n, "%d", code);
  return tmp;
}

int dt_jn_status_parse(const char *s, int *code) {
  for (size_t i = 0; i < sizeof status_tokens / sizeof status_tokens[0]; i++)
    if (!strcmp(s, status_tokens[i].name)) {
      *code = status_tokens[i].code;
      return 0;
    }
  return -1;
}

/* ---------- writing: a counting string builder ---------- */

typedef struct sbuf {
  char *p;
  size_t cap; /* bytes available in p */
  size_t n;   /* bytes the text needs (may exceed cap) */
} sbuf;

static void sb_put(sbuf *b, const char *s, size_t len) {
  if (b->n < b->cap) {
    size_t room = b->cap - b->n;
    memcpy(b->p + b->n, s, len < room ? len : room);
  }
  b->n += len;
}

static void sb_str(sbuf *b, const char *s) { sb_put(b, s, strlen(s)); }

static void sb_fmt(sbuf *b, const char *fmt, ...)
#if defined(__GNUC__)
    __attribute__((format(printf, 2, 3)))
#endif
    ;
static void sb_fmt(sbuf *b, const char *fmt, ...) {
  char tmp[128];
  va_list ap;
  va_start(ap, fmt);
  int k = vsnprintf(tmp, sizeof tmp, fmt, ap);
  va_end(ap);
  if (k > 0) sb_put(b, tmp, (size_t)k < sizeof tmp ? (size_t)k : sizeof tmp - 1);
}

/* Text value with \\, \t, \n, \r and \xHH escapes. */
static void sb_esc(sbuf *b, const char *s) {
  static const char hex[] = "0123456789ABCDEF";
  for (const unsigned char *p = (const unsigned char *)(s ? s : ""); *p; p++) {
    char e[4];
    switch (*p) {
    case '\\': sb_put(b, "\\\\", 2); break;
    case '\t': sb_put(b, "\\t", 2); break;
    case '\n': sb_put(b, "\\n", 2); break;
    case '\r': sb_put(b, "\\r", 2); break;
    default:
      if (*p < 0x20 || *p == 0x7f) {
        e[0] = '\\';
        e[1] = 'x';
        e[2] = hex[*p >> 4];
        e[3] = hex[*p & 15];
        sb_put(b, e, 4);
      } else {
        sb_put(b, (const char *)p, 1);
      }
    }
  }
}


static void sb_num(sbuf *b, double x) {
  char t[40];
  dt_num_format(t, sizeof t, x);
  sb_str(b, t);
}

static void sb_pm(sbuf *b, double x, double err) {
  sb_num(b, x);
  sb_str(b, "+-");
  sb_num(b, err);
}

static void sb_comp(sbuf *b, const dt_component *c, const dt_component *err) {
  sb_str(b, "logN=");
  if (err) sb_pm(b, c->logN, err->logN); else sb_num(b, c->logN);
  sb_str(b, ",b=");
  if (err) sb_pm(b, c->b, err->b); else sb_num(b, c->b);
  sb_str(b, ",v=");
  if (err) sb_pm(b, c->v, err->v); else sb_num(b, c->v);
}

/* Exact equality, NaN equal to NaN. */
/* Exact equality, NaN equal to NaN. */
static int same_d(double a, double b) { return a == b || (isnan(a) && isnan(b)); }

int dt_jn_same_comp(const dt_component *a, const dt_component *b) {
  return same_d(a->logN, b->logN) && same_d(a->b, b->b) && same_d(a->v, b->v);
}

/* ---------- the field table ---------- */

#define A(k) (1u << DT_ACT_##k)
#define REC(m) offsetof(dt_journal_record, m)
#define ACT(m) offsetof(dt_action, m)
#define JDG(m) offsetof(dt_judgement, m)
#define FIT(m) offsetof(dt_fit_result, m)
#define ML(m) offsetof(dt_meas_line, m)
#define MS(m) offsetof(dt_meas_summary, m)
#define TXT(t, m) sizeof(((t *)0)->m)

/* Every field of a record, in the order it is written.  The writer walks
 * the table part by part; the parser finds each KEY=VALUE in it and checks
 * what is required from it. */
const dt_jn_field dt_jn_fields[] = {
    /* who and which spectrum (before act=) */
    {"user", JP_ID, JT_TEXT, JF_REQ, REC(user), 0, 0, TXT(dt_journal_record, user), 0},
    {"file", JP_ID, JT_PTR, JF_REQ | JF_NONEMPTY, REC(target.path), 0, 0, 0, 0},
    {"hdu", JP_ID, JT_INT, 0, REC(target.hdu), 0, 0, 100000, 0},
    {"row", JP_ID, JT_LONG, 0, REC(target.row), 0, 0, 1L << 62, 0},
    {"sha256", JP_ID, JT_SHA, 0, REC(target.sha256), 0, 0, 0, 0},
    {"was", JP_ID, JT_SHA, JF_NONEMPTY | JF_OMIT, REC(sha256_was), 0, 0, 0, 0},
    {"name", JP_ID, JT_PTR, JF_NONEMPTY | JF_OMIT, REC(target.name), 0, 0, 0, 0},
    {"frame", JP_ID, JT_TEXT, JF_NONEMPTY | JF_OMIT, REC(target.frame), 0, 0, TXT(dt_journal_record, target.frame), 0},
    {"sky", JP_ID, JT_TEXT, JF_NONEMPTY | JF_OMIT, REC(target.sky), 0, 0, TXT(dt_journal_record, target.sky), 0},
    /* the action's fields (after act=), each with the actions that have it */
    {"lo", JP_ACT, JT_NUM, 0, ACT(x[0]), 0, 0, 0, A(WINDOW_ADD)},
    {"hi", JP_ACT, JT_NUM, 0, ACT(x[1]), 0, 0, 0, A(WINDOW_ADD)},
    {"i", JP_ACT, JT_INDEX, 0, ACT(index), 0, 1, 1000,
     A(WINDOW_REMOVE) | A(COMP_REMOVE) | A(COMP_SET) | A(FREEZE)},
    {"logN", JP_ACT, JT_NUM, 0, ACT(x[0]), 0, 0, 0, A(COMP_ADD) | A(COMP_SET)},
    {"b", JP_ACT, JT_NUM, 0, ACT(x[1]), 0, 0, 0, A(COMP_ADD) | A(COMP_SET)},
    {"v", JP_ACT, JT_NUM, 0, ACT(x[2]), 0, 0, 0, A(COMP_ADD) | A(COMP_SET)},
    {"frozen", JP_ACT, JT_FREEZE, 0, ACT(ival), 0, 0, 0, A(FREEZE)},
    {"tie", JP_ACT, JT_INT, 0, ACT(ival), 0, 0, 1, A(TIE_B)},
    {"order", JP_ACT, JT_INT, 0, ACT(ival), 0, -1, DT_MAX_CONT - 1, A(CONT_ORDER)},
    {"doublet", JP_ACT, JT_TEXT, 0, ACT(text), 0, 0, TXT(dt_action, text), A(DOUBLET) | A(LINK)},
    {"R", JP_ACT, JT_NUM, 0, ACT(x[0]), 0, 0, 0, A(RESOLUTION)},
    {"fwhm", JP_ACT, JT_NUM, 0, ACT(x[1]), 0, 0, 0, A(RESOLUTION)},
    {"vsys", JP_ACT, JT_NUM, 0, ACT(x[0]), 0, 0, 0, A(VSYS)},
    {"vlo", JP_ACT, JT_NUM, 0, ACT(x[0]), 0, 0, 0, A(VWINDOW)},
    {"vhi", JP_ACT, JT_NUM, 0, ACT(x[1]), 0, 0, 0, A(VWINDOW)},
    {"verdict", JP_ACT, JT_VERDICT_INT, 0, ACT(ival), 0, 0, 0, A(VERDICT)},
    {"system", JP_ACT, JT_TEXT, JF_OMIT | JF_V3, ACT(text), 0, 0, DT_JUDGE_SYS_NAME, A(VERDICT)},
    {"note", JP_ACT, JT_TEXT, 0, ACT(text), 0, 0, TXT(dt_action, text), A(NOTE)},
    /* linked species (journal_joint.c) */
    {"link", JP_ACT, JT_INT, JF_V4, ACT(ival), 0, 0, 1, A(LINK)},
    {"rule", JP_ACT, JT_BTIE_INT, JF_V4, ACT(ival), 0, 0, 0, A(BTIE)},
    {"cover", JP_ACT, JT_INT, 0, ACT(ival), 0, 0, 1, A(COVERING)},
    /* the state after (after "=>"): what every record states */
    {"verdict", JP_STATE, JT_VERDICT, JF_REQ, JDG(verdict), 0, 0, 0, 0},
    {"verdicts", JP_STATE, JT_SYSV, JF_OMIT | JF_V3, 0, 0, 0, DT_JUDGE_MAX_SYS, 0},
    {"ncomp", JP_STATE, JT_SIZE, JF_REQ, JDG(ncomp), 0, 0, DT_MAX_COMP, 0},
    {"c", JP_STATE, JT_COMP, JF_NUMBERED, 0, 0, 0, DT_MAX_COMP, 0},
    {"tie-b", JP_STATE, JT_INT, JF_OMIT, JDG(tie_b), 0, 0, 1, 0},
    {"linked", JP_STATE, JT_LINKED, JF_OMIT | JF_V4, 0, 0, 0, DT_JUDGE_MAX_LINKED, 0},
    {"b-rule", JP_STATE, JT_BTIE, JF_OMIT | JF_V4, 0, 0, 0, 0, 0},
    /* the joint fit of the linked species */
    {"joint", JP_JOINT, JT_SIZE, JF_REQ | JF_V4, JDG(joint.nspecies), 0, 1, DT_JUDGE_MAX_LINKED, 0},
    {"sp", JP_JOINT, JT_SPECIES, JF_NUMBERED | JF_OMIT | JF_V4, 0, 0, 0, DT_JUDGE_MAX_LINKED, 0},
    {"thermal", JP_JOINT, JT_THERMAL, JF_OMIT | JF_V4, 0, 0, 0, DT_MAX_COMP, 0},
    {"covering", JP_STATE, JT_INT, JF_OMIT, JDG(covering), 0, 0, 1, 0},
    {"cf", JP_STATE, JT_CF, JF_OMIT, 0, 0, 0, DT_MAX_COMP, 0},
    /* the fit of the state */
    {"fit", JP_FIT, JT_STATUS, JF_REQ, FIT(status), 0, 0, 0, 0},
    {"niter", JP_FIT, JT_INT, 0, FIT(niter), 0, -1, 1L << 30, 0},
    {"chi2", JP_FIT, JT_NUM, 0, FIT(chi2), 0, 0, 0, 0},
    {"dof", JP_FIT, JT_LONG, 0, FIT(dof), 0, -(1L << 40), 1L << 40, 0},
    {"chi2r", JP_FIT, JT_NUM, 0, FIT(chi2_red), 0, 0, 0, 0},
    {"bic", JP_FIT, JT_NUM, 0, FIT(bic), 0, 0, 0, 0},
    {"npix", JP_FIT, JT_SIZE, 0, FIT(npix), 0, 0, 1L << 40, 0},
    {"cont", JP_FIT, JT_CONT, JF_OMIT, 0, 0, 0, DT_MAX_CONT, 0},
    {"f", JP_FIT, JT_FCOMP, JF_NUMBERED | JF_OMIT, 0, 0, 0, DT_MAX_COMP, 0},
    {"fcf", JP_FIT, JT_FCF, JF_OMIT, 0, 0, 0, DT_MAX_COMP, 0},
    /* measurements, per line of the doublet (W1 .. logNlim2) */
    {"W", JP_MEAS, JT_PM, JF_NUMBERED | JF_OMIT, ML(w), ML(w_err), 0, 2, 0},
    {"Wlim", JP_MEAS, JT_NUM, JF_NUMBERED | JF_OMIT, ML(w_lim), 0, 0, 2, 0},
    {"logNa", JP_MEAS, JT_PM, JF_NUMBERED | JF_OMIT, ML(logN_aod), ML(logN_aod_err), 0, 2, 0},
    {"logNlim", JP_MEAS, JT_NUM, JF_NUMBERED | JF_OMIT, ML(logN_lim), 0, 0, 2, 0},
    {"nsigma", JP_MEASX, JT_NUM, 0, MS(nsigma), 0, 0, 0, 0},
    {"saturated", JP_MEASX, JT_INT, JF_OMIT, MS(saturated), 0, 0, 1, 0},
    {"suggested", JP_MEASX, JT_VERDICT, JF_OMIT, MS(suggested), 0, 0, 0, 0},
    /* the settings of a full state */
    {"full", JP_FULL, JT_FULL, 0, 0, 0, 0, 0, 0},
    {"doublet", JP_FULL, JT_TEXT, JF_REQ | JF_NONEMPTY, JDG(doublet), 0, 0,
     TXT(dt_judgement, doublet), 0},
    {"vsys", JP_FULL, JT_NUM, JF_REQ, JDG(vsys), 0, 0, 0, 0},
    {"R", JP_FULL, JT_NUM, JF_REQ, JDG(resolution), 0, 0, 0, 0},
    {"fwhm", JP_FULL, JT_NUM, JF_REQ, JDG(fwhm_kms), 0, 0, 0, 0},
    {"vlo", JP_FULL, JT_NUM, JF_REQ, JDG(vlo), 0, 0, 0, 0},
    {"vhi", JP_FULL, JT_NUM, JF_REQ, JDG(vhi), 0, 0, 0, 0},
    {"order", JP_FULL, JT_INT, JF_REQ, JDG(cont_order), 0, -1, DT_MAX_CONT - 1, 0},
    {"windows", JP_FULL, JT_WINDOWS, JF_REQ, 0, 0, 0, DT_MAX_WINDOWS, 0},
    {"note", JP_FULL, JT_TEXT, JF_REQ, JDG(note), 0, 0, TXT(dt_judgement, note), 0},
    {"systems", JP_FULL, JT_SYSTEMS, JF_OMIT | JF_V3, 0, 0, 0, DT_JUDGE_MAX_SYS, 0},
    {"hfs", JP_FULL, JT_INT, JF_OMIT | JF_V4, JDG(hyperfine), 0, 0, 1, 0},
};
const size_t dt_jn_nfields = sizeof dt_jn_fields / sizeof dt_jn_fields[0];

#define AT(base, off, type) ((type *)(void *)((char *)(base) + (off)))
#define AT_C(base, off, type) ((const type *)(const void *)((const char *)(base) + (off)))

/* ---------- writing ---------- */

/* What a record is written from. */
typedef struct wsrc {
  const dt_journal_record *id; /* user, target, sha256_was */
  const dt_action *act;
  const dt_judgement *s;
  const dt_meas_summary *m;
  int fit_matches; /* the fit's components are the state's (c1.. carry the errors) */
} wsrc;

static const void *wbase(const wsrc *w, int part, int num) {
  switch (part) {
  case JP_ID: return w->id;
  case JP_ACT: return w->act;
  case JP_FIT: return &w->s->fit;
  case JP_MEAS: return &w->m->line[num];
  case JP_MEASX: return w->m;
  case JP_JOINT: return w->s;
  default: return w->s;
  }
}

static void sb_key(sbuf *b, const dt_jn_field *f, int num) {
  if (f->flags & JF_NUMBERED) sb_fmt(b, "\t%s%d=", f->key, num + 1);
  else sb_fmt(b, "\t%s=", f->key);
}

/* Components c1..cN (or f1..fN of a fit that differs from them). */
static void write_comps(sbuf *b, const dt_jn_field *f, const wsrc *w) {
  const dt_judgement *s = w->s;
  char fz[4];
  if (f->type == JT_COMP) {
    for (size_t i = 0; i < s->ncomp && i < DT_MAX_COMP; i++) {
      sb_key(b, f, (int)i);
      sb_comp(b, &s->comp[i], w->fit_matches ? &s->fit.err[i] : NULL);
      if (s->frozen[i]) sb_fmt(b, ",frozen=%s", dt_freeze_str(s->frozen[i], fz));
    }
  } else if (!w->fit_matches) {
    for (size_t i = 0; i < s->fit.ncomp && i < DT_MAX_COMP; i++) {
      sb_key(b, f, (int)i);
      sb_comp(b, &s->fit.comp[i], &s->fit.err[i]);
    }
  }
}

static void sb_put_cb(void *ctx, const char *s) { sb_str(ctx, s); }

/* A field of linked species (journal_joint.c) with its key, unless left out. */
static void write_joint_field(sbuf *b, const dt_jn_field *f, const wsrc *w, int num) {
  sbuf probe = {NULL, 0, 0};
  if (dt_jn_write_joint(f, w->s, w->act, num, sb_put_cb, &probe) < 0) return;
  sb_key(b, f, num);
  dt_jn_write_joint(f, w->s, w->act, num, sb_put_cb, b);
}

/* Covering factors: cf= of the state (with the fit's errors while the
 * components are the fit's), fcf= of a fit that differs from them; only
 * when covering is on. */
static void write_cf(sbuf *b, const dt_jn_field *f, const wsrc *w) {
  const dt_judgement *s = w->s;
  if (!s->covering || s->ncomp == 0) return;
  int errs = s->has_fit && s->fit.covering && s->fit.ncomp == s->ncomp;
  int same = w->fit_matches;
  for (size_t i = 0; same && errs && i < s->ncomp && i < DT_MAX_COMP; i++)
    same = s->cf[i] == s->fit.cf[i];
  if (f->type == JT_FCF && (same || !errs)) return;
  sb_key(b, f, 0);
  for (size_t i = 0; i < s->ncomp && i < DT_MAX_COMP; i++) {
    if (i) sb_str(b, ",");
    double cf = f->type == JT_FCF ? s->fit.cf[i] : s->cf[i];
    if (f->type == JT_FCF || (same && errs)) sb_pm(b, cf, s->fit.cf_err[i]);
    else sb_num(b, cf);
  }
}

/* One field; fields marked JF_OMIT are left out when they hold nothing. */
static void write_field(sbuf *b, const dt_jn_field *f, const wsrc *w, int num) {
  const void *p = wbase(w, f->part, num);
  int omit = f->flags & JF_OMIT;
  char fz[4], tmp[16];
  switch (f->type) {
  case JT_TEXT:
  case JT_PTR: {
    const char *t = f->type == JT_PTR ? *AT_C(p, f->off, char *) : AT_C(p, f->off, char);
    if (omit && (!t || !*t)) return;
    sb_key(b, f, num);
    sb_esc(b, t);
    return;
  }
  case JT_NUM:
  case JT_PM: {
    double x = *AT_C(p, f->off, double);
    if (omit && isnan(x)) return;
    sb_key(b, f, num);
    if (f->type == JT_PM) sb_pm(b, x, *AT_C(p, f->off2, double));
    else sb_num(b, x);
    return;
  }
  case JT_INT:
  case JT_INDEX:
  case JT_FREEZE:
  case JT_VERDICT_INT: {
    int v = *AT_C(p, f->off, int);
    if (omit && !v) return;
    sb_key(b, f, num);
    if (f->type == JT_INDEX) sb_fmt(b, "%d", v + 1);
    else if (f->type == JT_FREEZE) sb_str(b, dt_freeze_str((unsigned)v & 7u, fz));
    else if (f->type == JT_VERDICT_INT) sb_str(b, dt_verdict_name((dt_verdict)v));
    else sb_fmt(b, "%d", v);
    return;
  }
  case JT_LONG: sb_key(b, f, num); sb_fmt(b, "%ld", *AT_C(p, f->off, long)); return;
  case JT_SIZE: sb_key(b, f, num); sb_fmt(b, "%zu", *AT_C(p, f->off, size_t)); return;
  case JT_VERDICT: {
    dt_verdict v = *AT_C(p, f->off, dt_verdict);
    if (omit && v == DT_VERDICT_NONE) return;
    sb_key(b, f, num);
    sb_str(b, dt_verdict_name(v));
    return;
  }
  case JT_SHA: {
    const char *h = AT_C(p, f->off, char);
    if (omit && !dt_digest_is_hex(h)) return;
    sb_key(b, f, num);
    if (dt_digest_is_hex(h)) sb_str(b, h);
    return;
  }
  case JT_STATUS:
    sb_key(b, f, num);
    sb_str(b, dt_jn_status_token(*AT_C(p, f->off, int), tmp, sizeof tmp));
    return;
  case JT_COMP:
  case JT_FCOMP: write_comps(b, f, w); return;
  case JT_CONT: {
    const dt_fit_result *fr = p;
    if (fr->ncont == 0) return;
    sb_key(b, f, num);
    for (size_t i = 0; i < fr->ncont && i < DT_MAX_CONT; i++) {
      if (i) sb_str(b, ",");
      sb_pm(b, fr->cont_coef[i], fr->cont_err[i]);
    }
    return;
  }
  case JT_WINDOWS: {
    const dt_judgement *s = p;
    sb_key(b, f, num);
    for (size_t i = 0; i < s->nwin && i < DT_MAX_WINDOWS; i++) {
      if (i) sb_str(b, ",");
      sb_num(b, s->win[i].lo);
      sb_str(b, ":");
      sb_num(b, s->win[i].hi);
    }
    return;
  }
  case JT_FULL: sb_str(b, "\tfull=1"); return;
  case JT_CF:
  case JT_FCF: write_cf(b, f, w); return;
  case JT_SYSV: {
    const dt_judgement *s = p;
    if (s->nsysv == 0) return;
    sb_key(b, f, num);
    for (size_t i = 0; i < s->nsysv && i < DT_JUDGE_MAX_SYS; i++)
      sb_fmt(b, "%s%s:%s", i ? "," : "", s->sysv[i].name, dt_verdict_name(s->sysv[i].verdict));
    return;
  }
  case JT_SYSTEMS: {
    const dt_judgement *s = p;
    if (s->nsys == 0) return;
    sb_key(b, f, num);
    for (size_t i = 0; i < s->nsys && i < DT_JUDGE_MAX_SYS; i++) {
      sb_fmt(b, "%s%s:", i ? "," : "", s->sys[i].name);
      sb_num(b, s->sys[i].vlo);
      sb_str(b, ":");
      sb_num(b, s->sys[i].vhi);
    }
    return;
  }
  case JT_LINKED:
  case JT_BTIE:
  case JT_BTIE_INT:
  case JT_SPECIES:
  case JT_THERMAL: write_joint_field(b, f, w, num); return;
  default: return;
  }
}

/* Every field of a part, in table order (action fields: those of kind). */
static void write_part(sbuf *b, const wsrc *w, int part, int num) {
  for (size_t i = 0; i < dt_jn_nfields; i++) {
    const dt_jn_field *f = &dt_jn_fields[i];
    if (f->part != part) continue;
    if (part == JP_ACT && !(f->acts & (1u << w->act->kind))) continue;
    write_field(b, f, w, num);
  }
}

/* The joint fit: joint=, then sp1.. of each linked species, then thermal=. */
static void write_joint_part(sbuf *b, const wsrc *w) {
  for (size_t i = 0; i < dt_jn_nfields; i++) {
    const dt_jn_field *f = &dt_jn_fields[i];
    if (f->part != JP_JOINT) continue;
    int n = f->flags & JF_NUMBERED ? (int)w->s->joint.nspecies : 1;
    for (int k = 0; k < n && k < DT_JUDGE_MAX_LINKED; k++) write_field(b, f, w, k);
  }
}

size_t dt_journal_format(char *buf, size_t size, const char *time, const char *user,
                         const dt_target *t, const dt_action *a, const dt_judgement *after,
                         const dt_meas_summary *meas, int full, const char *sha256_was) {
  sbuf b = {buf, size, 0};
  dt_journal_record idr; /* only user, target and sha256_was are used */
  dt_journal_record *id = &idr;
  dt_jn_copy_str(id->user, sizeof id->user, user && *user ? user : "unknown");
  id->target = *t;
  dt_jn_copy_str(id->sha256_was, sizeof id->sha256_was, sha256_was);
  wsrc w = {id, a, after, meas, 0};
  if (after->has_fit && after->fit.ncomp == after->ncomp) {
    w.fit_matches = 1;
    for (size_t i = 0; i < after->ncomp && i < DT_MAX_COMP; i++)
      if (!dt_jn_same_comp(&after->fit.comp[i], &after->comp[i])) w.fit_matches = 0;
  }
  sb_str(&b, time);
  write_part(&b, &w, JP_ID, 0);
  sb_fmt(&b, "\tact=%s", dt_action_name(a->kind));
  write_part(&b, &w, JP_ACT, 0);
  sb_str(&b, "\t=>");
  write_part(&b, &w, JP_STATE, 0);
  if (after->has_fit) write_part(&b, &w, JP_FIT, 0);
  if (after->has_fit && after->has_joint) write_joint_part(&b, &w);
  if (meas) { /* values that are NaN (not measured) are left out */
    write_part(&b, &w, JP_MEAS, 0);
    write_part(&b, &w, JP_MEAS, 1);
    write_part(&b, &w, JP_MEASX, 0);
  }
  if (full || a->kind == DT_ACT_RESTORE || a->kind == DT_ACT_AUTOFIT)
    write_part(&b, &w, JP_FULL, 0);
  size_t body = b.n;
  char tail[24];
  uint32_t h = body < size ? dt_jn_fnv1a32(buf, body) : 0;
  int k = snprintf(tail, sizeof tail, "\tsum=%08x\n", (unsigned)h);
  sb_put(&b, tail, (size_t)k);
  if (b.n < size) buf[b.n] = '\0';
  else if (size > 0) buf[size - 1] = '\0';
  return b.n;
}
