#!/usr/bin/python3
"""Elastostatic reference campaigns from Orocos KDL: a heavy arm whose joints yield under gravity.

The arm is the invented heavy 6-axis arm of samples/tf6h.ini (axis-and-point
form, reach about 1.9 m) with a mass model: bodies of 2.5 to 320 kg and two
payloads, "gripper" (45 kg) and "part" (160 kg, gripper and part). Its true
geometry differs from the drawing by invented amounts (points up to 0.4 mm,
axis directions up to 0.6 mrad, zero offsets up to 0.03 deg); every joint
yields under the gravity torque about its axis with the stiffness of
STIFFNESS (a few 1e6 to 1.5e7 N m/rad; Dumas, Caro, Garnier and Furet 2011
on the joint stiffness of six-axis industrial arms, recalled from memory):
the elastostatic equilibrium

    theta_i = q_i + offset_i + tau_i(theta) / k_i,

tau_i the torque of gravity on the bodies beyond joint i and the payload,
is solved by fixed-point iteration to 1e-15 rad (so the truth holds the
second-order term the calibration's model leaves out).

References: forward kinematics by KDL's ChainFkSolverPos_recursive on a
chain of Segment(Joint(origin, axis, RotAxis), identity) (each joint turns
about its line given in the base frame at zero: the product of
exponentials), checked against a direct NumPy product of Rodrigues
rotations (stop beyond 1e-12 m). Gravity torques by KDL's inverse dynamics
ChainIdSolver_RNE at zero velocity and acceleration with the bodies'
RigidBodyInertia (tau = -RNE), checked against central finite differences
of the potential energy V = -sum m g . x (tau_i = -dV/dtheta_i; stop beyond
1e-6 of the largest torque of the pose).

Output files (default directory tests/fixtures), mm and degrees:
  compliance_nominal.ini  the drawing's model with the mass model (the
                          masses the truth uses) and both payloads, targets
                          at their drawing offsets.
  compliance_one.csv      160 random poses (40 set=check), three targets,
                          every pose carrying "part"; Gaussian noise sigma
                          0.02 mm per coordinate; joint values to 1e-4 deg.
  compliance_two.csv      160 further poses, the payload alternating
                          between "gripper" and "part".
  compliance_truth.csv    the same poses as compliance_two.csv without noise.
The true values are listed in comment lines of every campaign.

Deterministic (fixed seed, NumPy RandomState). CI regenerates into a
temporary directory and compares with tests/gen/compare_fixtures.py.

Run with Debian's interpreter:
    /usr/bin/python3 tests/gen/gen_kdl_compliance.py [--out DIR]
"""
import math
import os
import sys

import numpy as np
import PyKDL as kdl

sys.dont_write_bytecode = True  # leave no __pycache__ in the source tree
sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
from genutil import fmt, jnt_array, out_dir  # noqa: E402

SEED = 20261503
N_POSES = 160
N_CHECK = 40
SIGMA_MM = 0.02
MARGIN = 0.02
G0 = 9.80665  # standard gravity, m/s^2 (3rd CGPM 1901)
D = math.pi / 180.0

JOINTS = ["j1", "j2", "j3", "j4", "j5", "j6"]
# Drawing (mm, base frame at zero): axis, point, limits (deg).
AXES = [(0, 0, 1), (0, 1, 0), (0, 1, 0), (1, 0, 0), (0, 1, 0), (1, 0, 0)]
POINTS = [(0, 0, 0), (320, 0, 750), (320, 0, 1900), (700, 0, 2000),
          (1600, 0, 2000), (1600, 0, 2000)]
