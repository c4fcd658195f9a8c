#!/usr/bin/env python3
"""summary.py OUT_DIR: one CSV row per arm of a fleet run (OUT_DIR/NAME/),
from each arm's status file and JSON report: the exit status, the verdict
and what it was judged on, the position RMS and maximum before and after
calibration on that set, the length unit. An arm without a report (a failed
run) gets its status and the first line of its error. Written to standard
output."""
import csv
import json
import os
import sys


def row(out, name):
    d = os.path.join(out, name)
    r = {"arm": name, "status": "", "verdict": "", "basis": "", "rms_before": "", "rms_after": "",
         "max_before": "", "max_after": "", "unit": "", "error": ""}
    try:
        with open(os.path.join(d, "status")) as f:
            r["status"] = f.read().strip()
    except OSError:
        r["status"] = "missing"
    try:
        with open(os.path.join(d, "report.json")) as f:
            j = json.load(f)
        v = j["verdict"]
        r.update(verdict=v["conclusion"], basis=v["basis"], rms_before=v["before"]["rms"],
                 rms_after=v["after"]["rms"], max_before=v["before"]["max"], max_after=v["after"]["max"],
                 unit=j["units"]["length"])
    except (OSError, ValueError, KeyError):
        try:
            with open(os.path.join(d, "stderr.txt")) as f:
                lines = [ln.strip() for ln in f if "error:" in ln]
            r["error"] = lines[0] if lines else ""
        except OSError:
            pass
    return r


def main():
    if len(sys.argv) != 2:
        sys.exit("usage: summary.py OUT_DIR")
    out = sys.argv[1]
    names = sorted(n for n in os.listdir(out) if os.path.isdir(os.path.join(out, n)))
    w = csv.DictWriter(sys.stdout, fieldnames=["arm", "status", "verdict", "basis", "rms_before", "rms_after",
                                               "max_before", "max_after", "unit", "error"])
    w.writeheader()
    for n in names:
        w.writerow(row(out, n))


main()
