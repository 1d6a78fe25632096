"""The accurate path of :func:`lintools.least_squares`: Householder QR, refined in extended precision.

Everything here works in the units of :mod:`lintools.models.lsq_scale` (response, weights and
each column divided by a power of two) and hands back the answer in those units.

Centring.  With an intercept every column is centred at its weighted mean in two parts:
``x - m1`` with ``m1`` the rounded mean, then ``- m2`` with ``m2`` the weighted mean of
``x - m1`` (the part of the mean that ``m1`` could not hold).  A column far from zero
(``1e12 + N(0, 1)``) is then orthogonal to the intercept to the last bit of its spread,
so the factorisation, the covariances and the leverages lose nothing to the shift.

Solution.  QR of ``sqrt(w) * (x - m) / s`` (unit columns; ridge rows appended), then
refinement on the augmented system ``[I M; M' 0][r; theta] = [c; 0]`` (Bjorck 1967) with
``M = sqrt(w) [1, x - m]`` and the residual accumulated in ``numpy.longdouble``, in
centred coordinates ``theta = (a, beta)`` where the fitted value is ``ybar + a + (x - m)'
beta``.  The centred products carry no cancellation of the shift, so a shifted column
keeps its digits; the intercept ``b = ybar + a - m' beta`` is formed once at the end, in
extended precision.  The residuals of every statistic (RSS, sandwich, Cook's distance)
are those centred residuals.
"""

from __future__ import annotations

import math

import numpy as np

from ..support.errors import IllConditionedWarning, InputError, warn_caller
from ..support.text import intercept_label
from .lsq_coordinates import aliased_columns_of, caller_gradient, centre_in_two_parts, centred_intercept, column_floor
from .lsq_coordinates import ridge_column_norms
from .lsq_record import PathAnswer, refuse_leverage_one
from .lsq_scale import column_exponents
from ..support.linalg import condition_number, default_rank_tolerance, inverse_upper, solve_lower, solve_upper

__all__ = ["qr_path", "alias_sentences", "ILL_CONDITIONED"]

#: Above this scaled condition number (1 / sqrt(eps)) a warning reports the digits at risk.
ILL_CONDITIONED = 1.0 / math.sqrt(np.finfo(float).eps)
_EXTENDED_DIGITS = -math.log10(float(np.finfo(np.longdouble).eps))
#: Refinement stops when the correction is below this relative size, or after MAX_REFINE steps.
MAX_REFINE = 3
_BLOCK_ROWS = 65536
#: A coefficient of a minimum-norm fit is identified when its component along the null
#: space of the design (unit vectors) is at most this.
IDENTIFIED_TOL = 1e-6
_LD = np.longdouble
_UNIT = float(np.finfo(float).eps) / 2


def alias_sentences(aliased: np.ndarray, zero: np.ndarray, names: tuple[str, ...], R: np.ndarray,
                    s: np.ndarray, intercept: bool, col_exp: np.ndarray | None = None,
                    exact: np.ndarray | None = None) -> str:
    """``"X is rank deficient: ..."``, one clause per aliased column (constant, or a combination).

    ``s`` are the lengths of the columns in the units of ``R``; ``col_exp`` the exponents of
    the powers of two those units divide the caller's columns by; ``exact`` marks the
    columns of ``zero`` that are exactly constant (the others vary only by rounding)."""
    keep = [j for j in range(R.shape[1]) if j not in set(aliased)]
    ex = np.zeros(R.shape[1], dtype=np.int64) if col_exp is None else col_exp
    lines = []
    for j in aliased:
        if zero[j] and (exact is None or exact[j]):
            if intercept:
                lines.append(f"column {j} ('{names[j]}') is constant on the rows used; it is aliased with the intercept")
            else:
                lines.append(f"column {j} ('{names[j]}') is zero on every row used, so nothing determines its coefficient")
        elif zero[j]:
            lines.append(
                f"column {j} ('{names[j]}') varies only in the last digits float64 keeps of its values (its "
                "spread is at the rounding level of its size), so it is aliased with the intercept; if its "
                "values are a large constant plus a small part, subtract the constant at the source"
            )
        else:
            lines.append(_describe_alias(j, names, R, keep, s, ex, intercept))
    return "X is rank deficient: " + "; ".join(lines)


