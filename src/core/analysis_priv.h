/* Private to the analysis (analysis.c, analysis_measure.c): the workspace
 * behind dt_analysis and the measurement stage the run calls. */
#ifndef DOUBLETTY_ANALYSIS_PRIV_H
#define DOUBLETTY_ANALYSIS_PRIV_H
#include "doubletty/analysis.h"
#include "doubletty/calib.h"
#include "doubletty/cog.h"
#include "doubletty/continuum.h"
#include "doubletty/cover.h"
#include "doubletty/measure.h"
#include "doubletty/model.h"

typedef struct model_key {
  const dt_doublet *doublet;
  const double *lsf;          /* widths per pixel of the window, or NULL */
  double vsys, resolution, fwhm, vlo, vhi, tau_cut;
  int oversample;
  size_t i0, n;
  const dt_hyperfine *hfs;
} model_key;

typedef struct cont_key {
  const dt_doublet *doublet;
  double vsys, vlo, vhi, margin;
  int order;
  size_t nwin;
  dt_window win[DT_MAX_WINDOWS];
  size_t i0, n;
} cont_key;

struct dt_analysis {
  const dt_spectrum *s;
  const dt_atomic *t;
  dt_analysis_opts opts;
  /* selection-sized buffers, capacity cap */
  size_t cap;
  double *vel[2], *cont_fixed, *cont_err, *cont, *model, *resid, *na[2], *na_err[2];
  double *poly, *tmp;
  unsigned char *used, *fitmask;
  double *compmod;               /* DT_MAX_COMP * cap */
  int compmod_ok[DT_MAX_COMP];
  /* continuum region buffers, capacity rcap */
  size_t rcap;
  double *rcont, *rerr;
  /* cached pieces */
  int have_model, have_cont, have_run;
  model_key mkey;
  cont_key ckey;
  int cont_status, cont_order_used;
  dt_err cont_e;
  dt_model *m;
  double *mwave;                 /* the model's pixel wavelengths (mkey.n) */
  size_t mwave_cap;
  /* partial covering (cover.h): a second model on the same pixels for one
   * component at a time, made when a covered judgement first needs it;
   * the covering factors of the last run */
  dt_model *mc;
  dt_cover_work *cvw;
  size_t cvw_cap;
  int covering;
  double cf[DT_MAX_COMP];
  dt_fit_workspace *fw;
  size_t fw_cap;
  dt_calib_workspace *calw;      /* calibrated interval thresholds (calib.h),
                                    made when first needed */
  size_t calw_cap;
  dt_cont_work *cw;
  /* the last run */
  size_t i0, n, ncomp;
  dt_component comp[DT_MAX_COMP];
  double fwhm_kms;
  const dt_doublet *d;        /* doublet, rest frame and window of the last run */
  double vsys, jvlo, jvhi;
  double mv1, mv2, ml1, ml2;  /* its measurement window and limit range */
  /* each line alone: its transmission under the last components, and the
   * line as measured (the other line divided out, gaps filled) */
  double *ltr[2], *lflux[2], *lsig[2];
  int have_ltr, have_sm;
  size_t sm_cap;              /* components the single-line models hold */
  int ltr_exact;              /* ltr from the models (else ones, valid over */
  double ltr_lo, ltr_hi;      /* this range: nothing of the other line there) */
  model_key smkey;
  dt_doublet sd[2];
  dt_model *sm[2];
  struct {
    const dt_line *line;
    double W, b, logN;
  } cog_cache[2];
};

/* analysis.c: the fit problem of j on the analysis' pixels, model and
 * continuum (as dt_analysis_run fits it). */
void dt_an_fill_problem(dt_analysis *a, const dt_judgement *j, dt_fit_problem *p);

/* analysis_measure.c: the measurement input and options of the current
 * selection; both lines measured over v1..v2 (limits over l1..l2; full:
 * with the intervals' side results) into out[2]; the components' optical
 * depth at the continuum regions' inner edges (o->cont_tau). */
void dt_an_measure_input(const dt_analysis *a, dt_measure_input *in);
void dt_an_measure_opts(const dt_analysis *a, dt_measure_opts *mo);
int dt_an_measure_lines(dt_analysis *a, double v1, double v2, double l1, double l2, int full,
                        dt_analysis_line L[2], int *saturated, dt_err *e);
void dt_an_continuum_tau(const dt_analysis *a, const dt_judgement *j, const dt_doublet *d,
                         const dt_component *comp, size_t ncomp, dt_analysis_out *out);

#endif
