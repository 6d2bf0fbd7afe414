/* Plotting without a terminal: data -> grid of cells, in braille, block and
 * ASCII modes; masked pixels, values beyond the range, NaN, empty data.
 *
 * Braille code points follow the Unicode Standard's Braille Patterns block
 * (U+2800-U+28FF): dot n of the 8-dot cell sets bit n-1, dots 1-3 run down
 * the left column, 4-6 down the right, 7 and 8 are the bottom-left and
 * bottom-right dots.  Half blocks: U+2580 UPPER HALF BLOCK, U+2584 LOWER
 * HALF BLOCK, U+2588 FULL BLOCK (Unicode Block Elements chart). */
#include <locale.h>
#include <math.h>
#include <stdio.h>
#include <string.h>

#include "harness.h"
#include "../../src/ui/grid.h"
#include "../../src/ui/plot.h"
#include "../../src/ui/term.h"

static dt_grid g;
static dt_plot p;

static const char *cell(int x, int y) {
  dt_cell *c = dt_grid_at(&g, x, y);
  return c ? c->ch : "(outside)";
}
static int role(int x, int y) { return dt_grid_at(&g, x, y)->fg; }

static int count_nonblank(void) {
  int n = 0;
  for (int y = 0; y < g.h; y++)
    for (int x = 0; x < g.w; x++)
      if (strcmp(cell(x, y), " ")) n++;
  return n;
}

