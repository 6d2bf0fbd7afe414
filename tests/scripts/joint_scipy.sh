#!/bin/sh
# Joint fits across doublets against a joint fit written in Python with
# SciPy (tests/py/joint_scipy.py: scipy.special.wofz Voigt profiles, a
# Gaussian LSF, pixel integration, scipy.optimize.least_squares) on
# synthetic two-species data: same, thermal and free b rules, every
# parameter within 0.1 of its error and the errors within 10%; and the
# table of atomic weights against the periodictable package.
. "$(dirname "$0")/../lib.sh"

DRIVER=$BUILD/tests/test_joint
if need_py "joint fit against SciPy"; then
  if "$PY" "$ROOT/tests/py/joint_scipy.py" "$DRIVER" "$TMP" >"$TMP/out" 2>&1; then
    ok "joint fits agree with SciPy ($(grep -c parameters "$TMP/out") data sets; $(sed -n 's/.*largest difference \([0-9.]*\) sigma.*/\1/p' "$TMP/out" | sort -g | tail -n 1) sigma at most)"
  else
    bad "joint fits agree with SciPy"
    sed 's/^/       /' "$TMP/out"
  fi
  if "$PY" -c 'import periodictable' 2>/dev/null; then
    if "$PY" "$ROOT/tests/py/joint_scipy.py" --masses "$DRIVER" >"$TMP/m" 2>&1; then
      ok "atomic weights agree with periodictable ($(head -c 40 "$TMP/m"))"
    else
      bad "atomic weights agree with periodictable"
      sed 's/^/       /' "$TMP/m"
    fi
  else
    missing "python3-periodictable" "atomic weights against periodictable"
  fi
fi
finish
