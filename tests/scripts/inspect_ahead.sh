#!/bin/sh
# The inspector opens the next spectra of the queue in the background while
# one is judged (its look-ahead thread): what is recorded is the same as
# when every spectrum is opened only when it is shown -- the same records,
# in the same order, written by the inspector alone -- whatever the moves
# (verdicts, next, previous, jumps, go to), for unreadable files, table
# rows, one file under two doublets, and a resumed session.  Then a person
# in a real terminal (tmux) gives verdicts in quick succession.
# The reference is the inspector's own run with --no-look-ahead (the order
# of records a single thread writes; common practice).
. "$(dirname "$0")/../lib.sh"
. "$ROOT/tests/scripts/fault_tmux.inc"

$DT demo "$TMP/demo" >/dev/null 2>&1
check "demo survey written" [ -s "$TMP/demo/targets.list" ]
# the demo's list, an unreadable entry in the middle
{ head -n 12 "$TMP/demo/targets.list"; echo "nosuch.fits vsys=512 R=3000 name=GONE"
  tail -n +13 "$TMP/demo/targets.list"; } >"$TMP/demo/mixed.list"

# a session's records without their time stamps and check sums
records() { sed -e 's/^[^\t]*\t//' -e 's/\tsum=[0-9a-f]*$//' -e 's/created=[^\t]*//' "$1"; }

# keys: judge a few (with a pause, as a person looks), step back and
# forth, jump, go to one by number, a verdict on the unreadable file
cat >"$TMP/keys" <<'KEYS'
pause 150
verdict-detected
cursor-right-fast
add-component
pause 150
verdict-unsure
verdict-not-detected
next-spectrum
pause 100
previous-spectrum
verdict-unsure
next-unjudged
pause 100
goto-spectrum
type GONE
Enter
pause 100
verdict-unusable
pause 150
verdict-unsure
verdict-unsure
goto-spectrum
type 3
Enter
verdict-detected
pause 100
previous-unjudged
verdict-not-detected
quit
KEYS
run() { # SESSION [OPTION]
  (cd "$TMP/demo" && $DT inspect --list mixed.list --session "$1" --replay-keys "$TMP/keys" \
    --bench ${2:-} >"$1.bench" 2>"$1.err")
}
run "$TMP/ahead.session"
check "look-ahead: exit 0 ($(head -c 200 "$TMP/ahead.session.err"))" [ $? -eq 0 ]
run "$TMP/plain.session" --no-look-ahead
check "--no-look-ahead: exit 0" [ $? -eq 0 ]
records "$TMP/ahead.session" >"$TMP/a.rec"
records "$TMP/plain.session" >"$TMP/p.rec"
check "records were written ($(grep -c . "$TMP/a.rec"))" [ "$(grep -c 'act=verdict' "$TMP/a.rec")" -ge 8 ]
check "the unreadable file got its verdict" grep -q 'name=GONE.*verdict=unusable' "$TMP/a.rec"
check "with look-ahead: the same records in the same order" cmp -s "$TMP/a.rec" "$TMP/p.rec"
check "--bench times the moves to another spectrum" grep -q '^next [0-9]' "$TMP/ahead.session.bench"

# resumed: the same keys again on both sessions
run "$TMP/ahead.session"
run "$TMP/plain.session" --no-look-ahead
records "$TMP/ahead.session" >"$TMP/a2.rec"
records "$TMP/plain.session" >"$TMP/p2.rec"
check "resumed: records were added" [ "$(wc -l <"$TMP/a2.rec")" -gt "$(wc -l <"$TMP/a.rec")" ]
check "resumed with look-ahead: the same records in the same order" cmp -s "$TMP/a2.rec" "$TMP/p2.rec"

# a person at a terminal: five verdicts as fast as tmux types them
if need_tool tmux "the inspector in a terminal"; then
  tmux_start ahead
  run_in_pane "cd '$TMP/demo' && '$DT' inspect --list targets.list --session '$TMP/t.session'; echo DT-EXIT=\$?"
  wait_for_text ' 1/26 ' 100
  for k in 1 2 3 4 5; do act verdict-unsure; done
  wait_for_text ' 6/26 ' 100
  on_screen() { screen | grep -q -- "$1"; }
  check "five verdicts typed: the screen shows 6/26" on_screen ' 6/26 '

  act quit
  wait_exit 0 100
  check "the inspector left with status 0" on_screen "DT-EXIT=0"
  grep 'act=verdict' "$TMP/t.session" | sed 's/.*name=\([^\t]*\).*/\1/' >"$TMP/t.names"
  printf 'VPQ01\nVPG02\nVPQ03\nVPQ04\nVPG05\n' >"$TMP/t.want"
  check "the five verdicts recorded once each, in queue order" cmp -s "$TMP/t.want" "$TMP/t.names"
fi
finish