int main(void) {
  /* ---- braille: single dots land on the documented bits ---- */
  dt_grid_reset(&g, 10, 4);
  CHECK(dt_plot_begin(&p, DT_PLOT_BRAILLE, 10, 4, 0, 20, 0, 16) == 0, "braille plot 10x4 cells = 20x16 dots");
  double x1[] = {0.5}, y1[] = {15.9};
  dt_plot_points(&p, x1, y1, NULL, 1, DT_R_FLUX, 0);
  double x2[] = {19.5}, y2[] = {0.1};
  dt_plot_points(&p, x2, y2, NULL, 1, DT_R_FLUX, 0);
  dt_plot_render(&p, &g, 0, 0);
  CHECK(!strcmp(cell(0, 0), "\xe2\xa0\x81"), "top-left dot is dot 1: U+2801 (got %s)", cell(0, 0));
  CHECK(!strcmp(cell(9, 3), "\xe2\xa2\x80"), "bottom-right dot is dot 8: U+2880 (got %s)", cell(9, 3));
  CHECK(role(0, 0) == DT_R_FLUX, "dot cell takes the series' role");
  CHECK(count_nonblank() == 2, "nothing else drawn");

  /* a filled cell: all 8 dots -> U+28FF */
  dt_grid_reset(&g, 10, 4);
  dt_plot_begin(&p, DT_PLOT_BRAILLE, 10, 4, 0, 20, 0, 16);
  double fx[8], fy[8];
  for (int i = 0; i < 8; i++) {
    fx[i] = 2.5 + (i % 2);      /* dot columns 2 and 3 = cell column 1 */
    fy[i] = 15.5 - (i / 2);     /* dot rows 0..3 = cell row 0 */
  }
  dt_plot_points(&p, fx, fy, NULL, 8, DT_R_MODEL, 0);
  dt_plot_render(&p, &g, 0, 0);
  CHECK(!strcmp(cell(1, 0), "\xe2\xa3\xbf"), "all eight dots: U+28FF (got %s)", cell(1, 0));

  /* a horizontal line across the plot: every cell the same pattern
     (dots 3 and 6: row 2 of each cell -> U+2824) */
  dt_grid_reset(&g, 10, 4);
  dt_plot_begin(&p, DT_PLOT_BRAILLE, 10, 4, 0, 20, 0, 16);
  double lx[] = {0, 20}, ly[] = {13.5, 13.5};
  dt_plot_line(&p, lx, ly, NULL, 2, DT_R_CONT, 0);
  dt_plot_render(&p, &g, 0, 0);
  int same = 1;
  for (int x = 0; x < 10; x++) same &= !strcmp(cell(x, 0), "\xe2\xa0\xa4") && role(x, 0) == DT_R_CONT;
  CHECK(same, "horizontal line: U+2824 in every cell of row 0 (first: %s)", cell(0, 0));
  CHECK(count_nonblank() == 10, "and nothing in other rows");

  /* a diagonal covers every column once per dot column: no gaps */
  dt_grid_reset(&g, 10, 4);
  dt_plot_begin(&p, DT_PLOT_BRAILLE, 10, 4, 0, 20, 0, 16);
  double dx[] = {0, 20}, dy[] = {0, 16};
  dt_plot_line(&p, dx, dy, NULL, 2, DT_R_FLUX, 0);
  dt_plot_render(&p, &g, 0, 0);
  int cols = 0;
  for (int x = 0; x < 10; x++) {
    int any = 0;
    for (int y = 0; y < 4; y++) any |= strcmp(cell(x, y), " ") != 0;
    cols += any;
  }
  CHECK(cols == 10, "a diagonal reaches every column (%d)", cols);
  CHECK(strcmp(cell(0, 3), " ") && strcmp(cell(9, 0), " "), "from bottom-left to top-right");

  /* ---- masked pixels: the line breaks; masked points drawn on their own ---- */
  dt_grid_reset(&g, 20, 4);
  dt_plot_begin(&p, DT_PLOT_ASCII, 20, 4, 0, 20, 0, 4);
  double mx[20], my[20];
  unsigned char mask[20] = {0};
  for (int i = 0; i < 20; i++) {
    mx[i] = i + 0.5;
    my[i] = 2.5;
  }
  for (int i = 8; i < 12; i++) mask[i] = 1;
  my[9] = 0.5; /* a masked pixel with a wild value */
  dt_plot_line(&p, mx, my, mask, 20, DT_R_FLUX, DT_PLOT_MARK_OFF);
  dt_plot_points(&p, mx, my, mask, 20, DT_R_MASKED, DT_PLOT_MARK_OFF);
  dt_plot_render(&p, &g, 0, 0);
  char row[256];
  dt_grid_row(&g, 1, row, sizeof row);
  CHECK(!strcmp(row, "********x xx********"), "ASCII: data '*' with masked pixels 'x' in the gap: '%s'", row);
  CHECK(role(9, 3) == DT_R_MASKED && !strcmp(cell(9, 3), "x"), "the wild masked value is drawn as masked");
  CHECK(role(8, 1) == DT_R_MASKED && role(7, 1) == DT_R_FLUX, "roles of data and masked cells");

  /* ---- values beyond the range: clipped, marked with arrows ---- */
  dt_grid_reset(&g, 10, 5);
  dt_plot_begin(&p, DT_PLOT_ASCII, 10, 5, 0, 10, 0, 5);
  double ox[] = {0.5, 1.5, 2.5, 3.5, 4.5, 5.5, 6.5}, oy[] = {2.5, 2.5, 50.0, 2.5, -9.0, 2.5, 2.5};
  dt_plot_line(&p, ox, oy, NULL, 7, DT_R_FLUX, DT_PLOT_MARK_OFF);
  dt_plot_render(&p, &g, 0, 0);
  CHECK(!strcmp(cell(2, 0), "^") && role(2, 0) == DT_R_OFFPLOT, "value above the range: '^' on top (%s)", cell(2, 0));
  CHECK(!strcmp(cell(4, 4), "v") && role(4, 4) == DT_R_OFFPLOT, "value below: 'v' at the bottom (%s)", cell(4, 4));
  int outside = 0;
  for (int x = 7; x < 10; x++)
    for (int y = 0; y < 5; y++) outside += strcmp(cell(x, y), " ") != 0;
  CHECK(outside == 0, "nothing drawn beyond the last point");
  CHECK(!strcmp(cell(1, 2), "*") && !strcmp(cell(5, 2), "*"), "in-range points drawn");
  /* braille marks use arrows from the geometric shapes block */
  dt_grid_reset(&g, 10, 5);
  dt_plot_begin(&p, DT_PLOT_BRAILLE, 10, 5, 0, 10, 0, 5);
  dt_plot_line(&p, ox, oy, NULL, 7, DT_R_FLUX, DT_PLOT_MARK_OFF);
  dt_plot_render(&p, &g, 0, 0);
  CHECK(!strcmp(cell(2, 0), "\xe2\x96\xb2") && !strcmp(cell(4, 4), "\xe2\x96\xbc"),
        "braille mode: U+25B2 above, U+25BC below");
  /* without the flag, clipped silently */
  dt_grid_reset(&g, 10, 5);
  dt_plot_begin(&p, DT_PLOT_ASCII, 10, 5, 0, 10, 0, 5);
  dt_plot_line(&p, ox, oy, NULL, 7, DT_R_MODEL, 0);
  dt_plot_render(&p, &g, 0, 0);
  CHECK(!strcmp(cell(1, 0), "#") && !strcmp(cell(3, 0), "#") && !strcmp(cell(2, 0), " "),
        "the steep line is clipped at the top edge, no marker");

  /* ---- NaN breaks the line; empty and degenerate input draws nothing ---- */
  dt_grid_reset(&g, 10, 3);
  dt_plot_begin(&p, DT_PLOT_ASCII, 10, 3, 0, 10, 0, 3);
  double nx[] = {0.5, 1.5, 2.5, 3.5, 4.5, 5.5}, ny[] = {1.5, 1.5, NAN, NAN, 1.5, 1.5};
  dt_plot_line(&p, nx, ny, NULL, 6, DT_R_FLUX, DT_PLOT_MARK_OFF);
  double nx2[] = {NAN, 7.5}, ny2[] = {1.5, INFINITY};
  dt_plot_line(&p, nx2, ny2, NULL, 2, DT_R_FLUX, DT_PLOT_MARK_OFF);
  dt_plot_render(&p, &g, 0, 0);
  dt_grid_row(&g, 1, row, sizeof row);
  CHECK(!strcmp(row, "**  **    "), "NaN leaves a gap, infinite values nothing: '%s'", row);
  CHECK(count_nonblank() == 4, "no arrows for NaN/infinite values");

  dt_grid_reset(&g, 10, 3);
  dt_plot_begin(&p, DT_PLOT_BRAILLE, 10, 3, 0, 10, 0, 3);
  dt_plot_line(&p, nx, ny, NULL, 0, DT_R_FLUX, 0);
  dt_plot_line(&p, NULL, NULL, NULL, 5, DT_R_FLUX, 0);
  dt_plot_points(&p, nx, ny, NULL, 0, DT_R_FLUX, 0);
  dt_plot_render(&p, &g, 0, 0);
  CHECK(count_nonblank() == 0, "empty data: blank plot");
  CHECK(dt_plot_begin(&p, DT_PLOT_BRAILLE, 10, 3, 0, 0, 0, 1) == -1, "empty x range refused");
  CHECK(dt_plot_begin(&p, DT_PLOT_BRAILLE, 10, 3, 0, 1, NAN, 1) == -1, "NaN range refused");
  CHECK(dt_plot_begin(&p, DT_PLOT_BRAILLE, 0, 3, 0, 1, 0, 1) == -1, "zero width refused");
  dt_plot_line(&p, nx, ny, NULL, 6, DT_R_FLUX, 0); /* after a refused begin: no-op, no crash */
  dt_plot_render(&p, &g, 0, 0);
  CHECK(count_nonblank() == 0, "a refused plot draws nothing");

  /* ---- ASCII priorities: the model wins a shared cell; glyphs differ ---- */
  dt_grid_reset(&g, 4, 2);
  dt_plot_begin(&p, DT_PLOT_ASCII, 4, 2, 0, 4, 0, 2);
  double px[] = {0.5, 3.5}, py[] = {1.5, 1.5};
  dt_plot_line(&p, px, py, NULL, 2, DT_R_FLUX, 0);
  dt_plot_line(&p, px, py, NULL, 2, DT_R_MODEL, 0);
  dt_plot_line(&p, px, py, NULL, 2, DT_R_SIGMA, 0);
  dt_plot_render(&p, &g, 0, 0);
  CHECK(!strcmp(cell(0, 0), "*") && role(0, 0) == DT_R_FLUX, "data drawn over model and sigma, whatever the order");
  const int roles[] = {DT_R_REF, DT_R_SIGMA, DT_R_MASKED, DT_R_CONT, DT_R_COMP, DT_R_COMPSEL, DT_R_MODEL, DT_R_FLUX};
  int distinct = 1;
  for (int i = 0; i < 8; i++)
    for (int j = i + 1; j < 8; j++) distinct &= dt_plot_ascii_glyph(roles[i]) != dt_plot_ascii_glyph(roles[j]);
  CHECK(distinct, "every plotted role has its own ASCII glyph (readable without colour)");

  /* ---- half blocks: two dots per cell, upper / lower / both ---- */
  dt_grid_reset(&g, 3, 1);
  dt_plot_begin(&p, DT_PLOT_BLOCK, 3, 1, 0, 3, 0, 2);
  double bx[] = {0.5, 1.5, 2.5, 2.5}, by[] = {1.5, 0.5, 1.5, 0.5};
  dt_plot_points(&p, bx, by, NULL, 4, DT_R_FLUX, 0);
  dt_plot_render(&p, &g, 0, 0);
  CHECK(!strcmp(cell(0, 0), "\xe2\x96\x80") && !strcmp(cell(1, 0), "\xe2\x96\x84") &&
            !strcmp(cell(2, 0), "\xe2\x96\x88"),
        "upper U+2580, lower U+2584, full U+2588");

  /* ---- spans, markers and columns ---- */
  dt_grid_reset(&g, 12, 3);
  dt_plot_begin(&p, DT_PLOT_BRAILLE, 10, 3, -100, 100, 0, 1);
  dt_plot_vspan(&p, -100, -61, DT_R_WINDOW);
  dt_plot_mark(&p, 0, 0, "1", DT_R_COMPSEL, DT_A_BOLD);
  dt_plot_mark(&p, 500, 0, "2", DT_R_COMP, 0); /* outside: ignored */
  dt_plot_render(&p, &g, 2, 0);
  CHECK(dt_grid_at(&g, 2, 1)->bg == DT_R_WINDOW && dt_grid_at(&g, 3, 2)->bg == DT_R_WINDOW &&
            dt_grid_at(&g, 4, 1)->bg == DT_R_NONE && dt_grid_at(&g, 1, 1)->bg == DT_R_NONE,
        "span shades columns 0-1 of the plot (grid x 2-3) only");
  CHECK(!strcmp(cell(7, 0), "1") && role(7, 0) == DT_R_COMPSEL, "marker at the column of x = 0");
  CHECK(count_nonblank() == 1, "marker beyond the range ignored");
  CHECK(dt_plot_column(&p, -100) == 0 && dt_plot_column(&p, 100) == 9 && dt_plot_column(&p, 101) == -1 &&
            dt_plot_column(&p, NAN) == -1,
        "column of x");
  CHECK_CLOSE(dt_plot_colx(&p, 0), -90, 1e-12, "x at the centre of column 0");
  CHECK(dt_plot_column(&p, dt_plot_colx(&p, 7)) == 7, "column <-> x round trip");

  /* ---- grid text: clipping and control characters never reach the screen ---- */
  dt_grid_reset(&g, 6, 1);
  int k = dt_grid_text(&g, 2, 0, "ab\x1b[31mcd", DT_R_TEXT, 0, -1);
  dt_grid_row(&g, 0, row, sizeof row);
  CHECK(k == 4 && !strcmp(row, "  ab?["), "escape sequences are neutralised and text clipped: '%s'", row);
  dt_grid_reset(&g, 6, 1);
  dt_grid_text(&g, 0, 0, "\xc2\xb1\xcf\x83x", DT_R_TEXT, 0, -1);
  CHECK(!strcmp(cell(0, 0), "\xc2\xb1") && !strcmp(cell(1, 0), "\xcf\x83") && !strcmp(cell(2, 0), "x"),
        "UTF-8 characters take one cell each");
  CHECK(dt_grid_text(&g, 0, 0, "\xc2\xb1\xcf\x83x", DT_R_TEXT, 0, -1) == 3, "UTF-8 text: one cell per code point");
  /* C1 controls and ill-formed bytes (utf8.h) take one '?' cell per unit */
  dt_grid_reset(&g, 8, 1);
  k = dt_grid_text(&g, 0, 0, "a\xc2\x9b" "b\xe2\x82" "c\xc0\xaf", DT_R_TEXT, 0, -1);
  dt_grid_row(&g, 0, row, sizeof row);
  CHECK(k == 7 && !strcmp(row, "a?b?c?? "), "C1 CSI, a truncated sequence and an overlong '/' become '?': '%s'", row);

  /* ---- the model on top: in a trough whose data lie below the model, both
   * keep cells of their own; where they coincide the model's cells show
   * the model's dots alone ---- */
  {
    enum { W = 40, H = 8, N = 401 };
    double xs[N], ym[N], yd[N];
    for (int i = 0; i < N; i++) {
      xs[i] = -100 + 0.5 * i;
      double gsh = exp(-0.5 * xs[i] * xs[i] / 400.0);
      ym[i] = 1 - 0.5 * gsh;
      yd[i] = fabs(xs[i]) < 15 ? 1 - 0.95 * gsh : ym[i]; /* deeper than the model in the core */
    }
    dt_grid mg = {0};
    dt_plot mp = {0};
    /* the model alone, for its glyphs */
    dt_grid_reset(&mg, W, H);
    dt_plot_begin(&mp, DT_PLOT_BRAILLE, W, H, -100, 100, -0.1, 1.2);
    dt_plot_line(&mp, xs, ym, NULL, N, DT_R_MODEL, DT_PLOT_ON_TOP);
    dt_plot_render(&mp, &mg, 0, 0);
    /* model first, data after: the order of drawing does not matter */
    dt_grid_reset(&g, W, H);
    dt_plot_begin(&p, DT_PLOT_BRAILLE, W, H, -100, 100, -0.1, 1.2);
    dt_plot_line(&p, xs, ym, NULL, N, DT_R_MODEL, DT_PLOT_ON_TOP);
    dt_plot_line(&p, xs, yd, NULL, N, DT_R_FLUX, 0);
    dt_plot_render(&p, &g, 0, 0);
    int model_cells = 0, model_alone = 0, flux_below = 0, wing_model = 0;
    for (int x = 0; x < W; x++) {
      int lowest_model = -1;
      for (int y = 0; y < H; y++) {
        if (role(x, y) != DT_R_MODEL) continue;
        model_cells++;
        lowest_model = y;
        if (!strcmp(cell(x, y), dt_grid_at(&mg, x, y)->ch)) model_alone++;
        if (x < 10 || x >= 30) wing_model++;
      }
      for (int y = lowest_model + 1; lowest_model >= 0 && y < H; y++)
        if (role(x, y) == DT_R_FLUX) flux_below++;
    }
    int model_ref = 0;
    for (int y = 0; y < H; y++)
      for (int x = 0; x < W; x++) model_ref += dt_grid_at(&mg, x, y)->fg == DT_R_MODEL;
    CHECK(model_cells == model_ref, "the model keeps every one of its cells over the data (%d of %d)", model_cells,
          model_ref);
    CHECK(wing_model > 0, "in the wings, where data and model coincide, the model shows (%d cells)", wing_model);
    CHECK(model_alone == model_cells, "a shared cell shows the model's dots alone (%d of %d)", model_alone, model_cells);
    CHECK(flux_below >= 2, "in the trough the data below the model keep their own cells (%d)", flux_below);
    /* ASCII: the model's glyph wins its cells too */
    dt_grid_reset(&g, W, H);
    dt_plot_begin(&p, DT_PLOT_ASCII, W, H, -100, 100, -0.1, 1.2);
    dt_plot_line(&p, xs, ym, NULL, N, DT_R_MODEL, DT_PLOT_ON_TOP);
    dt_plot_line(&p, xs, yd, NULL, N, DT_R_FLUX, 0);
    dt_plot_render(&p, &g, 0, 0);
    int hash = 0, star = 0;
    for (int y = 0; y < H; y++)
      for (int x = 0; x < W; x++) {
        hash += !strcmp(cell(x, y), "#");
        star += !strcmp(cell(x, y), "*");
      }
    CHECK(hash > 0 && star > 0, "ASCII: model '#' and data '*' both drawn (%d, %d)", hash, star);
    dt_plot_free(&mp);
    dt_grid_free(&mg);
  }

  dt_plot_free(&p);
  dt_grid_free(&g);
  /* a colour drawn on the continuum-window shade stays visible: the blue
   * rest-frame guide on the blue shade of an 8-colour terminal (curses
   * colour numbers: 4 blue, 7 white) */
  CHECK(dt_term_window_fg(4, 4) != 4, "blue on the blue shade changes colour");
  CHECK(dt_term_window_fg(6, 4) == 6, "cyan on the blue shade stays cyan");
  CHECK(dt_term_window_fg(4, 236) == 4, "blue on a grey shade stays blue");
  /* what the terminal gets for a cell: one column each, in a UTF-8 locale */
  if (setlocale(LC_CTYPE, "C.UTF-8") || setlocale(LC_CTYPE, "en_US.UTF-8")) {
    CHECK(!strcmp(dt_term_one_column("\xcf\x83"), "\xcf\x83") && !strcmp(dt_term_one_column("\xe2\xa3\xbf"), "\xe2\xa3\xbf"),
          "U+03C3 and a braille pattern U+28FF go out as they are");
    CHECK(!strcmp(dt_term_one_column("\xe6\x98\x9f"), "?") && !strcmp(dt_term_one_column("\xf0\x9f\x98\x80"), "?"),
          "wide U+661F and U+1F600 go out as '?' (they would take two columns)");
    CHECK(!strcmp(dt_term_one_column("\xcc\x81"), "?"), "a combining mark U+0301 goes out as '?' (no column)");
    CHECK(!strcmp(dt_term_one_column("x"), "x") && !strcmp(dt_term_one_column("\xe2\x82"), "?"), "ASCII kept, a broken cell is '?'");
    setlocale(LC_CTYPE, "C");
  } else {
    printf("SKIPPED - no UTF-8 locale for the terminal's column checks\n");
  }
  return dt_test_done();
}
