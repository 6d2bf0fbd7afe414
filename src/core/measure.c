/* Model-independent measurements of a doublet's lines: equivalent width,
 * apparent optical depth column and profile, curve-of-growth upper limits.
 *
 * Everything is a sum over pixels weighted by the part of each pixel that
 * lies inside the velocity window, so a window edge inside a pixel, uneven
 * pixels and log-linear sampling are all handled the same way.  The formulas
 * and their sources are in measure.h; the two physical constants are
 * derived here from sigma0 = pi e^2/(m_e c) and c, so they agree with the
 * model's optical depth to the last digit. */
#include "doubletty/measure.h"

#include <math.h>
#include <string.h>

#include "doubletty/analysis.h"
#include "doubletty/model.h"

void dt_measure_opts_init(dt_measure_opts *o) {
  o->limit_nsigma = 3.0;
  o->floor_nsigma = 1.0;
  o->floor_frac = 0.001;
  o->sat_nsigma = 2.0;
}

/* N_a(v) = K tau / (f lambda):  N = int tau dnu / (sigma0 f) with
 * dnu = dv/lambda = 1e5 dv[km/s] / (1e-8 lambda[A]), so K = 1e13 / sigma0
 * [cm^-2 (km/s)^-1 A] -- 3.768e14 in Savage & Sembach (1991, ApJ 379, 245). */
double dt_aod_const(void) { return 1e13 / DT_SIGMA0; }

/* Linear curve of growth W/lambda = (pi e^2/(m_e c^2)) N f lambda, i.e.
 * N = c/sigma0 * W/(f lambda^2) with W, lambda in cm; in Angstrom this is
 * 1e8 c[cm/s]/sigma0 = 1.13e20 (Spitzer 1978, eq. 3-48). */
double dt_cog_const(void) { return 1e8 * DT_C_KMS * 1e5 / DT_SIGMA0; }

double dt_cog_linear_N(double W, const dt_line *line) {
  return dt_cog_const() * W / (line->f * line->lambda0 * line->lambda0);
}

/* Edges of pixel i of n (halfway between centres; ends symmetric). */
static void pixel_edges(const double *wave, size_t n, size_t i, double *lo, double *hi) {
  *lo = i > 0 ? 0.5 * (wave[i - 1] + wave[i]) : wave[0] - 0.5 * (wave[1] - wave[0]);
  *hi = i + 1 < n ? 0.5 * (wave[i] + wave[i + 1])
                  : wave[n - 1] + 0.5 * (wave[n - 1] - wave[n - 2]);
}

static int usable(const dt_measure_input *in, size_t i) {
  if (in->mask && in->mask[i]) return 0;
  return isfinite(in->flux[i]) && isfinite(in->sigma[i]) && in->sigma[i] > 0 &&
         isfinite(in->cont[i]);
}

