r"""The Firth-penalised one-output problem ``F = loss(eta) - 1/2 log det I`` (Firth 1993):
the variant of :class:`lintools.engine.problem.LinearModelProblem` made with ``firth=True``
(one output, ``l2 = 0``; see :mod:`lintools.engine.problem`).

It declares none of the shortcuts of large problems (its Hessian is exact or Fisher
scoring at every step), and its stopping rule counts the penalty as ``k/2`` observations.

References
----------
Firth, D. (1993). Bias reduction of maximum likelihood estimates. Biometrika 80, 27-38.
Heinze, G. & Schemper, M. (2002). A solution to the problem of separation in logistic
regression. Statistics in Medicine 21, 2409-2419.
"""

from __future__ import annotations

import math
from typing import Any

import numpy as np

from ..support.linalg import solve_lower
from .base import SingularMatrixError, cholesky
from .contracts import FirthLoss
from .problem_base import _BLOCK_BYTES
from .problem_line import _Line
from .problem_one import OneOutputProblem

__all__ = ["FirthProblem"]


class FirthProblem(OneOutputProblem, variant="firth"):
    """:class:`lintools.engine.problem.LinearModelProblem` with Firth's penalty (see there)."""

    firth = True
    #: declared: no warm start, no sketch, no float32 steps (and no Hessian reuse)
    warm_starts = sketches = fast_steps = False

    def __init__(self, X: np.ndarray, loss: FirthLoss, **settings: Any) -> None:
        if float(settings.get("l2", 0.0)) / float(settings.get("weight_scale", 1.0)) != 0 or loss.outputs != 1:
            raise ValueError("the Jeffreys (Firth) penalty is implemented for one output and l2 = 0")
        super().__init__(X, loss, **{"firth": True, **settings})
        # log |d theta / d z|, and the log det of the information's weight scale
        self.log_det_T = -self.K * float(np.sum(np.log(self.s)))
        self.log_det_weights = self.size * math.log(self.weight_scale)
        #: the multiplier of Firth's penalty in the scaled objective F / weight_scale
        self.firth_weight = 1.0 / self.weight_scale

    def _penalty_weight(self) -> float:
        """``k/2`` (k parameters): the penalty's gradient sums hat values whose total is k,
        so it weighs like k/2 observations whatever the weights' scale (case weights of
        1e-120 leave the penalty to decide the answer, and a rule per unit of W alone would
        ask for the penalty's gradient below its rounding)."""
        return 0.5 * self.size / self.weight_scale

    def _log_det_information(self, eta: Any) -> tuple[float, Any, Any]:
        """``log det I`` in the caller's coordinates and weights, with the scaled Cholesky factors."""
        L, d = cholesky(self._information(self.loss.curvature(eta)))
        logdet = 2.0 * float(np.sum(np.log(np.diag(L))) + np.sum(np.log(d)))
        return logdet - 2.0 * self.log_det_T + self.log_det_weights, L, d

    def _inverse_root(self, eta: Any) -> np.ndarray | None:
        """``Li`` with ``I^{-1} = Li' Li`` at ``eta`` (None when I is singular)."""
        try:
            L, d = cholesky(self._information(self.loss.curvature(eta)))
        except SingularMatrixError:
            return None
        return solve_lower(L, np.diag(1.0 / d))

    def _information_signed(self, dW: np.ndarray) -> np.ndarray:
        """``A' diag(dW) A`` for weights of any sign (one output)."""
        H = np.zeros((self.p1, self.p1))
        for lo, A in self._blocks():
            H += A.T @ (A * dW[lo : lo + A.shape[0], None])
        return 0.5 * (H + H.T)

    def _residual(self, eta: Any, factors: Any = None) -> Any:
        """Derivative of the objective in eta: the loss's less ``1/(2 s) q dW/deta`` (``s`` the
        weight scale), with ``factors`` the Cholesky factors of the information at eta."""
        L, d = factors
        r = self.loss.gradient(eta)
        return r - (0.5 * self.firth_weight) * self._leverage_factor(L, d) * self.loss.curvature_slope(eta)

    def _value_and_residual(self, z: np.ndarray, eta: Any) -> tuple[Any, Any]:
        """The objective (the log det also gives the residual) and its derivative in eta."""
        f = self.loss.value(eta)
        logdet, L, d = self._log_det_information(eta)
        f -= 0.5 * self.firth_weight * logdet
        return f, self._residual(eta, (L, d))

    def _finish_change(self, line: _Line, t: float, delta: Any, eta: Any, c: float, need_slope: bool,
                       factors: Any = None) -> tuple[float, float]:
        """The penalty's change, ``log det I(t) - log det I(0) = sum log1p(eig(Li dI Li'))``
        with ``dI = A' diag(dW) A``, added to ``c``; the slope with the factors at ``eta``."""
        if line.root0 is None:
            return math.inf, math.nan
        dI = self._information_signed(self.loss.curvature_change(line.eta0, delta))
        lam = np.linalg.eigvalsh(line.root0 @ dI @ line.root0.T)
        if lam.size and lam.min() <= -1.0:
            return math.inf, math.nan
        c -= 0.5 * self.firth_weight * float(np.sum(np.log1p(lam)))
        if need_slope:
            try:
                factors = cholesky(self._information(self.loss.curvature(eta)))
            except SingularMatrixError:
                return math.inf, math.nan
        return super()._finish_change(line, t, delta, eta, c, need_slope, factors)

    def line(self, z: np.ndarray, d: np.ndarray) -> _Line:
        """The objective along ``z + t d`` (with ``I^{-1}`` at ``z`` for the penalty's changes)."""
        line = super().line(z, d)
        line.root0 = self._inverse_root(line.eta0)
        return line

    def _blocks(self, rows: int | None = None):
        """Rows of the standardised design ``[1, (X - c) / s]`` in blocks (one reused buffer)."""
        rows = self.block if rows is None else rows
        buf = np.empty((min(rows, self.n), self.p1))
        for lo in range(0, self.n, rows):
            Xb = self.X[lo : lo + rows]
            A = buf[: Xb.shape[0]]
            if self.intercept:
                A[:, 0] = 1.0
            np.subtract(Xb, self.c, out=A[:, self.first_slope :])
            A[:, self.first_slope :] /= self.s
            yield lo, A

    def _leverage_factor(self, L: np.ndarray, d: np.ndarray) -> np.ndarray:
        """``q_i = a_i' I^{-1} a_i`` for the standardised rows ``a_i`` (Firth's hat values / W)."""
        Li = solve_lower(L, np.diag(1.0 / d))  # I^{-1} = Li' Li
        q = np.empty(self.n)
        for lo, A in self._blocks():
            Y = A @ Li.T
            q[lo : lo + A.shape[0]] = np.einsum("ij,ij->i", Y, Y)
        return q

    def hessian(self, z: np.ndarray, E: np.ndarray | None = None) -> np.ndarray:
        """The exact Hessian of ``loss - 1/2 log det I`` in z (projected to ``E' H E`` when
        ``E`` is given) when it is positive definite, else the Fisher information (the
        Fisher-scoring step of Heinze & Schemper 2002)."""
        eta = self.eta(z)
        info = self._information(self.loss.curvature(eta))
        exact = self._firth_hessian(eta, info)
        if E is not None:
            info, exact = E.T @ info @ E, E.T @ exact @ E
        try:
            cholesky(exact)
        except SingularMatrixError:
            return info
        return exact

    def _firth_hessian(self, eta: Any, info: np.ndarray) -> np.ndarray:
        r"""Exact Hessian of ``loss - 1/2 log det I`` with ``I = A' W A``.

        :math:`\nabla^2 = I - \tfrac12 A'\,\mathrm{diag}(q W'')\,A + \tfrac12 N N'`, with
        :math:`q_i = a_i' I^{-1} a_i`, :math:`N = \sum_i W'_i a_i\,\mathrm{vec}(y_i y_i')'` and
        :math:`y_i = L^{-1} a_i` (``I = L L'``); the last term is
        :math:`\mathrm{tr}(I^{-1}\partial_j I\, I^{-1}\partial_k I)`.  Cost: ``n p^3``.
        """
        L, d = cholesky(info)
        Li = solve_lower(L, np.diag(1.0 / d))
        W1, W2 = self.loss.curvature_slope(eta), self.loss.curvature_second(eta)
        k = self.p1
        T1 = np.zeros((k, k))
        N = np.zeros((k, k * k))
        rows = max(64, _BLOCK_BYTES // (8 * max(k * k, 1)))
        for lo in range(0, self.n, rows):
            hi = min(self.n, lo + rows)
            A = np.empty((hi - lo, k))
            if self.intercept:
                A[:, 0] = 1.0
            np.subtract(self.X[lo:hi], self.c, out=A[:, self.first_slope :])
            A[:, self.first_slope :] /= self.s
            Y = A @ Li.T
            q = np.einsum("ij,ij->i", Y, Y)
            T1 += A.T @ (A * (q * W2[lo:hi])[:, None])
            N += (A * W1[lo:hi, None]).T @ np.einsum("ij,ik->ijk", Y, Y).reshape(hi - lo, k * k)
        H = info + (0.5 * self.firth_weight) * (N @ N.T - T1)
        return 0.5 * (H + H.T)

