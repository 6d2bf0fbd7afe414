/* The session table and its two writers, CSV and FITS (see export.h). */
#include "doubletty/export.h"

#include <fitsio.h>
#include <math.h>
#include <stdio.h>
#include <string.h>
#include <unistd.h>

#include "doubletty/atomic.h"
#include "doubletty/cover.h"
#include "doubletty/csv.h"
#include "doubletty/hicube.h"
#include "doubletty/num.h"
#include "doubletty/systems.h"
#include "doubletty/targets.h"

/* ---- the table: columns and their values per row ---- */

typedef enum { C_STR, C_INT, C_DBL, C_BOOL } ctype;

typedef struct column {
  const char *name;
  ctype type;
  const char *unit; /* FITS TUNITn ("" for none) */
} column;

/* log10 N [cm-2] columns: described by TCOMMn instead of a unit. */
static int is_log(const char *name) { return !strncmp(name, "logN", 4); }

/* Standard FITS units (FITS 4.0 section 4.3); "" is the standard's
 * notation for a common logarithm of a column density. */
static const column COLS[] = {
    {"file", C_STR, ""},          {"name", C_STR, ""},
    {"hdu", C_INT, ""},
    {"row", C_INT, ""},           {"system", C_STR, ""},
    {"verdict", C_STR, ""},
    {"note", C_STR, ""},          {"judged_by", C_STR, ""},
    {"judged_at", C_STR, ""},     {"last_user", C_STR, ""},
    {"last_change", C_STR, ""},   {"changes", C_INT, ""},
    {"flags", C_STR, ""},         {"sha256", C_STR, ""},
    {"doublet", C_STR, ""},       {"vsys_kms", C_DBL, "km s-1"},
    {"ncomp", C_INT, ""},         {"component", C_INT, ""},
    {"logN", C_DBL, ""}, {"logN_err", C_DBL, ""},
    {"b_kms", C_DBL, "km s-1"},   {"b_err", C_DBL, "km s-1"},
    {"v_kms", C_DBL, "km s-1"},   {"v_err", C_DBL, "km s-1"},
    {"frozen", C_STR, ""},        {"fit_status", C_STR, ""},
    {"chi2", C_DBL, ""},          {"dof", C_INT, ""},
    {"chi2_red", C_DBL, ""},      {"W_mA", C_DBL, "10**-3 Angstrom"},
    {"W_err_mA", C_DBL, "10**-3 Angstrom"}, {"W_limit_mA", C_DBL, "10**-3 Angstrom"},
    {"logN_aod", C_DBL, ""}, {"logN_aod_err", C_DBL, ""},
    {"logN_limit", C_DBL, ""}, {"W_weak_mA", C_DBL, "10**-3 Angstrom"},
    {"W_weak_err_mA", C_DBL, "10**-3 Angstrom"}, {"W_weak_lim_mA", C_DBL, "10**-3 Angstrom"},
    {"logN_aod_weak", C_DBL, ""}, {"logN_aod_weak_err", C_DBL, ""},
    {"logN_limit_weak", C_DBL, ""}, {"nsigma", C_DBL, ""},
    {"saturated", C_BOOL, ""},    {"suggested", C_STR, ""},
    {"ra_deg", C_DBL, "deg"},     {"dec_deg", C_DBL, "deg"},
    {"frame", C_STR, ""},
    /* linked species (a joint fit across doublets): every species of the
       fit, the b rule, and T and b_turb of the rule "thermal" */
    {"joint_species", C_STR, ""}, {"b_tie", C_STR, ""},
    {"T_K", C_DBL, "K"},          {"T_err_K", C_DBL, "K"},
    {"b_turb_kms", C_DBL, "km s-1"}, {"b_turb_err_kms", C_DBL, "km s-1"},
    /* partial covering (cover.h): empty without */
    {"cf", C_DBL, ""},            {"cf_err", C_DBL, ""},
    {"cf_flag", C_STR, ""},
};
#define NCOL (sizeof COLS / sizeof COLS[0])

typedef union cell {
  const char *s;
  long long i;
  double d;
} cell;

/* The file of a session target: the recorded name without the "#DOUBLET"
 * the inspector appends (the doublet has its own column). */
