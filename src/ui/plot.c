/* Plot rasterisation: series -> dots -> characters (see plot.h).
 *
 * Coordinates are mapped onto the dot grid with x growing to the right and
 * y upwards (dot row 0 is the top).  Line segments are clipped to the plot
 * rectangle (Liang-Barsky) and drawn with Bresenham's algorithm, so a
 * spectrum of thousands of pixels costs a few microseconds per column. */
#include "plot.h"

#include <math.h>
#include <stdlib.h>
#include <string.h>

#include "doubletty/utf8.h"

int dt_plot_begin(dt_plot *p, dt_plot_mode mode, int w, int h, double xmin, double xmax,
                  double ymin, double ymax) {
  p->w = p->h = p->dw = p->dh = 0;
  if (w <= 0 || h <= 0 || !(isfinite(xmin) && isfinite(xmax) && isfinite(ymin) && isfinite(ymax)) ||
      !(xmax > xmin) || !(ymax > ymin))
    return -1;
  int sx = 1, sy = 1;
  if (mode == DT_PLOT_BRAILLE) sx = 2, sy = 4;
  else if (mode == DT_PLOT_BLOCK) sy = 2;
  size_t nd = (size_t)w * sx * (size_t)h * sy, nc = (size_t)w * (size_t)h;
  if (nd > p->cap_dot) {
    unsigned char *d = realloc(p->dot, nd);
    if (!d) return -1;
    p->dot = d;
    unsigned char *t = realloc(p->top, nd);
    if (!t) return -1;
    p->top = t;
    p->cap_dot = nd;
  }
  if (nc > p->cap_cell) {
    dt_cell *o = realloc(p->over, nc * sizeof *o);
    if (!o) return -1;
    p->over = o;
    unsigned char *b = realloc(p->bg, nc);
    if (!b) return -1;
    p->bg = b;
    p->cap_cell = nc;
  }
  memset(p->dot, 0, nd);
  memset(p->top, 0, nd);
  memset(p->over, 0, nc * sizeof *p->over);
  memset(p->bg, 0, nc);
  p->mode = mode;
  p->w = w;
  p->h = h;
  p->sx = sx;
  p->sy = sy;
  p->dw = w * sx;
  p->dh = h * sy;
  p->xmin = xmin;
  p->xmax = xmax;
  p->ymin = ymin;
  p->ymax = ymax;
  return 0;
}

void dt_plot_free(dt_plot *p) {
  free(p->dot);
  free(p->top);
  free(p->over);
  free(p->bg);
  memset(p, 0, sizeof *p);
}

/* Continuous dot coordinates: x in [0, dw], y in [0, dh] (0 = top). */
static double fx(const dt_plot *p, double x) { return (x - p->xmin) / (p->xmax - p->xmin) * p->dw; }
static double fy(const dt_plot *p, double y) { return (p->ymax - y) / (p->ymax - p->ymin) * p->dh; }

static int clampi(int v, int lo, int hi) { return v < lo ? lo : v > hi ? hi : v; }

/* Set a dot of the layer a series' flags name. */
static void setdot(dt_plot *p, int c, int r, int role, int flags) {
  if (c < 0 || r < 0 || c >= p->dw || r >= p->dh) return;
  unsigned char *d = &(flags & DT_PLOT_ON_TOP ? p->top : p->dot)[(size_t)r * p->dw + c];
  if (role > *d) *d = (unsigned char)role;
}

/* Index of the continuous coordinate v in [0, n]: n itself belongs to the
 * last dot so that x = xmax and y = ymin are drawn. */
static int idx(double v, int n) {
  if (v >= n) return n - 1;
  if (v < 0) return 0;
  return (int)v;
}

