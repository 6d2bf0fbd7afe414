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
 * repeats with fresh random draws.
 *
 * This file plans the sightlines and makes their pixels; demo_write.c
 * writes them (demo_internal.h holds the types both share). */
#include <gsl/gsl_randist.h>
#include <gsl/gsl_rng.h>
#include <math.h>
#include <stdlib.h>
#include <string.h>

#include "demo_internal.h"
#include "doubletty/airvac.h"
#include "doubletty/frames.h"
#include "doubletty/model.h"

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

/* Position, frame and time of a sightline, from a stream of its own (the
 * spectra stay those of the same seed without positions): a patch of about
 * 0.2 degrees around the pair.  Linear and log images are written in three
 * frames by turns (heliocentric, topocentric with the time and the
 * observatory, barycentric); the other layouts stay heliocentric. */
static void plan_sky(const dt_demo_opts *o, sight *s) {
  gsl_rng *r = gsl_rng_alloc(gsl_rng_mt19937);
  double u1 = 0.5, u2 = 0.5, u3 = 0.5, u4 = 0.5;
  if (r) {
    gsl_rng_set(r, mix_seed(o->seed, (unsigned long)s->idx, 5));
    u1 = gsl_rng_uniform(r);
    u2 = gsl_rng_uniform(r);
    u3 = gsl_rng_uniform(r);
    u4 = gsl_rng_uniform(r);
    gsl_rng_free(r);
  }
  s->dec = round_to(DEMO_PAIR_DEC + 0.22 * (u2 - 0.5), 1e-5);
  s->ra = round_to(DEMO_PAIR_RA + 0.22 * (u1 - 0.5) / cos(DEMO_PAIR_DEC * DEMO_TWO_PI / 360.0), 1e-5);
  /* nights of an invented observing run, 2030 December (MJD 62836..62845) */
  s->mjd = round_to(62836.5 + floor(10.0 * u3) + 0.3 * u4, 1e-5);
  s->exptime = 1200.0;
  s->frame = DT_FRAME_HELIOCEN;
  s->kfile = 1.0;
  if (s->s.layout == L_IMG_LIN || s->s.layout == L_IMG_LOG) {
    int turn = s->idx % 3;
    s->frame = turn == 1 ? DT_FRAME_TOPOCENT : turn == 2 ? DT_FRAME_BARYCENT : DT_FRAME_HELIOCEN;
  }
  dt_frame_obs obs = {1, s->mjd, 1, DEMO_SITE_LON, DEMO_SITE_LAT, DEMO_SITE_H};
  dt_err e;
  double k = 1.0;
  s->ktopo = 1.0;
  if (dt_frame_factor(DT_FRAME_HELIOCEN, DT_FRAME_TOPOCENT, s->ra, s->dec, &obs, &k, &e) == DT_OK)
    s->ktopo = k;
  if (s->frame != DT_FRAME_HELIOCEN &&
      dt_frame_factor(DT_FRAME_HELIOCEN, (dt_frame)s->frame, s->ra, s->dec, &obs, &k, &e) == DT_OK)
    s->kfile = k;
}

int dt_demo_plan_sight(int idx, const dt_demo_opts *o, sight *s, double plate_R,
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
  plan_sky(o, s);
  return DT_OK;
}

/* ---- making the pixels --------------------------------------------------- */

void dt_demo_pixels_free(pixels *p) {
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
    dt_demo_pixels_free(p);
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

int dt_demo_make_pixels(const sight *s, const dt_demo_opts *o, pixels *p, dt_err *e) {
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
    /* sky lines are topocentric: at their rest wavelength in the observer's frame */
    double lc = dt_air_to_vac(sky_air[s->sky[j].line]) / s->ktopo;
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

