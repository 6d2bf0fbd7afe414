#!/usr/bin/python3
"""Session files for the session tests, written from the documented format
(the header comment of src/core/journal_format.c and the man page) by an independent
writer, and checks of what doubletty makes of them.

  session_tool.py make-rich DIR         DIR/rich.session + DIR/rich.json (expected final state)
  session_tool.py make-fleiss DIR       DIR/s1.session, DIR/s2.session: the Fleiss example
  session_tool.py check-export JSON CSV FITS SESSION VERSION
  session_tool.py check-log JSON LOGFILE

The Fleiss example (Fleiss 1981, Statistical Methods for Rates and
Proportions, 2nd ed., Table 13.1): 100 subjects, two raters, three
categories; proportions x 100 =
    75  1  4
     5  4  1
     0  0 10
"""
import csv
import hashlib
import json
import math
import sys


def fnv1a32(data: bytes) -> int:
    # FNV-1a, 32 bit: offset basis 2166136261, prime 16777619 (the published
    # FNV parameters)
    h = 2166136261
    for b in data:
        h = ((h ^ b) * 16777619) & 0xFFFFFFFF
    return h


def esc(s: str) -> str:
    out = []
    for ch in s:
        o = ord(ch)
        if ch == "\\":
            out.append("\\\\")
        elif ch == "\t":
            out.append("\\t")
        elif ch == "\n":
            out.append("\\n")
        elif ch == "\r":
            out.append("\\r")
        elif o < 0x20 or o == 0x7F:
            out.append("\\x%02X" % o)
        else:
            out.append(ch)
    return "".join(out)


def num(x: float) -> str:
    if math.isnan(x):
        return "nan"
    return repr(float(x))  # the shortest form that reads back exactly


def pm(x, e):
    return num(x) + "+-" + num(e)


