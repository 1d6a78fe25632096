"""Scores of probability forecasts: the Brier score with Murphy's decomposition, and
cross-entropy.

Forecasts are the probability of the positive class (1-D) or, where noted, an (n, K)
class-probability matrix; see :mod:`lintools.support.outcomes` for how labels are read and
:mod:`lintools.metrics.binning` for the bin edge rules.  Case weights ``w`` (default 1) act as
frequency weights: a row of weight 2 counts as two identical rows.

The binned views (reliability table, calibration error) are in
:mod:`lintools.metrics.bins`; the statistical checks of calibration (Hosmer-Lemeshow,
Spiegelhalter, the calibration line) in :mod:`lintools.metrics.checks`.
"""

from __future__ import annotations

import math
import numbers
from dataclasses import dataclass
from typing import Any

import numpy as np

from .binning import assign, check_bins, edges_for, group_shares, group_sums
from ..support.errors import InputError
from ..support.outcomes import forecast, scaled_weights, unscale
from ..support.validate import ReadOnlyArrays

__all__ = ["BrierScore", "brier", "cross_entropy"]


# ----------------------------------------------------------------------------- Brier
@dataclass(frozen=True)
class BrierScore(ReadOnlyArrays):
    """The Brier score and its decomposition (Murphy 1973; Stephenson et al. 2008).

    ``score == reliability - resolution + uncertainty + within_bin_variance
    - within_bin_covariance`` holds to rounding error; the last two terms are exactly 0
    when forecasts are grouped by their distinct values.  ``float(result)`` is the score.

    Attributes
    ----------
    score, reliability, resolution, uncertainty : float
        Weighted mean squared error and Murphy's three terms.
    within_bin_variance, within_bin_covariance : float
        Stephenson, Coelho & Jolliffe (2008) terms, non-zero only for binned forecasts.
    groups : int
        Number of non-empty forecast groups (distinct forecasts, or occupied bins).
    grouping : str
        ``"distinct"`` or ``"bins"``.
    bins : int or None
        Number of equal-width bins when ``grouping == "bins"``.
    total_weight : float
        Sum of the case weights.
    classes : int
        Number of classes (2 for a binary forecast).
    """

    score: float
    reliability: float
    resolution: float
    uncertainty: float
    within_bin_variance: float
    within_bin_covariance: float
    groups: int
    grouping: str
    bins: int | None
    total_weight: float
    classes: int

    def __float__(self) -> float:
        return float(self.score)

    def report(self) -> str:
        """Return the score and its decomposition as text."""
        how = "distinct forecasts (exact)" if self.grouping == "distinct" else (
            f"{self.bins} equal-width bins (Murphy terms approximate; within-bin terms restore the identity)"
        )
        rows = [
            ("Brier score", self.score),
            ("reliability", self.reliability),
            ("resolution", self.resolution),
            ("uncertainty", self.uncertainty),
            ("within-bin variance", self.within_bin_variance),
            ("within-bin covariance", self.within_bin_covariance),
        ]
        lines = [f"Brier score, {self.classes} classes, total weight {self.total_weight:g}",
                 f"  grouped by {how}; {self.groups} groups"]
        lines += [f"  {label:<24}{value:.10g}" for label, value in rows]
        lines.append("  score = reliability - resolution + uncertainty + within-bin variance - within-bin covariance")
        return "\n".join(lines) + "\n"


