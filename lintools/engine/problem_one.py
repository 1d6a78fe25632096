"""The one-output problem ``eta = offset + b + X beta`` (binary logistic, Poisson, ...),
``z = (a, g)`` a (p+1,) vector: the variant of :class:`lintools.engine.problem.LinearModelProblem`
for a loss with one output and no Firth penalty (see :mod:`lintools.engine.problem`)."""

from __future__ import annotations

from typing import Any, Callable

import numpy as np

from ..support.linalg import transposed_block
from ..support.threads import for_rows
from .base import EPS
from .problem_base import LinearModelProblem

__all__ = ["OneOutputProblem"]


class OneOutputProblem(LinearModelProblem, variant="one"):
    """:class:`lintools.engine.problem.LinearModelProblem` for one output (see there)."""

    def _matrix(self, z: np.ndarray) -> Any:
        return z

    def _zero_intercept(self) -> Any:
        return 0.0

    def _scale(self) -> np.ndarray:
        return self.s

    def _join(self, first: Any, slopes: np.ndarray) -> np.ndarray:
        return np.concatenate([np.atleast_1d(first), np.ravel(slopes)])

    def _product(self, beta: np.ndarray, b: float, offset: np.ndarray | None,
                 far: np.ndarray | None = None) -> np.ndarray:
        """``X beta + b (+ offset)`` for one output (``+ C far`` with the centred copy of the
        far-shifted columns), in chunks of rows on the row threads."""
        X, e, shifted = self.X, np.empty(self.n), self.shifted

        def part(lo: int, hi: int) -> None:
            out = e[lo:hi]
            np.matmul(X[lo:hi], beta, out=out)
            out += b
            if far is not None:
                shifted.add_product(out, lo, hi, far)
            if offset is not None:
                out += offset[lo:hi]

        for_rows(part, self.n, self.block_rows)
        return e

    def _rows_product(self, r: Any, lo: int, hi: int) -> np.ndarray:
        """NumPy's own sum of products (``einsum``), measured twice as fast as the BLAS
        matrix-vector product on these long, narrow blocks."""
        return transposed_block(r[lo:hi], self.X[lo:hi])

    def _value_and_residual(self, z: np.ndarray, eta: Any) -> tuple[Any, Any]:
        """The objective deferred (formed only if asked for) and the loss's gradient."""
        r = self._residual(eta)
        return self._deferred_value(z, eta), r

    def _deferred_value(self, z: np.ndarray, eta: Any) -> Callable[[], float]:
        z = z.copy()
        return lambda: self.loss.value(eta) + self._ridge(z)

    def _information(self, W: np.ndarray, single: bool = False) -> np.ndarray:
        """``A' diag(W) A`` in z coordinates (:meth:`_information_one`)."""
        return self._information_one(W, single)

    def gradient_rounding(self, z: np.ndarray) -> float:
        """Estimated float64 rounding level of ``Evaluation.gradient_norm`` at ``z``.

        ``eps * max_j sum_i |a_ij| (|r_i| + W_i e_i) / (s_j W)`` with ``a_ij = |x_ij| + |c_j|``
        (``|x_ij - c_j|`` for a far-shifted column, which is kept centred), ``r`` the
        derivative in eta, ``W_i`` the curvature, ``e_i`` the size of the terms summed into
        eta, ``s_j`` the column's spread and ``W`` the total weight: the units of the
        stopping rule.  Blocked: no copy of X.
        """
        eta = self.eta(z)
        r, W = np.abs(self.loss.gradient(eta)), self.loss.curvature(eta)
        a, g = self._parts(z)
        beta = g / self.s
        if self.shifted:
            b, beta, far = self.shifted.split(a, beta, self.c)
        else:
            b, far = a - self.c @ beta, None
        e = np.full(self.n, abs(float(b)))
        if self.offset is not None:
            e += np.abs(self.offset)
        if far is not None:
            e += np.abs(self.shifted.C) @ np.abs(far)
        out = np.zeros(self.p)
        for lo in range(0, self.n, self.block):
            Ab = np.abs(self.X[lo : lo + self.block])
            sl = slice(lo, lo + Ab.shape[0])
            e[sl] += Ab @ np.abs(beta)
            out += Ab.T @ (r[sl] + W[sl] * e[sl])
        first = float(np.sum(r + W * e))
        out += np.abs(self.c) * first
        if far is not None:
            out[self.shifted.far] = np.abs(self.shifted.C).T @ (r + W * e)
        out /= self.s
        level = max(first if self.intercept else 0.0, float(out.max()) if out.size else 0.0)
        return EPS * level / self.weight_total

