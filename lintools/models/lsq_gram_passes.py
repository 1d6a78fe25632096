"""The passes over the rows of the Gram fast path (:mod:`lintools.models.lsq_gram`).

Each pass reads the design in blocks of rows on the row threads
(:func:`lintools.support.threads.for_rows`), shifted by the provisional centre and
divided by the column units when they are not 1, and adds the block sums in row order:
pass 1 (:func:`first_pass`: the moments of the shifted columns, of the response and of
the start's residual), the residual passes (:func:`residual_pass`: the residual of a
point, its sums and, on request, residuals, leverage and the HC meat), and the subsample
that gives the provisional centre and the start (:func:`subsample_rows`,
:func:`subsample_start`).  The method and its references are in
:mod:`lintools.models.lsq_gram`.
"""

from __future__ import annotations

import itertools
import threading

import numpy as np

from ..support.linalg import solve_lower, solve_upper
from ..support.threads import add_up, for_rows, scratch

__all__ = ["Blocks", "first_pass", "residual_pass", "subsample_rows", "subsample_start"]


#: Per thread, what its "shifted" buffer holds: (the Blocks' serial number, lo, hi, the block)
#: of a read-only copy, or None.  Kept here, not on the object, since every Blocks of the
#: thread writes into the same buffer: a copy is served again only while no other block has
#: been written over it.  A serial number, not the object, so the caller's X is not kept alive.
_HELD: dict[int, tuple | None] = {}
_SERIAL = itertools.count()


class Blocks:
    """Row blocks of ``X * inv - shift`` as views (no scale, no shift) or in one reusable
    buffer per thread; ``inv`` (powers of two, exact) is None unless a column needs rescaling.

    One object serves every pass about the same centre: the tile of the shift is built once,
    and a thread that is handed the same block again (the one block of a small problem, in
    pass 1 and then in a residual pass) gets the copy it made, unless the copy was handed
    out to be written on."""

    def __init__(self, X: np.ndarray, shift: np.ndarray | None, rows: int, inv: np.ndarray | None = None):
        self.X = X
        self.shift = shift
        self.inv = inv
        self.flat = shift is not None and X.flags.c_contiguous
        self.tile = _tiled(shift, rows) if self.flat else None
        self.serial = next(_SERIAL)

    def get(self, lo: int, hi: int, writable: bool) -> np.ndarray:
        """The block of rows ``lo:hi``; a copy goes into a buffer of the calling thread
        (its next block reuses it), so blocks may be formed on several threads at once."""
        Xb = self.X[lo:hi]
        if self.shift is None and self.inv is None and not writable:
            return Xb
        me = threading.get_ident()
        held = _HELD.get(me)
        if not writable and held is not None and held[:3] == (self.serial, lo, hi):
            return held[3]
        out = scratch("shifted", (hi - lo, self.X.shape[1]))
        if self.inv is not None:
            np.multiply(Xb, self.inv, out=out)
            if self.shift is not None:
                out -= self.shift
        elif self.shift is None:
            np.copyto(out, Xb)
        elif self.flat:
            np.subtract(Xb.reshape(-1), self.tile[: out.size], out=out.reshape(-1))
        else:
            np.subtract(Xb, self.shift, out=out)
        # this thread's buffer now holds this block (of this object); a writable one is about to change
        _HELD[me] = None if writable else (self.serial, lo, hi, out)
        return out


def _tiled(v: np.ndarray, rows: int) -> np.ndarray:
    """``v`` repeated ``rows`` times, flat, in a buffer the thread keeps (filled by doubling
    copies: a broadcast into narrow rows is slow)."""
    t = scratch("shift tile", (rows, v.size)).reshape(-1)
    t[: v.size] = v
    done = v.size
    while done < t.size:
        step = min(done, t.size - done)
        t[done: done + step] = t[:step]
        done += step
    return t


def first_pass(X, y, ybar, w, shift, beta0, a0, rows, inv, blocks=None):
    """Pass 1: moments of the shifted columns, of ``yt``, and of the start's residual
    (block by block on the row threads, the block sums added in row order).  The products
    ``v' Z`` stay with the BLAS: the correction steps need their accuracy (NumPy's sum of
    products here cost the weighted benchmark a digit, measured 12.0 -> 11.0)."""
    n, p = X.shape
    blocks = blocks if blocks is not None else Blocks(X, shift, rows, inv)
    ones = np.ones(rows) if w is None else None  # ones @ Z: faster than Z.sum(axis=0)

    def part(lo: int, hi: int) -> tuple:
        Z = blocks.get(lo, hi, writable=w is not None)
        yb = y[lo:hi] - ybar
        r = yb - Z @ beta0
        if a0:
            r -= a0
        if w is None:
            return (float(hi - lo), ones[: hi - lo] @ Z, Z.T @ Z, float(r.sum()),
                    r @ Z, float(r @ r), float(yb.sum()), float(yb @ yb))
        wb = w[lo:hi]
        wr = wb * r
        wy = wb * yb
        sums = (float(wb.sum()), wb @ Z, None, float(wr.sum()), wr @ Z,
                float(wr @ r), float(wy.sum()), float(wy @ yb))
        np.multiply(Z, np.sqrt(wb)[:, None], out=Z)
        return sums[:2] + (Z.T @ Z,) + sums[3:]

    parts = for_rows(part, n, rows)
    W, sx, S, rho, gx, rss, ty, tyy = (add_up([q[k] for q in parts]) for k in range(8))
    return float(W), sx, S, float(rho), gx, float(rss), float(ty), float(tyy)


