#!/bin/sh
# Every bad input of the library's tables, run through the command line:
# the exit status documented in twistfit(1) (3 for an invalid file, 4 for
# one that cannot be read, 0 for the one model that loads with a warning),
# one "twistfit: error:" line naming the file, no output file created and an
# existing one left untouched.
set -u
SRC=${SRC:-$(cd "$(dirname "$0")/../.." && pwd)}
dir=$(mktemp -d)
trap 'rm -rf "$dir"' EXIT
fail=0
n=0
exit_of() {
  case "$1" in
    TWF_OK|OK) echo 0 ;;
    TWF_ERR_IO|IO) echo 4 ;;
    *) echo 3 ;;
  esac
}
check() { # expected-status label command...
  want=$1 label=$2
  shift 2
  printf 'keep\n' >"$dir/old.json"
  rm -f "$dir/new.json"
  "$@" >"$dir/out" 2>"$dir/err"
  got=$?
  n=$((n + 1))
  if [ "$got" != "$want" ]; then
    echo "FAIL $label: exit $got, expected $want"; cat "$dir/err"; fail=1
  fi
  if [ "$want" != 0 ] && ! grep -q '^twistfit: error: ' "$dir/err"; then
    echo "FAIL $label: no error line"; fail=1
  fi
  if [ "$want" != 0 ] && [ -e "$dir/new.json" ]; then
    echo "FAIL $label: an output file was created"; fail=1
  fi
  if [ "$(cat "$dir/old.json")" != keep ]; then
    echo "FAIL $label: an existing output was changed"; fail=1
  fi
}
# bad models: fk with an output file
# (loops read from files, not pipes, so that a failure reaches $fail)
grep -v '^#' "$SRC/tests/bad-models/expected.tsv" >"$dir/models.tsv"
grep -v '^#' "$SRC/tests/bad-campaigns/expect.tsv" >"$dir/campaigns.tsv"
while IFS='	' read -r file status rest; do
  [ -n "$file" ] || continue
  check "$(exit_of "$status")" "model $file" \
    "$TWISTFIT" fk "$SRC/tests/bad-models/$file" -o "$dir/new.json"
done <"$dir/models.tsv"
# bad campaigns: verify on tf6s (the tables' model), one-file and two-file forms
while IFS='	' read -r input options status rest; do
  [ -n "$input" ] || continue
  [ "$options" = - ] || continue # cases that need library options
  case "$input" in
    *+*) a=${input%%+*} b=${input#*+}
         check "$(exit_of "$status")" "campaign $input" "$TWISTFIT" verify "$SRC/samples/tf6s.ini" \
           --joints "$SRC/tests/bad-campaigns/$a" --points "$SRC/tests/bad-campaigns/$b" --json "$dir/new.json" ;;
    *)   check "$(exit_of "$status")" "campaign $input" "$TWISTFIT" verify "$SRC/samples/tf6s.ini" \
           "$SRC/tests/bad-campaigns/$input" --json "$dir/new.json" --residuals "$dir/old.json" --force ;;
  esac
done <"$dir/campaigns.tsv"
echo "$n bad inputs run through the command line"
[ $n -gt 100 ] || { echo "too few cases read"; fail=1; }
exit $fail
