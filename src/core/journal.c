/* The session file: an append-only, line-per-change record of judgements.
 *
 * FORMAT (version 1).  UTF-8/ASCII text, one record per line, fields
 * separated by one TAB.  The first line is the header:
 *
 *   doubletty-session 1<TAB>created=2025-06-01T10:00:00.000Z<TAB>program=doubletty 0.1.0
 *
 * A program that finds a larger version number refuses the file (it neither
 * reads nor appends).  Every other line is one change to one spectrum:
 *
 *   TIME  user=U  file=PATH  hdu=H  row=R  sha256=HEX  [was=HEX]  act=ACTION
 *   [action fields]  =>  [state fields]  sum=XXXXXXXX
 *
 * TIME is UTC, ISO 8601 with milliseconds and a Z.  PATH, HDU (1-based, 0 =
 * whole file) and ROW (1-based, 0 = not a table row) identify the spectrum;
 * sha256 is the digest of the file's bytes when the change was made (empty if
 * unknown) and was= the earlier digest when the file changed since the last
 * record of the same spectrum.  ACTION and its fields (indices are 1-based):
 *   window-add lo= hi= [Angstrom]    window-remove i=
 *   comp-add logN= b= v=             comp-remove i=
 *   comp-set i= logN= b= v=          freeze i= frozen=LETTERS (N, b, v; empty = none)
 *   tie-b tie=0|1                    cont-order order=K (-1 = continuum fixed at 1)
 *   doublet doublet=NAME             resolution R= fwhm= [km/s]
 *   vsys vsys= [km/s]                vwindow vlo= vhi= [km/s]
 *   verdict verdict=none|detected|not-detected|unsure|unusable
 *   note note=TEXT                   fit, restore, autofit (no fields: see the state)
 * The field "=>" separates the action from the state after it, which always
 * gives: verdict=; ncomp=N; c1= .. cN= as "logN=X,b=X,v=X[,frozen=LETTERS]"
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
 * doublet=, vsys=, R=, fwhm=, vlo=, vhi=, order=, windows=LO:HI,... and note=
 * follow too; this is written for the first record of a spectrum, for every
 * restore (undo/redo), and whenever the state does not follow from the
 * previous record by the action.  The last field, sum=, is the FNV-1a 32-bit
 * hash (8 hex digits) of every byte of the line before "<TAB>sum=".
 * Numbers are written with the fewest digits that read back exactly, so a
 * replay restores fitted values bit for bit.  In text values a backslash,
 * TAB, newline, carriage return and other control bytes are written as \\,
 * \t, \n, \r and \xHH.  Blank lines and lines starting with '#' are ignored.
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
 * WRITING.  One writer at a time (flock on the session file; a refused
 * second writer is told the holder's process id and user from /proc/locks
 * where the system has it).  Each record is built in
 * memory, written with a single write() to the O_APPEND descriptor and
 * fsync'd before the append returns.  A failed write is rolled back
 * (ftruncate to the previous size) and the journal is marked failed: every
 * later append fails too, so nothing is dropped silently.  Before writing, the
 * journal checks that its path still names the file it holds open (a removed
 * or replaced session file fails the append; what the file held, still
 * readable through the open descriptor, is first written back to the path
 * if nothing is there, else beside it as PATH.rescued, so nothing recorded
 * is lost -- and the same happens at close when no append came after the
 * removal).  Spectrum paths are only ever recorded and compared, never
 * opened, run or written. */
#ifndef _XOPEN_SOURCE
#define _XOPEN_SOURCE 700 /* realpath */
#endif
#include "doubletty/journal.h"
#include "doubletty/num.h"

#include <errno.h>
#include <fcntl.h>
#include <math.h>
#include <pwd.h>
#include <stdarg.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/file.h>
#include <sys/stat.h>
#include <sys/sysmacros.h>
#include <time.h>
#include <unistd.h>

#include "doubletty/analysis.h"

#ifndef DT_VERSION
#define DT_VERSION "unknown"
#endif

#define HEADER_TAG "doubletty-session"
#define MAX_WARN 64
#define WARN_LEN 200

struct dt_journal {
  char *path;
  char *abspath; /* for checking that the path still names our file */
  char user[DT_JOURNAL_USER_MAX];
  int fd;
  int ro;
  int failed;
  int live; /* opened for writing and holding the lock */
  dt_err err;
  dev_t dev;
  ino_t ino;
  dt_journal_entry **ent;
  size_t nent, capent;
  size_t *slot; /* open addressing: entry index + 1, 0 = empty */
  size_t nslot; /* power of two */
  long nrecords;
  long nlines;
  size_t nwarn;
  char warn[MAX_WARN][WARN_LEN];
  char *buf;
  size_t bufcap;
};

struct dt_journal_reader {
  FILE *f;
  char *line;
  size_t cap;
  long lineno;
  int version;
};

/* ---------- small helpers ---------- */

static uint32_t fnv1a32(const char *p, size_t n) {
  uint32_t h = 2166136261u;
  for (size_t i = 0; i < n; i++) {
    h ^= (unsigned char)p[i];
    h *= 16777619u;
  }
  return h;
}

static uint64_t key_hash(const char *path, int hdu, long row) {
  uint64_t h = 1469598103934665603ull;
  for (const unsigned char *p = (const unsigned char *)path; *p; p++) {
    h ^= *p;
    h *= 1099511628211ull;
  }
  h ^= (uint64_t)(unsigned)hdu * 0x9e3779b97f4a7c15ull;
  h *= 1099511628211ull;
  h ^= (uint64_t)row * 0xc2b2ae3d27d4eb4full;
  /* final avalanche (the 64-bit finaliser of MurmurHash3): the table uses the
   * low bits, which FNV alone mixes poorly */
  h ^= h >> 33;
  h *= 0xff51afd7ed558ccdull;
  h ^= h >> 33;
  h *= 0xc4ceb9fe1a85ec53ull;
  h ^= h >> 33;
  return h;
}

