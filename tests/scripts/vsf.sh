# doubletty vsf: a linear gradient (slope exactly 1), pure noise (order 2
# consistent with 0 after the variance correction), a random field of known
# power spectrum made here with numpy's FFT (slope recovered within its
# error), separations against astropy, figures, bad input.
. "$(dirname "$0")/../lib.sh"
cd "$TMP" || exit 1

# 1. a linear gradient along the equator: v = 0.5 km/s per kpc x offset;
# every pair at separation r differs by 0.5 r, so S1 = 0.5 <r> and the
# log-log slope is 1 (common practice: a shear flow)
awk 'BEGIN { print "name,doublet,component,v_kms,v_err,logN,logN_err,ra_deg,dec_deg,suggested"
  for (i = 0; i < 60; i++) { x = 2 * 1.08 ^ i; printf "G%d,NaI,1,%.12f,0,12,0.1,%.12f,0,detected\n", i, 0.5 * x, 40 + x / 3600 } }' >grad.csv
"$DT" vsf grad.csv --kpc-per-arcsec 1 --bins 1,4,16,64,256 --bootstrap 50 -o g.csv 2>g.err
check "vsf runs on the gradient" [ -s g.csv ]
slope=$(sed -n 's/^# slope=//p' g.csv)
check "gradient: slope $slope is 1 to 1e-6" awk -v s="$slope" 'BEGIN { exit !(s != "" && (s - 1) ^ 2 < 1e-12) }'
check "the slope is printed" grep -q "slope 1.000 +/- " g.err
check "gradient: S1 = 0.5 <r> in each bin" awk -F, '/^[0-9]/ && $4 > 0 { if (($5 - 0.5 * $3) ^ 2 > 1e-12 * $5 ^ 2) bad = 1 } END { exit bad }' g.csv

if need_py "noise and random-field catalogues made with numpy"; then
  # 2. pure noise: v ~ N(0, s_i), s_i from 5 to 20 km/s: no signal, so the
  # corrected S2 is 0 within its errors in every bin (the uncorrected one
  # would be 2 <s^2>, about 300 km^2/s^2)
  "$PY" - <<'PYEOF'
import numpy as np
rng = np.random.default_rng(11)
n = 300
s = rng.uniform(5, 20, n)
v = rng.normal(size=n) * s
ra = 150 + rng.uniform(0, 0.2, n); dec = 2 + rng.uniform(0, 0.2, n)
with open("noise.csv", "w") as o:
    o.write("name,doublet,component,v_kms,v_err,logN,logN_err,ra_deg,dec_deg,suggested\n")
    for i in range(n):
        o.write("N%d,NaI,1,%.6f,%.6f,12,0.1,%.9f,%.9f,detected\n" % (i, v[i], s[i], ra[i], dec[i]))
PYEOF
  "$DT" vsf noise.csv --kpc-per-arcsec 0.5 --order 2 --bins 10,20,40,80,160,320 --bootstrap 200 --seed 3 -o n.csv 2>/dev/null
  check "noise: order 2 within 3 sigma of 0 in every bin" awk -F, '/^[0-9]/ && $4 > 0 { k++; if ($5 ^ 2 > 9 * $6 ^ 2) bad = 1 } END { exit !(k == 5 && !bad) }' n.csv
  check "noise: the errors are informative (< 100 km^2/s^2)" awk -F, '/^[0-9]/ && $4 > 0 { if ($6 > 100 || !($6 > 0)) bad = 1 } END { exit bad }' n.csv

  # 3. a Gaussian random field with power spectrum P(k) ~ k^-(8/3) on a
  # 1024^2 grid of 1 kpc (numpy FFT); for 2 < n < 4 a 2-D field with
  # P ~ k^-n has S2 ~ r^(n-2) = r^(2/3) and, being Gaussian, S1 ~ r^(1/3)
  # (e.g. Frisch 1995, "Turbulence", ch. 5; common practice).  800
  # sightlines at random places, with measurement errors of 1-3 km/s.
  "$PY" - <<'PYEOF'
import numpy as np
rng = np.random.default_rng(1)
N = 1024
k = np.hypot(*np.meshgrid(np.fft.fftfreq(N), np.fft.fftfreq(N), indexing="xy"))
amp = np.zeros_like(k)
amp[k > 0] = k[k > 0] ** (-(2 + 2 / 3) / 2)
f = np.fft.ifft2(amp * (rng.normal(size=(N, N)) + 1j * rng.normal(size=(N, N)))).real
f *= 20 / f.std()
n = 800
x = rng.uniform(0, N, n); y = rng.uniform(0, N, n)
s = rng.uniform(1, 3, n)
v = f[y.astype(int), x.astype(int)] + rng.normal(size=n) * s
with open("field.csv", "w") as o:
    o.write("name,doublet,component,v_kms,v_err,logN,logN_err,ra_deg,dec_deg,suggested\n")
    for i in range(n):
        o.write("F%d,NaI,1,%.6f,%.6f,12,0.1,%.9f,%.9f,detected\n" % (i, v[i], s[i], 30 + x[i] / 3600, y[i] / 3600))