static const char *target_file(const char *key, char *buf, size_t n) {
  const char *slash = strrchr(key, '/');
  const char *hash = strrchr(slash ? slash : key, '#');
  if (!hash) return key;
  snprintf(buf, n, "%.*s", (int)(hash - key), key);
  return buf;
}

const char *dt_export_stem(const char *file, char *buf, size_t n) {
  const char *slash = strrchr(file, '/');
  snprintf(buf, n, "%s", slash ? slash + 1 : file);
  char *br = strchr(buf, '[');
  if (br) *br = '\0';
  char *dot = strrchr(buf, '.');
  if (dot && dot != buf && (!strcmp(dot, ".gz") || !strcmp(dot, ".fz"))) {
    *dot = '\0';
    dot = strrchr(buf, '.');
  }
  if (dot && dot != buf) *dot = '\0';
  return buf;
}

/* The rows of one spectrum: for each of its absorber systems (systems.h;
 * the target first) one row per component belonging to it, or a single row
 * (component 0) when it has none -- or when that system's verdict is "not
 * detected": such a system is a limit, and its first-pass components are no
 * result. */
#define MAX_ROWS ((DT_MAX_COMP + DT_MAX_SYSTEMS) * (1 + DT_JUDGE_MAX_LINKED))
typedef struct spec_rows {
  dt_system_set set;
  size_t n;                          /* rows */
  size_t sys[MAX_ROWS], comp[MAX_ROWS]; /* system; component (1-based, 0 none) */
  size_t species[MAX_ROWS];          /* 0: the main doublet; s: linked species s-1 */
  size_t ncomp[DT_MAX_SYSTEMS];      /* component rows of each system */
} spec_rows;

static dt_verdict system_verdict(const dt_judgement *s, const dt_system_set *set, size_t k) {
  return dt_judgement_system_verdict(s, k ? set->sys[k].name : "");
}

static void spectrum_rows(const dt_journal_entry *en, spec_rows *r) {
  const dt_judgement *s = &en->state;
  dt_systems_of_judgement(s, &r->set);
  if (r->set.n == 0) { /* cannot happen for a valid state: all in the target */
    snprintf(r->set.sys[0].name, sizeof r->set.sys[0].name, "%s", DT_SYSTEM_TARGET);
    r->set.sys[0].vlo = s->vlo;
    r->set.sys[0].vhi = s->vhi;
    r->set.n = 1;
  }
  r->n = 0;
  for (size_t k = 0; k < r->set.n; k++) {
    r->ncomp[k] = 0;
    int limit = system_verdict(s, &r->set, k) == DT_VERDICT_NOT_DETECTED;
    for (size_t c = 0; !limit && c < s->ncomp && c < DT_MAX_COMP; c++)
      if (dt_systems_of(&r->set, s->comp[c].v) == k) {
        /* the component of the main doublet, then of each linked species */
        for (size_t sp = 0; sp <= (s->has_joint ? s->nlinked : 0); sp++) {
          r->sys[r->n] = k;
          r->species[r->n] = sp;
          r->comp[r->n++] = c + 1;
        }
        r->ncomp[k]++;
      }
    if (r->ncomp[k] == 0) {
      r->sys[r->n] = k;
      r->species[r->n] = 0;
      r->comp[r->n++] = 0;
    }
  }
}

/* cf, cf_err, cf_flag of component k (1-based; 0 none) of a covered
 * state; the error and flag only while the components are the fit's
 * (fitted).  Empty (NaN, "") without covering. */
static void cover_cells(const dt_judgement *s, size_t k, int fitted, cell *c,
                        const dt_atomic *atomic) {
  c[0].d = c[1].d = NAN;
  c[2].s = "";
  if (!s->covering || k == 0 || k > s->ncomp) return;
  double cf = s->cf[k - 1] > 0.0 ? s->cf[k - 1] : 1.0;
  c[0].d = cf;
  if (!fitted || !s->fit.covering) return;
  c[1].d = s->fit.cf_err[k - 1];
  const dt_doublet *d = atomic ? dt_atomic_find(atomic, s->doublet) : NULL;
  c[2].s = dt_cover_flag_name(dt_cover_flag(d, &s->comp[k - 1], s->fit.err[k - 1].logN, cf, c[1].d,
                                                 dt_cover_lsf_fwhm(s->resolution, s->fwhm_kms)));
}

