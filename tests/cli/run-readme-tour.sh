#!/bin/sh
# Runs the README's "A tour of the commands" block as printed, in a scratch
# folder beside a link to samples/, so that every command a new user copies
# works. A command whose comment says "exit status N" must exit with N; every
# other command must exit 0.
set -u
SRC=${TWF_SRCDIR:-$(cd "$(dirname "$0")/../.." && pwd)}
BUILD=${TWF_BUILDDIR:-$SRC}
BIN="$BUILD/src/twistfit"
work=$(mktemp -d)
trap 'rm -rf "$work"' EXIT
ln -s "$SRC/samples" "$work/samples"
# The block between "## A tour of the commands" and the closing fence, with
# continuation lines joined.
awk '/^## A tour of the commands/ {t=1; next}
     t && /^```sh/ {b=1; next}
     b && /^```/ {exit}
     b {print}' "$SRC/README.md" |
  awk '{ line = line $0 } /\\$/ { sub(/\\$/, "", line); next } { print line; line = "" }' > "$work/tour"
n=$(grep -c . "$work/tour")
[ "$n" -ge 5 ] || { echo "FAIL: found only $n tour commands in README.md"; exit 1; }
pass=0 fail=0
while IFS= read -r line; do
  # comment-only lines (a comment carried over) are not commands
  stripped=$(printf '%s\n' "$line" | sed 's/#.*//; s/[[:space:]]*$//')
  [ -n "$stripped" ] || continue
  expect=0
  case "$line" in *"exit status "[0-9]*) expect=$(printf '%s\n' "$line" | sed 's/.*exit status \([0-9]*\).*/\1/') ;; esac
  cmd=$(printf '%s\n' "$line" | sed 's/#.*//; s/^twistfit /"$BIN" /')
  (cd "$work" && eval "$cmd") >"$work/out" 2>&1
  st=$?
  if [ "$st" -eq "$expect" ]; then
    pass=$((pass + 1))
  else
    fail=$((fail + 1))
    echo "FAIL: exit $st, expected $expect: $line"
    tail -n 5 "$work/out"
  fi
done < "$work/tour"
echo "readme tour: $pass passed, $fail failed"
[ "$fail" -eq 0 ]
