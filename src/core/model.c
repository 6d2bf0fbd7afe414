/* The doublet absorption model: Voigt optical depths on a sub-pixel grid,
 * exp(-tau), a Gaussian line-spread function and averaging over pixels,
 * with the analytic Jacobian with respect to (logN, b, v) of each component.
 *
 * The discretisation (fixed in dt_model_alloc):
 *  - pixel edges lie half-way between pixel centres; the first and last
 *    pixels are symmetric about their centres;
 *  - the sub-pixel grid is uniform in y = ln(lambda): cells of width
 *    dy = (narrowest pixel, in ln lambda) / oversample, the first cell
 *    starting hw cells below the lower edge of the first pixel and the grid
 *    extending hw cells beyond the last pixel; each cell is represented by
 *    its centre, or by its mean near lines narrower than the cells (below);
 *  - the LSF is a Gaussian of constant velocity FWHM (c/R or the FWHM in
 *    km/s), sampled at the cell centres k*dy, k = -hw..hw with
 *    hw = ceil(DT_MODEL_LSF_NSIGMA * sigma / dy), and normalised to sum 1;
 *  - a pixel's value is the average of the convolved cell values over the
 *    pixel's [lo, hi] extent in ln lambda, each cell weighted by its
 *    overlap with the pixel (so unequal pixels are handled);
 *  - except when the pixels are much finer than the LSF (the rule above
 *    would give cells below sigma / (2 DT_MODEL_LSF_CELLS)): then the
 *    cells are sigma / DT_MODEL_LSF_CELLS wide (coarser), the
 *    grid reaches hw + 2 cells beyond the pixels, and a pixel's value is
 *    the mean over its extent of a piecewise-cubic interpolation of the
 *    convolved cells (pixel_weights), so that the matrix keeps
 *    ~2 DT_MODEL_LSF_NSIGMA DT_MODEL_LSF_CELLS entries per pixel however
 *    fine the pixels are.
 * Convolution and averaging are linear, so they are folded into one banded
 * matrix (row i = weights of the cells that reach pixel i), built once.
 *
 * Lines narrower than the cells.  Sampling exp(-tau) once per cell is the
 * midpoint rule with step dy; for a line of Doppler width b (velocity) it
 * is accurate only while c dy is below a fraction h of b (see sub_setup).
 * Survey spectra have cells of 5-15 km/s and cold gas b of 0.3-3 km/s, so
 * such a line is "narrow": every cell where it varies faster than the cell
 * resolves (its Gaussian core, and its damping wings while they are curved
 * on the scale of a cell) is represented by the mean of exp(-tau) over r
 * equal sub-cells instead of its centre value, with r chosen per cell from
 * what each narrow line nearby needs.  All lines (narrow or not) whose range
 * reaches such a cell are evaluated at its sub-cell centres, so blends are
 * exact; so are the derivatives (the cell mean of -exp(-tau) dtau/dp).  A
 * cell mean alone would put a narrow line at the cell's centre; so where a
 * line sits within its cell reaches the pixels too: through the LSF kernel
 * moved by the sub-cells' offsets (sub_moments), or without an LSF by
 * splitting cells at pixel edges (sub_edges).  The sub-cells of a cell are
 * fixed by the cell and r alone, and r depends on v only through the cell
 * that holds a line's centre, so between changes of r the model is one
 * smooth quadrature and its Jacobian is exact.
 *
 * Speed: each line of each component is evaluated only over the cells where
 * its optical depth can exceed tau_cut (the range follows from the Gaussian
 * core and the Lorentzian wing, then is verified against the exact Voigt
 * function, which falls monotonically away from the centre); elsewhere it is
 * exactly zero.  Within the range, w(z) comes from libcerf either at every
 * cell or, where that is cheaper, at the nodes of two small tables per line
 * (core: quintic Hermite in x; far wings: cubic Hermite in 1/x), built from
 * exact values and derivatives with the step chosen from the error bound so
 * that tau is off by at most 0.1 tau_cut.  Only pixels whose band meets the
 * ranges are touched; the rest have flux 1 and zero derivatives.  The
 * derivatives of tau are always kept, so a Jacobian asked for at the point
 * of the previous evaluation (what a least-squares solver does after
 * accepting a step) costs only the pixel sums.  All buffers are allocated in
 * dt_model_alloc; dt_model_eval never allocates.
 *
 * Hyperfine structure (cfg.hfs): a split line of the doublet becomes its
 * components, each an ordinary line (f times its share, lambda0 times
 * 1 + dv/c) with the component's N, b and v; the evaluation, the narrow-line
 * sub-sampling and the Jacobian treat them like the two lines of an unsplit
 * doublet, summing into the component's derivatives.  A line without
 * components is one line at dv = 0 with share 1, computed exactly as before.
 *
 * This file holds the grid (dt_model_alloc, in stages: check the config,
 * lay out the cells, allocate, build the kernel and the pixel operator) and
 * the evaluation (dt_model_eval: set up the lines, their optical depths,
 * exp(-tau), the pixels, the Jacobian).  The Voigt function and one line's
 * evaluation are in model_voigt.c, narrow lines in model_narrow.c, the LSF
 * and the pixel operator in model_lsf.c; model_internal.h is the workspace
 * they share. */
