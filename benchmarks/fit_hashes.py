"""Hashes of a set of likelihood fits, to show that a speed change leaves every bit alone.

Usage::

    PYTHONPATH=/work/main python benchmarks/fit_hashes.py > before.txt
    PYTHONPATH=$PWD       python benchmarks/fit_hashes.py > after.txt
    diff before.txt after.txt        # no output: the same bits

Each line is one fit: its name and a SHA-256 of the bytes of its coefficients, intercept,
standard errors, covariance, log-likelihood, deviance, null deviance, likelihood-ratio
statistic and p-value, and the convergence fields (converged, iterations, gradient norm,
objective, message).  The fits cover binary logistic (plain, weights, offsets, ridge, Firth,
grouped, no intercept, shifted columns), softmax (plain, weights, ridge, symmetric ridge), and 60,000-row
fits that take the engine's shortcuts for large problems (float32 step Hessians, warm
start, Newton sketch: :class:`lintools.engine.settings.FastPaths`).
"""

from __future__ import annotations

import hashlib
from typing import Any, Callable

import numpy as np

import lintools as lt


def _digest(fit: Any) -> str:
    h = hashlib.sha256()
    for name in ("coefficients", "intercept", "standard_errors", "intercept_standard_error", "covariance",
                 "log_likelihood", "deviance", "null_deviance", "lr_statistic", "lr_p_value",
                 "penalised_log_likelihood"):
        value = getattr(fit, name, None)
        h.update(name.encode())
        if value is not None:
            h.update(np.ascontiguousarray(np.asarray(value, dtype=float)).tobytes())
    c = fit.convergence
    h.update(repr((c.converged, c.iterations, float(c.gradient_norm).hex(), float(c.objective).hex(),
                   c.message)).encode())
    return h.hexdigest()[:24]


def _binary(n: int, p: int, seed: int, shift: float = 0.0) -> tuple[np.ndarray, np.ndarray, np.random.Generator]:
    rng = np.random.default_rng(seed)
    X = rng.normal(size=(n, p)) + shift
    eta = 0.3 + (X - shift) @ rng.normal(scale=0.4, size=p)
    y = (rng.uniform(size=n) < 1.0 / (1.0 + np.exp(-eta))).astype(float)
    return X, y, rng


def _classes(n: int, p: int, k: int, seed: int) -> tuple[np.ndarray, np.ndarray, np.random.Generator]:
    rng = np.random.default_rng(seed)
    X = rng.normal(size=(n, p))
    scores = X @ rng.normal(scale=0.5, size=(p, k))
    y = np.argmax(scores + rng.gumbel(size=(n, k)), axis=1)
    return X, y, rng


def fits() -> list[tuple[str, Callable[[], Any]]]:
    X, y, rng = _binary(10_000, 10, 1)
    w = rng.uniform(0.5, 2.0, size=X.shape[0])
    o = rng.normal(scale=0.3, size=X.shape[0])
    Xs, ys, _ = _binary(300, 4, 2)
    Xw, yw, _ = _binary(10_000, 50, 3)
    Xf, yf, _ = _binary(2_000, 5, 4, shift=1e4)
    Xg, _, rg = _binary(500, 3, 5)
    trials = rg.integers(1, 9, size=500)
    succ = rg.binomial(trials, 1.0 / (1.0 + np.exp(-(Xg @ [0.5, -0.3, 0.2]))))
    Xb, yb, rb = _binary(60_000, 10, 6)
    wb = rb.uniform(0.5, 2.0, size=60_000)
    Xm, ym, rm = _classes(10_000, 10, 3, 7)
    wm = rm.uniform(0.5, 2.0, size=10_000)
    Xm6, ym6, _ = _classes(60_000, 8, 4, 8)
    return [
        ("logistic 1e4x10", lambda: lt.logistic(X, y)),
        ("logistic 1e4x10 tol 1e-10", lambda: lt.logistic(X, y, tol=1e-10)),
        ("logistic weights", lambda: lt.logistic(X, y, weights=w)),
        ("logistic offset", lambda: lt.logistic(X, y, offset=o)),
        ("logistic ridge", lambda: lt.logistic(X, y, l2=3.0)),
        ("logistic no intercept", lambda: lt.logistic(X, y, intercept=False)),
        ("logistic Firth", lambda: lt.logistic(Xs, ys, firth=True)),
        ("logistic Firth weights", lambda: lt.logistic(Xs, ys, firth=True, weights=w[:300])),
        ("logistic lbfgs", lambda: lt.logistic(Xs, ys, solver="lbfgs", max_iter=500)),
        ("logistic 1e4x50", lambda: lt.logistic(Xw, yw)),
        ("logistic shifted columns", lambda: lt.logistic(Xf, yf)),
        ("logistic grouped", lambda: lt.logistic(Xg, succ, trials=trials)),
        ("logistic 6e4x10 fast paths", lambda: lt.logistic(Xb, yb)),
        ("logistic 6e4x10 weights", lambda: lt.logistic(Xb, yb, weights=wb)),
        ("softmax 1e4x10 K=3", lambda: lt.softmax(Xm, ym)),
        ("softmax weights", lambda: lt.softmax(Xm, ym, weights=wm)),
        ("softmax ridge", lambda: lt.softmax(Xm, ym, l2=2.0)),
        ("softmax symmetric ridge", lambda: lt.softmax(Xm, ym, l2=2.0, reference=None)),
        ("softmax 6e4x8 K=4 fast paths", lambda: lt.softmax(Xm6, ym6)),
    ]


def main() -> int:
    for name, fit in fits():
        print(f"{name:<32} {_digest(fit())}")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
