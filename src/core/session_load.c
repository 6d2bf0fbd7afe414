/* Opening a target of the vetting session (session.h): read the spectrum,
 * resume its recorded state (checking that a refit reproduces the recorded
 * fit), or run the automatic first pass on a spectrum seen for the first
 * time.  The first pass is shown at once and becomes part of the record
 * with the first change or verdict; merely looking writes nothing. */
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "doubletty/autofit.h"
#include "session_priv.h"

void dt_session_suggest(dt_session *ss, const dt_autofit_out *af) {
  ss->has_suggest = 1;
  ss->suggested = af->suggested;
  snprintf(ss->reason, sizeof ss->reason, "%s", af->reason);
  /* per system, from the analysis holding the first pass's final state */
  dt_judgement fin = ss->j;
  fin.ncomp = af->an.fit.ncomp;
  memcpy(fin.comp, af->an.fit.comp, fin.ncomp * sizeof fin.comp[0]);
  int st = af->an.fit_status == DT_ENOCONV ? DT_ENOCONV : DT_OK;
  ss->has_sysres = 0;
  if (ss->loaded && ss->systems.n > 0) {
    dt_systems_results(ss->an, &ss->systems, &fin, af, st, ss->sysres);
    ss->has_sysres = 1;
    /* the target's suggestion is the first pass's for the target system */
    ss->suggested = ss->sysres[0].suggested;
    snprintf(ss->reason, sizeof ss->reason, "%s", ss->sysres[0].reason);
  }
}

/* The systems of a state: recorded with it, else built from the run's and
 * the list's settings for its rest frame, within its window. */
static void systems_of_state(dt_session *ss, const dt_session_target *t, int recorded) {
  dt_system_set *set = &ss->systems;
  memset(set, 0, sizeof *set);
  ss->selsys = 0;
  dt_judgement *j = &ss->j;
  if (j->nsys > 0) {
    dt_systems_of_judgement(j, set);
    return;
  }
  dt_err e;
  const dt_doublet *d = dt_atomic_find(ss->atomic, j->doublet);
  double fw = j->resolution > 0 ? DT_C_KMS / j->resolution : j->fwhm_kms;
  if (dt_systems_setup(&t->systems, j->vsys, ss->spec, d, fw, recorded || t->has_window, &j->vlo,
                       &j->vhi, set, &e) != DT_OK) {
    dt_system_opts plain;
    dt_system_opts_init(&plain);
    dt_systems_setup(&plain, j->vsys, ss->spec, d, fw, 1, &j->vlo, &j->vhi, set, &e);
    dt_session_say(ss, DT_TONE_WARN, "systems: %s", e.what);
  }
  if (recorded) return; /* a recorded state keeps its own form */
  dt_systems_to_judgement(set, j);
}

void dt_session_unload(dt_session *ss) {
  dt_session_linked_free(ss);
  dt_analysis_free(ss->an);
  dt_spectrum_free(ss->spec);
  ss->an = NULL;
  ss->spec = NULL;
  ss->loaded = 0;
}

dt_verdict dt_session_recorded_verdict(const dt_session *ss, const char *key, long row) {
  const dt_journal_entry *en = ss->jn ? dt_journal_lookup(ss->jn, key, 0, row) : NULL;
  return en ? en->state.verdict : DT_VERDICT_NONE;
}

static void reset(dt_session *ss, const dt_session_target *t) {
  dt_session_unload(ss);
  snprintf(ss->key, sizeof ss->key, "%s", t->key);
  snprintf(ss->name, sizeof ss->name, "%s", t->name ? t->name : "");
  ss->row = t->row;
  ss->defer_intervals = t->defer_intervals;
  ss->nundo = ss->nredo = 0;
  ss->sel = 0;
  ss->pending = 0;
  ss->an_ok = 0;
  ss->an_msg[0] = '\0';
  ss->has_suggest = 0;
  ss->reason[0] = '\0';
  ss->file_changed = 0;
  ss->sha[0] = '\0';
  ss->load_msg[0] = '\0';
  ss->msg[0] = '\0';
  ss->tone = DT_TONE_TEXT;
}

/* The spectrum of t and its analysis into *spec, *an; else the reason in
 * msg[0..size). */
static int read_into(const dt_atomic *atomic, const dt_session_target *t, dt_spectrum **spec,
                     dt_analysis **an, char *msg, size_t size) {
  dt_err e;
  dt_err_clear(&e);
  dt_read_opts ro = t->read;
  ro.row = t->row;
  ro.air = t->air;
  int rc = dt_spectrum_read(t->path, &ro, spec, &e);
  if (rc == DT_OK) {
    *an = dt_analysis_alloc(*spec, atomic);
    if (*an && (t->cog || t->defer_intervals || t->hyperfine || t->lsf_constant)) {
      dt_analysis_opts ao;
      dt_analysis_opts_init(&ao);
      ao.cog = t->cog;
      ao.defer_intervals = t->defer_intervals;
      ao.hyperfine = t->hyperfine;
      ao.lsf_constant = t->lsf_constant;
      dt_analysis_set_opts(*an, &ao);
    }
    if (!*an) {
      dt_spectrum_free(*spec);
      *spec = NULL;
      dt_err_set(&e, DT_ENOMEM, NULL, "out of memory");
      rc = DT_ENOMEM;
    }
  }
  if (rc != DT_OK)
    snprintf(msg, size, "%s%s%s%s%s", t->path, e.where[0] ? ": " : "", e.where, ": ",
             e.what[0] ? e.what : dt_status_str(rc));
  return rc;
}

