# doubletty fraction: the counting rule on a catalogue written here, the
# intervals against SciPy, bins, joins, figures as real files, bad input.
. "$(dirname "$0")/../lib.sh"
cd "$TMP" || exit 1

# A fit CSV in the layout with systems and limits.  At a 100 mA threshold:
# A detection; B non-detection (limit 60 <= 100); C left out (limit 250);
# D non-detection (detected, 80 < 100); E, F left out (unusable, unsure);
# G is milky-way only (not counted for the target).
cat >cat.csv <<'CSV'
# program=doubletty fit
index,file,name,doublet,system,status,ncomp,component,v_kms,v_err,logN,logN_err,W_mA,W_limit_mA,logN_aod,logN_limit,ra_deg,dec_deg,suggested,reason
0,a.fits,A,NaI,target,ok,1,1,10,2,12.0,0.1,300,,12.0,,150.0,2.0,detected,
0,a.fits,A,NaI,milky-way,ok,1,1,0,1,12.5,0.1,500,,12.5,,150.0,2.0,detected,
1,b.fits,B,NaI,target,ok,0,,,,,,20,60,,11.9,150.1,2.0,not-detected,
2,c.fits,C,NaI,target,ok,0,,,,,,20,250,,12.6,150.2,2.0,not-detected,
3,d.fits,D,NaI,target,ok,1,1,-5,3,11.5,0.2,80,,11.4,,150.3,2.0,detected,
4,e.fits,E,NaI,target,failed,0,,,,,,,,,,150.4,2.0,unusable,
5,f.fits,F,NaI,target,ok,1,1,5,3,11.7,0.2,90,,11.6,,150.5,2.0,unsure,
6,g.fits,G,NaI,milky-way,ok,1,1,0,1,12.5,0.1,500,,12.5,,150.0,2.0,detected,
CSV
row() { grep -v '^#' "$1" | sed -n "$2p"; }
"$DT" fraction cat.csv --threshold-mA 100 >out.csv 2>err.txt
check "fraction runs" [ $? -eq 0 ]
check "header is bin_lo,bin_hi,n,k,excluded,fraction,lower,upper" [ "$(row out.csv 1)" = "bin_lo,bin_hi,n,k,excluded,fraction,lower,upper" ]
check "W >= 100 mA: n=3 k=1 excluded=3 (counting rule)" [ "$(row out.csv 2 | cut -d, -f3-5)" = "3,1,3" ]
"$DT" fraction cat.csv --threshold-mA 50 >out.csv
check "W >= 50 mA: D detected, B left out: n=2 k=2 excluded=4" [ "$(row out.csv 2 | cut -d, -f3-5)" = "2,2,4" ]
"$DT" fraction cat.csv >out.csv
check "verdicts alone: n=4 k=2 excluded=2" [ "$(row out.csv 2 | cut -d, -f3-5)" = "4,2,2" ]
"$DT" fraction cat.csv --system milky-way >out.csv
check "--system milky-way: n=2 k=2" [ "$(row out.csv 2 | cut -d, -f3-4)" = "2,2" ]
# log N: A 12.0 >= 12; C's limit 12.6 > 12 left out; B's 11.9 counts; D 11.5 below
"$DT" fraction cat.csv --threshold-logN 12 >out.csv
check "log N >= 12: n=3 k=1 excluded=3" [ "$(row out.csv 2 | cut -d, -f3-5)" = "3,1,3" ]

# bins by a joined column; the last edge is inside the last bin
printf 'name,b_kpc\nA,5\nB,15\nC,25\nD,40\nE,12\nF,70\n' >with.csv
"$DT" fraction cat.csv --threshold-mA 100 --with with.csv --by b_kpc --bins 0,20,40 -o bins.csv 2>err.txt
check "bins written" [ -s bins.csv ]
check "bin [0,20): A det, B non, E left out" [ "$(row bins.csv 2 | cut -d, -f1-5)" = "0,20,2,1,1" ]
check "bin [20,40]: C left out, D (b=40) non-detection" [ "$(row bins.csv 3 | cut -d, -f1-5)" = "20,40,1,0,1" ]
check "a note counts F outside the bins" grep -q "1 sightline outside the bins" err.txt
"$DT" fraction cat.csv --with with.csv --by b_kpc --bins 100,200 >out.csv 2>/dev/null
check "an empty bin: n=0, fraction and interval empty" [ "$(row out.csv 2)" = "100,200,0,0,0,,," ]

