r"""The :class:`lintools.models.accuracy.Accuracy` of a likelihood fit (binary logistic, softmax,
in memory or over blocks).

The engine solves in the centred, standardised coordinates ``z`` (``z_0 = b + c'beta``,
``z_j = s_j beta_j``, ``c`` and ``s`` the weighted means and spreads of the columns), where
``H_z^{-1} = M V M' w_s`` (``V`` the caller's covariance, ``M`` the map from the caller's
coordinates to ``z`` and ``w_s`` the problem's weight scale).

* Solver: the Newton step at the answer, ``d = H_z^{-1} g_z`` with ``g_z`` the gradient the
  solver's last evaluation formed there (near a non-degenerate optimum the distance to it
  is ``d`` to second order: Dennis & Schnabel 1996, sec. 5.2), plus the rounding floor of a
  gradient formed in float64 (:func:`lintools.models.accuracy.sensitivity` at relative
  rounding ``u`` of the centred design, which is what the linear predictor sees, and
  rounding ``u`` of each row's derivative ``r_i``, whose terms ``w_i m_i mu_i`` and
  ``w_i y_i`` are formed in float64 whatever the size of eta) and the rounding of the
  stored coefficients.
* Data: the same sensitivity at relative rounding ``u`` of the entries of X as given; the
  labels (and trials) are exact.  ``r_i = w_i (m_i mu_i - y_i)`` and
  ``W_i = w_i m_i mu_i (1 - mu_i)`` on an evenly spaced subsample of the rows.  A Firth fit
  is treated as its likelihood's (the penalty's derivatives are left out: an estimate).
  For K outputs (softmax) ``r_i`` is the K-vector ``w_i (mu_i - e_{y_i})`` and ``W_i`` the
  K x K matrix ``w_i (diag(mu_i) - mu_i mu_i')`` over the free classes.

:func:`likelihood_accuracy` is what every likelihood fit shares: it takes the answer in
the solver's coordinates, the inverse information and gradient there, and the rows of
the subsample with their derivatives; the fits give these (:func:`binary_accuracy` here,
:mod:`lintools.models.softmax_accuracy`, the blocked fits from a sample of their rows).

References
----------
Dennis, J. E. & Schnabel, R. B. (1996). Numerical Methods for Unconstrained Optimization
and Nonlinear Equations. SIAM.
Higham, N. J. (2002). Accuracy and Stability of Numerical Algorithms, 2nd ed. SIAM, ch. 20.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any

import numpy as np

from .accuracy import (FLOOR_FACTOR, UNIT, Accuracy, Precision, accuracy_record, column_scaled, rows_of,
                       sample_note, sensitivity, subsample)
from ..support.threads import row_buffer
from ..support.logistic_function import sigmoid

__all__ = ["LikelihoodAnswer", "binary_accuracy", "binary_derivatives", "linear_predictor", "likelihood_accuracy", "column_rms"]

_ROOT3 = math.sqrt(3.0)


@dataclass(frozen=True)
class LikelihoodAnswer:
    """A likelihood fit's answer as its accuracy needs it.

    ``c``, ``s``: the centres and scales of the solver's coordinates ``z`` (``z_0 = b +
    c'beta``, ``z_j = s_j beta_j``, K outputs term-major); ``rho``: the weighted root mean
    squares of the columns; ``Hinv``, ``gradient``: the inverse information and the gradient
    at ``z`` in those coordinates (the problem's weights); ``theta``: (p1, K) coefficients in
    the caller's units, intercepts first; ``terms``: the reported names; ``order``: the
    reported terms as indices of the term-major ones (None: as they are); ``centre``:
    report the intercepts with mean zero (the symmetric softmax form)."""

    c: np.ndarray
    s: np.ndarray
    rho: np.ndarray
    intercept: bool
    z: np.ndarray
    Hinv: np.ndarray
    gradient: np.ndarray
    theta: np.ndarray
    terms: tuple[str, ...]
    order: np.ndarray | None = None
    centre: bool = False


def column_rms(c: np.ndarray, spread: np.ndarray) -> np.ndarray:
    """The weighted root mean square of each column from its centre and spread (1 where 0)."""
    rho = np.sqrt(np.asarray(spread, dtype=float) ** 2 + np.asarray(c, dtype=float) ** 2)
    return np.where(rho > 0, rho, 1.0)


def binary_accuracy(*args: Any, **kwargs: Any) -> Accuracy:
    """See :func:`_binary_accuracy`; arithmetic warnings of extreme data (an overflow of a squared error)
    are silent: such a figure shows as 0 digits or the float64 limit."""
    with np.errstate(all="ignore"):
        return _binary_accuracy(*args, **kwargs)


def _binary_accuracy(problem: Any, Xa: np.ndarray, loss: Any, offset: np.ndarray | None, z: np.ndarray,
                     gradient_z: np.ndarray, V: np.ndarray, terms: tuple[str, ...],
                     precision: Precision | None = None) -> Accuracy:
    """The accuracy of a binary logistic answer ``z`` (the problem's coordinates).

    ``gradient_z``: the gradient at ``z`` in those coordinates (the loss's weights);
    ``V``: the caller's covariance (intercept first); ``terms``: the parameter names,
    intercept first."""
    M = problem.z_from_theta_matrix()
    c = np.asarray(problem.c, dtype=float)
    ans = LikelihoodAnswer(c, np.asarray(problem.s, dtype=float), column_rms(c, problem.spread),
                           bool(problem.intercept), z, (M @ V @ M.T) * problem.weight_scale, gradient_z,
                           problem.to_original(z)[:, None], tuple(terms))
    idx = subsample(Xa.shape[0])
    Xs = rows_of(Xa, idx)
    eta = linear_predictor(ans, Xs, None if offset is None else offset[idx])[:, 0]
    r, W, size = binary_derivatives(eta, loss.y[idx], loss.weights[idx], loss.trials[idx])
    return likelihood_accuracy(ans, Xs, r, W, size, Xa.shape[0], precision)


def binary_derivatives(eta: np.ndarray, y: np.ndarray, w: np.ndarray, m: Any = 1.0) -> tuple:
    """``r_i = w_i (m_i mu_i - y_i)``, ``W_i = w_i m_i mu_i (1 - mu_i)`` at ``eta`` and the
    size of the terms of ``r_i``, ``w_i (m_i mu_i + y_i)``."""
    mu = sigmoid(eta)
    return w * (m * mu - y), w * m * mu * (1.0 - mu), w * (m * mu + y)


def linear_predictor(ans: LikelihoodAnswer, Xs: np.ndarray, offset: np.ndarray | None) -> np.ndarray:
    """``eta`` (m, K) of the rows ``Xs`` at the answer (with their ``offset``)."""
    off = int(ans.intercept)
    eta = Xs @ ans.theta[off:]
    if ans.intercept:
        eta += ans.theta[0]
    if offset is not None:
        eta += np.reshape(offset, eta.shape)
    return eta


def likelihood_accuracy(ans: LikelihoodAnswer, Xs: np.ndarray, r: np.ndarray, W: np.ndarray, r_size: np.ndarray,
                        rows: int, precision: Precision | None = None, how: str = "evenly spaced") -> Accuracy:
    """The :class:`Accuracy` of a likelihood answer from a subsample ``Xs`` of the ``rows``
    rows (drawn as ``how`` says) with the derivatives ``r``, ``W`` of each row's loss in eta
    there ((m,) each for one output, (m, K) and (m, K, K) for K) and ``r_size``, the sizes
    of the terms of ``r`` (shaped as ``r``), whose rounding in float64 is part of the
    solver's floor."""
    scale = rows / max(Xs.shape[0], 1)
    p = Xs.shape[1]
    intercept, off = ans.intercept, int(ans.intercept)
    prec = Precision.float64(p) if precision is None else precision
    c, s, rho = ans.c, ans.s, ans.rho
    K = ans.theta.shape[1]
    T = column_scaled(c, s, rho, intercept, K)
    theta = np.concatenate(([ans.theta[0]] if intercept else []) + [(rho[:, None] * ans.theta[off:]).ravel()])
    to_caller = np.repeat(np.concatenate([[1.0] if intercept else [], 1.0 / rho]), K)
    R = reporting(theta.size, K, intercept and ans.centre, ans.order)
    T, theta = R @ T, R @ theta
    if ans.order is not None:
        to_caller = to_caller[ans.order]
    Z = np.subtract(Xs, c, out=row_buffer("accuracy centred", Xs.shape))
    Z /= s  # (Xs - c) / s, in a kept buffer
    gz = ans.z.reshape(p + off, K)[off:]
    if precision is None:  # relative rounding u of the entries as given
        sig = np.abs(Xs, out=row_buffer("accuracy data", Xs.shape))
        sig *= UNIT / _ROOT3 / s
    else:
        sig = np.sqrt((prec.x_relative * Xs) ** 2 + prec.x_absolute ** 2) / (_ROOT3 * s)
    floor_sig = np.abs(Z, out=row_buffer("accuracy floor", Xs.shape))
    floor_sig *= UNIT / _ROOT3
    floor_var, data_var = sensitivity(Z, gz, r, W, T @ ans.Hinv, intercept,
                                      [(floor_sig, r_size * (UNIT / _ROOT3)), (sig, None)],
                                      scale)
    step = ans.Hinv @ ans.gradient
    return accuracy_record(theta, ans.z, T, step, floor_var, FLOOR_FACTOR, data_var, to_caller, ans.terms,
                           prec.what, sample_note(Xs.shape[0], rows, how))


def reporting(size: int, K: int, centre: bool, order: np.ndarray | None) -> np.ndarray:
    """The map from the term-major column-scaled coefficients to the reported ones: the K
    intercepts less their mean (``centre``), then the terms in ``order``."""
    R = np.eye(size)
    if centre:
        R[:K, :K] -= 1.0 / K
    return R if order is None else R[order]
