/* Sky maps: sightlines on the tangent plane, a symbol per outcome, colour
 * for velocity, limits written beside non-detections, optional contours
 * beneath (fig.h). */
#include <math.h>
#include <stdlib.h>
#include <string.h>

#include "fig_int.h"

/* Marching squares (e.g. Lorensen & Cline 1987, SIGGRAPH 21, 163, in two
 * dimensions): each cell of four grid values is cut where the level lies
 * between two corners, by linear interpolation along the edges; a saddle
 * (two opposite corners above) is split by the cell's mean value. */
size_t dt_fig_contour_segments(const dt_fig_contours *c, double level, double *seg, size_t cap) {
  size_t n = 0;
  for (size_t j = 0; j + 1 < c->ny; j++)
    for (size_t i = 0; i + 1 < c->nx; i++) {
      double z[4] = {c->z[j * c->nx + i], c->z[j * c->nx + i + 1], c->z[(j + 1) * c->nx + i + 1],
                     c->z[(j + 1) * c->nx + i]}; /* corners counter-clockwise from (i, j) */
      if (!isfinite(z[0]) || !isfinite(z[1]) || !isfinite(z[2]) || !isfinite(z[3])) continue;
      double cx[4] = {0, 1, 1, 0}, cy[4] = {0, 0, 1, 1};
      double px[4], py[4];
      int cut[4] = {0, 0, 0, 0};
      for (int e = 0; e < 4; e++) { /* edge e from corner e to corner e+1 */
        double a = z[e], b = z[(e + 1) % 4];
        if ((a < level) != (b < level)) {
          double t = (level - a) / (b - a);
          px[e] = cx[e] + t * (cx[(e + 1) % 4] - cx[e]);
          py[e] = cy[e] + t * (cy[(e + 1) % 4] - cy[e]);
          cut[e] = 1;
        }
      }
      int nc = cut[0] + cut[1] + cut[2] + cut[3];
      int pairs[2][2], np = 0;
      if (nc == 2) {
        int a = -1, b = -1;
        for (int e = 0; e < 4; e++)
          if (cut[e]) {
            if (a < 0) a = e;
            else b = e;
          }
        pairs[0][0] = a, pairs[0][1] = b, np = 1;
      } else if (nc == 4) {
        double mean = 0.25 * (z[0] + z[1] + z[2] + z[3]);
        /* corner 0 above the level and the centre too: corners 0 and 2
         * are joined through the middle, so cut off corners 1 and 3 */
        if ((z[0] >= level) == (mean >= level)) {
          pairs[0][0] = 0, pairs[0][1] = 1, pairs[1][0] = 2, pairs[1][1] = 3;
        } else {
          pairs[0][0] = 3, pairs[0][1] = 0, pairs[1][0] = 1, pairs[1][1] = 2;
        }
        np = 2;
      }
      for (int k = 0; k < np; k++) {
        if (n < cap) {
          double *s = seg + 4 * n;
          s[0] = c->x0 + ((double)i + px[pairs[k][0]]) * c->dx;
          s[1] = c->y0 + ((double)j + py[pairs[k][0]]) * c->dy;
          s[2] = c->x0 + ((double)i + px[pairs[k][1]]) * c->dx;
          s[3] = c->y0 + ((double)j + py[pairs[k][1]]) * c->dy;
        }
        n++;
      }
    }
  return n;
}

static void draw_contours(cairo_t *cr, const fig_axis *x, const fig_axis *y, const dt_fig_contours *c) {
  size_t cap = 4 * (c->nx + c->ny) + 4 * c->nx * c->ny / 4 + 64;
  double *seg = malloc(4 * cap * sizeof *seg);
  if (!seg) return;
  cairo_save(cr);
  cairo_set_line_width(cr, 0.7);
  for (size_t l = 0; l < c->nlevel; l++) {
    size_t n = dt_fig_contour_segments(c, c->level[l], seg, cap);
    if (n > cap) n = cap;
    double g = 0.65 - 0.4 * (double)l / (double)(c->nlevel > 1 ? c->nlevel - 1 : 1);
    cairo_set_source_rgb(cr, g, g, g);
    for (size_t k = 0; k < n; k++) {
      cairo_move_to(cr, fig_map(x, seg[4 * k]), fig_map(y, seg[4 * k + 1]));
      cairo_line_to(cr, fig_map(x, seg[4 * k + 2]), fig_map(y, seg[4 * k + 3]));
    }
    cairo_stroke(cr);
  }
  cairo_restore(cr);
  free(seg);
}

