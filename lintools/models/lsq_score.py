"""Least squares at given coefficients: the score and information of the score test,
and the gradient of the loss (the least-squares entries of :mod:`lintools.models.kinds`).

The loss is half the weighted residual sum of squares,
:math:`\\tfrac12 \\sum_i w_i (y_i - b - x_i'\\beta)^2`, plus :math:`\\tfrac{\\lambda}{2}|\\beta|^2`.
Under normal errors with variance :math:`\\sigma^2` the score is
:math:`U = Z'W r / \\sigma^2` (less the penalty's gradient) and the information
:math:`(Z'WZ + \\lambda P)/\\sigma^2`, with :math:`\\sigma^2` estimated under the null
(restricted) as in the score test (Rao 1948).

Reference: Rao, C. R. (1948). Large sample tests of statistical hypotheses concerning
several parameters with applications to problems of estimation. Proc. Cambridge Phil.
Soc. 44.
"""

from __future__ import annotations

from typing import Any

import numpy as np

from ..support.errors import InputError
from ..support.validate import as_vector, as_weights

__all__ = ["SCORE_UNDEFINED", "gradient", "score_and_information"]

#: The refusal of a score test that has no value, ``{why}`` filled in.
SCORE_UNDEFINED = (
    "the score test at the delivered coefficients is undefined: {why}; compare without y= (the "
    "Wald test needs no data), or pass rows that identify every coefficient"
)


def score_and_information(fit: Any, Xa: np.ndarray, y: Any, weights: Any, coef: Any, b: Any,
                          free_intercept: bool) -> tuple[np.ndarray, np.ndarray]:
    """Score and information of least squares at the delivered coefficients (restricted
    variance), intercept first when the fit has one; with ``free_intercept`` the intercept
    is first set to its constrained estimate given ``coef``."""
    n = Xa.shape[0]
    ya = as_vector(y, "y", n)
    w = as_weights(weights, n)
    if free_intercept:  # constrained estimate of the nuisance intercept
        b = float(w @ (ya - Xa @ coef)) / float(w.sum())
    Z = np.column_stack([np.ones(n), Xa]) if fit.with_intercept else Xa
    r = ya - Z @ np.concatenate([[float(b)] if fit.with_intercept else [], coef])
    first = int(fit.with_intercept)
    pen = np.zeros(Z.shape[1])
    pen[first:] = fit.l2
    n_obs = w.sum() if fit.weight_type == "case" else float((w > 0).sum())
    sigma2 = float(w @ (r * r)) / n_obs  # restricted (score-test) variance estimate
    if not sigma2 > 0:
        raise InputError(SCORE_UNDEFINED.format(
            why="the delivered coefficients fit these rows exactly (every residual is zero)"))
    U = (Z.T @ (w * r) - pen * np.concatenate([[0.0] * first, coef])) / sigma2
    info = (Z.T @ (Z * w[:, None]) + np.diag(pen)) / sigma2
    return U, info


def gradient(Xa: np.ndarray, y: Any, w: np.ndarray, beta: np.ndarray, intercept: Any) -> tuple[np.ndarray, float]:
    """The gradient of half the weighted residual sum of squares at ``(intercept, beta)``:
    the slopes' ``-X'W r`` and the intercept's ``-1'W r`` (0 when ``intercept`` is None)."""
    ya = as_vector(y, "y", Xa.shape[0])
    b = 0.0 if intercept is None else float(intercept)
    r = ya - Xa @ beta - b
    return -(Xa.T @ (w * r)), (-float(w @ r) if intercept is not None else 0.0)
