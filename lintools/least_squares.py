"""Least squares with case weights, ridge, and full inference.

Objective (``w`` case weights, ``l2 >= 0``; the intercept ``b`` is never penalised)::

    minimise  1/2 * sum_i w_i (y_i - b - x_i' beta)^2  +  l2/2 * |beta|^2

Two paths compute the fit; a test of conditioning chooses between them.  Problems with
at most ``_gram.SMALL_PROBLEM`` entries always take the accurate path.

Fast path: the Gram matrix (:mod:`lintools._gram`).  One blocked pass over the rows
accumulates the Gram matrix of the shifted, weighted columns and the residual of a
starting value fitted on a subsample.  The pass uses symmetric rank-k updates and never
copies X whole.  Then come a Cholesky factorisation, the condition number of the scaled
design, and a corrected step: the corrected semi-normal equations (Bjorck 1987).  A
second blocked pass evaluates the residual of the answer in float64.  Its correction
certifies the answer, and the pass also gives the RSS, the gradient and, only on
request, the sandwich "meat" and the leverages.  The path is taken only when the scaled
condition number is at most ``_gram.KAPPA_MAX`` and the worst-case contraction of the
refinement is small; the certificate must also be met.  Otherwise the fit takes the
accurate path below.

Accurate path: QR.  With an intercept the columns are centred at their weighted means
(which removes the intercept from the factorisation exactly), rows are multiplied by
``sqrt(w_i)``, and every column is scaled to unit length.  The ridge term enters as
``p`` extra rows ``sqrt(l2) / s_j`` (augmentation), so the penalised problem is an
ordinary least-squares problem.  Householder QR (LAPACK ``dgeqrf`` through
``numpy.linalg.qr``) of that matrix gives the solution; then one step of iterative
refinement recomputes the residual in extended precision (``numpy.longdouble``, 80-bit
on x86-64 Linux; plain float64 where the platform has nothing wider) and solves for a
correction with the same factors.  The refinement works on the augmented system
``[I M; M' 0][r; theta] = [c; 0]`` in the original coordinates (Bjorck 1967), so it also
recovers digits when the residual is large, which plain refinement of the solution
(Golub & Wilkinson 1966) does not; at most ``MAX_REFINE`` steps are taken.

Rank.  Column ``j`` is aliased when the part of its scaled, centred column orthogonal
to the columns before it has length at most ``tol = max(n, p) * eps`` (unit column
length after scaling), and a column that is constant on the rows with positive weight is
aliased with the intercept.  The earliest columns of a dependent set are kept.  A
constant or aliased column always sends the fit to the QR path, which names it.

References
----------
Golub, G. H. & Wilkinson, J. H. (1966). Note on the iterative refinement of least
squares solution. Numerische Mathematik 9, 139-148.
Bjorck, A. (1967). Iterative refinement of linear least squares solutions I. BIT 7,
257-278.
Bjorck, A. (1987). Stability analysis of the method of seminormal equations for linear
least squares problems. Linear Algebra and its Applications 88/89, 31-48.
Bjorck, A. (1996). Numerical Methods for Least Squares Problems. SIAM.
White, H. (1980). A heteroskedasticity-consistent covariance matrix estimator and a
direct test for heteroskedasticity. Econometrica 48, 817-838.
MacKinnon, J. G. & White, H. (1985). Some heteroskedasticity-consistent covariance
matrix estimators with improved finite sample properties. J. Econometrics 29, 305-325.
Cook, R. D. (1977). Detection of influential observation in linear regression.
Technometrics 19, 15-18.
"""

from __future__ import annotations

import math
from typing import Any, Sequence

import numpy as np

from . import _distributions as dist
from . import _gram
from ._errors import IllConditionedWarning, InputError, warn_caller
from ._records import Convergence, LinearFit
from ._threads import whole_blas, with_row_threads
from ._validate import (
    as_matrix,
    check_finite,
    as_vector,
    as_weights,
    check_choice,
    check_names,
    check_nonnegative,
)
from .linalg import (
    aliased_columns,
    condition_number,
    default_rank_tolerance,
    inverse_upper,
    solve_lower,
    solve_upper,
    unstandardise,
)

__all__ = ["least_squares"]

