#!/usr/bin/python3
"""Reference for doubletty's hyperfine structure: split lines computed
independently in Python, with SciPy's Faddeeva function (scipy.special.wofz)
and NumPy, from the published constants rather than from our table or our
C code.

  hyperfine_ref.py pixels DRIVER   the pixel model of split lines at
                                   b = 0.3-1 km/s (DRIVER --pixels) against
                                   the sum of the components' optical depths
                                   on a grid of 0.01 km/s, exp(-tau), a
                                   direct Gaussian convolution and the mean
                                   over each pixel
  hyperfine_ref.py cog DRIVER      the curve of growth of Na I D2 at
                                   b = 0.5 km/s, split and single
                                   (DRIVER --cog), against direct integration
                                   of 1 - exp(-tau)

  hyperfine_ref.py --into DIR DRIVER
                                   pixels and cog into DIR/MODE.out and
                                   DIR/MODE.rc, and the two spectra of the
                                   command-line tests (see into())
  hyperfine_ref.py spectrum OUT LOGN B R SNR SEED
                                   a text spectrum of split Na I D for the
                                   command-line tests

DRIVER is build/tests/test_hyperfine.  Prints what it checked; exits 1 on a
mismatch."""
import subprocess
import sys

import numpy as np
from scipy import constants
from scipy.special import wofz

C_KMS = 299792.458          # speed of light [km/s] (exact, SI definition)
C_CGS = 2.99792458e10       # [cm/s]
# pi e^2 / (m_e c) [cm^2 s^-1] from SciPy's CODATA classical electron radius
SIGMA0 = np.pi * constants.physical_constants["classical electron radius"][0] * constants.c * 1e4
# vacuum wavelength [A], f, Gamma [s^-1]: Morton (2003, ApJS 149, 205); K I from memory
LINES = {
    "NaI": [(5891.5833, 0.6408, 6.16e7), (5897.5581, 0.3201, 6.14e7)],
    "KI": [(7667.0089, 0.6700, 3.82e7), (7701.0835, 0.3327, 3.80e7)],
}
# ground-level magnetic dipole constant A [MHz] (Arimondo, Inguscio & Violino
# 1977, Rev. Mod. Phys. 49, 31; from memory): 23Na 3s, 39K 4s
A_MHZ = {"NaI": 885.8130644, "KI": 230.8598601}


def components(name, lam0):
    """Hyperfine components of a line of a 2S1/2, I = 3/2 ground level:
    F = 2 and F = 1, 2A apart; F = 2 lies higher, so its line is redder.
    Shares 5/8 and 3/8 from the statistical weights 2F+1 (common practice);
    centred on lam0: offsets +3/8 and -5/8 of the splitting [km/s]."""
    dv = 2.0 * A_MHZ[name] * 1e6 * lam0 * 1e-10 * 1e-3   # Delta nu * lambda
    return [(0.375 * dv, 0.625), (-0.625 * dv, 0.375)]


def tau_line(lam, line, share, dv, logN, b, v):
    """One component: tau = N sigma0 (share f) H(a, x) / (sqrt(pi) dnu_D),
    centre at lam0 (1 + dv/c), x in the component's rest frame."""
    lam0, f, gam = line
    lamc = lam0 * (1 + dv / C_KMS)
    dnu_d = b * 1e5 / (lamc * 1e-8)
    lam_rest = lam / (1 + v / C_KMS)
    x = (C_CGS / (lam_rest * 1e-8) - C_CGS / (lamc * 1e-8)) / dnu_d
    a = gam / (4 * np.pi * dnu_d)
    return 10.0 ** logN * SIGMA0 * share * f * wofz(x + 1j * a).real / (np.sqrt(np.pi) * dnu_d)


def tau_total(lam, name, comps, split=True):
    t = np.zeros_like(lam)
    for (logN, b, v) in comps:
        for line in LINES[name]:
            parts = components(name, line[0]) if split else [(0.0, 1.0)]
            for (dv, share) in parts:
                t += tau_line(lam, line, share, dv, logN, b, v)
    return t


def run_driver(driver, mode):
    out = subprocess.run([driver, "--" + mode], check=True, capture_output=True, text=True).stdout
    return out.splitlines()


