/* The demo survey: synthetic spectra of an invented scenario.
 *
 * Background quasars and galaxies are seen through the Velloran Pair, a
 * fictional interacting pair of nearby galaxies (systemic velocity
 * DT_DEMO_VSYS heliocentric), by the fictional Silverfen Sightline Survey
 * with its fictional Kestrelle fibre spectrograph.  Nothing here is real data.
 *
 * Each sightline is planned first (kind of background source, file layout,
 * resolving power, S/N, continuum shape, absorption components, defects),
 * all drawn from its own GSL MT19937 stream so that the first N sightlines do
 * not depend on --count.  Then its spectrum is made:
 *     flux = continuum * model + sky residual + noise,
 * where the model is doubletty's own doublet model (dt_model_eval, normalised
 * flux convolved with the Gaussian LSF of resolving power R, finely
 * oversampled), evaluated in a window around the doublet on heliocentric
 * vacuum wavelengths (vsys = 0, component velocities heliocentric), and the
 * noise is Gaussian with a variance that grows with the flux (photon noise of
 * source plus sky).  Files are written through cfitsio (FITS) and stdio
 * (text); no header carries a date, so equal options give equal bytes.
 *
 * The planning tables below are the scenario: which sightline has which
 * layout and which peculiarity.  Beyond the 24 planned slots the pattern
 * repeats with fresh random draws. */
#include "doubletty/demo.h"

#include <dirent.h>
#include <errno.h>
#include <fitsio.h>
#include <gsl/gsl_randist.h>
#include <gsl/gsl_rng.h>
#include <limits.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <unistd.h>

#include "doubletty/airvac.h"
#include "doubletty/model.h"

#define DEMO_TWO_PI 6.283185307179586
#define LIST_FIRST_LINE "# doubletty demo survey (synthetic data; invented scenario)"
#define PLATE_FILE "plate0731.fits"
#define FLUX_UNIT "1e-17 erg/(s cm2 Angstrom)"
#define IVAR_UNIT "1e+34 s2 cm4 Angstrom2/erg2"
#define TELESCOPE "Silverfen 2.6m (fictional)"
#define INSTRUMENT "Kestrelle fibre spectrograph (fictional)"
#define SURVEY "Silverfen Sightline Survey (fictional)"

/* Mask bits of the table layouts (our own convention for the demo). */
#define MASK_COSMIC 1u  /* cosmic-ray hit */
#define MASK_COLUMN 2u  /* detector defect */

enum layout { L_IMG_LIN, L_IMG_LOG, L_IMG_AIR, L_TABLE, L_ROWS, L_TEXT };
static const char *const layout_name[] = {"image-linear", "image-log", "image-air",
                                          "table-columns", "table-rows", "text"};

enum flag {
  F_EMPTY = 1,   /* no absorption at all */
  F_NOPAIR = 2,  /* only Milky Way gas */
  F_NOMW = 4,    /* only the pair */
  F_BAD = 8,     /* bad pixels */
  F_SKY = 16,    /* sky-line residuals */
  F_WIDE = 32,   /* wide coverage, 3800-6400 A (Ca II H & K too) */
  F_NM = 64,     /* image axis in nm */
  F_CD = 128     /* image axis given by CD1_1 instead of CDELT1 */
};

typedef struct slot {
  char kind; /* 'Q' quasar, 'G' galaxy */
  int layout;
  int flags;
} slot;

/* The survey plan: every layout appears within the first six sightlines. */
static const slot plan[24] = {
    {'Q', L_IMG_LOG, 0},
    {'G', L_TABLE, F_BAD},
    {'Q', L_IMG_LIN, F_SKY},
    {'Q', L_TEXT, F_NOMW},
    {'G', L_IMG_AIR, 0},
    {'Q', L_ROWS, 0},
    {'Q', L_IMG_LIN, F_EMPTY},
    {'G', L_ROWS, F_BAD},
    {'Q', L_IMG_LOG, F_WIDE},
    {'Q', L_TABLE, F_NOPAIR | F_SKY},
    {'G', L_IMG_LIN, F_BAD | F_CD},
    {'Q', L_TEXT, F_EMPTY},
    {'Q', L_ROWS, F_SKY},
    {'G', L_IMG_LOG, F_NOPAIR},
    {'Q', L_IMG_AIR, F_BAD},
    {'Q', L_TABLE, F_WIDE},
    {'G', L_IMG_LIN, F_NM},
    {'Q', L_ROWS, F_NOMW},
    {'Q', L_IMG_LOG, F_SKY | F_BAD},
    {'G', L_TEXT, F_NOPAIR},
    {'Q', L_IMG_AIR, F_EMPTY},
    {'Q', L_TABLE, 0},
    {'G', L_IMG_LIN, F_NOMW},
    {'Q', L_IMG_LOG, 0},
};
#define NPLAN ((int)(sizeof plan / sizeof plan[0]))

/* Sky emission lines in standard air [Angstrom]: the sodium doublet of the
 * night sky (Na I D air wavelengths, NIST Atomic Spectra Database) and the
 * [O I] airglow lines (from memory). */
static const double sky_air[] = {5889.950, 5895.924, 6300.304, 6363.776};

/* Emission and absorption features of the background sources, rest frame
 * [Angstrom], approximate values from memory: they only shape the synthetic
 * continua.  amp is relative to the continuum; width is a velocity sigma. */
typedef struct feature {
  double rest, amp, sigma_kms;
} feature;
static const feature qso_lines[] = {
    {1215.7, 2.0, 2500}, {1549.1, 1.0, 2200}, {1908.7, 0.45, 2200}, {2799.1, 0.6, 1900},
    {4341.7, 0.25, 1800}, {4862.7, 0.7, 1800}, {5008.2, 0.4, 350}, {6564.6, 1.6, 1700}};
static const feature gal_abs[] = {
    {3934.8, 0.30, 250}, {3969.6, 0.25, 250}, {4305.0, 0.10, 600}, {4862.7, 0.05, 300},
    {5176.0, 0.08, 500}, {5270.0, 0.04, 400}, {5895.0, 0.06, 250}};
static const feature gal_em[] = {
    {4862.7, 0.35, 120}, {4960.3, 0.25, 120}, {5008.2, 0.75, 120}, {6564.6, 1.0, 120},
    {6585.3, 0.35, 120}, {6718.3, 0.2, 120}, {6732.7, 0.15, 120}};
#define NELEM(a) (sizeof(a) / sizeof((a)[0]))

typedef struct continuum {
  double amp;             /* flux at 5900 A [1e-17 erg/s/cm2/A] */
  double slope;           /* power-law index of f_lambda */
  double z;               /* redshift of the background source */
  double em_scale;        /* strength of the source's emission lines */
  double broad;           /* width scale of a quasar's broad lines */
  double wig_a[2], wig_p[2], wig_ph[2]; /* flux-calibration ripples */
} continuum;

