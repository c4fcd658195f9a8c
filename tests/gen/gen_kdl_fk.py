#!/usr/bin/python3
"""Reference forward kinematics of DH tables from Orocos KDL.

For each arm below (the project's four invented sample arms, two of them
also converted to modified DH, and one general table with unround values
in each convention) this draws 50 joint configurations within the limits
and writes the flange pose computed by KDL's ChainFkSolverPos_recursive:

  standard DH: Segment(Joint(RotZ | TransZ), Frame.DH(a, alpha, d, theta)),
               that is Rz(theta + q) Tz(d) Tx(a) Rx(alpha);
  modified DH: Segment(Joint(origin, axis, RotAxis | TransAxis),
               Frame.DH_Craig1989(a, alpha, d, theta)), where origin and
               axis are the origin and z-axis of DH_Craig1989(a, alpha, 0, 0)
               so that the joint turns about z_i after Rx(alpha) Tx(a):
               Rx(alpha) Tx(a) Rz(theta + q) Tz(d);
  a prismatic joint adds q to d; a last fixed segment carries the flange
  pose in the last DH frame.

Each KDL result is verified here against a direct product of the
elementary 4x4 matrices (NumPy); the generator stops if they differ beyond
1e-12, so the KDL construction above is known to mean what it says.

Output: kdl_fk_<arm>.csv in the output directory (default tests/fixtures).
Lines starting with '#' are comments; other lines start with a keyword:
    convention,<standard|modified>
    joint,<name>,<R|P>,<a>,<alpha>,<d>,<theta>,<lo>,<hi>
        one per joint, in order, in the twf_dh_row sense (for modified DH,
        a and alpha are a_(i-1) and alpha_(i-1)); limits on q;
    flange,<px>,<py>,<pz>,<R00>,...,<R22>
        the flange pose in the last DH frame;
    fk,<q1>,...,<qn>,<px>,<py>,<pz>,<R00>,...,<R22>
        joint values and the flange pose in the base frame.
Units: metres and radians (degrees of the arm tables converted here);
rotations row-major; values printed with repr() (exact round trip).

Deterministic (fixed seed). CI regenerates into a temporary directory and
compares with tests/gen/compare_fixtures.py (comment lines ignored, numbers
compared with relative tolerance 1e-12, absolute 1e-15 near zero).

Run with Debian's interpreter:  /usr/bin/python3 tests/gen/gen_kdl_fk.py [--out DIR]
"""
import math
import os
import sys

import numpy as np
import PyKDL as kdl

# The matrices, the KDL conversions and the command line: genutil.py (the
# other generators import them from here too).
sys.dont_write_bytecode = True  # leave no __pycache__ in the source tree
sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
from genutil import fmt, kdl_fk, kdl_frame, out_dir, pose_fields, rx, rz, trans  # noqa: E402,F401

SEED = 20260311
N_CONFIGS = 50
D = math.pi / 180.0

# The sample arms (invented). Rows: (type, a, alpha_deg, d, theta_deg, lo, hi)
# with limits in degrees for revolute and millimetres for prismatic joints.
ARMS_STD = {
    "tf6s": [
        ("R", 0.150, -90, 0.450, 0, -170, 170),
        ("R", 0.610, 0, 0, -90, -100, 145),
        ("R", 0.115, -90, 0, 0, -120, 155),
        ("R", 0, 90, 0.640, 0, -185, 185),
        ("R", 0, -90, 0, 0, -125, 125),
        ("R", 0, 0, 0.095, 0, -350, 350),
    ],
    "tf6p": [
        ("R", 0, 90, 0.171, 0, -360, 360),
        ("R", -0.480, 0, 0, 0, -360, 360),
        ("R", -0.405, 0, 0, 0, -170, 170),
        ("R", 0, 90, 0.118, 0, -360, 360),
        ("R", 0, -90, 0.108, 0, -360, 360),
        ("R", 0, 0, 0.086, 0, -360, 360),
    ],
    "tf4p": [
        ("R", 0.325, 0, 0.200, 0, -140, 140),
        ("R", 0.275, 180, 0, 0, -145, 145),
        ("P", 0, 0, 0, 0, 0, 200),
        ("R", 0, 0, 0.050, 0, -360, 360),
    ],
}
# tf7 in modified DH: rows (type, a_(i-1), alpha_(i-1) deg, d_i, theta_i deg, lo, hi).
ARMS_MDH = {
    "tf7": [
        ("R", 0, 0, 0.340, 0, -165, 165),
        ("R", 0, -90, 0, 0, -100, 100),
        ("R", 0, 90, 0.400, 0, -165, 165),
        ("R", 0.060, 90, 0, 0, -170, -5),
        ("R", -0.060, -90, 0.390, 0, -165, 165),
        ("R", 0, 90, 0, 0, -5, 210),
        ("R", 0.080, 90, 0, 0, -170, 170),
    ],
}
FLANGE_TF7 = np.array([[1, 0, 0, 0], [0, 1, 0, 0], [0, 0, 1, 0.110],
                       [0, 0, 0, 1]], dtype=float)


