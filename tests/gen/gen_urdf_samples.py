#!/usr/bin/python3
"""Reference URDF files of the sample arms, written without twistfit.

For each sample model file samples/<arm>.ini this writes
urdf_<arm>.urdf, a URDF robot built here from the file's own data:

  axis-and-point files: joint k's frame F_k has its origin at the file's
      point and its z axis along the file's axis (x completed by a fixed
      rule), a construction unlike twistfit's writer (which keeps the base
      orientation); joint k's origin is F_(k-1)^-1 F_k exp(z offset_k),
      its axis "0 0 1", and the flange on a fixed joint F_n^-1 home;
  DH files: each row's elementary motions split at the joint variable
      (standard: Rz(theta + q) Tz(d) Tx(a) Rx(alpha) Ry(beta), the joint's
      origin ends with Rz(theta) and the rest goes to the next origin;
      modified: Rx(alpha) Tx(a) Ry(beta) Rz(theta + q) Tz(d)), [base]
      before the first joint, [flange] after the last.

Limits become rad or m; targets are links named after them on fixed
joints to the flange. Each file is checked here: the URDF's joint origins
and axes, parsed back with xml.etree and built into an Orocos KDL chain
the way ROS's kdl_parser does (Segment(Joint(origin.p, origin.M axis),
origin)), give at 50 seeded configurations within the limits the flange
pose of a direct NumPy product of exponentials (axis-and-point) or of
elementary matrices (DH) from the model file; the generator stops beyond
1e-12. Also urdf_two_tips.urdf: two 3-joint arms on one base (a tree
with the tips left_flange and right_flange), for the reader's tip rule.

Deterministic. CI regenerates into a temporary directory and compares with
tests/gen/compare_fixtures.py (the XML lines have no commas: compared as
text; the values are printed with repr()).

Run with Debian's interpreter:  /usr/bin/python3 tests/gen/gen_urdf_samples.py [--out DIR]
"""
import configparser
import math
import os
import sys
import xml.etree.ElementTree as ET

import numpy as np
import PyKDL as kdl

sys.dont_write_bytecode = True
sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
from genutil import fmt, kdl_fk, out_dir, rx, ry, rz, trans  # noqa: E402

HERE = os.path.dirname(os.path.abspath(__file__))
SAMPLES = os.path.normpath(os.path.join(HERE, "..", "..", "samples"))
ARMS = ["tf6s", "tf6p", "tf4p", "tf7", "tf6s-dh", "tf7-mdh"]
SEED = 20261203
N_CONFIGS = 50
LEN = {"mm": 1e-3, "m": 1.0, "um": 1e-6, "in": 0.0254}
ANG = {"deg": math.pi / 180.0, "rad": 1.0, "mrad": 1e-3}


def nums(s):
    return [float(x) for x in s.split()]


def rodrigues(w, t):
    w = np.asarray(w, float)
    K = np.array([[0, -w[2], w[1]], [w[2], 0, -w[0]], [-w[1], w[0], 0]])
    return np.eye(3) + math.sin(t) * K + (1 - math.cos(t)) * K @ K


def quat_rot(q):
    w, x, y, z = np.asarray(q, float) / np.linalg.norm(q)
    return np.array([[1 - 2 * (y * y + z * z), 2 * (x * y - w * z), 2 * (x * z + w * y)],
                     [2 * (x * y + w * z), 1 - 2 * (x * x + z * z), 2 * (y * z - w * x)],
                     [2 * (x * z - w * y), 2 * (y * z + w * x), 1 - 2 * (x * x + y * y)]])


def rpy_rot(r, p, y):
    return rz(y)[:3, :3] @ ry(p)[:3, :3] @ rx(r)[:3, :3]


def pose(sec, lu, au):
    """A [home], [base] or [flange] section as a 4x4 (twistfit-model(5))."""
    T = np.eye(4)
    T[:3, 3] = np.array(nums(sec.get("position", "0 0 0"))) * lu
    if "quaternion_wxyz" in sec:
        T[:3, :3] = quat_rot(nums(sec["quaternion_wxyz"]))
    elif "rpy_fixed_xyz" in sec:
        T[:3, :3] = rpy_rot(*[a * au for a in nums(sec["rpy_fixed_xyz"])])
    elif "rotation_row1" in sec:
        T[:3, :3] = np.array([nums(sec["rotation_row%d" % i]) for i in (1, 2, 3)])
    return T