def brier(
    y: Any, p: Any, *, weights: Any = None, bins: int | None = None, positive: Any = None
) -> BrierScore:
    r"""Brier score with Murphy's reliability / resolution / uncertainty decomposition.

    For a binary forecast :math:`f_i` of outcome :math:`o_i \in \{0, 1\}` with case
    weights :math:`w_i` and :math:`W = \sum w_i`,

    .. math:: BS = \frac{1}{W}\sum_i w_i (f_i - o_i)^2 .

    Group the rows (group :math:`k` with weight :math:`W_k`, mean forecast
    :math:`\bar f_k`, observed frequency :math:`\bar o_k`; overall frequency
    :math:`\bar o`).  Then

    .. math::
        REL = \frac{1}{W}\sum_k W_k(\bar f_k - \bar o_k)^2,\quad
        RES = \frac{1}{W}\sum_k W_k(\bar o_k - \bar o)^2,\quad
        UNC = \bar o (1 - \bar o),

    and :math:`BS = REL - RES + UNC + WBV - WBC` with the within-group variance
    :math:`WBV = \frac1W\sum_k\sum_{i\in k} w_i (f_i - \bar f_k)^2` and covariance
    :math:`WBC = \frac2W\sum_k\sum_{i\in k} w_i (o_i - \bar o_k)(f_i - \bar f_k)`.
    By default the groups are the distinct forecast values, so WBV = WBC = 0 and Murphy's
    identity is exact.  With ``bins=m`` the groups are ``m`` equal-width bins (edge rules
    in :mod:`lintools.metrics.binning`); REL and RES are then only approximations of the
    grouped-by-value terms, and the within-bin terms are reported so that the identity
    still holds exactly.

    For an (n, K) matrix the squared error is summed over classes,
    :math:`BS = \frac1W \sum_i w_i \sum_j (f_{ij} - o_{ij})^2`, and the terms are summed
    over classes with the groups formed by the distinct forecast vectors
    (:math:`UNC = \sum_j \bar o_j (1 - \bar o_j)`); ``bins`` is binary only.

    Parameters
    ----------
    y : array-like
        Labels (binary: bool, 0/1 or two labels; matrix: K classes).
    p : array-like
        Probability of the positive class, or an (n, K) class-probability matrix.
    weights : array-like, optional
        Case weights (>= 0).  Every term is a weighted mean, so only relative weights
        matter: multiplying all weights by a constant changes no term, only
        ``total_weight`` (the weights are divided by a power of two before any sum, so
        weights of any magnitude give the same digits).
    bins : int, optional
        Group binary forecasts into this many equal-width bins instead of by value (1 to
        1,000,000, ``lintools.metrics.binning.MAX_BINS``).
    positive : label, optional
        The positive label (binary); default the larger label.

    Returns
    -------
    BrierScore

    Raises
    ------
    InputError
        When the total weight exceeds the largest floating-point number (divide the
        weights by a constant; the score does not change).

    References
    ----------
    Brier, G. W. (1950). Verification of forecasts expressed in terms of probability.
    Monthly Weather Review 78, 1-3.
    Murphy, A. H. (1973). A new vector partition of the probability score. Journal of
    Applied Meteorology 12, 595-600.
    Stephenson, D. B., Coelho, C. A. S. & Jolliffe, I. T. (2008). Two extra components in
    the Brier score decomposition. Weather and Forecasting 23, 752-757.
    """
    outcome, f, is_matrix = forecast(y, p, positive)
    n = f.shape[0]
    _, u, scale = scaled_weights(weights, n)
    total = float(u.sum())
    F = f.reshape(n, -1)
    O = outcome.reshape(n, -1)
    score = float(u @ ((F - O) ** 2).sum(axis=1)) / total
    if bins is None:
        values, index = np.unique(F, axis=0, return_inverse=True)
        index = index.ravel()
        grouping, nbins = "distinct", None
    else:
        if is_matrix:
            raise InputError(
                "bins applies to a binary forecast only; for an (n, K) matrix the "
                "decomposition groups the distinct forecast vectors (leave bins=None)"
            )
        nbins = check_bins(bins)
        index = assign(f, edges_for(f, nbins, "width"))
        values, grouping = None, "bins"
    m = int(index.max()) + 1 if bins is None else nbins
    gscale, wk, sums = group_sums(index, m, u, [O[:, j] for j in range(O.shape[1])] + ([] if values is not None else [f]))
    live = wk > 0
    share = group_shares(gscale[live], wk[live])
    obar_k = np.column_stack(sums[: O.shape[1]])[live] / wk[live, None]
    fbar_k = values[live] if values is not None else (sums[-1][live] / wk[live])[:, None]
    obar = (u @ O) / total
    rel = float(share @ ((fbar_k - obar_k) ** 2).sum(axis=1))
    res = float(share @ ((obar_k - obar) ** 2).sum(axis=1))
    unc = float((obar * (1.0 - obar)).sum())
    if values is None:
        where = np.cumsum(live) - 1  # row of each live bin in the compressed arrays
        df = F - fbar_k[where[index]]
        wbv = float(u @ (df**2).sum(axis=1)) / total
        wbc = 2.0 * float(u @ ((O - obar_k[where[index]]) * df).sum(axis=1)) / total
    else:
        wbv = wbc = 0.0
    return BrierScore(
        score=score,
        reliability=rel,
        resolution=res,
        uncertainty=unc,
        within_bin_variance=wbv,
        within_bin_covariance=wbc,
        groups=int(live.sum()),
        grouping=grouping,
        bins=nbins,
        total_weight=unscale(total, scale, "the total weight"),
        classes=F.shape[1] if is_matrix else 2,
    )


# ----------------------------------------------------------------------- cross-entropy
def cross_entropy(
    y: Any, p: Any, *, weights: Any = None, eps: float | None = None, positive: Any = None
) -> float:
    r"""Mean negative log-likelihood (log loss) of probability forecasts.

    .. math:: CE = -\frac{1}{W}\sum_i w_i \log q_i,

    where :math:`q_i` is the probability the forecast gave to the class that occurred
    (:math:`p_i` or :math:`1 - p_i` for a binary forecast, column :math:`y_i` of an
    (n, K) matrix).  Natural logarithms.  A probability of exactly 0 given to the class
    that occurred makes the result ``inf`` (that is its value).  With ``eps`` set, each
    :math:`q_i` is first clipped into ``[eps, 1 - eps]`` (for a binary forecast this is
    the same as clipping :math:`p_i`); rows of zero weight never contribute.

    Parameters
    ----------
    y, p : array-like
        Labels and forecasts as in :func:`brier`.
    weights : array-like, optional
        Case weights (>= 0).  Only relative weights matter: multiplying all weights by a
        constant does not change the result.
    eps : float, optional
        Clipping bound, ``0 < eps < 0.5``; default no clipping.
    positive : label, optional
        The positive label (binary).

    Returns
    -------
    float
        The mean negative log-likelihood (``inf`` when a zero probability met its class).

    References
    ----------
    Good, I. J. (1952). Rational decisions. Journal of the Royal Statistical Society B 14,
    107-114.
    """
    outcome, f, is_matrix = forecast(y, p, positive)
    n = f.shape[0]
    w, u, _ = scaled_weights(weights, n)
    if eps is not None:
        if isinstance(eps, bool) or not isinstance(eps, numbers.Real) or not 0.0 < float(eps) < 0.5:
            raise InputError(f"eps must be a number with 0 < eps < 0.5 (e.g. 1e-15); got {eps!r}")
        eps = float(eps)
    with np.errstate(divide="ignore"):
        if is_matrix:
            q = f[outcome == 1.0]
            if eps is not None:
                q = np.clip(q, eps, 1.0 - eps)
            loss = -np.log(q)
        else:
            fc = f if eps is None else np.clip(f, eps, 1.0 - eps)
            loss = np.where(outcome == 1.0, -np.log(fc), -np.log1p(-fc))
    live = w > 0
    if np.isinf(loss[live]).any():  # a zero probability met its class in a row of positive weight
        return math.inf
    return float(u[live] @ loss[live]) / float(u.sum())
