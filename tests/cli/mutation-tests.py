#!/usr/bin/env python3
"""Mutation test of whole runs (run by run-mutation-tests.sh).

Takes the demo model and campaign, applies a fixed-seed series of
mutations (flipped bits, deleted, duplicated or swapped lines, truncated
files, swapped columns, huge numbers, NUL bytes, very long lines, ...),
and runs `twistfit calibrate` and `twistfit verify` on each. Every run must
end in time, by itself (no signal), with a status of twistfit(1) EXIT
STATUS that is not an internal error (0 to 5), without a sanitizer report;
a failed run (status 2 or more) must write no output file and print a
"twistfit: error:" line; a successful one must write every output asked
for; a file with a NUL byte must be refused as invalid (status 3) by an
error that names the NUL; standard error must hold no control character
(the messages quote the input).

Failures listed in mutation-known.txt (open bugs) are expected failures;
one that passes, or any other failure, fails the test. Each case draws
from its own generator seeded with its number, so a case stays the same
when the count changes.

  mutation-tests.py [--cases N] [--timeout S] [--keep DIR] [--only ID]
"""
import argparse
import os
import random
import re
import resource
import shutil
import subprocess
import sys
import tempfile

SEED = 13
# Documented statuses a run may end with on bad input; 6 (out of memory or
# an internal error) is a bug for these small files.
ALLOWED = {0, 1, 2, 3, 4, 5}
SANITIZER = re.compile(rb"ERROR: AddressSanitizer|ERROR: LeakSanitizer|runtime error:|"
                       rb"SUMMARY: (Address|Leak|UndefinedBehavior)Sanitizer")
# a number standing alone (not the digits of a name such as T1 or j2)
NUMBER = re.compile(rb"(?<![\w.])-?\d+(\.\d+)?(?![\w.])")
# what may stand in a message line besides printable text
CONTROL = re.compile(rb"[\x00-\x08\x0b-\x1f\x7f]")
HUGE = [b"1e308", b"-1e308", b"1.7976931348623157e308", b"1e309", b"1e400", b"-9e9999",
        b"1e-400", b"4.9e-324", b"123456789012345678901234567890", b"0x1p1023", b"nan",
        b"inf", b"-0"]


def lines_of(data):
    return data.split(b"\n")


def join(lines):
    return b"\n".join(lines)


# Each mutation takes (rng, data, is_campaign) and returns the new bytes.
def m_bitflip(rng, data, _):
    b = bytearray(data)
    for _ in range(rng.randint(1, 8)):
        i = rng.randrange(len(b))
        b[i] ^= 1 << rng.randrange(8)
    return bytes(b)


def m_delete_lines(rng, data, _):
    ls = lines_of(data)
    i = rng.randrange(len(ls))
    del ls[i:i + rng.randint(1, 3)]
    return join(ls)


def m_duplicate_line(rng, data, _):
    ls = lines_of(data)
    i = rng.randrange(len(ls))
    ls.insert(i, ls[i])
    return join(ls)


def m_swap_lines(rng, data, _):
    ls = lines_of(data)
    i, k = rng.randrange(len(ls)), rng.randrange(len(ls))
    ls[i], ls[k] = ls[k], ls[i]
    return join(ls)


def m_truncate(rng, data, _):
    return data[:rng.randrange(len(data))]


def m_swap_columns(rng, data, campaign):
    """Swap two columns: in the header only (the data change meaning), or
    in every row (the same campaign)."""
    if not campaign:
        return m_swap_lines(rng, data, campaign)
    ls = lines_of(data)
    header = next(i for i, l in enumerate(ls) if l and not l.startswith(b"#"))
    n = ls[header].count(b",") + 1
    a, b = rng.sample(range(n), 2)
    rows = [header] if rng.random() < 0.5 else range(header, len(ls))
    for i in rows:
        f = ls[i].split(b",")
        if len(f) == n:
            f[a], f[b] = f[b], f[a]
            ls[i] = b",".join(f)
    return join(ls)