#include "doubletty/model.h"

#include <math.h>
#include <stdlib.h>
#include <string.h>

#include "model_internal.h"

double dt_velocity(double lambda, double lambda0, double vsys) {
  return DT_C_KMS * (lambda / (lambda0 * (1.0 + vsys / DT_C_KMS)) - 1.0);
}

double dt_wavelength(double v, double lambda0, double vsys) {
  return lambda0 * (1.0 + vsys / DT_C_KMS) * (1.0 + v / DT_C_KMS);
}

size_t dt_model_npix(const dt_model *m) { return m ? m->n : 0; }

void dt_model_get_info(const dt_model *m, dt_model_info *info) {
  memset(info, 0, sizeof *info);
  if (!m) return;
  info->npix = m->n;
  info->nfine = m->nf;
  info->oversample = m->ovs;
  info->step_kms = DT_C_KMS * m->dy;
  info->lnlam0 = m->y0;
  info->lsf_sigma_kms = m->sigma_kms;
  info->lsf_halfwidth = m->hw;
  info->tau_cut = m->tau_cut;
  info->interpolated = m->interp;
  info->ncoef = m->ncoef;
  info->lsf_per_pixel = m->sigpix != NULL;
  info->lsf_sigma_max_kms = m->sigpix ? m->sigma_max_kms : m->sigma_kms;
}

void dt_model_free(dt_model *m) {
  if (!m) return;
  free(m->invlam);
  free(m->m0);
  free(m->m1);
  free(m->off);
  free(m->coef);
  free(m->tau);
  free(m->dep);
  free(m->ex);
  free(m->q);
  free(m->last_flux);
  free(m->sfirst);
  free(m->sinv);
  free(m->stau);
  free(m->sex);
  free(m->sq);
  free(m->pc0);
  free(m->pc1);
  free(m->pwoff);
  free(m->pw);
  free(m->hk);
  free(m->mom);
  free(m->scr);
  free(m->pedge);
  free(m->sigpix);
  free(m->gloc);
  free(m->g0pix);
  free(m->hkt);
  free(m->kc);
  free(m->tc);
  free(m);
}

