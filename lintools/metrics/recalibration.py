"""Recalibration maps: Platt scaling, temperature scaling and isotonic calibration (PAV).

Each function fits a map on labelled development data and returns a frozen record whose
``apply`` method turns new scores (or logits, or probabilities) into recalibrated
probabilities.  Case weights act as frequency weights.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

import numpy as np

from ..support.logistic_function import sigmoid
from ..support.outcomes import binary_outcome, case_weights, finite_scores, vector_in
from .temperature import TemperatureMap, temperature_scaling
from ..support.scaling import case_weight_scale
from ..support.validate import check_flag, weight_scale

__all__ = [
    "PlattMap",
    "TemperatureMap",
    "IsotonicMap",
    "platt_scaling",
    "temperature_scaling",
    "isotonic_calibration",
]


# ----------------------------------------------------------------------------- Platt
@dataclass(frozen=True)
class PlattMap:
    """Platt scaling: ``apply(s) = 1 / (1 + exp(-(slope * s + intercept)))``.

    In Platt's (1999) notation :math:`P(y=1|f) = 1/(1 + \\exp(A f + B))`, so
    ``A = -slope`` and ``B = -intercept``.

    Attributes
    ----------
    slope, intercept : float
    target_negative, target_positive : float
        The smoothed targets :math:`t_- = 1/(N_- + 2)`, :math:`t_+ = (N_+ + 1)/(N_+ + 2)`
        (0 and 1 without smoothing).
    fit : fit record
        The logistic fit (:func:`lintools.logistic`) with its convergence record.
    """

    slope: float
    intercept: float
    target_negative: float
    target_positive: float
    fit: Any

    def apply(self, scores: Any) -> np.ndarray | float:
        """Return recalibrated probabilities for new scores (same scale as the fit's)."""
        s, scalar = vector_in(scores, "scores")
        out = sigmoid(self.slope * s + self.intercept)
        return float(out[0]) if scalar else out


def platt_scaling(
    y: Any, scores: Any, *, weights: Any = None, smoothing: bool = True, positive: Any = None
) -> PlattMap:
    r"""Platt's (1999) sigmoid recalibration of classifier scores.

    Maximises the weighted Bernoulli log-likelihood of the smoothed targets,

    .. math:: \sum_i w_i \left[t_i \log q_i + (1 - t_i)\log(1 - q_i)\right],\quad
              q_i = \sigma(a s_i + b),

    with :math:`t_i = t_+ = (N_+ + 1)/(N_+ + 2)` for positives and
    :math:`t_i = t_- = 1/(N_- + 2)` for negatives, :math:`N_\pm` the (weighted) class
    totals.  The smoothing keeps the fit finite even when the scores separate the
    classes.  ``smoothing=False`` uses :math:`t_i = y_i` (plain logistic regression on
    the score; may meet separation).  The fractional targets are fitted with
    :func:`lintools.logistic` by giving each case a positive row of weight
    :math:`w_i t_i` and a negative row of weight :math:`w_i (1 - t_i)`; that fit's stopping
    rule (gradient per unit of total weight, standardised score column) and its scale
    handling apply, so with ``smoothing=False`` multiplying every weight by a constant
    changes neither the map nor the verdict.  With smoothing the targets count the
    weighted cases, so they, and the map, change with the weights' scale as the formula
    says.

    Parameters
    ----------
    y : array-like
        Binary labels.
    scores : array-like
        Real classifier scores (any scale).
    weights : array-like, optional
        Case weights.
    smoothing : bool
        Use Platt's smoothed targets (default) or the 0/1 labels.
    positive : label, optional

    Returns
    -------
    PlattMap

    References
    ----------
    Platt, J. C. (1999). Probabilistic outputs for support vector machines and
    comparisons to regularized likelihood methods. In Advances in Large Margin
    Classifiers, 61-74. MIT Press.
    Lin, H.-T., Lin, C.-J. & Weng, R. C. (2007). A note on Platt's probabilistic outputs
    for support vector machines. Machine Learning 68, 267-276.
    """
    check_flag(smoothing, "smoothing")
    o, _ = binary_outcome(y, positive)
    s = finite_scores(scores, "scores", o.shape[0])
    w = case_weights(weights, o.shape[0])
    if smoothing:
        # the class totals N+ and N- on the weights divided by k = max(1, a power of two near
        # their largest): exact, so the targets are bit for bit those of the formula, and
        # weights near 1e308 cannot overflow the totals (1 / k and 2 / k do not either)
        k = max(1.0, weight_scale(w))
        n_pos, n_neg = float((w / k) @ o), float((w / k) @ (1.0 - o))
        t_pos, t_neg = (n_pos + 1.0 / k) / (n_pos + 2.0 / k), (1.0 / k) / (n_neg + 2.0 / k)
    else:
        t_pos, t_neg = 1.0, 0.0
    t = np.where(o == 1.0, t_pos, t_neg)
    X = np.concatenate([s, s])[:, None]
    yy = np.concatenate([np.ones_like(s), np.zeros_like(s)])
    ww = np.concatenate([w * t, w * (1.0 - t)])
    keep = ww > 0
    from ..models.logistic import logistic

    fit = logistic(X[keep], yy[keep], weights=ww[keep])
    return PlattMap(
        slope=float(fit.coefficients[0]),
        intercept=float(fit.intercept),
        target_negative=t_neg,
        target_positive=t_pos,
        fit=fit,
    )


# -------------------------------------------------------------------------- isotonic
@dataclass(frozen=True)
class IsotonicMap:
    """Isotonic calibration: a monotone step function through the fitted points.

    ``apply`` interpolates linearly between consecutive fitted points and clips outside
    their range (a value below the first point gets the first fitted value, above the
    last point the last).

    Attributes
    ----------
    points : ndarray
        The distinct input values of the development data (sorted, positive weight).
    values : ndarray
        The fitted (pooled) observed frequency at each point.
    increasing : bool
    """

    points: np.ndarray
    values: np.ndarray
    increasing: bool

    def apply(self, p: Any) -> np.ndarray | float:
        """Return the recalibrated probability for each new input value.

        The interpolation weight ``t = (x - x_j) / (x_{j+1} - x_j)`` is formed first and
        the result clipped to the two fitted values, so the output stays monotone and in
        ``[0, 1]`` even when two points are only a few subnormals apart (where a slope
        ``(v_{j+1} - v_j) / (x_{j+1} - x_j)`` overflows to infinity).
        """
        x, scalar = vector_in(p, "p")
        xp, fp = self.points, self.values
        if xp.shape[0] == 1:
            out = np.full(x.shape, fp[0])
        else:
            j = np.clip(np.searchsorted(xp, x, side="right") - 1, 0, xp.shape[0] - 2)
            x0, x1, f0, f1 = xp[j], xp[j + 1], fp[j], fp[j + 1]
            with np.errstate(over="ignore", invalid="ignore"):
                gap = x1 - x0
                t = (x - x0) / gap
                wide = np.isinf(gap)  # a gap wider than the largest double: halve first
                t[wide] = (x[wide] / 2 - x0[wide] / 2) / (x1[wide] / 2 - x0[wide] / 2)
            t = np.clip(t, 0.0, 1.0)
            out = np.clip(f0 + t * (f1 - f0), np.minimum(f0, f1), np.maximum(f0, f1))
        return float(out[0]) if scalar else out


def _pav(y: np.ndarray, w: np.ndarray) -> np.ndarray:
    """Pool-adjacent-violators: the weighted least-squares non-decreasing fit to ``y``."""
    sums: list[float] = []
    weights: list[float] = []
    sizes: list[int] = []
    for yi, wi in zip((y * w).tolist(), w.tolist()):
        s, ww, size = yi, wi, 1
        while sums and sums[-1] / weights[-1] > s / ww:
            s += sums.pop()
            ww += weights.pop()
            size += sizes.pop()
        sums.append(s)
        weights.append(ww)
        sizes.append(size)
    return np.repeat(np.array(sums) / np.array(weights), sizes)


def isotonic_calibration(
    y: Any, p: Any, *, weights: Any = None, increasing: bool = True, positive: Any = None
) -> IsotonicMap:
    r"""Isotonic recalibration by pool-adjacent-violators (PAV).

    Finds the non-decreasing (``increasing=False``: non-increasing) function :math:`g`
    of the input minimising :math:`\sum_i w_i (o_i - g(x_i))^2`, where :math:`o_i` is
    the 0/1 outcome.  Tied inputs are first merged into one point carrying their total
    weight and weighted mean outcome, then PAV pools adjacent violators (Ayer et al.
    1955; Barlow et al. 1972); the solution is also the monotone maximum-likelihood
    estimate of the event probability.  Rows of zero weight are ignored; the weights are
    divided by the largest one first, so multiplying all of them by any constant leaves
    the fitted values unchanged (to the rounding of the caller's products).  The input ``p`` may be probabilities or any real
    scores.

    ``apply`` interpolates linearly between the fitted points and clips outside them.

    Parameters
    ----------
    y : array-like
        Binary labels.
    p : array-like
        Probabilities or real scores to recalibrate.
    weights : array-like, optional
        Case weights.
    increasing : bool
        Fit a non-decreasing (default) or non-increasing map.
    positive : label, optional

    Returns
    -------
    IsotonicMap

    References
    ----------
    Ayer, M., Brunk, H. D., Ewing, G. M., Reid, W. T. & Silverman, E. (1955). An
    empirical distribution function for sampling with incomplete information. Annals of
    Mathematical Statistics 26, 641-647.
    Barlow, R. E., Bartholomew, D. J., Bremner, J. M. & Brunk, H. D. (1972). Statistical
    Inference under Order Restrictions. Wiley.
    Zadrozny, B. & Elkan, C. (2002). Transforming classifier scores into accurate
    multiclass probability estimates. KDD 2002, 694-699.
    """
    increasing = check_flag(increasing, "increasing")
    o, _ = binary_outcome(y, positive)
    x = finite_scores(p, "p", o.shape[0])
    w = case_weights(weights, o.shape[0])
    live = w > 0
    w = w / case_weight_scale(w)  # no sum overflows or underflows; constant weights become 1
    points, index = np.unique(x[live], return_inverse=True)
    wx = np.bincount(index, weights=w[live], minlength=points.shape[0])
    mean = np.bincount(index, weights=(w * o)[live], minlength=points.shape[0]) / wx
    values = _pav(mean, wx) if increasing else -_pav(-mean, wx)
    return IsotonicMap(points=points, values=values, increasing=bool(increasing))
