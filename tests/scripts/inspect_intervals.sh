#!/bin/sh
# The inspector shows what the fit command reports about the errors of log N
# (tmux, as a person sees it): on demo sightlines, each component's log N
# with its asymmetric profile-likelihood interval ("12.82+2.45-0.40") where
# the `fit` CSV has logN_err_lo != logN_err_hi, and "ratio: saturated"
# beside the weaker line where the CSV's saturation flag of the target
# system is set.  The figures on screen must be the CSV's, rounded.
. "$(dirname "$0")/../lib.sh"
. "$(dirname "$0")/fault_tmux.inc"

if [ "$HAVE_TMUX" -ne 1 ]; then
  missing tmux "inspector intervals"
  finish
  exit $?
fi
"$DT" demo "$TMP/demo" >/dev/null 2>&1 || { bad "demo survey written"; finish; exit 1; }
"$DT" fit --list "$TMP/demo/targets.list" -o "$TMP/fit.csv" 2>/dev/null
check "fit over the demo: CSV written" test -s "$TMP/fit.csv"

# the first target component with an asymmetric interval, and the first
# saturated target system: name and the text the inspector should show
pick() {
  awk -F, -v want="$1" '/^#/ { next } !h++ { for (i = 1; i <= NF; i++) c[$i] = i; next }
    $c["system"] != "target" || $c["logN"] == "" { next }
    want == "asym" && $c["logN_flag"] == "" && $c["logN_err_lo"] != $c["logN_err_hi"] &&
      sprintf("%.2f", $c["logN_err_lo"]) != sprintf("%.2f", $c["logN_err_hi"]) {
      printf "%s %.2f+%.2f-%.2f\n", $c["name"], $c["logN"], $c["logN_err_hi"], $c["logN_err_lo"]; exit }
    want == "sat" && $c["saturated"] == "1" && $c["name"] != not { print $c["name"]; exit }' \
    not="${2:-}" "$TMP/fit.csv"
}
ASYM=$(pick asym)
SAT=$(pick sat "${ASYM%% *}")
check "the demo has an asymmetric interval ($ASYM) and a saturated system ($SAT)" \
  test -n "$ASYM" -a -n "$SAT"
NA=${ASYM%% *}
TXT=${ASYM#* }
{ grep -E "name=$NA( |\$)" "$TMP/demo/targets.list"; grep -E "name=$SAT( |\$)" "$TMP/demo/targets.list"; } \
  >"$TMP/demo/two.list"
check "a list of the two sightlines" test "$(wc -l <"$TMP/demo/two.list")" -eq 2

tmux_start intervals || { bad "tmux starts"; finish; exit 1; }
run_in_pane "clear; cd '$TMP' && '$DT' inspect --list demo/two.list --session '$TMP/a.session' --user ana; echo DT-EXIT=\$?"
check "the inspector opens on $NA" wait_for_text "$NA" 100
check "its component row shows the asymmetric interval $TXT" wait_for_text "$TXT" 50
act verdict-detected
check "the next sightline: $SAT" wait_for_text "$SAT" 50
check "... the saturation flag beside the weaker line" wait_for_text "ratio: saturated" 50
act quit
check "quit: exit 0" wait_exit 0 50
finish
