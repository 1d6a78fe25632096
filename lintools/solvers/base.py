"""What the solvers share: iteration records, results, evaluations, errors, Cholesky."""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any, Callable

import numpy as np

from ..linalg import solve_lower, solve_upper

__all__ = ["EPS", "PIVOT_TOLERANCE", "IterationRecord", "SolverResult", "Evaluation", "finish",
           "SingularMatrixError", "NonFiniteDesign", "cholesky", "solve_spd", "solve_factored", "inverse_spd",
           "converged_message", "limit_message", "stalled_message", "stop_before_step", "report_step"]

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


# ---- what the three solvers share in their loops ----------------------------------------
def converged_message(name: str, it: int, gnorm: float, tol: float) -> str:
    return f"{name}: converged in {it} iteration(s); max |gradient| {gnorm:.3g} <= tol {tol:.3g}"


def limit_message(name: str, it: int, gnorm: float, tol: float) -> str:
    advice = "raise max_iter" if name == "newton" else "raise max_iter or choose solver='newton'"
    return (
        f"{name}: stopped at the iteration limit ({it}) with max |gradient| {gnorm:.3g} > tol "
        f"{tol:.3g}; NOT converged: {advice}"
    )


def stalled_message(name: str, it: int, gnorm: float, tol: float) -> str:
    return (
        f"{name}: stalled after {it} iteration(s): the objective no longer decreases beyond "
        f"rounding while max |gradient| is {gnorm:.3g} > tol {tol:.3g}; NOT converged: tol is "
        "probably below what float64 rounding allows for this problem (loosen tol, or "
        "rescale the columns)"
    )


def stop_before_step(name: str, it: int, gnorm: float, tol: float, max_iter: int) -> tuple[str, str] | None:
    """``(status, message)`` when a solver stops before its next step (the gradient is
    within ``tol``, or ``max_iter`` iterations are done), else None."""
    if gnorm <= tol:
        return "converged", converged_message(name, it, gnorm, tol)
    if it >= max_iter:
        return "iteration_limit", limit_message(name, it, gnorm, tol)
    return None


def report_step(problem: Any, it: int, z_old: np.ndarray, z: np.ndarray, ev: Evaluation, tol: float,
                on_iteration: Callable[[IterationRecord], Any] | None,
                monitor: Callable[[np.ndarray, Evaluation], str | None] | None) -> str | None:
    """Hand iteration ``it`` (now at ``z``, from ``z_old``) to ``on_iteration`` with its
    largest parameter move in the caller's coordinates, then ask ``monitor`` (while not
    converged); returns the monitor's alarm, if it raised one."""
    if on_iteration is not None:
        step = float(np.max(np.abs(problem.to_original(z) - problem.to_original(z_old)))) if z.size else 0.0
        on_iteration(IterationRecord(it, ev.value, ev.gradient_norm, step))
    if monitor is not None and ev.gradient_norm > tol:
        return monitor(z, ev) or None
    return None
