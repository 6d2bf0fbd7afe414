/* The inspector's screen, drawn from its state into a grid of cells.
 *
 * Layout, top to bottom (our own design):
 *   title bar     queue position, judged count, target, doublet, vsys, R,
 *                 velocity frame
 *   overview      the whole spectrum in wavelength: flux, continuum, the two
 *                 lines' positions, continuum windows; a wavelength axis
 *   line panels   one per line of the doublet, stacked on one velocity axis:
 *                 flux, 1-sigma error, continuum, total model, each
 *                 component's model, component numbers, continuum windows
 *                 (shaded), masked pixels, the cursor column, and where
 *                 the night-sky Na D and [O I] lines fall (when the
 *                 spectrum's frame is known)
 *   velocity axis
 *   table         components with errors and frozen/tied marks; chi2, BIC,
 *                 continuum; W, significance, N_a and limits per line;
 *                 suggested and current verdict, note
 *   status line   the last message, or the note being edited
 * On terminals at least 150 columns wide the table moves to the right of
 * the plots.  Below 80 x 24 only a "too small" message is drawn.
 *
 * Nothing here touches the terminal: the result is s->g. */
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "doubletty/airvac.h"
#include "doubletty/cover.h"
#include "doubletty/frames.h"
#include "doubletty/model.h"
#include "doubletty/utf8.h"
#include "insp.h"
#include "keymap.h"
#include "view_int.h"

#define DEPARTS 0.002 /* a model "departs" from the continuum by this fraction */

const char *dt_view_pm(const dt_insp *s, char *buf, size_t size, double v, double err, int dec) {
  syms y = symbols(s);
  if (!isfinite(v)) snprintf(buf, size, "-");
  else if (err >= 1e3 || (isinf(err) && err > 0)) snprintf(buf, size, "%.*f%s?", dec, v, y.pm); /* unconstrained */
  else if (isfinite(err) && err > 0) snprintf(buf, size, "%.*f%s%.*f", dec, v, y.pm, dec, err);
  else snprintf(buf, size, "%.*f", dec, v);
  return buf;
}


/* The status line's message: the session's last one, and while the
 * analysis of the current state fails, why -- so the reason stays in view
 * whatever was said since.  *tone: the tone to draw it in. */
static const char *status_text(const dt_insp *s, char *buf, size_t size, dt_session_tone *tone) {
  const dt_session *ss = s->ss;
  *tone = ss->tone;
  if (!ss->loaded || ss->an_ok || !ss->an_msg[0] || strstr(ss->msg, ss->an_msg)) return ss->msg;
  if (ss->msg[0]) snprintf(buf, size, "%s - %s", ss->msg, ss->an_msg);
  else snprintf(buf, size, "%s", ss->an_msg);
  if (*tone != DT_TONE_BAD) *tone = DT_TONE_WARN;
  return buf;
}

static void compute_layout(const dt_insp *s, int w, int h, layout *L) {
  memset(L, 0, sizeof *L);
  L->w = w;
  L->h = h;
  char sb[1000];
  dt_session_tone tone;
  L->status_h = !s->editing && cells(status_text(s, sb, sizeof sb, &tone)) > w - FOOTER_MIN - 1 ? 2 : 1;
  L->status_y = h - L->status_h;
  L->gutter = 7;
  int side = w >= 150;
  int body = h - 1 - L->status_h; /* minus title and status */
  if (side) {
    L->tab_w = w - 110 < 60 ? 60 : w - 110 > 92 ? 92 : w - 110; /* a wide screen gives the table room */
    L->tab_x = w - L->tab_w;
    L->tab_y = 1;
    L->tab_h = body;
  } else {
    L->tab_w = w;
    L->tab_x = 0;
    /* rule, heading, components, fit, two lines, verdict: as many rows as
       the components need, within a share of the screen */
    int need = 6 + (int)(s->ss->j.ncomp > 1 ? s->ss->j.ncomp : 1) - (h < 28) + (s->o && s->o->hi ? 1 : 0) +
               dt_view_linked_rows(s);
    int cap = h < 28 ? 7 : h < 36 ? 9 : 13;
    L->tab_h = need < 7 ? 7 : need > cap ? cap : need;
    L->tab_y = L->status_y - L->tab_h;
    body -= L->tab_h;
  }
  /* a short screen keeps its rows for the two line panels */
  L->ov_h = h >= 40 ? 6 : h >= 30 ? 4 : 0;
  int rest = body - L->ov_h - (L->ov_h ? 1 : 0) - 1; /* overview axis, velocity axis */
  if (s->o && s->o->hi && rest >= 12) { /* a quarter for the 21-cm panel */
    L->hi_h = rest / 4 < 3 ? 3 : rest / 4;
    rest -= L->hi_h;
  }
  L->sys_y = -1;
  int sysrow = s->ss->systems.n > 1 && rest >= 7; /* a row for the systems' bands */
  rest -= sysrow;
  L->nlink = s->ss->loaded ? (int)s->ss->j.nlinked : 0; /* a panel per linked species */
  L->pan_h = rest / (2 + L->nlink);
  if (L->ov_h) L->ov_h += rest - L->pan_h * (2 + L->nlink); /* odd rows go to the overview */
  L->ov_y = 1;
  L->ovaxis_y = L->ov_y + L->ov_h;
  L->pan_y[0] = L->ov_h ? L->ovaxis_y + 1 : L->ov_y;
  L->pan_y[1] = L->pan_y[0] + L->pan_h;
  for (int k = 0; k < L->nlink; k++) L->link_y[k] = L->pan_y[1] + L->pan_h * (k + 1);
  L->hi_y = L->pan_y[1] + L->pan_h * (1 + L->nlink);
  L->vaxis_y = L->hi_y + L->hi_h;
  if (sysrow) L->sys_y = L->vaxis_y++;
  L->plot_x = L->gutter;
  L->plot_w = (side ? L->tab_x - 1 : w) - L->gutter;
}

/* ------------------------------------------------------------------ axes */

static double nice_step(double span, int cols, int min_cols) {
  double raw = span * min_cols / (cols > 0 ? cols : 1);
  double p = pow(10, floor(log10(raw)));
  double m = raw / p;
  return (m <= 1 ? 1 : m <= 2 ? 2 : m <= 5 ? 5 : 10) * p;
}

/* Tick labels of the x axis in grid row y, within the first `room` columns. */
static void axis_row(dt_grid *g, const dt_plot *p, int x0, int y, int dec, int room) {
  double step = nice_step(p->xmax - p->xmin, p->w, 10);
  int last_end = -2;
  for (double v = ceil(p->xmin / step) * step; v <= p->xmax + 1e-9 * step; v += step) {
    char lab[32];
    double vv = fabs(v) < 1e-9 * step ? 0 : v;
    snprintf(lab, sizeof lab, "%.*f", dec, vv);
    int col = dt_plot_column(p, vv);
    if (col < 0) continue;
    int len = (int)strlen(lab);
    int start = x0 + col - len / 2;
    if (start <= last_end + 1 || start + len > x0 + room) continue;
    dt_grid_text(g, start, y, lab, DT_R_AXIS, 0, -1);
    last_end = start + len - 1;
  }
}

/* y tick labels in the gutter at the rows of the given values */
static void ytick(dt_grid *g, const dt_plot *p, int gx, int gy, double v, const char *lab) {
  if (!(v >= p->ymin && v <= p->ymax)) return;
  int row = (int)floor((p->ymax - v) / (p->ymax - p->ymin) * p->h);
  if (row >= p->h) row = p->h - 1;
  if (row < 0) row = 0;
  dt_grid_printf(g, gx, gy + row, DT_R_AXIS, 0, 5, "%5s", lab);
}

static void fmt_val(char *buf, size_t n, double v) {
  if (v == 0) snprintf(buf, n, "0");
  else if (fabs(v) >= 1000 || fabs(v) < 0.01) snprintf(buf, n, "%.0e", v);
  else snprintf(buf, n, "%.3g", v);
}

