#!/usr/bin/python3
"""Cross-check of doubletty's doublet model with an independent evaluation in
Python: the Faddeeva function from SciPy (scipy.special.wofz), the rest in
NumPy, written from the textbook formulas rather than from our C code.

  model_scipy.py tau    DRIVER   optical depths (dt_line_tau) on a grid of
                                 thin, saturated and damped lines
  model_scipy.py pixels DRIVER   the pixel model against a re-implementation
                                 of the discretisation documented in model.h
                                 (cells sampled at their centres: cases whose
                                 lines are all resolved by the cells)
  model_scipy.py fine   DRIVER   the pixel model against a far finer direct
                                 numerical convolution and pixel integration
                                 (every case, also lines narrower than the
                                 cells, which the model sub-samples)

  model_scipy.py --into DIR DRIVER MODE...
                                 the modes in one interpreter: the output
                                 of each in DIR/MODE.out, 0 (agrees) or 1
                                 in DIR/MODE.rc

DRIVER is build/tests/test_model; it prints the values to compare.  Prints
what it checked and exits 1 on a mismatch."""
import subprocess
import sys

import numpy as np
from scipy import constants
from scipy.signal import fftconvolve
from scipy.special import wofz

C_KMS = 299792.458          # speed of light [km/s] (exact, SI definition)
C_CGS = 2.99792458e10       # [cm/s]
# pi e^2 / (m_e c) = pi r_e c [cm^2 s^-1], classical electron radius from
# SciPy's table of CODATA constants
SIGMA0 = np.pi * constants.physical_constants["classical electron radius"][0] * constants.c * 1e4
# Na I D2, D1: vacuum wavelength [A], f, Gamma [s^-1] (Morton 2003, ApJS 149, 205)
NAI = [(5891.5833, 0.6408, 6.16e7), (5897.5581, 0.3201, 6.14e7)]
trapezoid = getattr(np, "trapezoid", None) or np.trapz  # renamed in NumPy 2


def tau_line(lam, line, logN, b, v, vsys):
    """Optical depth of one line: tau = N sigma0 f H(a, x) / (sqrt(pi) dnu_D)
    with x = (nu_rest - nu0)/dnu_D and a = Gamma/(4 pi dnu_D), in cgs."""
    lam0, f, gam = line
    dnu_d = b * 1e5 / (lam0 * 1e-8)
    lam_rest = lam / ((1 + vsys / C_KMS) * (1 + v / C_KMS))
    x = (C_CGS / (lam_rest * 1e-8) - C_CGS / (lam0 * 1e-8)) / dnu_d
    a = gam / (4 * np.pi * dnu_d)
    return 10.0 ** logN * SIGMA0 * f * wofz(x + 1j * a).real / (np.sqrt(np.pi) * dnu_d)


def narrow_lines(c):
    """The lines model.h calls narrow on the case's grid: central optical
    depth scale t0 = N sigma0 f / (sqrt(pi) dnu_D) above tau_cut and a cell
    wider than h b, h = min(0.7, 0.9 / sqrt(ln t0)) (h = 0.7 for t0 <= 1)."""
    dy = c["grid"][1]
    out = []
    for (logN, b, v) in c["comps"]:
        for (lam0, f, gam) in NAI:
            t0 = 10.0 ** logN * SIGMA0 * f / (np.sqrt(np.pi) * b * 1e5 / (lam0 * 1e-8))
            h = min(0.7, 0.9 / np.sqrt(np.log(t0))) if t0 > 1 else 0.7
            if t0 > c["tau_cut"] and h * b < C_KMS * dy:
                out.append((logN, b, v, lam0))
    return out


def run(driver, mode):
    out = subprocess.run([driver, mode], check=True, capture_output=True, text=True).stdout
    return out.splitlines()


def check_tau(driver):
    rows = np.array([[float(t) for t in l.split()] for l in run(driver, "--tau") if not l.startswith("#")])
    logN, b, v, vsys, line, lam, tau_c = rows.T
    tau_p = np.array([tau_line(lam[i], NAI[int(line[i])], logN[i], b[i], v[i], vsys[i])
                      for i in range(len(rows))])
    rel = np.abs(tau_c - tau_p) / tau_p
    e_c, e_p = np.exp(-tau_c), np.exp(-tau_p)
    both0 = (e_c == 0) & (e_p == 0)
    rel_e = np.where(both0, 0.0, np.abs(e_c - e_p) / np.where(e_p > 0, e_p, 1e-300))
    print(f"tau: {len(rows)} values, log N {logN.min():g}..{logN.max():g}, b {b.min():g}..{b.max():g} km/s,"
          f" tau {tau_p.min():.2g}..{tau_p.max():.2g}")
    print(f"tau: max relative difference {rel.max():.2e}; exp(-tau): {rel_e.max():.2e}")
    ok = rel.max() < 1e-6 and rel_e.max() < 1e-6 and np.all(tau_p > 0)
    if not ok:
        i = int(np.argmax(rel))
        print(f"worst: logN {logN[i]} b {b[i]} lam {lam[i]} C {tau_c[i]} SciPy {tau_p[i]}")
    return ok


