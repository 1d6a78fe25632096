r"""Columns far from zero against their spread, kept centred exactly for the linear predictor.

A column such as a time stamp (``1.7e9 + N(0, 1)``) has a weighted mean ``c_j`` many
spreads ``s_j`` from zero.  In the standardised coordinates of
:class:`lintools.engine.LinearModelProblem` the linear predictor is
``a + sum_j (x_j - c_j) beta_j``; formed as ``X beta + (a - c' beta)`` its two parts are
each about ``|c_j beta_j|`` and cancel, losing ``log10(|c_j| / s_j)`` digits of ``eta``,
and the gradient ``sum_i r_i (x_ij - c_j)`` formed as ``X' r - c_j sum_i r_i`` loses as
many (the fit then cannot reach its tolerance).  For the columns with
``|c_j| > FAR_SHIFT * s_j`` a centred copy ``x_j - c_j`` is kept (one subtraction per
entry, exact by Sterbenz's lemma for the entries within a factor two of ``c_j``, and one
rounding of the difference otherwise), and the products with those columns use it:

* ``eta = X beta' + (a - c_near' beta_near) + C beta_far`` with ``beta'`` the slopes with
  the far entries set to zero (so the far columns of X contribute exactly 0);
* the gradient of a far slope is ``C' r``.

Only such columns are copied; designs without them take the plain path at no cost.
The curvature passes centre every block already (``x - c`` before any product).

References
----------
Sterbenz, P. H. (1974). Floating-Point Computation. Prentice-Hall (the exact difference
of two floats within a factor two of each other).
Chan, T. F., Golub, G. H. & LeVeque, R. J. (1983). Algorithms for computing the sample
variance: analysis and recommendations. The American Statistician 37, 242-247.
"""

from __future__ import annotations

from typing import Any

import numpy as np

from ..support.threads import add_up, for_rows
from ..support.linalg import transposed_block
from .samples import take_rows

__all__ = ["ShiftedColumns", "FAR_SHIFT"]

#: A column whose |weighted mean| exceeds this many weighted spreads is kept centred
#: (the plain path loses at most log10(FAR_SHIFT) = 1.2 digits of eta and the gradient).
FAR_SHIFT = 16.0
#: Rows per block of the products with the centred copy.
_ROWS = 1 << 14


class ShiftedColumns:
    """The far-shifted columns of a design, centred: ``C = X[:, far] - c[far]``.

    ``bool(self)`` is False when there are none (then nothing is copied).
    """

    def __init__(self, X: np.ndarray, c: np.ndarray, s: np.ndarray, centred: bool) -> None:
        p = X.shape[1]
        far = np.flatnonzero(np.abs(c) / FAR_SHIFT > s) if (centred and p) else np.zeros(0, dtype=np.intp)
        self.far = far
        self.centre = c[far]
        self.C: np.ndarray | None = None
        if far.size:
            C = np.ascontiguousarray(X[:, far])
            C -= self.centre
            self.C = C

    def __bool__(self) -> bool:
        return self.C is not None

    def subset(self, rows: np.ndarray) -> "ShiftedColumns":
        """The same columns on the given rows."""
        out = ShiftedColumns.__new__(ShiftedColumns)
        out.far, out.centre = self.far, self.centre
        out.C = None if self.C is None else take_rows(self.C, rows)
        return out

    def split(self, a: Any, beta: np.ndarray, c: np.ndarray) -> tuple[Any, np.ndarray, np.ndarray]:
        """``(b', beta', beta_far)`` with ``eta = X beta' + b' + C beta_far``: the far rows of
        ``beta`` (slopes, (p,) or (p, K)) moved to ``beta_far`` and zeroed in ``beta'``, and the
        intercept ``b' = a - c_near' beta_near`` (``a`` the intercept of the centred columns)."""
        main = np.array(beta, dtype=float, copy=True)
        far_part = main[self.far].copy()
        main[self.far] = 0.0
        return a - c @ main, main, far_part

    def transposed(self, r: Any) -> np.ndarray:
        """``C' r`` for ``r`` (n,) or (n, K), summed over row blocks in their order."""
        C = self.C
        assert C is not None
        n = C.shape[0]
        if r.ndim == 1:
            parts = for_rows(lambda lo, hi: transposed_block(r[lo:hi], C[lo:hi]), n, _ROWS)
        else:
            parts = for_rows(lambda lo, hi: C[lo:hi].T @ r[lo:hi], n, _ROWS)
        return add_up(parts, np.zeros((C.shape[1],) + r.shape[1:]))

    def add_product(self, out: np.ndarray, lo: int, hi: int, beta_far: np.ndarray) -> None:
        """``out += C[lo:hi] beta_far`` (one output: ``out`` (rows,); K outputs: ``out`` is
        the (K, rows) transposed block)."""
        C = self.C
        assert C is not None
        if out.ndim == 1:
            out += C[lo:hi] @ beta_far
        else:
            out += beta_far.T @ C[lo:hi].T
