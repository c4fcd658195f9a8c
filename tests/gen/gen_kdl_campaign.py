#!/usr/bin/python3
"""Reference calibration campaign from Orocos KDL: a perturbed tf6s arm.

The "true" arm is the sample arm tf6s (standard DH, notes in
tests/gen/gen_kdl_fk.py and DEVELOPERS.md) with every DH parameter changed
by the invented amounts of DELTA below (up to 0.5 mm and 0.05 degrees; still
a DH arm). It is seen from a laser tracker whose frame is metres away and
turned about a skew axis (BASE_*), and carries three reflector nests whose
offsets lie a few millimetres off the drawing values (TARGETS_TRUE).

Every tracker-frame position is computed by KDL's ChainFkSolverPos_recursive
on one chain per target: a fixed segment for the base pose in the tracker
frame, six Segment(Joint(RotZ), Frame.DH(a, alpha, d, theta)) (that is
Rz(theta + q) Tz(d) Tx(a) Rx(alpha), as in gen_kdl_fk.py), and a fixed
segment to the nest. Each KDL result is checked against a direct product of
the DH matrices (NumPy); the generator stops beyond 1e-12 m.

Output files (default directory tests/fixtures), all mm and degrees:
  kdl_campaign.csv          150 random poses within the joint limits less 2 %
                            of each span, all three targets, Gaussian noise
                            sigma 0.02 mm per coordinate; 40 poses tagged
                            set=check, the others fit. One-file campaign form
                            of twistfit-data(5), joint values to 1e-4 deg.
  kdl_campaign_nonoise.csv  the same poses and tags without noise.
  kdl_truth.csv             1000 further random poses with the true target
                            positions, same form (set=fit): to judge the
                            as-built model's predictions.
  kdl_nominal.ini           the nominal tf6s in DH form (twistfit-model(5)),
                            targets declared WITHOUT offsets, so that the
                            registration has to find them.
The true parameters are listed in comment lines of kdl_truth.csv.

Deterministic (fixed seed, NumPy RandomState, whose stream NumPy keeps
across versions). CI regenerates into a temporary directory and compares
with tests/gen/compare_fixtures.py (comment lines ignored, numbers compared
with relative tolerance 1e-12, other fields as text).

Run with Debian's interpreter:
    /usr/bin/python3 tests/gen/gen_kdl_campaign.py [--out DIR]
"""
import math
import os
import sys

import numpy as np
import PyKDL as kdl

# Shared with the forward-kinematics generator: the arm tables, the unit
# conversion, the direct DH product and the KDL frame conversion.
sys.dont_write_bytecode = True  # leave no __pycache__ in the source tree
sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
from gen_kdl_fk import ARMS_STD, D, direct_fk, to_si  # noqa: E402
from genutil import fmt, jnt_array, kdl_frame, out_dir  # noqa: E402

SEED = 20260404
N_POSES = 150
N_CHECK = 40
N_TRUTH = 1000
SIGMA_MM = 0.02
MARGIN = 0.02  # fraction of each joint's span kept clear of its limits

# Invented deviations of the true arm from nominal, per joint:
# (da mm, dalpha deg, dd mm, dtheta deg).
DELTA = [
    (+0.213, -0.0187, +0.371, +0.0291),
    (-0.342, +0.0412, +0.158, -0.0336),
    (+0.467, -0.0273, -0.289, +0.0445),
    (-0.127, +0.0358, +0.433, -0.0219),
    (+0.296, -0.0461, -0.176, +0.0374),
    (-0.384, +0.0129, +0.247, -0.0483),
]
# Nominal nests (arms notes, mm) and the true ones, a few mm off.
TARGETS_NOMINAL = [("T1", (40, 0, 60)), ("T2", (-30, 45, 75)), ("T3", (0, -50, 50))]
TARGETS_TRUE = [("T1", (42.314, -1.862, 63.107)),
                ("T2", (-31.547, 47.768, 72.769)),
                ("T3", (3.482, -48.807, 51.876))]
# Base pose of the arm in the tracker frame: rotation BASE_ANGLE_DEG about
# the skew unit axis BASE_AXIS, translation BASE_P_MM.
BASE_AXIS = (0.43, -0.58, 0.69)
BASE_ANGLE_DEG = 135.8
BASE_P_MM = (2618.3, 1927.4, -451.9)