COVARIANCE_TYPES = ("classical", "HC0", "HC1", "HC2", "HC3")
#: Above this scaled condition number (1 / sqrt(eps)) a warning reports the digits at risk.
ILL_CONDITIONED = 1.0 / math.sqrt(np.finfo(float).eps)
_EXTENDED_DIGITS = -math.log10(float(np.finfo(np.longdouble).eps))


def _target_name(y: Any) -> str:
    name = getattr(y, "name", None)
    return str(name) if isinstance(name, str) and name else "y"


def alias_sentences(aliased: np.ndarray, zero: np.ndarray, names: tuple[str, ...], R: np.ndarray,
                    s: np.ndarray, intercept: bool) -> str:
    """``"X is rank deficient: ..."``, one clause per aliased column (constant, or a combination)."""
    keep = [j for j in range(R.shape[1]) if j not in set(aliased)]
    lines = []
    for j in aliased:
        if zero[j]:
            what = "the intercept" if intercept else "zero"
            lines.append(f"column {j} ('{names[j]}') is constant on the rows used; it is aliased with {what}")
        else:
            lines.append(_describe_alias(j, names, R, keep, s, intercept))
    return "X is rank deficient: " + "; ".join(lines)


def _describe_alias(j, names, R, keep, xbar_scale, with_intercept):
    """A sentence saying what column j is a combination of."""
    before = [i for i in keep if i < j]
    parts = []
    if before:
        sub = R[np.ix_(before, before)]
        c = solve_upper(sub, R[before, j])
        c = c * xbar_scale[j] / xbar_scale[before]
        big = np.abs(c) > 1e-8 * max(np.abs(c).max(), 1e-300)
        parts = [f"{c[t]:+.6g}*{names[before[t]]}" for t in np.flatnonzero(big)]
    rhs = " ".join(parts) if parts else "0"
    const = " + constant" if with_intercept else ""
    return f"column {j} ('{names[j]}') = {rhs}{const} (numerically)"


@with_row_threads
def least_squares(
    X: Any,
    y: Any,
    *,
    weights: Any = None,
    intercept: bool = True,
    l2: float = 0.0,
    covariance: str = "classical",
    names: Sequence[str] | None = None,
    weight_type: str = "case",
    rank_deficient: str = "raise",
    diagnostics: bool = False,
) -> LinearFit:
    r"""Fit a linear model by weighted (and optionally ridge-penalised) least squares.

    .. math::

        \min_{b,\beta}\; \tfrac12 \sum_i w_i (y_i - b - x_i^\top\beta)^2
        + \tfrac{\lambda}{2}\lVert\beta\rVert_2^2 ,\qquad \lambda = \texttt{l2}.

    Parameters
    ----------
    X : array-like, shape (n, p)
        Design without the intercept column. DataFrame-like column labels become names.
    y : array-like, shape (n,)
        Response.
    weights : array-like, shape (n,), optional
        Non-negative weights with a positive total (default: all 1).
    intercept : bool
        Fit an unpenalised intercept (default True).
    l2 : float
        Ridge strength ``lambda >= 0`` on the slopes.
    covariance : {"classical", "HC0", "HC1", "HC2", "HC3"}
        ``"classical"``: ``s^2 (X'WX + lambda I)^{-1}``.  ``"HC0"``..``"HC3"``: the White
        (1980) and MacKinnon & White (1985) sandwich estimators.
    names : sequence of str, optional
        Coefficient names (default: DataFrame column labels, else ``x1..xp``).
    weight_type : {"case", "precision"}
        ``"case"`` (default): weights count observations; a row of weight 2 is the same as
        two copies of the row, the number of observations is ``sum(w)``, and every
        statistic equals that of the expanded data.  ``"precision"``: weights are inverse
        variances (analytic weights); observations are the rows with ``w > 0``.  The
        coefficients are the same either way; degrees of freedom, standard errors and the
        log-likelihood differ.
    rank_deficient : {"raise", "minimum_norm"}
        A rank-deficient design raises :class:`InputError` naming the aliased columns
        (default), or returns the minimum-norm solution with ``rank < p`` recorded.
    diagnostics : bool
        Also compute leverage (hat values) and Cook's distance per row.

    Returns
    -------
    LinearFit

    Notes
    -----
    The fit is computed by the Gram matrix (Cholesky, corrected semi-normal equations)
    when X has more than ``2**16`` entries, the scaled condition number is at most
    ``1e3`` and the refinement is certified to reach the rounding floor; otherwise by
    Householder QR with refinement in extended precision.  ``convergence.message`` and
    ``convergence.solver`` ("cholesky" or "qr") say which; ``condition_number`` is
    reported either way.

    Residual degrees of freedom are ``N - k`` with ``N`` the number of observations
    and ``k`` the number of estimated mean parameters (rank, plus the intercept).  The
    log-likelihood is the Gaussian one at the maximum-likelihood variance ``RSS/N``
    (plus ``1/2 sum log w_i`` for precision weights); AIC and BIC count ``k + 1``
    parameters (the variance included).  Under a ridge penalty the covariance is the
    inverse penalised information (a Bayesian reading) and the intervals are approximate.
    """
    return _fit(
        X, y, weights=weights, intercept=intercept, l2=l2, covariance=covariance, names=names,
        weight_type=weight_type, rank_deficient=rank_deficient, diagnostics=diagnostics,
    )


