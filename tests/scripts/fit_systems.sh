#!/bin/sh
# doubletty fit with absorber systems: the Milky Way's gas is its own system,
# not a detection of the target; the target and every other system get a row
# (a component row, or one row with the system's limit); user systems from
# the command line and the list; bad system settings refused.
. "$(dirname "$0")/../lib.sh"
AWKGEN=$ROOT/tests/scripts/fit_cmd_spectrum.awk

# spec NAME SEED COMPS VSYS: synthetic Na I D spectrum (fit_cmd_spectrum.awk),
# component velocities relative to VSYS
spec() {
  awk -v lo=5850 -v hi=5940 -v step=0.1 -v snr=40 -v seed="$2" -v comps="$3" -v vsys="$4" \
    -f "$AWKGEN" >"$TMP/$1"
}
# rows SYSTEM CSV: the data rows of a system
rows() { awk -F, -v s="$1" '/^#/ { next } !h++ { for (i = 1; i <= NF; i++) if ($i == "system") k = i; next } $k == s' "$2"; }
colv() { # colv NAME "LINE" CSV (portable: no process substitution)
  hdr=$(grep -v '^#' "$3" | head -n 1)
  printf '%s\n%s\n' "$hdr" "$2" | awk -F, -v name="$1" 'NR == 1 { for (i = 1; i <= NF; i++) if ($i == name) k = i; next } { print (k ? $k : "NOCOLUMN") }'
}

# The Milky Way's gas at v_obs = 0 seen from vsys = 512 km/s lies at
# -511.127 km/s relative to vsys (astropy 5.2.1 u.doppler_optical; see
# test_systems.c).
MW=-511.127
spec mw.txt 21 "$MW:0.8:8" 512              # the Milky Way only
spec both.txt 22 "0:0.7:10;$MW:0.8:8" 512   # target gas and the Milky Way
spec abs.txt 23 "-1100:0.7:10" 512          # an intervening absorber only
spec zero.txt 24 "0:0.7:10" 0               # vsys 0: the Milky Way is the target's

$DT fit --fwhm 10 --vsys 512 "$TMP/mw.txt" "$TMP/both.txt" >"$TMP/a.csv" 2>"$TMP/a.err"
check "fit: exit 0" [ $? -eq 0 ]
hdr=$(grep -v '^#' "$TMP/a.csv" | head -n 1)
case $hdr in *,doublet,system,vsys,*) ok "system column right after doublet" ;; *) bad "system column placement: $hdr" ;; esac
case $hdr in *,W_limit_mA,logN_limit,*) ok "W_limit_mA column before logN_limit" ;; *) bad "W_limit_mA column: $hdr" ;; esac
ncol=$(echo "$hdr" | awk -F, '{print NF}')
check "every row has the header's $ncol fields" \
  [ "$(awk -F, -v n="$ncol" '/^#/ { next } NF != n' "$TMP/a.csv" | wc -l)" -eq 0 ]

# the Milky Way only: the target is not detected and carries its limit
t=$(rows target "$TMP/a.csv" | grep mw.txt)
m=$(rows milky-way "$TMP/a.csv" | grep mw.txt)
check "Milky Way only: one target row" [ "$(echo "$t" | grep -c .)" -eq 1 ]
check "Milky Way only: target not-detected ($(colv suggested "$t" "$TMP/a.csv"))" [ "$(colv suggested "$t" "$TMP/a.csv")" = not-detected ]
check "Milky Way only: target row without a component" [ -z "$(colv component "$t" "$TMP/a.csv")" ]
wl=$(colv W_limit_mA "$t" "$TMP/a.csv"); nl=$(colv logN_limit "$t" "$TMP/a.csv")
check "Milky Way only: target limit given (W_limit_mA $wl, logN_limit $nl)" \
  awk -v w="$wl" -v n="$nl" 'BEGIN { exit !(w > 0 && n > 9 && n < 14) }'
check "Milky Way only: milky-way detected" [ "$(colv suggested "$m" "$TMP/a.csv")" = detected ]
mv=$(colv v_kms "$m" "$TMP/a.csv")
check "Milky Way only: its component at $mv within 3 km/s of $MW" \
  awk -v v="$mv" -v w="$MW" 'BEGIN { d = v - w; exit !(d < 3 && d > -3) }'