JOINTS = ["j1", "j2", "j3", "j4", "j5", "j6"]


def true_rows():
    """The nominal tf6s table with DELTA applied, SI units."""
    rows = []
    for (typ, a, alpha, d, theta, lo, hi), (da, dal, dd, dth) in zip(
            to_si(ARMS_STD["tf6s"]), DELTA):
        rows.append((typ, a + da * 1e-3, alpha + dal * D, d + dd * 1e-3,
                     theta + dth * D, lo, hi))
    return rows


def base_pose():
    w = np.array(BASE_AXIS) / np.linalg.norm(BASE_AXIS)
    t = BASE_ANGLE_DEG * D
    W = np.array([[0, -w[2], w[1]], [w[2], 0, -w[0]], [-w[1], w[0], 0]])
    B = np.eye(4)
    B[:3, :3] = np.eye(3) + math.sin(t) * W + (1 - math.cos(t)) * W @ W
    B[:3, 3] = np.array(BASE_P_MM) * 1e-3
    return B


def target_chain(B, rows, offset_m):
    """Tracker <- base (fixed), the DH joints, flange -> nest (fixed)."""
    chain = kdl.Chain()
    chain.addSegment(kdl.Segment(kdl.Joint(kdl.Joint.Fixed), kdl_frame(B)))
    for _, a, alpha, d, theta, _, _ in rows:
        chain.addSegment(kdl.Segment(kdl.Joint(kdl.Joint.RotZ),
                                     kdl.Frame.DH(a, alpha, d, theta)))
    chain.addSegment(kdl.Segment(kdl.Joint(kdl.Joint.Fixed),
                                 kdl.Frame(kdl.Vector(*offset_m))))
    return chain


class TrueArm:
    def __init__(self):
        self.rows = true_rows()
        self.B = base_pose()
        self.offsets = [np.array(t, dtype=float) * 1e-3 for _, t in TARGETS_TRUE]
        # The solvers refer to their chains: keep both alive.
        self.chains = [target_chain(self.B, self.rows, o) for o in self.offsets]
        self.solvers = [kdl.ChainFkSolverPos_recursive(c) for c in self.chains]
        self.worst = 0.0

    def positions_mm(self, q_deg):
        """True tracker-frame positions (mm) of every target at q (deg)."""
        q = [x * D for x in q_deg]
        jq = jnt_array(q)
        T = self.B @ direct_fk(self.rows, "standard", np.eye(4), q)
        out = []
        for solver, off in zip(self.solvers, self.offsets):
            F = kdl.Frame()
            if solver.JntToCart(jq, F) < 0:
                sys.exit("gen_kdl_campaign: KDL's JntToCart failed")
            p = np.array([F.p[0], F.p[1], F.p[2]])
            err = float(np.max(np.abs(p - (T[:3, :3] @ off + T[:3, 3]))))
            self.worst = max(self.worst, err)
            if err > 1e-12:
                sys.exit("gen_kdl_campaign: KDL and the direct DH product "
                         "differ by %g m" % err)
            out.append(p * 1e3)
        return out


def draw_q(rng):
    """Joint values in degrees, uniform within the limits less the margin,
    rounded to 1e-4 deg as a controller log would give them; the kinematics
    use the rounded values."""
    q = []
    for _, _, _, _, _, lo, hi in ARMS_STD["tf6s"]:
        m = MARGIN * (hi - lo)
        q.append(float("%.4f" % rng.uniform(lo + m, hi - m)))
    return q


def header(f, what):
    f.write("# %s\n" % what)
    f.write("# reference: Orocos KDL (PyKDL %s) ChainFkSolverPos_recursive, "
            "Frame.DH; NumPy %s; generated by tests/gen/gen_kdl_campaign.py, "
            "seed %d\n" % (kdl.__version__, np.__version__, SEED))
    f.write("# true arm: sample arm tf6s with perturbed DH parameters, base "
            "pose and target offsets listed in kdl_truth.csv\n")
    f.write("# units: length=mm angle=deg\n")


