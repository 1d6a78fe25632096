"""The :class:`LinearFit` record of a least-squares answer: one builder for every path.

The three paths (the Gram fast path and the QR path of :func:`lintools.least_squares`,
and TSQR in :func:`lintools.blocks.least_squares_blocks`) each hand back a
:class:`PathAnswer` in the units of :mod:`lintools.models.lsq_scale`; :func:`linear_record`
turns it into the caller's record in named steps: the covariance core in unit centred
coordinates, the overall F test, the figures in the caller's units (refused with an
:class:`InputError` when beyond float64), the Gaussian likelihood and the row diagnostics.

References
----------
White, H. (1980). Econometrica 48, 817-838 (HC0).  MacKinnon, J. G. & White, H. (1985).
J. Econometrics 29, 305-325 (HC1-HC3).  Cook, R. D. (1977). Technometrics 19, 15-18.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from ..support import distributions as dist
from ..support.errors import InputError
from ..support.linalg import unstandardise
from .lsq_scale import Units, scaled_sqrt
from .records import Convergence, LinearFit

__all__ = ["PathAnswer", "Setting", "linear_record", "caller_covariance", "residual_degrees", "refuse_leverage_one"]


@dataclass(frozen=True)
class PathAnswer:
    """A path's answer in the units of :mod:`lintools.models.lsq_scale`.

    The fitted value is ``b0 + x' beta``; ``s`` and ``xbar`` are the column scales and
    centres of the unit centred coordinates ``z = (b + xbar' beta, s * beta)``, in which
    ``G`` is the inverse (penalised) information of the slopes and ``meat_z`` the HC meat.
    ``lam1`` is the ridge on the unit coefficients; ``col_exp`` the column exponents."""

    beta: np.ndarray
    b0: float
    rank: int
    s: np.ndarray
    xbar: np.ndarray
    G: np.ndarray
    cond: float
    rss: float
    tss: float
    grad: np.ndarray
    lam1: np.ndarray
    col_exp: np.ndarray
    iterations: int
    solver: str
    message: str
    aliased: np.ndarray = field(default_factory=lambda: np.zeros(0, dtype=int))
    full_rank: bool = True
    #: residuals and hat values per row (None: not computed)
    e: np.ndarray | None = None
    hat: np.ndarray | None = None
    meat_z: np.ndarray | None = None
    #: the first row of leverage 1 met while the meat was accumulated (HC2, HC3)
    leverage_one_row: int | None = None
    #: per term (intercept first), whether it is identified (minimum-norm fits only)
    identified: np.ndarray | None = None
    #: the weights the path used (None: unit weights)
    w1: np.ndarray | None = None
    #: the path's estimate of the remaining error at the answer, in the centred, scaled
    #: coordinates ``z`` (None: not estimated; see :mod:`lintools.models.lsq_accuracy`)
    correction: np.ndarray | None = None


@dataclass(frozen=True)
class Setting:
    """What the caller asked for: ``weights`` are the caller's (None: unit weights)."""

    intercept: bool
    l2: float
    covariance: str = "classical"
    weight_type: str = "case"
    diagnostics: bool = False
    weights: np.ndarray | None = None

    @property
    def case(self) -> bool:
        return self.weight_type == "case"


def refuse_leverage_one(kind: str, row: int) -> None:
    raise InputError(
        f"covariance='{kind}' is undefined: row {row} has leverage 1 (it alone "
        "determines a coefficient); use covariance='HC0' or 'HC1', or drop that row"
    )


def residual_degrees(n_obs, k, weight_type, n_pos):
    df = n_obs - k
    if df <= 0:
        raise InputError(
            f"the model has {k} estimated parameters but only {n_obs:g} observations; the "
            "residual variance needs more observations than parameters"
            + (" (case weights count observations: pass weight_type='precision' for relative weights)" if weight_type == "case" and n_pos > k else "")
        )
    return df


def caller_covariance(Vz: np.ndarray, xbar: np.ndarray, s: np.ndarray, intercept: bool) -> np.ndarray:
    """The covariance of ``(b, beta)`` from that of the centred, scaled coordinates
    ``z = (b + xbar' beta, s * beta)``: ``T Vz T'`` with ``theta = T z``, symmetric to the last bit."""
    T = unstandardise(xbar, s, intercept)
    V = T @ Vz @ T.T
    return 0.5 * (V + V.T)


def linear_record(fit: PathAnswer, units: Units, setting: Setting, W1: float, n_obs: float, df: float) -> LinearFit:
    """The :class:`LinearFit` of a path's answer (in the units of ``units``), in the caller's units.

    ``W1``: the total weight in unit weights; ``n_obs``: the number of observations;
    ``df``: the residual degrees of freedom (:func:`residual_degrees`)."""
    intercept, off = setting.intercept, int(setting.intercept)
    k = fit.rank + off
    r2 = 1.0 - fit.rss / fit.tss
    adjusted = 1.0 - (1.0 - r2) * (n_obs - off) / df
    core, es = _covariance_core(fit, setting, W1, n_obs, df, units.ew)
    f_df1 = float(fit.rank if intercept else k)
    fstat = _overall_f(fit, units, setting, core, es, f_df1, df)
    f_p = float(dist.f_sf(fstat, f_df1, df)) if np.isfinite(fstat) else float("nan")
    coefficients, b0_out, V, se_all = _caller_coefficients(fit, units, setting, core, es)
    deviance, objective, rse, grad = _caller_sums(fit, units, off, df)
    loglik, aic, bic = _likelihood(fit.rss, 2 * units.ey + units.ew, n_obs, k, setting)
    conv = Convergence(
        converged=True,
        iterations=fit.iterations,
        gradient_norm=float(np.max(np.abs(grad))) if grad.size else 0.0,
        objective=objective,
        solver=fit.solver,
        message=fit.message,
    )
    leverage, cooks = _row_diagnostics(fit, df, k) if setting.diagnostics else (None, None)
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
        names=units.names,
        convergence=conv,
        with_intercept=intercept,
        l2=setting.l2,
        residual_standard_error=rse,
        r_squared=r2,
        adjusted_r_squared=adjusted,
        f_statistic=fstat,
        f_p_value=f_p,
        f_degrees_of_freedom=(f_df1, float(df)),
        degrees_of_freedom=float(df),
        rank=int(k),
        covariance_type=setting.covariance,
        weight_type=setting.weight_type,
        condition_number=float(fit.cond),
        aliased=tuple(units.names[j] for j in fit.aliased),
        leverage=leverage,
        cooks_distance=cooks,
        target=units.target,
    )