def to_si(rows):
    """Degrees and millimetres of the tables to radians and metres."""
    out = []
    for typ, a, alpha, d, theta, lo, hi in rows:
        f = D if typ == "R" else 1e-3
        out.append((typ, float(a), alpha * D, float(d), theta * D, lo * f,
                    hi * f))
    return out


def direct_fk(rows, conv, flange, q):
    """Direct product of the elementary DH matrices (the definitions in
    src/twistfit.h), to verify the KDL chain."""
    T = np.eye(4)
    for (typ, a, alpha, d, theta, _, _), qi in zip(rows, q):
        th = theta + (qi if typ == "R" else 0.0)
        dd = d + (qi if typ == "P" else 0.0)
        if conv == "standard":
            A = rz(th) @ trans(0, 0, dd) @ trans(a, 0, 0) @ rx(alpha)
        else:
            A = rx(alpha) @ trans(a, 0, 0) @ rz(th) @ trans(0, 0, dd)
        T = T @ A
    return T @ flange


def kdl_chain(rows, conv, flange):
    chain = kdl.Chain()
    for typ, a, alpha, d, theta, _, _ in rows:
        if conv == "standard":
            jt = kdl.Joint(kdl.Joint.RotZ if typ == "R" else kdl.Joint.TransZ)
            chain.addSegment(kdl.Segment(jt, kdl.Frame.DH(a, alpha, d, theta)))
        else:
            F0 = kdl.Frame.DH_Craig1989(a, alpha, 0.0, 0.0)
            origin = F0.p
            axis = F0.M * kdl.Vector(0.0, 0.0, 1.0)
            jt = kdl.Joint("", origin, axis,
                           kdl.Joint.RotAxis if typ == "R" else kdl.Joint.TransAxis)
            chain.addSegment(kdl.Segment(
                jt, kdl.Frame.DH_Craig1989(a, alpha, d, theta)))
    chain.addSegment(kdl.Segment(kdl.Joint(kdl.Joint.Fixed), kdl_frame(flange)))
    return chain


def std_to_mdh(rows, flange):
    """Standard DH to modified DH for the same chain. Tx(a) and Rx(alpha)
    commute, so A_1 ... A_n = [Rz Tz]_1 [Rx Tx Rz Tz]_2 ... [Rx Tx]_(n+1):
    row i takes a, alpha of row i-1 (0 for the first) and the last a, alpha
    move into the flange pose."""
    out = []
    prev_a, prev_alpha = 0.0, 0.0
    for typ, a, alpha, d, theta, lo, hi in rows:
        out.append((typ, prev_a, prev_alpha, d, theta, lo, hi))
        prev_a, prev_alpha = a, alpha
    return out, rx(prev_alpha) @ trans(prev_a, 0, 0) @ flange


def random_rotation(rng):
    q = rng.normal(size=4)
    w, x, y, z = q / np.linalg.norm(q)
    return np.array([
        [1 - 2 * (y * y + z * z), 2 * (x * y - w * z), 2 * (x * z + w * y)],
        [2 * (x * y + w * z), 1 - 2 * (x * x + z * z), 2 * (y * z - w * x)],
        [2 * (x * z - w * y), 2 * (y * z + w * x), 1 - 2 * (x * x + y * y)]])


