#!/bin/sh
# Resolution per line, end to end: a spectrum whose line-spread function
# widens across the window (R from 3000 to 9000, synthesised in NumPy/SciPy
# by tests/py/lsf_synth.py, independently of doubletty's model) fitted with
# --resolution-table gives the truth and the same answer as a spectrum of
# constant R (the R at the line) fitted with that R; the same from a FITS
# RESPOWER column (written with astropy.io.fits) and from R= per doublet in
# a list; which source wins; bad tables refused with clear messages.
. "$(dirname "$0")/../lib.sh"

need_py "R(lambda) spectra synthesised with NumPy/SciPy" || { finish; exit; }
"$PY" "$ROOT/tests/py/lsf_synth.py" "$TMP" || { bad "synthesis"; finish; exit; }
read -r LOGN B V RD2 <"$TMP/truth.txt"

# fit NAME ARGS...: fit into $TMP/NAME.csv (one component)
fit() { n=$1; shift; (cd "$TMP" && "$DT" fit --ncomp 1 -o "$n.csv" "$@") >"$TMP/$n.out" 2>&1; }
# the values of the first row: status logN logN_err b_kms b_err v_kms v_err chi2_red lsf_fwhm_kms lsf_source
row() {
  "$PY" - "$TMP/$1.csv" <<'PYEOF'
import csv, sys
rows = list(csv.DictReader(l for l in open(sys.argv[1]) if not l.startswith("#")))
r = rows[0]
print(" ".join(r[k] or "-" for k in ("status", "logN", "logN_err", "b_kms", "b_err", "v_kms", "v_err", "chi2_red", "lsf_fwhm_kms")), r["lsf_source"])
PYEOF
}
# near A B TOL: |A - B| <= TOL
near() { awk -v a="$1" -v b="$2" -v t="$3" 'BEGIN { d = a - b; if (d < 0) d = -d; exit !(d <= t) }'; }

fit table --resolution-table table.txt var.txt
set -- $(row table); lN=$2 lNe=$3 b=$4 be=$5 v=$6 ve=$7; shift 9; src="$*"
# noise-free data: only the model's own discretisation separates the fit
# from the truth; it must stay within a fifth of the 1-sigma errors
check "R(lambda) table: log N $lN (truth $LOGN, error $lNe)" near "$lN" "$LOGN" "$(awk -v e="$lNe" 'BEGIN{print 0.2*e}')"
check "R(lambda) table: b $b (truth $B, error $be)" near "$b" "$B" "$(awk -v e="$be" 'BEGIN{print 0.2*e}')"
check "R(lambda) table: v $v (truth $V, error $ve)" near "$v" "$V" "$(awk -v e="$ve" 'BEGIN{print 0.2*e}')"
check "the source is named in the output ($src)" [ "$src" = "table table.txt" ]
check "the table's name in the run's settings" grep -q "^# resolution-table=table.txt" "$TMP/table.csv"

fit const --resolution "$RD2" const.txt
set -- $(row const); cN=$2 cb=$4 cv=$6
check "constant R $RD2 (the table's at D2) on its own spectrum: log N $cN, b $cb, v $cv agree with the table's fit" \
  sh -c "$(printf 'awk -v a=%s -v b=%s -v c=%s -v x=%s -v y=%s -v z=%s -v e=%s -v f=%s -v g=%s' "$lN" "$b" "$v" "$cN" "$cb" "$cv" "$lNe" "$be" "$ve") 'BEGIN { exit !((a-x)^2 <= (0.1*e)^2 && (b-y)^2 <= (0.1*f)^2 && (c-z)^2 <= (0.1*g)^2) }'"

# a single R (the table's lowest) on the varying spectrum is wrong, and the
# fit shows it: the comparison above can fail
fit wrong --resolution 3000 var.txt
set -- $(row wrong); wN=$2 wchi=$8
check "one R for the whole window misfits (log N $wN, chi2_red $wchi)" \
  awk -v a="$wN" -v t="$LOGN" -v e="$lNe" -v c="$wchi" 'BEGIN { d = a - t; exit !((d > 5*e || d < -5*e) && c > 10) }'

fit fits var.fits
set -- $(row fits); fN=$2 fb=$4; shift 9; src="$*"
check "FITS column RESPOWER: log N $fN, b $fb as with the table" sh -c "near() { awk -v a=\$1 -v b=\$2 -v t=\$3 'BEGIN{d=a-b;if(d<0)d=-d;exit !(d<=t)}'; }; near $fN $lN 0.0011 && near $fb $b 0.011"
check "FITS column named as the source ($src)" [ "$src" = "column RESPOWER (resolving power)" ]

# R= per doublet in a list; which source wins
printf 'const.txt R=CaII:3000,NaI:%s\n' "$RD2" >"$TMP/named.list"
fit named --list named.list
set -- $(row named); check "list R=CaII:3000,NaI:$RD2: NaI takes its own R (log N $2)" near "$2" "$cN" 0.0005
check "the list named as the source" [ "${10}" = list ]
printf 'const.txt R=CaII:%s,3000\n' "$RD2" >"$TMP/plain.list"
fit plain --list plain.list
set -- $(row plain); check "list R=CaII:...,3000: NaI takes the plain 3000 (chi2_red $8)" awk -v c="$8" 'BEGIN { exit !(c > 10) }'
printf 'var.fits R=3000\n' >"$TMP/over.list"
fit over --list over.list
set -- $(row over); check "the list's R= beats the file's column (source ${10})" [ "${10}" = list ]
fit tabover --resolution-table table.txt --list over.list
set -- $(row tabover); check "--resolution-table beats the list's R= (source ${10})" [ "${10}" = table ]
fit optover --resolution 3000 --resolution-table table.txt var.fits
set -- $(row optover); check "--resolution beats the table and the column (source ${10})" [ "${10}" = option ]
fit optnamed --resolution "CaII:3000,NaI:$RD2" const.txt
set -- $(row optnamed); check "--resolution NaI:R per doublet (log N $2)" near "$2" "$cN" 0.0005

