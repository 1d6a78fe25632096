r"""Passes over the design for the one-output problems: column moments and weighted Gram matrices.

Both read ``X`` once, in cache-sized row blocks, and never copy it whole.

* :func:`column_moments` gives the weighted means and spreads of the columns from the
  sums :math:`\sum_i v_i x_{ij}` and :math:`\sum_i v_i x_{ij}^2`; a column whose spread is
  small against its mean (where that difference would cancel) is redone exactly, around
  its mean.  A non-finite sum (a NaN or infinity in ``X``, or an overflow) is reported, so
  the caller can name the entry.  Columns whose sums overflow, or whose squares
  underflow (entries below about 1e-90), are redone on a power-of-two scale of their own,
  so a column multiplied by 1e-200 or 1e200 gets the moments of the unscaled one times
  that factor.
* :func:`weighted_gram` gives :math:`A' W A` for the standardised rows
  :math:`a_i = (1, (x_i - c)/s)` without forming ``x_i - c``: it accumulates the
  uncentred products of :math:`\sqrt{w_i}\,x_i` (one scaling and one symmetric BLAS
  product per block) and centres the small result.  The rounding error of the centring is
  :math:`O(\epsilon\,(1 + |c_j|/s_j)(1 + |c_k|/s_k))` relative to the scaled entries, so it
  is used only while ``max |c_j| / s_j <= UNCENTRED_LIMIT`` (callers check with
  :func:`uncentred_ok`); otherwise they centre each block.

References
----------
Chan, T. F., Golub, G. H. & LeVeque, R. J. (1983). Algorithms for computing the sample
variance: analysis and recommendations. The American Statistician 37, 242-247.
Golub, G. H. & Van Loan, C. F. (2013). Matrix Computations, 4th ed., sec. 1.2 (symmetric
rank-k update). Johns Hopkins.
"""

from __future__ import annotations

import math

import numpy as np

from ..support.threads import add_up, for_rows, scratch
from ..support.linalg import transposed_block

__all__ = ["column_moments", "weighted_gram", "uncentred_ok", "UNCENTRED_LIMIT"]

#: Centre the accumulated products afterwards only while every |mean| / spread is at most this.
UNCENTRED_LIMIT = 1.0
#: A column whose uncentred spread is below this times its |mean| is recomputed around its mean.
_MOMENT_CANCELLATION = 1e-3
#: A column whose weighted mean square is below this gets its moments on its own power-of-two
#: scale (its squares would underflow, or lose digits as subnormal numbers).
_TINY_SQUARES = 2.0**-600
#: float32 rows are scaled before the conversion unless the raw values stay in this range.
_SINGLE_RANGE = 1e15


