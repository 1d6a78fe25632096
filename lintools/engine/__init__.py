r"""Solvers for smooth convex problems in a flat parameter vector, generic over a loss.

A **problem** couples a loss in the linear predictor (:mod:`lintools.engine.losses`), a design
and a penalty.  The solvers (:func:`newton`, :func:`lbfgs`, :func:`accelerated_gradient`)
see only this interface::

    size                 length of the parameter vector z (solver coordinates)
    weight_total         total case weight W of the problem's loss
    weight_scale         the factor s by which the caller's weights were divided (their
                         largest; see lintools.support.scaling)
                         (the problem's objective is the caller's F / s; solvers report
                         objectives times s)
    start()              starting z
    evaluate(z)          Evaluation(value, gradient in z, original_gradient, eta, measure)
    hessian(z)           (size, size) Hessian in z (for Firth: the Fisher information)
    line(z, d)           object with change(t) = F(z + t d) - F(z) and change_and_slope(t)
                         (adding d/dt F(z + t d)); it reuses X d, so trial steps cost no
                         pass over the design, and changes are computed directly, so
                         decreases far below the rounding of F are still resolved
    to_original(z)       the parameters in the caller's coordinates (a linear map)

This interface, the loss's and the line search's are written down as ``typing.Protocol``
classes in :mod:`lintools.engine.contracts`, with the optional capabilities (the
shortcuts of large problems, the blocked passes of a many-output loss) declared by flags
that every implementation sets, never probed.

**The stopping rule** is ``Evaluation.gradient_norm <= tol``, with

.. math::

    \texttt{gradient\_norm} = \frac{1}{W}\,\max_k \Big|\frac{\partial F}{\partial z_k}\Big|,

the max-abs gradient of the objective **per unit of total case weight** ``W``, with
respect to the intercept and the coefficients of the **standardised, centred columns**
``(x_j - c_j) / s_j`` (``c_j`` the weighted mean, ``s_j`` the weighted standard deviation;
without an intercept ``c_j = 0`` and ``s_j`` the root mean square), at the returned answer
(what ``Convergence.gradient_norm`` reports), whatever coordinates the solver worked in.
For a slope it is :math:`\sum_i r_i (x_{ij} - c_j) / (s_j W)` (plus the ridge term), for
the intercept :math:`\sum_i r_i / W`, with :math:`r_i` the derivative of row ``i``'s loss
in its linear predictor.  It is unchanged when all weights are multiplied by a constant,
when a column is multiplied by a constant, or when a constant is added to a column (the
fit is then the reparametrised one), so none of these decides whether a fit stops; and
it does not grow with the number of rows, so the default tol stays above the float64
rounding level of a sum over millions of rows.

**What tol promises.** Let :math:`\bar H` be the Hessian of ``F / W`` in these
coordinates (the information per unit weight, plus the ridge per unit weight).  To
first order the answer's standardised coefficients ``z`` lie within
:math:`\lVert \bar H^{-1} \rVert_\infty\,\texttt{tol}` (max-abs) of the exact optimum,
and the caller's slopes within that divided by ``s_j``.  A test of the suite
(``tests/test_scale_invariance_fits.py``) checks it for the three solvers.

The solvers' own constants are stated in the same units (L-BFGS's first step
``-g / max(W, |g|_inf)``, the accelerated gradient's starting Lipschitz constant ``W``;
Newton's steps do not depend on the scale), so the iterations, and their count, do not
depend on the scale of the weights.

The problems live in :mod:`lintools.engine.problem` (:class:`LinearModelProblem`) and
:mod:`lintools.engine.affine` (fixed parameters, removed directions);
:mod:`lintools.engine.base` holds the records, errors and Cholesky helpers that the
solvers share.
"""

from __future__ import annotations

from typing import Any, Callable

import numpy as np

from .samples import SAMPLE_RUN, sample_rows, take_rows
from .affine import AffineProblem, RestrictedProblem
from .base import (
    Evaluation,
    ExtremeSpread,
    IterationRecord,
    NonFiniteDesign,
    SingularMatrixError,
    SolverResult,
    cholesky,
    finish,
    inverse_spd,
    solve_factored,
    solve_spd,
)
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
    "ExtremeSpread",
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
