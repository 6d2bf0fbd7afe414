#!/bin/sh
# `doubletty fit --jobs N`: the same bytes on standard output and the same
# messages in the same order whatever the number of threads, on the demo
# survey and on a list full of failures; bounded memory on a long list
# (only a window of inputs is in flight); progress bar on a terminal.
# The reference is the program's own --jobs 1 run (the order and bytes of
# one thread are what "in input order" means; common practice).
. "$(dirname "$0")/../lib.sh"

$DT demo "$TMP/demo" >/dev/null 2>&1
check "demo survey written" [ -s "$TMP/demo/targets.list" ]

# the demo: every N gives the --jobs 1 bytes, and so does the default
$DT fit --jobs 1 --list "$TMP/demo/targets.list" -o "$TMP/d1.csv" 2>"$TMP/d1.err"
check "demo, --jobs 1: exit 0" [ $? -eq 0 ]
check "demo, --jobs 1: 26 spectra" grep -q '^doubletty: fitted 26 spectra, 0 failed' "$TMP/d1.err"
for n in 2 3 8 default; do
  if [ $n = default ]; then $DT fit --list "$TMP/demo/targets.list" >"$TMP/d$n.csv" 2>"$TMP/d$n.err"
  else $DT fit --jobs $n --list "$TMP/demo/targets.list" >"$TMP/d$n.csv" 2>"$TMP/d$n.err"; fi
  check "demo, --jobs $n: the --jobs 1 table byte for byte" cmp -s "$TMP/d1.csv" "$TMP/d$n.csv"
  check "demo, --jobs $n: the same messages" cmp -s "$TMP/d1.err" "$TMP/d$n.err"
done
check "the thread count is not a setting of the table" sh -c "! grep -q jobs '$TMP/d1.csv'"

# calibrated intervals (a random stream seeded from each fit): threads and
# reruns give the same bytes (three sightlines)
grep -E '^(vpq01|vpq04|vpg05)' "$TMP/demo/targets.list" | sed "s|^|$TMP/demo/|" >"$TMP/three.list"
$DT fit --jobs 1 --intervals calibrated --list "$TMP/three.list" >"$TMP/c1.csv" 2>/dev/null
$DT fit --jobs 3 --intervals calibrated --list "$TMP/three.list" >"$TMP/c3.csv" 2>/dev/null
$DT fit --jobs 1 --intervals calibrated --list "$TMP/three.list" >"$TMP/c1b.csv" 2>/dev/null
check "calibrated, --jobs 3: the --jobs 1 table byte for byte" sh -c "[ -s '$TMP/c1.csv' ] && cmp -s '$TMP/c1.csv' '$TMP/c3.csv'"
check "calibrated: a rerun gives the same bytes" cmp -s "$TMP/c1.csv" "$TMP/c1b.csv"

# failures interleaved with good inputs: missing files, a bad list line,
# a file that is no spectrum, a doublet outside the data, a directory
# given as a list, a multi-row table
D=$TMP/demo
printf 'not a spectrum\n' >"$TMP/junk.txt"
{
  echo "$D/vpq01.fits vsys=512 R=3690"
  echo "$TMP/missing1.fits vsys=512 R=3000"
  echo "$D/vpg02.fits vsys=512 R=2240"
  echo "$D/vpq03.fits vsys=abc R=3000"
  echo "$TMP/junk.txt vsys=512 R=3000"
  echo "$D/vpq04.txt vsys=512 R=2640"
  echo "$D/vpg05.fits vsys=90000 R=3000"
  echo "$D/plate0731.fits vsys=512 R=2750"
  echo "$TMP/missing2.fits"
  echo "$D/vpq07.fits vsys=512 R=3770 doublet=NoSuch"
  echo "$D/vpq09.fits vsys=512 R=4330"
} >"$TMP/mixed.list"
mkdir "$TMP/adir"
run_mixed() { # N OUT
  $DT fit --jobs "$1" --list "$TMP/mixed.list" "$D/vpq10.fits" --list "$TMP/adir" \
    "$TMP/missing3.txt" --resolution 3000 --vsys 512 >"$2.csv" 2>"$2.err"
  echo $? >"$2.rc"
}
run_mixed 1 "$TMP/m1"
check "failures, --jobs 1: exit 1" [ "$(cat "$TMP/m1.rc")" -eq 1 ]
check "failures, --jobs 1: failed rows written" \
  [ "$(grep -c ',failed,' "$TMP/m1.csv")" -ge 6 ]