/* The cells of one row: spectrum en, component k (0 = none). */
/* The text a row's cells point to (one per writer, reused row after row). */
typedef struct row_text {
  const dt_atomic *atomic;      /* the built-in table: the doublet's lines
                                   for the covering flag (NULL: not thin-tested) */
  char flags[64], frozen[4], status[32], species[80];
  char file[DT_TARGET_PATH_MAX], stem[DT_TARGET_PATH_MAX];
} row_text;

/* The cells of the linked species' columns (joint_species .. b_turb_err)
 * of component k (0: none) of state s. */
static void fill_joint(const dt_judgement *s, size_t k, row_text *rt, cell *c) {
  size_t n = 0;
  rt->species[0] = '\0';
  for (size_t i = 0; s->nlinked && i <= s->nlinked && i <= DT_JUDGE_MAX_LINKED; i++)
    n += (size_t)snprintf(rt->species + n, n < sizeof rt->species ? sizeof rt->species - n : 0, "%s%s",
                          i ? ";" : "", i ? s->linked[i - 1] : s->doublet);
  int th = s->has_joint && s->btie == DT_BTIE_THERMAL && k > 0;
  c[0].s = rt->species;
  c[1].s = s->nlinked ? dt_btie_name(s->btie) : "";
  c[2].d = th ? s->joint.T[k - 1] : NAN;
  c[3].d = th ? s->joint.T_err[k - 1] : NAN;
  c[4].d = th ? s->joint.bturb[k - 1] : NAN;
  c[5].d = th ? s->joint.bturb_err[k - 1] : NAN;
}

/* The cells of row q of spectrum en.  The recorded measurements (taken
 * around all its components) and the suggested verdict are the spectrum's
 * and go to the target's rows only. */
