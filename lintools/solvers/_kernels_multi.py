r"""The curvature pass of the K-output (softmax) problems: :math:`\sum_i a_i a_i' \otimes W_i`.

For standardised rows :math:`a_i = (1, (x_i - c)/s)` and per-row curvature blocks
:math:`W_i` (K x K), the Hessian's K(K+1)/2 blocks :math:`A'\,\mathrm{diag}(W_{\cdot km})\,A`
come from one product per block of rows, :math:`A' [W_{00} A, W_{01} A, \dots]`, which keeps
BLAS busy on a wide right-hand side.  The curvature may be handed over as a function of a
row slice, so the (n, K, K) array is formed one block of rows at a time.

References
----------
Böhning, D. (1992). Multinomial logistic regression algorithm. Annals of the Institute of
Statistical Mathematics 44, 197-200.
"""

from __future__ import annotations

import math
from typing import Any

import numpy as np

__all__ = ["multi_output_information"]

_CACHE_BYTES = 1 << 21


def multi_output_information(problem: Any, W: Any, single: bool = False) -> np.ndarray:
    """``A' W A`` in z coordinates for a K-output ``LinearModelProblem`` (no penalty).

    ``W`` is the (n, K, K) curvature or a function of a row slice returning its rows.  With
    ``single`` the standardised rows and the weights (each ``|W_km| <= max w``) are rounded
    to float32 and the product is a float32 one (Newton steps only).
    """
    K, p1, n = problem.K, problem.p1, problem.n
    block_of = W if callable(W) else (lambda rows: W[rows])
    pairs = [(k, m) for k in range(K) for m in range(k, K)]
    H = np.zeros((p1, K, p1, K))
    dtype = np.float32 if single else np.float64
    rows = max(64, 2 * _CACHE_BYTES // (8 * p1 * len(pairs)))  # R stays in cache
    R = np.empty((min(rows, n), len(pairs), p1), dtype=dtype)
    top = 1.0
    if single:
        # every |W_km| is at most the row's weight (softmax curvature: w pi_k (delta_km - pi_m))
        top = float(np.max(problem.loss.row_weights())) if n else 0.0
        if not callable(W):
            top = float(np.max(np.abs(W))) if W.size else 0.0
        if not (top > 0 and math.isfinite(top)):
            return multi_output_information(problem, W, False)
        A32 = np.empty((min(rows, n), p1), dtype=np.float32)
    for lo, A in problem._blocks(rows):
        nb = A.shape[0]
        Wb = block_of(slice(lo, lo + nb))
        if single:
            Wb = Wb / top
            np.copyto(A32[:nb], A, casting="same_kind")
            A = A32[:nb]
        for j, (k, m) in enumerate(pairs):
            np.multiply(A, Wb[:, k, m, None], out=R[:nb, j, :], casting="same_kind")
        G = (A.T @ R[:nb].reshape(nb, -1)).reshape(p1, len(pairs), p1)
        for j, (k, m) in enumerate(pairs):
            H[:, k, :, m] += G[:, j, :]
            if m != k:
                H[:, m, :, k] += G[:, j, :].T
    H = H.reshape(problem.size, problem.size)
    if single:
        H *= top
    return 0.5 * (H + H.T)
