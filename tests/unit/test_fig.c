/* The figure layer's pure parts: formats from names, contour segments,
 * and every writer producing a non-empty stream in each format. */
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "../../src/fig/fig.h"
#include "harness.h"

int main(void) {
  dt_fig_format f;
  CHECK(dt_fig_format_of("a/b.PDF", &f) == 0 && f == DT_FIG_PDF, ".PDF is PDF");
  CHECK(dt_fig_format_of("x.svg", &f) == 0 && f == DT_FIG_SVG, ".svg is SVG");
  CHECK(dt_fig_format_of("x.png", &f) == 0 && f == DT_FIG_PNG, ".png is PNG");
  CHECK(dt_fig_format_of("x.jpg", &f) == -1, ".jpg is not ours");
  CHECK(dt_fig_format_of("dir.png/x", &f) == -1, "a dot in a directory does not count");

  /* contours of z = distance from the origin on a 41 x 41 grid: every
   * segment end lies on the circle of the level (linear interpolation of
   * a cone is exact along grid lines, which is where the ends lie) */
  enum { N = 41 };
  static double z[N * N];
  for (int j = 0; j < N; j++)
    for (int i = 0; i < N; i++) z[j * N + i] = hypot(i - 20.0, j - 20.0);
  double lev = 7.3;
  dt_fig_contours c = {N, N, -20, 1, -20, 1, z, 1, &lev, NULL};
  static double seg[4 * 4096];
  size_t n = dt_fig_contour_segments(&c, lev, seg, 4096);
  double worst = 0, len = 0;
  for (size_t k = 0; k < n; k++) {
    for (int e = 0; e < 2; e++) {
      double x = seg[4 * k + 2 * e], y = seg[4 * k + 2 * e + 1];
      double r = hypot(x, y);
      /* along a grid line the cone is not linear; the error is below the
       * sagitta of a cell, 1/(2 r) (geometry, common practice) */
      worst = fmax(worst, fabs(r - lev));
    }
    len += hypot(seg[4 * k + 2] - seg[4 * k], seg[4 * k + 3] - seg[4 * k + 1]);
  }
  CHECK(n > 20, "contour of a cone: %zu segments", n);
  CHECK(worst < 1.0 / (2 * lev), "segment ends on the circle (worst %.3g)", worst);
  CHECK(fabs(len - 2 * M_PI * lev) < 0.02 * 2 * M_PI * lev, "contour length 2 pi r within 2%% (%.3f)", len);
  double high = 100;
  CHECK(dt_fig_contour_segments(&c, high, seg, 4096) == 0, "a level above all values: no segment");

  /* every writer, every format: a stream that starts as its format says */
  double x[3] = {1, 2, 3}, y[3] = {0.2, 0.5, 0.4}, lo[3] = {0.1, 0.4, 0.3}, hi[3] = {0.3, 0.6, 0.5};
  dt_fig_series s = {"points", 3, x, y, lo, hi, NULL, NULL, DT_FIG_POINTS | DT_FIG_LINE, 5, 0, NULL};
  dt_fig_chart ch = {"t", "x [u]", "y [u]", 0, 0, NAN, NAN, NAN, NAN, NULL, NULL, 0, 1, &s};
  dt_fig_map_point pt[2] = {{1, 2, DT_FIG_MARK_DETECTED, 30, NAN, "a"}, {-3, 0, DT_FIG_MARK_NOT_DETECTED, NAN, 50, "b"}};
  dt_fig_map m = {"map", "centre", 50, "", 2, pt, &c};
  dt_fig_page pg = {300, 200, 72};
  static const char *const magic[3] = {"%PDF", "\x89PNG", "<?xml"};
  for (int k = 0; k < 3; k++) {
    for (int w = 0; w < 2; w++) {
      char *buf = NULL;
      size_t len2 = 0;
      FILE *fp = open_memstream(&buf, &len2);
      int rc = w == 0 ? dt_fig_chart_write(fp, (dt_fig_format)k, &pg, &ch) : dt_fig_map_write(fp, (dt_fig_format)k, &pg, &m);
      fclose(fp);
      CHECK(rc == 0 && len2 > 100 && !memcmp(buf, magic[k], strlen(magic[k])), "%s %s written (%zu bytes)",
            w ? "map" : "chart", dt_fig_format_ext((dt_fig_format)k), len2);
      free(buf);
    }
  }
  double rgb[3];
  dt_fig_palette(6, rgb);
  /* Okabe & Ito (2008): vermillion is RGB (213, 94, 0) */
  CHECK(fabs(rgb[0] - 213 / 255.0) < 1e-12 && fabs(rgb[1] - 94 / 255.0) < 1e-12 && rgb[2] == 0, "vermillion");
  return dt_test_done();
}