enum origin { O_MW, O_PAIR };
typedef struct demo_comp {
  int caii;        /* 0 Na I, 1 Ca II */
  int origin;      /* O_MW or O_PAIR */
  dt_component c;  /* velocity heliocentric [km/s] */
} demo_comp;

enum bad_kind { BAD_NAN, BAD_IVAR0, BAD_COSMIC, BAD_COLUMN };
static const char *const bad_name[] = {"nan", "ivar0", "cosmic", "column"};
enum sky_kind { SKY_SPIKE, SKY_HOLE, SKY_SHIFT };
static const char *const sky_name[] = {"sky-spike", "sky-hole", "sky-shifted"};

#define MAX_DCOMP 12
typedef struct sight {
  int idx;          /* 0-based */
  slot s;
  char name[16];
  char file[32];
  long row;         /* 1-based row in the plate file, 0 otherwise */
  double R, snr;
  int log_grid;     /* pixels uniform in ln(lambda) */
  double w0, step;  /* first pixel centre in the file's frame [A]; step [A] or [ln] */
  size_t n;
  continuum cont;
  int ncomp;
  demo_comp comp[MAX_DCOMP];
  int nbad;
  struct { double lam; int npix, kind; } bad[3];
  int nsky;
  struct { int line, kind; double strength, eps; } sky[4];
  unsigned long noise_seed;
} sight;

/* Pixel data of one sightline, all in the vacuum frame except wfile. */
typedef struct pixels {
  size_t n;
  double *wvac, *wfile, *cont, *flux, *sigma;
  int *mask;  /* table mask bits */
  int *bad;   /* 1 = flux not usable (NaN in images, ivar 0 in tables) */
} pixels;

static unsigned long mix_seed(unsigned long seed, unsigned long k, unsigned long salt) {
  /* A simple integer hash (splitmix64 finaliser) so that neighbouring seeds
   * and sightlines get unrelated streams. */
  unsigned long long x = (unsigned long long)seed * 0x9E3779B97F4A7C15ULL +
                         (unsigned long long)k * 0xBF58476D1CE4E5B9ULL + salt;
  x ^= x >> 30;
  x *= 0xBF58476D1CE4E5B9ULL;
  x ^= x >> 27;
  x *= 0x94D049BB133111EBULL;
  x ^= x >> 31;
  return (unsigned long)(x & 0xFFFFFFFFULL);
}

static double unif(gsl_rng *r, double a, double b) { return a + (b - a) * gsl_rng_uniform(r); }
static double round_to(double x, double q) { return q * floor(x / q + 0.5); }

/* Wavelength of the line at a heliocentric velocity [km/s]. */
static double shifted(double lam0, double v) { return lam0 * (1.0 + v / DT_C_KMS); }

/* True when a strong feature of the background source falls in the window
 * where the pair's and the Milky Way's Na I D lie. */
static int feature_in_window(const feature *f, size_t nf, double z, double minamp) {
  for (size_t i = 0; i < nf; i++) {
    if (f[i].amp < minamp) continue;
    double lam = f[i].rest * (1.0 + z);
    if (lam > 5840.0 && lam < 5960.0) return 1;
  }
  return 0;
}

static void plan_continuum(gsl_rng *r, sight *s) {
  continuum *c = &s->cont;
  if (s->s.kind == 'Q') {
    c->amp = round_to(exp(unif(r, log(4.0), log(60.0))), 0.01);
    c->slope = -unif(r, 0.6, 1.9);
    c->broad = unif(r, 0.8, 1.4);
    c->em_scale = unif(r, 0.5, 1.2);
    double zmax = (s->s.flags & F_WIDE) ? 2.0 : 2.4;
    for (int t = 0; t < 100; t++) {
      c->z = round_to(unif(r, 0.3, zmax), 0.0001);
      if (!feature_in_window(qso_lines, NELEM(qso_lines), c->z, 0.0)) break;
    }
  } else {
    c->amp = round_to(exp(unif(r, log(3.0), log(30.0))), 0.01);
    c->slope = unif(r, 0.3, 1.8);
    c->broad = 1.0;
    c->em_scale = gsl_rng_uniform(r) < 0.3 ? 0.0 : unif(r, 0.2, 1.5);
    for (int t = 0; t < 100; t++) {
      c->z = round_to(unif(r, 0.04, 0.32), 0.0001);
      if (!feature_in_window(gal_em, NELEM(gal_em), c->z, 0.0) &&
          !feature_in_window(gal_abs, NELEM(gal_abs), c->z, 0.0))
        break;
    }
  }
  for (int j = 0; j < 2; j++) {
    c->wig_a[j] = unif(r, 0.004, 0.02);
    c->wig_p[j] = unif(r, 150.0, 600.0);
    c->wig_ph[j] = unif(r, 0.0, DEMO_TWO_PI);
  }
}

static double gauss_feature(double lam, double centre, double sigma_kms) {
  double sl = centre * sigma_kms / DT_C_KMS;
  double x = (lam - centre) / sl;
  return x * x > 100.0 ? 0.0 : exp(-0.5 * x * x);
}

/* Continuum of the background source at vacuum wavelength lam. */
static double continuum_at(const continuum *c, char kind, double lam) {
  double f = c->amp * pow(lam / 5900.0, c->slope);
  double mult = 1.0;
  if (kind == 'Q') {
    for (size_t i = 0; i < NELEM(qso_lines); i++)
      mult += c->em_scale * qso_lines[i].amp *
              gauss_feature(lam, qso_lines[i].rest * (1.0 + c->z), qso_lines[i].sigma_kms * c->broad);
  } else {
    for (size_t i = 0; i < NELEM(gal_em); i++)
      mult += c->em_scale * gal_em[i].amp *
              gauss_feature(lam, gal_em[i].rest * (1.0 + c->z), gal_em[i].sigma_kms);
    for (size_t i = 0; i < NELEM(gal_abs); i++)
      mult *= 1.0 - gal_abs[i].amp * gauss_feature(lam, gal_abs[i].rest * (1.0 + c->z),
                                                    gal_abs[i].sigma_kms);
  }
  for (int j = 0; j < 2; j++)
    mult *= 1.0 + c->wig_a[j] * sin(DEMO_TWO_PI * lam / c->wig_p[j] + c->wig_ph[j]);
  return f * mult;
}

/* Velocity components: the pair's gas within about +-200 km/s of its
 * systemic velocity, the Milky Way's near 0 km/s.  Na I column densities of
 * 10^11.4-10^13.4 cm^-2 and b of a few to 25 km/s are typical of interstellar
 * Na I (common practice). */