def _describe_alias(j, names, R, keep, s, ex, with_intercept):
    """A sentence saying what column j is a combination of (in the caller's units)."""
    before = [i for i in keep if i < j]
    parts = []
    if before:
        sub = R[np.ix_(before, before)]
        c = solve_upper(sub, R[before, j])
        c = np.ldexp(c * s[j] / s[before], ex[j] - ex[before])
        big = np.abs(c) > 1e-8 * max(np.abs(c).max(), 1e-300)
        parts = [f"{c[t]:+.6g}*{names[before[t]]}" for t in np.flatnonzero(big)]
    rhs = " ".join(parts) if parts else "0"
    const = " + constant" if with_intercept else ""
    return f"column {j} ('{names[j]}') = {rhs}{const} (numerically)"


class _Centred:
    """Row blocks of the centred unit design ``(X / 2**ex - m1) - m2`` in extended precision."""

    def __init__(self, Xa, col_exp, m1, m2):
        self.X = Xa
        self.inv = np.ldexp(_LD(1), -col_exp)  # exact powers of two
        self.m1 = m1.astype(_LD)
        self.m2 = m2.astype(_LD)

    def block(self, lo: int, hi: int) -> np.ndarray:
        return (self.X[lo:hi].astype(_LD) * self.inv - self.m1) - self.m2


