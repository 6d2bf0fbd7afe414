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

/* Linked species (session_joint.c).  Refit state *j jointly (j->nlinked
 * > 0, after the main doublet's own fit in ss->out): a DT_ACT_JOINT_FIT is
 * applied to it; 0 when there is a fit to keep. */
int dt_session_joint_into(dt_session *ss, dt_judgement *j);
/* Evaluate every linked species of j into ss->lsp (no fit). */
void dt_session_linked_eval(dt_session *ss, const dt_judgement *j);
/* Free the linked species' analyses (a new spectrum, the end). */
void dt_session_linked_free(dt_session *ss);
/* Does a joint refit of the recorded joint state j reproduce it?  1 yes;
 * 0 with why naming the first difference. */
int dt_session_joint_verify(dt_session *ss, const dt_judgement *j, char *why, size_t n);

#endif
