#!/bin/sh
# doubletty fit --joint: one velocity per component across doublets.  The
# table (rows per doublet with the shared component index and the same
# v_kms; T_K .. b_turb_err_kms at the end, filled only under the thermal
# rule), a doublet the spectrum does not cover (its row says so, the others
# are fitted), comma lists without --joint (each doublet on its own), a
# list line naming its doublets, and the refusals of bad input.
# Spectra: tests/scripts/fit_joint_spectrum.awk (Gaussian optical depth
# profiles, not our model); expected columns from the injected tau0:
# N = tau0 b / (1.497e-15 f lambda) (Spitzer 1978, eq. 3-50, from memory)
# with f, lambda of Morton (2003, ApJS 149, 205).
. "$(dirname "$0")/../lib.sh"
AWKGEN=$ROOT/tests/scripts/fit_joint_spectrum.awk
awk -v step=0.05 -v snr=50 -v seed=3 -v comps="-30:6:0.5:0.9;25:8:0.3:0.6" -f "$AWKGEN" >"$TMP/two.txt"
# col NAME CSV: that column of every data row
col() {
  awk -F, -v name="$1" '/^#/ { next } !h++ { for (i = 1; i <= NF; i++) if ($i == name) k = i; next }
    { print (k ? $k : "NOCOLUMN") }' "$2"
}
# rows CSV: doublet|component|v_kms|logN|status|T_K|b_turb_kms per data row
rows() {
  awk -F, '/^#/ { next } !h++ { for (i = 1; i <= NF; i++) c[$i] = i; next }
    { print $c["doublet"] "|" $c["component"] "|" $c["v_kms"] "|" $c["logN"] "|" $c["status"] "|" $c["T_K"] "|" $c["b_turb_kms"] }' "$1"
}
near() { awk -v x="$1" -v y="$2" -v t="$3" 'BEGIN { d = x - y; if (d < 0) d = -d; exit !(d <= t) }'; }

# ---- same: the table ------------------------------------------------------
$DT fit --doublet NaI,CaII --joint --fwhm 1 "$TMP/two.txt" >"$TMP/same.csv" 2>"$TMP/err"
check "joint fit: exit 0" [ $? -eq 0 ]
hdr=$(grep -v '^#' "$TMP/same.csv" | head -n 1)
case $hdr in
  *,frame,*T_K,T_err_K,b_turb_kms,b_turb_err_kms*) ok "new columns appended after the frame column" ;;
  *) bad "new columns appended after the frame column ($hdr)" ;;
esac
check "settings name the joint fit and its b rule" \
  sh -c "grep -q '^# joint=yes' '$TMP/same.csv' && grep -q '^# b-tie=same' '$TMP/same.csv'"
rows "$TMP/same.csv" >"$TMP/same.rows"
check "four rows: two components in each doublet" [ "$(wc -l <"$TMP/same.rows")" -eq 4 ]
check "two Na I rows, two Ca II rows" \
  [ "$(grep -c '^NaI|' "$TMP/same.rows")" -eq 2 -a "$(grep -c '^CaII|' "$TMP/same.rows")" -eq 2 ]
for k in 1 2; do
  vna=$(awk -F'|' -v k=$k '$1 == "NaI" && $2 == k { print $3 }' "$TMP/same.rows")
  vca=$(awk -F'|' -v k=$k '$1 == "CaII" && $2 == k { print $3 }' "$TMP/same.rows")
  check "component $k: the same v_kms in both doublets ($vna, $vca)" [ -n "$vna" -a "$vna" = "$vca" ]
done
v1=$(awk -F'|' '$1 == "NaI" && $2 == 1 { print $3 }' "$TMP/same.rows")
check "component 1 at the injected -30 km/s ($v1)" near "$v1" -30 1
# Na I, component 1: tau0 0.5, b 6 -> log N = log10(0.5*6/(1.497e-15*0.6408*5891.5833)) = 11.725
# Ca II, component 1: tau0 0.9, b 6 -> log10(0.9*6/(1.497e-15*0.6267*3934.7750)) = 12.165
n1=$(awk -F'|' '$1 == "NaI" && $2 == 1 { print $4 }' "$TMP/same.rows")
c1=$(awk -F'|' '$1 == "CaII" && $2 == 1 { print $4 }' "$TMP/same.rows")
check "Na I log N = $n1 within 0.1 of 11.725" near "$n1" 11.725 0.1
check "Ca II log N = $c1 within 0.1 of 12.165" near "$c1" 12.165 0.1
check "T_K and b_turb_kms empty unless thermal" \
  [ "$(awk -F'|' '$6 != "" || $7 != ""' "$TMP/same.rows" | wc -l)" -eq 0 ]
