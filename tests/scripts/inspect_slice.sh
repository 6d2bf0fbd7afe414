# The inspector with refits cut at the frame (--fit-slice): a vetting
# session over part of the demo survey replayed with every refit cut (a
# slice of a nanosecond) and with none (0) writes the same records; the
# last change, still fitting when the keys end, is recorded on the way out;
# --bench reports the settled refits; a bad slice is refused.
. "$(dirname "$0")/../lib.sh"

export LANG=C.UTF-8 LC_ALL=C.UTF-8
"$DT" demo "$TMP/demo" >/dev/null 2>&1 || { bad "demo survey written"; finish; exit 1; }
grep -v "^#" "$TMP/demo/targets.list" | head -4 | sed "s,^,demo/," >"$TMP/q.list"
: >"$TMP/keys"
for i in 1 2 3; do
  cat >>"$TMP/keys" <<'K'
cursor-right-fast
add-component
nudge-v-up
nudge-logn-down
undo
refit
verdict-unsure
K
done
echo add-component >>"$TMP/keys"   # the last key: still fitting when the keys end

# run SLICE SESSION: the replay with that slice
run() {
  (cd "$TMP" && "$DT" inspect --list q.list --session "$2" --replay-keys keys --fit-slice "$1" \
    --bench >"$2.out" 2>"$2.err")
}
# records FILE: the records without the header, times and checksums
records() { sed -e 1d -e 's/^[^\t]*\t//' -e 's/\tsum=[0-9a-f]*$//' "$1"; }

run 0 "$TMP/none.session"
check "no slice: the replay runs (exit $?)" [ -s "$TMP/none.session" ]
run 0.000001 "$TMP/cut.session"
check "every refit cut: the replay runs (exit $?)" [ -s "$TMP/cut.session" ]
n=$(records "$TMP/none.session" | grep -c 'act=')
check "the session has the changes ($n records)" [ "$n" -ge 15 ]
records "$TMP/none.session" >"$TMP/a"
records "$TMP/cut.session" >"$TMP/b"
check "the same records with every refit cut" cmp -s "$TMP/a" "$TMP/b"
check "the last change, fitting at the end, is recorded" sh -c "tail -1 '$TMP/cut.session' | grep -q 'act=comp-add'"
check "--bench reports the refits until settled" grep -q '^refits settled [0-9]' "$TMP/cut.session.out"

(cd "$TMP" && "$DT" inspect --list q.list --session x.session --replay-keys keys --fit-slice -1 >/dev/null 2>"$TMP/err")
rc=$?
check "a negative slice is refused (exit $rc)" [ $rc -eq 2 ]
check "... naming the option" grep -q -- "--fit-slice: '-1'" "$TMP/err"
finish
