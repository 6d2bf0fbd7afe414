# The inspector's screen at 80x24, 120x40 and 200x60 (headless, the pure
# drawing dumped as text): nothing that matters is cut, every number of the
# measurement rows is labelled, long messages wrap instead of being cut,
# the overview gives way on a short screen, and the help overlay shows every
# key's help whole.
. "$(dirname "$0")/../lib.sh"

export LANG=C.UTF-8 LC_ALL=C.UTF-8
"$DT" demo "$TMP/demo" >/dev/null 2>&1 || { bad "demo survey written"; finish; exit 1; }
cat >"$TMP/q.list" <<EOF
demo/vpq01.fits vsys=512 R=3690 name=Velloran-sightline-long-designation-J0123+4567
EOF
"$DT" keys >"$TMP/keys.tsv"

# shot W H KEYS...: replay the keys on a fresh session at W x H
shot() {
  w=$1 h=$2
  shift 2
  : >"$TMP/k"
  for k in "$@"; do printf '%s\n' "$k" >>"$TMP/k"; done
  rm -f "$TMP/s.session"
  (cd "$TMP" && "$DT" inspect --list q.list --session s.session --replay-keys k --screen-dump screen \
    --size "${w}x$h" >/dev/null 2>err)
}
on_screen() { grep -Fq -- "$1" "$TMP/screen"; }

for size in 80x24 120x40 200x60; do
  w=${size%x*} h=${size#*x}
  shot "$w" "$h" cursor-right
  check "$size: the title keeps the resolution whole" sh -c "head -n 1 '$TMP/screen' | grep -q 'R 3690 '"
  check "$size: the title keeps the end of the target's name" sh -c "head -n 1 '$TMP/screen' | grep -q 'J0123+4567'"
  check "$size: a line's column density is labelled" on_screen "log Na "
  check "$size: velocity tick labels survive the cursor read-out" on_screen "-400"
  if [ "$w" -ge 120 ]; then
    check "$size: limits labelled whole (W and log N)" grep -Eq "3σ lim [0-9]+ mÅ, log N < [0-9]+\.[0-9]{2}( |$)" \
      "$TMP/screen"
  fi
  check "$size: a residual strip under each line panel" test "$(grep -c '^ r/σ' "$TMP/screen")" -eq 2
  check "$size: the cursor is a tick, one per panel" test "$(grep -o '▲' "$TMP/screen" | wc -l)" -eq 2
  if [ "$h" -lt 30 ]; then
    check "$size: a short screen has no overview" sh -c "! grep -q 'Å vac' '$TMP/screen'"
  else
    check "$size: a tall screen has the overview" on_screen "Å vac"
  fi
  # a long message wraps onto a second row instead of being cut
  shot "$w" "$h" add-component nudge-v-up
  msg=$(grep -o 'component [0-9]: velocity.*' "$TMP/screen" | head -n 1)
  check "$size: the nudge message is whole ($msg)" sh -c "grep -q 'held' '$TMP/screen' && grep -q 'releases)' '$TMP/screen'"
  # the help overlay: every key's help whole, over as many pages as it takes
  : >"$TMP/help.all"
  keys=help
  for page in 1 2 3 4 5 6; do
    # shellcheck disable=SC2086
    shot "$w" "$h" $keys
    cat "$TMP/screen" >>"$TMP/help.all"
    grep -q "page $page of $page " "$TMP/screen" && break
    keys="$keys help"
  done
  missing=0
  while IFS="$(printf '\t')" read -r name key help; do
    grep -Fq -- "$help" "$TMP/help.all" || { echo "       $size: help of $name cut or missing"; missing=1; }
  done <"$TMP/keys.tsv"
  check "$size: the help overlay shows every key's help whole" test $missing -eq 0
done
finish