static void plan_components(gsl_rng *r, sight *s, int want_caii) {
  int f = s->s.flags;
  int n = 0;
  if (!(f & (F_EMPTY | F_NOMW))) {
    int nmw = gsl_rng_uniform(r) < 0.35 ? 2 : 1;
    double v1 = unif(r, -20.0, 12.0);
    for (int j = 0; j < nmw; j++) {
      demo_comp *d = &s->comp[n++];
      d->caii = 0;
      d->origin = O_MW;
      d->c.v = j == 0 ? v1 : v1 + (gsl_rng_uniform(r) < 0.5 ? -1 : 1) * unif(r, 12.0, 28.0);
      d->c.logN = unif(r, 11.4, 12.6);
      d->c.b = unif(r, 2.5, 7.0);
    }
  }
  if (!(f & (F_EMPTY | F_NOPAIR))) {
    int npair = 1 + (int)gsl_rng_uniform_int(r, 3);
    double v0 = DT_DEMO_VSYS + unif(r, -140.0, 140.0);
    int first = n;
    for (int j = 0; j < npair; j++) {
      double v = v0;
      for (int t = 0; t < 50 && j > 0; t++) {
        v = v0 + unif(r, -110.0, 110.0);
        int clash = 0;
        for (int k = first; k < n; k++)
          if (fabs(s->comp[k].c.v - v) < 35.0) clash = 1;
        if (!clash) break;
      }
      if (v < 320.0) v = 320.0 + unif(r, 0.0, 20.0);
      if (v > 710.0) v = 710.0 - unif(r, 0.0, 20.0);
      demo_comp *d = &s->comp[n++];
      d->caii = 0;
      d->origin = O_PAIR;
      d->c.v = v;
      d->c.logN = j == 0 ? unif(r, 11.9, 13.4) : unif(r, 11.4, 12.8);
      d->c.b = unif(r, 4.0, 25.0);
    }
  }
  /* Ca II H & K in the wide spectra: the same clouds, broader in Ca II. */
  if ((f & F_WIDE) && want_caii) {
    int nna = n;
    for (int k = 0; k < nna && n < MAX_DCOMP; k++) {
      demo_comp *d = &s->comp[n++];
      *d = s->comp[k];
      d->caii = 1;
      d->c.logN += s->comp[k].origin == O_MW ? unif(r, -0.2, 0.4) : unif(r, -0.3, 0.4);
      d->c.b = 1.25 * s->comp[k].c.b + unif(r, 1.0, 3.0);
    }
  }
  for (int k = 0; k < n; k++) {
    s->comp[k].c.v = round_to(s->comp[k].c.v, 0.01);
    s->comp[k].c.logN = round_to(s->comp[k].c.logN, 0.001);
    s->comp[k].c.b = round_to(s->comp[k].c.b, 0.01);
  }
  s->ncomp = n;
}

static void plan_defects(gsl_rng *r, sight *s, const dt_doublet *nai, double wmin, double wmax) {
  int table = s->s.layout == L_TABLE || s->s.layout == L_ROWS;
  if (s->s.flags & F_BAD) {
    s->nbad = 2 + (int)gsl_rng_uniform_int(r, 2);
    for (int j = 0; j < s->nbad; j++) {
      if (j == 0) {
        /* one defect right on a line of the pair, where it hurts */
        const dt_line *l = &nai->line[gsl_rng_uniform_int(r, 2)];
        s->bad[j].lam = shifted(l->lambda0, DT_DEMO_VSYS + unif(r, -180.0, 180.0));
      } else {
        s->bad[j].lam = unif(r, wmin + 20.0, wmax - 20.0);
      }
      s->bad[j].npix = 1 + (int)gsl_rng_uniform_int(r, j == 0 ? 3 : 5);
      s->bad[j].kind = table ? (j == 0 ? BAD_COSMIC : (j == 1 ? BAD_IVAR0 : BAD_COLUMN)) : BAD_NAN;
    }
  }
  if (s->s.flags & F_SKY) {
    int kind = (int)gsl_rng_uniform_int(r, 3);
    double strength = unif(r, 15.0, 40.0), eps = unif(r, 0.15, 0.4);
    /* the night-sky sodium doublet: both lines, same residual */
    for (int j = 0; j < 2; j++) {
      s->sky[s->nsky].line = j;
      s->sky[s->nsky].kind = kind;
      s->sky[s->nsky].strength = strength * (j == 0 ? 1.0 : 0.8);
      s->sky[s->nsky].eps = eps;
      s->nsky++;
    }
    if (gsl_rng_uniform(r) < 0.6 && wmax > 6310.0) {
      s->sky[s->nsky].line = 2;
      s->sky[s->nsky].kind = (int)gsl_rng_uniform_int(r, 3);
      s->sky[s->nsky].strength = unif(r, 20.0, 50.0);
      s->sky[s->nsky].eps = unif(r, 0.15, 0.4);
      s->nsky++;
    }
  }
}

/* Wavelength grid: pixels of about FWHM/2.5, in the file's own frame. */
static void plan_grid(sight *s, double wmin, double wmax) {
  int lay = s->s.layout;
  s->log_grid = lay == L_IMG_LOG || lay == L_TABLE || lay == L_ROWS;
  double dlnl = 1.0 / (2.5 * s->R);
  s->w0 = round_to(wmin, 0.01);
  if (s->log_grid) {
    /* WAVE-LOG: CDELT1 is the pixel size at the reference (first) pixel */
    double cdelt = round_to(s->w0 * dlnl, 0.0001);
    s->step = cdelt / s->w0;
    s->n = (size_t)floor(log(wmax / s->w0) / s->step) + 1;
  } else {
    if (lay == L_IMG_AIR) s->w0 = round_to(dt_vac_to_air(wmin), 0.01);
    s->step = round_to(5950.0 * dlnl, 0.001);
    s->n = (size_t)floor((wmax - wmin) / s->step) + 1;
  }
}

