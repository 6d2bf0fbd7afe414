#!/usr/bin/python3
"""Spectra written by astropy in every layout doubletty reads come back intact.

usage: spectrum_roundtrip.py DOUBLETTY WORKDIR

Writes each file with astropy.io.fits, keeps the arrays it wrote, runs
`doubletty info --pixels FILE` and compares the pixels it prints:
wavelength to 1e-9 relative, flux exactly, sigma and mask as the file says.

Expected wavelengths are computed outside doubletty:
  - linear and WAVE-LOG image axes with astropy.wcs (wcslib; FITS WCS
    Papers I and III), converted from metres to Angstrom;
  - the log10 convention lambda = 10^(CRVAL1 + CDELT1 (p - CRPIX1)) with
    numpy (common practice);
  - air wavelengths (CTYPE1 AWAV) from astropy.wcs, turned into vacuum
    wavelengths here with the IAU formula of Morton 2000 (ApJS 130, 403,
    eq. 8), inverted with scipy.optimize.newton.
Prints "ok - ..." / "FAIL - ..." lines.
"""
import math
import os
import subprocess
import sys

import numpy as np
from astropy.io import fits
from astropy.wcs import WCS
from scipy.optimize import newton

DT, WORK = sys.argv[1], sys.argv[2]
RTOL = 1e-9
results = []


def report(ok, desc):
    results.append(ok)
    print(("ok   - " if ok else "FAIL - ") + desc, flush=True)


def run_info(target, *opts):
    """Run info --pixels; return (header dict list, list of pixel arrays)."""
    cmd = [DT, "info", "--pixels", *opts, target]
    p = subprocess.run(cmd, capture_output=True, text=True)
    if p.returncode != 0:
        return None, p.stderr.strip()
    blocks = []
    cur = None
    for line in p.stdout.splitlines():
        if line.startswith("# spectrum"):
            cur = {"keys": {}, "rows": []}
            blocks.append(cur)
        if not line.strip():
            continue
        if line.startswith("#"):
            parts = line[2:].split(None, 1)
            cur["keys"][parts[0]] = parts[1] if len(parts) > 1 else ""
        else:
            cur["rows"].append([float(x) for x in line.split()])
    for b in blocks:
        b["rows"] = np.array(b["rows"], dtype=float).reshape(-1, 4)
    return blocks, ""


def compare(name, target, wave, flux, sigma=None, mask=None, layout=None, opts=(), block=0):
    """wave/flux/sigma/mask: what the file holds, in the file's pixel order,
    already in vacuum Angstrom."""
    blocks, err = run_info(target, *opts)
    if blocks is None:
        report(False, f"{name}: doubletty info failed: {err}")
        return None
    b = blocks[block]
    got = b["rows"]
    order = np.argsort(wave)
    wave, flux = np.asarray(wave, float)[order], np.asarray(flux, float)[order]
    n = len(wave)
    if got.shape[0] != n:
        report(False, f"{name}: {got.shape[0]} pixels, expected {n}")
        return None
    report(True, f"{name}: {n} pixels")
    rel = np.max(np.abs(got[:, 0] / wave - 1.0))
    report(rel <= RTOL, f"{name}: wavelengths agree to {rel:.2g} (<= {RTOL:g} relative)")
    want_mask = ~np.isfinite(flux)
    if mask is not None:
        want_mask |= np.asarray(mask)[order] != 0
    if sigma is not None:
        sig = np.asarray(sigma, float)[order]
        want_mask |= ~(np.isfinite(sig) & (sig > 0))
    good = ~want_mask
    report(np.array_equal(got[good, 1], flux[good]), f"{name}: flux identical on {good.sum()} unmasked pixels")
    report(np.array_equal(got[:, 3] != 0, want_mask),
           f"{name}: mask as in the file ({int(want_mask.sum())} masked)")
    if sigma is not None:
        srel = np.max(np.abs(got[good, 2] / sig[good] - 1.0))
        report(srel <= 1e-15, f"{name}: sigma agrees to {srel:.2g}")
    if layout is not None:
        report(b["keys"].get("layout") == layout, f"{name}: layout {b['keys'].get('layout')} (want {layout})")
    return b


# ---- reference formulas --------------------------------------------------


def morton_n(lam_vac):
    """Refractive index of standard air, Morton 2000 eq. 8 (lambda in A)."""
    s2 = (1e4 / lam_vac) ** 2
    return 1.0 + 1e-8 * (8342.13 + 2406030.0 / (130.0 - s2) + 15997.0 / (38.9 - s2))


