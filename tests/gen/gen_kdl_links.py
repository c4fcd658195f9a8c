#!/usr/bin/python3
"""Reference forward kinematics and joint lines of DH tables with Hayati's beta, from Orocos KDL.

The arm is the sample arm tf6s with every DH number perturbed (seeded, up to
1 mm and 0.06 deg; the a of rows whose nominal a is 0 kept positive, so
the signs are those of twistfit's conversion) and Hayati's beta of
0.01 deg on the link between the parallel joints j2 and j3 (whose d is 0
in that form, Hayati 1983). It is written twice: in standard DH and
regrouped into modified DH (row i takes a, alpha and beta of row i-1, the
last link goes into the flange pose).

KDL chains:
  standard DH: Segment(Joint(RotZ), Frame.DH(a, alpha, d, theta)), then for
               a nonzero beta a fixed Segment(Frame(Rotation.RotY(beta))):
               Rz(theta + q) Tz(d) Tx(a) Rx(alpha) Ry(beta);
  modified DH: a fixed Segment(Frame.DH_Craig1989(a, alpha, 0, 0) *
               Frame(Rotation.RotY(beta))), then
               Segment(Joint(RotZ), Frame.DH_Craig1989(0, 0, d, theta)):
               Rx(alpha) Tx(a) Ry(beta) Rz(theta + q) Tz(d);
  a last fixed segment carries the flange pose in the last DH frame.

Each KDL result is verified here against a direct product of the
elementary 4x4 matrices (NumPy); the generator stops if they differ beyond
1e-12. The joint lines at q = 0 are taken from KDL too: for each moving
segment, the frame at its root (the product of the segments before it,
Segment.pose(0)) applied to the joint's JointOrigin() and JointAxis().

Output: kdl_links_<arm>.csv in the output directory (default tests/fixtures).
Lines starting with '#' are comments; other lines start with a keyword:
    convention,<standard|modified>
    joint,<name>,<R|P>,<a>,<alpha>,<d>,<theta>,<beta>,<lo>,<hi>
        in the twf_dh_row sense (modified: a, alpha, beta of link i-1);
    flange,<px>,<py>,<pz>,<R00>,...,<R22>   flange in the last DH frame;
    line,<name>,<ux>,<uy>,<uz>,<px>,<py>,<pz>   joint line at q = 0 (KDL);
    home,<px>,<py>,<pz>,<R00>,...,<R22>     flange at q = 0 (KDL);
    fk,<q1>,...,<qn>,<px>,<py>,<pz>,<R00>,...,<R22>
Units: metres and radians; rotations row-major; values printed with
repr() (exact round trip). Deterministic (fixed seed); compare a
regeneration with tests/gen/compare_fixtures.py.

Run with Debian's interpreter:  /usr/bin/python3 tests/gen/gen_kdl_links.py [--out DIR]
"""
import math
import os
import sys

import numpy as np
import PyKDL as kdl

sys.dont_write_bytecode = True  # leave no __pycache__ in the source tree
sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
from genutil import fmt, kdl_fk, kdl_frame, out_dir, pose_fields, rx, ry, rz, trans  # noqa: E402

SEED = 20261207
N_CONFIGS = 40
D = math.pi / 180.0
BETA = 0.01 * D

# tf6s (invented sample arm), rows (a, alpha_deg, d, theta_deg, lo_deg, hi_deg)
TF6S = [
    (0.150, -90, 0.450, 0, -170, 170),
    (0.610, 0, 0, -90, -100, 145),
    (0.115, -90, 0, 0, -120, 155),
    (0, 90, 0.640, 0, -185, 185),
    (0, -90, 0, 0, -125, 125),
    (0, 0, 0.095, 0, -350, 350),
]
BETA_ROW = 1  # 0-based: the link from j2 to j3


def perturbed_rows(rng):
    rows = []
    for i, (a, alpha, d, theta, lo, hi) in enumerate(TF6S):
        da = rng.uniform(-1e-3, 1e-3)
        a2 = abs(da) if a == 0 else a + da
        beta = BETA if i == BETA_ROW else 0.0
        d2 = 0.0 if i == BETA_ROW else d + rng.uniform(-1e-3, 1e-3)
        # theta of row 1 and d of row 1 sit where the base frame puts them;
        # keep the first joint's frame as the base's (frame 0 = base)
        rows.append(("R", a2, alpha * D + rng.uniform(-1e-3, 1e-3), d2,
                     theta * D + rng.uniform(-1e-3, 1e-3), beta, lo * D, hi * D))
    return rows


def direct_fk(rows, conv, flange, q):
    """Direct product of the elementary matrices (src/include/twistfit/model.h)."""
    T = np.eye(4)
    for (typ, a, alpha, d, theta, beta, _, _), qi in zip(rows, q):
        th = theta + qi
        if conv == "standard":
            A = rz(th) @ trans(0, 0, d) @ trans(a, 0, 0) @ rx(alpha) @ ry(beta)
        else:
            A = rx(alpha) @ trans(a, 0, 0) @ ry(beta) @ rz(th) @ trans(0, 0, d)
        T = T @ A
    return T @ flange