def general_arm(rng):
    """A 6-joint table with unround values everywhere, joint 3 prismatic,
    and a flange pose with rotation: exercises what the samples do not."""
    rows = []
    for i in range(6):
        typ = "P" if i == 2 else "R"
        lo, hi = (-0.12, 0.31) if typ == "P" else (-3.1, 3.1)
        rows.append((typ, rng.uniform(-0.4, 0.4), rng.uniform(-math.pi, math.pi),
                     rng.uniform(-0.4, 0.4), rng.uniform(-math.pi, math.pi),
                     lo, hi))
    F = np.eye(4)
    F[:3, :3] = random_rotation(rng)
    F[:3, 3] = rng.uniform(-0.15, 0.15, size=3)
    return rows, F


def write_arm(outdir, name, rows, conv, flange, rng, note):
    chain = kdl_chain(rows, conv, flange)
    lines = []
    worst = 0.0
    for _ in range(N_CONFIGS):
        q = [rng.uniform(lo, hi) for (_, _, _, _, _, lo, hi) in rows]
        T = kdl_fk(chain, q)
        T2 = direct_fk(rows, conv, flange, q)
        err = float(np.max(np.abs(T - T2)))
        worst = max(worst, err)
        if err > 1e-12:
            sys.exit("gen_kdl_fk: KDL and the direct DH product differ by %g "
                     "on %s" % (err, name))
        vals = list(q) + pose_fields(T)
        lines.append("fk," + ",".join(fmt(v) for v in vals))
    path = os.path.join(outdir, "kdl_fk_%s.csv" % name)
    with open(path, "w") as f:
        f.write("# Forward kinematics of the DH table below (%s).\n" % note)
        f.write("# reference: Orocos KDL (PyKDL %s) ChainFkSolverPos_recursive, "
                "%s; NumPy %s; generated by tests/gen/gen_kdl_fk.py, seed %d\n"
                % (kdl.__version__,
                   "Frame.DH" if conv == "standard" else "Frame.DH_Craig1989",
                   np.__version__, SEED))
        f.write("# verified against a direct product of the DH matrices: "
                "worst difference %.1e\n" % worst)
        f.write("# units: metres, radians; rotations row-major\n")
        f.write("# joint,name,type,a,alpha,d,theta,lo,hi | flange,px,py,pz,R00..R22"
                " | fk,q1..q%d,px,py,pz,R00..R22\n" % len(rows))
        f.write("convention,%s\n" % conv)
        for i, (typ, a, alpha, d, theta, lo, hi) in enumerate(rows):
            f.write("joint,j%d,%s,%s\n" % (i + 1, typ, ",".join(
                fmt(v) for v in (a, alpha, d, theta, lo, hi))))
        f.write("flange," + ",".join(fmt(v) for v in pose_fields(flange)) + "\n")
        for line in lines:
            f.write(line + "\n")
    return path, worst


def main():
    out = out_dir(__doc__)

    # RandomState: NumPy guarantees its stream across versions (Generator
    # does not), so regenerated files stay identical.
    rng = np.random.RandomState(SEED)
    jobs = []
    for name in ("tf6s", "tf6p", "tf4p"):
        jobs.append((name, to_si(ARMS_STD[name]), "standard", np.eye(4),
                     "sample arm %s, standard DH" % name))
    jobs.append(("tf7", to_si(ARMS_MDH["tf7"]), "modified", FLANGE_TF7,
                 "sample arm tf7, modified DH"))
    for name in ("tf6s", "tf4p"):
        rows, flange = std_to_mdh(to_si(ARMS_STD[name]), np.eye(4))
        jobs.append((name + "_mdh", rows, "modified", flange,
                     "sample arm %s converted to modified DH" % name))
    rows, flange = general_arm(rng)
    jobs.append(("gen6", rows, "standard", flange,
                 "invented general arm, unround values, standard DH"))
    rows, flange = general_arm(rng)
    jobs.append(("gen6_mdh", rows, "modified", flange,
                 "invented general arm, unround values, modified DH"))

    for name, rows, conv, flange, note in jobs:
        path, worst = write_arm(out, name, rows, conv, flange, rng, note)
        print("gen_kdl_fk: wrote %s (KDL vs direct %.1e)" % (path, worst))


if __name__ == "__main__":
    main()