def air_to_vac(lam_air):
    lam_air = np.asarray(lam_air, float)
    return newton(lambda v: v / morton_n(v) - lam_air, lam_air * 1.0003, tol=1e-12, maxiter=50)


def wcs_angstrom(header, n):
    w = WCS(header)
    metres = w.pixel_to_world_values(np.arange(n, dtype=float))  # 0-based pixels
    return np.asarray(metres) * 1e10


# ---- data ----------------------------------------------------------------

rng = np.random.default_rng(20240601)
N = 1500
flux = (1.0e-16 * (1.0 + 0.2 * rng.standard_normal(N))).astype(np.float64)
flux32 = flux.astype(np.float32)
err = np.abs(1.0e-17 * (1.0 + 0.1 * rng.standard_normal(N)))
flux_nan = flux.copy()
flux_nan[[10, 11, 700]] = np.nan


def path(name):
    return os.path.join(WORK, name)


def image_hdu(data, **cards):
    h = fits.PrimaryHDU(data)
    for k, v in cards.items():
        h.header[k.replace("_", "-") if k == "DC_FLAG" else k] = v
    return h


# 1. linear image, float32 flux, NaNs
h = image_hdu(flux32, CTYPE1="WAVE", CUNIT1="Angstrom", CRVAL1=5600.0, CRPIX1=3.5, CDELT1=0.4321,
              SPECRES=3000.0)
h.writeto(path("lin.fits"), overwrite=True)
compare("linear image", path("lin.fits"), wcs_angstrom(h.header, N), flux32.astype(float),
        layout="image-linear")

# 2. WAVE-LOG image in nm, double flux
h = image_hdu(flux_nan, CTYPE1="WAVE-LOG", CUNIT1="nm", CRVAL1=580.0, CRPIX1=700.0, CDELT1=0.011)
h.writeto(path("wlog.fits"), overwrite=True)
compare("WAVE-LOG image (nm)", path("wlog.fits"), wcs_angstrom(h.header, N), flux_nan, layout="image-log")

# 3. log10 image (DC-FLAG = 1)
h = image_hdu(flux, CRVAL1=3.7480, CRPIX1=1.0, CDELT1=6.9e-5, DC_FLAG=1)
h.writeto(path("log10.fits"), overwrite=True)
p = np.arange(1, N + 1, dtype=float)
compare("log10 image (DC-FLAG)", path("log10.fits"), 10.0 ** (3.7480 + 6.9e-5 * (p - 1.0)), flux,
        layout="image-log10")

# 4. air image
h = image_hdu(flux, CTYPE1="AWAV", CUNIT1="Angstrom", CRVAL1=5700.0, CRPIX1=1.0, CDELT1=0.35)
h.writeto(path("air.fits"), overwrite=True)
air = wcs_angstrom(h.header, N)
b = compare("air image (AWAV)", path("air.fits"), air_to_vac(air), flux, layout="image-linear")
if b is not None:
    report(b["keys"].get("air", "").startswith("converted"), "air image: info reports the conversion")

# 5. image + ERR HDU (with a mask HDU too)
mask = np.zeros(N, dtype=np.int16)
mask[[5, 6, 900]] = 1
hl = fits.HDUList([
    image_hdu(flux, CTYPE1="WAVE", CUNIT1="Angstrom", CRVAL1=5650.0, CRPIX1=1.0, CDELT1=0.5),
    fits.ImageHDU(err, name="ERR"),
    fits.ImageHDU(mask, name="MASK"),
])
hl.writeto(path("err.fits"), overwrite=True)
compare("image + ERR + MASK HDUs", path("err.fits"), wcs_angstrom(hl[0].header, N), flux, sigma=err,
        mask=mask, layout="image-linear")

# 6. image (in an extension) + IVAR HDU, ivar 0 on a few pixels
ivar = 1.0 / err**2
ivar[[100, 101]] = 0.0
sig_from_ivar = np.where(ivar > 0, 1.0 / np.sqrt(np.where(ivar > 0, ivar, 1.0)), np.inf)
hl = fits.HDUList([fits.PrimaryHDU(), fits.ImageHDU(ivar, name="IVAR"), fits.ImageHDU(flux32, name="FLUX")])
for k, v in dict(CTYPE1="WAVE", CUNIT1="Angstrom", CRVAL1=5610.0, CRPIX1=1.0, CDELT1=0.45).items():
    hl[2].header[k] = v
hl.writeto(path("ivar.fits"), overwrite=True)
compare("image + IVAR HDU", path("ivar.fits"), wcs_angstrom(hl[2].header, N), flux32.astype(float),
        sigma=sig_from_ivar, layout="image-linear")