FW=$(awk -v r="$RD2" 'BEGIN { printf "%.6f", 299792.458 / r }')
fit fwnamed --fwhm "CaII:80,NaI:$FW" const.txt
set -- $(row fwnamed); check "--fwhm NaI:c/R per doublet (log N $2)" near "$2" "$cN" 0.0005

# bad tables: one message naming the option, the file, the line and the problem
printf '5850 3000\n5950 9000\n5900 4000\n' >"$TMP/unsorted.txt"
expect_fail "unsorted table refused" "fit: --resolution-table .*unsorted.txt: line 3: wavelengths must increase" \
  "$DT" fit --resolution-table "$TMP/unsorted.txt" "$TMP/var.txt"
printf '5850 3000\n5950 R9000\n' >"$TMP/text.txt"
expect_fail "non-numeric R refused" "text.txt: line 2: R = 'R9000' is not a positive resolving power" \
  "$DT" fit --resolution-table "$TMP/text.txt" "$TMP/var.txt"
printf '5850 3000\n5950 0\n' >"$TMP/zero.txt"
expect_fail "R = 0 refused" "zero.txt: line 2: R = '0' is not a positive resolving power" \
  "$DT" fit --resolution-table "$TMP/zero.txt" "$TMP/var.txt"
printf '5850 3000\n5950 -1\n' >"$TMP/neg.txt"
expect_fail "R < 0 refused" "neg.txt: line 2: R = '-1'" "$DT" fit --resolution-table "$TMP/neg.txt" "$TMP/var.txt"
expect_fail "a missing table refused" "fit: --resolution-table .*nothere.txt: cannot open" \
  "$DT" fit --resolution-table "$TMP/nothere.txt" "$TMP/var.txt"
printf '5890 3000\n5950 9000\n' >"$TMP/short.txt"
expect_fail "a table not reaching the window: the spectrum fails naming the table and the wavelength" \
  "no line-spread width at 58(79|80)\.[0-9]+ A from table .*short.txt" \
  "$DT" fit --resolution-table "$TMP/short.txt" -o "$TMP/short.csv" "$TMP/var.txt"
expect_fail "--resolution per doublet: a bad value refused" "--resolution: R must be positive" \
  "$DT" fit --resolution "NaI:-3" "$TMP/var.txt"
printf 'var.txt R=NaI:abc\n' >"$TMP/badr.list"
expect_fail "list R=NaI:abc refused naming the line" "line 1: R must be positive" \
  "$DT" fit --list "$TMP/badr.list"

"$DT" info "$TMP/var.fits" >"$TMP/info.out" 2>&1
check "info shows the file's widths per pixel (R 3000-9000, as written)" \
  grep -q "line-spread per pixel from column RESPOWER (resolving power): R 3000-9000" "$TMP/info.out"

# the other commands that build models take the table too
check "figure --resolution-table draws the varying spectrum" \
  sh -c "'$DT' figure --resolution-table '$TMP/table.txt' --format png -o '$TMP/fig' '$TMP/var.txt' 2>/dev/null"
expect_fail "figure takes the table (one that stops short fails, naming it)" \
  "no line-spread width at 58(79|80)\.[0-9]+ A from table .*short.txt" \
  "$DT" figure --resolution-table "$TMP/short.txt" --format png -o "$TMP/fig2" "$TMP/var.txt"
"$DT" inspect --resolution-table "$TMP/table.txt" --session "$TMP/i.session" --replay-keys /dev/null \
  --screen-dump "$TMP/dump" --size 120x40 "$TMP/var.txt" >/dev/null 2>&1
check "inspect --resolution-table: the header shows R(lambda) at the line" grep -q "R(lambda) 57[0-9][0-9]" "$TMP/dump"
check "inspect says where the widths come from" grep -q "line-spread width per pixel from table .*table.txt" "$TMP/dump"
"$DT" inspect --session "$TMP/j.session" --replay-keys /dev/null --screen-dump "$TMP/dump2" --size 120x40 \
  "$TMP/var.fits" >/dev/null 2>&1
check "inspect of a FITS table with RESPOWER takes the column" grep -q "from column RESPOWER" "$TMP/dump2"
# a session made with the table is reproduced by log --verify given it again
printf 'refit\nverdict-detected\n' >"$TMP/keys"
"$DT" inspect --resolution-table "$TMP/table.txt" --session "$TMP/v.session" --replay-keys "$TMP/keys" \
  "$TMP/var.txt" >/dev/null 2>&1
check "log --verify --resolution-table reproduces a fit made with the table" \
  sh -c "'$DT' log --verify --resolution-table '$TMP/table.txt' '$TMP/v.session' | grep -q '^reproduced'"
check "log --verify without the table does not (the session records one R)" \
  sh -c "'$DT' log --verify '$TMP/v.session' | grep -q '^MISMATCH'"

printf '%s R=NaI:3000\n' "$TMP/var.fits" >"$TMP/ilist.list"
"$DT" inspect --list "$TMP/ilist.list" --session "$TMP/k.session" --replay-keys /dev/null --screen-dump "$TMP/dump3" \
  --size 120x40 >/dev/null 2>&1
check "inspect: the list's R=NaI:3000 beats the file's column" sh -c "grep -q ' R 3000 ' '$TMP/dump3' && ! grep -q 'R(lambda)' '$TMP/dump3'"
finish
