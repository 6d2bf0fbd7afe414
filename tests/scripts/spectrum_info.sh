#!/bin/sh
# `doubletty info`: what it prints for good files, and one clear message with
# a nonzero exit for every kind of bad input.  The FITS files are written
# here byte by byte (80-column cards in 2880-byte blocks, FITS Standard 4.0
# sections 3-4; 8-bit data), so this needs nothing but the shell.
. "$(dirname "$0")/../lib.sh"
export LC_ALL=C

# card KEY VALUE: one 80-column header card (free-format value)
card() { printf '%-80.80s' "$(printf '%-8.8s= %20s' "$1" "$2")"; }
# end_header: END, then blanks up to a whole 2880-byte block
end_header() {
  printf '%-80s' END >>"$1"
  n=$(wc -c <"$1"); pad=$(( (2880 - n % 2880) % 2880 ))
  head -c "$pad" /dev/zero | tr '\0' ' ' >>"$1"
}
# data FILE N FIRST: N bytes FIRST, FIRST+1, ... (mod 20), zero-padded to a block
data() {
  awk -v n="$2" -v a="$3" 'BEGIN { for (i = 0; i < n; i++) printf "%c", a + i % 20 }' >>"$1"
  n=$(wc -c <"$1"); pad=$(( (2880 - n % 2880) % 2880 ))
  head -c "$pad" /dev/zero >>"$1"
}
# image FILE N CARD...: a primary 8-bit 1-D image of N pixels; CARDs "KEY=VALUE"
image() {
  f=$1; n=$2; shift 2
  { card SIMPLE T; card BITPIX 8; card NAXIS 1; card NAXIS1 "$n"
    for c in "$@"; do card "${c%%=*}" "${c#*=}"; done; } >"$f"
  end_header "$f"; data "$f" "$n" 60
}
# extension FILE N EXTNAME: append an 8-bit image extension of N pixels
extension() {
  { card XTENSION "'IMAGE   '"; card BITPIX 8; card NAXIS 1; card NAXIS1 "$2"
    card PCOUNT 0; card GCOUNT 1; card EXTNAME "'$3'"; } >>"$1"
  end_header "$1"; data "$1" "$2" 5
}

W="CRVAL1=5850.0 CRPIX1=1.0 CDELT1=1.0"
# shellcheck disable=SC2086
image "$TMP/good.fits" 100 $W "CTYPE1='WAVE'" "CUNIT1='Angstrom'" SPECRES=2500 "OBJECT='Sightline A'"

# ---- what info prints --------------------------------------------------------
"$DT" info "$TMP/good.fits" >"$TMP/out" 2>"$TMP/err"; rc=$?
check "good image: exit 0" [ $rc -eq 0 ]
check "layout line" grep -Eq '^layout +image-linear$' "$TMP/out"
check "hdu line names HDU 1 and its selector [0]" grep -Eq '^hdu +1 \(\[0\]\)' "$TMP/out"
check "pixels line" grep -Eq '^pixels +100$' "$TMP/out"
check "masked line" grep -Eq '^masked +0 ' "$TMP/out"
# CRVAL1 + CDELT1 (p - CRPIX1) for p = 1 and 100 (FITS WCS Paper I)
check "vacuum wavelength range 5850 .. 5949" grep -Eq '^wavelength +5850\.0000 \.\. 5949\.0000 A vacuum' "$TMP/out"
# c ln(5900/5899) = 50.82 km/s at mid-range (definition of a velocity step)
check "pixel size in km/s" grep -Eq '^pixel-size +50\.8[0-9]* km/s' "$TMP/out"
check "median S/N line" grep -Eq '^median-snr +[0-9]' "$TMP/out"
check "sigma estimated without an error HDU" grep -Eq '^sigma +estimated' "$TMP/out"
check "resolution from SPECRES" grep -Eq '^resolution +R = 2500' "$TMP/out"
check "object" grep -Eq '^object +Sightline A' "$TMP/out"
# Na I D 5891.58/5897.56 A vacuum (Morton 2003) lie in 5850-5949; K I 7665 does not
check "Na I D covered" grep -Eq '^doublets +NaI$' "$TMP/out"
check "vacuum file: no conversion" grep -Eq '^air +no' "$TMP/out"
check "nothing on stderr" [ ! -s "$TMP/err" ]

# at +5000 km/s Na I D moves to 5989.9/5995.9 A, off the spectrum
"$DT" info --vsys 5000 "$TMP/good.fits" >"$TMP/out" 2>&1
check "--vsys 5000: no doublet covered" grep -Eq '^doublets +none' "$TMP/out"
# at +2500 km/s: D2 at 5940.7 A inside, D1 at 5946.7 inside: covered
"$DT" info --vsys=2500 "$TMP/good.fits" >"$TMP/out" 2>&1
check "--vsys=2500: Na I still covered" grep -Eq '^doublets +NaI' "$TMP/out"
# at +2800 km/s: D2 at 5946.6 inside, D1 at 5952.6 outside: partly
"$DT" info --vsys 2800 "$TMP/good.fits" >"$TMP/out" 2>&1
check "--vsys 2800: Na I only partly" grep -Eq '^partly +NaI' "$TMP/out"

