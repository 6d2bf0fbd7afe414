#!/usr/bin/python3
"""Small seed files for the fuzz targets, one per layout the readers know.

    make_seeds.py CORPUS_DIR

writes CORPUS_DIR/fits/*.fits and CORPUS_DIR/text/*.txt.  The FITS files are
written with astropy (an independent FITS writer), so the seeds are valid by
an outside account of the standard; each is a few blocks of 2880 bytes,
small enough for the fuzzer to mutate quickly.  The values are invented.
The files fits/regress_*.fits are not made here: they are inputs the fuzzer
found to break the reader (now each a test in tests/unit/test_regress_fits.c),
kept as seeds so that every run passes through those paths again.  The
atomic-table seeds are the project's table and small hand-made variants; the
session seeds come from a headless inspector run (doubletty inspect
--replay-keys on a demo survey), cut and damaged copies of it, and
tests/py/session_tool.py make-rich; the key seeds are byte strings in the
encoding described at the top of tests/fuzz/fuzz_keys.c.
"""
import os
import sys

import numpy as np
from astropy.io import fits

out = sys.argv[1]
fdir = os.path.join(out, "fits")
tdir = os.path.join(out, "text")
os.makedirs(fdir, exist_ok=True)
os.makedirs(tdir, exist_ok=True)

rng = np.random.default_rng(7)
N = 24


def flux(n=N):
    # a flat continuum with a dip in the middle: invented numbers
    x = np.arange(n)
    return (1.0 - 0.4 * np.exp(-0.5 * ((x - n / 2) / 1.5) ** 2)
            + 0.01 * rng.standard_normal(n)).astype(np.float32)


def save(name, hdus):
    fits.HDUList(hdus).writeto(os.path.join(fdir, name), overwrite=True,
                               output_verify="silentfix")


# 1-D image, linear axis, the WCS keywords of FITS WCS Paper I
h = fits.PrimaryHDU(flux())
h.header.update(CTYPE1="WAVE", CUNIT1="Angstrom", CRVAL1=5880.0, CDELT1=0.5,
                CRPIX1=1.0, SPECRES=4000.0, OBJECT="SEED-LIN")
save("image_linear.fits", [h])

# WAVE-LOG axis (Paper III) with uncertainty and mask images
h = fits.PrimaryHDU(flux())
h.header.update(CTYPE1="WAVE-LOG", CRVAL1=5880.0, CDELT1=0.4, CRPIX1=12.0)
err = fits.ImageHDU(np.full(N, 0.02, np.float32), name="ERR")
mask = np.zeros(N, np.int16)
mask[3] = 1
save("image_wavelog_err_mask.fits", [h, err, fits.ImageHDU(mask, name="MASK")])

# log10 axis through DC-FLAG, scaled 16-bit integers, inverse variance
data = (flux() * 1000).astype(np.int16)
h = fits.PrimaryHDU(data)
h.header.update(CRVAL1=np.log10(5880.0), CDELT1=3e-5, CRPIX1=1.0, BSCALE=0.001,
                BZERO=0.0, BLANK=-32768)
h.header["DC-FLAG"] = 1
save("image_log10_ivar.fits", [h, fits.ImageHDU(np.full(N, 2500.0), name="IVAR")])

# air wavelengths in nm through CD1_1, decreasing
h = fits.PrimaryHDU(flux().astype(np.float64))
h.header.update(CTYPE1="AWAV", CUNIT1="nm", CRVAL1=590.0, CD1_1=-0.05, CRPIX1=1.0)
save("image_air_nm_decreasing.fits", [h])

# empty primary, spectrum in an image extension (2-D of one row), variance
h = fits.ImageHDU(flux().reshape(1, N), name="SPECTRUM")
h.header.update(CRVAL1=5880.0, CDELT1=0.5, AIRORVAC="vac", RESOLUTN=3000.0)
save("image_ext_var.fits", [fits.PrimaryHDU(), h,
                            fits.ImageHDU(np.full(N, 4e-4), name="FLUX_VAR")])

# binary table, a row per pixel
w = 5880.0 + 0.5 * np.arange(N)
cols = [fits.Column("WAVE", "D", unit="Angstrom", array=w),
        fits.Column("FLUX", "E", array=flux()),
        fits.Column("IVAR", "E", array=np.full(N, 2500.0)),
        fits.Column("MASK", "J", array=np.zeros(N, np.int32))]
