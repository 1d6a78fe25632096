"""Least squares over row blocks by TSQR; see :mod:`lintools.blocks`."""

from __future__ import annotations

import math
from typing import Any, Callable, Sequence

import numpy as np

from . import _distributions as dist
from ._errors import (
    IllConditionedWarning,
    InputError,
    warn_caller,
    )
from ._records import Convergence, LinearFit
from ._validate import check_names, check_nonnegative
from .least_squares import ILL_CONDITIONED, _residual_df, alias_sentences, caller_covariance
from .linalg import aliased_columns, condition_number, default_rank_tolerance, inverse_upper, solve_lower, solve_upper
from .logistic import _check_flag

from ._block_stream import _add, _merge_labels, _positive_rows, _runner


#: Corrections of the least-squares answer (each one a pass) before it is accepted.
MAX_REFINE = 3
#: Rows per piece when a block is processed in extended precision.
_PIECE_ROWS = 1 << 16
_EPS = float(np.finfo(float).eps)



def _factor(Z: np.ndarray, w: np.ndarray | None, intercept: bool) -> dict:
    """Weight, mean and R factor of the weighted, centred columns of ``Z`` (modified)."""
    m, k = Z.shape
    W = float(m) if w is None else float(w.sum())
    mean = np.zeros(k)
    if intercept:
        mean = (Z.sum(axis=0) if w is None else w @ Z) / W
        Z -= mean
        fix = (Z.sum(axis=0) if w is None else w @ Z) / W  # one correction of the rounded mean
        Z -= fix
        mean = mean + fix
    if w is not None:
        Z *= np.sqrt(w)[:, None]
    R = np.linalg.qr(Z, mode="r")
    if R.shape[0] < k:
        R = np.vstack([R, np.zeros((k - R.shape[0], k))])
    return {"W": W, "mean": mean, "R": R}




def _factor_kernel(X: np.ndarray, y: np.ndarray, w: np.ndarray | None, intercept: bool) -> dict:
    """Pass 1 of least squares: R factor of ``[X, y]`` and the extremes of each column."""
    n_rows = X.shape[0]
    X, y, w = _positive_rows(X, y, w)
    m, p = X.shape
    out = {"n_pos": m, "n_rows": n_rows}
    if m == 0:
        return out
    Z = np.empty((m, p + 1))
    Z[:, :p] = X
    Z[:, p] = y
    out["lo"], out["hi"] = Z.min(axis=0), Z.max(axis=0)
    out.update(_factor(Z, w, intercept))
    return out


def _merge_factors(a: dict, b: dict, intercept: bool) -> dict:
    out = {"n_pos": a["n_pos"] + b["n_pos"], "n_rows": a["n_rows"] + b["n_rows"]}
    for key in ("labels",):
        if key in a or key in b:
            out[key] = _merge_labels(a.get(key, {}), b.get(key, {}))
    if "R" not in a or "R" not in b:
        src = a if "R" in a else b
        for key in ("W", "mean", "R", "lo", "hi"):
            if key in src:
                out[key] = src[key]
        return out
    W = a["W"] + b["W"]
    rows = [a["R"], b["R"]]
    mean = a["mean"]
    if intercept:
        d = b["mean"] - a["mean"]
        mean = a["mean"] + (b["W"] / W) * d
        rows.append(math.sqrt(a["W"] / W) * math.sqrt(b["W"]) * d[None, :])  # no overflow of W_a W_b
    R = np.linalg.qr(np.vstack(rows), mode="r")
    out.update(W=W, mean=mean, R=R, lo=np.minimum(a["lo"], b["lo"]), hi=np.maximum(a["hi"], b["hi"]))
    return out




