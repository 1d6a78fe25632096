"""What the solvers share: iteration records, results, evaluations, errors, Cholesky."""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

import numpy as np

from ..linalg import solve_lower, solve_upper

__all__ = ["EPS", "PIVOT_TOLERANCE", "IterationRecord", "SolverResult", "Evaluation", "finish",
           "SingularMatrixError", "NonFiniteDesign", "cholesky", "solve_spd", "solve_factored", "inverse_spd"]

EPS = float(np.finfo(float).eps)
#: A Jacobi-scaled Cholesky pivot at or below this counts as singular.
PIVOT_TOLERANCE = 1e3 * EPS


@dataclass(frozen=True)
class IterationRecord:
    """What ``on_iteration`` receives after each iteration.

    Attributes
    ----------
    iteration : int
        Iterations completed so far (1 after the first).
    objective : float
        Objective at the new point.
    gradient_norm : float
        Max-abs gradient of the objective (caller's coordinates) at the new point.
    step : float
        Max-abs change of the parameters (caller's coordinates) in this iteration.
    """

    iteration: int
    objective: float
    gradient_norm: float
    step: float


@dataclass(frozen=True)
class SolverResult:
    """How a solver ended: the answer ``z`` (solver coordinates) and its account.

    ``status`` is one of ``"converged"``, ``"iteration_limit"``, ``"stalled"``,
    ``"singular"``, ``"diverging"``.
    """

    z: np.ndarray
    converged: bool
    iterations: int
    objective: float
    gradient_norm: float
    status: str
    message: str
    solver: str
    #: the evaluation at ``z`` when the solver kept it (always one from a fresh eta)
    evaluation: "Evaluation | None" = None


@dataclass(frozen=True)
class Evaluation:
    """Objective, gradient in solver coordinates, gradient in the caller's, and eta.

    ``unit`` (optional) converts the caller's gradient into the gradient with respect to
    the intercept and the coefficients of the standardised columns ``x_j / s_j``
    (``unit_j = 1 / s_j``); ``gradient_norm``, the quantity of the stopping rule, is the
    max-abs of that product, which does not change when a column is rescaled.

    ``objective`` is the value, or a function of no arguments that gives it: the value is
    then formed only when first asked for (``value``), since a Newton iteration that
    passes its tests on the gradient and the line search's change never needs it.
    """

    objective: Any
    gradient: np.ndarray
    original_gradient: np.ndarray
    eta: Any
    unit: np.ndarray | None = None
    #: False when ``eta`` was carried forward from a line search (``eta0 + t X d``) rather
    #: than formed afresh as ``X beta + b``; solvers re-evaluate before they report
    fresh: bool = True

    @property
    def value(self) -> float:
        """The objective at this point (formed on first use when it was deferred)."""
        v = self.objective
        if callable(v):
            v = float(v())
            object.__setattr__(self, "objective", v)
        return v

    @property
    def gradient_norm(self) -> float:
        g = self.original_gradient if self.unit is None else self.original_gradient * self.unit
        return float(np.max(np.abs(g))) if g.size else 0.0


def finish(name: str, z: np.ndarray, ev: "Evaluation", it: int, status: str, message: str,
           problem: Any = None) -> SolverResult:
    """The :class:`SolverResult` of a solver that stops at ``z`` with evaluation ``ev``.

    With ``problem`` given, an evaluation made on a carried-forward linear predictor is
    formed afresh first: the reported one always is.
    """
    if problem is not None and not ev.fresh:
        ev = problem.evaluate(z, fresh=True)
    return SolverResult(
        z=z, converged=status == "converged", iterations=it, objective=ev.value,
        gradient_norm=ev.gradient_norm, status=status, message=message, solver=name,
        evaluation=ev,
    )


class SingularMatrixError(ArithmeticError):
    """A matrix that should be positive definite is numerically singular."""


class NonFiniteDesign(ValueError):
    """The design handed to a problem has a NaN or infinite entry (callers that skip the
    finiteness check of their input catch this and name the entry)."""


def cholesky(H: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Jacobi-scaled Cholesky: ``H = D L L' D`` with ``D = sqrt(diag H)``; returns (L, d).

    Raises :class:`SingularMatrixError` when a scaled pivot is <= ``PIVOT_TOLERANCE``.
    """
    d = np.sqrt(np.diag(H))
    if H.shape[0] == 0:
        return np.zeros((0, 0)), d
    if not np.all(np.isfinite(H)) or not np.all(d > 0):
        raise SingularMatrixError("zero or non-finite diagonal")
    Hs = H / d[:, None] / d[None, :]
    try:
        L = np.linalg.cholesky(Hs)
    except np.linalg.LinAlgError:
        raise SingularMatrixError("not positive definite") from None
    if np.min(np.diag(L)) ** 2 <= PIVOT_TOLERANCE:
        raise SingularMatrixError("numerically singular")
    return L, d


def solve_spd(H: np.ndarray, g: np.ndarray) -> np.ndarray:
    """Solve ``H x = g`` for symmetric positive definite ``H`` (scaled Cholesky)."""
    L, d = cholesky(H)
    return solve_upper(L.T, solve_lower(L, g / d)) / d


def solve_factored(factors: tuple[np.ndarray, np.ndarray], g: np.ndarray) -> np.ndarray:
    """Solve ``H x = g`` given ``cholesky(H)``."""
    L, d = factors
    return solve_upper(L.T, solve_lower(L, g / d)) / d


def inverse_spd(H: np.ndarray) -> np.ndarray:
    """``H^{-1}`` for symmetric positive definite ``H``, symmetric to the last bit."""
    L, d = cholesky(H)
    Li = solve_lower(L, np.eye(H.shape[0]))
    V = (Li.T @ Li) / d[:, None] / d[None, :]
    return 0.5 * (V + V.T)