def residual_pass(X, y, ybar, w, shift, beta, a, rows, *, keep_residuals, lev, meat, inv=None, case_weights=None,
                  blocks=None):
    """Residual of ``(a, beta)``: its weighted sum, cross products and square; options.

    ``lev`` = (K, km, Winv) gives the leverage ``w_i |K xt_i - km|^2 + w_i Winv``;
    ``meat`` = (kind, weight_type) accumulates ``[1, xt]' diag(m) [1, xt]``; the leverage
    of one copy of a case-weighted row divides by its weight in ``case_weights`` (the
    caller's, whatever the scale of ``w``); ``blocks``: the :class:`Blocks` of pass 1 about the same
    centre (None: made here).
    """
    n, p = X.shape
    blocks = blocks if blocks is not None else Blocks(X, shift, rows, inv)
    e = np.empty(n) if keep_residuals else None
    hat = np.empty(n) if lev is not None else None

    def part(lo: int, hi: int) -> tuple:
        Z = blocks.get(lo, hi, writable=False)
        r = y[lo:hi] - ybar
        r -= Z @ beta
        if a:
            r -= a
        if w is None:
            sums = (float(r.sum()), r @ Z, float(r @ r))
        else:
            wr = w[lo:hi] * r
            sums = (float(wr.sum()), wr @ Z, float(wr @ r))
        if e is not None:
            e[lo:hi] = r
        if hat is not None:
            K, km, Winv = lev
            U = Z @ K.T
            if km is not None:
                U -= km
            hb = np.einsum("ij,ij->i", U, U)
            if Winv:
                hb += Winv
            if w is not None:
                hb *= w[lo:hi]
            hat[lo:hi] = hb
        if meat is None:
            return sums + (None, None)
        kind, weight_type = meat
        wb = np.ones(hi - lo) if w is None else w[lo:hi]
        mm = wb * r * r if weight_type == "case" else wb * wb * r * r
        first = None
        if kind in ("HC2", "HC3"):
            hb = hat[lo:hi]
            if weight_type == "case":
                cw = wb if case_weights is None else case_weights[lo:hi]
                levb = np.divide(hb, cw, out=np.zeros_like(hb), where=cw > 0)
            else:
                levb = hb
            bad = (wb > 0) & (levb >= 1.0 - 1e-12)
            if bad.any():
                first = lo + int(np.flatnonzero(bad)[0])
            with np.errstate(divide="ignore", invalid="ignore"):
                mm = mm / (1.0 - levb) ** (1 if kind == "HC2" else 2)
            mm = np.where(bad, 0.0, mm)
        Zm = scratch("meat", (hi - lo, p))
        np.multiply(Z, np.sqrt(mm)[:, None], out=Zm)
        Mb = np.empty((p + 1, p + 1))
        Mb[1:, 1:] = Zm.T @ Zm
        col = mm @ Z
        Mb[0, 1:] = col
        Mb[1:, 0] = col
        Mb[0, 0] = float(mm.sum())
        return sums + (Mb, first)

    parts = for_rows(part, n, rows)
    rho, gx, rss = (add_up([q[k] for q in parts]) for k in range(3))
    M = add_up([q[3] for q in parts]) if meat is not None else None
    first_one = next((q[4] for q in parts if q[4] is not None), None)
    return float(rho), gx, float(rss), e, hat, M, first_one


def subsample_rows(n, w, n_pos, k):
    """About ``k`` evenly spaced rows with positive weight."""
    idx = np.linspace(0, n - 1, min(n, k)).astype(np.intp)  # spacing >= 1: distinct
    if w is None:
        return idx
    idx = idx[w[idx] > 0]
    if idx.size >= min(k, n_pos) // 2:
        return idx
    rows_pos = np.flatnonzero(w > 0)  # few positive weights: take them directly
    return rows_pos[np.unique(np.linspace(0, rows_pos.size - 1, min(k, rows_pos.size)).astype(np.intp))]


def subsample_start(Xs, y, ybar, w, idx, intercept, lam, W, inv):
    """Provisional centre, spread and starting values from the rows ``idx`` (``Xs``: the
    design's rows ``idx`` in a buffer of the caller's, which is overwritten: scaled,
    centred and weighted in place, as a copy would be but without its fresh pages)."""
    k, p = Xs.shape
    ys = y[idx] - ybar
    if inv is not None:
        np.multiply(Xs, inv, out=Xs)
    ws = np.ones(k) if w is None else w[idx]
    Ws = float(ws.sum())
    if intercept:
        xm = (ws @ Xs) / Ws
        ym = float(ws @ ys) / Ws
    else:
        xm, ym = np.zeros(p), 0.0
    # rows times sqrt(w_i), which unit weights leave as they are (x * 1 is x)
    A = np.subtract(Xs, xm, out=Xs)
    b = ys - ym
    if w is not None:
        A *= np.sqrt(ws)[:, None]
        b *= np.sqrt(ws)
    sd = np.sqrt(np.einsum("ij,ij->j", A, A) / Ws)
    beta0 = np.zeros(p)
    if k > p:
        # normal equations on the subsample (only a start; lstsq if they are singular)
        G = A.T @ A
        G[np.diag_indices(p)] += lam * (Ws / W)
        try:
            Ls = np.linalg.cholesky(G)
            beta0 = solve_upper(Ls.T, solve_lower(Ls, A.T @ b))
        except np.linalg.LinAlgError:
            if np.any(lam > 0):
                A = np.vstack([A, np.diag(np.sqrt(lam * (Ws / W)))])
                b = np.concatenate([b, np.zeros(p)])
            beta0 = np.linalg.lstsq(A, b, rcond=None)[0]
        if not np.all(np.isfinite(beta0)):
            beta0 = np.zeros(p)
    return xm, sd, beta0, ym - float(xm @ beta0)
