"""When float32 Newton-step Hessians would pay below their row threshold: a grid over rows and columns.

The study behind keeping ``FastPaths.single_min_rows`` a row count: on a 2-core machine
float32 steps saved 10-25% of a fit's time on wide designs from 5,000 rows (p >= 20;
about nothing at p = 10), but the answer, though within ``tol``, then held fewer solver
digits than the float64 path in 11 of 12 cases of the grid 5e3-4e4 rows x p 10, 20, 50
(1.1 digits fewer on average, up to 2.8), and the digits must not drop for speed, so the
threshold was not lowered.

Usage::

    python benchmarks/step_precision.py                     # the grid below, 15 rounds
    python benchmarks/step_precision.py --rows 10000 --cols 10,50 --rounds 9
    python benchmarks/step_precision.py --quick             # tiny, to prove the harness

For each (n, p) the same data (benchmarks/problems_logistic.py) are fitted by
``lintools.logistic`` with the step Hessians in float64 (``FastPaths(single_min_rows=inf)``)
and in float32 wherever the test of conditioning allows (``single_min_rows=0``, which also
lets a factorised Hessian serve the next step), the other shortcuts as they are; every round runs both in turn
(interleaved) and the ratio float64 / float32 is paired per round (median over rounds).
Process CPU time, one BLAS thread per fit as the fits use.  The coefficients' largest
difference between the two paths, relative to the largest coefficient, is shown beside
both fits' own ``solver_digits`` (the difference must stay inside what they claim).
"""

from __future__ import annotations

import argparse
import dataclasses
import math
import statistics
import sys
import time
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parent))

import lintools as lt  # noqa: E402
from lintools.engine.settings import FastPaths, fast_paths, using  # noqa: E402
from problems_logistic import logistic_data  # noqa: E402


def _fit(d: dict, paths: FastPaths) -> tuple[float, object]:
    with using(paths):
        t = time.process_time()
        fit = lt.logistic(d["X"], d["y"])
        return time.process_time() - t, fit


def study(n: int, p: int, rounds: int) -> None:
    d = logistic_data(n, p)()
    base = fast_paths()
    double = dataclasses.replace(base, single_min_rows=math.inf)
    single = dataclasses.replace(base, single_min_rows=0)
    _fit(d, double), _fit(d, single)  # warm up
    t64, t32 = [], []
    for _ in range(rounds):
        a, f64 = _fit(d, double)
        b, f32 = _fit(d, single)
        t64.append(a)
        t32.append(b)
    ratio = statistics.median(x / y for x, y in zip(t64, t32))
    diff = float(np.max(np.abs(f32.coefficients - f64.coefficients)) / np.max(np.abs(f64.coefficients)))
    print(f"{n:>8} {p:>4} {statistics.median(t64) * 1e3:9.2f} {statistics.median(t32) * 1e3:9.2f} {ratio:7.2f} "
          f"{diff:10.1e} {f64.accuracy.solver_digits:6.2f} {f32.accuracy.solver_digits:6.2f}")


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--rows", default="5000,10000,20000,50000")
    parser.add_argument("--cols", default="10,15,20,30,50")
    parser.add_argument("--rounds", type=int, default=15)
    parser.add_argument("--quick", action="store_true")
    args = parser.parse_args(argv)
    rows, cols, rounds = args.rows, args.cols, args.rounds
    if args.quick:
        rows, cols, rounds = "2000", "5,20", 2
    print(f"{'n':>8} {'p':>4} {'f64 ms':>9} {'f32 ms':>9} {'ratio':>7} {'coef diff':>10} {'dig64':>6} {'dig32':>6}")
    for n in (int(v) for v in rows.split(",")):
        for p in (int(v) for v in cols.split(",")):
            study(n, p, rounds)
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