static void copy_str(char *dst, size_t size, const char *src) {
  size_t n = src ? strnlen(src, size - 1) : 0;
  if (n) memcpy(dst, src, n);
  dst[n] = '\0';
}

void dt_meas_summary_clear(dt_meas_summary *m) {
  for (int i = 0; i < 2; i++)
    m->line[i] = (dt_meas_line){NAN, NAN, NAN, NAN, NAN, NAN};
  m->nsigma = NAN;
  m->saturated = 0;
  m->suggested = DT_VERDICT_NONE;
}

void dt_meas_summary_from_analysis(const struct dt_analysis_out *o, double nsigma,
                                   dt_verdict suggested, dt_meas_summary *m) {
  dt_meas_summary_clear(m);
  m->nsigma = nsigma;
  m->suggested = suggested;
  if (!o || o->measure_status != DT_OK) return;
  for (int l = 0; l < 2; l++) {
    const dt_analysis_line *a = &o->line[l];
    m->line[l] = (dt_meas_line){.w = a->W, .w_err = a->W_err, .w_lim = a->W_limit,
                                .logN_aod = a->logN_aod, .logN_aod_err = a->logN_aod_err,
                                .logN_lim = a->logN_limit};
  }
  m->saturated = o->saturated;
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

void dt_journal_format_number(char *out, size_t size, double x) { dt_num_format(out, size, x); }

static void sb_num(sbuf *b, double x) {
  char t[40];
  dt_num_format(t, sizeof t, x);
  sb_str(b, t);
}

static void sb_kv_num(sbuf *b, const char *key, double x) {
  sb_fmt(b, "\t%s=", key);
  sb_num(b, x);
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
static int same_d(double a, double b) { return a == b || (isnan(a) && isnan(b)); }

static int same_comp(const dt_component *a, const dt_component *b) {
  return same_d(a->logN, b->logN) && same_d(a->b, b->b) && same_d(a->v, b->v);
}

static void write_action(sbuf *b, const dt_action *a) {
  char fz[4];
  sb_fmt(b, "\tact=%s", dt_action_name(a->kind));
  switch (a->kind) {
  case DT_ACT_WINDOW_ADD:
    sb_kv_num(b, "lo", a->x[0]);
    sb_kv_num(b, "hi", a->x[1]);
    break;
  case DT_ACT_WINDOW_REMOVE:
  case DT_ACT_COMP_REMOVE:
    sb_fmt(b, "\ti=%d", a->index + 1);
    break;
  case DT_ACT_COMP_ADD:
    sb_kv_num(b, "logN", a->x[0]);
    sb_kv_num(b, "b", a->x[1]);
    sb_kv_num(b, "v", a->x[2]);
    break;
  case DT_ACT_COMP_SET:
    sb_fmt(b, "\ti=%d", a->index + 1);
    sb_kv_num(b, "logN", a->x[0]);
    sb_kv_num(b, "b", a->x[1]);
    sb_kv_num(b, "v", a->x[2]);
    break;
  case DT_ACT_FREEZE:
    sb_fmt(b, "\ti=%d\tfrozen=%s", a->index + 1, dt_freeze_str((unsigned)a->ival & 7u, fz));
    break;
  case DT_ACT_TIE_B: sb_fmt(b, "\ttie=%d", a->ival); break;
  case DT_ACT_CONT_ORDER: sb_fmt(b, "\torder=%d", a->ival); break;
  case DT_ACT_DOUBLET:
    sb_str(b, "\tdoublet=");
    sb_esc(b, a->text);
    break;
  case DT_ACT_RESOLUTION:
    sb_kv_num(b, "R", a->x[0]);
    sb_kv_num(b, "fwhm", a->x[1]);
    break;
  case DT_ACT_VSYS: sb_kv_num(b, "vsys", a->x[0]); break;
  case DT_ACT_VWINDOW:
    sb_kv_num(b, "vlo", a->x[0]);
    sb_kv_num(b, "vhi", a->x[1]);
    break;
  case DT_ACT_VERDICT: sb_fmt(b, "\tverdict=%s", dt_verdict_name((dt_verdict)a->ival)); break;
  case DT_ACT_NOTE:
    sb_str(b, "\tnote=");
    sb_esc(b, a->text);
    break;
  default: break; /* fit, restore, autofit: the state says it all */
  }
}

static const char *status_token(int code, char *tmp, size_t n) {
  for (size_t i = 0; i < sizeof status_tokens / sizeof status_tokens[0]; i++)
    if (status_tokens[i].code == code) return status_tokens[i].name;
  snprintf(tmp, n, "%d", code);
  return tmp;
}

static void write_state(sbuf *b, const dt_judgement *s, const dt_meas_summary *m, int full) {
  char fz[4], tmp[16];
  sb_fmt(b, "\t=>\tverdict=%s\tncomp=%zu", dt_verdict_name(s->verdict), s->ncomp);
  const dt_fit_result *f = s->has_fit ? &s->fit : NULL;
  int fit_matches = f && f->ncomp == s->ncomp;
  for (size_t i = 0; fit_matches && i < s->ncomp; i++)
    if (!same_comp(&f->comp[i], &s->comp[i])) fit_matches = 0;
  for (size_t i = 0; i < s->ncomp; i++) {
    sb_fmt(b, "\tc%zu=", i + 1);
    sb_comp(b, &s->comp[i], fit_matches ? &f->err[i] : NULL);
    if (s->frozen[i]) sb_fmt(b, ",frozen=%s", dt_freeze_str(s->frozen[i], fz));
  }
  if (s->tie_b) sb_str(b, "\ttie-b=1");
  if (f) {
    sb_fmt(b, "\tfit=%s\tniter=%d", status_token(f->status, tmp, sizeof tmp), f->niter);
    sb_kv_num(b, "chi2", f->chi2);
    sb_fmt(b, "\tdof=%ld", f->dof);
    sb_kv_num(b, "chi2r", f->chi2_red);
    sb_kv_num(b, "bic", f->bic);
    sb_fmt(b, "\tnpix=%zu", f->npix);
    if (f->ncont > 0) {
      sb_str(b, "\tcont=");
      for (size_t i = 0; i < f->ncont && i < DT_MAX_CONT; i++) {
        if (i) sb_str(b, ",");
        sb_pm(b, f->cont_coef[i], f->cont_err[i]);
      }
    }
    if (!fit_matches)
      for (size_t i = 0; i < f->ncomp && i < DT_MAX_COMP; i++) {
        sb_fmt(b, "\tf%zu=", i + 1);
        sb_comp(b, &f->comp[i], &f->err[i]);
      }
  }
  if (m) { /* values that are NaN (not measured) are left out */
    for (int l = 0; l < 2; l++) {
      const dt_meas_line *ml = &m->line[l];
      if (!isnan(ml->w)) {
        sb_fmt(b, "\tW%d=", l + 1);
        sb_pm(b, ml->w, ml->w_err);
      }
      if (!isnan(ml->w_lim)) {
        sb_fmt(b, "\tWlim%d=", l + 1);
        sb_num(b, ml->w_lim);
      }
      if (!isnan(ml->logN_aod)) {
        sb_fmt(b, "\tlogNa%d=", l + 1);
        sb_pm(b, ml->logN_aod, ml->logN_aod_err);
      }
      if (!isnan(ml->logN_lim)) {
        sb_fmt(b, "\tlogNlim%d=", l + 1);
        sb_num(b, ml->logN_lim);
      }
    }
    sb_kv_num(b, "nsigma", m->nsigma);
    if (m->saturated) sb_str(b, "\tsaturated=1");
    if (m->suggested != DT_VERDICT_NONE)
      sb_fmt(b, "\tsuggested=%s", dt_verdict_name(m->suggested));
  }
  if (full) {
    sb_str(b, "\tfull=1\tdoublet=");
    sb_esc(b, s->doublet);
    sb_kv_num(b, "vsys", s->vsys);
    sb_kv_num(b, "R", s->resolution);
    sb_kv_num(b, "fwhm", s->fwhm_kms);
    sb_kv_num(b, "vlo", s->vlo);
    sb_kv_num(b, "vhi", s->vhi);
    sb_fmt(b, "\torder=%d\twindows=", s->cont_order);
    for (size_t i = 0; i < s->nwin && i < DT_MAX_WINDOWS; i++) {
      if (i) sb_str(b, ",");
      sb_num(b, s->win[i].lo);
      sb_str(b, ":");
      sb_num(b, s->win[i].hi);
    }
    sb_str(b, "\tnote=");
    sb_esc(b, s->note);
  }
}

size_t dt_journal_format(char *buf, size_t size, const char *time, const char *user,
                         const dt_target *t, const dt_action *a, const dt_judgement *after,
                         const dt_meas_summary *meas, int full, const char *sha256_was) {
  sbuf b = {buf, size, 0};
  sb_str(&b, time);
  sb_str(&b, "\tuser=");
  sb_esc(&b, user && *user ? user : "unknown");
  sb_str(&b, "\tfile=");
  sb_esc(&b, t->path);
  sb_fmt(&b, "\thdu=%d\trow=%ld\tsha256=%s", t->hdu, t->row,
         dt_digest_is_hex(t->sha256) ? t->sha256 : "");
  if (sha256_was && dt_digest_is_hex(sha256_was)) sb_fmt(&b, "\twas=%s", sha256_was);
  write_action(&b, a);
  write_state(&b, after, meas, full || a->kind == DT_ACT_RESTORE || a->kind == DT_ACT_AUTOFIT);
  size_t body = b.n;
  char tail[24];
  uint32_t h = body < size ? fnv1a32(buf, body) : 0;
  int k = snprintf(tail, sizeof tail, "\tsum=%08x\n", (unsigned)h);
  sb_put(&b, tail, (size_t)k);
  if (b.n < size) buf[b.n] = '\0';
  else if (size > 0) buf[size - 1] = '\0';
  return b.n;
}

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
  if (*end || sum != fnv1a32(line, (size_t)(last - line)))
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
          else copy_str(rec->user, sizeof rec->user, v);
          have |= HAVE_USER;
        } else if (!strcmp(k, "file")) {
          if (unescape(v) || !*v) bad = 1;
          rec->target.path = v;
          have |= HAVE_FILE;
        } else if (!strcmp(k, "hdu")) {
          if (parse_long(v, 0, 100000, &lv)) bad = 1;
          else rec->target.hdu = (int)lv;
        } else if (!strcmp(k, "row")) {
          if (parse_long(v, 0, 1L << 62, &lv)) bad = 1;
          else rec->target.row = lv;
        } else if (!strcmp(k, "sha256")) {
          if (*v && !dt_digest_is_hex(v)) bad = 1;
          else copy_str(rec->target.sha256, sizeof rec->target.sha256, v);
        } else if (!strcmp(k, "was")) {
          if (!dt_digest_is_hex(v)) bad = 1;
          else {
            copy_str(rec->sha256_was, sizeof rec->sha256_was, v);
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
          if (!bad) copy_str(a->text, sizeof a->text, v);
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
          if (!bad) copy_str(a->text, sizeof a->text, v);
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
        bad = 1;
        for (size_t s = 0; s < sizeof status_tokens / sizeof status_tokens[0]; s++)
          if (!strcmp(v, status_tokens[s].name)) fit->status = status_tokens[s].code, bad = 0;
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
        if (!bad) copy_str(rec->after.doublet, sizeof rec->after.doublet, v);
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
        if (!bad) copy_str(rec->after.note, sizeof rec->after.note, v);
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
    if ((size_t)n != strlen(r->line))
      return dt_err_set(e, DT_EFORMAT, where, "NUL byte in the line: damaged line skipped");
    if (r->line[n - 1] != '\n')
      return dt_err_set(e, DT_EFORMAT, where,
                        "incomplete last line (no newline at the end of the file, a write "
                        "cut short): skipped");
    if (r->line[0] == '\n' || r->line[0] == '#') continue;
    int rc = dt_journal_parse(r->line, rec, e);
    if (rc != DT_OK) {
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

void dt_journal_reader_close(dt_journal_reader *r) {
  if (!r) return;
  if (r->f) fclose(r->f);
  free(r->line);
  free(r);
}

/* ---------- the in-memory session ---------- */

static dt_journal_entry *find(const dt_journal *j, const char *path, int hdu, long row) {
  if (!j->nslot) return NULL;
  size_t m = j->nslot - 1;
  for (size_t s = (size_t)key_hash(path, hdu, row) & m;; s = (s + 1) & m) {
    size_t k = j->slot[s];
    if (!k) return NULL;
    dt_journal_entry *en = j->ent[k - 1];
    if (en->target.hdu == hdu && en->target.row == row && !strcmp(en->target.path, path))
      return en;
  }
}

static int rehash(dt_journal *j, size_t nslot) {
  size_t *slot = calloc(nslot, sizeof *slot);
  if (!slot) return DT_ENOMEM;
  for (size_t i = 0; i < j->nent; i++) {
    const dt_target *t = &j->ent[i]->target;
    size_t s = (size_t)key_hash(t->path, t->hdu, t->row) & (nslot - 1);
    while (slot[s]) s = (s + 1) & (nslot - 1);
    slot[s] = i + 1;
  }
  free(j->slot);
  j->slot = slot;
  j->nslot = nslot;
  return DT_OK;
}

static dt_journal_entry *add_entry(dt_journal *j, const dt_target *t) {
  if ((j->nent + 1) * 2 > j->nslot && rehash(j, j->nslot ? j->nslot * 2 : 64) != DT_OK)
    return NULL;
  if (j->nent == j->capent) {
    size_t cap = j->capent ? j->capent * 2 : 64;
    dt_journal_entry **p = realloc(j->ent, cap * sizeof *p);
    if (!p) return NULL;
    j->ent = p;
    j->capent = cap;
  }
  dt_journal_entry *en = calloc(1, sizeof *en);
  char *path = strdup(t->path);
  if (!en || !path) {
    free(en);
    free(path);
    return NULL;
  }
  en->target = *t;
  en->target.path = path;
  en->target.sha256[0] = '\0';
  dt_judgement_init(&en->state);
  dt_meas_summary_clear(&en->meas);
  j->ent[j->nent++] = en;
  size_t s = (size_t)key_hash(path, t->hdu, t->row) & (j->nslot - 1);
  while (j->slot[s]) s = (s + 1) & (j->nslot - 1);
  j->slot[s] = j->nent;
  return en;
}

static void add_warning(dt_journal *j, const dt_err *e) {
  if (j->nwarn < MAX_WARN) {
    if (e->where[0])
      snprintf(j->warn[j->nwarn], WARN_LEN, "%.40s: %.150s", e->where, e->what);
    else
      snprintf(j->warn[j->nwarn], WARN_LEN, "%.190s", e->what);
  }
  j->nwarn++;
}

/* Components, freezes, tie, verdict and fit: what every record states. */
static int same_summary(const dt_judgement *a, const dt_judgement *b) {
  if (a->ncomp != b->ncomp || a->tie_b != b->tie_b || a->verdict != b->verdict ||
      a->has_fit != b->has_fit || a->ncomp > DT_MAX_COMP)
    return 0;
  for (size_t i = 0; i < a->ncomp; i++)
    if (a->frozen[i] != b->frozen[i] || !same_comp(&a->comp[i], &b->comp[i])) return 0;
  return !a->has_fit || dt_fit_result_same(&a->fit, &b->fit);
}

static void adopt_summary(dt_judgement *s, const dt_judgement *rec) {
  s->ncomp = rec->ncomp;
  memcpy(s->comp, rec->comp, sizeof s->comp);
  memcpy(s->frozen, rec->frozen, sizeof s->frozen);
  s->tie_b = rec->tie_b;
  s->verdict = rec->verdict;
  s->has_fit = rec->has_fit;
  s->fit = rec->fit;
}

static void note_verdict(dt_journal_entry *en, dt_verdict before, dt_action_kind kind,
                         const char *user, const char *time) {
  if (en->state.verdict == DT_VERDICT_NONE) {
    en->judged_by[0] = en->judged_at[0] = '\0';
  } else if (kind == DT_ACT_VERDICT || en->state.verdict != before || !en->judged_by[0]) {
    copy_str(en->judged_by, sizeof en->judged_by, user);
    copy_str(en->judged_at, sizeof en->judged_at, time);
  }
}

/* Replay one record into the session. */
static int replay(dt_journal *j, const dt_journal_record *rec) {
  dt_journal_entry *en = find(j, rec->target.path, rec->target.hdu, rec->target.row);
  if (!en && !(en = add_entry(j, &rec->target))) return DT_ENOMEM;
  if (!en->nchanges) en->first_line = rec->line;
  if (rec->flags & DT_JFLAG_FILE_CHANGED) en->flags |= DT_JFLAG_FILE_CHANGED;
  if (rec->target.sha256[0]) {
    if (en->target.sha256[0] && strcmp(en->target.sha256, rec->target.sha256) != 0)
      en->flags |= DT_JFLAG_FILE_CHANGED;
    memcpy(en->target.sha256, rec->target.sha256, DT_SHA256_HEX);
  }
  dt_verdict before = en->state.verdict;
  if (rec->has & DT_REC_FULL) {
    en->state = rec->after;
  } else {
    dt_judgement *s = &en->state; /* apply changes nothing when it fails */
    int rc = dt_judgement_apply(s, &rec->action);
    if (rc != DT_OK || !same_summary(s, &rec->after)) {
      char what[160];
      snprintf(what, sizeof what,
               "%s of %s: the recorded state does not follow from the records before it; "
               "recorded components and verdict adopted",
               dt_action_name(rec->action.kind), rec->target.path);
      dt_err w;
      char where[32];
      snprintf(where, sizeof where, "line %ld", rec->line);
      dt_err_set(&w, DT_EFORMAT, where, "%s", what);
      add_warning(j, &w);
      en->flags |= DT_JFLAG_REPLAY_MISMATCH;
      adopt_summary(s, &rec->after);
    }
  }
  if (rec->has & DT_REC_MEAS) {
    en->meas = rec->meas;
    en->has_meas = 1;
  }
  copy_str(en->user, sizeof en->user, rec->user);
  copy_str(en->time, sizeof en->time, rec->time);
  note_verdict(en, before, rec->action.kind, rec->user, rec->time);
  en->nchanges++;
  en->last_line = rec->line;
  j->nrecords++;
  return DT_OK;
}

/* Replay every record of an opened reader into j, then close the reader. */
static int load_from(dt_journal *j, dt_journal_reader *r, dt_err *e) {
  int rc;
  dt_journal_record *rec = malloc(sizeof *rec);
  if (!rec) {
    dt_journal_reader_close(r);
    return dt_err_set(e, DT_ENOMEM, NULL, "out of memory");
  }
  dt_err w;
  for (;;) {
    rc = dt_journal_reader_next(r, rec, &w);
    if (rc == DT_ENOTFOUND) {
      rc = DT_OK;
      break;
    }
    if (rc == DT_EFORMAT) {
      add_warning(j, &w);
      continue;
    }
    if (rc != DT_OK) {
      if (e) *e = w;
      break;
    }
    rc = replay(j, rec);
    if (rc != DT_OK) {
      dt_err_set(e, rc, NULL, "out of memory");
      break;
    }
  }
  j->nlines = r->lineno;
  free(rec);
  dt_journal_reader_close(r);
  return rc;
}

static int load(dt_journal *j, dt_err *e) {
  dt_journal_reader *r;
  int rc = dt_journal_reader_open(j->path, &r, e);
  if (rc != DT_OK) return rc;
  return load_from(j, r, e);
}

/* ---------- open / close ---------- */

static void now_utc(char out[DT_JOURNAL_TIME_MAX]) {
  struct timespec ts;
  clock_gettime(CLOCK_REALTIME, &ts);
  struct tm tm;
  gmtime_r(&ts.tv_sec, &tm);
  char tmp[24];
  strftime(tmp, sizeof tmp, "%Y-%m-%dT%H:%M:%S", &tm);
  snprintf(out, DT_JOURNAL_TIME_MAX, "%.20s.%03dZ", tmp, (int)(ts.tv_nsec / 1000000L) % 1000);
}

static int write_all(int fd, const char *p, size_t n, int *err) {
  while (n > 0) {
    ssize_t k = write(fd, p, n);
    if (k < 0) {
      if (errno == EINTR) continue;
      *err = errno;
      return -1;
    }
    if (k == 0) {
      *err = EIO;
      return -1;
    }
    p += k;
    n -= (size_t)k;
  }
  return 0;
}

/* Make a new directory entry durable (best effort). */
static void sync_dir(const char *path) {
  char *dir = strdup(path);
  if (!dir) return;
  char *slash = strrchr(dir, '/');
  const char *d = ".";
  if (slash) {
    if (slash == dir) slash[1] = '\0';
    else *slash = '\0';
    d = dir;
  }
  int fd = open(d, O_RDONLY);
  if (fd >= 0) {
    (void)fsync(fd);
    close(fd);
  }
  free(dir);
}

/* Who holds the write lock: " (process 1234, user alice)", as far as the
 * system tells (Linux lists every lock with its owner in /proc/locks); ""
 * when unknown. */
static void lock_holder(const struct stat *st, char *out, size_t n) {
  out[0] = '\0';
  FILE *f = fopen("/proc/locks", "r");
  if (!f) return;
  char line[256];
  long pid = -1;
  while (pid < 0 && fgets(line, sizeof line, f)) {
    char type[16], mode[16];
    long p;
    unsigned maj, min;
    unsigned long ino;
    if (strstr(line, "->")) continue; /* a process waiting, not holding */
    if (sscanf(line, "%*d: %15s %*s %15s %ld %x:%x:%lu", type, mode, &p, &maj, &min, &ino) != 6)
      continue;
    if (!strcmp(type, "FLOCK") && !strcmp(mode, "WRITE") && ino == (unsigned long)st->st_ino &&
        maj == major(st->st_dev) && min == minor(st->st_dev))
      pid = p;
  }
  fclose(f);
  if (pid <= 0) return;
  if (pid == (long)getpid()) {
    snprintf(out, n, " (this same process)");
    return;
  }
  char proc[64], name[80] = "";
  snprintf(proc, sizeof proc, "/proc/%ld", pid);
  struct stat ps;
  if (stat(proc, &ps) == 0) {
    struct passwd pw, *res = NULL;
    char pwbuf[1024];
    if (getpwuid_r(ps.st_uid, &pw, pwbuf, sizeof pwbuf, &res) == 0 && res)
      snprintf(name, sizeof name, ", user %.60s", res->pw_name);
  }
  snprintf(out, n, " (process %ld%s)", pid, name);
}

static int open_rw(dt_journal *j, dt_err *e) {
  int fd = open(j->path, O_RDWR | O_APPEND | O_CREAT | O_CLOEXEC, 0644);
  if (fd < 0) {
    int err = errno;
    if (err == EACCES || err == EROFS || err == EPERM)
      return dt_err_set(e, DT_EIO, NULL, "cannot open for writing: %s (open it read-only to look)",
                        strerror(err));
    return dt_err_set(e, DT_EIO, NULL, "cannot open for writing: %s", strerror(err));
  }
  j->fd = fd;
  struct stat st;
  if (fstat(fd, &st) != 0) return dt_err_set(e, DT_EIO, NULL, "cannot stat: %s", strerror(errno));
  if (!S_ISREG(st.st_mode)) return dt_err_set(e, DT_EIO, NULL, "not a regular file");
  if (flock(fd, LOCK_EX | LOCK_NB) != 0) {
    int err = errno;
    if (err == EWOULDBLOCK || err == EAGAIN) {
      char who[128];
      lock_holder(&st, who, sizeof who);
      return dt_err_set(e, DT_ELOCK, NULL,
                        "the session is open for writing by another doubletty%s; only one "
                        "writer at a time",
                        who);
    }
    return dt_err_set(e, DT_EIO, NULL, "cannot lock: %s", strerror(err));
  }
  j->dev = st.st_dev;
  j->ino = st.st_ino;
  j->abspath = realpath(j->path, NULL);
  int err = 0;
  if (st.st_size == 0) {
    char hdr[160], t[DT_JOURNAL_TIME_MAX];
    now_utc(t);
    int n = snprintf(hdr, sizeof hdr, HEADER_TAG " %d\tcreated=%s\tprogram=doubletty %s\n",
                     DT_JOURNAL_VERSION, t, DT_VERSION);
    if (write_all(fd, hdr, (size_t)n, &err) != 0 || fsync(fd) != 0) {
      if (!err) err = errno;
      (void)ftruncate(fd, 0);
      return dt_err_set(e, DT_EIO, NULL, "cannot write the header: %s", strerror(err));
    }
    sync_dir(j->path);
    j->nlines = 1;
  } else {
    int rc = load(j, e);
    if (rc != DT_OK) return rc;
    /* a cut-short last line: end it so that new records start on their own line */
    char last = '\n';
    if (pread(fd, &last, 1, st.st_size - 1) == 1 && last != '\n') {
      if (write_all(fd, "\n", 1, &err) != 0 || fsync(fd) != 0) {
        if (!err) err = errno;
        return dt_err_set(e, DT_EIO, NULL, "cannot end the incomplete last line: %s",
                          strerror(err));
      }
    }
  }
  return DT_OK;
}

int dt_journal_open_mem(const void *buf, size_t len, dt_journal **out, dt_err *e) {
  *out = NULL;
  dt_journal *j = calloc(1, sizeof *j);
  if (!j) return dt_err_set(e, DT_ENOMEM, NULL, "out of memory");
  j->fd = -1;
  j->ro = 1;
  j->path = strdup("(memory)");
  copy_str(j->user, sizeof j->user, "unknown");
  dt_journal_reader *r = NULL;
  int rc = j->path ? dt_journal_reader_open_mem(buf, len, &r, e)
                   : dt_err_set(e, DT_ENOMEM, NULL, "out of memory");
  if (rc == DT_OK) rc = load_from(j, r, e);
  if (rc != DT_OK) {
    dt_journal_close(j);
    return rc;
  }
  *out = j;
  return DT_OK;
}

int dt_journal_open(const char *path, dt_journal_mode mode, const char *user, dt_journal **out,
                    dt_err *e) {
  *out = NULL;
  if (!path || !*path) return dt_err_set(e, DT_EINVAL, NULL, "no session file name");
  dt_journal *j = calloc(1, sizeof *j);
  if (!j) return dt_err_set(e, DT_ENOMEM, NULL, "out of memory");
  j->fd = -1;
  j->path = strdup(path);
  j->bufcap = 1 << 15;
  j->buf = malloc(j->bufcap);
  if (!j->path || !j->buf) {
    dt_journal_close(j);
    return dt_err_set(e, DT_ENOMEM, NULL, "out of memory");
  }
  copy_str(j->user, sizeof j->user, user && *user ? user : "unknown");
  j->ro = mode == DT_JOURNAL_READ_ONLY;
  int rc = j->ro ? load(j, e) : open_rw(j, e);
  if (rc != DT_OK) {
    dt_journal_close(j);
    return rc;
  }
  j->live = !j->ro;
  *out = j;
  return DT_OK;
}

static const char *rescue(dt_journal *j, char *out, size_t size, int *absent);

void dt_journal_close(dt_journal *j) {
  if (!j) return;
  if (j->live && !j->failed && j->fd >= 0) {
    /* removed or replaced since the last append: keep what it held */
    struct stat st;
    if (stat(j->abspath ? j->abspath : j->path, &st) != 0 || st.st_dev != j->dev ||
        st.st_ino != j->ino) {
      char saved[4096];
      int absent;
      (void)rescue(j, saved, sizeof saved, &absent);
    }
  }
  if (j->fd >= 0) close(j->fd); /* releases both locks */
  for (size_t i = 0; i < j->nent; i++) {
    free((char *)j->ent[i]->target.path);
    free(j->ent[i]);
  }
  free(j->ent);
  free(j->slot);
  free(j->buf);
  free(j->abspath);
  free(j->path);
  free(j);
}

/* ---------- append ---------- */

/* The session file was removed or replaced while open.  What it held is
 * still readable through the descriptor: write it back where it was when
 * nothing is there now (*absent = 1), else beside it as PATH.rescued --
 * never over an existing file -- so that no recorded judgement is lost.
 * Returns out (the name written) or NULL. */
static const char *rescue(dt_journal *j, char *out, size_t size, int *absent) {
  const char *name = j->abspath ? j->abspath : j->path;
  struct stat st;
  *absent = stat(name, &st) != 0 && errno == ENOENT;
  if ((size_t)snprintf(out, size, "%s%s", name, *absent ? "" : ".rescued") >= size) return NULL;
  int fd = open(out, O_WRONLY | O_CREAT | O_EXCL | O_CLOEXEC, 0644);
  if (fd < 0) return NULL;
  char buf[16384];
  off_t off = 0;
  int ok = 1, err = 0;
  for (;;) {
    ssize_t k = pread(j->fd, buf, sizeof buf, off);
    if (k < 0 && errno == EINTR) continue;
    if (k <= 0) {
      ok = k == 0;
      break;
    }
    if (write_all(fd, buf, (size_t)k, &err) != 0) {
      ok = 0;
      break;
    }
    off += k;
  }
  if (ok && fsync(fd) != 0) ok = 0;
  close(fd);
  if (!ok) {
    unlink(out);
    return NULL;
  }
  sync_dir(out);
  return out;
}

static int set_failed(dt_journal *j, dt_err *e, const char *fmt, const char *arg) {
  j->failed = DT_EIO;
  char what[200];
  snprintf(what, sizeof what, fmt, arg);
  dt_err_set(&j->err, DT_EIO, NULL, "%s; no further judgement can be recorded", what);
  if (e) *e = j->err;
  return DT_EIO;
}

int dt_journal_append(dt_journal *j, const dt_target *t, const dt_action *a,
                      const dt_judgement *after, const dt_meas_summary *meas, dt_err *e) {
  if (j->ro) return dt_err_set(e, DT_EIO, NULL, "the session is open read-only");
  if (j->failed) {
    if (e) *e = j->err;
    return j->failed;
  }
  if (!t || !t->path || !*t->path) return dt_err_set(e, DT_EINVAL, NULL, "no target file name");
  if ((int)a->kind < 0 || a->kind >= DT_ACT__COUNT)
    return dt_err_set(e, DT_EINVAL, NULL, "unknown action");
  /* the state must be one a judgement can be in */
  dt_judgement chk = *after;
  dt_action ra;
  dt_action_init(&ra, DT_ACT_RESTORE);
  ra.state = after;
  if (dt_judgement_apply(&chk, &ra) != DT_OK)
    return dt_err_set(e, DT_EINVAL, NULL, "the state after %s is not a valid judgement",
                      dt_action_name(a->kind));

  dt_journal_entry *en = find(j, t->path, t->hdu, t->row);
  int full = 1;
  if (en && a->kind != DT_ACT_RESTORE && a->kind != DT_ACT_AUTOFIT) {
    dt_judgement s = en->state;
    dt_action b = *a;
    if (b.kind == DT_ACT_FIT) b.fit = after->fit; /* what a replay will do */
    full = !(dt_judgement_apply(&s, &b) == DT_OK && dt_judgement_same(&s, after));
  }
  const char *was = NULL;
  if (en && en->target.sha256[0] && dt_digest_is_hex(t->sha256) &&
      strcmp(en->target.sha256, t->sha256) != 0)
    was = en->target.sha256;

  char tm[DT_JOURNAL_TIME_MAX];
  now_utc(tm);
  size_t n = dt_journal_format(j->buf, j->bufcap, tm, j->user, t, a, after, meas, full, was);
  if (n >= j->bufcap) {
    char *p = realloc(j->buf, n + 1);
    if (!p) return dt_err_set(e, DT_ENOMEM, NULL, "out of memory");
    j->buf = p;
    j->bufcap = n + 1;
    n = dt_journal_format(j->buf, j->bufcap, tm, j->user, t, a, after, meas, full, was);
  }

  /* the path must still name the file we hold */
  struct stat st, fst;
  if (stat(j->abspath ? j->abspath : j->path, &st) != 0 || st.st_dev != j->dev ||
      st.st_ino != j->ino) {
    char saved[4096], what[4200];
    int absent = 0;
    if (rescue(j, saved, sizeof saved, &absent)) {
      snprintf(what, sizeof what,
               absent ? "the session file was removed while open; what it held was written "
                        "back to %s (reopen it to go on)"
                      : "the session file was replaced while open; what it held was saved as %s",
               saved);
      return set_failed(j, e, "%.190s", what);
    }
    return set_failed(j, e, "the session file %s was removed or replaced", j->path);
  }
  if (fstat(j->fd, &fst) != 0)
    return set_failed(j, e, "cannot stat the session file: %s", strerror(errno));
  int err = 0;
  if (write_all(j->fd, j->buf, n, &err) != 0) {
    if (ftruncate(j->fd, fst.st_size) == 0) (void)fsync(j->fd);
    return set_failed(j, e, "cannot write the session file: %s", strerror(err));
  }
  if (fsync(j->fd) != 0) {
    err = errno;
    if (ftruncate(j->fd, fst.st_size) == 0) (void)fsync(j->fd);
    return set_failed(j, e, "cannot sync the session file to disk: %s", strerror(err));
  }

  /* recorded: update the session */
  if (!en && !(en = add_entry(j, t))) {
    /* the line is on disk; the in-memory view can no longer follow it */
    return set_failed(j, e, "%s", "out of memory");
  }
  j->nlines++;
  j->nrecords++;
  if (!en->nchanges) en->first_line = j->nlines;
  if (was) en->flags |= DT_JFLAG_FILE_CHANGED;
  if (dt_digest_is_hex(t->sha256)) memcpy(en->target.sha256, t->sha256, DT_SHA256_HEX);
  dt_verdict before = en->state.verdict;
  en->state = *after;
  if (meas) {
    en->meas = *meas;
    en->has_meas = 1;
  }
  copy_str(en->user, sizeof en->user, j->user);
  copy_str(en->time, sizeof en->time, tm);
  note_verdict(en, before, a->kind, j->user, tm);
  en->nchanges++;
  en->last_line = j->nlines;
  return DT_OK;
}

/* ---------- queries ---------- */

const dt_journal_entry *dt_journal_lookup(const dt_journal *j, const char *path, int hdu,
                                          long row) {
  return path ? find(j, path, hdu, row) : NULL;
}

size_t dt_journal_count(const dt_journal *j) { return j->nent; }

const dt_journal_entry *dt_journal_entry_at(const dt_journal *j, size_t i) {
  return i < j->nent ? j->ent[i] : NULL;
}

int dt_journal_file_changed(const dt_journal_entry *en, const char *sha256) {
  return en && en->target.sha256[0] && sha256 && dt_digest_is_hex(sha256) &&
         strcmp(en->target.sha256, sha256) != 0;
}

int dt_journal_set_flag(dt_journal *j, const char *path, int hdu, long row, unsigned flag,
                        int on) {
  dt_journal_entry *en = path ? find(j, path, hdu, row) : NULL;
  if (!en) return DT_ENOTFOUND;
  if (on) en->flags |= flag;
  else en->flags &= ~flag;
  return DT_OK;
}

int dt_journal_failed(const dt_journal *j) { return j->failed; }
const dt_err *dt_journal_error(const dt_journal *j) { return &j->err; }
int dt_journal_read_only(const dt_journal *j) { return j->ro; }
const char *dt_journal_path(const dt_journal *j) { return j->path; }
const char *dt_journal_user(const dt_journal *j) { return j->user; }
long dt_journal_nrecords(const dt_journal *j) { return j->nrecords; }
size_t dt_journal_warning_count(const dt_journal *j) { return j->nwarn; }

const char *dt_journal_warning(const dt_journal *j, size_t i) {
  return i < j->nwarn && i < MAX_WARN ? j->warn[i] : NULL;
}

/* ---------- refit check ---------- */

static int param_agrees(double rec, double now, double erec, double enow, double tol) {
  if (!isfinite(rec) || !isfinite(now)) return isnan(rec) && isnan(now);
  double s = fmax(isfinite(erec) ? erec : 0.0, isfinite(enow) ? enow : 0.0);
  if (s <= 0.0) return fabs(rec - now) <= 1e-6;
  return fabs(rec - now) <= tol * s;
}

int dt_journal_check_refit(const dt_fit_result *recorded, const dt_fit_result *refit,
                           double tol_sigma, char *why, size_t nwhy) {
  char tmp[8];
  if (!why) {
    why = tmp;
    nwhy = sizeof tmp;
  }
  why[0] = '\0';
  if (recorded->status != refit->status) {
    snprintf(why, nwhy, "fit status differs (recorded %d, now %d)", recorded->status,
             refit->status);
    return 0;
  }
  if (recorded->ncomp != refit->ncomp) {
    snprintf(why, nwhy, "number of components differs (recorded %zu, now %zu)",
             recorded->ncomp, refit->ncomp);
    return 0;
  }
  if (recorded->status != DT_OK) return 1;
  static const char *names[3] = {"logN", "b", "v"};
  for (size_t i = 0; i < recorded->ncomp && i < DT_MAX_COMP; i++) {
    const dt_component *a = &recorded->comp[i], *b = &refit->comp[i];
    const dt_component *ea = &recorded->err[i], *eb = &refit->err[i];
    double va[3] = {a->logN, a->b, a->v}, vb[3] = {b->logN, b->b, b->v};
    double sa[3] = {ea->logN, ea->b, ea->v}, sb[3] = {eb->logN, eb->b, eb->v};
    for (int p = 0; p < 3; p++)
      if (!param_agrees(va[p], vb[p], sa[p], sb[p], tol_sigma)) {
        snprintf(why, nwhy, "component %zu %s: recorded %.6g, refit %.6g", i + 1, names[p],
                 va[p], vb[p]);
        return 0;
      }
  }
  double sd = tol_sigma * sqrt(2.0 * (double)(recorded->dof > 0 ? recorded->dof : 1));
  if (!(fabs(recorded->chi2 - refit->chi2) <= sd)) {
    snprintf(why, nwhy, "chi2: recorded %.6g, refit %.6g", recorded->chi2, refit->chi2);
    return 0;
  }
  return 1;
}

int dt_journal_verify_fit(struct dt_analysis *a, const dt_judgement *recorded, double tol_sigma,
                          int *agrees, char *why, size_t nwhy, dt_err *e) {
  *agrees = 1;
  if (why && nwhy) why[0] = '\0';
  if (!recorded->has_fit) return DT_OK;
  dt_analysis_out *out = malloc(sizeof *out);
  if (!out) return dt_err_set(e, DT_ENOMEM, NULL, "out of memory");
  /* the fit starts from the recorded components (the recorded optimum for a
   * successful fit), so a reproducible fit returns to it */
  int rc = dt_analysis_run(a, recorded, out, e);
  if (rc != DT_OK && !(out->fitted && rc == out->fit.status)) {
    free(out);
    return rc;
  }
  if (rc != DT_OK) dt_err_clear(e);
  *agrees = dt_journal_check_refit(&recorded->fit, &out->fit, tol_sigma, why, nwhy);
  free(out);
  return DT_OK;
}