def load(arm):
    cp = configparser.ConfigParser(inline_comment_prefixes=(";",), comment_prefixes=(";", "#"))
    cp.optionxform = str
    cp.read(os.path.join(SAMPLES, arm + ".ini"))
    lu, au = LEN[cp["robot"].get("length_unit", "mm")], ANG[cp["robot"].get("angle_unit", "deg")]
    arm_d = {"name": cp["robot"].get("name", arm), "joints": [], "targets": []}
    for s in cp.sections():
        sec = cp[s]
        if s.startswith("joint "):
            j = {"name": s[6:], "P": sec["type"] == "prismatic"}
            u = lu if j["P"] else au
            j["offset"] = float(sec.get("offset", "0")) * u
            j["limits"] = [x * u for x in nums(sec["limits"])] if "limits" in sec else None
            if "axis" in sec:
                a = np.array(nums(sec["axis"]))
                j["axis"] = a / np.linalg.norm(a)
                j["point"] = np.array(nums(sec.get("point", "0 0 0"))) * lu
            else:
                key = "dh" if "dh" in sec else "mdh"
                v = nums(sec[key]) + [0.0]
                if key == "dh":
                    j["row"] = (v[0] * lu, v[1] * au, v[2] * lu, v[3] * au, v[4] * au)
                else:
                    j["row"] = (v[1] * lu, v[0] * au, v[2] * lu, v[3] * au, v[4] * au)
                arm_d["conv"] = key
            arm_d["joints"].append(j)
        elif s.startswith("target ") and "offset" in sec:
            arm_d["targets"].append((s[7:], np.array(nums(sec["offset"])) * lu))
    for key in ("home", "base", "flange"):
        if cp.has_section(key):
            arm_d[key] = pose(cp[key], lu, au)
    return arm_d


def frame_on_axis(a, p):
    """A frame with origin p and z along a; x from the base axis least
    aligned with a (a rule of this generator only)."""
    e = np.eye(3)[int(np.argmin(np.abs(a)))]
    x = np.cross(e, a)
    x /= np.linalg.norm(x)
    T = np.eye(4)
    T[:3, :3] = np.column_stack([x, np.cross(a, x), a])
    T[:3, 3] = p
    return T


def motion(j, t):
    """The 4x4 of joint j's own motion by t along or about local z."""
    return trans(0, 0, t) if j["P"] else rz(t)


def chain_axis_point(arm):
    """(origins, flange) of the URDF of an axis-and-point file."""
    prev = np.eye(4)
    origins = []
    for j in arm["joints"]:
        F = frame_on_axis(j["axis"], j["point"])
        origins.append(np.linalg.inv(prev) @ F @ motion(j, j["offset"]))
        prev = F
    return origins, np.linalg.inv(prev) @ arm["home"]


def chain_dh(arm):
    """(origins, flange) of the URDF of a DH file: split each row at
    its joint variable (module docstring)."""
    carry = arm.get("base", np.eye(4))
    origins = []
    for j in arm["joints"]:
        a, alpha, d, theta, beta = j["row"]
        if arm["conv"] == "dh":
            if j["P"]:
                origins.append(carry @ rz(theta) @ trans(0, 0, d + j["offset"]))
            else:
                origins.append(carry @ rz(theta + j["offset"]))
            carry = (np.eye(4) if j["P"] else trans(0, 0, d)) @ trans(a, 0, 0) @ rx(alpha) @ ry(beta)
        else:
            if j["P"]:
                origins.append(carry @ rx(alpha) @ trans(a, 0, 0) @ ry(beta) @ rz(theta)
                               @ trans(0, 0, d + j["offset"]))
                carry = np.eye(4)
            else:
                origins.append(carry @ rx(alpha) @ trans(a, 0, 0) @ ry(beta) @ rz(theta + j["offset"]))
                carry = trans(0, 0, d)
    return origins, carry @ arm.get("flange", np.eye(4))


def direct_fk(arm, q):
    """The flange from the model file's data alone (no URDF, no KDL)."""
    js = arm["joints"]
    if "conv" not in arm:
        T = np.eye(4)
        for j, x in zip(js, q):
            t = x + j["offset"]
            E = np.eye(4)
            if j["P"]:
                E[:3, 3] = j["axis"] * t
            else:
                R = rodrigues(j["axis"], t)
                E[:3, :3] = R
                E[:3, 3] = (np.eye(3) - R) @ j["point"]
            T = T @ E
        return T @ arm["home"]
    T = arm.get("base", np.eye(4)).copy()
    for j, x in zip(js, q):
        a, alpha, d, theta, beta = j["row"]
        th, dd = (theta, d + x + j["offset"]) if j["P"] else (theta + x + j["offset"], d)
        if arm["conv"] == "dh":
            T = T @ rz(th) @ trans(0, 0, dd) @ trans(a, 0, 0) @ rx(alpha) @ ry(beta)
        else:
            T = T @ rx(alpha) @ trans(a, 0, 0) @ ry(beta) @ rz(th) @ trans(0, 0, dd)
    return T @ arm.get("flange", np.eye(4))


def rpy_of(R):
    """URDF's rpy (R = Rz(y) Ry(p) Rx(r))."""
    p = math.asin(max(-1.0, min(1.0, -R[2, 0])))
    if abs(abs(p) - math.pi / 2) < 1e-12:
        return math.atan2(-R[1, 2], R[1, 1]), p, 0.0
    return math.atan2(R[2, 1], R[2, 2]), p, math.atan2(R[1, 0], R[0, 0])


def tidy(x):
    return 0.0 if abs(x) < 1e-13 else float(x)


def vec(v):
    return " ".join(fmt(tidy(x)) for x in v)


def origin_el(parent, T):
    ET.SubElement(parent, "origin", xyz=vec(T[:3, 3]), rpy=vec(rpy_of(T[:3, :3])))