def read_cases(driver):
    lines = run(driver, "--pixels")
    i, cases = 0, []
    while i < len(lines):
        t = lines[i].split()
        kv = dict(zip(t[2:24:2], t[3:25:2]))
        npix, ncomp = int(kv["npix"]), int(kv["ncomp"])
        comps = [tuple(float(x) for x in t[24 + 3 * k:27 + 3 * k]) for k in range(ncomp)]
        data = np.array([[float(x) for x in l.split()] for l in lines[i + 1:i + 1 + npix]])
        cases.append(dict(case=int(t[1]), R=float(kv["R"]), fwhm=float(kv["fwhm"]), vsys=float(kv["vsys"]),
                          ovs=int(kv["ovs"]), tau_cut=float(kv["tau_cut"]), comps=comps,
                          grid=(float(kv["lnlam0"]), float(kv["dy"]), int(kv["nfine"]), int(kv["hw"])),
                          wave=data[:, 0], flux=data[:, 1]))
        i += 1 + npix
    return cases


def lsf_sigma_kms(c):
    fwhm = C_KMS / c["R"] if c["R"] > 0 else c["fwhm"]
    return fwhm / (2 * np.sqrt(2 * np.log(2))) if fwhm > 0 else 0.0


def total_tau(lam, c):
    t = np.zeros_like(lam)
    for (logN, b, v) in c["comps"]:
        for line in NAI:
            t += tau_line(lam, line, logN, b, v, c["vsys"])
    return t


def pixel_edges(w):
    el = np.empty_like(w)
    el[0] = w[0] - 0.5 * (w[1] - w[0])
    el[1:] = 0.5 * (w[:-1] + w[1:])
    eh = np.empty_like(w)
    eh[:-1] = el[1:]
    eh[-1] = w[-1] + 0.5 * (w[-1] - w[-2])
    return el, eh


def documented_grid(c):
    """The sub-pixel grid as model.h describes it: (y0, dy, nf, hw) in ln(lambda)."""
    el, eh = pixel_edges(c["wave"])
    lo, hi = np.log(el), np.log(eh)
    dy = np.min(hi - lo) / c["ovs"]
    sig = lsf_sigma_kms(c) / (C_KMS * dy)
    hw = int(np.ceil(4.5 * sig)) if sig > 0 else 0
    nf = int(np.ceil((hi[-1] - lo[0]) / dy)) + 2 * hw + 1
    return lo[0] - hw * dy, dy, nf, hw


def documented_model(c):
    """The discretisation as model.h describes it, with untruncated tau, on
    the grid the C code reports (which check_pixels compares with
    documented_grid separately: the step is a difference of logarithms, good
    to ~1e-10 relative, and a shift of the grid that small would move a
    narrow saturated line's pixels by ~1e-9)."""
    w = c["wave"]
    el, eh = pixel_edges(w)
    lo, hi = np.log(el), np.log(eh)
    y0, dy, nf, hw = c["grid"]
    sig = lsf_sigma_kms(c) / (C_KMS * dy)
    lam = np.exp(y0 + (np.arange(nf) + 0.5) * dy)
    e = np.exp(-total_tau(lam, c))
    if hw:
        k = np.arange(-hw, hw + 1)
        g = np.exp(-0.5 * (k / sig) ** 2)
        e = np.convolve(e, g / g.sum(), mode="same")
    out = np.empty(len(w))
    for i in range(len(w)):
        j = np.arange(int(np.floor((lo[i] - y0) / dy)), int(np.ceil((hi[i] - y0) / dy)))
        ov = np.minimum(hi[i], y0 + (j + 1) * dy) - np.maximum(lo[i], y0 + j * dy)
        ov = np.where(ov > 0, ov, 0.0)
        out[i] = np.sum(ov * e[j]) / np.sum(ov)
    return out