/* dt_model_alloc, stage 1: the arguments and the config are usable. */
static int check_config(const double *wave, size_t n, const dt_model_config *cfg,
                        size_t max_comp, dt_err *e) {
  dt_err_clear(e);
  if (!wave || !cfg || !cfg->doublet) {
    return dt_err_set(e, DT_EINVAL, NULL, "model: no pixels or no doublet given");
  }
  if (n < 2) {
    return dt_err_set(e, DT_EINVAL, NULL, "model: need at least 2 pixels, got %zu", n);
  }
  if (max_comp > DT_MAX_COMP) {
    return dt_err_set(e, DT_EINVAL, NULL, "model: at most %d components, asked for %zu", DT_MAX_COMP,
               max_comp);
  }
  for (size_t i = 0; i < n; i++) {
    if (!isfinite(wave[i]) || wave[i] <= 0 || (i > 0 && !(wave[i] > wave[i - 1]))) {
      return dt_err_set(e, DT_EINVAL, NULL,
                 "model: pixel wavelengths must be positive and strictly increasing (pixel %zu)",
                 i);
    }
  }
  double edge0 = wave[0] - 0.5 * (wave[1] - wave[0]);
  if (!(edge0 > 0)) {
    return dt_err_set(e, DT_EINVAL, NULL, "model: first pixel extends to non-positive wavelength");
  }
  if (!isfinite(cfg->vsys) || fabs(cfg->vsys) >= DT_C_KMS) {
    return dt_err_set(e, DT_EINVAL, NULL, "model: systemic velocity %g km/s out of range", cfg->vsys);
  }
  if (!isfinite(cfg->resolution) || !isfinite(cfg->fwhm_kms)) {
    return dt_err_set(e, DT_EINVAL, NULL, "model: resolution or LSF width is not a number");
  }
  if (cfg->lsf_fwhm_kms)
    for (size_t i = 0; i < n; i++)
      if (!isfinite(cfg->lsf_fwhm_kms[i]) || !(cfg->lsf_fwhm_kms[i] > 0))
        return dt_err_set(e, DT_EINVAL, NULL,
                          "model: LSF width %g km/s at pixel %zu (%.3f A) is not a positive number",
                          cfg->lsf_fwhm_kms[i], i, wave[i]);
  if (cfg->oversample < 0 || cfg->oversample > 1000) {
    return dt_err_set(e, DT_EINVAL, NULL, "model: oversampling %d outside 1..1000", cfg->oversample);
  }
  if (!(cfg->tau_cut >= 0 && cfg->tau_cut < 1)) {
    return dt_err_set(e, DT_EINVAL, NULL, "model: tau cut %g outside [0, 1)", cfg->tau_cut);
  }
  for (int j = 0; j < 2; j++) {
    const dt_line *l = &cfg->doublet->line[j];
    if (!(l->lambda0 > 0) || !(l->f > 0) || !(l->gamma >= 0) || !isfinite(l->gamma)) {
      return dt_err_set(e, DT_EINVAL, NULL, "model: doublet %s has unusable atomic data",
                 cfg->doublet->name);
    }
    const dt_hfs_line *h = cfg->hfs[j];
    if (!h) continue;
    int bad = h->n < 1 || h->n > DT_HFS_MAX;
    for (int c = 0; !bad && c < h->n; c++)
      bad = !(fabs(h->dv[c]) <= DT_HFS_DV_MAX) || !(h->share[c] > 0 && h->share[c] <= 1);
    if (bad)
      return dt_err_set(e, DT_EINVAL, NULL, "model: unusable hyperfine components of %s",
                        l->label);
  }
  return DT_OK;
}

/* dt_model_alloc: the lines each component gives (hyperfine components, or
 * the line itself at dv = 0 with share 1). */
static void line_split(dt_model *m, const dt_model_config *cfg) {
  m->nlc = 0;
  for (int l = 0; l < 2; l++) {
    if (cfg->hfs[l]) {
      m->hfs[l] = *cfg->hfs[l];
    } else {
      memset(&m->hfs[l], 0, sizeof m->hfs[l]);
      m->hfs[l].n = 1;
      m->hfs[l].share[0] = 1.0;
    }
    m->nlc += m->hfs[l].n;
  }
}

/* dt_model_alloc, stage 2: the pixel edges lo[], hi[] in ln(lambda)
 * (half-way between centres) and the cells: their width dy, whether they
 * are the coarser cells read by interpolation, the kernel half-width hw,
 * their number nf and where they start.  *sig_cells: the LSF sigma in
 * cells. */
