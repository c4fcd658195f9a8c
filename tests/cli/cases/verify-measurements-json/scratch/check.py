"""The per-measurement entries of verify --json agree with its accuracy
summary: the RMS over the fit and check rows equals accuracy.*.position.rms
(verify's figures count every row, also one the registration left out)."""
import json
import math

d = json.load(open("v.json"))
m = d["measurements"]
for s in ("fit", "check"):
    rows = [e["error"]["position"] for e in m if e["set"] == s]
    want = d["accuracy"][s]["position"]
    assert len(rows) == want["count"], (s, len(rows), want["count"])
    got = math.sqrt(sum(x * x for x in rows) / len(rows))
    assert abs(got - want["rms"]) <= 1e-9 * want["rms"], (s, got, want["rms"])
assert all(e["error"]["angle"] is None for e in m)
print("verify measurements agree with the summary")
