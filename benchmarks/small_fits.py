"""lintools.logistic beside scikit-learn at the sizes where the fixed cost per call shows.

Usage::

    python benchmarks/small_fits.py                 # (1e4, 10), (1e4, 50), (1e5, 10); 5 rounds
    python benchmarks/small_fits.py --rounds 9 --sizes 10000x10

The contenders of benchmarks/problems_logistic.py on its data: lintools at its default tol
(1e-13 per unit weight) and at the peers' 1e-10, with standard errors and the
likelihood-ratio test; scikit-learn's lbfgs and newton-cholesky at tol 1e-10 (C = 1e12).
Each round runs every contender once in turn (interleaved); a ratio is the peer's time over
lintools' in the same round, and the table shows the median over the rounds of each ratio,
so a slow spell of a shared machine cancels out.  "best peer / lintools" takes, in each
round, the faster of the two scikit-learn solvers.
"""

from __future__ import annotations

import argparse
import gc
import statistics
import sys
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parent))

from problems_logistic import _sk, lg_ours, lg_ours_at_peer_tol, logistic_data  # noqa: E402

CONTENDERS = {
    "lintools": lg_ours,
    "lintools tol 1e-10": lg_ours_at_peer_tol,
    "sklearn lbfgs": _sk("lbfgs"),
    "sklearn newton-cholesky": _sk("newton-cholesky"),
}
PEERS = ("sklearn lbfgs", "sklearn newton-cholesky")


def _seconds(fn, d) -> float:
    gc.collect()
    t0 = time.perf_counter()
    fn(d)
    return time.perf_counter() - t0


def run(n: int, p: int, rounds: int) -> None:
    d = logistic_data(n, p)()
    for fn in CONTENDERS.values():
        fn(d)  # warm up
    times: dict[str, list[float]] = {k: [] for k in CONTENDERS}
    for _ in range(rounds):
        for name, fn in CONTENDERS.items():
            times[name].append(_seconds(fn, d))
    print(f"logistic n={n:g} p={p}: median of {rounds} interleaved rounds")
    for name in CONTENDERS:
        print(f"  {name:<26} {statistics.median(times[name]) * 1e3:9.2f} ms")
    for ours in ("lintools", "lintools tol 1e-10"):
        for peer in PEERS:
            r = statistics.median(b / a for a, b in zip(times[ours], times[peer]))
            print(f"  {peer} / {ours:<20} {r:6.2f}")
        best = statistics.median(min(times[q][i] for q in PEERS) / times[ours][i] for i in range(rounds))
        print(f"  best peer / {ours:<20} {best:6.2f}")


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--rounds", type=int, default=5)
    parser.add_argument("--sizes", default="10000x10,10000x50,100000x10", help="comma-separated NxP")
    args = parser.parse_args(argv)
    for size in args.sizes.split(","):
        n, p = (int(v) for v in size.lower().split("x"))
        run(n, p, args.rounds)
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
