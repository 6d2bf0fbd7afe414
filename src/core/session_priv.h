/* Shared by session.c and session_load.c; not part of the public API. */
#ifndef DT_SESSION_PRIV_H
#define DT_SESSION_PRIV_H
#include "doubletty/autofit.h"
#include "doubletty/session.h"

/* Analyse state j into ss->out (fit: refit its components; otherwise
 * evaluate them as they are). */
void dt_session_analyse_state(dt_session *ss, const dt_judgement *j, int fit);
/* Take the first pass' suggestion. */
void dt_session_suggest(dt_session *ss, const dt_autofit_out *af);
/* Keep the first pass's log N intervals (made without a time limit) in
 * ss->out when it holds the same fit. */
void dt_session_keep_intervals(dt_session *ss, const dt_analysis_out *first);
/* Free the spectrum and its analysis. */
void dt_session_unload(dt_session *ss);
/* The one place a target of the journal is built (key, row, digest, name). */
dt_target dt_session_journal_target(const dt_session *ss);
/* The first pass for base, recorded as action a (NULL: an autofit record). */
int dt_session_autofit_to(dt_session *ss, const dt_judgement *base, const dt_action *a, const char *why);

#endif
