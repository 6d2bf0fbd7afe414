/* One-dimensional spectra as the rest of doubletty sees them.
 *
 * Whatever the file layout (FITS image, FITS table, plain text), a spectrum is
 * read into vacuum wavelengths in Angstrom, strictly increasing, with flux, a
 * 1-sigma uncertainty and a mask.  Air wavelengths are converted on reading;
 * a spectrum stored with decreasing wavelengths is reversed.
 *
 * Formats understood by dt_spectrum_read (the file's first bytes decide):
 *
 * FITS 1-D image (NAXIS = 1, or further axes of length 1).  Pixel p = 1..N:
 *   linear   CTYPE1 'WAVE', 'AWAV', 'LINEAR' or absent:
 *              lambda = CRVAL1 + CDELT1 * (p - CRPIX1)
 *   WAVE-LOG CTYPE1 'WAVE-LOG' / 'AWAV-LOG' (FITS WCS Paper III, Greisen et
 *            al. 2006, A&A 446, 747):
 *              lambda = CRVAL1 * exp(CDELT1 * (p - CRPIX1) / CRVAL1)
 *   log10    CTYPE1 'LOG10' or 'LOGLAM', or keyword DC-FLAG = 1:
 *              lambda = 10^(CRVAL1 + CDELT1 * (p - CRPIX1))
 *   CD1_1 replaces CDELT1 when present (else CDELT1 * PC1_1); CRPIX1
 *   defaults to 0 (FITS WCS Paper I).  CUNIT1 'Angstrom', 'nm', 'um', 'm';
 *   without CUNIT1: Angstrom, except metres (the FITS default) for CTYPE1
 *   WAVE/AWAV with CRVAL1 < 1e-3.  Air wavelengths: CTYPE1 'AWAV...', or
 *   AIRORVAC = 'air' when CTYPE1 does not say 'WAVE...' (vacuum).
 *   Uncertainty: another image HDU whose EXTNAME, split at '_' or '-', has a
 *   word ERR, ERROR, SIGMA, NOISE, STDDEV, UNCERT (1-sigma), IVAR, INVVAR
 *   (inverse variance) or VAR, VARIANCE (variance); a mask: EXTNAME MASK or
 *   AND_MASK (nonzero = masked).
 * FITS binary (or ASCII) table.  Columns by name, case-insensitively:
 *   wavelength WAVE, WAVELENGTH, LAMBDA, LOGLAM (log10 Angstrom); flux FLUX;
 *   uncertainty IVAR, ERR, ERROR, SIGMA, VAR, VARIANCE; mask MASK, AND_MASK.
 *   Scalar columns: one spectrum, one row per pixel ("table-columns").
 *   Vector (or variable-length) columns: one spectrum per row
 *   ("table-rows").  Wavelength units from TUNITn as for CUNIT1; air
 *   wavelengths with AIRORVAC = 'air'.
 * Resolving power R from the keyword SPECRES, else RESOLUTN (both R =
 *   lambda / FWHM), in the spectrum's HDU or the primary header.
 * Plain text: columns "wave flux [sigma [mask]]" separated by blanks or
 *   commas, Angstrom; '#' starts a comment; blank lines are skipped;
 *   a first line of column names is skipped.  A text file cannot say air or
 *   vacuum: its wavelengths are taken as vacuum unless the caller declares
 *   them air (dt_read_opts.air).
 *
 * Positions and frames (sky.h, frames.h).  Header keyword pairs, the first
 *   present wins (spectrum's HDU, then the primary header): RA/DEC,
 *   OBJRA/OBJDEC, RA_OBJ/DEC_OBJ, RA_TARG/DEC_TARG, PLUG_RA/PLUG_DEC; a
 *   number is degrees, text is degrees or sexagesimal (hours for RA).
 *   RADESYS (or RADECSYS) and EQUINOX (or EPOCH) as in FITS WCS Paper II;
 *   converted to ICRS.  Multi-row tables: columns RA/DEC (or PLUG_RA/
 *   PLUG_DEC, RA_OBJ/DEC_OBJ) in degrees, one per row, override the header.
 *   dt_read_opts.ra/dec override both.  Frame: dt_read_opts.in_frame, else
 *   SPECSYS, else VELREF, else BARYCENT is assumed (frame_from "assumed").
 *   Time: DATE-AVG or MJD-AVG (midpoint), else DATE-OBS or MJD-OBS plus
 *   half of EXPTIME (or EXPOSURE); UTC.  Site: OBSGEO-X/Y/Z [m], else
 *   OBSGEO-L/B/H [deg, deg, m], else dt_read_opts.site_*.  The wavelengths
 *   are then converted to dt_read_opts.out_frame (default BARYCENT); when
 *   the conversion is impossible (no time or site for TOPOCENT, no
 *   position) the read fails with DT_EINVAL saying what is missing --
 *   unless the output frame is the file's own, when nothing is converted,
 *   or the two frames are HELIOCEN and BARYCENT (less than 0.015 km/s
 *   apart), when the spectrum is used as it is with a note (frame_note).
 * Air or vacuum: what the file says (CTYPE1, AIRORVAC) decides; when the
 *   file says nothing, dt_read_opts.air = 1 declares air, else vacuum is
 *   assumed.  dt_spectrum.air_from records which of the three it was.
 *
 * Masked: non-finite flux, non-finite or non-positive sigma (or inverse
 * variance, or variance), nonzero mask.  Masked pixels keep the values read
 * from the file (which may be NaN or Inf).  Without an uncertainty in the
 * file, sigma is estimated from the pixel-to-pixel scatter of the flux
 * (dt_spectrum_estimate_sigma) and has_sigma is 0. */
