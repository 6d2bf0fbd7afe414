#!/bin/sh
# The session commands on session files written by an independent writer
# (tests/py/session_tool.py, from the documented format): log with its
# filters, export to CSV and FITS read back with astropy, compare against
# the Fleiss worked example, and the messages for bad sessions and options.
. "$(dirname "$0")/../lib.sh"
TOOL="$ROOT/tests/py/session_tool.py"

if ! need_py "session commands"; then finish; exit $?; fi
"$PY" "$TOOL" make-rich "$TMP" && "$PY" "$TOOL" make-fleiss "$TMP"
check "the test sessions are written" test -s "$TMP/rich.session" -a -s "$TMP/s1.session"
S=$TMP/rich.session

# ---- log ----
"$DT" log "$S" >"$TMP/log.out" 2>"$TMP/log.err"
check "log exits 0 on a clean session" test $? -eq 0
check "log prints nothing on stderr for a clean session" test ! -s "$TMP/log.err"
check "log shows one line per record (10)" test "$(wc -l <"$TMP/log.out")" -eq 10
"$PY" "$TOOL" check-log "$TMP/rich.json" "$TMP/log.out" >"$TMP/cl.out"
check "log: who, when, what ($(grep -c '^ok' "$TMP/cl.out") checks)" test $? -eq 0
check "log: the fit with its errors" grep -q 'fit  fitted in 9 iterations: logN 12.42+-0.04 b 17.2+-1.7 v +382.1+-1.3; logN 11.86+-0.12' "$TMP/log.out"
check "log: the result after a change" grep -q '=> 2 components, chi2_red 1.112, detected' "$TMP/log.out"
check "log: a note on one line, escapes shown" grep -q 'note  "sky line near 5893, \\"check\\"\\tsee log\\nsecond line \\\\ end"' "$TMP/log.out"
check "log: a changed input file is marked" grep -q 'multi.fits (hdu 2, row 5)  note.*input file changed' "$TMP/log.out"
n=$("$DT" log "$S" --target '*/qso0*' | wc -l)
check "log --target with a glob (8 lines, got $n)" test "$n" -eq 8
n=$("$DT" log "$S" --target multi | wc -l)
check "log --target with a part of the path (2, got $n)" test "$n" -eq 2
n=$("$DT" log "$S" --action verdict,note | wc -l)
check "log --action verdict,note (7, got $n)" test "$n" -eq 7
n=$("$DT" log "$S" --user 'Mira Okonkwo' --action=fit | wc -l)
check "log --user and --action combine (1, got $n)" test "$n" -eq 1
n=$("$DT" log "$S" --user nobody | wc -l)
check "log --user of nobody: nothing" test "$n" -eq 0
expect_fail "log --action with an unknown action" "unknown action 'jump'" "$DT" log "$S" --action verdict,jump
expect_fail "log without a session" "usage: doubletty log" "$DT" log
expect_fail "log of a missing file" "nosuch.session: cannot open for reading" "$DT" log "$TMP/nosuch.session"
printf 'wave flux\n5890 1.0\n' >"$TMP/spec.txt"
expect_fail "log of a file that is not a session" "spec.txt: line 1: not a doubletty session file" "$DT" log "$TMP/spec.txt"
sed '1s/doubletty-session [0-9]*/doubletty-session 7/' "$S" >"$TMP/future.session"
expect_fail "log of a newer format" "future.session: line 1: session format version 7 is newer" "$DT" log "$TMP/future.session"

# damaged sessions: a cut last line, a garbled middle line
head -c -30 "$S" >"$TMP/cut.session"
"$DT" log "$TMP/cut.session" >"$TMP/cut.out" 2>"$TMP/cut.err"
check "log of a cut session exits 1 (the trail is incomplete)" test $? -eq 1
check "and says how many lines were damaged" grep -q 'cut.session: 1 damaged line skipped' "$TMP/cut.err"
check "the cut last line is named on stderr" grep -q 'cut.session: line 11: incomplete last line' "$TMP/cut.err"
check "the records before it are shown (9)" test "$(wc -l <"$TMP/cut.out")" -eq 9
sed '3s/logN=11.9/logN=11.8/' "$S" >"$TMP/garbled.session"
"$DT" log "$TMP/garbled.session" >"$TMP/g.out" 2>"$TMP/g.err"
check "log of a garbled session exits 1" test $? -eq 1
check "a garbled line is named with its line number" grep -q 'garbled.session: line 3: check sum does not match' "$TMP/g.err"
check "and the rest is shown (9)" test "$(wc -l <"$TMP/g.out")" -eq 9
"$DT" export "$TMP/garbled.session" -o "$TMP/garbled.csv" 2>"$TMP/ge.err"
check "export of a damaged session exits 1" test $? -eq 1
check "export of a damaged session warns and goes on" grep -q 'line 3' "$TMP/ge.err"
check "and says how many lines were damaged" grep -q "garbled.session: 2 lines damaged or inconsistent" "$TMP/ge.err"
"$DT" export "$TMP/garbled.session" -o - >/dev/null 2>"$TMP/ge2.err"
check "export -o - of a damaged session exits 1 too" test $? -eq 1
check "the spectrum after the damage is flagged" grep -q 'replay-mismatch' "$TMP/garbled.csv"

