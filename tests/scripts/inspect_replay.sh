# The inspector run headless (--replay-keys): bad input inside the queue,
# the session's refusals (read-only, second writer, disk full), options and
# target lists that are wrong, and a few commands end to end.  Keys are
# given by action name, as `doubletty keys` prints them.
. "$(dirname "$0")/../lib.sh"

export LANG=C.UTF-8 LC_ALL=C.UTF-8
"$DT" demo "$TMP/demo" >/dev/null 2>&1 || { bad "demo survey written"; finish; exit 1; }
D="$TMP/demo"
S="$TMP/s.session"

# run KEYS... : replay the actions (one per argument) and dump the screen
run() {
  sess=$1
  shift
  : >"$TMP/keys"
  for k in "$@"; do printf '%s\n' "$k" >>"$TMP/keys"; done
  "$DT" inspect --list "$TMP/q.list" --session "$sess" --replay-keys "$TMP/keys" \
    --screen-dump "$TMP/screen" >"$TMP/out" 2>"$TMP/err"
}
on_screen() { grep -Fq -- "$1" "$TMP/screen"; }

# ---- a file that cannot be read: shown, and the queue goes on
head -c 3000 /dev/urandom >"$TMP/broken.fits"
cat >"$TMP/q.list" <<EOF
# two demo spectra with a broken file between them
demo/vpq01.fits  vsys=512 R=3690 name=FIRST
broken.fits      vsys=512 R=3000 name=BROKEN
demo/vpq03.fits  vsys=512 R=3460 name=THIRD
EOF
run "$S" verdict-detected
check "verdict on the first moves to the broken file (exit $?)" on_screen " 2/3  judged 1"
check "the read error is on the status line" grep -q '^cannot read .*broken.fits' "$TMP/screen"
check "the screen says there is no data" on_screen "cannot read this spectrum"
run "$S"
check "resume opens on the broken file (first without a verdict)" on_screen " 2/3  judged 1"
run "$S" verdict-detected
check "a broken file cannot be 'detected'" on_screen "only 'unusable'"
check "... and stays in place" on_screen " 2/3  judged 1"
run "$S" verdict-unusable
check "marked unusable, the queue goes on to 3/3" on_screen " 3/3  judged 2"
check "the session records the unusable verdict" \
  grep -q 'file=[^	]*broken.fits#NaI	.*act=verdict	verdict=unusable' "$S"
run "$S" previous-spectrum previous-spectrum next-unjudged
check "next-unjudged finds the third" on_screen " 3/3  judged 2"

# ---- commands through the session: component, note, window, doublet
run "$S" add-component "type " edit-note "type faint; check red arm" Enter
check "note typed in the editor is saved" on_screen "note faint; check red arm"
check "note recorded" grep -q 'act=note	note=faint; check red arm' "$S"
run "$S" cursor-left-fast window-mark cursor-left-fast cursor-left-fast window-mark
check "a continuum window marked with two presses" on_screen "continuum window"
check "the fit line counts it" on_screen "1 window"
check "window recorded in Angstrom" grep -q 'act=window-add	lo=5[89][0-9][0-9]\.[0-9]*	hi=' "$S"
# (a resumed inspector puts the cursor on the selected component, which the
# refit may have moved: mark a window again and remove it within one run)
run "$S" cursor-left-fast window-mark cursor-left-fast cursor-left-fast window-mark cursor-right-fast window-unmark
check "window under the cursor removed" on_screen "continuum window removed"
run "$S" continuum-order-down continuum-order-down continuum-order-down
check "continuum fixed at 1 at order -1" on_screen "continuum fixed at 1"
n0=$(wc -l <"$S")
run "$S" nudge-logn-up-coarse
check "a nudged log N is shown held" on_screen "log N = "
check "... and says how to release it" grep -q "held.*(o releases)" "$TMP/screen"
check "a nudge holds its parameter, then moves it: two records" test "$(wc -l <"$S")" -eq $((n0 + 2))
check "... the hold first" sh -c "sed -n '$((n0 + 1))p' '$S' | grep -q 'act=freeze'"
check "... then the new value" sh -c "sed -n '$((n0 + 2))p' '$S' | grep -q 'act=comp-set'"
run "$S" hold-logn nudge-logn-up-coarse undo
check "one undo takes back hold and nudge together: release, hold, nudge, one restore" \
  test "$(wc -l <"$S")" -eq $((n0 + 6))
