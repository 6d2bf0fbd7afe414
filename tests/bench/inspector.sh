#!/bin/sh
# Inspector frame time: a fixed vetting session (cursor moves, components
# added and nudged, undo, refits, verdicts) replayed headless against the
# demo survey; every keystroke is timed from the key to the finished screen,
# including the refit and the fsync'd session record.  Reports the median,
# 90th percentile and maximum over all keys, over the keys that refitted,
# over the moves to the next spectrum (a verdict: record, open the next
# one, draw; each after a pause of 200 ms as a person looks before
# judging), and over the refitting keys until their fit was done (a refit
# longer than the frame's slice, inspect --fit-slice, is drawn as far as it
# got and finished, then recorded, after the frame).  The budget is one
# frame, 16 ms.  The session file lives in the working directory's file
# system
# (a real disk: fsync costs what it costs there); a second run on /dev/shm,
# when there is one, shows the part that is the disk.
set -u
BUILD=${BUILD:-build}
DT=${DT:-$BUILD/doubletty}
case $DT in /*) ;; *) DT=$(pwd)/$DT ;; esac
WORK=$(mktemp -d "${TMPDIR:-/tmp}/dt-bench-inspector.XXXXXX")
trap 'rm -rf "$WORK"' EXIT
export LANG=C.UTF-8 LC_ALL=C.UTF-8

"$DT" demo "$WORK/demo" >/dev/null || exit 1

# one pass over every spectrum of the demo
keys="$WORK/keys"
: >"$keys"
for i in $(seq 26); do
  cat >>"$keys" <<'EOF'
cursor-right-fast
cursor-right-fast
cursor-left
zoom-in
zoom-out
add-component
nudge-v-up
nudge-b-up
nudge-logn-down
next-component
nudge-v-down-coarse
undo
undo
refit
window-mark
cursor-right-fast
window-mark
continuum-order-down
undo
undo
pause 200
verdict-unsure
EOF
done

run() {
  rm -f "$1"
  (cd "$WORK" && "$DT" inspect --list demo/targets.list --session "$1" --replay-keys "$keys" --bench) || exit 1
}

echo "inspector: $(grep -c . "$keys") keystrokes over the demo survey, 100x32 screen, braille"
echo "  session on the working disk ($(df -P "$WORK" | awk 'NR == 2 { print $1 }')):"
run "$WORK/bench.session" | sed 's/^/    /'
if [ -d /dev/shm ] && [ -w /dev/shm ]; then
  s=$(mktemp /dev/shm/dt-bench.XXXXXX)
  echo "  session in memory (/dev/shm, fsync nearly free):"
  run "$s" | sed 's/^/    /'
  rm -f "$s"
fi
echo "  budget: one frame (16 ms at 60 Hz); refit keystrokes p90 <= 8 ms, max <= 16 ms"