LIMITS = [(-170, 170), (-70, 80), (-80, 110), (-180, 180), (-115, 115), (-350, 350)]
HOME_P = (1750, 0, 2000)
HOME_R = ((0, 0, 1), (0, -1, 0), (1, 0, 0))  # flange z along base x
TARGETS = [("T1", (60, 0, 80)), ("T2", (-45, 65, 100)), ("T3", (0, -70, 70))]
# Mass model: body of each joint, kg and centre (mm, base frame at zero).
MASSES = [(320.0, (80, 0, 420)), (180.0, (330, -120, 1250)), (110.0, (650, 0, 1980)),
          (35.0, (1150, 15, 2000)), (12.0, (1560, 0, 2000)), (2.5, (1700, 0, 2000))]
PAYLOADS = [("gripper", 45.0, (0, 0, 120)), ("part", 160.0, (30, -20, 260))]
# True joint stiffnesses, N m/rad (invented).
STIFFNESS = [4.0e6, 1.5e7, 8.0e6, 2.0e6, 1.5e6, 1.0e6]
# Invented geometric deviations: point shift (mm), axis tilt (mrad, about
# base x and y or x and z), zero offset (deg).
DPOINT = [(0.21, -0.17, 0.0), (-0.34, 0.0, 0.28), (0.39, 0.0, -0.22),
          (0.0, 0.31, -0.26), (0.18, 0.0, 0.35), (0.0, -0.27, 0.14)]
DTILT = [(0.42, -0.31), (-0.55, 0.38), (0.29, -0.47), (0.36, 0.51), (-0.44, 0.33),
         (0.58, -0.25)]
DOFFSET = [0.021, -0.028, 0.017, -0.024, 0.031, -0.019]
TARGETS_TRUE = [("T1", (61.43, -1.27, 82.05)), ("T2", (-46.61, 66.18, 98.74)),
                ("T3", (1.52, -71.33, 68.96))]
# Base pose of the arm in the tracker frame.
BASE_AXIS = (-0.37, 0.61, 0.7)
BASE_ANGLE_DEG = 72.4
BASE_P_MM = (3184.6, -1422.8, -612.3)


def rodrigues(w, t):
    w = np.asarray(w, dtype=float)
    W = np.array([[0, -w[2], w[1]], [w[2], 0, -w[0]], [-w[1], w[0], 0]])
    return np.eye(3) + math.sin(t) * W + (1 - math.cos(t)) * W @ W


def true_axes():
    """Tilted unit axes and shifted points (m) of the true arm."""
    axes, points = [], []
    for a, p, dp, (t1, t2) in zip(AXES, POINTS, DPOINT, DTILT):
        a = np.array(a, dtype=float)
        # tilt about two directions perpendicular to the axis
        ref = np.array([0.0, 1.0, 0.0]) if abs(a[0]) > 0.9 else np.array([1.0, 0.0, 0.0])
        u1 = ref - a.dot(ref) * a
        u1 /= np.linalg.norm(u1)
        u2 = np.cross(a, u1)
        a = rodrigues(u2, t2 * 1e-3) @ rodrigues(u1, t1 * 1e-3) @ a
        axes.append(a / np.linalg.norm(a))
        points.append((np.array(p, dtype=float) + np.array(dp)) * 1e-3)
    return axes, points


def home():
    T = np.eye(4)
    T[:3, :3] = np.array(HOME_R, dtype=float)
    T[:3, 3] = np.array(HOME_P, dtype=float) * 1e-3
    return T


def base_pose():
    w = np.array(BASE_AXIS) / np.linalg.norm(BASE_AXIS)
    B = np.eye(4)
    B[:3, :3] = rodrigues(w, BASE_ANGLE_DEG * D)
    B[:3, 3] = np.array(BASE_P_MM) * 1e-3
    return B


def kframe(T):
    R = kdl.Rotation(*[float(T[i, j]) for i in range(3) for j in range(3)])
    return kdl.Frame(R, kdl.Vector(*[float(x) for x in T[:3, 3]]))


def inertia(mass, c_m):
    return kdl.RigidBodyInertia(mass, kdl.Vector(*c_m), kdl.RotationalInertia(1, 1, 1, 0, 0, 0))


