"""Softmax benchmark problems: lintools beside scikit-learn and statsmodels.

Every contender fits the unpenalised multinomial model and returns the coefficients
relative to the first class (intercept row first, then the slopes, class by class), so
"digits" compares them all with statsmodels' MNLogit.  lintools and statsmodels also
compute standard errors.  scikit-learn fits the symmetric form; with C = 1e12 (a
negligible penalty) and a tight tol its answer, re-expressed against the first class,
is the same model.  lintools runs at its default tol (1e-13 per unit weight, stricter than
the peers' 1e-10) and, as a further row, at the peers' 1e-10.
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
    fit = lt.softmax(d["X"], d["y"])  # the default tol, 1e-13 per unit weight: what a user gets
    return _relative(fit.intercept, fit.coefficients)

def sm_ours_at_peer_tol(d: dict) -> np.ndarray:
    """lintools at the peers' tolerance, 1e-10 per unit weight (scikit-learn averages its loss
    over the weights at tol 1e-10): the like-for-like time."""
    fit = lt.softmax(d["X"], d["y"], tol=1e-10)
    return _relative(fit.intercept, fit.coefficients)


def sm_statsmodels(d: dict) -> np.ndarray:
    r = sm.MNLogit(d["y"], sm.add_constant(d["X"], has_constant="add")).fit(disp=0, tol=1e-10, method="newton")
    _ = r.bse
    return np.asarray(r.params).ravel(order="F")


def sm_sklearn_lbfgs(d: dict) -> np.ndarray:
    m = sklearn.linear_model.LogisticRegression(C=1e12, solver="lbfgs", tol=1e-10, max_iter=10000).fit(d["X"], d["y"])
    return _relative(m.intercept_, m.coef_.T)


PEERS = {"lintools at tol 1e-10": sm_ours_at_peer_tol, "sklearn lbfgs": sm_sklearn_lbfgs,
         "statsmodels MNLogit": sm_statsmodels}
