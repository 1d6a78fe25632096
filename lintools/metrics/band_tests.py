r"""Band tests: back-testing predicted probabilities band by band (rating grade by grade).

For each band :math:`b` (a rating grade, or a quantile band of the predictions) with
:math:`n_b` cases, :math:`d_b` of them positive (defaults, leaks, ...) and mean predicted
probability :math:`\bar p_b`, two tests of ":math:`\bar p_b` is the band's true rate":

* the **exact binomial test**: :math:`d_b` against the binomial law with :math:`n_b`
  trials and probability :math:`\bar p_b`;
* the **Jeffreys test**: the posterior of the band's rate under the Jeffreys prior,
  :math:`\mathrm{Beta}(d_b + \tfrac12, n_b - d_b + \tfrac12)`, against :math:`\bar p_b`
  (Brown, Cai & DasGupta 2001 for the interval; the test as used in the back-testing of
  probability-of-default models, European Central Bank 2019).

Both take the cases of a band as independent with one common rate, which correlated
outcomes (a downturn hits every borrower) violate: then they reject too often.
"""

from __future__ import annotations

import numbers
from dataclasses import dataclass
from typing import Any

import numpy as np

from .bands import band_of, quantile_cuts
from .binning import group_sums
from ..support.binomial import MAX_COUNT, beta_quantile, beta_tails, binomial_tails, binomial_two_sided
from ..support.errors import InputError
from ..support.outcomes import binary_forecast, binary_outcome, case_weights, check_level, unscale
from ..support.text import p_text
from ..support.validate import ReadOnlyArrays, as_labels, check_choice, check_positive_int, weight_scale

__all__ = ["BandTests", "band_tests", "SIDES"]

#: ``side`` values: the alternative each test looks for.
SIDES = ("both", "above", "below")
_SIDE_WORDS = {
    "both": "two-sided: the observed rate differs from the mean predicted probability",
    "above": "one-sided: the observed rate is above the mean predicted probability (predictions too low)",
    "below": "one-sided: the observed rate is below the mean predicted probability (predictions too high)",
}


