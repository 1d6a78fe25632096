r"""The curvature pass of the K-output (softmax) problems: :math:`\sum_i a_i a_i' \otimes W_i`.

For standardised rows :math:`a_i = (1, (x_i - c)/s)` and per-row curvature blocks
:math:`W_i` (K x K), the Hessian's K(K+1)/2 distinct blocks
:math:`A'\,\mathrm{diag}(W_{\cdot km})\,A` come from one product per block of rows,
:math:`A' [W_{00} A, W_{01} A, \dots]`, which keeps BLAS busy on a wide right-hand side;
the products are summed over the blocks and spread into the Hessian once at the end.
The curvature is handed over as its distinct entries one block of rows at a time (an
object with ``pair_weights(rows, out)``, see :class:`lintools.engine.multinomial.MultinomialLoss`)
or as the (n, K, K) array, formed whole.

References
----------
Böhning, D. (1992). Multinomial logistic regression algorithm. Annals of the Institute of
Statistical Mathematics 44, 197-200.
"""

from __future__ import annotations

import math
from typing import Any

import numpy as np

from ..support.threads import PassBuffers, add_up, for_rows

__all__ = ["multi_output_information", "PairWeights"]

#: Rows per block: the block's wide right-hand side ``[W_00 A, W_01 A, ...]`` stays in cache
#: (one such buffer per row thread).
_CACHE_BYTES = 1 << 20


class PairWeights:
    """The distinct curvature entries of a loss at ``eta``, one block of rows at a time.

    ``rows`` (optional) maps block positions to rows of the loss (a row subsample: the
    Newton sketch)."""

    def __init__(self, loss: Any, eta: Any, rows: np.ndarray | None = None) -> None:
        self.loss, self.eta, self.rows = loss, eta, rows

    def pair_weights(self, block: slice, out: np.ndarray) -> np.ndarray:
        rows = block if self.rows is None else self.rows[block]
        return self.loss.pair_weights(self.eta, rows, out=out)

    def prepare(self) -> None:
        """Form the loss's pass at ``eta`` now (the blocks are then read on several threads,
        so a loss with ``pair_weights`` must also offer ``prepare``)."""
        self.loss.prepare(self.eta)

    def max_weight(self) -> float:
        v = self.loss.row_weights()
        if self.rows is not None:
            v = v[self.rows]
        return float(np.max(v)) if v.size else 0.0


def multi_output_information(problem: Any, W: Any, single: bool = False) -> np.ndarray:
    """``A' W A`` in z coordinates for a K-output ``LinearModelProblem`` (no penalty).

    ``W`` is a :class:`PairWeights` or the (n, K, K) curvature.  With ``single`` the standardised rows and the weights (each
    ``|W_km| <= max w``) are rounded to float32 and the product is a float32 one (Newton
    steps only); the sums over blocks are float64 either way.

    Each block of rows is standardised into the transposed buffer ``A'`` (p+1, rows), the
    weighted copies ``W_j A'`` of all pairs ``j`` are written in one broadcast product
    along the rows, and ``[W_0 A', W_1 A', ...] A`` is one BLAS product.
    """
    K, p1, n, first_slope = problem.K, problem.p1, problem.n, problem.first_slope
    pairs = [(k, m) for k in range(K) for m in range(k, K)]
    npairs = len(pairs)
    by_pairs = isinstance(W, PairWeights)
    dtype = np.float32 if single else np.float64
    top = 1.0
    if single:
        # every |W_km| is at most the row's weight (softmax curvature: w pi_k (delta_km - pi_m))
        if by_pairs:
            top = W.max_weight()
        else:
            top = float(np.max(np.abs(W))) if W.size else 0.0
        if not (top > 0 and math.isfinite(top)):
            return multi_output_information(problem, W, False)
    # cache-sized blocks, and at most an eighth of the rows (the buffers stay small beside X)
    rows = max(64, min(_CACHE_BYTES // (np.dtype(dtype).itemsize * p1 * npairs), -(-n // 8)))
    m = max(1, min(rows, n))
    c, inv_s = problem.c[:, None], (1.0 / problem.s)[:, None]
    X = problem.X
    if by_pairs:
        W.prepare()

    def make() -> tuple:
        # float64 standardised rows (transposed), the weights and the weighted copies
        At, Wp = np.empty((p1, m)), np.empty((npairs, m))
        return (At, np.empty((p1, m), dtype=dtype) if single else At, np.empty((npairs, p1, m), dtype=dtype),
                Wp, np.empty((npairs, m), dtype=dtype) if single else Wp)

    buffers = PassBuffers(make)  # one set per thread, freed with the pass

    def part(lo: int, hi: int) -> np.ndarray:
        At, At1, Rt, Wp, Wp1 = buffers.get()
        nb = hi - lo
        A = At[:, :nb]
        if first_slope:
            A[0] = 1.0
        np.subtract(X[lo:hi].T, c, out=A[first_slope:])
        A[first_slope:] *= inv_s
        if by_pairs:
            Wb = W.pair_weights(slice(lo, hi), out=Wp[:, :nb])
        else:
            W3 = W[lo:hi]
            Wb = Wp[:, :nb]
            for j, (k, mm) in enumerate(pairs):
                Wb[j] = W3[:, k, mm]
        if single:
            np.multiply(Wb, 1.0 / top, out=Wp1[:, :nb], casting="same_kind")
            Wb = Wp1[:, :nb]
            np.copyto(At1[:, :nb], A, casting="same_kind")
            A = At1[:, :nb]
        Rb = Rt[:, :, :nb]
        np.multiply(A[None, :, :], Wb[:, None, :], out=Rb)
        return Rb.reshape(npairs * p1, nb) @ A.T

    # the blocks' products added in row order, as one running sum would add them
    G = add_up(for_rows(part, n, rows), np.zeros((npairs * p1, p1))).reshape(npairs, p1, p1)
    H = np.zeros((p1, K, p1, K))
    for j, (k, mm) in enumerate(pairs):
        H[:, k, :, mm] = G[j].T
        if mm != k:
            H[:, mm, :, k] = G[j]
    H = H.reshape(problem.size, problem.size)
    if single:
        H *= top
    return 0.5 * (H + H.T)
