# Sky positions and frames carried through the program: ra=/dec=/frame= of a
# target list, the ra_deg/dec_deg/frame columns of `fit` and `export`, and
# the session's target record.  Spectra are the demo's (written by
# `doubletty demo`); the expected numbers follow from the list itself
# (sexagesimal = degrees by definition: 10:30:00 = 157.5 deg).
. "$(dirname "$0")/../lib.sh"

export LANG=C.UTF-8 LC_ALL=C.UTF-8
"$DT" demo "$TMP/demo" >/dev/null 2>&1 || { bad "demo survey written"; finish; exit 1; }
cd "$TMP" || exit 1
f=$(awk '!/^#/ && NF {print $1; exit}' demo/targets.list)
cat >l.list <<EOF2
demo/$f vsys=512 name=A ra=10:30:00 dec=-00:30:00 frame=BARYCENT
demo/$f vsys=512 name=B ra=157.5 dec=-0.5 frame=BARYCENT
EOF2
"$DT" fit --list l.list -o out.csv 2>err; rc=$?
check "fit with ra=/dec= runs (exit $rc)" [ $rc -eq 0 ]
hdr=$(grep -v '^#' out.csv | head -1)
col() { echo "$hdr" | tr ',' '\n' | grep -nx "$1" | cut -d: -f1; }
cr=$(col ra_deg); cd=$(col dec_deg); cf=$(col frame)
check "fit CSV has ra_deg, dec_deg, frame columns" [ -n "$cr" -a -n "$cd" -a -n "$cf" ]
grep -v '^#' out.csv | tail -n +2 | awk -F, -v r="$cr" -v d="$cd" -v f="$cf" '{print $r, $d, $f}' | sort -u >pos
check "sexagesimal and degrees give the same ICRS position (10:30:00 = 157.5 deg)" \
  [ "$(cat pos)" = "157.50000000 -0.50000000 BARYCENT" ]
check "the frame is a settings line of the CSV" grep -qx "# frame=BARYCENT" out.csv
"$DT" fit --list l.list --frame LSRK -o lsrk.csv 2>err
cs=$(col status)
grep -v '^#' lsrk.csv | tail -n +2 | awk -F, -v s="$cs" -v f="$cf" '{print $s, $f}' | sort -u >lk
check "--frame LSRK: every row fitted, the frame column says LSRK" [ "$(cat lk)" = "ok LSRK" ]
printf '%s\n' "demo/$f ra=10:30:00" >bad.list
expect_fail "ra= without dec=: an error naming the line" "bad.list: line 1: give ra and dec together" "$DT" fit --list bad.list -o x.csv
printf '%s\n' "demo/$f ra=25:00:00 dec=0" >bad2.list
expect_fail "ra=25h: an error naming the line" "bad2.list: line 1: ra must be" "$DT" fit --list bad2.list -o y.csv
printf '%s\n' "demo/$f frame=MOON" >bad3.list
expect_fail "frame=MOON: an error naming the line" "bad3.list: line 1: frame must be" "$DT" fit --list bad3.list -o z.csv
expect_fail "--frame MOON refused" "--frame MOON" "$DT" fit --frame MOON "demo/$f"

# the session records the frame and position; export carries them
printf 'verdict-detected\nnext-spectrum\nverdict-unsure\n' >keys
"$DT" inspect --list l.list --frame LSRK --session s.session --replay-keys keys >/dev/null 2>&1
check "the session's target record has frame= and sky=" sh -c "grep -q 'frame=LSRK' s.session && grep -q 'sky=157.5' s.session"
"$DT" export s.session -o e.csv 2>err
eh=$(head -1 e.csv)
ecol() { echo "$eh" | tr ',' '\n' | grep -nx "$1" | cut -d: -f1; }
er=$(ecol ra_deg); ed=$(ecol dec_deg); ef=$(ecol frame)
check "export has ra_deg, dec_deg, frame" [ -n "$er" -a -n "$ed" -a -n "$ef" ]
tail -n +2 e.csv | awk -F, -v r="$er" -v d="$ed" -v f="$ef" '{printf "%.6f %.6f %s\n", $r, $d, $f}' | sort -u >epos
check "export: the position and frame of the record" [ "$(cat epos)" = "157.500000 -0.500000 LSRK" ]

# log --verify refits in the recorded frame and position: an LSRK session
# made from a list with ra=/dec= reproduces
"$DT" log s.session --verify >verify.out 2>&1; rc=$?
check "log --verify reproduces fits made with --frame LSRK and the list's position (exit $rc)" \
  sh -c "[ $rc -eq 0 ] && grep -q '^reproduced' verify.out && ! grep -q MISMATCH verify.out"

