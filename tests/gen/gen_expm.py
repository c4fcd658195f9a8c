#!/usr/bin/python3
"""Reference values for twf_se3_exp: SciPy's general matrix exponential.

For about 40 twists S = (w, v) and parameters t (revolute, prismatic, screws
with pitch, |w| != 1, tiny angles, angles near and beyond pi, unround
values) this writes the matrix exponential of the 4x4 matrix hat(S) * t as
computed by scipy.linalg.expm (Pade approximation with scaling and
squaring, which knows nothing of the closed form the library uses).

Each value is also checked here against a Taylor series of the matrix
exponential with scaling and squaring in extended precision
(numpy.longdouble); the generator refuses to write a file if the two
disagree beyond 1e-13, so the fixture is trustworthy at the test's 1e-12.

Output: expm.csv in the output directory (default tests/fixtures). Lines
starting with '#' are comments (library versions, seed); then a header row
and one row per case:
    case,wx,wy,wz,vx,vy,vz,t,R00,R01,R02,R10,R11,R12,R20,R21,R22,px,py,pz
(metres and radians; R row-major; values printed with repr(), which
round-trips doubles exactly).

Deterministic (fixed seed). CI regenerates into a temporary directory and
compares with tests/gen/compare_fixtures.py, which ignores comment lines and
compares numbers with relative tolerance 1e-12 (absolute 1e-15 near zero).

Run with Debian's interpreter:  /usr/bin/python3 tests/gen/gen_expm.py [--out DIR]
"""
import argparse
import math
import os
import sys

import numpy as np
import scipy
import scipy.linalg

SEED = 20260307


def hat4(S, t):
    w = np.array(S[:3], dtype=float)
    v = np.array(S[3:], dtype=float)
    X = np.zeros((4, 4))
    X[0, 1], X[0, 2] = -w[2] * t, w[1] * t
    X[1, 0], X[1, 2] = w[2] * t, -w[0] * t
    X[2, 0], X[2, 1] = -w[1] * t, w[0] * t
    X[:3, 3] = v * t
    return X


def expm_longdouble(X):
    """exp(X) by Taylor series with scaling and squaring in long double."""
    A = X.astype(np.longdouble)
    norm = float(np.max(np.sum(np.abs(X), axis=1)))
    k = max(0, int(math.ceil(math.log2(norm))) + 4) if norm > 0 else 0
    A = A / (np.longdouble(2) ** k)
    E = np.eye(4, dtype=np.longdouble)
    term = np.eye(4, dtype=np.longdouble)
    for i in range(1, 30):
        term = term @ A / np.longdouble(i)
        E = E + term
    for _ in range(k):
        E = E @ E
    return E


def unit(x):
    x = np.asarray(x, dtype=float)
    return x / np.linalg.norm(x)