static int plan_sight(int idx, const dt_demo_opts *o, sight *s, double plate_R,
                       double plate_w0, double plate_w1, long *next_row) {
  memset(s, 0, sizeof *s);
  s->idx = idx;
  s->s = plan[idx % NPLAN];
  gsl_rng *r = gsl_rng_alloc(gsl_rng_mt19937);
  if (!r) return DT_ENOMEM;
  gsl_rng_set(r, mix_seed(o->seed, (unsigned long)idx, 1));
  snprintf(s->name, sizeof s->name, "VP%c%02d", s->s.kind, idx + 1);
  snprintf(s->file, sizeof s->file, "vp%c%02d.%s", s->s.kind == 'Q' ? 'q' : 'g', idx + 1,
           s->s.layout == L_TEXT ? "txt" : "fits");
  s->R = round_to(unif(r, 2000.0, 5000.0), 10.0);
  s->snr = round_to(exp(unif(r, log(5.0), log(60.0))), 0.1);
  double wmin = 5600.0 + unif(r, -15.0, 15.0), wmax = 6300.0 + unif(r, -15.0, 15.0);
  if (s->s.flags & F_WIDE) {
    wmin = 3800.0 + unif(r, -15.0, 15.0);
    wmax = 6400.0 + unif(r, -15.0, 15.0);
  }
  if (s->s.layout == L_ROWS) {
    s->R = plate_R;
    wmin = plate_w0;
    wmax = plate_w1;
    snprintf(s->file, sizeof s->file, "%s", PLATE_FILE);
    s->row = ++*next_row;
  }
  plan_grid(s, wmin, wmax);
  plan_continuum(r, s);
  plan_components(r, s, o->caii != NULL);
  plan_defects(r, s, o->nai, wmin, wmax);
  s->noise_seed = mix_seed(o->seed, (unsigned long)idx, 2);
  gsl_rng_free(r);
  return DT_OK;
}

/* ---- making the pixels --------------------------------------------------- */

static void pixels_free(pixels *p) {
  free(p->wvac);
  free(p->wfile);
  free(p->cont);
  free(p->flux);
  free(p->sigma);
  free(p->mask);
  free(p->bad);
  memset(p, 0, sizeof *p);
}

static int pixels_alloc(pixels *p, size_t n) {
  memset(p, 0, sizeof *p);
  p->n = n;
  p->wvac = malloc(n * sizeof(double));
  p->wfile = malloc(n * sizeof(double));
  p->cont = malloc(n * sizeof(double));
  p->flux = malloc(n * sizeof(double));
  p->sigma = malloc(n * sizeof(double));
  p->mask = calloc(n, sizeof(int));
  p->bad = calloc(n, sizeof(int));
  if (!p->wvac || !p->wfile || !p->cont || !p->flux || !p->sigma || !p->mask || !p->bad) {
    pixels_free(p);
    return DT_ENOMEM;
  }
  return DT_OK;
}

/* Multiply flux[] by the model of one doublet evaluated on the pixels near
 * its lines.  Outside [v_lo, v_hi] (heliocentric km/s around the lines) the
 * absorption is far below the noise and the model is not evaluated. */
static int absorb(const sight *s, const dt_doublet *d, int caii, pixels *p, dt_err *e) {
  dt_component comp[DT_MAX_COMP];
  size_t nc = 0;
  for (int k = 0; k < s->ncomp; k++)
    if (s->comp[k].caii == caii && nc < DT_MAX_COMP) comp[nc++] = s->comp[k].c;
  if (nc == 0) return DT_OK;
  double l0 = fmin(d->line[0].lambda0, d->line[1].lambda0);
  double l1 = fmax(d->line[0].lambda0, d->line[1].lambda0);
  double lo = shifted(l0, -1500.0), hi = shifted(l1, DT_DEMO_VSYS + 1500.0);
  size_t i0 = 0, i1 = p->n;
  while (i0 < p->n && p->wvac[i0] < lo) i0++;
  while (i1 > i0 && p->wvac[i1 - 1] > hi) i1--;
  if (i1 - i0 < 8) return DT_OK; /* not covered */
  double pix_kms = DT_C_KMS * (p->wvac[i0 + 1] - p->wvac[i0]) / p->wvac[i0];
  int os = (int)ceil(pix_kms / 1.0); /* sub-pixels of about 1 km/s resolve b >= 2.5 km/s */
  if (os < 8) os = 8;
  if (os > 120) os = 120;
  dt_model_config cfg = {.doublet = d, .vsys = 0.0, .resolution = s->R, .fwhm_kms = 0.0,
                         .oversample = os, .tau_cut = 1e-9};
  dt_model *m = dt_model_alloc(p->wvac + i0, i1 - i0, &cfg, nc, e);
  if (!m) return e && e->code ? e->code : DT_ENOMEM;
  double *model = malloc((i1 - i0) * sizeof(double));
  if (!model) {
    dt_model_free(m);
    return dt_err_set(e, DT_ENOMEM, NULL, "out of memory");
  }
  int st = dt_model_eval(m, comp, nc, model, NULL, 0);
  if (st == DT_OK)
    for (size_t i = i0; i < i1; i++) p->flux[i] *= model[i - i0];
  else
    dt_err_set(e, st, s->name, "model evaluation failed: %s", dt_status_str(st));
  free(model);
  dt_model_free(m);
  return st;
}

static size_t index_of(const pixels *p, double lam) {
  size_t lo = 0, hi = p->n;
  while (lo < hi) {
    size_t mid = (lo + hi) / 2;
    if (p->wvac[mid] < lam) lo = mid + 1;
    else hi = mid;
  }
  return lo < p->n ? lo : p->n - 1;
}