static void fill_row(const dt_journal_entry *en, const spec_rows *r, size_t q, cell *c, row_text *rt) {
  size_t k = r->comp[q], sk = r->sys[q], sp = r->species[q];
  char *flags = rt->flags, *frozen = rt->frozen, *status = rt->status;
  const dt_judgement *s = &en->state;
  const dt_meas_summary *m = &en->meas;
  dt_meas_summary none;
  if (!en->has_meas || sk > 0 || sp > 0) { /* measurements are the main doublet's */
    dt_meas_summary_clear(&none);
    m = &none;
  }
  flags[0] = '\0';
  if (en->flags & DT_JFLAG_FILE_CHANGED) strcat(flags, "file-changed");
  if (en->flags & DT_JFLAG_REPLAY_MISMATCH) {
    if (flags[0]) strcat(flags, ";");
    strcat(flags, "replay-mismatch");
  }
  /* errors belong to the components only while they are the fit's values */
  const dt_component *comp = k ? &s->comp[k - 1] : NULL, *err = NULL;
  if (comp && s->has_fit && s->fit.status == DT_OK && s->fit.ncomp == s->ncomp &&
      !memcmp(&s->fit.comp[k - 1], comp, sizeof *comp))
    err = &s->fit.err[k - 1];
  frozen[0] = '\0';
  if (comp) dt_freeze_str(s->frozen[k - 1], frozen);
  if (!s->has_fit) status[0] = '\0';
  else snprintf(status, sizeof rt->status, "%s", s->fit.status == DT_OK ? "ok" : dt_status_str(s->fit.status));
  size_t i = 0;
  const char *file = target_file(en->target.path, rt->file, sizeof rt->file);
  c[i++].s = file;
  c[i++].s = en->target.name && en->target.name[0] ? en->target.name
                                                   : dt_export_stem(file, rt->stem, sizeof rt->stem);
  c[i++].i = en->target.hdu;
  c[i++].i = en->target.row;
  c[i++].s = r->set.sys[sk].name;
  c[i++].s = dt_verdict_name(system_verdict(s, &r->set, sk));
  c[i++].s = s->note;
  c[i++].s = en->judged_by;
  c[i++].s = en->judged_at;
  c[i++].s = en->user;
  c[i++].s = en->time;
  c[i++].i = en->nchanges;
  c[i++].s = flags;
  c[i++].s = en->target.sha256;
  const dt_linked_species *js = sp ? &s->joint.sp[sp - 1] : NULL;
  c[i++].s = js ? js->doublet : s->doublet;
  c[i++].d = s->vsys;
  c[i++].i = (long long)r->ncomp[sk];
  c[i++].i = (long long)k;
  c[i++].d = js && comp ? js->logN[k - 1] : comp ? comp->logN : NAN;
  c[i++].d = js && comp ? js->logN_err[k - 1] : err ? err->logN : NAN;
  c[i++].d = js && comp ? js->b[k - 1] : comp ? comp->b : NAN;
  c[i++].d = js && comp ? js->b_err[k - 1] : err ? err->b : NAN;
  c[i++].d = comp ? comp->v : NAN;
  c[i++].d = err ? err->v : NAN;
  c[i++].s = frozen;
  c[i++].s = status;
  c[i++].d = s->has_fit ? s->fit.chi2 : NAN;
  c[i++].i = s->has_fit ? s->fit.dof : -1;
  c[i++].d = s->has_fit ? s->fit.chi2_red : NAN;
  for (int l = 0; l < 2; l++) {
    const dt_meas_line *ml = &m->line[l];
    c[i++].d = 1e3 * ml->w;
    c[i++].d = 1e3 * ml->w_err;
    c[i++].d = 1e3 * ml->w_lim;
    c[i++].d = ml->logN_aod;
    c[i++].d = ml->logN_aod_err;
    c[i++].d = ml->logN_lim;
  }
  c[i++].d = m->nsigma;
  c[i++].i = m->saturated;
  c[i++].s = m->suggested == DT_VERDICT_NONE ? "" : dt_verdict_name(m->suggested);
  /* position and frame of the session's target record ("RA,DEC" text) */
  double ra = NAN, dec = NAN;
  char sky[sizeof en->target.sky];
  snprintf(sky, sizeof sky, "%s", en->target.sky);
  char *comma = strchr(sky, ',');
  if (comma) {
    *comma = '\0';
    if (dt_num_parse(sky, &ra) != DT_OK || dt_num_parse(comma + 1, &dec) != DT_OK) ra = dec = NAN;
  }
  if (!(isfinite(ra) && isfinite(dec))) ra = dec = NAN;
  c[i++].d = ra;
  c[i++].d = dec;
  c[i++].s = en->target.frame;
  fill_joint(s, k, rt, c + i);
  i += 6;
  if (sp == 0) { /* covering is the main doublet's */
    cover_cells(s, k, err != NULL, c + i, rt->atomic);
  } else {
    c[i].d = c[i + 1].d = NAN;
    c[i + 2].s = "";
  }
}

/* ---- CSV ---- */

/* The 21-cm columns joined by dt_export_csv_hi, after the others. */
static const char *const HI_COLS[] = {"logN_HI", "logN_HI_err", "v_HI_kms", "sigma_HI_kms", "T_peak_K",
                                      "HI_status"};

/* The cube at an entry's recorded position, in its recorded frame,
 * velocities relative to its vsys.  *status: a dt_hi_status name, or
 * "no-position" / "failed". */
static void hi_of_entry(const dt_hicube *cube, const dt_journal_entry *en, dt_hi_sample *hs,
                        const char **status) {
  memset(hs, 0, sizeof *hs);
  double ra = NAN, dec = NAN;
  char sky[sizeof en->target.sky];
  snprintf(sky, sizeof sky, "%s", en->target.sky);
  char *comma = strchr(sky, ',');
  if (comma) {
    *comma = '\0';
    if (dt_num_parse(sky, &ra) != DT_OK || dt_num_parse(comma + 1, &dec) != DT_OK) ra = NAN;
  }
  if (!(isfinite(ra) && isfinite(dec))) {
    *status = "no-position";
    return;
  }
  dt_hi_opts ho;
  memset(&ho, 0, sizeof ho);
  if (!en->target.frame[0] || dt_frame_parse(en->target.frame, &ho.frame)) ho.frame = DT_FRAME_BARYCENT;
  ho.vsys = en->state.vsys;
  dt_err e;
  if (dt_hicube_sample(cube, ra, dec, &ho, hs, &e) != DT_OK) {
    *status = "failed";
    return;
  }
  *status = dt_hi_status_name(hs->status);
}