check "... and the undone log N is free again" sh -c "tail -n 1 '$S' | grep -q 'act=restore' && ! tail -n 1 '$S' | grep -q 'frozen='"

# a wide spectrum covers Ca II too: switch the doublet
cat >"$TMP/q.list" <<EOF
demo/vpq09.fits vsys=512 R=4330 name=WIDE
EOF
run "$TMP/w.session" switch-doublet
check "switch-doublet goes to Ca II" on_screen "| CaII  vsys +512"
check "the doublet change is recorded" grep -q 'act=doublet	doublet=CaII' "$TMP/w.session"

# ---- a file changed since it was judged is flagged
cp "$D/vpq04.txt" "$TMP/changing.txt"
cat >"$TMP/q.list" <<EOF
changing.txt vsys=512 R=2640 name=CHANGING
EOF
run "$TMP/c.session" verdict-not-detected
check "judged: 1/1 judged 1" on_screen " 1/1  judged 1"
run "$TMP/c.session"
check "unchanged file: no flag" sh -c "! grep -q 'FILE CHANGED' '$TMP/screen'"
echo "# recalibrated later" >>"$TMP/changing.txt"
run "$TMP/c.session"
check "changed file flagged in the title" on_screen "FILE CHANGED SINCE JUDGED"
check "... and explained on the status line" on_screen "the file has changed since it was judged"
run "$TMP/c.session" verdict-unsure
check "the next record notes the earlier checksum" grep -q 'was=[0-9a-f]\{64\}.*act=verdict' "$TMP/c.session"

# ---- read-only: looks, refuses
cat >"$TMP/q.list" <<EOF
demo/vpq01.fits  vsys=512 R=3690 name=FIRST
EOF
n0=$(wc -l <"$S")
"$DT" inspect --list "$TMP/q.list" --session "$S" --read-only --replay-keys /dev/null >/dev/null 2>&1
printf 'add-component\nverdict-detected\n' >"$TMP/keys"
"$DT" inspect --list "$TMP/q.list" --session "$S" --read-only --replay-keys "$TMP/keys" \
  --screen-dump "$TMP/screen" >/dev/null 2>&1
check "read-only: judgements refused on screen" on_screen "read-only session"
check "read-only: title says so" on_screen "read-only"
check "read-only: nothing appended" test "$(wc -l <"$S")" -eq "$n0"
expect_fail "read-only needs an existing session" "missing.session" \
  "$DT" inspect --list "$TMP/q.list" --session "$TMP/missing.session" --read-only --replay-keys /dev/null

# ---- a second writer is refused while the first holds the session
mkfifo "$TMP/fifo"
"$DT" inspect --list "$TMP/q.list" --session "$S" --replay-keys "$TMP/fifo" >/dev/null 2>&1 &
first=$!
exec 3<>"$TMP/fifo" # read-write: never blocks; the first inspector waits for keys, holding the lock
sleep 0.3
expect_fail "a second writer is refused" "open for writing by another|only one writer" \
  "$DT" inspect --list "$TMP/q.list" --session "$S" --replay-keys /dev/null
"$DT" inspect --list "$TMP/q.list" --session "$S" --read-only --replay-keys /dev/null >/dev/null 2>&1
check "a reader may look meanwhile" test $? -eq 0
echo quit >&3
exec 3>&-
wait "$first"
check "the first inspector quits normally" test $? -eq 0

