#!/bin/sh
# Absorber systems in the inspector, as a person uses it (tmux, keys by
# action name from `doubletty keys`): a sightline whose only gas is the
# Milky Way's (demo VPG14, vsys 512: truth.csv gives it two Milky-Way components, the stronger at log N 12.46, and nothing else) shows the systems as named bands, the
# target suggested not-detected and the Milky Way detected; the system key
# selects the Milky Way, a verdict judges it and the spectrum stays; the
# target's verdict then moves on.  The session records both verdicts; log,
# export and compare report them per system.
. "$(dirname "$0")/../lib.sh"
. "$(dirname "$0")/fault_tmux.inc"

if [ "$HAVE_TMUX" -ne 1 ]; then
  missing tmux "inspector systems"
  finish
  exit $?
fi
"$DT" demo "$TMP/demo" >/dev/null 2>&1 || { bad "demo survey written"; finish; exit 1; }
{ grep -E '^vpg14.fits' "$TMP/demo/targets.list"; grep -E '^vpq07.fits' "$TMP/demo/targets.list"; } >"$TMP/demo/two.list"
check "a list of two demo sightlines (the Milky Way only; nothing)" test "$(wc -l <"$TMP/demo/two.list")" -eq 2
tmux_start systems || { bad "tmux starts"; finish; exit 1; }
S=$TMP/a.session
run_in_pane "clear; cd '$TMP' && '$DT' inspect --list demo/two.list --session '$S' --user ana; echo DT-EXIT=\$?"
check "the inspector opens on VPG14" wait_for_text "VPG14" 100
check "the systems are drawn as named bands" wait_for "milky-way: (-|none yet) .*target: none yet" 30
check "the target's first pass: not-detected" wait_for "^ suggested not-detected" 10
act next-system
check "the system key selects the Milky Way" wait_for_text "on milky-way  s system" 20
check "its suggestion: detected" wait_for "^ milky-way suggested detected" 10
act verdict-detected
check "a verdict for the Milky Way is saved and the spectrum stays" \
  wait_for_text "saved: milky-way detected - the target is selected again" 30
check "... the band shows it" wait_for "milky-way: det(ected)? .*target: none yet" 10
check "... still VPG14" wait_for_text "VPG14" 5
act verdict-not-detected
check "the target's verdict moves on to the next spectrum" wait_for_text "VPQ07" 30
act quit
check "quit: exit 0" wait_exit 0 50

check "the session holds the Milky Way's verdict with its system" \
  grep -q "act=verdict	verdict=detected	system=milky-way	=>	verdict=none	verdicts=milky-way:detected" "$S"
check "... and the target's without a system field" \
  grep -q "act=verdict	verdict=not-detected	=>	verdict=not-detected	verdicts=milky-way:detected" "$S"
check "the first record carries the systems" grep -q "	systems=target:-300:300,milky-way:" "$S"

# log per system
"$DT" log "$S" >"$TMP/log" 2>&1
check "log names the system of a verdict" grep -q "verdict  milky-way: detected  =>" "$TMP/log"
check "log --system milky-way: its verdict only" \
  test "$("$DT" log "$S" --system milky-way | wc -l)" -eq 1
check "log --system target: the target's verdict only" \
  sh -c "'$DT' log '$S' --system target | grep -c 'verdict  not-detected' | grep -qx 1"

# export: a system column, a row per system
"$DT" export "$S" -o "$TMP/x.csv" 2>"$TMP/x.err"
check "export: exit 0" test $? -eq 0
row() { awk -F, -v s="$1" 'NR == 1 { for (i = 1; i <= NF; i++) c[$i] = i; next } $c["name"] == "VPG14" && $c["system"] == s { print $c["verdict"] "/" $c["component"] }' "$TMP/x.csv"; }
check "export: the target's row, not-detected, no component ($(row target))" test "$(row target)" = "not-detected/0"
check "export: the Milky Way's row, detected, with its component ($(row milky-way))" test "$(row milky-way)" = "detected/1"

# compare per system: a second person calls the Milky Way unsure
"$DT" inspect --list "$TMP/demo/two.list" --session "$TMP/b.session" --user bo --replay-keys /dev/stdin >/dev/null 2>&1 <<'KEYS'
next-system
verdict-unsure
verdict-not-detected
KEYS
"$DT" compare "$S" "$TMP/b.session" >"$TMP/cmp" 2>&1
check "compare: one section per system" \
  sh -c "grep -q '^== system target ==' '$TMP/cmp' && grep -q '^== system milky-way ==' '$TMP/cmp'"
check "compare: the Milky Way disagrees (detected vs unsure)" \
  sh -c "sed -n '/^== system milky-way/,\$p' '$TMP/cmp' | grep -q '^disagreements: 1'"
check "compare: the target agrees" \
  sh -c "sed -n '/^== system target/,/^== system milky-way/p' '$TMP/cmp' | grep -q '^disagreements: 0'"
"$DT" compare --system milky-way "$S" "$TMP/b.session" >"$TMP/cmp2" 2>&1
check "compare --system milky-way: that system only" \
  sh -c "grep -q '^== system milky-way ==' '$TMP/cmp2' && ! grep -q 'system target' '$TMP/cmp2'"
finish
