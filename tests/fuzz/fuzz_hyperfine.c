/* Fuzz target: the hyperfine table parser (dt_hyperfine_parse).
 *
 * The input is the text of a table.  Checked besides memory safety: a table
 * that parses holds only rows the format allows (a doublet name of 1..15
 * characters, a wavelength > 0, 1..DT_HFS_MAX components with offsets within
 * +-DT_HFS_DV_MAX and shares in (0, 1] summing to 1, a source); a table
 * that does not parse leaves the caller's table unchanged and says why;
 * parsing the same text again replaces every row, so the count stays. */
#include <math.h>
#include <stddef.h>
#include <stdint.h>
#include <string.h>

#include "doubletty/hyperfine.h"

static void check_table(const dt_hyperfine *t) {
  for (size_t i = 0; i < dt_hyperfine_count(t); i++) {
    const dt_hfs_entry *r = dt_hyperfine_get(t, i);
    if (!r || !memchr(r->doublet, '\0', sizeof r->doublet) || !r->doublet[0] ||
        !memchr(r->source, '\0', sizeof r->source) || !r->source[0] || !(r->lambda0 > 0) ||
        !isfinite(r->lambda0) || r->comp.n < 1 || r->comp.n > DT_HFS_MAX)
      __builtin_trap();
    double sum = 0;
    for (int k = 0; k < r->comp.n; k++) {
      if (!(fabs(r->comp.dv[k]) <= DT_HFS_DV_MAX) || !(r->comp.share[k] > 0 && r->comp.share[k] <= 1))
        __builtin_trap();
      sum += r->comp.share[k];
    }
    if (!(fabs(sum - 1) <= DT_HFS_SUM_TOL)) __builtin_trap();
  }
}

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size) {
  dt_hyperfine *t = dt_hyperfine_new();
  if (!t) return 0;
  dt_err e;
  int rc = dt_hyperfine_parse(t, (const char *)data, size, &e);
  if (rc != DT_OK) {
    if (dt_hyperfine_count(t) != 0 || e.code != rc || !e.what[0]) __builtin_trap();
  } else {
    check_table(t);
    size_t n = dt_hyperfine_count(t);
    if (dt_hyperfine_parse(t, (const char *)data, size, &e) != DT_OK || dt_hyperfine_count(t) != n)
      __builtin_trap();
    check_table(t);
  }
  dt_hyperfine_free(t);
  return 0;
}
