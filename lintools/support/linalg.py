"""Dense linear-algebra helpers built on NumPy's LAPACK bindings.

NumPy exposes Householder QR, Cholesky and SVD but no triangular solver, so the
triangular solves live here, with the row-block product ``v' X`` that the passes over the
rows share.  Rank detection works on the R factor of a column-scaled
matrix (see :func:`aliased_columns`).
"""

from __future__ import annotations

from typing import Sequence

import numpy as np

__all__ = [
    "CONSTANT_TOLERANCE",
    "transposed_block",
    "column_scales",
    "unstandardise",
    "solve_upper",
    "solve_lower",
    "inverse_upper",
    "aliased_columns",
    "condition_number",
    "default_rank_tolerance",
]


#: A column is constant to rounding (aliased with the intercept) when its centred weighted
#: length is at most this times its raw weighted length: the spread that rounding of equal
#: values can make.  It does not grow with the number of rows, so a column far from zero
#: (``1e12 + N(0, 1)``: ratio ``1e-12``) is fitted however many rows it has.
CONSTANT_TOLERANCE = 16 * float(np.finfo(float).eps)


def transposed_block(v: np.ndarray, X: np.ndarray) -> np.ndarray:
    """``v @ X`` for a long, narrow C-ordered block, as NumPy's own sum of products
    (``einsum``): measured about twice as fast here as the BLAS matrix-vector product, with
    the same recursive summation down each column."""
    return np.einsum("i,ij->j", v, X)


def column_scales(spread: np.ndarray, centre: np.ndarray) -> np.ndarray:
    """The scales ``s`` of the standardised coordinates: each column's weighted spread,
    or 1 where the spread is zero, not finite, or at most ``1e-13`` of the column's centre
    (rounding noise around a constant column, which is then treated as constant)."""
    return np.where((spread > 1e-13 * np.abs(centre)) & (spread > 0) & np.isfinite(spread), spread, 1.0)


def unstandardise(centre: np.ndarray, scale: np.ndarray, intercept: bool, outputs: int = 1) -> np.ndarray:
    """The matrix ``T`` with ``theta = T z`` for standardised coordinates
    ``z = (b + centre' beta, scale * beta)`` (intercept first when there is one); with
    ``outputs = K`` the parameters are (p+1, K) arrays flattened row by row."""
    off = int(intercept)
    k = centre.shape[0] + off
    T = np.zeros((k, k))
    T[off:, off:] = np.diag(1.0 / scale)
    if intercept:
        T[0, 0] = 1.0
        T[0, 1:] = -centre / scale
    return np.kron(T, np.eye(outputs)) if outputs > 1 else T


#: Columns per block of a triangular solve with one right-hand side (see :func:`_forward`).
#: Measured against the column loop (one NumPy update of the rows below per column):
#: about 0.6 of its time at p = 20 and 50, 0.4 at p = 80.
TRIANGLE_BLOCK = 8


def _one_rhs(T: np.ndarray, b: np.ndarray) -> bool:
    """Whether a solve takes :func:`_forward`: one right-hand side and no zero on the
    diagonal (where NumPy's division gives an infinity and Python's would raise)."""
    return b.ndim == 1 and bool(np.all(np.diagonal(T) != 0))


def _forward(L: np.ndarray, x: np.ndarray) -> np.ndarray:
    """Forward substitution ``L x = b`` in place on the 1-D ``x`` (``b`` on entry), by blocks
    of ``TRIANGLE_BLOCK`` columns: each diagonal block on Python floats, then the rows below
    take the block's products ``L_ij x_j`` by one ``subtract.reduce`` along the row (a fold
    from the left).  Every ``x_i`` is ``(((b_i - L_i0 x_0) - L_i1 x_1) - ...) / L_ii`` with each
    product and difference rounded once, in column order, as in the column loop: the same bits."""
    p = L.shape[0]
    for j0 in range(0, p, TRIANGLE_BLOCK):
        j1 = min(p, j0 + TRIANGLE_BLOCK)
        rows, v = L[j0:j1, j0:j1].tolist(), x[j0:j1].tolist()
        for a in range(j1 - j0):
            xa = v[a] = v[a] / rows[a][a]
            for i in range(a + 1, j1 - j0):
                v[i] -= rows[i][a] * xa
        x[j0:j1] = v
        if j1 < p:
            M = np.empty((p - j1, j1 - j0 + 1))
            M[:, 0] = x[j1:]
            np.multiply(L[j1:, j0:j1], x[j0:j1], out=M[:, 1:])
            np.subtract.reduce(M, axis=1, out=x[j1:])
    return x


