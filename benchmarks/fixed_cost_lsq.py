"""The per-call fixed cost of one ``lintools.least_squares(X, y)``, stage by stage.

Usage::

    OPENBLAS_NUM_THREADS=1 python benchmarks/fixed_cost_lsq.py             # n = 1e4, p = 10, 200 calls
    python benchmarks/fixed_cost_lsq.py --n 100000 --p 50 --calls 20

The timing wrappers and the way stages are counted (exclusive time, the containers' own
time as "other" rows, medians over the calls) are those of benchmarks/fixed_cost.py; the
data are those of benchmarks/problems.py.  The last lines give the median CPU time of a
plain call and its minor page faults (fresh pages of new temporaries), then the floor: the
work no least-squares fit with inference can skip, timed in plain NumPy on the same data
(the Gram matrix ``X'X`` by the BLAS's symmetric rank-k update, the cross products ``X'1``
and ``X'y``, the Cholesky factor, one residual pass ``r = y - X b`` with ``X'r``, and the
covariance ``(L L')^-1`` from the factor), and ``numpy.linalg.lstsq`` on ``[1, X]``.
"""

from __future__ import annotations

import argparse
import resource
import statistics
import sys
import time
from pathlib import Path
from typing import Any, Callable

sys.path.insert(0, str(Path(__file__).resolve().parent))

import numpy as np  # noqa: E402

import lintools as lt  # noqa: E402
from fixed_cost import _patch, _wrap, plain_calls, print_plain, print_stages, staged  # noqa: E402
from lintools.models import least_squares as front, lsq_gram  # noqa: E402
from problems import _regression_data  # noqa: E402

STAGES = [
    ("input checks, units, totals", "checks"),
    ("Gram: subsample rows, column units", "subsample"),
    ("Gram: subsample start", "start"),
    ("Gram: pass 1 (moments, start residual)", "pass1"),
    ("Gram: scale, Cholesky, conditioning", "factor"),
    ("Gram: refinement (residual passes)", "refine"),
    ("Gram: other (covariance, answer)", "gram"),
    ("record (linear_record)", "record"),
    ("accuracy record (least_squares_accuracy)", "accuracy"),
    ("front: other (glue, with_accuracy)", "front"),
    ("row-thread session", "session"),
]


def instrument() -> Callable[..., Any]:
    """Put the timing wrappers in place; return the instrumented ``least_squares``."""
    for name in ("as_matrix", "as_vector", "as_weights", "check_nonnegative", "check_choice", "check_flag",
                 "check_names", "target_name", "checked_precision", "refuse_degenerate", "_totals"):
        _patch(front, name, "checks")
    _patch(front.Units, "response", "checks")
    _patch(front.Units, "weights", "checks")
    _patch(lsq_gram, "subsample_rows", "subsample")
    _patch(lsq_gram, "_column_units", "subsample")
    _patch(lsq_gram, "subsample_start", "start")
    _patch(lsq_gram, "_moments", "pass1")
    _patch(lsq_gram, "_factor", "factor")
    _patch(lsq_gram, "_refine", "refine")
    _patch(lsq_gram, "solve_by_gram", "gram", container=True)
    _patch(front, "linear_record", "record")
    _patch(front, "least_squares_accuracy", "accuracy")
    inner = _wrap(lt.least_squares.__wrapped__, "front", container=True)
    return _wrap(front.with_row_threads(inner), "session", container=True)


def _median_ms(fn: Callable[[], Any], calls: int) -> float:
    for _ in range(3):
        fn()
    times = []
    for _ in range(calls):
        t0 = time.perf_counter()
        fn()
        times.append(time.perf_counter() - t0)
    return statistics.median(times) * 1e3


def floor(X: Any, y: Any, calls: int) -> list[tuple[str, float]]:
    """The unavoidable work of a fit with inference, piece by piece (median ms), in plain NumPy."""
    n, p = X.shape
    ones = np.ones(n)
    G = X.T @ X
    L = np.linalg.cholesky(G)
    b = np.linalg.solve(G, X.T @ y)
    pieces = [
        ("Gram X'X (dsyrk)", lambda: X.T @ X),
        ("cross products X'1, X'y", lambda: (ones @ X, y @ X)),
        ("Cholesky", lambda: np.linalg.cholesky(G)),
        ("residual pass y - X b, X'r", lambda: (y - X @ b) @ X),
        ("covariance (L L')^-1 from the factor", lambda: (lambda Li: Li.T @ Li)(np.linalg.inv(L))),
    ]
    rows = [(label, _median_ms(fn, calls)) for label, fn in pieces]
    rows.append(("floor: sum of the above", sum(ms for _, ms in rows)))
    A = np.column_stack([ones, X])
    rows.append(("numpy.linalg.lstsq on [1, X]", _median_ms(lambda: np.linalg.lstsq(A, y, rcond=None), max(5, calls // 5))))
    return rows


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--n", type=int, default=10_000)
    parser.add_argument("--p", type=int, default=10)
    parser.add_argument("--calls", type=int, default=200)
    args = parser.parse_args(argv)
    d = _regression_data(args.n, args.p)()
    X, y = d["X"], d["y"]
    fit, wall, cpu = plain_calls(lt.least_squares, X, y, args.calls, warmup=5)
    f0 = resource.getrusage(resource.RUSAGE_SELF).ru_minflt
    for _ in range(args.calls):
        lt.least_squares(X, y)
    faults = (resource.getrusage(resource.RUSAGE_SELF).ru_minflt - f0) / args.calls
    per_stage, whole = staged(instrument(), X, y, STAGES, args.calls, warmup=5)
    print(f"lintools.least_squares at n={args.n}, p={args.p} ({fit.convergence.solver}); median of {args.calls} calls")
    print_stages(STAGES, per_stage, whole)
    print_plain(wall, cpu)
    print(f"{'minor page faults per plain call':<48} {faults:8.1f}")
    for label, ms in floor(X, y, args.calls):
        print(f"{label:<48} {ms:8.3f}")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
