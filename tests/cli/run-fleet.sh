#!/bin/sh
# The README's "Many arms" recipe: samples/fleet/fleet.sh over a folder of
# three arms (two good campaigns, one whose campaign does not match its
# model) with GNU parallel. Every arm gets its output folder; the broken
# one fails without stopping the others; summary.csv has one row per arm
# with the verdict and the before and after figures from the JSON reports,
# and the failed arm's status and error. Needs GNU parallel (Debian
# package parallel): without it this test fails, it does not skip.
set -u
SRC=${TWF_SRCDIR:-$(cd "$(dirname "$0")/../.." && pwd)}
BUILD=${TWF_BUILDDIR:-$SRC}
TWISTFIT="$BUILD/src/twistfit"
export TWISTFIT
if ! command -v parallel >/dev/null 2>&1; then
  echo "FAIL: GNU parallel is not installed (apt-get install parallel; .ci/deps must install it)"
  exit 1
fi
work=$(mktemp -d)
trap 'rm -rf "$work"' EXIT
fail() { echo "FAIL: $*"; [ -f "$work/out/summary.csv" ] && cat "$work/out/summary.csv"; exit 1; }
for a in arm-a arm-b arm-c; do mkdir -p "$work/fleet/$a"; done
cp "$SRC/samples/tf6s.ini" "$work/fleet/arm-a/model.ini"
cp "$SRC/samples/demo-campaign.csv" "$work/fleet/arm-a/campaign.csv"
cp "$SRC/samples/tf6s.ini" "$work/fleet/arm-b/model.ini"
cp "$SRC/samples/demo-campaign.csv" "$work/fleet/arm-b/campaign.csv"
cp "$SRC/samples/tf4p.ini" "$work/fleet/arm-c/model.ini"   # a 4-axis model for 6-axis data
cp "$SRC/samples/demo-campaign.csv" "$work/fleet/arm-c/campaign.csv"
TWISTFIT_OPTIONS="--threads 1" sh "$SRC/samples/fleet/fleet.sh" "$work/fleet" "$work/out" 2 >"$work/log" 2>&1
st=$?
[ "$st" = 1 ] || fail "fleet.sh exited $st, expected 1 (one arm failed)"
for a in arm-a arm-b; do
  [ "$(cat "$work/out/$a/status")" = 0 ] || fail "$a did not calibrate"
  for f in report.txt report.json model.ini base.ini; do
    [ -s "$work/out/$a/$f" ] || fail "$a: $f missing"
  done
done
[ "$(cat "$work/out/arm-c/status")" != 0 ] || fail "arm-c calibrated"
[ ! -e "$work/out/arm-c/model.ini" ] || fail "arm-c wrote a model"
python3 - "$work/out/summary.csv" <<'PY' || fail "summary.csv is not as expected"
import csv, sys
rows = {r["arm"]: r for r in csv.DictReader(open(sys.argv[1]))}
assert sorted(rows) == ["arm-a", "arm-b", "arm-c"], rows
for a in ("arm-a", "arm-b"):
    r = rows[a]
    assert r["status"] == "0" and r["verdict"] == "improved" and r["unit"] == "mm", r
    assert float(r["rms_after"]) < float(r["rms_before"]), r
assert rows["arm-a"]["rms_after"] == rows["arm-b"]["rms_after"]
c = rows["arm-c"]
assert c["status"] not in ("", "0") and c["verdict"] == "" and "error:" in c["error"], c
PY
echo "PASS: fleet of 3 arms (one failed, summary of all)"
