#!/bin/sh
# What `doubletty inspect` queues, before the screen opens: --files-from,
# the default session beside the target list, and the spectra two sessions
# disagree on, each with the settings the first session recorded for it
# (and, with --list, only the list's entries among them, in list order).
. "$(dirname "$0")/../lib.sh"
AWKGEN=$ROOT/tests/scripts/fit_cmd_spectrum.awk
mkdir "$TMP/sub"
for k in 1 2 3; do
  awk -v lo=5850 -v hi=5960 -v step=0.1 -v snr=40 -v seed=$k -v comps="" \
    -f "$AWKGEN" >"$TMP/sub/q$k.txt"
done
printf 'quit\n' >"$TMP/keys"
# title: " doubletty  CUR/TOTAL  judged N  | ... vsys +V  R ... "
title() { head -n 1 "$1"; }

# ---- the default session beside the list ----------------------------------
printf 'q1.txt\nq2.txt\n' >"$TMP/sub/t.list"
(cd "$TMP" && $DT inspect --list sub/t.list --replay-keys keys --screen-dump d1.txt >/dev/null 2>&1)
check "--list sub/t.list: the session is sub/doubletty.session" [ -s "$TMP/sub/doubletty.session" ]
check "... and not ./doubletty.session" [ ! -e "$TMP/doubletty.session" ]
check "two entries queued" grep -q ' 1/2 ' "$TMP/d1.txt"

# ---- --files-from -----------------------------------------------------------
printf '# paths\n%s\n\n%s\n%s\n' "$TMP/sub/q1.txt" "$TMP/sub/q2.txt" "$TMP/sub/q3.txt" >"$TMP/paths"
$DT inspect --files-from "$TMP/paths" --session "$TMP/f.session" --replay-keys "$TMP/keys" \
  --screen-dump "$TMP/d2.txt" >/dev/null 2>&1
check "--files-from: three entries (comment and blank line skipped)" grep -q ' 1/3 ' "$TMP/d2.txt"
$DT inspect --files-from - --session "$TMP/f2.session" --replay-keys "$TMP/keys" \
  --screen-dump "$TMP/d3.txt" <"$TMP/paths" >/dev/null 2>&1
check "--files-from - reads standard input" grep -q ' 1/3 ' "$TMP/d3.txt"
expect_fail "--files-from a missing file" "nosuch: cannot open" \
  $DT inspect --files-from "$TMP/nosuch" --replay-keys "$TMP/keys"

# ---- disagreements ------------------------------------------------------------
if need_py "disagreement sessions written by tests/py/session_tool.py"; then
  "$PY" - "$ROOT/tests/py" "$TMP" <<'PYEOF'
import sys
sys.path.insert(0, sys.argv[1])
import session_tool as t
d = sys.argv[2]
A = t.Writer(d + "/a.session", "ana")
B = t.Writer(d + "/b.session", "ben")
# q3 and q1 disagree (in that order in the sessions), q2 agrees
for name, va, vb, vsys, R, win in (("q3", "detected", "unsure", 412.0, 3800.0, (-250.0, 350.0)),
                                   ("q2", "detected", "detected", 0.0, 3000.0, (-600.0, 600.0)),
                                   ("q1", "not-detected", "detected", -150.0, 5200.0, (-600.0, 600.0))):
    p = d + "/sub/" + name + ".txt"
    for w, v in ((A, va), (B, vb)):
        st = {"verdict": v, "comps": [], "fit": None, "vsys": vsys, "R": R, "vlo": win[0], "vhi": win[1]}
        w.record(p, 0, 0, "", "verdict", [("verdict", v)], st)
A.close()
B.close()
PYEOF
  $DT inspect --only-disagreements "$TMP/a.session" "$TMP/b.session" --session "$TMP/adj.session" \
    --replay-keys "$TMP/keys" --screen-dump "$TMP/d4.txt" >/dev/null 2>"$TMP/d4.err"
  check "two disagreements queued ($(title "$TMP/d4.txt"))" grep -q ' 1/2 ' "$TMP/d4.txt"
  check "the first carries its recorded vsys +412" sh -c "head -n 1 '$TMP/d4.txt' | grep -q 'vsys +412'"
  check "... and its recorded R 3800" sh -c "head -n 1 '$TMP/d4.txt' | grep -q 'R 3800'"
  check "... and its recorded velocity window on the axis (from -200 km/s, no -600)" \
    sh -c "grep '^km/s' '$TMP/d4.txt' | grep -q '^km/s *-200 ' && ! grep '^km/s' '$TMP/d4.txt' | grep -q -- '-600'"
  printf 'verdict-detected\nquit\n' >"$TMP/vkeys"
  $DT inspect --only-disagreements "$TMP/a.session" "$TMP/b.session" --session "$TMP/adjw.session" \
    --replay-keys "$TMP/vkeys" >/dev/null 2>&1
  check "the adjudication session records that window (vlo=-250, vhi=350)" \
    grep -q 'vlo=-250	vhi=350' "$TMP/adjw.session"
  printf 'q1.txt\nq2.txt\nq3.txt\n' >"$TMP/sub/all.list"
  $DT inspect --only-disagreements "$TMP/a.session" "$TMP/b.session" --list "$TMP/sub/all.list" \
    --session "$TMP/adj2.session" --replay-keys "$TMP/keys" --screen-dump "$TMP/d5.txt" >/dev/null 2>&1
  check "with --list: only the list's disagreements (2, not 3 + 2)" grep -q ' 1/2 ' "$TMP/d5.txt"
  check "... in list order: q1 first" grep -q 'q1.txt' "$TMP/d5.txt"
  printf 'q2.txt\n' >"$TMP/sub/agree.list"
  $DT inspect --only-disagreements "$TMP/a.session" "$TMP/b.session" --list "$TMP/sub/agree.list" \
    --session "$TMP/adj3.session" --replay-keys "$TMP/keys" >"$TMP/d6.out" 2>&1
  check "a list without disagreements: nothing to look at, exit 0 ($?)" grep -q 'agree on every spectrum' "$TMP/d6.out"
fi

finish
