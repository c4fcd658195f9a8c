#!/bin/sh
# Install a build tree into a scratch folder (make install DESTDIR=...),
# build samples/example-calibrate.c against the installed library through
# pkg-config only, and run it on the demo campaign.
#   tests/install/run-example.sh [BUILDDIR]      (default: the current folder)
# Needs a C compiler (CC, default cc) and pkg-config (or pkgconf).
set -eu
SRC=$(cd "$(dirname "$0")/../.." && pwd)
BUILD=$(cd "${1:-.}" && pwd)
CC=${CC:-cc}
[ -f "$BUILD/Makefile" ] || { echo "run-example: $BUILD is not a configured build tree" >&2; exit 2; }
tmp=$(mktemp -d)
trap 'rm -rf "$tmp"' EXIT
make -C "$BUILD" install DESTDIR="$tmp/root" >"$tmp/install.log" 2>&1 ||
  { cat "$tmp/install.log" >&2; echo "run-example: make install failed" >&2; exit 1; }
pc=$(find "$tmp/root" -name twistfit.pc | head -1)
[ -n "$pc" ] || { echo "run-example: no twistfit.pc was installed" >&2; exit 1; }
# the .pc names the configured prefix: point it into the scratch root
prefix=$(sed -n 's/^prefix=//p' "$pc")
root="$tmp/root$prefix"
PKG_CONFIG_PATH=$(dirname "$pc")
export PKG_CONFIG_PATH
flags=$(pkg-config --define-variable=prefix="$root" --cflags --libs twistfit gsl)
libdir=$(pkg-config --define-variable=prefix="$root" --variable=libdir twistfit)
# only the installed header: the source tree's include folder is not used
"$CC" -std=c11 -Wall -Wextra -Werror "$SRC/samples/example-calibrate.c" $flags -Wl,-rpath,"$libdir" \
  -o "$tmp/example-calibrate"
cd "$SRC"
"$tmp/example-calibrate" samples/tf6s.ini samples/demo-campaign.csv >"$tmp/out.txt"
cat "$tmp/out.txt"
grep -q "^conclusion: improved$" "$tmp/out.txt"
echo "run-example: the installed library built and ran the example"
