/* Pages, axes, ticks, text and markers shared by every figure (fig_int.h).
 *
 * All drawing is in points (1/72 inch): a PNG surface is scaled by dpi/72
 * so that the same figure looks the same in every format. */
#include <cairo-pdf.h>
#include <cairo-svg.h>
#include <math.h>
#include <string.h>
#include <strings.h>

#include "fig_int.h"

/* Okabe & Ito (2008), "Color Universal Design": RGB values of the eight
 * colours as given there (0-255). */
static const unsigned char okabe_ito[8][3] = {
    {0, 0, 0},       /* black */
    {230, 159, 0},   /* orange */
    {86, 180, 233},  /* sky blue */
    {0, 158, 115},   /* bluish green */
    {240, 228, 66},  /* yellow */
    {0, 114, 178},   /* blue */
    {213, 94, 0},    /* vermillion */
    {204, 121, 167}, /* reddish purple */
};

void dt_fig_palette(int i, double rgb[3]) {
  i = ((i % 8) + 8) % 8;
  for (int k = 0; k < 3; k++) rgb[k] = okabe_ito[i][k] / 255.0;
}

void dt_fig_diverging(double t, double rgb[3]) {
  double mid[3] = {0.86, 0.86, 0.86}, end[3];
  if (!isfinite(t)) t = 0;
  if (t < -1) t = -1;
  if (t > 1) t = 1;
  dt_fig_palette(t < 0 ? 5 : 6, end);
  double a = fabs(t);
  for (int k = 0; k < 3; k++) rgb[k] = (1 - a) * mid[k] + a * end[k];
}

static const char *const exts[3] = {"pdf", "png", "svg"};

const char *dt_fig_format_ext(dt_fig_format fmt) { return (unsigned)fmt < 3 ? exts[fmt] : "?"; }

int dt_fig_format_parse(const char *s, dt_fig_format *fmt) {
  for (int i = 0; i < 3; i++)
    if (s && !strcasecmp(s, exts[i])) {
      *fmt = (dt_fig_format)i;
      return 0;
    }
  return -1;
}

int dt_fig_format_of(const char *path, dt_fig_format *fmt) {
  const char *dot = strrchr(path, '.'), *slash = strrchr(path, '/');
  if (!dot || (slash && dot < slash)) return -1;
  return dt_fig_format_parse(dot + 1, fmt);
}

/* ---- pages ---- */

static cairo_status_t write_stream(void *closure, const unsigned char *data, unsigned int len) {
  FILE *f = closure;
  return fwrite(data, 1, len, f) == len ? CAIRO_STATUS_SUCCESS : CAIRO_STATUS_WRITE_ERROR;
}

int fig_open(fig_page *p, FILE *f, dt_fig_format fmt, const dt_fig_page *pg) {
  memset(p, 0, sizeof *p);
  p->f = f;
  p->fmt = fmt;
  p->w = pg->w_pt;
  p->h = pg->h_pt;
  double scale = pg->dpi / 72.0;
  switch (fmt) {
  case DT_FIG_PDF: p->surf = cairo_pdf_surface_create_for_stream(write_stream, f, p->w, p->h); break;
  case DT_FIG_SVG:
    p->surf = cairo_svg_surface_create_for_stream(write_stream, f, p->w, p->h);
    cairo_svg_surface_set_document_unit(p->surf, CAIRO_SVG_UNIT_PT);
    break;
  case DT_FIG_PNG:
    p->surf = cairo_image_surface_create(CAIRO_FORMAT_ARGB32, (int)lround(p->w * scale), (int)lround(p->h * scale));
    break;
  default: return -1;
  }
  if (cairo_surface_status(p->surf) != CAIRO_STATUS_SUCCESS) {
    cairo_surface_destroy(p->surf);
    p->surf = NULL;
    return -1;
  }
  p->cr = cairo_create(p->surf);
  if (fmt == DT_FIG_PNG) cairo_scale(p->cr, scale, scale);
  /* a white page (PNG would otherwise be transparent) */
  cairo_set_source_rgb(p->cr, 1, 1, 1);
  cairo_paint(p->cr);
  cairo_select_font_face(p->cr, "DejaVu Sans", CAIRO_FONT_SLANT_NORMAL, CAIRO_FONT_WEIGHT_NORMAL);
  cairo_set_line_join(p->cr, CAIRO_LINE_JOIN_ROUND);
  return 0;
}

