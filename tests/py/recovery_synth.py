#!/usr/bin/python3
"""A survey of Na I D spectra at R = 5000 with known components, synthesised
in NumPy/SciPy independently of doubletty's model, for the first pass's
recovery test (tests/scripts/recovery.sh).

Model: the optical depth of each component from the Faddeeva function
(scipy.special.wofz), Voigt profile with Morton's (2003, ApJS 149, 205)
atomic data; exp(-sum tau) on a grid of 0.5 km/s; each pixel the mean over
its extent of that spectrum convolved with a Gaussian of FWHM c / R (the
Gaussian integrated over the pixel in closed form with scipy.special.erf);
Gaussian noise of a known sigma (numpy's default generator, fixed seed).

    recovery_synth.py OUTDIR N SEED

writes OUTDIR/sNNNN.txt (wavelength [A, vacuum], flux, 1-sigma error),
OUTDIR/targets.list (one line per spectrum, vsys=0) and OUTDIR/truth.csv
(name,logN,b,v,snr per component).  The spectra (invented for the test):
one or two components, log N 12.0-13.0, b 4-25 km/s, v in -150..150 km/s
(two at least 150 km/s apart, beyond two FWHM), S/N 30-60 per 0.4 A pixel."""
import sys

import numpy as np
from scipy.special import erf

from nai_tau import C_KMS, tau

R = 5000.0
L0, L1, DL = 5850.0, 5940.0, 0.4


def observe(wave, comps):
    """Each pixel (edges half-way between centres, in y = c ln lambda): the
    mean over the pixel of exp(-tau) convolved with the Gaussian LSF."""
    y = C_KMS * np.log(wave)
    e = np.empty(len(y) + 1)
    e[1:-1] = 0.5 * (y[1:] + y[:-1])
    e[0], e[-1] = y[0] - 0.5 * (y[1] - y[0]), y[-1] + 0.5 * (y[-1] - y[-2])
    s = C_KMS / R / (2 * np.sqrt(2 * np.log(2)))
    dv = 0.5
    g = np.arange(e[0] - 8 * s, e[-1] + 8 * s, dv)
    dep = -np.expm1(-tau(np.exp(g / C_KMS), comps))
    # the cumulative integral of dep, then differences of erf kernels: the
    # pixel mean of dep * Gaussian, per pixel over the grid points near it
    out = np.empty(len(y))
    phi = lambda x: 0.5 * (1 + erf(x / np.sqrt(2)))
    for i in range(len(y)):
        m = (g > e[i] - 8 * s) & (g < e[i + 1] + 8 * s)
        k = (phi((e[i + 1] - g[m]) / s) - phi((e[i] - g[m]) / s)) / (e[i + 1] - e[i])
        out[i] = 1 - np.sum(dep[m] * k) * dv
    return out


def main(outdir, n, seed):
    rng = np.random.default_rng(seed)
    wave = np.arange(L0, L1 + 1e-9, DL)
    with open(f"{outdir}/targets.list", "w") as lst, open(f"{outdir}/truth.csv", "w") as tr:
        tr.write("name,logN,b,v,snr\n")
        for i in range(n):
            name = f"s{i:04d}"
            nc = 1 + (rng.random() < 0.5)
            while True:
                v = rng.uniform(-150, 150, nc)
                if nc == 1 or abs(v[1] - v[0]) >= 150:
                    break
            comps = [(rng.uniform(12.0, 13.0), rng.uniform(4, 25), v[k]) for k in range(nc)]
            snr = rng.uniform(30, 60)
            flux = observe(wave, comps) + rng.normal(0, 1 / snr, len(wave))
            np.savetxt(f"{outdir}/{name}.txt",
                       np.column_stack([wave, flux, np.full_like(wave, 1 / snr)]), fmt="%.8f")
            lst.write(f"{name}.txt vsys=0\n")
            for c in comps:
                tr.write(f"{name},{c[0]:.4f},{c[1]:.3f},{c[2]:.3f},{snr:.2f}\n")


if __name__ == "__main__":
    main(sys.argv[1], int(sys.argv[2]), int(sys.argv[3]))