# ---- the session file cannot grow (file size limit): said at once, then refused
"$DT" inspect --list "$TMP/q.list" --session "$TMP/full.session" --replay-keys /dev/null >/dev/null 2>&1
size0=$(wc -c <"$TMP/full.session")
printf 'verdict-detected\nverdict-detected\n' >"$TMP/keys"
# no file may grow under the limit: the screen and stderr go out through pipes
mkfifo "$TMP/dump.fifo" "$TMP/err.fifo"
timeout 30 cat "$TMP/dump.fifo" >"$TMP/screen" &
c1=$!
timeout 30 cat "$TMP/err.fifo" >"$TMP/err" &
c2=$!
sh -c "ulimit -f 0; trap '' XFSZ; exec '$DT' inspect --list '$TMP/q.list' --session '$TMP/full.session' \
  --replay-keys '$TMP/keys' --screen-dump '$TMP/dump.fifo' >/dev/null 2>'$TMP/err.fifo'"
rc=$?
wait $c1 $c2
check "a failed append ends with status 1 ($rc)" test $rc -eq 1
check "the screen says the session failed" on_screen "SESSION FILE FAILED"
check "the title says so" on_screen "SESSION NOT WRITABLE"
check "the verdict was not taken: still 1/1, none judged" on_screen " 1/1  judged 0"
check "stderr names the session file" grep -q "full.session" "$TMP/err"
check "nothing half-written in the session" test "$(wc -c <"$TMP/full.session")" -eq "$size0"

# ---- two people disagree: a queue of the disagreements
cat >"$TMP/q.list" <<EOF
demo/vpq01.fits vsys=512 R=3690 name=ONE
demo/vpq03.fits vsys=512 R=3460 name=TWO
demo/vpq07.fits vsys=512 R=3770 name=THREE
EOF
printf 'verdict-detected\nverdict-not-detected\nverdict-detected\n' >"$TMP/keys"
"$DT" inspect --list "$TMP/q.list" --session "$TMP/alice" --user alice --replay-keys "$TMP/keys" >/dev/null 2>&1
printf 'verdict-detected\nverdict-detected\nverdict-detected\n' >"$TMP/keys"
"$DT" inspect --list "$TMP/q.list" --session "$TMP/bob" --user bob --replay-keys "$TMP/keys" >/dev/null 2>&1
"$DT" inspect --only-disagreements "$TMP/alice" "$TMP/bob" --session "$TMP/third" \
  --replay-keys /dev/null --screen-dump "$TMP/screen" >/dev/null 2>"$TMP/err"
check "only the disagreement is queued: 1/1" on_screen " 1/1  judged 0"
check "... and it is the second spectrum" on_screen "vpq03.fits"

# ---- one narrow continuum window: the data stay in view on the automatic continuum
cat >"$TMP/q.list" <<EOF
demo/vpq01.fits vsys=512 R=3690 name=ONE
EOF
run "$TMP/win.session" window-mark cursor-right window-mark
check "a window too narrow for a continuum says so" on_screen "the automatic one is shown"
check "... the fit line says which continuum is drawn" on_screen "auto (1 window: too few pixels)"
check "... and the measurements stay on screen" grep -q "NaI 5891  W " "$TMP/screen"
check "... the window is recorded all the same" grep -q 'act=window-add' "$TMP/win.session"
run "$TMP/win.session"
check "the session file is named at the start" on_screen "session file: $TMP/win.session"

# ---- the end of the queue: a summary, and no second record for a repeated key
cat >"$TMP/q.list" <<EOF
demo/vpq01.fits vsys=512 R=3690 name=ONE
demo/vpq03.fits vsys=512 R=3460 name=TWO
demo/vpq07.fits vsys=512 R=3770 name=THREE
EOF
run "$TMP/end.session" next-spectrum next-spectrum verdict-detected verdict-detected verdict-unsure \
  verdict-not-detected
