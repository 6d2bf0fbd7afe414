#!/usr/bin/python3
"""Cross-check of doubletty's joint fits across doublets with a joint fit
written here in Python from the textbook physics, not from our C code:

  - optical depth of each line, tau = N sigma0 f H(a, x) / (sqrt(pi) dnu_D),
    H(a, x) = Re w(x + i a) with SciPy's Faddeeva function
    (scipy.special.wofz), sigma0 = pi e^2 / (m_e c) from SciPy's CODATA
    table (classical electron radius);
  - exp(-tau) on a fine grid uniform in ln(lambda), convolved with a
    Gaussian LSF of FWHM c/R (numpy.convolve) and averaged over each pixel
    (pixel edges half-way between centres);
  - one velocity per component for all species; b by the rule (same,
    thermal: b^2 = b_turb^2 + 2 k T / m with k and m_u from SciPy's CODATA
    table and the standard atomic weights of the periodictable package,
    free); log N per species;
  - scipy.optimize.least_squares, errors from (J^T J)^-1 at the solution.

  joint_scipy.py DRIVER DIR    make synthetic two-species data sets in DIR,
                               fit each with DRIVER (build/tests/test_joint
                               --peer FILE) and here, and compare: every
                               parameter within 0.1 of its 1-sigma error,
                               the errors within 10% of each other.
  joint_scipy.py --masses DRIVER
                               DRIVER --masses prints "SYMBOL MASS" lines:
                               compare with periodictable (within 0.1%).

Atomic data: share/doubletty/atomic.dat (its lines name their sources).
Prints what it checked; exits 1 on a mismatch."""
import os
import subprocess
import sys

import numpy as np
from scipy import constants
from scipy.optimize import least_squares
from scipy.special import wofz

C_KMS = constants.c / 1e3
C_CGS = constants.c * 1e2
SIGMA0 = np.pi * constants.physical_constants["classical electron radius"][0] * constants.c * 1e4
K_B = constants.k
M_U = constants.physical_constants["atomic mass constant"][0]
ROOT = os.path.join(os.path.dirname(os.path.abspath(__file__)), "..", "..")


def atomic_table():
    tab = {}
    with open(os.path.join(ROOT, "share", "doubletty", "atomic.dat")) as f:
        for line in f:
            line = line.split("#")[0].split()
            if len(line) < 7:
                continue
            tab[line[0]] = [(float(line[1]), float(line[2]), float(line[3])),
                            (float(line[4]), float(line[5]), float(line[6]))]
    return tab


def element_mass(name):
    import periodictable
    sym = name[0] + (name[1] if len(name) > 1 and name[1].islower() else "")
    return periodictable.elements.symbol(sym).mass


def tau_line(lam, line, logN, b, v):
    lam0, f, gam = line
    dnu_d = b * 1e5 / (lam0 * 1e-8)
    lam_rest = lam / (1 + v / C_KMS)
    x = (C_CGS / (lam_rest * 1e-8) - C_CGS / (lam0 * 1e-8)) / dnu_d
    a = gam / (4 * np.pi * dnu_d)
    return 10.0 ** logN * SIGMA0 * f * wofz(x + 1j * a).real / (np.sqrt(np.pi) * dnu_d)


class Grid:
    """Pixels of one species and the fine grid under them."""

    def __init__(self, wave, R, sub=8):
        self.wave = wave
        ln = np.log(wave)
        edges = np.empty(len(wave) + 1)
        edges[1:-1] = 0.5 * (ln[1:] + ln[:-1])
        edges[0] = ln[0] - (edges[1] - ln[0])
        edges[-1] = ln[-1] + (ln[-1] - edges[-2])
        self.edges = edges
        sig = 1.0 / R / (2 * np.sqrt(2 * np.log(2)))       # LSF sigma in ln(lambda)
        step = np.min(np.diff(edges)) / sub
        hw = int(np.ceil(6 * sig / step))
        self.x = np.arange(edges[0] - (hw + 1) * step, edges[-1] + (hw + 1) * step, step)
        k = np.arange(-hw, hw + 1) * step
        self.kern = np.exp(-0.5 * (k / sig) ** 2)
        self.kern /= self.kern.sum()
        self.step = step
        self.lam = np.exp(self.x)

    def flux(self, lines, comps):
        tau = np.zeros_like(self.x)
        for (logN, b, v) in comps:
            for line in lines:
                tau += tau_line(self.lam, line, logN, b, v)
        conv = np.convolve(np.exp(-tau), self.kern, mode="same")
        # pixel means: the integral of the (piecewise constant) cells over
        # each pixel's extent
        cum = np.concatenate([[0.0], np.cumsum(conv) * self.step])
        xe = np.concatenate([self.x - 0.5 * self.step, [self.x[-1] + 0.5 * self.step]])
        ci = np.interp(self.edges, xe, cum)
        return np.diff(ci) / np.diff(self.edges)