def check_pixels(driver):
    ok = True
    ncmp = nskip = 0
    for c in read_cases(driver):
        y0, dy, nf, hw = documented_grid(c)
        gy0, gdy, gnf, ghw = c["grid"]
        good = abs(gy0 - y0) < 1e-12 and abs(gdy / dy - 1) < 1e-9 and gnf == nf and ghw == hw
        ok &= good
        print(f"grid case {c['case']}: {nf} cells of {C_KMS * dy:.4f} km/s from ln(lambda) {y0:.12f},"
              f" kernel half-width {hw}: C reports {gnf} cells of {C_KMS * gdy:.4f} km/s from {gy0:.12f},"
              f" half-width {ghw} {'ok' if good else 'FAIL'}")
        nar = narrow_lines(c)
        if nar:
            print(f"pixels case {c['case']}: {len(nar)} lines narrower than the cells"
                  f" (b {min(b for (_, b, _, _) in nar):g} km/s on cells of {C_KMS * gdy:.2f} km/s),"
                  " sub-sampled: compared with the direct evaluation ('fine') only")
            nskip += 1
            continue
        ncmp += 1
        ref = documented_model(c)
        d = np.max(np.abs(c["flux"] - ref))
        # every line of every component may change exp(-tau) by 1.1 tau_cut
        # (truncation + interpolation, model.h).  Rounding: x = (c/b)(lc/lambda - 1)
        # carries an absolute error of a few (c/b) 1e-16 in either program, and
        # |d exp(-tau)/dx| = tau exp(-tau) |H'/H| <= 2|x|/e stays below ~20 where
        # tau matters, so exp(-tau) may differ by up to ~1e-14 c/b.
        bmin = min(b for (_, b, _) in c["comps"])
        tol = 1.1 * c["tau_cut"] * 2 * len(c["comps"]) + 1e-14 * C_KMS / bmin
        good = d <= tol
        ok &= good
        print(f"pixels case {c['case']}: R {c['R']:g} fwhm {c['fwhm']:g} oversample {c['ovs']}"
              f" tau_cut {c['tau_cut']:g}, {len(c['comps'])} components, depth"
              f" {1 - c['flux'].min():.3f}: max |C - Python| = {d:.2e} (tolerance {tol:.1e})"
              f" {'ok' if good else 'FAIL'}")
    print(f"pixels: {ncmp} cases against the documented grid, {ncmp + nskip} grids"
          f" ({nskip} cases with lines narrower than the cells left to 'fine')")
    return ok


def fine_model(c, sub=40, nsig=8.0):
    """Direct numerical evaluation, independent of the documented grid: exact
    tau on a grid uniform in velocity 'sub' times finer than the narrowest
    pixel and at least 10 points per Doppler width of the narrowest
    component, convolution with the LSF Gaussian out to nsig sigma
    (normalised by its integral, trapezoid rule; by FFT), then each pixel's
    mean over its exact extent in wavelength (trapezoid rule with the edges
    interpolated).  Also returns what the error bound of the documented grid
    needs."""
    w = c["wave"]
    el, eh = pixel_edges(w)
    sig = lsf_sigma_kms(c)
    bmin = min(b for (_, b, _) in c["comps"])
    dv = min(C_KMS * np.min(np.log(eh / el)) / sub, 0.1 * bmin)
    pad = nsig * sig + 2 * dv
    v = np.arange(C_KMS * np.log(el[0]) - pad, C_KMS * np.log(eh[-1]) + pad, dv)
    lam = np.exp(v / C_KMS)
    e = np.exp(-total_tau(lam, c))
    e1, e2 = np.gradient(e, dv), np.gradient(np.gradient(e, dv), dv)
    if sig > 0:
        k = np.arange(-int(np.ceil(nsig * sig / dv)), int(np.ceil(nsig * sig / dv)) + 1) * dv
        g = np.exp(-0.5 * (k / sig) ** 2)
        g /= trapezoid(g, dx=dv)
        g1, g2 = -k / sig ** 2 * g, (k ** 2 / sig ** 4 - 1 / sig ** 2) * g
        conv = lambda a, b: fftconvolve(a, b, mode="same") * dv
        f = conv(e, g)
        # midpoint rule for the convolution integral over cells of width h:
        # error <= h^2/24 * integral |(G E)''| <= h^2/24 * (|G|*|E''| + 2|G'|*|E'| + |G''|*E)
        d2conv = conv(np.abs(e2), g) + 2 * conv(np.abs(e1), np.abs(g1)) + conv(e, np.abs(g2))
    else:
        f, d2conv = e, np.zeros_like(e)
    out = np.empty(len(w))
    for i in range(len(w)):
        m = (lam > el[i]) & (lam < eh[i])
        x = np.concatenate(([el[i]], lam[m], [eh[i]]))
        y = np.concatenate(([np.interp(el[i], lam, f)], f[m], [np.interp(eh[i], lam, f)]))
        out[i] = trapezoid(y, x) / (eh[i] - el[i])
    inside = (v > C_KMS * np.log(el[0])) & (v < C_KMS * np.log(eh[-1]))
    f1, f2 = np.gradient(f, dv), np.gradient(np.gradient(f, dv), dv)
    return out, dict(dv=dv, d2conv=d2conv[inside].max(), f1=np.abs(f1[inside]).max(),
                     f2=np.abs(f2[inside]).max())


