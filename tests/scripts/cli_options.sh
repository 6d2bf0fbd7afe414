#!/bin/sh
# The command line of every command: both option forms, one-line refusals
# of unknown options, mistyped commands, output files that must not be
# replaced (existing files, inputs), and messages that say what is wrong.
. "$(dirname "$0")/../lib.sh"
AWKGEN=$ROOT/tests/scripts/fit_cmd_spectrum.awk
awk -v lo=5850 -v hi=5940 -v step=0.1 -v snr=40 -v seed=5 -v comps="20:0.8:15" \
  -f "$AWKGEN" >"$TMP/a.txt"
awk -v lo=5850 -v hi=5940 -v step=0.1 -v snr=40 -v seed=6 -v comps="" \
  -f "$AWKGEN" >"$TMP/b.txt"
printf '# two targets\na.txt name=alpha\nb.txt vsys=0\n' >"$TMP/t.list"

# ---- both forms: --opt value and --opt=value --------------------------
$DT fit --fwhm 2 --window -300:300 "$TMP/a.txt" >"$TMP/sep.csv" 2>/dev/null
$DT fit --fwhm=2 --window=-300:300 "$TMP/a.txt" >"$TMP/eq.csv" 2>/dev/null
check "fit: --fwhm=2 --window=A:B gives the table of --fwhm 2 --window A:B" cmp -s "$TMP/sep.csv" "$TMP/eq.csv"
check "fit: and it is a table" grep -q '^0,' "$TMP/eq.csv"
$DT fit "$TMP/a.txt" --fwhm 2 --window -300:300 >"$TMP/late.csv" 2>/dev/null
check "fit: options after the files" cmp -s "$TMP/sep.csv" "$TMP/late.csv"
echo quit >"$TMP/keys"
(cd "$TMP" && $DT inspect --session=eq.session --replay-keys=keys a.txt >/dev/null 2>&1)
check "inspect: --session=FILE --replay-keys=FILE" [ -s "$TMP/eq.session" ]
(cd "$TMP" && $DT inspect --session sep.session --replay-keys keys a.txt >/dev/null 2>&1)
check "inspect: --session FILE --replay-keys FILE" [ -s "$TMP/sep.session" ]
$DT demo --count=3 --seed=7 "$TMP/d1" >/dev/null && $DT demo --count 3 --seed 7 "$TMP/d2" >/dev/null
check "demo: --count=3 --seed=7 equals --count 3 --seed 7" diff -r "$TMP/d1" "$TMP/d2"
$DT info --row=1 --vsys=0 "$TMP/a.txt" >/dev/null 2>&1
check "info: --row=1 --vsys=0" [ $? -eq 0 ]
$DT log --target=a.txt "$TMP/eq.session" >"$TMP/l1" 2>&1; r1=$?
$DT log --target a.txt "$TMP/eq.session" >"$TMP/l2" 2>&1; r2=$?
check "log: --target=X and --target X agree (exit $r1 $r2)" [ $r1 -eq $r2 ] && cmp -s "$TMP/l1" "$TMP/l2"
$DT export --output="$TMP/e.csv" "$TMP/eq.session" 2>/dev/null
check "export: --output=FILE" [ -s "$TMP/e.csv" ]

# ---- unknown options: one line and a hint, exit 2, in every command ----
for cmd in fit merge export log compare info demo inspect; do
  $DT $cmd --no-such-option x >"$TMP/u.out" 2>"$TMP/u.err"; rc=$?
  check "$cmd: unknown option -> exit 2 ($rc)" [ $rc -eq 2 ]
  check "$cmd: the option named on one line" \
    [ "$(head -n 1 "$TMP/u.err")" = "doubletty: $cmd: unknown option '--no-such-option'" ]
  check "$cmd: then the hint, and nothing else" \
    [ "$(sed -n '2,$p' "$TMP/u.err")" = "try 'doubletty $cmd --help'" ]
done
$DT fit --bogus=1 "$TMP/a.txt" >/dev/null 2>"$TMP/u.err"
check "an unknown --opt=value names the option alone" \
  [ "$(head -n 1 "$TMP/u.err")" = "doubletty: fit: unknown option '--bogus'" ]