static int write_csv(FILE *f, const dt_journal *j, const dt_hicube *cube);

int dt_export_csv(FILE *f, const dt_journal *j) { return write_csv(f, j, NULL); }

int dt_export_csv_hi(FILE *f, const dt_journal *j, const dt_hicube *cube) {
  return write_csv(f, j, cube);
}

static int write_csv_rows(FILE *f, const dt_journal *j, const dt_hicube *cube,
                          const dt_atomic *atomic);
static int write_csv(FILE *f, const dt_journal *j, const dt_hicube *cube) {
  dt_atomic *at = NULL;
  dt_atomic_load_builtin(&at, NULL);
  int st = write_csv_rows(f, j, cube, at);
  dt_atomic_free(at);
  return st;
}

static int write_csv_rows(FILE *f, const dt_journal *j, const dt_hicube *cube,
                          const dt_atomic *atomic) {
  dt_csv w;
  dt_csv_init(&w, f);
  for (size_t c = 0; c < NCOL; c++) dt_csv_text(&w, COLS[c].name);
  for (size_t c = 0; cube && c < sizeof HI_COLS / sizeof HI_COLS[0]; c++) dt_csv_text(&w, HI_COLS[c]);
  dt_csv_end(&w);
  cell cells[NCOL];
  row_text rt_buf, *rt = &rt_buf; /* about 8 kB, on the stack */
  rt->atomic = atomic;
  spec_rows rows;
  for (size_t i = 0; i < dt_journal_count(j); i++) {
    const dt_journal_entry *en = dt_journal_entry_at(j, i);
    spectrum_rows(en, &rows);
    dt_hi_sample hs;
    const char *hstat = "";
    memset(&hs, 0, sizeof hs);
    if (cube) hi_of_entry(cube, en, &hs, &hstat);
    for (size_t q = 0; q < rows.n; q++) {
      fill_row(en, &rows, q, cells, rt);
      for (size_t c = 0; c < NCOL; c++) {
        switch (COLS[c].type) {
        case C_STR: dt_csv_text(&w, cells[c].s); break;
        case C_INT:
          /* hdu 0 (not FITS) and dof -1 (no fit): unknown, empty */
          if ((cells[c].i <= 0 && !strcmp(COLS[c].name, "hdu")) ||
              (cells[c].i < 0 && !strcmp(COLS[c].name, "dof")))
            dt_csv_empty(&w);
          else
            dt_csv_long(&w, (long)cells[c].i);
          break;
        case C_BOOL: dt_csv_text(&w, cells[c].i ? "1" : "0"); break;
        case C_DBL: dt_csv_num(&w, cells[c].d); break;
        }
      }
      if (cube) {
        int ok = hs.status == DT_HI_OK && !strcmp(hstat, "ok");
        dt_csv_fixed(&w, ok ? hs.logN : NAN, 4);
        dt_csv_fixed(&w, ok ? hs.logN_err : NAN, 4);
        dt_csv_fixed(&w, ok ? hs.v : NAN, 2);
        dt_csv_fixed(&w, ok ? hs.sigma : NAN, 2);
        dt_csv_fixed(&w, ok || hs.status == DT_HI_NO_EMISSION ? hs.tpeak : NAN, 3);
        dt_csv_text(&w, hstat);
      }
      dt_csv_end(&w);
    }
    dt_hi_sample_free(&hs);
  }
  return dt_csv_error(&w) ? DT_EIO : DT_OK;
}

/* ---- FITS ---- */

static int fits_fail(int status, dt_err *e) {
  char msg[FLEN_ERRMSG] = "";
  fits_get_errstatus(status, msg);
  return dt_err_set(e, DT_EIO, NULL, "cannot write the FITS table: %s", msg);
}

static int write_fits(const char *path, const dt_journal *j, const char *session,
                      const char *session_sha, const char *version, const dt_hicube *cube, dt_err *e);

int dt_export_fits(const char *path, const dt_journal *j, const char *session,
                   const char *session_sha, const char *version, dt_err *e) {
  return write_fits(path, j, session, session_sha, version, NULL, e);
}

