/* The curve of growth of a single Voigt line: rest-frame equivalent width
 * as a function of column density and Doppler parameter, and its inverse.
 *
 *     W(N, b) = (lambda0^2 / c) * integral (1 - exp(-tau(nu))) dnu
 *     tau     = N sigma0 f H(a, x) / (sqrt(pi) dnu_D),  dnu_D = b / lambda0
 *     a       = Gamma / (4 pi dnu_D)
 * (e.g. Spitzer 1978, Physical Processes in the Interstellar Medium, ch. 3;
 * Draine 2011, Physics of the Interstellar and Intergalactic Medium, ch. 9
 * -- from memory), integrated numerically in x = (nu - nu0)/dnu_D; no
 * instrumental profile (the equivalent width does not depend on it).
 * Its limits (checked in tests/unit/test_cog.c, with a SciPy
 * re-implementation in tests/py/cog_scipy.py):
 *   linear (tau0 << 1):       W = (lambda^2/c) N sigma0 f
 *   flat (1 << tau0, no damping): W -> 2 (b/c) lambda sqrt(ln tau0)
 *   square root (damping wings):  W -> (lambda^2/c) sqrt(N sigma0 f Gamma / pi)
 * (Spitzer 1978, eqs. 3-48, 3-49 and 3-51 -- from memory; the last from
 * integrating the Lorentzian wing tau = N sigma0 f Gamma / (4 pi^2 dnu^2)). */
#ifndef DOUBLETTY_COG_H
#define DOUBLETTY_COG_H
#include "doubletty/atomic.h"

/* Rest-frame equivalent width [Angstrom] of a line with log10 N [cm^-2]
 * and b [km/s] (b > 0). */
double dt_cog_W(const dt_line *line, double logN, double b);

/* Central optical depth of the Doppler core, tau0 = N sigma0 f lambda0 /
 * (sqrt(pi) b) (no damping). */
double dt_cog_tau0(const dt_line *line, double logN, double b);

/* log10 N [cm^-2] whose line of Doppler parameter b has the rest-frame
 * equivalent width W [Angstrom] (W > 0): the inverse of dt_cog_W, to 1e-6
 * dex.  NaN for W <= 0 or a bad line or b. */
double dt_cog_logN(const dt_line *line, double W, double b);

/* The inverse by a table made once for a line and b: ln W on a grid of
 * log N every 0.025 dex from the linear part (core optical depth 1e-4) to
 * log N 22.5, interpolated by Steffen's monotone cubic (agrees with
 * dt_cog_logN to 1e-5 dex; tests/unit/test_cog.c); the exact inverse
 * outside the table.  alloc: NULL for a bad line or b, or out of memory. */
typedef struct dt_cog_table dt_cog_table;
dt_cog_table *dt_cog_table_alloc(const dt_line *line, double b);
double dt_cog_table_logN(const dt_cog_table *t, double W);
void dt_cog_table_free(dt_cog_table *t);

/* Tables for the lines and b values asked for, made on first use and
 * shared: dt_cog_cache_logN may be called from several threads at once
 * (the cache is locked while it looks up or adds a table; a table is only
 * read).  c == NULL: the exact inverse.  At most 32 tables; beyond, the
 * exact inverse. */
typedef struct dt_cog_cache dt_cog_cache;
dt_cog_cache *dt_cog_cache_alloc(void);
void dt_cog_cache_free(dt_cog_cache *c);
double dt_cog_cache_logN(dt_cog_cache *c, const dt_line *line, double W, double b);

#endif
