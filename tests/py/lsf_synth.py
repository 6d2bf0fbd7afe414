#!/usr/bin/python3
"""Spectra of one Na I D component seen through a line-spread function of
varying width, synthesised in NumPy/SciPy independently of doubletty's
model: the optical depth from the Faddeeva function (scipy.special.wofz)
with Morton's (2003) atomic data, exp(-tau) on a grid of 0.2 km/s, and each
pixel the mean over its extent of the spectrum seen through the Gaussian of
that pixel's own FWHM = c / R(lambda_i) (the Gaussian integrated over the
pixel in closed form with scipy.special.erf).

    lsf_synth.py OUTDIR

writes into OUTDIR:
    var.txt      R linear in wavelength from R0 at 5850 A to R1 at 5940 A
    const.txt    a constant R, the R of var.txt at the D2 line's centre
    table.txt    the resolution table of var.txt (two points)
    var.fits     var.txt as a FITS binary table with a RESPOWER column
                 (astropy.io.fits)
    truth.txt    logN b v R_D2 of the component
Text spectra: wavelength [A, vacuum], flux, 1-sigma error (noise-free
flux; the error sets the weights)."""
import sys

import numpy as np
from astropy.io import fits
from scipy.special import erf

from nai_tau import C_KMS, NAI, tau

LOGN, B, V = 12.4, 6.0, 4.0       # the component (invented, for the test)
R0, R1, L0, L1 = 3000.0, 9000.0, 5850.0, 5940.0
ERR = 0.002


def observe(wave, fwhm):
    """Each pixel (edges half-way between centres, in y = c ln lambda): the
    mean over the pixel of exp(-tau) convolved with the Gaussian of its own
    FWHM [km/s]."""
    y = C_KMS * np.log(wave)
    e = np.empty(len(y) + 1)
    e[1:-1] = 0.5 * (y[1:] + y[:-1])
    e[0], e[-1] = y[0] - 0.5 * (y[1] - y[0]), y[-1] + 0.5 * (y[-1] - y[-2])
    s = fwhm / (2 * np.sqrt(2 * np.log(2)))
    dv = 0.2
    g = np.arange(e[0] - 8 * s.max(), e[-1] + 8 * s.max(), dv)
    dep = -np.expm1(-tau(np.exp(g / C_KMS), [(LOGN, B, V)]))
    phi = lambda x: 0.5 * (1 + erf(x / np.sqrt(2)))
    out = np.empty(len(y))
    for i in range(len(y)):
        k = (phi((e[i + 1] - g) / s[i]) - phi((e[i] - g) / s[i])) / (e[i + 1] - e[i])
        out[i] = 1 - np.trapz(dep * k, dx=dv) if hasattr(np, "trapz") else 1 - np.trapezoid(dep * k, dx=dv)
    return out


def main(outdir):
    wave = np.arange(L0, L1 + 1e-9, 0.25)
    R = R0 + (R1 - R0) * (wave - L0) / (L1 - L0)
    lc = NAI[0][0] * (1 + V / C_KMS)
    R_d2 = R0 + (R1 - R0) * (lc - L0) / (L1 - L0)
    var = observe(wave, C_KMS / R)
    const = observe(wave, np.full_like(wave, C_KMS / R_d2))
    for name, f in (("var.txt", var), ("const.txt", const)):
        np.savetxt(f"{outdir}/{name}", np.column_stack([wave, f, np.full_like(wave, ERR)]), fmt="%.10f")
    with open(f"{outdir}/table.txt", "w") as t:
        t.write(f"# wavelength [A]  R\n{L0:.1f} {R0:.1f}\n{L1:.1f} {R1:.1f}\n")
    cols = [fits.Column(name="WAVE", format="D", unit="Angstrom", array=wave),
            fits.Column(name="FLUX", format="D", array=var),
            fits.Column(name="ERR", format="D", array=np.full_like(wave, ERR)),
            fits.Column(name="RESPOWER", format="D", array=R)]
    fits.BinTableHDU.from_columns(cols).writeto(f"{outdir}/var.fits", overwrite=True)
    with open(f"{outdir}/truth.txt", "w") as t:
        t.write(f"{LOGN} {B} {V} {R_d2:.6f}\n")


if __name__ == "__main__":
    main(sys.argv[1])