static int make_pixels(const sight *s, const dt_demo_opts *o, pixels *p, dt_err *e) {
  if (pixels_alloc(p, s->n) != DT_OK) return dt_err_set(e, DT_ENOMEM, NULL, "out of memory");
  for (size_t i = 0; i < s->n; i++) {
    double w = s->log_grid ? s->w0 * exp(s->step * (double)i) : s->w0 + s->step * (double)i;
    p->wfile[i] = w;
    p->wvac[i] = s->s.layout == L_IMG_AIR ? dt_air_to_vac(w) : w;
    p->cont[i] = continuum_at(&s->cont, s->s.kind, p->wvac[i]);
    p->flux[i] = p->cont[i];
  }
  int st = absorb(s, o->nai, 0, p, e);
  if (st == DT_OK && o->caii) st = absorb(s, o->caii, 1, p, e);
  if (st != DT_OK) return st;

  /* Noise: variance of source photons plus sky, scaled so that the S/N per
   * pixel on the continuum near Na I D is s->snr. */
  double cref = continuum_at(&s->cont, s->s.kind, 5894.0);
  double sig0 = cref / s->snr;
  double *skyres = calloc(s->n, sizeof(double));
  if (!skyres) return dt_err_set(e, DT_ENOMEM, NULL, "out of memory");
  for (size_t i = 0; i < s->n; i++) {
    double f = p->flux[i] > 0.0 ? p->flux[i] : 0.0;
    p->sigma[i] = sig0 * sqrt(0.35 + 0.65 * f / cref);
  }
  for (int j = 0; j < s->nsky; j++) {
    double lc = dt_air_to_vac(sky_air[s->sky[j].line]);
    double sl = lc / s->R / 2.3548; /* LSF sigma [A] */
    double peak = s->sky[j].strength * sig0, eps = s->sky[j].eps;
    double shift = 0.5 * sl * eps;
    for (size_t i = 0; i < s->n; i++) {
      double x = (p->wvac[i] - lc) / sl;
      if (fabs(x) > 8.0) continue;
      double g = exp(-0.5 * x * x);
      double xs = (p->wvac[i] - lc - shift) / sl;
      double gs = exp(-0.5 * xs * xs);
      /* sky photons add variance; a badly subtracted line leaves a residual */
      p->sigma[i] = sqrt(p->sigma[i] * p->sigma[i] + 0.5 * sig0 * peak * g);
      switch (s->sky[j].kind) {
      case SKY_SPIKE: skyres[i] += eps * peak * g; break;
      case SKY_HOLE: skyres[i] -= eps * peak * g; break;
      default: skyres[i] += peak * (gs - g); break;
      }
    }
  }
  gsl_rng *r = gsl_rng_alloc(gsl_rng_mt19937);
  if (!r) {
    free(skyres);
    return dt_err_set(e, DT_ENOMEM, NULL, "out of memory");
  }
  gsl_rng_set(r, s->noise_seed);
  for (size_t i = 0; i < s->n; i++)
    p->flux[i] += skyres[i] + gsl_ran_gaussian_ziggurat(r, p->sigma[i]);
  free(skyres);

  for (int j = 0; j < s->nbad; j++) {
    size_t c = index_of(p, s->bad[j].lam);
    for (int k = 0; k < s->bad[j].npix && c + (size_t)k < p->n; k++) {
      size_t i = c + (size_t)k;
      switch (s->bad[j].kind) {
      case BAD_COSMIC: /* a spike, flagged */
        p->flux[i] += unif(r, 20.0, 80.0) * p->sigma[i];
        p->mask[i] |= MASK_COSMIC;
        break;
      case BAD_COLUMN: /* garbage, flagged */
        p->flux[i] = -unif(r, 2.0, 10.0) * p->cont[i];
        p->mask[i] |= MASK_COLUMN;
        break;
      default: /* no value: NaN in images, ivar 0 in tables */
        p->bad[i] = 1;
        break;
      }
    }
  }
  gsl_rng_free(r);
  return DT_OK;
}

/* ---- writing ------------------------------------------------------------- */

typedef struct outdir {
  const char *dir;
  char path[PATH_MAX];
} outdir;

static const char *out_path(outdir *od, const char *name) {
  int n = snprintf(od->path, sizeof od->path, "%s/%s", od->dir, name);
  if (n < 0 || (size_t)n >= sizeof od->path) od->path[0] = '\0'; /* fails to open */
  return od->path;
}

static int fits_fail(int status, const char *file, dt_err *e) {
  char msg[FLEN_STATUS];
  fits_get_errstatus(status, msg);
  return dt_err_set(e, DT_EIO, file, "cannot write FITS file: %s", msg);
}

/* Open a new FITS file, replacing an old one; the name is not parsed as a
 * cfitsio extended file name. */
static int fits_new(outdir *od, const char *name, fitsfile **f, dt_err *e) {
  const char *path = out_path(od, name);
  if (unlink(path) != 0 && errno != ENOENT)
    return dt_err_set(e, DT_EIO, name, "cannot replace: %s", strerror(errno));
  int status = 0;
  if (fits_create_diskfile(f, path, &status)) return fits_fail(status, name, e);
  return DT_OK;
}

static void key_common(fitsfile *f, const sight *s, int *status) {
  fits_write_key_str(f, "OBJECT", s ? s->name : "Silverfen plate 731",
                     s ? "background source behind the Velloran Pair" : "fibre plate", status);
  fits_write_key_str(f, "TELESCOP", TELESCOPE, "", status);
  fits_write_key_str(f, "INSTRUME", INSTRUMENT, "", status);
  fits_write_key_str(f, "ORIGIN", "doubletty demo", "synthetic data, not an observation", status);
  if (s) {
    fits_write_key_dbl(f, "SPECRES", s->R, -10, "resolving power lambda/FWHM", status);
    fits_write_key_dbl(f, "SRC_Z", s->cont.z, -6, "redshift of the background source", status);
    fits_write_key_str(f, "SRC_TYPE", s->s.kind == 'Q' ? "quasar" : "galaxy", "", status);
  }
  fits_write_comment(f, "Synthetic spectrum of the doubletty demo survey: an invented", status);
  fits_write_comment(f, "scenario (fictional survey, instrument and galaxies); the", status);
  fits_write_comment(f, "injected absorption components are listed in truth.csv.", status);
}

/* Spectral axis keywords of an image HDU. */
static void key_axis(fitsfile *f, const sight *s, int *status) {
  int nm = (s->s.flags & F_NM) != 0;
  double scale = nm ? 0.1 : 1.0;
  const char *ctype = s->s.layout == L_IMG_AIR ? "AWAV" : (s->log_grid ? "WAVE-LOG" : "WAVE");
  fits_write_key_str(f, "CTYPE1", ctype,
                     s->s.layout == L_IMG_AIR ? "wavelength in standard air" : "vacuum wavelength",
                     status);
  fits_write_key_str(f, "CUNIT1", nm ? "nm" : "Angstrom", "", status);
  fits_write_key_dbl(f, "CRPIX1", 1.0, -15, "reference pixel", status);
  fits_write_key_dbl(f, "CRVAL1", s->w0 * scale, -15, "wavelength at the reference pixel", status);
  double cdelt = s->log_grid ? s->step * s->w0 : s->step;
  if (s->s.flags & F_CD)
    fits_write_key_dbl(f, "CD1_1", cdelt * scale, -15, "pixel size at the reference pixel", status);
  else
    fits_write_key_dbl(f, "CDELT1", cdelt * scale, -15, "pixel size at the reference pixel", status);
  fits_write_key_str(f, "SPECSYS", "HELIOCEN", "heliocentric frame", status);
}

