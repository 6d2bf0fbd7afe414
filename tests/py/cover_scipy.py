#!/usr/bin/python3
"""Partial covering checked with SciPy: an own model and fit of a doublet
with a covering factor, against doubletty's `fit --covering`.

  cover_scipy.py make DIR          write the spectra (case_*.txt) and truth.csv
  cover_scipy.py check DIR OURS.csv
                                    fit the same spectra with SciPy and compare

The model here is written from the physics alone (nothing of doubletty's
code): each line's optical depth
    tau(v) = N sigma0 f lambda0 / (sqrt(pi) b) * H(a, u),   H = Re w(u + i a)
(w from scipy.special.wofz; sigma0 = pi e^2/(m_e c) = 0.02654008856 cm^2/s,
CODATA 2018; a = Gamma lambda0 / (4 pi b)), the covered intensity
I = 1 - C + C exp(-tau) (Hamann et al. 1997, ApJ 478, 80, eq. 1; Barlow &
Sargent 1997, AJ 113, 136) on a fine grid uniform in ln(lambda), a Gaussian
line-spread function of FWHM c/R, and the mean over each pixel.  The fit is
scipy.optimize.least_squares (trust-region reflective, bounds 0 < C <= 1);
errors from (J^T J)^-1.  Na I data: Morton (2003, ApJS 149, 205).

Checks printed as "ok"/"FAIL" lines and "N passed, N failed":
  - doubletty's C_f agrees with the SciPy fit's within 0.25 of the larger
    1-sigma error, and log N within 0.25 sigma, for the constrained cases;
  - both agree with the truth within 3 sigma;
  - the closed form of Hamann et al. (1997, eq. 3, from memory),
    C = (1 - I2)^2 / (I1 - 2 I2 + 1) from the noiseless centre intensities,
    gives the true C to 0.02 for resolved lines;
  - thin lines: doubletty flags C_f "unconstrained"; C_f = 1 data: no flag.
"""
import csv
import math
import os
import sys

import numpy as np
from scipy.optimize import least_squares
from scipy.special import wofz

C_KMS = 299792.458
SIGMA0 = 0.02654008856
LINES = [(5891.5833, 0.6408, 6.16e7), (5897.5581, 0.3201, 6.14e7)]
R = 60000.0
SNR = 60.0
# name, tau0 of the weaker line, b [km/s], v [km/s], C, seed
CASES = [
    ("partial_a", 4.0, 10.0, 2.0, 0.60, 11),
    ("partial_b", 8.0, 8.0, -5.0, 0.75, 12),
    ("partial_c", 2.5, 12.0, 4.0, 0.50, 13),
    ("full", 3.0, 10.0, 0.0, 1.00, 14),
    ("thin", 0.08, 10.0, 0.0, 1.00, 15),
]


def logn_for_tau(tau0, b):
    lam, f, _ = LINES[1]
    return math.log10(tau0 * math.sqrt(math.pi) * b * 1e5 / (SIGMA0 * f * lam * 1e-8))


def pixels():
    return np.arange(5884.0, 5905.0, 0.04)


def model(wave, logn, b, v, cf):
    # fine grid uniform in ln(lambda), 0.2 km/s cells, padded by 6 sigma_LSF
    sig = C_KMS / R / (2.0 * math.sqrt(2.0 * math.log(2.0)))
    step = 0.2
    pad = 6 * sig / C_KMS + 0.01 / wave[0]
    lo, hi = math.log(wave[0]) - pad, math.log(wave[-1]) + pad
    nf = int((hi - lo) / (step / C_KMS)) + 1
    lnl = lo + (np.arange(nf) + 0.5) * step / C_KMS
    lam = np.exp(lnl)
    tau = np.zeros(nf)
    n = 10.0 ** logn
    for lam0, f, gam in LINES:
        lc = lam0 * (1 + v / C_KMS)
        u = C_KMS * (lc / lam - 1.0) / b          # (nu - nu_c) / dnu_D
        a = gam * lam0 * 1e-8 / (4 * math.pi * b * 1e5)
        tau += n * SIGMA0 * f * lam0 * 1e-8 / (math.sqrt(math.pi) * b * 1e5) * wofz(u + 1j * a).real
    inten = 1.0 - cf + cf * np.exp(-tau)
    hw = int(math.ceil(6 * sig / step))
    k = np.exp(-0.5 * (np.arange(-hw, hw + 1) * step / sig) ** 2)
    k /= k.sum()
    conv = np.convolve(inten, k, mode="same")
    edges = np.concatenate(([wave[0] - 0.5 * (wave[1] - wave[0])], 0.5 * (wave[1:] + wave[:-1]),
                            [wave[-1] + 0.5 * (wave[-1] - wave[-2])]))
    idx = np.searchsorted(lam, edges)
    out = np.empty(len(wave))
    for i in range(len(wave)):
        out[i] = conv[idx[i]:idx[i + 1]].mean()
    return out


