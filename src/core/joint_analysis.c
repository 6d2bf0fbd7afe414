/* Joint analysis of a spectrum over several doublets (joint.h): stub. */
#include "doubletty/joint.h"

#include <stdlib.h>
#include <string.h>

void dt_joint_opts_init(dt_joint_opts *o) {
  memset(o, 0, sizeof *o);
  dt_analysis_opts_init(&o->an);
  o->detect_sigma = 3.0;
}

struct dt_joint_analysis {
  const dt_spectrum *s;
  const dt_atomic *t;
  dt_joint_opts opts;
};

dt_joint_analysis *dt_joint_analysis_alloc(const dt_spectrum *s, const dt_atomic *t) {
  if (!s || !t) return NULL;
  dt_joint_analysis *ja = calloc(1, sizeof *ja);
  if (!ja) return NULL;
  ja->s = s;
  ja->t = t;
  dt_joint_opts_init(&ja->opts);
  return ja;
}

void dt_joint_analysis_free(dt_joint_analysis *ja) { free(ja); }

void dt_joint_analysis_set_opts(dt_joint_analysis *ja, const dt_joint_opts *o) {
  if (o) ja->opts = *o;
  else dt_joint_opts_init(&ja->opts);
}

int dt_joint_analysis_run(dt_joint_analysis *ja, const dt_judgement *j,
                          const char *const *linked, size_t nlinked, dt_joint_btie btie,
                          dt_joint_out *out, dt_err *e) {
  (void)ja; (void)j; (void)linked; (void)nlinked; (void)btie;
  memset(out, 0, sizeof *out);
  return dt_err_set(e, DT_EINVAL, NULL, "joint fits are not available yet");
}

int dt_joint_autofit_run(dt_joint_analysis *ja, dt_judgement *j, const char *const *linked,
                         size_t nlinked, dt_joint_btie btie, const dt_autofit_opts *opts,
                         int bic_search, dt_joint_out *out, size_t *strongest, dt_err *e) {
  (void)ja; (void)j; (void)linked; (void)nlinked; (void)btie; (void)opts; (void)bic_search;
  (void)strongest;
  memset(out, 0, sizeof *out);
  return dt_err_set(e, DT_EINVAL, NULL, "joint fits are not available yet");
}