def b_of(rule, p, k, s, masses):
    if rule == "same":
        return p["b"][k]
    if rule == "free":
        return p["bs"][s][k]
    b2 = p["q"][k] + 2 * K_B * p["T"][k] / (masses[s] * M_U) * 1e-6
    return np.sqrt(max(b2, 1e-4))


def pack(rule, p, ns, nc):
    x = list(p["v"])
    if rule == "same":
        x += list(p["b"])
    elif rule == "free":
        x += [p["bs"][s][k] for s in range(ns) for k in range(nc)]
    else:
        x += list(p["T"]) + list(p["q"])
    x += [p["logN"][s][k] for s in range(ns) for k in range(nc)]
    return np.array(x, float)


def unpack(rule, x, ns, nc):
    p = {"v": x[:nc]}
    i = nc
    if rule == "same":
        p["b"] = x[i:i + nc]
        i += nc
    elif rule == "free":
        p["bs"] = [x[i + s * nc:i + (s + 1) * nc] for s in range(ns)]
        i += ns * nc
    else:
        p["T"] = x[i:i + nc]
        p["q"] = x[i + nc:i + 2 * nc]
        i += 2 * nc
    p["logN"] = [x[i + s * nc:i + (s + 1) * nc] for s in range(ns)]
    return p


def model_all(rule, p, grids, lines, masses, nc):
    out = []
    for s, g in enumerate(grids):
        comps = [(p["logN"][s][k], b_of(rule, p, k, s, masses), p["v"][k]) for k in range(nc)]
        out.append(g.flux(lines[s], comps))
    return out


def make_case(name, rule, species, truth, R, snr, seed, start, path, step):
    tab = atomic_table()
    rng = np.random.default_rng(seed)
    lines = [tab[s] for s in species]
    masses = [element_mass(s) for s in species]
    grids, data = [], []
    nc = len(truth["v"])
    for s, sp in enumerate(species):
        lo = lines[s][0][0] * (1 - 220 / C_KMS)
        hi = lines[s][1][0] * (1 + 220 / C_KMS)
        n = int(np.log(hi / lo) / (step / C_KMS))
        wave = lo * np.exp(np.arange(n) * step / C_KMS)
        grids.append(Grid(wave, R))
    ftrue = model_all(rule, truth, grids, lines, masses, nc)
    for s in range(len(species)):
        sig = np.full(len(grids[s].wave), 1.0 / snr)
        data.append((ftrue[s] + rng.normal(0, 1.0 / snr, len(sig)), sig))
    with open(path, "w") as f:
        f.write(f"# {name}\nbtie {rule}\nresolution {R}\nvrange -200 200\n")
        for k in range(nc):
            f.write(f"comp {start['v'][k]} {start['b'][k]}\n")
        for s, sp in enumerate(species):
            f.write(f"species {sp} {len(grids[s].wave)}")
            for k in range(nc):
                f.write(f" {start['logN'][s][k]}")
            f.write("\n")
            for w, y, e in zip(grids[s].wave, data[s][0], data[s][1]):
                f.write(f"{w:.10f} {y:.10g} {e:.10g}\n")
    return grids, data, lines, masses


def fit_here(rule, species, grids, data, lines, masses, start):
    ns, nc = len(species), len(start["v"])
    p0 = {"v": start["v"], "b": start["b"], "logN": start["logN"],
          "bs": [start["b"] for _ in range(ns)],
          "T": [0.5 * b * b * np.mean(masses) * M_U / (2 * K_B) * 1e6 for b in start["b"]],
          "q": [0.5 * b * b for b in start["b"]]}
    x0 = pack(rule, p0, ns, nc)

    def resid(x):
        p = unpack(rule, x, ns, nc)
        m = model_all(rule, p, grids, lines, masses, nc)
        return np.concatenate([(data[s][0] - m[s]) / data[s][1] for s in range(ns)])

    r = least_squares(resid, x0, method="lm", x_scale="jac", xtol=1e-12, ftol=1e-12)
    cov = np.linalg.inv(r.jac.T @ r.jac)
    p = unpack(rule, r.x, ns, nc)
    e = unpack(rule, np.sqrt(np.diag(cov)), ns, nc)
    return p, e, float(np.sum(r.fun ** 2)), cov, r.x


