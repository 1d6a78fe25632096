r"""The Kolmogorov-Smirnov distance between the score distributions of the two classes.

.. math:: D = \max_v \lvert F_0(v) - F_1(v) \rvert,

:math:`F_1(v)` (:math:`F_0(v)`) the share of the positives' (negatives') case weight
with score at or below :math:`v`.  In credit scoring it is the "KS" of a scorecard (the
largest gap between the cumulative distributions of goods and bads); as a test it is
Smirnov's two-sample test that the two classes' scores come from one distribution.
The null distribution is in :mod:`lintools.support.kolmogorov_law`.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any

import numpy as np

from ..support.errors import InputError, LintoolsWarning, warn_caller
from ..support.kolmogorov_law import exact_is_affordable, exact_tail, limit_tail
from ..support.outcomes import binary_outcome, case_weights, finite_scores, unscale
from ..support.text import p_text
from ..support.validate import ReadOnlyArrays, weight_scale

__all__ = ["KolmogorovSmirnov", "kolmogorov_smirnov"]


@dataclass(frozen=True)
class KolmogorovSmirnov(ReadOnlyArrays):
    """Result of :func:`kolmogorov_smirnov`.

    Attributes
    ----------
    statistic : float
        The largest distance ``D`` between the two classes' cumulative score distributions.
    location : float
        The score at which it is reached (the lowest such score).
    positives_at_or_below, negatives_at_or_below : float
        The share of each class's case weight with score at or below ``location``.
    p_value : float
        Two-sided p-value of "both classes' scores come from one distribution"; NaN (with a
        warning) when the asymptotic law would be used and a class has total weight below 1.
    method : str
        ``"exact"`` (the permutation distribution given the ties) or ``"asymptotic"``
        (Kolmogorov's limit law).
    positives, negatives : float
        The sample sizes the p-value uses: each class's total case weight.
    """

    statistic: float
    location: float
    positives_at_or_below: float
    negatives_at_or_below: float
    p_value: float
    method: str
    positives: float
    negatives: float

    def __float__(self) -> float:
        return float(self.statistic)

    def report(self) -> str:
        """The distance, where it is reached, and its p-value as text."""
        how = ("exact, given the ties" if self.method == "exact"
               else "asymptotic (Kolmogorov's limit law; conservative with ties)")
        p = "not computed" if math.isnan(self.p_value) else p_text(self.p_value)
        return (f"Kolmogorov-Smirnov distance {self.statistic:.6f} at score {self.location:.6g}: "
                f"{100 * self.positives_at_or_below:.2f}% of positives and {100 * self.negatives_at_or_below:.2f}% "
                f"of negatives score at or below it\n"
                f"  p-value {p} ({how}; {self.positives:g} positives and {self.negatives:g} negatives)\n")

    def to_dict(self) -> dict[str, Any]:
        """The record as plain Python values."""
        import dataclasses

        return {f.name: getattr(self, f.name) for f in dataclasses.fields(self)}


def _whole(w: np.ndarray) -> bool:
    return bool(np.all(w == np.floor(w)))


def kolmogorov_smirnov(y: Any, p: Any, *, weights: Any = None, positive: Any = None) -> KolmogorovSmirnov:
    r"""Kolmogorov-Smirnov distance between the scores of the positives and the negatives.

    .. math:: D = \max_v \lvert F_0(v) - F_1(v) \rvert,\qquad
              F_k(v) = \frac{\sum_{i: y_i = k,\ p_i \le v} w_i}{\sum_{i: y_i = k} w_i}.

    The p-value is that of Smirnov's two-sided test that the two classes' scores come
    from one distribution, with the sizes :math:`m = \sum_{y_i=1} w_i` and
    :math:`n = \sum_{y_i=0} w_i`: case weights count as cases, so a weight of 2 gives
    exactly the p-value of two copies of the row, and multiplying all weights by
    :math:`c` multiplies the sizes by :math:`c` (``D`` and its location do not change).

    * **Exact** when every weight is a whole number (no weights: all 1) and
      :math:`(m + n)(\min(m, n) + 1) \le 10^8` with :math:`m + n \le 40\,000`: the
      probability, when the pooled cases are split at random into groups of :math:`m`
      and :math:`n`, of a distance at least :math:`D`, the distance being read where
      blocks of tied scores end, as for the data (the permutation distribution given the
      ties; without ties it is the classical exact distribution).
    * **Asymptotic** otherwise: Kolmogorov's limit law at
      :math:`\lambda = D\sqrt{mn/(m+n)}`.  With ties it overstates the p-value.  When a
      class's total weight is below 1 (weights that are not counts), the p-value is NaN
      with a :class:`LintoolsWarning`.

    Parameters
    ----------
    y : array-like
        Binary labels; both classes must occur with positive weight.
    p : array-like
        Scores (probabilities or any real scores), one per label.
    weights : array-like, optional
        Case weights (default 1); rows of weight 0 are left out.  Each class's weights are
        divided by a power of two before any sum, so weights of any magnitude give the
        same ``D``.
    positive : label, optional
        The positive label; default the larger.

    Returns
    -------
    KolmogorovSmirnov

    Raises
    ------
    InputError
        Labels that are not two classes, scores that are not finite, bad weights, or a
        class without positive weight.

    References
    ----------
    Smirnov, N. V. (1939). On the estimation of the discrepancy between empirical curves
    of distribution for two independent samples. Bulletin Mathématique de l'Université de
    Moscou 2, 3-14.
    Hodges, J. L. (1957). Arkiv för Matematik 3, 469-486 (the exact distribution).
    Schröer, G. & Trenkler, D. (1995). Computational Statistics & Data Analysis 20,
    185-202 (exact distribution with ties).
    """
    o, _ = binary_outcome(y, positive, need_both=True)
    s = finite_scores(p, "p", o.shape[0])
    w = case_weights(weights, o.shape[0])
    pos = o == 1.0
    if not ((w[pos] > 0).any() and (w[~pos] > 0).any()):
        raise InputError("weights are zero for every case of one class; the Kolmogorov-Smirnov distance needs "
                         "cases of both classes with positive weight")
    keep = w > 0
    s, pos, w = s[keep], pos[keep], w[keep]
    s1, s0 = weight_scale(w[pos]), weight_scale(w[~pos])
    distinct, block = np.unique(s, return_inverse=True)
    block = block.ravel()
    c1 = np.bincount(block[pos], weights=w[pos] / s1, minlength=distinct.size)
    c0 = np.bincount(block[~pos], weights=w[~pos] / s0, minlength=distinct.size)
    f1, f0 = np.cumsum(c1), np.cumsum(c0)
    f1, f0 = f1 / f1[-1], f0 / f0[-1]
    gap = np.abs(f0 - f1)
    at = int(np.argmax(gap))
    m = unscale(float(np.sum(w[pos] / s1)), s1, "the total weight of the positive class")
    n = unscale(float(np.sum(w[~pos] / s0)), s0, "the total weight of the negative class")
    if _whole(w) and exact_is_affordable(m, n):
        k1 = np.bincount(block[pos], weights=w[pos], minlength=distinct.size).astype(np.int64)
        k0 = np.bincount(block[~pos], weights=w[~pos], minlength=distinct.size).astype(np.int64)
        mi, ni = int(k1.sum()), int(k0.sum())
        k = int(np.max(np.abs(np.cumsum(k1) * ni - np.cumsum(k0) * mi)))
        p_value, method = exact_tail(k1, k0, k), "exact"
    elif min(m, n) < 1.0:
        warn_caller(
            f"kolmogorov_smirnov: the positive class has a total weight of {m:g} and the negative class {n:g}; "
            "the p-value counts case weights as cases and needs at least 1 in each class, so it is NaN (with "
            "weights that are not case counts, pass counts)",
            LintoolsWarning,
        )
        p_value, method = math.nan, "asymptotic"
    else:
        size = 1.0 / (1.0 / m + 1.0 / n)
        p_value, method = limit_tail(float(gap[at]) * math.sqrt(size)), "asymptotic"
    return KolmogorovSmirnov(
        statistic=float(gap[at]), location=float(distinct[at]), positives_at_or_below=float(f1[at]),
        negatives_at_or_below=float(f0[at]), p_value=p_value, method=method, positives=m, negatives=n,
    )
