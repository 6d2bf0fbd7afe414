# Faults of the session file while the inspector runs in a real terminal
# (tmux): the disk filling up (a 256 kB tmpfs, mounted when the test runs
# as root; the file-size-limit variant is in inspect_replay.sh), the file
# made read-only (chattr +i) or replaced by a read-only copy, and the file
# deleted.  Documented behaviour, checked each time:
#   - the next judgement is refused at once: the status line says SESSION
#     FILE FAILED with the reason, the title says SESSION NOT WRITABLE, the
#     queue does not move on, later judgements are refused too;
#   - quitting ends with status 1 and one message naming the session file;
#   - the terminal is restored (no alternate screen, line mode, echo);
#   - nothing judged before is lost: the file holds every earlier verdict,
#     reads back without a damaged line, and resumes where it stopped (a
#     removed file is written back from the inspector's open descriptor; a
#     replaced one is saved beside it as FILE.rescued).
. "$(dirname "$0")/../lib.sh"
. "$(dirname "$0")/fault_tmux.inc"

if [ "$HAVE_TMUX" -ne 1 ]; then
  missing tmux "session-file faults"
  finish
  exit $?
fi
"$DT" demo "$TMP/demo" >/dev/null 2>&1 || { bad "demo survey written"; finish; exit 1; }
tmux_start session || { bad "tmux starts"; finish; exit 1; }
MNT=
cleanup() {
  $T kill-server >/dev/null 2>&1
  if [ -n "$MNT" ]; then # the inspector may still be closing files on it
    umount "$MNT" 2>/dev/null || { sleep 1; umount "$MNT" 2>/dev/null; } || umount -l "$MNT"
  fi
  rm -rf "$TMP"
}
trap cleanup EXIT
trap 'exit 1' INT TERM HUP PIPE # the clean-up (above all the unmount) runs on these too

# headless verdicts: judge SESSION N  (N verdicts on the first unjudged spectra)
judge() {
  : >"$TMP/keys"
  i=0
  while [ "$i" -lt "$2" ]; do echo verdict-detected >>"$TMP/keys"; i=$((i + 1)); done
  (cd "$TMP" && "$DT" inspect --list demo/targets.list --session "$1" --replay-keys "$TMP/keys" \
    --screen-dump "$TMP/dump" >/dev/null 2>&1)
}
verdicts() { grep -c 'act=verdict' "$1"; }
clean_read() { "$DT" log "$1" >/dev/null 2>"$TMP/log.err" && ! grep -q . "$TMP/log.err"; }
open_in_pane() { run_in_pane "clear; cd '$TMP' && '$DT' inspect --list demo/targets.list --session '$1'; echo DT-EXIT=\$?"; }
# the refusal on screen: the failure, the title, the queue not moved
refused() {
  what=$1 pos=$2 reason=$3
  if wait_for_text "SESSION FILE FAILED" 50; then ok "$what: the status line says SESSION FILE FAILED"
  else bad "$what: the status line says SESSION FILE FAILED"; screen | tail -n 2; fi
  check "$what: ... with the reason ($reason)" wait_for "$reason" 10
  screen | grep "SESSION FILE FAILED" | sed 's/^/       /'
  check "$what: the title says SESSION NOT WRITABLE" wait_for_text "SESSION NOT WRITABLE" 10
  check "$what: the queue did not move: $pos" wait_for_text "$pos" 10
  act verdict-unsure
  sleep 0.3
  check "$what: a second judgement is refused too" wait_for_text "$pos" 10
}

# what the inspector said on leaving
said() { screen | grep "^doubletty: " | sed 's/^/       /'; }