class Arm:
    def __init__(self, axes, points):
        self.axes, self.points = axes, points
        self.H = home()
        self.B = base_pose()
        self.worst_fk = 0.0
        self.worst_tau = 0.0
        # torque chains: one per payload (None, gripper, part), base frame root
        self.id_chains, self.id_solvers = [], []
        for pl in [None] + PAYLOADS:
            ch = kdl.Chain()
            for n, a, p, (m, c) in zip(JOINTS, axes, points, MASSES):
                ch.addSegment(kdl.Segment(
                    n, kdl.Joint(n, kdl.Vector(*p), kdl.Vector(*a), kdl.Joint.RotAxis),
                    kdl.Frame.Identity(), inertia(m, np.array(c) * 1e-3)))
            if pl is not None:
                ch.addSegment(kdl.Segment("flange", kdl.Joint(kdl.Joint.Fixed), kframe(self.H),
                                          inertia(pl[1], np.array(pl[2]) * 1e-3)))
            self.id_chains.append(ch)
            self.id_solvers.append(kdl.ChainIdSolver_RNE(ch, kdl.Vector(0, 0, -G0)))
        # position chains: tracker <- base, the joints, flange, nest
        self.fk_chains, self.fk_solvers = [], []
        for _, t in TARGETS_TRUE:
            ch = kdl.Chain()
            ch.addSegment(kdl.Segment(kdl.Joint(kdl.Joint.Fixed), kframe(self.B)))
            for n, a, p in zip(JOINTS, axes, points):
                ch.addSegment(kdl.Segment(kdl.Joint(n, kdl.Vector(*p), kdl.Vector(*a),
                                                    kdl.Joint.RotAxis), kdl.Frame.Identity()))
            T = self.H.copy()
            T[:3, 3] = self.H[:3, :3] @ (np.array(t) * 1e-3) + self.H[:3, 3]
            ch.addSegment(kdl.Segment(kdl.Joint(kdl.Joint.Fixed), kframe(T)))
            self.fk_chains.append(ch)
            self.fk_solvers.append(kdl.ChainFkSolverPos_recursive(ch))

    def prefixes(self, theta):
        """Direct product of exponentials (NumPy): P_0 .. P_6."""
        P = [np.eye(4)]
        for a, p, t in zip(self.axes, self.points, theta):
            E = np.eye(4)
            E[:3, :3] = rodrigues(a, t)
            E[:3, 3] = p - E[:3, :3] @ p
            P.append(P[-1] @ E)
        return P

    def potential(self, theta, payload):
        P = self.prefixes(theta)
        V = 0.0
        for i, (m, c) in enumerate(MASSES):
            x = P[i + 1][:3, :3] @ (np.array(c) * 1e-3) + P[i + 1][:3, 3]
            V += m * G0 * x[2]  # gravity along -z
        if payload >= 0:
            F = P[6] @ self.H
            _, m, c = PAYLOADS[payload]
            x = F[:3, :3] @ (np.array(c) * 1e-3) + F[:3, 3]
            V += m * G0 * x[2]
        return V

    def torques(self, theta, payload):
        """Gravity torques about each joint, N m: -RNE at rest."""
        n = len(JOINTS)
        q, z = jnt_array(theta), kdl.JntArray(n)
        ch = self.id_chains[payload + 1]
        wr = [kdl.Wrench() for _ in range(ch.getNrOfSegments())]
        out = kdl.JntArray(n)
        if self.id_solvers[payload + 1].CartToJnt(q, z, z, wr, out) < 0:
            sys.exit("gen_kdl_compliance: KDL's RNE failed")
        return np.array([-out[i] for i in range(n)])

    def check_torques(self, theta, payload):
        tau = self.torques(theta, payload)
        h = 1e-5
        big = max(1.0, float(np.max(np.abs(tau))))
        for i in range(len(JOINTS)):
            tp, tm = list(theta), list(theta)
            tp[i] += h
            tm[i] -= h
            fd = -(self.potential(tp, payload) - self.potential(tm, payload)) / (2 * h)
            err = abs(fd - tau[i]) / big
            self.worst_tau = max(self.worst_tau, err)
            if err > 1e-6:
                sys.exit("gen_kdl_compliance: RNE torque %g and -dV/dtheta %g differ (joint %d)"
                         % (tau[i], fd, i + 1))
        return tau

    def equilibrium(self, q_deg, payload):
        rigid = np.array([(x + o) * D for x, o in zip(q_deg, DOFFSET)])
        th = rigid.copy()
        for _ in range(50):
            new = rigid + self.torques(th, payload) / np.array(STIFFNESS)
            step = float(np.max(np.abs(new - th)))
            th = new
            if step < 1e-15:
                break
        else:
            sys.exit("gen_kdl_compliance: the equilibrium did not converge")
        self.check_torques(list(th), payload)
        return th, rigid

    def positions_mm(self, theta):
        jq = jnt_array(list(theta))
        T = self.B @ self.prefixes(theta)[6] @ self.H
        out = []
        for solver, (_, t) in zip(self.fk_solvers, TARGETS_TRUE):
            F = kdl.Frame()
            if solver.JntToCart(jq, F) < 0:
                sys.exit("gen_kdl_compliance: KDL's JntToCart failed")
            p = np.array([F.p[0], F.p[1], F.p[2]])
            err = float(np.max(np.abs(p - (T[:3, :3] @ (np.array(t) * 1e-3) + T[:3, 3]))))
            self.worst_fk = max(self.worst_fk, err)
            if err > 1e-12:
                sys.exit("gen_kdl_compliance: KDL and the direct product differ by %g m" % err)
            out.append(p * 1e3)
        return out