static int grid_layout(dt_model *m, const double *wave, double *lo, double *hi,
                       double *sig_cells, dt_err *e) {
  const size_t n = m->n;
  double edge0 = wave[0] - 0.5 * (wave[1] - wave[0]);
  double minw = INFINITY;
  for (size_t i = 0; i < n; i++) {
    double el = i == 0 ? edge0 : 0.5 * (wave[i - 1] + wave[i]);
    double eh = i == n - 1 ? wave[n - 1] + 0.5 * (wave[n - 1] - wave[n - 2])
                           : 0.5 * (wave[i] + wave[i + 1]);
    lo[i] = log(el);
    hi[i] = log(eh);
    if (hi[i] - lo[i] < minw) minw = hi[i] - lo[i];
  }
  m->dy = minw / m->ovs;
  double sc = m->sigma_kms / (DT_C_KMS * m->dy);
  /* Pixels much finer than the LSF (cells below sigma / (2 LSF_CELLS)):
   * cells of sigma / DT_MODEL_LSF_CELLS sample the convolved profile well
   * enough, and the pixels read it by interpolation (pixel_weights); the
   * matrix then holds about 2 DT_MODEL_LSF_NSIGMA DT_MODEL_LSF_CELLS
   * entries per pixel instead of that times sig_cells / DT_MODEL_LSF_CELLS.
   * Between sigma / (2 LSF_CELLS) and sigma / LSF_CELLS (e.g. 0.5 A pixels
   * at R 3000) the cells are left as they are: at most twice the entries,
   * and no change for a few per cent coarser cells. */
  m->interp = m->sigma_kms > 0 && sc > 2.0 * DT_MODEL_LSF_CELLS;
  if (m->interp) {
    m->dy = m->sigma_kms / DT_C_KMS / DT_MODEL_LSF_CELLS;
    sc = DT_MODEL_LSF_CELLS;
  }
  /* with widths per pixel, cells from the narrowest, reach from the widest */
  double scmax = m->sigpix ? sc * (m->sigma_max_kms / m->sigma_kms) : sc;
  double hwd = m->sigma_kms > 0 ? ceil(DT_MODEL_LSF_NSIGMA * scmax) : 0.0;
  /* interpolation reaches two cell centres beyond a pixel's ends */
  double pad = hwd + (m->interp ? 2.0 : 0.0);
  double nfd = ceil((hi[n - 1] - lo[0]) / m->dy) + 2.0 * pad + 1.0;
  if (!(minw > 0) || !isfinite(nfd) || nfd > (double)MAX_FINE || hwd > (double)MAX_FINE / 4) {
    return dt_err_set(e, DT_EINVAL, NULL,
                      "model: sub-pixel grid would be too large (pixels span a factor %g in "
                      "wavelength, narrowest is %g km/s, LSF sigma %g km/s)",
                      exp(hi[n - 1] - lo[0]), DT_C_KMS * minw, m->sigma_kms);
  }
  m->hw = (int)hwd;
  m->nf = (size_t)nfd;
  m->y0 = lo[0] - pad * m->dy;
  *sig_cells = sc;
  if (m->sigpix) /* the widths in cells (sigpix held them in km/s) */
    for (size_t i = 0; i < n; i++)
      m->sigpix[i] = m->interp ? DT_MODEL_LSF_CELLS * (m->sigpix[i] / m->sigma_kms)
                               : m->sigpix[i] / (DT_C_KMS * m->dy);
  return DT_OK;
}

/* dt_model_alloc, stage 3: every work array, sized for the grid and for
 * max_comp components (none is allocated again in dt_model_eval). */
static int alloc_buffers(dt_model *m) {
  const size_t n = m->n, nf = m->nf, max_comp = m->max_comp;
  const int hw = m->hw;
  m->invlam = malloc(nf * sizeof *m->invlam);
  m->m0 = malloc(n * sizeof *m->m0);
  m->m1 = malloc(n * sizeof *m->m1);
  m->off = malloc(n * sizeof *m->off);
  m->tau = calloc(nf, sizeof *m->tau);
  m->dep = calloc(nf, sizeof *m->dep);
  m->ex = calloc(nf, sizeof *m->ex);
  m->q = calloc((max_comp ? max_comp : 1) * nf * 3, sizeof *m->q);
  m->last_flux = malloc(n * sizeof *m->last_flux);
  /* Sub-points for narrow lines: the bound for b >= DT_MODEL_B_RESOLVED,
   * at most SUB_LINE_CAP per line (sub_setup coarsens beyond; malloc, so
   * pages never used are never touched). */
  size_t kc = max_comp ? max_comp : 1;
  double ppl = fmin(dt_model_sub_points_per_line(DT_C_KMS * m->dy), SUB_LINE_CAP);
  m->pmax = (size_t)m->nlc * kc * (size_t)ppl;
  m->sfirst = malloc((m->pmax + MAX_LINES + 1) * sizeof *m->sfirst);
  m->sinv = malloc(m->pmax * sizeof *m->sinv);
  m->stau = malloc(m->pmax * sizeof *m->stau);
  m->sex = malloc(m->pmax * sizeof *m->sex);
  m->sq = malloc(kc * m->pmax * 3 * sizeof *m->sq);
  m->pc0 = malloc(n * sizeof *m->pc0);
  m->pc1 = malloc(n * sizeof *m->pc1);
  m->pwoff = malloc(n * sizeof *m->pwoff);
  m->hk = malloc((size_t)MOM_MAX * (size_t)(2 * hw + 1) * sizeof *m->hk);
  m->mom = malloc(MOM_CHUNK * 3 * MOM_MAX * sizeof *m->mom);
  m->scr = malloc(3 * nf * sizeof *m->scr);
  m->pedge = malloc((n + 1) * sizeof *m->pedge);
  if (m->sigpix) {
    m->gloc = malloc((size_t)(2 * hw + 1) * sizeof *m->gloc);
    m->g0pix = malloc(n * sizeof *m->g0pix);
    if (!m->gloc || !m->g0pix) return DT_ENOMEM;
  }
  if (!m->invlam || !m->m0 || !m->m1 || !m->off || !m->tau || !m->dep || !m->ex || !m->q ||
      !m->last_flux || !m->sfirst || !m->sinv || !m->stau || !m->sex || !m->sq || !m->pc0 ||
      !m->pc1 || !m->pwoff || !m->hk || !m->mom || !m->scr || !m->pedge)
    return DT_ENOMEM;
  return DT_OK;
}

