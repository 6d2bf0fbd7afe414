/* A screen as plain data: a grid of cells, each one character (UTF-8) with
 * a role and attributes.
 *
 * Everything the inspector shows is first drawn into a dt_grid by pure code
 * (plots, table, status line, help); only the terminal module turns roles
 * into colours and copies the grid to the real screen.  So the whole screen
 * can be built and checked without a terminal. */
#ifndef DT_UI_GRID_H
#define DT_UI_GRID_H
#include <stddef.h>

/* What a cell shows; the terminal module maps roles to colours (or, without
 * colour, to bold/dim/reverse so the screen stays readable).  In plots a
 * cell shared by several curves takes the role that comes last here, except
 * that a curve drawn on top (plot.h: the total model) keeps its cells. */
typedef enum dt_role {
  DT_R_NONE = 0,
  DT_R_TEXT,
  DT_R_LABEL,      /* headings, axis labels */
  DT_R_AXIS,       /* frames and ticks */
  DT_R_REF,        /* guide lines (flux 0 and 1) */
  DT_R_SIGMA,      /* 1-sigma error */
  DT_R_MASKED,     /* masked pixels */
  DT_R_CONT,       /* continuum */
  DT_R_COMP,       /* a component's own model */
  DT_R_COMPSEL,    /* the selected component (model and marker) */
  DT_R_MODEL,      /* total model */
  DT_R_FLUX,       /* data (over everything else it meets but the model) */
  DT_R_OFFPLOT,    /* values beyond the plotted range */
  DT_R_WINDOW,     /* background: continuum window / fit range */
  DT_R_CURSOR,     /* background: cursor column */
  DT_R_TITLE,      /* title bar */
  DT_R_GOOD,       /* verdict detected, saved */
  DT_R_WARN,       /* unsure, notices */
  DT_R_BAD,        /* errors, journal failure */
  DT_R_SELECTED,   /* selected table row */
  DT_R__COUNT
} dt_role;

enum { DT_A_BOLD = 1, DT_A_DIM = 2, DT_A_REVERSE = 4, DT_A_UNDERLINE = 8 };

typedef struct dt_cell {
  char ch[5];            /* one character, UTF-8, NUL-terminated */
  unsigned char fg;      /* dt_role of the character */
  unsigned char bg;      /* dt_role of the background (DT_R_NONE: plain) */
  unsigned char attr;    /* DT_A_* */
} dt_cell;

typedef struct dt_grid {
  int w, h;
  size_t cap;            /* cells allocated */
  dt_cell *cell;         /* row-major, h rows of w cells */
} dt_grid;

/* Resize (allocating only when it grows) and clear to blanks.
 * Returns 0, or -1 when out of memory. */
int dt_grid_reset(dt_grid *g, int w, int h);
void dt_grid_free(dt_grid *g);
/* The cell at (x, y), or NULL outside the grid. */
dt_cell *dt_grid_at(dt_grid *g, int x, int y);
/* Write UTF-8 text from (x, y), one cell per character, clipped at the
 * right edge and at max_cells (< 0: no limit).  Controls (C0, DEL, C1) and
 * ill-formed pieces (utf8.h: one per maximal subpart) become one '?' each.
 * Returns cells written. */
int dt_grid_text(dt_grid *g, int x, int y, const char *s, int fg, int attr, int max_cells);
/* printf into the grid (clipped like dt_grid_text). */
int dt_grid_printf(dt_grid *g, int x, int y, int fg, int attr, int max_cells, const char *fmt, ...)
#if defined(__GNUC__)
    __attribute__((format(printf, 7, 8)))
#endif
    ;
/* Fill a rectangle with one character and role. */
void dt_grid_fill(dt_grid *g, int x, int y, int w, int h, const char *ch, int fg, int bg, int attr);
/* Set the background role / attributes of a rectangle (characters kept). */
void dt_grid_shade(dt_grid *g, int x, int y, int w, int h, int bg, int attr_or);
/* A row as plain text (for tests): UTF-8, NUL-terminated, into buf. */
const char *dt_grid_row(const dt_grid *g, int y, char *buf, size_t size);

#endif
