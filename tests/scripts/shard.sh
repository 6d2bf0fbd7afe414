#!/bin/sh
# Scaling past one machine: `doubletty fit --shard K/N` over GNU parallel,
# `doubletty merge` of the shard outputs equals the single run byte for
# byte; merge refuses incomplete, duplicated, truncated or foreign inputs.
. "$(dirname "$0")/../lib.sh"
AWKGEN=$ROOT/tests/scripts/fit_cmd_spectrum.awk

# 13 inputs: spectra with zero to two components, a bad file in the middle,
# then a target list with two more (per-target vsys) -- 15 inputs in all.
i=0
for comps in "20:0.8:15" "" "-120:0.6:10;60:0.9:12" "0:0.3:20" "" "150:1.2:8" \
             "-40:0.5:25" "" "90:0.7:14" "-200:0.4:18" "10:2.0:6" ""; do
  i=$((i + 1))
  awk -v lo=5850 -v hi=5940 -v step=0.1 -v snr=30 -v seed="$i" -v comps="$comps" \
    -f "$AWKGEN" >"$TMP/s$i.txt"
done
printf 'not a spectrum\n' >"$TMP/s13.txt"
awk -v lo=5850 -v hi=5950 -v step=0.1 -v snr=30 -v seed=21 -v comps="30:0.9:12" -v vsys=300 \
  -f "$AWKGEN" >"$TMP/t1.txt"
awk -v lo=5850 -v hi=5950 -v step=0.1 -v snr=30 -v seed=22 -v comps="" -v vsys=300 \
  -f "$AWKGEN" >"$TMP/t2.txt"
printf 't1.txt vsys=300\nt2.txt vsys=300\n' >"$TMP/more.list"
FILES="$TMP/s1.txt $TMP/s2.txt $TMP/s3.txt $TMP/s4.txt $TMP/s5.txt $TMP/s6.txt $TMP/s13.txt \
$TMP/s7.txt $TMP/s8.txt $TMP/s9.txt $TMP/s10.txt $TMP/s11.txt $TMP/s12.txt"

# shellcheck disable=SC2086
$DT fit --fwhm 2 $FILES --list "$TMP/more.list" -o "$TMP/single.csv" 2>"$TMP/single.err"
rc=$?
check "single run: exit 1 for the one bad input ($rc)" [ $rc -eq 1 ]
check "single run: summary" grep -q '^doubletty: fitted 14 spectra, 1 failed' "$TMP/single.err"
check "single run: every input 0..14 has rows" \
  [ "$(awk -F, '/^#/ { next } !h { h = 1; next } !seen[$1]++ { n++ } END { print n }' "$TMP/single.csv")" -eq 15 ]

if command -v parallel >/dev/null 2>&1; then
  # shellcheck disable=SC2086
  parallel --will-cite -j 4 "$DT" fit --fwhm 2 --shard {}/4 $FILES --list "$TMP/more.list" \
    -o "$TMP/shard{}.csv" ::: 0 1 2 3 2>"$TMP/par.err"
  if [ -s "$TMP/shard0.csv" ] && [ -s "$TMP/shard3.csv" ]; then ok "4 shards through GNU parallel ran"
  else bad "4 shards through GNU parallel ran: $(head -c 600 "$TMP/par.err")"; fi
  ok_mod=1
  for k in 0 1 2 3; do
    awk -F, -v k=$k '/^#/ { next } !h { h = 1; next } $1 % 4 != k { bad = 1 } END { exit bad }' "$TMP/shard$k.csv" || ok_mod=0
  done
  check "shard K holds exactly the inputs with index % 4 == K" [ $ok_mod -eq 1 ]
  check "only the shard owning the bad input reports it" \
    [ "$(grep -c 's13.txt' "$TMP/par.err")" -eq 1 ]
  $DT merge -o "$TMP/merged.csv" "$TMP/shard0.csv" "$TMP/shard1.csv" "$TMP/shard2.csv" "$TMP/shard3.csv"
  check "merge: exit 0" [ $? -eq 0 ]
  check "merged shards equal the single run byte for byte" cmp "$TMP/single.csv" "$TMP/merged.csv"
  $DT merge "$TMP/shard3.csv" "$TMP/shard1.csv" "$TMP/shard0.csv" "$TMP/shard2.csv" >"$TMP/merged2.csv"
  check "shard order on the command line does not matter (stdout)" cmp -s "$TMP/single.csv" "$TMP/merged2.csv"
  $DT merge --expect 15 "$TMP/shard0.csv" "$TMP/shard1.csv" "$TMP/shard2.csv" "$TMP/shard3.csv" >/dev/null
  check "--expect 15 accepted" [ $? -eq 0 ]