def _residual_kernel(X: np.ndarray, y: np.ndarray, w: np.ndarray | None, b0: float, beta: np.ndarray) -> dict:
    """Residual sums at ``(b0, beta)`` accumulated in extended precision, piece by piece."""
    ld = np.longdouble
    bl, b0l = beta.astype(ld), ld(b0)
    p = X.shape[1]
    rho, rss, gx = ld(0), ld(0), np.zeros(p, dtype=ld)
    for lo in range(0, X.shape[0], _PIECE_ROWS):
        Xl = X[lo : lo + _PIECE_ROWS].astype(ld)
        r = y[lo : lo + _PIECE_ROWS].astype(ld) - (Xl @ bl + b0l)
        wr = r if w is None else w[lo : lo + _PIECE_ROWS].astype(ld) * r
        rho += wr.sum()
        rss += wr @ r
        gx += Xl.T @ wr
    return {"rho": rho, "rss": rss, "gx": gx}




# ---------------------------------------------------------------------------------------
# Least squares
# ---------------------------------------------------------------------------------------


def least_squares_blocks(
    source: Callable[[], Any] | None = None,
    *,
    X: Any = None,
    y: Any = None,
    weights: Any = None,
    intercept: bool = True,
    l2: float = 0.0,
    names: Sequence[str] | None = None,
) -> LinearFit:
    r"""Least squares over row blocks by TSQR; the same record as :func:`lintools.least_squares`.

    .. math::

        \min_{b,\beta}\; \tfrac12 \sum_i w_i (y_i - b - x_i^\top\beta)^2
        + \tfrac{\lambda}{2}\lVert\beta\rVert_2^2 ,\qquad \lambda = \texttt{l2}.

    Parameters
    ----------
    source : callable, optional
        A function of no arguments returning a fresh iterator of blocks
        ``(X_block, y_block)`` or ``(X_block, y_block, weights_block)`` on every call (a
        generator function).  Blocks may have any number of rows (one is fine); all must
        have the same columns.  It is called 2 to 5 times (one call per pass).
    X, y, weights : dask arrays, optional
        Instead of ``source``: a row-chunked 2-D dask array and 1-D dask arrays with the
        same row chunks.  Each pass is a map over the chunks plus a tree reduction on the
        Dask scheduler in use (a ``distributed.Client`` if one is active).  Persist them
        first (``client.persist``) when they are costly to compute: every pass reads them.
    intercept : bool
        Fit an unpenalised intercept (default True).
    l2 : float
        Ridge strength ``lambda >= 0`` on the slopes.
    names : sequence of str, optional
        Coefficient names (default: the column labels of the first block when it is a
        DataFrame, else ``x1..xp``).

    Returns
    -------
    LinearFit
        Equal to ``lintools.least_squares`` on the concatenated rows (classical
        covariance, case weights) to rounding; ``convergence.solver`` is ``"tsqr"`` and
        ``convergence.message`` counts the passes.

    Raises
    ------
    InputError
        A bad block (named by its number, with the row within the block, the column and
        the remedy), a source that is not callable, returns no iterator, yields nothing or
        changes between passes, or a rank-deficient design (the aliased columns named).

    Notes
    -----
    Pass 1 computes the R factor of the weighted ``[X, y]``, centred exactly by pairwise
    updates of the means (module docstring); passes 2+ evaluate the residual of the answer
    in extended precision and correct it (at most ``MAX_REFINE`` times), so that RSS,
    gradient and coefficients agree with the in-memory QR path.  Memory: a few copies of
    one block (its checked copy and the QR work array) plus ``O(p^2 log(blocks))`` for the
    pending R factors, whatever the number of rows (measured by
    ``benchmarks/out_of_core.py``: 192 MB traced at 5e6 and at 5e7 rows for 64 MB blocks).  Leverage, Cook's distance and the sandwich covariances need
    per-row quantities and are not offered here.

    References
    ----------
    Demmel, Grigori, Hoemmen & Langou (2012), SIAM J. Sci. Comput. 34, A206-A239 (TSQR).
    Chan, Golub & LeVeque (1983), The American Statistician 37, 242-247 (pairwise means).
    Bjorck (1987), Linear Algebra Appl. 88/89, 31-48 (corrected semi-normal equations).
    """
    intercept = _check_flag(intercept, "intercept")
    lam = check_nonnegative(l2, "l2")
    run = _runner(source, X, y, weights)
    part = run.reduce(_factor_kernel, _merge_factors, (intercept,), (intercept,))
    p = run.spec.p
    names_t = check_names(names, p, run.names)
    n_pos, n_rows = part["n_pos"], part["n_rows"]
    if n_pos == 0:
        raise InputError("weights are zero in every block; at least one row needs a positive weight")
    W, mean, R = part["W"], part["mean"], part["R"]
    off = int(intercept)
    k_max = p + off
    if lam == 0 and n_pos < k_max:
        raise InputError(
            f"X has {n_pos} rows with positive weight but the model has {k_max} parameters; "
            "add rows, drop columns, or set l2 > 0"
        )
    ylo, yhi = part["lo"][p], part["hi"][p]
    if intercept and ylo == yhi:
        raise InputError(
            f"y is constant (every row with positive weight equals {ylo:g}); there is "
            "nothing to explain: check the target column"
        )
    if not intercept and ylo == 0 and yhi == 0:
        raise InputError("y is zero on every row with positive weight; check the target column")

    sol = _solve_factor(R, W, mean, part["lo"][:p], part["hi"][:p], lam, intercept, names_t, n_rows)
    beta, b0 = sol["beta"], sol["b0"]
    xbar = mean[:p] if intercept else np.zeros(p)
    steps, last = 0, math.inf
    while True:
        res = run.reduce(_residual_kernel, _add, (b0, beta))
        rho, gx = float(res["rho"]), res["gx"].astype(float)
        rhs = gx - lam * beta - (xbar * rho if intercept else 0.0)
        dbeta = sol["solve"](rhs)
        db0 = rho / W - float(xbar @ dbeta) if intercept else 0.0
        # componentwise: an intercept far larger than the slopes must not hide their digits
        theta, dtheta = np.r_[b0, beta][1 - off :], np.r_[db0, dbeta][1 - off :]
        size = float(np.max(np.abs(dtheta) / np.maximum(np.abs(theta), np.finfo(float).tiny)))
        if size <= 4 * _EPS or steps == MAX_REFINE or size > 0.5 * last:
            break
        beta, b0, last = beta + dbeta, b0 + db0, size
        steps += 1
    rss = float(res["rss"])
    tss = float(R[:, p] @ R[:, p])  # about the mean with an intercept, about 0 without
    grad = np.concatenate([[-rho] if intercept else [], -gx + lam * beta])
    if sol["cond"] > ILL_CONDITIONED:
        warn_caller(
            f"the scaled design is ill-conditioned (condition number {sol['cond']:.3g}); it was solved "
            f"by TSQR with {steps} refinement step(s), but expect only about "
            f"{max(0.0, 16 - math.log10(sol['cond'])):.0f} correct digits",
            IllConditionedWarning,
        )
    message = (
        f"solved by TSQR (Householder R factor of each block, reduced pairwise) with {steps} "
        f"refinement step(s), residuals in extended precision; {run.passes} passes over the blocks"
    )
    return _linear_record(W, n_pos, p, intercept, lam, names_t, beta, b0, sol, xbar, rss, tss, grad,
                          1 + steps, message)