int fig_close(fig_page *p) {
  int bad = cairo_status(p->cr) != CAIRO_STATUS_SUCCESS;
  cairo_destroy(p->cr);
  if (p->fmt == DT_FIG_PNG) {
    cairo_surface_flush(p->surf);
    if (!bad && cairo_surface_write_to_png_stream(p->surf, write_stream, p->f) != CAIRO_STATUS_SUCCESS) bad = 1;
  } else {
    cairo_surface_finish(p->surf);
    if (cairo_surface_status(p->surf) != CAIRO_STATUS_SUCCESS) bad = 1;
  }
  cairo_surface_destroy(p->surf);
  p->surf = NULL;
  p->cr = NULL;
  if (fflush(p->f) != 0 || ferror(p->f)) bad = 1;
  return bad ? -1 : 0;
}

/* ---- axes ---- */

double fig_map(const fig_axis *ax, double x) {
  double lo = ax->lo, hi = ax->hi;
  if (ax->log) {
    x = x > 0 ? log10(x) : -1e300;
    lo = log10(lo);
    hi = log10(hi);
  }
  return ax->a + (x - lo) / (hi - lo) * (ax->b - ax->a);
}

void fig_range_merge(const double *x, size_t n, int log, double *lo, double *hi) {
  for (size_t i = 0; x && i < n; i++) {
    if (!isfinite(x[i]) || (log && x[i] <= 0)) continue;
    if (!isfinite(*lo) || x[i] < *lo) *lo = x[i];
    if (!isfinite(*hi) || x[i] > *hi) *hi = x[i];
  }
}

void fig_range(const double *x, size_t n, int log, double pad, double *lo, double *hi) {
  *lo = *hi = NAN;
  fig_range_merge(x, n, log, lo, hi);
  if (!isfinite(*lo)) {
    *lo = log ? 1 : 0;
    *hi = log ? 10 : 1;
    return;
  }
  if (log) {
    double a = log10(*lo), b = log10(*hi);
    if (b - a < 0.3) {
      a -= 0.15;
      b += 0.15;
    }
    double d = pad * (b - a);
    *lo = pow(10, a - d);
    *hi = pow(10, b + d);
  } else {
    double d = *hi - *lo;
    if (d <= 0) d = fabs(*lo) > 0 ? fabs(*lo) * 0.2 : 1;
    *lo -= pad * d;
    *hi += pad * d;
  }
}

static double nice_step(double span, int want) {
  double raw = span / want, mag = pow(10, floor(log10(raw))), r = raw / mag;
  return (r < 1.5 ? 1 : r < 3.5 ? 2 : r < 7.5 ? 5 : 10) * mag;
}

size_t fig_ticks(const fig_axis *ax, double *t, size_t cap) {
  size_t n = 0;
  if (!ax->log) {
    double step = nice_step(ax->hi - ax->lo, 5);
    for (double v = ceil(ax->lo / step - 1e-9) * step; v <= ax->hi + 1e-9 * step && n < cap; v += step)
      t[n++] = fabs(v) < 1e-9 * step ? 0 : v;
    return n;
  }
  /* decades, then 1-2-5, then every integer multiple, until there are 3 */
  static const int sets[3][9] = {{1}, {1, 2, 5}, {1, 2, 3, 4, 5, 6, 7, 8, 9}};
  static const int nset[3] = {1, 3, 9};
  for (int s = 0; s < 3; s++) {
    n = 0;
    for (int e = (int)floor(log10(ax->lo)); e <= (int)ceil(log10(ax->hi)); e++)
      for (int k = 0; k < nset[s]; k++) {
        double v = sets[s][k] * pow(10, e);
        if (v >= ax->lo * (1 - 1e-9) && v <= ax->hi * (1 + 1e-9) && n < cap) t[n++] = v;
      }
    if (n >= 3) break;
  }
  return n;
}

void fig_tick_label(double v, double step, int log, char *buf, size_t size) {
  if (log) {
    snprintf(buf, size, "%g", v);
    return;
  }
  int dec = step >= 1 ? 0 : (int)ceil(-log10(step) - 1e-9);
  if (dec > 6) dec = 6;
  snprintf(buf, size, "%.*f", dec, v);
  if (!strcmp(buf, "-0")) snprintf(buf, size, "0");
}

void fig_colour(cairo_t *cr, int i) {
  double rgb[3];
  dt_fig_palette(i, rgb);
  cairo_set_source_rgb(cr, rgb[0], rgb[1], rgb[2]);
}

void fig_rgb(cairo_t *cr, const double rgb[3]) { cairo_set_source_rgb(cr, rgb[0], rgb[1], rgb[2]); }

