# A spectrum file that changes under the program between the listing and
# the opening: removed, replaced by a directory, by a named pipe, by bytes
# that are no spectrum, or removed while it is on screen.  Documented
# behaviour: the inspector reads a spectrum only when it shows it; one that
# cannot be read is shown as such with the reason (never a hang: a named
# pipe is refused without waiting for a writer), can be skipped or marked
# unusable, and the queue goes on; one removed while on screen is judged
# from what was read.  `doubletty fit` reports the file and goes on with
# the others (exit status 1).
. "$(dirname "$0")/../lib.sh"

export LANG=C.UTF-8 LC_ALL=C.UTF-8
"$DT" demo "$TMP/demo" >/dev/null 2>&1 || { bad "demo survey written"; finish; exit 1; }
D=$TMP/demo
# six spectra, six files of their own bytes (a session knows a spectrum by
# its digest): the same data, each with its own header card
for f in a b c d e f; do
  LC_ALL=C sed "s/OBJECT  = 'VPQ03   '/OBJECT  = 'VPQ03-$f '/" "$D/vpq03.fits" >"$TMP/$f.fits"
done
cat >"$TMP/q.list" <<EOF
a.fits vsys=512 R=3460 name=SHOWN-THEN-REMOVED
b.fits vsys=512 R=3460 name=REMOVED
c.fits vsys=512 R=3460 name=DIRECTORY
d.fits vsys=512 R=3460 name=PIPE
e.fits vsys=512 R=3460 name=GARBAGE
f.fits vsys=512 R=3460 name=INTACT
EOF
S=$TMP/s.session

# the inspector waits for keys on a pipe: faults happen between keys
mkfifo "$TMP/keys"
timeout 60 "$DT" inspect --list "$TMP/q.list" --session "$S" --replay-keys "$TMP/keys" \
  --screen-dump "$TMP/screen" >"$TMP/out" 2>"$TMP/err" &
pid=$!
exec 3>"$TMP/keys"
key() { printf '%s\n' "$@" >&3; }
sleep 0.5 # a.fits is on screen (read); the others are only listed
rm "$TMP/a.fits" "$TMP/b.fits"
rm "$TMP/c.fits" && mkdir "$TMP/c.fits"
rm "$TMP/d.fits" && mkfifo "$TMP/d.fits"
head -c 5000 /dev/urandom >"$TMP/e.fits"
key verdict-detected   # a: judged from what was read; on to b
key verdict-detected   # b: refused (cannot be read)
key verdict-unusable   # b: unusable; on to c
key next-spectrum      # c: a directory; on to d
key next-spectrum      # d: a named pipe (must not hang); on to e
key verdict-unusable   # e: garbage, unusable; on to f
key verdict-not-detected
key quit
exec 3>&-
wait "$pid"
rc=$?
on_screen() { grep -Fq -- "$1" "$TMP/screen"; }
check "the inspector went through the queue and quit normally (exit $rc)" test "$rc" -eq 0
check "it ended on the last spectrum, 4 of 6 judged" on_screen " 6/6  judged 4"
check "nothing on standard error ($(head -c 200 "$TMP/err"))" test ! -s "$TMP/err"
rec() { grep -Eq "file=([^	]*/)?$1#NaI	.*act=verdict	verdict=$2" "$S"; }
check "the spectrum removed while on screen was judged from what was read" rec a.fits detected
check "the removed spectrum: refused as detected, recorded as unusable" rec b.fits unusable
check "... and only that verdict" test "$(grep -Ec 'file=([^	]*/)?b.fits#NaI	.*act=verdict' "$S")" -eq 1
check "the garbage file: unusable" rec e.fits unusable
check "the intact one: judged" rec f.fits not-detected
check "the directory and the pipe were skipped, no record" sh -c "! grep -Eq 'file=([^	]*/)?[cd].fits#' '$S'"
"$DT" log "$S" >/dev/null 2>"$TMP/log.err"
check "the session reads back cleanly" test ! -s "$TMP/log.err"

# each reason, as the screen gives it (looking records nothing)
for n in 2 3 4 5; do
  : >"$TMP/k1"
  i=1
  while [ "$i" -lt "$n" ]; do echo next-spectrum >>"$TMP/k1"; i=$((i + 1)); done
  timeout 20 "$DT" inspect --list "$TMP/q.list" --session "$TMP/look.session" --replay-keys "$TMP/k1" \
    --screen-dump "$TMP/screen$n" >/dev/null 2>&1
done
check "removed: the screen says it is missing" grep -q "b.fits: cannot open: No such file or directory" "$TMP/screen2"
check "directory: the screen says so" grep -q "c.fits: is a directory, not a spectrum file" "$TMP/screen3"
check "named pipe: refused at once, the screen says so" grep -q "d.fits: is a named pipe, not a spectrum file" "$TMP/screen4"
check "garbage: the screen says what is wrong" grep -q "e.fits: .*not a FITS file" "$TMP/screen5"

# the batch command: a message per file, the rest fitted
expect_fail "fit: a removed file is named, exit 1" "b.fits: cannot open" \
  timeout 60 "$DT" fit --list "$TMP/q.list" -o "$TMP/fit.csv"
check "fit: the named pipe did not block it either" grep -q "d.fits: is a named pipe" "$TMP/ef.err"
check "fit: the intact spectrum has its row" grep -q "f.fits.*,ok," "$TMP/fit.csv"
expect_fail "info on a named pipe: refused, no wait" "is a named pipe, not a spectrum file" timeout 10 "$DT" info "$TMP/d.fits"
finish
