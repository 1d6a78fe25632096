"""The per-call fixed cost of one ``lintools.logistic(X, y)``, stage by stage.

Usage::

    python benchmarks/fixed_cost.py                 # n = 1e4, p = 10, 30 timed calls
    python benchmarks/fixed_cost.py --n 100000 --p 50 --calls 10

The stages are timed with ``time.perf_counter`` by wrappers put around the functions and
methods that carry them, in this script only (the package holds no instrumentation).
Time is *exclusive*: a stage owns what runs inside it, except in the containers (the
front, the driver, the Newton loop and the record), whose own time is shown as "other"
rows, so the stages add up to the whole call.  Each figure is the median over the calls
of that stage's time within one call; "whole call (median)" is the median of the call's
own total, so the column need not add up to it (on a loaded machine each call has its
own slow spells, in different stages, and the sum of the medians falls below the median
of the sums).  A wrapper costs about a
microsecond per call of the wrapped function; the total is also timed without wrappers.
"""

from __future__ import annotations

import argparse
import functools
import gc
import statistics
import time
from collections import defaultdict
from typing import Any, Callable

import numpy as np

import lintools as lt
from lintools.engine import newton as newton_module
from lintools.engine import problem_line
from lintools.engine.problem_base import LinearModelProblem
from lintools.engine import problem_base
from lintools.models import driver, logistic as logistic_module

_stack: list[list[Any]] = []  # [stage, is_container, start, child time]
_times: dict[str, float] = defaultdict(float)


def _wrap(fn: Callable, stage: str, container: bool = False) -> Callable:
    """``fn`` timed as ``stage``; a container's own time goes to ``stage`` and what runs in
    it to the inner stages; inside a plain stage nothing else is recorded."""

    @functools.wraps(fn)
    def run(*args: Any, **kwargs: Any) -> Any:
        if _stack and not _stack[-1][1]:
            return fn(*args, **kwargs)  # inside a plain stage: its time already counts there
        frame = [stage, container, time.perf_counter(), 0.0]
        _stack.append(frame)
        try:
            return fn(*args, **kwargs)
        finally:
            _stack.pop()
            spent = time.perf_counter() - frame[2]
            _times[stage] += spent - frame[3]
            if _stack:
                _stack[-1][3] += spent

    return run


def _patch(owner: Any, name: str, stage: str, container: bool = False) -> None:
    setattr(owner, name, _wrap(getattr(owner, name), stage, container))


STAGES = [
    ("input checks (X, names, weights, y, settings)", "checks"),
    ("problem construction: column moments", "moments"),
    ("problem construction: the rest", "problem"),
    ("constant-column check", "constant"),
    ("Newton: starting point", "start"),
    ("Newton: evaluations (value, gradient)", "evaluate"),
    ("Newton: Hessians", "hessian"),
    ("Newton: Cholesky and solve", "cholesky"),
    ("Newton: line search", "line"),
    ("Newton: separation watch + iteration report", "watch"),
    ("Newton: other (loop, finish)", "newton"),
    ("final evaluation at the answer", "final_ev"),
    ("covariance", "covariance"),
    ("separation check at the answer", "final_check"),
    ("convergence record", "convergence"),
    ("driver: other", "driver"),
    ("likelihood, deviance (likelihood_summary)", "likelihood"),
    ("null model (likelihood-ratio test)", "null"),
    ("record packaging (logistic_record)", "record"),
    ("record: other", "record_other"),
    ("front: other (glue)", "front"),
    ("row-thread session", "session"),
]


def instrument() -> Callable[..., Any]:
    """Put the timing wrappers in place; return the instrumented ``logistic``."""
    for name in ("as_matrix", "check_names", "as_weights", "as_offset", "binary_response", "check_fit_settings",
                 "scaled_case_weights", "check_flag", "check_l2_scale", "check_parameters_and_rows"):
        _patch(logistic_module, name, "checks")
    _patch(problem_base, "column_moments", "moments")
    _patch(logistic_module, "checked_problem", "problem", container=True)
    _patch(logistic_module, "constant_columns", "constant")
    _patch(logistic_module, "solve_family", "driver", container=True)
    _patch(logistic_module, "_record", "record_other", container=True)
    _patch(logistic_module, "likelihood_summary", "likelihood")
    _patch(logistic_module, "_null_model", "null")
    _patch(logistic_module, "logistic_record", "record")
    _patch(logistic_module.BinaryFamily, "covariance", "covariance")
    instrument_engine("one")
    inner = _wrap(lt.logistic.__wrapped__, "front", container=True)
    session = logistic_module.with_row_threads(inner)
    return _wrap(session, "session", container=True)