check "the last verdict shows the end-of-queue summary" on_screen "queue finished: 1 of 3 spectra judged"
check "... with the unjudged counted" grep -Eq "unjudged +2" "$TMP/screen"
check "... and the key that jumps to them" on_screen "J: to the unjudged"
run "$TMP/end2.session" verdict-detected
check "the status line names the target judged" on_screen "saved: #1 detected (ONE)"
check "verdict keys at the end record nothing more: one record" \
  test "$(grep -c 'act=verdict' "$TMP/end.session")" -eq 1
run "$TMP/end.session" verdict-unsure next-spectrum verdict-unsure next-unjudged
check "from the summary the jump goes to an unjudged spectrum" on_screen " 2/3  judged 2"
run "$TMP/end.session" goto-spectrum "type THREE" Enter
check "go to a spectrum by name" on_screen " 3/3  judged 2"
run "$TMP/end.session" goto-spectrum "type 3" Enter previous-unjudged
check "go to a spectrum by number, then back to the previous unjudged" on_screen " 2/3  judged 2"
run "$TMP/end.session" goto-spectrum "type 9" Enter
check "a number outside the queue is refused with the range" on_screen "the queue has 1 to 3"
run "$TMP/end.session" cursor-to-velocity "type -123.5" Enter
check "cursor to a typed velocity" on_screen "cursor at -123.5 km/s"
run "$TMP/end.session" cursor-to-velocity "type 5000" Enter
# the window covers the systems: the Milky Way's -150 km/s (observer) seen
# from vsys 512 is -660.87 km/s (astropy u.doppler_optical, test_systems.c),
# less the margin of 2 FWHM = 2 c / 3460 = 173.29 km/s (TWO, the spectrum
# shown): -834.2
check "a velocity outside the fit window is refused in km/s" on_screen "outside the fit window (-834 to +600 km/s)"

# ---- plain `doubletty FILE` opens the inspector; ASCII without UTF-8
printf 'cursor-right\n' >"$TMP/keys"
(cd "$D" && LANG=C LC_ALL=C "$DT" vpq01.fits --session "$TMP/plain.session" --resolution 3690 --vsys 512 \
  --replay-keys "$TMP/keys" --screen-dump "$TMP/screen" >/dev/null 2>&1)
check "doubletty FILE opens the inspector" on_screen " 1/1  judged 0"
check "C locale: plain ASCII screen" sh -c "! LC_ALL=C grep -q '[^ -~]' '$TMP/screen'"
check "ASCII plot glyphs" grep -q '|.*\*' "$TMP/screen"
"$DT" inspect "$D/vpq01.fits" --ascii --session "$TMP/plain.session" --replay-keys /dev/null \
  --screen-dump "$TMP/screen" >/dev/null 2>&1
check "--ascii in a UTF-8 locale: plain ASCII" sh -c "! LC_ALL=C grep -q '[^ -~]' '$TMP/screen'"
"$DT" inspect "$D/vpq01.fits" --session "$TMP/plain.session" --replay-keys /dev/null --size 80x24 \
  --screen-dump "$TMP/screen" >/dev/null 2>&1
check "80x24 screen: 24 rows" test "$(wc -l <"$TMP/screen")" -eq 24
check "80x24 screen: the table is there" on_screen "v [km/s]"
"$DT" inspect "$D/vpq01.fits" --session "$TMP/plain.session" --replay-keys /dev/null --size 79x24 \
  --screen-dump "$TMP/screen" >/dev/null 2>&1
check "79x24: too small" on_screen "terminal too small: 79x24"

# ---- wrong options and lists: one clear message, nonzero exit, no screen
printf 'demo/vpq01.fits vsys=512\nbad.fits colour=blue\ndemo/vpq03.fits R=-3\n\ndemo/vpq07.fits row=0\n' >"$TMP/bad.list"
expect_fail "bad list: line 2 named" "bad.list: line 2: unknown key 'colour'" \
  "$DT" inspect --list "$TMP/bad.list" --replay-keys /dev/null --session "$TMP/x.session"
expect_fail "bad list: line 3 named" "bad.list: line 3: R must be" \
  "$DT" inspect --list "$TMP/bad.list" --replay-keys /dev/null --session "$TMP/x.session"
