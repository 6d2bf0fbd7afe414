#!/bin/sh
# Linked species in the inspector, as a person uses it (tmux, keys by action
# name from `doubletty keys`): demo sightline VPQ16 has Na I D and Ca II H & K
# from the same gas (truth.csv: a Milky-Way cloud at v_rel -537.94 km/s with
# log N(Ca II) 12.936, a pair cloud at -41.37 km/s with 12.293; the demo's
# invented values).  The link key opens a chooser listing Ca II; choosing it
# fits both jointly and stacks a Ca II panel under the Na I panels on the same
# velocity axis, the components marked in the same columns; the b-rule key
# cycles same -> thermal -> free; a verdict ends the queue.  The session
# records the link, the rule and every species' log N; log and export show
# them, one export row per species and component.
. "$(dirname "$0")/../lib.sh"
. "$(dirname "$0")/fault_tmux.inc"

if [ "$HAVE_TMUX" -ne 1 ]; then
  missing tmux "inspector linked species"
  finish
  exit $?
fi
"$DT" demo "$TMP/demo" >/dev/null 2>&1 || { bad "demo survey written"; finish; exit 1; }
grep -E '^vpq16.fits.*doublet=NaI' "$TMP/demo/targets.list" >"$TMP/demo/one.list"
check "a list of one demo sightline with Na I and Ca II" test "$(wc -l <"$TMP/demo/one.list")" -eq 1
tmux_start linked || { bad "tmux starts"; finish; exit 1; }
S=$TMP/a.session
run_in_pane "clear; cd '$TMP' && '$DT' inspect --list demo/one.list --session '$S' --user ana; echo DT-EXIT=\$?"
check "the inspector opens on VPQ16" wait_for_text "VPQ16" 100
act link-species
check "the link key opens the chooser: Ca II, not linked" wait_for "1  \[ \] CaII +3935 3970" 20
$T send-keys -t dt -l 1 # the chooser's first entry
check "choosing Ca II links it and fits jointly" wait_for_text "CaII linked: fitted jointly" 100
check "a Ca II panel is stacked on the velocity axis" wait_for_text "CaII 3934" 10
check "the table gives Ca II's log N per component" wait_for "CaII +logN +1:[0-9.]+.* 2:[0-9.]+" 10
# the components are marked in the same columns in the Na I and the Ca II panel
screen >"$TMP/scr"
# the columns of the component numbers in a panel's top row: the first such
# row is Na I's, the one ending in the "CaII 3934" label Ca II's
cols() {
  "$PY" -c '
import sys
rows = []
for line in open(sys.argv[2], encoding="utf-8"):
    if "\u2502" not in line:
        continue
    body = line.split("\u2502", 1)[1]
    marks = [i for i, c in enumerate(body) if c in "123456789"]
    if len(marks) >= 2 and (sys.argv[1] != "CaII" or "CaII 3934" in body):
        rows.append(",".join(str(i) for i in marks[:2]))
print(rows[0] if rows and sys.argv[1] == "NaI" else rows[-1] if rows else "")
' "$1" "$TMP/scr"
}
if need_py "component columns"; then
  na=$(cols NaI)
  ca=$(cols CaII)
  check "the components sit in the same columns in Na I and Ca II ($na / $ca)" test -n "$na" -a "$na" = "$ca"
fi
act b-rule
check "b rule: thermal" wait_for_text "b of linked species: thermal" 100
check "the table has the thermal row (T and b_turb)" wait_for "^ T/bt " 10
act b-rule
check "b rule: free" wait_for_text "b of linked species: free" 100
check "... b per species in the table" wait_for "CaII +logN +1:[0-9.]+(\+-|±)[0-9.]+ b[0-9.]+" 10
act verdict-detected
check "a verdict ends the queue" wait_for_text "queue finished" 50
act quit
check "quit: exit 0" wait_exit 0 50

check "the session records the link" grep -q "act=link	doublet=CaII	link=1	=>" "$S"
check "... the b rules" sh -c "grep -q 'act=b-tie	rule=thermal	=>' '$S' && grep -q 'act=b-tie	rule=free	=>' '$S'"
check "... the joint fit's Ca II values in the state" grep -q "	linked=CaII	.*	joint=1	sp1=CaII:" "$S"
check "the session replays without warnings" sh -c "'$DT' log '$S' >'$TMP/log' 2>'$TMP/log.err' && ! test -s '$TMP/log.err'"
check "log names the link and gives each species' log N" \
  grep -Eq "  link  linked CaII  => .*; linked CaII \(b same\): NaI logN [0-9.]+ [0-9.]+ \| CaII logN [0-9.]+ [0-9.]+" "$TMP/log"