ncol=$(echo "$hdr" | awk -F, '{print NF}')
check "every row has the header's $ncol fields" \
  [ "$(awk -F, -v n="$ncol" '/^#/ { next } NF != n' "$TMP/same.csv" | wc -l)" -eq 0 ]

# ---- thermal, and a doublet the spectrum does not reach -------------------
$DT fit --doublet NaI,CaII,KI --joint --b-tie thermal --fwhm 1 "$TMP/two.txt" \
  >"$TMP/th.csv" 2>"$TMP/err"
check "thermal with an uncovered doublet: exit 0" [ $? -eq 0 ]
rows "$TMP/th.csv" >"$TMP/th.rows"
check "thermal: T_K and b_turb_kms on every component row" \
  [ "$(awk -F'|' '$2 != "" && ($6 == "" || $7 == "")' "$TMP/th.rows" | wc -l)" -eq 0 -a \
    "$(awk -F'|' '$2 != ""' "$TMP/th.rows" | wc -l)" -eq 4 ]
check "thermal: one T per component, the same in both doublets" \
  [ "$(awk -F'|' '$2 != "" { print $2, $6 }' "$TMP/th.rows" | sort -u | wc -l)" -eq 2 ]
check "K I row: status not-covered" grep -q '^KI|||.*|not-covered|' "$TMP/th.rows"
check "K I row: reason says it was left out and why" \
  grep -q 'left out of the joint fit: KI 7667: .*not covered' "$TMP/th.csv"

# ---- the lead doublet not covered: the others still fitted ----------------
$DT fit --doublet KI,NaI --joint --fwhm 1 "$TMP/two.txt" >"$TMP/lead.csv" 2>/dev/null
check "first doublet not covered: exit 0" [ $? -eq 0 ]
check "first doublet not covered: K I not-covered, Na I fitted" \
  sh -c "grep -q '^[0-9]*,.*,KI,.*not-covered' '$TMP/lead.csv' && [ \$(grep -c ',NaI,target,.*,ok,' '$TMP/lead.csv') -eq 2 ]"

# ---- without --joint: each doublet on its own ----------------------------
$DT fit --doublet CaII,NaI --fwhm 1 "$TMP/two.txt" >"$TMP/sep.csv" 2>"$TMP/err"
check "comma list without --joint: exit 0" [ $? -eq 0 ]
check "comma list without --joint: rows per doublet, in the order given" \
  [ "$(col doublet "$TMP/sep.csv" | uniq | tr '\n' ' ')" = "CaII NaI " ]
check "comma list without --joint: counted as one spectrum" grep -q '^doubletty: fitted 1 spectra, 0 failed' "$TMP/err"

# ---- a list line naming its doublets --------------------------------------
printf '%s doublet=NaI,CaII fwhm=1\n%s doublet=KI fwhm=1\n' "$TMP/two.txt" "$TMP/two.txt" >"$TMP/t.list"
$DT fit --joint --list "$TMP/t.list" >"$TMP/list.csv" 2>"$TMP/err"
check "list: exit 1 (one line's doublet is not covered)" [ $? -eq 1 ]
check "list: line 0 fitted jointly over Na I and Ca II" \
  [ "$(awk -F, '/^#/ { next } $1 == 0' "$TMP/list.csv" | grep -c ',ok,')" -eq 4 ]
check "list: line 1 failed, naming the reason" \
  sh -c "awk -F, '/^#/ { next } \$1 == 1' '$TMP/list.csv' | grep -q 'failed,.*not covered\|failed,.*outside the data'"

# ---- a species without absorption: its columns, not detected, its limit --
awk -v step=0.05 -v snr=50 -v seed=5 -v comps="-30:6:0:0.9;25:8:0:0.6" -f "$AWKGEN" >"$TMP/ca.txt"
$DT fit --doublet NaI,CaII --joint --fwhm 1 "$TMP/ca.txt" >"$TMP/ca.csv" 2>/dev/null
awk -F, '/^#/ { next } !h++ { for (i = 1; i <= NF; i++) c[$i] = i; next }
  { print $c["doublet"], $c["suggested"], ($c["logN_limit"] != "" ? "limit" : "none"), ($c["logN_err"] != "" ? "err" : "noerr") }' \
  "$TMP/ca.csv" | sort | uniq -c | awk '{ $1 = $1; print }' >"$TMP/ca.rows"
