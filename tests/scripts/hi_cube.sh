# doubletty hi against analytic cubes (tests/py/hicube_make.py, astropy.io.fits):
# a Gaussian line T0 = 20 K, V0 = 15 km/s, sigma = 8 km/s gives
# N(HI) = 1.823e18 T0 sigma sqrt(2 pi) (the optically thin relation, Dickey &
# Lockman 1990) within 0.5%, the velocity within 0.2 km/s and the
# dispersion within 0.2 km/s -- the same from a VRAD and a FREQ axis, in K
# and in Jy/beam.  Outside the map and on blank pixels: status rows.  Bad
# headers: one error line.
. "$(dirname "$0")/../lib.sh"

need_py "analytic HI cubes" || { finish; exit 1; }
cd "$TMP" || exit 1
N=$("$PY" "$ROOT/tests/py/hicube_make.py" "$TMP" 2>&1) || { bad "cubes written: $N"; finish; exit 1; }
ok "analytic cubes written (N = $N cm^-2)"
logN=$(awk -v n="$N" 'BEGIN{printf "%.5f", log(n)/log(10)}')
printf '0 1\n1 1\n2 1\n' >s.txt
cat >l.list <<EOF2
s.txt name=centre ra=150.0 dec=20.0 vsys=0
s.txt name=offset ra=150.02 dec=20.03 vsys=0
s.txt name=far ra=151 dec=20.0 vsys=0
s.txt name=blank ra=150.07 dec=19.95 vsys=0
EOF2
for c in vrad_K freq_K vrad_Jy; do
  "$DT" hi "$c.fits" --list l.list -o "$c.csv" 2>"$c.err"; rc=$?
  check "$c: runs (exit $rc: 0)" [ $rc -eq 0 ]
  check "$c: header" sh -c "grep -v '^#' $c.csv | head -1 | grep -qx 'name,ra_deg,dec_deg,frame,logN_HI,logN_HI_err,v_HI_kms,sigma_HI_kms,T_peak_K,status'"
  for who in centre offset; do
    line=$(grep "^$who," "$c.csv")
    check "$c $who: status ok, frame BARYCENT" sh -c "echo '$line' | awk -F, '{exit !(\$10 == \"ok\" && \$4 == \"BARYCENT\")}'"
    check "$c $who: N(HI) within 0.5% of the analytic value" awk -v l="$line" -v n="$N" 'BEGIN{split(l, a, ","); r = 10^a[5] / n; exit !(r > 0.995 && r < 1.005)}'
    check "$c $who: velocity within 0.2 km/s of 15" awk -v l="$line" 'BEGIN{split(l, a, ","); d = a[7] - 15; exit !(d < 0.2 && d > -0.2)}'
    check "$c $who: dispersion within 0.2 km/s of 8" awk -v l="$line" 'BEGIN{split(l, a, ","); d = a[8] - 8; exit !(d < 0.2 && d > -0.2)}'
    check "$c $who: peak T_B within 0.5% of 20 K" awk -v l="$line" 'BEGIN{split(l, a, ","); exit !(a[9] > 19.9 && a[9] < 20.1)}'
  done
  check "$c: outside the map: status outside" grep -q '^far,.*,outside$' "$c.csv"
  check "$c: on blank pixels: status blanked" grep -q '^blank,.*,blanked$' "$c.csv"
  check "$c: the optically-thin caution is printed" grep -q "lower limit where it is optically thick" "$c.err"
done
# the same numbers from all three cubes
for c in freq_K vrad_Jy; do
  check "$c gives the VRAD/K values (logN to 0.001 dex, v to 0.05 km/s)" awk -F, '
    NR == FNR { if ($1 == "centre") { n = $5; v = $7 } next }
    $1 == "centre" { d = $5 - n; e = $7 - v; exit !(d < 0.001 && d > -0.001 && e < 0.05 && e > -0.05) }' vrad_K.csv "$c.csv"
done
# --window, --aperture
"$DT" hi vrad_K.fits --list l.list --window -30:60 --aperture 45 -o w.csv 2>/dev/null
check "--window and --aperture: N(HI) within 0.5%" awk -F, -v n="$N" '$1 == "centre" {r = 10^$5 / n; exit !(r > 0.995 && r < 1.005)}' w.csv
# worked example (Rayleigh-Jeans, common practice): S = 10 mJy/beam at
# nu = 1.4204 GHz, beam 60" x 60": T_B = 1.222e6 * 0.010 / (1.4204^2 * 3600)
# = 1.6824 K (by hand: 1.4204^2 = 2.01754; 2.01754 * 3600 = 7263.1;
# 12220 / 7263.1 = 1.6825)
"$DT" hi example.fits --list l.list -o ex.csv 2>/dev/null
check "worked Jy/beam -> K example: peak 1.6825 K (+-0.002)" awk -F, '$1 == "centre" {exit !($9 > 1.6805 && $9 < 1.6845)}' ex.csv
# frames: the cube is barycentric; --frame LSRK moves the velocity by the
# LSRK correction at that position (doubletty info on a spectrum there says how much)
"$DT" hi vrad_K.fits --list l.list --frame LSRK -o k.csv 2>/dev/null
check "--frame LSRK: the frame column says LSRK" grep -q '^centre,.*,LSRK,.*,ok$' k.csv
# the HI velocity moves by the same LSRK correction the spectra get at that
# position (itself checked against astropy in frames_astropy.sh)
"$PY" -c "
from astropy.io import fits
import numpy as np
h = fits.Header()
h['CTYPE1'] = 'WAVE'; h['CRVAL1'] = 5800.0; h['CDELT1'] = 0.5; h['CRPIX1'] = 1.0
h['SPECSYS'] = 'BARYCENT'; h['RA'] = 150.0; h['DEC'] = 20.0
fits.PrimaryHDU(np.ones(50), header=h).writeto('pos.fits', overwrite=True)"
shift=$("$DT" info --frame LSRK pos.fits 2>/dev/null | awk '/^frame /{print $7}')
check "--frame LSRK: v_HI moves by the LSRK correction at the position ($shift km/s)" awk -F, -v s="$shift" '
  NR == FNR { if ($1 == "centre") v = $7; next }
  $1 == "centre" { d = $7 - v - s; exit !(s != "" && d < 0.02 && d > -0.02) }' vrad_K.csv k.csv
# bad headers: one error line naming the problem
expect_fail "no BUNIT: one error" "nobunit.fits: BUNIT: no BUNIT" "$DT" hi nobunit.fits --list l.list
expect_fail "no spectral axis: one error" "nospec.fits: CTYPE: no spectral axis" "$DT" hi nospec.fits --list l.list
expect_fail "Jy/beam without a beam: one error" "nobeam.fits: BMAJ: .*BMAJ and BMIN" "$DT" hi nobeam.fits --list l.list
check "... each a single line" [ "$(wc -l <"$TMP/ef.err")" -eq 1 ]
finish
