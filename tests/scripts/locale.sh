# Numbers in files do not depend on the locale: the whole program run under
# a comma-decimal locale (de_DE.UTF-8) writes the same bytes as under C --
# the demo survey, the fit CSV, an inspector session driven headless, its
# export and its log -- and the session written under de_DE reads back
# without a damaged line.
#
# The locale is built here with localedef (package locales) into a
# temporary directory (LOCPATH); a small C probe first checks that printf
# really writes "1,5" under it, so the comparison cannot pass vacuously.
. "$(dirname "$0")/../lib.sh"

# Compiling the locale takes seconds: it is kept in the build directory
# under a digest of localedef's version and the locale's sources, and the
# probe below checks whatever is used, built now or kept.
key=$({ localedef --version 2>&1; cat /usr/share/i18n/locales/de_DE /usr/share/i18n/charmaps/UTF-8* 2>&1; } |
      sha256sum | cut -c1-32)
LOC=$BUILD/locale-cache/$key
: >"$TMP/localedef.out"
if [ ! -d "$LOC/de_DE.UTF-8" ]; then
  mkdir -p "$LOC.tmp.$$" &&
    localedef -i de_DE -f UTF-8 "$LOC.tmp.$$/de_DE.UTF-8" >"$TMP/localedef.out" 2>&1 &&
    { mv -T "$LOC.tmp.$$" "$LOC" 2>/dev/null || [ -d "$LOC/de_DE.UTF-8" ]; } ||
    { echo "localedef into $LOC.tmp.$$ failed" >>"$TMP/localedef.out"; }
  rm -rf "$LOC.tmp.$$"
fi
export LOCPATH="$LOC"
cat >"$TMP/probe.c" <<'EOF'
#include <locale.h>
#include <stdio.h>
int main(void) {
  if (!setlocale(LC_ALL, "")) return 2;
  printf("%.1f\n", 1.5);
  return 0;
}
EOF
${CC:-cc} -o "$TMP/probe" "$TMP/probe.c" 2>"$TMP/cc.err"
probe=$(LC_ALL=de_DE.UTF-8 "$TMP/probe" 2>&1)
if [ "$probe" = "1,5" ]; then ok "printf writes '1,5' under de_DE.UTF-8 (the locale bites)"
else bad "printf under de_DE.UTF-8 gave '$probe' (localedef: $(head -c 200 "$TMP/localedef.out"))"; finish; exit 1; fi
check "and '1.5' under C" test "$(LC_ALL=C "$TMP/probe")" = "1.5"

# The same run in the same directory (paths go into the session), once per
# locale; the outputs are moved to out.<locale> afterwards.
W=$TMP/work
cat >"$TMP/keys" <<'EOF'
add-component
nudge-logn-up
nudge-b-up-coarse
refit
verdict-detected
add-component
edit-note
type faint, 12.5 mA; 3.5 sigma
Enter
verdict-not-detected
cursor-left-fast
window-mark
cursor-left-fast
cursor-left-fast
window-mark
verdict-unusable
EOF
run_in() {
  loc=$1
  rm -rf "$W" && mkdir -p "$W" && cd "$W" || return 1
  export LC_ALL="$loc" LANG="$loc"
  "$DT" demo --count 8 demo >demo.out 2>&1 || echo "demo exit $?" >>fail
  mkdir -p "my spectra"
  cp demo/vpq04.txt "my spectra/vpq04.txt"
  {
    grep -v '^#' demo/targets.list | head -n 2 | sed 's|^|demo/|'
    echo '"my spectra/vpq04.txt"  vsys=512 R=2640 name="VPQ 04, text"  # quoted path'
  } >q.list
  "$DT" fit --list demo/targets.list -o fit.csv 2>fit.err || echo "fit exit $?" >>fail
  "$DT" inspect --list q.list --session s.session --replay-keys "$TMP/keys" \
    --screen-dump screen >inspect.out 2>inspect.err || echo "inspect exit $?" >>fail
  "$DT" export s.session -o export.csv 2>export.err || echo "export exit $?" >>fail
  "$DT" log s.session >log.txt 2>log.err || echo "log exit $?" >>fail
  unset LC_ALL LANG
  cd "$TMP" && rm -rf "$TMP/out.$loc" && mv "$W" "$TMP/out.$loc"
}
run_in C
run_in de_DE.UTF-8
A=$TMP/out.C B=$TMP/out.de_DE.UTF-8
check "every command succeeded under C" test ! -e "$A/fail"
check "every command succeeded under de_DE.UTF-8 ($(cat "$B/fail" 2>/dev/null))" test ! -e "$B/fail"

# demo: every file byte-identical
n=0 same=0
for f in "$A"/demo/*; do
  n=$((n+1))
  cmp -s "$f" "$B/demo/$(basename "$f")" && same=$((same+1))
done
check "demo: $same of $n files byte-identical" [ "$n" -gt 5 -a "$same" -eq "$n" ]
check "fit CSV byte-identical" cmp "$A/fit.csv" "$B/fit.csv"
check "fit CSV has rows" test "$(wc -l <"$B/fit.csv")" -gt 5

# Session, export and log carry the time of each change (and the session a
# checksum over it): those are masked, everything else must match.
mask() { sed -E 's/[0-9]{4}-[0-9]{2}-[0-9]{2}[T ][0-9]{2}:[0-9]{2}(:[0-9]{2}(\.[0-9]+)?)?Z?/TIME/g; s/sum=[0-9a-f]+/sum=X/g' "$1"; }
for f in s.session export.csv log.txt; do
  mask "$A/$f" >"$TMP/a.$f"; mask "$B/$f" >"$TMP/b.$f"
  check "$f identical but for times" cmp "$TMP/a.$f" "$TMP/b.$f"
done
check "the session holds the quoted path with a blank" grep -q "file=[^	]*my spectra/vpq04.txt#NaI" "$B/s.session"
check "the session holds a component in '.' notation" grep -Eq 'logN=[0-9]+\.[0-9]+' "$B/s.session"
check "no decimal comma anywhere in the session" sh -c "! grep -Eq '(logN|b|v|chi2|W1)=-?[0-9]+,[0-9]' '$B/s.session'"
check "the note keeps its own comma" grep -q 'note=faint, 12.5 mA; 3.5 sigma' "$B/s.session"
check "the session has the three verdicts" test "$(grep -c 'act=verdict' "$B/s.session")" -eq 3

# read back under the comma locale: no damaged line
LC_ALL=de_DE.UTF-8 "$DT" log "$B/s.session" >/dev/null 2>"$TMP/readback.err"
check "the de_DE session reads back under de_DE without a damaged line" sh -c "! grep -q . '$TMP/readback.err'"
LC_ALL=C "$DT" log "$B/s.session" >/dev/null 2>"$TMP/readback2.err"
check "... and under C" sh -c "! grep -q . '$TMP/readback2.err'"
finish