def draw_q(rng):
    q = []
    for lo, hi in LIMITS:
        m = MARGIN * (hi - lo)
        q.append(float("%.4f" % rng.uniform(lo + m, hi - m)))
    return q


def write_nominal(path):
    with open(path, "w") as f:
        f.write("# Nominal model of the elastostatic reference campaigns (compliance_*.csv):\n"
                "# the heavy sample arm tf6h with its mass model. Written by\n"
                "# tests/gen/gen_kdl_compliance.py. See twistfit-model(5).\n"
                "[robot]\nname = tf6h\nlength_unit = mm\nangle_unit = deg\n")
        for n, a, p, (lo, hi) in zip(JOINTS, AXES, POINTS, LIMITS):
            f.write("\n[joint %s]\ntype = revolute\naxis = %g %g %g\npoint = %g %g %g\n"
                    "limits = %g %g\n" % ((n,) + a + p + (lo, hi)))
        f.write("\n[home]\nposition = %g %g %g\n" % HOME_P)
        for k, r in enumerate(HOME_R):
            f.write("rotation_row%d = %g %g %g\n" % ((k + 1,) + r))
        for n, (m, c) in zip(JOINTS, MASSES):
            f.write("\n[mass %s]\nmass = %g\ncenter = %g %g %g\n" % ((n, m) + c))
        for n, m, c in PAYLOADS:
            f.write("\n[payload %s]\nmass = %g\ncenter = %g %g %g\n" % ((n, m) + c))
        for n, t in TARGETS:
            f.write("\n[target %s]\noffset = %g %g %g\n" % ((n,) + t))


