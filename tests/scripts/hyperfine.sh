#!/bin/sh
# Hyperfine structure: the model of split lines against an independent
# Python evaluation (scipy.special.wofz, components from the published
# ground-level constants: tests/py/hyperfine_ref.py), the curve of growth of
# a split line, and `fit --hyperfine` / hfs=1 on a spectrum of split Na I D
# (b recovered with it, biased high without it); bad tables and list values
# refused with file and line.
. "$(dirname "$0")/../lib.sh"

DRIVER=$BUILD/tests/test_hyperfine
REF=$ROOT/tests/py/hyperfine_ref.py
# field NAME CSV [ROW]: value of column NAME in data row ROW (default 1)
field() {
  awk -F, -v name="$1" -v row="${3:-1}" '/^#/ { next } !h++ { for (i = 1; i <= NF; i++) if ($i == name) k = i; next }
    ++r == row { print (k ? $k : "NOCOLUMN") }' "$2"
}
within() { awk -v x="$1" -v lo="$2" -v hi="$3" 'BEGIN { exit !(x >= lo && x <= hi) }'; }

if need_py "split lines against scipy.special.wofz"; then
  # one interpreter: the two checks, and the spectra below (Na I D split
  # into its components, b = 0.6 km/s, log N 11.5, R = 100000, S/N 300,
  # two noise draws) as $TMP/split7.txt and split8.txt
  "$PY" "$REF" --into "$TMP" "$DRIVER" >"$TMP/py.out" 2>&1
  for what in pixels cog; do
    rc=1; { read -r rc <"$TMP/$what.rc"; } 2>/dev/null
    if [ "$rc" = 0 ]; then
      ok "split lines vs SciPy: $what ($(tail -n 1 "$TMP/$what.out"))"
    else
      bad "split lines vs SciPy: $what"
      sed 's/^/       /' "$TMP/$what.out" "$TMP/py.out" 2>/dev/null
    fi
  done
  FIT="$DT fit --jobs 1 --window -100:100 --resolution 100000"
  $FIT "$TMP/split7.txt" "$TMP/split8.txt" >"$TMP/single.csv" 2>/dev/null
  $FIT --hyperfine "$TMP/split7.txt" "$TMP/split8.txt" >"$TMP/hfs.csv" 2>"$TMP/hfs.err"
  check "fit --hyperfine: exit 0" [ $? -eq 0 ]
  check "the settings record --hyperfine" grep -q '^# hyperfine=yes$' "$TMP/hfs.csv"
  check "without it the settings say nothing of it" sh -c "! grep -q '^# hyperfine' '$TMP/single.csv'"
  for r in 1 2; do
    b1=$(field b_kms "$TMP/single.csv" $r); bh=$(field b_kms "$TMP/hfs.csv" $r); eh=$(field b_err "$TMP/hfs.csv" $r)
    # with the components: b within 3 sigma of 0.6
    check "spectrum $r: --hyperfine recovers b = $bh +- $eh (0.6)" \
      awk -v b="$bh" -v e="$eh" 'BEGIN { d = b - 0.6; exit !(d * d <= 9 * e * e && e > 0) }'
    # single lines take up the splitting: b^2 + 2 s^2 = 0.36 + 0.51, b about 0.93
    check "spectrum $r: single lines give b = $b1, biased high (0.85..1.0)" within "$b1" 0.85 1.0
  done
  # a list line saying hfs=1 does what --hyperfine does
  printf 'split7.txt hfs=1\nsplit7.txt hfs=0\n' >"$TMP/t.list"
  $FIT --list "$TMP/t.list" >"$TMP/list.csv" 2>/dev/null
  l1=$(field b_kms "$TMP/list.csv" 1); l2=$(field b_kms "$TMP/list.csv" 2)
  check "list hfs=1: the same b as --hyperfine ($l1)" [ -n "$l1" -a "$l1" = "$(field b_kms "$TMP/hfs.csv" 1)" ]
  check "list hfs=0: the same b as single lines ($l2)" [ -n "$l2" -a "$l2" = "$(field b_kms "$TMP/single.csv" 1)" ]

  # the inspector (headless) with hfs=1 fits what fit --hyperfine fits; the
  # session records hfs=1 with the state, so log --verify and figure refit
  # and draw it split with no option
  mkdir -p "$TMP/ins"
  cp "$TMP/split7.txt" "$TMP/ins/"
  printf 'split7.txt R=100000 window=-100:100 hfs=1\n' >"$TMP/ins/t.list"
  printf 'refit\nverdict-detected\nquit\n' >"$TMP/ins/keys"
  $DT inspect --replay-keys "$TMP/ins/keys" --session "$TMP/ins/s.session" --list "$TMP/ins/t.list" --user t >/dev/null 2>&1
  bi=$(grep -o 'c1=logN=[^	]*' "$TMP/ins/s.session" | tail -n 1 | sed 's/.*,b=\([0-9.]*\).*/\1/')
  bh=$(field b_kms "$TMP/hfs.csv" 1)
  check "inspect with hfs=1 records b = $bi, as fit --hyperfine ($bh)" \
    awk -v x="$bi" -v y="$bh" 'BEGIN { d = x - y; exit !(x != "" && d * d < 1e-6) }'
  check "the session records hfs=1 with the state" grep -q '	hfs=1' "$TMP/ins/s.session"
  $DT log --verify "$TMP/ins/s.session" >"$TMP/v2.out" 2>&1
  check "log --verify reproduces the split fit with no option" grep -q '^reproduced    split7.txt#NaI' "$TMP/v2.out"
  # a second look without hfs= in the list keeps the recorded state's lines split
  printf 'split7.txt R=100000 window=-100:100\n' >"$TMP/ins/t2.list"
  printf 'refit\nquit\n' >"$TMP/ins/keys2"
  $DT inspect --replay-keys "$TMP/ins/keys2" --session "$TMP/ins/s.session" --list "$TMP/ins/t2.list" --user t >/dev/null 2>&1
  bj=$(grep -o 'c1=logN=[^	]*' "$TMP/ins/s.session" | tail -n 1 | sed 's/.*,b=\([0-9.]*\).*/\1/')
  check "resumed without hfs=: the refit stays split (b = $bj)" \
    awk -v x="$bj" -v y="$bh" 'BEGIN { d = x - y; exit !(x != "" && d * d < 1e-4) }'
  (cd "$TMP/ins" && $DT figure s.session -o "$TMP/fig" --format svg >/dev/null 2>&1)
  check "figure draws the session's spectrum" test -s "$TMP/fig/split7_NaI.svg"