def column_moments(X: np.ndarray, v: np.ndarray, rows: int, centre: bool) -> tuple[np.ndarray, np.ndarray, bool]:
    r"""Weighted column means ``c`` (zero when not ``centre``) and spreads ``s`` of ``X``.

    .. math::

        c_j = \frac{\sum_i v_i x_{ij}}{\sum_i v_i},\qquad
        s_j^2 = \frac{\sum_i v_i (x_{ij} - c_j)^2}{\sum_i v_i}.

    Returns ``(c, s, finite)``; ``finite`` is False when a sum is not finite (the caller
    then checks ``X`` entry by entry).  The spread comes from the two sums of one pass as
    :math:`\sum v x^2 / V - c^2`; where that loses more than three digits
    (:math:`s_j < 10^{-3} |c_j|`) the column is recomputed around its mean (Chan, Golub &
    LeVeque 1983), so constant columns get a spread of exactly 0.
    """
    n, p = X.shape
    total = float(v.sum())

    def part(lo: int, hi: int) -> tuple[np.ndarray, np.ndarray]:
        # the thread's Gram buffer (same shape as weighted_gram's): kept, so no fresh pages per fit
        D = scratch("gram", (hi - lo, p))
        with np.errstate(over="ignore", invalid="ignore"):
            np.multiply(X[lo:hi], X[lo:hi], out=D)
            return transposed_block(v[lo:hi], X[lo:hi]), transposed_block(v[lo:hi], D)

    parts = for_rows(part, n, rows)
    with np.errstate(over="ignore", invalid="ignore"):
        sums = add_up([q[0] for q in parts], np.zeros(p))
        squares = add_up([q[1] for q in parts], np.zeros(p))
        finite = bool(np.all(np.isfinite(sums)) and np.all(np.isfinite(squares)))
    if not finite:
        if not np.all(np.isfinite(X)):
            return np.zeros(p), np.ones(p), False
        return _scaled_moments(X, v, rows, centre)
    with np.errstate(over="ignore", invalid="ignore", under="ignore"):
        mean = sums / total
        c = mean if centre else np.zeros(p)
        ss = squares / total - c * c
    # columns of tiny entries (whose squares underflow or lose digits as subnormals): redone
    # on a power-of-two scale of their own
    tiny = np.flatnonzero(~(squares > _TINY_SQUARES * total))
    if tiny.size:
        ct, st, _ = _scaled_moments(X[:, tiny], v, rows, centre)
        c[tiny], ss[tiny] = ct, st * st
    redo = np.flatnonzero(~(ss > (_MOMENT_CANCELLATION * mean) ** 2))
    if tiny.size:  # (setdiff1d costs about 25 us even on empty arrays)
        redo = np.setdiff1d(redo, tiny)
    if redo.size:
        around = mean[redo] if centre else np.zeros(redo.size)
        squares_r, shift = _centred_squares(X[:, redo], v, around, rows)
        if centre:  # the corrected two-pass form (Chan, Golub & LeVeque 1983, eq. 1.7)
            c[redo] = around + shift / total
            squares_r = squares_r - shift * shift / total
        ss[redo] = squares_r / total
    s = np.sqrt(np.maximum(ss, 0.0))
    if tiny.size:
        s[tiny] = st  # its square may underflow
    return c, s, True


def _scaled_moments(X: np.ndarray, v: np.ndarray, rows: int, centre: bool) -> tuple[np.ndarray, np.ndarray, bool]:
    """:func:`column_moments` for finite entries whose sums overflow (|x| near 1e300): each
    column is divided by the power of two at or below its largest |entry| (so the scaled
    entries lie in [-2, 2), and the power itself is a double even for entries near 1.8e308)
    and the spread is computed around the mean (exact pass)."""
    n, p = X.shape
    top = np.max(np.abs(X), axis=0) if n else np.ones(p)
    scale = np.ldexp(1.0, np.frexp(np.where(top > 0, top, 1.0))[1] - 1)  # exact powers of two
    total = float(v.sum())
    mean = np.zeros(p)
    for lo in range(0, n, rows):
        Xb = X[lo : lo + rows]
        mean += v[lo : lo + Xb.shape[0]] @ (Xb / scale)
    mean /= total
    c = mean if centre else np.zeros(p)
    ss = np.zeros(p)
    for lo in range(0, n, rows):
        D = X[lo : lo + rows] / scale - c
        ss += v[lo : lo + D.shape[0]] @ (D * D)
    return c * scale, np.sqrt(ss / total) * scale, True


def _centred_squares(X: np.ndarray, v: np.ndarray, c: np.ndarray, rows: int) -> tuple[np.ndarray, np.ndarray]:
    """``sum_i v_i (x_ij - c_j)^2`` and ``sum_i v_i (x_ij - c_j)`` per column (the slower pass)."""
    n, p = X.shape
    ss, shift = np.zeros(p), np.zeros(p)
    buf = np.empty((min(rows, n), p))
    for lo in range(0, n, rows):
        Xb = X[lo : lo + rows]
        vb = v[lo : lo + Xb.shape[0]]
        D = buf[: Xb.shape[0]]
        np.subtract(Xb, c, out=D)
        shift += vb @ D
        np.multiply(D, D, out=D)
        ss += vb @ D
    return ss, shift


