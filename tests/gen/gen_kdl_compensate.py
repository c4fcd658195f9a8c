#!/usr/bin/python3
"""Reference for program compensation from Orocos KDL: a DH-perturbed tf6s.

The as-built arm is the sample arm tf6s (standard DH, see gen_kdl_fk.py)
with every DH parameter changed by the invented amounts of DELTA below (up
to 0.5 mm and 0.05 degrees; still a DH arm). This generator cannot see the
compensation; it writes what the test needs to judge it:

  kdl_comp_nominal.ini   the nominal tf6s in DH form (twistfit-model(5)),
                         mm and deg, no targets;
  kdl_comp_asbuilt.ini   the as-built arm in the same form, exactly the
                         table KDL was given (values written with repr(),
                         so the model reader gets them to the last digit);
  kdl_comp_program.csv   a joint program of 60 random rows within the joint
                         limits less 5 % of each span and |j5| >= 10 deg
                         (away from the wrist singularity; rows near the
                         elbow and shoulder singularities stay, and the test
                         expects them flagged), joint values to 1e-4 deg, in
                         the joints-file form of twistfit-data(5);
  kdl_comp_fk.csv        for every program row, KDL's flange pose of the
                         NOMINAL arm at the row's joint values (the pose the
                         compensated program must reach) and, as a check of
                         the as-built model file, KDL's flange pose of the
                         AS-BUILT arm at the same values. Lines:
                             nominal,<pose>,px,py,pz,R00..R22
                             asbuilt,<pose>,px,py,pz,R00..R22
                         metres, rotations row-major, repr().

tests/check_apply.c (test_kdl_compensation) compensates the program with the
two model files and compares the as-built forward kinematics at the
compensated joints with KDL's nominal poses.

Every KDL pose is checked against a direct product of the DH matrices
(NumPy); the generator stops beyond 1e-12. Deterministic (fixed seed, NumPy
RandomState). CI regenerates into a temporary directory and compares with
tests/gen/compare_fixtures.py.

Run with Debian's interpreter:
    /usr/bin/python3 tests/gen/gen_kdl_compensate.py [--out DIR]
"""
import os
import sys

import numpy as np
import PyKDL as kdl

sys.dont_write_bytecode = True  # leave no __pycache__ in the source tree
sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
from gen_kdl_fk import ARMS_STD, D, direct_fk, kdl_chain  # noqa: E402
from genutil import fmt, kdl_fk, out_dir  # noqa: E402

SEED = 20261201
N_ROWS = 60
MARGIN = 0.05
MIN_J5_DEG = 10.0
JOINTS = ["j1", "j2", "j3", "j4", "j5", "j6"]

# Invented deviations of the as-built arm from nominal, per joint:
# (da mm, dalpha deg, dd mm, dtheta deg).
DELTA = [
    (-0.184, +0.0231, +0.412, -0.0318),
    (+0.397, -0.0356, -0.205, +0.0427),
    (-0.263, +0.0194, +0.338, -0.0152),
    (+0.151, -0.0442, -0.276, +0.0389),
    (-0.329, +0.0287, +0.117, -0.0471),
    (+0.218, -0.0165, -0.394, +0.0236),
]


def nominal_table_mm_deg():
    return [(a * 1e3, alpha, d * 1e3, theta, lo, hi)
            for (_, a, alpha, d, theta, lo, hi) in ARMS_STD["tf6s"]]


def asbuilt_table_mm_deg():
    return [(a + da, alpha + dal, d + dd, theta + dth, lo, hi)
            for (a, alpha, d, theta, lo, hi), (da, dal, dd, dth)
            in zip(nominal_table_mm_deg(), DELTA)]


def table_si(table):
    """The mm/deg table as KDL and the direct product take it: the same
    arithmetic as the model reader (mm * 1e-3, deg * pi / 180)."""
    return [("R", a * 1e-3, alpha * D, d * 1e-3, theta * D, lo * D, hi * D)
            for (a, alpha, d, theta, lo, hi) in table]


