#!/bin/sh
# Partial covering in the session file: the key P (action "covering")
# records act=covering with each component's covering factor and its
# error; reopening replays it to the same screen without a refit warning;
# log and export show it; switching it off again drops the fields; a list
# line's cover=1 and inspect --covering start a first look with it on.
# The spectrum (tests/scripts/fit_cmd_spectrum.awk) covers 60% of the source:
# I = 1 - C + C exp(-tau) (Hamann et al. 1997, ApJ 478, 80, eq. 1).
. "$(dirname "$0")/../lib.sh"
AWKGEN=$ROOT/tests/scripts/fit_cmd_spectrum.awk
cd "$TMP" || exit 1
awk -v lo=5870 -v hi=5920 -v step=0.04 -v snr=80 -v seed=21 -v comps="0:4:15" -v cf=0.6 \
  -f "$AWKGEN" >part.txt
run() { # run SESSION DUMP KEYS... : headless inspector on part.txt
  s=$1; d=$2; shift 2
  printf '%s\n' "$@" >keys.txt
  "$DT" inspect --fwhm 2 --session "$s" --replay-keys keys.txt --screen-dump "$d" --size 110x34 "$EXTRA" part.txt \
    >/dev/null 2>run.err
}
EXTRA=--ascii
run s.session d1.txt covering
check "the covering action is recorded" grep -q 'act=covering	cover=1	=>' s.session
check "the state says covering=1" grep -q '	covering=1	' s.session
check "each component's C_f with its error (cf=X+-E,...)" grep -Eq '	cf=0\.[0-9]+\+-[0-9.e-]+(,[0-9.]+\+-[0-9.e-]+)*	' s.session
check "the table has a C_f column" grep -q 'C_f' d1.txt
c1=$(grep -E '^ *>?1 ' d1.txt | head -n 1)
echo "# component 1: $c1"
check "component 1 flagged partial" sh -c "echo '$c1' | grep -q 'partial'"
cf=$(echo "$c1" | sed -n 's/.* \(0\.[0-9][0-9]\)+-.*/\1/p')
check "component 1's C_f $cf is near the true 0.6" awk -v x="$cf" 'BEGIN { exit !(x > 0.55 && x < 0.65) }'

# reopen: the same table, no refit warning
run s.session d2.txt redraw
check "reopened: resumed from the session" grep -q 'resumed from the session' d2.txt
check "reopened: the same component table" sh -c "grep -E '^ *>?[0-9] ' d1.txt >a; grep -E '^ *>?[0-9] ' d2.txt >b; cmp -s a b"
check "reopened: no refit warning" sh -c "! grep -q 'refit differs' d2.txt"
check "log shows the action" sh -c "'$DT' log s.session | grep -q 'partial covering on'"
"$DT" export s.session -o ex.csv 2>/dev/null
check "export: cf, cf_err, cf_flag columns" sh -c "head -n 1 ex.csv | grep -q ',cf,cf_err,cf_flag$'"
check "export: component 1 partial" sh -c "sed -n 2p ex.csv | grep -q ',partial$'"

# off again: the fields go, the column goes
run s.session d3.txt covering
last=$(tail -n 1 s.session)
check "off: act=covering cover=0" sh -c "echo '$last' | grep -q 'act=covering	cover=0'"
check "off: no covering fields in the state" sh -c "echo '$last' | grep -Evq '	(covering|cf)='"
check "off: no C_f column" sh -c "! grep -q 'C_f' d3.txt"
"$DT" export s.session -o ex2.csv 2>/dev/null
check "off: export leaves cf empty" sh -c "sed -n 2p ex2.csv | grep -q ',,,\$'"
# on, undone, redone: the restored state has covering and its factors
run s.session d4.txt covering undo
check "undo: covering off again" sh -c "! grep -q 'C_f' d4.txt"
check "undo: recorded as a restore without covering" sh -c "tail -n 1 s.session | grep 'act=restore' | grep -Evq '	(covering|cf)='"
run s.session d4.txt redo redraw
run s.session d4.txt covering undo redo
check "redo: C_f column back" grep -q 'C_f' d4.txt
# (component 1 only: the others are degenerate, and refit from other starts)
check "redo: component 1 and its factor as before" sh -c "grep -E '^ *>?1 ' d4.txt >c; grep -E '^ *>?1 ' d1.txt >a1; cmp -s a1 c"
check "redo: recorded as a restore with covering" sh -c "tail -n 1 s.session | grep 'act=restore' | grep -q '	covering=1	'"

# a first look with covering on: the option, and a list line
run s2.session d5.txt redraw
check "without --covering: no C_f column" sh -c "! grep -q 'C_f' d5.txt"
EXTRA=--covering
run s3.session d6.txt "verdict-detected"
check "inspect --covering: C_f column on a first look" grep -q 'C_f' d6.txt
check "inspect --covering: recorded with covering=1" grep -q '	covering=1	' s3.session
printf 'part.txt cover=1\n' >cov.list
printf 'redraw\n' >keys.txt
"$DT" inspect --fwhm 2 --session s4.session --replay-keys keys.txt --screen-dump d7.txt --size 110x34 --list cov.list \
  >/dev/null 2>&1
check "list cover=1: C_f column on a first look" grep -q 'C_f' d7.txt
finish
