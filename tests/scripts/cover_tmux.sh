#!/bin/sh
# The key of partial covering in a real terminal: tmux runs the inspector,
# types the key the key table gives the action "covering" (P), and reads
# the screen back: the C_f column with the covering factor and its flag
# appears, the fit row says so, the session records it; the key again
# switches it off.  The spectrum (tests/scripts/fit_cmd_spectrum.awk)
# covers 60% of the source: I = 1 - C + C exp(-tau) (Hamann et al. 1997,
# ApJ 478, 80, eq. 1).
. "$(dirname "$0")/../lib.sh"
need_tool tmux "the covering key in a terminal" || { finish; exit $?; }
SOCK="dt-cover-$$"
T="tmux -L $SOCK -f /dev/null"
trap '$T kill-server >/dev/null 2>&1; rm -rf "$TMP"' EXIT
export LANG=C.UTF-8 LC_ALL=C.UTF-8
awk -v lo=5870 -v hi=5920 -v step=0.04 -v snr=80 -v seed=21 -v comps="0:4:15" -v cf=0.6 \
  -f "$ROOT/tests/scripts/fit_cmd_spectrum.awk" >"$TMP/part.txt"
KEY=$("$DT" keys | awk -F'\t' '$1 == "covering" { print $2 }')
check "the action covering has the key P" [ "$KEY" = P ]
screen() { $T capture-pane -p -t dt; }
wait_for() {
  n=${2:-80}
  while [ "$n" -gt 0 ]; do
    if screen | grep -Eq -- "$1"; then return 0; fi
    sleep 0.1
    n=$((n - 1))
  done
  return 1
}
$T new-session -d -s dt -x 110 -y 34 "sh" || { bad "tmux session starts"; finish; exit 1; }
$T send-keys -t dt "cd '$TMP' && '$DT' inspect --fwhm 2 --session s.session part.txt; echo DT-EXIT=\$?" Enter
if wait_for 'v \[km/s\].*b \[km/s\].*log N' 150; then ok "component table on screen"; else bad "component table on screen"; screen; fi
check "no C_f column before the key" sh -c "! $T capture-pane -p -t dt | grep -q 'C_f'"
$T send-keys -t dt -l "$KEY"
if wait_for 'log N \[cm-2\] +C_f +held'; then ok "C_f column after $KEY"; else bad "C_f column after $KEY"; screen | tail -12; fi
check "message: partial covering on" wait_for '^partial covering: a covering factor per component'
check "the fit row says partial covering" wait_for 'fit .*partial covering'
check "component 1: C_f 0.5x-0.6x with its error, flagged partial" wait_for '1 +[+-]0\.[0-9].* 0\.(5[5-9]|6[0-5])±0\.0[0-9] partial'
$T send-keys -t dt -l "$KEY"
check "the key again: covering off" wait_for '^partial covering off'
check "no C_f column after the second press" sh -c "sleep 0.3; ! $T capture-pane -p -t dt | grep -q 'C_f'"
$T send-keys -t dt q
check "the inspector ends cleanly" wait_for 'DT-EXIT=0'
check "session: covering on, then off" sh -c "grep -c 'act=covering' '$TMP/s.session' | grep -qx 2 && grep -q 'cover=1' '$TMP/s.session' && tail -n 1 '$TMP/s.session' | grep -q 'cover=0'"
finish