expect_fail "bad list: line 5 named" "bad.list: line 5: row must be" \
  "$DT" inspect --list "$TMP/bad.list" --replay-keys /dev/null --session "$TMP/x.session"
check "bad list: exit status 2" sh -c "'$DT' inspect --list '$TMP/bad.list' --replay-keys /dev/null --session '$TMP/x.session' 2>/dev/null; [ \$? -eq 2 ]"
check "bad list: no session file made" test ! -e "$TMP/x.session"
printf 'demo/vpq01.fits doublet=FeII\n' >"$TMP/bad2.list"
expect_fail "unknown doublet in a list" "line 1: unknown doublet 'FeII'" \
  "$DT" inspect --list "$TMP/bad2.list" --replay-keys /dev/null --session "$TMP/x.session"
expect_fail "missing list file" "nolist: cannot open" "$DT" inspect --list "$TMP/nolist" --replay-keys /dev/null
expect_fail "no spectra at all" "no spectra" "$DT" inspect --session "$TMP/x.session"
expect_fail "negative resolution" "resolution must be a positive" "$DT" inspect --resolution -3000 "$D/vpq01.fits"
expect_fail "R and FWHM together" "not both" "$DT" inspect --resolution 3000 --fwhm 80 "$D/vpq01.fits"
expect_fail "unknown doublet option" "unknown doublet 'XyZ'" "$DT" inspect --doublet XyZ "$D/vpq01.fits"
expect_fail "unknown option" "unknown option '--frobnicate'" "$DT" inspect --frobnicate "$D/vpq01.fits"
expect_fail "bad --size" "WIDTHxHEIGHT" "$DT" inspect --size 100 --replay-keys /dev/null "$D/vpq01.fits"
expect_fail "--bench without --replay-keys" "go with --replay-keys" "$DT" inspect --bench "$D/vpq01.fits"
printf 'add-component\nfly-to-the-moon\n' >"$TMP/keys"
expect_fail "unknown action in a key file" "line 2: 'fly-to-the-moon' is neither" \
  "$DT" inspect "$D/vpq01.fits" --session "$TMP/y.session" --replay-keys "$TMP/keys"
# ---- UTF-8: the key file types code points, the editor steps over whole ones
printf 'demo/vpq01.fits  vsys=512 R=3690 name=FIRST\n' >"$TMP/q.list"
# "N€a σ 😀x"; Left, Backspace drops 😀; Left, Left, Backspace drops the blank before σ
printf 'edit-note\ntype N\342\202\254a \317\203 \360\237\230\200x\nLeft\nBackspace\nLeft\nLeft\nBackspace\nEnter\n' >"$TMP/keys"
"$DT" inspect --list "$TMP/q.list" --session "$TMP/u.session" --replay-keys "$TMP/keys" \
  --screen-dump "$TMP/screen" >/dev/null 2>&1
check "a UTF-8 note edited over 2-, 3- and 4-byte characters is saved whole" \
  grep -q "act=note	note=N$(printf '\342\202\254')a$(printf '\317\203') x" "$TMP/u.session"
"$DT" log "$TMP/u.session" --action note >"$TMP/log.out" 2>&1
check "log shows the UTF-8 note unescaped" grep -q "\"N$(printf '\342\202\254')a$(printf '\317\203') x\"" "$TMP/log.out"
printf 'edit-note\ntype a\300\257b\nEnter\n' >"$TMP/keys"
expect_fail "a key file typing bytes that are not UTF-8 is refused" "line 2: the text to type is not UTF-8" \
  "$DT" inspect --list "$TMP/q.list" --session "$TMP/u.session" --replay-keys "$TMP/keys"
printf 'edit-note\ntype a\302\233b\nEnter\n' >"$TMP/keys"
"$DT" inspect --list "$TMP/q.list" --session "$TMP/u.session" --replay-keys "$TMP/keys" >/dev/null 2>&1
check "the note editor does not take a C1 control (U+009B)" sh -c "tail -n 1 '$TMP/u.session' | grep -q 'act=note	note=[^	]* xab	'"

