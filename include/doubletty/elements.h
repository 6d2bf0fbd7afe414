/* Standard atomic weights of the elements whose doublets doubletty knows,
 * found by the element symbol at the start of a doublet name.
 *
 * The masses are what the thermal part of a Doppler parameter needs,
 * b_th^2 = 2 k T / m (joint.h).  The table (src/core/elements.c) holds the
 * conventional standard atomic weights of the IUPAC Commission on Isotopic
 * Abundances and Atomic Weights (CIAAW), in unified atomic mass units. */
#ifndef DOUBLETTY_ELEMENTS_H
#define DOUBLETTY_ELEMENTS_H
#include <stddef.h>
#include "doubletty/status.h"

/* The element symbol that begins a species name: an upper-case letter and
 * an optional lower-case one ("NaI" -> "Na", "CIV" -> "C", "KI" -> "K",
 * "OVI" -> "O").  sym holds at least 3 bytes.  DT_OK; DT_EINVAL when the
 * name does not begin with an upper-case letter. */
int dt_element_symbol(const char *name, char sym[3]);

/* Standard atomic weight [u] of the element of symbol sym (exact case:
 * "Na", "Ca").  DT_OK; DT_ENOTFOUND for a symbol not in the table. */
int dt_element_mass(const char *sym, double *mass_u);

/* The same from a species name ("NaI", "CaII"): the mass of its element.
 * DT_OK; DT_ENOTFOUND (e filled: "no atomic mass for 'X' (element 'Y')")
 * when the element is not in the table.  e may be NULL. */
int dt_element_mass_of(const char *name, double *mass_u, dt_err *e);

/* The table itself: its size, and the symbol (and *mass_u) of entry i
 * (NULL for i out of range). */
size_t dt_element_count(void);
const char *dt_element_get(size_t i, double *mass_u);

#endif