# export layout (verdict over suggested, W_lim_mA) as CSV and as FITS
cat >exp.csv <<'CSV'
file,name,hdu,row,verdict,doublet,ncomp,component,v_kms,v_err,logN,logN_err,W_mA,W_err_mA,W_lim_mA,logN_limit,suggested
x.fits,X,1,,not-detected,NaI,0,0,,,,,10,5,40,11.5,detected
y.fits,Y,1,,,NaI,1,1,3,1,12,0.1,200,10,,,detected
z.fits,Z,1,,unusable,NaI,0,0,,,,,,,,,not-detected
CSV
"$DT" fraction exp.csv --threshold-mA 100 >out.csv
check "export CSV: the verdict wins (X not detected, limit 40): n=2 k=1 excluded=1" [ "$(row out.csv 2 | cut -d, -f3-5)" = "2,1,1" ]
if need_py "FITS catalogue written by astropy"; then
  "$PY" - <<'PYEOF'
from astropy.table import Table
import numpy as np
t = Table.read("exp.csv", format="ascii.csv")
t.write("exp.fits", format="fits", overwrite=True)
PYEOF
  "$DT" fraction exp.fits --threshold-mA 100 >outf.csv 2>err.txt
  check "export FITS (astropy Table.write) gives the same counts" [ "$(row outf.csv 2 | cut -d, -f3-5)" = "2,1,1" ]
fi

# a real session exported as CSV and as FITS: the same counts
export LANG=C.UTF-8 LC_ALL=C.UTF-8
if "$DT" demo demo >/dev/null 2>&1; then
  printf 'demo/vpq01.fits vsys=512 R=3690 name=VPQ01\ndemo/vpq07.fits vsys=512 R=3690 name=VPQ07\ndemo/vpq03.fits vsys=512 R=3690 name=VPQ03\n' >q.list
  printf 'verdict-detected\nverdict-not-detected\nverdict-unsure\nquit\n' >keys
  "$DT" inspect --list q.list --session s.session --replay-keys keys >/dev/null 2>&1
  "$DT" export s.session -o s.csv 2>/dev/null && "$DT" export s.session -o s.fits 2>/dev/null
  "$DT" fraction s.csv >sc.csv 2>/dev/null; "$DT" fraction s.fits >sf.csv 2>/dev/null
  check "export CSV: verdicts detected, not-detected, unsure: n=2 k=1 excluded=1" [ "$(row sc.csv 2 | cut -d, -f3-5)" = "2,1,1" ]
  check "export FITS gives the same table as its CSV" cmp -s sc.csv sf.csv
else
  bad "demo survey written"
fi

# the intervals against SciPy (scipy.stats.binomtest(k, n).proportion_ci for
# wilson and exact; scipy.stats.beta.ppf for Jeffreys, Brown, Cai & DasGupta
# 2001, Statistical Science 16, 101, section 4.1.2)
awk 'BEGIN { print "name,suggested,doublet,W_mA,W_limit_mA"
  for (i = 0; i < 23; i++) print "S" i "," (i < 7 ? "detected,NaI,150," : "not-detected,NaI,20,40") }' >big.csv
for m in wilson exact jeffreys; do
  for cl in 0.683 0.95; do
    "$DT" fraction big.csv --interval $m --cl $cl -o "iv-$m-$cl.csv" || bad "fraction --interval $m --cl $cl"
  done
done
if need_py "intervals against SciPy"; then
  "$PY" - >py.out 2>&1 <<'PYEOF'
import csv
from scipy.stats import binomtest, beta
bad = 0
for m in ("wilson", "exact", "jeffreys"):
    for cl in ("0.683", "0.95"):
        rows = [r for r in csv.reader(l for l in open("iv-%s-%s.csv" % (m, cl)) if not l.startswith("#"))]
        n, k = int(rows[1][2]), int(rows[1][3])
        lo, hi = float(rows[1][6]), float(rows[1][7])
        c = float(cl)
        if m == "jeffreys":
            a = 1 - c
            want = (beta.ppf(a / 2, k + .5, n - k + .5), beta.ppf(1 - a / 2, k + .5, n - k + .5))
        else:
            ci = binomtest(k, n).proportion_ci(c, m)
            want = (ci.low, ci.high)
        ok = (n, k) == (23, 7) and abs(lo - want[0]) < 1e-6 and abs(hi - want[1]) < 1e-6
        bad += not ok
        print("ok" if ok else "BAD", m, cl, n, k, lo, hi, want)