void fig_text(cairo_t *cr, double x, double y, double size, double ax, double ay, double rot, const char *s) {
  cairo_text_extents_t te;
  cairo_font_extents_t fe;
  cairo_save(cr);
  cairo_set_font_size(cr, size);
  cairo_text_extents(cr, s, &te);
  cairo_font_extents(cr, &fe);
  cairo_translate(cr, x, y);
  cairo_rotate(cr, rot);
  /* ay: 0 top (ascent below y), .5 middle of the capitals, 1 baseline */
  double dy = ay >= 1 ? 0 : ay > 0 ? fe.ascent * 0.36 : fe.ascent;
  cairo_move_to(cr, -ax * te.x_advance, dy);
  cairo_show_text(cr, s);
  cairo_restore(cr);
  cairo_new_path(cr); /* no current point left behind for the next path */
}

void fig_marker(cairo_t *cr, double x, double y, double r, int m, int filled) {
  cairo_new_path(cr);
  switch (m) {
  case 1: cairo_rectangle(cr, x - 0.85 * r, y - 0.85 * r, 1.7 * r, 1.7 * r); break;
  case 2:
    cairo_move_to(cr, x, y - 1.15 * r);
    cairo_line_to(cr, x + r, y + 0.6 * r);
    cairo_line_to(cr, x - r, y + 0.6 * r);
    cairo_close_path(cr);
    break;
  case 3:
    cairo_move_to(cr, x, y - 1.2 * r);
    cairo_line_to(cr, x + r, y);
    cairo_line_to(cr, x, y + 1.2 * r);
    cairo_line_to(cr, x - r, y);
    cairo_close_path(cr);
    break;
  case 4:
    cairo_move_to(cr, x, y + 1.15 * r);
    cairo_line_to(cr, x + r, y - 0.6 * r);
    cairo_line_to(cr, x - r, y - 0.6 * r);
    cairo_close_path(cr);
    break;
  default: cairo_arc(cr, x, y, r, 0, 2 * M_PI);
  }
  if (filled) cairo_fill_preserve(cr);
  cairo_stroke(cr);
}

void fig_frame(fig_page *p, const fig_axis *x, const fig_axis *y, const char *xlabel, const char *ylabel,
               const char *const *xcat, size_t ncat, int xlabels) {
  cairo_t *cr = p->cr;
  double t[64];
  char buf[48];
  cairo_save(cr);
  cairo_set_source_rgb(cr, 0, 0, 0);
  cairo_set_line_width(cr, 0.8);
  double x0 = x->a, x1 = x->b, y0 = y->a, y1 = y->b; /* y0 bottom, y1 top */
  cairo_rectangle(cr, x0, y1, x1 - x0, y0 - y1);
  cairo_stroke(cr);
  double tl = 4;
  if (xcat) {
    for (size_t i = 0; i < ncat; i++) {
      double px = fig_map(x, (double)i);
      cairo_move_to(cr, px, y0);
      cairo_line_to(cr, px, y0 - tl);
      cairo_stroke(cr);
      if (xlabels) fig_text(cr, px, y0 + 4, FIG_FONT, 0.5, 0, 0, xcat[i]);
    }
  } else {
    size_t n = fig_ticks(x, t, 64);
    double step = n > 1 ? t[1] - t[0] : 1;
    for (size_t i = 0; i < n; i++) {
      double px = fig_map(x, t[i]);
      cairo_move_to(cr, px, y0);
      cairo_line_to(cr, px, y0 - tl);
      cairo_move_to(cr, px, y1);
      cairo_line_to(cr, px, y1 + tl);
      cairo_stroke(cr);
      fig_tick_label(t[i], step, x->log, buf, sizeof buf);
      if (xlabels) fig_text(cr, px, y0 + 4, FIG_FONT, 0.5, 0, 0, buf);
    }
  }
  size_t n = fig_ticks(y, t, 64);
  double step = n > 1 ? t[1] - t[0] : 1;
  for (size_t i = 0; i < n; i++) {
    double py = fig_map(y, t[i]);
    cairo_move_to(cr, x0, py);
    cairo_line_to(cr, x0 + tl, py);
    cairo_move_to(cr, x1, py);
    cairo_line_to(cr, x1 - tl, py);
    cairo_stroke(cr);
    fig_tick_label(t[i], step, y->log, buf, sizeof buf);
    fig_text(cr, x0 - 4, py, FIG_FONT, 1, 0.5, 0, buf);
  }
  if (xlabel && xlabels) fig_text(cr, (x0 + x1) / 2, y0 + 20, FIG_FONT + 1, 0.5, 0, 0, xlabel);
  if (ylabel) fig_text(cr, x0 - 38, (y0 + y1) / 2, FIG_FONT + 1, 0.5, 1, -M_PI / 2, ylabel);
  cairo_restore(cr);
}
