"""Compares two JSON files that should hold the same numbers: equal structure,
equal text, and numbers (also numbers written as strings) within 1e-12
relative, since another build of numpy may round the last bit differently.

Usage: python3 same_numbers.py EXPECTED.json ACTUAL.json
"""
import json
import sys


def number(x):
    try:
        return float(x)
    except (TypeError, ValueError):
        return None


def compare(a, b, path, problems):
    if isinstance(a, dict) and isinstance(b, dict):
        if sorted(a) != sorted(b):
            problems.append("%s: keys differ" % path)
            return
        for k in a:
            if k == "_source":
                continue
            compare(a[k], b[k], "%s/%s" % (path, k), problems)
    elif isinstance(a, list) and isinstance(b, list):
        if len(a) != len(b):
            problems.append("%s: %d items, then %d" % (path, len(a), len(b)))
            return
        for i, (x, y) in enumerate(zip(a, b)):
            compare(x, y, "%s/%d" % (path, i), problems)
    elif a != b:
        x, y = number(a), number(b)
        if x is None or y is None or abs(x - y) > 1e-12 * max(1.0, abs(x)):
            problems.append("%s: %r, then %r" % (path, a, b))


def main():
    with open(sys.argv[1]) as f:
        expected = json.load(f)
    with open(sys.argv[2]) as f:
        actual = json.load(f)
    problems = []
    compare(expected, actual, "", problems)
    if problems:
        print("the reference implementation's output changed:", file=sys.stderr)
        for p in problems[:20]:
            print("  " + p, file=sys.stderr)
        sys.exit(1)
    print("reference values reproduced: %s" % sys.argv[1])


if __name__ == "__main__":
    main()