def _solve_factor(R: np.ndarray, W: float, mean: np.ndarray, lo: np.ndarray, hi: np.ndarray, lam: float,
                  intercept: bool, names: tuple[str, ...], n_rows: int) -> dict:
    """Coefficients, scaled inverse information and condition from the reduced R factor."""
    p = R.shape[1] - 1
    s = np.linalg.norm(R[:, :p], axis=0)
    raw = np.sqrt(s * s + (W * mean[:p] ** 2 if intercept else 0.0))
    tol = default_rank_tolerance(n_rows, p)
    constant = (lo == hi) if intercept else np.zeros(p, dtype=bool)
    zero = constant | (s <= tol * raw) | (s == 0)
    s = np.where(zero, 1.0, s)
    A = R / np.concatenate([s, [1.0]])
    A[:, :p][:, zero] = 0.0
    if lam > 0:
        A = np.vstack([A, np.hstack([np.diag(math.sqrt(lam) / s), np.zeros((p, 1))])])
        col_norm = np.sqrt(np.where(zero, 0.0, 1.0) + lam / s**2)
    else:
        col_norm = np.where(zero, 0.0, 1.0)
    R2 = np.linalg.qr(A, mode="r")[: p + 1]
    Rxx = R2[:p, :p]
    aliased = np.union1d(np.flatnonzero(zero & (lam == 0)),
                         aliased_columns(Rxx, np.maximum(col_norm, 1e-300), tol)).astype(int)
    if aliased.size:
        raise InputError(
            alias_sentences(aliased, zero, names, Rxx, s, intercept)
            + ". Drop the aliased column(s), or set l2 > 0 (the in-memory lintools.least_squares "
            "also offers rank_deficient='minimum_norm')"
        )
    theta = solve_upper(Rxx, R2[:p, p])
    beta = theta / s
    b0 = float(mean[p] - mean[:p] @ beta) if intercept else 0.0
    Rinv = inverse_upper(Rxx)

    def solve(rhs):
        """``(C + l2 I)^{-1} rhs`` with ``C + l2 I = D Rxx' Rxx D``."""
        return solve_upper(Rxx, solve_lower(Rxx.T, rhs / s)) / s

    return {"beta": beta, "b0": b0, "s": s, "G": Rinv @ Rinv.T, "cond": condition_number(Rxx), "solve": solve}


