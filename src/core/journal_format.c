/* The session file format and its writer: one line per change.
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
 */
#include "doubletty/journal.h"
#include "journal_int.h"

#include <math.h>
#include <stdarg.h>
#include <stdint.h>
#include <stdio.h>
#include <string.h>

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
/* Exact equality, NaN equal to NaN. */
static int same_d(double a, double b) { return a == b || (isnan(a) && isnan(b)); }

int dt_jn_same_comp(const dt_component *a, const dt_component *b) {
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

static void write_state(sbuf *b, const dt_judgement *s, const dt_meas_summary *m, int full) {
  char fz[4], tmp[16];
  sb_fmt(b, "\t=>\tverdict=%s\tncomp=%zu", dt_verdict_name(s->verdict), s->ncomp);
  const dt_fit_result *f = s->has_fit ? &s->fit : NULL;
  int fit_matches = f && f->ncomp == s->ncomp;
  for (size_t i = 0; fit_matches && i < s->ncomp; i++)
    if (!dt_jn_same_comp(&f->comp[i], &s->comp[i])) fit_matches = 0;
  for (size_t i = 0; i < s->ncomp; i++) {
    sb_fmt(b, "\tc%zu=", i + 1);
    sb_comp(b, &s->comp[i], fit_matches ? &f->err[i] : NULL);
    if (s->frozen[i]) sb_fmt(b, ",frozen=%s", dt_freeze_str(s->frozen[i], fz));
  }
  if (s->tie_b) sb_str(b, "\ttie-b=1");
  if (f) {
    sb_fmt(b, "\tfit=%s\tniter=%d", dt_jn_status_token(f->status, tmp, sizeof tmp), f->niter);
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
  if (t->name && *t->name) {
    sb_str(&b, "\tname=");
    sb_esc(&b, t->name);
  }
  sb_fmt(&b, "\thdu=%d\trow=%ld\tsha256=%s", t->hdu, t->row,
         dt_digest_is_hex(t->sha256) ? t->sha256 : "");
  if (sha256_was && dt_digest_is_hex(sha256_was)) sb_fmt(&b, "\twas=%s", sha256_was);
  write_action(&b, a);
  write_state(&b, after, meas, full || a->kind == DT_ACT_RESTORE || a->kind == DT_ACT_AUTOFIT);
  size_t body = b.n;
  char tail[24];
  uint32_t h = body < size ? dt_jn_fnv1a32(buf, body) : 0;
  int k = snprintf(tail, sizeof tail, "\tsum=%08x\n", (unsigned)h);
  sb_put(&b, tail, (size_t)k);
  if (b.n < size) buf[b.n] = '\0';
  else if (size > 0) buf[size - 1] = '\0';
  return b.n;
}