def _covariance_core(fit: PathAnswer, setting: Setting, W1: float, n_obs: float, df: float, ew: int) -> tuple:
    """The covariance of the unit centred coordinates as ``core * 2**es`` (``es`` the exponent
    that the weights and the residual degrees of freedom contribute)."""
    p, off = fit.beta.shape[0], int(setting.intercept)
    Bz = np.zeros((p + off, p + off))
    if setting.intercept:
        Bz[0, 0] = 1.0 / W1
    Bz[off:, off:] = fit.G
    if setting.covariance == "classical":
        df_m, df_e = math.frexp(df)
        return (fit.rss / df_m) * Bz, -df_e
    if fit.leverage_one_row is not None:
        refuse_leverage_one(setting.covariance, fit.leverage_one_row)
    core = Bz @ fit.meat_z @ Bz
    if setting.covariance == "HC1":
        core = core * (n_obs / df)
    return core, (-ew if setting.case else 0)


def _overall_f(fit: PathAnswer, units: Units, setting: Setting, core: np.ndarray, es: int, f_df1: float,
               df: float) -> float:
    """The overall F statistic: a Wald F on the slopes with the chosen covariance (NaN when
    the residuals are zero or the slopes' covariance is not positive definite)."""
    rss, off = fit.rss, int(setting.intercept)
    if rss > 0 and fit.full_rank:
        try:
            u = np.linalg.solve(np.linalg.cholesky(core[off:, off:]), fit.beta * fit.s)
        except np.linalg.LinAlgError:
            return float("nan")
        return units.check("overall F statistic", float(u @ u) / f_df1, -es,
                           [("weights", 1.0 if setting.case else 0.0)]).item()
    if rss > 0:
        return ((fit.tss - rss) / f_df1) / (rss / df)
    return float("nan")


