#!/usr/bin/python3
"""Compare doubletty's fits of the peer's spectra with the peer's own fits.

  fit_peer_compare.py PEER.csv OURS.csv [TOL] [MIN_FRACTION]

PEER.csv: output of the peer's 'peer_fit.py fit' (name, 6 parameters, 6
errors, then a 'fits_per_s' line).  OURS.csv: either the output of
build/tests/test_fit_peer DIR ATOMIC (name, status, 6 parameters, 6 errors)
or the CSV of 'doubletty fit' (a header row naming file, component, v_kms,
b_kms, logN, ...; one row per component).
A spectrum agrees when each of the six best-fit parameters (logN, b, v of
two components, matched by velocity) differs from the peer's by at most TOL
(default 0.1) times the peer's 1-sigma error.  Prints a summary; the exit
status is 0 when at least MIN_FRACTION (default 0.95) of the spectra agree.
"""
import math
import os
import sys


def read(path, has_status):
    rows, rate = {}, None
    with open(path) as fh:
        for line in fh:
            line = line.strip()
            if not line:
                continue
            if line.startswith("fits_per_s"):
                rate = float(line.split()[1])
                continue
            f = line.split(",")
            name = f[0]
            status = int(f[1]) if has_status else 0
            v = [float(x) for x in f[2 if has_status else 1:]]
            p, e = v[:6], v[6:12]
            comps = sorted([(p[0:3], e[0:3]), (p[3:6], e[3:6])], key=lambda c: -c[0][2])
            rows[name] = (status, comps)
    return rows, rate


def read_table(path):
    """The CSV of 'doubletty fit': components per file, matched by velocity."""
    import csv
    rows = {}
    with open(path) as fh:
        # the settings lines ("# key=value") above the header are not rows
        for r in csv.DictReader(line for line in fh if not line.startswith("#")):
            name = os.path.basename(r["file"])
            st, comps = rows.setdefault(name, [0, []])
            if r.get("status", "ok") != "ok":
                rows[name][0] = 1
            if r["component"] == "":
                continue
            p = [float(r["logN"]), float(r["b_kms"]), float(r["v_kms"])]
            # (an error is left blank for a parameter at the limit of its
            # range; only the peer's errors are used below)
            e = [float(r[k]) if r[k] else math.nan for k in ("logN_err", "b_err", "v_err")]
            comps.append((p, e))
    out = {}
    for name, (st, comps) in rows.items():
        if len(comps) != 2:
            st = st or 2
            comps = (comps + [([math.nan] * 3, [math.nan] * 3)] * 2)[:2]
        out[name] = (st, sorted(comps, key=lambda c: -c[0][2]))
    return out, None


def main():
    peer, prate = read(sys.argv[1], False)
    with open(sys.argv[2]) as fh:
        first = fh.readline()
        while first.startswith("#"):  # the settings lines of a fit table
            first = fh.readline()
    if "component" in first.split(","):
        ours, orate = read_table(sys.argv[2])
    else:
        ours, orate = read(sys.argv[2], True)
    tol = float(sys.argv[3]) if len(sys.argv) > 3 else 0.1
    need = float(sys.argv[4]) if len(sys.argv) > 4 else 0.95
    names = sorted(peer)
    agree, worst, peer_failed, ours_failed = 0, [], 0, 0
    for n in names:
        ps, pc = peer[n]
        if n not in ours:
            worst.append((math.inf, n, "missing"))
            continue
        os_, oc = ours[n]
        if any(math.isnan(x) for c in pc for x in c[0] + c[1]):
            peer_failed += 1
            worst.append((math.inf, n, "peer failed"))
            continue
        if os_ != 0:
            ours_failed += 1
        dev = 0.0
        for (pp, pe), (op, _) in zip(pc, oc):
            for a, b, s in zip(pp, op, pe):
                d = abs(a - b) / s if s > 0 else (0.0 if a == b else math.inf)
                dev = max(dev, d if not math.isnan(d) else math.inf)
        worst.append((dev, n, "status %d" % os_))
        if dev <= tol and os_ == 0:
            agree += 1
    frac = agree / len(names) if names else 0.0
    worst.sort(reverse=True)
    print("spectra %d, agree within %.2f sigma: %d (%.1f%%); peer failed %d, ours failed %d"
          % (len(names), tol, agree, 100 * frac, peer_failed, ours_failed))
    print("largest deviations [peer sigma]: " +
          ", ".join("%s %.3g (%s)" % (n, d, s) for d, n, s in worst[:5]))
    if prate and orate:
        print("fits per second: peer %.2f, ours %.2f, ratio %.0f" % (prate, orate, orate / prate))
    return 0 if frac >= need else 1


if __name__ == "__main__":
    sys.exit(main())
