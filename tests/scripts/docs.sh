# The documentation stays true to the program: every subcommand that
# `doubletty --help` lists has its section in the man page and its row in the
# README, and the README's two set-up commands name targets the Makefile has.
. "$(dirname "$0")/../lib.sh"
MAN=$ROOT/share/doubletty.1
cmds=$("$DT" --help | awk '/^commands:/{on=1; next} on && /^  [a-z]/ {print $1}')
check "--help lists commands" [ -n "$cmds" ]
for c in $cmds; do
  check "man page has a section for '$c'" grep -q "^\.SS doubletty $c" "$MAN"
  check "README mentions 'doubletty $c'" grep -q "doubletty $c" "$ROOT/README.md"
done
check "man page renders without warnings" sh -c "MANWIDTH=80 man --warnings -l '$MAN' 2>&1 >/dev/null | grep -v '^$' | { ! grep -q .; }"
# The README's set-up commands: each 'make X' target exists in the Makefile.
for t in $(grep -E '^    ' "$ROOT/README.md" | grep -Eo 'make [a-z]+' | awk '{print $2}' | sort -u); do
  check "README's 'make $t' is a Makefile target" grep -Eq "^(\.PHONY:.* $t( |$)|$t:)" "$ROOT/Makefile"
done
finish
