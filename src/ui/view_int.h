/* Private to the inspector's drawing (view*.c): the screen's layout and
 * small helpers shared by its parts. */
#ifndef DT_UI_VIEW_INT_H
#define DT_UI_VIEW_INT_H
#include <math.h>
#include <stdio.h>
#include "doubletty/utf8.h"
#include "insp.h"
#include "keymap.h"

#define FOOTER_MIN 16 /* " ? help  q quit " */

typedef struct layout {
  int w, h;
  int ov_y, ov_h, ovaxis_y;
  int pan_y[2], pan_h;
  int link_y[DT_JUDGE_MAX_LINKED]; /* a panel per linked species (the pan_h rows) */
  int nlink;
  int hi_y, hi_h;            /* the 21-cm panel (0 rows: none) */
  int vaxis_y;
  int sys_y;                /* the systems' bands (-1: none, one system) */
  int gutter, plot_x, plot_w;
  int tab_x, tab_y, tab_w, tab_h;
  int status_y, status_h;   /* a long message takes two rows */
} layout;

/* Cells of UTF-8 text (one per code point, as dt_grid_text draws it; the
 * screen has no wide glyphs). */
static inline int cells(const char *t) { return (int)dt_utf8_count(t); }

/* Symbols with ASCII stand-ins. */
typedef struct syms {
  const char *pm, *sig, *chi, *mA, *ang, *vbar, *hbar, *arrow, *ell;
} syms;

static inline syms symbols(const dt_insp *s) {
  if (s->utf8)
    return (syms){"\xc2\xb1", "\xcf\x83", "\xcf\x87\xc2\xb2\xce\xbd", "m\xc3\x85", "\xc3\x85", "\xe2\x94\x82",
                  "\xe2\x94\x80", "\xe2\x96\xb6", "\xe2\x80\xa6"};
  return (syms){"+-", "sig", "chi2r", "mA", "A", "|", "-", ">", "..."};
}

static inline const char *keyname_of_cmd(dt_cmd c, char *buf, size_t n) {
  const dt_keybind *b = dt_keymap_of(c);
  return b ? dt_keymap_keyname(b->key, buf, n) : "?";
}

/* The end-of-queue summary and the help overlay (view_help.c). */
void dt_view_draw_finished(dt_insp *s, const layout *L);
void dt_view_draw_help(dt_insp *s, const layout *L);

/* Linked species (view_linked.c): the chooser of species to link, drawn
 * over the panels; the table's rows of the linked species (log N per
 * species, T and b_turb) from row on, the next free row returned. */
void dt_view_draw_chooser(dt_insp *s, const layout *L);
int dt_view_table_linked(dt_insp *s, int x, int row, int maxw, int end);
/* Rows the table's linked species need. */
int dt_view_linked_rows(const dt_insp *s);

#endif
