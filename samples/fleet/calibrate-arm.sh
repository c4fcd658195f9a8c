#!/bin/sh
# calibrate-arm.sh ARM_DIR OUT_DIR: calibrate one arm of a fleet. ARM_DIR
# holds model.ini and campaign.csv; the outputs go to OUT_DIR/NAME/ (NAME
# is ARM_DIR's last component): report.txt, report.json, model.ini (the
# as-built model), base.ini, stderr.txt and status (twistfit's exit
# status). Extra twistfit calibrate options come from $TWISTFIT_OPTIONS.
# Always exits 0 when it could record a status, so that one failed arm
# does not stop a fleet; the status file says how the arm went.
set -u
arm=${1%/}
out=$2
name=$(basename "$arm")
dir="$out/$name"
tool=${TWISTFIT:-twistfit}
mkdir -p "$dir" || exit 1
rm -f "$dir/report.txt" "$dir/report.json" "$dir/model.ini" "$dir/base.ini"
# shellcheck disable=SC2086
"$tool" calibrate "$arm/model.ini" "$arm/campaign.csv" ${TWISTFIT_OPTIONS:-} \
  --json "$dir/report.json" -o "$dir/model.ini" --base-output "$dir/base.ini" \
  >"$dir/report.txt" 2>"$dir/stderr.txt"
echo $? >"$dir/status"
