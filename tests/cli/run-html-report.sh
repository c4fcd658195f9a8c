#!/bin/sh
# The HTML report of the demo calibration (calibrate --html) and of a
# verify run (report from the saved JSON): well-formed, checked with
# xmllint (Debian libxml2-utils) on the whole file (written as polyglot
# HTML, so it parses as XML too) and on each SVG part alone; every section
# heading present; nothing that runs or loads from the network. Skipped
# (77) without xmllint.
set -u
SRC=${TWF_SRCDIR:-$(cd "$(dirname "$0")/../.." && pwd)}
BUILD=${TWF_BUILDDIR:-$SRC}
TWISTFIT="$BUILD/src/twistfit"
command -v xmllint >/dev/null 2>&1 || { echo "SKIP: xmllint (Debian libxml2-utils) not installed"; exit 77; }
dir=$(mktemp -d)
trap 'rm -rf "$dir"' EXIT
fail=0
no() { echo "FAIL: $*"; fail=1; }

"$TWISTFIT" calibrate "$SRC/samples/tf6s.ini" "$SRC/samples/demo-campaign.csv" --html "$dir/cal.html" >/dev/null ||
  no "calibrate --html failed"
"$TWISTFIT" verify "$SRC/samples/tf6s.ini" "$SRC/samples/demo-campaign.csv" --tol-rms 0.1 --tol-max 0.3 \
  --json "$dir/ver.json" >/dev/null
[ $? = 1 ] || no "verify of the demo: expected the rejection (status 1)"
"$TWISTFIT" report "$dir/ver.json" --html "$dir/ver.html" || no "report of the verify JSON failed"

check() { # file, section headings...
  f=$1
  shift
  xmllint --noout "$f" || no "$f: not well-formed"
  # each <svg> ... </svg> (one element from its opening line to its closing one) alone
  awk -v out="$dir/part" '/^<svg /{n++; w=1} w{print > (out n ".svg")} /^<\/svg>/{w=0}' "$f"
  parts=$(ls "$dir"/part*.svg 2>/dev/null | wc -l)
  [ "$parts" -ge 4 ] || no "$f: only $parts SVG charts"
  for p in "$dir"/part*.svg; do
    xmllint --noout "$p" || no "$f: $(basename "$p") is not well-formed"
    grep -q 'viewBox="0 0 [0-9]* [0-9]*"' "$p" || no "$f: $(basename "$p") has no fixed viewBox"
  done
  rm -f "$dir"/part*.svg
  for h in "$@"; do
    grep -q "<h2>$h</h2>" "$f" || no "$f: no section '$h'"
  done
  grep -q '<h1>' "$f" || no "$f: no header"
  # self-contained: no scripts, no links to files or the network
  if grep -n -i -E '<script|<link|<img|<iframe|<object|src=|href=|url\(|@import' "$f"; then
    no "$f: loads or runs something"
  fi
  grep -q '@media print' "$f" || no "$f: no print rules"
  grep -q 'break-inside:avoid' "$f" || no "$f: figures may be cut across pages"
}
check "$dir/cal.html" "Summary and verdict" "Error per measurement" "Distribution of the errors" \
  "Errors against each joint" "Link parameters" "Predicted accuracy" "Identifiability" "Measurements"
check "$dir/ver.html" "Summary and verdict" "Error per measurement" "Distribution of the errors" \
  "Errors against each joint" "Measurements"
# the calibration's header: inputs with their digests, the verdict, the cautions
for s in "SHA-256" "65e299e6ef399f4bea889ea3bf063e2a20e24ce53ce7de049d82d558c5740d4a" "Conclusion: improved" \
  "Safety: a changed kinematic model" "noise level" "joint j6" "Correlation of the estimated parameters"; do
  grep -q "$s" "$dir/cal.html" || no "cal.html: '$s' missing"
done
grep -q "Acceptance: rejected" "$dir/ver.html" || no "ver.html: the verdict is missing"
[ $fail = 0 ] && echo "PASS: the HTML reports are well-formed and hold every section"
exit $fail
