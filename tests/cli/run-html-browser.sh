#!/bin/sh
# The demo report in headless Chromium: screenshot and PDF (Letter and A4),
# checked by tests/cli/html_browser.py. Skipped (77) without chromium,
# poppler-utils or python3-pil (.ci/deps installs them).
set -u
SRC=${TWF_SRCDIR:-$(cd "$(dirname "$0")/../.." && pwd)}
BUILD=${TWF_BUILDDIR:-$SRC}
[ -x /usr/bin/python3 ] || { echo "SKIP: no /usr/bin/python3"; exit 77; }
exec /usr/bin/python3 "$SRC/tests/cli/html_browser.py" "$SRC" "$BUILD/src/twistfit"
