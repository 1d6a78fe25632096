"""Benchmarks: lintools side by side with the reference libraries, in one run.

Usage::

    python benchmarks/run.py            # the full problems (minutes, several GB)
    python benchmarks/run.py --quick    # tiny problems, only to prove the harness works
    python benchmarks/run.py --only least_squares

For each problem the same data go to lintools and to each peer.  Every timing is the
median of ``--repeats`` (default 3) interleaved repeats (lintools, peer 1, peer 2, ...,
then again), so drifts of the machine hit everyone alike.  The unit is the time of one
Gram product ``X'X`` on the same data ("Gram-equivalents"), timed three times in every
round.  Ratios are paired: "time/ours" is the median over rounds of the peer's time over
lintools' time in the same round, and "Gram-eq" the median over rounds of the time over
that round's Gram time, so a slow spell of a shared machine cancels out of both.  Peak memory is the peak of
NumPy allocations traced by ``tracemalloc`` during one call, shown as a multiple of the
bytes of X.  "digits" is the log relative error (LRE) of the coefficients against the
problem's reference solution.
"""

from __future__ import annotations

import argparse
import gc
import statistics
import sys
import time
import tracemalloc
import warnings
from dataclasses import dataclass
from pathlib import Path
from typing import Callable

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parent))

from problems import PROBLEMS, Problem  # noqa: E402


def _time(fn: Callable[[], object]) -> float:
    gc.collect()
    t0 = time.perf_counter()
    fn()
    return time.perf_counter() - t0


def _peak_bytes(fn: Callable[[], object]) -> int:
    gc.collect()
    tracemalloc.start()
    try:
        fn()
        _, peak = tracemalloc.get_traced_memory()
    finally:
        tracemalloc.stop()
    return peak


def lre(estimate: np.ndarray, reference: np.ndarray) -> float:
    """Minimum over entries of -log10(|est - ref| / |ref|), capped at 16."""
    est, ref = np.ravel(estimate), np.ravel(reference)
    with np.errstate(divide="ignore", invalid="ignore"):
        err = np.abs(est - ref) / np.abs(ref)
    err = np.where(ref == 0, np.abs(est - ref), err)
    worst = float(np.max(err))
    return 16.0 if worst == 0 else float(min(16.0, -np.log10(worst)))


@dataclass
class Row:
    problem: str
    contender: str
    seconds: float
    gram_equivalents: float
    ratio: float
    peak_x: float
    digits: float
    note: str = ""


def run_problem(prob: Problem, repeats: int, measure_memory: bool) -> list[Row]:
    data = prob.make()
    X = data["X"]
    X.T @ X  # warm-up: the first product pays for thread start-up and page faults
    grams: list[float] = []  # the median Gram time of each round
    contenders = {"lintools": prob.ours, **prob.peers}
    times: dict[str, list[float]] = {k: [] for k in contenders}
    answers: dict[str, np.ndarray] = {}
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        for _ in range(repeats):
            # the Gram product is timed in every round, under the same machine load
            grams.append(statistics.median(_time(lambda: X.T @ X) for _ in range(3)))
            for name, fn in contenders.items():
                holder = {}
                times[name].append(_time(lambda: holder.setdefault("out", fn(data))))
                answers[name] = holder["out"]
        peaks = {}
        if measure_memory:
            for name, fn in contenders.items():
                peaks[name] = _peak_bytes(lambda: fn(data)) / X.nbytes
    reference = prob.reference(data)
    ours = times["lintools"]
    rows = []
    for name in contenders:
        t = times[name]
        rows.append(
            Row(
                problem=prob.name,
                contender=name,
                seconds=statistics.median(t),
                gram_equivalents=statistics.median(a / g for a, g in zip(t, grams)),
                ratio=statistics.median(a / o for a, o in zip(t, ours)),
                peak_x=peaks.get(name, float("nan")),
                digits=lre(answers[name], reference),
            )
        )
    return rows


def render(rows: list[Row]) -> str:
    head = f"{'problem':<34}{'contender':<28}{'seconds':>10}{'Gram-eq':>9}{'time/ours':>10}{'peak/X':>8}{'digits':>8}"
    out = [head, "-" * len(head)]
    last = None
    for r in rows:
        name = r.problem if r.problem != last else ""
        last = r.problem
        out.append(
            f"{name:<34}{r.contender:<28}{r.seconds:>10.4f}{r.gram_equivalents:>9.2f}{r.ratio:>10.2f}"
            f"{r.peak_x:>8.2f}{r.digits:>8.1f}"
        )
    return "\n".join(out)


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--quick", action="store_true", help="tiny problems, to prove the harness works")
    parser.add_argument("--repeats", type=int, default=3)
    parser.add_argument("--only", default=None, help="run only problems whose name contains this text")
    parser.add_argument("--no-memory", action="store_true", help="skip the traced peak-memory pass")
    args = parser.parse_args(argv)
    rows: list[Row] = []
    for prob in PROBLEMS(quick=args.quick):
        if args.only and args.only not in prob.name:
            continue
        print(f"running {prob.name} ...", file=sys.stderr, flush=True)
        rows.extend(run_problem(prob, args.repeats, not args.no_memory))
    print(render(rows))
    bad = [r for r in rows if not np.isfinite(r.digits)]
    return 1 if bad else 0


if __name__ == "__main__":
    raise SystemExit(main())