print("result", bad)
PYEOF
  check "intervals equal SciPy's to 1e-6 ($(grep -c '^ok' py.out) of 6)" grep -q "^result 0" py.out
fi

# figures: real files of the stated sizes (432 x 324 pt; PNG 900 x 675 pixels at 150 dpi)
for f in f.pdf f.png f.svg; do
  "$DT" fraction cat.csv --threshold-mA 100 --with with.csv --by b_kpc --bins 0,20,40 --figure $f >/dev/null 2>&1
  check "figure $f written" [ -s $f ]
done
"$DT" fraction cat.csv --figure whole.pdf >/dev/null
check "figure without --by written" [ -s whole.pdf ]
if need_py "figure files parsed"; then
  for f in f.pdf f.svg whole.pdf; do
    check "$("$PY" "$ROOT/tests/py/figure_check.py" $f 432 324)" "$PY" "$ROOT/tests/py/figure_check.py" $f 432 324
  done
  check "$("$PY" "$ROOT/tests/py/figure_check.py" f.png 900 675)" "$PY" "$ROOT/tests/py/figure_check.py" f.png 900 675
fi
check "no terminal: no plot on standard output" sh -c "! grep -q 'detection fraction' out.csv"

# standard output a terminal (script(1) gives one): the plot, then the table
if need_tool script "the plot in a terminal"; then
  LC_ALL=C.UTF-8 script -qc "'$DT' fraction cat.csv --threshold-mA 100 --with with.csv --by b_kpc --bins 0,20,40" /dev/null >tty.txt 2>&1
  check "terminal (UTF-8): a plot with markers" grep -q "●" tty.txt
  check "terminal: the table follows" grep -q "^bin_lo,bin_hi,n,k,excluded,fraction,lower,upper" tty.txt
  LC_ALL=C script -qc "'$DT' fraction cat.csv --threshold-mA 100 --with with.csv --by b_kpc --bins 0,20,40" /dev/null 2>&1 | tr -d '\r' >tty2.txt
  check "terminal (C locale): plain ASCII" sh -c "grep -Eq '^[ 0-9.]*[|].*o' tty2.txt && ! LC_ALL=C grep -q '[^ -~]' tty2.txt"
fi

# an output that is not a regular file (a named pipe) is written in place,
# never replaced by a rename
mkfifo pipe
timeout 10 cat pipe >frompipe.csv &
"$DT" fraction cat.csv -o pipe --force 2>/dev/null
wait
check "a named pipe stays a pipe" [ -p pipe ]
check "... and the table went through it" grep -q "^bin_lo,bin_hi" frompipe.csv

# bad input: one clear message, nonzero exit
head -2 exp.csv | sed 's/W_lim_mA/W_other/' >nolim.csv
expect_fail "a catalogue without W_limit_mA is named" "nolim.csv.*W_limit_mA" "$DT" fraction nolim.csv --threshold-mA 100
expect_fail "unknown --by column" "no column 'dist'" "$DT" fraction cat.csv --by dist --bins 0,1
expect_fail "--bins not increasing" "must increase" "$DT" fraction cat.csv --by b_kpc --bins 0,20,10 --with with.csv
expect_fail "--by without --bins" "go together" "$DT" fraction cat.csv --by b_kpc
expect_fail "--cl 1.5" "between 0 and 1" "$DT" fraction cat.csv --cl 1.5
expect_fail "--interval unknown" "not wilson" "$DT" fraction cat.csv --interval agresti
expect_fail "figure of unknown type" "cannot tell the figure" "$DT" fraction cat.csv --figure f.jpg
expect_fail "existing output without --force" "exists" "$DT" fraction cat.csv -o bins.csv
expect_fail "the output is an input" "input|itself" "$DT" fraction cat.csv -o cat.csv --force
expect_fail "a missing catalogue" "nope.csv" "$DT" fraction nope.csv
expect_fail "no catalogue" "no catalogue" "$DT" fraction
printf 'name,suggested\nA,maybe\n' >badv.csv
expect_fail "unknown verdict names line and column" "badv.csv: line 2, column suggested" "$DT" fraction badv.csv
printf 'name,suggested,doublet\nA,detected,NaI\nB,detected,CaII\n' >two.csv
expect_fail "two doublets need --doublet" "--doublet" "$DT" fraction two.csv
"$DT" fraction two.csv --doublet CaII >out.csv
check "--doublet CaII: n=1" [ "$(row out.csv 2 | cut -d, -f3)" = "1" ]
finish
