# Inputs are data, never code.
#  - No shell or other program is ever started: the sources call none of
#    system, popen, the exec family, fork, posix_spawn, wordexp or dlopen.
#  - File names with shell metacharacters ($(...), backquotes, ;, |, &, >,
#    quotes, spaces, a TAB, a backslash) -- on the command line, in a
#    target list and in a session file -- are plain paths: each is read as
#    the file of that name, nothing is executed, no other file appears or
#    disappears, and a session records the name exactly (it resumes).
#  - Paths named in a session file are only read: inspect (resume, judge,
#    --only-disagreements), log, log --verify, export and compare leave the
#    files they name unchanged, byte for byte and in time stamp.
. "$(dirname "$0")/../lib.sh"

export LANG=C.UTF-8 LC_ALL=C.UTF-8
SRC=$ROOT/src
if grep -rnE '\b(system|popen|exec[lv]p?e?|execvpe|fexecve|posix_spawnp?|fork|vfork|wordexp|dlopen)[[:space:]]*\(' \
  "$SRC" "$ROOT/include" >"$TMP/calls"; then
  bad "no call that starts a program in src/ or include/: $(head -c 300 "$TMP/calls")"
else
  ok "no call that starts a program (system, popen, exec*, fork, posix_spawn, wordexp, dlopen) in src/"
fi
"$DT" demo "$TMP/demo" >/dev/null 2>&1 || { bad "demo survey written"; finish; exit 1; }

W=$TMP/w
mkdir -p "$W/x"
echo keep >"$W/x/keep"
cd "$W" || exit 1
# the hostile names (each a copy of a demo text spectrum)
n1='$(touch pwned1).txt'
n2=';rm -rf x;.txt'
n3='`touch pwned2`.txt'
n4='a b|c&d>e<f.txt'
n5="it's \"quoted\".txt"
n6=$(printf 'tab\there.txt')
n7='back\slash.txt'
# distinct spectra have distinct bytes (a session knows a spectrum by its digest)
for n in "$n1" "$n2" "$n3" "$n4" "$n5" "$n6" "$n7"; do
  { cat "$TMP/demo/vpq04.txt"; printf '# %s\n' "$n"; } >"./$n"
done
snapshot() { (ls -la; ls -la x) | awk '{ $6 = $7 = $8 = ""; print }' >"$1"; }
snapshot "$TMP/before"
nothing_ran() {
  check "$1: nothing executed (no pwned file, x/ intact)" \
    sh -c "! { find '$TMP' -name 'pwned*'; find / -maxdepth 1 -name 'pwned*'; } 2>/dev/null | grep -q . && [ -f '$W/x/keep' ]"
}

# command line
"$DT" info "$n1" "$n2" "$n3" "$n4" "$n5" "$n6" "$n7" >"$TMP/info" 2>&1
check "info reads all seven names as files (exit $?)" test "$(grep -c '^layout  *text' "$TMP/info")" -eq 7
check "info shows a name literally" grep -qF 'spectrum    $(touch pwned1).txt' "$TMP/info"
nothing_ran "info"
"$DT" fit --vsys 512 --resolution 2640 "$n1" "$n2" "$n3" "$n4" "$n5" "$n6" "$n7" -o "$TMP/fit.csv" 2>"$TMP/fit.err"
check "fit fits all seven (exit $?)" test "$(grep -c ',ok,' "$TMP/fit.csv")" -ge 7
nothing_ran "fit"

# a target list: fields are separated by blanks ('#' starts a comment), so a
# list names the blank-free forms of the same attacks, and the names with
# blanks, '"' or '\' between double quotes ('"' and '\' escaped)
l1='$(touch${IFS}pwned3).txt'
l2=';rm${IFS}-rf${IFS}x;.txt'
l3='`touch${IFS}pwned4`.txt'
l4='|&><.txt'
l5="'\"\$HOME\"'.txt"
for n in "$l1" "$l2" "$l3" "$l4" "$l5"; do
  { cat "$TMP/demo/vpq04.txt"; printf '# %s\n' "$n"; } >"./$n"
done
listed() {
  case $1 in
  *[\"\\\ \#]*) printf '"%s"' "$(printf '%s' "$1" | sed 's/[\\"]/\\&/g')" ;;
  *) printf '%s' "$1" ;;
  esac
}
for n in "$l1" "$l2" "$l3" "$l4" "$l5" "$n4" "$n5" "$n7"; do
  printf '%s vsys=512 R=2640\n' "$(listed "$n")"
done >"$W/hostile.list"
snapshot "$TMP/before"
"$DT" inspect --list "$W/hostile.list" --session "$TMP/probe.session" --replay-keys /dev/null \
  --screen-dump "$TMP/screen" >/dev/null 2>"$TMP/err"