def write_campaign(path, what, rows, arm, worst):
    with open(path, "w") as f:
        f.write("# %s\n" % what)
        f.write("# reference: Orocos KDL (PyKDL %s) ChainFkSolverPos_recursive and "
                "ChainIdSolver_RNE; NumPy %s; generated by tests/gen/gen_kdl_compliance.py, "
                "seed %d\n" % (kdl.__version__, np.__version__, SEED))
        f.write("# true stiffness (N m/rad): %s\n"
                % " ".join("%s=%g" % (n, k) for n, k in zip(JOINTS, STIFFNESS)))
        f.write("# true compliance (rad/(N m)): %s\n"
                % " ".join("%s=%.6g" % (n, 1.0 / k) for n, k in zip(JOINTS, STIFFNESS)))
        f.write("# true offsets (deg): %s\n" % " ".join("%g" % o for o in DOFFSET))
        f.write("# true points shifted by (mm): %s\n" % " ".join("(%g %g %g)" % d for d in DPOINT))
        f.write("# true axes tilted by (mrad): %s\n" % " ".join("(%g %g)" % t for t in DTILT))
        f.write("# true targets (mm): %s\n" % " ".join("%s (%g %g %g)" % ((n,) + t)
                                                       for n, t in TARGETS_TRUE))
        f.write("# largest deflection %.4g deg; largest change of the deflection from the "
                "torque at the rigid configuration to the equilibrium's %.3g rad\n" % worst)
        f.write("# units: length=mm angle=deg\n")
        f.write("pose,target," + ",".join(JOINTS) + ",x,y,z,set,payload\n")
        for pid, q, pts, tag, pl in rows:
            for (name, _), p in zip(TARGETS_TRUE, pts):
                f.write("%s,%s,%s,%s,%s,%s\n" % (pid, name, ",".join("%.4f" % x for x in q),
                                                 ",".join(fmt(v) for v in p), tag,
                                                 PAYLOADS[pl][0] if pl >= 0 else ""))


def campaign(rng, arm, prefix, payload_of):
    check = set(int(i) for i in rng.permutation(N_POSES)[:N_CHECK])
    noisy, clean = [], []
    worst_defl, worst_second = 0.0, 0.0
    for i in range(N_POSES):
        q = draw_q(rng)
        pl = payload_of(i)
        th, rigid = arm.equilibrium(q, pl)
        first = rigid + arm.torques(list(rigid), pl) / np.array(STIFFNESS)
        worst_defl = max(worst_defl, float(np.max(np.abs(th - rigid))) / D)
        worst_second = max(worst_second, float(np.max(np.abs(th - first))))
        pts = arm.positions_mm(th)
        tag = "check" if i in check else "fit"
        pid = "%s%03d" % (prefix, i + 1)
        clean.append((pid, q, pts, tag, pl))
        noisy.append((pid, q, [p + rng.normal(0.0, SIGMA_MM, 3) for p in pts], tag, pl))
    return noisy, clean, (worst_defl, worst_second)


def main():
    out = out_dir(__doc__)
    rng = np.random.RandomState(SEED)
    axes, points = true_axes()
    arm = Arm(axes, points)
    one, _, w1 = campaign(rng, arm, "A", lambda i: 1)
    two, two_clean, w2 = campaign(rng, arm, "B", lambda i: i % 2)
    write_nominal(os.path.join(out, "compliance_nominal.ini"))
    write_campaign(os.path.join(out, "compliance_one.csv"),
                   "Elastostatic reference campaign: %d poses (%d check), 3 targets, payload "
                   "'part' throughout, noise sigma %g mm per coordinate"
                   % (N_POSES, N_CHECK, SIGMA_MM), one, arm, w1)
    write_campaign(os.path.join(out, "compliance_two.csv"),
                   "Elastostatic reference campaign: %d poses (%d check), 3 targets, payloads "
                   "'gripper' and 'part' in turn, noise sigma %g mm per coordinate"
                   % (N_POSES, N_CHECK, SIGMA_MM), two, arm, w2)
    write_campaign(os.path.join(out, "compliance_truth.csv"),
                   "The poses of compliance_two.csv without noise", two_clean, arm, w2)
    print("gen_kdl_compliance: wrote compliance_nominal.ini, compliance_one.csv, "
          "compliance_two.csv, compliance_truth.csv in %s (KDL vs direct %.1e m, RNE vs "
          "-dV/dtheta %.1e, deflection up to %.3g deg, second order %.2g rad)"
          % (out, arm.worst_fk, arm.worst_tau, max(w1[0], w2[0]), max(w1[1], w2[1])))


if __name__ == "__main__":
    main()