check "failures, --jobs 1: messages name the files" grep -q 'missing2.fits' "$TMP/m1.err"
for n in 2 3 8; do
  run_mixed $n "$TMP/m$n"
  check "failures, --jobs $n: the --jobs 1 table byte for byte" cmp -s "$TMP/m1.csv" "$TMP/m$n.csv"
  check "failures, --jobs $n: the same messages in the same order" cmp -s "$TMP/m1.err" "$TMP/m$n.err"
  check "failures, --jobs $n: the same exit status" cmp -s "$TMP/m1.rc" "$TMP/m$n.rc"
done

# shards with threads: the same rows as one thread
$DT fit --jobs 1 --shard 1/3 --list "$TMP/mixed.list" --resolution 3000 >"$TMP/s1.csv" 2>/dev/null
$DT fit --jobs 3 --shard 1/3 --list "$TMP/mixed.list" --resolution 3000 >"$TMP/s3.csv" 2>/dev/null
check "--shard 1/3 with --jobs 3: the --jobs 1 shard byte for byte" cmp -s "$TMP/s1.csv" "$TMP/s3.csv"

# bad values
expect_fail "--jobs 0 refused" '--jobs: 0 is outside' $DT fit --jobs 0 "$D/vpq01.fits"
expect_fail "--jobs abc refused" "--jobs: 'abc' is not a whole number" $DT fit --jobs abc "$D/vpq01.fits"

# memory: 40 000 inputs (missing files, cheap to fail) need no more memory
# than 400 -- holding every result would add > 150 MB (4 kB per input)
if need_tool /usr/bin/time "bounded memory (GNU time)"; then
  seq 1 400 | sed "s|^|$TMP/none/s|" >"$TMP/few.txt"
  seq 1 40000 | sed "s|^|$TMP/none/s|" >"$TMP/many.txt"
  # (under AddressSanitizer freed memory waits in a quarantine: none here)
  ASAN_OPTIONS=${ASAN_OPTIONS:+$ASAN_OPTIONS:}quarantine_size_mb=0
  export ASAN_OPTIONS
  /usr/bin/time -f %M -o "$TMP/few.kb" $DT fit --jobs 2 --resolution 3000 \
    --files-from "$TMP/few.txt" >/dev/null 2>&1
  /usr/bin/time -f %M -o "$TMP/many.kb" $DT fit --jobs 2 --resolution 3000 \
    --files-from "$TMP/many.txt" >"$TMP/many.csv" 2>/dev/null
  few=$(tail -1 "$TMP/few.kb"); many=$(tail -1 "$TMP/many.kb")
  check "40 000 inputs: every one has its row" [ "$(grep -c ',failed,' "$TMP/many.csv")" -eq 40000 ]
  check "40 000 inputs in $many kB, 400 in $few kB (within 8 MB)" [ "$many" -le $((few + 8192)) ]
fi

# progress on a terminal (script gives a pseudo-terminal), none on a pipe
if need_tool script "the progress bar on a terminal"; then
  files="$D/vpq01.fits $D/vpg02.fits $D/vpq03.fits $D/vpq04.txt $D/vpg05.fits"
  script -qec "$DT fit --jobs 2 --resolution 3000 --vsys 512 $files -o $TMP/tty.csv" /dev/null \
    >"$TMP/tty.out" 2>&1
  # shellcheck disable=SC2086
  $DT fit --jobs 1 --resolution 3000 --vsys 512 $files -o "$TMP/tty1.csv" 2>/dev/null
  check "terminal: progress bar reaches 5/5" grep -q '5/5 inputs' "$TMP/tty.out"
  check "terminal: the table is the --jobs 1 table" cmp -s "$TMP/tty1.csv" "$TMP/tty.csv"
  check "pipe: no progress bar" sh -c "! grep -q 'inputs' '$TMP/d2.err'"
fi
finish
