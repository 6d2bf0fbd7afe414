/* What the figure writers share: the page (a cairo surface writing to a
 * stream), axes mapping data to the page, ticks, text and markers. */
#ifndef DT_FIG_INT_H
#define DT_FIG_INT_H
#include <cairo.h>

#include "fig.h"

typedef struct fig_page {
  cairo_surface_t *surf;
  cairo_t *cr;
  dt_fig_format fmt;
  FILE *f;
  double w, h;   /* page [pt]; drawing is in points whatever the format */
} fig_page;

/* Open a page of pg's size for format fmt writing to f.  0 or -1. */
int fig_open(fig_page *p, FILE *f, dt_fig_format fmt, const dt_fig_page *pg);
/* Finish the page and write it out.  0 or -1 (on any cairo or stream error). */
int fig_close(fig_page *p);

/* An axis: data [lo, hi] onto page [a, b] (b < a for y, which grows down). */
typedef struct fig_axis {
  double lo, hi;
  double a, b;
  int log;
} fig_axis;

double fig_map(const fig_axis *ax, double x);
/* Range of finite values (positive ones for a log axis), widened by pad
 * (a fraction of the span, or of a decade on log axes); [0, 1] when none. */
void fig_range(const double *x, size_t n, int log, double pad, double *lo, double *hi);
void fig_range_merge(const double *x, size_t n, int log, double *lo, double *hi);
/* Ticks: values (at most cap) for an axis; returns how many. */
size_t fig_ticks(const fig_axis *ax, double *t, size_t cap);
/* A tick's label ("0.5", "10", "10^3" as "1000", "-200"). */
void fig_tick_label(double v, double step_hint, int log, char *buf, size_t size);

/* The frame of a plot area with ticks and tick labels on all four sides
 * (labels left and bottom), the axis titles, clipped afterwards to the box
 * by the caller as needed.  xcat: category names at x = 0, 1, ... */
void fig_frame(fig_page *p, const fig_axis *x, const fig_axis *y, const char *xlabel,
               const char *ylabel, const char *const *xcat, size_t ncat, int xlabels);

void fig_colour(cairo_t *cr, int palette_index);
void fig_rgb(cairo_t *cr, const double rgb[3]);
/* Text at (x, y) aligned by ax (0 left, .5 centre, 1 right) and ay (0 top,
 * .5 middle, 1 baseline); rot in radians. */
void fig_text(cairo_t *cr, double x, double y, double size, double ax, double ay, double rot,
              const char *s);
/* Marker of kind m (0 circle, 1 square, 2 triangle, 3 diamond, 4 down
 * triangle) at (x, y), radius r, filled or open. */
void fig_marker(cairo_t *cr, double x, double y, double r, int m, int filled);

/* The standard font size [pt] of labels and tick labels. */
#define FIG_FONT 10.0
#define FIG_SMALL 8.5
#endif