def _fit(
    X, y, *, weights=None, intercept=True, l2=0.0, covariance="classical", names=None,
    weight_type="case", rank_deficient="raise", diagnostics=False, method="auto", block_rows=None,
):
    """:func:`least_squares` with two switches for tests.

    ``method``: "auto" (the documented choice), "qr" (skip the fast path) or "gram" (try
    the fast path whatever the size; its conditioning test and certificate still decide).
    ``block_rows``: rows per block on the fast path.
    """
    # finiteness of X is left to the Gram pass (a NaN or inf makes its sums non-finite and
    # sends the fit to the QR path), so large fits read X once less; QR checks it first
    Xa, found = as_matrix(X, "X", check_finite=False)
    n, p = Xa.shape
    ya = as_vector(y, "y", n)
    # unit weights are kept implicit (None): no arrays of length n are made for them
    w = None if weights is None else as_weights(weights, n)
    if w is not None and bool(np.all(w == 1.0)):
        w = None
    lam = check_nonnegative(l2, "l2")
    check_choice(covariance, "covariance", COVARIANCE_TYPES)
    check_choice(weight_type, "weight_type", ("case", "precision"))
    check_choice(rank_deficient, "rank_deficient", ("raise", "minimum_norm"))
    check_choice(diagnostics, "diagnostics", (True, False))
    if not isinstance(intercept, (bool, np.bool_)):
        raise InputError(f"intercept must be True or False; got {intercept!r}")
    names_t = check_names(names, p, found)
    target = _target_name(y)

    pos = None if w is None else w > 0
    n_pos = n if pos is None else int(pos.sum())
    wsum = float(n) if w is None else float(w.sum())
    n_obs = wsum if weight_type == "case" else float(n_pos)
    k_max = p + int(intercept)
    if lam == 0 and n_pos < k_max:
        raise InputError(
            f"X has {n_pos} rows with positive weight but the model has {k_max} parameters; "
            "add rows, drop columns, or set l2 > 0"
        )
    yp = ya if pos is None else ya[pos]
    if intercept and np.ptp(yp) == 0:
        raise InputError(
            f"y is constant (every row with positive weight equals {yp[0]:g}); there is "
            "nothing to explain: check the target column"
        )
    if not intercept and not np.any(yp):
        raise InputError("y is zero on every row with positive weight; check the target column")
    del yp

    df_full = n_obs - k_max
    sol = None
    use_gram = method == "gram" or (method == "auto" and n * p > _gram.SMALL_PROBLEM)
    if use_gram and df_full > 0:
        # a NaN, an inf or an overflow shows as non-finite sums: the path then declines
        # (returns None) and the QR path names the entry, so its arithmetic warnings are noise
        with np.errstate(invalid="ignore", over="ignore", divide="ignore"):
            sol = _gram.solve_by_gram(
                Xa, ya, w, n_pos, lam, bool(intercept), default_rank_tolerance(n, p),
                covariance=covariance, weight_type=weight_type, diagnostics=diagnostics,
                block_rows=block_rows,
            )
    if sol is not None:
        fit = _from_gram(sol, p)
    else:
        check_finite(Xa, "X", found)
        w_all = np.ones(n) if w is None else w
        with whole_blas():  # one LAPACK factorisation: the BLAS's own threads split it
            fit = _qr_path(
                Xa, ya, w_all, lam, intercept, names_t, rank_deficient, covariance, weight_type,
                n_obs, wsum, w_all > 0,
            )
    beta, b0, rank, aliased = fit["beta"], fit["b0"], fit["rank"], fit["aliased"]
    full_rank, s, xbar, G, cond = fit["full_rank"], fit["s"], fit["xbar"], fit["G"], fit["cond"]
    rss, tss, e, hat = fit["rss"], fit["tss"], fit["e"], fit["hat"]

    # ---- summary statistics ------------------------------------------------------------
    k = rank + int(intercept)
    df = _residual_df(n_obs, k, weight_type, n_pos)
    sigma2 = rss / df
    r2 = 1.0 - rss / tss
    adj = 1.0 - (1.0 - r2) * (n_obs - int(intercept)) / df

    # ---- covariance in (centred intercept, scaled slopes) coordinates ------------------
    Bz = np.zeros((k_max, k_max))
    off = int(intercept)
    if intercept:
        Bz[0, 0] = 1.0 / wsum
    Bz[off:, off:] = G
    if covariance == "classical":
        Vz = sigma2 * Bz
    else:
        meat = fit["meat_z"]
        if meat is None:
            w_all = np.ones(n) if w is None else w
            meat = _meat(covariance, Xa, xbar, s, intercept, w_all, e, hat, weight_type)
        elif fit["leverage_one_row"] is not None:
            _refuse_leverage_one(covariance, fit["leverage_one_row"])
        Vz = Bz @ meat @ Bz
        if covariance == "HC1":
            Vz = Vz * (n_obs / df)
    V = caller_covariance(Vz, xbar, s, intercept)
    se_all = np.sqrt(np.clip(np.diag(V), 0.0, None))

    # ---- overall F: Wald F on the slopes with the chosen covariance ----------------
    f_df1 = float(rank if intercept else k)
    if full_rank:
        Vg = Vz[off:, off:]
        theta = beta * s
        try:
            L = np.linalg.cholesky(Vg)
            u = np.linalg.solve(L, theta)
            fstat = float(u @ u) / f_df1
        except np.linalg.LinAlgError:
            fstat = float("nan")
    else:
        fstat = ((tss - rss) / f_df1) / sigma2
    f_p = float(dist.f_sf(fstat, f_df1, df)) if np.isfinite(fstat) else float("nan")

    # ---- likelihood ------------------------------------------------------------------
    if rss > 0:
        loglik = -0.5 * n_obs * (math.log(2.0 * math.pi * rss / n_obs) + 1.0)
        if weight_type == "precision" and w is not None:
            loglik += 0.5 * float(np.log(w[pos]).sum())
    else:
        loglik = float("inf")
    n_par = k + 1
    aic = -2.0 * loglik + 2.0 * n_par
    bic = -2.0 * loglik + math.log(n_obs) * n_par

    grad = fit["grad"]
    objective = 0.5 * rss + 0.5 * lam * float(beta @ beta)
    conv = Convergence(
        converged=True,
        iterations=fit["iterations"],
        gradient_norm=float(np.max(np.abs(grad))) if grad.size else 0.0,
        objective=objective,
        solver=fit["solver"],
        message=fit["message"],
    )

    leverage = cooks = None
    if diagnostics:
        leverage = hat.copy()
        with np.errstate(divide="ignore", invalid="ignore"):
            cooks = (1.0 if w is None else w) * e * e * hat / (k * sigma2 * (1.0 - hat) ** 2)
    return LinearFit(
        coefficients=beta,
        intercept=float(b0),
        standard_errors=se_all[off:],
        intercept_standard_error=float(se_all[0]) if intercept else None,
        covariance=V,
        log_likelihood=loglik,
        deviance=rss,
        aic=aic,
        bic=bic,
        n_observations=n_obs,
        names=names_t,
        convergence=conv,
        with_intercept=bool(intercept),
        l2=lam,
        residual_standard_error=math.sqrt(sigma2),
        r_squared=r2,
        adjusted_r_squared=adj,
        f_statistic=fstat,
        f_p_value=f_p,
        f_degrees_of_freedom=(f_df1, float(df)),
        degrees_of_freedom=float(df),
        rank=int(k),
        covariance_type=covariance,
        weight_type=weight_type,
        condition_number=float(cond),
        aliased=tuple(names_t[j] for j in aliased),
        leverage=leverage,
        cooks_distance=cooks,
        target=target,
    )


