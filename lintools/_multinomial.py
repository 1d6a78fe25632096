r"""The multinomial (softmax) loss in the linear-predictor matrix.

Rows ``i`` carry one class ``c_i`` of ``K`` and a case weight ``w_i``.  With the full
linear-predictor matrix :math:`E` (n, K),

.. math::

    \ell(E) = \sum_i w_i\,\Big[\log\sum_{k=1}^{K} e^{E_{ik}} - E_{i c_i}\Big]
            = -\sum_i w_i \log \pi_{i c_i},\qquad
    \pi_{ik} = \frac{e^{E_{ik}}}{\sum_j e^{E_{ij}}}.

With ``reference=True`` the first column of :math:`E` is pinned at zero and the loss sees
only the other ``K - 1`` columns (``outputs = K - 1``); with ``reference=False`` it sees
all ``K`` (the symmetric form, ``outputs = K``).

Numerics: every row is shifted by its maximum, so ``exp`` never overflows for any finite
``E`` (entries up to +-1e300 and differences up to the largest double); the log of the
normaliser is ``log1p`` of the sum of the non-maximal terms, and ``1 - pi_k`` is formed as
the sum of the other classes' terms, never as a difference, so probabilities near 1 keep
their complement's relative accuracy.  The gradient is :math:`w_i(\pi_{ik} - [c_i = k])`;
the per-row Hessian block is :math:`w_i(\mathrm{diag}\,\pi_i - \pi_i\pi_i')` restricted to
the free columns.

References
----------
McCullagh, P. & Nelder, J. A. (1989). Generalized Linear Models, 2nd ed., sec. 6.4.
Chapman & Hall.
Böhning, D. (1992). Multinomial logistic regression algorithm. Annals of the Institute of
Statistical Mathematics 44, 197-200.
"""

from __future__ import annotations

from typing import Any

import numpy as np

__all__ = ["MultinomialLoss", "softmax_parts"]


#: Up to this many columns, row reductions of an (n, K) array run column by column (a
#: reduction along a short contiguous axis is slow in NumPy); the sums are the same
#: left-to-right sums either way.
_FEW_COLUMNS = 16


def row_max(M: np.ndarray) -> np.ndarray:
    """``M.max(axis=1)`` for a 2-D array."""
    if M.shape[1] == 0 or M.shape[1] > _FEW_COLUMNS:
        return np.max(M, axis=1)
    out = M[:, 0].copy()
    for k in range(1, M.shape[1]):
        np.maximum(out, M[:, k], out=out)
    return out


def row_sum(M: np.ndarray) -> np.ndarray:
    """``M.sum(axis=1)`` for a 2-D array, adding the columns left to right."""
    if M.shape[1] == 0 or M.shape[1] > _FEW_COLUMNS:
        return np.sum(M, axis=1)
    out = M[:, 0].copy()
    for k in range(1, M.shape[1]):
        out += M[:, k]
    return out