check "a list of hostile names opens ($(head -c 200 "$TMP/err"))" test $? -eq 0
: >"$TMP/keys"
nl=$(grep -c . "$W/hostile.list")
i=0
while [ $i -lt "$nl" ]; do echo verdict-detected >>"$TMP/keys"; i=$((i + 1)); done
"$DT" inspect --list "$W/hostile.list" --session "$TMP/h.session" --replay-keys "$TMP/keys" \
  --screen-dump "$TMP/screen" >/dev/null 2>"$TMP/err"
check "every listed hostile name judged ($nl)" grep -q " $nl/$nl  judged $nl " "$TMP/screen"
check "the session records the first name literally" grep -qF 'file=w/$(touch${IFS}pwned3).txt#NaI' "$TMP/h.session"
"$DT" inspect --list "$W/hostile.list" --session "$TMP/h.session" --replay-keys /dev/null \
  --screen-dump "$TMP/screen" >/dev/null 2>&1
check "... and resumes them all as judged" grep -q " [0-9]/$nl  judged $nl " "$TMP/screen"
nothing_ran "inspect with a list"

# command line with every name, TAB and backslash included: recorded and resumed
printf 'verdict-unsure\n%.0s' 1 2 3 4 5 6 7 >"$TMP/keys"
"$DT" inspect --session "$TMP/c.session" --vsys 512 --resolution 2640 --replay-keys "$TMP/keys" \
  --screen-dump "$TMP/screen" -- "$n1" "$n2" "$n3" "$n4" "$n5" "$n6" "$n7" >/dev/null 2>"$TMP/err"
check "seven names on the command line judged" grep -q " 7/7  judged 7" "$TMP/screen"
check "the TAB in a name is escaped in the session file" grep -qF 'tab\there.txt#NaI' "$TMP/c.session"
"$DT" inspect --session "$TMP/c.session" --vsys 512 --resolution 2640 --replay-keys /dev/null \
  --screen-dump "$TMP/screen" -- "$n1" "$n2" "$n3" "$n4" "$n5" "$n6" "$n7" >/dev/null 2>&1
check "... and every name, TAB and backslash too, resumes as judged" grep -q " [0-9]/7  judged 7 " "$TMP/screen"
"$DT" log "$TMP/c.session" >"$TMP/log" 2>&1
check "log prints the names, a control byte as '?'" grep -qF 'tab?here.txt' "$TMP/log"
"$DT" export "$TMP/c.session" -o "$TMP/c.csv" 2>/dev/null
check "export writes a row per name" test "$(grep -c 'unsure' "$TMP/c.csv")" -eq 7
"$DT" compare "$TMP/c.session" "$TMP/h.session" >/dev/null 2>&1
check "compare reads both (exit $?)" test $? -le 1
nothing_ran "inspect, log, export, compare"
snapshot "$TMP/after"
check "no file appeared or vanished in the working directory" cmp -s "$TMP/before" "$TMP/after"

# ---- paths in a session file are only read
cd "$TMP" || exit 1
mkdir canary
cp demo/vpq01.fits demo/vpq03.fits demo/vpq04.txt canary/
touch -d '2001-02-03 04:05:06' canary/*
stamp() { (cd "$TMP/canary" && for f in *; do printf '%s %s ' "$f" "$(stat -c %Y "$f")"; cat "$f" | cksum; done) }
stamp >"$TMP/c0"
printf 'canary/vpq01.fits vsys=512 R=3690\ncanary/vpq03.fits vsys=512 R=3460\ncanary/vpq04.txt vsys=512 R=2640\n' >can.list
printf 'add-component\nrefit\nverdict-detected\nverdict-not-detected\nverdict-unsure\n' >keys
"$DT" inspect --list can.list --session can1.session --user alice --replay-keys keys >/dev/null 2>&1
printf 'verdict-not-detected\nverdict-not-detected\nverdict-unsure\n' >keys
"$DT" inspect --list can.list --session can2.session --user bob --replay-keys keys >/dev/null 2>&1
printf 'previous-spectrum\nnudge-v-up\nverdict-unusable\nquit\n' >keys
"$DT" inspect --list can.list --session can1.session --user alice --replay-keys keys >/dev/null 2>&1
"$DT" inspect --only-disagreements can1.session can2.session --session can3.session \
  --replay-keys keys >/dev/null 2>&1
"$DT" log can1.session >/dev/null 2>&1
"$DT" log --verify can1.session >/dev/null 2>&1
"$DT" export can1.session -o can.csv >/dev/null 2>&1
"$DT" export can1.session -o can.fits >/dev/null 2>&1
"$DT" compare can1.session can2.session >/dev/null 2>&1
stamp >"$TMP/c1"
check "the sessions name the spectra" grep -q 'canary/vpq03.fits#NaI' can1.session
check "no file named in a session was changed (bytes and time stamps)" cmp -s "$TMP/c0" "$TMP/c1"
finish