static void segment(dt_plot *p, double x0, double y0, double x1, double y1, int role, int flags) {
  /* Liang-Barsky clip to [0, dw] x [0, dh] */
  double t0 = 0, t1 = 1, dx = x1 - x0, dy = y1 - y0;
  double pp[4] = {-dx, dx, -dy, dy};
  double qq[4] = {x0, p->dw - x0, y0, p->dh - y0};
  for (int i = 0; i < 4; i++) {
    if (pp[i] == 0) {
      if (qq[i] < 0) return;
      continue;
    }
    double t = qq[i] / pp[i];
    if (pp[i] < 0) {
      if (t > t1) return;
      if (t > t0) t0 = t;
    } else {
      if (t < t0) return;
      if (t < t1) t1 = t;
    }
  }
  int c0 = idx(x0 + t0 * dx, p->dw), r0 = idx(y0 + t0 * dy, p->dh);
  int c1 = idx(x0 + t1 * dx, p->dw), r1 = idx(y0 + t1 * dy, p->dh);
  /* Bresenham */
  int sdx = abs(c1 - c0), sdy = -abs(r1 - r0);
  int stx = c0 < c1 ? 1 : -1, sty = r0 < r1 ? 1 : -1;
  int err = sdx + sdy;
  for (;;) {
    setdot(p, c0, r0, role, flags);
    if (c0 == c1 && r0 == r1) break;
    int e2 = 2 * err;
    if (e2 >= sdy) { err += sdy; c0 += stx; }
    if (e2 <= sdx) { err += sdx; r0 += sty; }
  }
}

static const char *up_arrow(const dt_plot *p) { return p->mode == DT_PLOT_ASCII ? "^" : "\xe2\x96\xb2"; }   /* ▲ */
static const char *down_arrow(const dt_plot *p) { return p->mode == DT_PLOT_ASCII ? "v" : "\xe2\x96\xbc"; } /* ▼ */

static void set_over(dt_plot *p, int col, int row, const char *ch, int role, int attr) {
  if (col < 0 || row < 0 || col >= p->w || row >= p->h) return;
  dt_cell *c = &p->over[(size_t)row * p->w + col];
  size_t k = strlen(ch);
  if (k > 4) k = 4;
  memcpy(c->ch, ch, k);
  c->ch[k] = '\0';
  c->fg = (unsigned char)role;
  c->attr = (unsigned char)attr;
}

/* An arrow for a value beyond the y range, unless a marker is there. */
static void mark_off(dt_plot *p, double x, double y) {
  int col = dt_plot_column(p, x);
  if (col < 0) return;
  int row = y > p->ymax ? 0 : p->h - 1;
  dt_cell *c = &p->over[(size_t)row * p->w + col];
  if (c->ch[0] && c->fg != DT_R_OFFPLOT) return;
  set_over(p, col, row, y > p->ymax ? up_arrow(p) : down_arrow(p), DT_R_OFFPLOT, 0);
}

static int valid(const double *x, const double *y, const unsigned char *skip, size_t i) {
  return isfinite(x[i]) && isfinite(y[i]) && !(skip && skip[i]);
}

void dt_plot_line(dt_plot *p, const double *x, const double *y, const unsigned char *skip,
                  size_t n, int role, int flags) {
  if (p->w <= 0 || !x || !y) return;
  int have_prev = 0;
  double px = 0, py = 0;
  for (size_t i = 0; i < n; i++) {
    if (!valid(x, y, skip, i)) {
      have_prev = 0;
      continue;
    }
    double cx = fx(p, x[i]), cy = fy(p, y[i]);
    if ((flags & DT_PLOT_MARK_OFF) && (y[i] > p->ymax || y[i] < p->ymin)) mark_off(p, x[i], y[i]);
    if (have_prev) segment(p, px, py, cx, cy, role, flags);
    else segment(p, cx, cy, cx, cy, role, flags);
    px = cx;
    py = cy;
    have_prev = 1;
  }
}

void dt_plot_points(dt_plot *p, const double *x, const double *y, const unsigned char *sel,
                    size_t n, int role, int flags) {
  if (p->w <= 0 || !x || !y) return;
  for (size_t i = 0; i < n; i++) {
    if ((sel && !sel[i]) || !isfinite(x[i]) || !isfinite(y[i])) continue;
    if (y[i] > p->ymax || y[i] < p->ymin) {
      if (flags & DT_PLOT_MARK_OFF) mark_off(p, x[i], y[i]);
      continue;
    }
    double cx = fx(p, x[i]);
    if (cx < 0 || cx > p->dw) continue;
    setdot(p, idx(cx, p->dw), idx(fy(p, y[i]), p->dh), role, flags);
  }
}

void dt_plot_hline(dt_plot *p, double y, int role) {
  if (p->w <= 0 || !isfinite(y) || y < p->ymin || y > p->ymax) return;
  int r = idx(fy(p, y), p->dh);
  for (int c = 0; c < p->dw; c += 2) setdot(p, c, r, role, 0);
}