def joint_el(robot, name, typ, parent, child, T, limits=None):
    ET.SubElement(robot, "link", name=child)
    j = ET.SubElement(robot, "joint", name=name, type=typ)
    ET.SubElement(j, "parent", link=parent)
    ET.SubElement(j, "child", link=child)
    origin_el(j, T)
    if typ != "fixed":
        ET.SubElement(j, "axis", xyz="0 0 1")
    if typ in ("revolute", "prismatic"):
        lim = {"effort": "10", "velocity": "1"}
        if limits is not None:
            lim = {"lower": fmt(limits[0]), "upper": fmt(limits[1]), **lim}
        ET.SubElement(j, "limit", **lim)


def urdf_of(arm):
    origins, flange = chain_axis_point(arm) if "conv" not in arm else chain_dh(arm)
    robot = ET.Element("robot", name=arm["name"])
    ET.SubElement(robot, "link", name="world")
    parent = "world"
    for k, (j, O) in enumerate(zip(arm["joints"], origins)):
        typ = "prismatic" if j["P"] else ("revolute" if j["limits"] else "continuous")
        joint_el(robot, j["name"], typ, parent, "link%d" % (k + 1), O, j["limits"])
        parent = "link%d" % (k + 1)
    joint_el(robot, "tool_joint", "fixed", parent, "tool0", flange)
    for name, off in arm["targets"]:
        T = np.eye(4)
        T[:3, 3] = off
        joint_el(robot, name + "_mount", "fixed", "tool0", name, T)
    return robot


def kdl_chain_of(root_el, tip):
    """A KDL chain from a URDF tree's root to tip, as kdl_parser builds it."""
    joints = {j.find("child").get("link"): j for j in root_el.findall("joint")}
    path = []
    link = tip
    while link in joints:
        path.append(joints[link])
        link = joints[link].find("parent").get("link")
    chain = kdl.Chain()
    for j in reversed(path):
        o = j.find("origin")
        xyz = [float(x) for x in o.get("xyz").split()]
        r, p, y = [float(x) for x in o.get("rpy").split()]
        F = kdl.Frame(kdl.Rotation.RPY(r, p, y), kdl.Vector(*xyz))
        typ = j.get("type")
        if typ == "fixed":
            kj = kdl.Joint(j.get("name"), kdl.Joint.Fixed)
        else:
            ax = kdl.Vector(*[float(x) for x in j.find("axis").get("xyz").split()])
            jt = kdl.Joint.TransAxis if typ == "prismatic" else kdl.Joint.RotAxis
            kj = kdl.Joint(j.get("name"), F.p, F.M * ax, jt)
        chain.addSegment(kdl.Segment(j.find("child").get("link"), kj, F))
    return chain


def check(arm, robot, rng):
    chain = kdl_chain_of(robot, "tool0")
    worst = 0.0
    for _ in range(N_CONFIGS):
        q = []
        for j in arm["joints"]:
            lo, hi = j["limits"] if j["limits"] else ((-0.1, 0.1) if j["P"] else (-math.pi, math.pi))
            q.append(rng.uniform(lo, hi))
        d = np.abs(kdl_fk(chain, q) - direct_fk(arm, q)).max()
        worst = max(worst, d)
    if worst > 1e-12:
        sys.exit("gen_urdf_samples: %s: KDL on the URDF differs from the model by %g" % (arm["name"], worst))


def write(robot, path, comment):
    ET.indent(robot, "  ")
    with open(path, "w") as f:
        f.write('<?xml version="1.0"?>\n<!-- %s -->\n' % comment)
        f.write(ET.tostring(robot, encoding="unicode"))
        f.write("\n")


def two_tips():
    robot = ET.Element("robot", name="twin")
    ET.SubElement(robot, "link", name="world")
    joint_el(robot, "pedestal", "fixed", "world", "pedestal_top", trans(0, 0, 0.5))
    for side, y in (("left", 0.3), ("right", -0.3)):
        parent = "pedestal_top"
        Ts = [trans(0, y, 0.1), trans(0, 0, 0.35) @ rx(math.pi / 2), trans(0.3, 0, 0)]
        for k, T in enumerate(Ts):
            joint_el(robot, "%s_j%d" % (side, k + 1), "revolute", parent, "%s_l%d" % (side, k + 1),
                     T, (-2.0, 2.0))
            parent = "%s_l%d" % (side, k + 1)
        joint_el(robot, side + "_tool", "fixed", parent, side + "_flange", trans(0.1, 0, 0))
    return robot


def main():
    out = out_dir(__doc__)
    rng = np.random.default_rng(SEED)
    for name in ARMS:
        arm = load(name)
        robot = urdf_of(arm)
        check(arm, robot, rng)
        write(robot, os.path.join(out, "urdf_%s.urdf" % name),
              "%s: written by tests/gen/gen_urdf_samples.py from samples/%s.ini; KDL checked"
              % (arm["name"], name))
    write(two_tips(), os.path.join(out, "urdf_two_tips.urdf"),
          "two arms on one base: written by tests/gen/gen_urdf_samples.py")


if __name__ == "__main__":
    main()