def qr_path(Xa, y1, w1, w_case, lam_w, intercept, names_t, rank_deficient, covariance, weight_type, residual_df):
    """The accurate path on unit data ``y1``, ``w1`` (weights, all rows), ridge ``lam_w``.

    ``w_case``: the caller's weights (for the leverage of one copy of a case-weighted row);
    ``residual_df(rank)`` checks the residual degrees of freedom (before any covariance
    work).  Returns the answer in the units of the response and the columns (``col_exp``)."""
    n, p = Xa.shape
    ex = column_exponents(Xa)
    pos = w1 > 0
    W1 = float(w1.sum())
    sw = np.sqrt(w1)
    Xc = np.ldexp(Xa, -ex)  # a new array, exact
    if intercept:
        m1, m2 = centre_in_two_parts(Xc, w1, W1)
        yc = y1.copy()
        ybar, dy = (float(v) for v in centre_in_two_parts(yc, w1, W1))
    else:
        m1, m2 = np.zeros(p), np.zeros(p)
        ybar, dy = 0.0, 0.0
        yc = y1
    centre = m1 + m2
    cen = _Centred(Xa, ex, m1, m2)
    A = Xc * sw[:, None]
    constant = np.ptp(Xa[pos], axis=0) == 0 if intercept else np.zeros(p, dtype=bool)
    lengths = np.linalg.norm(A, axis=0)
    exact = constant | (lengths == 0)  # exactly constant (with an intercept) or all zero: no rounding in it
    zero, s = column_floor(lengths, centre, W1, constant, intercept)
    A[:, zero] = 0.0
    A /= s

    root = np.ldexp(math.sqrt(lam_w), -ex) if lam_w > 0 else np.zeros(p)
    rhs_y = sw * yc
    if lam_w > 0:
        aug = root / s
        if not np.all(np.isfinite(aug)):
            j = int(np.flatnonzero(~np.isfinite(aug))[0])
            raise InputError(
                f"l2 = {lam_w:g} (per unit weight) overwhelms column {j} ('{names_t[j]}') beyond the "
                "float64 range: its values are tiny against the penalty; rescale that column or lower l2"
            )
        A = np.vstack([A, np.diag(aug)])
        rhs = np.concatenate([rhs_y, np.zeros(p)])
    else:
        aug, rhs = None, rhs_y
    Q, R = np.linalg.qr(A, mode="reduced")
    aliased = aliased_columns_of(R, zero, lam_w > 0, ridge_column_norms(zero, aug), default_rank_tolerance(n, p))
    if aliased.size and rank_deficient == "raise":
        raise InputError(
            alias_sentences(aliased, zero, names_t, R, s, intercept, ex, exact=exact)
            + ". Drop the aliased column(s), or pass rank_deficient='minimum_norm' for the minimum-norm solution"
        )

    full_rank = aliased.size == 0
    identified = None
    if full_rank:
        beta, a, G, cond, h_q, refine_steps, last = _solve_full_rank(Q, R, rhs, s, cen, y1, ybar, sw, root,
                                                                     intercept, n)
        correction = min(1.0, 8.0 * _UNIT * cond) * np.abs(last)  # the contraction of the refinement
        rank = p
    else:
        beta, G, cond, h_q, rank, identified = _solve_minimum_norm(A[:n], rhs_y, s, ex, centre, intercept, aliased)
        a = dy
        refine_steps = 0
        s = np.ones(p)
        correction = None
    if full_rank and cond > ILL_CONDITIONED:
        warn_caller(
            f"the scaled design is ill-conditioned (condition number {cond:.3g}); it was solved by "
            f"QR with {refine_steps} refinement step(s) in extended precision, but expect only about "
            f"{max(0.0, _EXTENDED_DIGITS - math.log10(cond)):.0f} correct digits",
            IllConditionedWarning,
        )
    z0 = _LD(ybar) + _LD(a)
    b0 = centred_intercept(z0, m1, m2, beta) if intercept else 0.0
    e = _centred_residual(cen, y1, z0, beta)
    rss = float(w1 @ (e * e))
    tss = float(w1 @ (yc * yc))
    hat = h_q + (w1 / W1 if intercept else 0.0)
    lam1 = root * root
    g_a = -float(w1 @ e)
    g_beta = -(Xc.T @ (w1 * e)) + lam1 * beta
    grad = caller_gradient(g_a, g_beta, centre, intercept)
    residual_df(rank)
    meat_z = None
    if covariance != "classical":
        meat_z = _meat(covariance, Xc, s, intercept, w1, w_case, e, hat, weight_type)
    if full_rank:
        message = f"solved directly: Householder QR of the scaled design, {refine_steps} refinement step(s)"
    else:
        terms = ((intercept_label(names_t),) if intercept else ()) + tuple(names_t)
        loose = [terms[i] for i in np.flatnonzero(~identified)]
        message = (
            f"minimum-norm solution of a rank-deficient design; the coefficients of "
            f"{', '.join(loose)} are not identified (no standard error, t or p): only their "
            "estimable combinations are meaningful"
        )
    return PathAnswer(
        beta=beta, b0=b0, rank=rank, s=s, xbar=centre, G=G, cond=cond, rss=rss, tss=tss, grad=grad, lam1=lam1,
        col_exp=ex, iterations=1 + refine_steps if full_rank else 1, solver="qr", message=message,
        aliased=aliased, full_rank=full_rank, e=e, hat=hat, meat_z=meat_z, identified=identified, w1=w1,
        correction=correction,
    )


def _centred_residual(cen: _Centred, y1, z0, beta) -> np.ndarray:
    """``y - z0 - (x - m)' beta`` accumulated in extended precision, rounded to float64."""
    n = y1.shape[0]
    e = np.empty(n)
    bl = beta.astype(_LD)
    for lo in range(0, n, _BLOCK_ROWS):
        hi = min(n, lo + _BLOCK_ROWS)
        e[lo:hi] = (y1[lo:hi].astype(_LD) - z0 - cen.block(lo, hi) @ bl).astype(float)
    return e


