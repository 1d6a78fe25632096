r"""The :class:`lintools.models.accuracy.Accuracy` of a likelihood fit (binary logistic).

The engine solves in the centred, standardised coordinates ``z`` (``z_0 = b + c'beta``,
``z_j = s_j beta_j``, ``c`` and ``s`` the weighted means and spreads of the columns), where
``H_z^{-1} = M V M' w_s`` (``V`` the caller's covariance, ``M`` the map from the caller's
coordinates to ``z`` and ``w_s`` the problem's weight scale).

* Solver: the Newton step at the answer, ``d = H_z^{-1} g_z`` with ``g_z`` the gradient the
  solver's last evaluation formed there (near a non-degenerate optimum the distance to it
  is ``d`` to second order: Dennis & Schnabel 1996, sec. 5.2), plus the rounding floor of a
  gradient formed in float64 (:func:`lintools.models.accuracy.sensitivity` at relative
  rounding ``u`` of the centred design, which is what the linear predictor sees) and the
  rounding of the stored coefficients.
* Data: the same sensitivity at relative rounding ``u`` of the entries of X as given; the
  labels (and trials) are exact.  ``r_i = w_i (m_i mu_i - y_i)`` and
  ``W_i = w_i m_i mu_i (1 - mu_i)`` on an evenly spaced subsample of the rows.  A Firth fit
  is treated as its likelihood's (the penalty's derivatives are left out: an estimate).

References
----------
Dennis, J. E. & Schnabel, R. B. (1996). Numerical Methods for Unconstrained Optimization
and Nonlinear Equations. SIAM.
Higham, N. J. (2002). Accuracy and Stability of Numerical Algorithms, 2nd ed. SIAM, ch. 20.
"""

from __future__ import annotations

import math
from typing import Any

import numpy as np

from .accuracy import (FLOOR_FACTOR, UNIT, Accuracy, Precision, accuracy_record, column_scaled, row_buffer, sensitivity,
                       subsample)
from ..support.logistic_function import sigmoid

__all__ = ["binary_accuracy"]

_ROOT3 = math.sqrt(3.0)


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
    n, p = Xa.shape
    intercept = bool(problem.intercept)
    off = int(intercept)
    prec = Precision.float64(p) if precision is None else precision
    M = problem.z_from_theta_matrix()
    Hinv = (M @ V @ M.T) * problem.weight_scale
    c, s = np.asarray(problem.c, dtype=float), np.asarray(problem.s, dtype=float)
    rho = np.sqrt(np.asarray(problem.spread, dtype=float) ** 2 + c * c)
    rho = np.where(rho > 0, rho, 1.0)
    theta_c = problem.to_original(z)
    b0 = float(theta_c[0]) if intercept else 0.0
    beta = theta_c[off:]
    idx = subsample(n)
    # the row-sized arrays live in buffers the thread keeps (fresh pages cost as much as the arithmetic)
    Xs = np.take(Xa, idx, axis=0, out=row_buffer("accuracy rows", (idx.size, p)))
    eta = Xs @ beta + b0
    if offset is not None:
        eta = eta + offset[idx]
    mu = sigmoid(eta)
    w, m, y = loss.weights[idx], loss.trials[idx], loss.y[idx]
    r = w * (m * mu - y)
    W = w * m * mu * (1.0 - mu)
    Z = np.subtract(Xs, c, out=row_buffer("accuracy centred", Xs.shape))
    Z /= s  # (Xs - c) / s, in place
    gz = z[off:]
    T = column_scaled(c, s, rho, intercept)
    B = T @ Hinv
    scale = n / idx.size
    if precision is None:  # relative rounding u of the entries as given
        sig = np.abs(Xs, out=row_buffer("accuracy data", Xs.shape))
        sig *= UNIT / _ROOT3 / s
    else:
        sig = np.sqrt((prec.x_relative * Xs) ** 2 + prec.x_absolute ** 2) / (_ROOT3 * s)
    floor_sig = np.abs(Z, out=row_buffer("accuracy floor", Xs.shape))
    floor_sig *= UNIT / _ROOT3
    floor_var, data_var = sensitivity(Z, gz, r, W, B, intercept, [(floor_sig, None), (sig, None)], scale)
    theta = np.concatenate([[b0] if intercept else [], rho * beta])
    step = Hinv @ gradient_z
    to_caller = np.concatenate([[1.0] if intercept else [], 1.0 / rho])
    return accuracy_record(theta, z, T, step, floor_var, FLOOR_FACTOR, data_var, to_caller, terms, prec.what)