int dt_measure_line(const dt_measure_input *in, const dt_line *line, double v1,
                    double v2, const dt_measure_opts *o, dt_line_measure *out,
                    double *Na_v, double *Na_v_err, dt_err *e) {
  dt_measure_opts def;
  if (!o) {
    dt_measure_opts_init(&def);
    o = &def;
  }
  if (!in || !line || !out || !in->wave || !in->flux || !in->sigma || !in->cont)
    return dt_err_set(e, DT_EINVAL, "measure", "missing argument");
  memset(out, 0, sizeof *out);
  out->v1 = v1;
  out->v2 = v2;
  out->logNa = out->logNa_err = out->logN_limit = NAN;
  if (Na_v)
    for (size_t i = 0; i < in->n; i++) Na_v[i] = NAN;
  if (Na_v_err)
    for (size_t i = 0; i < in->n; i++) Na_v_err[i] = NAN;
  if (!(v1 < v2))
    return dt_err_set(e, DT_EINVAL, "measure", "empty velocity window %g..%g km/s", v1, v2);
  if (in->n < 2)
    return dt_err_set(e, DT_EINVAL, "measure", "fewer than 2 pixels in the region");
  if (!(line->f > 0) || !(line->lambda0 > 0))
    return dt_err_set(e, DT_EINVAL, "measure", "line %s has no positive f and wavelength",
                      line->label);

  const double zf = 1.0 + in->vsys / DT_C_KMS;          /* 1 + z */
  const double lam_c = line->lambda0 * zf;               /* observed line centre */
  const double l1 = dt_wavelength(v1, line->lambda0, in->vsys);
  const double l2 = dt_wavelength(v2, line->lambda0, in->vsys);
  const double kna = dt_aod_const() / (line->f * line->lambda0);

  double W = 0, varW = 0, Wc = 0, Na = 0, varNa = 0, Nac = 0, covered = 0;
  size_t npix = 0, nmask = 0, nfloor = 0;
  for (size_t i = 0; i < in->n; i++) {
    double lo, hi;
    pixel_edges(in->wave, in->n, i, &lo, &hi);
    double a = lo > l1 ? lo : l1, b = hi < l2 ? hi : l2;
    if (!(b > a)) continue;
    double dl = b - a;                       /* observed Angstrom inside the window */
    double dv = DT_C_KMS * dl / lam_c;       /* the same in km/s */
    covered += dl;
    npix++;
    if (!usable(in, i)) {
      nmask++;
      continue;
    }
    double C = in->cont[i], F = in->flux[i], s = in->sigma[i];
    double sC = in->cont_err ? in->cont_err[i] : 0.0;
    if (!(C > 0))
      return dt_err_set(e, DT_EINVAL, "measure",
                        "continuum is not positive at %.3f A", in->wave[i]);
    if (!isfinite(sC) || sC < 0) sC = 0;
    /* equivalent width: observed Angstrom, converted to rest frame below */
    W += (1.0 - F / C) * dl;
    varW += (s / C * dl) * (s / C * dl);
    Wc += fabs(F) * sC / (C * C) * dl;
    /* apparent optical depth, flux raised to the floor where saturated */
    double floor = o->floor_nsigma * s;
    if (o->floor_frac * C > floor) floor = o->floor_frac * C;
    double Fe = F;
    if (!(Fe >= floor)) {
      Fe = floor;
      nfloor++;
    }
    double tau = log(C / Fe);
    double et = s / Fe, ec = sC / C;         /* d tau from flux and continuum */
    Na += kna * tau * dv;
    varNa += (kna * et * dv) * (kna * et * dv);
    Nac += kna * ec * dv;
    if (Na_v) Na_v[i] = kna * tau;
    if (Na_v_err) Na_v_err[i] = kna * sqrt(et * et + ec * ec);
  }
  out->npix = npix;
  out->nmasked = nmask;
  out->nfloor = nfloor;
  out->coverage = covered / (l2 - l1);
  if (npix == 0)
    return dt_err_set(e, DT_ERANGE, "measure",
                      "%s window %g..%g km/s lies outside the data", line->label, v1, v2);
  if (nmask == npix)
    return dt_err_set(e, DT_EMASKED, "measure",
                      "every pixel of the %s window %g..%g km/s is masked", line->label,
                      v1, v2);

  out->W = W / zf;
  out->W_err_flux = sqrt(varW) / zf;
  out->W_err_cont = Wc / zf;
  out->W_err = hypot(out->W_err_flux, out->W_err_cont);
  out->signif = out->W_err > 0 ? out->W / out->W_err : 0.0;
  out->Na = Na;
  out->Na_err = hypot(sqrt(varNa), Nac);
  if (Na > 0) {
    out->logNa = log10(Na);
    out->logNa_err = out->Na_err / (Na * log(10.0));
  }
  out->W_limit = o->limit_nsigma * out->W_err;
  if (out->W_limit > 0) out->logN_limit = log10(dt_cog_linear_N(out->W_limit, line));
  return DT_OK;
}