expect_fail "a missing value is named" "^doubletty: fit: option '--fwhm' needs a value" $DT fit "$TMP/a.txt" --fwhm
expect_fail "a value for a plain switch is refused" "option '--force' takes no value" $DT export --force=yes s -o x.csv

# ---- a mistyped command is not a file to inspect ------------------------
(cd "$TMP" && $DT lgo eq.session >"$TMP/m.out" 2>"$TMP/m.err"); rc=$?
check "mistyped command: exit 2 ($rc)" [ $rc -eq 2 ]
check "mistyped command: did you mean" grep -q "unknown command 'lgo' (did you mean 'log'?)" "$TMP/m.err"
check "mistyped command: no session file created" [ ! -e "$TMP/doubletty.session" ]
expect_fail "an unknown word far from every command" "unknown command 'zzzzzz'" $DT zzzzzz
(cd "$TMP" && $DT a.txt --replay-keys keys --session bare.session >/dev/null 2>&1)
check "an existing file still opens the inspector" [ -s "$TMP/bare.session" ]

# ---- fit -o: never an existing file without --force, never an input ----
echo "my notes" >"$TMP/mine.session"
expect_fail "fit -o an existing file" "mine.session: file exists; use --force" \
  $DT fit --fwhm 2 "$TMP/a.txt" -o "$TMP/mine.session"
check "and it is untouched" [ "$(cat "$TMP/mine.session")" = "my notes" ]
$DT fit --fwhm 2 "$TMP/a.txt" -o "$TMP/mine.session" --force 2>/dev/null
check "--force replaces it with the table" grep -q '^index,' "$TMP/mine.session"
cp "$TMP/t.list" "$TMP/t.keep"
expect_fail "fit --list t.list -o t.list --force" "the output is also an input" \
  $DT fit --fwhm 2 --list "$TMP/t.list" -o "$TMP/t.list" --force
check "the list is untouched" cmp -s "$TMP/t.list" "$TMP/t.keep"
cp "$TMP/a.txt" "$TMP/a.keep"
expect_fail "fit a.txt -o a.txt --force" "the output is also an input" \
  $DT fit --fwhm 2 "$TMP/a.txt" -o "$TMP/a.txt" --force
check "the spectrum is untouched" cmp -s "$TMP/a.txt" "$TMP/a.keep"
expect_fail "an entry of the list as the output" "the output is also an input \\(.*b.txt\\)" \
  $DT fit --fwhm 2 --list "$TMP/t.list" -o "$TMP/b.txt" --force
printf '%s\n' "$TMP/a.txt" >"$TMP/paths"
expect_fail "a --files-from entry as the output" "the output is also an input" \
  $DT fit --fwhm 2 --files-from "$TMP/paths" -o "$TMP/a.txt" --force
check "no temporary file is left behind" [ -z "$(ls "$TMP" | grep '\.tmp-')" ]

# ---- messages that say what is wrong ------------------------------------
mkdir "$TMP/dir"
$DT fit --fwhm 2 --list "$TMP/dir" >/dev/null 2>"$TMP/dir.err"
check "fit --list DIR: says it is a directory" grep -q 'dir: is a directory, not a target list' "$TMP/dir.err"
expect_fail "inspect --list DIR: says it is a directory" "dir: is a directory" \
  $DT inspect --list "$TMP/dir" --replay-keys "$TMP/keys" --session "$TMP/x.session"
$DT fit --fwhm 2 --window -5:5 "$TMP/a.txt" >/dev/null 2>"$TMP/w.err"
check "fit --window -5:5: too few pixels, in km/s" grep -q 'window -5:5 km/s spans .* pixels of .* km/s: too narrow' "$TMP/w.err"
check "fit --window -5:5: not 'masked'" sh -c "! grep -q masked '$TMP/w.err'"
expect_fail "inspect --size beyond the limit says the limit" "at most 1000x1000" \
  $DT inspect --replay-keys "$TMP/keys" --size 5000x3000 "$TMP/a.txt"
expect_fail "fit --resolution 1 is refused with the reason" "R = 1 is below 100" \
  $DT fit --resolution 1 "$TMP/a.txt"