/* ------------------------------------------------------------------ title */

static void draw_title(dt_insp *s, const layout *L) {
  dt_grid *g = &s->g;
  dt_grid_fill(g, 0, 0, L->w, 1, " ", DT_R_TITLE, DT_R_TITLE, 0);
  const dt_qentry *e = &s->q->e[s->cur];
  const char *name = dt_queue_name(s->q, s->cur);
  const char *path = dt_queue_path(s->q, s->cur);
  const char *base = strrchr(path, '/');
  base = base ? base + 1 : path;
  char row[32] = "";
  if (e->row > 0) snprintf(row, sizeof row, " row %ld", e->row);
  char res[32] = "R ?";
  if (s->ss->j.resolution > 0) snprintf(res, sizeof res, "R %.0f", s->ss->j.resolution);
  else if (s->ss->j.fwhm_kms > 0) snprintf(res, sizeof res, "FWHM %.0f km/s", s->ss->j.fwhm_kms);
  /* widths per pixel (lsf.h): R at the line, marked as varying */
  if (s->ss->an && dt_analysis_lsf_source(s->ss->an) && dt_analysis_lsf_fwhm(s->ss->an) > 0)
    snprintf(res, sizeof res, "R(lambda) %.0f", DT_C_KMS / dt_analysis_lsf_fwhm(s->ss->an));
  const char *flag = NULL;
  int role = DT_R_BAD;
  if (s->jn && dt_journal_failed(s->jn)) flag = " SESSION NOT WRITABLE ";
  else if (s->ss->file_changed) flag = " FILE CHANGED SINCE JUDGED ";
  else if (!s->jn || dt_journal_read_only(s->jn)) {
    flag = " read-only ";
    role = DT_R_WARN;
  } else if (s->ss->pending) {
    flag = " first pass ";
    role = DT_R_TITLE;
  }
  int flen = flag ? (int)strlen(flag) : 0;
  /* by priority: position and settings always, then the target's name,
   * then its file (cut from the left) */
  char head[64], tail[96], mid[600];
  snprintf(head, sizeof head, " doubletty  %zu/%zu  judged %zu  | ", s->cur + 1, s->q->n, s->njudged);
  /* the frame; a '?' after it when nobody said it and it was assumed */
  char frame[16] = "";
  if (s->ss->loaded && s->ss->spec)
    snprintf(frame, sizeof frame, "%s%s", dt_frame_name(s->ss->spec->frame),
             strcmp(s->ss->spec->frame_from, "assumed") ? "" : "?");
  snprintf(tail, sizeof tail, " | %s  vsys %+.0f  %s%s%s ", s->ss->j.doublet, s->ss->j.vsys, res,
           frame[0] ? "  " : "", frame);
  snprintf(mid, sizeof mid, "%s%s%s%s", name[0] ? name : "", name[0] ? " " : "", base, row);
  int fixed = cells(head) + cells(tail) + flen;
  int mroom = L->w - fixed;
  if (cells(mid) > mroom && frame[0]) { /* a narrow screen: the frame's first four letters */
    snprintf(tail, sizeof tail, " | %s vsys %+.0f %.4s%s %s ", s->ss->j.doublet, s->ss->j.vsys, frame,
             strchr(frame, '?') ? "?" : "", res);
    fixed = cells(head) + cells(tail) + flen;
    mroom = L->w - fixed;
  }
  if (cells(mid) > mroom && name[0]) snprintf(mid, sizeof mid, "%s%s", name, row);
  if (mroom < 4) mroom = 4;
  while (cells(mid) > mroom) {
    size_t n = strlen(mid), k = dt_utf8_next(mid, n, 0);
    memmove(mid, mid + k, n - k + 1); /* drop from the left: the end of a name tells most */
  }
  char buf[800];
  snprintf(buf, sizeof buf, "%s%s%s", head, mid, tail);
  dt_grid_text(g, 0, 0, buf, DT_R_TITLE, DT_A_BOLD, L->w - flen);
  if (flag) dt_grid_text(g, L->w - flen, 0, flag, role, DT_A_BOLD | DT_A_REVERSE, -1);
  for (int i = 0; i < L->w; i++) dt_grid_at(g, i, 0)->bg = DT_R_TITLE;
}

/* ------------------------------------------------------------------ plots */

static double *scratch(dt_insp *s, size_t n, int k) {
  size_t need = n * 6;
  if (need > s->tmp_cap) {
    double *t = realloc(s->tmp, need * sizeof *t);
    if (!t) return NULL;
    s->tmp = t;
    s->tmp_cap = need;
  }
  return s->tmp + (size_t)k * n;
}

static void draw_overview(dt_insp *s, const layout *L) {
  dt_grid *g = &s->g;
  syms y = symbols(s);
  if (!s->ss->loaded) {
    dt_grid_printf(g, L->plot_x, L->ov_h ? L->ov_y + L->ov_h / 2 : L->pan_y[0], DT_R_BAD, 0, L->plot_w,
                   "cannot read this spectrum: %s", s->ss->load_msg);
    return;
  }
  if (L->ov_h == 0) return; /* a short screen: no overview */
  const dt_spectrum *sp = s->ss->spec;
  dt_plot *p = &s->p;
  if (dt_plot_begin(p, s->mode, L->plot_w, L->ov_h, sp->wave[0], sp->wave[sp->n - 1], s->ov_ymin, s->ov_ymax))
    return;
  for (size_t k = 0; k < s->ss->j.nwin; k++) dt_plot_vspan(p, s->ss->j.win[k].lo, s->ss->j.win[k].hi, DT_R_WINDOW);
  dt_plot_hline(p, 0, DT_R_REF);
  dt_plot_line(p, sp->wave, sp->flux, sp->mask, sp->n, DT_R_FLUX, DT_PLOT_MARK_OFF);
  dt_plot_points(p, sp->wave, sp->flux, sp->mask, sp->n, DT_R_MASKED, DT_PLOT_MARK_OFF);
  if (s->ss->an_ok) {
    const double *w = dt_analysis_wave(s->ss->an), *c = dt_analysis_continuum(s->ss->an);
    dt_plot_line(p, w, c, NULL, s->ss->out.n, DT_R_CONT, 0);
  }
  const dt_doublet *d = dt_atomic_find(s->atomic, s->ss->j.doublet);
  if (d)
    for (int l = 0; l < 2; l++) {
      double lam = dt_wavelength(0, d->line[l].lambda0, s->ss->j.vsys);
      dt_plot_mark(p, lam, 0, l == 0 ? "1" : "2", DT_R_LABEL, DT_A_BOLD);
    }
  dt_plot_render(p, g, L->plot_x, L->ov_y);
  char lab[16];
  fmt_val(lab, sizeof lab, s->ov_ymax);
  dt_grid_printf(g, 0, L->ov_y, DT_R_AXIS, 0, 5, "%5s", lab);
  ytick(g, p, 0, L->ov_y, 0, "0");
  for (int r = 0; r < L->ov_h; r++) dt_grid_text(g, L->gutter - 1, L->ov_y + r, y.vbar, DT_R_AXIS, 0, 1);
  dt_grid_printf(g, 0, L->ovaxis_y, DT_R_AXIS, 0, L->gutter - 1, "%s vac", y.ang);
  axis_row(g, p, L->plot_x, L->ovaxis_y, 0, p->w);
}

/* One row of residuals (data - model) / sigma under a panel, one cell per
 * plot column (the largest |r| of the column's pixels): blank within 1
 * sigma, a dot within 2, +/- within 3, and a bold arrow beyond, so a
 * misfit in a trough shows even where data and model share cells. */
