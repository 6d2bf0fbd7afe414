#!/bin/sh
# doubletty fit: the CSV table (columns, one row per component, the empty row
# of a non-detection), recovery of a known doublet, the batch going on past a
# bad file, and clear refusals of bad input and absurd options.
. "$(dirname "$0")/../lib.sh"
AWKGEN=$ROOT/tests/scripts/fit_cmd_spectrum.awk

# spec NAME SEED COMPS [extra awk -v assignments...]
spec() {
  n=$1; s=$2; c=$3; shift 3
  awk -v lo=5850 -v hi=5940 -v step=0.1 -v snr=40 -v seed="$s" -v comps="$c" "$@" \
    -f "$AWKGEN" >"$TMP/$n"
}
# field NAME CSV [ROW]: value of column NAME in data row ROW (default 1)
field() {
  awk -F, -v name="$1" -v row="${3:-1}" '/^#/ { next } !h++ { for (i = 1; i <= NF; i++) if ($i == name) k = i; next }
    ++r == row { print (k ? $k : "NOCOLUMN") }' "$2"
}

spec det.txt 11 "20:0.8:15"          # one component at +20 km/s
spec none.txt 12 ""                  # nothing there
spec two.txt 13 "-120:0.6:10;60:0.9:12"

# ---- the table --------------------------------------------------------
$DT fit --fwhm 2 "$TMP/det.txt" "$TMP/none.txt" >"$TMP/out.csv" 2>"$TMP/err"
rc=$?
check "two good spectra: exit 0" [ $rc -eq 0 ]
check "summary line on stderr" grep -q '^doubletty: fitted 2 spectra, 0 failed' "$TMP/err"
hdr=$(grep -v '^#' "$TMP/out.csv" | head -n 1)
missing=
for col in file component v_kms v_err b_kms b_err logN logN_err chi2_red W_mA W_err_mA \
           logN_aod logN_limit suggested; do
  case ",$hdr," in *",$col,"*) ;; *) missing="$missing $col" ;; esac
done
check "header has every required column (missing:$missing)" [ -z "$missing" ]
ncol=$(grep -v '^#' "$TMP/out.csv" | head -n 1 | awk -F, '{print NF}')
bad_rows=$(awk -F, -v n="$ncol" '/^#/ { next } !h++ { next } NF != n' "$TMP/out.csv" | wc -l)
check "every row has the header's $ncol fields" [ "$bad_rows" -eq 0 ]
check "no progress bar when stderr is not a terminal" [ "$(tr -cd '\r' <"$TMP/err" | wc -c)" -eq 0 ]

# The detection: injected v = 20, b = 15 km/s, tau0 = 0.8 in 5891 ->
# log N = log10(0.8*15 / (1.497e-15 * 0.6408 * 5891.58)) = 12.327
# (tau0 = 1.497e-15 N f lambda / b: Spitzer 1978, eq. 3-50, from memory).
awk -F, '/^#/ { next } !h++ { for (i = 1; i <= NF; i++) col[$i] = i; next }
  $col["file"] ~ /det.txt$/ { print $col["suggested"], $col["v_kms"], $col["b_kms"], $col["logN"], $col["component"] }' \
  "$TMP/out.csv" >"$TMP/det.rows"
check "one component row for the detection" [ "$(wc -l <"$TMP/det.rows")" -eq 1 ]
read -r sug v b lgn comp <"$TMP/det.rows"
check "detection suggested as detected ($sug)" [ "$sug" = detected ]
check "v = $v within 3 km/s of 20" awk -v x="$v" 'BEGIN { exit !(x > 17 && x < 23) }'
check "b = $b within 3 km/s of 15" awk -v x="$b" 'BEGIN { exit !(x > 12 && x < 18) }'
check "log N = $lgn within 0.1 of 12.327" awk -v x="$lgn" 'BEGIN { exit !(x > 12.227 && x < 12.427) }'
check "component numbered 1" [ "$comp" = 1 ]

# The non-detection: one row, empty component fields, a limit.
awk -F, '/^#/ { next } !h++ { for (i = 1; i <= NF; i++) col[$i] = i; next }
  $col["file"] ~ /none.txt$/ { print $col["component"] "|" $col["v_kms"] "|" $col["logN"] "|" $col["logN_limit"] "|" $col["suggested"] }' \
  "$TMP/out.csv" >"$TMP/none.rows"
