#!/usr/bin/python3
"""The exported DH tables against Orocos KDL (Debian python3-pykdl).

For every sample arm (samples/*.ini) and a calibrated model (the README's
demo calibration, run in a scratch folder) this exports --as dh, --as mdh
and, where twistfit accepts it, --as dh --no-beta and --as mdh --no-beta;
builds a KDL chain from the rows as written in each exported file:
    standard:  Segment(Joint(RotZ or TransZ), Frame.DH(a, alpha, d, theta)),
               then for a nonzero beta Segment(Joint(Fixed),
               Frame(Rotation.RotY(beta))):  Rz(theta + q) Tz(d) Tx(a)
               Rx(alpha) Ry(beta)
    modified:  Segment(Joint(Fixed), Frame.DH_Craig1989(a, alpha, 0, 0) *
               Frame(Rotation.RotY(beta))), then Segment(Joint(RotZ or
               TransZ), Frame.DH_Craig1989(0, 0, d, theta))
with the [base] pose before the first segment and the [flange] pose after
the last (the segments of tests/gen/gen_kdl_links.py), and compares KDL's
forward kinematics (ChainFkSolverPos_recursive) with `twistfit fk` of the
source model at seeded random configurations within the joint limits: the
flange position within 1e-9 m and its orientation within 1e-9 rad with
beta; without beta within the residual the export reports (at least
1e-9). The target positions (flange pose times the offsets the file
carries) are compared too.

Then the refusal of --no-beta: tf6s with joint 3's axis tilted by 1e-7
rad toward joint 2's (about the direction perpendicular to both axes and
their connecting line, which sends the common normal's foot kilometres
away) is refused with exit status 5; tilts that put the foot at half and
at twice 10 times the reach are accepted and refused.

Usage: kdl_dh_export.py SRCDIR TWISTFIT. Exit 0 when everything agrees, 1
otherwise, 77 (skipped) without PyKDL.
"""
import configparser
import glob
import math
import os
import re
import subprocess
import sys
import tempfile

import numpy as np

try:
    import PyKDL as kdl
except ImportError:
    print("SKIP: PyKDL (Debian python3-pykdl) is not installed")
    sys.exit(77)

SRC, TWISTFIT = sys.argv[1], sys.argv[2]
sys.path.insert(0, os.path.join(SRC, "tests", "gen"))
import genutil  # noqa: E402

LENGTH = {"mm": 1e-3, "m": 1.0, "um": 1e-6, "in": 0.0254}
ANGLE = {"deg": math.pi / 180, "rad": 1.0, "mrad": 1e-3}
SEED = 20261203
CONFIGS = 25
TOL = 1e-9
failures = []


def run(args, cwd=None):
    p = subprocess.run([TWISTFIT] + args, cwd=cwd, capture_output=True, text=True)
    return p.returncode, p.stdout, p.stderr


def read_model(path):
    cp = configparser.ConfigParser(comment_prefixes=(";", "#"), inline_comment_prefixes=(";",),
                                   strict=False, interpolation=None)
    with open(path) as f:
        cp.read_string(f.read())
    return cp


def nums(s):
    return [float(x) for x in s.split()]


def pose_of(cp, section, lu):
    T = np.eye(4)
    if cp.has_section(section):
        p = nums(cp[section].get("position", "0 0 0"))
        q = nums(cp[section].get("quaternion_wxyz", "1 0 0 0"))
        R = kdl.Rotation.Quaternion(q[1], q[2], q[3], q[0])
        T = genutil.frame_to_np(kdl.Frame(R, kdl.Vector(*[x * lu for x in p])))
    return T


def joints_of(cp):
    """(name, type, values, scale, lo, hi) in SI, in file order."""
    lu = LENGTH[cp["robot"].get("length_unit", "mm")]
    au = ANGLE[cp["robot"].get("angle_unit", "deg")]
    out = []
    for sec in cp.sections():
        if not sec.startswith("joint "):
            continue
        s = cp[sec]
        prismatic = s.get("type", "revolute") == "prismatic"
        u = lu if prismatic else au
        lim = nums(s["limits"]) if "limits" in s else None
        lo, hi = (lim[0] * u, lim[1] * u) if lim else ((-0.5, 0.5) if prismatic else (-math.pi, math.pi))
        out.append((sec[6:], prismatic, s, float(s.get("scale", "1")), lo, hi, lu, au))
    return out


