/* Joint fits of several doublets of one absorber (joint.h): stub. */
#include "doubletty/joint.h"

#include <math.h>
#include <stdlib.h>
#include <string.h>

const char *dt_joint_btie_name(dt_joint_btie t) {
  switch (t) {
    case DT_JOINT_B_SAME: return "same";
    case DT_JOINT_B_THERMAL: return "thermal";
    case DT_JOINT_B_FREE: return "free";
  }
  return "?";
}

int dt_joint_btie_parse(const char *s, dt_joint_btie *t) {
  if (!s) return DT_EINVAL;
  if (strcmp(s, "same") == 0) *t = DT_JOINT_B_SAME;
  else if (strcmp(s, "thermal") == 0) *t = DT_JOINT_B_THERMAL;
  else if (strcmp(s, "free") == 0) *t = DT_JOINT_B_FREE;
  else return DT_EINVAL;
  return DT_OK;
}

double dt_joint_b_thermal(double T, double b_turb, double mass_u) {
  double bth2 = 2.0 * DT_K_BOLTZMANN * T / (mass_u * DT_MASS_UNIT) * 1e-6; /* (km/s)^2 */
  return sqrt(b_turb * b_turb + bth2);
}

struct dt_joint_workspace { int dummy; };

dt_joint_workspace *dt_joint_alloc(size_t max_spec, size_t max_pix, size_t max_comp) {
  (void)max_spec; (void)max_pix; (void)max_comp;
  return calloc(1, sizeof(dt_joint_workspace));
}
void dt_joint_free(dt_joint_workspace *w) { free(w); }

int dt_joint_run(dt_joint_workspace *w, const dt_joint_problem *p, dt_joint_result *r,
                 dt_err *e) {
  (void)w; (void)p;
  memset(r, 0, sizeof *r);
  r->status = DT_EINVAL;
  return dt_err_set(e, DT_EINVAL, NULL, "joint fits are not available yet");
}

int dt_joint_eval(const dt_joint_problem *p, const dt_joint_result *r, size_t s,
                  double *flux_out) {
  (void)p; (void)r; (void)s; (void)flux_out;
  return DT_EINVAL;
}
