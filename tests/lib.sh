# Shell helpers for doubletty's script tests (sourced by tests/scripts/*.sh).
# Each script ends with `finish`, which prints "N passed, N failed".
# DT is the binary under test; PY an interpreter with numpy, scipy and astropy
# (empty when there is none: a cross-check then FAILS, naming what is missing
# and `make deps`; a check that did not run proves nothing).
set -u
ROOT=$(cd "$(dirname "$0")/../.." && pwd)
BUILD=${BUILD:-build}
case $BUILD in /*) ;; *) BUILD=$ROOT/$BUILD ;; esac
DT=${DT:-$BUILD/doubletty}
SHARED=${SHARED:-$ROOT/../shared}
T_PASS=0; T_FAIL=0
TMP=$(mktemp -d "${TMPDIR:-/tmp}/dt-test.XXXXXX")
# KEEP=1 keeps the test's temporary directory for a look after a failure
trap '[ -n "${KEEP:-}" ] || rm -rf "$TMP"' EXIT

# tests/run probes once for all scripts and passes the answer in DT_PY_PROBED
# (the interpreter's path, or "none"); a script run alone probes itself.
PY=
case ${DT_PY_PROBED:-} in
  none) ;;
  /*) PY=$DT_PY_PROBED ;;
  *) for p in /usr/bin/python3 python3; do
       if command -v "$p" >/dev/null 2>&1 && "$p" -c 'import numpy, scipy, astropy' 2>/dev/null; then
         PY=$(command -v "$p"); break
       fi
     done ;;
esac

ok()   { T_PASS=$((T_PASS+1)); echo "ok   - $*"; }
bad()  { T_FAIL=$((T_FAIL+1)); echo "FAIL - $*"; }
# check "description" command...   (passes when the command exits 0)
check() { d=$1; shift; if "$@"; then ok "$d"; else bad "$d"; fi; }
skip() { echo "SKIPPED - $*"; }
# expect_fail "description" "message regex" command...:
# the command must exit nonzero and print a message matching the regex on stderr.
expect_fail() {
  d=$1; re=$2; shift 2
  "$@" >"$TMP/ef.out" 2>"$TMP/ef.err"; rc=$?
  if [ $rc -ne 0 ] && [ $rc -lt 128 ] && grep -Eq -- "$re" "$TMP/ef.err"; then ok "$d"
  else bad "$d (exit $rc, stderr: $(head -c 300 "$TMP/ef.err"))"; fi
}
# missing TOOL WHAT: WHAT could not be checked because TOOL is not installed
missing() { bad "$2: $1 is missing (install the test tools: make deps)"; }
need_py() { if [ -z "$PY" ]; then missing "/usr/bin/python3 with numpy, scipy and astropy" "$*"; return 1; fi; return 0; }
# need_tool TOOL WHAT: fails WHAT when the command TOOL is not installed
need_tool() { if ! command -v "$1" >/dev/null 2>&1; then missing "$1" "$2"; return 1; fi; return 0; }
# unprivileged COMMAND...: runs COMMAND where file permissions apply -- as
# root (CI runs as root), as the user nobody through setpriv (the test's
# directory is opened to it); otherwise as it is.
unprivileged() {
  if [ "$(id -u)" = 0 ]; then
    chmod 755 "$TMP"
    setpriv --reuid=nobody --regid=nogroup --clear-groups -- "$@"
  else
    "$@"
  fi
}
finish() { echo "$T_PASS passed, $T_FAIL failed"; [ $T_FAIL -eq 0 ]; }