else
  skip "GNU parallel not installed: shards run one after another"
  for k in 0 1 2 3; do
    # shellcheck disable=SC2086
    $DT fit --fwhm 2 --shard $k/4 $FILES --list "$TMP/more.list" -o "$TMP/shard$k.csv" 2>/dev/null
  done
  $DT merge -o "$TMP/merged.csv" "$TMP/shard0.csv" "$TMP/shard1.csv" "$TMP/shard2.csv" "$TMP/shard3.csv"
  check "merged shards equal the single run byte for byte" cmp "$TMP/single.csv" "$TMP/merged.csv"
fi

# An uneven split: more shards than some have inputs for.
for k in 0 1 2 3 4 5 6 7 8 9 10 11 12 13 14 15 16; do
  # shellcheck disable=SC2086
  $DT fit --fwhm 2 --shard $k/17 $FILES --list "$TMP/more.list" -o "$TMP/u$k.csv" 2>/dev/null
done
check "shard 16/17 has no input: header only" [ "$(grep -vc '^#' "$TMP/u16.csv")" -eq 1 ]
# shellcheck disable=SC2046
$DT merge -o "$TMP/umerged.csv" $(for k in 0 1 2 3 4 5 6 7 8 9 10 11 12 13 14 15 16; do echo "$TMP/u$k.csv"; done)
check "17 shards merged equal the single run" cmp -s "$TMP/single.csv" "$TMP/umerged.csv"

# ---- merge refuses what it cannot join exactly -----------------------------
expect_fail "a missing shard" "missing from every shard output" \
  $DT merge "$TMP/shard0.csv" "$TMP/shard2.csv" "$TMP/shard3.csv"
expect_fail "--expect with a trailing shard missing" "15 inputs found, 16 expected" \
  $DT merge --expect 16 "$TMP/shard0.csv" "$TMP/shard1.csv" "$TMP/shard2.csv" "$TMP/shard3.csv"
expect_fail "the same shard twice" "appears in both" \
  $DT merge "$TMP/shard0.csv" "$TMP/shard1.csv" "$TMP/shard1.csv" "$TMP/shard2.csv" "$TMP/shard3.csv"
head -c $(($(wc -c <"$TMP/shard2.csv") - 1)) "$TMP/shard2.csv" >"$TMP/cut.csv"
expect_fail "a shard cut off mid-line" "cut.csv: line [0-9]+: incomplete last line" \
  $DT merge "$TMP/shard0.csv" "$TMP/shard1.csv" "$TMP/cut.csv" "$TMP/shard3.csv"
sed '/^index,/s/W_mA/W/' "$TMP/shard3.csv" >"$TMP/hdr.csv"
expect_fail "a different header" "hdr.csv: line [0-9]+: the header differs" \
  $DT merge "$TMP/shard0.csv" "$TMP/shard1.csv" "$TMP/shard2.csv" "$TMP/hdr.csv"
printf 'a,b\n1,2\n' >"$TMP/foreign.csv"
expect_fail "not a fit table" "foreign.csv: line 1: .*not the output of doubletty fit" \
  $DT merge "$TMP/foreign.csv"
awk -F, '/^#/ || /^index,/ { print; next } $1 <= 3 { print } $1 == 2 { again = again $0 "\n" } END { printf "%s", again }' \
  "$TMP/single.csv" >"$TMP/unsorted.csv"
expect_fail "rows out of order" "unsorted.csv: line [0-9]+: index 2 after 3: rows are not in input order" \
  $DT merge "$TMP/unsorted.csv"
