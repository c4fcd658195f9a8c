"""The per-measurement entries of calibrate --json agree with the report's
own summaries and with the campaign file: the RMS of the kept fit and check
rows before and after equals accuracy_before / accuracy_after, the dropped
rows are the outliers with weight 0, and the joint values are the logged
ones (the demo campaign is in mm and deg, as the report)."""
import csv
import json
import math
import sys

d = json.load(open("report.json"))
m = d["measurements"]
assert len(m) == d["campaign"]["measurements"], len(m)


def rms(v):
    return math.sqrt(sum(x * x for x in v) / len(v))


for when, acc in (("before", "accuracy_before"), ("after", "accuracy_after")):
    for s in ("fit", "check"):
        rows = [e for e in m if e["set"] == s and e["excluded"] is None]
        want = d[acc][s]["position"]
        assert len(rows) == want["count"], (when, s, len(rows), want["count"])
        got = rms([e[when]["position"] for e in rows])
        assert abs(got - want["rms"]) <= 1e-9 * want["rms"], (when, s, got, want["rms"])
        for e in rows:
            x = e[when]["xyz"]
            assert abs(math.sqrt(sum(c * c for c in x)) - e[when]["position"]) <= 1e-9

dropped = sorted(e["line"] for e in m if e["excluded"] == "dropped")
zero = sorted(o["line"] for o in d["outliers"] if o["weight"] == 0)
assert dropped == zero and dropped, (dropped, zero)
assert all(e["weight"] == 0 for e in m if e["excluded"] == "dropped")

lines = open(sys.argv[1]).read().splitlines()
head = next(csv.reader([next(l for l in lines if not l.startswith("#"))]))
jcols = [head.index("j%d" % k) for k in range(1, 7)]
for e in m[:20]:
    fields = next(csv.reader([lines[e["line"] - 1]]))
    for k, c in enumerate(jcols):
        assert abs(float(fields[c]) - e["joints"][k]) <= 1e-9, (e["line"], k)
print("measurements agree with the summaries and the campaign")
