# The audit trail says what happened: the automatic first pass has its own
# action in the session file and in `log`, and every record names a person
# (the account's name when the environment gives none).
. "$(dirname "$0")/../lib.sh"

export LANG=C.UTF-8 LC_ALL=C.UTF-8
"$DT" demo "$TMP/demo" >/dev/null 2>&1 || { bad "demo survey written"; finish; exit 1; }
S="$TMP/a.session"
printf 'demo/vpq01.fits vsys=512 R=3690 name=FIRST\n' >"$TMP/q.list"
printf 'autofit\n' >"$TMP/keys"

# run the inspector headless with the environment given as arguments
run_env() {
  env "$@" "$DT" inspect --list "$TMP/q.list" --session "$S" --replay-keys "$TMP/keys" \
    --screen-dump "$TMP/screen" >"$TMP/out" 2>"$TMP/err"
}

# ---- the automatic first pass is recorded as such
run_env USER=ana
check "inspector ran headless (exit $?)" test -s "$TMP/screen"
check "the automatic pass is recorded as act=autofit" grep -q 'act=autofit' "$S"
check "... and not as an undo/redo restore" sh -c "! grep -q 'act=restore' '$S'"
"$DT" log "$S" >"$TMP/log" 2>&1
check "log describes it as the automatic first pass" grep -q 'automatic first pass' "$TMP/log"
check "log does not call it undo/redo" sh -c "! grep -q 'undo/redo' '$TMP/log'"
check "the person given by \$USER is recorded" grep -q 'user=ana' "$S"

# ---- no USER or LOGNAME: the account's own name, never "unknown"
rm -f "$S"
me=$(id -un)
run_env -u USER -u LOGNAME
check "without \$USER and \$LOGNAME the account name ($me) is recorded" grep -q "user=$me" "$S"
check "... and never 'unknown'" sh -c "! grep -q 'user=unknown' '$S'"
finish
