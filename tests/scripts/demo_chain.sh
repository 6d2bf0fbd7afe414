# The whole chain of the README on the demo survey: fit, inspect (keys
# replayed), export, hi, fraction, vsf, map, figure; each step's output is
# read back (tables by their columns, figures by their file signature).
. "$(dirname "$0")/../lib.sh"
cd "$TMP" || exit 1
"$DT" demo demo >/dev/null 2>&1 || { bad "demo survey written"; finish; exit 1; }
"$DT" fit --list demo/targets.list -o fit.csv 2>/dev/null
check "fit (exit $?)" [ -s fit.csv ]
nlist=$(grep -cv '^[[:space:]]*\(#\|$\)' demo/targets.list)
printf 'verdict-detected\nverdict-not-detected\nverdict-detected\nquit\n' >keys
"$DT" inspect --list demo/targets.list --session my.session --replay-keys keys >/dev/null 2>&1
check "inspect, three verdicts replayed (exit $?)" [ "$(grep -c 'act=verdict' my.session)" -eq 3 ]
"$DT" export my.session -o final.csv 2>/dev/null
check "export (exit $?): a system column" sh -c "head -1 final.csv | grep -q ',system,'"
"$DT" hi demo/velloran_hi.fits --list demo/targets.list -o hi.csv 2>/dev/null
check "hi (exit $?): one row per list line" [ "$(grep -v '^#' hi.csv | tail -n +2 | wc -l)" -eq "$nlist" ]
check "hi: the pair's gas seen in 21 cm somewhere" grep -q ',ok$' hi.csv
"$DT" fraction fit.csv --doublet NaI --threshold-mA 150 --with hi.csv --by logN_HI \
  --bins 19,20,20.5,21,22 --figure fraction.pdf -o fraction.csv 2>/dev/null
check "fraction (exit $?): four bins" [ "$(grep -v '^#' fraction.csv | tail -n +2 | wc -l)" -eq 4 ]
"$DT" vsf fit.csv --doublet NaI --distance-mpc 7.3 --bootstrap 50 --seed 3 --figure vsf.pdf -o vsf.csv 2>/dev/null
check "vsf (exit $?): its columns" grep -q '^r_lo_kpc,r_hi_kpc,r_mean_kpc,npairs,vsf,vsf_err' vsf.csv
"$DT" map fit.csv --doublet NaI --hi demo/velloran_hi.fits --figure map.pdf -o map.csv 2>/dev/null
check "map --hi (exit $?)" [ -s map.csv ]
for f in fraction.pdf vsf.pdf map.pdf; do
  check "$f is a PDF" sh -c "head -c 5 $f | grep -q '^%PDF-'"
done
"$DT" figure my.session -o figures 2>/dev/null
check "figure (exit $?): the target's figure of the first vetted spectrum" [ -n "$(ls figures/*_NaI.pdf 2>/dev/null | head -1)" ]
finish
