"""Least squares with case weights, ridge, and full inference.

Objective (``w`` case weights, ``l2 >= 0``; the intercept ``b`` is never penalised)::

    minimise  1/2 * sum_i w_i (y_i - b - x_i' beta)^2  +  l2/2 * |beta|^2

Units.  Before any arithmetic y, the weights and every column are divided by powers of
two (exact) so that their largest entries lie in ``[1, 2)``, and the answer is mapped
back exactly at the end (:mod:`lintools.models.lsq_scale`).  Multiplying y, the weights or a
column by a constant therefore changes the answer only as the mathematics says; a figure
whose true value lies beyond the largest float64 number is refused with an
:class:`InputError` that names it and the input whose scale drives it.

Two paths compute the fit; a test of conditioning chooses between them.  Problems with
at most ``_gram.SMALL_PROBLEM`` entries always take the accurate path.

Fast path: the Gram matrix (:mod:`lintools.models.lsq_gram`).  One blocked pass over the rows
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

Accurate path: QR (:mod:`lintools.models.lsq_qr`).  With an intercept the columns are centred
at their weighted means in two parts (the rounded mean, then the mean of what it left),
which removes the intercept from the factorisation to the last bit of each column's
spread, so a column far from zero (a time stamp) loses nothing; rows are multiplied by
``sqrt(w_i)``, and every column is scaled to unit length.  The ridge term enters as
``p`` extra rows ``sqrt(l2) / s_j`` (augmentation), so the penalised problem is an
ordinary least-squares problem.  Householder QR (LAPACK ``dgeqrf`` through
``numpy.linalg.qr``) of that matrix gives the solution; then one step of iterative
refinement recomputes the residual in extended precision (``numpy.longdouble``, 80-bit
on x86-64 Linux; plain float64 where the platform has nothing wider) and solves for a
correction with the same factors.  The refinement works on the augmented system
``[I M; M' 0][r; theta] = [c; 0]`` in centred coordinates (Bjorck 1967), so it also
recovers digits when the residual is large, which plain refinement of the solution
(Golub & Wilkinson 1966) does not; at most ``MAX_REFINE`` steps are taken.  The RSS, the
sandwich covariances, Cook's distance and the gradient use those centred residuals.

Rank.  Column ``j`` is aliased when the part of its scaled, centred column orthogonal
to the columns before it has length at most ``tol = max(n, p) * eps`` (unit column
length after scaling), and a column that is constant on the rows with positive weight,
or whose centred length is at most ``16 eps`` of its raw length (it varies only by
rounding: :data:`lintools.support.linalg.CONSTANT_TOLERANCE`), is aliased with the intercept.
The earliest columns of a dependent set are kept.  A constant or aliased column always
sends the fit to the QR path, which names it.  With ``rank_deficient="minimum_norm"`` the
coefficients that are not identified (their unit vector is not orthogonal to the null
space of the design) get NaN standard errors; the covariance is that of the
minimum-norm estimator, valid for estimable combinations.

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

from ..support import distributions as dist
from . import lsq_gram as _gram
from ..support.errors import InputError
from .lsq_qr import qr_path, refuse_leverage_one
from .lsq_scale import Units, scaled_sqrt, to_caller
from .records import Convergence, LinearFit
from .responses import target_name
from ..support.threads import whole_blas, with_row_threads
from ..support.validate import (
    as_matrix,
    check_finite,
    as_vector,
    as_weights,
    check_choice,
    check_flag,
    check_names,
    check_nonnegative,
)
from ..support.linalg import CONSTANT_TOLERANCE, unstandardise

__all__ = ["least_squares"]

COVARIANCE_TYPES = ("classical", "HC0", "HC1", "HC2", "HC3")


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
        statistic equals that of the expanded data (so ``w -> c w`` multiplies the
        observations by ``c``: the covariance scales by about ``1/c``, and the fit is refused
        when ``c sum(w)`` is not more than the parameters).  ``"precision"``: weights are
        inverse variances, ``Var(y_i) = sigma^2 / w_i`` (analytic weights); observations
        are the rows with ``w > 0``; ``w -> c w`` changes only the unit of ``sigma^2``
        (residual standard error times ``sqrt(c)``, deviance times ``c``; coefficients,
        standard errors, covariance and log-likelihood unchanged).  The coefficients are
        the same either way; degrees of freedom, standard errors and the log-likelihood
        differ.
    rank_deficient : {"raise", "minimum_norm"}
        A rank-deficient design raises :class:`InputError` naming the aliased columns
        (default), or returns the minimum-norm solution (smallest ``|beta|`` in the
        caller's units) with ``rank < p`` recorded and NaN standard errors for the
        coefficients that are not identified.
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

    Scale: y, the weights and each column are divided by powers of two before any
    arithmetic and the answer mapped back exactly, so ``y -> c y`` scales coefficients,
    standard errors and the residual standard error by ``c`` and variances by ``c^2``, and
    ``x_j -> c x_j`` gives the reparametrised fit; a reported figure beyond the float64
    range (for example the covariance of ``y * 1e300``) raises :class:`InputError` naming
    it and the input to rescale, and one below it rounds as float64 rounds (gradual
    underflow).  Shifted columns are centred in two parts: ``x_j -> x_j + 1e12`` changes
    the slopes, standard errors (every covariance type), leverage and Cook's distance in
    no more than the last few bits.

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
    w = None if weights is None else as_weights(weights, n)
    lam = check_nonnegative(l2, "l2")
    check_choice(covariance, "covariance", COVARIANCE_TYPES)
    check_choice(weight_type, "weight_type", ("case", "precision"))
    check_choice(rank_deficient, "rank_deficient", ("raise", "minimum_norm"))
    check_choice(diagnostics, "diagnostics", (True, False))
    intercept = check_flag(intercept, "intercept")
    names_t = check_names(names, p, found)
    target = target_name(y)

    pos = None if w is None else w > 0
    n_pos = n if pos is None else int(pos.sum())
    k_max = p + int(intercept)
    yp = ya if pos is None else ya[pos]
    refuse_degenerate(n_pos, k_max, lam, intercept, bool(np.ptp(yp) == 0), yp[0], not np.any(yp))
    del yp

    # units: y and the weights divided by powers of two (exact); the columns get theirs on
    # the path that solves (see lintools.models.lsq_scale)
    y1, ey = Units.response(ya)
    w1, ew = Units.weights(w)
    W1 = float(n) if w1 is None else float(w1.sum())
    n_obs = float(to_caller(W1, ew)) if weight_type == "case" else float(n_pos)
    if not math.isfinite(n_obs):
        raise InputError(
            f"the case weights add up to more than the largest float64 number (their largest is "
            f"{float(np.max(w)):.3g}); case weights count observations: divide them by a constant, "
            "or pass weight_type='precision' for relative weights"
        )
    lam_w = float(to_caller(lam, -ew))
    if not math.isfinite(lam_w):
        raise InputError(
            f"l2 = {lam:g} is beyond the float64 range against weights as small as these (largest "
            f"{float(np.max(w)):.3g}); the penalty would set every slope to 0: lower l2 or rescale the weights"
        )

    def residual_df(rank: int) -> float:
        return residual_degrees(n_obs, rank + int(intercept), weight_type, n_pos)

    sol = None
    use_gram = method == "gram" or (method == "auto" and n * p > _gram.SMALL_PROBLEM)
    if use_gram and n_obs - k_max > 0:
        # a NaN, an inf or an overflow shows as non-finite sums: the path then declines
        # (returns None) and the QR path names the entry, so its arithmetic warnings are noise
        with np.errstate(invalid="ignore", over="ignore", divide="ignore", under="ignore"):
            sol = _gram.solve_by_gram(
                Xa, y1, w1, n_pos, lam_w, intercept, CONSTANT_TOLERANCE,
                covariance=covariance, weight_type=weight_type, diagnostics=diagnostics,
                block_rows=block_rows, case_weights=w,
            )
    if sol is not None:
        fit = _from_gram(sol)
    else:
        check_finite(Xa, "X", found)
        with whole_blas():  # one LAPACK factorisation: the BLAS's own threads split it
            fit = qr_path(
                Xa, y1, np.ones(n) if w1 is None else w1, np.ones(n) if w is None else w, lam_w,
                intercept, names_t, rank_deficient, covariance, weight_type, residual_df,
            )
    units = Units(ey, ew, fit["col_exp"], names_t, target)
    return linear_record(fit, units, W1, n_obs, residual_df(fit["rank"]), w, lam, intercept, names_t, covariance,
                   weight_type, diagnostics, target)


def linear_record(fit, units, W1, n_obs, df, w, lam, intercept, names_t, covariance, weight_type, diagnostics, target):
    """The :class:`LinearFit` of a path's answer (in the units of ``units``), in the caller's units."""
    beta, b0, rank = fit["beta"], fit["b0"], fit["rank"]
    s, xbar, G = fit["s"], fit["xbar"], fit["G"]
    rss, tss, e, hat = fit["rss"], fit["tss"], fit["e"], fit["hat"]
    p = beta.shape[0]
    off = int(intercept)
    k = rank + off
    ey, ew = units.ey, units.ew
    columns = [str(j) for j in range(p)]
    case = weight_type == "case"
    df_m, df_e = math.frexp(df)

    # ---- summary statistics (scale-free) --------------------------------------------
    r2 = 1.0 - rss / tss
    adj = 1.0 - (1.0 - r2) * (n_obs - off) / df

    # ---- covariance: core (unit z coordinates) times 2**es --------------------------
    Bz = np.zeros((p + off, p + off))
    if intercept:
        Bz[0, 0] = 1.0 / W1
    Bz[off:, off:] = G
    if covariance == "classical":
        core = (rss / df_m) * Bz
        es = -df_e
    else:
        if fit["leverage_one_row"] is not None:
            refuse_leverage_one(covariance, fit["leverage_one_row"])
        core = Bz @ fit["meat_z"] @ Bz
        es = -ew if case else 0
        if covariance == "HC1":
            core = core * (n_obs / df)

    # ---- overall F: Wald F on the slopes with the chosen covariance ----------------
    f_df1 = float(rank if intercept else k)
    fstat = float("nan")
    if rss > 0 and fit["full_rank"]:
        try:
            u = np.linalg.solve(np.linalg.cholesky(core[off:, off:]), beta * s)
            fstat = units.check("overall F statistic", float(u @ u) / f_df1, -es,
                                [("weights", 1.0 if case else 0.0)]).item()
        except np.linalg.LinAlgError:
            pass
    elif rss > 0:
        fstat = ((tss - rss) / f_df1) / (rss / df)
    f_p = float(dist.f_sf(fstat, f_df1, df)) if np.isfinite(fstat) else float("nan")

    # ---- the caller's units --------------------------------------------------------
    slopes_y = [("y", 1.0)] + [(c, -1.0) for c in columns]
    coefficients = units.check("coefficients", beta, ey - units.ex, slopes_y)
    b0_out = units.check("intercept", b0, ey, [("y", 1.0)]).item() if intercept else 0.0
    eth = units.theta(intercept)
    Vt = caller_covariance(core, xbar, s, intercept)
    weights_power = -1.0 if case else 0.0
    V = units.check("covariance of the coefficients", Vt, es + eth[:, None] + eth[None, :],
                    [("y", 2.0), ("weights", weights_power)] + [(c, -2.0) for c in columns])
    se_all = scaled_sqrt(np.clip(np.diag(Vt), 0.0, None), es + 2 * eth)
    if fit["identified"] is not None:
        se_all = np.where(fit["identified"], se_all, np.nan)
    lam1 = fit["lam1"]
    rss_exp = 2 * ey + ew
    square = [("y", 2.0), ("weights", 1.0)]
    deviance = units.check("residual sum of squares", rss, rss_exp, square).item()
    objective = units.check("objective", 0.5 * rss + 0.5 * float(np.sum(lam1 * beta * beta)), rss_exp, square).item()
    rse = float(scaled_sqrt(rss / df_m, rss_exp - df_e))
    if not math.isfinite(rse):
        units.check("residual standard error", rss / df_m, rss_exp - df_e, square)
    g_exp = ew + ey + np.concatenate([[0] * off, units.ex])
    grad = units.check("gradient", fit["grad"], g_exp,
                       [("y", 1.0), ("weights", 1.0)] + [(c, 1.0) for c in columns], underflow_ok=True)

    # ---- likelihood ------------------------------------------------------------------
    if rss > 0:
        log_rss = math.log(rss) + rss_exp * math.log(2.0)
        loglik = -0.5 * n_obs * (math.log(2.0 * math.pi) + log_rss - math.log(n_obs) + 1.0)
        if not case and w is not None:
            loglik += 0.5 * float(np.log(w[w > 0]).sum())
        if not math.isfinite(loglik):
            raise InputError(
                f"the log-likelihood of this fit is beyond the float64 range ({n_obs:.3g} observations); "
                "case weights count observations: divide them by a constant, or pass weight_type='precision'"
            )
    else:
        loglik = float("inf")
    n_par = k + 1
    aic = -2.0 * loglik + 2.0 * n_par
    bic = -2.0 * loglik + math.log(n_obs) * n_par

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
        w1 = 1.0 if fit.get("w1") is None else fit["w1"]
        with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
            cooks = (w1 * e * e / rss) * (df / k) * hat / (1.0 - hat) ** 2
    return LinearFit(
        coefficients=coefficients,
        intercept=b0_out,
        standard_errors=se_all[off:],
        intercept_standard_error=float(se_all[0]) if intercept else None,
        covariance=V,
        log_likelihood=loglik,
        deviance=deviance,
        aic=aic,
        bic=bic,
        n_observations=n_obs,
        names=names_t,
        convergence=conv,
        with_intercept=intercept,
        l2=lam,
        residual_standard_error=rse,
        r_squared=r2,
        adjusted_r_squared=adj,
        f_statistic=fstat,
        f_p_value=f_p,
        f_degrees_of_freedom=(f_df1, float(df)),
        degrees_of_freedom=float(df),
        rank=int(k),
        covariance_type=covariance,
        weight_type=weight_type,
        condition_number=float(fit["cond"]),
        aliased=tuple(names_t[j] for j in fit["aliased"]),
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


def refuse_degenerate(n_pos: int, k_max: int, lam: float, intercept: bool, y_constant: bool, y_first: float,
                      y_zero: bool) -> None:
    """Refuse fewer rows of positive weight than parameters (without a ridge), a constant
    response with an intercept, and a response that is zero everywhere without one.

    ``y_constant``, ``y_zero``: whether the response is constant, or zero, on the rows of
    positive weight; ``y_first``: its value on the first of them."""
    if lam == 0 and n_pos < k_max:
        raise InputError(
            f"X has {n_pos} rows with positive weight but the model has {k_max} parameters; "
            "add rows, drop columns, or set l2 > 0"
        )
    if intercept and y_constant:
        raise InputError(
            f"y is constant (every row with positive weight equals {y_first:g}); there is "
            "nothing to explain: check the target column"
        )
    if not intercept and y_zero:
        raise InputError("y is zero on every row with positive weight; check the target column")


def residual_degrees(n_obs, k, weight_type, n_pos):
    df = n_obs - k
    if df <= 0:
        raise InputError(
            f"the model has {k} estimated parameters but only {n_obs:g} observations; the "
            "residual variance needs more observations than parameters"
            + (" (case weights count observations: pass weight_type='precision' for relative weights)" if weight_type == "case" and n_pos > k else "")
        )
    return df


def _from_gram(sol):
    """The fast path's answer in the form the record builder uses."""
    err = f"{sol.error_estimate:.1e}"
    steps = "one corrected step" if sol.steps == 1 else f"{sol.steps} corrected steps"
    message = (
        f"solved directly: Cholesky of the Gram matrix (semi-normal equations) with {steps} "
        f"from a subsample start, residuals in float64; estimated relative error {err}"
    )
    return {
        "beta": sol.beta, "b0": sol.intercept, "rank": sol.beta.shape[0], "aliased": np.zeros(0, dtype=int),
        "full_rank": True, "s": sol.scale, "xbar": sol.mean, "G": sol.cov_scaled, "cond": sol.condition,
        "rss": sol.rss, "tss": sol.tss, "e": sol.residuals, "hat": sol.hat, "meat_z": sol.meat_z,
        "leverage_one_row": sol.leverage_one_row, "grad": sol.gradient, "lam1": sol.lam_vec,
        "col_exp": sol.col_exp, "identified": None, "w1": sol.w1, "iterations": sol.steps,
        "solver": "cholesky", "message": message,
    }
