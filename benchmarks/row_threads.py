"""Row threads on or off: the same fits side by side in one process, by fit kind and size.

Usage::

    python benchmarks/row_threads.py                  # n in {1e4, 1e5}, every p (and K), 5 rounds
    python benchmarks/row_threads.py --quick          # a few tiny cells, 2 rounds (a smoke run)
    python benchmarks/row_threads.py --million        # n = 1e6 as well (slow)
    python benchmarks/row_threads.py --kinds softmax --n 100000 --p 20 --k 5,10 --rounds 9

Fits: :func:`lintools.logistic` on benchmarks/problems_logistic.py's data,
:func:`lintools.softmax` on benchmarks/problems_softmax.py's, :func:`lintools.least_squares`
on benchmarks/problems.py's, each at its defaults (standard errors included), over
n x p (x K classes for softmax).  Settings of the row threads, per call:

* ``auto``: ``LINTOOLS_THREADS`` unset, the library's own choice (the BLAS has its own
  thread count on entry);
* ``1`` / ``2``: ``LINTOOLS_THREADS=1`` / ``2`` (the BLAS held to one thread either way);
* ``1+blas``: one row thread with the BLAS left at its own thread count (the row-thread
  machinery is switched off for the call, as on a build whose BLAS cannot be controlled).

Each round runs every setting once in turn (interleaved, so a slow spell of the shared
machine hits them alike); the table shows the median wall and CPU (``time.process_time``)
milliseconds over the rounds, and the median over the rounds of the paired ratio of each
setting's wall time to that of ``2`` (of the first setting when ``2`` is not run); ``=``
or ``DIFF`` says whether each setting's coefficients, intercept and covariance are
byte-identical to those of that setting.  Nothing is asserted.
"""

from __future__ import annotations

import argparse
import gc
import os
import statistics
import sys
import time
from pathlib import Path
from typing import Any, Callable

sys.path.insert(0, str(Path(__file__).resolve().parent))

import numpy as np  # noqa: E402

import lintools as lt  # noqa: E402
from lintools.support import threads as _threads  # noqa: E402
from problems import _regression_data  # noqa: E402
from problems_logistic import logistic_data  # noqa: E402
from problems_softmax import softmax_data  # noqa: E402

SETTINGS = ("auto", "1", "2", "1+blas")


def _call(setting: str, fit: Callable[[], Any]) -> Any:
    """``fit()`` under one row-thread setting (see the module doc); the caller's state comes back."""
    saved_env, saved_control = os.environ.get("LINTOOLS_THREADS"), list(_threads._control)
    os.environ.pop("LINTOOLS_THREADS", None)
    if setting in ("1", "2"):
        os.environ["LINTOOLS_THREADS"] = setting
    if setting == "1+blas":
        _threads._control[:] = [None]  # no BLAS control: one row thread, the BLAS untouched
    try:
        return fit()
    finally:
        _threads._control[:] = saved_control
        if saved_env is None:
            os.environ.pop("LINTOOLS_THREADS", None)
        else:
            os.environ["LINTOOLS_THREADS"] = saved_env


def _bits(fit: Any) -> bytes:
    return b"".join(np.ascontiguousarray(np.asarray(getattr(fit, name), dtype=float)).tobytes()
                    for name in ("coefficients", "intercept", "covariance"))


def _base(settings: tuple[str, ...]) -> str:
    """The setting the ratios and the bits are taken against."""
    return "2" if "2" in settings else settings[0]


def measure(fit: Callable[[], Any], settings: tuple[str, ...], rounds: int) -> dict[str, dict[str, Any]]:
    """Per setting: median wall and CPU ms, median paired wall ratio to ``2``, same bits as ``2``."""
    bits = {s: _bits(_call(s, fit)) for s in settings}  # also the warm-up
    wall: dict[str, list[float]] = {s: [] for s in settings}
    cpu: dict[str, list[float]] = {s: [] for s in settings}
    for _ in range(rounds):
        for s in settings:
            gc.collect()
            t0, c0 = time.perf_counter(), time.process_time()
            _call(s, fit)
            wall[s].append(time.perf_counter() - t0)
            cpu[s].append(time.process_time() - c0)
    base = _base(settings)
    return {s: {"wall": statistics.median(wall[s]) * 1e3, "cpu": statistics.median(cpu[s]) * 1e3,
                "ratio": statistics.median(a / b for a, b in zip(wall[s], wall[base])),
                "same": bits[s] == bits[base]} for s in settings}


def cells(kinds: list[str], ns: list[int], ps: list[int], ks: list[int]) -> list[tuple[str, tuple, Callable[[], Any]]]:
    """(kind, size, fit) for every cell of the grid; the data are made once per cell."""
    out = []
    for kind in kinds:
        for n in ns:
            for p in ps:
                if kind == "softmax":
                    for K in ks:
                        d = softmax_data(n, p, K)()
                        out.append((kind, (n, p, K), lambda d=d: lt.softmax(d["X"], d["y"])))
                elif kind == "logistic":
                    d = logistic_data(n, p)()
                    out.append((kind, (n, p), lambda d=d: lt.logistic(d["X"], d["y"])))
                else:
                    d = _regression_data(n, p)()
                    out.append((kind, (n, p), lambda d=d: lt.least_squares(d["X"], d["y"])))
    return out


def _ints(text: str) -> list[int]:
    return [int(float(v)) for v in text.split(",") if v]


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--kinds", default="softmax,logistic,least_squares")
    parser.add_argument("--n", default="10000,100000", help="comma-separated row counts")
    parser.add_argument("--p", default="5,10,20,50")
    parser.add_argument("--k", default="3,5,10", help="softmax classes")
    parser.add_argument("--settings", default=",".join(SETTINGS))
    parser.add_argument("--rounds", type=int, default=5)
    parser.add_argument("--million", action="store_true", help="add n = 1e6 (slow)")
    parser.add_argument("--quick", action="store_true", help="tiny cells, 2 rounds")
    args = parser.parse_args(argv)
    ns, ps, ks, rounds = _ints(args.n), _ints(args.p), _ints(args.k), args.rounds
    if args.million:
        ns.append(1_000_000)
    if args.quick:
        ns, ps, ks, rounds = [3000], [5], [3], 2
    settings = tuple(args.settings.split(","))
    base = _base(settings)
    print(f"row threads: {os.cpu_count()} CPUs, median of {rounds} interleaved rounds; "
          f"wall ms / CPU ms / paired wall ratio to '{base}' / same bits as '{base}'")
    print(f"{'kind':<14} {'n':>8} {'p':>3} {'K':>3}  " + "  ".join(f"{s:>28}" for s in settings))
    for kind, size, fit in cells(args.kinds.split(","), ns, ps, ks):
        res = measure(fit, settings, rounds)
        n, p, K = (size + ("",))[:3]
        row = "  ".join(f"{r['wall']:9.1f} {r['cpu']:8.1f} {r['ratio']:5.2f} {'=' if r['same'] else 'DIFF':>4}"
                        for r in res.values())
        print(f"{kind:<14} {n:>8g} {p:>3} {K:>3}  {row}", flush=True)
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