static int write_image(outdir *od, const sight *s, const pixels *p, dt_err *e) {
  fitsfile *f = NULL;
  int st = fits_new(od, s->file, &f, e);
  if (st != DT_OK) return st;
  int status = 0;
  long naxes[1] = {(long)p->n};
  float *buf = malloc(p->n * sizeof(float));
  if (!buf) {
    fits_close_file(f, &status);
    return dt_err_set(e, DT_ENOMEM, NULL, "out of memory");
  }
  int ivar = s->s.layout == L_IMG_LOG; /* log images carry inverse variance */
  fits_create_img(f, FLOAT_IMG, 1, naxes, &status);
  key_common(f, s, &status);
  fits_write_key_str(f, "BUNIT", FLUX_UNIT, "flux density", &status);
  key_axis(f, s, &status);
  for (size_t i = 0; i < p->n; i++) buf[i] = p->bad[i] ? NAN : (float)p->flux[i];
  fits_write_img(f, TFLOAT, 1, (LONGLONG)p->n, buf, &status);
  fits_create_img(f, FLOAT_IMG, 1, naxes, &status);
  fits_write_key_str(f, "EXTNAME", ivar ? "IVAR" : "ERR",
                     ivar ? "inverse variance of the flux" : "1-sigma uncertainty of the flux",
                     &status);
  fits_write_key_str(f, "BUNIT", ivar ? IVAR_UNIT : FLUX_UNIT, "", &status);
  key_axis(f, s, &status);
  for (size_t i = 0; i < p->n; i++)
    buf[i] = p->bad[i] ? 0.0f : (float)(ivar ? 1.0 / (p->sigma[i] * p->sigma[i]) : p->sigma[i]);
  fits_write_img(f, TFLOAT, 1, (LONGLONG)p->n, buf, &status);
  free(buf);
  int cstatus = 0;
  fits_close_file(f, &cstatus);
  if (status || cstatus) return fits_fail(status ? status : cstatus, s->file, e);
  return DT_OK;
}

static void fill_table_arrays(const pixels *p, float *flux, float *ivar) {
  for (size_t i = 0; i < p->n; i++) {
    flux[i] = (float)(p->bad[i] ? 0.0 : p->flux[i]);
    ivar[i] = p->bad[i] ? 0.0f : (float)(1.0 / (p->sigma[i] * p->sigma[i]));
  }
}

static int write_table(outdir *od, const sight *s, const pixels *p, dt_err *e) {
  fitsfile *f = NULL;
  int st = fits_new(od, s->file, &f, e);
  if (st != DT_OK) return st;
  int status = 0;
  float *flux = malloc(p->n * sizeof(float)), *ivar = malloc(p->n * sizeof(float));
  if (!flux || !ivar) {
    free(flux);
    free(ivar);
    fits_close_file(f, &status);
    return dt_err_set(e, DT_ENOMEM, NULL, "out of memory");
  }
  fill_table_arrays(p, flux, ivar);
  char *ttype[] = {"WAVE", "FLUX", "IVAR", "MASK"};
  char *tform[] = {"1D", "1E", "1E", "1J"};
  char *tunit[] = {"Angstrom", FLUX_UNIT, IVAR_UNIT, ""};
  fits_create_img(f, BYTE_IMG, 0, NULL, &status);
  key_common(f, s, &status);
  fits_create_tbl(f, BINARY_TBL, (LONGLONG)p->n, 4, ttype, tform, tunit, "SPECTRUM", &status);
  key_common(f, s, &status);
  fits_write_comment(f, "WAVE: vacuum wavelength, heliocentric. MASK bits: 1 cosmic-ray", &status);
  fits_write_comment(f, "hit, 2 detector defect; IVAR = 0 marks pixels without data.", &status);
  fits_write_col(f, TDOUBLE, 1, 1, 1, (LONGLONG)p->n, p->wfile, &status);
  fits_write_col(f, TFLOAT, 2, 1, 1, (LONGLONG)p->n, flux, &status);
  fits_write_col(f, TFLOAT, 3, 1, 1, (LONGLONG)p->n, ivar, &status);
  fits_write_col(f, TINT, 4, 1, 1, (LONGLONG)p->n, p->mask, &status);
  free(flux);
  free(ivar);
  int cstatus = 0;
  fits_close_file(f, &cstatus);
  if (status || cstatus) return fits_fail(status ? status : cstatus, s->file, e);
  return DT_OK;
}

/* The plate file: one row per fibre, spectra in vector columns. */
static int plate_open(outdir *od, size_t n, double R, fitsfile **f, dt_err *e) {
  int st = fits_new(od, PLATE_FILE, f, e);
  if (st != DT_OK) return st;
  int status = 0;
  char fw[24], fe[24], fj[24];
  snprintf(fw, sizeof fw, "%zuD", n);
  snprintf(fe, sizeof fe, "%zuE", n);
  snprintf(fj, sizeof fj, "%zuJ", n);
  char *ttype[] = {"FIBRE", "TARGET", "WAVE", "FLUX", "IVAR", "MASK"};
  char *tform[] = {"1J", "16A", fw, fe, fe, fj};
  char *tunit[] = {"", "", "Angstrom", FLUX_UNIT, IVAR_UNIT, ""};
  fits_create_img(*f, BYTE_IMG, 0, NULL, &status);
  key_common(*f, NULL, &status);
  fits_create_tbl(*f, BINARY_TBL, 0, 6, ttype, tform, tunit, "FIBRES", &status);
  key_common(*f, NULL, &status);
  fits_write_key_dbl(*f, "SPECRES", R, -10, "resolving power lambda/FWHM", &status);
  fits_write_comment(*f, "One fibre per row. WAVE: vacuum wavelength, heliocentric.", &status);
  fits_write_comment(*f, "MASK bits: 1 cosmic-ray hit, 2 detector defect; IVAR = 0", &status);
  fits_write_comment(*f, "marks pixels without data.", &status);
  if (status) {
    int cs = 0;
    fits_close_file(*f, &cs);
    *f = NULL;
    return fits_fail(status, PLATE_FILE, e);
  }
  return DT_OK;
}

static int plate_row(fitsfile *f, const sight *s, const pixels *p, dt_err *e) {
  int status = 0;
  float *flux = malloc(p->n * sizeof(float)), *ivar = malloc(p->n * sizeof(float));
  if (!flux || !ivar) {
    free(flux);
    free(ivar);
    return dt_err_set(e, DT_ENOMEM, NULL, "out of memory");
  }
  fill_table_arrays(p, flux, ivar);
  int fibre = 100 + 7 * s->idx;
  char *target[1] = {(char *)s->name};
  LONGLONG row = s->row;
  fits_write_col(f, TINT, 1, row, 1, 1, &fibre, &status);
  fits_write_col(f, TSTRING, 2, row, 1, 1, target, &status);
  fits_write_col(f, TDOUBLE, 3, row, 1, (LONGLONG)p->n, p->wfile, &status);
  fits_write_col(f, TFLOAT, 4, row, 1, (LONGLONG)p->n, flux, &status);
  fits_write_col(f, TFLOAT, 5, row, 1, (LONGLONG)p->n, ivar, &status);
  fits_write_col(f, TINT, 6, row, 1, (LONGLONG)p->n, p->mask, &status);
  free(flux);
  free(ivar);
  if (status) return fits_fail(status, PLATE_FILE, e);
  return DT_OK;
}

static int io_fail(const char *name, dt_err *e) {
  return dt_err_set(e, DT_EIO, name, "cannot write: %s", strerror(errno));
}