@dataclass(frozen=True)
class BandTests(ReadOnlyArrays):
    """Result of :func:`band_tests`: one entry per band, and a summary over bands.

    Attributes
    ----------
    bands : tuple
        The band labels (sorted), or 1, 2, ... for quantile bands (lowest predictions first).
    lowest, highest : ndarray
        The lowest and highest predicted probability of the rows with positive weight in
        each band (NaN for a band without case weight).
    rows : ndarray of int
        Rows in each band.
    cases, positives : ndarray
        Case weight of the band (the trials) and of its positive rows (the successes).
    observed, predicted : ndarray
        Observed rate ``positives / cases`` and weighted mean predicted probability.
    binomial_p_value, jeffreys_p_value : ndarray
        p-values of the two tests on the side ``side`` (NaN where not computed; see ``notes``).
    jeffreys_lower, jeffreys_upper : ndarray
        Jeffreys interval for the band's rate at ``level`` (equal tails; 0 below when the
        band has no positive, 1 above when it has no negative).
    level : float
        Confidence level; the tests reject at significance ``1 - level``.
    side : str
        ``"both"``, ``"above"`` or ``"below"``.
    tested : int
        Bands with a p-value of each test (the binomial test's count first): ``(binomial, jeffreys)``.
    rejected : tuple of int
        Bands where the binomial and the Jeffreys test reject at ``1 - level``.
    rejected_holm : tuple of int
        The same after Holm's (1979) step-down correction for the number of bands tested.
    notes : tuple of str
        Why a test was not computed for some band.
    """

    bands: tuple
    lowest: np.ndarray
    highest: np.ndarray
    rows: np.ndarray
    cases: np.ndarray
    positives: np.ndarray
    observed: np.ndarray
    predicted: np.ndarray
    binomial_p_value: np.ndarray
    jeffreys_p_value: np.ndarray
    jeffreys_lower: np.ndarray
    jeffreys_upper: np.ndarray
    level: float
    side: str
    tested: tuple[int, int]
    rejected: tuple[int, int]
    rejected_holm: tuple[int, int]
    notes: tuple[str, ...]

    def headline(self) -> str:
        """The counts of rejections, with the word on multiple testing."""
        alpha = 1.0 - self.level
        k = max(self.tested)
        return (f"At significance {alpha:.3g} the binomial test rejects in {self.rejected[0]} of {self.tested[0]} "
                f"bands and the Jeffreys test in {self.rejected[1]} of {self.tested[1]}; with {k} bands about "
                f"{alpha * k:.2g} rejections are expected by chance alone even if every band is calibrated. After "
                f"Holm's correction for {k} tests: {self.rejected_holm[0]} and {self.rejected_holm[1]}.")

    def report(self) -> str:
        """The per-band table and the summary as text."""
        pct = f"{100 * self.level:g}%"
        head = ("band".ljust(12) + "predicted from".rjust(15) + "to".rjust(10) + "rows".rjust(9) + "cases".rjust(11)
                + "positives".rjust(11) + "observed".rjust(10) + "predicted".rjust(11) + "binomial p".rjust(12)
                + "Jeffreys p".rjust(12) + f"Jeffreys {pct} interval".rjust(26))
        lines = [f"Band tests ({_SIDE_WORDS[self.side]})", head, "-" * len(head)]
        for b, label in enumerate(self.bands):
            name = str(label)
            name = name if len(name) <= 11 else name[:8] + "..."
            lines.append(
                name.ljust(12) + f"{self.lowest[b]:.6g}".rjust(15) + f"{self.highest[b]:.6g}".rjust(10)
                + str(int(self.rows[b])).rjust(9) + f"{self.cases[b]:.6g}".rjust(11)
                + f"{self.positives[b]:.6g}".rjust(11) + f"{self.observed[b]:.5f}".rjust(10)
                + f"{self.predicted[b]:.5f}".rjust(11) + p_text(self.binomial_p_value[b]).rjust(12)
                + p_text(self.jeffreys_p_value[b]).rjust(12)
                + f"[{self.jeffreys_lower[b]:.5f}, {self.jeffreys_upper[b]:.5f}]".rjust(26)
            )
        lines.append(self.headline())
        lines += [f"Note: {n}" for n in self.notes]
        return "\n".join(lines) + "\n"

    def to_dict(self) -> dict[str, Any]:
        """The record as plain Python values (lists for arrays)."""
        import dataclasses

        out = {}
        for f in dataclasses.fields(self):
            v = getattr(self, f.name)
            out[f.name] = v.tolist() if isinstance(v, np.ndarray) else (list(v) if isinstance(v, tuple) else v)
        out["bands"] = [c.item() if isinstance(c, np.generic) else c for c in self.bands]
        return out


def _holm(p: np.ndarray, alpha: float) -> int:
    """Rejections of Holm's step-down procedure at family-wise level ``alpha`` (NaN left out)."""
    q = np.sort(p[~np.isnan(p)])
    k = q.size
    for i, v in enumerate(q):
        if v > alpha / (k - i):
            return i
    return k


def _bands_of(bands: Any, p: np.ndarray, u: np.ndarray) -> tuple[np.ndarray, tuple]:
    """Band number of each row and the band labels (quantile bands or given labels)."""
    if isinstance(bands, numbers.Integral) and not isinstance(bands, (bool, np.bool_)):
        cuts = quantile_cuts(p, u, check_positive_int(bands, "bands"))
        return band_of(p, cuts), tuple(range(1, cuts.size + 2))
    if bands is None or isinstance(bands, (str, bytes, float, bool, np.bool_)):
        raise InputError(f"bands must be a number of quantile bands (an int) or one band label per row; got "
                         f"{bands!r:.60}")
    labels, codes = as_labels(bands, "bands")
    if codes.shape[0] != p.shape[0]:
        raise InputError(f"bands has {codes.shape[0]} labels but p has {p.shape[0]} rows; pass one band label per row")
    return codes, labels


