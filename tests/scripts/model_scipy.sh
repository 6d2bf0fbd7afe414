#!/bin/sh
# The doublet model against an independent evaluation in Python with SciPy's
# Faddeeva function (scipy.special.wofz): optical depths of thin, saturated
# and damped lines; the pixel model against a re-implementation of the
# discretisation documented in include/doubletty/model.h (cases whose lines
# the cells resolve); and every case, also lines far narrower than the cells
# on survey-like pixels, against a far finer direct convolution, within the
# documented error bounds.
. "$(dirname "$0")/../lib.sh"

DRIVER=$BUILD/tests/test_model
if need_py "model against scipy.special.wofz"; then
  # one interpreter for the three checks (importing SciPy once)
  "$PY" "$ROOT/tests/py/model_scipy.py" --into "$TMP" "$DRIVER" tau pixels fine >"$TMP/py.out" 2>&1
  for what in tau pixels fine; do
    rc=1; { read -r rc <"$TMP/$what.rc"; } 2>/dev/null
    if [ "$rc" = 0 ]; then
      ok "model vs SciPy: $what ($(tail -n 1 "$TMP/$what.out"))"
    else
      bad "model vs SciPy: $what"
      sed 's/^/       /' "$TMP/$what.out" "$TMP/py.out" 2>/dev/null
    fi
  done
fi
finish