def compare(driver, path, rule, species, p, e, chi2, ok):
    out = subprocess.run([driver, "--peer", path], capture_output=True, text=True)
    vals = {}
    for line in out.stdout.splitlines():
        t = line.split()
        vals[t[0]] = [float(z) for z in t[1:]]
    if out.returncode != 0 or "v0" not in vals:
        print(f"FAIL {path}: driver exit {out.returncode}: {out.stdout} {out.stderr}")
        return False
    nc = len(p["v"])
    worst = 0.0
    pairs = []
    for k in range(nc):
        pairs.append((f"v{k}", p["v"][k], e["v"][k]))
        if rule == "thermal":
            pairs.append((f"T{k}", p["T"][k], e["T"][k]))
            pairs.append((f"q{k}", p["q"][k], e["q"][k]))
        for s, sp in enumerate(species):
            pairs.append((f"logN_{sp}_{k}", p["logN"][s][k], e["logN"][s][k]))
            if rule == "same":
                pairs.append((f"b_{sp}_{k}", p["b"][k], e["b"][k]))
            elif rule == "free":
                pairs.append((f"b_{sp}_{k}", p["bs"][s][k], e["bs"][s][k]))
    for key, val, err in pairs:
        c, ce = vals[key]
        d = abs(c - val) / err
        worst = max(worst, d)
        rel = abs(ce - err) / err
        if d > 0.1 or rel > 0.1:
            print(f"FAIL {os.path.basename(path)} {key}: C {c:.6g} +- {ce:.3g}, SciPy {val:.6g} +- {err:.3g}"
                  f" ({d:.3f} sigma apart, errors {100 * rel:.1f}% apart)")
            ok = False
    dchi = abs(vals["chi2"][0] - chi2)
    print(f"{os.path.basename(path)}: {len(pairs)} parameters, largest difference {worst:.3f} sigma,"
          f" chi2 C {vals['chi2'][0]:.2f} SciPy {chi2:.2f}")
    if dchi > 1.0:
        print(f"FAIL chi2 differs by {dchi:.3f}")
        ok = False
    return ok


def cases():
    # (name, rule, species, truth, R, snr, seed, start, pixel step [km/s])
    yield ("same", "same", ["NaI", "CaII"],
           {"v": [-15.0, 20.0], "b": [4.0, 6.0], "logN": [[11.5, 11.2], [11.9, 11.6]]},
           40000, 60, 11, {"v": [-10.0, 16.0], "b": [5.0, 5.0], "logN": [[11.3, 11.3], [11.6, 11.6]]},
           2.0)
    # Na and K (23 and 39 u) at high resolution: T to about 15%
    yield ("thermal", "thermal", ["NaI", "KI"],
           {"v": [5.0], "T": [8000.0], "q": [1.0], "logN": [[11.3], [11.2]]},
           100000, 150, 12, {"v": [3.0], "b": [2.5], "logN": [[11.0], [11.0]]}, 1.0)
    yield ("free", "free", ["NaI", "CaII"],
           {"v": [0.0], "bs": [[3.0], [6.0]], "logN": [[11.5], [12.0]]},
           40000, 60, 13, {"v": [4.0], "b": [4.5], "logN": [[11.3], [11.7]]}, 2.0)


def masses(driver):
    out = subprocess.run([driver, "--masses"], capture_output=True, text=True, check=True).stdout
    import periodictable
    ok = True
    n = 0
    for line in out.splitlines():
        sym, m = line.split()
        ref = periodictable.elements.symbol(sym).mass
        n += 1
        # periodictable carries older standard weights (S 32.065, Zn 65.409)
        # than the current conventional ones: 0.1% is far below anything a
        # Doppler width can tell
        if abs(float(m) - ref) > 1e-3 * ref:
            print(f"FAIL {sym}: ours {m}, periodictable {ref}")
            ok = False
    print(f"{n} atomic weights against periodictable")
    return ok


def main():
    if sys.argv[1] == "--masses":
        return 0 if masses(sys.argv[2]) else 1
    driver, d = sys.argv[1], sys.argv[2]
    ok = True
    for (name, rule, species, truth, R, snr, seed, start, step) in cases():
        path = os.path.join(d, f"joint_{name}.txt")
        grids, data, lines, ms = make_case(name, rule, species, truth, R, snr, seed, start, path,
                                           step)
        p, e, chi2, _, _ = fit_here(rule, species, grids, data, lines, ms, start)
        ok = compare(driver, path, rule, species, p, e, chi2, ok)
    return 0 if ok else 1


if __name__ == "__main__":
    sys.exit(main())