def caller_covariance(Vz: np.ndarray, xbar: np.ndarray, s: np.ndarray, intercept: bool) -> np.ndarray:
    """The covariance of ``(b, beta)`` from that of the centred, scaled coordinates
    ``z = (b + xbar' beta, s * beta)``: ``T Vz T'`` with ``theta = T z``, symmetric to the last bit."""
    T = unstandardise(xbar, s, intercept)
    V = T @ Vz @ T.T
    return 0.5 * (V + V.T)


def _residual_df(n_obs, k, weight_type, n_pos):
    df = n_obs - k
    if df <= 0:
        raise InputError(
            f"the model has {k} estimated parameters but only {n_obs:g} observations; the "
            "residual variance needs more observations than parameters"
            + (" (case weights count observations: pass weight_type='precision' for relative weights)" if weight_type == "case" and n_pos > k else "")
        )
    return df


def _refuse_leverage_one(kind, row):
    raise InputError(
        f"covariance='{kind}' is undefined: row {row} has leverage 1 (it alone "
        "determines a coefficient); use covariance='HC0' or 'HC1', or drop that row"
    )


def _from_gram(sol, p):
    """The fast path's answer in the form the record builder uses."""
    err = f"{sol.error_estimate:.1e}"
    steps = "one corrected step" if sol.steps == 1 else f"{sol.steps} corrected steps"
    message = (
        f"solved directly: Cholesky of the Gram matrix (semi-normal equations) with {steps} "
        f"from a subsample start, residuals in float64; estimated relative error {err}"
    )
    return {
        "beta": sol.beta,
        "b0": sol.intercept,
        "rank": p,
        "aliased": np.zeros(0, dtype=int),
        "full_rank": True,
        "s": sol.scale,
        "xbar": sol.mean,
        "G": sol.cov_scaled,
        "cond": sol.condition,
        "rss": sol.rss,
        "tss": sol.tss,
        "e": sol.residuals,
        "hat": sol.hat,
        "meat_z": sol.meat_z,
        "leverage_one_row": sol.leverage_one_row,
        "grad": sol.gradient,
        "iterations": sol.steps,
        "solver": "cholesky",
        "message": message,
    }