# the demo's 21-cm cube works at once on the demo's list
"$DT" hi demo/velloran_hi.fits --list demo/targets.list -o hi.csv 2>hi.err; rc=$?
check "demo: doubletty hi runs on the demo's cube and list (exit $rc)" [ $rc -eq 0 ]
check "demo: several sightlines have HI (status ok)" [ "$(grep -c ',ok$' hi.csv)" -ge 5 ]
check "demo: every demo sightline has a position" sh -c "! grep -q ',no-position$' hi.csv"
# the demo's topocentric spectra are converted (a shift of about 30 km/s in 2030 December)
top=$(grep -l TOPOCENT demo/*.fits | head -1)
check "demo: a topocentric spectrum is there" [ -n "$top" ]
"$DT" info "$top" >top.info
check "demo: info converts it to BARYCENT" grep -q "^frame       BARYCENT, converted from TOPOCENT (SPECSYS)" top.info

# the inspector: the frame in the title; night-sky lines marked ('~' with
# --ascii) on a spectrum whose topocentric frame can be reached, not on one
# without a site
topb=$(basename "$top")
helio=$(grep -l "SPECSYS = 'HELIOCEN'" demo/vp*.fits | head -1)
printf '%s vsys=0 name=TOPO\n%s vsys=0 name=HELIO\n' "demo/$topb" "$helio" >sky.list
printf 'quit\n' >k1
printf 'next-spectrum\nquit\n' >k2
"$DT" inspect --list sky.list --session sky1.session --replay-keys k1 --screen-dump scr1 --ascii --size 120x40 >/dev/null 2>&1
"$DT" inspect --list sky.list --session sky2.session --replay-keys k2 --screen-dump scr2 --ascii --size 120x40 >/dev/null 2>&1
check "inspector title says the frame" sh -c "head -1 scr1 | grep -q 'BARYCENT'"
check "night-sky lines marked on the topocentric spectrum" sh -c "sed -n '2,30p' scr1 | grep -q '~'"
check "no sky marks where the site is unknown (heliocentric file)" sh -c "! sed -n '2,30p' scr2 | grep -q '~'"

# inspect --hi: the 21-cm panel and the N(HI) row of the table at a
# sightline with emission (as `hi` found above), the same number as `hi`
okname=$(awk -F, '$10 == "ok" {print $1; exit}' hi.csv)
oklogn=$(awk -F, '$10 == "ok" {printf "%.2f", $5; exit}' hi.csv)
grep "name=$okname\$" demo/targets.list | head -1 | sed 's|^|demo/|' >hi.list
printf 'quit\n' >k3
"$DT" inspect --list hi.list --hi demo/velloran_hi.fits --session hi.session --replay-keys k3 \
  --screen-dump scr3 --ascii --size 120x44 >/dev/null 2>&1
check "inspect --hi: the 21-cm panel is drawn" grep -q '^ HI   |' scr3
check "inspect --hi: the table gives log N(HI) $oklogn as hi does" grep -q "HI 21cm   log N(HI) $oklogn" scr3
# export --hi: the HI columns joined, the same numbers as hi
printf 'verdict-detected\nquit\n' >k4
"$DT" inspect --list hi.list --session hx.session --replay-keys k4 >/dev/null 2>&1
"$DT" export hx.session --hi demo/velloran_hi.fits -o hx.csv 2>err; rc=$?
check "export --hi runs (exit $rc)" [ $rc -eq 0 ]
xh=$(head -1 hx.csv)
xc() { echo "$xh" | tr ',' '\n' | grep -nx "$1" | cut -d: -f1; }
xl=$(xc logN_HI); xs=$(xc HI_status)
check "export --hi: logN_HI and HI_status columns" [ -n "$xl" -a -n "$xs" ]
check "export --hi: log N(HI) $oklogn and status ok, as hi gives" \
  sh -c "tail -n +2 hx.csv | awk -F, -v l=$xl -v s=$xs '{printf \"%.2f %s\\n\", \$l, \$s}' | sort -u | grep -qx '$oklogn ok'"
"$DT" export hx.session --hi demo/velloran_hi.fits -o hx.fits 2>err
if need_py "export --hi as FITS"; then
  check "export --hi as FITS: logN_HI $oklogn and HI_status ok (astropy reads it)" "$PY" -c "
from astropy.io import fits
t = fits.getdata('hx.fits', 1)
assert set(t['HI_status']) == {'ok'}, t['HI_status']
assert {'%.2f' % x for x in t['logN_HI']} == {'$oklogn'}
assert fits.getheader('hx.fits', 1)['TUNIT' + str(t.columns.names.index('v_HI_kms') + 1)] == 'km s-1'"
fi
expect_fail "inspect --hi with a bad cube: one error" "nosuch.fits: cannot open" \
  "$DT" inspect --list hi.list --hi nosuch.fits --session hi2.session --replay-keys k3
finish