def kdl_chain(cp):
    """The KDL chain of an exported DH file, the numbers read as written."""
    lu = LENGTH[cp["robot"]["length_unit"]]
    au = ANGLE[cp["robot"]["angle_unit"]]
    chain = kdl.Chain()
    chain.addSegment(kdl.Segment(kdl.Joint(kdl.Joint.Fixed), genutil.kdl_frame(pose_of(cp, "base", lu))))
    for name, prismatic, s, _, _, _, _, _ in joints_of(cp):
        jt = kdl.Joint(kdl.Joint.TransZ if prismatic else kdl.Joint.RotZ)
        if "dh" in s:
            v = nums(s["dh"])
            a, alpha, d, theta = v[0] * lu, v[1] * au, v[2] * lu, v[3] * au
            beta = v[4] * au if len(v) > 4 else 0.0
            chain.addSegment(kdl.Segment(jt, kdl.Frame.DH(a, alpha, d, theta)))
            if beta != 0.0:
                chain.addSegment(kdl.Segment(kdl.Joint(kdl.Joint.Fixed),
                                             kdl.Frame(kdl.Rotation.RotY(beta))))
        else:
            v = nums(s["mdh"])
            alpha, a, d, theta = v[0] * au, v[1] * lu, v[2] * lu, v[3] * au
            beta = v[4] * au if len(v) > 4 else 0.0
            chain.addSegment(kdl.Segment(kdl.Joint(kdl.Joint.Fixed),
                                         kdl.Frame.DH_Craig1989(a, alpha, 0.0, 0.0) *
                                         kdl.Frame(kdl.Rotation.RotY(beta))))
            chain.addSegment(kdl.Segment(jt, kdl.Frame.DH_Craig1989(0.0, 0.0, d, theta)))
    chain.addSegment(kdl.Segment(kdl.Joint(kdl.Joint.Fixed), genutil.kdl_frame(pose_of(cp, "flange", lu))))
    return chain


def targets_of(cp):
    lu = LENGTH[cp["robot"]["length_unit"]]
    out = []
    for sec in cp.sections():
        if sec.startswith("target ") and "offset" in cp[sec]:
            out.append((sec[7:], np.array(nums(cp[sec]["offset"])) * lu))
    return out


def configurations(joints, rng):
    return [[rng.uniform(lo, hi) for (_, _, _, _, lo, hi, _, _) in joints] for _ in range(CONFIGS)]


def twistfit_fk(model, joints, qs, work):
    """`twistfit fk` of model at qs (SI): per row the flange 4x4 and the
    target positions by name."""
    path = os.path.join(work, "joints.csv")
    with open(path, "w") as f:
        f.write("pose," + ",".join(j[0] for j in joints) + "\n")
        for k, q in enumerate(qs):
            f.write("c%d," % k + ",".join(repr(x) for x in q) + "\n")
    st, out, err = run(["fk", model, path, "--angle-unit", "rad", "--length-unit", "m",
                        "--output-length-unit", "m"])
    if st != 0:
        sys.exit("twistfit fk %s failed (%d): %s" % (model, st, err))
    lines = out.strip().splitlines()
    head = [h.strip('"') for h in lines[0].split(",")]
    rows = []
    for line in lines[1:]:
        v = dict(zip(head, line.split(",")))
        T = np.eye(4)
        T[:3, 3] = [float(v["flange_%s_m" % c]) for c in "xyz"]
        qw, qx, qy, qz = (float(v["flange_q%s" % c]) for c in "wxyz")
        R = kdl.Rotation.Quaternion(qx, qy, qz, qw)
        for i in range(3):
            for j in range(3):
                T[i, j] = R[i, j]
        tg = {}
        for h in head:
            m = re.match(r"(.+)_x_m$", h)
            if m and m.group(1) != "flange":
                tg[m.group(1)] = np.array([float(v["%s_%s_m" % (m.group(1), c)]) for c in "xyz"])
        rows.append((T, tg))
    return rows


def angle_between(A, B):
    c = (np.trace(A[:3, :3].T @ B[:3, :3]) - 1.0) / 2.0
    s = np.linalg.norm(np.array([
        (A[:3, :3].T @ B[:3, :3])[2, 1] - (A[:3, :3].T @ B[:3, :3])[1, 2],
        (A[:3, :3].T @ B[:3, :3])[0, 2] - (A[:3, :3].T @ B[:3, :3])[2, 0],
        (A[:3, :3].T @ B[:3, :3])[1, 0] - (A[:3, :3].T @ B[:3, :3])[0, 1]])) / 2.0
    return math.atan2(s, c)


def reported_residual(path):
    """The residual the export states in its file: max position (m) and
    angle (rad)."""
    with open(path) as f:
        m = re.search(r"position max ([0-9.e+-]+) um, angle max ([0-9.e+-]+) urad", f.read())
    return float(m.group(1)) * 1e-6, float(m.group(2)) * 1e-6


def check_table(label, source, exported, work, rng):
    """KDL chain of exported against twistfit fk of source."""
    cp = read_model(exported)
    joints = joints_of(cp)
    qs = configurations(joints, rng)
    ref = twistfit_fk(source, joints, qs, work)
    chain = kdl_chain(cp)
    targets = targets_of(cp)
    tol_p, tol_a = TOL, TOL
    if "no-beta" in label:
        rp, ra = reported_residual(exported)
        tol_p, tol_a = max(TOL, 2 * rp), max(TOL, 2 * ra)
    worst_p = worst_a = 0.0
    for q, (T_ref, tg_ref) in zip(qs, ref):
        qdh = [j[3] * x for j, x in zip(joints, q)]  # the DH variable is scale * q
        T = genutil.kdl_fk(chain, qdh)
        worst_p = max(worst_p, float(np.linalg.norm(T[:3, 3] - T_ref[:3, 3])))
        worst_a = max(worst_a, angle_between(T, T_ref))
        for name, off in targets:
            p = T[:3, :3] @ off + T[:3, 3]
            worst_p = max(worst_p, float(np.linalg.norm(p - tg_ref[name])))
    ok = worst_p <= tol_p and worst_a <= tol_a
    print("%s %s: KDL against twistfit fk of the source, %d configurations: position %.2g m "
          "(tolerance %.2g), angle %.2g rad (tolerance %.2g)"
          % ("ok  " if ok else "FAIL", label, len(qs), worst_p, tol_p, worst_a, tol_a))
    if not ok:
        failures.append(label)