check "Ca II only: Ca II components detected without limits" grep -qx '2 CaII detected none err' "$TMP/ca.rows"
check "Ca II only: Na I rows not detected, with N, its error and a limit" \
  grep -qx '2 NaI not-detected limit err' "$TMP/ca.rows"

# ---- threads: the same bytes ---------------------------------------------
for i in 1 2 3; do printf '%s fwhm=1\n%s fwhm=1\n' "$TMP/two.txt" "$TMP/ca.txt"; done >"$TMP/j.list"
$DT fit --doublet NaI,CaII --joint --jobs 1 --list "$TMP/j.list" -o "$TMP/j1.csv" 2>/dev/null
$DT fit --doublet NaI,CaII --joint --jobs 2 --list "$TMP/j.list" -o "$TMP/j2.csv" 2>/dev/null
check "joint fits: --jobs 2 writes the --jobs 1 table byte for byte" cmp -s "$TMP/j1.csv" "$TMP/j2.csv"

# ---- refusals ------------------------------------------------------------
expect_fail "unknown doublet in the list" "unknown doublet 'FooI'" \
  $DT fit --doublet NaI,FooI --joint "$TMP/two.txt"
expect_fail "--b-tie without --joint" "--b-tie applies to joint fits" \
  $DT fit --doublet NaI,CaII --b-tie free "$TMP/two.txt"
expect_fail "unknown b rule" "'hot' is not same, thermal or free" \
  $DT fit --doublet NaI,CaII --joint --b-tie hot "$TMP/two.txt"
expect_fail "a doublet named twice" "'nai' is named twice" \
  $DT fit --doublet NaI,nai --joint "$TMP/two.txt"
printf 'XqI 5000.0 0.5 1e8 5010.0 0.25 1e8 invented test doublet\n' >"$TMP/xq.dat"
expect_fail "thermal with an element of unknown mass" "no atomic mass for 'XqI' \(element 'Xq'\)" \
  $DT fit --atomic "$TMP/xq.dat" --doublet NaI,XqI --joint --b-tie thermal "$TMP/two.txt"
expect_fail "--joint with --joint-continuum" "not available" \
  $DT fit --doublet NaI,CaII --joint --joint-continuum 2 "$TMP/two.txt"
# ---- a resolution per doublet reaches the linked one -----------------------
# The spectrum has no instrumental broadening; told that Ca II is seen
# through a 20 km/s line-spread function (and Na I through 1 km/s), a free
# b for Ca II must come out narrower than with 1 km/s for both, Na I's b
# unchanged (the LSF takes the width in quadrature, common practice).
$DT fit --doublet NaI,CaII --joint --b-tie free --fwhm 1 "$TMP/two.txt" >"$TMP/r1.csv" 2>/dev/null
$DT fit --doublet NaI,CaII --joint --b-tie free --fwhm NaI:1,CaII:20 "$TMP/two.txt" >"$TMP/r2.csv" 2>/dev/null
bcol() { awk -F, -v d="$2" '/^#/ { next } !h++ { for (i = 1; i <= NF; i++) c[$i] = i; next }
  $c["doublet"] == d && $c["component"] == 1 { print $c["b_kms"] }' "$1"; }
b1=$(bcol "$TMP/r1.csv" CaII); b2=$(bcol "$TMP/r2.csv" CaII)
n1=$(bcol "$TMP/r1.csv" NaI); n2=$(bcol "$TMP/r2.csv" NaI)
check "per-doublet --fwhm: Ca II b narrower through its own LSF ($b1 -> $b2)" \
  awk -v x="$b1" -v y="$b2" 'BEGIN { exit !(x != "" && y != "" && y < x - 1) }'
check "per-doublet --fwhm: Na I b unchanged ($n1, $n2)" \
  awk -v x="$n1" -v y="$n2" 'BEGIN { d = x - y; exit !(x != "" && d * d < 0.25) }'

expect_fail "--joint with --covering" "not available with --joint" \
  $DT fit --doublet NaI,CaII --joint --covering "$TMP/two.txt"
finish
