#!/bin/sh
# The DH, modified DH and plain (--no-beta) tables of `twistfit export`
# against Orocos KDL chains built from the exported rows (Debian
# python3-pykdl), on every sample arm and a calibrated model, and the
# --no-beta refusal threshold: tests/cli/kdl_dh_export.py. Skipped (77)
# without PyKDL.
set -u
SRC=${TWF_SRCDIR:-$(cd "$(dirname "$0")/../.." && pwd)}
BUILD=${TWF_BUILDDIR:-$SRC}
exec /usr/bin/python3 "$SRC/tests/cli/kdl_dh_export.py" "$SRC" "$BUILD/src/twistfit"
