# Signals while the inspector runs in a real terminal (tmux): SIGINT (^C),
# SIGTERM, SIGQUIT, SIGHUP sent while the terminal stays, a real hangup
# (the pane and its terminal closed under the inspector, as when an SSH
# connection drops), a terminal that disappears without any signal, and
# kill -9 at several points of a scripted run.  Documented behaviour:
#   - a terminating signal ends the inspector at once with status 128 + the
#     signal, the terminal restored (no alternate screen, line mode, echo);
#   - a lost terminal ends it too (no process left behind, none spinning);
#   - every judgement shown as done is in the session file, which reads back
#     without a damaged line and resumes where it stopped; a note still
#     being typed (not yet shown as saved) is not recorded;
#   - after kill -9 (which nothing can catch) the terminal must be reset by
#     hand, and still every judgement shown as done is on record.
. "$(dirname "$0")/../lib.sh"
. "$(dirname "$0")/fault_tmux.inc"

if [ "$HAVE_TMUX" -ne 1 ]; then
  missing tmux "signal faults"
  finish
  exit $?
fi
"$DT" demo "$TMP/demo" >/dev/null 2>&1 || { bad "demo survey written"; finish; exit 1; }
tmux_start signals || { bad "tmux starts"; finish; exit 1; }
$T new-session -d -s keep "sh" # keeps the server when the pane "dt" is closed

S=$TMP/sig.session
# spectra with a verdict on record (a file with several table rows counts each)
judged_in() { grep 'act=verdict' "$1" | grep -v '	verdict=none	' | grep -o 'file=[^	]*	hdu=[^	]*	row=[^	]*' | sort -u | wc -l; }
clean_read() { "$DT" log "$1" >/dev/null 2>"$TMP/log.err" && ! grep -q . "$TMP/log.err"; }
open_in_pane() { run_in_pane "clear; cd '$TMP' && '$DT' inspect --list demo/targets.list --session '$1'; echo DT-EXIT=\$?"; }
# the title's "judged N"
shown_judged() { screen | sed -n 's/^ doubletty  [0-9]*\/26  judged \([0-9]*\).*/\1/p' | head -n 1; }
gone() { # wait until process $1 is gone (tenths of a second)
  _g=${2:-50}
  while [ "$_g" -gt 0 ]; do
    kill -0 "$1" 2>/dev/null || return 0
    sleep 0.1
    _g=$((_g - 1))
  done
  return 1
}

# ---- terminating signals with the terminal still there
for sig in INT TERM QUIT HUP; do
  case $sig in INT) num=2 ;; TERM) num=15 ;; QUIT) num=3 ;; HUP) num=1 ;; esac
  before=$(judged_in "$S" 2>/dev/null || echo 0)
  open_in_pane "$S"
  if ! wait_for "^ doubletty  $((before + 1))/26  judged $before " 100; then
    bad "SIG$sig: inspector opened at $((before + 1))/26"
    screen | head -n 2
    continue
  fi
  act verdict-detected
  check "SIG$sig: a verdict shown as saved" wait_for "saved: #$((before + 1)) detected"
  act add-component
  check "SIG$sig: a component added on the next spectrum" wait_for "component [0-9]+ added at"
  act edit-note
  wait_for '^note> ' 30
  $T send-keys -t dt -l "half-typed-$sig"
  wait_for_text "half-typed-$sig" 20
  pid=$(dt_pid)
  if [ "$sig" = INT ]; then $T send-keys -t dt C-c; else kill -"$sig" "$pid"; fi
  check "SIG$sig: the inspector ends with status $((128 + num))" wait_exit $((128 + num))
  terminal_sane "SIG$sig"
  check "SIG$sig: the verdict is on record ($((before + 1)) judged)" test "$(judged_in "$S")" -eq $((before + 1))
  check "SIG$sig: the component is on record" sh -c "tail -n 1 '$S' | grep -q 'act=comp-add'"
  check "SIG$sig: the half-typed note is not" sh -c "! grep -q 'half-typed-$sig' '$S'"
  check "SIG$sig: the file reads back without a damaged line" clean_read "$S"
done
n=$(judged_in "$S")
open_in_pane "$S"
check "after the signals: resumes at $((n + 1))/26 with $n judged" wait_for "^ doubletty  $((n + 1))/26  judged $n "
check "... with the component added before the signal" wait_for '^ .?1   [+-][0-9]'
act quit
wait_exit 0

