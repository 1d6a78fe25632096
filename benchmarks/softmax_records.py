"""The accuracy records of a set of softmax fits, to compare two versions of the package.

Usage::

    PYTHONPATH=/work/main python benchmarks/softmax_records.py > before.json
    PYTHONPATH=$PWD       python benchmarks/softmax_records.py > after.json
    python benchmarks/softmax_records.py --compare before.json after.json

The first form prints, for each fit (K = 2 to 6, case weights, a ridge, the symmetric form
``reference=None``, a reference class by label, an offset without intercept, data written
to two decimals, a 60,000-row fit on the large-problem paths, a wide design), the exact
bytes of its coefficients, standard errors and covariance (as hexadecimal floats) and its
accuracy record: ``solver_digits``, ``data_digits``, the worst terms, the sentence and the
two error arrays.  ``--compare`` says per fit whether the fit and the record's figures and
sentence are the same, and how many digits of each error array agree (``identical`` when
every bit does).
"""

from __future__ import annotations

import argparse
import json
import sys
from typing import Any, Callable

import numpy as np

import lintools as lt


def _data(n: int, p: int, K: int, seed: int) -> tuple[np.ndarray, np.ndarray, np.random.Generator]:
    rng = np.random.default_rng(seed)
    X = rng.normal(size=(n, p)) * rng.uniform(0.2, 5.0, size=p) + rng.normal(size=p)
    y = np.argmax(X @ rng.normal(scale=0.4, size=(p, K)) + rng.gumbel(size=(n, K)), axis=1)
    return X, y, rng


def fits() -> list[tuple[str, Callable[[], Any]]]:
    X2, y2, _ = _data(3000, 4, 2, 1)
    X3, y3, _ = _data(10_000, 10, 3, 2)
    X4, y4, rng = _data(5000, 6, 4, 3)
    w4 = rng.uniform(0.1, 3.0, size=5000)
    X5, y5, _ = _data(4000, 5, 5, 4)
    X6, y6, _ = _data(2500, 3, 6, 5)
    X7, y7, rng = _data(1000, 8, 3, 6)
    off = rng.normal(size=(1000, 3)) * 0.1
    X8, y8, _ = _data(60_000, 8, 3, 7)
    X9, y9, _ = _data(500, 30, 3, 8)
    return [
        ("K=2", lambda: lt.softmax(X2, y2)),
        ("K=3 1e4x10", lambda: lt.softmax(X3, y3)),
        ("K=4 weights", lambda: lt.softmax(X4, y4, weights=w4)),
        ("K=5 ridge", lambda: lt.softmax(X5, y5, l2=2.0)),
        ("K=5 symmetric", lambda: lt.softmax(X5, y5, l2=0.5, reference=None)),
        ("K=6", lambda: lt.softmax(X6, y6)),
        ("K=6 reference class 3", lambda: lt.softmax(X6, y6, reference=3)),
        ("K=4 written to 2 decimals", lambda: lt.softmax(np.round(X4, 2), y4,
                                                         data_precision=lt.Precision.written([2] * 6))),
        ("K=3 offset, no intercept", lambda: lt.softmax(X7, y7, offset=off, intercept=False)),
        ("K=3 symmetric, no intercept", lambda: lt.softmax(X7, y7, l2=1.0, reference=None, intercept=False)),
        ("K=3 6e4x8 large paths", lambda: lt.softmax(X8, y8)),
        ("K=3 wide p=30 ridge", lambda: lt.softmax(X9, y9, l2=0.1)),
    ]


def _hex(a: Any) -> list[str]:
    return [float(v).hex() for v in np.ravel(np.asarray(a, dtype=float))]


def record(fit: Any) -> dict[str, Any]:
    a = fit.accuracy
    return {"fit": _hex(fit.coefficients) + _hex(fit.standard_errors) + _hex(fit.covariance),
            "figures": [a.solver_digits, a.data_digits, a.solver_worst, a.data_worst, a.sentence],
            "solver_error": _hex(a.solver_error), "data_error": _hex(a.data_error)}


def _agree(u: list[str], v: list[str]) -> str:
    x = np.array([float.fromhex(s) for s in u])
    y = np.array([float.fromhex(s) for s in v])
    if x.shape == y.shape and np.array_equal(x, y):
        return "identical"
    if x.shape != y.shape:
        return "different sizes"
    with np.errstate(divide="ignore", invalid="ignore"):
        rel = np.abs(x - y) / np.maximum(np.abs(x), np.abs(y))
    return f"{-np.log10(np.nanmax(rel)):.1f} digits"


def compare(before: dict[str, Any], after: dict[str, Any]) -> None:
    for name, b in before.items():
        a = after[name]
        print(f"{name:<30} fit bits same: {a['fit'] == b['fit']!s:<5}  figures and sentence same: "
              f"{a['figures'] == b['figures']!s:<5}  solver_error: {_agree(b['solver_error'], a['solver_error'])}"
              f"  data_error: {_agree(b['data_error'], a['data_error'])}")


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--compare", nargs=2, metavar=("BEFORE", "AFTER"))
    args = parser.parse_args(argv)
    if args.compare:
        with open(args.compare[0]) as f0, open(args.compare[1]) as f1:
            compare(json.load(f0), json.load(f1))
        return 0
    json.dump({name: record(make()) for name, make in fits()}, sys.stdout, indent=1)
    print()
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
