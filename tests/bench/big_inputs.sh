#!/bin/sh
# Big inputs: time and peak memory (resident set, /usr/bin/time) of
#   - a 10-million-pixel FITS spectrum (float32 flux and error, 3600-9800 A,
#     R 40000 in the header): doubletty info, doubletty fit, and the
#     inspector opening it (headless, then quit);
#   - a list of 100 000 spectra (symbolic links to one demo spectrum): the
#     inspector's start-up, from launch to quit on the first screen;
#   - a session of 1 000 000 lines over those 100 000 spectra (ten changes
#     each, the last ten without a verdict): the inspector resuming it (to
#     the first unjudged spectrum, one verdict, quit), doubletty log and
#     doubletty export to CSV.
# The inputs come from the generator in tests/unit/test_big_inputs.c
# (compiled here against the built libraries).  Prints one table; the
# budgets are start-up under 1 s and resume under a few seconds.
# Environment: BUILD (default build), CC; SIZE_PIX, SIZE_LIST, SIZE_LINES
# to try other sizes.
set -u
ROOT=$(cd "$(dirname "$0")/../.." && pwd)
cd "$ROOT" || exit 1
BUILD=${BUILD:-build}
case $BUILD in /*) ;; *) BUILD=$ROOT/$BUILD ;; esac
DT=$BUILD/doubletty
CC=${CC:-cc}
NPIX=${SIZE_PIX:-10000000}
NLIST=${SIZE_LIST:-100000}
NLINES=${SIZE_LINES:-1000000}
PKGS=${PKGS:-"gsl cfitsio libcerf ncursesw libcrypto erfa wcslib cairo"}
W=$(mktemp -d "${TMPDIR:-/tmp}/dt-big.XXXXXX")
trap 'rm -rf "$W"' EXIT
export LANG=C.UTF-8 LC_ALL=C.UTF-8

GEN=$W/big_gen
if ! $CC -std=c11 -O2 -g -Iinclude -Itests -D_POSIX_C_SOURCE=200809L -D_DEFAULT_SOURCE \
    $(pkg-config --cflags $PKGS) tests/unit/test_big_inputs.c "$BUILD/libdoubletty-ui.a" \
    "$BUILD/libdoubletty.a" $(pkg-config --libs $PKGS) -lm -o "$GEN"; then
  echo "(the generator does not compile: skipped)"
  exit 0
fi
TIME=
if [ -x /usr/bin/time ] && /usr/bin/time -f '%e' true >/dev/null 2>&1; then TIME=/usr/bin/time; fi
[ -n "$TIME" ] || echo "(no /usr/bin/time (Debian package 'time'): wall time only, no peak memory)"

rows=$W/rows
: >"$rows"
# measure "INPUT" "WHAT" command... : one row of the table (the command's
# output goes to $W/out, its errors to $W/err)
measure() {
  input=$1 what=$2
  shift 2
  if [ -n "$TIME" ]; then
    $TIME -f '%e %M' -o "$W/time" "$@" >"$W/out" 2>"$W/err"
    rc=$?
    read -r secs kb <"$W/time"
  else
    t0=$(date +%s.%N)
    "$@" >"$W/out" 2>"$W/err"
    rc=$?
    secs=$(echo "$t0 $(date +%s.%N)" | awk '{ printf "%.2f", $2 - $1 }')
    kb=
  fi
  mem=$(echo "${kb:-}" | awk '{ if ($1 == "") print "n/a"; else printf "%.0f MB", $1 / 1024 }')
  printf '%s\t%s\t%s s\t%s\texit %s\n' "$input" "$what" "$secs" "$mem" "$rc" >>"$rows"
  if [ "$rc" -ne 0 ]; then sed 's/^/    /' "$W/err" | head -n 5; fi
}
mb() { awk -v b="$(wc -c <"$1")" 'BEGIN { printf "%.0f MB", b / 1048576 }'; }

echo "generating inputs in $W ..."
"$DT" demo "$W/demo" >/dev/null || exit 1
echo quit >"$W/quit.keys"
printf 'verdict-unsure\nquit\n' >"$W/verdict.keys"

# ---- the long spectrum
"$GEN" --spectrum "$W/long.fits" "$NPIX" || exit 1
L="$NPIX-pixel FITS ($(mb "$W/long.fits"))"
measure "$L" "doubletty info" "$DT" info "$W/long.fits"
measure "$L" "doubletty fit (R from header)" "$DT" fit "$W/long.fits" -o "$W/long.csv"
status=$(grep -v '^#' "$W/long.csv" | awk -F, 'NR == 1 { for (i = 1; i <= NF; i++) if ($i == "status") k = i; next }
  NR == 2 { print (k ? $k : "no status column") }')
measure "$L" "inspect: open, first pass, quit" "$DT" inspect "$W/long.fits" --session "$W/long.session" \
  --replay-keys "$W/quit.keys"
rm -f "$W/long.fits" "$W/long.session"

# ---- the long list
mkdir "$W/list"
"$GEN" --list "$W/list" "$NLIST" "$W/demo/vpq01.fits" "vsys=512 R=3690" || exit 1
Q="list of $NLIST spectra"
measure "$Q" "inspect: start-up to quit" "$DT" inspect --list "$W/list/targets.list" \
  --session "$W/list/new.session" --replay-keys "$W/quit.keys"
startup=$(awk -F'\t' -v q="$Q" '$1 == q { print $3 + 0 }' "$rows" | tail -n 1)

# ---- the long session over that list
"$GEN" --session "$W/list/big.session" "$NLINES" "$W/list" "$W/demo/vpq01.fits" 10 || exit 1
S="session of $NLINES lines ($(mb "$W/list/big.session"), $((NLINES / 10)) spectra)"
measure "$S" "inspect: resume, 1 verdict, quit" "$DT" inspect --list "$W/list/targets.list" \
  --session "$W/list/big.session" --replay-keys "$W/verdict.keys" --screen-dump "$W/screen"
resume=$(awk -F'\t' -v q="$S" '$1 == q { print $3 + 0 }' "$rows" | tail -n 1)
where=$(head -n 1 "$W/screen" | awk '{ print $2 }')
measure "$S" "doubletty log" "$DT" log "$W/list/big.session"
measure "$S" "doubletty export -o CSV" "$DT" export "$W/list/big.session" -o "$W/list/export.csv"

echo
printf '%-52s %-34s %9s %9s  %s\n' "input" "command" "time" "peak RSS" "status"
awk -F'\t' '{ printf "%-52s %-34s %9s %9s  %s\n", $1, $2, $3, $4, $5 }' "$rows"
echo
case $status in
  ok) echo "fit of the long spectrum: converged" ;;
  *) echo "fit of the long spectrum: status '$status' (stopped by its iteration or time limit)" ;;
esac
echo "resume opened on spectrum $where (the first without a verdict)"
awk -v s="$startup" -v r="$resume" 'BEGIN {
  printf "budgets: start-up %.2f s [< 1 s: %s]; resume %.2f s [< 5 s: %s]\n", s, (s < 1 ? "met" : "MISSED"), r, (r < 5 ? "met" : "MISSED")
}'
exit 0
