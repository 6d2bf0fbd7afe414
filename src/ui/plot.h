/* Plotting as a pure function: data -> a rectangle of cells.
 *
 * A plot is a grid of "dots" finer than the character cells: 2x4 dots per
 * cell with Unicode braille, 1x2 with half blocks, 1x1 in plain ASCII.
 * Series are rasterised into the dots (each dot remembers the most
 * important role drawn on it: the enum order of dt_role), then every cell
 * becomes one character: the braille pattern / block of its dots, or in
 * ASCII the glyph of its most important role.  Markers and background
 * shading are kept per cell and laid over the dots.
 *
 * A series drawn with DT_PLOT_ON_TOP goes into a second layer of dots: a
 * cell it passes through shows that layer's dots alone, in its role, and
 * every other cell shows the ordinary layer.  So a thin curve (the total
 * model) stays whole and distinct where it crosses the data, and the data
 * keep their own cells -- in a trough whose data lie below the model, both
 * are readable instead of one colour swallowing the other.
 *
 * Nothing here knows about terminals; a unit test can render a plot into a
 * dt_grid and read it back.  Buffers grow on demand and are reused, so
 * drawing a frame does not allocate once the sizes settle. */
#ifndef DT_UI_PLOT_H
#define DT_UI_PLOT_H
#include <stddef.h>
#include "grid.h"

typedef enum dt_plot_mode {
  DT_PLOT_ASCII = 0,   /* 1x1 dots per cell, one glyph per role */
  DT_PLOT_BLOCK,       /* 1x2: upper/lower half blocks (UTF-8) */
  DT_PLOT_BRAILLE      /* 2x4: braille patterns (UTF-8) */
} dt_plot_mode;

/* Series flags */
enum {
  DT_PLOT_MARK_OFF = 1, /* mark values above/below the range with arrows in
                           the top/bottom row */
  DT_PLOT_ON_TOP = 2     /* draw into the top layer (see above) */
};

typedef struct dt_plot {
  dt_plot_mode mode;
  int w, h;                  /* cells */
  int sx, sy;                /* dots per cell */
  int dw, dh;                /* dots */
  double xmin, xmax, ymin, ymax;
  unsigned char *dot;        /* dw * dh roles (0: empty) */
  unsigned char *top;        /* dw * dh roles of the top layer */
  dt_cell *over;             /* w * h overlay cells (ch[0] == 0: none) */
  unsigned char *bg;         /* w * h background roles */
  size_t cap_dot, cap_cell;
} dt_plot;

/* Start a plot of w x h cells over [xmin, xmax] x [ymin, ymax].  Returns 0,
 * or -1 (nothing will be drawn) for an empty size, a non-finite or empty
 * range, or no memory.  A zero-initialised dt_plot is ready to begin. */
int dt_plot_begin(dt_plot *p, dt_plot_mode mode, int w, int h, double xmin, double xmax,
                  double ymin, double ymax);
void dt_plot_free(dt_plot *p);

/* A polyline through (x[i], y[i]).  Points with a non-finite coordinate or
 * skip[i] != 0 (skip may be NULL) are left out and break the line.
 * Segments are clipped at the plot edges. */
void dt_plot_line(dt_plot *p, const double *x, const double *y, const unsigned char *skip,
                  size_t n, int role, int flags);
/* Single dots at the points with sel[i] != 0 (sel NULL: all). */
void dt_plot_points(dt_plot *p, const double *x, const double *y, const unsigned char *sel,
                    size_t n, int role, int flags);
/* A dotted horizontal guide at y. */
void dt_plot_hline(dt_plot *p, double y, int role);
/* Background role for the cell columns overlapping [xlo, xhi]. */
void dt_plot_vspan(dt_plot *p, double xlo, double xhi, int bg);
/* A marker character (UTF-8) in the cell column of x, in cell row `row`
 * (negative counts from the bottom: -1 is the last row). */
void dt_plot_mark(dt_plot *p, double x, int row, const char *ch, int role, int attr);
/* Cell column of x (-1 outside the range) and x at the centre of a column. */
int dt_plot_column(const dt_plot *p, double x);
double dt_plot_colx(const dt_plot *p, int col);
/* Draw the plot into the grid with its top-left cell at (gx, gy). */
void dt_plot_render(const dt_plot *p, dt_grid *g, int gx, int gy);
/* The ASCII glyph used for a role. */
char dt_plot_ascii_glyph(int role);

#endif
