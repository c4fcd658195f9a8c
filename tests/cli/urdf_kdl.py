#!/usr/bin/python3
"""Helpers of run-urdf-tests.sh (not a generator):

  urdf_kdl.py joints URDF N SEED OUT.csv
      N seeded joint rows within the URDF chain's limits (rad, m; +-pi or
      +-0.1 m without limits), header pose,<joint names>;
  urdf_kdl.py fk URDF TIP JOINTS.csv FK.csv
      compare twistfit fk's flange positions and quaternions (FK.csv, in m)
      with an Orocos KDL chain built from the URDF's joint origins and axes
      (parsed with xml.etree, segments as ROS's kdl_parser makes them);
      exit 1 beyond 1e-9 m or 1e-9 rad;
  urdf_kdl.py same-except-chain ORIGINAL.urdf WRITTEN.urdf JOINT...
      the two documents agree (elements, attributes, text, comments) except
      the <origin> and <axis> of the joints named; exit 1 otherwise.
"""
import csv
import math
import sys
import xml.etree.ElementTree as ET

import PyKDL as kdl


def parse(path):
    parser = ET.XMLParser(target=ET.TreeBuilder(insert_comments=True))
    return ET.parse(path, parser).getroot()


def chain_joints(root, tip):
    by_child = {j.find("child").get("link"): j for j in root.findall("joint")}
    path, link = [], tip
    while link in by_child:
        path.append(by_child[link])
        link = by_child[link].find("parent").get("link")
    return list(reversed(path))


def nums(el, attr, default):
    if el is None or el.get(attr) is None:
        return default
    return [float(x) for x in el.get(attr).split()]


def kdl_chain(joints):
    chain = kdl.Chain()
    for j in joints:
        o = j.find("origin")
        xyz, rpy = nums(o, "xyz", [0, 0, 0]), nums(o, "rpy", [0, 0, 0])
        F = kdl.Frame(kdl.Rotation.RPY(*rpy), kdl.Vector(*xyz))
        if j.get("type") == "fixed":
            kj = kdl.Joint(j.get("name"), kdl.Joint.Fixed)
        else:
            ax = kdl.Vector(*nums(j.find("axis"), "xyz", [1, 0, 0]))
            jt = kdl.Joint.TransAxis if j.get("type") == "prismatic" else kdl.Joint.RotAxis
            kj = kdl.Joint(j.get("name"), F.p, F.M * ax, jt)
        chain.addSegment(kdl.Segment(j.find("child").get("link"), kj, F))
    return chain


def moving(joints):
    return [j for j in joints if j.get("type") != "fixed"]


def cmd_joints(urdf, n, seed, out):
    import random
    rng = random.Random(int(seed))
    root = parse(urdf)
    tip = sys.argv[6] if len(sys.argv) > 6 else "flange"
    js = moving(chain_joints(root, tip))
    with open(out, "w", newline="") as f:
        w = csv.writer(f)
        w.writerow(["pose"] + [j.get("name") for j in js])
        for i in range(int(n)):
            row = ["p%d" % i]
            for j in js:
                lim = j.find("limit")
                if j.get("type") != "continuous" and lim is not None and lim.get("lower") is not None:
                    lo, hi = float(lim.get("lower")), float(lim.get("upper"))
                else:
                    lo, hi = (-0.1, 0.1) if j.get("type") == "prismatic" else (-math.pi, math.pi)
                row.append(repr(rng.uniform(lo, hi)))
            w.writerow(row)


def cmd_fk(urdf, tip, joints_csv, fk_csv):
    chain = kdl_chain(chain_joints(parse(urdf), tip))
    solver = kdl.ChainFkSolverPos_recursive(chain)
    rows = [r for r in csv.reader(l for l in open(joints_csv) if not l.startswith("#"))][1:]
    fk = [r for r in csv.DictReader(l for l in open(fk_csv) if not l.startswith("#"))]
    if len(rows) != len(fk) or not rows:
        sys.exit("urdf_kdl: %d joint rows, %d fk rows" % (len(rows), len(fk)))
    worst_p = worst_a = 0.0
    for r, f in zip(rows, fk):
        q = kdl.JntArray(len(r) - 1)
        for i, x in enumerate(r[1:]):
            q[i] = float(x)
        F = kdl.Frame()
        if solver.JntToCart(q, F) < 0:
            sys.exit("urdf_kdl: KDL's JntToCart failed")
        p = [float(f["flange_%s_m" % c]) for c in "xyz"]
        worst_p = max(worst_p, math.dist(p, [F.p[0], F.p[1], F.p[2]]))
        t = [float(f["flange_q%s" % c]) for c in "wxyz"]
        D = F.M.Inverse() * kdl.Rotation.Quaternion(t[1], t[2], t[3], t[0])
        v = [(D[2, 1] - D[1, 2]) / 2, (D[0, 2] - D[2, 0]) / 2, (D[1, 0] - D[0, 1]) / 2]
        c = (D[0, 0] + D[1, 1] + D[2, 2] - 1) / 2
        worst_a = max(worst_a, math.atan2(math.hypot(*v), c))
    print("urdf_kdl: %d configurations, worst %.3g m, %.3g rad" % (len(rows), worst_p, worst_a))
    if worst_p > 1e-9 or worst_a > 1e-9:
        sys.exit(1)


def strip(el, joints):
    """A comparable form of the tree without the chain's origins and axes."""
    kids = []
    for c in el:
        if el.tag == "joint" and el.get("name") in joints and c.tag in ("origin", "axis"):
            continue
        kids.append(strip(c, joints))
    tag = "#comment" if el.tag is ET.Comment else el.tag
    return (tag, sorted(el.attrib.items()), (el.text or "").strip(), (el.tail or "").strip(), kids)


def cmd_same(orig, written, joints):
    a, b = strip(parse(orig), set(joints)), strip(parse(written), set(joints))
    if a != b:
        sys.exit("urdf_kdl: %s and %s differ beyond the chain's origins and axes" % (orig, written))


def main():
    c = sys.argv[1] if len(sys.argv) > 1 else ""
    if c == "joints":
        cmd_joints(*sys.argv[2:6])
    elif c == "fk":
        cmd_fk(*sys.argv[2:6])
    elif c == "same-except-chain":
        cmd_same(sys.argv[2], sys.argv[3], sys.argv[4:])
    else:
        sys.exit(__doc__)


if __name__ == "__main__":
    main()
