# doubletty demo DIR: the synthetic survey is deterministic, readable by
# doubletty's own readers and by astropy, and its truth file describes what
# is in the spectra (checked by an independent model built on SciPy).
. "$(dirname "$0")/../lib.sh"

A=$TMP/a B=$TMP/b
# run_ok "description" command...: the command must succeed (output kept in $TMP/run).
run_ok() {
  d=$1; shift
  if "$@" >"$TMP/run" 2>&1; then ok "$d"; else bad "$d (exit $?)"; sed 's/^/     /' "$TMP/run" | head -5; fi
}

run_ok "demo writes a survey" "$DT" demo "$A"
check "it says where the target list is" grep -q "targets.list" "$TMP/run"
run_ok "second run into another directory" "$DT" demo "$B"

# Same options, same bytes: every file of the first run equals the second's.
n=0 same=0
for f in "$A"/*; do
  n=$((n+1))
  cmp -s "$f" "$B/$(basename "$f")" && same=$((same+1))
done
check "two runs give byte-identical files ($same of $n)" [ "$n" -gt 10 -a "$same" -eq "$n" ]
ls "$A" >"$TMP/la"; ls "$B" >"$TMP/lb"
check "same file names in both runs" cmp -s "$TMP/la" "$TMP/lb"
check "targets.list and truth.csv exist" [ -s "$A/targets.list" -a -s "$A/truth.csv" ]
check "no date in any FITS header" sh -c "! grep -aq 'DATE' $A/*.fits"

# 24 sightlines by default; wide spectra are listed for Ca II too.
nsight=$(grep -v '^#' "$A/truth.csv" | tail -n +2 | cut -d, -f1,2 | sort -u | wc -l)
check "24 sightlines in truth.csv (got $nsight)" [ "$nsight" -eq 24 ]
ntarg=$(grep -vc '^#' "$A/targets.list")
check "targets.list lists every sightline (got $ntarg lines)" [ "$ntarg" -ge 24 ]
check "every target has vsys, R and a name" \
  sh -c "grep -v '^#' '$A/targets.list' | grep -v 'vsys=512 R=[0-9]* doublet=[A-Za-z]* name=VP[QG][0-9]*\$' | grep -q . && exit 1 || exit 0"
check "some sightlines have no absorption at all" grep -q ',none,' "$A/truth.csv"
check "some have Milky Way gas" grep -q ',milky-way,' "$A/truth.csv"
check "some have bad pixels" grep -Eq ',(nan|cosmic|ivar0|column):' "$A/truth.csv"
check "some have sky residuals" grep -q 'sky-' "$A/truth.csv"

# Pair velocities within +300..+720 km/s heliocentric, S/N 5..60, R 2000..5000.
check "pair components at +300..+720 km/s" awk -F, '!/^#/ && $14=="pair" && ($15<300 || $15>720) {bad=1} END {exit bad}' "$A/truth.csv"
check "S/N 5..60 and R 2000..5000" awk -F, '!/^#/ && NR>1 && $10!="R" && ($11<5 || $11>60 || $10<2000 || $10>5000) {bad=1} END {exit bad}' "$A/truth.csv"

# Every listed spectrum is read by doubletty info, with the truth's pixel count
# and both lines of the listed doublet covered at the pair's velocity.
# (The fields are cut out by the shell and the outputs judged by one awk
# afterwards: a process per spectrum only for doubletty itself.)
nread=0
: >"$TMP/infolist"
while read -r path rest; do
  case $path in ''|'#'*) continue ;; esac
  row= dbl=
  case $rest in *row=*) row=${rest##*row=}; row=${row%%[!0-9]*} ;; esac
  case $rest in *doublet=*) dbl=${rest##*doublet=}; dbl=${dbl%%[!A-Za-z]*} ;; esac
  nread=$((nread+1))
  if [ -n "$row" ]; then "$DT" info --vsys 512 --row "$row" "$A/$path" >"$TMP/info.$nread" 2>&1
  else "$DT" info --vsys 512 "$A/$path" >"$TMP/info.$nread" 2>&1; fi
  printf '%s %s %s %s %s\n' "$nread" "$?" "$path" "${row:-0}" "$dbl" >>"$TMP/infolist"
done <"$A/targets.list"
awk -v truth="$A/truth.csv" -v dir="$TMP" '
  BEGIN {
    n = 0
    while ((getline l < truth) > 0) { split(l, a, ","); n++; tf[n] = a[1]; tr[n] = a[2]; tp[n] = a[7] }
  }
  {
    id = $1; rc = $2; f = $3; r = $4; dbl = $5; want = ""
    for (i = 1; i <= n; i++) if (tf[i] == f && tr[i] == r) { want = tp[i]; break }
    pix = 0; dbls = 0; nl = 0
    file = dir "/info." id
    while ((getline l < file) > 0) {
      out[++nl] = l
      if (l ~ ("^pixels +" want "$")) pix = 1
      if (l ~ ("^doublets.*" dbl)) dbls = 1
    }
    close(file)
    if (rc == 0 && pix && dbls) { good++; next }
    printf "   info %s row=%s (exit %s, want %s pixels, %s):\n", f, r, rc, want, dbl
    for (i = 1; i <= nl && i <= 20; i++) print "     " out[i]
  }
  END { print good + 0 > (dir "/okread") }' "$TMP/infolist"
ok_read=0; read -r ok_read <"$TMP/okread"
check "doubletty info reads every listed spectrum ($ok_read of $nread)" [ "$nread" -ge 24 -a "$ok_read" -eq "$nread" ]

# Options: another seed gives other spectra; the first sightlines do not
# depend on --count.
run_ok "--count 30 --seed 7" "$DT" demo "$TMP/c" --count 30 --seed 7
run_ok "--count 5 --seed 7" "$DT" demo "$TMP/d" --count 5 --seed 7
check "another seed, other spectra" sh -c "! cmp -s '$A/vpq01.fits' '$TMP/c/vpq01.fits'"
check "first sightlines independent of --count" cmp -s "$TMP/c/vpq03.fits" "$TMP/d/vpq03.fits"
n30=$(grep -v '^#' "$TMP/c/truth.csv" | tail -n +2 | cut -d, -f1,2 | sort -u | wc -l)
check "--count 30 gives 30 sightlines (got $n30)" [ "$n30" -eq 30 ]

# Rewriting an earlier demo is allowed and removes what it no longer lists.
run_ok "rewrite an earlier demo with --count 5 --seed 7" "$DT" demo "$TMP/c" --count 5 --seed 7
check "stale spectra of the earlier run are gone" [ ! -e "$TMP/c/vpq24.fits" ]
check "rewritten demo equals a fresh one" diff -r "$TMP/c" "$TMP/d"

# A directory with other files is refused unless --force; nothing is lost.
mkdir -p "$TMP/mine" && echo keep >"$TMP/mine/notes.txt"
expect_fail "non-empty directory without a demo is refused" "mine.*not empty" "$DT" demo "$TMP/mine"
check "refusal writes nothing" [ "$(ls "$TMP/mine")" = notes.txt ]
run_ok "--force writes into it" "$DT" demo "$TMP/mine" --force --count 3
check "--force keeps the other files" grep -q keep "$TMP/mine/notes.txt"

# Unwritable places and bad options: one clear message, exit status nonzero.
echo x >"$TMP/plainfile"
expect_fail "DIR is a regular file" "plainfile: .*not a directory" "$DT" demo "$TMP/plainfile"
expect_fail "DIR below a regular file" "plainfile/sub: .*(cannot create|Not a directory)" "$DT" demo "$TMP/plainfile/sub"
mkdir -p "$TMP/ro" && chmod 555 "$TMP/ro"
expect_fail "read-only directory" "ro: .*cannot write" unprivileged "$DT" demo "$TMP/ro"
check "... and nothing was written into it" test -z "$(ls -A "$TMP/ro")"
chmod 755 "$TMP/ro"
expect_fail "--count 0" "count.*out of range" "$DT" demo "$TMP/e" --count 0
expect_fail "--count not a number" "count.*not a whole number" "$DT" demo "$TMP/e" --count many
expect_fail "--seed negative" "seed.*out of range" "$DT" demo "$TMP/e" --seed -3
expect_fail "--count without value" "count' needs a value" "$DT" demo "$TMP/e" --count
expect_fail "unknown option" "unknown option '--colour'" "$DT" demo "$TMP/e" --colour
expect_fail "no directory" "no directory given" "$DT" demo
expect_fail "two directories" "only one directory" "$DT" demo "$TMP/e" "$TMP/f"
check "--about describes the scenario" sh -c "'$DT' demo --about | grep -q 'Velloran'"

# Outside checks with astropy and SciPy: FITS validity, WCS wavelengths
# (astropy.wcs) against the truth's coverage, and the truth's components
# against an independent forward model.
if need_py "astropy/SciPy checks of the demo"; then
  "$PY" "$ROOT/tests/py/demo_check.py" "$A" >"$TMP/py.out" 2>&1
  rc=$?
  grep -E '^FAIL' "$TMP/py.out"
  line=$(grep -E '^[0-9]+ passed, [0-9]+ failed' "$TMP/py.out")
  check "astropy/SciPy checks: ${line:-no result} (exit $rc)" [ $rc -eq 0 -a -n "$line" ]
  check "astropy.wcs reads the WAVE-LOG images' coverage" grep -q '^ok .*(image-log): ' "$TMP/py.out"
fi
finish
