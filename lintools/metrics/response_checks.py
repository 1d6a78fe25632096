r"""How well a column of predicted values matches an observed continuous response.

Three checks of a delivered least-squares (or any mean-response) model on data that has
the response, with residual :math:`r_i = y_i - \hat y_i` and case weights :math:`w_i`
(read as numbers of cases, :math:`W = \sum w_i`):

* :func:`residual_summary`: mean, standard deviation, root mean square and mean absolute
  residual, the weighted quantiles of the residuals, and the share of the response's
  variation the predictions explain, :math:`1 - \sum w r^2 / \sum w (y - \bar y)^2`
  (negative when the predictions are worse than the response's mean);
* :func:`response_line`: the straight line of observed on predicted,
  :math:`y_i = \alpha + \beta \hat y_i + e_i`, fitted by weighted least squares
  (:func:`lintools.least_squares`): slope 1 and intercept 0 for predictions on the right
  scale, with Student-t tests of :math:`\beta = 1` and of :math:`(\alpha, \beta) = (0, 1)`
  (an F test), and the mean residual with its t interval (the predictions' level:
  0 for predictions without a shift);
* :func:`response_bins`: the rows cut into bins of (about) equal case weight at the
  weighted quantiles of the predictions; per bin the mean predicted and mean observed
  value, the standard deviation of the observed values and a Student-t interval of
  their mean.

References
----------
Miller, R. G. (1962). Statistical prediction by discriminant analysis (the regression
of observed on predicted as a check of forecasts). Meteorological Monographs 4(25).
Draper, N. R. & Smith, H. (1998). Applied Regression Analysis, 3rd ed., Wiley: the t
and F tests of a linear hypothesis on the coefficients (ch. 9).
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

import numpy as np

from .bands import band_of, quantile_cuts, sample_weights
from ..support import distributions as dist
from ..support.errors import InputError
from ..support.outcomes import check_level
from ..support.validate import ReadOnlyArrays, as_vector, check_positive_int

__all__ = ["QUANTILES", "ResidualSummary", "ResponseBins", "ResponseLine", "residual_summary", "response_bins",
           "response_line"]

#: The shares at which :func:`residual_summary` gives the residuals' quantiles.
QUANTILES = (0.0, 0.05, 0.25, 0.5, 0.75, 0.95, 1.0)


def _pair(y: Any, predicted: Any, weights: Any) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Observed and predicted values (finite, same length: :func:`as_vector` refuses a
    non-finite value by row) and case weights (some positive)."""
    yv, pv = as_vector(y, "y"), as_vector(predicted, "predicted")
    if yv.shape[0] != pv.shape[0]:
        raise InputError(f"y has {yv.shape[0]} values but predicted has {pv.shape[0]}; pass one prediction per row")
    w, _, _ = sample_weights(weights, yv.shape[0], "weights", "y")
    return yv, pv, w


def _t_interval(mean: float, se: float, df: float, level: float) -> tuple[float, float]:
    if not (df > 0 and np.isfinite(se)):
        return float("nan"), float("nan")
    q = float(dist.t_quantile(0.5 + level / 2.0, df))
    return mean - q * se, mean + q * se


def _moments(v: np.ndarray, w: np.ndarray) -> tuple[float, float, float]:
    """Weighted mean, total weight, and the variance with divisor W - 1 (NaN when W <= 1)."""
    total = float(w.sum())
    mean = float(w @ v) / total
    var = float(w @ (v - mean) ** 2) / (total - 1.0) if total > 1.0 else float("nan")
    return mean, total, var


@dataclass(frozen=True)
class ResidualSummary(ReadOnlyArrays):
    """Result of :func:`residual_summary` (residual = observed minus predicted).

    ``quantile_shares`` and ``quantiles``: the residuals' weighted quantiles (the smallest
    residual whose cumulative share of weight reaches the share; 0 and 1: the smallest and
    largest residual of a row with weight).  ``explained``: :math:`1 - \\sum w r^2 / \\sum
    w (y - \\bar y)^2` (NaN when the response is constant).
    """

    rows: int
    weight: float
    mean: float
    standard_deviation: float
    root_mean_square: float
    mean_absolute: float
    explained: float
    quantile_shares: np.ndarray
    quantiles: np.ndarray


def residual_summary(y: Any, predicted: Any, *, weights: Any = None) -> ResidualSummary:
    """The summary of the residuals ``y - predicted`` (see the module notes)."""
    yv, pv, w = _pair(y, predicted, weights)
    live = w > 0
    r, wl = (yv - pv)[live], w[live]
    mean, total, var = _moments(r, wl)
    ybar = float(wl @ yv[live]) / total
    spread = float(wl @ (yv[live] - ybar) ** 2)
    order = np.argsort(r, kind="stable")
    cum = np.cumsum(wl[order]) / total
    shares = np.array(QUANTILES)
    at = np.minimum(np.searchsorted(cum, shares * (1 - 1e-12), side="left"), r.size - 1)
    return ResidualSummary(rows=int(yv.size), weight=total, mean=mean, standard_deviation=float(np.sqrt(var)),
                           root_mean_square=float(np.sqrt(float(wl @ r**2) / total)),
                           mean_absolute=float(wl @ np.abs(r)) / total,
                           explained=1.0 - float(wl @ r**2) / spread if spread > 0 else float("nan"),
                           quantile_shares=shares, quantiles=r[order][at])


