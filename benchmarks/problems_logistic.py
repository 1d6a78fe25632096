"""Binary logistic benchmark problems: lintools beside scikit-learn and statsmodels.

Every contender fits the unpenalised model and returns (intercept, slopes); lintools and
statsmodels also compute standard errors.  The peers stop at a gradient tolerance of 1e-10
(scikit-learn averages its loss over the weights); lintools runs at its default tol, 1e-13
on the max-abs gradient per unit weight on the standardised columns (stricter), and, as a
further row, at the peers' 1e-10.
scikit-learn has no unpenalised-with-standard-errors mode, so it gets C = 1e12 (a
negligible penalty) and a tight tol; that is its fastest honest setting.
"""

from __future__ import annotations

from typing import Callable

import numpy as np
import sklearn.linear_model
import statsmodels.api as sm

import lintools as lt


def logistic_data(n: int, p: int, seed: int = 2) -> Callable[[], dict]:
    def make() -> dict:
        rng = np.random.default_rng(seed)
        X = rng.normal(size=(n, p))
        beta = rng.normal(scale=0.3, size=p)
        y = (rng.uniform(size=n) < 1.0 / (1.0 + np.exp(-(0.5 + X @ beta)))).astype(float)
        return {"X": X, "y": y}

    return make


def lg_ours(d: dict) -> np.ndarray:
    fit = lt.logistic(d["X"], d["y"])  # the default tol, 1e-13 per unit weight: what a user gets
    return np.r_[fit.intercept, fit.coefficients]

def lg_ours_at_peer_tol(d: dict) -> np.ndarray:
    """lintools at the peers' tolerance, 1e-10 per unit weight (scikit-learn averages its loss
    over the weights at tol 1e-10): the like-for-like time."""
    fit = lt.logistic(d["X"], d["y"], tol=1e-10)
    return np.r_[fit.intercept, fit.coefficients]


def lg_statsmodels(d: dict) -> np.ndarray:
    r = sm.Logit(d["y"], sm.add_constant(d["X"], has_constant="add")).fit(disp=0, tol=1e-10, method="newton")
    _ = r.bse
    return np.asarray(r.params)


def _sk(solver: str) -> Callable[[dict], np.ndarray]:
    def run(d: dict) -> np.ndarray:
        m = sklearn.linear_model.LogisticRegression(C=1e12, solver=solver, tol=1e-10, max_iter=10000).fit(d["X"], d["y"])
        return np.r_[m.intercept_, m.coef_.ravel()]

    return run


PEERS = {
    "lintools at tol 1e-10": lg_ours_at_peer_tol,
    "sklearn newton-cholesky": _sk("newton-cholesky"),
    "sklearn lbfgs": _sk("lbfgs"),
    "statsmodels Logit": lg_statsmodels,
}
