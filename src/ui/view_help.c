/* The inspector's overlays that stand apart from the spectrum: the summary
 * at the end of the queue and the help (the key table, page by page). */
#include <string.h>

#include "view_int.h"

/* ------------------------------------------------------------------ end */

/* The end of the queue: how many of each verdict, how many are left, and
 * the keys that go on from here. */
void dt_view_draw_finished(dt_insp *s, const layout *L) {
  dt_grid *g = &s->g;
  size_t count[5] = {0};
  for (size_t i = 0; i < s->q->n; i++) {
    int v = dt_insp_verdict_of(s, i);
    if (v >= 0 && v < 5) count[v]++;
  }
  int bw = L->w < 64 ? L->w - 4 : 60, bh = 12, bx = (L->w - bw) / 2, by = (L->h - bh) / 2;
  syms y = symbols(s);
  dt_grid_fill(g, bx, by, bw, bh, " ", DT_R_TEXT, DT_R_NONE, 0);
  dt_grid_fill(g, bx, by, bw, 1, y.hbar, DT_R_AXIS, DT_R_NONE, 0);
  dt_grid_fill(g, bx, by + bh - 1, bw, 1, y.hbar, DT_R_AXIS, DT_R_NONE, 0);
  int row = by + 1, x = bx + 2, m = bw - 4;
  dt_grid_printf(g, x, row++, DT_R_GOOD, DT_A_BOLD, m, "queue finished: %zu of %zu spectra judged",
                 s->q->n - count[DT_VERDICT_NONE], s->q->n);
  row++;
  static const dt_verdict order[] = {DT_VERDICT_DETECTED, DT_VERDICT_NOT_DETECTED, DT_VERDICT_UNSURE,
                                     DT_VERDICT_UNUSABLE, DT_VERDICT_NONE};
  for (size_t i = 0; i < sizeof order / sizeof order[0]; i++)
    dt_grid_printf(g, x + 2, row++, order[i] == DT_VERDICT_NONE && count[0] ? DT_R_WARN : DT_R_TEXT, 0, m - 2,
                   "%-14s %6zu", order[i] == DT_VERDICT_NONE ? "unjudged" : dt_verdict_name(order[i]),
                   count[order[i]]);
  row++;
  char k1[16], k2[16], k3[16];
  keyname_of_cmd(DT_CMD_NEXT_UNJUDGED, k1, sizeof k1);
  keyname_of_cmd(DT_CMD_PREV_SPECTRUM, k2, sizeof k2);
  keyname_of_cmd(DT_CMD_QUIT, k3, sizeof k3);
  if (count[DT_VERDICT_NONE])
    dt_grid_printf(g, x, row++, DT_R_LABEL, 0, m, "%s: to the unjudged   %s: back   %s: leave", k1, k2, k3);
  else
    dt_grid_printf(g, x, row++, DT_R_LABEL, 0, m, "%s: back to the last spectrum   %s: leave", k2, k3);
}

/* ------------------------------------------------------------------ help */

void dt_view_draw_help(dt_insp *s, const layout *L) {
  dt_grid *g = &s->g;
  size_t n;
  const dt_keybind *t = dt_keymap_table(&n);
  int bw = L->w - 4, bh = L->h - 4, bx = 2, by = 2;
  /* as many columns as fit the longest line whole (key, help, margin) */
  int need = 0;
  for (size_t i = 0; i < n; i++) {
    int wl = 8 + cells(t[i].help) + 2;
    if (wl > need) need = wl;
  }
  int ncol = (bw - 2) / (need > 0 ? need : 1);
  if (ncol < 1) ncol = 1;
  if (ncol > 3) ncol = 3;
  int colw = (bw - 2) / ncol;
  int lines = bh - 3; /* frame top, title, frame bottom */
  /* lay the table out: group headings, then "key  help (action)" lines */
  int per_page = lines * ncol;
  int total = 0;
  const char *group = NULL;
  for (size_t i = 0; i < n; i++) {
    if (!group || strcmp(group, t[i].group)) {
      total++;
      group = t[i].group;
    }
    total++;
  }
  s->help_pages = (total + per_page - 1) / per_page;
  if (s->help_page > s->help_pages) s->help_page = s->help_pages;
  int page = s->help_page - 1;
  dt_grid_fill(g, bx, by, bw, bh, " ", DT_R_TEXT, DT_R_NONE, 0);
  syms y = symbols(s);
  dt_grid_fill(g, bx, by, bw, 1, y.hbar, DT_R_AXIS, DT_R_NONE, 0);
  dt_grid_fill(g, bx, by + bh - 1, bw, 1, y.hbar, DT_R_AXIS, DT_R_NONE, 0);
  char k1[16];
  dt_grid_printf(g, bx + 2, by + 1, DT_R_LABEL, DT_A_BOLD, bw - 4,
                 "keys of the inspector - page %d of %d (%s: next, other keys: close)", page + 1,
                 s->help_pages, keyname_of_cmd(DT_CMD_HELP, k1, sizeof k1));
  int idx = 0;
  group = NULL;
  for (size_t i = 0; i < n; i++) {
    int heading = !group || strcmp(group, t[i].group);
    for (int h = heading ? 0 : 1; h < 2; h++) {
      int slot = idx - page * per_page;
      idx++;
      if (slot < 0 || slot >= per_page) continue;
      int cx = bx + 1 + (slot / lines) * colw, cy = by + 2 + slot % lines;
      if (h == 0) {
        dt_grid_printf(g, cx, cy, DT_R_LABEL, DT_A_BOLD | DT_A_UNDERLINE, colw - 1, "%s", t[i].group);
      } else {
        char kn[16];
        dt_keymap_keyname(t[i].key, kn, sizeof kn);
        int w = dt_grid_printf(g, cx, cy, DT_R_GOOD, DT_A_BOLD, colw - 1, " %-6s", kn);
        dt_grid_printf(g, cx + w, cy, DT_R_TEXT, 0, colw - 1 - w, "%s", t[i].help);
      }
    }
    group = t[i].group;
  }
}