def _caller_coefficients(fit: PathAnswer, units: Units, setting: Setting, core: np.ndarray, es: int) -> tuple:
    """Coefficients, intercept, covariance and standard errors (intercept first) in the
    caller's units; NaN standard errors for the terms that are not identified."""
    intercept = setting.intercept
    columns = [str(j) for j in range(fit.beta.shape[0])]
    slopes_y = [("y", 1.0)] + [(c, -1.0) for c in columns]
    coefficients = units.check("coefficients", fit.beta, units.ey - units.ex, slopes_y)
    b0_out = units.check("intercept", fit.b0, units.ey, [("y", 1.0)]).item() if intercept else 0.0
    eth = units.theta(intercept)
    Vt = caller_covariance(core, fit.xbar, fit.s, intercept)
    weights_power = -1.0 if setting.case else 0.0
    V = units.check("covariance of the coefficients", Vt, es + eth[:, None] + eth[None, :],
                    [("y", 2.0), ("weights", weights_power)] + [(c, -2.0) for c in columns])
    se_all = scaled_sqrt(np.clip(np.diag(Vt), 0.0, None), es + 2 * eth)
    if fit.identified is not None:
        se_all = np.where(fit.identified, se_all, np.nan)
    return coefficients, b0_out, V, se_all


def _caller_sums(fit: PathAnswer, units: Units, off: int, df: float) -> tuple:
    """Deviance (RSS), objective, residual standard error and gradient in the caller's units."""
    rss, beta = fit.rss, fit.beta
    columns = [str(j) for j in range(beta.shape[0])]
    df_m, df_e = math.frexp(df)
    rss_exp = 2 * units.ey + units.ew
    square = [("y", 2.0), ("weights", 1.0)]
    deviance = units.check("residual sum of squares", rss, rss_exp, square).item()
    objective = units.check("objective", 0.5 * rss + 0.5 * float(np.sum(fit.lam1 * beta * beta)), rss_exp,
                            square).item()
    rse = float(scaled_sqrt(rss / df_m, rss_exp - df_e))
    if not math.isfinite(rse):
        units.check("residual standard error", rss / df_m, rss_exp - df_e, square)
    g_exp = units.ew + units.ey + np.concatenate([[0] * off, units.ex])
    grad = units.check("gradient", fit.grad, g_exp,
                       [("y", 1.0), ("weights", 1.0)] + [(c, 1.0) for c in columns], underflow_ok=True)
    return deviance, objective, rse, grad


def _likelihood(rss: float, rss_exp: int, n_obs: float, k: int, setting: Setting) -> tuple:
    """Gaussian log-likelihood at the maximum-likelihood variance ``RSS/N`` (plus
    ``1/2 sum log w_i`` for precision weights), and AIC, BIC with ``k + 1`` parameters."""
    w = setting.weights
    if rss > 0:
        log_rss = math.log(rss) + rss_exp * math.log(2.0)
        loglik = -0.5 * n_obs * (math.log(2.0 * math.pi) + log_rss - math.log(n_obs) + 1.0)
        if not setting.case and w is not None:
            loglik += 0.5 * float(np.log(w[w > 0]).sum())
        if not math.isfinite(loglik):
            raise InputError(
                f"the log-likelihood of this fit is beyond the float64 range ({n_obs:.3g} observations); "
                "case weights count observations: divide them by a constant, or pass weight_type='precision'"
            )
    else:
        loglik = float("inf")
    n_par = k + 1
    return loglik, -2.0 * loglik + 2.0 * n_par, -2.0 * loglik + math.log(n_obs) * n_par


def _row_diagnostics(fit: PathAnswer, df: float, k: int) -> tuple:
    """Leverage and Cook's distance per row (Cook 1977), in the weights the path used."""
    hat, e = fit.hat, fit.e
    w1 = 1.0 if fit.w1 is None else fit.w1
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        cooks = (w1 * e * e / fit.rss) * (df / k) * hat / (1.0 - hat) ** 2
    return hat.copy(), cooks
