#!/bin/sh
# The shared library exports exactly the functions that the public headers
# (src/include/twistfit.h and src/include/twistfit/*.h) declare: no internal
# helper (a program could come to depend on it), no public function missing
# (a program would fail to link).
#
# The declared functions come from the compiler where it can list them (GCC's
# -aux-info writes every prototype it sees, with the header it came from), so
# that the check does not trust the awk of src/export-symbols.sh that made
# the export list; other compilers fall back on that script.
set -u
SRC=${TWF_SRCDIR:-$(cd "$(dirname "$0")/.." && pwd)}
BUILD=${TWF_BUILDDIR:-$SRC}
CC=${TWF_CC:-cc}
lib="$BUILD/src/.libs/libtwistfit.so"
if [ ! -f "$lib" ]; then
  echo "SKIP: no $lib (static-only build or a platform without .so)"
  exit 77
fi
command -v nm >/dev/null 2>&1 || { echo "SKIP: no nm"; exit 77; }
dir=$(mktemp -d)
trap 'rm -rf "$dir"' EXIT

# every header in the folder, not only the ones Makefile.am installs: a
# header left out of the list must show up here as missing exports
printf '#include <twistfit.h>\n' >"$dir/all.c"
for h in "$SRC"/src/include/twistfit/*.h; do
  printf '#include "twistfit/%s"\n' "$(basename "$h")" >>"$dir/all.c"
done
if $CC -std=c11 -I"$SRC/src/include" -fsyntax-only -aux-info "$dir/aux" \
     "$dir/all.c" 2>/dev/null && [ -s "$dir/aux" ]; then
  how="the compiler's list of prototypes"
  grep -F "$SRC/src/include/" "$dir/aux" | grep -v '^/\*[^*]*\*/ static ' |
    sed -n 's/^.*[ *]\(twf_[A-Za-z0-9_]*\) (.*$/\1/p' | LC_ALL=C sort -u >"$dir/declared"
else
  how="src/export-symbols.sh (the compiler cannot list prototypes)"
  sh "$SRC/src/export-symbols.sh" "$SRC/src/include/twistfit.h" \
    "$SRC"/src/include/twistfit/*.h >"$dir/declared" || exit 1
fi
# function symbols only: the library exports no data, and versioned names
# (name@@VERSION) would not compare
nm -D --defined-only "$lib" | awk '$2 ~ /^[TtWi]$/ { sub(/@.*/, "", $3); print $3 }' |
  LC_ALL=C sort -u >"$dir/exported"
nm -D --defined-only "$lib" | awk '$2 !~ /^[TtWiA]$/ { print }' >"$dir/other"

fail=0
nd=$(wc -l <"$dir/declared")
ne=$(wc -l <"$dir/exported")
echo "declared in the public headers ($how): $nd functions"
echo "exported by $(basename "$lib"): $ne functions"
# an empty or tiny list on both sides would compare equal: the headers
# declare far more than this, and these two must be on their sides
[ "$nd" -ge 50 ] || { echo "FAIL: only $nd declarations found"; fail=1; }
grep -qx twf_model_alloc "$dir/declared" || { echo "FAIL: twf_model_alloc not found in the headers"; fail=1; }
LC_ALL=C comm -13 "$dir/declared" "$dir/exported" >"$dir/extra"
LC_ALL=C comm -23 "$dir/declared" "$dir/exported" >"$dir/missing"
if [ -s "$dir/extra" ]; then
  echo "FAIL: exported but not declared in a public header:"
  sed 's/^/  /' "$dir/extra"
  fail=1
fi
if [ -s "$dir/missing" ]; then
  echo "FAIL: declared in a public header but not exported:"
  sed 's/^/  /' "$dir/missing"
  fail=1
fi
if [ -s "$dir/other" ]; then
  echo "FAIL: exported symbols that are not functions:"
  sed 's/^/  /' "$dir/other"
  fail=1
fi
[ $fail = 0 ] && echo "exports: 1 passed, 0 failed" || echo "exports: 0 passed, 1 failed"
exit $fail
