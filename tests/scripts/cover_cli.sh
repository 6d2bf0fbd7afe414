#!/bin/sh
# Partial covering on the command line: `fit --covering` and a list's
# cover=1 fill the columns cf, cf_err, cf_flag (the last three of the
# table), empty without covering; a bad cover= names its line; the option is
# in the help and the run's settings; failed rows keep the column count.
# The spectra (tests/scripts/fit_cmd_spectrum.awk) have Doppler profiles in
# optical depth seen through I = 1 - C + C exp(-tau) (Hamann et al. 1997,
# ApJ 478, 80, eq. 1).
. "$(dirname "$0")/../lib.sh"
AWKGEN=$ROOT/tests/scripts/fit_cmd_spectrum.awk

# spec NAME SEED COMPS CF
spec() {
  awk -v lo=5870 -v hi=5920 -v step=0.04 -v snr=80 -v seed="$2" -v comps="$3" -v cf="$4" \
    -f "$AWKGEN" >"$TMP/$1"
}
# field NAME CSV [ROW]: value of column NAME in data row ROW (default 1)
field() {
  awk -F, -v name="$1" -v row="${3:-1}" '/^#/ { next } !h++ { for (i = 1; i <= NF; i++) if ($i == name) k = i; next }
    ++r == row { print (k ? $k : "NOCOLUMN") }' "$2"
}

spec part.txt 21 "0:4:15" 0.6     # tau0 4 in 5891, 2 in 5897; covers 60%
spec full.txt 22 "0:3:15" 1       # covers all
OPTS="--fwhm 2 --ncomp 1 --window=-150:150"

check "fit --help names --covering" sh -c "$DT fit --help | grep -q -- '--covering'"

$DT fit $OPTS --covering "$TMP/part.txt" "$TMP/full.txt" >"$TMP/cov.csv" 2>"$TMP/err"
check "fit --covering: exit 0" [ $? -eq 0 ]
hdr=$(grep -v '^#' "$TMP/cov.csv" | head -n 1)
check "cf, cf_err, cf_flag are the last three columns (after frame)" \
  sh -c "echo '$hdr' | grep -q ',frame,.*,cf,cf_err,cf_flag$'"
check "the run's settings say covering=yes" grep -q '^# covering=yes' "$TMP/cov.csv"
cf=$(field cf "$TMP/cov.csv" 1); ce=$(field cf_err "$TMP/cov.csv" 1); fl=$(field cf_flag "$TMP/cov.csv" 1)
echo "# part.txt: C_f = $cf +- $ce ($fl); true 0.6"
check "partial covering recovered: $cf within 3 sigma ($ce) of 0.6" \
  awk -v x="$cf" -v e="$ce" 'BEGIN { exit !(e > 0 && e < 0.1 && (x - 0.6) ^ 2 <= 9 * e * e) }'
check "partial covering flagged partial ($fl)" [ "$fl" = partial ]
cf=$(field cf "$TMP/cov.csv" 2); ce=$(field cf_err "$TMP/cov.csv" 2); fl=$(field cf_flag "$TMP/cov.csv" 2)
echo "# full.txt: C_f = $cf +- $ce ($fl); true 1"
check "full covering: $cf consistent with 1 ($ce)" \
  awk -v x="$cf" -v e="$ce" 'BEGIN { exit !(e > 0 && 1 - x <= 3 * e) }'
check "full covering: no flag ($fl)" [ -z "$fl" ]

$DT fit $OPTS "$TMP/part.txt" >"$TMP/plain.csv" 2>/dev/null
check "without covering: cf empty" [ -z "$(field cf "$TMP/plain.csv")" ]
check "without covering: cf_flag empty" [ -z "$(field cf_flag "$TMP/plain.csv")" ]
check "without covering: the setting is empty" grep -q '^# covering=$' "$TMP/plain.csv"

# a list: cover=1 on one line only
printf 'part.txt cover=1\nfull.txt\nfull.txt cover=0\n' >"$TMP/list.txt"
$DT fit $OPTS --list "$TMP/list.txt" >"$TMP/list.csv" 2>/dev/null
check "list cover=1: that line has C_f" [ -n "$(field cf "$TMP/list.csv" 1)" ]
check "list without cover=: no C_f" [ -z "$(field cf "$TMP/list.csv" 2)" ]
check "list cover=0: no C_f" [ -z "$(field cf "$TMP/list.csv" 3)" ]

# bad values name the line
printf 'part.txt\nfull.txt cover=2\n' >"$TMP/bad.txt"
$DT fit $OPTS --list "$TMP/bad.txt" >"$TMP/bad.csv" 2>"$TMP/bad.err"
check "cover=2: exit 1" [ $? -eq 1 ]
check "cover=2: the message names the line and the values" \
  grep -q 'line 2.*cover must be 0 or 1' "$TMP/bad.err"
printf 'full.txt cover=1 cover=1\n' >"$TMP/twice.txt"
$DT fit $OPTS --list "$TMP/twice.txt" >/dev/null 2>"$TMP/twice.err"
check "cover= twice: refused" grep -q "line 1.*'cover' given twice" "$TMP/twice.err"
ncol=$(echo "$hdr" | awk -F, '{print NF}')
bad_rows=$(sed 's/"[^"]*"/Q/g' "$TMP/bad.csv" | awk -F, -v n="$ncol" '/^#/ { next } !h++ { next } NF != n' | wc -l)
check "a failed row keeps the header's $ncol fields" [ "$bad_rows" -eq 0 ]
check "the failed row is there" grep -q ',failed,' "$TMP/bad.csv"
finish
