/* Measurements of both lines over a given velocity range, from the
 * continuum of the last analysis run, without refitting: what a system's
 * range (systems.h) is measured with.  W and N_a are those of measure.h
 * integrated over [vlo, vhi]; the upper limits those of measure.h over
 * +-max(FWHM, 3 pixels) around the range's centre. */
#include "doubletty/analysis.h"

#include <math.h>

#include "doubletty/measure.h"
#include "doubletty/model.h"

int dt_analysis_last_input(const dt_analysis *a, dt_measure_input *in, const dt_doublet **d,
                           double *nsigma, double *fwhm_kms);

int dt_analysis_measure_range(dt_analysis *a, double vlo, double vhi, dt_analysis_line out[2],
                              dt_err *e) {
  dt_measure_input in;
  const dt_doublet *d = NULL;
  double nsigma = 3.0, fwhm = 0.0;
  for (int l = 0; l < 2; l++) {
    out[l].line = NULL;
    out[l].W = out[l].W_err = out[l].W_sig = out[l].logN_aod = out[l].logN_aod_err = NAN;
    out[l].W_limit = out[l].logN_limit = NAN;
    out[l].nsat = out[l].npix = 0;
  }
  if (dt_analysis_last_input(a, &in, &d, &nsigma, &fwhm) != DT_OK)
    return dt_err_set(e, DT_ERANGE, "measure", "no analysis to measure from");
  if (!(vlo < vhi)) return dt_err_set(e, DT_EINVAL, "measure", "empty range %g:%g", vlo, vhi);
  dt_measure_opts mo;
  dt_measure_opts_init(&mo);
  mo.limit_nsigma = nsigma;
  dt_doublet_measure dm, lm;
  int st = dt_measure_doublet(&in, d, vlo, vhi, &mo, &dm, e);
  double pix = fabs(dt_velocity(in.wave[in.n - 1], d->line[0].lambda0, in.vsys) -
                    dt_velocity(in.wave[0], d->line[0].lambda0, in.vsys)) / (double)(in.n - 1);
  double hw = fmax(fwhm, 3.0 * pix), vc = 0.5 * (vlo + vhi);
  double l1 = fmax(vc - hw, vlo), l2 = fmin(vc + hw, vhi);
  if (st == DT_OK && dt_measure_doublet(&in, d, l1, l2, &mo, &lm, NULL) == DT_OK)
    for (int l = 0; l < 2; l++) {
      dm.line[l].W_limit = lm.line[l].W_limit;
      dm.line[l].logN_limit = lm.line[l].logN_limit;
    }
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