def _qr_path(Xa, ya, w, lam, intercept, names_t, rank_deficient, covariance, weight_type, n_obs, wsum, pos):
    """The accurate path: Householder QR of the centred, weighted, scaled design."""
    n, p = Xa.shape
    sw = np.sqrt(w)
    if intercept:
        xbar = (w @ Xa) / wsum
        ybar = float(w @ ya) / wsum
    else:
        xbar = np.zeros(p)
        ybar = 0.0
    A = Xa - xbar
    A *= sw[:, None]
    rhs_y = sw * (ya - ybar)
    raw_norm = np.linalg.norm(Xa * sw[:, None], axis=0)
    s = np.linalg.norm(A, axis=0)
    tol = default_rank_tolerance(n, p)
    if intercept:
        constant = np.ptp(Xa[pos], axis=0) == 0
    else:
        constant = np.zeros(p, dtype=bool)
    zero = constant | (s <= tol * raw_norm) | (s == 0)
    A[:, zero] = 0.0
    s = np.where(zero, 1.0, s)
    A /= s

    if lam > 0:
        A = np.vstack([A, np.diag(math.sqrt(lam) / s)])
        rhs = np.concatenate([rhs_y, np.zeros(p)])
        col_norm = np.sqrt(np.where(zero, 0.0, 1.0) + lam / s**2)
    else:
        rhs = rhs_y
        col_norm = np.where(zero, 0.0, 1.0)
    Q, R = np.linalg.qr(A, mode="reduced")
    aliased = np.union1d(np.flatnonzero(zero & (lam == 0)), aliased_columns(R, np.maximum(col_norm, 1e-300), tol))
    aliased = aliased.astype(int)

    if aliased.size and rank_deficient == "raise":
        raise InputError(
            alias_sentences(aliased, zero, names_t, R, s, intercept)
            + ". Drop the aliased column(s), or pass rank_deficient='minimum_norm' for the minimum-norm solution"
        )

    full_rank = aliased.size == 0
    if full_rank:
        beta, b0, G, cond, h_q, refine_steps = _solve_full_rank(Q, R, rhs, s, Xa, ya, w, sw, xbar, lam, intercept, n)
        rank = p
    else:
        beta, b0, G, cond, h_q, rank = _solve_minimum_norm(A[:n], rhs_y, s, xbar, ybar, intercept, aliased)
        refine_steps = 0
        s = np.ones(p)
    if full_rank and cond > ILL_CONDITIONED:
        warn_caller(
            f"the scaled design is ill-conditioned (condition number {cond:.3g}); it was solved by "
            f"QR with {refine_steps} refinement step(s) in extended precision, but expect only about "
            f"{max(0.0, _EXTENDED_DIGITS - math.log10(cond)):.0f} correct digits",
            IllConditionedWarning,
        )
    e = _residuals(Xa, ya, beta, b0)
    rss = float(w @ (e * e))
    if intercept:
        tss = float(w @ (ya - ybar) ** 2)
    else:
        tss = float(w @ (ya * ya))
    # the residual df is checked before any covariance work (the front repeats it)
    _residual_df(n_obs, rank + int(intercept), weight_type, int(pos.sum()))
    hat = h_q + (w / wsum if intercept else 0.0)
    grad = np.concatenate([[-(w @ e)] if intercept else [], -(Xa.T @ (w * e)) + lam * beta])
    if full_rank:
        message = f"solved directly: Householder QR of the scaled design, {refine_steps} refinement step(s)"
    else:
        message = (
            f"rank {rank} < {p}: minimum-norm solution; the coefficients of aliased columns "
            "are not identified and only their estimable combinations are meaningful"
        )
    return {
        "beta": beta,
        "b0": b0,
        "rank": rank,
        "aliased": aliased,
        "full_rank": full_rank,
        "s": s,
        "xbar": xbar,
        "G": G,
        "cond": cond,
        "rss": rss,
        "tss": tss,
        "e": e,
        "hat": hat,
        "meat_z": None,
        "leverage_one_row": None,
        "grad": grad,
        "iterations": 1 + refine_steps if full_rank else 1,
        "solver": "qr",
        "message": message,
    }