static int write_text(outdir *od, const sight *s, const pixels *p, dt_err *e) {
  FILE *f = fopen(out_path(od, s->file), "w");
  if (!f) return io_fail(s->file, e);
  fprintf(f, "# %s: synthetic spectrum of the doubletty demo survey (invented scenario)\n",
          s->name);
  fprintf(f, "# background %s at z = %.4f behind the Velloran Pair (fictional)\n",
          s->s.kind == 'Q' ? "quasar" : "galaxy", s->cont.z);
  fprintf(f, "# %s, %s, resolving power R = %.0f\n", SURVEY, INSTRUMENT, s->R);
  fprintf(f, "# columns: vacuum wavelength [Angstrom, heliocentric]  flux  1-sigma error"
             "  [%s]\n", FLUX_UNIT);
  for (size_t i = 0; i < p->n; i++)
    fprintf(f, "%.4f %.5e %.4e\n", p->wfile[i], p->flux[i], p->sigma[i]);
  if (ferror(f)) {
    int err = errno;
    fclose(f);
    errno = err;
    return io_fail(s->file, e);
  }
  if (fclose(f) != 0) return io_fail(s->file, e);
  return DT_OK;
}

/* ---- lists --------------------------------------------------------------- */

static void describe_defects(const sight *s, char *buf, size_t len) {
  size_t used = 0;
  buf[0] = '\0';
  for (int j = 0; j < s->nbad && used < len; j++)
    used += (size_t)snprintf(buf + used, len - used, "%s%s:%.2fx%d", used ? ";" : "",
                             bad_name[s->bad[j].kind], s->bad[j].lam, s->bad[j].npix);
  for (int j = 0; j < s->nsky && used < len; j++)
    used += (size_t)snprintf(buf + used, len - used, "%s%s:%.2f", used ? ";" : "",
                             sky_name[s->sky[j].kind], dt_air_to_vac(sky_air[s->sky[j].line]));
}

static double first_vac(const sight *s) {
  return s->s.layout == L_IMG_AIR ? dt_air_to_vac(s->w0) : s->w0;
}

static double last_vac(const sight *s) {
  double n1 = (double)(s->n - 1);
  double w = s->log_grid ? s->w0 * exp(s->step * n1) : s->w0 + s->step * n1;
  return s->s.layout == L_IMG_AIR ? dt_air_to_vac(w) : w;
}

static int write_lists(outdir *od, const sight *sl, int count, const dt_demo_opts *o,
                       dt_demo_summary *sum, dt_err *e) {
  FILE *f = fopen(out_path(od, "targets.list"), "w");
  if (!f) return io_fail("targets.list", e);
  fprintf(f, "%s\n", LIST_FIRST_LINE);
  fprintf(f, "# Sightlines of the %s through the Velloran Pair,\n", SURVEY);
  fprintf(f, "# a fictional interacting pair of galaxies at %.0f km/s heliocentric.\n",
          DT_DEMO_VSYS);
  fprintf(f, "# Made by: doubletty demo --count %d --seed %lu.  Injected components: truth.csv.\n",
          count, o->seed);
  for (int k = 0; k < count; k++) {
    const sight *s = &sl[k];
    for (int d = 0; d < 1 + ((s->s.flags & F_WIDE) && o->caii ? 1 : 0); d++) {
      char rowtxt[24] = "";
      if (s->row) snprintf(rowtxt, sizeof rowtxt, " row=%ld", s->row);
      fprintf(f, "%-15s%s vsys=%.0f R=%.0f doublet=%s name=%s\n", s->file, rowtxt, DT_DEMO_VSYS,
              s->R, d ? o->caii->name : o->nai->name, s->name);
      sum->ntargets++;
    }
  }
  if (ferror(f)) {
    fclose(f);
    return io_fail("targets.list", e);
  }
  if (fclose(f) != 0) return io_fail("targets.list", e);

  f = fopen(out_path(od, "truth.csv"), "w");
  if (!f) return io_fail("truth.csv", e);
  fprintf(f, "# doubletty demo survey: the injected (synthetic) absorption, one line per"
             " component;\n# a sightline without any has one line with origin none."
             " v_helio heliocentric [km/s];\n# v_rel relative to vsys = %.0f km/s as"
             " (1+v_helio/c) = (1+vsys/c)(1+v_rel/c); logN [cm^-2]; b [km/s];\n"
             "# wave_min/wave_max: first/last pixel centre, vacuum [Angstrom]; snr per"
             " pixel on the continuum near Na I D;\n# defects: KIND:WAVE(vacuum)[xPIXELS].\n",
          DT_DEMO_VSYS);
  fprintf(f, "file,row,name,source,z_source,layout,npix,wave_min,wave_max,R,snr,defects,"
             "doublet,origin,v_helio,v_rel,logN,b\n");
  for (int k = 0; k < count; k++) {
    const sight *s = &sl[k];
    char defects[256];
    describe_defects(s, defects, sizeof defects);
    char head[512];
    snprintf(head, sizeof head, "%s,%ld,%s,%s,%.4f,%s,%zu,%.6f,%.6f,%.0f,%.1f,%s", s->file,
             s->row, s->name, s->s.kind == 'Q' ? "quasar" : "galaxy", s->cont.z,
             layout_name[s->s.layout], s->n, first_vac(s), last_vac(s), s->R, s->snr, defects);
    if (s->ncomp == 0) fprintf(f, "%s,%s,none,,,,\n", head, o->nai->name);
    for (int j = 0; j < s->ncomp; j++) {
      const demo_comp *c = &s->comp[j];
      double vrel = DT_C_KMS * ((1.0 + c->c.v / DT_C_KMS) / (1.0 + DT_DEMO_VSYS / DT_C_KMS) - 1.0);
      fprintf(f, "%s,%s,%s,%.2f,%.2f,%.3f,%.2f\n", head, c->caii ? o->caii->name : o->nai->name,
              c->origin == O_MW ? "milky-way" : "pair", c->c.v, vrel, c->c.logN, c->c.b);
      sum->ncomponents++;
    }
  }
  if (ferror(f)) {
    fclose(f);
    return io_fail("truth.csv", e);
  }
  if (fclose(f) != 0) return io_fail("truth.csv", e);
  return DT_OK;
}

/* ---- the directory ------------------------------------------------------- */

