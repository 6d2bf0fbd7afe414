/* Private to the demo survey (demo_plan.c plans the sightlines and makes
 * their pixels; demo_write.c writes the files, the target list and the
 * truth table): the scenario's types and the helpers both use. */
#ifndef DOUBLETTY_DEMO_INTERNAL_H
#define DOUBLETTY_DEMO_INTERNAL_H
#include <gsl/gsl_rng.h>
#include <math.h>
#include <stddef.h>

#include "demo.h"
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

/* Sky emission lines in standard air [Angstrom]: the sodium doublet of the
 * night sky (Na I D air wavelengths, NIST Atomic Spectra Database) and the
 * [O I] airglow lines (from memory). */
static const double sky_air[] = {5889.950, 5895.924, 6300.304, 6363.776};


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
  /* where and how it was observed (invented) */
  double ra, dec;   /* ICRS [deg] */
  int frame;        /* dt_frame of the file's wavelengths */
  double mjd;       /* UTC midpoint of the exposure */
  double exptime;   /* [s] */
  double kfile;     /* lambda_file = kfile * lambda_heliocentric */
  double ktopo;     /* lambda_topocentric = ktopo * lambda_heliocentric (sky lines) */
} sight;

/* The invented patch of sky: the pair's centre and the observatory. */
#define DEMO_PAIR_RA 161.2375   /* 10:44:57.0 */
#define DEMO_PAIR_DEC 13.415    /* +13:24:54 */
#define DEMO_SITE_LON 141.37    /* deg east */
#define DEMO_SITE_LAT -29.12
#define DEMO_SITE_H 1150.0      /* m */

/* The 21-cm cube of the pair and its bridge (demo_cube.c). */
int dt_demo_write_cube(const char *path, unsigned long seed, dt_err *e);
#define CUBE_FILE "velloran_hi.fits"

/* Pixel data of one sightline, all in the vacuum frame except wfile. */
typedef struct pixels {
  size_t n;
  double *wvac, *wfile, *cont, *flux, *sigma;
  int *mask;  /* table mask bits */
  int *bad;   /* 1 = flux not usable (NaN in images, ivar 0 in tables) */
} pixels;


/* A simple integer hash (splitmix64 finaliser) so that neighbouring seeds
 * and sightlines get unrelated streams. */
static inline unsigned long mix_seed(unsigned long seed, unsigned long k, unsigned long salt) {
  unsigned long long x = (unsigned long long)seed * 0x9E3779B97F4A7C15ULL +
                         (unsigned long long)k * 0xBF58476D1CE4E5B9ULL + salt;
  x ^= x >> 30;
  x *= 0xBF58476D1CE4E5B9ULL;
  x ^= x >> 27;
  x *= 0x94D049BB133111EBULL;
  x ^= x >> 31;
  return (unsigned long)(x & 0xFFFFFFFFULL);
}

static inline double unif(gsl_rng *r, double a, double b) {
  return a + (b - a) * gsl_rng_uniform(r);
}
static inline double round_to(double x, double q) { return q * floor(x / q + 0.5); }

/* demo_plan.c: plan sightline idx (the plate's fibres share plate_R and the
 * grid plate_w0..plate_w1; *next_row counts the plate's rows); make its
 * pixels (p is freed by dt_demo_pixels_free also after a failure). */
int dt_demo_plan_sight(int idx, const dt_demo_opts *o, sight *s, double plate_R,
                       double plate_w0, double plate_w1, long *next_row);
int dt_demo_make_pixels(const sight *s, const dt_demo_opts *o, pixels *p, dt_err *e);
void dt_demo_pixels_free(pixels *p);

#endif
