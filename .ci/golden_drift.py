#!/usr/bin/python3
"""Compares the golden files just regenerated from the reference libraries
with the committed ones (git HEAD).

The same library versions give numbers that differ in their last digits from
one processor to another (vectorised sums, and the paths iterative
optimisers such as curve_fit and MixedLM take, follow the CPU): on the
shared eegmmidb and eegmat references up to 3e-14 relative, on the optimiser
goldens up to 4e-8, and on one ill-conditioned fooof case (a 0.003-high
peak under settings with no minimum height) 2e-3. A byte-for-byte check
would then fail on a machine of another kind while no library has changed.

So a regenerated golden passes here when its structure (keys, list lengths,
types) and every string are as committed; the strings carry the library
versions and calls, so a changed library or script fails. Its numbers are
reported (largest relative difference), and .ci/run then runs the Go tests
against the regenerated files, so each number is judged by the tolerance its
test states against what the libraries give on this machine. A few keys
that record an optimiser's own verdict (INFORMATIONAL) are reported when
they change, not failed. A file that is not JSON must be equal byte for byte.

Usage: .ci/golden_drift.py FILE... (paths relative to the repository root)
Exits 1 when a file changed beyond numbers.
"""
import json
import math
import subprocess
import sys

NOISE = 1e-9  # below this relative difference a number is called noise
INFORMATIONAL = {"converged", "warnings"}


def committed(path):
    return subprocess.run(["git", "show", "HEAD:" + path], check=True, capture_output=True).stdout


def compare(a, b, where, worst, problems, notes):
    if isinstance(a, bool) or isinstance(b, bool) or a is None or b is None:
        if a != b:
            problems.append(f"{where}: {a!r} became {b!r}")
        return
    if isinstance(a, (int, float)) and isinstance(b, (int, float)):
        if math.isnan(a) and math.isnan(b):
            return
        scale = max(abs(a), abs(b))
        if scale > 0:
            rel = abs(a - b) / scale
            if rel > worst[0]:
                worst[0], worst[1] = rel, where
        return
    if type(a) is not type(b):
        problems.append(f"{where}: {type(a).__name__} became {type(b).__name__}")
        return
    if isinstance(a, dict):
        if set(a) != set(b):
            problems.append(f"{where}: keys {sorted(set(a) ^ set(b))} added or removed")
            return
        for k in a:
            if k in INFORMATIONAL:
                if a[k] != b[k]:
                    notes.append(f"{where}.{k}: {a[k]!r} became {b[k]!r} (informational)")
                continue
            compare(a[k], b[k], f"{where}.{k}", worst, problems, notes)
    elif isinstance(a, list):
        if len(a) != len(b):
            problems.append(f"{where}: {len(a)} items became {len(b)}")
            return
        for i, (x, y) in enumerate(zip(a, b)):
            compare(x, y, f"{where}[{i}]", worst, problems, notes)
    elif a != b:
        problems.append(f"{where}: {a!r} became {b!r}")


def main(paths):
    failed = False
    for path in paths:
        old = committed(path)
        with open(path, "rb") as f:
            new = f.read()
        if old == new:
            continue
        if not path.endswith(".json"):
            print(f"{path}: differs from the committed file (not JSON: compared byte for byte)")
            failed = True
            continue
        worst, problems, notes = [0.0, ""], [], []
        compare(json.loads(old), json.loads(new), path, worst, problems, notes)
        for n in notes:
            print("   ", n)
        if problems:
            failed = True
            print(f"{path}: changed beyond its numbers ({len(problems)} places), first:")
            for p in problems[:5]:
                print("   ", p)
        elif worst[0] <= NOISE:
            print(f"{path}: numbers equal within noise (largest relative difference {worst[0]:.1e})")
        else:
            print(f"{path}: numbers differ by up to {worst[0]:.1e} relative (at {worst[1]}); the Go tests judge them")
    return 1 if failed else 0


if __name__ == "__main__":
    sys.exit(main(sys.argv[1:]))