def write_model(path, name, table, what):
    with open(path, "w") as f:
        f.write("# %s, written by tests/gen/gen_kdl_compensate.py for the\n"
                "# compensation reference (see its docstring). Standard DH,\n"
                "# twistfit-model(5).\n" % what)
        f.write("[robot]\nname = %s\nlength_unit = mm\nangle_unit = deg\n" % name)
        for jn, (a, alpha, d, theta, lo, hi) in zip(JOINTS, table):
            f.write("\n[joint %s]\ntype = revolute\ndh = %s %s %s %s\nlimits = %g %g\n"
                    % (jn, repr(float(a)), repr(float(alpha)), repr(float(d)),
                       repr(float(theta)), lo, hi))


def main():
    out = out_dir(__doc__)
    rng = np.random.RandomState(SEED)

    nom, asb = table_si(nominal_table_mm_deg()), table_si(asbuilt_table_mm_deg())
    # The solvers refer to their chains: keep them alive.
    chains = {"nominal": kdl_chain(nom, "standard", np.eye(4)),
              "asbuilt": kdl_chain(asb, "standard", np.eye(4))}
    rows_si = {"nominal": nom, "asbuilt": asb}

    program = []
    while len(program) < N_ROWS:
        q = []
        for (_, _, _, _, _, lo, hi) in ARMS_STD["tf6s"]:
            m = MARGIN * (hi - lo)
            q.append(float("%.4f" % rng.uniform(lo + m, hi - m)))
        if abs(q[4]) < MIN_J5_DEG:
            continue
        program.append(("R%03d" % (len(program) + 1), q))

    worst = 0.0
    lines = []
    for pid, q_deg in program:
        q = [x * D for x in q_deg]
        for which in ("nominal", "asbuilt"):
            T = kdl_fk(chains[which], q)
            T2 = direct_fk(rows_si[which], "standard", np.eye(4), q)
            err = float(np.max(np.abs(T - T2)))
            worst = max(worst, err)
            if err > 1e-12:
                sys.exit("gen_kdl_compensate: KDL and the direct DH product "
                         "differ by %g" % err)
            vals = list(T[:3, 3]) + [T[i, j] for i in range(3) for j in range(3)]
            lines.append("%s,%s,%s" % (which, pid, ",".join(fmt(v) for v in vals)))

    write_model(os.path.join(out, "kdl_comp_nominal.ini"), "tf6s",
                nominal_table_mm_deg(), "The nominal sample arm tf6s")
    write_model(os.path.join(out, "kdl_comp_asbuilt.ini"), "tf6s",
                asbuilt_table_mm_deg(),
                "The as-built arm: tf6s with the invented DH deviations DELTA")
    with open(os.path.join(out, "kdl_comp_program.csv"), "w") as f:
        f.write("# Invented joint program of %d random rows for the compensation "
                "reference; generated by tests/gen/gen_kdl_compensate.py, seed %d\n"
                % (N_ROWS, SEED))
        f.write("# units: angle=deg\n")
        f.write("pose," + ",".join(JOINTS) + "\n")
        for pid, q in program:
            f.write("%s,%s\n" % (pid, ",".join("%.4f" % x for x in q)))
    with open(os.path.join(out, "kdl_comp_fk.csv"), "w") as f:
        f.write("# Flange poses of the nominal and the as-built arm at the rows of "
                "kdl_comp_program.csv\n")
        f.write("# reference: Orocos KDL (PyKDL %s) ChainFkSolverPos_recursive, "
                "Frame.DH; NumPy %s; generated by tests/gen/gen_kdl_compensate.py, "
                "seed %d\n" % (kdl.__version__, np.__version__, SEED))
        f.write("# verified against a direct product of the DH matrices: worst "
                "difference %.1e\n" % worst)
        f.write("# units: metres; rotations row-major\n")
        f.write("# nominal|asbuilt,pose,px,py,pz,R00..R22\n")
        for line in lines:
            f.write(line + "\n")
    print("gen_kdl_compensate: wrote kdl_comp_nominal.ini, kdl_comp_asbuilt.ini, "
          "kdl_comp_program.csv, kdl_comp_fk.csv in %s (KDL vs direct %.1e m)"
          % (out, worst))


if __name__ == "__main__":
    main()
