"""What the solvers share: iteration records, results, evaluations, errors, Cholesky."""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any, Callable

import numpy as np

from ..support.linalg import solve_lower, solve_upper

__all__ = ["EPS", "PIVOT_TOLERANCE", "IterationRecord", "SolverResult", "Evaluation", "finish",
           "SingularMatrixError", "NonFiniteDesign", "ExtremeSpread", "cholesky", "solve_spd", "solve_factored",
           "inverse_spd",
           "converged_message", "limit_message", "stalled_message", "stop_before_step", "report_step",
           "MEASURED"]

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
        Objective at the new point (the caller's objective, with the caller's weights).
    gradient_norm : float
        The stopping rule's quantity at the new point (see :class:`Evaluation`): the
        max-abs gradient per unit of total case weight, with respect to the intercept and
        the coefficients of the standardised, centred columns.
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
    ``"singular"``, ``"diverging"``.  ``objective`` is the caller's objective (the
    problem's value times its ``weight_scale``); ``gradient_norm`` the stopping rule's
    quantity.
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
    r"""Objective, gradient in solver coordinates, gradient in the caller's, and eta.

    ``measure`` is the vector of the stopping rule: the gradient of the objective **per
    unit of total case weight** with respect to the intercept and the coefficients of the
    standardised, centred columns ``(x_j - c_j) / s_j`` (``c_j``, ``s_j`` the weighted mean
    and standard deviation; ``c_j = 0`` without an intercept), that is
    :math:`\nabla_z F / W` with ``z`` the problem's standardised coordinates and ``W``
    the total case weight.  ``gradient_norm`` (what ``tol`` is compared with) is its
    max-abs; when ``measure`` is None it is the max-abs of ``gradient``.

    Multiplying every weight by ``c`` multiplies ``F`` and ``W`` by ``c``; multiplying a
    column by ``c`` multiplies its ``s_j`` and divides its coefficient by ``c``; adding a
    constant to a column moves only ``c_j`` and the intercept: none of them changes
    ``measure``.  Its size needs no units either: with ``Hbar`` the information per unit
    weight in these coordinates, the distance of ``z`` from the optimum is, to first
    order, ``Hbar^{-1} measure``, so ``gradient_norm <= tol`` puts every standardised
    coefficient within ``||Hbar^{-1}||_inf * tol`` of it.

    ``objective`` is the value, or a function of no arguments that gives it: the value is
    then formed only when first asked for (``value``), since a Newton iteration that
    passes its tests on the gradient and the line search's change never needs it.
    """

    objective: Any
    gradient: np.ndarray
    original_gradient: np.ndarray
    eta: Any
    measure: np.ndarray | None = None
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
        g = self.gradient if self.measure is None else self.measure
        return float(np.max(np.abs(g))) if g.size else 0.0


def finish(name: str, z: np.ndarray, ev: "Evaluation", it: int, status: str, message: str,
           problem: Any) -> SolverResult:
    """The :class:`SolverResult` of a solver that stops at ``z`` with evaluation ``ev``.

    An evaluation made on a carried-forward linear predictor is formed afresh first: the
    reported one always is.  The objective is reported in the caller's weights.
    """
    if not ev.fresh:
        ev = problem.evaluate(z, fresh=True)
    return SolverResult(
        z=z, converged=status == "converged", iterations=it, objective=ev.value * problem.weight_scale,
        gradient_norm=ev.gradient_norm, status=status, message=message, solver=name,
        evaluation=ev,
    )


class SingularMatrixError(ArithmeticError):
    """A matrix that should be positive definite is numerically singular."""


class NonFiniteDesign(ValueError):
    """The design handed to a problem has a NaN or infinite entry (callers that skip the
    finiteness check of their input catch this and name the entry)."""


class ExtremeSpread(ValueError):
    """A column's weighted spread is too small for float64 to hold its standardised
    coordinate: ``1 / spread`` overflows, or (with a ridge) ``l2 / spread^2`` does.

    ``column`` is its index in the design, ``spread`` its weighted spread;
    ``log10_variance`` is a lower bound (log10) of its coefficient's variance in the
    caller's weights, ``4 / (W spread^2)`` (without a ridge the inverse information's
    diagonal is at least the inverse of its diagonal, at most ``W / 4`` per standardised
    column); it is None with a ridge, whose penalty ``l2 / spread^2`` is what overflows,
    and when ``top`` is set: the column's largest magnitude, whose products with the
    residuals summed over the rows would pass float64's range.  Callers name the column
    and the remedy."""

    def __init__(self, column: int, spread: float, log10_variance: float | None, top: float | None = None) -> None:
        super().__init__(f"column {column} has a weighted spread of {spread:.3g}, beyond float64's range")
        self.column, self.spread, self.log10_variance, self.top = column, spread, log10_variance, top


def cholesky(H: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Jacobi-scaled Cholesky: ``H = D L L' D`` with ``D = sqrt(diag H)``; returns (L, d).

    Raises :class:`SingularMatrixError` when a scaled pivot is <= ``PIVOT_TOLERANCE``, or
    when a diagonal entry is not positive (checked before any square root: an indefinite
    matrix, such as Firth's exact Hessian away from its optimum, is an outcome, not an error).
    """
    diagonal = np.diag(H)
    if H.shape[0] == 0:
        return np.zeros((0, 0)), np.sqrt(diagonal)
    if not np.all(np.isfinite(H)) or not np.all(diagonal > 0):
        raise SingularMatrixError("zero, negative or non-finite diagonal")
    d = np.sqrt(diagonal)
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
#: What ``gradient_norm`` measures, as the messages say it.
MEASURED = "max |gradient| per unit case weight (intercept, standardised centred columns)"


def converged_message(name: str, it: int, gnorm: float, tol: float) -> str:
    return f"{name}: converged in {it} iteration(s); {MEASURED} {gnorm:.3g} <= tol {tol:.3g}"


def limit_message(name: str, it: int, gnorm: float, tol: float) -> str:
    advice = "raise max_iter" if name == "newton" else "raise max_iter or choose solver='newton'"
    return (
        f"{name}: stopped at the iteration limit ({it}) with {MEASURED} {gnorm:.3g} > tol "
        f"{tol:.3g}; NOT converged: {advice}"
    )


def stalled_message(name: str, it: int, gnorm: float, tol: float) -> str:
    return (
        f"{name}: stalled after {it} iteration(s): the objective no longer decreases beyond "
        f"rounding while {MEASURED} is {gnorm:.3g} > tol {tol:.3g}; NOT converged: tol is "
        "probably below what float64 rounding allows for this problem (loosen tol; nearly "
        "collinear columns raise that level)"
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
        on_iteration(IterationRecord(it, ev.value * problem.weight_scale, ev.gradient_norm, step))
    if monitor is not None and ev.gradient_norm > tol:
        return monitor(z, ev) or None
    return None
