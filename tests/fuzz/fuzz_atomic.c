/* Fuzz target: the atomic-data table parser (dt_atomic_parse).
 *
 * The input is the text of a table.  Checked besides memory safety: a table
 * that parses holds only doublets the format allows (a name of 1..15
 * characters, wavelengths and oscillator strengths > 0, damping >= 0, two
 * different wavelengths, the stronger line -- larger f * lambda -- first,
 * a source), each found again by its name; a table that does not parse
 * leaves the caller's table unchanged; parsing the same text a second time
 * replaces every doublet by name, so the count stays the same. */
#include <math.h>
#include <stddef.h>
#include <stdint.h>
#include <string.h>

#include "doubletty/atomic.h"

static void check_table(const dt_atomic *t) {
  size_t n = dt_atomic_count(t);
  for (size_t i = 0; i < n; i++) {
    const dt_doublet *d = dt_atomic_get(t, i);
    if (!d || !memchr(d->name, '\0', sizeof d->name) || !d->name[0] ||
        !memchr(d->source, '\0', sizeof d->source) || !d->source[0])
      __builtin_trap();
    for (int k = 0; k < 2; k++) {
      const dt_line *l = &d->line[k];
      if (!(l->lambda0 > 0) || !(l->f > 0) || !(l->gamma >= 0) || !isfinite(l->lambda0) ||
          !isfinite(l->f) || !isfinite(l->gamma) || !memchr(l->label, '\0', sizeof l->label))
        __builtin_trap();
    }
    if (d->line[0].lambda0 == d->line[1].lambda0) __builtin_trap();
    if (d->line[0].f * d->line[0].lambda0 < d->line[1].f * d->line[1].lambda0) __builtin_trap();
    if (dt_atomic_find(t, d->name) != d) __builtin_trap();
  }
}

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size) {
  dt_atomic *t = dt_atomic_new();
  if (!t) return 0;
  dt_err e;
  int rc = dt_atomic_parse(t, (const char *)data, size, &e);
  if (rc != DT_OK) {
    if (dt_atomic_count(t) != 0 || e.code != rc || !e.what[0]) __builtin_trap();
  } else {
    check_table(t);
    size_t n = dt_atomic_count(t);
    if (dt_atomic_parse(t, (const char *)data, size, &e) != DT_OK || dt_atomic_count(t) != n)
      __builtin_trap();
    check_table(t);
  }
  dt_atomic_free(t);
  return 0;
}