def make(d):
    os.makedirs(d, exist_ok=True)
    wave = pixels()
    with open(os.path.join(d, "truth.csv"), "w") as t:
        t.write("name,logN,b,v,cf\n")
        for name, tau, b, v, cf, seed in CASES:
            ln = logn_for_tau(tau, b)
            flux = model(wave, ln, b, v, cf)
            rng = np.random.default_rng(seed)
            noisy = flux + rng.normal(0, 1 / SNR, len(wave))
            with open(os.path.join(d, "case_%s.txt" % name), "w") as f:
                for w, y in zip(wave, noisy):
                    f.write("%.5f %.7f %.7f\n" % (w, y, 1 / SNR))
            t.write("%s,%.6f,%.4f,%.4f,%.4f\n" % (name, ln, b, v, cf))


def scipy_fit(wave, y, sig, start):
    def res(p):
        return (y - model(wave, *p)) / sig
    lo = [10.0, 1.0, -50.0, 0.01]
    hi = [16.0, 50.0, 50.0, 1.0]
    p0 = np.clip(start, np.array(lo) + 1e-6, np.array(hi) - 1e-6)
    r = least_squares(res, p0, bounds=(lo, hi), x_scale=[0.1, 1.0, 1.0, 0.1])
    J = r.jac
    cov = np.linalg.pinv(J.T @ J)
    return r.x, np.sqrt(np.diag(cov))


npass = nfail = 0


def check(ok, what):
    global npass, nfail
    if ok:
        npass += 1
        print("ok   - " + what)
    else:
        nfail += 1
        print("FAIL - " + what)


def closed_form(i1, i2):
    # Hamann et al. 1997, eq. 3 (from memory)
    return (1 - i2) ** 2 / (i1 - 2 * i2 + 1)


def do_check(d, ours_path):
    truth = {r["name"]: r for r in csv.DictReader(open(os.path.join(d, "truth.csv")))}
    ours = {}
    with open(ours_path) as fh:
        for r in csv.DictReader(l for l in fh if not l.startswith("#")):
            name = os.path.basename(r["file"])[5:-4]
            ours[name] = r
    for name, tau, b, v, cf, seed in CASES:
        t = truth[name]
        o = ours.get(name)
        check(o is not None and o["status"] == "ok" and o["component"] == "1",
              "%s: doubletty fitted one component" % name)
        if o is None or o["component"] != "1":
            continue
        data = np.loadtxt(os.path.join(d, "case_%s.txt" % name))
        wave, y, sg = data[:, 0], data[:, 1], data[:, 2]
        if name == "thin":
            check(o["cf_flag"] == "unconstrained",
                  "thin lines: doubletty flags C_f unconstrained (flag '%s')" % o["cf_flag"])
            continue
        p, e = scipy_fit(wave, y, sg, [float(t["logN"]) - 0.3, b * 1.3, 0.0, 0.9])
        cf_o, cfe_o = float(o["cf"]), float(o["cf_err"])
        ln_o, lne_o = float(o["logN"]), float(o["logN_err"])
        print("# %s: true C %.3f logN %.3f | doubletty C %.4f+-%.4f logN %.4f+-%.4f | "
              "SciPy C %.4f+-%.4f logN %.4f+-%.4f | flag '%s'"
              % (name, cf, float(t["logN"]), cf_o, cfe_o, ln_o, lne_o, p[3], e[3], p[0], e[0],
                 o["cf_flag"]))
        s_cf = max(cfe_o, e[3])
        s_ln = max(lne_o, e[0])
        check(abs(cf_o - p[3]) <= 0.25 * s_cf,
              "%s: C_f agrees with the SciPy fit (%.4f vs %.4f, sigma %.4f)" % (name, cf_o, p[3], s_cf))
        check(abs(ln_o - p[0]) <= 0.25 * s_ln,
              "%s: log N agrees with the SciPy fit (%.4f vs %.4f, sigma %.4f)" % (name, ln_o, p[0], s_ln))
        check(abs(cfe_o - e[3]) <= 0.2 * e[3],
              "%s: C_f errors agree within 20%% (%.4f vs %.4f)" % (name, cfe_o, e[3]))
        check(abs(cf_o - cf) <= 3 * cfe_o and abs(p[3] - cf) <= 3 * e[3],
              "%s: both within 3 sigma of the true C_f %.2f" % (name, cf))
        if cf < 1:
            check(o["cf_flag"] == "partial", "%s: flagged partial ('%s')" % (name, o["cf_flag"]))
            # the closed form on the noiseless model's line centres
            ln = float(t["logN"])
            cen = [np.array([l[0] * (1 + v / C_KMS)]) for l in LINES]
            fine = [model(np.array([c[0] - 0.02, c[0], c[0] + 0.02]), ln, b, v, cf)[1] for c in cen]
            cc = closed_form(fine[0], fine[1])
            check(abs(cc - cf) < 0.02, "%s: Hamann et al. closed form gives C %.4f (true %.2f)"
                  % (name, cc, cf))
        else:
            check(o["cf_flag"] == "", "%s: C_f = 1 data are not flagged ('%s')" % (name, o["cf_flag"]))
    print("%d passed, %d failed" % (npass, nfail))
    return 1 if nfail else 0


if __name__ == "__main__":
    if len(sys.argv) >= 3 and sys.argv[1] == "make":
        make(sys.argv[2])
        sys.exit(0)
    if len(sys.argv) >= 4 and sys.argv[1] == "check":
        sys.exit(do_check(sys.argv[2], sys.argv[3]))
    sys.stderr.write(__doc__)
    sys.exit(2)