static void point_symbol(cairo_t *cr, double px, double py, const dt_fig_map_point *q, double vmax) {
  double rgb[3];
  cairo_save(cr);
  cairo_new_path(cr);
  cairo_set_line_width(cr, 1.0);
  switch (q->mark) {
  case DT_FIG_MARK_DETECTED:
    dt_fig_diverging(isfinite(q->v_kms) ? q->v_kms / vmax : 0, rgb);
    fig_rgb(cr, rgb);
    cairo_arc(cr, px, py, 4.2, 0, 2 * M_PI);
    cairo_fill_preserve(cr);
    cairo_set_source_rgb(cr, 0, 0, 0);
    cairo_stroke(cr);
    break;
  case DT_FIG_MARK_NOT_DETECTED:
    cairo_set_source_rgb(cr, 0, 0, 0);
    fig_marker(cr, px, py, 4.2, 4, 0);
    break;
  default:
    cairo_set_source_rgb(cr, 0.55, 0.55, 0.55);
    cairo_move_to(cr, px - 3, py - 3);
    cairo_line_to(cr, px + 3, py + 3);
    cairo_move_to(cr, px - 3, py + 3);
    cairo_line_to(cr, px + 3, py - 3);
    cairo_stroke(cr);
  }
  cairo_restore(cr);
}

