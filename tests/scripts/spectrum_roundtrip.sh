#!/bin/sh
# Files written by astropy in every layout doubletty reads (linear, WAVE-LOG,
# log10 and air images, image + ERR / IVAR HDUs, table columns, table rows
# with array columns, text) come back from `doubletty info --pixels`
# identically: wavelength to 1e-9 relative, flux exactly.  The Python side
# (tests/py/spectrum_roundtrip.py) writes the files and computes the expected
# wavelengths with astropy.wcs and numpy.
. "$(dirname "$0")/../lib.sh"

if need_py "astropy round trip of every spectrum layout"; then
  "$PY" "$ROOT/tests/py/spectrum_roundtrip.py" "$DT" "$TMP" >"$TMP/rt.log" 2>&1
  rc=$?
  while IFS= read -r line; do
    case $line in
      "ok   - "*) ok "${line#ok   - }" ;;
      "FAIL - "*) bad "${line#FAIL - }" ;;
      *" passed, "*" failed") ;;
      *) echo "  $line" ;;
    esac
  done <"$TMP/rt.log"
  [ $rc -eq 0 ] || grep -q '^FAIL' "$TMP/rt.log" || bad "spectrum_roundtrip.py exited $rc"
fi
finish