PYEOF
  for o in 1 2; do
    "$DT" vsf field.csv --kpc-per-arcsec 1 --order $o --bins 4,8,16,32,64,128,256 --fit-range 6:100 \
      --bootstrap 100 -o f$o.csv --figure f$o.png 2>/dev/null
    s=$(sed -n 's/^# slope=//p' f$o.csv); e=$(sed -n 's/^# slope_err=//p' f$o.csv)
    check "random field order $o: slope $s +/- $e recovers $o/3 within 2 sigma" \
      awk -v s="$s" -v e="$e" -v o=$o 'BEGIN { exit !(e > 0 && e < 0.1 && (s - o / 3) ^ 2 < 4 * e ^ 2) }'
  done

  # separations: two sightlines 1 arcmin apart at 10 Mpc; r from astropy
  printf 'name,doublet,component,v_kms,v_err,logN,ra_deg,dec_deg,suggested\nP,NaI,1,0,1,12,210.25,-33.5,detected\nQ,NaI,1,10,1,12,210.2700,-33.5100,detected\n' >pair.csv
  "$DT" vsf pair.csv --distance-mpc 10 --bins 0,100 --bootstrap 10 -o p.csv 2>/dev/null
  r=$(awk -F, '/^[0-9]/ { print $3 }' p.csv | tail -1)
  want=$("$PY" -c "
from astropy.coordinates import SkyCoord
import astropy.units as u
a = SkyCoord(210.25*u.deg, -33.5*u.deg); b = SkyCoord(210.27*u.deg, -33.51*u.deg)
print(a.separation(b).to(u.rad).value * 10 * 1000)")
  check "r = angle x D: $r kpc equals astropy's $want (SkyCoord.separation)" awk -v a="$r" -v b="$want" 'BEGIN { exit !((a - b) ^ 2 < 1e-18 + 1e-20 * b ^ 2) }'
  check "pair: S1 = |dv| = 10" [ "$(awk -F, '/^[0-9]/ { print $5 }' p.csv | tail -1)" = "10" ]
fi

# figures, and a seed that repeats
for f in v.pdf v.png v.svg; do
  "$DT" vsf grad.csv --kpc-per-arcsec 1 --bins 1,4,16,64,256 --bootstrap 20 --figure $f -o out.csv --force 2>/dev/null
  check "figure $f written" [ -s $f ]
done
if need_py "figure files parsed"; then
  for f in v.pdf v.svg; do
    check "$("$PY" "$ROOT/tests/py/figure_check.py" $f 432 324)" "$PY" "$ROOT/tests/py/figure_check.py" $f 432 324
  done
  check "$("$PY" "$ROOT/tests/py/figure_check.py" v.png 900 675)" "$PY" "$ROOT/tests/py/figure_check.py" v.png 900 675
fi
"$DT" vsf grad.csv --kpc-per-arcsec 1 --nbins 4 --bootstrap 30 --seed 9 -o s1.csv 2>/dev/null
"$DT" vsf grad.csv --kpc-per-arcsec 1 --nbins 4 --bootstrap 30 --seed 9 -o s2.csv 2>/dev/null
check "the same seed gives the same table" cmp -s s1.csv s2.csv
"$DT" vsf grad.csv --kpc-per-arcsec 1 --nbins 4 --bootstrap 30 --seed 10 -o s3.csv 2>/dev/null
check "another seed, other errors" sh -c '! cmp -s s1.csv s3.csv'

# progress on standard error only when it is a terminal
"$DT" vsf grad.csv --kpc-per-arcsec 1 --nbins 4 --bootstrap 300 -o out.csv --force 2>plain.err
check "no terminal: no progress line" sh -c "! grep -q 'left' plain.err"
if need_tool script "progress in a terminal"; then
  script -qc "'$DT' vsf grad.csv --kpc-per-arcsec 1 --nbins 4 --bootstrap 300 -o out.csv --force" /dev/null >tty.txt 2>&1
  check "terminal: progress with the time left" grep -q "vsf: bootstrap  [0-9]*/300 .*left" tty.txt
fi

# bad input
expect_fail "no scale" "--distance-mpc D or --kpc-per-arcsec" "$DT" vsf grad.csv
expect_fail "both scales" "one of them" "$DT" vsf grad.csv --distance-mpc 3 --kpc-per-arcsec 1
expect_fail "order 3" "not 1 or 2" "$DT" vsf grad.csv --kpc-per-arcsec 1 --order 3
expect_fail "bad fit range" "R1:R2" "$DT" vsf grad.csv --kpc-per-arcsec 1 --fit-range 10-20
expect_fail "--bins and --nbins" "not both" "$DT" vsf grad.csv --kpc-per-arcsec 1 --bins 1,2 --nbins 3
printf 'name,doublet,component,v_kms,v_err,logN,suggested\nA,NaI,1,0,1,12,detected\n' >nopos.csv
expect_fail "no positions: file and column named" "nopos.csv.*ra_deg" "$DT" vsf nopos.csv --kpc-per-arcsec 1
expect_fail "aod velocities need v_aod_kms" "v_aod_kms" "$DT" vsf grad.csv --kpc-per-arcsec 1 --velocity aod
head -2 grad.csv >one.csv
expect_fail "one sightline: no pairs" "at least two" "$DT" vsf one.csv --kpc-per-arcsec 1
finish
