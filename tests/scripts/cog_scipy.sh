#!/bin/sh
# The curve of growth (include/doubletty/cog.h) against an independent
# evaluation with SciPy (scipy.special.wofz, scipy.integrate.quad):
# tests/py/cog_scipy.py, thin to damped lines, b 0.5-20 km/s.
. "$(dirname "$0")/../lib.sh"

if need_py "curve of growth against SciPy"; then
  if "$BUILD/tests/test_cog" --table >"$TMP/table" &&
     "$PY" "$ROOT/tests/py/cog_scipy.py" <"$TMP/table" >"$TMP/py.out" 2>&1; then
    ok "curve of growth vs SciPy ($(tail -n 1 "$TMP/py.out"))"
  else
    bad "curve of growth vs SciPy"
    sed 's/^/       /' "$TMP/py.out"
  fi
fi
finish
