/* The inspector's drawing of linked species: the chooser over the panels
 * (the table's doublets the spectrum covers, linked ones marked), and the
 * table's rows of each linked species' log N per component and, under the
 * thermal b rule, each component's T and b_turb.  The panels themselves
 * are view.c's (a panel per species). */
#include <string.h>

#include "view_int.h"

int dt_view_linked_rows(const dt_insp *s) {
  const dt_judgement *j = &s->ss->j;
  if (!s->ss->loaded || j->nlinked == 0) return 0;
  return (int)j->nlinked + (j->btie == DT_BTIE_THERMAL ? 1 : 0);
}

/* One species' row: name, b rule, then "k: logN±err" per component. */
static void species_row(dt_insp *s, int x, int row, int maxw, size_t k) {
  dt_grid *g = &s->g;
  const dt_judgement *j = &s->ss->j;
  int cx = dt_grid_printf(g, x, row, DT_R_GOOD, DT_A_BOLD, maxw, "%-5s", j->linked[k]);
  if (!j->has_joint) {
    dt_grid_printf(g, x + cx, row, DT_R_WARN, 0, maxw - cx, " linked (b %s): no joint fit%s%s", dt_btie_name(j->btie),
                   s->ss->jmsg[0] ? " - " : " yet", s->ss->jmsg);
    return;
  }
  cx += dt_grid_printf(g, x + cx, row, DT_R_LABEL, 0, maxw - cx, " logN");
  for (size_t c = 0; c < j->ncomp && cx < maxw; c++) {
    char pm[48];
    dt_view_pm(s, pm, sizeof pm, j->joint.sp[k].logN[c], j->joint.sp[k].logN_err[c], 2);
    cx += dt_grid_printf(g, x + cx, row, c == s->ss->sel ? DT_R_COMPSEL : DT_R_TEXT, 0, maxw - cx, "  %zu:%s",
                         c + 1, pm);
    if (j->btie == DT_BTIE_FREE && cx < maxw)
      cx += dt_grid_printf(g, x + cx, row, DT_R_TEXT, DT_A_DIM, maxw - cx, " b%.1f", j->joint.sp[k].b[c]);
  }
}

/* The thermal rule's row: T [K] and b_turb [km/s] per component. */
static void thermal_row(dt_insp *s, int x, int row, int maxw) {
  dt_grid *g = &s->g;
  const dt_judgement *j = &s->ss->j;
  int cx = dt_grid_printf(g, x, row, DT_R_LABEL, DT_A_BOLD, maxw, "T/bt ");
  if (!j->has_joint) {
    dt_grid_printf(g, x + cx, row, DT_R_WARN, 0, maxw - cx, " no joint fit yet");
    return;
  }
  for (size_t c = 0; c < j->ncomp && cx < maxw; c++) {
    char t[48], b[48];
    dt_view_pm(s, t, sizeof t, j->joint.T[c], j->joint.T_err[c], 0);
    dt_view_pm(s, b, sizeof b, j->joint.bturb[c], j->joint.bturb_err[c], 1);
    cx += dt_grid_printf(g, x + cx, row, c == s->ss->sel ? DT_R_COMPSEL : DT_R_TEXT, 0, maxw - cx,
                         "  %zu:%sK/%s", c + 1, t, b);
  }
}

int dt_view_table_linked(dt_insp *s, int x, int row, int maxw, int end) {
  const dt_judgement *j = &s->ss->j;
  if (!dt_view_linked_rows(s)) return row;
  for (size_t k = 0; k < j->nlinked && row < end; k++) species_row(s, x, row++, maxw, k);
  if (j->btie == DT_BTIE_THERMAL && row < end) thermal_row(s, x, row++, maxw);
  return row;
}

void dt_view_draw_chooser(dt_insp *s, const layout *L) {
  dt_grid *g = &s->g;
  const dt_doublet *c[DT_INSP_CHOICES];
  size_t n = dt_insp_link_choices(s, c);
  int bw = 46, bh = (int)n + 4, bx = L->plot_x + 2, by = L->pan_y[0];
  if (bx + bw > L->w) bw = L->w - bx;
  syms y = symbols(s);
  dt_grid_fill(g, bx, by, bw, bh, " ", DT_R_TEXT, DT_R_NONE, 0);
  dt_grid_fill(g, bx, by, bw, 1, y.hbar, DT_R_AXIS, DT_R_NONE, 0);
  dt_grid_fill(g, bx, by + bh - 1, bw, 1, y.hbar, DT_R_AXIS, DT_R_NONE, 0);
  dt_grid_printf(g, bx + 1, by + 1, DT_R_LABEL, DT_A_BOLD, bw - 2, "link with %s (b %s):", s->ss->j.doublet,
                 dt_btie_name(s->ss->j.btie));
  for (size_t i = 0; i < n; i++) {
    int on = dt_judgement_linked_index(&s->ss->j, c[i]->name) >= 0;
    dt_grid_printf(g, bx + 1, by + 2 + (int)i, on ? DT_R_GOOD : DT_R_TEXT,
                   i == s->choice_sel ? DT_A_REVERSE : 0, bw - 2, " %zu  [%s] %-6s %.0f %.0f", i + 1,
                   on ? "x" : " ", c[i]->name, c[i]->line[0].lambda0, c[i]->line[1].lambda0);
  }
}
