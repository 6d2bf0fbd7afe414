#!/bin/sh
# The model with a line-spread width per pixel (R varying across the
# window) against a direct numerical convolution with the varying Gaussian
# in NumPy/SciPy (tests/py/lsf_numpy.py), within the error bound of the
# documented discretisation.
. "$(dirname "$0")/../lib.sh"

if need_py "model with widths per pixel against NumPy"; then
  if "$PY" "$ROOT/tests/py/lsf_numpy.py" "$BUILD/tests/test_model_lsf" >"$TMP/py.out" 2>&1; then
    ok "widths per pixel vs direct convolution ($(tail -n 1 "$TMP/py.out"))"
  else
    bad "widths per pixel vs direct convolution"
    sed 's/^/       /' "$TMP/py.out"
  fi
fi
finish