check "one row for the non-detection" [ "$(wc -l <"$TMP/none.rows")" -eq 1 ]
IFS='|' read -r comp v lgn lim sug <"$TMP/none.rows"
check "empty component fields" [ -z "$comp$v$lgn" ]
check "suggested not-detected ($sug)" [ "$sug" = not-detected ]
# The 3-sigma limit on W computed independently from the spectrum file by
# the documented rule (README, Measurements): a box of +-hw km/s, hw =
# sqrt(FWHM^2 + 4 ln 2 (10 km/s)^2) (the FWHM of a b = 10 km/s line through
# the LSF, Gaussian widths in quadrature -- common practice), moved over
# every pixel centre of Na I 5891.58 A (Morton 2003, ApJS 149, 205) within
# the window -600..600 km/s; W_box = sum (1 - F/C) dlambda and sigma_box =
# sqrt(sum (sigma/C dlambda)^2) over the pixels' overlaps with the box,
# relative to the continuum (mean flux away from the lines); the limit is
# the largest W_box + 3 sigma_box.  doubletty adds the continuum's
# uncertainty, so its limit may be a little higher: accepted within
# -3%..+15%.  The rule at v = 0 only (about -30%), a 1-sigma box or
# mA for A all fail.
wlim=$(field W_limit_mA "$TMP/out.csv" 2)
want=$(awk -v lam=5891.58 -v c=299792.458 -v fwhm=2 '
  /^#/ { next } { n++; w[n] = $1; f[n] = $2; s[n] = $3 }
  END {
    hw = sqrt(fwhm * fwhm + 4 * log(2) * 100)
    for (i = 1; i <= n; i++) if (w[i] < 5885 || w[i] > 5905) { cs += f[i]; cn++ }
    C = cs / cn
    best = -1e30
    for (k = 1; k <= n; k++) {
      vc = c * (w[k] / lam - 1); if (vc < -600 || vc > 600) continue
      l1 = lam * (1 + (vc - hw) / c); l2 = lam * (1 + (vc + hw) / c)
      W = 0; v = 0
      for (i = 1; i <= n; i++) {
        lo = i > 1 ? (w[i - 1] + w[i]) / 2 : w[1] - (w[2] - w[1]) / 2
        hi = i < n ? (w[i] + w[i + 1]) / 2 : w[n] + (w[n] - w[n - 1]) / 2
        a = lo > l1 ? lo : l1; b = hi < l2 ? hi : l2
        if (b > a) { W += (1 - f[i] / C) * (b - a); v += (s[i] / C * (b - a)) ^ 2 }
      }
      u = W + 3 * sqrt(v); if (u > best) best = u
    }
    printf "%.3f\n", 1e3 * best
  }' "$TMP/none.txt")
check "the 3-sigma W limit ($wlim mA) is the largest box W + 3 sigma over the window ($want mA)" \
  awk -v x="$wlim" -v y="$want" 'BEGIN { exit !(x != "" && x / y > 0.97 && x / y < 1.15) }'
# The column limit: that W on the full curve of growth at b = 2 km/s (the
# default --limit-b), re-computed with SciPy (tests/py/cog_scipy.py).
if need_py "column limit against SciPy's curve of growth"; then
  cog=$("$PY" "$ROOT/tests/py/cog_scipy.py" --invert 5891.5833 0.6408 6.16e7 \
        "$(awk -v w="$wlim" 'BEGIN { print w / 1000 }') 2")
  check "the column limit ($lim) is W_limit on the curve of growth at b = 2 ($cog)" \
    awk -v x="$lim" -v y="$cog" 'BEGIN { exit !(x != "" && x - y > -0.003 && x - y < 0.003) }'
fi
check "the settings record --limit-b" grep -q '^# limit-b=2$' "$TMP/out.csv"

# Two components; seeds and a fixed number of components.
$DT fit --fwhm 2 "$TMP/two.txt" >"$TMP/two.csv" 2>/dev/null
check "two injected components -> two rows" [ "$(awk '!/^#/ { n++ } END { print n - 1 }' "$TMP/two.csv")" -eq 2 ]
$DT fit --fwhm 2 --seed-v -100,50 "$TMP/two.csv" >/dev/null 2>"$TMP/err"
check "a non-spectrum file fails" grep -q 'two.csv' "$TMP/err"
$DT fit --fwhm 2 --ncomp 1 "$TMP/two.txt" >"$TMP/one.csv" 2>/dev/null
check "--ncomp 1 -> one row" [ "$(awk '!/^#/ { n++ } END { print n - 1 }' "$TMP/one.csv")" -eq 1 ]
$DT fit --fwhm 2 --seed-v -110,70 "$TMP/two.txt" >"$TMP/seed.csv" 2>/dev/null
check "--seed-v with two velocities -> two rows" [ "$(awk '!/^#/ { n++ } END { print n - 1 }' "$TMP/seed.csv")" -eq 2 ]

$DT fit --fwhm 2 --joint-continuum 2 "$TMP/det.txt" >"$TMP/joint.csv" 2>/dev/null
v=$(field v_kms "$TMP/joint.csv")
check "--joint-continuum 2: still v = $v within 3 km/s of 20" awk -v x="$v" 'BEGIN { exit !(x > 17 && x < 23) }'

# Deterministic; -o equals standard output.
$DT fit --fwhm 2 "$TMP/det.txt" "$TMP/none.txt" -o "$TMP/out2.csv" 2>/dev/null
check "-o FILE writes the same bytes as standard output" cmp -s "$TMP/out.csv" "$TMP/out2.csv"

# A progress bar when standard error is a terminal (script(1) gives a pty).
if command -v script >/dev/null 2>&1; then
  script -qec "$DT fit --fwhm 2 '$TMP/det.txt' '$TMP/none.txt' -o '$TMP/tty.csv'" /dev/null \
    >"$TMP/tty.out" 2>&1 </dev/null
  check "progress bar drawn on a terminal" grep -q 'fit \[=*' "$TMP/tty.out"
  check "the bar stays out of the table" cmp -s "$TMP/out.csv" "$TMP/tty.csv"
else
  skip "no script(1): progress bar on a terminal not checked"
fi

# ---- a bad file among good ones ----------------------------------------
$DT fit --fwhm 2 "$TMP/det.txt" "$TMP/nosuch.fits" "$TMP/none.txt" >"$TMP/mix.csv" 2>"$TMP/err"
rc=$?
check "one bad file: exit 1 ($rc)" [ $rc -eq 1 ]
check "the message names the bad file" grep -q "nosuch.fits" "$TMP/err"
check "summary counts it" grep -q '^doubletty: fitted 2 spectra, 1 failed' "$TMP/err"
check "the batch went on past it" grep -q 'none.txt' "$TMP/mix.csv"
check "the failed input has a row with status failed" \
  awk -F, '$2 ~ /nosuch.fits$/ && /,failed,/ { f = 1 } END { exit !f }' "$TMP/mix.csv"
check "rows in input order" [ "$(awk -F, '/^#/ { next } !h++ { next } { printf "%s", $1 }' "$TMP/mix.csv")" = 012 ]

# ---- bad input ----------------------------------------------------------
awk -v lo=6000 -v hi=6100 -v step=0.1 -v snr=40 -v seed=3 -v comps="" -f "$AWKGEN" >"$TMP/red.txt"
expect_fail "doublet outside the coverage" "red.txt: .*NaI 5891.*outside the data" \
  $DT fit --fwhm 2 "$TMP/red.txt"
spec masked.txt 14 "0:0.5:10" -v nanlo=5870 -v nanhi=5920
expect_fail "all-masked window" "masked.txt: .*masked" $DT fit --fwhm 2 "$TMP/masked.txt"
expect_fail "no resolution anywhere" "det.txt: .*--resolution" $DT fit "$TMP/det.txt"
expect_fail "negative R" "--resolution: R must be positive" $DT fit --resolution -5000 "$TMP/det.txt"
expect_fail "zero FWHM" "--fwhm: the FWHM must be positive" $DT fit --fwhm 0 "$TMP/det.txt"
expect_fail "empty window" "--window: empty velocity window" $DT fit --fwhm 2 --window 100:-100 "$TMP/det.txt"
expect_fail "equal window edges" "--window: empty velocity window" $DT fit --fwhm 2 --window 50:50 "$TMP/det.txt"
expect_fail "window not VLO:VHI" "--window: .*VLO:VHI" $DT fit --fwhm 2 --window 100 "$TMP/det.txt"
expect_fail "K >= N in --shard" "--shard 4/4: need 0 <= K < N" $DT fit --fwhm 2 --shard 4/4 "$TMP/det.txt"
expect_fail "negative K in --shard" "--shard -1/4" $DT fit --fwhm 2 --shard -1/4 "$TMP/det.txt"
expect_fail "--shard not K/N" "--shard: .*K/N" $DT fit --fwhm 2 --shard 3 "$TMP/det.txt"
expect_fail "unknown doublet" "unknown doublet 'XyZ'" $DT fit --fwhm 2 --doublet XyZ "$TMP/det.txt"
expect_fail "continuum order out of range" "--continuum-order: 12" $DT fit --fwhm 2 --continuum-order 12 "$TMP/det.txt"
expect_fail "joint continuum too large" "--joint-continuum: 9" $DT fit --fwhm 2 --joint-continuum 9 "$TMP/det.txt"
expect_fail "too many components" "--ncomp: 99" $DT fit --fwhm 2 --ncomp 99 "$TMP/det.txt"
expect_fail "seed outside the window" "--seed-v: 900 km/s lies outside" $DT fit --fwhm 2 --window -300:300 --seed-v 900 "$TMP/det.txt"
expect_fail "seed not a number" "--seed-v: 'abc' is not a number" $DT fit --fwhm 2 --seed-v 10,abc "$TMP/det.txt"
expect_fail "unknown option" "unknown option '--frobnicate'" $DT fit --frobnicate "$TMP/det.txt"
expect_fail "no files" "no spectrum given" $DT fit --fwhm 2
$DT fit --resolution -5000 "$TMP/det.txt" >/dev/null 2>&1
check "absurd options exit 2" [ $? -eq 2 ]

# ---- a target list gives per-target settings ----------------------------
spec shifted.txt 15 "0:0.8:12" -v vsys=450
cat >"$TMP/targets.list" <<EOF
# name the inputs relative to the list
shifted.txt vsys=450 fwhm=2 name=SHIFTED
det.txt fwhm=2 name=DET
EOF
$DT fit --list "$TMP/targets.list" >"$TMP/list.csv" 2>"$TMP/err"
check "target list: exit 0" [ $? -eq 0 ]
check "list: vsys of the target used" [ "$(field vsys "$TMP/list.csv" 1)" = 450.000 ]
check "list: name column" [ "$(field name "$TMP/list.csv" 1)" = SHIFTED ]
v=$(field v_kms "$TMP/list.csv" 1)
check "list: component near 0 km/s in the target's frame ($v)" awk -v x="$v" 'BEGIN { exit !(x > -5 && x < 5) }'
printf 'det.txt fwhm=2 colour=blue\n' >"$TMP/bad.list"
expect_fail "bad list line named" "bad.list: line 1" $DT fit --list "$TMP/bad.list"
printf '%s\n' "$TMP/det.txt" "$TMP/none.txt" | $DT fit --fwhm 2 --files-from - >"$TMP/ff.csv" 2>/dev/null
check "--files-from - gives the same table as the arguments" cmp -s "$TMP/out.csv" "$TMP/ff.csv"

# ---- FITS multi-row table: every row, or --row ---------------------------
if need_py "multi-row FITS table"; then
  "$PY" - "$TMP/rows.fits" <<'EOF'
import sys
import numpy as np
from astropy.io import fits
# three sightlines as rows of vector columns; Na I 5891 at v = -50, 0, +80
c = 299792.458
w = np.arange(5850.0, 5940.0, 0.1)
rng = np.random.default_rng(5)
flux, ivar = [], []
for v in (-50.0, 0.0, 80.0):
    tau = 0.0
    for lam, t in ((5891.5833, 0.9), (5897.5581, 0.45)):
        u = (c * (w / lam - 1) - v) / 12.0
        tau = tau + t * np.exp(-u * u)
    f = np.exp(-tau) + rng.normal(0, 0.02, w.size)
    flux.append(f); ivar.append(np.full(w.size, 1 / 0.02**2))
n = w.size
cols = [fits.Column(name='WAVE', format=f'{n}D', array=np.tile(w, (3, 1))),
        fits.Column(name='FLUX', format=f'{n}E', array=np.array(flux)),
        fits.Column(name='IVAR', format=f'{n}E', array=np.array(ivar))]
fits.HDUList([fits.PrimaryHDU(), fits.BinTableHDU.from_columns(cols)]).writeto(sys.argv[1])
EOF
  $DT fit --fwhm 2 "$TMP/rows.fits" >"$TMP/rows.csv" 2>"$TMP/err"
  check "multi-row table: exit 0 ($(head -c 200 "$TMP/err"))" [ $? -eq 0 ]
  check "rows 1, 2, 3 in order" [ "$(awk -F, '/^#/ { next } !h++ { for (i = 1; i <= NF; i++) if ($i == "row") k = i; next } { printf "%s", $k }' "$TMP/rows.csv")" = 123 ]
  check "all three share index 0 (one input)" [ "$(awk -F, '/^#/ { next } !h++ { next } { printf "%s", $1 }' "$TMP/rows.csv")" = 000 ]
  $DT fit --fwhm 2 --row 3 "$TMP/rows.fits" >"$TMP/row3.csv" 2>/dev/null
  v=$(field v_kms "$TMP/row3.csv")
  check "--row 3: the +80 km/s sightline ($v)" awk -v x="$v" 'BEGIN { exit !(x > 75 && x < 85) }'
fi

# --intervals covariance: every interval the symmetric error of the fit,
# said in the settings; the default is the profile likelihood
"$DT" demo "$TMP/dmo" >/dev/null 2>&1
"$DT" fit --list "$TMP/dmo/targets.list" --intervals covariance -o "$TMP/cov.csv" 2>/dev/null
check "--intervals covariance: the settings say so" grep -q '^# intervals=covariance$' "$TMP/cov.csv"
check "... and every interval is logN -+ logN_err" awk -F, '/^#/ { next } !h++ { for (i = 1; i <= NF; i++) c[$i] = i; next }
  $c["logN"] != "" { n++; if ($c["logN_err_lo"] != $c["logN_err"] || $c["logN_err_hi"] != $c["logN_err"]) bad++ }
  END { exit !(n > 0 && bad == 0) }' "$TMP/cov.csv"
"$DT" fit --list "$TMP/dmo/targets.list" -o "$TMP/prof.csv" 2>/dev/null
check "the default: profile, with asymmetric intervals somewhere" sh -c "grep -q '^# intervals=profile$' '$TMP/prof.csv' && awk -F, '/^#/ { next } !h++ { for (i = 1; i <= NF; i++) c[\$i] = i; next } \$c[\"logN\"] != \"\" && \$c[\"logN_err_lo\"] != \$c[\"logN_err_hi\"] { f = 1 } END { exit !f }' '$TMP/prof.csv'"
# --intervals calibrated: the same fits, and where a profile is not a
# parabola its ends searched again at a threshold from simulated spectra
# (calib.h): some interval changes (three sightlines of the demo)
grep -E '^(vpq01|vpq04|vpg05)' "$TMP/dmo/targets.list" | sed "s|^|$TMP/dmo/|" >"$TMP/three.list"
"$DT" fit --list "$TMP/three.list" -o "$TMP/p3.csv" 2>/dev/null
"$DT" fit --list "$TMP/three.list" --intervals calibrated -o "$TMP/c3.csv" 2>/dev/null
check "--intervals calibrated: the settings say so" grep -q '^# intervals=calibrated$' "$TMP/c3.csv"
cols() { # FILE: name, system, logN, its interval and chi2_red per row
  awk -F, '/^#/ { next } !h++ { for (i = 1; i <= NF; i++) c[$i] = i; next }
    { print $c["name"] "|" $c["system"] "|" $c["logN"] "|" $c["logN_err_lo"] "|" $c["logN_err_hi"] "|" $c["chi2_red"] }' "$1"
}
cols "$TMP/p3.csv" >"$TMP/p3.cols"
cols "$TMP/c3.csv" >"$TMP/c3.cols"
# its search refits a lone saturated or unresolved line from the other
# valleys first, and a lower chi2 found there moves the fit
check "... the same rows, each the profile's fit or one of lower chi2" sh -c "[ -s '$TMP/p3.cols' ] && paste -d'|' '$TMP/p3.cols' '$TMP/c3.cols' | awk -F'|' '{ if (\$1 != \$7 || \$2 != \$8) bad++; else if (\$3 != \$9 && !(\$12 < \$6)) bad++ } END { exit !(NR > 0 && bad == 0) }'"
check "... and some interval calibrated away from dchi2 = 1" sh -c "paste -d'|' '$TMP/p3.cols' '$TMP/c3.cols' | awk -F'|' '\$3 == \$9 && (\$4 != \$10 || \$5 != \$11) { f = 1 } END { exit !f }'"
expect_fail "--intervals of another kind" "not profile, calibrated or covariance" "$DT" fit --intervals exact "$TMP/dmo/vpq01.fits"

finish