static void draw_residuals(dt_insp *s, const layout *L, const dt_plot *p, int gy, const double *vel,
                           const double *flux, const double *sig, const double *model, const unsigned char *mask,
                           size_t n) {
  dt_grid *g = &s->g;
  dt_grid_text(g, 0, gy, s->utf8 ? " r/\xcf\x83" : " r/sig", DT_R_AXIS, DT_A_DIM, L->gutter - 1);
  for (int c = 0; c < p->w; c++) {
    double x0 = dt_plot_colx(p, c), x1 = dt_plot_colx(p, c + 1), worst = 0;
    for (size_t i = 0; i < n; i++) {
      if (mask[i] || !(vel[i] >= x0 && vel[i] < x1) || !(sig[i] > 0) || !isfinite(model[i])) continue;
      double r = (flux[i] - model[i]) / sig[i];
      if (fabs(r) > fabs(worst)) worst = r;
    }
    double a = fabs(worst);
    const char *ch = a < 1 ? NULL : a < 2 ? (s->utf8 ? "\xc2\xb7" : ".") : a < 3 ? (worst > 0 ? "+" : "-")
                              : (worst > 0 ? (s->utf8 ? "\xe2\x86\x91" : "^") : (s->utf8 ? "\xe2\x86\x93" : "v"));
    if (ch) dt_grid_text(g, L->plot_x + c, gy, ch, a >= 3 ? DT_R_BAD : a >= 2 ? DT_R_WARN : DT_R_AXIS,
                         a >= 3 ? DT_A_BOLD : 0, 1);
  }
}

/* What a line panel draws: the analysis' arrays, or -- when the analysis
 * of the current state failed -- the spectrum's own pixels in the view
 * (no continuum, no model), so the data are never hidden by a failure. */
/* Whose lines a panel shows: the main doublet's (the session's analysis) or
 * a linked species' (its own analysis of the spectrum). */
typedef struct panel_src {
  dt_analysis *an;
  int an_ok;
  size_t n;                         /* pixels of the analysis */
  const dt_doublet *d;
  const char *species;              /* NULL: the main doublet */
  const char *msg;                  /* why there is no analysis */
} panel_src;

typedef struct panel_data {
  size_t n;
  const double *vel, *flux, *sig;
  const double *cont, *model;       /* NULL: not known */
  const unsigned char *mask;
  int from_analysis;
} panel_data;

static int panel_data_get(dt_insp *s, const panel_src *src, int l, panel_data *pd) {
  const dt_doublet *d = src->d;
  memset(pd, 0, sizeof *pd);
  if (!s->ss->loaded) return -1;
  if (src->an_ok) {
    pd->n = src->n;
    pd->vel = dt_analysis_velocity(src->an, l);
    pd->flux = dt_analysis_flux(src->an);
    pd->sig = dt_analysis_sigma(src->an);
    pd->cont = dt_analysis_continuum(src->an);
    pd->model = dt_analysis_model(src->an);
    pd->mask = dt_analysis_mask(src->an);
    pd->from_analysis = 1;
    return pd->vel && pd->flux && pd->sig && pd->cont && pd->mask ? 0 : -1;
  }
  if (!d || !(s->view_hi > s->view_lo)) return -1;
  /* the pixels of the view, one beyond each end so lines reach the edges */
  const dt_spectrum *sp = s->ss->spec;
  double lo = dt_wavelength(s->view_lo, d->line[l].lambda0, s->ss->j.vsys);
  double hi = dt_wavelength(s->view_hi, d->line[l].lambda0, s->ss->j.vsys);
  size_t i0 = dt_spectrum_index(sp, lo), i1 = dt_spectrum_index(sp, hi);
  if (i0 > 0) i0--;
  if (i1 < sp->n) i1++;
  if (i1 <= i0) return -1;
  pd->n = i1 - i0;
  double *vel = scratch(s, pd->n, 5);
  if (!vel) return -1;
  for (size_t i = 0; i < pd->n; i++) vel[i] = dt_velocity(sp->wave[i0 + i], d->line[l].lambda0, s->ss->j.vsys);
  pd->vel = vel;
  pd->flux = sp->flux + i0;
  pd->sig = sp->sigma + i0;
  pd->mask = sp->mask + i0;
  return 0;
}

static int cmp_double(const void *a, const void *b) {
  double x = *(const double *)a, y = *(const double *)b;
  return (x > y) - (x < y);
}

/* The flux level a panel is scaled to: the continuum's highest value in the
 * view, or without a continuum the 90th percentile of the unmasked flux
 * there (tmp: n doubles of scratch). */
static double panel_level(const dt_insp *s, const panel_data *pd, double *tmp) {
  double c = 0;
  if (pd->cont) {
    for (size_t i = 0; i < pd->n; i++)
      if (pd->vel[i] >= s->view_lo && pd->vel[i] <= s->view_hi && pd->cont[i] > c) c = pd->cont[i];
  } else {
    size_t m = 0;
    for (size_t i = 0; i < pd->n; i++)
      if (!pd->mask[i] && isfinite(pd->flux[i]) && pd->vel[i] >= s->view_lo && pd->vel[i] <= s->view_hi)
        tmp[m++] = pd->flux[i];
    if (m) {
      qsort(tmp, m, sizeof *tmp, cmp_double);
      c = tmp[(size_t)(0.9 * (double)(m - 1))];
    }
  }
  return c > 0 && isfinite(c) ? c : 1;
}

/* The curves of a panel, scaled (by the continuum when normalised):
 * flux yf, error ys, continuum yc, and the model ym where it departs from
 * the continuum (and one pixel beyond), so the continuum stays visible. */
static void panel_curves(const panel_data *pd, int norm, double *yf, double *ys, double *yc, double *ym) {
  size_t n = pd->n;
  const double *cont = pd->cont, *model = pd->model;
  for (size_t i = 0; i < n; i++) {
    double c = norm && cont ? cont[i] : 1.0;
    yf[i] = pd->flux[i] / c;
    ys[i] = pd->sig[i] / c;
    yc[i] = cont ? cont[i] / c : NAN;
    ym[i] = model && cont && fabs(model[i] / cont[i] - 1) > DEPARTS ? model[i] / c : NAN;
  }
  for (size_t i = 0; model && cont && i < n; i++)
    if (!isnan(ym[i]) && ((i > 0 && isnan(ym[i - 1])) || (i + 1 < n && isnan(ym[i + 1])))) {
      if (i > 0 && isnan(ym[i - 1])) ym[i - 1] = model[i - 1] / (norm ? cont[i - 1] : 1.0);
      if (i + 1 < n && isnan(ym[i + 1])) {
        ym[i + 1] = model[i + 1] / (norm ? cont[i + 1] : 1.0);
        i++;
      }
    }
}

/* Night-sky emission lines, standard air [Angstrom]: the sodium D doublet
 * (NIST Atomic Spectra Database) and the [O I] airglow lines 5577, 6300,
 * 6364 (from memory).  They are topocentric: at rest for the observer. */
static const double sky_air_A[] = {5889.950, 5895.924, 5577.339, 6300.304, 6363.776};

/* Mark where the night-sky lines fall in panel l (velocity relative to the
 * panel's line and vsys, in the spectrum's frame): only when the frame is
 * known (said by the file or the caller) and the topocentric one can be
 * reached from it (the time and site of a converted spectrum). */
static void mark_sky(dt_insp *s, dt_plot *p, const dt_doublet *d, int l, int row) {
  const dt_spectrum *sp = s->ss->spec;
  if (!d || !sp || !strcmp(sp->frame_from, "assumed")) return;
  double k = 1.0; /* lambda in the spectrum's frame = k * lambda topocentric */
  if (sp->frame != DT_FRAME_TOPOCENT) {
    dt_err e;
    if (!sp->has_pos || dt_frame_factor(DT_FRAME_TOPOCENT, sp->frame, sp->ra, sp->dec, &sp->obs, &k, &e))
      return;
  }
  for (size_t i = 0; i < sizeof sky_air_A / sizeof sky_air_A[0]; i++) {
    double lam = k * dt_air_to_vac(sky_air_A[i]);
    if (lam < sp->wave[0] || lam > sp->wave[sp->n - 1]) continue;
    double v = dt_velocity(lam, d->line[l].lambda0, s->ss->j.vsys);
    if (v < s->view_lo || v > s->view_hi) continue;
    dt_plot_mark(p, v, row, s->utf8 ? "\xe2\x89\x88" : "~", DT_R_WARN, DT_A_BOLD);
  }
}