def _linear_record(W: float, n_pos: int, p: int, intercept: bool, lam: float, names: tuple[str, ...],
                   beta: np.ndarray, b0: float, sol: dict, xbar: np.ndarray, rss: float, tss: float,
                   grad: np.ndarray, iterations: int, message: str) -> LinearFit:
    """The :class:`LinearFit` of a full-rank fit (the statistics of lintools.least_squares)."""
    off = int(intercept)
    k = p + off
    df = _residual_df(W, k, "case", n_pos)
    sigma2 = rss / df
    r2 = 1.0 - rss / tss
    s = sol["s"]
    Bz = np.zeros((k, k))
    if intercept:
        Bz[0, 0] = 1.0 / W
    Bz[off:, off:] = sol["G"]
    Vz = sigma2 * Bz
    V = caller_covariance(Vz, xbar, s, intercept)
    se = np.sqrt(np.clip(np.diag(V), 0.0, None))
    f_df1 = float(p)
    try:
        u = np.linalg.solve(np.linalg.cholesky(Vz[off:, off:]), beta * s)
        fstat = float(u @ u) / f_df1
    except np.linalg.LinAlgError:
        fstat = float("nan")
    f_p = float(dist.f_sf(fstat, f_df1, df)) if np.isfinite(fstat) else float("nan")
    loglik = -0.5 * W * (math.log(2.0 * math.pi * rss / W) + 1.0) if rss > 0 else float("inf")
    conv = Convergence(
        converged=True, iterations=int(iterations), gradient_norm=float(np.max(np.abs(grad))),
        objective=0.5 * rss + 0.5 * lam * float(beta @ beta), solver="tsqr", message=message,
    )
    return LinearFit(
        coefficients=beta, intercept=float(b0), standard_errors=se[off:],
        intercept_standard_error=float(se[0]) if intercept else None, covariance=V,
        log_likelihood=loglik, deviance=rss, aic=-2.0 * loglik + 2.0 * (k + 1),
        bic=-2.0 * loglik + math.log(W) * (k + 1), n_observations=W, names=names, convergence=conv,
        with_intercept=bool(intercept), l2=lam, residual_standard_error=math.sqrt(sigma2),
        r_squared=r2, adjusted_r_squared=1.0 - (1.0 - r2) * (W - off) / df, f_statistic=fstat,
        f_p_value=f_p, f_degrees_of_freedom=(f_df1, float(df)), degrees_of_freedom=float(df),
        rank=int(k), covariance_type="classical", weight_type="case",
        condition_number=float(sol["cond"]), aliased=(), target="y",
    )


# ---------------------------------------------------------------------------------------
# Logistic regression
# ---------------------------------------------------------------------------------------