def _residuals(Xa, ya, beta, b0):
    """Residuals ``y - b0 - X beta`` accumulated in extended precision, rounded to float64."""
    ld = np.longdouble
    fitted = Xa.astype(ld) @ beta.astype(ld) + ld(b0)
    return (ya.astype(ld) - fitted).astype(float)


#: Refinement stops when the correction is below this relative size, or after MAX_REFINE steps.
MAX_REFINE = 3
_BLOCK_ROWS = 65536


def _extended_residual(Xa, ya, sw, theta, intercept, lam, r):
    """``f = c - r - M theta`` and ``g = -M' r`` accumulated in ``numpy.longdouble``.

    ``M`` is the weighted design ``sqrt(w) * [1, X]`` (plus the ridge rows
    ``sqrt(l2) * [0, I]``) in the ORIGINAL coordinates, so refinement converges to the
    solution of the problem as given, not of its centred and scaled copy.  Rows are
    processed in blocks so that no extended-precision copy of X is ever whole.
    """
    ld = np.longdouble
    n, p = Xa.shape
    off = int(intercept)
    th = theta.astype(ld)
    f = np.empty(r.shape[0], dtype=ld)
    g = np.zeros(p + off, dtype=ld)
    for lo in range(0, n, _BLOCK_ROWS):
        hi = min(n, lo + _BLOCK_ROWS)
        Xb = Xa[lo:hi].astype(ld)
        swb = sw[lo:hi].astype(ld)
        fitted = Xb @ th[off:]
        if intercept:
            fitted = fitted + th[0]
        rb = r[lo:hi]
        f[lo:hi] = swb * ya[lo:hi].astype(ld) - rb - swb * fitted
        wr = swb * rb
        g[off:] -= Xb.T @ wr
        if intercept:
            g[0] -= wr.sum()
    if lam > 0:
        root = ld(math.sqrt(lam))
        f[n:] = -r[n:] - root * th[off:]
        g[off:] -= root * r[n:]
    return f, g


