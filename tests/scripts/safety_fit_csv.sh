# `doubletty fit` on spectra at the numerical extremes (damped wings, b far
# below a pixel, blends, black cores, zero and negative flux, NaN/Inf
# pixels, flux scales of 1e-17 and 1e20): each run ends, with exit status 0
# (fitted) or 1 (this spectrum failed, with a message naming the file), and
# the CSV holds values or empty fields -- never "nan" or "inf".  The spectra
# are written by the unit test program (test_extremes --write DIR), which
# builds them with the library's own model and documents each case.
. "$(dirname "$0")/../lib.sh"

GEN=$BUILD/tests/test_extremes
if [ ! -x "$GEN" ]; then
  bad "test_extremes built (run through make check)"
  finish
  exit 1
fi
mkdir -p "$TMP/x"
check "extreme spectra written" "$GEN" --write "$TMP/x"

# one field per line of a CSV without quoted commas in the numeric part:
# any field that reads as a non-finite number
nonfinite() { awk -F, 'NR > 1 { for (i = 1; i <= NF; i++) { f = tolower($i); gsub(/^[ +-]+/, "", f); if (f ~ /^(nan|inf|infinity)$/) { print FILENAME ": row " NR - 1 ", field " i ": " $i; bad = 1 } } } END { exit bad }' "$1"; }

n=0
while read -r name doublet R; do
  [ -n "$name" ] || continue
  n=$((n + 1))
  f="$TMP/x/$name.txt"
  timeout 60 "$DT" fit --doublet "$doublet" --resolution "$R" "$f" -o "$TMP/x/$name.csv" \
    >"$TMP/x/$name.out" 2>"$TMP/x/$name.err"
  rc=$?
  case $rc in
    0) ok "$name: fitted (exit 0)" ;;
    1)
      if grep -q "^doubletty: .*$name.txt: " "$TMP/x/$name.err"; then
        ok "$name: failed cleanly (exit 1): $(grep "$name.txt: " "$TMP/x/$name.err" | head -n 1 | cut -c1-110)"
      else
        bad "$name: exit 1 without a message naming the file: $(head -c 300 "$TMP/x/$name.err")"
      fi
      ;;
    *) bad "$name: exit $rc (crash, hang or bad usage): $(head -c 300 "$TMP/x/$name.err")" ;;
  esac
  if [ -s "$TMP/x/$name.csv" ] && [ "$(wc -l <"$TMP/x/$name.csv")" -ge 2 ]; then
    if out=$(nonfinite "$TMP/x/$name.csv"); then ok "$name: no nan/inf in the CSV"
    else bad "$name: non-finite values in the CSV: $out"; fi
  else
    bad "$name: CSV with a header and a row"
  fi
done <"$TMP/x/cases.txt"
check "every case was run ($n)" test "$n" -ge 20

# all of one doublet in one run: one row per spectrum at least, in order
grep ' NaI ' "$TMP/x/cases.txt" | while read -r name d R; do echo "$TMP/x/$name.txt"; done >"$TMP/nai"
timeout 120 "$DT" fit --doublet NaI --resolution 4000 --files-from "$TMP/nai" -o "$TMP/nai.csv" \
  >/dev/null 2>"$TMP/nai.err"
rc=$?
check "one run over every Na I case ends with 0 or 1 ($rc)" test "$rc" -le 1
check "... every spectrum has a row" test "$(cut -d, -f1 "$TMP/nai.csv" | sed 1d | sort -un | wc -l)" -eq "$(wc -l <"$TMP/nai")"
if out=$(nonfinite "$TMP/nai.csv"); then ok "... no nan/inf in that CSV"; else bad "non-finite values: $out"; fi
finish
