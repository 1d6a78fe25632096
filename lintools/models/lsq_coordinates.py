"""Centred, unit-length coordinates shared by the QR path and the block fit (TSQR).

Both accurate least-squares paths, :func:`lintools.models.lsq_qr.qr_path` (rows in memory)
and :func:`lintools.blocks.least_squares_blocks` (rows in blocks), solve in the same
coordinates and map back the same way; this module holds those steps once:

* the weighted mean of each column in two parts, ``m1`` (the rounded mean) and ``m2``
  (the mean of what ``m1`` left), so a column far from zero loses nothing to its shift
  (:func:`centre_in_two_parts`, :func:`two_sum`);
* the column-scale floor: a column that is constant on the rows used, or whose centred
  length ``s_j`` is at most ``CONSTANT_TOLERANCE`` times its raw length
  ``sqrt(s_j^2 + W m_j^2)`` (it varies only by rounding), is aliased with the intercept
  and gets unit scale (:func:`column_floor`);
* the aliased columns from the R factor of the scaled design with its ridge rows
  (:func:`aliased_columns_of`);
* the maps back from the centred coordinates ``(a, beta)``, in which the fitted value is
  ``ybar + a + (x - m)' beta``: the intercept ``b = ybar + a - m' beta`` in extended
  precision (:func:`centred_intercept`) and the gradient in ``(b, beta)``
  (:func:`caller_gradient`).

References
----------
Knuth, D. E. (1997). The Art of Computer Programming 2, 3rd ed., sec. 4.2.2 (TwoSum).
Bjorck, A. (1996). Numerical Methods for Least Squares Problems. SIAM (sec. 2.7, scaling
and rank).
"""

from __future__ import annotations

import math

import numpy as np

from ..support.linalg import CONSTANT_TOLERANCE, aliased_columns

__all__ = ["two_sum", "centre_in_two_parts", "column_floor", "ridge_column_norms", "aliased_columns_of",
           "centred_intercept", "caller_gradient"]

_LD = np.longdouble


def two_sum(a, b):
    """``(s, e)`` with ``s = fl(a + b)`` and ``a + b = s + e`` exactly (Knuth's TwoSum)."""
    s = a + b
    bb = s - a
    return s, (a - (s - bb)) + (b - bb)


def centre_in_two_parts(Z: np.ndarray, w: np.ndarray | None, W: float) -> tuple:
    """Centre the columns of ``Z`` (modified in place) at their weighted mean, in two parts.

    ``m1 = w'Z / W`` (``w`` None: unit weights, ``W`` the total weight); then ``m2``, the
    weighted mean of ``Z - m1``: the part of the mean that the rounded ``m1`` could not
    hold.  Returns ``(m1, m2)``; ``Z`` ends as ``(Z - m1) - m2``."""
    m1 = (Z.sum(axis=0) if w is None else w @ Z) / W
    Z -= m1
    m2 = (Z.sum(axis=0) if w is None else w @ Z) / W
    Z -= m2
    return m1, m2


def column_floor(s: np.ndarray, centre: np.ndarray, W: float, constant: np.ndarray,
                 intercept: bool) -> tuple[np.ndarray, np.ndarray]:
    """The columns at the scale floor and the column scales to divide by.

    ``s``: the centred weighted lengths of the columns (the raw lengths without an
    intercept); ``centre``: their weighted means; ``W``: the total weight; ``constant``:
    the columns constant on the rows used.  A column is at the floor (``zero``) when it
    is constant, has length 0, or ``s_j <= CONSTANT_TOLERANCE * sqrt(s_j^2 + W m_j^2)``;
    its scale is then 1.  Returns ``(zero, scale)``."""
    raw = np.hypot(s, math.sqrt(W) * centre) if intercept else s
    zero = constant | (s <= CONSTANT_TOLERANCE * raw) | (s == 0)
    return zero, np.where(zero, 1.0, s)


def ridge_column_norms(zero: np.ndarray, aug: np.ndarray | None) -> np.ndarray:
    """Lengths of the unit columns with their ridge rows ``aug`` (None: no ridge); 0 at the floor."""
    base = np.where(zero, 0.0, 1.0)
    return base if aug is None else np.hypot(base, aug)


def aliased_columns_of(R: np.ndarray, zero: np.ndarray, penalised, col_norm: np.ndarray, tol: float) -> np.ndarray:
    """Indices of the aliased columns: those at the floor that no ridge holds (``penalised``,
    per column or for all), and those the R factor of the scaled design finds dependent on
    the columns before them (:func:`lintools.support.linalg.aliased_columns`)."""
    at_floor = np.flatnonzero(zero & np.logical_not(penalised))
    return np.union1d(at_floor, aliased_columns(R, np.maximum(col_norm, 1e-300), tol)).astype(int)


def centred_intercept(z0, m_hi: np.ndarray, m_lo: np.ndarray, beta: np.ndarray) -> float:
    """``b = z0 - (m_hi + m_lo)' beta`` in extended precision, ``z0 = ybar + a`` the fitted
    value at the centre (``numpy.longdouble``) and ``m_hi + m_lo`` the two-part centre."""
    return float(z0 - (m_hi.astype(_LD) + m_lo.astype(_LD)) @ beta.astype(_LD))


def caller_gradient(g_a: float, g_beta: np.ndarray, centre: np.ndarray, intercept: bool) -> np.ndarray:
    """The gradient in ``(b, beta)`` from that in the centred coordinates ``(a, beta)``
    (``b = a - m' beta`` up to ``ybar``): ``d/db = d/da``, ``d/dbeta = g_beta + m d/da``."""
    return np.concatenate([[g_a], g_beta + centre * g_a]) if intercept else g_beta