# a user atomic table adds an (invented) doublet inside the range
printf 'TestI 5900.0 0.5 1e8 5905.0 0.25 1e8 invented for this test\n' >"$TMP/extra.dat"
"$DT" info --atomic "$TMP/extra.dat" "$TMP/good.fits" >"$TMP/out" 2>&1
check "--atomic adds a covered doublet" grep -Eq '^doublets +.*TestI' "$TMP/out"

# air wavelengths: 5850 A in air is 5851.62 A in vacuum (n - 1 = 2.772e-4 at
# 5850 A, Morton 2000 eq. 8)
# shellcheck disable=SC2086
image "$TMP/air.fits" 100 $W "CTYPE1='AWAV'"
"$DT" info "$TMP/air.fits" >"$TMP/out" 2>&1
check "air image: converted" grep -Eq '^air +converted' "$TMP/out"
check "air image: vacuum range starts at 5851.62" grep -Eq '^wavelength +5851\.62' "$TMP/out"

# image + ERR extension
# shellcheck disable=SC2086
image "$TMP/witherr.fits" 100 $W
extension "$TMP/witherr.fits" 100 ERR
"$DT" info "$TMP/witherr.fits" >"$TMP/out" 2>&1
check "ERR extension used" grep -Eq "^sigma +HDU 2 'ERR' \(sigma\)" "$TMP/out"
check "--help" sh -c '"$1" info --help | grep -q "^usage: doubletty info"' sh "$DT"

# text
printf '# wave flux sigma\n5880 10 1\n5890 9 1\n5900 10 1\n5910 nan 1\n' >"$TMP/good.txt"
"$DT" info "$TMP/good.txt" >"$TMP/out" 2>&1
check "text: layout" grep -Eq '^layout +text$' "$TMP/out"
check "text: one NaN pixel masked" grep -Eq '^masked +1 \(25\.0%\)' "$TMP/out"
check "text: no hdu line" sh -c '! grep -q "^hdu" "$1"' sh "$TMP/out"

# one bad file among good ones: message, the others shown, exit 1
"$DT" info "$TMP/good.fits" "$TMP/nothere.fits" "$TMP/good.txt" >"$TMP/out" 2>"$TMP/err"; rc=$?
check "bad file among good ones: exit 1" [ $rc -eq 1 ]
check "the two good files still shown" [ "$(grep -c '^spectrum' "$TMP/out")" -eq 2 ]
check "one message for the bad one" [ "$(wc -l <"$TMP/err")" -eq 1 ]

# ---- a multi-row table with array columns (2 rows x 3 pixels) ----------------
T=$TMP/rows.fits
{ card SIMPLE T; card BITPIX 8; card NAXIS 0; } >"$T"; end_header "$T"
{ card XTENSION "'BINTABLE'"; card BITPIX 8; card NAXIS 2; card NAXIS1 6; card NAXIS2 2
  card PCOUNT 0; card GCOUNT 1; card TFIELDS 2
  card TTYPE1 "'LAMBDA'"; card TFORM1 "'3B'"; card TTYPE2 "'FLUX'"; card TFORM2 "'3B'"; } >>"$T"
end_header "$T"
printf '\012\024\036\074\075\076\012\024\036\077\100\101' >>"$T"
n=$(wc -c <"$T"); head -c $(( (2880 - n % 2880) % 2880 )) /dev/zero >>"$T"
"$DT" info "$T" >"$TMP/out" 2>&1; rc=$?
check "table rows: every row shown" [ $rc -eq 0 -a "$(grep -c '^spectrum' "$TMP/out")" -eq 2 ]
check "table rows: layout" grep -Eq '^layout +table-rows$' "$TMP/out"
"$DT" info --row 2 "$T" >"$TMP/out" 2>&1
check "--row 2: row 2 of 2" grep -Eq '^row +2 of 2$' "$TMP/out"

# ---- bad input: one message naming file, place and problem; nonzero exit ----
expect_fail "missing file" "^doubletty: $TMP/nothere.fits: cannot open: No such file" \
  "$DT" info "$TMP/nothere.fits"
expect_fail "a directory" "^doubletty: $TMP: is a directory" "$DT" info "$TMP"
printf '\001\002\003\000\377binary' >"$TMP/bin.fits"
expect_fail "not FITS, not text" "bin.fits: not a FITS file" "$DT" info "$TMP/bin.fits"
printf 'Dear colleague,\nhere are the data.\n' >"$TMP/prose.txt"
expect_fail "prose" "prose.txt: line 2: not a FITS file, and not a text spectrum" "$DT" info "$TMP/prose.txt"
: >"$TMP/empty.fits"
expect_fail "empty file" "empty.fits: empty file" "$DT" info "$TMP/empty.fits"
if command -v gzip >/dev/null 2>&1; then
  gzip -c "$TMP/good.fits" >"$TMP/good.fits.gz"
  expect_fail "gzip-compressed FITS" "good.fits.gz: gzip-compressed file: decompress it first" \
    "$DT" info "$TMP/good.fits.gz"
