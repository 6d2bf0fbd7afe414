/* Velocity stacks: one panel per line of a doublet on a shared velocity
 * axis, the data as a histogram with its 1-sigma band, the continuum, the
 * total model, each component, ticks at the components' velocities and
 * masked pixels shaded (fig.h). */
#include <math.h>
#include <string.h>

#include "fig_int.h"

static double norm(const dt_fig_stack *s, const dt_fig_panel *p, const double *y, size_t i) {
  if (!y) return NAN;
  if (!s->normalised || !p->cont) return y[i];
  return p->cont[i] > 0 ? y[i] / p->cont[i] : NAN;
}

/* Pixel edges: halfway between neighbouring velocities. */
static void edges(const dt_fig_panel *p, size_t i, double *lo, double *hi) {
  size_t n = p->n;
  double dl = i > 0 ? 0.5 * (p->v[i] - p->v[i - 1]) : (n > 1 ? 0.5 * (p->v[1] - p->v[0]) : 1);
  double dh = i + 1 < n ? 0.5 * (p->v[i + 1] - p->v[i]) : dl;
  *lo = p->v[i] - dl;
  *hi = p->v[i] + dh;
}

static void panel_range(const dt_fig_stack *s, const dt_fig_panel *p, double *ylo, double *yhi) {
  double lo = NAN, hi = NAN;
  for (size_t i = 0; i < p->n; i++) {
    if (p->v[i] < s->vlo || p->v[i] > s->vhi || (p->masked && p->masked[i])) continue;
    double y = norm(s, p, p->flux, i);
    if (!isfinite(y)) continue;
    if (!(lo <= y)) lo = y;
    if (!(hi >= y)) hi = y;
  }
  if (!isfinite(lo)) lo = 0, hi = 1.2;
  if (s->normalised) {
    lo = fmin(lo, 0);
    hi = fmax(hi, 1.0);
    /* keep a spike from flattening the panel */
    if (hi > 2.0) hi = 2.0;
    if (lo < -0.5) lo = -0.5;
  }
  double pad = 0.08 * (hi - lo);
  *ylo = lo - pad;
  *yhi = hi + 1.6 * pad;
}

static void draw_curve(cairo_t *cr, const fig_axis *x, const fig_axis *y, const dt_fig_stack *s,
                       const dt_fig_panel *p, const double *c) {
  int pen = 0;
  for (size_t i = 0; i < p->n; i++) {
    double yy = norm(s, p, c, i);
    if (!isfinite(yy)) {
      pen = 0;
      continue;
    }
    double px = fig_map(x, p->v[i]), py = fig_map(y, yy);
    if (pen) cairo_line_to(cr, px, py);
    else cairo_move_to(cr, px, py);
    pen = 1;
  }
  cairo_stroke(cr);
}