fi

# ---- bad input ------------------------------------------------------------
printf 'x.txt hfs=2\n' >"$TMP/bad.list"
$DT fit --list "$TMP/bad.list" >/dev/null 2>"$TMP/err"
check "hfs=2 refused with the list line" grep -q 'line 1: hfs must be 0 or 1' "$TMP/err"
printf '# my table\nNaI 5891.5833 0.4:0.6 -0.6:0.3 a source\n' >"$TMP/bad.dat"
$DT fit --hyperfine-table "$TMP/bad.dat" "$TMP/none.txt" >/dev/null 2>"$TMP/err"
rc=$?
check "bad --hyperfine-table: exit 2 ($rc)" [ $rc -eq 2 ]
check "bad --hyperfine-table: file and line named" grep -q "bad.dat: line 2: NaI 5891.5833: the shares sum to 0.9" "$TMP/err"
$DT inspect --hyperfine-table "$TMP/bad.dat" --read-only "$TMP/none.txt" </dev/null >/dev/null 2>"$TMP/err"
check "inspect: bad --hyperfine-table refused with file and line" grep -q "bad.dat: line 2:" "$TMP/err"
mkdir -p "$TMP/data"
cp "$ROOT/share/doubletty/atomic.dat" "$TMP/data/"
printf 'NaI 5891.5833 nonsense\n' >"$TMP/data/hyperfine.dat"
DOUBLETTY_DATA=$TMP/data $DT fit --hyperfine "$TMP/none.txt" >/dev/null 2>"$TMP/err"
check "a broken hyperfine.dat in the data directory is named" grep -q "data/hyperfine.dat: line 1: NaI 5891.5833: no components" "$TMP/err"
rm "$TMP/data/hyperfine.dat"
printf '5880 1 0.01\n5881 1 0.01\n' >"$TMP/none.txt"
DOUBLETTY_DATA=$TMP/data $DT fit --hyperfine "$TMP/none.txt" >/dev/null 2>"$TMP/err"
check "a data directory without hyperfine.dat: the built-in table (no table error)" sh -c "! grep -q 'hyperfine' '$TMP/err'"
finish