/* The velocity axis under the lower panel, the cursor's position at its
 * right end. */
static void draw_vaxis(dt_insp *s, const layout *L, const dt_plot *p, const dt_doublet *d) {
  dt_grid *g = &s->g;
  dt_grid_printf(g, 0, L->vaxis_y, DT_R_AXIS, 0, L->gutter - 1, "km/s");
  char cur[80];
  syms ys = symbols(s);
  /* a narrow plot keeps its tick labels: the wavelength gives way */
  if (p->w >= 90)
    snprintf(cur, sizeof cur, " cursor %+.1f km/s  %.2f %s", s->cursor_v,
             d ? dt_wavelength(s->cursor_v, d->line[s->panel].lambda0, s->ss->j.vsys) : NAN, ys.ang);
  else
    snprintf(cur, sizeof cur, " cursor %+.1f km/s", s->cursor_v);
  int len = cells(cur);
  axis_row(g, p, L->plot_x, L->vaxis_y, 0, p->w - len - 1);
  dt_grid_text(g, L->plot_x + p->w - len, L->vaxis_y, cur, DT_R_LABEL, 0, -1);
}

/* The absorber systems as bands under the lower panel, each named with its
 * verdict; the selected one (the one the verdict keys judge) in reverse. */
static void draw_systems(dt_insp *s, const layout *L, const dt_plot *p) {
  if (L->sys_y < 0) return;
  dt_grid *g = &s->g;
  const dt_system_set *set = &s->ss->systems;
  dt_grid_printf(g, 0, L->sys_y, DT_R_AXIS, 0, L->gutter - 1, "system");
  for (size_t k = 0; k < set->n; k++) {
    const dt_system *y = &set->sys[k];
    double lo = y->vlo > p->xmin ? y->vlo : p->xmin, hi = y->vhi < p->xmax ? y->vhi : p->xmax;
    if (!(lo < hi)) continue;
    int c0 = dt_plot_column(p, lo), c1 = dt_plot_column(p, hi);
    if (c0 < 0 || c1 < 0) continue;
    int sel = k == s->ss->selsys;
    const char *bar = s->utf8 ? (sel ? "\xe2\x94\x81" : "\xe2\x94\x80") : (sel ? "=" : "-");
    for (int c = c0; c <= c1; c++) dt_grid_text(g, L->plot_x + c, L->sys_y, bar, DT_R_LABEL, sel ? DT_A_BOLD : DT_A_DIM, 1);
    dt_verdict v = dt_judgement_system_verdict(&s->ss->j, k ? y->name : "");
    char lab[80];
    snprintf(lab, sizeof lab, " %s: %s ", y->name, v == DT_VERDICT_NONE ? "none yet" : dt_verdict_name(v));
    int len = cells(lab), room = c1 - c0 + 1;
    if (len > room) { /* shorter: the verdict's first three letters, then the name alone */
      static const char *const short_name[] = {"-", "det", "not", "uns", "bad"};
      snprintf(lab, sizeof lab, " %s: %s ", y->name, short_name[v >= 0 && v <= 4 ? v : 0]);
      len = cells(lab);
    }
    if (len > room) {
      snprintf(lab, sizeof lab, " %s ", y->name);
      len = cells(lab);
    }
    int start = c0 + (room - len) / 2;
    if (start < c0) start = c0;
    int role = v == DT_VERDICT_DETECTED ? DT_R_GOOD : v == DT_VERDICT_NONE ? DT_R_LABEL : DT_R_WARN;
    dt_grid_text(g, L->plot_x + start, L->sys_y, lab, role, sel ? DT_A_BOLD | DT_A_REVERSE : 0, room);
  }
}

/* Line l of src in the panel at row gy; the last panel draws the velocity
 * axis (and the systems) under it. */
static void draw_panel_of(dt_insp *s, const layout *L, int gy, int l, const panel_src *src, int last) {
  dt_grid *g = &s->g;
  syms y = symbols(s);
  const dt_doublet *d = src->d;
  /* the gutter: which line (and species), is the cursor here */
  if (d) {
    char lab[16];
    snprintf(lab, sizeof lab, "%.0f", floor(d->line[l].lambda0)); /* lines go by their integer part */
    if (!src->species && s->panel == l) dt_grid_text(g, 0, gy, y.arrow, DT_R_LABEL, DT_A_BOLD, 1);
    dt_grid_text(g, 1, gy, lab, DT_R_LABEL, DT_A_BOLD, 5);
  }
  for (int r = 0; r < L->pan_h; r++) dt_grid_text(g, L->gutter - 1, gy + r, y.vbar, DT_R_AXIS, 0, 1);
  panel_data pd;
  if (panel_data_get(s, src, l, &pd)) {
    if (l == 0)
      dt_grid_printf(g, L->plot_x + 1, gy + L->pan_h / 2, DT_R_BAD, 0, L->plot_w - 2, "%s",
                     !s->ss->loaded ? "no data" : src->msg[0] ? src->msg : "no analysis");
    return;
  }
  size_t n = pd.n;
  double *yf = scratch(s, n, 0), *ys = scratch(s, n, 1), *yc = scratch(s, n, 2), *ym = scratch(s, n, 3),
         *yk = scratch(s, n, 4);
  if (!yf) return;
  int norm = s->normalised && pd.cont;
  panel_curves(&pd, norm, yf, ys, yc, ym);
  double level = norm ? 1.0 : panel_level(s, &pd, yk);
  double ymin = -0.15 * level, ymax = 1.35 * level;
  dt_plot *p = &s->p;
  /* a panel of four rows or more gives its last row to the residuals */
  int strip = L->pan_h >= 4 && pd.model;
  int ph = L->pan_h - strip;
  if (dt_plot_begin(p, s->mode, L->plot_w, ph, s->view_lo, s->view_hi, ymin, ymax)) return;
  /* continuum windows, and the one being marked */
  if (d)
    for (size_t k = 0; k < s->ss->j.nwin; k++)
      dt_plot_vspan(p, dt_velocity(s->ss->j.win[k].lo, d->line[l].lambda0, s->ss->j.vsys),
                    dt_velocity(s->ss->j.win[k].hi, d->line[l].lambda0, s->ss->j.vsys), DT_R_WINDOW);
  if (s->anchor && s->anchor_panel == l) dt_plot_vspan(p, s->anchor_v, s->cursor_v, DT_R_WINDOW);
  dt_plot_hline(p, 0, DT_R_REF);
  /* a dotted guide at v = 0 (the rest frame) */
  double zx[64], zy[64];
  int nz = p->dh / 2 < 64 ? p->dh / 2 : 64;
  for (int i = 0; i < nz; i++) {
    zx[i] = 0;
    zy[i] = ymax - (2 * i + 0.5) * (ymax - ymin) / p->dh;
  }
  dt_plot_points(p, zx, zy, NULL, (size_t)nz, DT_R_REF, 0);
  dt_plot_line(p, pd.vel, ys, pd.mask, n, DT_R_SIGMA, 0);
  if (pd.cont) dt_plot_line(p, pd.vel, yc, NULL, n, DT_R_CONT, 0);
  if (pd.from_analysis && s->ss->j.ncomp > 1) /* one component's model is the total model */
    for (size_t k = 0; k < s->ss->j.ncomp; k++) {
      const double *cm = dt_analysis_component_model(src->an, k);
      if (!cm) continue;
      for (size_t i = 0; i < n; i++)
        yk[i] = fabs(cm[i] / pd.cont[i] - 1) > DEPARTS ? cm[i] / (norm ? pd.cont[i] : 1.0) : NAN;
      dt_plot_line(p, pd.vel, yk, NULL, n, k == s->ss->sel ? DT_R_COMPSEL : DT_R_COMP, 0);
    }
  dt_plot_line(p, pd.vel, yf, pd.mask, n, DT_R_FLUX, DT_PLOT_MARK_OFF);
  dt_plot_points(p, pd.vel, yf, pd.mask, n, DT_R_MASKED, DT_PLOT_MARK_OFF);
  if (pd.model) dt_plot_line(p, pd.vel, ym, NULL, n, DT_R_MODEL, DT_PLOT_ON_TOP); /* distinct over the data */
  /* component numbers along the top row */
  for (size_t k = 0; k < s->ss->j.ncomp; k++) {
    char num[4];
    snprintf(num, sizeof num, "%zu", (k + 1) % 10);
    dt_plot_mark(p, s->ss->j.comp[k].v, 0, num, k == s->ss->sel ? DT_R_COMPSEL : DT_R_COMP,
                 k == s->ss->sel ? DT_A_BOLD | DT_A_REVERSE : DT_A_BOLD);
  }
  mark_sky(s, p, d, l, ph > 2 ? 1 : 0); /* night-sky lines, second row */
  dt_plot_render(p, g, L->plot_x, gy);
  if (strip) draw_residuals(s, L, p, gy + ph, pd.vel, pd.flux, pd.sig, pd.model, pd.mask, n);
  /* the cursor: a tick under the plot, so the trough above stays visible */
  int col = dt_plot_column(p, s->cursor_v);
  if (col >= 0) {
    dt_grid_text(g, L->plot_x + col, gy + ph - 1, s->utf8 ? "\xe2\x96\xb2" : "^", DT_R_LABEL, DT_A_BOLD, 1);
    dt_grid_shade(g, L->plot_x + col, gy + ph - 1, 1, 1, DT_R_CURSOR, 0);
  }
  ytick(g, p, 1, gy, norm ? 1.0 : level, norm ? "1" : pd.cont ? "C" : "F");
  ytick(g, p, 1, gy, 0, "0");
  /* without an analysis the panel says so in its top row: data only */
  if (!pd.from_analysis && l == 0) {
    char why[260];
    snprintf(why, sizeof why, " data only: %.200s ", src->species && src->msg[0] ? src->msg : "no analysis of this state");
    dt_grid_text(g, L->plot_x + 1, gy, why, DT_R_WARN, DT_A_REVERSE, p->w - 2);
  }
  if (src->species) { /* the species, at the right of its panel's top row */
    char lab[40];
    snprintf(lab, sizeof lab, " %s %.0f ", src->species, d ? floor(d->line[l].lambda0) : 0.0);
    int len = cells(lab);
    if (len < p->w / 2) dt_grid_text(g, L->plot_x + p->w - len, gy, lab, DT_R_GOOD, DT_A_BOLD | DT_A_REVERSE, len);
  }
  if (last && !L->hi_h) {
    draw_vaxis(s, L, p, dt_atomic_find(s->atomic, s->ss->j.doublet));
    draw_systems(s, L, p);
  }
}

