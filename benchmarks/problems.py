"""Benchmark problems: data, the lintools call, the peers, and a reference answer.

Each contender returns its coefficient vector with the intercept first, so "digits" can
compare them all with the same reference.  Peers are called the way a user would call
them to get the same things lintools returns (coefficients and standard errors).
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Callable

import numpy as np
import sklearn.linear_model
import statsmodels.api as sm

import lintools as lt
from problems_logistic import PEERS as LOGISTIC_PEERS
from problems_logistic import lg_ours, lg_statsmodels, logistic_data
from problems_softmax import PEERS as SOFTMAX_PEERS
from problems_softmax import sm_ours, sm_statsmodels, softmax_data


@dataclass
class Problem:
    name: str
    make: Callable[[], dict]
    ours: Callable[[dict], np.ndarray]
    reference: Callable[[dict], np.ndarray]
    peers: dict[str, Callable[[dict], np.ndarray]] = field(default_factory=dict)


def _regression_data(n: int, p: int, seed: int = 1, weighted: bool = False) -> Callable[[], dict]:
    def make() -> dict:
        rng = np.random.default_rng(seed)
        mix = np.eye(p) + 0.3 * rng.normal(size=(p, p))
        X = rng.normal(size=(n, p)) @ mix + rng.uniform(-2, 2, size=p)
        y = 1.5 + X @ rng.normal(size=p) + rng.normal(size=n)
        out = {"X": X, "y": y}
        if weighted:
            out["w"] = rng.uniform(0.5, 2.0, size=n)
        return out

    return make


def _with_ones(X: np.ndarray) -> np.ndarray:
    return np.column_stack([np.ones(X.shape[0]), X])


def _ls_ours(d: dict) -> np.ndarray:
    fit = lt.least_squares(d["X"], d["y"])
    return np.r_[fit.intercept, fit.coefficients]


def _ls_householder(d: dict) -> np.ndarray:
    # Householder QR (LAPACK dgeqrf via numpy.linalg.qr) of [1, X]: the reference.
    Q, R = np.linalg.qr(_with_ones(d["X"]))
    return np.linalg.solve(R, Q.T @ d["y"])


def _ls_numpy(d: dict) -> np.ndarray:
    return np.linalg.lstsq(_with_ones(d["X"]), d["y"], rcond=None)[0]


def _ls_sklearn(d: dict) -> np.ndarray:
    m = sklearn.linear_model.LinearRegression().fit(d["X"], d["y"])
    return np.r_[m.intercept_, m.coef_]


def _ls_statsmodels(d: dict) -> np.ndarray:
    r = sm.OLS(d["y"], sm.add_constant(d["X"], has_constant="add")).fit()
    _ = r.bse  # standard errors, as lintools returns them
    return np.asarray(r.params)


def _wls_ours(d: dict) -> np.ndarray:
    fit = lt.least_squares(d["X"], d["y"], weights=d["w"])
    return np.r_[fit.intercept, fit.coefficients]


def _root_weighted(d: dict) -> tuple[np.ndarray, np.ndarray]:
    sw = np.sqrt(d["w"])
    return _with_ones(d["X"]) * sw[:, None], d["y"] * sw


def _wls_householder(d: dict) -> np.ndarray:
    # Householder QR of sqrt(w) * [1, X]: the reference.
    A, b = _root_weighted(d)
    Q, R = np.linalg.qr(A)
    return np.linalg.solve(R, Q.T @ b)


def _wls_numpy(d: dict) -> np.ndarray:
    A, b = _root_weighted(d)
    return np.linalg.lstsq(A, b, rcond=None)[0]


def _wls_sklearn(d: dict) -> np.ndarray:
    m = sklearn.linear_model.LinearRegression().fit(d["X"], d["y"], sample_weight=d["w"])
    return np.r_[m.intercept_, m.coef_]


def _wls_statsmodels(d: dict) -> np.ndarray:
    r = sm.WLS(d["y"], sm.add_constant(d["X"], has_constant="add"), weights=d["w"]).fit()
    _ = r.bse
    return np.asarray(r.params)


def PROBLEMS(quick: bool) -> list[Problem]:
    n_ls, p_ls = (2000, 5) if quick else (1_000_000, 50)
    n_lg, p_lg = (2000, 5) if quick else (1_000_000, 50)
    n_sm, p_sm, k_sm = (2000, 4, 3) if quick else (100_000, 20, 5)
    return [
        Problem(
            name=f"least squares n={n_ls:g} p={p_ls}",
            make=_regression_data(n_ls, p_ls),
            ours=_ls_ours,
            reference=_ls_householder,
            peers={
                "numpy.linalg.lstsq": _ls_numpy,
                "sklearn LinearRegression": _ls_sklearn,
                "statsmodels OLS": _ls_statsmodels,
            },
        ),
        Problem(
            name=f"least squares wtd n={n_ls:g} p={p_ls}",
            make=_regression_data(n_ls, p_ls, seed=2, weighted=True),
            ours=_wls_ours,
            reference=_wls_householder,
            peers={
                "numpy.linalg.lstsq": _wls_numpy,
                "sklearn LinearRegression": _wls_sklearn,
                "statsmodels WLS": _wls_statsmodels,
            },
        ),
        Problem(
            name=f"logistic n={n_lg:g} p={p_lg}",
            make=logistic_data(n_lg, p_lg),
            ours=lg_ours,
            reference=lg_statsmodels,
            peers=LOGISTIC_PEERS,
        ),
        Problem(
            name=f"softmax n={n_sm:g} p={p_sm} K={k_sm}",
            make=softmax_data(n_sm, p_sm, k_sm),
            ours=sm_ours,
            reference=sm_statsmodels,
            peers=SOFTMAX_PEERS,
        ),
    ]
