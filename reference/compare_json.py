#!/usr/bin/env python3
"""Compare a regenerated reference JSON file with the committed copy.

Numbers must agree within a relative 1e-9 (absolute 1e-12 near zero): the scripts are
deterministic, so with the pinned library versions they should agree bit for bit, and the
small tolerance only absorbs last-digit differences of BLAS builds. Keys that record when or
where the file was made (date, platform) are not compared.

Usage: compare_json.py COMMITTED REGENERATED
"""

import json
import math
import sys

SKIP = {"date", "date_utc", "platform"}
REL, ABS = 1e-9, 1e-12


def walk(a, b, path, errors):
    if isinstance(a, dict) and isinstance(b, dict):
        for k in sorted(set(a) | set(b)):
            if k in SKIP:
                continue
            if k not in a or k not in b:
                errors.append(f"{path}/{k}: present in only one file")
                continue
            walk(a[k], b[k], f"{path}/{k}", errors)
    elif isinstance(a, list) and isinstance(b, list):
        if len(a) != len(b):
            errors.append(f"{path}: length {len(a)} != {len(b)}")
            return
        for i, (x, y) in enumerate(zip(a, b)):
            walk(x, y, f"{path}[{i}]", errors)
    elif isinstance(a, bool) or isinstance(b, bool) or isinstance(a, str) or a is None:
        if a != b:
            errors.append(f"{path}: {a!r} != {b!r}")
    elif isinstance(a, (int, float)) and isinstance(b, (int, float)):
        if math.isnan(a) and math.isnan(b):
            return
        if not math.isclose(a, b, rel_tol=REL, abs_tol=ABS):
            errors.append(f"{path}: {a!r} != {b!r}")
    elif a != b:
        errors.append(f"{path}: {a!r} != {b!r}")


def main():
    committed, regenerated = sys.argv[1], sys.argv[2]
    with open(committed) as f:
        a = json.load(f)
    with open(regenerated) as f:
        b = json.load(f)
    errors = []
    walk(a, b, "", errors)
    for e in errors[:20]:
        print(f"{committed}: {e}")
    if errors:
        print(f"{committed}: {len(errors)} difference(s) from the regenerated copy")
        return 1
    print(f"{committed}: matches the regenerated copy")
    return 0


if __name__ == "__main__":
    sys.exit(main())