def m_huge_number(rng, data, _):
    spans = [m.span() for m in NUMBER.finditer(data)]
    for _ in range(rng.randint(1, 3)):
        s, e = rng.choice(spans)
        data = data[:s] + rng.choice(HUGE) + data[e:]
        spans = [m.span() for m in NUMBER.finditer(data)]
    return data


def m_nul_byte(rng, data, _):
    """A NUL byte in a data line (never valid text): added, in place of a
    byte, or with text after it at the end of the line."""
    ls = lines_of(data)
    cand = [i for i, l in enumerate(ls) if l and not l.startswith((b"#", b";"))]
    i = rng.choice(cand)
    k = rng.randrange(len(ls[i]))
    kind = rng.randrange(3)
    if kind == 0:
        ls[i] = ls[i][:k] + b"\0" + ls[i][k:]
    elif kind == 1:
        ls[i] = ls[i][:k] + b"\0" + ls[i][k + 1:]
    else:
        ls[i] = ls[i] + b"\0garbage"
    return join(ls)


def m_control(rng, data, _):
    """A control character (an escape sequence, a carriage return, a
    backspace) inside a field or value of a data line."""
    ls = lines_of(data)
    cand = [i for i, l in enumerate(ls) if l and not l.startswith((b"#", b";"))]
    i = rng.choice(cand)
    k = rng.randrange(len(ls[i]) + 1)
    ls[i] = ls[i][:k] + rng.choice([b"\x1b[2J", b"\r", b"\x08", b"\x07", b"\x7f"]) + ls[i][k:]
    return join(ls)


def m_long_line(rng, data, _):
    """A very long line: a comment, a data line with a long field, or a
    file that ends in megabytes without a line end."""
    size = rng.choice([300, 5000, 70000, 1 << 20, 8 << 20])
    ls = lines_of(data)
    kind = rng.randrange(3)
    i = rng.randrange(len(ls))
    if kind == 0:
        ls.insert(i, b"#" + b"c" * size)
    elif kind == 1:
        ls[i] = ls[i] + b"7" * size
    else:
        return data + b"x" * size
    return join(ls)


def m_crlf(rng, data, _):
    return data.replace(b"\n", b"\r\n")


def m_bom(rng, data, _):
    return b"\xef\xbb\xbf" + data


def m_empty(rng, data, _):
    return b"" if rng.random() < 0.5 else b"\n\n"


def m_garbage(rng, data, _):
    i = rng.randrange(len(data) + 1)
    junk = bytes(rng.randrange(256) for _ in range(rng.randint(1, 40)))
    return data[:i] + junk + data[i:]


def m_delimiter(rng, data, campaign):
    if not campaign:
        return data.replace(b" = ", b" : ", rng.randint(1, 3))
    b = bytearray(data)
    commas = [i for i, c in enumerate(b) if c == ord(",")]
    for i in rng.sample(commas, min(len(commas), rng.randint(1, 5))):
        b[i] = ord(rng.choice(";\t"))
    return bytes(b)


MUTATIONS = [
    ("bitflip", m_bitflip), ("delete-lines", m_delete_lines),
    ("duplicate-line", m_duplicate_line), ("swap-lines", m_swap_lines),
    ("truncate", m_truncate), ("swap-columns", m_swap_columns),
    ("huge-number", m_huge_number), ("nul-byte", m_nul_byte),
    ("long-line", m_long_line), ("crlf", m_crlf), ("bom", m_bom),
    ("empty", m_empty), ("garbage", m_garbage), ("delimiter", m_delimiter),
    ("control", m_control),
]


def make_case(n, model, campaign):
    """Case n: its id, the mutated model and campaign, and whether the
    mutated file holds a NUL byte."""
    rng = random.Random("twistfit-mutation-%d-%d" % (SEED, n))
    name, fn = MUTATIONS[n % len(MUTATIONS)]
    on_campaign = rng.random() < 0.65
    if on_campaign:
        campaign = fn(rng, campaign, True)
    else:
        model = fn(rng, model, False)
    case_id = "%03d-%s-%s" % (n, "campaign" if on_campaign else "model", name)
    nul = b"\0" in (campaign if on_campaign else model)
    return case_id, model, campaign, nul


