# `doubletty export` never overwrites an existing file without --force --
# nor, with or without it, the session itself, the target of a symbolic
# link, or another file that the output name happens to describe in
# cfitsio's extended file-name syntax (brackets, parentheses, a leading
# '!').  Each refusal is one message naming the file, exit status 1, and
# the existing file is unchanged byte for byte.
. "$(dirname "$0")/../lib.sh"

export LANG=C.UTF-8 LC_ALL=C.UTF-8
"$DT" demo "$TMP/demo" >/dev/null 2>&1 || { bad "demo survey written"; finish; exit 1; }
cd "$TMP" || exit 1
printf 'verdict-detected\nverdict-unsure\n' >keys
"$DT" inspect --list demo/targets.list --session s.session --replay-keys keys >/dev/null 2>&1 ||
  { bad "a session to export"; finish; exit 1; }
same() { cmp -s "$1" "$2"; }
echo "precious results" >keep
for ext in csv fits; do
  cp keep "old.$ext"
  expect_fail "$ext: an existing file is refused without --force" "old.$ext: file exists; use --force" \
    "$DT" export s.session -o "old.$ext"
  check "$ext: ... and left as it was" same keep "old.$ext"
  "$DT" export s.session -o "old.$ext" --force 2>"$TMP/err"
  check "$ext: --force replaces it (exit $?)" sh -c "! cmp -s keep old.$ext && [ -s old.$ext ]"
done
check "the replaced CSV is the export (header and two spectra)" \
  sh -c "head -n 1 old.csv | grep -q '^file,name,hdu,row,system,verdict' && [ \$(grep -c ',detected,\\|,unsure,' old.csv) -ge 2 ]"

# a symbolic link at the output name: the link is never followed
cp keep target
ln -s target link.csv
expect_fail "a symbolic link is an existing file" "link.csv: file exists" "$DT" export s.session -o link.csv
"$DT" export s.session -o link.csv --force 2>/dev/null
check "with --force the link itself is replaced, not its target" sh -c "[ ! -L link.csv ] && cmp -s keep target"

# the session itself, under any name
cp s.session s.before
expect_fail "the session file itself is refused" "that is the session file itself" \
  "$DT" export s.session -o s.session
expect_fail "... also with --force" "that is the session file itself" "$DT" export s.session -o s.session --force
ln s.session hard.csv
expect_fail "... also through another name (a hard link)" "that is the session file itself" \
  "$DT" export s.session -o hard.csv --force
check "the session is unchanged" same s.before s.session

# names that cfitsio's extended syntax would read as another file
cp keep out
"$DT" export s.session -o 'out[1].fits' 2>"$TMP/err"
check "'out[1].fits' is written under that name (exit $?)" test -s 'out[1].fits'
check "... and 'out' is untouched" same keep out
cp keep bang.fits
"$DT" export s.session -o '!bang.fits' 2>"$TMP/err"
check "'!bang.fits' is written under that name" test -s '!bang.fits'
check "... and 'bang.fits' is untouched" same keep bang.fits
"$DT" export s.session -o 'p(q).fits' 2>"$TMP/err"
check "'p(q).fits' is written under that name, no stray 'p'" sh -c "[ -s 'p(q).fits' ] && [ ! -e p ]"
if [ -n "$PY" ]; then
  check "... and it is a FITS table" "$PY" -c "
from astropy.io import fits
import sys
with fits.open(sys.argv[1]) as h: assert h[1].header['EXTNAME'] == 'DOUBLETTY_SESSION' and len(h[1].data) >= 2" 'p(q).fits'
else
  skip "FITS check of 'p(q).fits' (no python3 with astropy)"
fi
check "no temporary file is left behind" sh -c "! ls | grep -q 'tmp-'"

expect_fail "an output in a missing directory: a message, not a crash" "nodir/x.csv: cannot create" \
  "$DT" export s.session -o nodir/x.csv
expect_fail "a name without .csv or .fits is refused" "cannot tell the format" "$DT" export s.session -o out.txt
finish
