#!/bin/sh
# Cross-check of the Voigt-component fitter against an independent SciPy
# implementation (the peer script in the shared folder: the same physics,
# scipy.optimize.curve_fit with a numerical Jacobian).  The peer makes 200
# synthetic Na I spectra and fits them; we fit the same files (two
# components started where the peer starts them, continuum fixed at 1) and
# require the best-fit parameters to agree within 0.1 sigma (the peer's
# sigma) for at least 95% of the spectra -- both through the library (the
# test_fit_peer driver) and through `doubletty fit` with the same seeds.
#
# Velocities: ours are in the component's rest frame and the peer's Doppler
# widths use the rest wavelength instead of the shifted one: a difference of
# v/c ~ 1e-3 of b, negligible against the errors.
. "$(dirname "$0")/../lib.sh"

PEER=$SHARED/peer/peer_fit.py
DRIVER=$BUILD/tests/test_fit_peer
# The peer's spectra and fits depend only on its script, the interpreter and
# the arguments: they are kept in the build directory under the SHA-256 of
# all three, and a later run with the same key reuses them (its ~15 s of
# Python are then skipped; our side is always refitted).
if need_py "fit against the SciPy peer"; then
  if [ ! -f "$PEER" ]; then
    missing "$PEER" "fit against the SciPy peer"
  else
    key=$({ cat "$PEER"; echo "make 200; fit in two halves"
            "$PY" -c 'import sys, numpy, scipy, astropy; print(sys.version, numpy.__version__, scipy.__version__, astropy.__version__)'
          } | sha256sum | cut -c1-64)
    CACHE=$BUILD/peer-cache/$key
    if [ -f "$CACHE/peer.csv" ] && [ -d "$CACHE/spec" ]; then
      ok "peer output reused from $CACHE (same script, interpreter and arguments)"
    else
      rm -rf "$CACHE"
      mkdir -p "$CACHE.tmp.$$" && CACHE_NEW=$CACHE.tmp.$$
      "$PY" "$PEER" make "$CACHE_NEW/spec" 200 >/dev/null 2>"$TMP/make.err"
      check "peer made 200 spectra" test "$(ls "$CACHE_NEW/spec" | grep -c '^spec_.*\.fits$')" -eq 200
      # The peer fits every file of a folder; two halves at once use both cores.
      mkdir "$TMP/h0" "$TMP/h1"
      i=0
      for f in "$CACHE_NEW"/spec/spec_*.fits; do
        ln -s "$f" "$TMP/h$((i % 2))/$(basename "$f")"
        i=$((i + 1))
      done
      "$PY" "$PEER" fit "$TMP/h0" >"$TMP/p0.csv" 2>"$TMP/p0.err" &
      p0=$!
      "$PY" "$PEER" fit "$TMP/h1" >"$TMP/p1.csv" 2>"$TMP/p1.err" &
      p1=$!
      wait $p0
      r0=$?
      wait $p1
      r1=$?
      check "peer fits ran" test $r0 -eq 0 -a $r1 -eq 0
      grep -hv '^fits_per_s' "$TMP/p0.csv" "$TMP/p1.csv" | sort >"$CACHE_NEW/peer.csv"
      # kept only when complete (a concurrent run may have kept it first)
      if [ $r0 -eq 0 ] && [ $r1 -eq 0 ] && [ "$(wc -l <"$CACHE_NEW/peer.csv")" -ge 200 ]; then
        mv "$CACHE_NEW" "$CACHE" 2>/dev/null || rm -rf "$CACHE_NEW"
      else
        mv "$CACHE_NEW" "$TMP/peer-failed"; CACHE=$TMP/peer-failed
      fi
      [ -d "$CACHE" ] || CACHE=$TMP/peer-failed
    fi
    ln -s "$CACHE/spec" "$TMP/spec"
    cp "$CACHE/peer.csv" "$TMP/peer.csv"

    "$DRIVER" "$TMP/spec" "$ROOT/share/doubletty/atomic.dat" >"$TMP/ours.csv" 2>"$TMP/ours.err"
    check "library fits ran" test $? -eq 0
    if "$PY" "$ROOT/tests/py/fit_peer_compare.py" "$TMP/peer.csv" "$TMP/ours.csv" 0.1 0.95 \
        >"$TMP/cmp.txt"; then
      ok "library fit agrees with the peer within 0.1 sigma for >= 95%: $(head -1 "$TMP/cmp.txt")"
    else
      bad "library fit vs peer: $(cat "$TMP/cmp.txt")"
    fi

    "$DT" fit --doublet NaI --resolution 20000 --window -400:200 --continuum-order -1 \
      --seed-v 0,-220 "$TMP"/spec/spec_*.fits -o "$TMP/cmd.csv" 2>"$TMP/cmd.err"
    check "doubletty fit ran on the 200 spectra" test $? -eq 0
    if "$PY" "$ROOT/tests/py/fit_peer_compare.py" "$TMP/peer.csv" "$TMP/cmd.csv" 0.1 0.95 \
        >"$TMP/cmp2.txt"; then
      ok "doubletty fit agrees with the peer within 0.1 sigma for >= 95%: $(head -1 "$TMP/cmp2.txt")"
    else
      bad "doubletty fit vs peer: $(cat "$TMP/cmp2.txt")"
    fi
  fi
fi
finish