"$DT" log --verify "$S" >"$TMP/verify" 2>&1
vrc=$?
check "log --verify: the joint fit is reproduced by a joint refit (exit $vrc)" \
  sh -c "test $vrc -eq 0 && grep -Eq '^reproduced +demo/vpq16.fits#NaI .*joint fit\)' '$TMP/verify'"

"$DT" export "$S" -o "$TMP/x.csv" 2>"$TMP/x.err"
check "export: exit 0" test $? -eq 0
col() { awk -F, -v d="$1" -v k="$2" -v c="$3" 'NR == 1 { for (i = 1; i <= NF; i++) h[$i] = i; next }
  $h["doublet"] == d && $h["component"] == k { print $h[c] }' "$TMP/x.csv"; }
nna=$(awk -F, 'NR == 1 { for (i = 1; i <= NF; i++) h[$i] = i; next } $h["doublet"] == "NaI"' "$TMP/x.csv" | wc -l)
nca=$(awk -F, 'NR == 1 { for (i = 1; i <= NF; i++) h[$i] = i; next } $h["doublet"] == "CaII"' "$TMP/x.csv" | wc -l)
check "export: a row per species and component ($nna Na I, $nca Ca II)" test "$nna" -ge 2 -a "$nna" = "$nca"
check "export: the species share the velocity ($(col NaI 1 v_kms) / $(col CaII 1 v_kms))" \
  test -n "$(col NaI 1 v_kms)" -a "$(col NaI 1 v_kms)" = "$(col CaII 1 v_kms)"
check "export: joint_species and b_tie ($(col CaII 1 joint_species), $(col CaII 1 b_tie))" \
  test "$(col CaII 1 joint_species)" = "NaI;CaII" -a "$(col CaII 1 b_tie)" = free
# the Ca II column densities against the injected ones (truth.csv, above):
# the component nearest each cloud within 0.35 dex (S/N 58 at R 2240)
near() { awk -F, -v v="$1" 'NR == 1 { for (i = 1; i <= NF; i++) h[$i] = i; next }
  $h["doublet"] == "CaII" { d = $h["v_kms"] - v; if (d < 0) d = -d; if (best == "" || d < best) { best = d; n = $h["logN"] } }
  END { print n }' "$TMP/x.csv"; }
mw=$(near -537.94)
pr=$(near -41.37)
check "Ca II log N of the Milky-Way cloud: $mw (injected 12.936)" \
  awk -v x="$mw" 'BEGIN { exit !(x != "" && x - 12.936 < 0.35 && 12.936 - x < 0.35) }'
check "Ca II log N of the pair cloud: $pr (injected 12.293)" \
  awk -v x="$pr" 'BEGIN { exit !(x != "" && x - 12.293 < 0.35 && 12.293 - x < 0.35) }'

# a second person, headless (--replay-keys): links Ca II through the chooser
# under the rule "same" and calls it unsure; compare shows both sides' links
"$DT" inspect --list "$TMP/demo/one.list" --session "$TMP/b.session" --user bo --replay-keys /dev/stdin \
  >/dev/null 2>&1 <<'KEYS'
link-species
1
verdict-unsure
KEYS
check "replayed keys record the link" grep -q "act=link	doublet=CaII	link=1" "$TMP/b.session"
"$DT" compare "$S" "$TMP/b.session" >"$TMP/cmp" 2>&1
check "compare: one disagreement (detected vs unsure)" grep -q "^disagreements: 1" "$TMP/cmp"
check "compare: each side's linked species with every species' log N" \
  sh -c "grep -Eq '^    1: linked CaII \(b free\): NaI logN [0-9.]+ [0-9.]+ \| CaII logN' '$TMP/cmp' &&
         grep -Eq '^    2: linked CaII \(b same\): NaI logN [0-9.]+ [0-9.]+ \| CaII logN' '$TMP/cmp'"

# a list line naming two doublets opens with the second linked and fitted
# jointly; its session key is the first doublet's
sed 's/doublet=NaI/doublet=NaI,CaII/' "$TMP/demo/one.list" >"$TMP/demo/two.list"
"$DT" inspect --list "$TMP/demo/two.list" --session "$TMP/c.session" --user cy --replay-keys /dev/stdin \
  --screen-dump "$TMP/c.screen" >/dev/null 2>&1 <<'KEYS'
verdict-detected
KEYS
check "doublet=NaI,CaII: vetted as Na I with Ca II linked, fitted jointly" \
  grep -q "file=demo/vpq16.fits#NaI	.*	linked=CaII	.*	joint=1	sp1=CaII:" "$TMP/c.session"
check "... and shown with a Ca II panel" grep -q "CaII 3934" "$TMP/c.screen"
finish
