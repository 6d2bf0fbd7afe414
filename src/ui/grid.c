/* The screen as a grid of cells (see grid.h): allocation, text, fills. */
#include "grid.h"

#include <stdarg.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "doubletty/utf8.h"

static void blank(dt_cell *c) {
  c->ch[0] = ' ';
  c->ch[1] = '\0';
  c->fg = DT_R_TEXT;
  c->bg = DT_R_NONE;
  c->attr = 0;
}

int dt_grid_reset(dt_grid *g, int w, int h) {
  if (w < 0) w = 0;
  if (h < 0) h = 0;
  size_t need = (size_t)w * (size_t)h;
  if (need > g->cap) {
    dt_cell *c = realloc(g->cell, need * sizeof *c);
    if (!c) return -1;
    g->cell = c;
    g->cap = need;
  }
  g->w = w;
  g->h = h;
  for (size_t i = 0; i < need; i++) blank(&g->cell[i]);
  return 0;
}

void dt_grid_free(dt_grid *g) {
  free(g->cell);
  g->cell = NULL;
  g->cap = 0;
  g->w = g->h = 0;
}

dt_cell *dt_grid_at(dt_grid *g, int x, int y) {
  if (x < 0 || y < 0 || x >= g->w || y >= g->h) return NULL;
  return &g->cell[(size_t)y * (size_t)g->w + (size_t)x];
}

int dt_grid_text(dt_grid *g, int x, int y, const char *s, int fg, int attr, int max_cells) {
  int n = 0;
  if (y < 0 || y >= g->h) return 0;
  size_t len = strlen(s);
  for (size_t pos = 0; pos < len && (max_cells < 0 || n < max_cells);) {
    uint32_t cp;
    size_t k = dt_utf8_decode(s + pos, len - pos, &cp);
    if (x + n >= g->w) break;
    dt_cell *c = dt_grid_at(g, x + n, y);
    if (c) {
      if (!dt_utf8_is_control(cp)) {
        memcpy(c->ch, s + pos, k);
        c->ch[k] = '\0';
      } else {
        c->ch[0] = '?'; /* control or ill-formed: never sent to the terminal */
        c->ch[1] = '\0';
      }
      c->fg = (unsigned char)fg;
      c->attr = (unsigned char)attr;
    }
    pos += k;
    n++;
  }
  return n;
}

int dt_grid_printf(dt_grid *g, int x, int y, int fg, int attr, int max_cells, const char *fmt, ...) {
  char buf[1024];
  va_list ap;
  va_start(ap, fmt);
  vsnprintf(buf, sizeof buf, fmt, ap);
  va_end(ap);
  return dt_grid_text(g, x, y, buf, fg, attr, max_cells);
}

void dt_grid_fill(dt_grid *g, int x, int y, int w, int h, const char *ch, int fg, int bg, int attr) {
  size_t k = strlen(ch);
  if (k > 4) k = 4;
  for (int j = y; j < y + h; j++)
    for (int i = x; i < x + w; i++) {
      dt_cell *c = dt_grid_at(g, i, j);
      if (!c) continue;
      memcpy(c->ch, ch, k);
      c->ch[k] = '\0';
      c->fg = (unsigned char)fg;
      c->bg = (unsigned char)bg;
      c->attr = (unsigned char)attr;
    }
}

void dt_grid_shade(dt_grid *g, int x, int y, int w, int h, int bg, int attr_or) {
  for (int j = y; j < y + h; j++)
    for (int i = x; i < x + w; i++) {
      dt_cell *c = dt_grid_at(g, i, j);
      if (!c) continue;
      if (bg != DT_R_NONE) c->bg = (unsigned char)bg;
      c->attr |= (unsigned char)attr_or;
    }
}

const char *dt_grid_row(const dt_grid *g, int y, char *buf, size_t size) {
  size_t n = 0;
  if (size == 0) return buf;
  buf[0] = '\0';
  if (y < 0 || y >= g->h) return buf;
  for (int x = 0; x < g->w; x++) {
    const char *ch = g->cell[(size_t)y * (size_t)g->w + (size_t)x].ch;
    size_t k = strlen(ch);
    if (n + k + 1 > size) break;
    memcpy(buf + n, ch, k);
    n += k;
  }
  buf[n] = '\0';
  return buf;
}