static int mkdir_parents(const char *dir, dt_err *e) {
  char p[PATH_MAX];
  if (snprintf(p, sizeof p, "%s", dir) >= (int)sizeof p)
    return dt_err_set(e, DT_EINVAL, NULL, "directory name too long");
  for (char *c = p + 1; *c; c++) {
    if (*c != '/') continue;
    *c = '\0';
    if (mkdir(p, 0777) != 0 && errno != EEXIST)
      return dt_err_set(e, DT_EIO, NULL, "cannot create directory %s: %s", p, strerror(errno));
    *c = '/';
  }
  if (mkdir(p, 0777) != 0 && errno != EEXIST)
    return dt_err_set(e, DT_EIO, NULL, "cannot create directory: %s", strerror(errno));
  return DT_OK;
}

/* 1 when dir/targets.list was written by an earlier demo. */
static int earlier_demo(outdir *od) {
  FILE *f = fopen(out_path(od, "targets.list"), "r");
  if (!f) return 0;
  char line[128];
  int yes = fgets(line, sizeof line, f) && !strncmp(line, LIST_FIRST_LINE, strlen(LIST_FIRST_LINE));
  fclose(f);
  return yes;
}

/* Remove the files an earlier demo listed: the first field of each list
 * line, without an extension selector, when it is a plain name inside dir. */
static void remove_earlier(outdir *od) {
  FILE *f = fopen(out_path(od, "targets.list"), "r");
  if (!f) return;
  char line[1024];
  while (fgets(line, sizeof line, f)) {
    char *p = line + strspn(line, " \t");
    size_t len = strcspn(p, " \t\r\n#[");
    if (len == 0 || len >= 256 || p[0] == '.') continue;
    char name[256];
    memcpy(name, p, len);
    name[len] = '\0';
    if (strchr(name, '/')) continue;
    unlink(out_path(od, name));
  }
  fclose(f);
  unlink(out_path(od, "truth.csv"));
}

static int prepare_dir(outdir *od, int force, dt_err *e) {
  struct stat sb;
  if (stat(od->dir, &sb) != 0) {
    if (errno != ENOENT)
      return dt_err_set(e, DT_EIO, NULL, "cannot use as directory: %s", strerror(errno));
    int st = mkdir_parents(od->dir, e);
    if (st != DT_OK) return st;
    if (stat(od->dir, &sb) != 0)
      return dt_err_set(e, DT_EIO, NULL, "cannot create directory: %s", strerror(errno));
  }
  if (!S_ISDIR(sb.st_mode)) return dt_err_set(e, DT_EINVAL, NULL, "exists and is not a directory");
  DIR *d = opendir(od->dir);
  if (!d) return dt_err_set(e, DT_EIO, NULL, "cannot read directory: %s", strerror(errno));
  int empty = 1;
  struct dirent *de;
  while ((de = readdir(d)) != NULL)
    if (strcmp(de->d_name, ".") && strcmp(de->d_name, "..")) {
      empty = 0;
      break;
    }
  closedir(d);
  if (access(od->dir, W_OK | X_OK) != 0)
    return dt_err_set(e, DT_EIO, NULL, "cannot write into directory: %s", strerror(errno));
  if (!empty) {
    if (earlier_demo(od)) remove_earlier(od);
    else if (!force)
      return dt_err_set(e, DT_EINVAL, NULL,
                        "directory is not empty and holds no earlier demo survey");
  }
  return DT_OK;
}

/* ---- entry points -------------------------------------------------------- */

dt_demo_opts dt_demo_opts_default(void) {
  dt_demo_opts o = {NULL, NULL, DT_DEMO_DEFAULT_COUNT, DT_DEMO_DEFAULT_SEED, 0};
  return o;
}

int dt_demo_write(const char *dir, const dt_demo_opts *o, dt_demo_summary *sum, dt_err *e) {
  dt_demo_summary dummy;
  if (!sum) sum = &dummy;
  memset(sum, 0, sizeof *sum);
  dt_err_clear(e);
  if (!dir || !*dir) return dt_err_set(e, DT_EINVAL, NULL, "no directory given");
  if (!o || !o->nai) return dt_err_set(e, DT_EINVAL, NULL, "the Na I doublet is required");
  if (o->count < 1 || o->count > DT_DEMO_MAX_COUNT)
    return dt_err_set(e, DT_EINVAL, NULL, "count must be 1..%d, not %d", DT_DEMO_MAX_COUNT,
                      o->count);
  outdir od = {dir, ""};
  if (strlen(dir) + 40 >= sizeof od.path)
    return dt_err_set(e, DT_EINVAL, NULL, "directory name too long");
  int st = prepare_dir(&od, o->force, e);
  if (st != DT_OK) return st;

  /* Plan every sightline; the plate's fibres share one grid and R. */
  sight *sl = calloc((size_t)o->count, sizeof *sl);
  if (!sl) return dt_err_set(e, DT_ENOMEM, NULL, "out of memory");
  gsl_rng *r = gsl_rng_alloc(gsl_rng_mt19937);
  if (!r) {
    free(sl);
    return dt_err_set(e, DT_ENOMEM, NULL, "out of memory");
  }
  gsl_rng_set(r, mix_seed(o->seed, 0, 3));
  double plate_R = round_to(unif(r, 2200.0, 3000.0), 10.0);
  double plate_w0 = 5590.0 + unif(r, -5.0, 5.0), plate_w1 = 6310.0 + unif(r, -5.0, 5.0);
  gsl_rng_free(r);
  long nrows = 0;
  size_t plate_n = 0;
  for (int k = 0; k < o->count; k++) {
    if (plan_sight(k, o, &sl[k], plate_R, plate_w0, plate_w1, &nrows) != DT_OK) {
      free(sl);
      return dt_err_set(e, DT_ENOMEM, NULL, "out of memory");
    }
    if (sl[k].row) plate_n = sl[k].n;
  }

  st = write_lists(&od, sl, o->count, o, sum, e);
  fitsfile *plate = NULL;
  if (st == DT_OK && nrows > 0) {
    st = plate_open(&od, plate_n, plate_R, &plate, e);
    if (st == DT_OK) sum->nfiles++;
  }
  for (int k = 0; k < o->count && st == DT_OK; k++) {
    const sight *s = &sl[k];
    pixels p;
    st = make_pixels(s, o, &p, e);
    if (st != DT_OK) {
      pixels_free(&p);
      break;
    }
    switch (s->s.layout) {
    case L_ROWS: st = plate_row(plate, s, &p, e); break;
    case L_TABLE: st = write_table(&od, s, &p, e); break;
    case L_TEXT: st = write_text(&od, s, &p, e); break;
    default: st = write_image(&od, s, &p, e); break;
    }
    pixels_free(&p);
    if (st == DT_OK) {
      sum->nspectra++;
      if (s->s.layout != L_ROWS) sum->nfiles++;
    }
  }
  if (plate) {
    int status = 0;
    fits_close_file(plate, &status);
    if (status && st == DT_OK) st = fits_fail(status, PLATE_FILE, e);
  }
  free(sl);
  return st;
}