/* dt_model_alloc, stage 4: the centres of the cells (1/lambda) and the
 * pixel edges. */
static void cell_centres(dt_model *m, const double *lo, const double *hi) {
  const size_t n = m->n, nf = m->nf;
  for (size_t j = 0; j < nf; j++) m->invlam[j] = exp(-(m->y0 + (j + 0.5) * m->dy));
  for (size_t i = 0; i < n; i++) m->pedge[i] = lo[i];
  m->pedge[n] = hi[n - 1];
}

dt_model *dt_model_alloc(const double *wave, size_t n, const dt_model_config *cfg,
                         size_t max_comp, dt_err *e) {
  if (check_config(wave, n, cfg, max_comp, e) != DT_OK) return NULL;
  dt_model *m = calloc(1, sizeof *m);
  double *lo = NULL, *hi = NULL, *g = NULL;
  if (!m) goto nomem;
  m->dbl = cfg->doublet;
  m->s = 1.0 + cfg->vsys / DT_C_KMS;
  m->tau_cut = cfg->tau_cut > 0 ? cfg->tau_cut : DT_MODEL_TAU_CUT;
  m->ovs = cfg->oversample > 0 ? cfg->oversample : DT_MODEL_OVERSAMPLE;
  m->exact = cfg->exact_wings != 0;
  m->n = n;
  m->max_comp = max_comp;
  line_split(m, cfg);
  double fwhm = cfg->resolution > 0 ? DT_C_KMS / cfg->resolution
                                    : (cfg->fwhm_kms > 0 ? cfg->fwhm_kms : 0.0);
  m->sigma_kms = fwhm / FWHM_PER_SIGMA;
  if (cfg->lsf_fwhm_kms) {
    m->sigpix = malloc(n * sizeof *m->sigpix);
    if (!m->sigpix) goto nomem;
    double smin = INFINITY, smax = 0;
    for (size_t i = 0; i < n; i++) {
      m->sigpix[i] = cfg->lsf_fwhm_kms[i] / FWHM_PER_SIGMA;
      smin = fmin(smin, m->sigpix[i]);
      smax = fmax(smax, m->sigpix[i]);
    }
    m->sigma_kms = smin;
    m->sigma_max_kms = smax;
  }
  lo = malloc(n * sizeof *lo);
  hi = malloc(n * sizeof *hi);
  if (!lo || !hi) goto nomem;
  double sig_cells = 0;
  if (grid_layout(m, wave, lo, hi, &sig_cells, e) != DT_OK) goto fail;
  g = malloc((size_t)(2 * m->hw + 1) * sizeof *g);
  if (!g || alloc_buffers(m) != DT_OK) goto nomem;
  dt_model_lsf_kernel(m, g, sig_cells);
  dt_model_moment_kernel(m, g, sig_cells);
  cell_centres(m, lo, hi);
  if (dt_model_pixel_operator(m, lo, hi, g) != DT_OK) goto nomem;
  if (m->sigpix && dt_model_moment_table(m) != DT_OK) goto nomem;
  free(g);
  free(lo);
  free(hi);
  return m;

nomem:
  dt_err_set(e, DT_ENOMEM, NULL, "model: out of memory");
fail:
  free(g);
  free(lo);
  free(hi);
  dt_model_free(m);
  return NULL;
}