# ---------------------------------------------------------------- disk full
if [ "$(id -u)" = 0 ] && mkdir -p "$TMP/mnt" && mount -t tmpfs -o size=256k tmpfs "$TMP/mnt" 2>/dev/null; then
  MNT=$TMP/mnt
  S=$MNT/full.session
  judge "$S" 2
  check "disk full: two verdicts recorded beforehand" test "$(verdicts "$S")" -eq 2
  dd if=/dev/zero of="$MNT/filler" bs=4k count=1024 >/dev/null 2>&1 # until the disk is full
  open_in_pane "$S"
  check "disk full: resumed at 3/26 with 2 judged" wait_for_text " 3/26  judged 2" 100
  # the file's last page may still hold a record or two: judge until refused
  k=0
  while [ "$k" -lt 6 ] && ! screen | grep -q "SESSION FILE FAILED"; do
    size0=$(wc -c <"$S")
    act verdict-detected
    wait_for "SESSION FILE FAILED|saved: #$((k + 3)) " 50
    screen | grep -q "SESSION FILE FAILED" || k=$((k + 1))
  done
  pos=" $((k + 3))/26  judged $((k + 2))"
  refused "disk full" "$pos" "No space left on device"
  act quit
  check "disk full: the inspector ends with status 1" wait_exit 1
  said
  check "disk full: one message names the session file" wait_for "^doubletty: .*full.session: .*No space left on device"
  terminal_sane "disk full"
  check "disk full: every verdict shown as saved is on record ($((k + 2)))" test "$(verdicts "$S")" -eq $((k + 2))
  check "disk full: the refused record was rolled back (size as before it)" test "$(wc -c <"$S")" -eq "$size0"
  check "disk full: it reads back without a damaged line" clean_read "$S"
  rm -f "$MNT/filler"
  judge "$S" 1
  check "disk full: with room again, it resumes and takes the next verdict" \
    grep -q " $((k + 4))/26  judged $((k + 3))" "$TMP/dump"
  check "disk full: $((k + 3)) verdicts on record" test "$(verdicts "$S")" -eq $((k + 3))
  umount "$MNT" && MNT=
else
  skip "disk full on a tmpfs (needs root and mount; see inspect_replay.sh for the file-size limit)"
fi

# ------------------------------------------------- read-only while running
S=$TMP/ro.session
judge "$S" 1
open_in_pane "$S"
check "read-only: resumed at 2/26" wait_for_text " 2/26  judged 1" 100
act verdict-detected
check "read-only: a verdict taken while still writable" wait_for_text " 3/26  judged 2" 50
if chattr +i "$S" 2>/dev/null; then
  act verdict-detected
  refused "immutable (chattr +i)" " 3/26  judged 2" "Operation not permitted"
  act quit
  check "read-only: status 1" wait_exit 1
  said
  check "read-only: the message names the session file" wait_for "^doubletty: .*ro.session: "
  chattr -i "$S"
  terminal_sane "read-only"
  check "read-only: both verdicts kept" test "$(verdicts "$S")" -eq 2
  check "read-only: reads back without a damaged line" clean_read "$S"
  judge "$S" 1
  check "read-only: writable again, resumes at 3/26 with 2 judged and goes on" grep -q " 4/26  judged 3" "$TMP/dump"
else
  skip "chattr +i (not supported here)"
  act quit
  wait_exit 0
fi

# replaced by a read-only copy (what a careless "fix the permissions" does)
S=$TMP/rep.session
judge "$S" 1
open_in_pane "$S"
check "replaced: resumed at 2/26" wait_for_text " 2/26  judged 1" 100
act verdict-not-detected
check "replaced: a verdict taken" wait_for_text " 3/26  judged 2" 50
cp "$S" "$S.copy" && chmod 444 "$S.copy" && mv -f "$S.copy" "$S"
act verdict-detected
refused "replaced" " 3/26  judged 2" "replaced while open"
act quit
check "replaced: status 1" wait_exit 1
  said
terminal_sane "replaced"
check "replaced: what the inspector held is saved as rep.session.rescued" cmp -s "$S" "$S.rescued"
check "replaced: both verdicts kept" test "$(verdicts "$S")" -eq 2

# ----------------------------------------------------- deleted while running
S=$TMP/del.session
judge "$S" 2
open_in_pane "$S"
check "deleted: resumed at 3/26" wait_for_text " 3/26  judged 2" 100
act verdict-detected
check "deleted: a verdict taken" wait_for_text " 4/26  judged 3" 50
cp "$S" "$TMP/del.before"
rm -f "$S"
act verdict-detected
refused "deleted" " 4/26  judged 3" "removed while open"
act quit
check "deleted: status 1" wait_exit 1
  said
check "deleted: the message says where the record went" wait_for "written back to .*del.session"
terminal_sane "deleted"
check "deleted: the file is back, as it was" cmp -s "$S" "$TMP/del.before"
check "deleted: reads back without a damaged line" clean_read "$S"
judge "$S" 1
check "deleted: resumes at 4/26 with 3 judged and goes on" grep -q " 5/26  judged 4" "$TMP/dump"

# deleted, and the inspector quit without another judgement
S=$TMP/del2.session
judge "$S" 1
open_in_pane "$S"
check "deleted, then quit: resumed at 2/26" wait_for_text " 2/26  judged 1" 100
act verdict-detected
wait_for_text " 3/26  judged 2" 50
cp "$S" "$TMP/del2.before"
rm -f "$S"
act quit
check "deleted, then quit: status 0 (nothing was refused)" wait_exit 0
check "deleted, then quit: the file is written back at close" cmp -s "$S" "$TMP/del2.before"
finish
