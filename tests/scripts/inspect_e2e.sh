# The inspector in a real terminal: tmux runs the binary on the demo survey,
# types keys looked up by action name in `doubletty keys`, and reads the
# screen back with capture-pane.
. "$(dirname "$0")/../lib.sh"

if ! command -v tmux >/dev/null 2>&1; then
  skip "inspector end-to-end (no tmux)"
  finish
  exit $?
fi

SOCK="dt-e2e-$$"
T="tmux -L $SOCK -f /dev/null"
trap '$T kill-server >/dev/null 2>&1; rm -rf "$TMP"' EXIT
# Run the program as a user gets it: installed with `make install`.
if make -C "$ROOT" -s install BUILD="$BUILD" PREFIX="$TMP/inst" >"$TMP/install.log" 2>&1; then
  ok "make install into a fresh prefix"
  DT=$TMP/inst/bin/doubletty
else
  bad "make install into a fresh prefix: $(tail -n 3 "$TMP/install.log")"
fi
KEYS=$("$DT" keys)
export LANG=C.UTF-8 LC_ALL=C.UTF-8

"$DT" demo "$TMP/demo" >/dev/null 2>&1 || { bad "demo survey written"; finish; exit 1; }

# send the key of an action, as tmux names it
act() {
  k=$(printf '%s\n' "$KEYS" | awk -F'\t' -v a="$1" '$1 == a { print $2 }')
  if [ -z "$k" ]; then
    echo "no key for action $1" >&2
    return 1
  fi
  case $k in
    Left | Right | Up | Down | Home | End | Tab | Enter | Space) $T send-keys -t dt "$k" ;;
    S-Tab) $T send-keys -t dt BTab ;;
    Esc) $T send-keys -t dt Escape ;;
    PgUp) $T send-keys -t dt PPage ;;
    PgDn) $T send-keys -t dt NPage ;;
    Del) $T send-keys -t dt DC ;;
    Backspace) $T send-keys -t dt BSpace ;;
    ^?) $T send-keys -t dt "C-$(printf '%s' "${k#^}" | tr 'A-Z' 'a-z')" ;;
    ?) $T send-keys -t dt -l "$k" ;;
    *) echo "cannot type key '$k'" >&2; return 1 ;;
  esac
}
screen() { $T capture-pane -p -t dt; }
# wait until the screen matches an extended regex (timeout in tenths of a second)
wait_for() {
  n=${2:-50}
  while [ "$n" -gt 0 ]; do
    if screen | grep -Eq -- "$1"; then return 0; fi
    sleep 0.1
    n=$((n - 1))
  done
  return 1
}
# the same for a fixed string
wait_for_text() {
  n=${2:-50}
  while [ "$n" -gt 0 ]; do
    if screen | grep -Fq -- "$1"; then return 0; fi
    sleep 0.1
    n=$((n - 1))
  done
  return 1
}
# wait until the screen no longer matches
wait_gone() {
  n=${2:-50}
  while [ "$n" -gt 0 ]; do
    if ! screen | grep -Eq -- "$1"; then return 0; fi
    sleep 0.1
    n=$((n - 1))
  done
  return 1
}
chi2() { screen | sed -n 's/.*χ²ν \([0-9.]*\).*/\1/p' | head -n 1; }
ncomp_rows() { screen | grep -Ec '^ .?[0-9]   [+-][0-9]'; }

SESSION="$TMP/e2e.session"
$T new-session -d -s dt -x 100 -y 32 "sh" || { bad "tmux session starts"; finish; exit 1; }
$T send-keys -t dt "cd '$TMP' && '$DT' inspect --list demo/targets.list --session '$SESSION'; echo DT-EXIT=\$?" Enter

# ---- the plot and the component table appear
if wait_for 'v \[km/s\].*b \[km/s\].*log N' 100; then ok "component table on screen"; else bad "component table on screen"; screen; fi
check "title with queue position 1/26" wait_for ' 1/26  judged 0'
check "velocity axis and cursor readout" wait_for '^km/s .*cursor [+-][0-9.]+ km/s'
check "wavelength axis of the overview" wait_for 'vac +5700 +5800'
if screen | LC_ALL=C grep -q "$(printf '\342[\240-\243]')"; then ok "braille plot drawn in a UTF-8 locale"; else bad "braille plot drawn in a UTF-8 locale"; fi
check "fit summary with chi2 on screen" wait_for 'fit  χ²ν [0-9.]+'
check "measurements of both lines" wait_for 'NaI 5897 +W [0-9]+'

# ---- adding a component at a velocity puts it in the table and changes chi2
c0=$(chi2)
n0=$(ncomp_rows)
act cursor-right-fast
act cursor-right-fast
act cursor-right-fast
act cursor-right-fast
sleep 0.2
v=$(screen | sed -n 's/.*cursor \([+-][0-9.]*\) km\/s.*/\1/p' | head -n 1)
act add-component
if wait_for_text "component $((n0 + 1)) added at $v km/s"; then ok "component added at the cursor velocity $v"; else bad "component added at the cursor velocity $v"; screen | tail -3; fi
n1=$(ncomp_rows)
c1=$(chi2)
check "the table has one more component ($n0 -> $n1)" test "$n1" -eq $((n0 + 1))
check "chi2 changed with the new component ($c0 -> $c1)" test "$c0" != "$c1"

# ---- undo restores the previous fit
act undo
wait_for '^undone' 30
check "undo restores chi2 ($c1 -> $(chi2), was $c0)" test "$(chi2)" = "$c0"
check "undo removes the component" test "$(ncomp_rows)" -eq "$n0"
act redo
wait_for '^redone' 30
check "redo brings it back" test "$(chi2)" = "$c1"
act undo
wait_for '^undone' 30

