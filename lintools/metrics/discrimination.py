"""Discrimination: the area under the ROC curve with DeLong's variance, and the paired
DeLong test of two scores on the same cases.

Everything is computed from placement values in O(n log n) (Sun & Xu 2014): no
positives-by-negatives matrix is ever formed.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from ..support import distributions as dist
from ..support.errors import InputError, LintoolsWarning, warn_caller
from ..support.logistic_function import sigmoid
from ..support.outcomes import (
    binary_outcome,
    case_weights,
    check_level,
    finite_scores,
    two_sided,
    unscale,
)
from ..support.text import p_text
from ..support.validate import ReadOnlyArrays, check_choice, weight_scale

__all__ = ["ROCArea", "ROCAreaDifference", "roc_auc", "roc_auc_difference"]


@dataclass(frozen=True)
class ROCArea(ReadOnlyArrays):
    """Result of :func:`roc_auc`.

    Attributes
    ----------
    area : float
        Probability that a random positive scores above a random negative (ties count 1/2).
    standard_error : float
        DeLong standard error; NaN (with a warning) when a class has total weight <= 1.
    lower, upper : float
        Interval at ``level`` on the scale named by ``interval``.
    level : float
    interval : str
        ``"logit"`` or ``"plain"``.
    positives, negatives : float
        Total case weight of each class (the counts without weights).
    accuracy_ratio : float
        The accuracy ratio (Gini coefficient of the ROC curve), ``2 * area - 1``
        (Engelmann, Hayden & Tasche 2003): 0 for a score that does not rank, 1 for one
        that ranks every positive above every negative.
    accuracy_ratio_standard_error, accuracy_ratio_lower, accuracy_ratio_upper : float
        ``2 * standard_error`` and the interval ``2 * [lower, upper] - 1``, the image of
        the area's interval (the map is increasing, so its level is the same).
    """

    area: float
    standard_error: float
    lower: float
    upper: float
    level: float
    interval: str
    positives: float
    negatives: float
    accuracy_ratio: float = field(init=False)
    accuracy_ratio_standard_error: float = field(init=False)
    accuracy_ratio_lower: float = field(init=False)
    accuracy_ratio_upper: float = field(init=False)

    def __post_init__(self) -> None:
        for name, value in (("accuracy_ratio", self.area), ("accuracy_ratio_lower", self.lower),
                            ("accuracy_ratio_upper", self.upper)):
            object.__setattr__(self, name, 2.0 * value - 1.0)
        object.__setattr__(self, "accuracy_ratio_standard_error", 2.0 * self.standard_error)
        super().__post_init__()

    def __float__(self) -> float:
        return float(self.area)

    def report(self) -> str:
        """Return the area, its standard error and interval, and the accuracy ratio, as text."""
        return (f"ROC area {self.area:.6f}  standard error {self.standard_error:.6f}  "
                f"{100 * self.level:g}% interval ({self.interval}) [{self.lower:.6f}, {self.upper:.6f}]  "
                f"positives {self.positives:g}  negatives {self.negatives:g}\n"
                f"accuracy ratio (Gini, 2 x area - 1) {self.accuracy_ratio:.6f}  standard error "
                f"{self.accuracy_ratio_standard_error:.6f}  {100 * self.level:g}% interval "
                f"[{self.accuracy_ratio_lower:.6f}, {self.accuracy_ratio_upper:.6f}]\n")


@dataclass(frozen=True)
class ROCAreaDifference(ReadOnlyArrays):
    """Result of :func:`roc_auc_difference`: the paired DeLong test.

    Attributes
    ----------
    areas : ndarray (2,)
        ROC areas of ``score_a`` and ``score_b``.
    difference : float
        ``areas[0] - areas[1]``.
    covariance : ndarray (2, 2)
        DeLong covariance of the two areas.
    standard_error, statistic, p_value : float
        SE of the difference, z = difference / SE, two-sided normal p-value.
    lower, upper : float
        Plain (difference +- z SE) interval at ``level``.
    level : float
    """

    areas: np.ndarray
    difference: float
    covariance: np.ndarray
    standard_error: float
    statistic: float
    p_value: float
    lower: float
    upper: float
    level: float

    def report(self) -> str:
        """Return the test as text."""
        return (f"ROC areas {self.areas[0]:.6f} (a) and {self.areas[1]:.6f} (b); difference {self.difference:.6f}"
                f"  standard error {self.standard_error:.6f}  z {self.statistic:.3f}  p-value {p_text(self.p_value)}  "
                f"{100 * self.level:g}% interval [{self.lower:.6f}, {self.upper:.6f}]\n")


def _below_half(sorted_scores: np.ndarray, cum_weight: np.ndarray, at: np.ndarray) -> np.ndarray:
    """Weight of ``sorted_scores`` strictly below ``at`` plus half the weight tied with it."""
    lo = cum_weight[np.searchsorted(sorted_scores, at, side="left")]
    hi = cum_weight[np.searchsorted(sorted_scores, at, side="right")]
    return 0.5 * (lo + hi)


def _placements(o: np.ndarray, s: np.ndarray, u: np.ndarray):
    """Placement values (DeLong 1988) of each positive and each negative, and the area.

    ``v10[i]`` is the weighted share of negatives scored below positive ``i`` (ties
    half); ``v01[j]`` the share of positives scored above negative ``j``.  These are the
    midrank differences of Sun & Xu (2014): ``v10 = (R_i - R_i^+) / W_0`` with ``R`` the
    midrank among all cases and ``R^+`` among positives.  ``u`` are the weights, each
    class divided by its own power of two (see :func:`_read`), so the running sums cannot
    overflow; the ``W1``, ``W0`` returned are the class totals on that scale.
    """
    pos, neg = o == 1.0, o == 0.0
    sp, wp, sn, wn = s[pos], u[pos], s[neg], u[neg]
    order_n = np.argsort(sn, kind="mergesort")
    cum_n = np.concatenate(([0.0], np.cumsum(wn[order_n])))
    order_p = np.argsort(sp, kind="mergesort")
    cum_p = np.concatenate(([0.0], np.cumsum(wp[order_p])))
    # the class totals are the running sums' last terms, so a share of all of them is 1 exactly
    W1, W0 = float(cum_p[-1]), float(cum_n[-1])
    v10 = np.clip(_below_half(sn[order_n], cum_n, sp) / W0, 0.0, 1.0)
    v01 = np.clip(1.0 - _below_half(sp[order_p], cum_p, sn) / W1, 0.0, 1.0)
    area = min(max(float(wp @ v10) / W1, 0.0), 1.0)  # a mean of shares in [0, 1], rounding aside
    return v10, v01, wp, wn, W1, W0, area


def _delong_cov(v10: np.ndarray, v01: np.ndarray, wp, wn, W1: float, W0: float,
                scales: tuple[float, float]) -> tuple[np.ndarray, float]:
    r"""DeLong covariance of the areas of the score columns (``v10``: (n1, m), ``v01``: (n0, m)),
    as ``(bracket, s)`` with covariance ``bracket / s``.

    ``wp``, ``W1`` (``wn``, ``W0``) are the weights and total of the positives (negatives)
    divided by the power of two ``s1`` (``s0``) in ``scales``; the class totals
    :math:`s_1 W'_1`, :math:`s_0 W'_0` must exceed 1.  With the weighted placement
    covariance :math:`C'_{10} = \sum u (V - A)(V - A)^T / W'_1` (scale-free),
    :math:`S_{10} / W_1 = C'_{10} / (s_1 (W'_1 - 1/s_1))`, and likewise for the negatives;
    with :math:`s = \min(s_1, s_0)`,

    .. math:: \mathrm{Cov} = \frac{1}{s}\Big[\frac{s}{s_1}\frac{C'_{10}}{W'_1 - 1/s_1}
              + \frac{s}{s_0}\frac{C'_{01}}{W'_0 - 1/s_0}\Big].

    The bracket is of order 1/n whatever the scale (``1/s_k < W'_k`` because the totals
    exceed 1, and the ratios of scales are exact powers of two at most 1), so nothing
    overflows or underflows; the standard error is ``sqrt(bracket) / sqrt(s)``.
    """
    s1, s0 = scales
    d10 = v10 - (wp @ v10) / W1
    d01 = v01 - (wn @ v01) / W0
    c10 = (d10 * wp[:, None]).T @ d10 / W1
    c01 = (d01 * wn[:, None]).T @ d01 / W0
    s = min(s1, s0)
    return s / s1 * c10 / (W1 - 1.0 / s1) + s / s0 * c01 / (W0 - 1.0 / s0), s


def _read(y: Any, scores: dict[str, Any], weights: Any, positive: Any):
    """Outcome, scores, the weights with each class divided by its own power of two (the
    area and DeLong's variance take the two classes' weights separately, so each class
    keeps its digits whatever the other's scale), and the class totals."""
    o, _ = binary_outcome(y, positive, need_both=True)
    arrays = [finite_scores(v, k, o.shape[0]) for k, v in scores.items()]
    w = case_weights(weights, o.shape[0])
    pos = o == 1.0
    if not ((w[pos] > 0).any() and (w[~pos] > 0).any()):
        raise InputError("weights are zero for every case of one class; the ROC area needs both classes")
    scales = (weight_scale(w[pos]), weight_scale(w[~pos]))
    u = w / np.where(pos, scales[0], scales[1])
    totals = (unscale(float(u[pos].sum()), scales[0], "the total weight of the positive class"),
              unscale(float(u[~pos].sum()), scales[1], "the total weight of the negative class"))
    return o, arrays, u, scales, totals


def roc_auc(
    y: Any,
    score: Any,
    *,
    weights: Any = None,
    level: float = 0.95,
    interval: str = "logit",
    positive: Any = None,
) -> ROCArea:
    r"""Area under the ROC curve with the DeLong, DeLong & Clarke-Pearson (1988) interval.

    .. math:: A = \frac{1}{W_1 W_0}\sum_{i: y_i=1}\sum_{j: y_j=0} w_i w_j
              \left[\mathbf 1(s_i > s_j) + \tfrac12 \mathbf 1(s_i = s_j)\right],

    the Mann-Whitney form, with case weights :math:`w` (default 1) and class totals
    :math:`W_1, W_0`.  Weights are frequency weights: for integer weights the result
    (area, standard error, interval) equals the unweighted one with row :math:`i`
    repeated :math:`w_i` times.  With placement values :math:`V_{10}(i)` (share of
    negatives below positive :math:`i`, ties half) and :math:`V_{01}(j)` (share of
    positives above negative :math:`j`),

    .. math:: \widehat{\mathrm{Var}}(A) = \frac{S_{10}}{W_1} + \frac{S_{01}}{W_0},\quad
              S_{10} = \frac{\sum w_i (V_{10}(i) - A)^2}{W_1 - 1},\
              S_{01} = \frac{\sum w_j (V_{01}(j) - A)^2}{W_0 - 1}.

    The placements come from sorted scores and midranks in O(n log n) (Sun & Xu 2014).
    The standard error (and interval) is NaN, with a :class:`LintoolsWarning` saying why,
    when a class has total weight <= 1 (one case, or weights that are not counts).

    Weights: the area uses relative weights only (multiplying all weights by a constant
    does not change it); DeLong's variance counts them as cases, so multiplying all
    weights by :math:`c` turns :math:`\widehat{\mathrm{Var}}` into
    :math:`\sum_k Q_k / ((cW_k - 1) W_k)` (:math:`Q_k` the weighted sums of squares
    above), about :math:`1/c` times the old variance.  Each class's weights are divided by
    a power of two before any sum, so no total overflows or underflows.

    ``interval="logit"`` (default) forms :math:`\mathrm{logit}(A) \pm z\,SE/(A(1-A))`
    and maps it back, so the interval stays inside (0, 1); when :math:`A` is 0 or 1 the
    standard error is 0 and the interval is the single point :math:`A`.
    ``interval="plain"`` is :math:`A \pm z\,SE`, clipped to [0, 1].  Either interval
    always contains :math:`A`.  The record also carries the accuracy ratio (Gini)
    :math:`2A - 1` with standard error :math:`2\,SE` and the interval
    :math:`2[\text{lower}, \text{upper}] - 1`.

    Parameters
    ----------
    y : array-like
        Binary labels; both classes must occur.
    score : array-like
        Any real scores, larger meaning more likely positive.
    weights : array-like, optional
        Case (frequency) weights.
    level : float
        Confidence level.
    interval : {"logit", "plain"}
    positive : label, optional

    Returns
    -------
    ROCArea

    Raises
    ------
    InputError
        When a class's total weight exceeds the largest floating-point number (divide the
        weights by a constant).

    References
    ----------
    DeLong, E. R., DeLong, D. M. & Clarke-Pearson, D. L. (1988). Comparing the areas
    under two or more correlated receiver operating characteristic curves: a
    nonparametric approach. Biometrics 44, 837-845.
    Sun, X. & Xu, W. (2014). Fast implementation of DeLong's algorithm for comparing the
    areas under correlated receiver operating characteristic curves. IEEE Signal
    Processing Letters 21, 1389-1393.
    Hanley, J. A. & McNeil, B. J. (1982). The meaning and use of the area under a
    receiver operating characteristic (ROC) curve. Radiology 143, 29-36.
    Engelmann, B., Hayden, E. & Tasche, D. (2003). Testing rating accuracy. Risk 16(1),
    82-86 (the accuracy ratio is 2A - 1).
    """
    level = check_level(level)
    check_choice(interval, "interval", ("logit", "plain"))
    o, (s,), u, scales, (positives, negatives) = _read(y, {"score": score}, weights, positive)
    v10, v01, wp, wn, W1, W0, area = _placements(o, s, u)
    if positives <= 1.0 or negatives <= 1.0:
        warn_caller(
            f"roc_auc: the positive class has a total weight of {positives:g} and the negative "
            f"class {negatives:g}; DeLong's variance counts case weights as cases and needs more "
            "than 1 in each class, so the standard error and interval are NaN (with weights "
            "that are not case counts, pass counts)",
            LintoolsWarning,
        )
        return ROCArea(area=area, standard_error=math.nan, lower=math.nan, upper=math.nan, level=level,
                       interval=interval, positives=positives, negatives=negatives)
    bracket, scale = _delong_cov(v10[:, None], v01[:, None], wp, wn, W1, W0, scales)
    se = math.sqrt(max(float(bracket[0, 0]), 0.0)) / math.sqrt(scale)
    q = float(dist.normal_quantile(0.5 + level / 2.0))
    if interval == "plain":
        lower, upper = max(0.0, area - q * se), min(1.0, area + q * se)
    elif area in (0.0, 1.0) or se == 0.0:
        lower = upper = area
    else:
        centre = math.log(area) - math.log1p(-area)
        half = q * se / (area * (1.0 - area))
        lower, upper = (float(v) for v in sigmoid(np.array([centre - half, centre + half])))
        # the interval holds the area; rounding of the back-transform must not move it out
        lower, upper = min(lower, area), max(upper, area)
    return ROCArea(area=area, standard_error=se, lower=lower, upper=upper, level=level,
                   interval=interval, positives=positives, negatives=negatives)


def roc_auc_difference(
    y: Any,
    score_a: Any,
    score_b: Any,
    *,
    weights: Any = None,
    level: float = 0.95,
    positive: Any = None,
) -> ROCAreaDifference:
    r"""Paired DeLong test that two scores of the same cases have equal ROC areas.

    With the placement values of both scores (see :func:`roc_auc`), the covariance of
    the two areas is :math:`S = S_{10}/W_1 + S_{01}/W_0`, where :math:`S_{10}` and
    :math:`S_{01}` are the 2 x 2 weighted sample covariances of the placement values
    over positives and over negatives.  Then

    .. math:: z = \frac{A_a - A_b}{\sqrt{S_{aa} + S_{bb} - 2 S_{ab}}}

    with a two-sided normal p-value and the plain interval difference +- z SE.

    Parameters
    ----------
    y : array-like
        Binary labels; both classes must occur.
    score_a, score_b : array-like
        Two real scores of the same cases.
    weights : array-like, optional
        Case (frequency) weights, as in :func:`roc_auc`: the areas and their difference use
        relative weights only; the covariance counts the weights as cases (about
        :math:`1/c` times the old one for weights multiplied by :math:`c`, so z grows
        about as :math:`\sqrt c`).
    level : float
        Confidence level of the interval.
    positive : label, optional

    Returns
    -------
    ROCAreaDifference

    Raises
    ------
    InputError
        When the standard error of the difference is 0 (for example, the two scores order
        the cases the same way, or both areas are 1), so the test does not exist; or a
        class has total weight <= 1; or a class's total weight exceeds the largest
        floating-point number.

    References
    ----------
    DeLong, E. R., DeLong, D. M. & Clarke-Pearson, D. L. (1988). Biometrics 44, 837-845.
    Sun, X. & Xu, W. (2014). IEEE Signal Processing Letters 21, 1389-1393.
    """
    level = check_level(level)
    o, (sa, sb), u, scales, (positives, negatives) = _read(y, {"score_a": score_a, "score_b": score_b}, weights,
                                                            positive)
    pa = _placements(o, sa, u)
    pb = _placements(o, sb, u)
    wp, wn, W1, W0 = pa[2], pa[3], pa[4], pa[5]
    if positives <= 1.0 or negatives <= 1.0:
        raise InputError(
            "y needs a total weight above 1 in each class for DeLong's variance, which counts "
            f"the weights as cases; got positives {positives:g}, negatives {negatives:g} "
            "(pass case counts as weights, or none)"
        )
    bracket, scale = _delong_cov(np.column_stack([pa[0], pb[0]]), np.column_stack([pa[1], pb[1]]), wp, wn, W1, W0,
                                 scales)
    diff = pa[6] - pb[6]
    var = float(bracket[0, 0] + bracket[1, 1] - 2.0 * bracket[0, 1])
    if not var > 1e-14 * max(float(bracket[0, 0]), float(bracket[1, 1]), 1e-300):
        raise InputError(
            "score_a and score_b give a difference of ROC areas with standard error 0 (they "
            "rank the cases the same way, or both separate the classes); the paired test "
            "does not exist"
        )
    root = math.sqrt(scale)
    se = math.sqrt(var) / root
    z = diff / math.sqrt(var) * root
    q = float(dist.normal_quantile(0.5 + level / 2.0))
    return ROCAreaDifference(
        areas=np.array([pa[6], pb[6]]),
        difference=diff,
        covariance=bracket / scale,
        standard_error=se,
        statistic=z,
        p_value=two_sided(z),
        lower=diff - q * se,
        upper=diff + q * se,
        level=level,
    )