def check_fine(driver):
    ok = True
    worst = 0.0
    cases = read_cases(driver)
    for c in cases:
        ref, q = fine_model(c)
        d = np.max(np.abs(c["flux"] - ref))
        # Error bound of the documented discretisation with cells of width h
        # (numerical analysis of the midpoint rule, e.g. Press et al.,
        # Numerical Recipes, sec. 4.1), evaluated on the reference profile:
        #  - the convolution sum at cell centres: h^2/24 max integral |(G E)''|;
        #  - the pixel mean of cell values: h^2/24 max|F''| for whole cells;
        #    a cell cut by a pixel edge with overlap o is used (h - o)/2 off
        #    the centre of that overlap, adding o (h - o)/2 |F'| <= h^2/8 |F'|
        #    at each end: h^2/4 max|F'| / (narrowest pixel);
        #  - the kernel cut at 4.5 sigma and renormalised: < 2 x 6.8e-6 x depth;
        #  - truncation and interpolation of tau: 1.1 tau_cut per line (model.h).
        el, eh = pixel_edges(c["wave"])
        pix = C_KMS * np.min(np.log(eh / el))
        h = pix / c["ovs"]
        depth = 1 - ref.min()
        if not narrow_lines(c):
            tol = (h * h / 24 * (q["d2conv"] + q["f2"]) + h * h / 4 * q["f1"] / pix + 1.4e-5 * depth
                   + 1.1 * c["tau_cut"] * 2 * len(c["comps"]))
        else:
            # Lines narrower than the cells: the convolution integral is
            # taken over sub-cells (model.h: the equivalent width within
            # ~3e-4, each sub-sampled cell's mean within ~1e-4 of the depth
            # in the wings), allowed for here as 1e-3 of the depth; the
            # convolved profile is still sampled at the cell centres and
            # averaged over the pixels (the F'' and F' terms above; none
            # without an LSF, where the pixel mean of exact cell means is
            # exact).
            out = h * h / 24 * q["f2"] + h * h / 4 * q["f1"] / pix if lsf_sigma_kms(c) > 0 else 0.0
            tol = out + 1e-3 * depth + 1.4e-5 * depth + 1.1 * c["tau_cut"] * 2 * len(c["comps"])
        good = d <= tol
        ok &= good
        print(f"fine case {c['case']}: cell {h:.2f} km/s, reference step {q['dv']:.3f} km/s,"
              f" depth {depth:.3f}{', narrow lines' if narrow_lines(c) else ''}: max |C - direct| = {d:.2e}"
              f" (bound {tol:.1e}) {'ok' if good else 'FAIL'}")
        worst = max(worst, d / tol)
    print(f"fine: {len(cases)} cases ({sum(1 for c in cases if narrow_lines(c))} with lines narrower than"
          f" the cells), largest error {worst:.2f} of its bound")
    return ok


CHECKS = {"tau": check_tau, "pixels": check_pixels, "fine": check_fine}


def run_into(outdir, driver, modes):
    """Several checks in one interpreter (SciPy is imported once): each
    mode's output goes to OUTDIR/MODE.out and its result, 0 or 1, to
    OUTDIR/MODE.rc (1 also when the check raised)."""
    import contextlib
    import traceback
    for mode in modes:
        with open(f"{outdir}/{mode}.out", "w") as out, contextlib.redirect_stdout(out):
            try:
                good = CHECKS[mode](driver)
            except Exception:
                traceback.print_exc(file=out)
                good = False
        with open(f"{outdir}/{mode}.rc", "w") as rc:
            rc.write("0\n" if good else "1\n")


if __name__ == "__main__":
    if sys.argv[1] == "--into":
        run_into(sys.argv[2], sys.argv[3], sys.argv[4:])
        sys.exit(0)
    mode, driver = sys.argv[1], sys.argv[2]
    good = CHECKS[mode](driver)
    sys.exit(0 if good else 1)