/* Line l of the main doublet; after the two, the stronger line of each
 * linked species on the same velocity axis (components in the same place). */
static void draw_panel(dt_insp *s, const layout *L, int l) {
  dt_session *ss = s->ss;
  panel_src src = {ss->an, ss->an_ok, ss->out.n, dt_atomic_find(s->atomic, ss->j.doublet), NULL, ss->an_msg};
  draw_panel_of(s, L, L->pan_y[l], l, &src, l == 1 && L->nlink == 0);
  for (int k = 0; l == 1 && k < L->nlink; k++) {
    dt_session_species *sp = &ss->lsp[k];
    panel_src ls = {sp->an, sp->ok, sp->out.n, dt_atomic_find(s->atomic, ss->j.linked[k]), ss->j.linked[k],
                    sp->msg};
    draw_panel_of(s, L, L->link_y[k], 0, &ls, k == L->nlink - 1);
  }
}

/* The 21-cm spectrum at the sightline (inspect --hi), on the panels'
 * velocity axis: T_B against velocity relative to vsys, in the spectrum's
 * frame. */
static void draw_hi(dt_insp *s, const layout *L) {
  dt_grid *g = &s->g;
  syms y = symbols(s);
  int gy = L->hi_y;
  dt_grid_text(g, 1, gy, "HI", DT_R_LABEL, DT_A_BOLD, 5);
  for (int r = 0; r < L->hi_h; r++) dt_grid_text(g, L->gutter - 1, gy + r, y.vbar, DT_R_AXIS, 0, 1);
  dt_plot *p = &s->p;
  const dt_doublet *d = dt_atomic_find(s->atomic, s->ss->j.doublet);
  const dt_hi_sample *h = &s->hs;
  if (!s->has_hi || h->status == DT_HI_OUTSIDE || !h->nchan) {
    dt_grid_printf(g, L->plot_x + 1, gy + L->hi_h / 2, DT_R_WARN, 0, L->plot_w - 2, "21 cm: %s",
                   s->has_hi ? dt_hi_status_name(h->status) : s->hi_msg);
  } else {
    double *v = scratch(s, h->nchan, 0);
    if (v) {
      /* velocities relative to the vsys of now: (1+v1/c)(1+vs1/c) = (1+v2/c)(1+vs2/c) */
      double f = (1 + s->hs_vsys / DT_C_KMS) / (1 + s->ss->j.vsys / DT_C_KMS);
      double tmax = 0;
      for (size_t i = 0; i < h->nchan; i++) {
        v[i] = DT_C_KMS * ((1 + h->vel[i] / DT_C_KMS) * f - 1);
        if (isfinite(h->tb[i]) && h->tb[i] > tmax) tmax = h->tb[i];
      }
      if (!(tmax > 0)) tmax = 1;
      if (!dt_plot_begin(p, s->mode, L->plot_w, L->hi_h, s->view_lo, s->view_hi, -0.1 * tmax, 1.1 * tmax)) {
        dt_plot_hline(p, 0, DT_R_REF);
        dt_plot_line(p, v, h->tb, NULL, h->nchan, DT_R_FLUX, 0);
        dt_plot_render(p, g, L->plot_x, gy);
        dt_grid_printf(g, 0, gy + 1, DT_R_AXIS, 0, L->gutter - 1, "%5.1fK", tmax);
      }
    }
  }
  /* the velocity axis goes under this panel */
  dt_plot_begin(p, s->mode, L->plot_w, 1, s->view_lo, s->view_hi, 0, 1);
  draw_vaxis(s, L, p, d);
  draw_systems(s, L, p);
}

/* ------------------------------------------------------------------ table */

/* Column positions of the component table (relative to its left edge);
 * with partial covering the covering factor takes TC_FIX and the held
 * parameters move TC_CFW to the right. */
enum { TC_NUM = 1, TC_V = 5, TC_B = 24, TC_N = 40, TC_FIX = 57, TC_CFW = 26 };

/* Component k's covering factor: "0.62±0.05 partial" (the flag of
 * cover.h: partial, or unconstrained), "1.00±0.02", "-" before a fit
 * gave one; the error only while the components are the fit's. */
static const char *cover_text(const dt_insp *s, size_t k, int errs, char *buf, size_t size) {
  const dt_judgement *j = &s->ss->j;
  if (!(j->cf[k] > 0)) return snprintf(buf, size, "-"), buf;
  if (!errs || !j->fit.covering) return snprintf(buf, size, "%.2f", j->cf[k]), buf;
  char pm[48];
  dt_view_pm(s, pm, sizeof pm, j->cf[k], j->fit.cf_err[k], 2);
  const dt_doublet *d = s->ss->an_ok ? s->ss->out.doublet : NULL;
  int flag = dt_cover_flag(d, &j->comp[k], j->fit.err[k].logN, j->cf[k], j->fit.cf_err[k],
                           dt_cover_lsf_fwhm(j->resolution, j->fwhm_kms));
  snprintf(buf, size, "%s%s%s", pm, flag ? " " : "", dt_cover_flag_name(flag));
  return buf;
}

