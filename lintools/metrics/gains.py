r"""The gains table: how the positives concentrate among the highest scores.

The rows are ranked by score, highest first, and cut into bands of (about) equal case
weight; per band the table gives the rows, the positives, the rate of positives, the
cumulative share of all positives captured so far and the lift (the band's rate over
the overall rate).  A model that ranks well captures most positives in the first bands.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

import numpy as np

from .bands import band_of, quantile_cuts
from ..support.errors import InputError
from ..support.outcomes import binary_outcome, finite_scores, scaled_weights, unscale
from ..support.validate import ReadOnlyArrays, check_positive_int, power_of_two

__all__ = ["GainsTable", "gains"]


@dataclass(frozen=True)
class GainsTable(ReadOnlyArrays):
    """Result of :func:`gains`: one entry per score band, highest scores first.

    Attributes
    ----------
    highest, lowest : ndarray
        The highest and lowest score of the rows with positive weight in each band.
    rows : ndarray of int
        Rows in each band (rows of weight 0 included).
    weight : ndarray
        Case weight of each band (``rows`` without weights).
    positives : ndarray
        Case weight of the positives in each band.
    rate : ndarray
        ``positives / weight``: the band's rate of positives.
    mean_score : ndarray
        Weighted mean score of the band.
    cumulative_share : ndarray
        Share of the total case weight in this band and those above it.
    captured : ndarray
        Share of all positives in this band and those above it (the gains curve).
    lift : ndarray
        The band's rate over the overall rate.
    cumulative_lift : ndarray
        The rate of this band and those above it together, over the overall rate
        (``captured / cumulative_share``).
    overall_rate : float
        Positives over case weight, all rows.
    """

    highest: np.ndarray
    lowest: np.ndarray
    rows: np.ndarray
    weight: np.ndarray
    positives: np.ndarray
    rate: np.ndarray
    mean_score: np.ndarray
    cumulative_share: np.ndarray
    captured: np.ndarray
    lift: np.ndarray
    cumulative_lift: np.ndarray
    overall_rate: float

    def report(self) -> str:
        """The table as text."""
        head = ("band".rjust(4) + "highest score".rjust(15) + "lowest score".rjust(14) + "rows".rjust(9)
                + "positives".rjust(12) + "rate".rjust(10) + "share so far".rjust(14)
                + "captured so far".rjust(17) + "lift".rjust(8) + "lift so far".rjust(13))
        lines = [f"Gains by score band, highest scores first ({len(self.rows)} bands; overall rate of positives "
                 f"{self.overall_rate:.6g})", head, "-" * len(head)]
        for b in range(len(self.rows)):
            lines.append(
                str(b + 1).rjust(4) + f"{self.highest[b]:.6g}".rjust(15) + f"{self.lowest[b]:.6g}".rjust(14)
                + str(int(self.rows[b])).rjust(9) + f"{self.positives[b]:.6g}".rjust(12)
                + f"{self.rate[b]:.4f}".rjust(10) + f"{self.cumulative_share[b]:.4f}".rjust(14)
                + f"{self.captured[b]:.4f}".rjust(17) + f"{self.lift[b]:.3f}".rjust(8)
                + f"{self.cumulative_lift[b]:.3f}".rjust(13)
            )
        lines.append("  share so far: of all case weight in this band and those above; captured so far: of all "
                     "positives; lift: rate over the overall rate")
        return "\n".join(lines) + "\n"

    def to_dict(self) -> dict[str, Any]:
        """The record as plain Python values (lists for arrays)."""
        import dataclasses

        return {f.name: (lambda v: v.tolist() if isinstance(v, np.ndarray) else v)(getattr(self, f.name))
                for f in dataclasses.fields(self)}


def gains(y: Any, p: Any, *, bands: int = 10, weights: Any = None, positive: Any = None) -> GainsTable:
    r"""Gains table of scores ``p`` for labels ``y``: bands of the highest scores first.

    Bands: the rows are cut at the weighted quantiles of the score into ``bands`` bands
    (the rule of :mod:`lintools.metrics.bands`, applied to the scores from the highest down),
    so band 1 holds the highest-scoring share ``1 / bands`` of the case weight.  Tied
    scores are never split between bands, so a band can hold more than its share and
    there can be fewer bands than asked for.

    For band :math:`b` with case weight :math:`W_b`, positives :math:`P_b` (weights of
    the positive rows), and :math:`W`, :math:`P` the totals:

    .. math:: \text{rate}_b = P_b / W_b,\quad
              \text{captured}_b = \sum_{c \le b} P_c / P,\quad
              \text{lift}_b = \frac{P_b / W_b}{P / W},\quad
              \text{cumulative lift}_b = \frac{\sum_{c\le b} P_c / \sum_{c \le b} W_c}{P / W}.

    Parameters
    ----------
    y : array-like
        Binary labels; at least one positive row with positive weight.
    p : array-like
        Scores (probabilities or any real scores), larger meaning more likely positive.
    bands : int
        Number of bands asked for (default 10, deciles).
    weights : array-like, optional
        Case weights (default 1): a row of weight 2 counts as two copies of it, in the
        bands and in every sum.  Only relative weights matter for the rates, shares and
        lifts; ``weight`` and ``positives`` scale with the weights.
    positive : label, optional
        The positive label; default the larger.

    Returns
    -------
    GainsTable

    Raises
    ------
    InputError
        Labels that are not binary, scores that are not finite, bad weights, no positive
        row with positive weight, or a total weight beyond the largest floating-point
        number.
    """
    o, _ = binary_outcome(y, positive)
    s = finite_scores(p, "p", o.shape[0])
    count = check_positive_int(bands, "bands")
    w, u, scale = scaled_weights(weights, o.shape[0])
    if not (u @ o) > 0:
        raise InputError("y has no positive row with positive weight; the gains table needs positives")
    cuts = quantile_cuts(-s, u, count)
    band = band_of(-s, cuts)
    m = cuts.size + 1
    weight = np.bincount(band, weights=u, minlength=m)
    positives = np.bincount(band, weights=u * o, minlength=m)
    size = power_of_two(float(np.max(np.abs(s))))  # scores near 1e308: their weighted sums cannot overflow
    scored = np.bincount(band, weights=u * (s / size), minlength=m)
    highest = np.full(m, -np.inf)
    lowest = np.full(m, np.inf)
    live = u > 0  # a row of weight 0 is no row: it sets no band's highest or lowest score
    np.maximum.at(highest, band[live], s[live])
    np.minimum.at(lowest, band[live], s[live])
    cum_w, cum_p = np.cumsum(weight), np.cumsum(positives)
    total_w, total_p = cum_w[-1], cum_p[-1]
    overall = total_p / total_w
    with np.errstate(divide="ignore", invalid="ignore"):
        rate = np.where(weight > 0, positives / weight, np.nan)
        mean = np.where(weight > 0, scored / weight, np.nan) * size
    return GainsTable(
        highest=highest, lowest=lowest, rows=np.bincount(band, minlength=m),
        weight=unscale(weight, scale, "the total weight"), positives=unscale(positives, scale, "the total weight"),
        rate=rate, mean_score=mean, cumulative_share=cum_w / total_w, captured=cum_p / total_p,
        lift=rate / overall, cumulative_lift=(cum_p / cum_w) / overall, overall_rate=float(overall),
    )