def band_tests(
    y: Any,
    p: Any,
    bands: Any,
    *,
    weights: Any = None,
    level: float = 0.95,
    side: str = "both",
    positive: Any = None,
) -> BandTests:
    r"""Exact binomial and Jeffreys tests of the predicted probabilities in each band.

    For band :math:`b`: :math:`n_b = \sum_{i \in b} w_i` cases, :math:`d_b = \sum_{i \in b}
    w_i y_i` positives, and :math:`\bar p_b = \sum_{i \in b} w_i p_i / n_b`.

    Binomial test (:math:`X \sim \mathrm{Bin}(n_b, \bar p_b)`): ``side="above"`` gives
    :math:`\Pr(X \ge d_b)`, ``"below"`` :math:`\Pr(X \le d_b)`, ``"both"`` the two-sided
    exact p-value, the probability of every outcome no more likely than :math:`d_b`
    (:mod:`lintools.support.binomial`).  It needs whole numbers :math:`n_b`, :math:`d_b` (no
    weights, or whole-number weights); otherwise its p-value is NaN and ``notes`` says so.

    Jeffreys test (:math:`\theta \sim \mathrm{Beta}(d_b + \tfrac12, n_b - d_b +
    \tfrac12)`, the posterior of the rate under the Jeffreys prior): ``"above"`` gives
    :math:`\Pr(\theta \le \bar p_b)`, the posterior probability that the rate is at most
    the prediction (small when the observed rate is above it: the prediction is too low;
    the p-value of European Central Bank 2019); ``"below"`` :math:`\Pr(\theta \ge \bar
    p_b)`; ``"both"`` twice the smaller of the two (at most 1), which is below
    ``1 - level`` exactly when :math:`\bar p_b` is outside the equal-tailed interval.
    The interval is the Jeffreys interval of Brown, Cai & DasGupta (2001): the
    :math:`(1 \mp \text{level})/2` posterior quantiles, with 0 as lower end when
    :math:`d_b = 0` and 1 as upper end when :math:`d_b = n_b`.  It allows any positive
    :math:`n_b`.

    Summary: how many bands each test rejects at significance ``1 - level``, and how many
    after Holm's step-down correction for the number of bands tested: with many bands a
    few rejections happen by chance alone.

    Parameters
    ----------
    y : array-like
        Binary labels.
    p : array-like
        Predicted probabilities of the positive class, in [0, 1].
    bands : int or array-like
        A number of quantile bands of ``p`` (the rule of :mod:`lintools.metrics.bands`; band 1
        holds the lowest predictions; tied predictions are never split, so there may be
        fewer bands), or one band label per row (rating grades, in sorted order).
    weights : array-like, optional
        Case weights (default 1), counted as cases: a weight of 2 is two copies of the
        row (exactly, in the bands, counts and p-values); multiplying all weights by
        :math:`c` leaves the rates and predictions unchanged and multiplies
        :math:`n_b` and :math:`d_b` by :math:`c`.
    level : float
        Confidence level (default 0.95): tests reject at ``1 - level``.
    side : {"both", "above", "below"}
        The alternative: the observed rate differs from, is above, or is below the mean
        prediction.  Regulatory back-tests of default probabilities use ``"above"``.
    positive : label, optional
        The positive label; default the larger.

    Returns
    -------
    BandTests

    Raises
    ------
    InputError
        Labels that are not binary, probabilities outside [0, 1], band labels that are
        missing or of the wrong length, bad weights, level or side.

    References
    ----------
    Brown, L. D., Cai, T. T. & DasGupta, A. (2001). Interval estimation for a binomial
    proportion. Statistical Science 16, 101-133.
    European Central Bank (2019). Instructions for reporting the validation results of
    internal models, IRB Pillar I models for credit risk, section 2.5.3.1 (the Jeffreys
    test).
    Basel Committee on Banking Supervision (2005). Studies on the validation of internal
    rating systems. Working Paper 14, section 4 (the binomial test).
    Holm, S. (1979). A simple sequentially rejective multiple test procedure.
    Scandinavian Journal of Statistics 6, 65-70.
    """
    f = binary_forecast(p)
    o, _ = binary_outcome(y, positive, n=f.shape[0])
    level = check_level(level)
    side = check_choice(side, "side", SIDES)
    w = case_weights(weights, f.shape[0])
    band, labels = _bands_of(bands, f, w / weight_scale(w))
    m = len(labels)
    scale, wk, (ok, fk) = group_sums(band, m, w, [o, f])
    cases = unscale(wk, scale, "the case weight of a band")
    positives = unscale(ok, scale, "the case weight of a band")
    with np.errstate(divide="ignore", invalid="ignore"):
        observed = np.where(wk > 0, ok / wk, np.nan)
        predicted = np.clip(np.where(wk > 0, fk / wk, np.nan), 0.0, 1.0)
    lowest, highest = np.full(m, np.inf), np.full(m, -np.inf)
    on = w > 0  # a row of weight 0 is no row
    np.minimum.at(lowest, band[on], f[on])
    np.maximum.at(highest, band[on], f[on])
    lowest[wk == 0], highest[wk == 0] = np.nan, np.nan
    alpha = 1.0 - level
    binom_p, jeff_p = np.full(m, np.nan), np.full(m, np.nan)
    lower, upper = np.full(m, np.nan), np.full(m, np.nan)
    notes = []
    live = (wk > 0) & (cases <= MAX_COUNT)
    if ((wk > 0) & ~live).any():
        notes.append(f"bands {_which(labels, (wk > 0) & ~live)} hold more than {MAX_COUNT:g} cases (case weights "
                     "count as cases); no test is computed there: pass case counts as weights")
    if live.any():
        n, d, pb = cases[live], np.minimum(positives[live], cases[live]), predicted[live]
        a, b = d + 0.5, n - d + 0.5
        below, above = beta_tails(pb, a, b)  # Pr(theta <= p), Pr(theta >= p)
        jeff_p[live] = {"above": below, "below": above, "both": np.minimum(1.0, 2.0 * np.minimum(below, above))}[side]
        lower[live] = np.where(d > 0, beta_quantile(np.full(d.size, alpha / 2.0), a, b), 0.0)
        upper[live] = np.where(d < n, beta_quantile(np.full(d.size, alpha / 2.0), a, b, upper=True), 1.0)
        whole = (n == np.floor(n)) & (d == np.floor(d))
        if not whole.all():
            notes.append(f"the binomial test needs whole numbers of cases and positives, which bands "
                         f"{_which(labels, _spread(live, ~whole))} do not have (case weights that are not whole "
                         "numbers); the Jeffreys test is shown")
        if whole.any():
            dw, nw, pw = d[whole], n[whole], pb[whole]
            at_most, at_least = binomial_tails(dw, nw, pw)
            result = {"above": at_least, "below": at_most}.get(side)
            if result is None:
                result = np.array([binomial_two_sided(float(di), float(ni), float(pi)) for di, ni, pi in zip(dw, nw, pw)])
            binom_p[_spread(live, whole)] = result
    tested = (int(np.sum(~np.isnan(binom_p))), int(np.sum(~np.isnan(jeff_p))))
    rejected = (int(np.sum(binom_p < alpha)), int(np.sum(jeff_p < alpha)))
    return BandTests(
        bands=labels, lowest=lowest, highest=highest, rows=np.bincount(band, minlength=m), cases=cases,
        positives=positives, observed=observed, predicted=predicted, binomial_p_value=binom_p,
        jeffreys_p_value=jeff_p, jeffreys_lower=lower, jeffreys_upper=upper, level=level, side=side,
        tested=tested, rejected=rejected, rejected_holm=(_holm(binom_p, alpha), _holm(jeff_p, alpha)),
        notes=tuple(notes),
    )


def _spread(live: np.ndarray, mask: np.ndarray) -> np.ndarray:
    """``mask`` over the live bands, spread out to all bands."""
    out = np.zeros(live.size, dtype=bool)
    out[np.flatnonzero(live)[mask]] = True
    return out


def _which(labels: tuple, mask: np.ndarray) -> str:
    shown = [str(labels[i]) for i in np.flatnonzero(mask)]
    return ", ".join(shown[:8]) + (", ..." if len(shown) > 8 else "")