def _solve_full_rank(Q, R, rhs, s, Xa, ya, w, sw, xbar, lam, intercept, n):
    """QR solution, then refinement on the augmented system (Bjorck 1967).

    The augmented system ``[I M; M' 0] [r; theta] = [c; 0]`` is refined with residuals in
    extended precision; each correction is solved with the QR factors of the centred,
    scaled design, whose intercept column ``sqrt(w)`` is orthogonal to the centred columns.
    """
    gamma = solve_upper(R, Q.T @ rhs)
    off = int(intercept)
    p = s.shape[0]
    # map between z = (centred intercept, scaled slopes) and theta = (b0, beta)
    T = np.zeros((p + off, p + off))
    T[off:, off:] = np.diag(1.0 / s)
    if intercept:
        T[0, 0] = 1.0
        T[0, off:] = -xbar / s
        norm_sw = float(np.linalg.norm(sw))
        q0 = sw / norm_sw
        # the centred intercept is the weighted mean of y: (q0' sqrt(w) y) / |sqrt(w)|
        z = np.concatenate([[float(sw @ (sw * ya)) / norm_sw**2], gamma])
    else:
        z = gamma
    theta = T @ z
    ld = np.longdouble
    r = np.zeros(rhs.shape[0], dtype=ld)
    f, g = _extended_residual(Xa, ya, sw, theta, intercept, lam, r)
    r = f  # the residual of the QR solution, in extended precision
    steps = 0
    for steps in range(1, MAX_REFINE + 1):
        f, g = _extended_residual(Xa, ya, sw, theta, intercept, lam, r)
        f64 = f.astype(float)
        gz = T.T @ g.astype(float)
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
        dtheta = T @ dz
        theta = (theta.astype(ld) + dtheta.astype(ld)).astype(float)
        r = r + dr.astype(ld)
        if np.max(np.abs(dtheta)) <= 4 * np.finfo(float).eps * max(np.max(np.abs(theta)), 1e-300):
            break
    b0 = float(theta[0]) if intercept else 0.0
    beta = theta[off:].copy()
    Rinv = inverse_upper(R)
    G = Rinv @ Rinv.T
    h_q = np.einsum("ij,ij->i", Q[:n], Q[:n])
    return beta, b0, G, condition_number(R), h_q, steps


def _solve_minimum_norm(A, rhs_y, s, xbar, ybar, intercept, aliased):
    """Minimum-norm solution in the original (unscaled) coordinates by truncated SVD."""
    p = A.shape[1]
    rank = p - aliased.size
    Au = A * s  # undo the column scaling (rows already weighted and centred)
    U, sv, Vt = np.linalg.svd(Au, full_matrices=False)
    Ur, svr, Vr = U[:, :rank], sv[:rank], Vt[:rank].T
    beta = Vr @ ((Ur.T @ rhs_y) / svr)
    b0 = (ybar - float(xbar @ beta)) if intercept else 0.0
    G = (Vr / svr**2) @ Vr.T
    h_q = np.einsum("ij,ij->i", Ur, Ur)
    cond = float(svr[0] / svr[-1])
    return beta, b0, G, cond, h_q, rank


def _meat(kind, Xa, xbar, s, intercept, w, e, hat, weight_type):
    """HC0-HC3 meat ``Z' diag(m) Z`` in the centred, scaled coordinates (QR path)."""
    if weight_type == "case":
        m = w * e * e
        lev = np.divide(hat, w, out=np.zeros_like(hat), where=w > 0)
    else:
        m = w * w * e * e
        lev = hat
    if kind in ("HC2", "HC3"):
        used = w > 0
        if np.any(lev[used] >= 1.0 - 1e-12):
            _refuse_leverage_one(kind, int(np.flatnonzero(used & (lev >= 1.0 - 1e-12))[0]))
        power = 1 if kind == "HC2" else 2
        m = m / (1.0 - lev) ** power
    Z = (Xa - xbar) / s
    if intercept:
        Z = np.hstack([np.ones((Xa.shape[0], 1)), Z])
    return Z.T @ (Z * m[:, None])
