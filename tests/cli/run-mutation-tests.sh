#!/bin/sh
# Mutation test of whole runs: mutation-tests.py mutates the demo model and
# campaign and checks how calibrate and verify end on each (see there).
# Most useful in the sanitizer build (./configure --enable-asan
# --enable-ubsan), where a sanitizer report fails it.
SRC=${TWF_SRCDIR:-$(cd "$(dirname "$0")/../.." && pwd)}
PYTHON=${PYTHON:-/usr/bin/python3}
command -v "$PYTHON" >/dev/null 2>&1 || PYTHON=python3
exec "$PYTHON" "$SRC/tests/cli/mutation-tests.py" "$@"
