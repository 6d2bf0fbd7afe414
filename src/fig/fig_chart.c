/* x-y charts: points with error bars, lines, a legend (fig.h). */
#include <math.h>
#include <string.h>

#include "fig_int.h"

static void chart_ranges(const dt_fig_chart *c, double *xlo, double *xhi, double *ylo, double *yhi) {
  *xlo = *xhi = *ylo = *yhi = NAN;
  for (size_t s = 0; s < c->nseries; s++) {
    const dt_fig_series *q = &c->series[s];
    fig_range_merge(q->x, q->n, c->xlog, xlo, xhi);
    fig_range_merge(q->xlo, q->n, c->xlog, xlo, xhi);
    fig_range_merge(q->xhi, q->n, c->xlog, xlo, xhi);
    fig_range_merge(q->y, q->n, c->ylog, ylo, yhi);
    fig_range_merge(q->ylo, q->n, c->ylog, ylo, yhi);
    fig_range_merge(q->yhi, q->n, c->ylog, ylo, yhi);
  }
  double two[2];
  two[0] = *xlo, two[1] = *xhi;
  fig_range(two, 2, c->xlog, 0.05, xlo, xhi);
  two[0] = *ylo, two[1] = *yhi;
  fig_range(two, 2, c->ylog, 0.08, ylo, yhi);
  if (isfinite(c->xmin)) *xlo = c->xmin;
  if (isfinite(c->xmax)) *xhi = c->xmax;
  if (isfinite(c->ymin)) *ylo = c->ymin;
  if (isfinite(c->ymax)) *yhi = c->ymax;
  if (!(*xhi > *xlo)) *xhi = *xlo + 1;
  if (!(*yhi > *ylo)) *yhi = *ylo + 1;
}

static int ok_pt(const fig_axis *x, const fig_axis *y, double a, double b) {
  return isfinite(a) && isfinite(b) && (!x->log || a > 0) && (!y->log || b > 0);
}

/* A series' pen: its colour, the line width, dashes for a dashed line. */
static void series_pen(cairo_t *cr, const dt_fig_series *q) {
  fig_colour(cr, q->colour);
  cairo_set_line_width(cr, 1.2);
  if ((q->style & DT_FIG_LINE) && (q->style & DT_FIG_DASHED)) {
    double d[2] = {5, 3};
    cairo_set_dash(cr, d, 2, 0);
  }
}

static void draw_series(cairo_t *cr, const fig_axis *x, const fig_axis *y, const dt_fig_series *q) {
  cairo_save(cr);
  series_pen(cr, q);
  if (q->style & DT_FIG_LINE) {
    int pen = 0;
    for (size_t i = 0; i < q->n; i++) {
      if (!ok_pt(x, y, q->x[i], q->y[i])) {
        pen = 0;
        continue;
      }
      double px = fig_map(x, q->x[i]), py = fig_map(y, q->y[i]);
      if (pen) cairo_line_to(cr, px, py);
      else cairo_move_to(cr, px, py);
      pen = 1;
    }
    cairo_stroke(cr);
    cairo_set_dash(cr, NULL, 0, 0);
  }
  if (q->style & DT_FIG_POINTS) {
    cairo_set_line_width(cr, 1.0);
    for (size_t i = 0; i < q->n; i++) {
      if (!ok_pt(x, y, q->x[i], q->y[i])) continue;
      double px = fig_map(x, q->x[i]), py = fig_map(y, q->y[i]);
      if (q->ylo && q->yhi) { /* error bar with caps */
        double a = q->ylo[i], b = q->yhi[i];
        if (y->log && !(a > 0)) a = y->lo;
        if (isfinite(a) && isfinite(b)) {
          double pa = fig_map(y, a), pb = fig_map(y, b);
          cairo_move_to(cr, px, pa);
          cairo_line_to(cr, px, pb);
          cairo_move_to(cr, px - 2.5, pa);
          cairo_line_to(cr, px + 2.5, pa);
          cairo_move_to(cr, px - 2.5, pb);
          cairo_line_to(cr, px + 2.5, pb);
          cairo_stroke(cr);
        }
      }
      if (q->xlo && q->xhi && isfinite(q->xlo[i]) && isfinite(q->xhi[i])) {
        cairo_move_to(cr, fig_map(x, q->xlo[i]), py);
        cairo_line_to(cr, fig_map(x, q->xhi[i]), py);
        cairo_stroke(cr);
      }
      fig_marker(cr, px, py, 3.2, q->marker, 1);
      if (q->text && q->text[i]) {
        cairo_save(cr);
        cairo_set_source_rgb(cr, 0.25, 0.25, 0.25);
        fig_text(cr, px + 6, py - 4, FIG_SMALL, 0, 1, 0, q->text[i]);
        cairo_restore(cr);
      }
    }
  }
  cairo_restore(cr);
}

static void legend(cairo_t *cr, double x, double y, const dt_fig_chart *c) {
  double row = FIG_FONT + 4;
  for (size_t s = 0; s < c->nseries; s++) {
    const dt_fig_series *q = &c->series[s];
    if (!q->label) continue;
    cairo_save(cr);
    series_pen(cr, q);
    if (q->style & DT_FIG_LINE) {
      cairo_move_to(cr, x - 22, y);
      cairo_line_to(cr, x - 4, y);
      cairo_stroke(cr);
      cairo_set_dash(cr, NULL, 0, 0);
    }
    if (q->style & DT_FIG_POINTS) fig_marker(cr, x - 13, y, 3.2, q->marker, 1);
    cairo_set_source_rgb(cr, 0, 0, 0);
    fig_text(cr, x, y, FIG_SMALL + 0.5, 0, 0.5, 0, q->label);
    cairo_restore(cr);
    y += row;
  }
}

int dt_fig_chart_write(FILE *f, dt_fig_format fmt, const dt_fig_page *pg, const dt_fig_chart *c) {
  fig_page p;
  if (fig_open(&p, f, fmt, pg) != 0) return -1;
  cairo_t *cr = p.cr;
  double xlo, xhi, ylo, yhi;
  chart_ranges(c, &xlo, &xhi, &ylo, &yhi);
  double left = 62, right = 14, top = (c->title ? 30 : 14) + (c->note ? 14 : 0), bottom = 44;
  fig_axis x = {xlo, xhi, left, p.w - right, c->xlog};
  fig_axis y = {ylo, yhi, p.h - bottom, top, c->ylog};
  if (c->title) {
    cairo_set_source_rgb(cr, 0, 0, 0);
    fig_text(cr, p.w / 2, 8, FIG_FONT + 1, 0.5, 0, 0, c->title);
  }
  cairo_save(cr);
  cairo_rectangle(cr, x.a, y.b, x.b - x.a, y.a - y.b);
  cairo_clip(cr);
  for (size_t s = 0; s < c->nseries; s++) draw_series(cr, &x, &y, &c->series[s]);
  cairo_restore(cr);
  fig_frame(&p, &x, &y, c->xlabel, c->ylabel, c->xcat, c->ncat, 1);
  cairo_set_source_rgb(cr, 0, 0, 0);
  if (c->note) fig_text(cr, p.w / 2, top - 16, FIG_SMALL + 0.5, 0.5, 0, 0, c->note);
  legend(cr, x.a + 30, y.b + 12, c);
  return fig_close(&p);
}
