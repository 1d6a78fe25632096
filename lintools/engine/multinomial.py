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
the sum of the other classes' terms wherever ``pi_k > 1/2`` (only the largest class of a
row can be there; elsewhere ``1 - pi_k >= 1/2`` has no cancellation), so probabilities
near 1 keep their complement's relative accuracy.  The gradient is :math:`w_i(\pi_{ik} - [c_i = k])`;
the per-row Hessian block is :math:`w_i(\mathrm{diag}\,\pi_i - \pi_i\pi_i')` restricted to
the free columns.

Memory: every pass over the rows works on blocks of ``ROWS`` rows in buffers of that
size, so no (n, K) temporary beyond the results is formed; the results of the last pass
(the probabilities of the free columns and the complement of each row's largest class)
are kept for the curvature and the line search at the same linear predictor, and the
(n, K', K') curvature is formed only on request (:meth:`MultinomialLoss.pair_weights`
gives its distinct entries one block of rows at a time).  Inside a fit the value pass and
the line-search changes run on the row threads (:mod:`lintools.support.threads`) in chunks of
``THREAD_ROWS`` rows, each thread with its own buffers for the pass; the chunk results
are added in row order, so the digits do not depend on the number of threads.

References
----------
McCullagh, P. & Nelder, J. A. (1989). Generalized Linear Models, 2nd ed., sec. 6.4.
Chapman & Hall.
Böhning, D. (1992). Multinomial logistic regression algorithm. Annals of the Institute of
Statistical Mathematics 44, 197-200.
"""

from __future__ import annotations

import math
from typing import Any

import numpy as np

from ..support.threads import PassBuffers, add_up, for_rows

__all__ = ["MultinomialLoss", "probabilities", "softmax_parts", "ROWS"]


#: Rows per block of the elementwise passes: a block's (K, ROWS) buffers stay in cache.
ROWS = 8192
#: Rows per chunk of the passes on the row threads (value and probabilities, line-search
#: changes): each thread holds its own buffers, half the size of a serial pass's.
THREAD_ROWS = 4096
#: Entries per chunk of the gather/scatter of the own-class entries.
_CHUNK = 1 << 13


def _as_2d(eta: np.ndarray) -> np.ndarray:
    return eta[:, None] if eta.ndim == 1 else eta


class _Block:
    """Reused buffers of one pass: ``S`` (K, m) and its scratch, for blocks of up to ``m`` rows."""

    def __init__(self, K: int, m: int) -> None:
        self.K, self.m = K, m
        self._s = np.empty(K * m)
        self._t = np.empty(K * m)
        self._b = np.empty(K * m, dtype=bool)
        self.rows = np.arange(m)

    def shifted(self, Et: np.ndarray, first: int) -> tuple[np.ndarray, np.ndarray]:
        """``S = E - max`` (rows = classes; ``E = [0; Et]`` when ``first``) and the row maxima."""
        nb = Et.shape[1]
        S = self._s[: self.K * nb].reshape(self.K, nb)
        mx = np.max(Et, axis=0)
        if first:
            np.maximum(mx, 0.0, out=mx)
            np.negative(mx, out=S[0])
        np.subtract(Et, mx, out=S[first:])
        return S, mx

    def normalise(self, S: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """In place ``S <- exp(S)`` (every maximal entry exactly 1); returns the row totals and
        the sums of the non-maximal terms (each tie beyond the first counted as 1, exactly)."""
        nb = S.shape[1]
        np.exp(S, out=S)
        total = np.add.reduce(S, axis=0)
        T = self._t[: self.K * nb].reshape(self.K, nb)
        B = self._b[: self.K * nb].reshape(self.K, nb)
        np.less(S, 1.0, out=B)
        np.multiply(S, B, out=T)
        rest = np.add.reduce(T, axis=0)
        np.subtract(S, T, out=T)  # 1 at each maximal entry, 0 elsewhere
        ties = np.add.reduce(T, axis=0)
        ties -= 1.0
        rest += ties
        return total, rest

    def own(self, S: np.ndarray, codes: np.ndarray) -> np.ndarray:
        """``S[codes[i], i]`` for a (K, nb) block."""
        nb = S.shape[1]
        return np.take(S.reshape(-1), codes.astype(np.intp, copy=False) * nb + self.rows[:nb])


def _complement(P: np.ndarray, top: np.ndarray) -> np.ndarray:
    """``1 - P`` where ``P <= 1/2``, else the row's ``top`` (the accurate complement of its largest class)."""
    Q = 1.0 - P
    np.copyto(Q, top, where=P > 0.5)
    return Q


def softmax_parts(E: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """For a full (n, K) matrix: probabilities ``P``, complements ``Q = 1 - P`` and the
    row log-normalisers minus the row maxima (``log sum exp(E - max)``), each accurate."""
    n, K = E.shape
    P, Q, lognorm = np.empty((n, K)), np.empty((n, K)), np.empty(n)
    if K == 0:
        return P, Q, lognorm
    blk = _Block(K, min(ROWS, n))
    for lo in range(0, n, ROWS):
        hi = min(n, lo + ROWS)
        S, _ = blk.shifted(E[lo:hi].T, 0)
        total, rest = blk.normalise(S)
        Pb = S / total
        top = rest / total
        P[lo:hi] = Pb.T
        Q[lo:hi] = _complement(Pb, top).T
        np.log1p(rest, out=lognorm[lo:hi])
    return P, Q, lognorm


def probabilities(eta: np.ndarray, reference: bool) -> np.ndarray:
    """The (n, K) class probabilities at the linear predictor ``eta`` (n, outputs) of the
    free columns (``reference``: the first class pinned at zero before them), a block of
    rows at a time: only the exponentials and their totals are formed."""
    first = int(reference)
    n = eta.shape[0]
    K = eta.shape[1] + first
    out = np.empty((n, K))
    blk = _Block(K, max(1, min(ROWS, n)))
    for lo in range(0, n, ROWS):
        S, _ = blk.shifted(eta[lo : lo + ROWS].T, first)
        np.exp(S, out=S)
        out[lo : lo + ROWS] = (S / np.add.reduce(S, axis=0)).T
    return out


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
    modified.  ``eta`` passed to the methods has shape ``(n, outputs)`` (either memory
    order; the passes read it one block of rows at a time, fastest when it is stored
    column by column, as :class:`lintools.engine.LinearModelProblem` stores it).
    """

    #: declared capabilities (:class:`lintools.engine.contracts.Loss`)
    row_subsets, row_blocks, closed_null = True, True, False

    def __init__(self, codes: np.ndarray, K: int, weights: np.ndarray | None = None, reference: bool = True) -> None:
        n = codes.shape[0]
        self.codes, self.K, self.reference = codes, int(K), bool(reference)
        self.outputs = self.K - 1 if self.reference else self.K
        self.weights = np.ones(n) if weights is None else weights
        self._first = int(self.reference)
        #: (eta, value, P, top, finite) of the last pass: ``P`` (outputs, n) the probabilities
        #: of the free columns, ``top`` (n,) the complement of each row's largest probability,
        #: ``finite`` whether every entry of eta is finite
        self._cache: tuple | None = None
        self._own_flat: np.ndarray | None = None

    def subset(self, rows: np.ndarray) -> "MultinomialLoss":
        """The same loss on the given rows."""
        return MultinomialLoss(self.codes[rows], self.K, self.weights[rows], self.reference)

    def forget(self) -> None:
        """Drop the kept results of the last pass (and the linear predictor they hold)."""
        self._cache = None

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

    def _blocks(self, n: int):
        blk = _Block(self.K, max(1, min(ROWS, n)))
        for lo in range(0, n, ROWS):
            yield lo, min(n, lo + ROWS), blk
        del blk

    def _own_positions(self) -> np.ndarray:
        """Flat positions ``(c_i - first) * n + i`` in an (outputs, n) array of the rows whose
        class is a free column (formed once)."""
        if self._own_flat is None:
            n = self.codes.shape[0]
            col = self.codes.astype(np.int64) - self._first
            flat = col * n + np.arange(n, dtype=np.int64)
            self._own_flat = flat[col >= 0] if self._first else flat
        return self._own_flat

    def _fix_own(self, P: np.ndarray, top: np.ndarray, G: np.ndarray) -> None:
        """Write the own-class entries ``-w (1 - pi_c)`` of the gradient ``G = w P``."""
        n = P.shape[1]
        flat = self._own_positions()
        Pf, Gf = P.reshape(-1), G.reshape(-1)
        for a in range(0, flat.size, _CHUNK):
            pos = flat[a : a + _CHUNK]
            rows = pos % n if P.shape[0] > 1 else pos
            q = _complement(np.take(Pf, pos), np.take(top, rows))
            q *= np.take(self.weights, rows)
            np.negative(q, out=q)
            np.put(Gf, pos, q)

    def _own_free(self, lo: int, hi: int) -> tuple[np.ndarray, np.ndarray]:
        """Rows of the block ``lo:hi`` (block positions) whose class is a free column, and that column."""
        col = self.codes[lo:hi].astype(np.intp, copy=False) - self._first
        if not self._first:
            return np.arange(hi - lo), col
        rows = np.flatnonzero(col >= 0)
        return rows, col[rows]

    def _pass(self, eta: np.ndarray, gradient: bool = False) -> tuple[float, np.ndarray | None]:
        """One pass at ``eta``: the value, the kept probabilities and, on request, the
        gradient as an (outputs, n) array."""
        self._cache = None  # its arrays are released before the new ones are made
        E2 = _as_2d(eta)
        n, Kf = E2.shape
        first, w = self._first, self.weights
        P, top = np.empty((Kf, n)), np.empty(n)
        G = np.empty((Kf, n)) if gradient else None
        blocks = PassBuffers(lambda: _Block(self.K, max(1, min(THREAD_ROWS, n))))  # one per thread

        def part(lo: int, hi: int) -> tuple[float, bool]:
            blk = blocks.get()
            Et = E2[lo:hi].T
            S, mx = blk.shifted(Et, first)
            finite = bool(np.isfinite(np.add.reduce(mx)) and np.isfinite(np.min(Et)))
            d_own = blk.own(S, self.codes[lo:hi])  # E_own - max <= 0
            total, rest = blk.normalise(S)
            terms = np.log1p(rest)
            terms -= d_own
            Pb = P[:, lo:hi]
            np.divide(S[first:], total, out=Pb)
            np.divide(rest, total, out=top[lo:hi])
            if G is not None:
                np.multiply(Pb, w[lo:hi], out=G[:, lo:hi])
            return float(w[lo:hi] @ terms), finite

        parts = for_rows(part, n, THREAD_ROWS)
        value = add_up([q[0] for q in parts], 0.0)  # in row order, as one running sum
        finite = all(q[1] for q in parts)
        blocks.release()  # the block buffers go before the own-class entries are written
        if G is not None:
            self._fix_own(P, top, G)
        self._cache = (eta, value, P, top, finite)
        return value, G

    def prepare(self, eta: np.ndarray) -> None:
        """Make the pass at ``eta`` now, so that blocks of it can then be read on several
        threads at once (:meth:`pair_weights`)."""
        self._kept(eta)

    def _stats(self, eta: np.ndarray) -> tuple[float, np.ndarray, np.ndarray]:
        """``(value, P, top)`` at ``eta``: the kept ones when the last pass was at ``eta``."""
        return self._kept(eta)[1:4]

    def _kept(self, eta: np.ndarray) -> tuple:
        cached = self._cache
        if cached is None or cached[0] is not eta:
            self._pass(eta)
            cached = self._cache
        return cached

    def _shaped_t(self, G: np.ndarray, eta: np.ndarray) -> np.ndarray:
        """An (outputs, n) result in the shape of ``eta``."""
        return G[0] if eta.ndim == 1 else G.T

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

    def _row_terms(self, E2: np.ndarray, codes: np.ndarray) -> np.ndarray:
        """``-log pi_{i c_i}`` per row of a few rows ``E2`` (free columns) with classes ``codes``."""
        m = E2.shape[0]
        blk = _Block(self.K, max(1, m))
        S, _ = blk.shifted(E2.T, self._first)
        d_own = blk.own(S, codes)
        _, rest = blk.normalise(S)
        return np.log1p(rest) - d_own

    def _terms(self, eta: np.ndarray) -> np.ndarray:
        """``-log pi_{i c_i}`` per row: ``(max - E_own) + log1p(rest)``, each part >= 0."""
        E2 = _as_2d(eta)
        out = np.empty(E2.shape[0])
        for lo, hi, blk in self._blocks(E2.shape[0]):
            S, _ = blk.shifted(E2[lo:hi].T, self._first)
            d_own = blk.own(S, self.codes[lo:hi])
            _, rest = blk.normalise(S)
            np.log1p(rest, out=out[lo:hi])
            out[lo:hi] -= d_own
        return out

    def value(self, eta: np.ndarray) -> float:
        """:math:`\\ell(E)` of the module docstring."""
        return self._stats(eta)[0]

    def value_change(self, eta: np.ndarray, delta: np.ndarray) -> float:
        r"""``value(eta + delta) - value(eta)``, accurate to the rounding of the change.

        Per row, :math:`\log\sum_k \pi_k e^{\delta_k} - \delta_{c}` with the sum written as
        :math:`\log1p(\sum_k \pi_k\,\mathrm{expm1}(\delta_k))` when every
        :math:`|\delta_k| \le 1`; rows with larger moves use the plain difference of the
        terms, which is then accurate relative to the change.
        """
        return self.change_along(eta, np.asarray(delta, dtype=float), 1.0, check_finite=False)

    def change_along(self, eta: np.ndarray, direction: np.ndarray, t: float, check_finite: bool = True) -> float:
        """``value(eta + t * direction) - value(eta)`` as :meth:`value_change` with
        ``delta = t * direction``, one block of rows at a time (no (n, K) temporary).

        With ``check_finite`` it is ``inf`` when ``eta + t * direction`` has a non-finite
        entry (a line-search trial that overflowed)."""
        _, _, P, _, eta_finite = self._kept(eta)
        E2, D2 = _as_2d(eta), _as_2d(direction)
        n, Kf = E2.shape
        w = self.weights
        m = Kf * min(max(n, 1), THREAD_ROWS)
        buffers = PassBuffers(lambda: (np.empty(m), np.empty(m)))  # one pair per thread

        def part(lo: int, hi: int) -> float:
            nb = hi - lo
            D, T = buffers.get()
            Db, Tb = D[: Kf * nb].reshape(Kf, nb), T[: Kf * nb].reshape(Kf, nb)
            Et = E2[lo:hi].T
            with np.errstate(over="ignore", invalid="ignore"):  # (per thread)
                if t == 1.0:
                    np.copyto(Db, D2[lo:hi].T)
                else:
                    np.multiply(D2[lo:hi].T, t, out=Db)
                np.abs(Db, out=Tb)
                reach = np.max(Tb, axis=0)
                small = reach <= 1.0
                # eta + delta is finite when eta is and every |delta| <= 1 (or it is checked)
                if check_finite and not (eta_finite and small.all()):
                    np.add(Et, Db, out=Tb)
                    if not (np.isfinite(Tb.max()) and np.isfinite(Tb.min())):
                        return math.inf
                np.expm1(Db, out=Tb)
                Tb *= P[:, lo:hi]
                ch = np.log1p(np.add.reduce(Tb, axis=0))
                rows, col = self._own_free(lo, hi)
                if rows.size:
                    ch[rows] -= Db[col, rows]
                if not small.all():
                    far = np.flatnonzero(~small)
                    Ef = E2[lo:hi][far]
                    c = self.codes[lo:hi][far]
                    ch[far] = self._row_terms(Ef + Db[:, far].T, c) - self._row_terms(Ef, c)
                return float(w[lo:hi] @ ch)

        parts = for_rows(part, n, THREAD_ROWS)
        if any(c == math.inf for c in parts):
            return math.inf  # a trial that overflowed somewhere
        return float(add_up(parts, 0.0))  # in row order, as one running sum

    def mean(self, eta: np.ndarray) -> np.ndarray:
        """Class probabilities, (n, K)."""
        return probabilities(_as_2d(eta), self.reference)

    def gradient(self, eta: np.ndarray) -> np.ndarray:
        """``w (pi - onehot)`` in the free columns; the own-class entry is ``-w (1 - pi_c)``."""
        _, P, top = self._stats(eta)
        G = P * self.weights
        self._fix_own(P, top, G)
        return self._shaped_t(G, eta)

    def value_and_gradient(self, eta: np.ndarray) -> tuple[float, np.ndarray]:
        """Value and gradient in one pass (the gradient stored column by column)."""
        cached = self._cache
        if cached is not None and cached[0] is eta:
            return cached[1], self.gradient(eta)
        value, G = self._pass(eta, gradient=True)
        return value, self._shaped_t(G, eta)

    def pair_weights(self, eta: np.ndarray, rows: Any, out: np.ndarray | None = None) -> np.ndarray:
        r"""The distinct entries of the per-row Hessian blocks on ``rows`` (a slice or indices):
        an (outputs (outputs + 1) / 2, rows) array, row ``j`` the pair ``(k, m)``, ``k <= m``,
        in the order ``(0,0), (0,1), ..., (1,1), ...``: :math:`w\,\pi_k(1 - \pi_k)` on the
        diagonal, :math:`-w\,\pi_k\pi_m` off it."""
        _, P, top = self._stats(eta)
        Pb, tb, wb = P[:, rows], top[rows], self.weights[rows]
        Kf, nb = Pb.shape
        if out is None:
            out = np.empty((Kf * (Kf + 1) // 2, nb))
        WP = Pb * wb  # w pi_k
        Q = _complement(Pb, tb)
        j = 0
        for k in range(Kf):
            np.multiply(WP[k], Q[k], out=out[j])
            j += 1
            if k + 1 < Kf:
                blk = out[j : j + Kf - k - 1]
                np.multiply(Pb[k + 1 :], WP[k], out=blk)
                np.negative(blk, out=blk)
                j += Kf - k - 1
        return out

    def curvature(self, eta: np.ndarray) -> np.ndarray:
        """Per-row Hessian blocks ``w (diag pi - pi pi')`` on the free columns, (n, K', K')."""
        return self.curvature_rows(eta, slice(None))

    def curvature_rows(self, eta: np.ndarray, rows: Any) -> np.ndarray:
        """``curvature(eta)[rows]``, formed on those rows only (the Newton sketch's rows)."""
        Wp = self.pair_weights(eta, rows)
        Kf = self.outputs
        W = np.empty((Wp.shape[1], Kf, Kf))
        j = 0
        for k in range(Kf):
            for m in range(k, Kf):
                W[:, k, m] = Wp[j]
                W[:, m, k] = Wp[j]
                j += 1
        return W[:, 0, 0] if eta.ndim == 1 else W

    def hessian_vector(self, eta: np.ndarray, u: np.ndarray) -> np.ndarray:
        """Per-row Hessian block times the rows of ``u`` (the shape of eta)."""
        _, P, _ = self._stats(eta)
        U = _as_2d(np.asarray(u, dtype=float).reshape(eta.shape)).T
        PU = P * U
        s = np.add.reduce(PU, axis=0)
        PU -= P * s
        PU *= self.weights
        return self._shaped_t(PU, eta)

    # ---- likelihood facts -----------------------------------------------------------------
    def log_likelihood(self, eta: np.ndarray) -> float:
        """:math:`\\sum_i w_i \\log \\pi_{i c_i}`."""
        return -self.value(eta)

    def deviance(self, eta: np.ndarray) -> float:
        """``-2 log-likelihood`` (the saturated model of one-label rows has likelihood 1)."""
        return 2.0 * self.value(eta)

    def log_binomial_total(self) -> float:
        return 0.0
