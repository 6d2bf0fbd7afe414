/* Fuzz target: the plain-text spectrum reader on arbitrary bytes.
 *
 * The input is the content of a text spectrum ("wave flux [sigma [mask]]" a
 * line).  It is read with the text reader itself (whatever the first bytes
 * are, so binary junk reaches the line parser too) and through
 * dt_spectrum_read_mem, which first decides whether the bytes are FITS,
 * text or neither.  A spectrum that comes back must pass
 * dt_spectrum_validate; an error must leave no spectrum behind. */
#include <stddef.h>
#include <stdint.h>

#include "doubletty/spectrum.h"
#include "spectrum_priv.h"

static void check_result(int rc, dt_spectrum *s, const dt_err *e) {
  if (rc != DT_OK) {
    if (s || e->code != rc || !e->what[0]) __builtin_trap();
    return;
  }
  dt_err v;
  if (!s || dt_spectrum_validate(s, &v) != DT_OK || s->hdu != 0 || s->row != 0) __builtin_trap();
  (void)dt_spectrum_median_snr(s);
  (void)dt_spectrum_pixel_kms(s);
  dt_spectrum_free(s);
}

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size) {
  dt_spectrum *s = NULL;
  dt_err e;
  int rc = dt_spectrum_read_text_mem(data, size, NULL, &s, &e);
  check_result(rc, s, &e);
  s = NULL;
  rc = dt_spectrum_read_mem(data, size, NULL, &s, &e);
  check_result(rc, s, &e);
  return 0;
}
