r"""The :class:`lintools.models.accuracy.Accuracy` of a least-squares answer.

Everything is in the units of :mod:`lintools.models.lsq_scale` and in the centred, scaled
coordinates of the paths: ``z_0 = b + xbar'beta`` (the centred intercept) and
``z_j = s_j beta_j`` with ``s_j`` the weighted length of the centred column, where the
inverse information is ``blockdiag(1 / W, G)`` (``G`` the path's inverse of the scaled
Gram matrix, ridge included).

* Solver: the path's remaining correction at the answer (the Gram path: the last
  correction of its certificate pass, not applied; the QR path: the last refinement
  correction times the contraction ``8 u kappa``), the rounding floor of a residual
  formed in float64 (Gram path) or in extended precision (QR path, and TSQR over blocks:
  ``u_ext / u`` of it; TSQR's correction is the last one its residual pass computed, not applied),
  and the rounding of the stored coefficients (Higham 2002, secs. 20.1, 20.5: a backward
  stable solution is as accurate as the data perturbed by ``u``).
* Data: :func:`lintools.models.accuracy.sensitivity` with ``W_i = w_i``, ``r_i = -w_i e_i``
  and ``psi_y = -w_i`` on an evenly spaced subsample of the rows.

References
----------
Higham, N. J. (2002). Accuracy and Stability of Numerical Algorithms, 2nd ed. SIAM, ch. 20.
Bjorck, A. (1996). Numerical Methods for Least Squares Problems. SIAM, secs. 1.4, 2.9.
"""

from __future__ import annotations

import math

from typing import Any

import numpy as np

from .accuracy import (FLOOR_FACTOR, UNIT, Accuracy, Precision, accuracy_record, column_scaled, rows_of,
                       sample_note, sensitivity, subsample)
from ..support.threads import row_buffer
from .lsq_record import PathAnswer
from .lsq_scale import Units
from ..support.validate import INTERCEPT_NAME

__all__ = ["least_squares_accuracy", "EXTENDED_UNIT"]

#: Unit roundoff of the extended precision the QR path refines in (float64's where none).
EXTENDED_UNIT = float(np.finfo(np.longdouble).eps) / 2
_ROOT3 = math.sqrt(3.0)


def least_squares_accuracy(*args: Any, **kwargs: Any) -> Accuracy:
    """See :func:`_least_squares_accuracy`; arithmetic warnings of extreme data (an overflow of a squared error)
    are silent: such a figure shows as 0 digits or the float64 limit."""
    with np.errstate(all="ignore"):
        return _least_squares_accuracy(*args, **kwargs)


def _least_squares_accuracy(Xa: np.ndarray, y1: np.ndarray, w1: np.ndarray | None, fit: PathAnswer, units: Units,
                           intercept: bool, W1: float, precision: Precision | None = None,
                           sample: tuple[int, str] | None = None) -> Accuracy:
    """The accuracy of a path's answer ``fit`` on the caller's ``Xa`` and the unit ``y1``, ``w1``.

    ``precision``: the rounding of the data (default: float64 input); ``sample``: when the
    rows given are already a sample, the number of all rows and how the sample was drawn
    (default: all rows are given, and evenly spaced ones are used)."""
    n, p = Xa.shape
    prec = Precision.float64(p) if precision is None else precision
    idx = subsample(n)
    rows, how = (n, "evenly spaced") if sample is None else sample
    ex = fit.col_exp
    Xs = rows_of(Xa, idx)
    if np.any(ex):
        np.ldexp(Xs, -ex, out=Xs)
    ys = y1[idx]
    ws = np.ones(idx.size) if w1 is None else w1[idx]
    s, xbar, beta = fit.s, fit.xbar, fit.beta
    e = ys - fit.b0 - Xs @ beta
    sig, tau = _data_rounding(Xs, ys, ws, s, prec, ex, units.ey, precision is None)
    Z = np.subtract(Xs, xbar, out=Xs)  # the rows are not needed as given from here on: centred in place
    Z /= s  # (Xs - xbar) / s
    Hinv = np.zeros((p + int(intercept),) * 2)
    off = int(intercept)
    if intercept:
        Hinv[0, 0] = 1.0 / W1
    Hinv[off:, off:] = fit.G
    gz = s * beta
    scale = rows / idx.size
    rho = np.sqrt(s * s / W1 + xbar * xbar)
    T = column_scaled(xbar, s, rho, intercept)
    B = T @ Hinv
    r, ybar = -ws * e, (float(ws @ ys) / float(ws.sum()) if intercept else 0.0)
    # the solver's floor: rounding u of the centred entries, which is what the residual sees
    floor_var, data_var = sensitivity(Z, gz, r, ws, B, intercept, [
        (_floor_sig(Z), ws * np.abs(ys - ybar) * (UNIT / _ROOT3)), (sig, tau)], scale)
    theta = np.concatenate([[fit.b0] if intercept else [], rho * beta])
    step = np.zeros(p + off) if fit.correction is None else fit.correction
    floor = FLOOR_FACTOR * (EXTENDED_UNIT / UNIT if fit.solver in ("qr", "tsqr") else 1.0)
    exps = units.theta(intercept)
    to_caller = np.ldexp(np.concatenate([[1.0] if intercept else [], 1.0 / rho]), exps)
    terms = ((INTERCEPT_NAME,) if intercept else ()) + tuple(units.names)
    z = np.concatenate([[fit.b0 + float(xbar @ beta)] if intercept else [], gz])
    return accuracy_record(theta, z, T, step, floor_var, floor, data_var, to_caller, terms, prec.what,
                           sample_note(idx.size, rows, how))


def _data_rounding(Xs: np.ndarray, ys: np.ndarray, ws: np.ndarray, s: np.ndarray, prec: Precision, ex: np.ndarray,
                   ey: int, as_given: bool) -> tuple[np.ndarray, np.ndarray]:
    """The standard deviations of the data's rounding: ``sig`` of the entries of ``Xs`` (in the
    units of the scaled columns) and ``tau`` of the weighted response, at ``prec`` (``as_given``:
    float64 input, relative rounding ``u`` of the entries as given)."""
    if as_given:
        sig = np.abs(Xs, out=row_buffer("accuracy data", Xs.shape))
        sig *= UNIT / _ROOT3 / s
        return sig, ws * np.abs(ys) * (UNIT / _ROOT3)
    ax = np.ldexp(prec.x_absolute, -ex)
    sig = np.sqrt((prec.x_relative * Xs) ** 2 + ax * ax) / (_ROOT3 * s)
    ay = math.ldexp(prec.y_absolute, -ey)
    return sig, ws * np.sqrt((prec.y_relative * ys) ** 2 + ay * ay) / _ROOT3


def _floor_sig(Z: np.ndarray) -> np.ndarray:
    """``|Z| u / sqrt(3)`` (rounding ``u`` of the centred entries) in a buffer the thread keeps."""
    sig = np.abs(Z, out=row_buffer("accuracy floor", Z.shape))
    sig *= UNIT / _ROOT3
    return sig
