"""Cost of the blocked fits' checksum (the same block on every pass) against a pass.

Usage::

    python benchmarks/block_checksum.py            # 1e6 x 5 and 2e5 x 50, 5 rounds
    python benchmarks/block_checksum.py --quick    # a tenth of the rows, 2 rounds

Every pass of :func:`lintools.least_squares_blocks` and :func:`lintools.logistic_blocks`
takes a checksum of each block (``lintools.blocks.stream.block_print``: the sum of X,
which is the finiteness check as well, the sum of every seventh value, the first and last
rows, sums of y and of the weights) and
compares it with the first pass.  This script fits the same in-memory blocks (memory-resident rows: the pass is
compute-bound, the worst case for the relative cost of the checksum; a memory-mapped file
makes a pass slower and the share smaller) with the checksum on and with it replaced by
the code before it (one total sum as the finiteness check, no checksum), interleaved, and
prints the median of the paired ratios of whole fits, and the extra time of the checksums
alone per pass (less the total sum they replace) against the time of one pass.  Nothing is
asserted.
"""

from __future__ import annotations

import argparse
import statistics
import sys
import time
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

import lintools as lt  # noqa: E402
from lintools.blocks import stream as bs  # noqa: E402

BLOCK_ROWS = 1 << 16


def source(X: np.ndarray, y: np.ndarray, w: np.ndarray):
    def blocks():
        for lo in range(0, X.shape[0], BLOCK_ROWS):
            yield X[lo : lo + BLOCK_ROWS], y[lo : lo + BLOCK_ROWS], w[lo : lo + BLOCK_ROWS]

    return blocks


def timed(fn) -> tuple[float, object]:
    t0 = time.perf_counter()
    out = fn()
    return time.perf_counter() - t0, out


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--quick", action="store_true")
    ap.add_argument("--rounds", type=int, default=None)
    args = ap.parse_args()
    scale = 10 if args.quick else 1
    rounds = args.rounds or (2 if args.quick else 5)
    rng = np.random.default_rng(2026)
    real = bs.block_print, bs.BlockChecksums.compare, bs.block_sums

    def stub_print(X, sums, y, w, spec):
        return None

    def stub_compare(self, index, passes, new, spec, names):
        return None

    def stub_sums(X, first):  # the finiteness check of the code before the checksum: one total sum
        return np.full(2, np.add.reduce(X, axis=None)), None

    stubs = stub_print, stub_compare, stub_sums

    def use(funcs):
        bs.block_print, bs.BlockChecksums.compare, bs.block_sums = funcs

    for n, p in ((1_000_000 // scale, 5), (200_000 // scale, 50)):
        X = rng.normal(size=(n, p)) + np.linspace(0, 3, p)
        beta = rng.normal(size=p) / np.sqrt(p)
        y = X @ beta + rng.normal(size=n)
        yb = (y > np.median(y)).astype(float)
        w = rng.uniform(0.5, 2.0, size=n)
        for name, fit in (("least_squares_blocks", lambda: lt.least_squares_blocks(source(X, y, w))),
                          ("logistic_blocks", lambda: lt.logistic_blocks(source(X, yb, w), tol=1e-8))):
            ratios, on_times, off_times = [], [], []
            for _ in range(rounds):
                use(stubs)
                t_off, _ = timed(fit)
                use(real)
                t_on, res = timed(fit)
                ratios.append(t_on / t_off)
                on_times.append(t_on)
                off_times.append(t_off)
            passes = int(res.convergence.message.rsplit(";", 1)[-1].split()[0])
            # the checksums alone, every block of the first pass and of a later one, less the
            # one total sum that was the finiteness check before (the column sums replace it)
            spec = bs.BlockSpec(p, None, True)
            alone = {}
            for first in (True, False):
                best = np.inf
                for _ in range(rounds):
                    t0 = time.perf_counter()
                    for lo in range(0, n, BLOCK_ROWS):
                        Xb, yb_, wb = X[lo : lo + BLOCK_ROWS], y[lo : lo + BLOCK_ROWS], w[lo : lo + BLOCK_ROWS]
                        bs.block_print(Xb, bs.block_sums(Xb, first), yb_, wb, spec)
                    t1 = time.perf_counter()
                    for lo in range(0, n, BLOCK_ROWS):
                        np.add.reduce(X[lo : lo + BLOCK_ROWS], axis=None)
                    best = min(best, (t1 - t0) - (time.perf_counter() - t1))
                alone[first] = best
            per_pass = statistics.median(off_times) / passes
            print(f"{name:22s} n={n:>8d} p={p:>3d} passes={passes}: fit {statistics.median(off_times):7.3f} s without, "
                  f"{statistics.median(on_times):7.3f} s with the checksum; median paired ratio "
                  f"{statistics.median(ratios):.3f}; checksums alone {1e3 * alone[True]:6.1f} ms (pass 1), "
                  f"{1e3 * alone[False]:6.1f} ms (later pass) = {alone[True] / per_pass:.1%} / "
                  f"{alone[False] / per_pass:.1%} of a pass ({1e3 * per_pass:.0f} ms)")


if __name__ == "__main__":
    main()
