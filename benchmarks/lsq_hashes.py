"""Hashes of a set of least-squares fits, to show that a speed change leaves every bit alone.

Usage::

    PYTHONPATH=/work/main python benchmarks/lsq_hashes.py > before.txt
    PYTHONPATH=$PWD       python benchmarks/lsq_hashes.py > after.txt
    diff before.txt after.txt        # no output: the same bits

Each line is one fit: its name, a SHA-256 of every field of the fit (arrays as bytes, the
rest by ``repr``, floats in hex), and a second one of its accuracy record alone
(``solver_error``, ``data_error``, ``sentence`` and the digits).  The fits cover the Gram fast
path (plain, case and precision weights, ridge, each covariance type, diagnostics, no
intercept, shifted columns, scaled columns, several blocks, data precision) and the QR path.
"""

from __future__ import annotations

import dataclasses
import hashlib
from typing import Any, Callable

import numpy as np

import lintools as lt


def _feed(h: Any, value: Any) -> None:
    if isinstance(value, np.ndarray):
        h.update(str(value.dtype).encode() + str(value.shape).encode())
        h.update(np.ascontiguousarray(value).tobytes())
    elif isinstance(value, float):
        h.update(value.hex().encode())
    elif dataclasses.is_dataclass(value) and not isinstance(value, type):
        for f in dataclasses.fields(value):
            h.update(f.name.encode())
            _feed(h, getattr(value, f.name))
    elif isinstance(value, (tuple, list)):
        h.update(b"(")
        for v in value:
            _feed(h, v)
        h.update(b")")
    else:
        h.update(repr(value).encode())


def _digest(value: Any) -> str:
    h = hashlib.sha256()
    _feed(h, value)
    return h.hexdigest()[:20]


def _data(n: int, p: int, seed: int, shift: float = 0.0) -> tuple[np.ndarray, np.ndarray, np.random.Generator]:
    rng = np.random.default_rng(seed)
    X = rng.normal(size=(n, p)) + shift
    y = 1.5 + (X - shift) @ rng.normal(size=p) + rng.normal(size=n)
    return X, y, rng


def fits() -> list[tuple[str, Callable[[], Any]]]:
    X, y, rng = _data(10_000, 10, 1)
    w = rng.uniform(0.5, 2.0, size=X.shape[0])
    w0 = w.copy()
    w0[::7] = 0.0
    Xw, yw, _ = _data(10_000, 50, 2)
    Xf, yf, _ = _data(20_000, 5, 3, shift=1e6)
    Xb, yb, _ = _data(200_000, 8, 4)
    Xs, ys, _ = _data(500, 4, 5)
    Xu = X * np.ldexp(1.0, 600)
    prec = lt.Precision.written([4] * 10) if hasattr(lt, "Precision") else None
    out = [
        ("lsq 1e4x10", lambda: lt.least_squares(X, y)),
        ("lsq 1e4x10 weights", lambda: lt.least_squares(X, y, weights=w)),
        ("lsq 1e4x10 zero weights", lambda: lt.least_squares(X, y, weights=w0)),
        ("lsq 1e4x10 precision weights", lambda: lt.least_squares(X, y, weights=w, weight_type="precision")),
        ("lsq 1e4x10 ridge", lambda: lt.least_squares(X, y, l2=5.0)),
        ("lsq 1e4x10 no intercept", lambda: lt.least_squares(X, y, intercept=False)),
        ("lsq 1e4x10 diagnostics", lambda: lt.least_squares(X, y, diagnostics=True)),
        ("lsq 1e4x10 scaled column units", lambda: lt.least_squares(Xu, y)),
        ("lsq 1e4x50", lambda: lt.least_squares(Xw, yw)),
        ("lsq 2e4x5 shifted", lambda: lt.least_squares(Xf, yf)),
        ("lsq 2e5x8 blocks", lambda: lt.least_squares(Xb, yb)),
        ("lsq 2e5x8 weights HC3", lambda: lt.least_squares(Xb, yb, weights=np.abs(yb) + 0.5, covariance="HC3")),
        ("lsq 500x4 qr", lambda: lt.least_squares(Xs, ys)),
        ("lsq 500x4 qr HC2 diagnostics", lambda: lt.least_squares(Xs, ys, covariance="HC2", diagnostics=True)),
    ]
    for kind in ("HC0", "HC1", "HC2", "HC3"):
        out.append((f"lsq 1e4x10 {kind}", lambda kind=kind: lt.least_squares(X, y, covariance=kind)))
        out.append((f"lsq 1e4x10 weights {kind}", lambda kind=kind: lt.least_squares(X, y, weights=w, covariance=kind)))
    if prec is not None:
        out.append(("lsq 1e4x10 data precision", lambda: lt.least_squares(X, y, data_precision=prec)))
    return out


def main() -> int:
    for name, fit in fits():
        f = fit()
        print(f"{name:<32} {_digest(f)} accuracy {_digest(f.accuracy)}")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
