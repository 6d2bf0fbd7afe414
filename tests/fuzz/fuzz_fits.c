/* Fuzz target: the spectrum reader on arbitrary bytes, FITS first.
 *
 * The input is taken as the whole content of a spectrum file and read from
 * memory with dt_spectrum_read_mem (the file's first bytes decide between the
 * FITS reader, through cfitsio's memory driver, and the text reader), once
 * with the default choice of HDU and row and again asking for HDU 2, for
 * row 2 and for named columns, so that every selection path sees the same
 * damaged bytes.  Besides "no crash, no leak, no undefined behaviour" it
 * checks the reader's promises (include/doubletty/spectrum.h): a spectrum
 * that is returned passes dt_spectrum_validate; an error leaves no spectrum
 * and says what went wrong. */
#include <math.h>
#include <stddef.h>
#include <stdint.h>
#include <string.h>

#include "doubletty/spectrum.h"

static void check_result(int rc, dt_spectrum *s, const dt_err *e) {
  if (rc != DT_OK) {
    if (s || e->code != rc || !e->what[0]) __builtin_trap();
    return;
  }
  if (!s) __builtin_trap();
  dt_err v;
  if (dt_spectrum_validate(s, &v) != DT_OK) __builtin_trap();
  if (!memchr(s->layout, '\0', sizeof s->layout) || !memchr(s->object, '\0', sizeof s->object) ||
      !memchr(s->extname, '\0', sizeof s->extname) || !memchr(s->unit, '\0', sizeof s->unit))
    __builtin_trap();
  /* the summaries `doubletty info` prints */
  (void)dt_spectrum_median_snr(s);
  (void)dt_spectrum_pixel_kms(s);
  if (dt_spectrum_nmasked(s) >= s->n) __builtin_trap();
  size_t k = dt_spectrum_index(s, 0.5 * (s->wave[0] + s->wave[s->n - 1]));
  if (k > s->n) __builtin_trap();
  dt_spectrum_free(s);
}

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size) {
  static const dt_read_opts opts[] = {
      {NULL, NULL, NULL, NULL, 0, 0},
      {NULL, NULL, NULL, NULL, 2, 0},
      {NULL, NULL, NULL, NULL, 0, 2},
      {"LAMBDA", "FLUX", "VARIANCE", "AND_MASK", 0, 0},
  };
  for (size_t i = 0; i < sizeof opts / sizeof opts[0]; i++) {
    dt_spectrum *s = NULL;
    dt_err e;
    int rc = dt_spectrum_read_mem(data, size, i ? &opts[i] : NULL, &s, &e);
    check_result(rc, s, &e);
  }
  return 0;
}
