# The atomic table built into the program: a binary moved away from any
# data directory still knows its doublets (demo, info, fit work), and a table
# that is named but cannot be read is refused with a message saying how to
# point to a good one.
. "$(dirname "$0")/../lib.sh"

mkdir -p "$TMP/bin"
cp "$DT" "$TMP/bin/doubletty"
M="$TMP/bin/doubletty"
# The install directory of the default PREFIX would be used if present.
if [ -e /usr/local/share/doubletty/atomic.dat ]; then
  skip "an installed table in /usr/local/share/doubletty hides the built-in one"
fi

cd "$TMP" || exit 1
env -u DOUBLETTY_DATA "$M" demo --count 3 demo >/dev/null 2>"$TMP/demo.err"
check "demo runs with no data directory (stderr: $(head -c 200 "$TMP/demo.err"))" test -s demo/targets.list
env -u DOUBLETTY_DATA "$M" info demo/vpq01.fits >"$TMP/info" 2>&1
check "info lists Na I from the built-in table" grep -q '^doublets *NaI' "$TMP/info"
env -u DOUBLETTY_DATA "$M" fit --vsys 512 -o "$TMP/fit.csv" demo/vpq01.fits 2>"$TMP/fit.err"
check "fit runs with the built-in table (exit $?)" test -s "$TMP/fit.csv"
# the doublets of share/doubletty/atomic.dat, in its order
want=$(awk '!/^#/ && NF { printf "%s%s", sep, $1; sep = ", " }' "$ROOT/share/doubletty/atomic.dat")
env -u DOUBLETTY_DATA "$M" fit --doublet NoSuch demo/vpq01.fits >/dev/null 2>"$TMP/fit2.err"
check "the built-in table knows every doublet of atomic.dat ($want)" grep -qF "(known: $want)" "$TMP/fit2.err"

# the same results as with the table file of the source tree
DOUBLETTY_DATA="$ROOT/share/doubletty" "$M" fit --vsys 512 -o "$TMP/fit_file.csv" demo/vpq01.fits 2>/dev/null
check "built-in and file table give the same fit CSV" cmp -s "$TMP/fit.csv" "$TMP/fit_file.csv"

# named tables that cannot be read: the message says how to point to one
expect_fail "DOUBLETTY_DATA without atomic.dat" 'nowhere/atomic.dat: cannot open.*DOUBLETTY_DATA must name the directory holding atomic.dat' \
  env DOUBLETTY_DATA="$TMP/nowhere" "$M" info demo/vpq01.fits
expect_fail "--atomic FILE that does not exist" 'missing.dat: cannot open.*--atomic FILE must name a readable atomic table' \
  env -u DOUBLETTY_DATA "$M" info --atomic "$TMP/missing.dat" demo/vpq01.fits
mkdir -p "$TMP/badshare/share/doubletty" "$TMP/badshare/bin"
printf 'NaI 5891.58 oops\n' >"$TMP/badshare/share/doubletty/atomic.dat"
cp "$DT" "$TMP/badshare/bin/doubletty"
expect_fail "a damaged table beside the binary is not silently replaced" \
  'atomic.dat: line 1: .*repair or remove it to use the built-in table' \
  env -u DOUBLETTY_DATA "$TMP/badshare/bin/doubletty" info demo/vpq01.fits
finish
