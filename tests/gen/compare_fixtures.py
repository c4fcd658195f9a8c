#!/usr/bin/python3
"""Compare regenerated reference fixtures with the committed ones.

Usage:  compare_fixtures.py COMMITTED_DIR NEW_DIR

Every file in NEW_DIR (what a generator just wrote, e.g. with
`gen_expm.py --out $tmp`) must exist in COMMITTED_DIR and agree with it:

  - lines starting with '#' are comments (they record library versions,
    which may legitimately change) and are skipped in both files;
  - the remaining lines must match one for one; each is split at commas and
    compared field by field: fields that both parse as floats must satisfy
    |a - b| <= max(1e-12 * max(|a|, |b|), 1e-15), other fields must be equal
    as text; a column named in LOOSE (by file and header name) takes its
    own tolerances instead.

Prints each difference (file, line, field, both values) and a summary; exits
0 when everything agrees, 1 on any difference or missing file, 2 on a usage
error. Files of COMMITTED_DIR that NEW_DIR lacks are ignored (other
generators write them).
"""
import os
import sys

REL = 1e-12
ABS = 1e-15

# Columns whose reference value comes out of a cancellation, so that its
# last digits follow the BLAS under NumPy (reference BLAS or OpenBLAS), not
# the method: SciPy's rmsd of align_vectors is the root of a difference of
# two sums (1.2e-7 m for an exact fit is the root of rounding; seen 8.4e-8
# with OpenBLAS). No test reads it. (relative, absolute) tolerances.
LOOSE = {("align_results.csv", "rmsd"): (1e-6, 1e-6)}


def data_lines(path):
    out = []
    with open(path) as f:
        for n, line in enumerate(f, 1):
            line = line.rstrip("\n")
            if line.startswith("#") or line.strip() == "":
                continue
            out.append((n, line))
    return out


def as_float(s):
    try:
        return float(s)
    except ValueError:
        return None


def compare_file(old, new, report):
    a, b = data_lines(old), data_lines(new)
    bad = 0
    if len(a) != len(b):
        report("%s: %d data lines committed, %d regenerated"
               % (os.path.basename(new), len(a), len(b)))
        bad += 1
    header = a[0][1].split(",") if a else []
    for (na, la), (nb, lb) in zip(a, b):
        fa, fb = la.split(","), lb.split(",")
        if len(fa) != len(fb):
            report("%s: line %d has %d fields committed, %d regenerated (line %d)"
                   % (os.path.basename(new), na, len(fa), len(fb), nb))
            bad += 1
            continue
        for k, (x, y) in enumerate(zip(fa, fb), 1):
            xv, yv = as_float(x), as_float(y)
            if xv is not None and yv is not None:
                name = header[k - 1] if k - 1 < len(header) else ""
                rel, ab = LOOSE.get((os.path.basename(new), name), (REL, ABS))
                if not abs(xv - yv) <= max(rel * max(abs(xv), abs(yv)), ab):
                    report("%s: line %d field %d: committed %s, regenerated %s"
                           % (os.path.basename(new), na, k, x, y))
                    bad += 1
            elif x != y:
                report("%s: line %d field %d: committed %r, regenerated %r"
                       % (os.path.basename(new), na, k, x, y))
                bad += 1
    return bad


def main(argv):
    if len(argv) != 3:
        sys.stderr.write(__doc__)
        return 2
    old_dir, new_dir = argv[1], argv[2]
    names = sorted(os.listdir(new_dir))
    if not names:
        print("compare_fixtures: %s is empty" % new_dir)
        return 1
    total = 0
    shown = [0]

    def report(msg):
        shown[0] += 1
        if shown[0] <= 50:
            print("compare_fixtures: " + msg)

    for name in names:
        old = os.path.join(old_dir, name)
        if not os.path.exists(old):
            report("%s: regenerated but not committed" % name)
            total += 1
            continue
        total += compare_file(old, os.path.join(new_dir, name), report)
    if total:
        print("compare_fixtures: %d difference(s) in %d file(s) compared"
              % (total, len(names)))
        return 1
    print("compare_fixtures: %d file(s) agree" % len(names))
    return 0


if __name__ == "__main__":
    sys.exit(main(sys.argv))
