"""Pieces shared by the reference generators tests/gen/gen_*.py: the
command line (--out DIR), the number format, the elementary homogeneous
matrices, and the conversions to and from Orocos KDL (PyKDL) frames and
joint arrays with the forward-kinematics call. Not a generator itself (CI
runs every gen_*.py). Moving code here must leave every fixture the same
to the byte: regenerate and compare with tests/gen/compare_fixtures.py.
"""
import argparse
import math
import os
import sys

import numpy as np


def out_dir(doc):
    """The output directory of a generator's command line (default
    tests/fixtures), created when missing."""
    here = os.path.dirname(os.path.abspath(__file__))
    ap = argparse.ArgumentParser(description=doc.splitlines()[0])
    ap.add_argument("--out", default=os.path.normpath(os.path.join(here, "..", "fixtures")),
                    help="output directory (default tests/fixtures)")
    args = ap.parse_args()
    os.makedirs(args.out, exist_ok=True)
    return args.out


def fmt(x):
    """A number as repr() prints it: it reads back as the same double."""
    return repr(float(x))


def rz(t):
    c, s = math.cos(t), math.sin(t)
    return np.array([[c, -s, 0, 0], [s, c, 0, 0], [0, 0, 1, 0], [0, 0, 0, 1]])


def rx(t):
    c, s = math.cos(t), math.sin(t)
    return np.array([[1, 0, 0, 0], [0, c, -s, 0], [0, s, c, 0], [0, 0, 0, 1]])


def ry(t):
    c, s = math.cos(t), math.sin(t)
    return np.array([[c, 0, s, 0], [0, 1, 0, 0], [-s, 0, c, 0], [0, 0, 0, 1]])


def trans(x, y, z):
    T = np.eye(4)
    T[:3, 3] = [x, y, z]
    return T


def pose_fields(T):
    """px, py, pz and the rotation row-major: the fixtures' pose columns."""
    return [T[i, 3] for i in range(3)] + [T[i, j] for i in range(3) for j in range(3)]


def kdl_frame(T):
    import PyKDL as kdl
    R = kdl.Rotation(*[float(T[i, j]) for i in range(3) for j in range(3)])
    return kdl.Frame(R, kdl.Vector(*[float(x) for x in T[:3, 3]]))


def frame_to_np(F):
    T = np.eye(4)
    for i in range(3):
        for j in range(3):
            T[i, j] = F.M[i, j]
        T[i, 3] = F.p[i]
    return T


def jnt_array(q):
    import PyKDL as kdl
    jq = kdl.JntArray(len(q))
    for i, x in enumerate(q):
        jq[i] = float(x)
    return jq


def kdl_fk(chain, q):
    """The flange of a KDL chain at q (KDL's recursive solver), as a 4x4."""
    import PyKDL as kdl
    solver = kdl.ChainFkSolverPos_recursive(chain)
    F = kdl.Frame()
    if solver.JntToCart(jnt_array(q), F) < 0:
        sys.exit("%s: KDL's JntToCart failed" % os.path.basename(sys.argv[0]).replace(".py", ""))
    return frame_to_np(F)