$DT info "$TMP/a.txt" >"$TMP/info.out" 2>&1
check "info says when it assumed vacuum" grep -q 'assumed vacuum' "$TMP/info.out"
# --air: the first wavelength of the text file, read as air, becomes the vacuum
# wavelength that the IAU standard formula (Morton 2000, ApJS 130, 403:
# n - 1 = 8.34254e-5 + 2.406147e-2/(130 - s^2) + 1.5998e-4/(38.9 - s^2),
# s = 1e4/lambda_vac in um^-1) maps back onto it, solved here by iteration.
$DT info --air "$TMP/a.txt" >"$TMP/air.out" 2>&1
check "info --air says the file was declared air" grep -q 'air as declared' "$TMP/air.out"
lam_air=$(awk '!/^#/ && NF { print $1; exit }' "$TMP/a.txt")
lam_got=$(awk '/^wavelength/ { print $2; exit }' "$TMP/air.out")
check "info --air: vacuum $lam_got A from air $lam_air A by the IAU formula (within 0.002 A)" \
  awk -v a="$lam_air" -v g="$lam_got" 'BEGIN { v = a; for (i = 0; i < 8; i++) { s2 = (1e4 / v)^2;
    n = 1 + 8.34254e-5 + 2.406147e-2 / (130 - s2) + 1.5998e-4 / (38.9 - s2); v = a * n }
    d = g - v; if (d < 0) d = -d; exit !(d < 0.002 && g - a > 1) }'

# ---- honest reasons ------------------------------------------------------
# Pure noise: --ncomp 8 places what it can -- the components sit at the
# lower bound of b (0.3 km/s, DT_FIT_B_MIN in fit.h) -- and the row says
# that nothing was found: fewer components than asked for, or components
# without a confirmed doublet, and no detection.
$DT fit --fwhm 2 --ncomp 8 "$TMP/b.txt" >"$TMP/n8.csv" 2>/dev/null
awk -F, '/^#/ { next } !h { for (i = 1; i <= NF; i++) col[$i] = i; h = 1; next }
  { print $col["ncomp"] "|" $col["b_kms"] "|" $col["suggested"] "|" $col["reason"]; exit }' \
  "$TMP/n8.csv" >"$TMP/n8.row"
IFS='|' read -r nc b verdict reason <"$TMP/n8.row"
check "--ncomp 8 on noise: no detection ($nc components, $verdict)" \
  sh -c "[ '$nc' -ge 1 ] && [ '$nc' -le 8 ] && [ '$verdict' != detected ]"
check "and the reason says why ($reason)" \
  sh -c "echo '$reason' | grep -Eq 'asked for 8 components but fitted $nc|components without a confirmed doublet'"
check "b at its bound 0.3 km/s ($b) is said in the reason" \
  sh -c "[ '$b' != 0.300 ] || echo '$reason' | grep -q 'parameters at the limit of their range'"
$DT fit --fwhm 2 "$TMP/a.txt" >"$TMP/free.csv" 2>/dev/null
check "a clean detection says neither" sh -c "! grep -Eq 'asked for|limit of their range' '$TMP/free.csv'"

# ---- one convention in fit and export ------------------------------------
$DT fit --fwhm 2 --list "$TMP/t.list" >"$TMP/names.csv" 2>/dev/null
names=$(awk -F, '/^#/ { next } !h++ { for (i = 1; i <= NF; i++) c[$i] = i; next } { printf "%s ", $c["name"] }' "$TMP/names.csv")
check "fit: name from the list, else the file's stem ($names)" [ "$names" = "alpha b " ]
hdr_fit=$(grep -v '^#' "$TMP/names.csv" | head -n 1)
hdr_exp=$(head -n 1 "$TMP/e.csv")
for col in file name hdu row doublet ncomp component logN logN_err b_kms b_err v_kms v_err \
           chi2_red dof W_mA W_err_mA logN_aod logN_aod_err W_weak_mA W_weak_err_mA \
           logN_aod_weak logN_aod_weak_err saturated logN_limit suggested; do
  case ",$hdr_fit," in *",$col,"*) f=1 ;; *) f=0 ;; esac
  case ",$hdr_exp," in *",$col,"*) e=1 ;; *) e=0 ;; esac
  check "column $col in both fit and export" [ $f$e = 11 ]
done

finish
