"""The per-call fixed cost of one ``lintools.softmax(X, y)``, stage by stage.

Usage::

    OPENBLAS_NUM_THREADS=1 python benchmarks/fixed_cost_softmax.py        # n = 1e4, p = 10, K = 3, 50 calls
    python benchmarks/fixed_cost_softmax.py --n 100000 --p 20 --K 5 --calls 10

The timing wrappers and the way stages are counted (exclusive time, the containers' own
time as "other" rows, medians over the calls) are those of benchmarks/fixed_cost.py; the
data are those of benchmarks/problems_softmax.py.  The last lines give the median wall
and CPU time of a plain call (no wrappers).
"""

from __future__ import annotations

import argparse
import sys
from pathlib import Path
from typing import Any, Callable

sys.path.insert(0, str(Path(__file__).resolve().parent))

import lintools as lt  # noqa: E402
from fixed_cost import (_patch, _wrap, instrument_engine, plain_calls, print_plain,  # noqa: E402
                        print_stages, staged)
from lintools.engine import problem_base  # noqa: E402
from lintools.models import glm_accuracy, softmax as front, softmax_accuracy  # noqa: E402
from problems_softmax import softmax_data  # noqa: E402

STAGES = [
    ("input checks (X, names, weights, labels, settings)", "checks"),
    ("problem construction: column moments", "moments"),
    ("problem construction: the rest", "problem"),
    ("constant-column check", "constant"),
    ("Newton: starting point", "start"),
    ("Newton: evaluations (value, gradient)", "evaluate"),
    ("Newton: Hessians", "hessian"),
    ("Newton: Cholesky and solve", "cholesky"),
    ("Newton: line search", "line"),
    ("Newton: divergence watch + iteration report", "watch"),
    ("Newton: other (loop, finish)", "newton"),
    ("covariance (information at the answer, inverse)", "covariance"),
    ("final evaluation at the answer", "final_ev"),
    ("divergence check at the answer", "final_check"),
    ("convergence record", "convergence"),
    ("driver: other", "driver"),
    ("likelihood, deviance (likelihood_summary)", "likelihood"),
    ("null deviance", "null"),
    ("record packaging (softmax_record)", "record"),
    ("accuracy: answer, subsample rows, eta", "acc_rows"),
    ("accuracy: row derivatives (r, W)", "acc_deriv"),
    ("accuracy: sensitivity (row terms)", "acc_sens"),
    ("accuracy: record, other", "accuracy"),
    ("record: other", "record_other"),
    ("front: other (glue)", "front"),
    ("row-thread session", "session"),
]


def instrument() -> Callable[..., Any]:
    """Put the timing wrappers in place; return the instrumented ``softmax``."""
    for name in ("as_matrix", "check_names", "checked_precision", "as_weights", "read_labels", "check_fit_settings",
                 "reference_index", "scaled_case_weights", "check_l2_scale", "as_offset",
                 "check_parameters_and_rows"):
        _patch(front, name, "checks")
    _patch(problem_base, "column_moments", "moments")
    _patch(front, "checked_problem", "problem", container=True)
    _patch(front, "constant_columns", "constant")
    _patch(front, "solve_family", "driver", container=True)
    _patch(front, "_record", "record_other", container=True)
    _patch(front, "likelihood_summary", "likelihood")
    _patch(front, "_null_deviance", "null")
    _patch(front, "softmax_record", "record")
    _patch(front, "softmax_accuracy", "accuracy", container=True)
    for name in ("softmax_answer", "subsample", "rows_of", "linear_predictor", "column_rms"):
        _patch(softmax_accuracy, name, "acc_rows")
    _patch(softmax_accuracy, "softmax_derivatives", "acc_deriv")
    _patch(glm_accuracy, "sensitivity", "acc_sens")
    _patch(front.SoftmaxFamily, "covariance", "covariance")
    instrument_engine("several")
    inner = _wrap(lt.softmax.__wrapped__, "front", container=True)
    return _wrap(front.with_row_threads(inner), "session", container=True)


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--n", type=int, default=10_000)
    parser.add_argument("--p", type=int, default=10)
    parser.add_argument("--K", type=int, default=3)
    parser.add_argument("--calls", type=int, default=50)
    args = parser.parse_args(argv)
    d = softmax_data(args.n, args.p, args.K)()
    X, y = d["X"], d["y"]
    fit, wall, cpu = plain_calls(lt.softmax, X, y, args.calls, warmup=5)
    per_stage, whole = staged(instrument(), X, y, STAGES, args.calls, warmup=5)
    print(f"lintools.softmax at n={args.n}, p={args.p}, K={args.K}: {fit.convergence.iterations} Newton "
          f"iterations; median of {args.calls} calls")
    print_stages(STAGES, per_stage, whole)
    print_plain(wall, cpu)
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
