#!/usr/bin/python3
"""The model with a line-spread width per pixel against a direct numerical
convolution with the varying Gaussian, in NumPy (SciPy for erf and the
Faddeeva function), written from the definition rather than from our C
code:

    flux_i = 1 - integral (1 - exp(-tau(y'))) K_i(y') dy',
    K_i(y') = [Phi((hi_i - y')/s_i) - Phi((lo_i - y')/s_i)] / (hi_i - lo_i),

the mean over pixel i (y = c ln lambda, edges half-way between centres) of
the spectrum seen through the Gaussian of pixel i's own sigma s_i
(include/doubletty/model.h, "Resolution per pixel").  K_i is the
Gaussian integrated over the pixel in closed form (Phi the normal
distribution function); the integral over y' is the trapezoid rule on a
grid far finer than the model's cells.

    lsf_numpy.py DRIVER     DRIVER = build/tests/test_model_lsf (--varying)

The bound allowed is model_scipy.py's for the documented discretisation,
evaluated at the narrowest width of the case (the profile is steepest
there), plus the model's stated allowances for lines narrower than the
cells (1e-3 of the depth) and for interpolated cells (3e-5 of the depth,
model.h).  Prints what it checked; exits 1 on a mismatch."""
import subprocess
import sys

import numpy as np
from scipy.special import erf

sys.path.insert(0, __import__("os").path.dirname(__file__))
from model_scipy import C_KMS, fine_model, narrow_lines, pixel_edges, total_tau, trapezoid  # noqa: E402


def read_cases(driver):
    lines = subprocess.run([driver, "--varying"], check=True, capture_output=True,
                           text=True).stdout.splitlines()
    i, cases = 0, []
    while i < len(lines):
        t = lines[i].split()
        kv = dict(zip(t[2:14:2], t[3:15:2]))
        n, nc = int(kv["npix"]), int(kv["ncomp"])
        comps = [tuple(float(x) for x in t[14 + 3 * k:17 + 3 * k]) for k in range(nc)]
        d = np.array([[float(x) for x in l.split()] for l in lines[i + 1:i + 1 + n]])
        cases.append(dict(case=int(t[1]), ovs=int(kv["ovs"]), tau_cut=float(kv["tau_cut"]),
                          dy=float(kv["dy"]), interp=int(kv["interp"]), comps=comps, vsys=0.0,
                          wave=d[:, 0], fwhm=d[:, 1], flux=d[:, 2]))
        i += 1 + n
    return cases


def direct(c):
    """flux_i from the definition above, with s_i = FWHM_i / (2 sqrt(2 ln 2))."""
    el, eh = pixel_edges(c["wave"])
    ylo, yhi = C_KMS * np.log(el), C_KMS * np.log(eh)
    s = c["fwhm"] / (2 * np.sqrt(2 * np.log(2)))
    bmin = min(b for (_, b, _) in c["comps"])
    dv = min(np.min(yhi - ylo) / 40, 0.05 * bmin)
    y = np.arange(ylo[0] - 8 * s.max(), yhi[-1] + 8 * s.max(), dv)
    dep = -np.expm1(-total_tau(np.exp(y / C_KMS), c))
    out = np.empty(len(el))
    phi = lambda x: 0.5 * (1 + erf(x / np.sqrt(2)))
    for i in range(len(el)):
        a = np.searchsorted(y, ylo[i] - 8 * s[i])
        b = np.searchsorted(y, yhi[i] + 8 * s[i])
        yy = y[a:b]
        k = (phi((yhi[i] - yy) / s[i]) - phi((ylo[i] - yy) / s[i])) / (yhi[i] - ylo[i])
        out[i] = 1 - trapezoid(dep[a:b] * k, dx=dv)
    return out


def main(driver):
    ok, worst = True, 0.0
    cases = read_cases(driver)
    for c in cases:
        ref = direct(c)
        d = np.max(np.abs(c["flux"] - ref))
        # the bound of the constant model at the narrowest width
        cc = dict(c, R=0.0, fwhm=c["fwhm"].min(), grid=(0.0, c["dy"], 0, 0))
        _, q = fine_model(cc)
        el, eh = pixel_edges(c["wave"])
        pix = C_KMS * np.min(np.log(eh / el))
        h = C_KMS * c["dy"]
        depth = 1 - ref.min()
        nar = bool(narrow_lines(cc))
        if nar:
            tol = h * h / 24 * q["f2"] + h * h / 4 * q["f1"] / pix + 1e-3 * depth
        else:
            tol = h * h / 24 * (q["d2conv"] + q["f2"]) + h * h / 4 * q["f1"] / pix
        tol += 1.4e-5 * depth + 1.1 * c["tau_cut"] * 2 * len(c["comps"])
        if c["interp"]:
            tol += 3e-5 * depth
        good = d <= tol
        ok &= good
        worst = max(worst, d / tol)
        r = C_KMS / c["fwhm"]
        print(f"case {c['case']}: R {r[0]:.0f} -> {r[-1]:.0f} across {c['wave'][0]:.1f}-{c['wave'][-1]:.1f} A,"
              f" cell {h:.2f} km/s{', narrow lines' if nar else ''}{', interpolated cells' if c['interp'] else ''},"
              f" depth {depth:.3f}: max |C - direct| = {d:.2e} (bound {tol:.1e}) {'ok' if good else 'FAIL'}")
    print(f"{len(cases)} cases with R varying across the window, largest error {worst:.2f} of its bound")
    return ok


if __name__ == "__main__":
    sys.exit(0 if main(sys.argv[1]) else 1)
