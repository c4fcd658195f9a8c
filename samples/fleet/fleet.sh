#!/bin/sh
# fleet.sh FLEET_DIR OUT_DIR [JOBS]: calibrate every arm of a fleet with GNU
# parallel (Debian package parallel), one output folder per arm, then write
# OUT_DIR/summary.csv. FLEET_DIR holds one folder per arm with model.ini and
# campaign.csv. JOBS defaults to parallel's own (one per core); keep
# --threads 1 in TWISTFIT_OPTIONS when running one arm per core. A failed
# arm does not stop the others (--halt never); its status and error are in
# the summary. Exits 0 when every arm calibrated, 1 otherwise.
set -u
[ $# -ge 2 ] || { echo "usage: fleet.sh FLEET_DIR OUT_DIR [JOBS]" >&2; exit 2; }
fleet=$1
out=$2
here=$(cd "$(dirname "$0")" && pwd)
command -v parallel >/dev/null 2>&1 || { echo "fleet.sh: GNU parallel is not installed (apt-get install parallel)" >&2; exit 2; }
mkdir -p "$out" || exit 2
ls -d "$fleet"/*/ >"$out/arms.txt" 2>/dev/null || { echo "fleet.sh: no arm folders in $fleet" >&2; exit 2; }
parallel --will-cite --halt never ${3:+-j "$3"} sh "$here/calibrate-arm.sh" {} "$out" :::: "$out/arms.txt"
python3 "$here/summary.py" "$out" >"$out/summary.csv" || exit 2
# every arm's status 0?
bad=0
while IFS= read -r arm; do
  s=$(cat "$out/$(basename "$arm")/status" 2>/dev/null || echo missing)
  [ "$s" = 0 ] || bad=1
done <"$out/arms.txt"
exit $bad
