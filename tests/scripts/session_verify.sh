#!/bin/sh
# doubletty log --verify: a session recording a real fit (made by the
# library, tests/unit/test_journal.c --fixture) is refitted from the spectrum
# and reproduced, also after the session moved with its data; a changed
# spectrum, a tampered record and a missing file are each reported with a
# nonzero exit.
. "$(dirname "$0")/../lib.sh"
FX="$BUILD/tests/test_journal"
if [ ! -x "$FX" ]; then skip "no $FX (build the unit tests first)"; finish; exit $?; fi
mkdir -p "$TMP/fx" "$TMP/elsewhere"
"$FX" --fixture "$TMP/fx" >"$TMP/fx.out" 2>&1
check "the fixture session is written ($(cat "$TMP/fx.out"))" test -s "$TMP/fx/fit.session"
S=$TMP/fx/fit.session

cd "$TMP/elsewhere" || exit 1
"$DT" log --verify "$S" >"$TMP/v.out" 2>&1
check "verify exits 0 when the fit is reproduced" test $? -eq 0
check "the refit reproduces the recorded fit (spectrum found beside the session)" grep -q '^reproduced    spec.txt#NaI' "$TMP/v.out"
check "the summary line" grep -q '^1 fits: 1 reproduced within 0.1 sigma, 0 differ, 0 could not be refitted or checked; 0 files changed' "$TMP/v.out"
check "the spectrum is recorded by a path relative to the session" grep -q "$(printf '\tfile=spec.txt#NaI\t')" "$S"

# the session and its data move together: the digest still names the spectrum
mkdir "$TMP/moved" && mv "$TMP/fx" "$TMP/moved/fx"
"$DT" log --verify "$TMP/moved/fx/fit.session" >"$TMP/vm.out" 2>&1
check "moved with its data: verify exits 0" test $? -eq 0
check "... the spectrum is found beside the session and reproduced" grep -q '^reproduced    spec.txt#NaI' "$TMP/vm.out"
check "... no file reported changed" grep -q '; 0 files changed' "$TMP/vm.out"
mv "$TMP/moved/fx" "$TMP/fx"

"$DT" log --verify --target nothing-like-this "$S" >"$TMP/v0.out" 2>&1
check "verify --target selects spectra" grep -q '^0 fits' "$TMP/v0.out"
expect_fail "verify with --user makes no sense" "do not apply" "$DT" log --verify --user x "$S"

# the spectrum changed: deeper absorption near 5892 A
cp "$TMP/fx/spec.txt" "$TMP/spec.orig"
awk '$1 >= 5892.0 && $1 <= 5892.6 { $2 = $2 - 0.15 } { print }' "$TMP/spec.orig" >"$TMP/fx/spec.txt"
"$DT" log --verify "$S" >"$TMP/v2.out" 2>&1
check "a changed spectrum: nonzero exit" test $? -eq 1
check "its digest change is reported" grep -q '^CHANGED   spec.txt#NaI' "$TMP/v2.out"
check "and the refit no longer reproduces the record" grep -q '^MISMATCH      spec.txt#NaI: ' "$TMP/v2.out"
cp "$TMP/spec.orig" "$TMP/fx/spec.txt"

# tampered records (the first component's velocity moved in the fit and in
# every later record, check sums forged)
if need_py "tampered record"; then
  "$PY" - "$S" <<'PYEOF'
import re, sys
p = sys.argv[1]
lines = open(p, encoding="utf-8").read().split("\n")
def fnv(b):  # FNV-1a 32 bit, the published offset basis and prime
    h = 2166136261
    for x in b:
        h = ((h ^ x) * 16777619) & 0xFFFFFFFF
    return h
for i, l in enumerate(lines):
    m = re.search(r",v=([-0-9.e]+)\+-([0-9.e]+)", l)
    if m:
        v, e = float(m.group(1)), float(m.group(2))
        l = l[:m.start(1)] + repr(v + 5 * e) + l[m.end(1):]
        body = l[:l.rindex("\tsum=")]
        lines[i] = body + "\tsum=%08x" % fnv(body.encode())
open(p, "w", encoding="utf-8").write("\n".join(lines))
PYEOF
  "$DT" log --verify "$S" >"$TMP/v3.out" 2>&1
  rc=$?
  check "a tampered fit: nonzero exit" test $rc -eq 1
  check "the difference is named" grep -q '^MISMATCH      spec.txt#NaI: component 1 v: recorded' "$TMP/v3.out"
fi

rm "$TMP/fx/spec.txt"
"$DT" log --verify "$S" >"$TMP/v4.out" 2>&1
check "a missing spectrum: nonzero exit" test $? -eq 1
check "and a message naming it" grep -q '^cannot check  spec.txt#NaI: cannot open for reading' "$TMP/v4.out"
finish
