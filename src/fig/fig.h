/* Figures for papers: charts, sky maps and velocity stacks drawn with cairo
 * into PDF, SVG (vector) or PNG (raster), written to a stdio stream.
 *
 * This layer knows data and drawing only: no options, no file names, no
 * messages.  A caller fills a description (dt_fig_chart, dt_fig_map,
 * dt_fig_stack) and calls its writer with a page (size in points, raster
 * resolution) and a format.  Sizes: a page of w x h points is a PDF page of
 * that size, an SVG of width "w pt" and height "h pt", and a PNG of
 * round(w * dpi / 72) x round(h * dpi / 72) pixels.
 *
 * Colours: the eight colours of Okabe & Ito (2008, "Color Universal Design
 * (CUD): how to make figures and presentations that are friendly to
 * colorblind people", J*FLY), which stay distinct for the common colour
 * vision deficiencies; velocities use a diverging scale from the set's blue
 * (approaching) through light grey to its vermillion (receding). */
#ifndef DT_FIG_H
#define DT_FIG_H
#include <stddef.h>
#include <stdio.h>

typedef enum dt_fig_format { DT_FIG_PDF = 0, DT_FIG_PNG, DT_FIG_SVG } dt_fig_format;

/* The format named by a file's extension (.pdf, .png, .svg; any case).
 * 0, or -1 when the name has none of them. */
int dt_fig_format_of(const char *path, dt_fig_format *fmt);
/* "pdf", "png", "svg" */
const char *dt_fig_format_ext(dt_fig_format fmt);
/* 0 and *fmt for "pdf", "png", "svg"; -1 otherwise. */
int dt_fig_format_parse(const char *s, dt_fig_format *fmt);

typedef struct dt_fig_page {
  double w_pt, h_pt;  /* page size [pt, 1/72 inch] */
  double dpi;         /* PNG resolution [pixels per inch] */
} dt_fig_page;

/* Okabe & Ito palette: 0 black, 1 orange, 2 sky blue, 3 bluish green,
 * 4 yellow, 5 blue, 6 vermillion, 7 reddish purple; rgb in [0, 1]. */
void dt_fig_palette(int i, double rgb[3]);
/* The diverging velocity scale at t in [-1, 1] (clamped). */
void dt_fig_diverging(double t, double rgb[3]);

/* ---- x-y charts ---- */

enum {
  DT_FIG_POINTS = 1,   /* markers (with the error bars given) */
  DT_FIG_LINE = 2,     /* a polyline */
  DT_FIG_DASHED = 4    /* the line dashed */
};

typedef struct dt_fig_series {
  const char *label;           /* legend text; NULL: not in the legend */
  size_t n;
  const double *x, *y;
  const double *ylo, *yhi;     /* vertical error bar ends (absolute), or NULL */
  const double *xlo, *xhi;     /* horizontal bar ends (bin edges), or NULL */
  int style;                   /* DT_FIG_POINTS | DT_FIG_LINE | DT_FIG_DASHED */
  int colour;                  /* palette index */
  int marker;                  /* 0 circle, 1 square, 2 triangle, 3 diamond */
  const char *const *text;     /* a short text beside each point (e.g. "3/7"), or NULL */
} dt_fig_series;

typedef struct dt_fig_chart {
  const char *title;           /* above the plot, or NULL */
  const char *xlabel, *ylabel; /* with units, e.g. "separation r [kpc]" */
  int xlog, ylog;              /* logarithmic axes */
  double xmin, xmax, ymin, ymax; /* NaN: from the data */
  const char *note;            /* a line of text in the upper left, or NULL */
  const char *const *xcat;     /* category names under the x ticks 0, 1, ...
                                  (ncat of them), or NULL for a numeric axis */
  size_t ncat;
  size_t nseries;
  const dt_fig_series *series;
} dt_fig_chart;

/* Draw chart c on one page and write it to f.  0, or -1 when cairo or the
 * stream failed (nothing useful was written). */
int dt_fig_chart_write(FILE *f, dt_fig_format fmt, const dt_fig_page *pg, const dt_fig_chart *c);

/* ---- sky maps ---- */

typedef enum dt_fig_mark {
  DT_FIG_MARK_DETECTED = 0,    /* filled circle, coloured by velocity */
  DT_FIG_MARK_NOT_DETECTED,    /* open downward triangle (an upper limit) */
  DT_FIG_MARK_LEFT_OUT         /* a grey cross */
} dt_fig_mark;

typedef struct dt_fig_map_point {
  double x, y;                 /* tangent-plane offsets [arcmin]: x east (drawn to the left), y north */
  dt_fig_mark mark;
  double v_kms;                /* velocity (detections; NaN: none) */
  double limit;                /* upper limit shown beside a non-detection (NaN: none) */
  const char *label;           /* name, or NULL */
} dt_fig_map_point;

/* Optional contours beneath the points: values on a regular grid in the
 * same tangent-plane coordinates, drawn at the given levels. */
typedef struct dt_fig_contours {
  size_t nx, ny;
  double x0, dx, y0, dy;       /* centre of cell (0, 0) and steps [arcmin] */
  const double *z;             /* nx * ny values, row-major (row = y) */
  size_t nlevel;
  const double *level;
  const char *label;           /* legend text, e.g. "N(HI) [cm-2]" */
} dt_fig_contours;

typedef struct dt_fig_map {
  const char *title;
  const char *centre;          /* "centre RA 150.1000 Dec +2.2000 (ICRS)" */
  double vmax_kms;             /* colour scale +-vmax (> 0) */
  const char *limit_unit;      /* "mA" or "" */
  size_t n;
  const dt_fig_map_point *pt;
  const dt_fig_contours *contours; /* NULL: none */
} dt_fig_map;

int dt_fig_map_write(FILE *f, dt_fig_format fmt, const dt_fig_page *pg, const dt_fig_map *m);

/* Marching squares: the contour segments of z at level, as (x1,y1,x2,y2)
 * quadruples in seg (capacity cap segments).  Returns the number of
 * segments found (which may exceed cap; only cap are stored). */
size_t dt_fig_contour_segments(const dt_fig_contours *c, double level, double *seg, size_t cap);

/* ---- velocity stacks ---- */

typedef struct dt_fig_panel {
  const char *label;           /* "NaI 5891" */
  size_t n;                    /* pixels */
  const double *v;             /* velocity [km/s], increasing */
  const double *flux, *err;    /* normalised or raw flux and 1-sigma error (err may be NULL) */
  const unsigned char *masked; /* 1: masked pixel (may be NULL) */
  const double *cont;          /* continuum (may be NULL) */
  const double *model;         /* total model (may be NULL) */
  size_t ncomp;
  const double *const *comp;   /* ncomp models of one component each (may be NULL) */
  const double *comp_v;        /* ncomp component velocities [km/s] for the ticks */
} dt_fig_panel;

typedef struct dt_fig_stack {
  const char *title;           /* "VPQ06  NaI  system target" */
  const char *subtitle;        /* verdict and fit summary, or NULL */
  double vlo, vhi;             /* velocity range shown [km/s] */
  int normalised;              /* 1: flux divided by the continuum (y label "normalised flux") */
  size_t npanel;
  const dt_fig_panel *panel;
} dt_fig_stack;

int dt_fig_stack_write(FILE *f, dt_fig_format fmt, const dt_fig_page *pg, const dt_fig_stack *s);

#endif