# ---- a verdict key moves the queue on
act verdict-detected
if wait_for ' 2/26  judged 1'; then ok "verdict moves to spectrum 2, one judged"; else bad "verdict moves the queue on"; screen | head -2; fi
check "status says it was saved" wait_for 'saved: #1 detected'
check "session file has the verdict" grep -q 'act=verdict.*verdict=detected' "$SESSION"
check "session file has the component and the undo" sh -c "grep -q 'act=comp-add' '$SESSION' && grep -q 'act=restore' '$SESSION'"

# ---- a note through the line editor
act edit-note
wait_for '^note> ' 30
$T send-keys -t dt -l 'blend with a sky line?'
$T send-keys -t dt Enter
check "note saved and shown" wait_for 'note blend with a sky line\?'

# ---- resizing keeps a correct screen
$T resize-window -t dt -x 120 -y 40
if wait_for '^ doubletty  2/26' && wait_for 'v \[km/s\]'; then ok "redrawn after growing to 120x40"; else bad "redrawn after growing to 120x40"; fi
rows=$(screen | wc -l)
last=$(screen | tail -n 1)
check "40 rows, status line at the bottom ($rows)" sh -c "[ $rows -eq 40 ] && printf '%s' '$last' | grep -q 'q quit *\$'"
check "help hint at the right edge of the wider screen" test "$(printf '%s' "$last" | awk '{ print length($0) }')" -ge 118
$T resize-window -t dt -x 60 -y 20
check "too small window: a message, not a garbled screen" wait_for 'terminal too small: 60x20'
check "... and nothing else drawn" wait_gone 'v \[km/s\]' 20
$T resize-window -t dt -x 80 -y 24
check "back at 80x24: the full screen again" wait_for 'v \[km/s\]'
check "... with the title" wait_for '^ doubletty  2/26'
$T resize-window -t dt -x 100 -y 32
wait_for 'v \[km/s\]' 30

# ---- the help overlay lists the keys from the table
act help
if wait_for 'keys of the inspector'; then ok "help overlay opens"; else bad "help overlay opens"; fi
h=$(printf '%s\n' "$KEYS" | awk -F'\t' '$1 == "add-component" { print $3 }')
check "help shows the table's text for add-component" wait_for "$h"
act quit

# ---- q leaves a clean terminal
if wait_for '^DT-EXIT=0'; then ok "quit exits with status 0"; else bad "quit exits with status 0"; screen | tail -5; fi
check "alternate screen gone" test "$($T display -p -t dt '#{alternate_on}')" = 0
$T send-keys -t dt "echo PROMPT-\$((40+2))" Enter
check "shell prompt usable after quit" wait_for '^PROMPT-42'

# ---- resume: reopening starts at the first spectrum without a verdict
$T send-keys -t dt "clear; '$DT' inspect --list demo/targets.list --session '$SESSION'; echo DT-EXIT=\$?" Enter
check "resume at 2/26 with one judged" wait_for ' 2/26  judged 1'
check "the note is back" wait_for 'note blend with a sky line\?'

# ---- signals restore the terminal too
$T send-keys -t dt C-c
check "^C (SIGINT) ends with status 130" wait_for '^DT-EXIT=130'
check "alternate screen gone after ^C" test "$($T display -p -t dt '#{alternate_on}')" = 0
$T send-keys -t dt "clear; '$DT' inspect --list demo/targets.list --session '$SESSION'; echo DT-EXIT=\$?" Enter
wait_for ' 2/26' 50
shpid=$($T display -p -t dt '#{pane_pid}')
dtpid=$(pgrep -P "$shpid" doubletty | head -n 1)
if [ -n "$dtpid" ]; then
  kill -TERM "$dtpid"
  check "SIGTERM ends with status 143" wait_for '^DT-EXIT=143'
  check "alternate screen gone after SIGTERM" test "$($T display -p -t dt '#{alternate_on}')" = 0
else
  bad "inspector process found for SIGTERM"
fi
# a crash (SIGSEGV) still leaves the terminal usable
$T send-keys -t dt "clear; '$DT' inspect --list demo/targets.list --session '$SESSION'; echo DT-EXIT=\$?" Enter
wait_for ' 2/26' 50
dtpid=$(pgrep -P "$shpid" doubletty | head -n 1)
if [ -n "$dtpid" ]; then
  kill -SEGV "$dtpid"
  check "SIGSEGV ends with status 139" wait_for '^DT-EXIT=139'
  check "alternate screen gone after SIGSEGV" test "$($T display -p -t dt '#{alternate_on}')" = 0
else
  bad "inspector process found for SIGSEGV"
fi
$T send-keys -t dt "clear; stty -a | grep -o ' -*icanon' ; echo PROMPT-\$((40+3))" Enter
check "shell prompt usable after the signals" wait_for '^PROMPT-43'
check "terminal back in canonical (line) mode" wait_for '^ icanon'

# ---- no terminal to draw on: refused before the screen is touched
expect_fail "TERM=dumb refused" "TERM=dumb" env TERM=dumb "$DT" inspect --session "$TMP/dumb.session" "$TMP/demo/vpq01.fits"
check "no session file created for a refused terminal" test ! -e "$TMP/dumb.session"
expect_fail "TERM unset refused" "TERM is not set" env -u TERM "$DT" "$TMP/demo/vpq01.fits"
finish