# ---- export ----
"$DT" export "$S" -o "$TMP/out.csv"
check "export to CSV" test $? -eq 0 -a -s "$TMP/out.csv"
"$DT" export "$S" -o "$TMP/out.fits"
check "export to FITS" test $? -eq 0 -a -s "$TMP/out.fits"
VERSION=$("$DT" --version | awk '{print $2}')
"$PY" "$TOOL" check-export "$TMP/rich.json" "$TMP/out.csv" "$TMP/out.fits" "$S" "$VERSION" >"$TMP/ce.out" 2>&1
rc=$?
grep -A3 "^FAIL\|Error\|Trace" "$TMP/ce.out"
check "export read back with astropy: values, units, header ($(grep -c '^ok' "$TMP/ce.out") checks)" test $rc -eq 0
cp "$TMP/out.csv" "$TMP/keep.csv"
expect_fail "export never replaces a file without --force" "out.csv: file exists; use --force" "$DT" export "$S" -o "$TMP/out.csv"
check "the existing file is untouched" cmp -s "$TMP/out.csv" "$TMP/keep.csv"
"$DT" export "$TMP/s1.session" -o "$TMP/out.csv" --force
check "--force replaces it" test $? -eq 0 -a "$(grep -c fleiss "$TMP/out.csv")" -eq 100
expect_fail "export onto the session itself is refused" "that is the session file itself" "$DT" export "$S" -o "$S" --force
expect_fail "export with an unknown format" "cannot tell the format" "$DT" export "$S" -o "$TMP/out.xlsx"
expect_fail "export without -o" "no output file" "$DT" export "$S"
check "no temporary files are left" test -z "$(ls "$TMP" | grep tmp-)"
"$DT" export "$S" -o - >"$TMP/stdout.csv"
check "export -o - writes CSV to standard output" test "$(head -c 14 "$TMP/stdout.csv")" = "file,name,hdu,"
mkdir "$TMP/ro" && chmod 555 "$TMP/ro"
expect_fail "export into a directory that cannot be written" "cannot create" unprivileged "$DT" export "$S" -o "$TMP/ro/x.csv"
check "... and nothing was written into it" test -z "$(ls -A "$TMP/ro")"

# ---- compare: the Fleiss example ----
"$DT" compare "$TMP/s1.session" "$TMP/s2.session" >"$TMP/cmp.out"
check "compare exits 0" test $? -eq 0
# Fleiss (1981) Table 13.1: p_o = 0.89, p_e = 0.66, kappa = 0.68 (published to
# two decimals), standard error under kappa = 0: 0.076 (from memory)
check "observed agreement 0.89" grep -q 'observed agreement p_o   0.8900' "$TMP/cmp.out"
check "chance agreement 0.66" grep -q 'chance agreement   p_e   0.6600' "$TMP/cmp.out"
check "kappa 0.68 (Fleiss example)" grep -Eq "Cohen's kappa +0\.67[5-9]" "$TMP/cmp.out"
check "standard error under kappa = 0: 0.076" grep -q 'under kappa = 0: 0.076' "$TMP/cmp.out"
check "the agreement matrix row of 'detected' (75 1 4 0 | 80)" grep -Eq '^detected +75 +1 +4 +0 +80$' "$TMP/cmp.out"
check "11 disagreements listed" grep -q '^disagreements: 11$' "$TMP/cmp.out"
check "with who judged them" grep -q '1: detected      ana' "$TMP/cmp.out"
"$DT" compare "$S" "$TMP/s1.session" >"$TMP/cmp2.out"
check "sessions without common spectra: said plainly" grep -q 'nothing to compare' "$TMP/cmp2.out"
expect_fail "compare needs two sessions" "usage: doubletty compare" "$DT" compare "$S"
expect_fail "compare of a missing session" "missing.session: cannot open" "$DT" compare "$S" "$TMP/missing.session"
# FITS headers are ASCII (FITS 4.0 section 4.2.1) even for a session whose
# name is not: every header byte of every HDU is printable ASCII.
cp "$S" "$TMP/sesión-ü.session"
"$DT" export "$TMP/sesión-ü.session" -o "$TMP/utf.fits"
check "export of a session with a non-ASCII name" test $? -eq 0 -a -s "$TMP/utf.fits"
"$PY" - "$TMP/utf.fits" <<'PYEOF' >"$TMP/ascii.out" 2>&1
import sys, warnings
from astropy.io import fits
warnings.simplefilter("error")
raw = open(sys.argv[1], "rb").read()
bad = 0
with fits.open(sys.argv[1]) as h:
    h.verify("exception")
    for i in range(len(h)):
        info = h.fileinfo(i)
        block = raw[info["hdrLoc"]:info["datLoc"]]
        bad += sum(1 for b in block if not 32 <= b < 127)
print("non-ASCII header bytes:", bad)
sys.exit(1 if bad else 0)
PYEOF
check "every FITS header byte is printable ASCII ($(tail -n 1 "$TMP/ascii.out"))" test $? -eq 0
finish