def uncentred_ok(c: np.ndarray, s: np.ndarray) -> bool:
    """Whether :func:`weighted_gram` may centre afterwards (every ``|c_j| / s_j <= UNCENTRED_LIMIT``)."""
    return bool(np.all(np.abs(c) <= UNCENTRED_LIMIT * s))


def weighted_gram(X: np.ndarray, W: np.ndarray, c: np.ndarray, s: np.ndarray, intercept: bool,
                  rows: int, single: bool = False, row_bound: float = math.inf) -> np.ndarray:
    r"""``A' diag(W) A`` for the rows ``a_i = (1, (x_i - c) / s)`` (the 1 only with ``intercept``).

    The blocks hold :math:`b_i = \sqrt{W_i}\,x_i` (with ``single``: the standardised
    :math:`\sqrt{W_i / \max W}\,x_i / s` rounded to float32, about 1e-6 relative, for Newton
    steps only); per block ``B'B`` (a symmetric BLAS product) and :math:`\sqrt{W}'B` are
    added up in float64, and the centring :math:`(x - c)/s` is applied to the
    :math:`(p+1) \times (p+1)` result.  Requires :func:`uncentred_ok`; ``W >= 0``.
    ``row_bound`` bounds ``|x_ij - c_j| / s_j``: when the raw entries are then known to lie
    within float32's comfortable range they are converted as they are and the scales
    ``1/s`` applied to the result, else they are scaled first.
    """
    n, p = X.shape
    first_slope = int(intercept)
    top = 1.0
    if single:
        top = math.sqrt(float(W.max())) if n else 0.0  # = max sqrt(W): sqrt is monotone
        if not (top > 0 and math.isfinite(top)):
            single, top = False, 1.0
    inv = 1.0 / s
    if single:
        # |x_ij| <= |c_j| + s_j row_bound <= s_j (1 + row_bound) under uncentred_ok
        raw = bool(np.all(s * (1.0 + row_bound) <= _SINGLE_RANGE) and np.all(s >= 1.0 / _SINGLE_RANGE))

        def part(lo: int, hi: int) -> tuple[np.ndarray, np.ndarray | None]:
            B = scratch("gram32", (hi - lo, p), np.float32)
            rb = (np.sqrt(W[lo:hi]) / top).astype(np.float32)
            if raw:
                np.copyto(B, X[lo:hi], casting="same_kind")
            else:
                T = scratch("gram", (hi - lo, p))
                np.multiply(X[lo:hi], inv, out=T)
                np.copyto(B, T, casting="same_kind")
            np.multiply(B, rb[:, None], out=B)
            return (B.T @ B).astype(float), transposed_block(rb, B).astype(float) if first_slope else None
    else:
        def part(lo: int, hi: int) -> tuple[np.ndarray, np.ndarray | None]:
            B, rb = scratch("gram", (hi - lo, p)), np.sqrt(W[lo:hi])
            np.multiply(X[lo:hi], rb[:, None], out=B)
            return B.T @ B, transposed_block(rb, B) if first_slope else None

    parts = for_rows(part, n, rows)
    HH = add_up([q[0] for q in parts], np.zeros((p, p)))
    h = add_up([q[1] for q in parts], np.zeros(p)) if first_slope else np.zeros(p)
    if single:
        u = np.ones(p) if not raw else inv
        HH = HH * np.multiply.outer(u, u)
        h = h * u
        total = float(W.sum()) / (top * top)
    else:
        HH = HH * np.multiply.outer(inv, inv)
        h = h * inv
        total = float(W.sum())
    mean_scaled = c * inv
    H = np.empty((p + first_slope, p + first_slope))
    if first_slope:
        # sum w (u - m)(u - m)' = HH - m h' - h m' + total m m', with u = x / s and m = c / s
        g = h - total * mean_scaled
        H[0, 0] = total
        H[0, 1:] = g
        H[1:, 0] = g
        H[1:, 1:] = HH - np.multiply.outer(mean_scaled, h) - np.multiply.outer(h, mean_scaled) \
            + total * np.multiply.outer(mean_scaled, mean_scaled)
    else:
        H[:] = HH
    if single:
        H *= top * top
    return 0.5 * (H + H.T)
