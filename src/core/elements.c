/* Standard atomic weights by element symbol, for the thermal Doppler
 * parameters of joint fits (joint.h).
 *
 * Values: IUPAC/CIAAW conventional standard atomic weights (CIAAW 2021
 * table, abridged to five significant figures), in u -- written from
 * memory.  Elements with an interval in the standard table (H, Li, B, C,
 * N, O, Mg, Si, S, Cl, Br) carry the conventional value.  Only light and
 * common elements of absorption-line work are listed; a species of another
 * element has no mass and the `thermal` rule refuses it. */
#include "doubletty/elements.h"

#include <ctype.h>
#include <string.h>

typedef struct element {
  const char *sym;
  double mass;   /* [u] */
} element;

static const element table[] = {
  {"H", 1.008},     {"He", 4.0026},  {"Li", 6.94},    {"Be", 9.0122},
  {"B", 10.81},     {"C", 12.011},   {"N", 14.007},   {"O", 15.999},
  {"F", 18.998},    {"Ne", 20.180},  {"Na", 22.990},  {"Mg", 24.305},
  {"Al", 26.982},   {"Si", 28.085},  {"P", 30.974},   {"S", 32.06},
  {"Cl", 35.45},    {"Ar", 39.95},   {"K", 39.098},   {"Ca", 40.078},
  {"Sc", 44.956},   {"Ti", 47.867},  {"V", 50.942},   {"Cr", 51.996},
  {"Mn", 54.938},   {"Fe", 55.845},  {"Co", 58.933},  {"Ni", 58.693},
  {"Cu", 63.546},   {"Zn", 65.38},   {"Ga", 69.723},  {"Ge", 72.630},
  {"Rb", 85.468},   {"Sr", 87.62},   {"Ba", 137.33},  {"Pb", 207.2},
};

int dt_element_symbol(const char *name, char sym[3]) {
  sym[0] = '\0';
  if (!name) return DT_EINVAL;
  while (*name == ' ') name++;
  if (!isupper((unsigned char)name[0])) return DT_EINVAL;
  sym[0] = name[0];
  sym[1] = '\0';
  sym[2] = '\0';
  if (islower((unsigned char)name[1])) sym[1] = name[1];
  return DT_OK;
}

int dt_element_mass(const char *sym, double *mass_u) {
  for (size_t i = 0; i < sizeof table / sizeof table[0]; i++)
    if (strcmp(table[i].sym, sym) == 0) {
      *mass_u = table[i].mass;
      return DT_OK;
    }
  return DT_ENOTFOUND;
}

int dt_element_mass_of(const char *name, double *mass_u, dt_err *e) {
  char sym[3];
  if (dt_element_symbol(name, sym) != DT_OK)
    return dt_err_set(e, DT_ENOTFOUND, name, "no atomic mass for '%s': the name does not "
                      "begin with an element symbol", name ? name : "");
  if (dt_element_mass(sym, mass_u) != DT_OK)
    return dt_err_set(e, DT_ENOTFOUND, name, "no atomic mass for '%s' (element '%s')", name,
                      sym);
  return DT_OK;
}

size_t dt_element_count(void) { return sizeof table / sizeof table[0]; }

const char *dt_element_get(size_t i, double *mass_u) {
  if (i >= dt_element_count()) return NULL;
  if (mass_u) *mass_u = table[i].mass;
  return table[i].sym;
}
