"""Compare two summary.json files number by number (a refactoring must not move the answers).

    python bench/compare_summaries.py BEFORE/summary.json AFTER/summary.json [--rtol 1e-9]

Walks both JSON trees together; numbers must agree to rtol (relative, with an absolute floor
of rtol for values near zero), strings, booleans, keys and list lengths exactly.  Prints the
number of values compared, the largest relative difference and every mismatch; exit status 0
when they agree, 1 otherwise.
"""

from __future__ import annotations

import argparse
import json
import math
import sys


def compare(a, b, rtol, path="$", out=None):
    """List of mismatches; out collects (path, relative difference) of every number."""
    out = [] if out is None else out
    bad = []
    if isinstance(a, dict) and isinstance(b, dict):
        if set(a) != set(b):
            bad.append(f"{path}: keys differ: {sorted(set(a) ^ set(b))}")
        for k in sorted(set(a) & set(b)):
            bad += compare(a[k], b[k], rtol, f"{path}.{k}", out)
    elif isinstance(a, list) and isinstance(b, list):
        if len(a) != len(b):
            bad.append(f"{path}: lengths {len(a)} and {len(b)}")
        for i, (x, y) in enumerate(zip(a, b)):
            bad += compare(x, y, rtol, f"{path}[{i}]", out)
    elif isinstance(a, (int, float)) and isinstance(b, (int, float)) and not isinstance(a, bool):
        if isinstance(a, float) and isinstance(b, float) and math.isnan(a) and math.isnan(b):
            out.append((path, 0.0))
            return bad
        rel = abs(a - b) / max(abs(a), abs(b), 1.0 if max(abs(a), abs(b)) < rtol else 0.0, 1e-300)
        out.append((path, rel))
        if rel > rtol:
            bad.append(f"{path}: {a!r} vs {b!r} (relative {rel:.3g})")
    elif a != b:
        bad.append(f"{path}: {a!r} vs {b!r}")
    return bad


def main(argv=None) -> int:
    p = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    p.add_argument("before")
    p.add_argument("after")
    p.add_argument("--rtol", type=float, default=1e-9)
    p.add_argument("--ignore", action="append", default=[], help="a top-level key to skip (e.g. case)")
    args = p.parse_args(argv)
    a, b = (json.load(open(f)) for f in (args.before, args.after))
    for k in args.ignore:
        a.pop(k, None), b.pop(k, None)
    numbers = []
    bad = compare(a, b, args.rtol, out=numbers)
    worst = max(numbers, key=lambda x: x[1]) if numbers else ("-", 0.0)
    print(f"{len(numbers)} numbers compared; largest relative difference {worst[1]:.3g} at {worst[0]}; "
          f"{len(bad)} mismatch(es) at rtol {args.rtol:g}")
    for line in bad:
        print("  " + line)
    return 0 if not bad else 1


if __name__ == "__main__":
    sys.exit(main())