# ---- a real hangup: the terminal closes under the inspector
open_in_pane "$S"
wait_for "^ doubletty  $((n + 1))/26" 100
act verdict-unsure
check "hangup: a verdict shown as saved" wait_for "saved: #$((n + 1)) unsure"
pid=$(dt_pid)
$T kill-session -t dt
if gone "$pid" 50; then ok "hangup: the inspector ended with its terminal"
else
  bad "hangup: the inspector is still running 5 s after its terminal closed ($(ps -o stat=,pcpu= -p "$pid"))"
  kill -KILL "$pid"
fi
check "hangup: the verdict is on record" test "$(judged_in "$S")" -eq $((n + 1))
check "hangup: the file reads back without a damaged line" clean_read "$S"
$T new-session -d -s dt -x 100 -y 32 "sh"

# ---- a terminal that goes away without any signal (not the controlling
#      terminal of the inspector: started in a session of its own)
if command -v setsid >/dev/null 2>&1; then
  run_in_pane "cd '$TMP' && setsid -w '$DT' inspect --list demo/targets.list --session '$TMP/lost.session'"
  wait_for "^ doubletty  1/26" 100
  pid=$(pgrep -f "session $TMP/lost.session" -x doubletty 2>/dev/null | head -n 1)
  [ -n "$pid" ] || pid=$(ps -eo pid=,args= | grep "[d]oubletty inspect .*lost.session" | awk '{ print $1 }' | head -n 1)
  act verdict-detected
  wait_for "saved: #1 detected" 50
  $T kill-session -t dt
  if [ -n "$pid" ] && gone "$pid" 50; then ok "terminal lost without a signal: the inspector ends (no spinning)"
  else
    bad "terminal lost without a signal: still running ($(ps -o stat=,pcpu= -p "$pid" 2>/dev/null))"
    [ -n "$pid" ] && kill -KILL "$pid"
  fi
  check "terminal lost: the verdict is on record" test "$(judged_in "$TMP/lost.session")" -eq 1
  $T new-session -d -s dt -x 100 -y 32 "sh"
else
  missing setsid "terminal lost without a signal"
fi

# ---- kill -9 at several points
K=$TMP/k9.session
# after kill -9 the terminal is left as the inspector set it (no CR to NL
# mapping: a typed line must end in ^J), and keys the inspector did not
# read yet went to the shell (^C drops them)
reset_pane() {
  $T send-keys -t dt C-c
  sleep 0.2
  $T send-keys -t dt "stty sane; tput rmcup 2>/dev/null; clear; echo RESET-DONE" C-j
  wait_for "^RESET-DONE" 30
}
kill9() {
  what=$1
  pid=$(dt_pid)
  shown=$(shown_judged)
  [ -n "$pid" ] && kill -KILL "$pid"
  check "kill -9 $what: status 137" wait_for "DT-EXIT=137"
  reset_pane
  if [ -e "$K" ]; then
    got=$(judged_in "$K")
    check "kill -9 $what: every judgement shown as done is on record (shown ${shown:-none}, recorded $got)" \
      test "$got" -ge "${shown:-0}"
    check "kill -9 $what: the file reads back without a damaged line" clean_read "$K"
    (cd "$TMP" && "$DT" inspect --list demo/targets.list --session "$K" --replay-keys /dev/null \
      --screen-dump "$TMP/dump" >/dev/null 2>&1)
    check "kill -9 $what: it resumes with $got judged" grep -q "^ doubletty  [0-9]*/26  judged $got " "$TMP/dump"
  else
    check "kill -9 $what: no session yet, nothing shown as done" test "${shown:-0}" -eq 0
  fi
}
# 1. at start-up, before the first screen
run_in_pane "clear; cd '$TMP' && '$DT' inspect --list demo/targets.list --session '$K'; echo DT-EXIT=\$?"
n=0
while [ -z "$(dt_pid)" ] && [ "$n" -lt 50 ]; do sleep 0.02; n=$((n + 1)); done
kill9 "at start-up"
# 2. after three verdicts, each waited for
open_in_pane "$K"
wait_for "^ doubletty  1/26" 100
for i in 1 2 3; do
  act verdict-not-detected
  wait_for "saved: #$i not-detected" 50
done
kill9 "after three verdicts"
# 3. in the middle of a burst of keys
open_in_pane "$K"
wait_for "^ doubletty  4/26  judged 3" 100
nk=$(printf '%s\n' "$KEYS" | awk -F'\t' '$1 == "verdict-not-detected" { print $2 }')
$T send-keys -t dt -l "$nk$nk$nk$nk$nk$nk$nk$nk$nk$nk$nk$nk$nk$nk"
sleep 0.05
kill9 "during a burst of fourteen verdicts"
# 4. right after a refit was asked for, and during the first pass of a new spectrum
open_in_pane "$K"
wait_for "^ doubletty  [0-9]*/26" 100
act add-component
act refit
act verdict-detected
kill9 "during a refit and a first pass"
finish