# both: each system its own component and verdict
t=$(rows target "$TMP/a.csv" | grep both.txt)
m=$(rows milky-way "$TMP/a.csv" | grep both.txt)
tv=$(colv v_kms "$t" "$TMP/a.csv")
check "both: target component at $tv near 0" awk -v v="$tv" 'BEGIN { exit !(v < 3 && v > -3) }'
check "both: target detected" [ "$(colv suggested "$t" "$TMP/a.csv")" = detected ]
check "both: milky-way detected" [ "$(colv suggested "$m" "$TMP/a.csv")" = detected ]
check "both: two components in the joint fit (ncomp 2 on both rows)" \
  [ "$(colv ncomp "$t" "$TMP/a.csv")" = 2 ] && [ "$(colv ncomp "$m" "$TMP/a.csv")" = 2 ]
check "both: the target's W is its own (target W < 0.8 x the sum of both systems' W)" \
  awk -v a="$(colv W_mA "$t" "$TMP/a.csv")" -v b="$(colv W_mA "$m" "$TMP/a.csv")" 'BEGIN { exit !(a > 0 && b > 0 && a < 0.8 * (a + b)) }'

# the settings lines record the systems
$DT fit --fwhm 10 --vsys 512 --system abs:-1200:-1000 --target-window -250:250 --milky-way 120 \
  "$TMP/abs.txt" >"$TMP/b.csv" 2>"$TMP/b.err"
check "--system: exit 0" [ $? -eq 0 ]
check "settings: systems=abs:-1200:-1000" grep -qx '# systems=abs:-1200:-1000' "$TMP/b.csv"
check "settings: target-window=-250:250" grep -qx '# target-window=-250:250' "$TMP/b.csv"
check "settings: milky-way=120" grep -qx '# milky-way=120' "$TMP/b.csv"
a=$(rows abs "$TMP/b.csv")
check "--system: the absorber detected in its own system" [ "$(colv suggested "$a" "$TMP/b.csv")" = detected ]
av=$(colv v_kms "$a" "$TMP/b.csv")
check "--system: its component at $av near -1100" awk -v v="$av" 'BEGIN { exit !(v < -1097 && v > -1103) }'
t=$(rows target "$TMP/b.csv")
check "--system: the target not-detected with a limit" \
  [ "$(colv suggested "$t" "$TMP/b.csv")" = not-detected ] && [ -n "$(colv W_limit_mA "$t" "$TMP/b.csv")" ]
check "--system: a milky-way row too (3 systems, 3 rows)" [ "$(grep -v '^#' "$TMP/b.csv" | tail -n +2 | wc -l)" -eq 3 ]
# without the system the absorber is no one's detection: the target ignores it
$DT fit --fwhm 10 --vsys 512 "$TMP/abs.txt" >"$TMP/c.csv" 2>/dev/null
check "without --system: no row claims the absorber as the target's" \
  [ "$(colv suggested "$(rows target "$TMP/c.csv")" "$TMP/c.csv")" != detected ]

# vsys 0: one system, the reason says why, a message on stderr
$DT fit --fwhm 10 "$TMP/zero.txt" >"$TMP/z.csv" 2>"$TMP/z.err"
check "vsys 0: no milky-way row" [ -z "$(rows milky-way "$TMP/z.csv")" ]
check "vsys 0: the reason says the Milky Way lies in the target's range" \
  grep -q 'milky-way (-150:150 km/s) lies in the range of target' "$TMP/z.csv"
check "vsys 0: stderr says so" grep -q 'Milky Way lies in the target' "$TMP/z.err"

# a target list with systems and a target window
printf 'abs.txt vsys=512 fwhm=10 system=far:-1200:-1000 target-window=-200:200\n' >"$TMP/l.list"
$DT fit --list "$TMP/l.list" >"$TMP/l.csv" 2>/dev/null
check "list: system= gives the absorber its row" [ "$(colv suggested "$(rows far "$TMP/l.csv")" "$TMP/l.csv")" = detected ]

# bad settings
expect_fail "--system without a range" "NAME:VLO:VHI" $DT fit --system abs "$TMP/abs.txt"
expect_fail "--system with a reserved name" "reserved" $DT fit --system target:1:2 "$TMP/abs.txt"
expect_fail "--system twice with one name" "twice" $DT fit --system a:1:2 --system a:3:4 "$TMP/abs.txt"
expect_fail "--system overlapping the target" "overlaps" $DT fit --system a:-100:100 "$TMP/abs.txt"
expect_fail "--target-window empty" "empty" $DT fit --target-window 5:1 "$TMP/abs.txt"
expect_fail "--milky-way negative" "half width" $DT fit --milky-way -5 "$TMP/abs.txt"
printf 'abs.txt system=a:-1:1\n' >"$TMP/bad.list"
$DT fit --vsys 512 --fwhm 10 --list "$TMP/bad.list" >"$TMP/bad.csv" 2>"$TMP/bad.err"
check "list system overlapping the target: exit 1, message names the systems" \
  grep -q "overlaps system 'target'" "$TMP/bad.err"
finish