# Inputs that never end: /dev/zero, an endless line of NUL bytes, given as
# the model or the campaign. A reader must stop at the first NUL (or at a
# line over its limit) instead of reading on. These runs get a shorter time
# limit and, outside AddressSanitizer builds (whose shadow memory needs the
# whole address space), a cap on memory, so that a reader that reads on
# cannot take the machine's memory.
ENDLESS = [("e01-model-endless", "model"), ("e02-campaign-endless", "campaign")]
ENDLESS_TIMEOUT = 3.0
ENDLESS_MEMORY = 3 << 30


def limit_memory():
    resource.setrlimit(resource.RLIMIT_AS, (ENDLESS_MEMORY, ENDLESS_MEMORY))


def uses_asan(twistfit):
    """Whether the program (or libtool's real one beside its wrapper) or the
    library it runs with is an AddressSanitizer build."""
    d = os.path.dirname(twistfit)
    for f in [twistfit, os.path.join(d, ".libs", "twistfit"),
              os.path.join(d, ".libs", "libtwistfit.so")]:
        try:
            with open(f, "rb") as fp:
                if b"__asan_init" in fp.read():
                    return True
        except OSError:
            pass
    return False


def run(twistfit, args, cwd, timeout, preexec=None):
    try:
        p = subprocess.run([twistfit] + args, cwd=cwd, stdin=subprocess.DEVNULL,
                           stdout=subprocess.PIPE, stderr=subprocess.PIPE,
                           timeout=timeout, preexec_fn=preexec)
        return p.returncode, p.stdout, p.stderr
    except subprocess.TimeoutExpired as e:
        return None, e.stdout or b"", e.stderr or b""


COMMANDS = {
    "calibrate": (["-o", "out/asbuilt.ini", "--base-output", "out/base.ini",
                   "--json", "out/report.json", "--residuals", "out/residuals.csv"],
                  ["asbuilt.ini", "base.ini", "report.json", "residuals.csv"]),
    "verify": (["--json", "out/verify.json", "--residuals", "out/residuals.csv"],
               ["verify.json", "residuals.csv"]),
}


def check_case(twistfit, work, case, timeout, verbose=False, endless=None, preexec=None):
    """The problems of one case, as (command, what) pairs. endless: "model"
    or "campaign" to give /dev/zero in its place."""
    case_id, model, campaign, nul = case
    problems = []
    inp = os.path.join(work, "in")
    os.makedirs(inp, exist_ok=True)
    with open(os.path.join(inp, "model.ini"), "wb") as f:
        f.write(model)
    with open(os.path.join(inp, "campaign.csv"), "wb") as f:
        f.write(campaign)
    paths = ["/dev/zero" if endless == "model" else "in/model.ini",
             "/dev/zero" if endless == "campaign" else "in/campaign.csv"]
    for cmd, (opts, outs) in COMMANDS.items():
        out = os.path.join(work, "out")
        shutil.rmtree(out, ignore_errors=True)
        os.makedirs(out)
        st, so, se = run(twistfit, [cmd] + paths + opts, work, timeout, preexec)
        written = sorted(os.listdir(out))
        if verbose:
            err = next((l for l in se.decode("utf-8", "replace").splitlines()
                        if l.startswith("twistfit: error:")), "")
            print("  %s %s: status %s, wrote %d; %s" % (case_id, cmd, st, len(written), err[:150]))
        if st is None:
            problems.append((cmd, "no end within %g s" % timeout))
            continue
        if st < 0:
            problems.append((cmd, "killed by signal %d" % -st))
            continue
        if SANITIZER.search(se):
            problems.append((cmd, "sanitizer report"))
        if st not in ALLOWED:
            problems.append((cmd, "exit status %d" % st))
        if CONTROL.search(se):
            problems.append((cmd, "a control character on standard error"))
        if st >= 2:
            if so:
                problems.append((cmd, "status %d but printed a report" % st))
            if written:
                problems.append((cmd, "status %d but wrote %s" % (st, " ".join(written))))
            if not re.search(rb"^twistfit: error: ", se, re.M):
                problems.append((cmd, "status %d without a 'twistfit: error:' line" % st))
        elif st == 0:
            missing = [o for o in outs if o not in written]
            if missing:
                problems.append((cmd, "status 0 but did not write %s" % " ".join(missing)))
        if nul and (st != 3 or not re.search(rb"^twistfit: error: .*NUL", se, re.M)):
            problems.append((cmd, "a NUL byte in the input: status %d, not 3 with an error "
                                  "that names it" % st))
    return problems


