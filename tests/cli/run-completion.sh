#!/bin/bash
# The bash completion: a few completions by hand, and every option of each
# command's --help (and the global ones) offered, so that the script cannot
# drift from the program.
set -u
SRC=${TWF_SRCDIR:-$(cd "$(dirname "$0")/../.." && pwd)}
BUILD=${TWF_BUILDDIR:-$SRC}
TWISTFIT="$BUILD/src/twistfit"
# shellcheck source=/dev/null
. "$SRC/src/cli/completion/twistfit"
fail=0

# complete the words given (the last one is the word being completed)
comp() {
  COMP_WORDS=("$@")
  COMP_CWORD=$((${#COMP_WORDS[@]} - 1))
  COMPREPLY=()
  _twistfit
  echo "${COMPREPLY[*]}"
}
expect() { # want words...
  local want=$1 got
  shift
  got=$(comp "$@")
  if [ "$got" != "$want" ]; then
    echo "FAIL: completing '$*': got '$got', expected '$want'"
    fail=1
  fi
}
expect "calibrate" twistfit cal
expect "fk" twistfit -q f
expect "--verbose --version" twistfit --ver
expect "--write-anyway" twistfit calibrate --wr
expect "remaster" twistfit calibrate --fit rem
expect "base,targets,tilts" twistfit calibrate --fit base,targets,ti
expect "huber" twistfit calibrate --robust h
expect "mm m" twistfit fk --length-unit m
expect "mrad" twistfit verify --angle-unit mr
expect "--tol-rms" twistfit verify --tol-r
expect "verify" twistfit help ve
expect "sheet sheet-csv" twistfit export m.ini --as sh
expect "zyx zyz" twistfit export m.ini --as sheet --euler z

# every option of --help is offered
check_all() { # command-or-empty
  local c=$1 o offered
  if [ -n "$c" ]; then
    offered=" $(comp twistfit "$c" -) "
    help=$("$TWISTFIT" "$c" --help)
  else
    offered=" $(comp twistfit -) "
    help=$("$TWISTFIT" --help)
  fi
  for o in $(printf '%s\n' "$help" | sed -n '/^Options:/,$p' |
             grep -o -E '(^|[^-a-zA-Z0-9])(--[a-z][a-z0-9-]*|-[a-zA-Z])' | grep -o -E -- '--[a-z0-9-]+|-[a-zA-Z]' | sort -u); do
    case $offered in
      *" $o "*) ;;
      *) echo "FAIL: ${c:-global}: $o is in --help but not completed"; fail=1 ;;
    esac
  done
}
check_all ""
commands=$("$TWISTFIT" --help | sed -n '/^Commands:/,/^$/p' | awk 'NR > 1 && $1 != "help" {print $1}')
[ -n "$commands" ] || { echo "FAIL: no commands in --help"; exit 1; }
for c in $commands; do check_all "$c"; done
[ $fail = 0 ] && echo "PASS: completion"
exit $fail