# ---- the data are drawn when the analysis of the state fails: a spectrum
# ending inside NaI 5897's fit window (not covered), and one sampled so
# coarsely that the window holds fewer than 2 pixels
awk 'BEGIN { for (w = 5850; w <= 5895; w += 0.1) {
  d = (w - 5891.58) / 0.4; printf "%.3f %.5f 0.02\n", w, 1 - 0.6 * exp(-0.5 * d * d) + 0.01 * sin(7 * w) } }' \
  >"$TMP/edge.txt"
awk 'BEGIN { for (w = 5800; w <= 6000; w += 25) printf "%.3f %.5f 0.02\n", w, 1 + 0.01 * sin(w) }' >"$TMP/coarse.txt"
printf 'edge.txt vsys=0 R=20000 name=EDGE\ncoarse.txt vsys=0 R=20000 name=COARSE\n' >"$TMP/q.list"
# rows of panel k (1 or 2) of an 80x24 ASCII screen holding flux ('*') or error (',') glyphs
panel_rows() {
  awk -v k="$1" -v g="$2" 'substr($0, 7, 1) == "|" { if (substr($0, 1, 5) ~ /[0-9][0-9][0-9][0-9]/) p++;
    if (p == k && index(substr($0, 8), g)) n++ } END { print n + 0 }' "$TMP/screen"
}
raw() {
  "$DT" inspect --list "$TMP/q.list" --session "$TMP/raw.session" --ascii --size 80x24 \
    --replay-keys "$TMP/keys" --screen-dump "$TMP/screen" >/dev/null 2>&1
}
printf 'cursor-right\n' >"$TMP/keys"
raw
check "window not covered: the upper panel still shows the flux" test "$(panel_rows 1 '*')" -ge 3
check "... and the lower panel too, up to the spectrum's end" test "$(panel_rows 2 '*')" -ge 3
check "... with the 1-sigma error" test "$(panel_rows 1 ',')" -ge 1
check "... the panel says it shows the data only" on_screen "data only: no analysis"
check "... the reason is on the status line" grep -q "^NaI 5897: window .* is not covered" "$TMP/screen"
printf 'edit-note\nEsc\n' >"$TMP/keys"
raw
check "... and stays there after another message" sh -c "grep -q '^nothing changed - NaI 5897: window' '$TMP/screen'"
check "... the velocity axis is drawn" on_screen "cursor +0.0 km/s"
printf 'next-spectrum\n' >"$TMP/keys"
raw
check "too few pixels in the window: the flux is drawn in both panels" \
  test "$(panel_rows 1 '*')" -ge 1 -a "$(panel_rows 2 '*')" -ge 1
check "... with the reason on the status line" grep -q "fewer than 2 pixels" "$TMP/screen"

# a file name holding a C1 control (U+009B, a terminal's CSI) and a bare
# continuation byte: log prints '?' for each byte, never the bytes themselves
cp "$D/vpq04.txt" "$TMP/c1$(printf '\302\233')x$(printf '\200')y.txt"
printf 'c1%sx%sy.txt vsys=512 R=2640 name=ODD\n' "$(printf '\302\233')" "$(printf '\200')" >"$TMP/q.list"
printf 'verdict-unsure\n' >"$TMP/keys"
"$DT" inspect --list "$TMP/q.list" --session "$TMP/c1.session" --replay-keys "$TMP/keys" >/dev/null 2>&1
"$DT" log "$TMP/c1.session" >"$TMP/log.out" 2>&1
check "log: the odd file name is shown with '?' for each bad byte" grep -q 'c1??x?y\.txt' "$TMP/log.out"
check "log: no C1 control or stray byte reaches the output" sh -c "! LC_ALL=C grep -q '$(printf '\302\233')\|$(printf '\200')' '$TMP/log.out'"

finish