void dt_plot_vspan(dt_plot *p, double xlo, double xhi, int bg) {
  if (p->w <= 0 || !isfinite(xlo) || !isfinite(xhi)) return;
  if (xlo > xhi) { double t = xlo; xlo = xhi; xhi = t; }
  if (xhi < p->xmin || xlo > p->xmax) return;
  int c0 = clampi((int)floor((xlo - p->xmin) / (p->xmax - p->xmin) * p->w), 0, p->w - 1);
  int c1 = clampi((int)floor((xhi - p->xmin) / (p->xmax - p->xmin) * p->w), 0, p->w - 1);
  for (int r = 0; r < p->h; r++)
    for (int c = c0; c <= c1; c++) p->bg[(size_t)r * p->w + c] = (unsigned char)bg;
}

void dt_plot_mark(dt_plot *p, double x, int row, const char *ch, int role, int attr) {
  int col = dt_plot_column(p, x);
  if (col < 0) return;
  if (row < 0) row += p->h;
  set_over(p, col, row, ch, role, attr);
}

int dt_plot_column(const dt_plot *p, double x) {
  if (p->w <= 0 || !isfinite(x) || x < p->xmin || x > p->xmax) return -1;
  int c = (int)floor((x - p->xmin) / (p->xmax - p->xmin) * p->w);
  return clampi(c, 0, p->w - 1);
}

double dt_plot_colx(const dt_plot *p, int col) {
  return p->xmin + (col + 0.5) * (p->xmax - p->xmin) / p->w;
}

char dt_plot_ascii_glyph(int role) {
  switch (role) {
  case DT_R_REF: return '.';
  case DT_R_SIGMA: return ',';
  case DT_R_MASKED: return 'x';
  case DT_R_CONT: return '-';
  case DT_R_COMP: return '~';
  case DT_R_FLUX: return '*';
  case DT_R_MODEL: return '#';
  case DT_R_COMPSEL: return '%';
  default: return 'o';
  }
}

/* Braille dot bits (Unicode 2800 block): left column rows 0-3, right column. */
static const unsigned char braille_bit[2][4] = {{0x01, 0x02, 0x04, 0x40}, {0x08, 0x10, 0x20, 0x80}};

static void utf8_put(char *out, unsigned cp) { out[dt_utf8_encode(cp, out)] = '\0'; }

/* The dots of cell (c, r) in a layer: braille bits (or block rows), and in
 * *top the most important role among them (0: none). */
static unsigned cell_dots(const dt_plot *p, const unsigned char *layer, int c, int r, int *top) {
  unsigned bits = 0;
  *top = 0;
  for (int j = 0; j < p->sy; j++)
    for (int i = 0; i < p->sx; i++) {
      int role = layer[(size_t)(r * p->sy + j) * p->dw + c * p->sx + i];
      if (!role) continue;
      if (role > *top) *top = role;
      if (p->mode == DT_PLOT_BRAILLE) bits |= braille_bit[i][j];
      else bits |= 1u << j;
    }
  return bits;
}

void dt_plot_render(const dt_plot *p, dt_grid *g, int gx, int gy) {
  for (int r = 0; r < p->h; r++)
    for (int c = 0; c < p->w; c++) {
      dt_cell *cell = dt_grid_at(g, gx + c, gy + r);
      if (!cell) continue;
      size_t k = (size_t)r * p->w + c;
      if (p->bg[k]) cell->bg = p->bg[k];
      const dt_cell *o = &p->over[k];
      if (o->ch[0]) {
        memcpy(cell->ch, o->ch, sizeof cell->ch);
        cell->fg = o->fg;
        cell->attr = o->attr;
        continue;
      }
      int top = 0;
      unsigned bits = cell_dots(p, p->top, c, r, &top); /* the top layer takes the cell ... */
      if (!top) bits = cell_dots(p, p->dot, c, r, &top); /* ... else the ordinary one */
      if (!top) continue;
      cell->fg = (unsigned char)top;
      cell->attr = 0;
      if (p->mode == DT_PLOT_BRAILLE) utf8_put(cell->ch, 0x2800 + bits);
      else if (p->mode == DT_PLOT_BLOCK) utf8_put(cell->ch, bits == 3 ? 0x2588 : bits == 1 ? 0x2580 : 0x2584);
      else {
        cell->ch[0] = dt_plot_ascii_glyph(top);
        cell->ch[1] = '\0';
      }
    }
}
