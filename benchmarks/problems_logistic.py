"""Binary logistic benchmark problems: lintools beside scikit-learn and statsmodels.

Every contender fits the unpenalised model to the same gradient tolerance, 1e-10 on the
gradient per unit weight (scikit-learn averages its loss over the weights; lintools' tol
is per unit weight on the standardised columns), and returns (intercept, slopes); lintools and statsmodels also compute standard errors.
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
    fit = lt.logistic(d["X"], d["y"], tol=1e-10)  # per unit weight, like scikit-learn's averaged loss at tol 1e-10
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
    "sklearn newton-cholesky": _sk("newton-cholesky"),
    "sklearn lbfgs": _sk("lbfgs"),
    "statsmodels Logit": lg_statsmodels,
}