/* A fitted parameter: "value±error"; "value at limit" when the fit left it
 * on a bound of its range (its error means nothing then); "value held"
 * when it was held out of the fit. */
static const char *param_text(const dt_insp *s, size_t k, dt_session_param p, char *buf, size_t size, double v,
                              double err, int dec) {
  static const unsigned bit[3] = {DT_FREEZE_V, DT_FREEZE_B, DT_FREEZE_N};
  if (s->ss->j.frozen[k] & bit[p]) snprintf(buf, size, "%.*f held", dec, v);
  else if (s->ss->j.has_fit && dt_session_at_bound(s->ss, k, p)) snprintf(buf, size, "%.*f at limit", dec, v);
  else dt_view_pm(s, buf, size, v, err, dec);
  return buf;
}

/* log N with its profile-likelihood interval where the last fit has one
 * and it is not the symmetric error: "13.52+0.31-0.08", "> 13.20 sat"
 * (no upper end: saturated), "< 11.40", "11.9 ?" (neither end). */
static const char *logn_text(const dt_insp *s, size_t k, char *buf, size_t size, double v, double err) {
  const dt_analysis_out *o = &s->ss->out;
  const dt_judgement *j = &s->ss->j;
  if (!s->ss->an_ok || !o->have_intervals || o->fit.ncomp != j->ncomp || (j->frozen[k] & DT_FREEZE_N) ||
      !j->has_fit || j->fit.status != 0)
    return param_text(s, k, DT_PARAM_LOGN, buf, size, v, err, 2);
  const dt_profile_interval *p = &o->logN_int[k];
  if (p->incomplete) return param_text(s, k, DT_PARAM_LOGN, buf, size, v, err, 2);
  double lo = v - p->lo, hi = p->hi - v;
  switch (p->flag) {
  case DT_PROFILE_LOWER_LIMIT: snprintf(buf, size, "> %.2f sat", p->lo); break;
  case DT_PROFILE_UPPER_LIMIT: snprintf(buf, size, "< %.2f", p->hi); break;
  case DT_PROFILE_UNBOUNDED: snprintf(buf, size, "%.2f ?", v); break;
  default:
    if (fabs(lo - hi) < 0.01 || !(lo >= 0) || !(hi >= 0)) return param_text(s, k, DT_PARAM_LOGN, buf, size, v, err, 2);
    snprintf(buf, size, "%.2f+%.2f-%.2f", v, hi, lo);
  }
  return buf;
}

/* The component table: heading, then as many rows as fit (up to row end
 * less the rows below) around the selection.  Returns the next row. */
static int table_components(dt_insp *s, const syms *y, int x, int row, int maxw, int end) {
  dt_grid *g = &s->g;
  const dt_judgement *j = &s->ss->j;
  char b1[64], b2[72]; /* b2: a sign and b1 */
  int errs = j->has_fit && j->fit.status == 0 && j->fit.ncomp == j->ncomp;
  int rows = end - row - 5;
  if (rows < 1) rows = 1;
  size_t first = 0, shown = (size_t)rows;
  if (j->ncomp > shown && s->ss->sel >= shown) first = s->ss->sel - shown + 1;
  dt_grid_fill(g, x - 1, row, maxw + 2, 1, " ", DT_R_LABEL, DT_R_NONE, DT_A_UNDERLINE);
  dt_grid_text(g, x + TC_NUM, row, "#", DT_R_LABEL, DT_A_BOLD | DT_A_UNDERLINE, -1);
  dt_grid_text(g, x + TC_V, row, "v [km/s]", DT_R_LABEL, DT_A_BOLD | DT_A_UNDERLINE, -1);
  dt_grid_text(g, x + TC_B, row, "b [km/s]", DT_R_LABEL, DT_A_BOLD | DT_A_UNDERLINE, -1);
  dt_grid_text(g, x + TC_N, row, "log N [cm-2]", DT_R_LABEL, DT_A_BOLD | DT_A_UNDERLINE, -1);
  int fix = TC_FIX + (j->covering ? TC_CFW : 0);
  if (j->covering) dt_grid_text(g, x + TC_FIX, row, "C_f", DT_R_LABEL, DT_A_BOLD | DT_A_UNDERLINE, maxw - TC_FIX);
  int hx = fix < maxw ? dt_grid_text(g, x + fix, row, "held", DT_R_LABEL, DT_A_BOLD | DT_A_UNDERLINE, maxw - fix) : 0;
  if (j->ncomp > shown && fix + hx + 1 < maxw)
    dt_grid_printf(g, x + fix + hx + 1, row, DT_R_LABEL, DT_A_UNDERLINE, maxw - fix - hx - 1, "%zu-%zu of %zu",
                   first + 1, first + shown, j->ncomp);
  row++;
  if (j->ncomp == 0) {
    char k[16];
    dt_grid_printf(g, x, row++, DT_R_TEXT, DT_A_DIM, maxw, "  no components  (%s adds one at the cursor)",
                   keyname_of_cmd(DT_CMD_ADD_COMPONENT, k, sizeof k));
  }
  for (size_t k = first; k < j->ncomp && k < first + shown; k++) {
    const dt_component *c = &j->comp[k], *e = errs ? &j->fit.err[k] : NULL;
    int sel = k == s->ss->sel, role = sel ? DT_R_COMPSEL : DT_R_TEXT, attr = sel ? DT_A_BOLD : 0;
    if (sel) dt_grid_text(g, x, row, y->arrow, role, attr, 1);
    dt_grid_printf(g, x + TC_NUM, row, role, attr, 3, "%zu", k + 1);
    snprintf(b2, sizeof b2, "%s%s", c->v >= 0 ? "+" : "", param_text(s, k, DT_PARAM_V, b1, sizeof b1, c->v, e ? e->v : NAN, 1));
    dt_grid_text(g, x + TC_V, row, b2, role, attr, TC_B - TC_V - 1);
    dt_grid_text(g, x + TC_B, row, param_text(s, k, DT_PARAM_B, b1, sizeof b1, c->b, e ? e->b : NAN, 1), role, attr,
                 TC_N - TC_B - 1);
    dt_grid_text(g, x + TC_N, row, logn_text(s, k, b1, sizeof b1, c->logN, e ? e->logN : NAN), role, attr,
                 TC_FIX - TC_N - 1);
    if (j->covering)
      dt_grid_text(g, x + TC_FIX, row, cover_text(s, k, errs, b1, sizeof b1), role, attr, TC_CFW - 1);
    char fz[4];
    dt_freeze_str(j->frozen[k], fz);
    snprintf(b1, sizeof b1, "%s%s%s", fz, j->tie_b && fz[0] ? " " : "", j->tie_b ? "tied-b" : "");
    if (fix < maxw) dt_grid_text(g, x + fix, row, b1, DT_R_WARN, 0, maxw - fix);
    row++;
  }
  return row;
}

/* The fit's row: chi2, dof, BIC, the continuum, a failed fit. */
static void table_fit(dt_insp *s, const syms *y, int x, int row, int maxw) {
  dt_grid *g = &s->g;
  const dt_judgement *j = &s->ss->j;
  double chi2r = NAN, bic = NAN;
  long dof = 0;
  int status = 0;
  const dt_fit_result *f = j->has_fit ? &j->fit : s->ss->an_ok ? &s->ss->out.fit : NULL;
  if (f) {
    chi2r = f->chi2_red;
    bic = f->bic;
    dof = f->dof;
    status = j->has_fit ? f->status : 0;
  }
  char cont[80];
  if (j->cont_order < 0) snprintf(cont, sizeof cont, "continuum fixed at 1");
  else if (j->nwin && s->ss->an_fallback)
    snprintf(cont, sizeof cont, "continuum order %d, auto (%zu window%s: too few pixels)", j->cont_order, j->nwin,
             j->nwin == 1 ? "" : "s");
  else if (j->nwin)
    snprintf(cont, sizeof cont, "continuum order %d, %zu window%s", j->cont_order, j->nwin, j->nwin == 1 ? "" : "s");
  else snprintf(cont, sizeof cont, "continuum order %d, auto", j->cont_order);
  int cx = dt_grid_printf(g, x, row, DT_R_LABEL, 0, maxw, "fit ");
  cx += dt_grid_printf(g, x + cx, row, DT_R_TEXT, 0, maxw - cx, " %s %.3f  dof %ld  BIC %.1f   %s%s%s", y->chi, chi2r,
                       dof, bic, cont, j->covering ? "  partial covering" : "",
                       s->ss->auto_refit ? "" : "  refit: manual");
  if (s->ss->fit_pending && cx < maxw)
    dt_grid_printf(g, x + cx, row, DT_R_TEXT, 0, maxw - cx, "  fitting...");
  else if (status != 0 && cx < maxw)
    dt_grid_printf(g, x + cx, row, DT_R_BAD, DT_A_BOLD, maxw - cx, "  %s",
                   status == DT_ENOCONV ? "NOT CONVERGED" : "FIT FAILED");
}

