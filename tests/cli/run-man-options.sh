#!/bin/sh
# Every option of each command's --help is defined in its section of
# twistfit(1), and every option the section defines is in the --help; the
# same for the global options (twistfit --help against GLOBAL OPTIONS).
# The man page's definitions are the lines after .TP; roff's \- is undone.
set -u
SRC=${TWF_SRCDIR:-$(cd "$(dirname "$0")/../.." && pwd)}
BUILD=${TWF_BUILDDIR:-$SRC}
TWISTFIT="$BUILD/src/twistfit"
MAN="$SRC/man/twistfit.1"
dir=$(mktemp -d)
trap 'rm -rf "$dir"' EXIT
fail=0

# options named in text on stdin: --long and -x (a lone letter)
options() {
  grep -o -E '(^|[^-a-zA-Z0-9])(--[a-z][a-z0-9-]*|-[a-zA-Z])([^a-zA-Z-]|$)' |
    grep -o -E -- '--[a-z][a-z0-9-]*|-[a-zA-Z]' | sort -u
}

# the .TP definitions of a man section, from the line matching $1 to the
# next line matching $2
man_defs() {
  sed -n "/$1/,/$2/p" "$MAN" | sed -n '/^\.TP/{n;p;}' | sed 's/\\-/-/g' | options
}

compare() { # name help-file man-file
  for o in $(comm -23 "$2" "$3"); do
    echo "FAIL: $1: $o is in --help but not in twistfit(1)"
    fail=1
  done
  for o in $(comm -13 "$2" "$3"); do
    echo "FAIL: $1: $o is in twistfit(1) but not in --help"
    fail=1
  done
}

"$TWISTFIT" --help | sed -n '/^Options:/,$p' | options >"$dir/global.help"
man_defs '^\.SH GLOBAL OPTIONS' '^\.SH COMMANDS' >"$dir/global.man"
compare global "$dir/global.help" "$dir/global.man"
# every command that --help lists; a command with a page of its own
# (twistfit-COMMAND(1)) is checked against that page's OPTIONS
commands=$("$TWISTFIT" --help | sed -n '/^Commands:/,/^$/p' | awk 'NR > 1 && $1 != "help" {print $1}')
[ -n "$commands" ] || { echo "FAIL: no commands in --help"; exit 1; }
for c in $commands; do
  # the command's own options: its help less the global ones it repeats
  "$TWISTFIT" "$c" --help | sed -n '/^Options:/,$p' | options >"$dir/$c.all"
  comm -23 "$dir/$c.all" "$dir/global.help" >"$dir/$c.help"
  if [ -f "$SRC/man/twistfit-$c.1" ]; then
    MAN="$SRC/man/twistfit-$c.1" man_defs '^\.SH OPTIONS' '^\.SH ' >"$dir/$c.man0"
  else
    man_defs "^\.SS $c " '^\.S[SH] ' >"$dir/$c.man0"
  fi
  comm -23 "$dir/$c.man0" "$dir/global.help" >"$dir/$c.man"
  [ -s "$dir/$c.help" ] || { echo "FAIL: $c: no options found in --help"; fail=1; }
  compare "$c" "$dir/$c.help" "$dir/$c.man"
done
[ $fail = 0 ] && echo "PASS: every option of --help is in twistfit(1) and the reverse"
exit $fail