def _extended_residual(cen, y1, ybar, sw, theta, intercept, root, r):
    """``f = c - r - M theta`` and ``g = -M' r`` accumulated in ``numpy.longdouble``.

    ``M`` is ``sqrt(w) * [1, x - m]`` (plus the ridge rows ``diag(sqrt(l2_j))``) and
    ``c = sqrt(w) (y - ybar)``, in centred coordinates.  Rows are processed in blocks so
    that no extended-precision copy of X is ever whole.
    """
    n = y1.shape[0]
    p = root.shape[0]
    off = int(intercept)
    th = theta.astype(_LD)
    yb0 = _LD(ybar)
    f = np.empty(r.shape[0], dtype=_LD)
    g = np.zeros(p + off, dtype=_LD)
    for lo in range(0, n, _BLOCK_ROWS):
        hi = min(n, lo + _BLOCK_ROWS)
        Xb = cen.block(lo, hi)
        swb = sw[lo:hi].astype(_LD)
        fitted = Xb @ th[off:]
        if intercept:
            fitted = fitted + th[0]
        rb = r[lo:hi]
        f[lo:hi] = swb * (y1[lo:hi].astype(_LD) - yb0) - rb - swb * fitted
        wr = swb * rb
        g[off:] -= Xb.T @ wr
        if intercept:
            g[0] -= wr.sum()
    if r.shape[0] > n:
        rt = root.astype(_LD)
        f[n:] = -r[n:] - rt * th[off:]
        g[off:] -= rt * r[n:]
    return f, g


def _solve_full_rank(Q, R, rhs, s, cen, y1, ybar, sw, root, intercept, n):
    """QR solution, then refinement on the augmented system (Bjorck 1967).

    The augmented system ``[I M; M' 0] [r; theta] = [c; 0]`` is refined with residuals in
    extended precision; each correction is solved with the QR factors of the centred,
    scaled design, whose intercept column ``sqrt(w)`` is orthogonal to the centred columns.
    Returns ``(beta, a, G, cond, h_q, steps, dz)`` with the fitted value ``ybar + a + (x - m)' beta``
    and ``dz`` the last correction in the centred, scaled coordinates.
    """
    gamma = solve_upper(R, Q.T @ rhs)
    off = int(intercept)
    tdiag = np.concatenate([[1.0] * off, 1.0 / s])  # theta = T z, T diagonal in centred coordinates
    if intercept:
        norm_sw = float(np.linalg.norm(sw))
        q0 = sw / norm_sw
        z = np.concatenate([[float(sw @ rhs[:n]) / norm_sw**2], gamma])
    else:
        z = gamma
    theta = tdiag * z
    r = np.zeros(rhs.shape[0], dtype=_LD)
    f, g = _extended_residual(cen, y1, ybar, sw, theta, intercept, root, r)
    r = f  # the residual of the QR solution, in extended precision
    steps = 0
    dz = np.zeros_like(theta)
    for steps in range(1, MAX_REFINE + 1):
        f, g = _extended_residual(cen, y1, ybar, sw, theta, intercept, root, r)
        f64 = f.astype(float)
        gz = tdiag * g.astype(float)
        qf = Q.T @ f64
        if intercept:
            qf0 = float(q0 @ f64[:n])
            u0 = gz[0] / norm_sw
            u = solve_lower(R.T, gz[1:])
            dz = np.concatenate([[(qf0 - u0) / norm_sw], solve_upper(R, qf - u)])
            back = Q @ (qf - u)
            back[:n] += q0 * (qf0 - u0)
        else:
            u = solve_lower(R.T, gz)
            dz = solve_upper(R, qf - u)
            back = Q @ (qf - u)
        dr = f64 - back
        dtheta = tdiag * dz
        theta = (theta.astype(_LD) + dtheta.astype(_LD)).astype(float)
        r = r + dr.astype(_LD)
        if np.max(np.abs(dtheta)) <= 4 * np.finfo(float).eps * max(np.max(np.abs(theta)), 1e-300):
            break
    a = float(theta[0]) if intercept else 0.0
    beta = theta[off:].copy()
    Rinv = inverse_upper(R)
    G = Rinv @ Rinv.T
    h_q = np.einsum("ij,ij->i", Q[:n], Q[:n])
    return beta, a, G, condition_number(R), h_q, steps, dz