static int read_spectrum(dt_session *ss, const dt_session_target *t) {
  dt_session_ahead *ah = t->ahead;
  if (!ah) return read_into(ss->atomic, t, &ss->spec, &ss->an, ss->load_msg, sizeof ss->load_msg);
  ss->spec = ah->spec;
  ss->an = ah->an;
  ah->spec = NULL;
  ah->an = NULL;
  snprintf(ss->load_msg, sizeof ss->load_msg, "%s", ah->load_msg);
  return ah->rc;
}

/* The first-look judgement of t on a freshly read spectrum. */
/* The state a first look starts from (first_state): the target's initial
 * state with the file's resolution where none was given; first_look adds
 * the systems of the run and the list with the window widened to cover them,
 * as systems_of_state does for a session (which also says why, and falls
 * back to the plain systems, when that fails). */
static dt_judgement first_state(const dt_session_target *t, const dt_spectrum *spec) {
  dt_judgement j = t->initial;
  if (!(j.resolution > 0) && !(j.fwhm_kms > 0) && spec->resolution > 0) {
    j.resolution = spec->resolution;
    j.fwhm_kms = 0;
  }
  return j;
}

static dt_judgement first_look(const dt_atomic *atomic, const dt_session_target *t,
                               const dt_spectrum *spec) {
  dt_judgement j = first_state(t, spec);
  if (j.nsys > 0) return j;
  dt_system_set set;
  dt_err e;
  dt_judgement w = j;
  const dt_doublet *d = dt_atomic_find(atomic, j.doublet);
  double fw = j.resolution > 0 ? DT_C_KMS / j.resolution : j.fwhm_kms;
  if (dt_systems_setup(&t->systems, j.vsys, spec, d, fw, t->has_window, &w.vlo, &w.vhi, &set, &e) !=
      DT_OK)
    return j;
  j = w;
  dt_systems_to_judgement(&set, &j);
  return j;
}

/* The automatic first pass of a first look; with partial covering asked
 * for, the search runs without it and its components are fitted again
 * with a covering factor each (dt_analysis_cover_refit). */
static int first_pass(dt_analysis *an, dt_judgement *j, dt_autofit_out *af, dt_err *e) {
  int cover = j->covering;
  j->covering = 0;
  int rc = dt_autofit_run(an, j, NULL, af, e);
  if (cover && (rc == DT_OK || rc == DT_ENOCONV)) {
    int cs = dt_analysis_cover_refit(an, j, &af->an, e);
    if (cs != DT_OK) rc = cs;
  }
  j->covering = cover;
  return rc;
}

dt_session_ahead *dt_session_ahead_make(const dt_atomic *atomic, const dt_session_target *t,
                                        int first) {
  dt_session_ahead *a = calloc(1, sizeof *a);
  if (!a) return NULL;
  a->rc = read_into(atomic, t, &a->spec, &a->an, a->load_msg, sizeof a->load_msg);
  if (a->rc != DT_OK) return a;
  dt_err e;
  if (dt_digest_file(t->path, a->sha, &e) != DT_OK) a->sha[0] = '\0';
  if (first) {
    a->first = first_look(atomic, t, a->spec);
    dt_err_clear(&e);
    a->first_rc = first_pass(a->an, &a->first, &a->af, &e);
    a->has_first = 1;
  }
  return a;
}

void dt_session_ahead_free(dt_session_ahead *a) {
  if (!a) return;
  dt_analysis_free(a->an);
  dt_spectrum_free(a->spec);
  free(a);
}