/* Line l's measurements: of the selected system's range when there are
 * several systems, else of the analysis. */
static void table_line(dt_insp *s, const syms *y, int x, int row, int maxw, int l) {
  dt_grid *g = &s->g;
  char b1[64], b2[64];
  size_t msel = s->ss->selsys;
  int sysm = s->ss->systems.n > 1 && msel < s->ss->systems.n && s->ss->has_sysmeas;
  const dt_analysis_line *m = sysm ? &s->ss->sysmeas[msel].line[l] : &s->ss->out.line[l];
  int mst = sysm ? s->ss->sysmeas[msel].measure_status : s->ss->out.measure_status;
  if (!s->ss->an_ok || mst != 0 || !m->line) {
    dt_grid_printf(g, x, row, DT_R_TEXT, DT_A_DIM, maxw, "line %d   no measurement", l + 1);
    return;
  }
  int n0 = dt_grid_printf(g, x, row, DT_R_LABEL, 0, maxw, "%-9s", m->line->label);
  int n1 = dt_grid_printf(g, x + n0, row, m->W_sig >= 3 ? DT_R_GOOD : DT_R_TEXT, 0, maxw - n0, " W %s %s (%.1f%s)",
                          dt_view_pm(s, b2, sizeof b2, 1e3 * m->W, 1e3 * m->W_err, 0), y->mA, m->W_sig, y->sig);
  if (isfinite(m->logN_aod)) snprintf(b1, sizeof b1, "%s", dt_view_pm(s, b2, sizeof b2, m->logN_aod, m->logN_aod_err, 2));
  else snprintf(b1, sizeof b1, "-");
  /* every number labelled; when the row is short, the column density of
   * a detection or the limits of a non-detection come first */
  char na[96], lim[96];
  snprintf(na, sizeof na, "  log Na %s", b1);
  snprintf(lim, sizeof lim, "  %g%s lim %.0f %s, log N < %.2f", s->ss->nsigma, y->sig, 1e3 * m->W_limit, y->mA,
           m->logN_limit);
  int room = maxw - n0 - n1, wn = cells(na), wl = cells(lim);
  int show_na = wn + wl <= room || m->W_sig >= 3, show_lim = wn + wl <= room || m->W_sig < 3;
  int n2 = 0;
  if (show_na) n2 += dt_grid_text(g, x + n0 + n1, row, na, DT_R_TEXT, 0, room);
  if (show_lim) n2 += dt_grid_text(g, x + n0 + n1 + n2, row, lim, DT_R_TEXT, 0, room - n2);
  char sat[96];
  int ns = snprintf(sat, sizeof sat, "%s", m->nsat ? "  saturated px" : l == 1 && (sysm ? dt_systems_saturated(s->ss->sysmeas[msel].line) : s->ss->out.saturated) ? "  ratio: saturated" : "");
  if (m->masked_frac > 0 && ns >= 0 && (size_t)ns < sizeof sat)
    ns += snprintf(sat + ns, sizeof sat - (size_t)ns, "  masked %.0f%%", 100 * m->masked_frac);
  if (m->blend == DT_BLEND_MODEL && ns >= 0 && (size_t)ns < sizeof sat)
    ns += snprintf(sat + ns, sizeof sat - (size_t)ns, "  blended %.0f%%", 100 * m->blend_frac);
  if (l == 0 && s->ss->out.cont_tau > DT_ANALYSIS_CONT_TAU && ns >= 0 && (size_t)ns < sizeof sat)
    snprintf(sat + ns, sizeof sat - (size_t)ns, "  wings in continuum: widen window");
  if (sat[0]) dt_grid_text(g, x + n0 + n1 + n2, row, sat, DT_R_WARN, 0, maxw - n0 - n1 - n2);
}

/* The 21-cm numbers at this sightline (inspect --hi). */
static void table_hi(dt_insp *s, const syms *y, int x, int row, int maxw) {
  dt_grid *g = &s->g;
  const dt_judgement *j = &s->ss->j;
  char b2[64];
  const dt_hi_sample *h = &s->hs;
  int n0 = dt_grid_printf(g, x, row, DT_R_LABEL, 0, maxw, "%-9s", "HI 21cm");
  if (s->has_hi && h->status == DT_HI_OK)
    dt_grid_printf(g, x + n0, row, DT_R_TEXT, 0, maxw - n0,
                   " log N(HI) %s  v %+.1f  %s %.1f km/s  Tpeak %.2f K  (thin: lower limit)",
                   dt_view_pm(s, b2, sizeof b2, h->logN, h->logN_err, 2),
                   DT_C_KMS * ((1 + h->v / DT_C_KMS) * (1 + s->hs_vsys / DT_C_KMS) / (1 + j->vsys / DT_C_KMS) - 1),
                   y->sig, h->sigma, h->tpeak);
  else
    dt_grid_printf(g, x + n0, row, DT_R_WARN, 0, maxw - n0, " %s",
                   s->has_hi ? dt_hi_status_name(h->status) : s->hi_msg);
}

/* The verdict row: the selected system's suggestion, verdict and the note. */
static void table_verdict(dt_insp *s, int x, int row, int maxw) {
  dt_grid *g = &s->g;
  const dt_judgement *j = &s->ss->j;
  int vx = x;
  size_t sel = s->ss->selsys < s->ss->systems.n ? s->ss->selsys : 0;
  if (sel > 0) /* another system than the target: its name first */
    vx += dt_grid_printf(g, vx, row, DT_R_LABEL, DT_A_BOLD | DT_A_REVERSE, maxw, "%s", s->ss->systems.sys[sel].name) + 1;
  int has_sug = s->ss->has_sysres || (s->ss->has_suggest && sel == 0);
  dt_verdict sug = s->ss->has_sysres && sel > 0 ? s->ss->sysres[sel].suggested : s->ss->suggested;
  const char *why = s->ss->has_sysres && sel > 0 ? s->ss->sysres[sel].reason : s->ss->reason;
  if (has_sug) {
    vx += dt_grid_printf(g, vx, row, DT_R_LABEL, 0, maxw - (vx - x), "suggested ");
    vx += dt_grid_printf(g, vx, row, DT_R_TEXT, 0, maxw - (vx - x), "%s", dt_verdict_name(sug));
    if (why[0]) vx += dt_grid_printf(g, vx, row, DT_R_TEXT, DT_A_DIM, maxw - (vx - x), " (%s)", why);
    vx += 3;
  }
  dt_verdict vd = dt_judgement_system_verdict(j, sel ? s->ss->systems.sys[sel].name : "");
  int vrole = vd == DT_VERDICT_DETECTED ? DT_R_GOOD : vd == DT_VERDICT_NONE ? DT_R_TEXT :
              vd == DT_VERDICT_UNUSABLE ? DT_R_BAD : DT_R_WARN;
  if (vx - x < maxw) vx += dt_grid_printf(g, vx, row, DT_R_LABEL, 0, maxw - (vx - x), "verdict ");
  if (vx - x < maxw)
    vx += dt_grid_printf(g, vx, row, vrole, DT_A_BOLD, maxw - (vx - x), "%s",
                         vd == DT_VERDICT_NONE ? "none yet" : dt_verdict_name(vd));
  if (j->note[0] && vx - x + 3 < maxw) {
    vx += dt_grid_printf(g, vx, row, DT_R_LABEL, 0, maxw - (vx - x), "   note ");
    if (vx - x < maxw) dt_grid_printf(g, vx, row, DT_R_TEXT, 0, maxw - (vx - x), "%s", j->note);
  }
}

