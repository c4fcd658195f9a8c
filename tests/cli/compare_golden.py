#!/usr/bin/env python3
"""Compare a command-line test's output with its golden file, numbers within
stated tolerances (tests/cli/README.md).

    compare_golden.py [--tolerances FILE] [--name NAME] GOLDEN GOT

Exit status 0 when they match, 1 when they differ (the differences are
printed), 2 on a usage error or a golden that cannot be read.

A floating-point figure depends on the platform's maths library and on the
order of every sum that led to it, so a golden that freezes all its digits
breaks on a harmless change. Text must match, numbers must agree within a
tolerance:

- NAME ending in .json: both files are parsed; keys, array lengths, strings,
  booleans and nulls must be equal; each number is compared with the
  tolerance of the first line of the tolerances file whose pattern matches
  its key path (keys and array indices joined by ".", such as
  "parameters.3.value"; "*" matches anything, dots included).
- any other NAME (stdout, a CSV file): line by line, the text between the
  numbers must be equal (runs of blanks count as one, so that a column that
  widens by a digit still matches) and the numbers must agree within the
  tolerance of the first pattern that matches NAME. A number with decimals
  may also differ by one unit in its last printed digit: it was rounded for
  print, and a value on a rounding boundary flips. Numbers glued to letters
  (p42, T1, a SHA-256 digest, version 0.1.0) are text.

Tolerances file: one line per rule, "#" starts a comment:
  PATTERN REL ABS     a number passes when
                      |got - want| <= max(ABS, REL * max(|got|, |want|))
  PATTERN ignore      a JSON value or subtree is not compared; in a text
                      file, any number matches any number
  NAME lines REGEX    in the text file NAME, a golden line that starts with
                      a match of the Python regular expression REGEX (the
                      rest of the rule line) needs an output line, at the
                      same place, that starts with a match too; the rest of
                      the line is not compared (for text whose order or
                      wording is not determined, such as a listing of ties)
Without a matching rule: REL 1e-6, ABS 1e-9.
"""
import fnmatch
import json
import math
import re
import sys

DEFAULT = (1e-6, 1e-9)
MAX_SHOWN = 20

# A number that stands alone: not glued to a letter, digit, "_" or "." on
# either side (so "p42", "T1", "65e299e6..." and "0.1.0" stay text).
NUMBER = re.compile(
    r"(?<![A-Za-z0-9_.])[-+]?(?:\d+\.\d+|\.\d+|\d+)(?:[eE][-+]?\d+)?(?![A-Za-z0-9_]|\.\d)")


def read_tolerances(path):
    """The number rules [(pattern, (rel, abs) or None)] and the line rules
    [(name, compiled regex)] of a tolerances file."""
    rules, line_rules = [], []
    if path is None:
        return rules, line_rules
    try:
        f = open(path, encoding="utf-8")
    except FileNotFoundError:
        return rules, line_rules
    with f:
        for n, line in enumerate(f, 1):
            text = line.split("#", 1)[0].strip()
            words = text.split()
            if not words:
                continue
            if len(words) >= 3 and words[1] == "lines":
                regex = text.split(None, 2)[2]
                try:
                    line_rules.append((words[0], re.compile(regex)))
                except re.error as e:
                    sys.exit("%s:%d: bad regular expression: %s" % (path, n, e))
                continue
            if len(words) == 2 and words[1] == "ignore":
                rules.append((words[0], None))
                continue
            try:
                if len(words) != 3:
                    raise ValueError
                rel, ab = float(words[1]), float(words[2])
                if not (rel >= 0 and ab >= 0):
                    raise ValueError
            except ValueError:
                sys.exit("%s:%d: expected 'PATTERN REL ABS' or 'PATTERN ignore', got: %s"
                         % (path, n, line.rstrip()))
            rules.append((words[0], (rel, ab)))
    return rules, line_rules


def rule_for(rules, path):
    for pattern, tol in rules:
        if fnmatch.fnmatchcase(path, pattern):
            return tol
    return DEFAULT


def close(want, got, tol, unit=0.0):
    if isinstance(want, float) and isinstance(got, float) and (
            math.isnan(want) or math.isnan(got)):
        return math.isnan(want) and math.isnan(got)
    if math.isinf(want) or math.isinf(got):
        return want == got
    rel, ab = tol
    return abs(got - want) <= max(ab, rel * max(abs(got), abs(want))) + unit


def is_number(x):
    return isinstance(x, (int, float)) and not isinstance(x, bool)