def solve_upper(R: np.ndarray, b: np.ndarray) -> np.ndarray:
    """Solve ``R x = b`` by back substitution for upper-triangular ``R`` (b 1-D or 2-D)."""
    R = np.asarray(R, dtype=float)
    x = np.array(b, dtype=float, copy=True)
    p = R.shape[0]
    if _one_rhs(R, x):  # back substitution is forward substitution in reversed order
        return _forward(R[::-1, ::-1], x[::-1])[::-1].copy()
    for j in range(p - 1, -1, -1):
        x[j] = x[j] / R[j, j]
        if j:
            x[:j] -= np.multiply.outer(R[:j, j], x[j]) if x.ndim > 1 else R[:j, j] * x[j]
    return x


def solve_lower(L: np.ndarray, b: np.ndarray) -> np.ndarray:
    """Solve ``L x = b`` by forward substitution for lower-triangular ``L``."""
    L = np.asarray(L, dtype=float)
    x = np.array(b, dtype=float, copy=True)
    p = L.shape[0]
    if _one_rhs(L, x):
        return _forward(L, x)
    for j in range(p):
        x[j] = x[j] / L[j, j]
        if j < p - 1:
            x[j + 1 :] -= np.multiply.outer(L[j + 1 :, j], x[j]) if x.ndim > 1 else L[j + 1 :, j] * x[j]
    return x


def inverse_upper(R: np.ndarray) -> np.ndarray:
    """Return ``R^{-1}`` for a non-singular upper-triangular ``R``."""
    return solve_upper(R, np.eye(R.shape[0]))


def default_rank_tolerance(n: int, p: int) -> float:
    """The documented rank tolerance: ``max(n, p) * eps`` (LAPACK's customary choice)."""
    return max(n, p) * np.finfo(float).eps


def aliased_columns(R: np.ndarray, column_norms: np.ndarray, tol: float) -> np.ndarray:
    """Indices of columns that are numerically in the span of the columns before them.

    For a QR factorisation without pivoting, ``|R[j, j]|`` is the length of the part of
    column ``j`` orthogonal to columns ``0..j-1``.  Column ``j`` is declared aliased
    when that length is at most ``tol`` times the column's own length, so the earliest
    columns of a dependent set are kept (the "first come" rule).
    """
    d = np.abs(np.diag(R))
    return np.flatnonzero(d <= tol * np.maximum(column_norms, np.finfo(float).tiny))


def condition_number(R: np.ndarray) -> float:
    """2-norm condition number of a square triangular factor, from its singular values."""
    if R.shape[0] == 0:
        return 1.0
    s = np.linalg.svd(R, compute_uv=False)
    return float(s[0] / s[-1]) if s[-1] > 0 else float("inf")


def dependency_sentence(R: np.ndarray, norms: np.ndarray, names: Sequence[str], intercept: bool,
                        tol: float) -> str | None:
    """A sentence naming the first linearly dependent column, or None (full rank).

    ``R`` is the triangular factor of the (centred when ``intercept``) design with unit
    columns, ``norms`` the column norms before scaling (0 for a zero column).  The
    dependency is read off ``R``: the coefficients of column ``j`` on the earlier
    independent columns.
    """
    p = R.shape[1]
    alias = np.union1d(np.flatnonzero(norms == 0), aliased_columns(R, np.ones(p), tol)).astype(int)
    if not alias.size:
        return None
    j = int(alias[0])
    before = [i for i in range(j) if i not in set(alias)]
    involved = []
    if before:
        coef = solve_upper(R[np.ix_(before, before)], R[before, j])
        big = np.abs(coef) > 1e-8 * max(float(np.abs(coef).max()), 1e-300)
        involved = [f"'{names[before[t]]}'" for t in np.flatnonzero(big)]
    return (
        f"X is rank deficient on the rows used: column {j} ('{names[j]}') is a linear combination "
        f"of {', '.join(involved) if involved else 'nothing (it is zero)'}"
        f"{' (plus a constant)' if intercept else ''}; drop one of the dependent columns, or set l2 > 0"
    )