def check_pixels(driver):
    cases, cur = [], None
    for ln in run_driver(driver, "pixels"):
        p = ln.split()
        if p[0] == "case":
            vals = [float(x) for x in p[5:]]
            cur = {"R": float(p[2]), "ovs": int(p[3]), "name": p[4], "comps": [tuple(vals[i:i + 3]) for i in range(0, len(vals), 3)],
                   "wave": [], "flux": []}
            cases.append(cur)
        elif p[0] == "pix":
            cur["wave"].append(float(p[1]))
            cur["flux"].append(float(p[2]))
    bad = 0
    for k, c in enumerate(cases):
        w = np.array(c["wave"])
        fl = np.array(c["flux"])
        # pixel edges half-way between centres; the end pixels symmetric
        mid = 0.5 * (w[1:] + w[:-1])
        edges = np.concatenate(([w[0] - (mid[0] - w[0])], mid, [w[-1] + (w[-1] - mid[-1])]))
        sig = C_KMS / c["R"] / (2 * np.sqrt(2 * np.log(2))) if c["R"] > 0 else 0.0
        pad = 6 * sig + 1.0
        step = 0.01  # km/s
        y0 = np.log(edges[0]) - pad / C_KMS
        y1 = np.log(edges[-1]) + pad / C_KMS
        ny = int(np.ceil((y1 - y0) * C_KMS / step)) + 1
        y = y0 + np.arange(ny) * step / C_KMS
        def observe(T):
            if sig > 0:
                hk = int(np.ceil(6 * sig / step))
                u = np.arange(-hk, hk + 1) * step
                g = np.exp(-0.5 * (u / sig) ** 2)
                g /= g.sum()
                # pad with the ends (the lines are far from both)
                Tp = np.concatenate((np.full(hk, T[0]), T, np.full(hk, T[-1])))
                T = np.convolve(Tp, g, mode="valid")
            # mean over each pixel: the cumulative trapezoid integral, interpolated
            cum = np.concatenate(([0.0], np.cumsum(0.5 * (T[1:] + T[:-1]) * np.diff(y))))
            ci = np.interp(np.log(edges), y, cum)
            return T, np.diff(ci) / np.diff(np.log(edges))
        T, ref = observe(np.exp(-tau_total(np.exp(y), c["name"], c["comps"])))
        _, single = observe(np.exp(-tau_total(np.exp(y), c["name"], c["comps"], split=False)))
        err = np.max(np.abs(ref - fl))
        # the check must tell split from single lines
        gap = np.max(np.abs(single - fl))
        depth = np.max(1 - ref)
        # The model's documented discretisation (model.h): lines narrower
        # than the cells within ~1e-3 of the depth; with an LSF the
        # convolved profile F is sampled at cell centres h apart and
        # averaged over pixels: h^2/24 max|F''| + h^2/4 max|F'| / pixel
        # (midpoint rule, Press et al., Numerical Recipes, sec. 4.1).
        pix = C_KMS * np.min(np.diff(np.log(edges)))
        h = pix / c["ovs"]
        out = 0.0
        if sig > 0:
            d1 = np.gradient(T, step)
            d2 = np.gradient(d1, step)
            out = h * h / 24 * np.max(np.abs(d2)) + h * h / 4 * np.max(np.abs(d1)) / pix
        tol = out + 1e-3 * depth + 1e-6
        ok = err <= tol and gap >= 5 * tol
        bad += not ok
        print("%s pixels case %d (%s, R %g, %s): max |C - ref| = %.2g of depth %.3f (tol %.1g);"
              " single lines would differ by %.2g" % ("ok  " if ok else "FAIL", k, c["name"], c["R"],
                                                     c["comps"], err, depth, tol, gap))
    return bad


def check_cog(driver):
    bad = 0
    lam0 = LINES["NaI"][0][0]
    # |v| <= 100 km/s around D2, the window of the C equivalent width
    lam = lam0 * (1 + np.linspace(-100, 100, 40001) / C_KMS)
    for ln in run_driver(driver, "cog"):
        _, logN, ws, w1 = ln.split()
        logN, ws, w1 = float(logN), float(ws), float(w1)
        comps = [(logN, 0.5, 0.0)]
        # D2 alone: D1 lies 304 km/s away, outside the window
        def width(split):
            t = np.zeros_like(lam)
            line = LINES["NaI"][0]
            for (dv, share) in (components("NaI", line[0]) if split else [(0.0, 1.0)]):
                t += tau_line(lam, line, share, dv, logN, 0.5, 0.0)
            d = 1 - np.exp(-t)
            return np.sum(0.5 * (d[1:] + d[:-1]) * np.diff(lam))
        rs, r1 = width(True), width(False)
        for what, got, ref in (("split", ws, rs), ("single", w1, r1)):
            ok = abs(got / ref - 1) <= 1e-3
            bad += not ok
            print("%s cog log N %.1f %s: W = %.5g mA, reference %.5g mA (%+.1e)"
                  % ("ok  " if ok else "FAIL", logN, what, 1e3 * got, 1e3 * ref, got / ref - 1))
        print("     log N %.1f: W split / W single = %.4f" % (logN, rs / r1))
    return bad


