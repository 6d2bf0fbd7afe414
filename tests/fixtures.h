/* Shared test fixtures: atomic data used by several unit tests. */
#ifndef DT_TEST_FIXTURES_H
#define DT_TEST_FIXTURES_H
#include <string.h>

#include "doubletty/atomic.h"

/* Na I D: vacuum wavelengths [A], oscillator strengths and damping
 * constants [s^-1] from Morton (2003, ApJS 149, 205). */
static inline dt_doublet nai(void) {
  dt_doublet d;
  memset(&d, 0, sizeof d);
  strcpy(d.name, "NaI");
  strcpy(d.line[0].label, "NaI 5891");
  d.line[0].lambda0 = 5891.5833;
  d.line[0].f = 0.6408;
  d.line[0].gamma = 6.16e7;
  strcpy(d.line[1].label, "NaI 5897");
  d.line[1].lambda0 = 5897.5581;
  d.line[1].f = 0.3201;
  d.line[1].gamma = 6.14e7;
  strcpy(d.source, "Morton (2003) ApJS 149, 205");
  return d;
}
#endif