def write_campaign(path, what, poses, extra=None):
    """One row per (pose, target); extra(f) may add comment lines."""
    with open(path, "w") as f:
        header(f, what)
        if extra is not None:
            extra(f)
        f.write("pose,target," + ",".join(JOINTS) + ",x,y,z,set\n")
        for pid, q, pts, tag in poses:
            for (name, _), p in zip(TARGETS_TRUE, pts):
                f.write("%s,%s,%s,%s,%s\n" % (
                    pid, name, ",".join("%.4f" % x for x in q),
                    ",".join(fmt(v) for v in p), tag))


def write_truth_comments(f, arm):
    f.write("# true DH table (standard DH, mm and deg): joint, a, alpha, d, "
            "theta; deviation from nominal in brackets\n")
    for name, (_, a, al, d, th, _, _), dl in zip(JOINTS, arm.rows, DELTA):
        f.write("#   %s: %.6f %.6f %.6f %.6f  (%+.3f %+.4f %+.3f %+.4f)\n"
                % ((name, a * 1e3, al / D, d * 1e3, th / D) + dl))
    f.write("# true base pose in the tracker frame: rotation %.1f deg about "
            "the unit axis of (%g %g %g), translation (%g %g %g) mm\n"
            % ((BASE_ANGLE_DEG,) + BASE_AXIS + BASE_P_MM))
    f.write("#   R = %s\n" % " ".join("%.15f" % v for v in arm.B[:3, :3].ravel()))
    for (name, t), (_, n) in zip(TARGETS_TRUE, TARGETS_NOMINAL):
        f.write("# true target %s: %g %g %g mm in the flange frame "
                "(drawing %g %g %g)\n" % ((name,) + t + n))


NOMINAL_INI = """\
# Nominal model for the KDL reference campaign (kdl_campaign*.csv): the
# sample arm tf6s in standard DH form, as samples/tf6s-dh.ini, but with the
# targets declared WITHOUT offsets so that registration must find them.
# Written by tests/gen/gen_kdl_campaign.py. See twistfit-model(5).
[robot]
name = tf6s
length_unit = mm
angle_unit = deg
"""


def write_nominal(path):
    with open(path, "w") as f:
        f.write(NOMINAL_INI)
        for name, (typ, a, alpha, d, theta, lo, hi) in zip(JOINTS, ARMS_STD["tf6s"]):
            f.write("\n[joint %s]\ntype = revolute\ndh = %g %g %g %g\n"
                    "limits = %g %g\n" % (name, a * 1e3, alpha, d * 1e3, theta,
                                          lo, hi))
        for name, _ in TARGETS_NOMINAL:
            f.write("\n[target %s]\n" % name)


def main():
    out = out_dir(__doc__)

    rng = np.random.RandomState(SEED)
    arm = TrueArm()

    check = set(int(i) for i in rng.permutation(N_POSES)[:N_CHECK])
    clean, noisy = [], []
    for i in range(N_POSES):
        q = draw_q(rng)
        pts = arm.positions_mm(q)
        tag = "check" if i in check else "fit"
        pid = "P%03d" % (i + 1)
        clean.append((pid, q, pts, tag))
        noisy.append((pid, q, [p + rng.normal(0.0, SIGMA_MM, 3) for p in pts], tag))
    truth = []
    for i in range(N_TRUTH):
        q = draw_q(rng)
        truth.append(("V%04d" % (i + 1), q, arm.positions_mm(q), "fit"))

    write_campaign(os.path.join(out, "kdl_campaign.csv"),
                   "KDL reference campaign: %d poses (%d check), 3 targets, "
                   "Gaussian noise sigma %g mm per coordinate"
                   % (N_POSES, N_CHECK, SIGMA_MM), noisy)
    write_campaign(os.path.join(out, "kdl_campaign_nonoise.csv"),
                   "KDL reference campaign without noise: the poses and sets "
                   "of kdl_campaign.csv", clean)
    write_campaign(os.path.join(out, "kdl_truth.csv"),
                   "True target positions of the KDL reference arm at %d "
                   "further random poses (no noise)" % N_TRUTH, truth,
                   lambda f: write_truth_comments(f, arm))
    write_nominal(os.path.join(out, "kdl_nominal.ini"))
    print("gen_kdl_campaign: wrote kdl_campaign.csv, kdl_campaign_nonoise.csv, "
          "kdl_truth.csv, kdl_nominal.ini in %s (KDL vs direct %.1e m)"
          % (out, arm.worst))


if __name__ == "__main__":
    main()