else
  skip "gzip-compressed FITS (no gzip)"
fi
head -c 2900 "$TMP/good.fits" >"$TMP/cut.fits"
expect_fail "truncated FITS (data)" "cut.fits: HDU 1: truncated FITS file" "$DT" info "$TMP/cut.fits"
head -c 1000 "$TMP/good.fits" >"$TMP/cut2.fits"
expect_fail "truncated FITS (header)" "cut2.fits: HDU 1: truncated FITS file" "$DT" info "$TMP/cut2.fits"
head -c 6000 "$TMP/witherr.fits" >"$TMP/cut3.fits"
expect_fail "truncated FITS (error HDU header)" "cut3.fits: HDU 2: truncated FITS file" "$DT" info "$TMP/cut3.fits"
image "$TMP/nowcs.fits" 100 CDELT1=1.0
expect_fail "no wavelength solution" "nowcs.fits: HDU 1: no wavelength solution: keyword CRVAL1 missing" \
  "$DT" info "$TMP/nowcs.fits"
image "$TMP/freq.fits" 100 "CTYPE1='FREQ'" CRVAL1=5e14 CDELT1=1e9
expect_fail "frequency axis" "freq.fits: HDU 1: unsupported spectral axis CTYPE1 = 'FREQ'" "$DT" info "$TMP/freq.fits"
printf '5000 1\n5001 1\n5003 1\n5002 1\n' >"$TMP/back.txt"
expect_fail "non-monotonic wavelengths" "back.txt: line 4: wavelengths not monotonic" "$DT" info "$TMP/back.txt"
printf '5000 1\n5001 1\n5001 1\n' >"$TMP/dup.txt"
expect_fail "duplicate wavelengths" "dup.txt: line 3: duplicate wavelength 5001" "$DT" info "$TMP/dup.txt"
# shellcheck disable=SC2086
image "$TMP/short.fits" 100 $W
extension "$TMP/short.fits" 99 SIGMA
expect_fail "length mismatch (error image)" "short.fits: HDU 2: length mismatch: the sigma image 'SIGMA' has 99 pixels, the flux 100" \
  "$DT" info "$TMP/short.fits"
printf '5000 1 0.1\n5001 1\n' >"$TMP/cols.txt"
expect_fail "length mismatch (text columns)" "cols.txt: line 2: 2 fields, but line 1 has 3" "$DT" info "$TMP/cols.txt"
# BLANK marks undefined integer pixels (FITS Standard 4.0 sec. 5.2.2.5): every byte
# of the data unit below is 60
{ card SIMPLE T; card BITPIX 8; card NAXIS 1; card NAXIS1 20; card BLANK 60; card CRVAL1 5000; card CDELT1 1; } >"$TMP/blank.fits"
end_header "$TMP/blank.fits"
awk 'BEGIN { for (i = 0; i < 20; i++) printf "%c", 60 }' >>"$TMP/blank.fits"
head -c 2860 /dev/zero >>"$TMP/blank.fits"
expect_fail "all pixels masked (FITS)" "blank.fits: HDU 1: all 20 pixels are masked" "$DT" info "$TMP/blank.fits"
printf '5000 1 0\n5001 1 -1\n5002 nan 1\n' >"$TMP/masked.txt"
expect_fail "all pixels masked (text)" "masked.txt: all 3 pixels are masked" "$DT" info "$TMP/masked.txt"
{ card SIMPLE T; card BITPIX 8; card NAXIS 2; card NAXIS1 10; card NAXIS2 3; } >"$TMP/twod.fits"
end_header "$TMP/twod.fits"; data "$TMP/twod.fits" 30 60
expect_fail "2-D image" "twod.fits: HDU 1: a 2-D image \(10 x 3\)" "$DT" info "$TMP/twod.fits"
expect_fail "row beyond the table" "rows.fits: HDU 2: row 3 requested, the table has 2 rows" "$DT" info --row 3 "$T"
expect_fail "unknown column override" "rows.fits: HDU 2: no flux column 'NOPE' \(columns: LAMBDA, FLUX\)" \
  "$DT" info --flux-col NOPE "$T"
expect_fail "extension not in the file" "good.fits\[3\]: no HDU 4 \(extension \[3\]\): the file has 1 HDU" \
  "$DT" info "$TMP/good.fits[3]"
expect_fail "--row on an image" "good.fits: HDU 1: row 2 requested, but this HDU is an image" \
  "$DT" info --row 2 "$TMP/good.fits"

# ---- usage errors: exit 2 --------------------------------------------------
"$DT" info >/dev/null 2>&1; rc=$?
check "no file: exit 2" [ $rc -eq 2 ]
"$DT" info --row 0 "$TMP/good.fits" >/dev/null 2>&1; rc=$?
check "--row 0: exit 2" [ $rc -eq 2 ]
"$DT" info --row x "$TMP/good.fits" >/dev/null 2>&1; rc=$?
check "--row x: exit 2" [ $rc -eq 2 ]
"$DT" info --frobnicate "$TMP/good.fits" >/dev/null 2>&1; rc=$?
check "unknown option: exit 2" [ $rc -eq 2 ]
finish