static void draw_panel(fig_page *pg, const dt_fig_stack *s, const dt_fig_panel *p, double top, double height,
                       int last) {
  cairo_t *cr = pg->cr;
  double left = 62, right = 14;
  double ylo, yhi;
  panel_range(s, p, &ylo, &yhi);
  fig_axis x = {s->vlo, s->vhi, left, pg->w - right, 0};
  fig_axis y = {ylo, yhi, top + height, top, 0};
  cairo_save(cr);
  cairo_rectangle(cr, x.a, y.b, x.b - x.a, y.a - y.b);
  cairo_clip(cr);
  /* masked pixels: light grey columns */
  cairo_set_source_rgb(cr, 0.88, 0.88, 0.88);
  for (size_t i = 0; p->masked && i < p->n; i++)
    if (p->masked[i]) {
      double a, b;
      edges(p, i, &a, &b);
      cairo_rectangle(cr, fig_map(&x, a), y.b, fig_map(&x, b) - fig_map(&x, a), y.a - y.b);
    }
  cairo_fill(cr);
  /* the 1-sigma band of the data (sky blue, light) */
  if (p->err) {
    double rgb[3];
    dt_fig_palette(2, rgb);
    cairo_set_source_rgba(cr, rgb[0], rgb[1], rgb[2], 0.35);
    for (size_t i = 0; i < p->n; i++) {
      if (p->masked && p->masked[i]) continue;
      double f = norm(s, p, p->flux, i), e = norm(s, p, p->err, i);
      if (!isfinite(f) || !isfinite(e)) continue;
      double a, b;
      edges(p, i, &a, &b);
      cairo_rectangle(cr, fig_map(&x, a), fig_map(&y, f + e), fig_map(&x, b) - fig_map(&x, a),
                      fig_map(&y, f - e) - fig_map(&y, f + e));
    }
    cairo_fill(cr);
  }
  /* reference lines: zero flux, and the continuum (1 when normalised) */
  cairo_set_line_width(cr, 0.6);
  cairo_set_source_rgb(cr, 0.6, 0.6, 0.6);
  double d1[2] = {2, 2};
  cairo_set_dash(cr, d1, 2, 0);
  cairo_move_to(cr, x.a, fig_map(&y, 0));
  cairo_line_to(cr, x.b, fig_map(&y, 0));
  cairo_stroke(cr);
  cairo_move_to(cr, fig_map(&x, 0), y.a);
  cairo_line_to(cr, fig_map(&x, 0), y.b);
  cairo_stroke(cr);
  cairo_set_dash(cr, NULL, 0, 0);
  /* the data: a histogram (black) */
  cairo_set_source_rgb(cr, 0, 0, 0);
  cairo_set_line_width(cr, 0.8);
  int pen = 0;
  for (size_t i = 0; i < p->n; i++) {
    double f = norm(s, p, p->flux, i);
    if (!isfinite(f)) {
      pen = 0;
      continue;
    }
    double a, b;
    edges(p, i, &a, &b);
    double py = fig_map(&y, f);
    if (pen) cairo_line_to(cr, fig_map(&x, a), py);
    else cairo_move_to(cr, fig_map(&x, a), py);
    cairo_line_to(cr, fig_map(&x, b), py);
    pen = 1;
  }
  cairo_stroke(cr);
  /* the continuum (bluish green, dashed) */
  if (p->cont) {
    fig_colour(cr, 3);
    cairo_set_line_width(cr, 1.0);
    double d2[2] = {6, 3};
    cairo_set_dash(cr, d2, 2, 0);
    draw_curve(cr, &x, &y, s, p, p->cont);
    cairo_set_dash(cr, NULL, 0, 0);
  }
  /* each component (orange, thin), then the total model (vermillion) */
  for (size_t k = 0; p->comp && k < p->ncomp; k++) {
    fig_colour(cr, 1);
    cairo_set_line_width(cr, 0.8);
    draw_curve(cr, &x, &y, s, p, p->comp[k]);
  }
  if (p->model) {
    fig_colour(cr, 6);
    cairo_set_line_width(cr, 1.5);
    draw_curve(cr, &x, &y, s, p, p->model);
  }
  /* component ticks at the top (reddish purple) */
  fig_colour(cr, 7);
  cairo_set_line_width(cr, 1.2);
  for (size_t k = 0; p->comp_v && k < p->ncomp; k++) {
    if (!isfinite(p->comp_v[k])) continue;
    double px = fig_map(&x, p->comp_v[k]);
    cairo_move_to(cr, px, y.b + 2);
    cairo_line_to(cr, px, y.b + 12);
  }
  cairo_stroke(cr);
  cairo_restore(cr);
  fig_frame(pg, &x, &y, last ? "velocity [km/s]" : NULL, s->normalised ? "normalised flux" : "flux", NULL, 0, last);
  cairo_set_source_rgb(cr, 0, 0, 0);
  if (p->label) fig_text(cr, x.a + 8, y.b + 5, FIG_FONT, 0, 0, 0, p->label);
}

int dt_fig_stack_write(FILE *f, dt_fig_format fmt, const dt_fig_page *pg, const dt_fig_stack *s) {
  fig_page p;
  if (fig_open(&p, f, fmt, pg) != 0) return -1;
  cairo_t *cr = p.cr;
  double top = s->subtitle ? 54 : 36, bottom = 44, gap = 8;
  size_t np = s->npanel ? s->npanel : 1;
  double h = (p.h - top - bottom - gap * (double)(np - 1)) / (double)np;
  cairo_set_source_rgb(cr, 0, 0, 0);
  if (s->title) fig_text(cr, p.w / 2, 8, FIG_FONT + 1, 0.5, 0, 0, s->title);
  if (s->subtitle) fig_text(cr, p.w / 2, 24, FIG_SMALL, 0.5, 0, 0, s->subtitle);
  for (size_t k = 0; k < s->npanel; k++)
    draw_panel(&p, s, &s->panel[k], top + (double)k * (h + gap), h, k + 1 == s->npanel);
  /* the key, right-aligned under the title */
  static const char *const what[4] = {"data", "continuum", "component", "model"};
  static const int col[4] = {0, 3, 1, 6};
  double kx = p.w - 14 - 4 * 62, ky = top - 9;
  for (int k = 0; k < 4; k++) {
    fig_colour(cr, col[k]);
    cairo_set_line_width(cr, k == 3 ? 1.5 : 1.0);
    if (k == 1) {
      double d[2] = {6, 3};
      cairo_set_dash(cr, d, 2, 0);
    }
    cairo_move_to(cr, kx + 62 * k, ky);
    cairo_line_to(cr, kx + 62 * k + 14, ky);
    cairo_stroke(cr);
    cairo_set_dash(cr, NULL, 0, 0);
    cairo_set_source_rgb(cr, 0, 0, 0);
    fig_text(cr, kx + 62 * k + 17, ky, FIG_SMALL - 1, 0, 0.5, 0, what[k]);
  }
  return fig_close(&p);
}