/* The recorded state, with a refit checked against the recorded fit. */
static void resume(dt_session *ss, const dt_journal_entry *en, const dt_session_target *t) {
  ss->j = en->state;
  systems_of_state(ss, t, 1);
  ss->file_changed = ss->sha[0] && dt_journal_file_changed(en, ss->sha);
  if (en->has_meas && en->meas.suggested != DT_VERDICT_NONE) {
    ss->has_suggest = 1;
    ss->suggested = en->meas.suggested;
  }
  if (!ss->has_suggest || ss->systems.n > 1) {
    int keep = ss->has_suggest;
    dt_verdict ks = ss->suggested;
    dt_judgement scratch = ss->j;
    scratch.covering = 0; /* the first pass searches without partial covering */
    dt_autofit_out af;
    if (dt_autofit_run(ss->an, &scratch, NULL, &af, NULL) == DT_OK || af.suggested != DT_VERDICT_NONE)
      dt_session_suggest(ss, &af);
    if (keep) ss->suggested = ks; /* the recorded suggestion for the target stands */
  }
  char why[160] = "";
  if (ss->j.has_joint && ss->j.fit.status == DT_OK) {
    if (!dt_session_joint_verify(ss, &ss->j, why, sizeof why)) {
      dt_journal_set_flag(ss->jn, ss->key, 0, ss->row, DT_JFLAG_REFIT_MISMATCH, 1);
      dt_session_say(ss, DT_TONE_WARN, "a joint refit differs from the recorded fit: %s", why);
    }
  } else if (ss->j.has_fit && ss->j.fit.status == DT_OK && ss->j.ncomp > 0) {
    dt_session_analyse_state(ss, &ss->j, 1);
    if (ss->an_ok && !dt_fit_check_refit(&ss->j.fit, &ss->out.fit, DT_REFIT_TOL_SIGMA, why, sizeof why)) {
      dt_journal_set_flag(ss->jn, ss->key, 0, ss->row, DT_JFLAG_REFIT_MISMATCH, 1);
      dt_session_say(ss, DT_TONE_WARN, "a refit differs from the recorded fit: %s", why);
    }
  }
  dt_session_analyse_state(ss, &ss->j, 0);
  if (ss->file_changed)
    dt_session_say(ss, DT_TONE_WARN, "the file has changed since it was judged (SHA-256 differs from the record)");
  else if (!why[0])
    dt_session_say(ss, DT_TONE_TEXT, "resumed from the session: %ld change%s recorded", en->nchanges,
                   en->nchanges == 1 ? "" : "s");
}

void dt_session_target_init(dt_session_target *t, const char *path, const char *key, long row) {
  memset(t, 0, sizeof *t);
  t->path = path;
  t->key = key;
  t->row = row;
  t->name = "";
  dt_judgement_init(&t->initial);
  dt_system_opts_init(&t->systems);
}

int dt_session_load(dt_session *ss, const dt_session_target *t) {
  dt_session_finish_fit(ss);
  reset(ss, t);
  ss->hyperfine = t->hyperfine;
  ss->lsf_constant = t->lsf_constant;
  ss->cog = t->cog;
  const dt_journal_entry *en = ss->jn ? dt_journal_lookup(ss->jn, ss->key, 0, ss->row) : NULL;
  int rc = read_spectrum(ss, t);
  if (rc != DT_OK) {
    ss->j = en ? en->state : t->initial;
    systems_of_state(ss, t, en != NULL);
    dt_session_say(ss, DT_TONE_BAD, "cannot read %s", ss->load_msg);
    return rc;
  }
  ss->loaded = 1;
  dt_err e;
  if (t->ahead) snprintf(ss->sha, sizeof ss->sha, "%s", t->ahead->sha);
  else if (dt_digest_file(t->path, ss->sha, &e) != DT_OK) ss->sha[0] = '\0';
  if (ss->jn && ss->sha[0]) { /* the session knows a spectrum by its file's digest */
    dt_target tg = dt_session_journal_target(ss);
    const dt_journal_entry *by_id = dt_journal_find(ss->jn, &tg);
    if (by_id) en = by_id;
  }
  if (en) {
    resume(ss, en, t);
  } else {
    /* first look: the automatic first pass, recorded at the first change */
    ss->j = first_state(t, ss->spec);
    systems_of_state(ss, t, 0);
    dt_judgement trial = ss->j;
    dt_autofit_out af;
    int arc;
    if (t->ahead && t->ahead->has_first && t->ahead->first.vlo == ss->j.vlo &&
        t->ahead->first.vhi == ss->j.vhi && t->ahead->first.nsys == ss->j.nsys) {
      /* made in advance, the same way (the same window and systems) */
      trial = t->ahead->first;
      af = t->ahead->af;
      arc = t->ahead->first_rc;
    } else {
      dt_err_clear(&e);
      arc = first_pass(ss->an, &trial, &af, &e);
    }
    if (arc == DT_OK || arc == DT_ENOCONV) {
      ss->j = trial;
      dt_session_suggest(ss, &af);
      if (ss->j.nlinked > 0) dt_session_joint_into(ss, &ss->j); /* linked in the list: jointly */
    }
    ss->pending = 1;
    dt_session_analyse_state(ss, &ss->j, 0);
    if (arc == DT_OK) dt_session_keep_intervals(ss, &af.an);
    if (ss->an_ok && dt_analysis_lsf_source(ss->an))
      dt_session_say(ss, DT_TONE_TEXT, "line-spread width per pixel from %s (FWHM %.1f km/s at the line)",
                     dt_analysis_lsf_source(ss->an), dt_analysis_lsf_fwhm(ss->an));
    else if (!ss->j.resolution && !ss->j.fwhm_kms)
      dt_session_say(ss, DT_TONE_WARN, "no resolution known (file header, list R=/fwhm= or --resolution): "
                                       "fitting without instrumental broadening");
  }
  if (!ss->an_ok && ss->an_msg[0]) dt_session_say(ss, DT_TONE_BAD, "%s", ss->an_msg);
  return DT_OK;
}
