r"""A test-only Poisson family: its loss and its family, fitted through the one driver.

Proof that a new model family is one file: nothing in ``lintools`` knows it.

.. math::

    \min_{b,\beta}\; \sum_i w_i\,(\mu_i - y_i \eta_i),\qquad \eta_i = b + x_i'\beta,\quad
    \mu_i = e^{\eta_i}

(the negative Poisson log-likelihood without :math:`\sum_i w_i \log y_i!`; McCullagh &
Nelder 1989, sec. 6.2).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from lintools.engine.base import Evaluation
from lintools.models.driver import DEFAULT_TOL, checked_problem, rank_message, solve_family
from lintools.models.records import Convergence
from lintools.models.inference import covariance, null_objective


class PoissonLoss:
    """Negative weighted Poisson log-likelihood in the linear predictor (log link)."""

    outputs = 1
    row_subsets = row_blocks = closed_null = False  # declared capabilities: none

    def __init__(self, y: np.ndarray, weights: np.ndarray) -> None:
        self.y, self.weights = y, weights

    def row_weights(self) -> np.ndarray:
        return self.weights

    def start_intercept(self, offset=None) -> float:
        return math.log(float(self.weights @ self.y) / float(self.weights.sum()))

    def value(self, eta: np.ndarray) -> float:
        return float(self.weights @ (np.exp(eta) - self.y * eta))

    def value_change(self, eta: np.ndarray, delta: np.ndarray) -> float:
        return float(self.weights @ (np.exp(eta) * np.expm1(delta) - self.y * delta))

    def gradient(self, eta: np.ndarray) -> np.ndarray:
        return self.weights * (np.exp(eta) - self.y)

    def value_and_gradient(self, eta: np.ndarray) -> tuple[float, np.ndarray]:
        return self.value(eta), self.gradient(eta)

    def curvature(self, eta: np.ndarray) -> np.ndarray:
        return self.weights * np.exp(eta)

    def hessian_vector(self, eta: np.ndarray, u: np.ndarray) -> np.ndarray:
        return self.curvature(eta) * u

    def deviance(self, eta: np.ndarray) -> float:
        y, mu = self.y, np.exp(eta)
        ylog = np.where(y > 0, y * np.log(np.where(y > 0, y, 1.0) / mu), 0.0)
        return float(2.0 * self.weights @ (ylog - (y - mu)))


@dataclass(frozen=True)
class PoissonFit:
    coefficients: np.ndarray  # intercept first
    standard_errors: np.ndarray
    deviance: float
    null_deviance: float
    convergence: Convergence


class PoissonFamily:
    """The Poisson family: no separation watch (``watch = None``), so no exact check."""

    watch = None
    remedies = separated = ""
    singular_runaway = False

    def __init__(self, Xa: np.ndarray, loss: PoissonLoss, names: tuple[str, ...]) -> None:
        self.Xa, self.loss, self.names, self.size = Xa, loss, names, Xa.size

    def exact_check(self) -> None:
        return None

    def rank_message(self) -> str | None:
        return rank_message(self.Xa, self.loss.weights, True, self.names)

    def covariance(self, problem, target, z: np.ndarray) -> np.ndarray:
        return covariance(problem, z, ("(intercept)",) + self.names)

    def newton_move(self, problem, ev: Evaluation, V: np.ndarray) -> float:
        raise AssertionError("no watch, so no final check")


def poisson(X: np.ndarray, y: np.ndarray, solver: str = "newton", max_iter: int = 100) -> PoissonFit:
    """Fit a Poisson regression with an intercept through :func:`solve_family`."""
    names = tuple(f"x{j + 1}" for j in range(X.shape[1]))
    loss = PoissonLoss(np.asarray(y, dtype=float), np.ones(X.shape[0]))
    problem = checked_problem(X, None, names, loss, intercept=True)
    family = PoissonFamily(X, loss, names)
    solved = solve_family(family, problem, solver=solver, tol=DEFAULT_TOL, max_iter=max_iter, on_iteration=None)
    _, eta0 = null_objective(loss, X.shape[0], None, True, False, DEFAULT_TOL, max_iter)
    return PoissonFit(problem.to_original(solved.z), np.sqrt(np.diag(solved.covariance)),
                      loss.deviance(solved.evaluation.eta), loss.deviance(eta0), solved.convergence)