save("table_columns.fits", [fits.PrimaryHDU(), fits.BinTableHDU.from_columns(cols)])

# binary table, a spectrum per row (vector columns), log10 wavelengths
rows = 3
ll = np.log10(5880.0) + 3e-5 * np.arange(N)
cols = [fits.Column("LOGLAM", f"{N}D", array=np.tile(ll, (rows, 1))),
        fits.Column("FLUX", f"{N}E", array=np.array([flux() for _ in range(rows)])),
        fits.Column("IVAR", f"{N}E", array=np.full((rows, N), 2500.0)),
        fits.Column("AND_MASK", f"{N}J", array=np.zeros((rows, N), np.int32))]
t = fits.BinTableHDU.from_columns(cols, name="FIBRES")
t.header["SPECRES"] = 2500.0
save("table_rows_loglam.fits", [fits.PrimaryHDU(), t])

# variable-length arrays, one spectrum per row, air, nm
lens = [N, N - 4]
cols = [fits.Column("WAVELENGTH", "PD()", unit="nm",
                    array=np.array([589.0 + 0.05 * np.arange(k) for k in lens], dtype=object)),
        fits.Column("FLUX", "PE()", array=np.array([flux(k) for k in lens], dtype=object)),
        fits.Column("ERR", "PE()", array=np.array([np.full(k, 0.02, np.float32) for k in lens],
                                                    dtype=object))]
t = fits.BinTableHDU.from_columns(cols)
t.header["AIRORVAC"] = "air"
save("table_vla.fits", [fits.PrimaryHDU(), t])

# a logical mask column ('T' / 'F')
cols = [fits.Column("WAVE", "E", array=w.astype(np.float32)),
        fits.Column("FLUX", "E", array=flux()),
        fits.Column("ERROR", "E", array=np.full(N, 0.02, np.float32)),
        fits.Column("MASK", "L", array=np.arange(N) == 7)]
save("table_logical_mask.fits", [fits.PrimaryHDU(), fits.BinTableHDU.from_columns(cols)])

# ASCII table
cols = [fits.Column("LAMBDA", "F10.3", array=w),
        fits.Column("FLUX", "E12.5", array=flux()),
        fits.Column("SIGMA", "E12.5", array=np.full(N, 0.02))]
save("ascii_table.fits", [fits.PrimaryHDU(), fits.TableHDU.from_columns(cols)])

# a table whose wavelength unit says log10
cols = [fits.Column("WAVE", "D", unit="log(Angstrom)", array=ll),
        fits.Column("FLUX", "D", array=flux().astype(np.float64)),
        fits.Column("VAR", "D", array=np.full(N, 4e-4))]
save("table_logunit_var.fits", [fits.PrimaryHDU(), fits.BinTableHDU.from_columns(cols)])

# a file cut short in its data (a broken download)
raw = open(os.path.join(fdir, "table_columns.fits"), "rb").read()
open(os.path.join(fdir, "truncated.fits"), "wb").write(raw[:2880 + 2880 + 100])

# text spectra
wt = 5880.0 + 0.5 * np.arange(N)
ft = flux()


def text(name, lines):
    with open(os.path.join(tdir, name), "w") as f:
        f.write("".join(line + "\n" for line in lines))


text("two_columns.txt", [f"{a:.2f} {b:.5f}" for a, b in zip(wt, ft)])
text("sigma_mask_comments.txt",
     ["# invented spectrum: wave flux sigma mask", ""] +
     [f"{a:.2f}\t{b:.5f}\t0.02\t{1 if i == 5 else 0}  # px {i}"
      for i, (a, b) in enumerate(zip(wt, ft))])
text("csv_header.txt", ["wave,flux,err"] + [f"{a:.2f}, {b:.5f}, 0.02" for a, b in zip(wt, ft)])
text("decreasing_nan.txt",
     [f"{a:.2f} {'nan' if i == 3 else f'{b:.5f}'} 0.02"
      for i, (a, b) in enumerate(zip(wt[::-1], ft))])
text("exponent_inf.txt", [f"{a:.6e} {b:.6e} {'inf' if i == 2 else '2e-2'}"
                          for i, (a, b) in enumerate(zip(wt, ft))])
