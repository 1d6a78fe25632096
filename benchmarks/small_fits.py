"""lintools beside its peers at the sizes where the fixed cost per call shows.

Usage::

    python benchmarks/small_fits.py                 # logistic (1e4, 10), (1e4, 50), (1e5, 10); 5 rounds
    python benchmarks/small_fits.py --rounds 9 --sizes 10000x10
    python benchmarks/small_fits.py --softmax 10000x10x3 --lsq 10000x10,10000x50 --sizes ""

The contenders of benchmarks/problems_logistic.py on its data: lintools at its default tol
(1e-13 per unit weight) and at the peers' 1e-10, with standard errors and the
likelihood-ratio test; scikit-learn's lbfgs and newton-cholesky at tol 1e-10 (C = 1e12).
Each round runs every contender once in turn (interleaved); a ratio is the peer's time over
lintools' in the same round, and the table shows the median over the rounds of each ratio,
so a slow spell of a shared machine cancels out.  "best peer / lintools" takes, in each
round, the faster of the two scikit-learn solvers.

``--softmax NxPxK`` times lintools.softmax (with standard errors) beside scikit-learn's
lbfgs (benchmarks/problems_softmax.py); ``--lsq NxP`` times lintools.least_squares (with
its inference) beside numpy.linalg.lstsq on ``[1, X]`` (benchmarks/problems.py), the same
way.  Each time is also shown as process CPU time (``time.process_time``), which a busy
neighbour on the machine disturbs less than the wall clock.
"""

from __future__ import annotations

import argparse
import gc
import statistics
import sys
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parent))

from problems import _ls_numpy, _ls_ours, _regression_data  # noqa: E402
from problems_logistic import _sk, lg_ours, lg_ours_at_peer_tol, logistic_data  # noqa: E402
from problems_softmax import sm_ours, sm_ours_at_peer_tol, sm_sklearn_lbfgs, softmax_data  # noqa: E402

CONTENDERS = {
    "lintools": lg_ours,
    "lintools tol 1e-10": lg_ours_at_peer_tol,
    "sklearn lbfgs": _sk("lbfgs"),
    "sklearn newton-cholesky": _sk("newton-cholesky"),
}
PEERS = ("sklearn lbfgs", "sklearn newton-cholesky")
SOFTMAX = {"lintools": sm_ours, "lintools tol 1e-10": sm_ours_at_peer_tol, "sklearn lbfgs": sm_sklearn_lbfgs}
LSQ = {"lintools": _ls_ours, "numpy.linalg.lstsq": _ls_numpy}


def _seconds(fn, d) -> tuple[float, float]:
    """(wall, CPU) seconds of one call."""
    gc.collect()
    t0, c0 = time.perf_counter(), time.process_time()
    fn(d)
    return time.perf_counter() - t0, time.process_time() - c0


def compare(title: str, d: dict, contenders: dict, peers: tuple[str, ...], rounds: int) -> None:
    """Time ``contenders`` on ``d`` in interleaved rounds; print medians and paired ratios."""
    for fn in contenders.values():
        fn(d)  # warm up
    wall: dict[str, list[float]] = {k: [] for k in contenders}
    cpu: dict[str, list[float]] = {k: [] for k in contenders}
    for _ in range(rounds):
        for name, fn in contenders.items():
            w, c = _seconds(fn, d)
            wall[name].append(w)
            cpu[name].append(c)
    print(f"{title}: median of {rounds} interleaved rounds (wall ms, CPU ms)")
    for name in contenders:
        print(f"  {name:<26} {statistics.median(wall[name]) * 1e3:9.2f} {statistics.median(cpu[name]) * 1e3:9.2f}")
    ours_all = [k for k in contenders if k.startswith("lintools")]
    for ours in ours_all:
        for peer in peers:
            r = statistics.median(b / a for a, b in zip(wall[ours], wall[peer]))
            print(f"  {peer} / {ours:<20} {r:6.2f}")
        if len(peers) > 1:
            best = statistics.median(min(wall[q][i] for q in peers) / wall[ours][i] for i in range(rounds))
            print(f"  best peer / {ours:<20} {best:6.2f}")


def run(n: int, p: int, rounds: int) -> None:
    compare(f"logistic n={n:g} p={p}", logistic_data(n, p)(), CONTENDERS, PEERS, rounds)


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--rounds", type=int, default=5)
    parser.add_argument("--sizes", default="10000x10,10000x50,100000x10", help="logistic: comma-separated NxP")
    parser.add_argument("--softmax", default="", help="softmax: comma-separated NxPxK")
    parser.add_argument("--lsq", default="", help="least squares: comma-separated NxP")
    args = parser.parse_args(argv)
    for size in filter(None, args.sizes.split(",")):
        n, p = (int(v) for v in size.lower().split("x"))
        run(n, p, args.rounds)
    for size in filter(None, args.softmax.split(",")):
        n, p, K = (int(v) for v in size.lower().split("x"))
        compare(f"softmax n={n:g} p={p} K={K}", softmax_data(n, p, K)(), SOFTMAX, ("sklearn lbfgs",), args.rounds)
    for size in filter(None, args.lsq.split(",")):
        n, p = (int(v) for v in size.lower().split("x"))
        compare(f"least squares n={n:g} p={p}", _regression_data(n, p)(), LSQ, ("numpy.linalg.lstsq",), args.rounds)
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