static void draw_table(dt_insp *s, const layout *L) {
  dt_grid *g = &s->g;
  syms y = symbols(s);
  int x = L->tab_x + 1, row = L->tab_y, maxw = L->tab_w - 2;
  int side = L->tab_x > 0;
  int end = L->tab_y + L->tab_h; /* first row not ours */
  if (side)
    for (int r = L->tab_y; r < end; r++) dt_grid_text(g, L->tab_x - 1, r, y.vbar, DT_R_AXIS, 0, 1);
  else if (L->h >= 28)
    dt_grid_fill(g, 0, row++, L->w, 1, y.hbar, DT_R_AXIS, DT_R_NONE, 0);
  row = table_components(s, &y, x, row, maxw, end);
  int hirow = s->o && s->o->hi ? 1 : 0;
  if (row > end - 4 - hirow) row = end - 4 - hirow;
  int lrows = dt_view_linked_rows(s);
  if (lrows && row > end - 4 - hirow - lrows) row = end - 4 - hirow - lrows;
  if (row < L->tab_y) row = L->tab_y;
  row = dt_view_table_linked(s, x, row, maxw, end - 4 - hirow);
  table_fit(s, &y, x, row++, maxw);
  for (int l = 0; l < 2; l++) table_line(s, &y, x, row++, maxw, l);
  if (hirow) table_hi(s, &y, x, row++, maxw);
  table_verdict(s, x, row, maxw);
}

/* ------------------------------------------------------------------ status */

int dt_view_role_of_tone(dt_session_tone t) {
  switch (t) {
  case DT_TONE_GOOD: return DT_R_GOOD;
  case DT_TONE_WARN: return DT_R_WARN;
  case DT_TONE_BAD: return DT_R_BAD;
  default: return DT_R_TEXT;
  }
}

static void draw_status(dt_insp *s, const layout *L) {
  dt_grid *g = &s->g;
  int y = L->status_y;
  if (s->editing) {
    const char *prompt = s->editing == DT_EDIT_GOTO       ? "go to (number or name)> "
                         : s->editing == DT_EDIT_VELOCITY ? "cursor to (km/s)> "
                                                          : "note> ";
    int n = dt_grid_text(g, 0, y, prompt, DT_R_LABEL, DT_A_BOLD, -1);
    /* show the end of a long note */
    int room = L->w - n - 1;
    size_t len = strlen(s->edit), t = 0;
    int before = 0;
    for (size_t p = 0; p < s->edit_pos && p < len; p = dt_utf8_next(s->edit, len, p)) before++;
    while (before > room && t < len) {
      t = dt_utf8_next(s->edit, len, t);
      before--;
    }
    dt_grid_text(g, n, y, s->edit + t, DT_R_TEXT, 0, room);
    dt_cell *c = dt_grid_at(g, n + before, y);
    if (c) c->bg = DT_R_CURSOR;
    return;
  }
  /* the keys that matter most, as many as fit beside the message */
  char k[4][16], right[256];
  keyname_of_cmd(DT_CMD_VERDICT_DETECTED, k[0], sizeof k[0]);
  keyname_of_cmd(DT_CMD_VERDICT_NOT_DETECTED, k[1], sizeof k[1]);
  keyname_of_cmd(DT_CMD_VERDICT_UNSURE, k[2], sizeof k[2]);
  keyname_of_cmd(DT_CMD_VERDICT_UNUSABLE, k[3], sizeof k[3]);
  char kn[16], ku[16], kh[16], kq[16];
  keyname_of_cmd(DT_CMD_EDIT_NOTE, kn, sizeof kn);
  keyname_of_cmd(DT_CMD_UNDO, ku, sizeof ku);
  keyname_of_cmd(DT_CMD_HELP, kh, sizeof kh);
  keyname_of_cmd(DT_CMD_QUIT, kq, sizeof kq);
  char sb[1000];
  dt_session_tone tone;
  const char *m = status_text(s, sb, sizeof sb, &tone);
  int mlen = cells(m);
  char target[64] = "", ksys[16];
  if (s->ss->selsys > 0 && s->ss->selsys < s->ss->systems.n) /* the target needs no word */
    snprintf(target, sizeof target, " on %s  %s system ", s->ss->systems.sys[s->ss->selsys].name,
             keyname_of_cmd(DT_CMD_NEXT_SYSTEM, ksys, sizeof ksys));
  snprintf(right, sizeof right, " %s/%s/%s/%s verdict%s  %s note  %s undo  %s help  %s quit ", k[0], k[1], k[2],
           k[3], target, kn, ku, kh, kq);
  if (mlen + (int)strlen(right) + 1 > L->w)
    snprintf(right, sizeof right, "%s %s help  %s quit ", target, kh, kq);
  int rw = (int)strlen(right);
  int role = dt_view_role_of_tone(tone), attr = role == DT_R_BAD ? DT_A_BOLD : 0;
  if (L->status_h == 2) {
    /* wrap at the last blank that fits; the rest goes to the second row */
    int room = L->w - 1, n = 0;
    size_t mlen_b = strlen(m);
    const char *cut = NULL, *p = m;
    for (; *p && n < room; p = m + dt_utf8_next(m, mlen_b, (size_t)(p - m)), n++)
      if (*p == ' ') cut = p;
    if (!*p) cut = p;
    else if (!cut) cut = p;
    char first[1000];
    size_t len = (size_t)(cut - m) < sizeof first - 1 ? (size_t)(cut - m) : sizeof first - 1;
    memcpy(first, m, len);
    first[len] = '\0';
    dt_grid_text(g, 0, y, first, role, attr, room);
    m = *cut == ' ' ? cut + 1 : cut;
    y++;
  }
  dt_grid_text(g, 0, y, m, role, attr, L->w - rw - 1);
  dt_grid_text(g, L->w - rw, y, right, DT_R_AXIS, DT_A_DIM, -1);
}

/* ------------------------------------------------------------------ all */

void dt_view_draw(dt_insp *s, int w, int h) {
  if (dt_grid_reset(&s->g, w, h)) return;
  if (w < DT_MIN_W || h < DT_MIN_H) {
    char m1[96], m2[96];
    snprintf(m1, sizeof m1, "terminal too small: %dx%d", w, h);
    snprintf(m2, sizeof m2, "the inspector needs at least %dx%d", DT_MIN_W, DT_MIN_H);
    int y = h / 2 - 1;
    if (y < 0) y = 0;
    int x1 = (w - (int)strlen(m1)) / 2, x2 = (w - (int)strlen(m2)) / 2;
    dt_grid_text(&s->g, x1 < 0 ? 0 : x1, y, m1, DT_R_WARN, DT_A_BOLD, -1);
    dt_grid_text(&s->g, x2 < 0 ? 0 : x2, y + 1, m2, DT_R_TEXT, 0, -1);
    return;
  }
  layout L;
  compute_layout(s, w, h, &L);
  s->plot_w = L.plot_w;
  draw_title(s, &L);
  draw_overview(s, &L);
  draw_panel(s, &L, 0);
  draw_panel(s, &L, 1);
  if (L.hi_h) draw_hi(s, &L);
  draw_table(s, &L);
  draw_status(s, &L);
  if (s->choosing) dt_view_draw_chooser(s, &L);
  if (s->finished) dt_view_draw_finished(s, &L);
  if (s->help_page) dt_view_draw_help(s, &L);
}
