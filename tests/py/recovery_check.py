#!/usr/bin/python3
"""Recovery of known components by the first pass (tests/scripts/recovery.sh):
each true component (truth.csv of recovery_synth.py) is matched to the
fitted component of its spectrum nearest in velocity, within half the
FWHM (30 km/s at R 5000), each fitted component used once.  For the
matched ones, the pulls (fit - truth) / error of log N (the profile
interval's side towards the truth: logN_err_hi when the truth lies above,
logN_err_lo below; none when the truth lies above a lower limit), v and b.

    recovery_check.py TRUTH.csv FIT.csv

prints "found MATCHED TRUE", then per parameter "pull NAME COUNT MEAN SD
WITHIN1" (WITHIN1: the fraction of |pull| <= 1, 0.6827 for a unit
normal), then "poor COUNT SPECTRA WORST": the spectra whose fit's chi2 lies
beyond the upper 1e-6 point of the chi-square distribution with its
degrees of freedom (scipy.stats.chi2.sf), which a search that found the
components the data were made of leaves with chance 1e-6 each."""
import csv
import sys

import numpy as np
from scipy.stats import chi2


def rows(path):
    with open(path) as f:
        return list(csv.DictReader(line for line in f if not line.startswith("#")))


def main(truth_path, fit_path):
    truth = rows(truth_path)
    fits = {}
    for r in rows(fit_path):
        if r["logN"] and r["system"] == "target":
            fits.setdefault(r["name"], []).append(r)
    found, pulls = 0, {"logN": [], "v": [], "b": []}
    fitp = {}
    for name, rs in fits.items():
        if rs[0]["chi2_red"] and rs[0]["dof"]:
            dof = int(rs[0]["dof"])
            fitp[name] = chi2.sf(float(rs[0]["chi2_red"]) * dof, dof)
    for t in truth:
        cands = fits.get(t["name"], [])
        tv = float(t["v"])
        best = min(cands, key=lambda r: abs(float(r["v_kms"]) - tv), default=None)
        if best is None or abs(float(best["v_kms"]) - tv) > 30.0:
            continue
        cands.remove(best)
        found += 1
        x, fx = float(t["logN"]), float(best["logN"])
        pulls["v"].append((float(best["v_kms"]) - tv) / float(best["v_err"]))
        pulls["b"].append((float(best["b_kms"]) - float(t["b"])) / float(best["b_err"]))
        if best["logN_flag"] == "lower-limit" and x >= fx - float(best["logN_err_lo"]):
            continue
        e = float(best["logN_err_hi"] if x > fx else best["logN_err_lo"])
        pulls["logN"].append((fx - x) / e)
    print(f"found {found} {len(truth)}")
    for k, p in pulls.items():
        p = np.array(p)
        print(f"pull {k} {len(p)} {p.mean():.4f} {p.std(ddof=1):.4f} {np.mean(np.abs(p) <= 1):.4f}")
    worst = min(fitp, key=fitp.get, default="-")
    poor = sum(1 for p in fitp.values() if p < 1e-6)
    print(f"poor {poor} {len(fitp)} {worst}")
    return 0


if __name__ == "__main__":
    sys.exit(main(sys.argv[1], sys.argv[2]))