@dataclass(frozen=True)
class ResponseLine:
    """Result of :func:`response_line`: observed = intercept + slope * predicted.

    ``slope_statistic``/``slope_p_value``: Student t of slope = 1 (``degrees_of_freedom``
    = W - 2); ``joint_statistic``/``joint_p_value``: F of (intercept, slope) = (0, 1) on
    (2, W - 2) degrees of freedom; ``mean_residual`` with its standard error, Student-t
    interval (W - 1 degrees of freedom) and the p-value of mean residual = 0.
    """

    intercept: float
    intercept_standard_error: float
    intercept_interval: tuple[float, float]
    slope: float
    slope_standard_error: float
    slope_interval: tuple[float, float]
    slope_statistic: float
    slope_p_value: float
    joint_statistic: float
    joint_p_value: float
    degrees_of_freedom: float
    mean_residual: float
    mean_residual_standard_error: float
    mean_residual_interval: tuple[float, float]
    mean_residual_p_value: float
    level: float


def response_line(y: Any, predicted: Any, *, weights: Any = None, level: float = 0.95) -> ResponseLine:
    """The line of observed on predicted and the mean residual (see the module notes)."""
    from ..models.least_squares import least_squares

    level = check_level(level)
    yv, pv, w = _pair(y, predicted, weights)
    if np.ptp(pv[w > 0]) == 0:
        raise InputError("the predictions are all equal on the rows with weight; the line of observed on "
                         "predicted needs at least two distinct predictions")
    fit = least_squares(pv[:, None], yv, weights=w, names=["predicted"])
    table = fit.coefficient_table(level)
    df = float(fit.degrees_of_freedom)
    a, b = float(fit.intercept), float(fit.coefficients[0])
    sa, sb = float(fit.intercept_standard_error), float(fit.standard_errors[0])
    d = np.array([a, b - 1.0])
    V = np.asarray(fit.covariance, dtype=float)
    with np.errstate(divide="ignore", invalid="ignore"):
        joint = float(d @ np.linalg.solve(V, d)) / 2.0 if np.all(np.isfinite(V)) and df > 0 else float("nan")
        t = (b - 1.0) / sb
    r = yv - pv
    live = w > 0
    mean, total, var = _moments(r[live], w[live])
    se = float(np.sqrt(var / total))
    with np.errstate(divide="ignore", invalid="ignore"):
        tm = mean / se
    return ResponseLine(
        intercept=a, intercept_standard_error=sa, intercept_interval=(float(table.lower[0]), float(table.upper[0])),
        slope=b, slope_standard_error=sb, slope_interval=(float(table.lower[1]), float(table.upper[1])),
        slope_statistic=float(t), slope_p_value=float(2.0 * dist.t_sf(abs(t), df)) if df > 0 else float("nan"),
        joint_statistic=joint, joint_p_value=float(dist.f_sf(joint, 2.0, df)) if np.isfinite(joint) else float("nan"),
        degrees_of_freedom=df, mean_residual=mean, mean_residual_standard_error=se,
        mean_residual_interval=_t_interval(mean, se, total - 1.0, level),
        mean_residual_p_value=float(2.0 * dist.t_sf(abs(tm), total - 1.0)) if total > 1 and se > 0 else float("nan"),
        level=level)


@dataclass(frozen=True)
class ResponseBins(ReadOnlyArrays):
    """Result of :func:`response_bins`: one entry per bin of the predictions, lowest first.

    ``lowest``/``highest``: the smallest and largest prediction in the bin; ``rows``: its
    rows (weight 0 included); ``weight``: its case weight; ``mean_predicted``,
    ``mean_observed`` and ``mean_residual`` (their difference); ``observed_sd``: standard
    deviation of the observed values (divisor weight - 1); ``observed_lower`` and
    ``observed_upper``: the Student-t interval of the mean observed value at ``level``
    (NaN for a bin of weight 1 or less).
    """

    lowest: np.ndarray
    highest: np.ndarray
    rows: np.ndarray
    weight: np.ndarray
    mean_predicted: np.ndarray
    mean_observed: np.ndarray
    mean_residual: np.ndarray
    observed_sd: np.ndarray
    observed_lower: np.ndarray
    observed_upper: np.ndarray
    level: float


def response_bins(y: Any, predicted: Any, *, bins: int = 10, weights: Any = None,
                  level: float = 0.95) -> ResponseBins:
    """Mean observed against mean predicted in ``bins`` bins of the predictions (bins at
    the weighted quantiles; tied predictions share a bin, so there may be fewer)."""
    level = check_level(level)
    bins = check_positive_int(bins, "bins")
    yv, pv, w = _pair(y, predicted, weights)
    cuts = quantile_cuts(pv, w, bins)
    band = band_of(pv, cuts)
    cols: dict[str, list[float]] = {k: [] for k in ResponseBins.__dataclass_fields__ if k != "level"}
    for b in range(cuts.size + 1):
        rows = band == b
        live = rows & (w > 0)
        mo, total, var = _moments(yv[live], w[live])
        mp = float(w[live] @ pv[live]) / total
        sd = float(np.sqrt(var))
        lo, hi = _t_interval(mo, sd / np.sqrt(total), total - 1.0, level)
        for key, value in (("lowest", pv[live].min()), ("highest", pv[live].max()), ("rows", rows.sum()),
                           ("weight", total), ("mean_predicted", mp), ("mean_observed", mo),
                           ("mean_residual", mo - mp), ("observed_sd", sd), ("observed_lower", lo),
                           ("observed_upper", hi)):
            cols[key].append(float(value))
    out = {k: np.array(v) for k, v in cols.items()}
    out["rows"] = out["rows"].astype(np.int64)
    return ResponseBins(**out, level=level)
