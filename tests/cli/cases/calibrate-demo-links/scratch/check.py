"""The calibrate report's link table, text against JSON, and the demo's
hidden damage recovered.

The reference values are the generator's own hidden deviations
(samples/make-demo-campaign.py, BENT: invented demo data of this project):
j2's zero offset -0.027 deg, j3's +0.044 deg, a of the j2 link +0.42 mm and
its twist +0.035 deg. j2 and j3 are parallel, so the link between them is
in Hayati's form and the generator's two d changes (-0.18 and +0.31 mm)
show only as their sum, in row 3's d. Each must lie within 4 standard
deviations plus the noise of the demo (sigma 0.02 mm at a reach of about
1.5 m gives some 1e-3 deg)."""
import json
import sys

txt, js = sys.argv[1], sys.argv[2]
rows = {}
inside = False
for line in open(txt):
    if line.startswith("As-built link parameters against the starting model"):
        inside = True
        continue
    if inside and line.strip().startswith("row "):
        continue
    if inside:
        f = line.split()
        if len(f) < 6 or not f[0].isdigit():
            if rows:
                break
            continue
        rows[(int(f[0]), f[3])] = f
report = json.load(open(js))
links = report["links"]
assert links["length_unit"] == "mm" and links["angle_unit"] == "deg", links
seen = 0
for r in links["rows"]:
    for name, v in r["values"].items():
        f = rows[(r["row"], name)]
        assert f[1] == r["line"] and f[2] == r["form"], (f, r)
        dec = len(f[4].split(".")[1])
        half = 0.5 * 10 ** -dec + 1e-12
        assert abs(float(f[4]) - v["starting"]) <= half, (f, v)
        assert abs(float(f[5]) - v["asbuilt"]) <= half, (f, v)
        if v["determined"]:
            assert abs(float(f[6]) - v["difference"]) <= half, (f, v)
            assert abs(float(f[7]) - v["std"]) <= half, (f, v)
        else:
            assert f[6] in ("n/d", "-") and v["difference"] is None and v["std"] is None, (f, v)
            assert " ".join(f[8:]) == v["note"], (f, v)
        seen += 1
assert seen == len(rows), (seen, len(rows))


def value(row, name):
    for r in links["rows"]:
        if r["row"] == row:
            return r["values"][name]
    raise KeyError(row)


checks = [(2, "theta", -0.027, 2e-3), (3, "theta", +0.044, 2e-3),
          (2, "a", +0.42, 0.02), (2, "alpha", +0.035, 2e-3),
          (3, "d", -0.18 + 0.31, 0.02), (3, "a", -0.23, 0.02), (3, "alpha", -0.021, 2e-3)]
for row, name, hidden, noise in checks:
    v = value(row, name)
    assert v["determined"], (row, name)
    err = abs(v["difference"] - hidden)
    assert err <= 4 * v["std"] + noise, (row, name, v["difference"], hidden, v["std"])
    print("row %d %s: %.6f against the hidden %.3f (std %.6f)" % (row, name, v["difference"], hidden, v["std"]))
for row, name in [(1, "theta"), (1, "d"), (6, "theta"), (7, "d")]:
    assert not value(row, name)["determined"], (row, name)
print("links: %d values, text and JSON agree" % seen)
