"""Binned views of probability calibration: the reliability table and the (expected,
root-mean-square, maximum) calibration error.

Bin edges follow the rules in :mod:`lintools.metrics.binning`; labels and forecasts are read as
in :mod:`lintools.support.outcomes`.  Case weights act as frequency weights.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any

import numpy as np

from .binning import STRATEGIES, assign, check_bins, edges_for, group_shares, group_sums, wilson_interval
from ..support.errors import InputError
from ..support.outcomes import (
    binary_forecast,
    binary_outcome,
    case_weights,
    check_level,
    class_forecast,
    fmt_number,
    unscale,
)
from ..support.validate import ReadOnlyArrays, check_choice, check_probabilities, is_one_of

__all__ = ["ReliabilityTable", "reliability", "calibration_error"]


# ------------------------------------------------------------------- reliability table
@dataclass(frozen=True)
class ReliabilityTable(ReadOnlyArrays):
    """Per-bin observed frequency against mean forecast (a reliability diagram's data).

    One entry per bin, empty bins included (``count == 0``, NaN means and intervals).

    Attributes
    ----------
    edges : ndarray (bins + 1,)
        Bin edges; bin j is ``(edges[j], edges[j+1]]``, the first bin also holds ``edges[0]``.
    count : ndarray of int
        Rows in each bin.
    weight : ndarray
        Sum of case weights in each bin (equals ``count`` without weights).
    mean_predicted, observed : ndarray
        Weighted mean forecast and weighted observed frequency of the positive class.
    observed_lower, observed_upper : ndarray
        Wilson score interval for the observed frequency at ``level``, with the bin's
        total weight as the number of trials.
    level : float
    strategy : str
        ``"width"`` or ``"count"``.
    """

    edges: np.ndarray
    count: np.ndarray
    weight: np.ndarray
    mean_predicted: np.ndarray
    observed: np.ndarray
    observed_lower: np.ndarray
    observed_upper: np.ndarray
    level: float
    strategy: str

    def report(self) -> str:
        """Return the table as fixed-width text."""
        pct = f"{100 * self.level:g}%"
        head = ("bin".rjust(4) + "from".rjust(11) + "to".rjust(11) + "rows".rjust(8) + "weight".rjust(11)
                + "mean p".rjust(11) + "observed".rjust(11) + f"{pct} low".rjust(11) + f"{pct} high".rjust(11))
        kind = "equal width" if self.strategy == "width" else "equal count"
        lines = [f"reliability table, {len(self.count)} bins of {kind}", head, "-" * len(head)]
        for j in range(len(self.count)):
            lines.append(
                str(j + 1).rjust(4) + fmt_number(self.edges[j]) + fmt_number(self.edges[j + 1])
                + str(int(self.count[j])).rjust(8) + fmt_number(self.weight[j])
                + fmt_number(self.mean_predicted[j]) + fmt_number(self.observed[j])
                + fmt_number(self.observed_lower[j]) + fmt_number(self.observed_upper[j])
            )
        return "\n".join(lines) + "\n"


def _bin_means(p: np.ndarray, o: np.ndarray, w: np.ndarray, idx: np.ndarray, m: int):
    """Per bin: power-of-two scale, scaled weight, mean forecast and observed frequency
    (NaN for a bin without positive weight); see :func:`lintools.metrics.binning.group_sums`."""
    scale, wk, (sp, so) = group_sums(idx, m, w, [p, o])
    with np.errstate(divide="ignore", invalid="ignore"):
        return scale, wk, np.where(wk > 0, sp / wk, np.nan), np.where(wk > 0, so / wk, np.nan)


def reliability(
    y: Any,
    p: Any,
    *,
    bins: int = 10,
    strategy: str = "width",
    weights: Any = None,
    level: float = 0.95,
    positive: Any = None,
) -> ReliabilityTable:
    r"""Reliability table: per bin, the mean forecast and the observed frequency.

    For bin :math:`b` with rows :math:`B_b`:
    :math:`\bar f_b = \sum_{B_b} w_i f_i / \sum_{B_b} w_i` and
    :math:`\bar o_b = \sum_{B_b} w_i o_i / \sum_{B_b} w_i`, with a Wilson (1927) score
    interval for :math:`\bar o_b` that treats the bin's total weight as the number of
    trials (frequency weights).

    Bins (see :mod:`lintools.metrics.binning`): ``strategy="width"`` gives equal-width bins on
    [0, 1]; ``strategy="count"`` gives bins between empirical quantiles of ``p`` (equal
    numbers of rows when there are no ties).  Bins are right-closed except the first, so
    p = 0 is in the first bin and p = 1 in the last.  Empty bins are kept, with count 0
    and NaN means and interval, so the table always has ``bins`` rows.

    Parameters
    ----------
    y : array-like
        Binary labels.
    p : array-like
        Probability of the positive class.
    bins : int
        Number of bins, 1 to 1,000,000 (``lintools.metrics.binning.MAX_BINS``).
    strategy : {"width", "count"}
    weights : array-like, optional
        Case weights, counted as cases by the interval: multiplying all weights by
        :math:`c` leaves the means unchanged, multiplies ``weight`` by :math:`c` and
        narrows the Wilson interval as :math:`c` trials say (half-width about
        :math:`1/\sqrt c` times the old one for large bins).  The weights of each bin are
        divided by a power of two before they are summed, so weights of any magnitude
        give the same means.  The interval always contains the observed frequency.
    level : float
        Confidence level of the Wilson interval.
    positive : label, optional

    Returns
    -------
    ReliabilityTable

    Raises
    ------
    InputError
        When a bin's total weight exceeds the largest floating-point number (divide the
        weights by a constant).

    References
    ----------
    Murphy, A. H. & Winkler, R. L. (1977). Reliability of subjective probability
    forecasts of precipitation and temperature. Applied Statistics 26, 41-47.
    Wilson, E. B. (1927). Probable inference, the law of succession, and statistical
    inference. Journal of the American Statistical Association 22, 209-212.
    """
    f = binary_forecast(p)
    o, _ = binary_outcome(y, positive, n=f.shape[0])
    w = case_weights(weights, f.shape[0])
    level = check_level(level)
    nbins = check_bins(bins)
    edges = edges_for(f, nbins, strategy)
    idx = assign(f, edges)
    scale, wk, fbar, obar = _bin_means(f, o, w, idx, nbins)
    weight = unscale(wk, scale, "the total weight of a bin")
    lower, upper = wilson_interval(obar, weight, level)
    return ReliabilityTable(
        edges=edges,
        count=np.bincount(idx, minlength=nbins),
        weight=weight,
        mean_predicted=fbar,
        observed=obar,
        observed_lower=lower,
        observed_upper=upper,
        level=level,
        strategy=strategy,
    )


# ----------------------------------------------------------------- calibration error
NORMS = (1, 2, "max")


def _gap(f, o, w, nbins, strategy, norm) -> float:
    edges = edges_for(f, nbins, strategy)
    idx = assign(f, edges)
    scale, wk, fbar, obar = _bin_means(f, o, w, idx, nbins)
    live = wk > 0
    gap = np.abs(obar[live] - fbar[live])
    share = group_shares(scale[live], wk[live])
    if norm == 1:
        return float(share @ gap)
    if norm == 2:
        return float(math.sqrt(share @ gap**2))
    return float(gap.max())


def calibration_error(
    y: Any,
    p: Any,
    *,
    bins: int = 15,
    norm: int | str = 1,
    strategy: str = "width",
    multiclass: str = "top-label",
    weights: Any = None,
    positive: Any = None,
) -> float:
    r"""Binned calibration error: the weighted gap between observed frequency and forecast.

    With bins :math:`b` of weight share :math:`s_b = W_b / W`, mean forecast
    :math:`\bar f_b` and observed frequency :math:`\bar o_b` (as in
    :func:`reliability`),

    - ``norm=1``: :math:`\sum_b s_b |\bar o_b - \bar f_b|`, the expected calibration
      error (ECE; Naeini, Cooper & Hauskrecht 2015; Guo et al. 2017);
    - ``norm=2``: :math:`\sqrt{\sum_b s_b (\bar o_b - \bar f_b)^2}`;
    - ``norm="max"``: :math:`\max_b |\bar o_b - \bar f_b|` over non-empty bins, the
      maximum calibration error (MCE).

    A 1-D ``p`` is the probability of the positive class.  For an (n, K) matrix,
    ``multiclass="top-label"`` bins the largest probability of each row (the first
    column wins a tie) against whether that column is the observed class (Guo et al.
    2017); ``multiclass="class-wise"`` computes the binary error of each column against
    the indicator of its class and returns the mean over the K classes (Kull et al. 2019).
    Bin edges follow :mod:`lintools.metrics.binning`; empty bins do not contribute.

    Parameters
    ----------
    y, p : array-like
        Labels and forecasts.
    bins : int
        Number of bins, 1 to 1,000,000 (``lintools.metrics.binning.MAX_BINS``).
    norm : {1, 2, "max"}
    strategy : {"width", "count"}
    multiclass : {"top-label", "class-wise"}
        Used only when ``p`` is a matrix.
    weights : array-like, optional
        Case weights.  Only relative weights matter: multiplying all weights by a
        constant does not change the result (each bin's weights are divided by a power
        of two before they are summed, so weights of any magnitude give the same digits).
    positive : label, optional

    Returns
    -------
    float

    References
    ----------
    Naeini, M. P., Cooper, G. F. & Hauskrecht, M. (2015). Obtaining well calibrated
    probabilities using Bayesian binning. AAAI 2015, 2901-2907.
    Guo, C., Pleiss, G., Sun, Y. & Weinberger, K. Q. (2017). On calibration of modern
    neural networks. ICML 2017.
    Kull, M. et al. (2019). Beyond temperature scaling: obtaining well-calibrated
    multiclass probabilities with Dirichlet calibration. NeurIPS 2019.
    """
    if isinstance(norm, bool) or not is_one_of(norm, NORMS):
        raise InputError(f"norm={norm!r} is not one of 1, 2, 'max'")
    nbins = check_bins(bins)
    check_choice(strategy, "strategy", STRATEGIES)
    check_choice(multiclass, "multiclass", ("top-label", "class-wise"))
    arr = check_probabilities(p, "p")
    if arr.ndim == 1:
        o, _ = binary_outcome(y, positive, n=arr.shape[0])
        w = case_weights(weights, arr.shape[0])
        return _gap(arr, o, w, nbins, strategy, norm)
    if positive is not None:
        raise InputError("positive= applies to a 1-D p; with a matrix each column is a class")
    codes, _ = class_forecast(y, arr)
    w = case_weights(weights, arr.shape[0])
    if multiclass == "top-label":
        top = arr.argmax(axis=1)
        conf = arr[np.arange(arr.shape[0]), top]
        return _gap(conf, (top == codes).astype(float), w, nbins, strategy, norm)
    return float(np.mean([
        _gap(arr[:, k], (codes == k).astype(float), w, nbins, strategy, norm) for k in range(arr.shape[1])
    ]))