def softmax_parts(E: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """For a full (n, K) matrix: probabilities ``P``, complements ``Q = 1 - P`` and the
    row log-normalisers minus the row maxima (``log sum exp(E - max)``), each accurate."""
    n, K = E.shape
    rows = np.arange(n)
    top = np.argmax(E, axis=1)
    ex = np.exp(E - E[rows, top][:, None])  # in [0, 1], the maximum exactly 1
    total = row_sum(ex)
    ex_top = ex[rows, top].copy()
    ex[rows, top] = 0.0
    rest = row_sum(ex)  # sum of the non-maximal terms
    ex[rows, top] = ex_top
    P = ex / total[:, None]
    Q = (total[:, None] - ex) / total[:, None]
    Q[rows, top] = rest / total
    return P, Q, np.log1p(rest)


class MultinomialLoss:
    r"""Negative weighted multinomial log-likelihood in the linear predictor.

    Parameters
    ----------
    codes : ndarray of int, shape (n,)
        Class index ``0 <= c_i < K`` of each row.
    K : int
        Number of classes (>= 2).
    weights : ndarray, shape (n,), optional
        Case weights ``w >= 0`` (default 1).
    reference : bool
        Pin the first class's linear predictor at zero (``outputs = K - 1``); otherwise
        the symmetric form (``outputs = K``).

    The arrays are assumed checked (the front checks them); they are neither copied nor
    modified.  ``eta`` passed to the methods has shape ``(n, outputs)``.
    """

    def __init__(self, codes: np.ndarray, K: int, weights: np.ndarray | None = None, reference: bool = True) -> None:
        n = codes.shape[0]
        self.codes, self.K, self.reference = codes, int(K), bool(reference)
        self.outputs = self.K - 1 if self.reference else self.K
        self.weights = np.ones(n) if weights is None else weights
        self._rows = np.arange(n)
        self._first = int(self.reference)
        self._cache: tuple | None = None

    def subset(self, rows: np.ndarray) -> "MultinomialLoss":
        """The same loss on the given rows."""
        return MultinomialLoss(self.codes[rows], self.K, self.weights[rows], self.reference)

    # ---- helpers -----------------------------------------------------------------------
    def full(self, eta: np.ndarray) -> np.ndarray:
        """The (n, K) linear-predictor matrix (the pinned zero column prepended).

        With one output (two classes and a reference) ``eta`` may be 1-D, as the solvers
        hand one-output losses; every method then returns 1-D results."""
        if eta.ndim == 1:
            eta = eta[:, None]
        if not self.reference:
            return eta
        return np.column_stack([np.zeros(eta.shape[0]), eta])

    @staticmethod
    def _shaped(M: np.ndarray, eta: np.ndarray) -> np.ndarray:
        return M[:, 0] if eta.ndim == 1 else M

    def _parts(self, eta: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
        """``(E, P, Q, lognorm)`` at ``eta``; the last result is kept, since the solvers ask
        for the value, gradient and curvature at the same linear predictor in turn."""
        cached = self._cache
        if cached is not None and cached[0] is eta:
            return cached[1]
        E = self.full(eta)
        parts = (E, *softmax_parts(E))
        self._cache = (eta, parts)
        return parts

    def _own(self, M: np.ndarray) -> np.ndarray:
        return M[self._rows, self.codes]

    def class_totals(self) -> np.ndarray:
        """Total case weight of each class."""
        return np.bincount(self.codes, weights=self.weights, minlength=self.K)

    # ---- interface ---------------------------------------------------------------------
    def row_weights(self) -> np.ndarray:
        """Case weight of each row."""
        return self.weights

    def start_intercept(self, offset: np.ndarray | None = None) -> np.ndarray:
        """Log class shares (less the first's, or less their mean in the symmetric form),
        less the weighted mean offset: the intercept-only optimum without an offset."""
        share = np.maximum(self.class_totals() / float(self.weights.sum()), 1e-300)
        logs = np.log(share)
        a = logs[1:] - logs[0] if self.reference else logs - logs.mean()
        if offset is not None:
            a = a - (self.weights @ offset.reshape(offset.shape[0], -1)) / float(self.weights.sum())
        return float(a[0]) if self.outputs == 1 else a

    def _terms(self, eta: np.ndarray) -> np.ndarray:
        """``-log pi_{i c_i}`` per row: ``(max - E_own) + log1p(rest)``, each part >= 0."""
        E, _, _, lognorm = self._parts(eta)
        return (row_max(E) - self._own(E)) + lognorm

    def value(self, eta: np.ndarray) -> float:
        """:math:`\\ell(E)` of the module docstring."""
        return float(self.weights @ self._terms(eta))

    def value_change(self, eta: np.ndarray, delta: np.ndarray) -> float:
        r"""``value(eta + delta) - value(eta)``, accurate to the rounding of the change.

        Per row, :math:`\log\sum_k \pi_k e^{\delta_k} - \delta_{c}` with the sum written as
        :math:`\log1p(\sum_k \pi_k\,\mathrm{expm1}(\delta_k))` when every
        :math:`|\delta_k| \le 1`; rows with larger moves use the plain difference of the
        terms, which is then accurate relative to the change.
        """
        E, P, _, _ = self._parts(eta)
        D = self.full(np.asarray(delta))
        small = row_max(np.abs(D)) <= 1.0
        Ds = np.where(small[:, None], D, 0.0)
        change = np.log1p(row_sum(P * np.expm1(Ds))) - self._own(Ds)
        if not small.all():
            far = ~small
            Ef, Df = E[far], D[far]
            c = self.codes[far]
            r = np.arange(c.size)

            def terms(M: np.ndarray) -> np.ndarray:
                return (row_max(M) - M[r, c]) + softmax_parts(M)[2]

            change[far] = terms(Ef + Df) - terms(Ef)
        return float(self.weights @ change)

    def mean(self, eta: np.ndarray) -> np.ndarray:
        """Class probabilities, (n, K)."""
        return self._parts(eta)[1].copy()

    def gradient(self, eta: np.ndarray) -> np.ndarray:
        """``w (pi - onehot)`` in the free columns; the own-class entry is ``-w (1 - pi_c)``."""
        _, P, Q, _ = self._parts(eta)
        G = P.copy()
        G[self._rows, self.codes] = -self._own(Q)
        G *= self.weights[:, None]
        return self._shaped(G[:, self._first :], eta)

    def value_and_gradient(self, eta: np.ndarray) -> tuple[float, np.ndarray]:
        return self.value(eta), self.gradient(eta)

    def curvature(self, eta: np.ndarray) -> np.ndarray:
        """Per-row Hessian blocks ``w (diag pi - pi pi')`` on the free columns, (n, K', K')."""
        return self.curvature_rows(eta, slice(None))

    def curvature_rows(self, eta: np.ndarray, rows: Any) -> np.ndarray:
        """``curvature(eta)[rows]``, formed on those rows only (the Newton sketch's rows)."""
        _, P, Q, _ = self._parts(eta)
        Pf, Qf = P[rows, self._first :], Q[rows, self._first :]
        W = -Pf[:, :, None] * Pf[:, None, :]
        k = np.arange(Pf.shape[1])
        W[:, k, k] = Pf * Qf
        W *= self.weights[rows, None, None]
        return W[:, 0, 0] if eta.ndim == 1 else W

    def hessian_vector(self, eta: np.ndarray, u: np.ndarray) -> np.ndarray:
        """Per-row Hessian block times the rows of ``u`` (the shape of eta)."""
        P = self._parts(eta)[1][:, self._first :]
        u = u.reshape(P.shape)
        return self._shaped(self.weights[:, None] * (P * u - P * np.sum(P * u, axis=1, keepdims=True)), eta)

    # ---- likelihood facts -----------------------------------------------------------------
    def log_likelihood(self, eta: np.ndarray) -> float:
        """:math:`\\sum_i w_i \\log \\pi_{i c_i}`."""
        return -self.value(eta)

    def deviance(self, eta: np.ndarray) -> float:
        """``-2 log-likelihood`` (the saturated model of one-label rows has likelihood 1)."""
        return 2.0 * self.value(eta)

    def log_binomial_total(self) -> float:
        return 0.0