compare("image + IVAR HDU via [FLUX]", path("ivar.fits") + "[FLUX]", wcs_angstrom(hl[2].header, N),
        flux32.astype(float), sigma=sig_from_ivar)

# 7. table columns: wavelength in nm, float flux, IVAR, MASK
wave_nm = 560.0 + 0.0375 * np.arange(N) + 1e-4 * rng.random(N)
tmask = np.zeros(N, dtype=np.int32)
tmask[[3, 4]] = 1024
cols = fits.ColDefs([
    fits.Column(name="WAVE", format="D", unit="nm", array=wave_nm),
    fits.Column(name="FLUX", format="E", array=flux32),
    fits.Column(name="IVAR", format="D", array=ivar),
    fits.Column(name="MASK", format="J", array=tmask),
])
fits.HDUList([fits.PrimaryHDU(), fits.BinTableHDU.from_columns(cols, name="SPECTRUM")]).writeto(
    path("tcols.fits"), overwrite=True)
compare("table columns (nm, IVAR, MASK)", path("tcols.fits"), wave_nm * 10.0, flux32.astype(float),
        sigma=sig_from_ivar, mask=tmask, layout="table-columns")

# 8. table rows with array columns, LOGLAM; read with --row, and all rows
R = 5
loglam = np.array([3.7455 + 1e-4 * np.arange(N) + 3e-5 * r for r in range(R)])
rflux = np.array([flux * (1 + r) for r in range(R)])
rerr = np.array([err * (1 + 0.5 * r) for r in range(R)])
cols = fits.ColDefs([
    fits.Column(name="loglam", format=f"{N}D", array=loglam),
    fits.Column(name="flux", format=f"{N}D", array=rflux),
    fits.Column(name="sigma", format=f"{N}D", array=rerr),
])
fits.HDUList([fits.PrimaryHDU(), fits.BinTableHDU.from_columns(cols)]).writeto(path("trows.fits"),
                                                                              overwrite=True)
b = compare("table rows, --row 3", path("trows.fits"), 10.0 ** loglam[2], rflux[2], sigma=rerr[2],
            layout="table-rows", opts=("--row", "3"))
if b is not None:
    report(b["keys"].get("row", "").startswith("3 of 5"), f"table rows: row line '{b['keys'].get('row')}'")
blocks, _ = run_info(path("trows.fits"))
report(blocks is not None and len(blocks) == R, f"table rows: info without --row shows all {R} rows")
if blocks is not None and len(blocks) == R:
    same = all(np.array_equal(blocks[r]["rows"][:, 1], rflux[r]) for r in range(R))
    report(same, "table rows: every row's flux identical")
compare("table rows via [1], --row 5", path("trows.fits") + "[1]", 10.0 ** loglam[4], rflux[4], sigma=rerr[4],
        opts=("--row", "5"))

# 9. text, written by numpy
tw = 5800.0 + 0.25 * np.arange(N) + 1e-6 * rng.random(N)
np.savetxt(path("spec.txt"), np.column_stack([tw, flux_nan, err]), fmt="%.17g",
           header="wave flux err (vacuum Angstrom)")
compare("text (numpy savetxt)", path("spec.txt"), tw, flux_nan, sigma=err, layout="text")
np.savetxt(path("spec.csv"), np.column_stack([tw, flux]), fmt="%.17g", delimiter=",",
           header="wave,flux", comments="")
compare("CSV text with a header line, no sigma", path("spec.csv"), tw, flux, layout="text")

# 10. CTYPE1 WAVE without CUNIT1: FITS WCS Paper III makes that metres;
#     doubletty takes Angstrom unless CRVAL1 is a wavelength in metres
h = image_hdu(flux, CTYPE1="WAVE", CRVAL1=5.65e-7, CRPIX1=1.0, CDELT1=5e-11)
h.writeto(path("metres.fits"), overwrite=True)
compare("WAVE axis in metres, no CUNIT1", path("metres.fits"), wcs_angstrom(h.header, N), flux)

# 11. info's --pixels output is itself a text spectrum doubletty reads
out = subprocess.run([DT, "info", "--pixels", path("err.fits")], capture_output=True, text=True).stdout
with open(path("again.txt"), "w") as fh:
    fh.write(out)
blocks, err2 = run_info(path("again.txt"))
first, _ = run_info(path("err.fits"))
report(blocks is not None and first is not None and np.array_equal(blocks[0]["rows"], first[0]["rows"],
                                                                   equal_nan=True),
       "info --pixels output read back identically")

print(f"{sum(results)} passed, {len(results) - sum(results)} failed")
sys.exit(0 if all(results) else 1)