int dt_export_fits_hi(const char *path, const dt_journal *j, const char *session,
                      const char *session_sha, const char *version, const dt_hicube *cube, dt_err *e) {
  return write_fits(path, j, session, session_sha, version, cube, e);
}

#define NHI (sizeof HI_COLS / sizeof HI_COLS[0])

static int write_fits_rows(const char *path, const dt_journal *j, const char *session,
                           const char *session_sha, const char *version, const dt_hicube *cube,
                           const dt_atomic *atomic, dt_err *e);
static int write_fits(const char *path, const dt_journal *j, const char *session,
                      const char *session_sha, const char *version, const dt_hicube *cube, dt_err *e) {
  dt_atomic *at = NULL;
  dt_atomic_load_builtin(&at, NULL);
  int st = write_fits_rows(path, j, session, session_sha, version, cube, at, e);
  dt_atomic_free(at);
  return st;
}

static int write_fits_rows(const char *path, const dt_journal *j, const char *session,
                           const char *session_sha, const char *version, const dt_hicube *cube,
                           const dt_atomic *atomic, dt_err *e) {
  /* string widths: the longest value of each string column */
  long width[NCOL];
  for (size_t c = 0; c < NCOL; c++) width[c] = 1;
  cell cells[NCOL];
  row_text rt_buf, *rt = &rt_buf; /* about 8 kB, on the stack */
  rt->atomic = atomic;
  spec_rows rows;
  for (size_t i = 0; i < dt_journal_count(j); i++) {
    const dt_journal_entry *en = dt_journal_entry_at(j, i);
    spectrum_rows(en, &rows);
    for (size_t q = 0; q < rows.n; q++) {
      fill_row(en, &rows, q, cells, rt);
      for (size_t c = 0; c < NCOL; c++)
        if (COLS[c].type == C_STR && (long)strlen(cells[c].s) > width[c])
          width[c] = (long)strlen(cells[c].s);
    }
  }
  char *ttype[NCOL + NHI], *tform[NCOL + NHI], *tunit[NCOL + NHI];
  char forms[NCOL][24];
  static const char *const hi_unit[NHI] = {"", "", "km s-1", "km s-1", "K", ""};
  for (size_t c = 0; c < NHI; c++) {
    ttype[NCOL + c] = (char *)HI_COLS[c];
    tunit[NCOL + c] = (char *)hi_unit[c];
    tform[NCOL + c] = c + 1 < NHI ? "D" : "12A";
  }
  int ncols = (int)NCOL + (cube ? (int)NHI : 0);
  for (size_t c = 0; c < NCOL; c++) {
    ttype[c] = (char *)COLS[c].name;
    tunit[c] = (char *)COLS[c].unit;
    switch (COLS[c].type) {
    case C_STR: snprintf(forms[c], sizeof forms[c], "%ldA", width[c]); break;
    case C_INT: snprintf(forms[c], sizeof forms[c], "K"); break;
    case C_DBL: snprintf(forms[c], sizeof forms[c], "D"); break;
    case C_BOOL: snprintf(forms[c], sizeof forms[c], "L"); break;
    }
    tform[c] = forms[c];
  }
  fitsfile *f = NULL;
  int st = 0;
  /* The temporary file we made (mkstemp) is replaced by cfitsio's own,
   * under its literal name: fits_create_diskfile, because fits_create_file
   * would read brackets, parentheses or a leading '!' in a user's file
   * name as cfitsio's extended syntax and write to another file. */
  unlink(path);
  fits_create_diskfile(&f, path, &st);
  if (st) return fits_fail(st, e);
  fits_create_tbl(f, BINARY_TBL, 0, ncols, ttype, tform, tunit, "DOUBLETTY_SESSION", &st);
  char creator[64];
  snprintf(creator, sizeof creator, "doubletty %s", version);
  fits_update_key_str(f, "CREATOR", creator, "program that wrote this file", &st);
  fits_update_key_str(f, "DTVERSN", (char *)version, "doubletty version", &st);
  const char *base = strrchr(session, '/');
  base = base ? base + 1 : session;
  char sbase[69];
  snprintf(sbase, sizeof sbase, "%s", base);
  /* header strings are ASCII text (FITS 4.0 section 4.2.1) */
  for (char *p = sbase; *p; p++)
    if ((unsigned char)*p < 0x20 || (unsigned char)*p > 0x7e) *p = '?';
  fits_update_key_str(f, "SESSFILE", sbase, "session file (name)", &st);
  fits_update_key_str(f, "SESSSHA", (char *)session_sha, "SHA-256 of the session file", &st);
  long long nspec = (long long)dt_journal_count(j);
  fits_update_key_lng(f, "NSPEC", nspec, "spectra in the session", &st);
  fits_write_date(f, &st);
  for (size_t c = 0; c < NCOL; c++) {
    char key[16];
    snprintf(key, sizeof key, "TCOMM%zu", c + 1);
    if (is_log(COLS[c].name) && !strstr(COLS[c].name, "err"))
      fits_update_key_str(f, key, "log10 of a column density in cm-2", NULL, &st);
    else if (is_log(COLS[c].name))
      fits_update_key_str(f, key, "1-sigma error of a log10 column density", NULL, &st);
    int dof = !strcmp(COLS[c].name, "dof"), hdu = !strcmp(COLS[c].name, "hdu");
    if (dof || hdu) { /* dof -1: no fit; hdu 0: not a FITS file */
      snprintf(key, sizeof key, "TNULL%zu", c + 1);
      fits_update_key_lng(f, key, dof ? -1 : 0, dof ? "no fit" : "not a FITS file", &st);
    }
  }
  if (st) {
    fits_close_file(f, &st);
    return fits_fail(st, e);
  }
  /* row by row: cfitsio buffers the table, so this is not slow */
  long long row = 0;
  for (size_t i = 0; i < dt_journal_count(j) && !st; i++) {
    const dt_journal_entry *en = dt_journal_entry_at(j, i);
    spectrum_rows(en, &rows);
    dt_hi_sample hs;
    const char *hstat = "";
    memset(&hs, 0, sizeof hs);
    if (cube) hi_of_entry(cube, en, &hs, &hstat);
    int hok = cube && hs.status == DT_HI_OK && !strcmp(hstat, "ok");
    double hv[NHI - 1] = {hok ? hs.logN : NAN, hok ? hs.logN_err : NAN, hok ? hs.v : NAN,
                          hok ? hs.sigma : NAN,
                          hok || hs.status == DT_HI_NO_EMISSION ? hs.tpeak : NAN};
    for (size_t q = 0; q < rows.n && !st; q++) {
      fill_row(en, &rows, q, cells, rt);
      row++;
      for (size_t c = 0; cube && c < NHI && !st; c++) {
        int col = (int)(NCOL + c) + 1;
        if (c + 1 < NHI) {
          double v = hv[c];
          fits_write_col(f, TDOUBLE, col, row, 1, 1, &v, &st);
        } else {
          char *sv = (char *)(hstat[0] ? hstat : " ");
          fits_write_col(f, TSTRING, col, row, 1, 1, &sv, &st);
        }
      }
      for (size_t c = 0; c < NCOL && !st; c++) {
        int col = (int)c + 1;
        switch (COLS[c].type) {
        case C_STR: {
          char *s = (char *)cells[c].s;
          if (!*s) s = " "; /* cfitsio writes an empty string as blanks anyway */
          fits_write_col(f, TSTRING, col, row, 1, 1, &s, &st);
          break;
        }
        case C_INT: {
          LONGLONG v = cells[c].i;
          fits_write_col(f, TLONGLONG, col, row, 1, 1, &v, &st);
          break;
        }
        case C_DBL: {
          double v = cells[c].d;
          fits_write_col(f, TDOUBLE, col, row, 1, 1, &v, &st);
          break;
        }
        case C_BOOL: {
          char v = cells[c].i ? 1 : 0;
          fits_write_col(f, TLOGICAL, col, row, 1, 1, &v, &st);
          break;
        }
        }
      }
    }
    dt_hi_sample_free(&hs);
  }
  if (st) {
    int st2 = 0;
    fits_close_file(f, &st2);
    return fits_fail(st, e);
  }
  fits_close_file(f, &st);
  if (st) return fits_fail(st, e);
  return DT_OK;
}

