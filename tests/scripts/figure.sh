# doubletty figure: velocity stacks from a target list, from spectrum files
# and from a session's final state, as real PDF/PNG/SVG files of the stated
# sizes; the session's edits show in the figure; bad input.
. "$(dirname "$0")/../lib.sh"
cd "$TMP" || exit 1
export LANG=C.UTF-8 LC_ALL=C.UTF-8
"$DT" demo demo >/dev/null 2>&1 || { bad "demo survey written"; finish; exit 1; }
cat >q.list <<'EOF2'
demo/vpq01.fits      vsys=512 R=3690 doublet=NaI name=VPQ01
demo/plate0731.fits  vsys=512 R=3000 doublet=NaI name=VPQ06 row=1
EOF2
"$DT" figure --list q.list -o pdf 2>err.txt
check "figure --list runs (exit $?)" [ -s pdf/VPQ01_NaI.pdf ]
check "a table row is named with its row" [ -s pdf/VPQ06_NaI_row1.pdf ]
# one figure per spectrum and absorber system: VPQ01 and VPQ06 (vsys 512)
# each have the target and the Milky Way
check "the summary names the count (4: two spectra, two systems each)" grep -q "4 figures written into pdf" err.txt
check "the Milky Way's figure is named for its system" [ -s pdf/VPQ01_NaI_milky-way.pdf ]
check "standard error not a terminal: no progress line" sh -c "! grep -q 'left' err.txt"
"$DT" figure --list q.list -o png --format png 2>/dev/null
"$DT" figure --list q.list -o svg --format svg 2>/dev/null
"$DT" figure demo/vpq03.fits -o files --format svg 2>/dev/null
check "from a spectrum file: named by the file's stem" [ -s files/vpq03_NaI.svg ]
if need_py "figure files parsed"; then
  # stated sizes: a page of 432 x 420 pt; PNG at 150 dpi: 900 x 875 pixels
  for f in pdf/VPQ01_NaI.pdf pdf/VPQ06_NaI_row1.pdf svg/VPQ01_NaI.svg files/vpq03_NaI.svg; do
    check "$("$PY" "$ROOT/tests/py/figure_check.py" $f 432 420)" "$PY" "$ROOT/tests/py/figure_check.py" $f 432 420
  done
  check "$("$PY" "$ROOT/tests/py/figure_check.py" png/VPQ06_NaI_row1.png 900 875)" "$PY" "$ROOT/tests/py/figure_check.py" png/VPQ06_NaI_row1.png 900 875
fi
# In SVG, cairo writes each stroke's colour: the components are drawn in
# Okabe & Ito orange (230, 159, 0) = rgb(90.196078%,62.352941%,0%), once per
# component and line, plus once in the key.
comp_strokes() { grep -o 'stroke:rgb(90.196078%,62.352941%,0%)' "$1" | wc -l; }
# The number of components is the first pass's, as `fit` reports it.
ncomp_of() { "$DT" fit --list q.list 2>/dev/null | awk -F, -v n="$1" '/^#/ { next } !h { for (i = 1; i <= NF; i++) c[$i] = i; h = 1; next } $c["name"] == n { print $c["ncomp"]; exit }'; }
n06=$(ncomp_of VPQ06); n01=$(ncomp_of VPQ01)
check "fit finds components in VPQ06 ($n06) and VPQ01 ($n01)" [ "${n06:-0}" -ge 1 -a "${n01:-0}" -ge 1 ]
check "first pass of VPQ06: $n06 components x 2 lines + key" [ "$(comp_strokes svg/VPQ06_NaI_row1.svg)" -eq $((2 * ${n06:-0} + 1)) ]
check "first pass of VPQ01: $n01 components x 2 lines + key" [ "$(comp_strokes svg/VPQ01_NaI.svg)" -eq $((2 * ${n01:-0} + 1)) ]

# a session: remove VPQ01's component and call it not detected
printf 'remove-component\nverdict-not-detected\nquit\n' >keys
"$DT" inspect --list q.list --session s.session --replay-keys keys >/dev/null 2>&1
check "session written" [ -s s.session ]
"$DT" figure s.session -o sess --format svg 2>err2.txt
n=$(ls sess | wc -l)
check "one figure per spectrum and system the session holds ($n)" [ "$n" -eq 2 ]
f=sess/VPQ01_NaI.svg
check "the session's final state: one component fewer than the first pass" [ "$(comp_strokes "$f")" -eq $((2 * (${n01:-0} - 1) + 1)) ]

# refusals
expect_fail "no output directory" "-o DIR" "$DT" figure --list q.list
expect_fail "unknown format" "not pdf, png or svg" "$DT" figure --list q.list -o x --format jpg
: >plain
expect_fail "-o names a file" "not a directory" "$DT" figure --list q.list -o plain
expect_fail "existing figures are kept without --force" "exists" "$DT" figure --list q.list -o pdf
"$DT" figure --list q.list -o pdf --force 2>/dev/null
check "--force replaces them" [ $? -eq 0 ]
expect_fail "a list and files" "not both" "$DT" figure --list q.list demo/vpq01.fits -o x
expect_fail "nothing to draw" "nothing to draw" "$DT" figure -o x
expect_fail "unknown doublet" "unknown doublet" "$DT" figure demo/vpq01.fits -o x --doublet XyZ
head -c 2000 /dev/urandom >broken.fits
expect_fail "an unreadable spectrum: named, exit 1" "broken.fits" "$DT" figure broken.fits demo/vpq01.fits -o br
check "... the readable one is still drawn" [ -s br/vpq01_NaI.pdf ]
finish