#ifndef DOUBLETTY_SPECTRUM_H
#define DOUBLETTY_SPECTRUM_H
#include <stddef.h>
#include "doubletty/frames.h"
#include "doubletty/status.h"

/* Who settled whether the wavelengths in the file were air or vacuum. */
typedef enum dt_airvac_from {
  DT_AIRVAC_ASSUMED = 0, /* nobody said: vacuum assumed */
  DT_AIRVAC_FILE,        /* the file (CTYPE1 'AWAV...' / 'WAVE...', AIRORVAC) */
  DT_AIRVAC_CALLER       /* the caller (dt_read_opts.air), the file being silent */
} dt_airvac_from;

typedef struct dt_spectrum {
  size_t n;
  double *wave;          /* vacuum wavelength [Angstrom], strictly increasing */
  double *flux;          /* flux, arbitrary units (finite where not masked) */
  double *sigma;         /* 1-sigma uncertainty, > 0 and finite where not masked */
  unsigned char *mask;   /* nonzero = masked: never fitted, shown as masked */
  int has_sigma;         /* 0: no uncertainty in the file (sigma estimated) */
  double resolution;     /* resolving power R read from the header, 0 if none */
  char layout[32];       /* "image-linear", "image-log" (WAVE-LOG),
                            "image-log10", "table-columns", "table-rows",
                            "text" */
  int hdu;               /* 1-based HDU number (primary = 1); 0 for text */
  long row;              /* 1-based table row; 0 when not a row of a table */
  int air;               /* 1 if the file's wavelengths were air (now converted) */
  dt_airvac_from air_from; /* who said so (or that they were vacuum) */
  char object[72];       /* OBJECT keyword or "" */
  char extname[72];      /* EXTNAME of the spectrum's HDU or "" */
  char sigma_from[48];   /* where sigma came from: "HDU 2 'ERR' (sigma)",
                            "column IVAR (inverse variance)", "column 3",
                            "estimated" */
  char unit[16];         /* wavelength unit in the file: "Angstrom", "nm", ... */
  /* Sky position and velocity frame (see "Positions and frames" below). */
  int has_pos;           /* 1: ra, dec known */
  double ra, dec;        /* ICRS [deg] */
  char pos_from[48];     /* "keywords RA/DEC (FK4 B1950)", "columns RA/DEC", "list" */
  dt_frame frame;        /* frame of wave[] now (after any conversion) */
  dt_frame frame_in;     /* frame of the wavelengths in the file */
  char frame_from[40];   /* who said frame_in: "SPECSYS", "VELREF", "list/option",
                            "assumed" (nobody said) */
  double frame_kms;      /* shift applied: c (k - 1), lambda_out = k lambda_in */
  char frame_note[200];  /* a warning or an assumption to show, or "" */
  dt_frame_obs obs;      /* time and site of the observation where known */
  /* Line-spread width per pixel (lsf.h), or NULL: a FWHM [km/s] for each
   * pixel, NaN where the source gives none (a column's gaps are
   * interpolated; only beyond its first or last value is there none).  From a FITS table column
   * (LSF_FWHM, LSF_SIGMA: a width in the unit of TUNITn, Angstrom when
   * none, also nm, km/s or pixel; RESPOWER, RESOLUTION: R per pixel; the
   * first present is read) or a resolution table (dt_lsf_table_apply). */
  double *lsf_fwhm_kms;
  char lsf_from[160];    /* "column LSF_FWHM (FWHM, Angstrom)", "table FILE" */
} dt_spectrum;