def export(source, args, out):
    st, _, err = run(["-q", "export", source] + args + ["-o", out, "-f"])
    return st, err


def check_model(name, source, work, rng):
    for conv in ("dh", "mdh"):
        for beta in (True, False):
            out = os.path.join(work, "%s-%s%s.ini" % (name, conv, "" if beta else "-nobeta"))
            st, err = export(source, ["--as", conv] + ([] if beta else ["--no-beta"]), out)
            label = "%s --as %s%s" % (name, conv, "" if beta else " --no-beta")
            if not beta and st == 5:
                print("ok   %s: refused (status 5), as for nearly parallel axes" % label)
                continue
            if st != 0:
                print("FAIL %s: export status %d: %s" % (label, st, err.strip()))
                failures.append(label)
                continue
            check_table(label, source, out, work, rng)


def tilted_tf6s(work, e, name):
    """tf6s with joint 3's axis turned by e about the base x axis (joints 2
    and 3 are parallel to y and stacked along z: x is perpendicular to both
    the axes and their connecting line)."""
    with open(os.path.join(SRC, "samples", "tf6s.ini")) as f:
        text = f.read()
    head, sep, rest = text.partition("[joint j3]")
    rest = rest.replace("axis = 0 1 0", "axis = 0 %r %r" % (math.cos(e), math.sin(e)), 1)
    path = os.path.join(work, name)
    with open(path, "w") as f:
        f.write(head + sep + rest)
    return path


def check_refusal(work, rng):
    src = tilted_tf6s(work, 1e-7, "tilt-1e-7.ini")
    out = os.path.join(work, "tilt-plain.ini")
    st, err = export(src, ["--as", "dh", "--no-beta"], out)
    m = re.search(r"10 times the reach, ([0-9.e+-]+) m", err)
    ok = st == 5 and m is not None and not os.path.exists(out)
    print("%s tf6s, j3 tilted by 1e-7 rad: --no-beta status %d (expected 5, nothing written)"
          % ("ok  " if ok else "FAIL", st))
    if not ok:
        failures.append("refusal")
        return
    st_b, _ = export(src, ["--as", "dh"], os.path.join(work, "tilt-beta.ini"))
    if st_b != 0:
        failures.append("tilt with beta")
        print("FAIL tf6s tilted: --as dh (with beta) status %d" % st_b)
    else:
        check_table("tf6s tilted 1e-7 --as dh", src, os.path.join(work, "tilt-beta.ini"), work, rng)
    # the foot of the common normal lies about 0.61 m / tan(e) along the
    # axes (the j2-j3 distance over the tilt): put it at half and at twice
    # the limit of 10 times the reach
    limit = 10 * float(m.group(1))
    for factor, want in ((0.5, 0), (2.0, 5)):
        e = math.atan(0.61 / (factor * limit))
        src = tilted_tf6s(work, e, "tilt-%g.ini" % factor)
        out = os.path.join(work, "tilt-%g-plain.ini" % factor)
        st, err = export(src, ["--as", "dh", "--no-beta"], out)
        ok = st == want
        print("%s tf6s, j3 tilted by %.3g rad (foot at %g x the limit of %.3g m): --no-beta "
              "status %d, expected %d" % ("ok  " if ok else "FAIL", e, factor, limit, st, want))
        if not ok:
            failures.append("threshold %g" % factor)
        elif want == 0:
            check_table("tf6s tilted %.3g --as dh --no-beta" % e, src, out, work, rng)


def main():
    rng = np.random.RandomState(SEED)
    with tempfile.TemporaryDirectory() as work:
        for path in sorted(glob.glob(os.path.join(SRC, "samples", "*.ini"))):
            check_model(os.path.basename(path)[:-4], path, work, rng)
        asbuilt = os.path.join(work, "asbuilt.ini")
        st, _, err = run(["-q", "calibrate", os.path.join(SRC, "samples", "tf6s.ini"),
                          os.path.join(SRC, "samples", "demo-campaign.csv"), "-o", asbuilt])
        if st != 0:
            sys.exit("the demo calibration failed (%d): %s" % (st, err))
        check_model("calibrated tf6s", asbuilt, work, rng)
        check_refusal(work, rng)
    if failures:
        print("FAIL: %d check(s): %s" % (len(failures), "; ".join(failures)))
        return 1
    print("PASS: every exported table agrees with KDL (Orocos KDL %s)"
          % getattr(kdl, "__version__", "via Debian python3-pykdl"))
    return 0


if __name__ == "__main__":
    sys.exit(main())
