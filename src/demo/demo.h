/* The demo survey: a small synthetic set of spectra to try doubletty on.
 *
 * An invented scenario: background quasars and galaxies seen through the
 * Velloran Pair (a fictional interacting pair of nearby galaxies, entry 219
 * of a fictional "Atlas of Tidal Pairs"), observed by a fictional fibre survey.
 * Each sightline may show Na I D absorption from the pair at +300..+700 km/s
 * heliocentric (one to three components) and from the Milky Way's own gas
 * near 0 km/s; some show nothing.  Spectra carry sloped, wiggly continua in
 * flux units of 1e-17 erg/s/cm2/Angstrom, Gaussian noise (S/N 5-60), a
 * Gaussian line-spread function (R 2000-5000) and, in a few, bad pixels and
 * sky-line residuals.  The files use the layouts doubletty reads (FITS images
 * with linear, WAVE-LOG and air-wavelength axes, binary tables with columns
 * or with one sightline per row, plain text).
 *
 * Everything is drawn from GSL's MT19937 generator with a fixed seed, so the
 * same options always give the same bytes (no dates in the headers).  Besides
 * the spectra the directory gets targets.list (the target list format of
 * doubletty, one line per target, paths relative to the directory) and
 * truth.csv (the injected components, one line per component). */
#ifndef DOUBLETTY_DEMO_H
#define DOUBLETTY_DEMO_H
#include "doubletty/atomic.h"
#include "doubletty/status.h"

#define DT_DEMO_DEFAULT_COUNT 24
#define DT_DEMO_MAX_COUNT 2000
#define DT_DEMO_DEFAULT_SEED 2718UL
#define DT_DEMO_VSYS 512.0        /* systemic velocity of the pair [km/s], heliocentric */
#define DT_DEMO_PAIR_NAME "Velloran-Pair"

typedef struct dt_demo_opts {
  const dt_doublet *nai;  /* Na I D (required) */
  const dt_doublet *caii; /* Ca II H & K for the wide spectra; NULL = none */
  int count;              /* number of sightlines, 1..DT_DEMO_MAX_COUNT */
  unsigned long seed;     /* random seed */
  int force;              /* write into a non-empty directory that holds no earlier demo */
} dt_demo_opts;

typedef struct dt_demo_summary {
  int nspectra;    /* sightlines written */
  int nfiles;      /* spectrum files written */
  int ntargets;    /* lines of targets.list (wide spectra are listed for Na I and Ca II) */
  int ncomponents; /* lines of truth.csv that describe a component */
} dt_demo_summary;

/* Options with the defaults (count, seed) and no doublets set. */
dt_demo_opts dt_demo_opts_default(void);

/* Write the demo survey into dir (created, with parents, when missing).
 * An existing non-empty dir is used only when it holds an earlier demo (its
 * targets.list starts with the demo's first line; the files that list names
 * are removed first) or when opts->force is set; otherwise DT_EINVAL.
 * DT_EIO with e->where naming the file when something cannot be written.
 * sum may be NULL. */
int dt_demo_write(const char *dir, const dt_demo_opts *opts, dt_demo_summary *sum, dt_err *e);

#endif