def compare_json(want, got, rules, path, diffs):
    tol = rule_for(rules, path) if path else DEFAULT
    if path and tol is None:
        return
    where = path or "(top)"
    if is_number(want) and is_number(got):
        if not close(want, got, tol):
            diffs.append("%s: %r, expected %r (rel %g, abs %g)" % (where, got, want, tol[0], tol[1]))
    elif isinstance(want, dict) and isinstance(got, dict):
        for k in want:
            sub = path + "." + k if path else k
            if k not in got:
                if rule_for(rules, sub) is not None:
                    diffs.append("%s: missing" % sub)
            else:
                compare_json(want[k], got[k], rules, sub, diffs)
        for k in got:
            sub = path + "." + k if path else k
            if k not in want and rule_for(rules, sub) is not None:
                diffs.append("%s: not in the golden (%s)" % (sub, json.dumps(got[k])[:60]))
    elif isinstance(want, list) and isinstance(got, list):
        if len(want) != len(got):
            diffs.append("%s: %d elements, expected %d" % (where, len(got), len(want)))
        for i, (a, b) in enumerate(zip(want, got)):
            compare_json(a, b, rules, "%s.%d" % (path, i) if path else str(i), diffs)
    elif type(want) is not type(got) or want != got:
        diffs.append("%s: %s, expected %s" % (where, json.dumps(got)[:60], json.dumps(want)[:60]))


def last_digit(token):
    """One unit in the last printed digit of a number with decimals; 0 for
    an integer (counts, line numbers: no rounding happened)."""
    m = re.fullmatch(r"[-+]?(\d*)(?:\.(\d*))?(?:[eE]([-+]?\d+))?", token)
    decimals, exponent = m.group(2), m.group(3)
    if decimals is None and exponent is None:
        return 0.0
    return 10.0 ** (int(exponent or 0) - len(decimals or ""))


def split_line(line):
    """The text between the numbers (blanks folded) and the numbers."""
    texts, numbers, at = [], [], 0
    for m in NUMBER.finditer(line):
        texts.append(line[at:m.start()])
        numbers.append(m.group(0))
        at = m.end()
    texts.append(line[at:])
    return [re.sub(r"[ \t]+", " ", t) for t in texts], numbers


def compare_text(want_lines, got_lines, tol, masks, diffs):
    if len(want_lines) != len(got_lines):
        diffs.append("%d lines, expected %d" % (len(got_lines), len(want_lines)))
    for n, (a, b) in enumerate(zip(want_lines, got_lines), 1):
        mask = next((m for m in masks if m.match(a)), None)
        if mask is not None:
            if not mask.match(b):
                diffs.append("line %d: does not start like /%s/\n  expected: %s\n  got:      %s"
                             % (n, mask.pattern, a, b))
            continue
        ta, na = split_line(a)
        tb, nb = split_line(b)
        if ta != tb or len(na) != len(nb):
            diffs.append("line %d: text differs\n  expected: %s\n  got:      %s" % (n, a, b))
            continue
        if tol is None:
            continue
        for x, y in zip(na, nb):
            unit = max(last_digit(x), last_digit(y))
            if not close(float(x), float(y), tol, unit):
                diffs.append("line %d: %s, expected %s (rel %g, abs %g, last digit %g)\n  got: %s"
                             % (n, y, x, tol[0], tol[1], unit, b))


def main(argv):
    tolerances, name, files = None, None, []
    args = iter(argv)
    for a in args:
        if a == "--tolerances":
            tolerances = next(args, None)
        elif a == "--name":
            name = next(args, None)
        else:
            files.append(a)
    if len(files) != 2:
        sys.stderr.write(__doc__)
        return 2
    golden, got = files
    name = name or golden.rsplit("/", 1)[-1]
    rules, line_rules = read_tolerances(tolerances)
    diffs = []
    try:
        with open(golden, encoding="utf-8") as f:
            want_text = f.read()
    except OSError as e:
        print("cannot read the golden %s: %s" % (golden, e))
        return 2
    try:
        with open(got, encoding="utf-8") as f:
            got_text = f.read()
    except OSError as e:
        print("%s: no output (%s)" % (name, e.strerror))
        return 1
    if name.endswith(".json"):
        try:
            want = json.loads(want_text)
        except ValueError as e:
            print("the golden %s is not JSON: %s" % (golden, e))
            return 2
        try:
            got_value = json.loads(got_text)
        except ValueError as e:
            print("%s: not JSON: %s" % (name, e))
            return 1
        compare_json(want, got_value, rules, "", diffs)
    else:
        masks = [r for pattern, r in line_rules if fnmatch.fnmatchcase(name, pattern)]
        compare_text(want_text.split("\n"), got_text.split("\n"), rule_for(rules, name), masks,
                     diffs)
    for d in diffs[:MAX_SHOWN]:
        print("%s: %s" % (name, d))
    if len(diffs) > MAX_SHOWN:
        print("%s: ... %d more differences" % (name, len(diffs) - MAX_SHOWN))
    return 1 if diffs else 0


if __name__ == "__main__":
    sys.exit(main(sys.argv[1:]))
