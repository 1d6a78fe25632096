"""Softmax benchmark problems: lintools beside scikit-learn and statsmodels.

Every contender fits the unpenalised multinomial model and returns the coefficients
relative to the first class (intercept row first, then the slopes, class by class), so
"digits" compares them all with statsmodels' MNLogit.  lintools and statsmodels also
compute standard errors.  scikit-learn fits the symmetric form; with C = 1e12 (a
negligible penalty) and a tight tol its answer, re-expressed against the first class,
is the same model.
"""

from __future__ import annotations

from typing import Callable

import numpy as np
import sklearn.linear_model
import statsmodels.api as sm

import lintools as lt


def softmax_data(n: int, p: int, K: int, seed: int = 4) -> Callable[[], dict]:
    def make() -> dict:
        rng = np.random.default_rng(seed)
        X = rng.normal(size=(n, p))
        B = rng.normal(scale=0.3, size=(p, K))
        E = X @ B + rng.normal(scale=0.5, size=K)
        E -= E.max(axis=1, keepdims=True)
        P = np.exp(E)
        P /= P.sum(axis=1, keepdims=True)
        u = rng.uniform(size=(n, 1))
        y = (u > np.cumsum(P, axis=1)).sum(axis=1).astype(float)
        return {"X": X, "y": y}

    return make


def _relative(b: np.ndarray, B: np.ndarray) -> np.ndarray:
    A = np.vstack([b, B])
    return (A[:, 1:] - A[:, :1]).ravel(order="F")


def sm_ours(d: dict) -> np.ndarray:
    fit = lt.softmax(d["X"], d["y"], tol=1e-10)  # per unit weight, like scikit-learn's averaged loss at tol 1e-10
    return _relative(fit.intercept, fit.coefficients)


def sm_statsmodels(d: dict) -> np.ndarray:
    r = sm.MNLogit(d["y"], sm.add_constant(d["X"], has_constant="add")).fit(disp=0, tol=1e-10, method="newton")
    _ = r.bse
    return np.asarray(r.params).ravel(order="F")


def sm_sklearn_lbfgs(d: dict) -> np.ndarray:
    m = sklearn.linear_model.LogisticRegression(C=1e12, solver="lbfgs", tol=1e-10, max_iter=10000).fit(d["X"], d["y"])
    return _relative(m.intercept_, m.coef_.T)


PEERS = {"sklearn lbfgs": sm_sklearn_lbfgs, "statsmodels MNLogit": sm_statsmodels}
