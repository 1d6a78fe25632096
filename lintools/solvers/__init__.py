r"""Solvers for smooth convex problems in a flat parameter vector, generic over a loss.

A **problem** couples a loss in the linear predictor (:mod:`lintools.losses`), a design
and a penalty.  The solvers (:func:`newton`, :func:`lbfgs`, :func:`accelerated_gradient`)
see only this interface::

    size                 length of the parameter vector z (solver coordinates)
    start()              starting z
    evaluate(z)          Evaluation(value, gradient in z, original_gradient, eta)
    hessian(z)           (size, size) Hessian in z (for Firth: the Fisher information)
    line(z, d)           object with change(t) = F(z + t d) - F(z) and change_and_slope(t)
                         (adding d/dt F(z + t d)); it reuses X d, so trial steps cost no
                         pass over the design, and changes are computed directly, so
                         decreases far below the rounding of F are still resolved
    to_original(z)       the parameters in the caller's coordinates (a linear map)

The stopping rule is ``Evaluation.gradient_norm <= tol``: the max-abs gradient of the
objective with respect to the intercept and the coefficients of the standardised columns
(``x_j / s_j``, ``s_j`` the weighted standard deviation), at the returned answer (what
``Convergence.gradient_norm`` reports), whatever coordinates the solver worked in.  It is
the caller's gradient with each slope entry divided by ``s_j``; rescaling a column of X
leaves it unchanged, so features of size 1e-150 or 1e150 neither stop the fit at the
start nor keep it from ever stopping.  For columns of unit spread it is the caller's
gradient itself.

The problems live in :mod:`lintools.solvers.problem` (:class:`LinearModelProblem`) and
:mod:`lintools.solvers.affine` (fixed parameters, removed directions);
:mod:`lintools.solvers.base` holds the records, errors and Cholesky helpers that the
solvers share.
"""

from __future__ import annotations

from typing import Any, Callable

import numpy as np

from ._samples import SAMPLE_RUN, sample_rows, take_rows
from .affine import AffineProblem, RestrictedProblem
from .base import (Evaluation, IterationRecord, NonFiniteDesign, SingularMatrixError, SolverResult, cholesky,
                   finish, inverse_spd, solve_factored, solve_spd)
from .problem import LinearModelProblem

__all__ = [
    "IterationRecord",
    "SolverResult",
    "Evaluation",
    "LinearModelProblem",
    "AffineProblem",
    "RestrictedProblem",
    "SingularMatrixError",
    "NonFiniteDesign",
    "finish",
    "cholesky",
    "solve_spd",
    "solve_factored",
    "inverse_spd",
    "solve",
    "SOLVERS",
    "SAMPLE_RUN",
    "sample_rows",
    "take_rows",
]


def solve(
    problem: Any,
    method: str,
    *,
    tol: float,
    max_iter: int,
    on_iteration: Callable[[IterationRecord], Any] | None = None,
    monitor: Callable[[np.ndarray, Evaluation], str | None] | None = None,
    start: np.ndarray | None = None,
) -> SolverResult:
    """Run the named solver (``"newton"``, ``"lbfgs"`` or ``"gradient"``) on ``problem``."""
    from .gradient import accelerated_gradient
    from .lbfgs import lbfgs
    from .newton import newton

    fn = {"newton": newton, "lbfgs": lbfgs, "gradient": accelerated_gradient}[method]
    return fn(problem, tol=tol, max_iter=max_iter, on_iteration=on_iteration, monitor=monitor, start=start)


SOLVERS = ("newton", "lbfgs", "gradient")