typedef struct dt_read_opts {
  const char *wave_col;  /* column-name overrides for tables; NULL = find by */
  const char *flux_col;  /*   common names, case-insensitively               */
  const char *err_col;   /* kind by name: ...IVAR/INVVAR... inverse variance,
                            VAR or VARIANCE variance, else 1-sigma */
  const char *mask_col;
  int hdu;               /* 1-based HDU; 0 = from "FILE[ext]" or the first with data */
  long row;              /* 1-based row of a multi-row table; 0 = the first */
  int air;               /* 1: the wavelengths are in air (used when the file
                            does not say; text files never do); 0: not said */
  dt_frame out_frame;    /* frame to convert to; UNSET = BARYCENT */
  dt_frame in_frame;     /* frame of the file's wavelengths, declared by the
                            caller (frame= / --in-frame): overrides the file */
  int has_pos;           /* 1: ra, dec given by the caller (ra=/dec= of a
                            list): override the file's */
  double ra, dec;        /* ICRS [deg] */
  int has_site;          /* 1: site used where the file gives none (--site) */
  double site_lon, site_lat, site_height; /* [deg east], [deg], [m] */
  const struct dt_lsf_table *lsf_table; /* resolution table (lsf.h): gives the
                            spectrum its width per pixel after reading,
                            replacing the file's; NULL = none */
} dt_read_opts;

/* Read one spectrum.  path may carry an extension selector "FILE[N]" (N the
 * extension number as in cfitsio: [0] is the primary HDU, [1] the first
 * extension = HDU 2) or "FILE[NAME]" (EXTNAME).  opts may be NULL.
 * On error *out is NULL and e says where ("HDU 2", "line 17",
 * "HDU 2, row 3, column FLUX", ...). */
int dt_spectrum_read(const char *path, const dt_read_opts *opts,
                     dt_spectrum **out, dt_err *e);

/* Read one spectrum from a file's bytes in memory (buf[0..len), only read):
 * the same spectrum, or the same error, as dt_spectrum_read on a file
 * holding these bytes.  There is no "[ext]" selector; opts->hdu and
 * opts->row choose (opts may be NULL). */
int dt_spectrum_read_mem(const void *buf, size_t len, const dt_read_opts *opts,
                         dt_spectrum **out, dt_err *e);

/* Once before several threads read spectra at the same time: the FITS
 * library's one-time set-up (its global lock), which is not itself safe
 * to race.  Reading from many threads is safe after it (cfitsio is built
 * reentrant on Debian, fits_is_reentrant() == 1); DT_EINVAL if the FITS
 * library is not reentrant, and reads must then be serialised. */
