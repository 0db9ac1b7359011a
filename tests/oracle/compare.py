"""Compares freshly re-made oracle outputs with the stored fixtures.

Usage: python tests/oracle/compare.py FIXTURES_DIR FRESH_DIR

Every file under FRESH_DIR must exist under FIXTURES_DIR. JSON files are compared value by
value (numbers within 1e-12 relative, to allow for last-bit differences in libm across
machines); every other file must be byte-identical. Exits 1 and lists each difference.
"""
import json
import math
import os
import sys

REL = 1e-12


def same(a, b, where, problems):
    if isinstance(a, dict) and isinstance(b, dict):
        if set(a) != set(b):
            problems.append(f"{where}: keys differ: {sorted(set(a) ^ set(b))[:5]}")
            return
        for k in a:
            same(a[k], b[k], f"{where}.{k}", problems)
    elif isinstance(a, list) and isinstance(b, list):
        if len(a) != len(b):
            problems.append(f"{where}: lengths {len(a)} and {len(b)}")
            return
        for i, (x, y) in enumerate(zip(a, b)):
            same(x, y, f"{where}[{i}]", problems)
    elif isinstance(a, (int, float)) and isinstance(b, (int, float)) and not isinstance(a, bool):
        if a == b:
            return
        if not math.isclose(a, b, rel_tol=REL, abs_tol=1e-300):
            problems.append(f"{where}: stored {a!r}, fresh {b!r}")
    elif a != b:
        problems.append(f"{where}: stored {a!r}, fresh {b!r}")


def main():
    stored_root, fresh_root = sys.argv[1], sys.argv[2]
    problems = []
    count = 0
    for dirpath, _, files in os.walk(fresh_root):
        for name in sorted(files):
            fresh = os.path.join(dirpath, name)
            rel = os.path.relpath(fresh, fresh_root)
            stored = os.path.join(stored_root, rel)
            count += 1
            if not os.path.exists(stored):
                problems.append(f"{rel}: made by an oracle script but not stored in fixtures/")
                continue
            if name.endswith(".json"):
                with open(stored) as f:
                    a = json.load(f)
                with open(fresh) as f:
                    b = json.load(f)
                same(a, b, rel, problems)
            else:
                with open(stored, "rb") as f:
                    a = f.read()
                with open(fresh, "rb") as f:
                    b = f.read()
                if a != b:
                    problems.append(f"{rel}: bytes differ from the stored copy")
    for p in problems[:50]:
        print("oracle mismatch:", p)
    if problems:
        print(f"{len(problems)} differences in {count} oracle files; re-run the scripts and "
              "review the change before committing new fixtures.")
        sys.exit(1)
    print(f"oracle check: {count} files re-made, all match the stored fixtures")


if __name__ == "__main__":
    main()
