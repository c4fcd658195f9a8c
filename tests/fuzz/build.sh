#!/bin/sh
# Build the libFuzzer harnesses of tests/fuzz with clang, AddressSanitizer
# and UndefinedBehaviorSanitizer. The library sources are compiled here
# directly, not through the autotools build, so that the normal build needs
# no clang; their list is read from Makefile.am, so that a new source file
# of the library is fuzzed without a change here.
#
#   tests/fuzz/build.sh [OUTDIR]     (default: build-fuzz at the top)
#
# Needs clang and libFuzzer (Debian: clang, libclang-rt-14-dev) and the
# library's own -dev packages. Prints the fuzzers' paths.
set -eu
here=$(cd "$(dirname "$0")" && pwd)
top=$(cd "$here/../.." && pwd)
out=${1:-$top/build-fuzz}
CC=${FUZZ_CC:-clang}
mkdir -p "$out/obj"
out=$(cd "$out" && pwd)

command -v "$CC" >/dev/null 2>&1 ||
  { echo "build.sh: $CC not found (apt-get install clang libclang-rt-14-dev)" >&2; exit 2; }

# Every .c of src_libtwistfit_core_la_SOURCES (the convenience library that
# holds all library sources), continuation lines and += too.
lib_sources=$(awk '
  /^src_libtwistfit_core_la_SOURCES[ \t]*\+?=/ { on = 1; sub(/^[^=]*=/, "") }
  on { line = $0; more = sub(/\\[ \t]*$/, "", line); print line; if (!more) on = 0 }
' "$top/Makefile.am" | tr -s ' \t' '\n\n' | grep '\.c$' || true)
[ -n "$lib_sources" ] ||
  { echo "build.sh: no library sources found in Makefile.am" >&2; exit 2; }

# config.h of the autotools build, reduced to what the library uses.
version=$(sed -n 's/^AC_INIT(\[[^]]*\], *\[\([^]]*\)\].*/\1/p' "$top/configure.ac")
cat > "$out/obj/config.h.new" <<EOH
/* made by tests/fuzz/build.sh from configure.ac */
#define PACKAGE "twistfit"
#define PACKAGE_NAME "twistfit"
#define PACKAGE_VERSION "${version:-unknown}"
#define VERSION PACKAGE_VERSION
EOH
if cmp -s "$out/obj/config.h.new" "$out/obj/config.h"; then
  rm -f "$out/obj/config.h.new"
else
  mv "$out/obj/config.h.new" "$out/obj/config.h"
fi

pkgs="gsl inih jansson libmd libxml-2.0"
PKG_CFLAGS=$(pkg-config --cflags $pkgs)
PKG_LIBS=$(pkg-config --libs $pkgs)
SAN="-fsanitize=address,undefined -fno-sanitize-recover=undefined -fno-omit-frame-pointer"
CFLAGS="-std=c11 -g -O1 -Wall -Wextra $SAN -D_POSIX_C_SOURCE=200809L -DTWF_FUZZER \
-I$out/obj -I$top/src/include -I$top/src/lib -I$top/tests $PKG_CFLAGS ${FUZZ_CFLAGS:-}"

# Compile one file into obj/ when the object is older than its source or
# than any header (a coarse rule, but the whole build takes seconds).
headers=$(find "$top/src" "$here" -name '*.h' -newer "$out/obj/stamp" 2>/dev/null || echo new)
objects=""
compile() {
  src=$1
  flags=$2
  obj="$out/obj/$(echo "$src" | tr '/' '_' | sed 's/\.c$/.o/')"
  if [ ! -f "$obj" ] || [ "$top/$src" -nt "$obj" ] || [ -n "$headers" ]; then
    # shellcheck disable=SC2086
    $CC $CFLAGS $flags -c "$top/$src" -o "$obj"
  fi
  objects="$objects $obj"
}

for s in $lib_sources tests/arms.c tests/fuzz/fuzz_util.c; do
  compile "$s" -fsanitize=fuzzer-no-link
done
common=$objects
for f in model base campaign pair urdf; do
  objects=""
  compile "tests/fuzz/fuzz_$f.c" -fsanitize=fuzzer-no-link
  # shellcheck disable=SC2086
  $CC $CFLAGS -fsanitize=fuzzer $common $objects $PKG_LIBS -lcsv -lm -o "$out/fuzz_$f"
  echo "$out/fuzz_$f"
done
touch "$out/obj/stamp"