int dt_spectrum_threads_init(void);

/* Number of spectra in a file: rows of a multi-row table, otherwise 1. */
int dt_spectrum_count(const char *path, const dt_read_opts *opts,
                      long *count, dt_err *e);

/* A spectrum file read from the disk once, then counted and read as often
 * as needed (every row of a table, a spectrum fitted for several doublets):
 * one open, one fstat, the reads of its bytes, one close.
 *
 * dt_spectrum_file_load takes a path as dt_spectrum_read does ("FILE[N]",
 * "FILE[NAME]" included) and reads the bytes of FILE when it is a regular
 * file of at most DT_SPECTRUM_LOAD_MAX bytes.  Anything else -- a missing
 * or unreadable file, a directory, a named pipe, a device, a larger file
 * -- is kept by name, and counting and reading it go to the disk readers.
 * It fails only when out of memory (DT_ENOMEM); whatever is wrong with the
 * file is said by the count or the read.
 *
 * dt_spectrum_file_count and dt_spectrum_file_read give what
 * dt_spectrum_count and dt_spectrum_read give for the path: the same
 * count, the same spectrum, and the same error word for word (an error
 * met in the bytes is the disk reader's to word: it is asked again, since
 * cfitsio words some damage differently on disk and in memory). */
typedef struct dt_spectrum_file dt_spectrum_file;

#define DT_SPECTRUM_LOAD_MAX (256u * 1024u * 1024u) /* bytes; larger stay on disk */

int dt_spectrum_file_load(const char *path, dt_spectrum_file **out, dt_err *e);
int dt_spectrum_file_count(const dt_spectrum_file *f, const dt_read_opts *opts, long *count,
                           dt_err *e);
int dt_spectrum_file_read(const dt_spectrum_file *f, const dt_read_opts *opts,
                          dt_spectrum **out, dt_err *e);
/* Bytes held in memory (0 for an empty file); -1 when kept by name. */
long long dt_spectrum_file_bytes(const dt_spectrum_file *f);
void dt_spectrum_file_free(dt_spectrum_file *f);

/* Arrays of n pixels, zeroed; NULL when out of memory. */
dt_spectrum *dt_spectrum_alloc(size_t n);
void dt_spectrum_free(dt_spectrum *s);

/* Validate: at least 2 pixels, strictly increasing finite wavelengths, at
 * least one unmasked pixel, finite flux and positive finite sigma where
 * unmasked.  DT_EFORMAT / DT_EMASKED with e->where = "pixel N" (1-based). */
int dt_spectrum_validate(const dt_spectrum *s, dt_err *e);

/* Replace sigma by an estimate from the flux alone and set has_sigma = 0.
 * Noise per pixel from the second differences f[i] - (f[i-2] + f[i+2])/2 of
 * unmasked pixels: sigma = 1.482602 / sqrt(6) * median |2 f[i] - f[i-2] -
 * f[i+2]| over a window of about 201 pixels around i (the DER_SNR estimator of
 * Stoehr et al. 2008, ASP Conf. Ser. 394, 505, made local).  Steps two
 * pixels apart keep correlations between neighbours out.  Where the flux has
 * no measurable scatter, 1e-3 of the median |flux| is used. */
void dt_spectrum_estimate_sigma(dt_spectrum *s);

/* Median signal-to-noise (flux/sigma) over unmasked pixels; 0 if none. */
double dt_spectrum_median_snr(const dt_spectrum *s);

/* Median pixel size in km/s: c * ln(wave[i+1] / wave[i]). */
double dt_spectrum_pixel_kms(const dt_spectrum *s);

/* Number of masked pixels. */
size_t dt_spectrum_nmasked(const dt_spectrum *s);

/* Index of the first pixel with wave >= lam (n if none). */
size_t dt_spectrum_index(const dt_spectrum *s, double lam);

#endif
