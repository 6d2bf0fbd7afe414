# doubletty map: tangent-plane offsets against astropy's WCS, the symbols
# by the counting rule, the figure files, the plot in a terminal, bad input.
. "$(dirname "$0")/../lib.sh"
cd "$TMP" || exit 1
cat >cat.csv <<'CSV'
name,doublet,system,component,v_kms,v_err,logN,logN_err,W_mA,W_limit_mA,logN_limit,ra_deg,dec_deg,suggested
A,NaI,target,1,40,2,12,0.1,300,,,150.00,2.10,detected
B,NaI,target,,,,,,20,60,11.9,150.25,2.00,not-detected
C,NaI,target,,,,,,20,250,12.6,150.10,1.80,not-detected
D,NaI,target,1,-25,3,11.5,0.2,80,,,149.90,2.30,detected
E,NaI,target,,,,,,,,,150.40,2.05,unusable
F,NaI,target,1,5,3,11.5,0.2,80,,,,,detected
CSV
"$DT" map cat.csv --threshold-mA 100 -o m.csv 2>err.txt
check "map runs" [ -s m.csv ]
check "header" grep -q "^name,ra_deg,dec_deg,x_arcmin,y_arcmin,status,v_kms,limit$" m.csv
st() { awk -F, -v n="$1" '$1 == n { print $6 }' m.csv; }
check "A detected" [ "$(st A)" = detected ]
check "B not detected (limit 60 <= 100)" [ "$(st B)" = not-detected ]
check "C left out (limit 250 > 100)" [ "$(st C)" = left-out ]
check "D not detected (80 < 100)" [ "$(st D)" = not-detected ]
check "E left out (unusable)" [ "$(st E)" = left-out ]
check "F without a position: noted" grep -q "1 sightline without a position" err.txt
check "A's velocity" [ "$(awk -F, '$1 == "A" { print $7 }' m.csv)" = "40.000" ]
if need_py "offsets against astropy WCS"; then
  "$PY" - >py.out 2>&1 <<'PYEOF'
# The offsets are the gnomonic (TAN) projection about the written centre:
# astropy.wcs (wcslib) with CRVAL the centre, CRPIX 0, CDELT 1/60 deg.
import csv
from astropy.wcs import WCS
lines = open("m.csv").read().splitlines()
meta = dict(l[2:].split("=", 1) for l in lines if l.startswith("# "))
w = WCS(naxis=2)
w.wcs.ctype = ["RA---TAN", "DEC--TAN"]
w.wcs.crval = [float(meta["centre_ra_deg"]), float(meta["centre_dec_deg"])]
w.wcs.crpix = [0, 0]
w.wcs.cdelt = [1 / 60, 1 / 60]
bad = 0
for r in csv.DictReader(l for l in lines if not l.startswith("#")):
    if not r["ra_deg"]:
        continue
    x, y = w.wcs_world2pix([[float(r["ra_deg"]), float(r["dec_deg"])]], 1)[0]
    ok = abs(x - float(r["x_arcmin"])) < 6e-5 and abs(y - float(r["y_arcmin"])) < 6e-5
    bad += not ok
    print(r["name"], x, y, r["x_arcmin"], r["y_arcmin"], "ok" if ok else "BAD")
print("result", bad)
PYEOF
  check "x, y equal astropy WCS TAN offsets to 1e-4 arcmin" grep -q "^result 0" py.out
fi
for f in m.pdf m.png m.svg; do
  "$DT" map cat.csv --figure $f -o out.csv --force 2>/dev/null
  check "figure $f written" [ -s $f ]
done
if need_py "figure files parsed"; then
  for f in m.pdf m.svg; do
    check "$("$PY" "$ROOT/tests/py/figure_check.py" $f 432 324)" "$PY" "$ROOT/tests/py/figure_check.py" $f 432 324
  done
  check "$("$PY" "$ROOT/tests/py/figure_check.py" m.png 900 675)" "$PY" "$ROOT/tests/py/figure_check.py" m.png 900 675
fi
if need_tool script "the map in a terminal"; then
  script -qc "'$DT' map cat.csv --threshold-mA 100" /dev/null 2>&1 | tr -d '\r' >tty.txt
  check "terminal: a map with the three symbols" sh -c "grep -q '^sky map' tty.txt && grep -q '[*]' tty.txt && grep -q ' v ' tty.txt && grep -q 'x' tty.txt"
fi
# 21-cm contours beneath: the demo's cube under the demo's first pass
"$DT" demo demo >/dev/null 2>&1 && "$DT" fit --list demo/targets.list -o demo.csv 2>/dev/null
"$DT" map demo.csv --doublet NaI --figure plain.svg -o /dev/stdout >/dev/null 2>&1
"$DT" map demo.csv --doublet NaI --hi demo/velloran_hi.fits --figure hi.svg -o hi.csv 2>/dev/null
check "--hi: the map is written (exit $?)" [ -s hi.svg ]
# contour strokes are 0.7 pt wide (fig_map.c); the plain map has none
check "--hi: contours drawn beneath the sightlines" [ "$(grep -c 'stroke-width:0.7' hi.svg)" -gt 0 ]
check "... and none without --hi" [ "$(grep -c 'stroke-width:0.7' plain.svg)" -eq 0 ]
expect_fail "--hi without a figure" "give --figure" "$DT" map demo.csv --doublet NaI --hi demo/velloran_hi.fits
expect_fail "--hi on a spectrum, not a cube: file named" "vpq01.fits" "$DT" map demo.csv --doublet NaI --hi demo/vpq01.fits --figure x.svg
check "... and no table written before the refusal" [ ! -e x.svg ]
expect_fail "--hi-window empty" "VLO must be below VHI" "$DT" map demo.csv --hi demo/velloran_hi.fits --hi-window 5:1 --figure y.svg
printf 'name,suggested\nA,detected\n' >nopos.csv
expect_fail "no position columns: file and column named" "nopos.csv.*ra_deg" "$DT" map nopos.csv
expect_fail "--vmax negative" "positive" "$DT" map cat.csv --vmax -3
expect_fail "figure of unknown type" "cannot tell" "$DT" map cat.csv --figure m.gif
finish