expect_fail "unreadable shard" "nosuch.csv: cannot open" $DT merge "$TMP/nosuch.csv"
expect_fail "no shard given" "no shard output given" $DT merge
: >"$TMP/keep.csv"
$DT merge -o "$TMP/keep.csv" "$TMP/shard0.csv" "$TMP/shard2.csv" >/dev/null 2>&1
check "a failed merge leaves -o FILE untouched" [ ! -s "$TMP/keep.csv" ]
check "and no temporary file behind" [ -z "$(ls "$TMP" | grep 'keep.csv.tmp')" ]

# Shards of one run only: the same settings, the same N.
# shellcheck disable=SC2086
$DT fit --fwhm 2 --shard 1/3 $FILES -o "$TMP/n3.csv" 2>/dev/null
expect_fail "shards of different N: the shard counts differ" "shard of 3, but .* shard of 4: the shard counts differ" \
  $DT merge "$TMP/shard0.csv" "$TMP/n3.csv"
# shellcheck disable=SC2086
$DT fit --fwhm 3 --shard 1/4 $FILES --list "$TMP/more.list" -o "$TMP/fwhm3.csv" 2>/dev/null
expect_fail "shards run with other settings are refused, naming the setting" "fwhm3.csv: run with other settings .*fwhm=2.*fwhm=3" \
  $DT merge "$TMP/shard0.csv" "$TMP/fwhm3.csv" "$TMP/shard2.csv" "$TMP/shard3.csv"
check "the settings lines say the shard" grep -q '^# shard=1/4$' "$TMP/fwhm3.csv"

# -o: an existing file only with --force, never a shard.
echo keep >"$TMP/exists.csv"
expect_fail "merge -o an existing file without --force" "exists.csv: file exists; use --force" \
  $DT merge -o "$TMP/exists.csv" "$TMP/shard0.csv" "$TMP/shard1.csv" "$TMP/shard2.csv" "$TMP/shard3.csv"
check "and the file is untouched" [ "$(cat "$TMP/exists.csv")" = keep ]
$DT merge --force --output="$TMP/exists.csv" "$TMP/shard0.csv" "$TMP/shard1.csv" "$TMP/shard2.csv" "$TMP/shard3.csv"
check "--force --output=FILE replaces it with the merged table" cmp -s "$TMP/single.csv" "$TMP/exists.csv"
cp "$TMP/shard3.csv" "$TMP/s3copy.csv"
expect_fail "merge -o one of the shards, even with --force" "the output is also an input" \
  $DT merge --force -o "$TMP/s3copy.csv" "$TMP/shard0.csv" "$TMP/shard1.csv" "$TMP/shard2.csv" "$TMP/s3copy.csv"
check "and the shard is untouched" cmp -s "$TMP/shard3.csv" "$TMP/s3copy.csv"
ln -s "$TMP/s3copy.csv" "$TMP/link.csv"
expect_fail "... also through a symbolic link" "the output is also an input" \
  $DT merge --force -o "$TMP/link.csv" "$TMP/shard0.csv" "$TMP/shard1.csv" "$TMP/shard2.csv" "$TMP/s3copy.csv"

# The README's Slurm recipe: --expect counts the entries of a --files-from
# file, which may hold comments and blank lines.
{ echo "# survey spectra"; for f in $FILES; do echo "$f"; done; echo; echo "  # the end"; } >"$TMP/paths.txt"
for k in 0 1; do
  $DT fit --fwhm 2 --files-from "$TMP/paths.txt" --shard $k/2 -o "$TMP/p$k.csv" 2>/dev/null
done
n=$(grep -cEv '^[[:space:]]*(#|$)' "$TMP/paths.txt")
check "the recipe's count ($n) is the number of inputs (13)" [ "$n" -eq 13 ]
$DT merge --expect "$n" -o "$TMP/p.csv" "$TMP/p0.csv" "$TMP/p1.csv"
check "merge --expect with the recipe's count" [ $? -eq 0 ]
check "the README gives that recipe" grep -qF "grep -cEv '^[[:space:]]*(#|\$)' spectra.txt" "$ROOT/README.md"

finish