int dt_fig_map_write(FILE *f, dt_fig_format fmt, const dt_fig_page *pg, const dt_fig_map *m) {
  fig_page p;
  if (fig_open(&p, f, fmt, pg) != 0) return -1;
  cairo_t *cr = p.cr;
  /* a square field: the larger extent of the points, both ways */
  double half = 0;
  for (size_t i = 0; i < m->n; i++) {
    if (isfinite(m->pt[i].x)) half = fmax(half, fabs(m->pt[i].x));
    if (isfinite(m->pt[i].y)) half = fmax(half, fabs(m->pt[i].y));
  }
  half = half > 0 ? half * 1.12 : 1;
  double top = m->title ? 44 : 18, bottom = 44, side = p.h - top - bottom, left = 62;
  /* east is to the left: xi grows leftwards */
  fig_axis x = {-half, half, left + side, left, 0};
  fig_axis y = {-half, half, p.h - bottom, top, 0};
  cairo_set_source_rgb(cr, 0, 0, 0);
  if (m->title) fig_text(cr, p.w / 2 - 40, 8, FIG_FONT + 1, 0.5, 0, 0, m->title);
  if (m->centre) fig_text(cr, p.w / 2 - 40, 24, FIG_SMALL, 0.5, 0, 0, m->centre);
  cairo_save(cr);
  cairo_rectangle(cr, left, top, side, side);
  cairo_clip(cr);
  if (m->contours) draw_contours(cr, &x, &y, m->contours);
  double vmax = m->vmax_kms > 0 ? m->vmax_kms : 100;
  /* left out first, detections last: the informative symbols on top */
  for (int pass = 2; pass >= 0; pass--)
    for (size_t i = 0; i < m->n; i++) {
      const dt_fig_map_point *q = &m->pt[i];
      if ((int)q->mark != pass || !isfinite(q->x) || !isfinite(q->y)) continue;
      double px = fig_map(&x, q->x), py = fig_map(&y, q->y);
      point_symbol(cr, px, py, q, vmax);
      char buf[48] = "";
      if (q->mark == DT_FIG_MARK_NOT_DETECTED && isfinite(q->limit))
        snprintf(buf, sizeof buf, "<%.0f%s", q->limit, m->limit_unit ? m->limit_unit : "");
      cairo_set_source_rgb(cr, 0.2, 0.2, 0.2);
      if (*buf) fig_text(cr, px + 5.5, py + 7, FIG_SMALL - 1.5, 0, 1, 0, buf);
      if (q->label && m->n <= 80) fig_text(cr, px + 5.5, py - 2, FIG_SMALL - 1.5, 0, 1, 0, q->label);
    }
  cairo_restore(cr);
  /* the frame: tick labels are offsets east (left) and north (up) */
  {
    double t[64];
    char buf[32];
    cairo_save(cr);
    cairo_set_source_rgb(cr, 0, 0, 0);
    cairo_set_line_width(cr, 0.8);
    cairo_rectangle(cr, left, top, side, side);
    cairo_stroke(cr);
    fig_axis tick = {-half, half, 0, 1, 0};
    size_t n = fig_ticks(&tick, t, 64);
    double step = n > 1 ? t[1] - t[0] : 1;
    for (size_t i = 0; i < n; i++) {
      double px = fig_map(&x, t[i]), py = fig_map(&y, t[i]);
      cairo_move_to(cr, px, top + side);
      cairo_line_to(cr, px, top + side - 4);
      cairo_move_to(cr, px, top);
      cairo_line_to(cr, px, top + 4);
      cairo_move_to(cr, left, py);
      cairo_line_to(cr, left + 4, py);
      cairo_move_to(cr, left + side, py);
      cairo_line_to(cr, left + side - 4, py);
      cairo_stroke(cr);
      fig_tick_label(t[i], step, 0, buf, sizeof buf);
      fig_text(cr, px, top + side + 4, FIG_FONT, 0.5, 0, 0, buf);
      fig_text(cr, left - 4, py, FIG_FONT, 1, 0.5, 0, buf);
    }
    fig_text(cr, left + side / 2, top + side + 20, FIG_FONT + 1, 0.5, 0, 0,
             "\xce\x94\xce\xb1 cos \xce\xb4 [arcmin]  (east left)");
    fig_text(cr, left - 38, top + side / 2, FIG_FONT + 1, 0.5, 1, -M_PI / 2, "\xce\x94\xce\xb4 [arcmin]");
    cairo_restore(cr);
  }
  /* colour bar and legend on the right */
  double bx = left + side + 30, bw = 12, by = top + 14, bh = side * 0.5;
  for (int k = 0; k < 100; k++) {
    double rgb[3];
    dt_fig_diverging(1 - 2 * (k + 0.5) / 100, rgb);
    fig_rgb(cr, rgb);
    cairo_rectangle(cr, bx, by + bh * k / 100, bw, bh / 100 + 0.3);
    cairo_fill(cr);
  }
  cairo_set_source_rgb(cr, 0, 0, 0);
  cairo_set_line_width(cr, 0.6);
  cairo_rectangle(cr, bx, by, bw, bh);
  cairo_stroke(cr);
  char buf[48];
  snprintf(buf, sizeof buf, "%+.0f", vmax);
  fig_text(cr, bx + bw + 4, by, FIG_SMALL, 0, 0.5, 0, buf);
  fig_text(cr, bx + bw + 4, by + bh / 2, FIG_SMALL, 0, 0.5, 0, "0");
  snprintf(buf, sizeof buf, "%+.0f", -vmax);
  fig_text(cr, bx + bw + 4, by + bh, FIG_SMALL, 0, 0.5, 0, buf);
  fig_text(cr, bx - 4, by - 8, FIG_SMALL, 0, 1, 0, "v [km/s]");
  double ly = by + bh + 22;
  dt_fig_map_point demo[3] = {{0, 0, DT_FIG_MARK_DETECTED, 0, NAN, NULL},
                              {0, 0, DT_FIG_MARK_NOT_DETECTED, NAN, NAN, NULL},
                              {0, 0, DT_FIG_MARK_LEFT_OUT, NAN, NAN, NULL}};
  static const char *const names[3] = {"detected", "not detected", "left out"};
  for (int k = 0; k < 3; k++) {
    point_symbol(cr, bx + 4, ly + 14 * k, &demo[k], vmax);
    cairo_set_source_rgb(cr, 0, 0, 0);
    fig_text(cr, bx + 12, ly + 14 * k, FIG_SMALL, 0, 0.5, 0, names[k]);
  }
  if (m->contours && m->contours->label) {
    cairo_set_source_rgb(cr, 0.4, 0.4, 0.4);
    cairo_move_to(cr, bx - 2, ly + 42);
    cairo_line_to(cr, bx + 10, ly + 42);
    cairo_stroke(cr);
    cairo_set_source_rgb(cr, 0, 0, 0);
    fig_text(cr, bx + 12, ly + 42, FIG_SMALL, 0, 0.5, 0, m->contours->label);
  }
  return fig_close(&p);
}
