"""Shared helpers for cairn's outside-reference scripts.

Every script in tests/oracle/ is run as `python tests/oracle/NAME.py OUTDIR` and writes its
reference values under OUTDIR, mirroring the layout of fixtures/ (so `fixtures/` itself is the
default OUTDIR). .ci/run re-runs all scripts into a temporary folder and compares with
tests/oracle/compare.py.
"""
import json
import os
import sys


def out_dir(default_sub=""):
    """The output folder given on the command line (default: the repository's fixtures/)."""
    here = os.path.dirname(os.path.abspath(__file__))
    root = os.path.dirname(os.path.dirname(here))
    base = sys.argv[1] if len(sys.argv) > 1 else os.path.join(root, "fixtures")
    path = os.path.join(base, default_sub)
    os.makedirs(path, exist_ok=True)
    return path


def fixtures_dir():
    """The repository's committed fixtures/ folder (for inputs made by cairn itself)."""
    here = os.path.dirname(os.path.abspath(__file__))
    return os.path.join(os.path.dirname(os.path.dirname(here)), "fixtures")


def _clean(obj):
    """Converts numpy scalars and arrays to plain Python; non-finite floats become strings."""
    try:
        import numpy as np
    except ImportError:  # pragma: no cover
        np = None
    if np is not None:
        if isinstance(obj, np.ndarray):
            return [_clean(x) for x in obj.tolist()]
        if isinstance(obj, np.generic):
            return _clean(obj.item())
    if isinstance(obj, float):
        if obj != obj:
            return "nan"
        if obj in (float("inf"), float("-inf")):
            return "inf" if obj > 0 else "-inf"
        return obj
    if isinstance(obj, dict):
        return {str(k): _clean(v) for k, v in obj.items()}
    if isinstance(obj, (list, tuple)):
        return [_clean(x) for x in obj]
    return obj


def write_json(path, obj):
    """Writes JSON with sorted keys and shortest round-trip floats."""
    os.makedirs(os.path.dirname(path), exist_ok=True)
    with open(path, "w") as f:
        json.dump(_clean(obj), f, indent=1, sort_keys=True)
        f.write("\n")
