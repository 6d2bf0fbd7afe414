#!/bin/sh
# Partial covering against an own SciPy model and fit (tests/py/cover_scipy.py:
# scipy.special.wofz, scipy.optimize.least_squares): `doubletty fit
# --covering` on spectra made there recovers the same C_f and log N as the
# SciPy fit, within the truth's errors; the closed form of Hamann et al.
# (1997, ApJ 478, 80, eq. 3) checks the covered intensities; thin lines are
# flagged unconstrained, C_f = 1 data not at all.
. "$(dirname "$0")/../lib.sh"

if need_py "partial covering against SciPy"; then
  "$PY" "$ROOT/tests/py/cover_scipy.py" make "$TMP/sp" >"$TMP/make.out" 2>&1
  check "spectra made" [ -f "$TMP/sp/case_full.txt" ]
  "$DT" fit --covering --resolution 60000 --ncomp 1 --continuum-order -1 --window=-150:150 \
    -o "$TMP/ours.csv" "$TMP"/sp/case_*.txt 2>"$TMP/fit.err"
  check "doubletty fit --covering ran" [ -s "$TMP/ours.csv" ]
  "$PY" "$ROOT/tests/py/cover_scipy.py" check "$TMP/sp" "$TMP/ours.csv" >"$TMP/check.out" 2>&1
  rc=$?
  sed 's/^/    /' "$TMP/check.out" | grep -v "^    ok" | grep -v "passed, .* failed"
  n_ok=$(grep -c '^ok' "$TMP/check.out")
  n_bad=$(grep -c '^FAIL' "$TMP/check.out")
  if [ "$rc" = 0 ] && [ "$n_ok" -gt 20 ] && [ "$n_bad" = 0 ]; then
    ok "covering vs SciPy: $n_ok checks"
  else
    bad "covering vs SciPy (exit $rc, $n_bad failed)"
    grep '^FAIL' "$TMP/check.out"
  fi
fi
finish