def load_known(path):
    known = {}
    if not os.path.exists(path):
        return known
    with open(path, encoding="utf-8") as f:
        for line in f:
            line = line.strip()
            if line and not line.startswith("#"):
                case_id, _, why = line.partition(" ")
                known[case_id] = why.strip()
    return known


def main():
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("--cases", type=int, default=int(os.environ.get("TWF_MUTATION_CASES", 140)))
    ap.add_argument("--timeout", type=float, default=20.0)
    ap.add_argument("--keep", help="keep the inputs of failing cases in this folder")
    ap.add_argument("--only", help="run only this case id")
    ap.add_argument("--verbose", action="store_true", help="print each run's status and error")
    a = ap.parse_args()
    src = os.environ.get("TWF_SRCDIR") or os.path.normpath(os.path.join(os.path.dirname(__file__), "../.."))
    build = os.environ.get("TWF_BUILDDIR") or src
    twistfit = os.path.join(build, "src", "twistfit")
    with open(os.path.join(src, "samples", "tf6s.ini"), "rb") as f:
        model = f.read()
    with open(os.path.join(src, "samples", "demo-campaign.csv"), "rb") as f:
        campaign = f.read()
    known = load_known(os.path.join(src, "tests", "cli", "mutation-known.txt"))

    passed = failed = xfailed = 0
    seen = set()
    cases = [(make_case(n, model, campaign), None) for n in range(a.cases)]
    cases += [((case_id, model, campaign, True), which) for case_id, which in ENDLESS]
    cap = None if uses_asan(twistfit) else limit_memory
    with tempfile.TemporaryDirectory(prefix="twf-mutation-") as tmp:
        for case, endless in cases:
            case_id = case[0]
            seen.add(case_id)
            if a.only and case_id != a.only:
                continue
            work = os.path.join(tmp, case_id)
            os.makedirs(work)
            if endless:
                problems = check_case(twistfit, work, case, min(a.timeout, ENDLESS_TIMEOUT),
                                      a.verbose, endless, cap)
            else:
                problems = check_case(twistfit, work, case, a.timeout, a.verbose)
            if problems and a.keep:
                dest = os.path.join(a.keep, case_id)
                shutil.rmtree(dest, ignore_errors=True)
                shutil.copytree(os.path.join(work, "in"), dest)
            shutil.rmtree(work)
            what = "; ".join("%s: %s" % p for p in problems)
            if problems and case_id in known:
                xfailed += 1
                print("XFAIL: %s: %s (known: %s)" % (case_id, what, known[case_id]))
            elif problems:
                failed += 1
                print("FAIL: %s: %s" % (case_id, what))
            elif case_id in known:
                failed += 1
                print("FAIL: %s passes now: remove its line from tests/cli/mutation-known.txt"
                      % case_id)
            else:
                passed += 1
            sys.stdout.flush()
    for case_id in sorted(set(known) - seen):
        if not a.only:
            print("note: %s of mutation-known.txt is beyond the %d cases run" % (case_id, a.cases))
    print("mutation: %d expected failures (mutation-known.txt)" % xfailed)
    print("mutation: %d passed, %d failed" % (passed, failed))
    return 1 if failed else 0


if __name__ == "__main__":
    sys.exit(main())