class Writer:
    def __init__(self, path, user):
        self.f = open(path, "w", encoding="utf-8", newline="")
        self.user = user
        self.f.write("doubletty-session 1\tcreated=2025-03-01T08:00:00.000Z\tprogram=test writer\n")
        self.seen = set()
        self.sha = {}
        self.minute = 0

    def record(self, path, hdu, row, sha, act, act_fields, state, meas=None, when=None):
        """state: dict with verdict, comps [(logN,b,v,frozen)], tie, fit (dict or None),
        and the settings for a full record."""
        self.minute += 1
        if when is None:
            when = "2025-03-01T%02d:%02d:00.000Z" % (9 + self.minute // 60, self.minute % 60)
        f = [when, "user=" + esc(self.user), "file=" + esc(path), "hdu=%d" % hdu, "row=%d" % row,
             "sha256=" + sha]
        key = (path, hdu, row)
        if sha and self.sha.get(key) and self.sha[key] != sha:
            f.append("was=" + self.sha[key])  # the file changed since its last record
        if sha:
            self.sha[key] = sha
        f.append("act=" + act)
        f += ["%s=%s" % kv for kv in act_fields]
        f.append("=>")
        f.append("verdict=" + state["verdict"])
        comps = state["comps"]
        f.append("ncomp=%d" % len(comps))
        fit = state.get("fit")
        for i, c in enumerate(comps):
            if fit:
                e = fit["err"][i]
                s = "logN=%s,b=%s,v=%s" % (pm(c[0], e[0]), pm(c[1], e[1]), pm(c[2], e[2]))
            else:
                s = "logN=%s,b=%s,v=%s" % (num(c[0]), num(c[1]), num(c[2]))
            if c[3]:
                s += ",frozen=" + c[3]
            f.append("c%d=%s" % (i + 1, s))
        if state.get("tie"):
            f.append("tie-b=1")
        if fit:
            f += ["fit=ok", "niter=%d" % fit["niter"], "chi2=" + num(fit["chi2"]), "dof=%d" % fit["dof"],
                  "chi2r=" + num(fit["chi2"] / fit["dof"]), "bic=" + num(fit["bic"]), "npix=%d" % fit["npix"]]
        if meas:
            for l in (1, 2):
                m = meas[l - 1]
                f.append("W%d=%s" % (l, pm(m["W"], m["W_err"])))
                f.append("Wlim%d=%s" % (l, num(m["W_lim"])))
                if m.get("logNa") is not None:
                    f.append("logNa%d=%s" % (l, pm(m["logNa"], m["logNa_err"])))
                f.append("logNlim%d=%s" % (l, num(m["logN_lim"])))
            f.append("nsigma=3")
            if meas[0].get("saturated"):
                f.append("saturated=1")
        if key not in self.seen or act in ("restore", "autofit"):
            self.seen.add(key)
            st = state
            f += ["full=1", "doublet=" + esc(st.get("doublet", "NaI")), "vsys=" + num(st.get("vsys", 0.0)),
                  "R=" + num(st.get("R", 3000.0)), "fwhm=0", "vlo=" + num(st.get("vlo", -600.0)),
                  "vhi=" + num(st.get("vhi", 600.0)),
                  "order=%d" % st.get("order", 2), "windows=", "note=" + esc(st.get("note", ""))]
        body = "\t".join(f)
        line = body + "\tsum=%08x\n" % fnv1a32(body.encode("utf-8"))
        self.f.write(line)

    def close(self):
        self.f.close()


SHA_A = "ba7816bf8f01cfea414140de5dae2223b00361a396177a9cb410ff61f20015ad"
SHA_B = "248d6a61d20638b8e5c026930c3e6039a33ce45964ff2167f6ecedd419db06c1"
# distinct files have distinct digests (a session knows a spectrum by its digest)
SHA_C = hashlib.sha256(b"").hexdigest()


def make_rich(d):
    """Three spectra with components, fits, measurements, notes and verdicts."""
    w = Writer(d + "/rich.session", "Mira Okonkwo")
    exp = {}
    # spectrum 1: two components, fitted, measured, detected, a note with awkward characters
    p1 = "survey/Lyra-7 field/qso01.fits"
    st = {"verdict": "none", "comps": [], "fit": None, "vsys": 412.5, "R": 3800.0}
    st["comps"] = [(12.3, 15.0, 380.0, "")]
    w.record(p1, 1, 0, SHA_A, "comp-add", [("logN", "12.3"), ("b", "15.0"), ("v", "380.0")], st)
    st["comps"].append((11.9, 8.0, 520.0, ""))
    w.record(p1, 1, 0, SHA_A, "comp-add", [("logN", "11.9"), ("b", "8.0"), ("v", "520.0")], st)
    fit = {"niter": 9, "chi2": 131.25, "dof": 118, "bic": 160.5, "npix": 124,
           "err": [(0.041, 1.7, 1.3), (0.12, 2.9, 2.2)]}
    st["comps"] = [(12.4171, 17.25, 382.125, ""), (11.8625, 7.5, 518.75, "")]
    st["fit"] = fit
    meas = [{"W": 0.4125, "W_err": 0.0215, "W_lim": 0.0645, "logNa": 12.6, "logNa_err": 0.03,
             "logN_lim": 11.4, "saturated": True},
            {"W": 0.2375, "W_err": 0.0205, "W_lim": 0.0615, "logNa": 12.7, "logNa_err": 0.05,
             "logN_lim": 11.7}]
    w.record(p1, 1, 0, SHA_A, "fit", [], st, meas)
    note = 'sky line near 5893, "check"\tsee log\nsecond line \\ end'
    w.record(p1, 1, 0, SHA_A, "note", [("note", esc(note))], st)
    st["verdict"] = "detected"
    w.record(p1, 1, 0, SHA_A, "verdict", [("verdict", "detected")], st, when="2025-03-01T10:30:00.000Z")
    exp[p1] = {"hdu": 1, "row": 0, "verdict": "detected", "note": note, "judged_by": "Mira Okonkwo",
               "judged_at": "2025-03-01T10:30:00.000Z", "vsys": 412.5, "comps": st["comps"],
               "errs": fit["err"], "chi2": 131.25, "dof": 118, "meas": meas, "flags": ""}
    # spectrum 2: a row of a table, nothing found, no components; its file changed later
    p2 = "survey/multi.fits"
    st2 = {"verdict": "not-detected", "comps": [], "fit": None}
    meas2 = [{"W": 0.01, "W_err": 0.02, "W_lim": 0.06, "logNa": None, "logN_lim": 11.2},
             {"W": -0.005, "W_err": 0.02, "W_lim": 0.06, "logNa": None, "logN_lim": 11.5}]
    w.record(p2, 2, 5, SHA_A, "verdict", [("verdict", "not-detected")], st2, meas2)
    w.record(p2, 2, 5, SHA_B, "note", [("note", "file replaced by the pipeline rerun")],
             dict(st2), None)
    exp[p2] = {"hdu": 2, "row": 5, "verdict": "not-detected", "note": "file replaced by the pipeline rerun",
               "judged_by": "Mira Okonkwo", "comps": [], "meas": meas2, "flags": "file-changed",
               "sha": SHA_B}
    # spectrum 3: a component frozen, then the verdict withdrawn
    p3 = "survey/qso03.txt"
    st3 = {"verdict": "unsure", "comps": [(13.1, 20.0, 300.0, "b")], "fit": None}
    w.record(p3, 0, 0, "", "verdict", [("verdict", "unsure")], st3)
    st3["verdict"] = "none"
    w.record(p3, 0, 0, "", "verdict", [("verdict", "none")], st3)
    exp[p3] = {"hdu": 0, "row": 0, "verdict": "none", "note": "", "judged_by": "",
               "comps": st3["comps"], "errs": None, "meas": None, "flags": ""}
    # spectrum 4: the first pass left a component (log N 15.05), the person
    # said "not detected": the export is the limit, not that component
    p4 = "survey/qso04.fits"
    st4 = {"verdict": "not-detected", "comps": [(15.05, 3.0, 10.0, "")], "fit": None}
    meas4 = [{"W": 0.004, "W_err": 0.015, "W_lim": 0.045, "logNa": None, "logN_lim": 11.35},
             {"W": 0.002, "W_err": 0.015, "W_lim": 0.045, "logNa": None, "logN_lim": 11.65}]
    w.record(p4, 1, 0, SHA_C, "verdict", [("verdict", "not-detected")], st4, meas4)
    exp[p4] = {"hdu": 1, "row": 0, "verdict": "not-detected", "note": "", "judged_by": "Mira Okonkwo",
               "comps": st4["comps"], "meas": meas4, "flags": "", "errs": None}
    w.close()
    with open(d + "/rich.json", "w") as f:
        json.dump(exp, f, indent=1)


def make_fleiss(d):
    table = [[75, 1, 4], [5, 4, 1], [0, 0, 10]]
    cats = ["detected", "not-detected", "unsure"]
    w1 = Writer(d + "/s1.session", "ana")
    w2 = Writer(d + "/s2.session", "ben")
    k = 0
    for a in range(3):
        for b in range(3):
            for _ in range(table[a][b]):
                p = "fleiss/s%03d.fits" % k
                k += 1
                # a session knows a spectrum by its file's digest: one file, one digest
                sha = hashlib.sha256(p.encode()).hexdigest()
                st = {"verdict": cats[a], "comps": [], "fit": None}
                w1.record(p, 1, 0, sha, "verdict", [("verdict", cats[a])], st)
                st = {"verdict": cats[b], "comps": [], "fit": None}
                w2.record(p, 1, 0, sha, "verdict", [("verdict", cats[b])], st)
    w1.close()
    w2.close()


def close(a, b, tol=1e-12):
    return abs(a - b) <= tol * max(1.0, abs(b))


def check_export(jpath, csvpath, fitspath, session, version):
    from astropy.io import fits
    from astropy import units as u
    import numpy as np

    exp = json.load(open(jpath))
    fails = []

    def want(cond, what):
        print(("ok   - " if cond else "FAIL - ") + what)
        if not cond:
            fails.append(what)

    rows = list(csv.DictReader(open(csvpath, newline="", encoding="utf-8")))
    h = fits.open(fitspath)
    t = h[1].data
    hdr = h[1].header
    cols = h[1].columns
    want(len(rows) == len(t), "CSV and FITS have the same rows (%d, %d)" % (len(rows), len(t)))
    # units
    units = {cols[i].name: (cols[i].unit or "") for i in range(len(cols))}
    for name, unit in [("v_kms", "km / s"), ("b_kms", "km / s"), ("vsys_kms", "km / s"),
                       ("W_mA", "mAngstrom"), ("W_weak_lim_mA", "mAngstrom")]:
        want(units.get(name) and u.Unit(units[name]) == u.Unit(unit),
             "TUNIT of %s is %s (%s)" % (name, unit, units.get(name)))
    li = [cols[i].name for i in range(len(cols))].index("logN") + 1
    want(not units.get("logN") and "column density in cm-2" in hdr.get("TCOMM%d" % li, ""),
         "logN: no TUNIT astropy cannot parse, a TCOMMn saying log10 cm-2 (%s)" % hdr.get("TCOMM%d" % li))
    bad_units = []
    for name, unit in units.items():
        if unit:
            try:
                u.Unit(unit, parse_strict="raise")
            except ValueError:
                bad_units.append("%s=%s" % (name, unit))
    want(not bad_units, "every TUNIT parses in astropy with parse_strict='raise' (%s)" % ", ".join(bad_units))
    import warnings
    from astropy.table import Table
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        try:
            with fits.open(fitspath) as hh:
                hh.verify("exception")
                hh[1].header.tostring()
            Table.read(fitspath, hdu=1)
            clean = True
        except Exception as ex:  # any warning is a failure here
            clean = False
            print("   %s" % ex)
    want(clean, "astropy opens and reads the table with warnings as errors")
    raw = open(fitspath, "rb").read(2880 * 4)
    hdr_bytes = raw[:raw.find(b"END     ") + 80] if b"END     " in raw else raw
    want(all(32 <= b < 127 for b in hdr_bytes), "the primary header is printable ASCII")
    want(hdr.get("DTVERSN") == version, "DTVERSN = %s (%s)" % (version, hdr.get("DTVERSN")))
    sha = hashlib.sha256(open(session, "rb").read()).hexdigest()
    want(hdr.get("SESSSHA") == sha, "SESSSHA is the SHA-256 of the session file (hashlib)")
    for path, e in exp.items():
        cr = [r for r in rows if r["file"] == path]
        fr = [i for i in range(len(t)) if t["file"][i].strip() == path]
        # a "not detected" spectrum is exported as its limits, without components
        ncomp = 0 if e["verdict"] == "not-detected" else len(e["comps"])
        want(len(cr) == max(1, ncomp) and len(fr) == len(cr), "%s: one row per component (%d)" % (path, len(cr)))
        if not cr:
            continue
        r0, f0 = cr[0], fr[0]
        want(r0["verdict"] == e["verdict"] and t["verdict"][f0].strip() == e["verdict"],
             "%s: verdict %s" % (path, e["verdict"]))
        want(r0["note"] == e["note"], "%s: note read back exactly from CSV" % path)
        want(t["note"][f0].rstrip() == e["note"].rstrip(), "%s: note in FITS" % path)
        want(r0["judged_by"] == e["judged_by"], "%s: judged by '%s'" % (path, e["judged_by"]))
        if "judged_at" in e:
            want(r0["judged_at"] == e["judged_at"], "%s: judged at %s" % (path, e["judged_at"]))
        want(int(r0["hdu"] or 0) == e["hdu"] and int(r0["row"]) == e["row"] and
             int(t["hdu"][f0]) == e["hdu"] and int(t["row"][f0]) == e["row"], "%s: hdu and row" % path)
        want(r0["flags"] == e["flags"], "%s: flags '%s' (%s)" % (path, e["flags"], r0["flags"]))
        if "sha" in e:
            want(r0["sha256"] == e["sha"], "%s: latest file digest" % path)
        for k, c in enumerate(e["comps"][:ncomp]):
            r, fi = cr[k], fr[k]
            ok = (int(r["component"]) == k + 1 and close(float(r["logN"]), c[0]) and close(float(r["b_kms"]), c[1])
                  and close(float(r["v_kms"]), c[2]) and close(t["logN"][fi], c[0]) and close(t["v_kms"][fi], c[2])
                  and r["frozen"] == c[3])
            want(ok, "%s: component %d values (CSV and FITS)" % (path, k + 1))
            if e.get("errs"):
                er = e["errs"][k]
                want(close(float(r["logN_err"]), er[0]) and close(float(r["v_err"]), er[2]) and
                     close(t["b_err"][fi], er[1]), "%s: component %d errors" % (path, k + 1))
            else:
                want(r["logN_err"] == "" and math.isnan(t["logN_err"][fi]),
                     "%s: component %d without fit errors: empty / NaN" % (path, k + 1))
        if ncomp == 0:
            want(int(r0["component"]) == 0 and int(r0["ncomp"]) == 0 and r0["logN"] == "" and
                 r0["b_kms"] == "" and r0["v_kms"] == "" and math.isnan(t["logN"][f0]),
                 "%s: no components: component 0, empty values" % path)
        if e["verdict"] == "not-detected" and e.get("meas"):
            want(close(float(r0["W_limit_mA"]), 1e3 * e["meas"][0]["W_lim"]) and
                 close(float(r0["logN_limit"]), e["meas"][0]["logN_lim"]),
                 "%s: not detected: the limits are exported" % path)
        if e.get("chi2") is not None:
            want(close(float(r0["chi2"]), e["chi2"]) and int(r0["dof"]) == e["dof"] and
                 close(float(r0["chi2_red"]), e["chi2"] / e["dof"]), "%s: chi2, dof, chi2_red" % path)
        if e.get("meas"):
            m1, m2 = e["meas"]
            # W in mA in both outputs (the session records Angstrom)
            want(close(float(r0["W_mA"]), 1e3 * m1["W"]) and close(float(r0["W_err_mA"]), 1e3 * m1["W_err"]) and
                 close(float(r0["W_limit_mA"]), 1e3 * m1["W_lim"]) and close(t["W_weak_mA"][f0], 1e3 * m2["W"]) and
                 close(float(r0["logN_limit_weak"]), m2["logN_lim"]), "%s: equivalent widths and limits" % path)
            if m1.get("logNa") is not None:
                want(close(float(r0["logN_aod"]), m1["logNa"]) and close(t["logN_aod_weak_err"][f0], m2["logNa_err"]),
                     "%s: apparent column densities" % path)
            else:
                want(r0["logN_aod"] == "" and math.isnan(t["logN_aod"][f0]), "%s: no N_a: empty / NaN" % path)
            want(bool(t["saturated"][f0]) == bool(m1.get("saturated")) and
                 r0["saturated"] == ("1" if m1.get("saturated") else "0"), "%s: saturation flag" % path)
        else:
            want(r0["W_mA"] == "" and math.isnan(t["W_mA"][f0]), "%s: nothing measured: empty / NaN" % path)
    return 1 if fails else 0


def check_log(jpath, logpath):
    exp = json.load(open(jpath))
    lines = open(logpath, encoding="utf-8").read().splitlines()
    fails = 0
    n = sum(1 for l in lines if "survey/Lyra-7 field/qso01.fits (hdu 1)" in l)
    print(("ok   - " if n == 5 else "FAIL - ") + "log: 5 changes of qso01 (%d)" % n)
    fails += n != 5
    v = [l for l in lines if "  verdict  detected" in l and "Mira Okonkwo" in l and l.startswith("2025-03-01 10:30:00Z")]
    print(("ok   - " if v else "FAIL - ") + "log: when, who, what of the verdict")
    fails += not v
    return 1 if fails else 0


def main():
    cmd = sys.argv[1]
    if cmd == "make-rich":
        make_rich(sys.argv[2])
    elif cmd == "make-fleiss":
        make_fleiss(sys.argv[2])
    elif cmd == "check-export":
        sys.exit(check_export(*sys.argv[2:7]))
    elif cmd == "check-log":
        sys.exit(check_log(*sys.argv[2:4]))
    else:
        sys.exit("unknown command " + cmd)


if __name__ == "__main__":
    main()
