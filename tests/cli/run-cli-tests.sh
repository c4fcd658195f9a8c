#!/bin/sh
# Command-line tests: each folder under tests/cli/cases/ is one case (its
# files are described in tests/cli/README.md): a command line, its expected
# exit status, and golden outputs whose numbers are compared within stated
# tolerances (tests/cli/compare_golden.py), since floating-point figures
# change in their last digits from one platform or summation order to
# another.
# To regenerate the goldens after a deliberate change (a golden is rewritten
# only where it no longer matches):
#   TWF_CLI_UPDATE=1 make check TESTS=tests/cli/run-cli-tests.sh
set -u
SRC=${TWF_SRCDIR:-$(cd "$(dirname "$0")/../.." && pwd)}
BUILD=${TWF_BUILDDIR:-$SRC}
TWISTFIT="$BUILD/src/twistfit"
# While the program links the uninstalled shared library, src/twistfit is
# libtool's wrapper script: each call through it starts a shell before the
# program (some 9 ms, for some 150 calls). libtool --mode=execute swaps the
# wrapper for the real binary and sets the library path, once for the run.
# (Linking with -no-install would drop the wrapper too, but the installed
# program would then keep the build folder as its library path.)
if [ -z "${TWF_CLI_REAL:-}" ] && [ -x "$BUILD/libtool" ]; then
  TWF_CLI_REAL=1
  export TWF_CLI_REAL
  exec "$BUILD/libtool" --mode=execute "${CONFIG_SHELL:-/bin/sh}" "$0" "$TWISTFIT"
fi
TWISTFIT=${1:-$TWISTFIT}
export SRC TWISTFIT
PYTHON=${PYTHON:-python3}
update=${TWF_CLI_UPDATE:-0}
golden_matches() { # golden got name: numbers within the case's tolerances
  "$PYTHON" "$SRC/tests/cli/compare_golden.py" --tolerances "$case_dir/tolerances" \
    --name "$3" "$1" "$2"
}
pass=0
fail=0
for case_dir in "$SRC"/tests/cli/cases/*/; do
  name=$(basename "$case_dir")
  scratch=$(mktemp -d)
  [ -d "$case_dir/scratch" ] && cp -R "$case_dir/scratch/." "$scratch/"
  ( cd "$scratch" && eval "$(cat "$case_dir/cmd")" ) >"$scratch/.out" 2>"$scratch/.err"
  got=$?
  want=$(cat "$case_dir/status")
  ok=1
  why=""
  if [ "$got" != "$want" ]; then ok=0; why="exit status $got, expected $want"; fi
  if [ -f "$case_dir/stdout-exact" ]; then
    if [ "$update" = 1 ] && ! cmp -s "$scratch/.out" "$case_dir/stdout-exact"; then
      cp "$scratch/.out" "$case_dir/stdout-exact"
    fi
    if ! cmp -s "$scratch/.out" "$case_dir/stdout-exact"; then
      ok=0; why="$why; stdout differs:"
      why="$why
$(diff "$case_dir/stdout-exact" "$scratch/.out" | head -20)"
    fi
  fi
  # goldens with numbers: stdout, and out/NAME for the file NAME that the
  # command leaves in the scratch folder
  for golden in "$case_dir/stdout" "$case_dir"/out/*; do
    [ -f "$golden" ] || continue
    gname=$(basename "$golden")
    if [ "$golden" = "$case_dir/stdout" ]; then output="$scratch/.out"; else output="$scratch/$gname"; fi
    if [ "$update" = 1 ] && [ -f "$output" ] && ! golden_matches "$golden" "$output" "$gname" >/dev/null; then
      cp "$output" "$golden"
    fi
    if ! diffs=$(golden_matches "$golden" "$output" "$gname"); then
      ok=0; why="$why; $gname differs:
$diffs"
    fi
  done
  for kind in err out; do
    [ -f "$case_dir/std$kind-contains" ] || continue
    while IFS= read -r line; do
      [ -n "$line" ] || continue
      grep -F -q -- "$line" "$scratch/.$kind" || { ok=0; why="$why; std$kind lacks: $line"; }
    done <"$case_dir/std$kind-contains"
  done
  if [ -f "$case_dir/files-absent" ]; then
    while IFS= read -r f; do
      [ -n "$f" ] || continue
      if [ -e "$scratch/$f" ]; then ok=0; why="$why; $f exists"; fi
    done <"$case_dir/files-absent"
  fi
  if [ $ok = 1 ]; then
    pass=$((pass + 1)); echo "PASS: $name"
  else
    fail=$((fail + 1)); echo "FAIL: $name: $why"
    echo "--- stderr:"; head -20 "$scratch/.err"
  fi
  rm -rf "$scratch"
done
echo "cli: $pass passed, $fail failed"
[ $fail = 0 ]