def write_spectrum(out, logN, b, R, snr, seed):
    """A test spectrum of Na I D split into its hyperfine components (one
    component at v = 0), seen at resolving power R on 0.02 A pixels from
    5850 to 5940 A with Gaussian noise of 1/snr: "wave flux sigma" lines.
    Pixel values: the mean of the LSF-convolved transmission over the pixel."""
    step = 0.02
    wave = np.arange(5850.0, 5940.0 + step / 2, step)
    sig = C_KMS / R / (2 * np.sqrt(2 * np.log(2)))
    dv = 0.01
    y = np.arange(np.log(wave[0]) - 8 * sig / C_KMS, np.log(wave[-1]) + 8 * sig / C_KMS, dv / C_KMS)
    # tau only within 80 km/s of the lines (beyond, log N <= 12 at b < 2
    # km/s leaves tau < 1e-7 even in the damping wings)
    lam = np.exp(y)
    near = np.zeros(lam.size, dtype=bool)
    for (lam0, _, _) in LINES["NaI"]:
        near |= np.abs(lam / lam0 - 1) * C_KMS < 80
    tau = np.zeros(lam.size)
    tau[near] = tau_total(lam[near], "NaI", [(logN, b, 0.0)])
    T = np.exp(-tau)
    hk = int(np.ceil(6 * sig / dv))
    g = np.exp(-0.5 * (np.arange(-hk, hk + 1) * dv / sig) ** 2)
    T = np.convolve(T, g / g.sum(), mode="same")
    # the mean over each pixel (edges half-way between centres)
    edges = np.concatenate(([wave[0] - step / 2], 0.5 * (wave[1:] + wave[:-1]), [wave[-1] + step / 2]))
    cum = np.concatenate(([0.0], np.cumsum(0.5 * (T[1:] + T[:-1]) * np.diff(y))))
    flux = np.diff(np.interp(np.log(edges), y, cum)) / np.diff(np.log(edges))
    rng = np.random.default_rng(seed)
    flux = flux + rng.normal(0, 1 / snr, wave.size)
    with open(out, "w") as f:
        f.write("# Na I D split into hyperfine components: log N %g, b %g km/s, R %g\n" % (logN, b, R))
        for w, fl in zip(wave, flux):
            f.write("%.4f %.6e %.6e\n" % (w, fl, 1 / snr))


def into(outdir, driver):
    """Everything the test script needs, in one interpreter (SciPy imported
    once): DIR/pixels.out and .rc, DIR/cog.out and .rc (0: agrees), and the
    spectra DIR/split7.txt and DIR/split8.txt (log N 11.5, b 0.6 km/s,
    R 100000, S/N 300, noise seeds 7 and 8)."""
    import contextlib
    import io
    for mode, fn in (("pixels", check_pixels), ("cog", check_cog)):
        buf = io.StringIO()
        try:
            with contextlib.redirect_stdout(buf):
                bad = fn(driver)
                print("%s: %s" % (mode, "agrees" if bad == 0 else "%d mismatches" % bad))
        except Exception as exc:  # reported, and counted as a mismatch
            buf.write("error: %r\n" % (exc,))
            bad = 1
        with open("%s/%s.out" % (outdir, mode), "w") as f:
            f.write(buf.getvalue())
        with open("%s/%s.rc" % (outdir, mode), "w") as f:
            f.write("%d\n" % (1 if bad else 0))
    for seed in (7, 8):
        write_spectrum("%s/split%d.txt" % (outdir, seed), 11.5, 0.6, 100000.0, 300.0, seed)


def main():
    if sys.argv[1] == "--into":
        into(sys.argv[2], sys.argv[3])
        return
    if sys.argv[1] == "spectrum":
        out, logN, b, R, snr, seed = sys.argv[2:8]
        write_spectrum(out, float(logN), float(b), float(R), float(snr), int(seed))
        return
    mode, driver = sys.argv[1], sys.argv[2]
    bad = check_pixels(driver) if mode == "pixels" else check_cog(driver)
    print("%s: %s" % (mode, "agrees" if bad == 0 else "%d mismatches" % bad))
    sys.exit(1 if bad else 0)


if __name__ == "__main__":
    main()