def _solve_minimum_norm(A, rhs_y, s, ex, centre, intercept, aliased):
    """Minimum-norm solution in the caller's coordinates.

    The solution set ``beta_p + N t`` comes from the truncated SVD of the unit-column
    design ``A`` (well scaled, so the null space ``N`` is accurate whatever the scales of
    the columns).  The minimum of the caller's norm ``|beta|`` over that set is a small
    weighted least-squares problem in ``t`` (weights ``2**-ex_j``, the caller's units),
    solved by Householder QR with its rows sorted by size, which is accurate for weights
    of any spread (Powell & Reid 1969).  A coefficient that the caller's metric makes tiny
    (a column far larger than the one it is aliased with) keeps an absolute error of about
    ``eps`` times the solution in unit coordinates: it is not identified, and only the
    estimable combinations, which are accurate, mean anything.  Also says which
    coefficients are identified:
    those whose unit vector is orthogonal to the null space (the intercept: when
    ``m' beta`` is, for every null direction ``beta``).  Returns the coefficients and their
    covariance factor in unit coordinates (no column scaling)."""
    p = A.shape[1]
    rank = p - aliased.size
    U, sv, Vt = np.linalg.svd(A, full_matrices=False)
    Ur, svr, Vr = U[:, :rank], sv[:rank], Vt[:rank].T
    Mp = (Vr / svr) / s[:, None]  # beta_p = Mp U_r' rhs
    N = Vt[rank:].T
    Nb = N / s[:, None]  # the null directions in unit coordinates
    d = np.ldexp(1.0, int(ex.min()) - ex)  # the caller's metric on unit coefficients, <= 1
    DN = d[:, None] * Nb
    order = np.argsort(-np.linalg.norm(DN, axis=1), kind="stable")
    Q, R = np.linalg.qr(DN[order])
    pinv = np.empty((N.shape[1], p))
    pinv[:, order] = solve_upper(R, Q.T)  # (D N)^+
    K = np.eye(p) - Nb @ (pinv * d[None, :])  # beta = K beta_p: the D-orthogonal projection
    M = K @ Mp
    beta = M @ (Ur.T @ rhs_y)
    G = M @ M.T
    h_q = np.einsum("ij,ij->i", Ur, Ur)
    cond = float(svr[0] / svr[-1])
    slopes = np.sqrt(np.einsum("ij,ij->i", N, N)) <= IDENTIFIED_TOL
    if intercept:
        c = centre / s
        size = float(np.linalg.norm(c))
        first = size == 0 or float(np.linalg.norm(N.T @ c)) <= IDENTIFIED_TOL * size
        identified = np.concatenate([[first], slopes])
    else:
        identified = slopes
    return beta, G, cond, h_q, rank, identified


def _meat(kind, Xc, s, intercept, w1, w_case, e, hat, weight_type):
    """HC0-HC3 meat ``Z' diag(m) Z`` in the centred, scaled coordinates (unit weights ``w1``).

    The leverage of one copy of a case-weighted row is its hat value over its weight
    (``w_case``, the caller's weights: a weight counts copies whatever its scale)."""
    if weight_type == "case":
        m = w1 * e * e
        lev = np.divide(hat, w_case, out=np.zeros_like(hat), where=w_case > 0)
    else:
        m = w1 * w1 * e * e
        lev = hat
    if kind in ("HC2", "HC3"):
        used = w1 > 0
        if np.any(lev[used] >= 1.0 - 1e-12):
            refuse_leverage_one(kind, int(np.flatnonzero(used & (lev >= 1.0 - 1e-12))[0]))
        power = 1 if kind == "HC2" else 2
        m = m / (1.0 - lev) ** power
    Z = Xc / s
    if intercept:
        Z = np.hstack([np.ones((Xc.shape[0], 1)), Z])
    return Z.T @ (Z * m[:, None])