int dt_measure_limit(const dt_measure_input *in, const dt_line *line, double v1, double v2,
                     double hw, double nsigma, double *W_limit, double *v_at, dt_err *e) {
  *W_limit = *v_at = NAN;
  if (!in || !line || in->n < 2 || !(v1 <= v2) || !(hw > 0) || !(nsigma > 0))
    return dt_err_set(e, DT_EINVAL, "limit", "bad arguments");
  dt_measure_opts o;
  dt_measure_opts_init(&o);
  double best = -INFINITY, vbest = NAN;
  size_t lo = 0;                 /* first pixel that may touch the box */
  size_t n = in->n;
  for (size_t c = 0; c <= n + 1; c++) {
    double vc;
    if (c == n) vc = v1;
    else if (c == n + 1) vc = v2;
    else {
      vc = dt_velocity(in->wave[c], line->lambda0, in->vsys);
      if (vc < v1 || vc > v2) continue;
    }
    /* pixels whose centre lies within the box and one beyond each end */
    double wl = dt_wavelength(vc - hw, line->lambda0, in->vsys);
    double wh = dt_wavelength(vc + hw, line->lambda0, in->vsys);
    if (c >= n) lo = 0;
    while (lo + 1 < n && in->wave[lo + 1] < wl) lo++;
    size_t hi = lo;
    while (hi + 1 < n && in->wave[hi] <= wh) hi++;
    size_t a = lo > 0 ? lo - 1 : 0, b = hi + 1 < n ? hi + 1 : n - 1;
    if (b < a + 1) continue;
    dt_measure_input sub = *in;
    sub.n = b - a + 1;
    sub.wave += a;
    sub.flux += a;
    sub.sigma += a;
    if (sub.mask) sub.mask += a;
    sub.cont += a;
    if (sub.cont_err) sub.cont_err += a;
    dt_line_measure m;
    if (dt_measure_line(&sub, line, vc - hw, vc + hw, &o, &m, NULL, NULL, NULL) != DT_OK)
      continue;
    double u = m.W + nsigma * m.W_err;
    if (u > best) {
      best = u;
      vbest = vc;
    }
  }
  if (!isfinite(best)) return dt_err_set(e, DT_ERANGE, "limit", "no measurable box");
  *W_limit = best;
  *v_at = vbest;
  return DT_OK;
}

int dt_measure_doublet(const dt_measure_input *in, const dt_doublet *d, double v1,
                       double v2, const dt_measure_opts *o, dt_doublet_measure *out,
                       dt_err *e) {
  dt_measure_opts def;
  if (!o) {
    dt_measure_opts_init(&def);
    o = &def;
  }
  if (!d || !out) return dt_err_set(e, DT_EINVAL, "measure", "missing argument");
  memset(out, 0, sizeof *out);
  out->ratio = out->excess_sigma = NAN;
  for (int l = 0; l < 2; l++) {
    int st = dt_measure_line(in, &d->line[l], v1, v2, o, &out->line[l], NULL, NULL, e);
    if (st != DT_OK) return st;
  }
  const dt_line_measure *s = &out->line[0], *w = &out->line[1];
  if (s->Na > 0) out->ratio = w->Na / s->Na;
  double comb = hypot(s->Na_err, w->Na_err);
  out->excess_sigma = comb > 0 ? (w->Na - s->Na) / comb : 0.0;
  out->saturated = dt_measure_saturated(s, w, d, o);
  return DT_OK;
}

int dt_measure_saturated(const dt_line_measure *s, const dt_line_measure *w,
                         const dt_doublet *d, const dt_measure_opts *o) {
  dt_measure_opts def;
  if (!o) {
    dt_measure_opts_init(&def);
    o = &def;
  }
  if (s->nfloor > 0 || w->nfloor > 0) return 1;
  double comb = hypot(s->Na_err, w->Na_err);
  if (comb > 0 && (w->Na - s->Na) / comb > o->sat_nsigma) return 1;
  const dt_line *ls = &d->line[0], *lw = &d->line[1];
  double R = ls->f * ls->lambda0 * ls->lambda0 / (lw->f * lw->lambda0 * lw->lambda0);
  double cw = hypot(R * w->W_err, s->W_err);
  if (s->W_err > 0 && s->W >= 3.0 * s->W_err && cw > 0 && (R * w->W - s->W) / cw > o->sat_nsigma)
    return 1;
  return 0;
}

/* ---------- the summary kept with a judgement ---------- */

void dt_meas_summary_clear(dt_meas_summary *m) {
  for (int i = 0; i < 2; i++)
    m->line[i] = (dt_meas_line){NAN, NAN, NAN, NAN, NAN, NAN};
  m->nsigma = NAN;
  m->saturated = 0;
  m->suggested = DT_VERDICT_NONE;
}

void dt_meas_summary_from_analysis(const struct dt_analysis_out *o, double nsigma,
                                   dt_verdict suggested, dt_meas_summary *m) {
  dt_meas_summary_clear(m);
  m->nsigma = nsigma;
  m->suggested = suggested;
  if (!o || o->measure_status != DT_OK) return;
  for (int l = 0; l < 2; l++) {
    const dt_analysis_line *a = &o->line[l];
    m->line[l] = (dt_meas_line){.w = a->W, .w_err = a->W_err, .w_lim = a->W_limit,
                                .logN_aod = a->logN_aod, .logN_aod_err = a->logN_aod_err,
                                .logN_lim = a->logN_limit};
  }
  m->saturated = o->saturated;
}