def instrument_engine(variant: str) -> None:
    """The wrappers of the stages every likelihood fit shares: the driver, the Newton loop and
    the problem's passes (``variant``: the problem's, "one" or "several" outputs)."""
    _patch(driver, "final_evaluation", "final_ev")
    _patch(driver, "_final_check", "final_check")
    _patch(driver, "convergence_record", "convergence")
    _patch(driver, "solve", "driver", container=True)
    _patch(newton_module, "newton", "newton", container=True)  # solve() imports it when it runs
    for name, stage in (("cholesky", "cholesky"), ("solve_factored", "cholesky"), ("report_step", "watch"),
                        ("finish", "newton")):
        _patch(newton_module, name, stage)
    cls = LinearModelProblem.variants[variant]
    for name, stage in (("evaluate", "evaluate"), ("hessian", "hessian"), ("step_hessian", "hessian"),
                        ("line", "line"), ("start", "start")):
        _patch(cls, name, stage)
    _patch(problem_line._Line, "change", "line")


def plain_calls(fit: Callable[..., Any], X: np.ndarray, y: np.ndarray, calls: int,
                warmup: int) -> tuple[Any, list[float], list[float]]:
    """The last result of ``calls`` plain calls of ``fit(X, y)`` (after ``warmup``), and each
    call's wall and CPU seconds."""
    for _ in range(warmup):
        fit(X, y)
    wall, cpu = [], []
    for _ in range(calls):
        gc.collect()
        t0, c0 = time.perf_counter(), time.process_time()
        result = fit(X, y)
        wall.append(time.perf_counter() - t0)
        cpu.append(time.process_time() - c0)
    return result, wall, cpu


def print_plain(wall: list[float], cpu: list[float]) -> None:
    """The median wall and CPU time of a plain call, below the stage table."""
    print(f"{'whole call (median, plain, wall)':<48} {statistics.median(wall) * 1e3:8.3f}")
    print(f"{'whole call (median, plain, CPU)':<48} {statistics.median(cpu) * 1e3:8.3f}")


def data(n: int, p: int, seed: int = 2) -> tuple[np.ndarray, np.ndarray]:
    """The data of benchmarks/problems_logistic.py."""
    rng = np.random.default_rng(seed)
    X = rng.normal(size=(n, p))
    beta = rng.normal(scale=0.3, size=p)
    y = (rng.uniform(size=n) < 1.0 / (1.0 + np.exp(-(0.5 + X @ beta)))).astype(float)
    return X, y


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--n", type=int, default=10_000)
    parser.add_argument("--p", type=int, default=10)
    parser.add_argument("--calls", type=int, default=30)
    args = parser.parse_args(argv)
    X, y = data(args.n, args.p)
    fit, wall, cpu = plain_calls(lt.logistic, X, y, args.calls, warmup=3)
    per_stage, whole = staged(instrument(), X, y, STAGES, args.calls, warmup=3)
    print(f"lintools.logistic at n={args.n}, p={args.p}: {fit.convergence.iterations} Newton iterations; "
          f"median of {args.calls} calls")
    print_stages(STAGES, per_stage, whole)
    print_plain(wall, cpu)
    return 0


def staged(timed: Callable[..., Any], X: np.ndarray, y: np.ndarray, stages: list[tuple[str, str]], calls: int,
           warmup: int) -> tuple[dict[str, list[float]], float]:
    """Each stage's exclusive time per call of the instrumented ``timed`` (after ``warmup``
    calls), and the median time of a whole instrumented call."""
    for _ in range(warmup):
        timed(X, y)
    per_stage: dict[str, list[float]] = defaultdict(list)
    totals = []
    for _ in range(calls):
        gc.collect()
        _times.clear()
        t0 = time.perf_counter()
        timed(X, y)
        totals.append(time.perf_counter() - t0)
        for _, key in stages:
            per_stage[key].append(_times.get(key, 0.0))
        unknown = set(_times) - {key for _, key in stages}
        assert not unknown, unknown
    return per_stage, statistics.median(totals)


def print_stages(stages: list[tuple[str, str]], per_stage: dict[str, list[float]], whole: float) -> None:
    """The table of stage medians, their sum and the whole instrumented call."""
    print(f"{'stage':<48} {'ms':>8} {'share':>7}")
    for label, key in stages:
        ms = statistics.median(per_stage[key]) * 1e3
        print(f"{label:<48} {ms:8.3f} {ms / (whole * 1e3):7.1%}")
    total = sum(statistics.median(per_stage[key]) for _, key in stages) * 1e3
    print(f"{'sum of the stage medians':<48} {total:8.3f}")
    print(f"{'whole call (median, instrumented)':<48} {whole * 1e3:8.3f}")


if __name__ == "__main__":
    raise SystemExit(main())