/* Merge the spans sp[0..n-1] (in place) into sorted disjoint spans. */
int dt_model_merge_spans(span *sp, int n) {
  for (int i = 1; i < n; i++) {
    span t = sp[i];
    int j = i - 1;
    while (j >= 0 && sp[j].lo > t.lo) {
      sp[j + 1] = sp[j];
      j--;
    }
    sp[j + 1] = t;
  }
  int k = 0;
  for (int i = 0; i < n; i++) {
    if (k > 0 && sp[i].lo <= sp[k - 1].hi + 1) {
      if (sp[i].hi > sp[k - 1].hi) sp[k - 1].hi = sp[i].hi;
    } else {
      sp[k++] = sp[i];
    }
  }
  return k;
}

const double *dt_model_fine_tau(const dt_model *m) { return m ? m->tau : NULL; }


/* dt_model_eval, stage 1: the components are physical and their scales
 * finite. */
static int check_components(const dt_model *m, const dt_component *comp, size_t ncomp) {
  for (size_t k = 0; k < ncomp; k++) {
    const dt_component *c = &comp[k];
    if (!(c->logN <= DT_MODEL_LOGN_MAX) || !(c->b >= DT_MODEL_B_MIN) || !isfinite(c->logN) ||
        !isfinite(c->b) || !isfinite(c->v) || fabs(c->v) >= DT_C_KMS)
      return DT_EINVAL;
    for (int l = 0; l < 2; l++) { /* cannot happen within the limits above */
      double t0, a;
      dt_model_line_scales(&m->dbl->line[l], pow(10.0, c->logN), c->b, &t0, &a);
      if (!isfinite(t0) || !isfinite(a) || !isfinite(DT_C_KMS / c->b)) return DT_EINVAL;
    }
  }
  return DT_OK;
}

/* Stage 2: every line of every component set up (scales, narrow or not,
 * the cells where it matters), the union of their ranges (m->uni, returns
 * their number) and the sub-points of this evaluation.  What the last
 * evaluation left in tau is cleared first, so tau is zero outside the
 * ranges. */
static int setup_lines(dt_model *m, const dt_component *comp, size_t ncomp) {
  const dt_doublet *d = m->dbl;
  for (int u = 0; u < m->nprev; u++)
    memset(m->tau + m->prev[u].lo, 0, (size_t)(m->prev[u].hi - m->prev[u].lo + 1) * sizeof(double));
  int nl = 0;
  const int nlc = m->nlc;
  for (size_t k = 0; k < ncomp; k++) {
    const dt_component *c = &comp[k];
    double N = pow(10.0, c->logN);
    line_setup *s = &m->ls[(size_t)nlc * k];
    for (int l = 0; l < 2; l++) {
      const dt_hfs_line *h = &m->hfs[l];
      for (int hc = 0; hc < h->n; hc++, s++) {
        /* a hyperfine component: f times its share at lambda0 (1 + dv/c)
         * (both factors exactly 1 for a single line) */
        dt_line li = d->line[l];
        li.f *= h->share[hc];
        dt_model_line_scales(&li, N, c->b, &s->t0, &s->a);
        s->lc = li.lambda0 * m->s * (1.0 + c->v / DT_C_KMS) * (1.0 + h->dv[hc] / DT_C_KMS);
        s->cb = DT_C_KMS / c->b;
        s->dxdv_fac = 1.0 / (c->b * (1.0 + c->v / DT_C_KMS));
        dt_model_sub_setup(m, s, c->b);
        s->r = dt_model_line_range(m, s->t0, s->a, c->b, s->lc, s->narrow);
        if (s->sr.lo < s->r.lo) s->sr.lo = s->r.lo;
        if (s->sr.hi > s->r.hi) s->sr.hi = s->r.hi;
        if (s->r.lo <= s->r.hi) m->uni[nl++] = s->r;
      }
    }
    int nc = 0;
    s = &m->ls[(size_t)nlc * k];
    for (int l = 0; l < nlc; l++)
      if (s[l].r.lo <= s[l].r.hi) m->cspan[k][nc++] = s[l].r;
    m->ncspan[k] = dt_model_merge_spans(m->cspan[k], nc);
  }
  int nu = dt_model_merge_spans(m->uni, nl);
  memcpy(m->prev, m->uni, (size_t)nu * sizeof(span));
  m->nprev = nu;
  dt_model_sub_build(m, (int)((size_t)nlc * ncomp));
  const size_t np = m->np;
  if (np) {
    memset(m->stau, 0, np * sizeof *m->stau);
    for (size_t k = 0; k < ncomp; k++) memset(m->sq + k * m->pmax * 3, 0, np * 3 * sizeof *m->sq);
  }
  return nu;
}