def kdl_chain(rows, conv, flange):
    chain = kdl.Chain()
    for typ, a, alpha, d, theta, beta, _, _ in rows:
        if conv == "standard":
            chain.addSegment(kdl.Segment(kdl.Joint(kdl.Joint.RotZ),
                                         kdl.Frame.DH(a, alpha, d, theta)))
            if beta != 0.0:
                chain.addSegment(kdl.Segment(kdl.Joint(kdl.Joint.Fixed),
                                             kdl.Frame(kdl.Rotation.RotY(beta))))
        else:
            chain.addSegment(kdl.Segment(
                kdl.Joint(kdl.Joint.Fixed),
                kdl.Frame.DH_Craig1989(a, alpha, 0.0, 0.0) *
                kdl.Frame(kdl.Rotation.RotY(beta))))
            chain.addSegment(kdl.Segment(kdl.Joint(kdl.Joint.RotZ),
                                         kdl.Frame.DH_Craig1989(0.0, 0.0, d, theta)))
    chain.addSegment(kdl.Segment(kdl.Joint(kdl.Joint.Fixed), kdl_frame(flange)))
    return chain


def kdl_lines(chain):
    """Joint lines at q = 0 in the base frame, from the segments' roots."""
    F = kdl.Frame()
    out = []
    for k in range(chain.getNrOfSegments()):
        seg = chain.getSegment(k)
        jt = seg.getJoint()
        if jt.getType() != kdl.Joint.Fixed:
            u = F.M * jt.JointAxis()
            p = F * jt.JointOrigin()
            out.append(([u[0], u[1], u[2]], [p[0], p[1], p[2]]))
        F = F * seg.pose(0.0)
    return out


def std_to_mdh(rows, flange):
    out = []
    prev = (0.0, 0.0, 0.0)
    for typ, a, alpha, d, theta, beta, lo, hi in rows:
        out.append((typ, prev[0], prev[1], d, theta, prev[2], lo, hi))
        prev = (a, alpha, beta)
    return out, rx(prev[1]) @ trans(prev[0], 0, 0) @ ry(prev[2]) @ flange


def write_arm(outdir, name, rows, conv, flange, rng, note):
    chain = kdl_chain(rows, conv, flange)
    lines = []
    worst = 0.0
    for c in range(N_CONFIGS):
        q = [rng.uniform(lo, hi) for (_, _, _, _, _, _, lo, hi) in rows]
        T = kdl_fk(chain, q)
        err = float(np.max(np.abs(T - direct_fk(rows, conv, flange, q))))
        worst = max(worst, err)
        if err > 1e-12:
            sys.exit("gen_kdl_links: KDL and the direct product differ by %g on %s"
                     % (err, name))
        lines.append("fk," + ",".join(fmt(v) for v in list(q) + pose_fields(T)))
    home = kdl_fk(chain, [0.0] * len(rows))
    jl = kdl_lines(chain)
    path = os.path.join(outdir, "kdl_links_%s.csv" % name)
    with open(path, "w") as f:
        f.write("# Forward kinematics and joint lines of the DH table below (%s).\n" % note)
        f.write("# reference: Orocos KDL (PyKDL %s) ChainFkSolverPos_recursive, %s, beta as "
                "a RotY segment; NumPy %s; generated by tests/gen/gen_kdl_links.py, seed %d\n"
                % (kdl.__version__,
                   "Frame.DH" if conv == "standard" else "Frame.DH_Craig1989",
                   np.__version__, SEED))
        f.write("# verified against a direct product of the DH matrices: worst "
                "difference %.1e\n" % worst)
        f.write("# units: metres, radians; rotations row-major\n")
        f.write("convention,%s\n" % conv)
        for i, (typ, a, alpha, d, theta, beta, lo, hi) in enumerate(rows):
            f.write("joint,j%d,%s,%s\n" % (i + 1, typ, ",".join(
                fmt(v) for v in (a, alpha, d, theta, beta, lo, hi))))
        f.write("flange," + ",".join(fmt(v) for v in pose_fields(flange)) + "\n")
        for i, (u, p) in enumerate(jl):
            f.write("line,j%d,%s\n" % (i + 1, ",".join(fmt(v) for v in u + p)))
        f.write("home," + ",".join(fmt(v) for v in pose_fields(home)) + "\n")
        for line in lines:
            f.write(line + "\n")
    return path, worst


def main():
    out = out_dir(__doc__)
    # RandomState: a stream NumPy keeps across versions
    rng = np.random.RandomState(SEED)
    rows = perturbed_rows(rng)
    jobs = [("tf6s_beta", rows, "standard", np.eye(4),
             "perturbed tf6s with beta 0.01 deg on j2-j3, standard DH")]
    mrows, mflange = std_to_mdh(rows, np.eye(4))
    jobs.append(("tf6s_beta_mdh", mrows, "modified", mflange,
                 "the same arm regrouped into modified DH"))
    for name, r, conv, flange, note in jobs:
        path, worst = write_arm(out, name, r, conv, flange, rng, note)
        print("gen_kdl_links: wrote %s (KDL vs direct %.1e)" % (path, worst))


if __name__ == "__main__":
    main()
