"""What the accuracy record costs: the same fits with two source trees, side by side.

Usage::

    python benchmarks/accuracy_cost.py --before /work/main --after $PWD [--repeats 5]

Each problem is fitted in a fresh process per tree (the trees alternate, ``--repeats``
rounds), and the median time of a call is printed for each, with the ratio after/before
and a SHA-256 of the coefficients' bytes from each tree (equal: the record changed no
coefficient).  Problems: least squares 1e6 x 50 and 2e5 x 20, logistic 2e5 x 20 and 1e4 x
10, softmax 1e5 x 10 with 4 classes and 2e5 x 20 with 5, logistic over blocks 1e6 x 20
(blocks of 1e5 rows).

The "after" tree's process also times, inside the fit, the functions that make the record
(the accuracy functions, and for blocked fits the row sample their first pass takes on the
row threads) and prints their share of the fit's time ("record share").  To get a "before"
tree of the commit this branch started from: ``git archive <commit> | tar -x -C /tmp/base``.
"""

from __future__ import annotations

import argparse
import json
import os
import statistics
import subprocess
import sys

PROBLEMS = {
    "least_squares 1e6x50": ("least_squares", 1_000_000, 50, 1),
    "least_squares 2e5x20": ("least_squares", 200_000, 20, 1),
    "logistic 2e5x20": ("logistic", 200_000, 20, 1),
    "logistic 1e4x10": ("logistic", 10_000, 10, 1),
    "softmax 1e5x10 K=4": ("softmax", 100_000, 10, 4),
    "softmax 2e5x20 K=5": ("softmax", 200_000, 20, 5),
    "logistic blocks 1e6x20": ("logistic_blocks", 1_000_000, 20, 1),
}

_CHILD = r"""
import hashlib, importlib, json, sys, time
import numpy as np
import lintools as lt
kind, n, p, k, calls = sys.argv[1], int(sys.argv[2]), int(sys.argv[3]), int(sys.argv[4]), int(sys.argv[5])
spent = [0.0]
def timed(module, name):
    try:
        mod = importlib.import_module(module)
        fn = getattr(mod, name)
    except (ImportError, AttributeError):  # the "before" tree has no record
        return
    def wrapper(*a, **kw):
        t = time.perf_counter()
        try:
            return fn(*a, **kw)
        finally:
            spent[0] += time.perf_counter() - t
    setattr(mod, name, wrapper)
for module, name in [("lintools.models.least_squares", "least_squares_accuracy"),
                     ("lintools.models.logistic", "binary_accuracy"),
                     ("lintools.models.softmax", "softmax_accuracy"),
                     ("lintools.blocks.logistic", "blocked_binary_accuracy"),
                     ("lintools.blocks.sample", "row_sample")]:
    timed(module, name)
rng = np.random.default_rng(7)
X = rng.normal(size=(n, p))
if kind == "logistic_blocks":
    y = (rng.uniform(size=n) < 1 / (1 + np.exp(-(0.3 + X @ rng.normal(scale=0.3, size=p))))).astype(float)
    fit = lambda: lt.logistic_blocks(lambda: ((X[i:i + 100_000], y[i:i + 100_000]) for i in range(0, n, 100_000)))
elif kind == "least_squares":
    y = X @ rng.normal(size=p) + rng.normal(size=n)
    fit = lambda: lt.least_squares(X, y)
elif kind == "logistic":
    y = (rng.uniform(size=n) < 1 / (1 + np.exp(-(0.3 + X @ rng.normal(scale=0.3, size=p))))).astype(float)
    fit = lambda: lt.logistic(X, y)
else:
    y = np.argmax(X @ rng.normal(scale=0.4, size=(p, k)) + rng.gumbel(size=(n, k)), axis=1)
    fit = lambda: lt.softmax(X, y)
times, shares = [], []
for _ in range(calls):
    spent[0] = 0.0
    t = time.perf_counter(); f = fit(); times.append(time.perf_counter() - t)
    shares.append(spent[0] / times[-1])
h = hashlib.sha256(np.ascontiguousarray(np.asarray(f.coefficients, float)).tobytes()
                   + np.asarray(f.intercept, float).tobytes()).hexdigest()[:16]
print(json.dumps({"time": min(times), "hash": h, "share": sorted(shares)[len(shares) // 2]}))
"""


def run(tree: str, spec: tuple, calls: int) -> dict:
    env = dict(os.environ, PYTHONPATH=tree)
    out = subprocess.run([sys.executable, "-c", _CHILD, spec[0], str(spec[1]), str(spec[2]), str(spec[3]), str(calls)],
                         env=env, capture_output=True, text=True, check=True)
    return json.loads(out.stdout.strip().splitlines()[-1])


def main(argv: list[str] | None = None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--before", required=True)
    ap.add_argument("--after", required=True)
    ap.add_argument("--repeats", type=int, default=3)
    ap.add_argument("--calls", type=int, default=3, help="calls per process (the fastest is kept)")
    ap.add_argument("--only", default=None)
    args = ap.parse_args(argv)
    print(f"{'problem':24s} {'before s':>9s} {'after s':>9s} {'after/before':>13s} {'record share':>13s}  coefficients")
    for name, spec in PROBLEMS.items():
        if args.only and args.only not in name:
            continue
        before, after, hashes, share = [], [], set(), []
        for _ in range(args.repeats):
            b = run(args.before, spec, args.calls)
            a = run(args.after, spec, args.calls)
            before.append(b["time"])
            after.append(a["time"])
            share.append(a["share"])
            hashes.update([("b", b["hash"]), ("a", a["hash"])])
        ratio = statistics.median(x / y for x, y in zip(after, before))
        same = len({h for _, h in hashes}) == 1
        print(f"{name:24s} {statistics.median(before):9.3f} {statistics.median(after):9.3f} {ratio:13.3f} "
              f"{statistics.median(share):13.1%}  "
              f"{'bit-identical' if same else 'DIFFER'}")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