/* Stage 3: optical depth and its derivatives on the cells (the derivatives
 * cost little next to w(z), and a Jacobian usually follows at the same
 * point), then 1 - exp(-tau) and exp(-tau) over the nu spans of m->uni. */
static void optical_depths(dt_model *m, const dt_component *comp, size_t ncomp, int nu) {
  const size_t nf = m->nf;
  for (size_t k = 0; k < ncomp; k++) {
    double *qk = m->q + k * nf * 3, *sqk = m->sq + k * m->pmax * 3;
    for (int u = 0; u < m->ncspan[k]; u++)
      memset(qk + 3 * m->cspan[k][u].lo, 0,
             (size_t)(m->cspan[k][u].hi - m->cspan[k][u].lo + 1) * 3 * sizeof(double));
    for (int l = 0; l < m->nlc; l++)
      dt_model_eval_line(m, &m->ls[(size_t)m->nlc * k + (size_t)l], comp[k].b, qk, sqk);
  }
  for (int u = 0; u < nu; u++)
    for (long j = m->uni[u].lo; j <= m->uni[u].hi; j++) {
      double t = m->tau[j];
      if (t < 0.5) {
        double dd = -expm1(-t);
        m->dep[j] = dd;
        m->ex[j] = 1.0 - dd;
      } else {
        double ee = exp(-t);
        m->ex[j] = ee;
        m->dep[j] = 1.0 - ee;
      }
    }
}

int dt_model_eval(dt_model *m, const dt_component *comp, size_t ncomp, double *flux, double *jac,
                  size_t ldj) {
  if (!m || !flux || (ncomp && !comp) || ncomp > m->max_comp) return DT_EINVAL;
  if (jac && ldj < 3 * ncomp) return DT_EINVAL;
  int st = check_components(m, comp, ncomp);
  if (st != DT_OK) return st;
  const size_t n = m->n;
  if (m->have_last && ncomp == m->nlast &&
      (ncomp == 0 || memcmp(comp, m->last, ncomp * sizeof *comp) == 0)) {
    memcpy(flux, m->last_flux, n * sizeof *flux);
    goto jacobian;
  }
  m->have_last = 0;
  m->folded = 0;
  int nu = setup_lines(m, comp, ncomp);
  optical_depths(m, comp, ncomp, nu);
  /* Sub-sampled cells: the means over their sub-points instead. */
  dt_model_sub_means(m);
  dt_model_apply_flux(m, nu, flux);
  if (m->nsub) dt_model_sub_corrections(m, -1, flux, 1);
  if (m->nsub || m->interp) {
    /* the corrections keep 0 <= flux <= 1 only to ~1e-7 for an LSF of
     * about one cell (their kernels have small negative lobes there), and
     * cubic interpolation overshoots by up to ~1e-5 of a line's depth */
    for (size_t i = 0; i < n; i++) flux[i] = flux[i] < 0 ? 0.0 : (flux[i] > 1 ? 1.0 : flux[i]);
  }
  memcpy(m->last_flux, flux, n * sizeof *flux);
  if (ncomp) memcpy(m->last, comp, ncomp * sizeof *comp);
  m->nlast = ncomp;
  m->have_last = 1;

jacobian:
  if (!jac) return DT_OK;
  if (!m->folded) dt_model_fold(m, ncomp);
  dt_model_apply_jac(m, ncomp, jac, ldj);
  /* and through the moments of sub-sampled cells */
  if (m->nsub)
    for (size_t k = 0; k < ncomp; k++)
      dt_model_sub_corrections(m, (long)k, jac + 3 * k, ldj);
  return DT_OK;
}
