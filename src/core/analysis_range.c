/* Measurements of both lines over a given velocity range, from the
 * continuum of the last analysis run, without refitting: what a system's
 * range (systems.h) is measured with.  W, N_a and the upper limits are
 * those of measure.h integrated over [vlo, vhi]. */
#include "doubletty/analysis.h"

#include <math.h>

#include "doubletty/measure.h"

int dt_analysis_last_input(const dt_analysis *a, dt_measure_input *in, const dt_doublet **d,
                           double *nsigma);

int dt_analysis_measure_range(dt_analysis *a, double vlo, double vhi, dt_analysis_line out[2],
                              dt_err *e) {
  dt_measure_input in;
  const dt_doublet *d = NULL;
  double nsigma = 3.0;
  for (int l = 0; l < 2; l++) {
    out[l].line = NULL;
    out[l].W = out[l].W_err = out[l].W_sig = out[l].logN_aod = out[l].logN_aod_err = NAN;
    out[l].W_limit = out[l].logN_limit = NAN;
    out[l].nsat = out[l].npix = 0;
  }
  if (dt_analysis_last_input(a, &in, &d, &nsigma) != DT_OK)
    return dt_err_set(e, DT_ERANGE, "measure", "no analysis to measure from");
  if (!(vlo < vhi)) return dt_err_set(e, DT_EINVAL, "measure", "empty range %g:%g", vlo, vhi);
  dt_measure_opts mo;
  dt_measure_opts_init(&mo);
  mo.limit_nsigma = nsigma;
  dt_doublet_measure dm;
  int st = dt_measure_doublet(&in, d, vlo, vhi, &mo, &dm, e);
  for (int l = 0; l < 2; l++) {
    out[l].line = &d->line[l];
    if (st != DT_OK) continue;
    const dt_line_measure *m = &dm.line[l];
    out[l].W = m->W;
    out[l].W_err = m->W_err;
    out[l].W_sig = m->signif;
    out[l].logN_aod = m->logNa;
    out[l].logN_aod_err = m->logNa_err;
    out[l].W_limit = m->W_limit;
    out[l].logN_limit = m->logN_limit;
    out[l].nsat = m->nfloor;
    out[l].npix = m->npix;
  }
  return st;
}
