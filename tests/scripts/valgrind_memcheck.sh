# Valgrind memcheck of the program as it is used: a scripted inspector
# session (headless, keys by action name) over a subset of the demo survey
# -- a FITS image, a text spectrum, rows of a multi-row FITS table, a wide
# spectrum switched to another doublet -- with components, nudges, holds,
# refits, windows, undo/redo, the help, a note with a non-ASCII character
# and verdicts; its resume, a read-only look and the disagreements queue;
# `doubletty fit` on the whole demo; and the session tools (log, log
# --verify, export to CSV and FITS, compare).  Each run must report no
# memory error and no definitely or indirectly lost block (the curses
# library keeps some memory reachable until exit by design: "still
# reachable" is not counted).  FAILS when valgrind is not installed.
# Slow: it runs in `make sanitize` (on the plain build), not `make check`.
# tier: sanitize
. "$(dirname "$0")/../lib.sh"

if ! need_tool valgrind "valgrind memcheck"; then
  finish
  exit $?
fi
if grep -aq __asan_init "$DT" 2>/dev/null; then
  skip "valgrind memcheck (the binary is built with AddressSanitizer, which valgrind cannot run)"
  finish
  exit $?
fi
export LANG=C.UTF-8 LC_ALL=C.UTF-8
VG="valgrind --leak-check=full --errors-for-leak-kinds=definite,indirect --error-exitcode=99 --num-callers=30"
"$DT" demo "$TMP/demo" >/dev/null 2>&1 || { bad "demo survey written"; finish; exit 1; }
cd "$TMP" || exit 1
{
  grep -E '^(vpq01|vpq03|vpq04)' demo/targets.list
  grep -E '^plate0731' demo/targets.list | head -n 2
  echo 'vpq09.fits vsys=512 R=4330 name=WIDE'
} >demo/small.list
n=$(grep -c . demo/small.list)

cat >keys <<'EOF'
cursor-right-fast
add-component
nudge-v-up
nudge-b-up-coarse
nudge-logn-down
next-component
hold-b
tie-b
refit
window-mark
cursor-right-fast
window-mark
continuum-order-down
undo
redo
help
help
toggle-normalised
zoom-in
pan-left
view-reset
edit-note
type a note: ü, and a tab	here
Enter
verdict-detected
remove-component
autofit
verdict-unsure
verdict-not-detected
previous-spectrum
next-unjudged
verdict-unusable
switch-doublet
auto-refit
add-component
window-unmark
verdict-detected
quit
EOF

# memcheck NAME command... : one run; its report in $TMP/NAME.vg
memcheck() {
  name=$1
  shift
  t0=$(date +%s)
  $VG --log-file="$TMP/$name.vg" "$@" >"$TMP/$name.out" 2>"$TMP/$name.err"
  rc=$?
  errs=$(sed -n 's/.*ERROR SUMMARY: \([0-9]*\) errors.*/\1/p' "$TMP/$name.vg" | tail -n 1)
  lost=$(sed -n 's/.*definitely lost: \([0-9,]*\) bytes.*/\1/p' "$TMP/$name.vg" | tail -n 1)
  ind=$(sed -n 's/.*indirectly lost: \([0-9,]*\) bytes.*/\1/p' "$TMP/$name.vg" | tail -n 1)
  if [ "$rc" -ne 99 ] && [ "${errs:-x}" = 0 ]; then
    ok "$name: no memory error, definitely lost ${lost:-0} B, indirectly lost ${ind:-0} B (exit $rc, $(($(date +%s) - t0)) s)"
  else
    bad "$name: valgrind reports errors or leaks (exit $rc, errors ${errs:-?}, lost ${lost:-?}/${ind:-?} B)"
    grep -E '^==[0-9]+== (Invalid|Conditional|Use of|Mismatched|Syscall|  +(at|by) 0x|[0-9,]+ bytes in)' \
      "$TMP/$name.vg" | head -n 40
  fi
  return 0
}

memcheck "inspect: scripted session" "$DT" inspect --list demo/small.list --session v.session \
  --replay-keys keys --screen-dump screen
check "the scripted session judged $((n - 1)) of $n" grep -q " judged $((n - 1)) " screen
memcheck "inspect: resume" "$DT" inspect --list demo/small.list --session v.session --replay-keys /dev/null
memcheck "inspect: read-only look" "$DT" inspect --list demo/small.list --session v.session --read-only \
  --replay-keys keys
printf 'verdict-detected\nverdict-detected\nverdict-detected\n' >keys2
"$DT" inspect --list demo/small.list --session w.session --user other --replay-keys keys2 >/dev/null 2>&1
memcheck "inspect: --only-disagreements" "$DT" inspect --only-disagreements v.session w.session \
  --session d.session --replay-keys keys2
memcheck "fit: the whole demo survey" "$DT" fit --list demo/targets.list -o fit.csv
check "the fit wrote a row per spectrum" test "$(grep -v "^#" fit.csv | cut -d, -f1 | sed 1d | sort -u | wc -l)" -eq "$(grep -c '^[^#]' demo/targets.list)"
memcheck "info" "$DT" info demo/vpq01.fits demo/vpq04.txt demo/plate0731.fits
memcheck "log" "$DT" log v.session
memcheck "log --verify" "$DT" log --verify v.session
memcheck "export CSV" "$DT" export v.session -o v.csv
memcheck "export FITS" "$DT" export v.session -o v.fits
memcheck "compare" "$DT" compare v.session w.session
finish
