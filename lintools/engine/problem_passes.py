"""Passes over the standardised design of :class:`lintools.engine.problem.LinearModelProblem`
shared by every variant: the check of the column spreads, the trial points of the line
search, the products ``X' r`` and the one-output information ``A' diag(W) A`` (see
:mod:`lintools.engine.problem` and :mod:`lintools.engine.kernels`)."""

from __future__ import annotations

import math
from typing import Any

import numpy as np

from ..support.scaling import SUM_LIMIT
from ..support.threads import ELEMENT_CHUNK, add_up, for_rows
from .base import ExtremeSpread
from .kernels import weighted_gram

__all__ = ["DesignPasses", "SCALE_RANGE"]

#: Columns whose weighted spread lies outside this range are standardised block by block
#: before any product of two columns (whose entries would overflow or underflow).
SCALE_RANGE = (2.0**-100, 2.0**100)


class DesignPasses:
    """The design's passes of :class:`lintools.engine.problem.LinearModelProblem` (a part of
    that class; its attributes are set by its constructor)."""

    def _check_spreads(self, total: float) -> None:
        """Raise :class:`ExtremeSpread` for the first column whose standardised coordinate
        float64 cannot hold: ``1 / s_j`` overflows (a spread below about 5.6e-309), or with
        a ridge ``l2 / s_j^2`` does (the penalty on the standardised coefficient); or whose
        largest magnitude ``t_j`` times the problem's total weight passes ``SUM_LIMIT``
        (2**1020): the gradient's sums ``sum_i (x_ij - c_j) r_i`` are bounded by ``2 t_j`` times the sum of
        ``|r_i|`` (at most that total, the Firth term included), so below it they cannot
        overflow.  O(p), and a pass over the columns of spread or centre beyond 2**100 only."""
        with np.errstate(over="ignore", divide="ignore"):
            inv = 1.0 / self.s
            bad = ~np.isfinite(inv)
            if self.l2:
                bad |= ~np.isfinite(self.l2 * inv * inv)
        if bad.any():
            j = int(np.argmax(bad))
            s = float(self.s[j])
            bound = None if self.l2 or not total > 0 else (math.log10(4.0 / total) - math.log10(self.weight_scale)
                                                           - 2.0 * math.log10(s))
            raise ExtremeSpread(j, s, bound)
        wide = np.flatnonzero((self.s > SCALE_RANGE[1]) | (np.abs(self.c) > SCALE_RANGE[1]))
        if wide.size and self.n:
            top = np.max(np.abs(self.X[:, wide]), axis=0)
            over = np.flatnonzero(~(top <= SUM_LIMIT / self.weight_total))
            if over.size:
                j = int(wide[over[0]])
                raise ExtremeSpread(j, float(self.s[j]), None, float(top[over[0]]))

    def _trial(self, line: Any, t: float) -> tuple[np.ndarray, np.ndarray | None]:
        """``(t X d, eta0 + t X d)`` in chunks of rows on the row threads; the second is
        None when it is not finite somewhere.  At ``t = 1`` the first is ``X d`` itself (read only)."""
        deta, eta0 = line.deta, line.eta0
        whole = t == 1.0
        delta, eta = deta if whole else np.empty(deta.shape), np.empty(deta.shape)

        def part(lo: int, hi: int) -> bool:
            if not whole:
                np.multiply(deta[lo:hi], t, out=delta[lo:hi])
            np.add(eta0[lo:hi], delta[lo:hi], out=eta[lo:hi])
            # a finite sum has only finite terms; an inf/NaN or an overflowing sum: check each entry
            return bool(np.isfinite(np.add.reduce(eta[lo:hi], axis=None))) or bool(np.all(np.isfinite(eta[lo:hi])))

        finite = all(for_rows(part, deta.shape[0], ELEMENT_CHUNK))
        return delta, eta if finite else None

    def _centred_slopes(self, r: Any, XR: np.ndarray, Gb: Any) -> np.ndarray:
        """``(X - c)' r`` from ``XR = X' r`` and ``Gb = sum r``; the far-shifted columns'
        entries from their centred copy (no cancellation)."""
        out = XR - np.multiply.outer(self.c, Gb)
        if self.shifted:
            out[self.shifted.far] = self.shifted.transposed(r)
        return out

    def _transposed_product(self, r: Any) -> np.ndarray:
        """``X' r``, summed over row blocks of about 6 MB in their order, on the row threads
        (each block's product: :meth:`_rows_product`)."""
        if self.n <= 2 * self.block_rows:
            return self.X.T @ r
        return add_up(for_rows(lambda lo, hi: self._rows_product(r, lo, hi), self.n, self.block_rows))

    def _unit_scale(self) -> np.ndarray:
        return np.concatenate([np.ones(self.first_slope), 1.0 / self.s])

    def _information_one(self, W: np.ndarray, single: bool) -> np.ndarray:
        """``A' diag(W) A`` in z coordinates for (n,) weights ``W`` (no penalty).

        While every ``|c_j| <= s_j`` (``self.uncentred``), the blocks are the uncentred
        ``sqrt(W) X`` and the centring is applied to the small result
        (:func:`lintools.engine.kernels.weighted_gram`, whose rounding analysis sets that
        limit); otherwise each cache-sized block is ``B = sqrt(W) [1, X - c]`` written into
        one reused buffer, ``B'B`` goes to BLAS, and the column scales ``1/s`` are applied
        once to the (p+1) x (p+1) result.  With ``single`` (the caller checks that the
        standardised rows are bounded, see ``self.single``) the block is the standardised
        ``sqrt(W / max W) [1, (X - c) / s]`` rounded to float32 and ``B'B`` is a float32
        product, summed over blocks in float64: about 1e-6 relative accuracy, for Newton
        steps only.
        """
        if self.uncentred:
            return weighted_gram(self.X, W, self.c, self.s, self.intercept, self.rows,
                                 single=single, row_bound=self.row_bound)
        n, p1, first_slope, rows = self.n, self.p1, self.first_slope, self.rows
        H = np.zeros((p1, p1))
        sw = np.sqrt(W)
        top = float(sw.max()) if (single and n) else 0.0
        if single and top > 0 and math.isfinite(top):
            rs = sw / top
            inv = 1.0 / self.s
            T = np.empty((min(rows, n), self.p))
            buf = np.empty((min(rows, n), p1), dtype=np.float32)
            for lo in range(0, n, rows):
                Xb = self.X[lo : lo + rows]
                m = Xb.shape[0]
                B, Tb, r = buf[:m], T[:m], rs[lo : lo + m]
                if self.intercept:
                    B[:, 0] = r
                np.subtract(Xb, self.c, out=Tb)
                Tb *= inv
                np.multiply(Tb, r[:, None], out=B[:, first_slope:], casting="same_kind")
                H += B.T @ B
            H *= top * top
            return 0.5 * (H + H.T)
        buf = np.empty((min(rows, n), p1))
        inv = 1.0 / self.s if self.extreme else None  # scales far from 1: standardise first
        for lo in range(0, n, rows):
            Xb = self.X[lo : lo + rows]
            B = buf[: Xb.shape[0]]
            r = sw[lo : lo + Xb.shape[0]]
            if self.intercept:
                B[:, 0] = r
            np.subtract(Xb, self.c, out=B[:, first_slope:])
            if inv is not None:
                B[:, first_slope:] *= inv
            B[:, first_slope:] *= r[:, None]
            H += B.T @ B
        if inv is None:
            u = self._unit_scale()
            H *= np.multiply.outer(u, u)
        return 0.5 * (H + H.T)

    def _penalty_diagonal(self) -> np.ndarray:
        pen = np.zeros((self.p1, self.K))
        pen[self.first_slope :] = ((self.l2 / self.s) / self.s)[:, None]  # no overflow of s^2
        return pen.ravel()