def cases(rng):
    out = []

    def rand_unit():
        return unit(rng.normal(size=3))

    def rand_point(scale=0.8):
        return rng.uniform(-scale, scale, size=3)

    def revolute(w, q):
        return list(w) + list(-np.cross(w, q))

    # Revolute joints: unit axis through a point, moderate angles.
    for i in range(8):
        w = rand_unit()
        out.append(("revolute-%d" % (i + 1), revolute(w, rand_point()),
                    rng.uniform(-3.0, 3.0)))
    # Axis-aligned revolute axes with unround points and angles.
    out.append(("revolute-z", revolute([0, 0, 1], [0.315, -0.127, 0.45]), 1.2345))
    out.append(("revolute-x", revolute([1, 0, 0], [0.0, 0.61, 0.0]), -2.0781))
    # Prismatic joints.
    for i in range(4):
        out.append(("prismatic-%d" % (i + 1), [0, 0, 0] + list(rand_unit()),
                    rng.uniform(-0.4, 0.6)))
    out.append(("prismatic-long", [0, 0, 0] + list(rand_unit()), 3.785))
    # Screws with pitch h: v = -w x q + h w.
    for i in range(5):
        w = rand_unit()
        h = rng.uniform(-0.3, 0.3)
        S = np.array(revolute(w, rand_point()))
        S[3:] += h * w
        out.append(("screw-%d" % (i + 1), list(S), rng.uniform(-3.0, 3.0)))
    # |w| != 1 (angle |w| t), with pitch.
    for i, mag in enumerate([0.37, 2.91, 0.0123, 7.3]):
        w = rand_unit() * mag
        v = rng.uniform(-0.5, 0.5, size=3)
        out.append(("nonunit-%d" % (i + 1), list(w) + list(v),
                    rng.uniform(-1.5, 1.5)))
    # Tiny angles, around the series thresholds (1e-3 and 0.1).
    for ang in [1e-12, 1e-9, 3.7e-7, 2.2e-5, 9.99e-4, 1.001e-3, 0.0437,
                0.0999, 0.1001]:
        w = rand_unit()
        S = np.array(revolute(w, rand_point()))
        S[3:] += rng.uniform(-0.1, 0.1) * w
        out.append(("tiny-%g" % ang, list(S), ang))
    # Near pi, at pi, and beyond (the exponential is not restricted).
    for name, ang in [("pi-1e-6", math.pi - 1e-6), ("pi-1e-9", math.pi - 1e-9),
                      ("pi", math.pi), ("pi+1e-7", math.pi + 1e-7),
                      ("large-5.3", 5.3127), ("large-12.7", -12.7391)]:
        w = rand_unit()
        out.append((name, revolute(w, rand_point()), ang))
    # t = 0: the identity, whatever the twist.
    out.append(("zero-t", revolute(rand_unit(), rand_point()), 0.0))
    return out


def main():
    here = os.path.dirname(os.path.abspath(__file__))
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--out", default=os.path.normpath(os.path.join(here, "..", "fixtures")),
                    help="output directory (default tests/fixtures)")
    args = ap.parse_args()

    # RandomState: NumPy guarantees its stream across versions (Generator
    # does not), so regenerated files stay identical.
    rng = np.random.RandomState(SEED)
    rows = []
    worst = 0.0
    for name, S, t in cases(rng):
        S = [float(x) for x in S]
        t = float(t)
        X = hat4(S, t)
        E = scipy.linalg.expm(X)
        E2 = expm_longdouble(X)
        scale = max(1.0, float(np.max(np.abs(E))))
        err = float(np.max(np.abs(E - E2.astype(float)))) / scale
        worst = max(worst, err)
        if err > 1e-13:
            sys.exit("gen_expm: SciPy and the long double series disagree "
                     "by %g on case %s" % (err, name))
        vals = S + [t] + [E[i, j] for i in range(3) for j in range(3)] + \
            [E[i, 3] for i in range(3)]
        rows.append(name + "," + ",".join(repr(float(x)) for x in vals))

    os.makedirs(args.out, exist_ok=True)
    path = os.path.join(args.out, "expm.csv")
    with open(path, "w") as f:
        f.write("# Reference exponentials exp(hat(S) t) of 4x4 twist matrices.\n")
        f.write("# reference: SciPy %s scipy.linalg.expm (NumPy %s), "
                "generated by tests/gen/gen_expm.py, seed %d\n"
                % (scipy.__version__, np.__version__, SEED))
        f.write("# cross-checked against a long double Taylor series: "
                "worst relative difference below 1e-13\n")
        f.write("# units: metres, radians; R row-major\n")
        f.write("case,wx,wy,wz,vx,vy,vz,t,R00,R01,R02,R10,R11,R12,R20,R21,R22,"
                "px,py,pz\n")
        for r in rows:
            f.write(r + "\n")
    print("gen_expm: wrote %d cases to %s (worst SciPy vs series %.2g)"
          % (len(rows), path, worst))


if __name__ == "__main__":
    main()
