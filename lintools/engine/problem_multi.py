"""The K-output problem ``eta = offset + 1 b' + X B`` (softmax), ``z`` the (p+1, K) array
flattened row by row: the variant of :class:`lintools.engine.problem.LinearModelProblem`
for a loss with several outputs (see :mod:`lintools.engine.problem`).

Its linear predictors are (n, K) and are kept one at a time: a new one is formed only
after the last one, and what the loss keeps at it, are dropped; with a loss that passes
one block of rows at a time (``row_blocks``) the curvature and the line search's trial
points are never formed whole."""

from __future__ import annotations

import math
from typing import Any

import numpy as np

from ..support.threads import for_rows
from .kernels_multi import PairWeights, multi_output_information
from .problem_base import LinearModelProblem
from .problem_line import _Line

__all__ = ["MultiOutputProblem"]


class MultiOutputProblem(LinearModelProblem, variant="several"):
    """:class:`lintools.engine.problem.LinearModelProblem` for K outputs (see there)."""

    #: declared: no estimate of the gradient's rounding level (the driver's stalled
    #: message then names no attainable tol)
    rounding_known = False

    def _matrix(self, z: np.ndarray) -> Any:
        return z.reshape(self.p1, self.K)

    def _zero_intercept(self) -> Any:
        return np.zeros(self.K)

    def _scale(self) -> np.ndarray:
        return self.s[:, None]

    def _join(self, first: Any, slopes: np.ndarray) -> np.ndarray:
        return np.vstack([first, slopes]).ravel()

    def _product(self, B: np.ndarray, b: np.ndarray, offset: np.ndarray | None,
                 far: np.ndarray | None = None) -> np.ndarray:
        """``X B + 1 b' (+ offset)`` (``+ C far`` with the centred copy of the far-shifted columns), (n, K)
        stored column by column (the transpose of a (K, n) array: the loss reads it in row
        blocks); in chunks of rows on the row threads."""
        X, Et, shifted = self.X, np.empty((self.K, self.n)), self.shifted

        def part(lo: int, hi: int) -> None:
            out = Et[:, lo:hi]
            np.matmul(B.T, X[lo:hi].T, out=out)
            out += b[:, None]
            if far is not None:
                shifted.add_product(out, lo, hi, far)
            if offset is not None:
                out += offset[lo:hi].T

        for_rows(part, self.n, self.block_rows)
        return Et.T

    def _rows_product(self, r: Any, lo: int, hi: int) -> np.ndarray:
        """One BLAS product (``r`` is (n, K))."""
        return self.X[lo:hi].T @ r[lo:hi]

    def _value_and_residual(self, z: np.ndarray, eta: Any) -> tuple[Any, Any]:
        """One blocked pass gives the value with the gradient."""
        f, r = self.loss.value_and_gradient(eta)
        return f + self._ridge(z), r

    def _forget(self) -> None:
        """Drop the remembered linear predictor and the loss's results kept at it, so that
        the next ones are not formed while these still hold memory."""
        self._last = None
        if self.loss.row_blocks:
            self.loss.forget()

    def _change(self, line: _Line, t: float, need_slope: bool) -> tuple[float, float]:
        if self.loss.row_blocks and not need_slope:
            # one block of rows at a time: neither t X d nor the trial eta is formed whole
            line.trial = (t, None)
            c = self.loss.change_along(line.eta0, line.deta, t)
            if not math.isfinite(c) and c > 0:
                return math.inf, math.nan
            if self.l2:
                c += self._ridge_change(line, t)
            return float(c), math.nan
        return super()._change(line, t, need_slope)

    def line(self, z: np.ndarray, d: np.ndarray) -> _Line:
        """The objective along ``z + t d``; the last search's ``X d`` is dropped first."""
        if self._line is not None:
            self._line.release()
        self._line = _Line(self, z, d)
        return self._line

    def _curvature(self, eta: Any) -> Any:
        """With a loss that has ``pair_weights``, the distinct entries of the per-row
        blocks one block of rows at a time (:class:`PairWeights`), so the (n, K, K) array
        is never formed whole (other losses give it whole)."""
        if self.loss.row_blocks:
            return PairWeights(self.loss, eta)
        return self.loss.curvature(eta)

    def _information(self, W: Any, single: bool = False) -> np.ndarray:
        """``A' W A`` in z coordinates (:func:`lintools.engine.kernels_multi.multi_output_information`)."""
        return multi_output_information(self, W, single)

    def _sample_design(self, sub: LinearModelProblem, rows: np.ndarray) -> None:
        """With float32 steps, the sampled rows kept standardised and rounded to float32, as
        the float32 curvature pass would round them (centre 0, scale 1): half the memory."""
        if not self.single:
            super()._sample_design(sub, rows)
            return
        m = int(rows.size)
        sub.X = np.empty((m, self.p), dtype=np.float32)
        inv = 1.0 / self.s
        for a in range(0, m, 1024):
            Xb = self.X[rows[a : a + 1024]]
            Xb -= self.c
            np.multiply(Xb, inv, out=sub.X[a : a + Xb.shape[0]], casting="same_kind")
        del Xb
        sub.c, sub.s, sub.rows32 = np.zeros(self.p), np.ones(self.p), True

    def _sampled_curvature(self, eta: Any, rows: np.ndarray) -> Any:
        if self.loss.row_blocks:
            return PairWeights(self.loss, eta, rows)  # formed one block of the sampled rows at a time
        return super()._sampled_curvature(eta, rows)
