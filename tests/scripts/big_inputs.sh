# Big inputs through the commands, at sizes that keep the suite quick (the
# full sizes -- 10 million pixels, a million-line session -- are measured
# by `make bench`, tests/bench/big_inputs.sh):
#   - a list of 100 000 spectra: the inspector starts (and quits) in under a
#     second and reads no spectrum but the one it shows;
#   - a session of 100 000 lines over 10 000 of them: the inspector resumes
#     at the first spectrum without a verdict in under 3 s, and log and
#     export read it completely.
# Inputs from the generator in tests/unit/test_big_inputs.c.  The budgets
# are CPU seconds (user + system, /usr/bin/time): the suite runs tests in
# parallel on a shared machine, where wall time measures the load, not the
# program.  Under a sanitizer build they are three times as long.
. "$(dirname "$0")/../lib.sh"

GEN=$BUILD/tests/test_big_inputs
if [ ! -x "$GEN" ]; then
  bad "test_big_inputs built (run through make check)"
  finish
  exit 1
fi
export LANG=C.UTF-8 LC_ALL=C.UTF-8
slow=1
grep -aq __asan_init "$DT" 2>/dev/null && slow=3
"$DT" demo "$TMP/demo" >/dev/null 2>&1 || { bad "demo survey written"; finish; exit 1; }
if ! need_tool /usr/bin/time "CPU time of the big inputs"; then finish; exit 1; fi
# cpu OUT COMMAND...: runs COMMAND; its CPU seconds (user + system) into OUT
cpu() { _o=$1; shift; /usr/bin/time -f '%U %S' -o "$_o" "$@"; }
secs() { tail -n 1 "$1" | awk '{ printf "%.2f", $1 + $2 }'; }
under() { awk -v t="$1" -v m="$2" -v s="$slow" 'BEGIN { exit !(t < m * s) }'; }

L=$TMP/list
mkdir "$L"
# Every entry is listed, but only the spectra shown below exist (the
# first; the first without a verdict in the session, 0-based 9995, and the
# one after it): the inspector must read no other, and making 100 000
# links would dominate the test.
check "a list of 100000 spectra generated (3 of them on disk)" \
  "$GEN" --list "$L" 100000 "$TMP/demo/vpq01.fits" "vsys=512 R=3690" 0,9995,9996
echo quit >"$TMP/quit"
cpu "$TMP/cpu" "$DT" inspect --list "$L/targets.list" --session "$TMP/new.session" --replay-keys "$TMP/quit" \
  --screen-dump "$TMP/screen" >/dev/null 2>"$TMP/err"
rc=$?
t=$(secs "$TMP/cpu")
check "inspector on 100000 spectra: started and quit (exit $rc)" test "$rc" -eq 0
check "... showing 1/100000" grep -q "^ doubletty  1/100000  judged 0 " "$TMP/screen"
check "... in under $slow CPU s ($t s)" under "$t" 1
check "... and no session record for merely looking" test "$(wc -l <"$TMP/new.session")" -eq 1

check "a session of 100000 lines over 10000 of them generated" \
  "$GEN" --session "$L/big.session" 100000 "$L" "$TMP/demo/vpq01.fits" 5
printf 'verdict-unsure\nquit\n' >"$TMP/keys"
cpu "$TMP/cpu" "$DT" inspect --list "$L/targets.list" --session "$L/big.session" --replay-keys "$TMP/keys" \
  --screen-dump "$TMP/screen" >/dev/null 2>"$TMP/err"
rc=$?
t=$(secs "$TMP/cpu")
check "resume of 100000 lines (exit $rc)" test "$rc" -eq 0
check "... at the first spectrum without a verdict: 9996, one more judged" \
  grep -q "^ doubletty  9997/100000  judged 9996 " "$TMP/screen"
check "... in under $((3 * slow)) CPU s ($t s)" under "$t" 3
check "... the new verdict appended" sh -c "[ \$(wc -l <'$L/big.session') -eq 100002 ] && tail -n 1 '$L/big.session' | grep -q 'spec0009995.fits#NaI.*act=verdict'"
"$DT" log "$L/big.session" >"$TMP/log" 2>"$TMP/err"
check "log prints every change ($(wc -l <"$TMP/log") lines)" test "$(wc -l <"$TMP/log")" -eq 100001
"$DT" export "$L/big.session" -o "$TMP/big.csv" 2>"$TMP/err"
check "export writes every spectrum (exit $?)" test "$(cut -d, -f1 "$TMP/big.csv" | sed 1d | sort -u | wc -l)" -eq 10000
finish
