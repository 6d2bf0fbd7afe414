#!/bin/sh
# The first pass on a survey at R 5000 with known components: 200 spectra
# of one or two Na I components (log N 12-13, b 4-25 km/s, S/N 30-60),
# synthesised in NumPy/SciPy (tests/py/recovery_synth.py: Voigt profiles
# from scipy.special.wofz, Morton 2003 atomic data, a Gaussian LSF; no
# doubletty code) and fitted with `fit --resolution 5000` as a survey would
# be.  Checked (tests/py/recovery_check.py):
#  - at least 95% of the components are found (a fitted one within half
#    the FWHM in velocity);
#  - the pulls (fit - truth) / error of log N (the side of the profile
#    interval towards the truth) and of v have unit width: standard
#    deviation 1 +- 0.15 (three sampling errors of a standard deviation
#    of ~290 unit normals, sqrt(1 / (2 (N - 1))) = 0.042 each, plus a few
#    outliers' allowance), and 68.27% of them within 1 (erf(1/sqrt 2),
#    Abramowitz & Stegun 1964, 26.2) to three binomial errors;
#  - no fit is left poor: each spectrum's chi2 lies within the upper 1e-6
#    point of the chi-square distribution of its degrees of freedom
#    (scipy.stats.chi2), as it does once the search found the components
#    the data were made of (one left at chi2_red 4.7 when a full refit of
#    an accepted trial crept along a bound to the iteration limit).
# The pulls of b are printed, not checked: with b below the line-spread
# function's (36 km/s here) its covariance error is no interval (README,
# Measurements).
. "$(dirname "$0")/../lib.sh"

need_py "a survey synthesised with NumPy/SciPy" || { finish; exit; }
mkdir -p "$TMP/s"
"$PY" "$ROOT/tests/py/recovery_synth.py" "$TMP/s" 200 7 || { bad "synthesis"; finish; exit; }
"$DT" fit --list "$TMP/s/targets.list" --resolution 5000 -o "$TMP/fit.csv" 2>"$TMP/fit.err"
check "the first pass over 200 spectra at R 5000 runs" [ -s "$TMP/fit.csv" ]
"$PY" "$ROOT/tests/py/recovery_check.py" "$TMP/s/truth.csv" "$TMP/fit.csv" >"$TMP/rec.txt"
sed 's/^/# /' "$TMP/rec.txt"
set -- $(grep '^found' "$TMP/rec.txt")
check "components found: $2 of $3 (>= 95%)" awk -v f="$2" -v n="$3" 'BEGIN { exit !(n > 0 && f >= 0.95 * n) }'
for par in logN v; do
  set -- $(grep "^pull $par " "$TMP/rec.txt")
  check "pulls of $par: sd $5 (1 +- 0.15)" awk -v s="$5" 'BEGIN { exit !(s >= 0.85 && s <= 1.15) }'
  check "pulls of $par: $6 within 1 (0.6827 +- 3 binomial errors of $3)" \
    awk -v w="$6" -v n="$3" 'BEGIN { t = 3 * sqrt(0.6827 * 0.3173 / n); d = w - 0.6827; if (d < 0) d = -d; exit !(n > 100 && d <= t) }'
done
set -- $(grep '^poor' "$TMP/rec.txt")
check "poor fits (chi2 beyond its 1e-6 point): $2 of $3 (worst $4)" [ "$2" = 0 ]
finish
