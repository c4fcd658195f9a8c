#!/bin/sh
# Run the examples of twistfit(1) as written (in a scratch copy of the
# samples), so that the man page cannot drift from the program. An example
# passes with exit status 0, or 1 where it demonstrates a rejected
# acceptance test.
set -u
SRC=${SRC:-$(cd "$(dirname "$0")/../.." && pwd)}
dir=$(mktemp -d)
trap 'rm -rf "$dir"' EXIT
mkdir "$dir/samples"
cp "$SRC"/samples/*.ini "$SRC"/samples/*.csv "$dir/samples/"
cd "$dir" || exit 1
# the example blocks: lines between .nf and .fi after .SH EXAMPLES, with the
# roff escapes \- and \e undone and continuation lines joined
sed -n '/^\.SH EXAMPLES/,/^\.SH /p' "$SRC/man/twistfit.1" |
  sed -n '/^\.nf/,/^\.fi/p' | grep -v '^\.nf\|^\.fi' |
  sed -e 's/\\-/-/g' -e 's/\\e$/\\/' | sed -e :a -e '/\\$/N; s/\\\n//; ta' >examples.sh
n=0
fail=0
while IFS= read -r line; do
  cmd=$(printf '%s\n' "$line" | sed "s|^ *twistfit |$TWISTFIT |")
  n=$((n + 1))
  sh -c "$cmd" >/dev/null 2>err.txt
  s=$?
  if [ $s -gt 1 ]; then
    echo "man example $n failed with status $s: $line"
    cat err.txt
    fail=1
  fi
done <examples.sh
[ $n -ge 4 ] || { echo "only $n examples found"; exit 1; }
exit $fail
