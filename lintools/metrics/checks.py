"""Statistical checks of calibration for binary probability forecasts: the
Hosmer-Lemeshow test, Spiegelhalter's z test and Cox's calibration line.

Labels and forecasts are read as in :mod:`lintools.metrics.scores`; case weights act as
frequency weights.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any

import numpy as np

from ..support import distributions as dist
from ..support.errors import InputError
from ..support.text import p_text
from .binning import check_bins, group_sums
from ..support.outcomes import (
    binary_forecast,
    binary_outcome,
    fmt_number,
    scaled_weights,
    two_sided,
    unscale,
)
from ..support.validate import ReadOnlyArrays
from .calibration_line import CalibrationLine, calibration_line

__all__ = [
    "HosmerLemeshow",
    "SpiegelhalterTest",
    "CalibrationLine",
    "hosmer_lemeshow",
    "spiegelhalter",
    "calibration_line",
]


# ------------------------------------------------------------------ Hosmer-Lemeshow
@dataclass(frozen=True)
class HosmerLemeshow(ReadOnlyArrays):
    """Result of :func:`hosmer_lemeshow`: the statistic and its observed/expected table.

    Attributes
    ----------
    statistic : float
        :math:`\\sum_g [(O_g - E_g)^2 / E_g + (O'_g - E'_g)^2 / E'_g]`.
    degrees_of_freedom : int
        Number of groups formed minus 2.
    p_value : float
        Upper tail of chi-square(``degrees_of_freedom``).
    lower, upper : ndarray
        Smallest and largest forecast in each group.
    count : ndarray of int
        Rows in each group.
    weight : ndarray
        Total case weight of each group.
    observed, expected : ndarray
        Weighted number of positives and sum of forecasts in each group.
    observed_negative, expected_negative : ndarray
        The same for the negative class.
    """

    statistic: float
    degrees_of_freedom: int
    p_value: float
    lower: np.ndarray
    upper: np.ndarray
    count: np.ndarray
    weight: np.ndarray
    observed: np.ndarray
    expected: np.ndarray
    observed_negative: np.ndarray
    expected_negative: np.ndarray

    def report(self) -> str:
        """Return the observed/expected table and the test as text."""
        head = ("group".rjust(5) + "p from".rjust(11) + "p to".rjust(11) + "rows".rjust(8) + "weight".rjust(11)
                + "obs pos".rjust(11) + "exp pos".rjust(11) + "obs neg".rjust(11) + "exp neg".rjust(11))
        lines = ["Hosmer-Lemeshow test", head, "-" * len(head)]
        for g in range(len(self.count)):
            lines.append(
                str(g + 1).rjust(5) + fmt_number(self.lower[g]) + fmt_number(self.upper[g]) + str(int(self.count[g])).rjust(8)
                + fmt_number(self.weight[g]) + fmt_number(self.observed[g]) + fmt_number(self.expected[g])
                + fmt_number(self.observed_negative[g]) + fmt_number(self.expected_negative[g])
            )
        lines.append(f"statistic {self.statistic:.6g} with {self.degrees_of_freedom} degrees of freedom, p-value {p_text(self.p_value)}")
        return "\n".join(lines) + "\n"


def _risk_groups(f: np.ndarray, u: np.ndarray, groups: int) -> np.ndarray:
    """Group number of each row: deciles (or ``groups``-iles) of risk, ties kept together.

    ``u`` are the weights divided by a power of two (no overflow).  A cumulative share
    within ``4 (n + 1) 2**-53`` (relative) of ``j / groups`` counts as reaching it: that
    bounds the rounding of the running sum and of a common factor in the weights, so the
    cuts, and hence the groups, do not depend on the scale of the weights.  Integer counts
    are still compared exactly (the slack is below one case) while
    ``(groups - 1) * total * (n + 1) < 2**51``.
    """
    values, index = np.unique(f, return_inverse=True)
    cum = np.cumsum(np.bincount(index, weights=u, minlength=values.shape[0]))
    total = cum[-1]
    slack = 1.0 - 4.0 * (f.shape[0] + 1) * 2.0**-53
    # cut point j (1..groups-1): the smallest distinct forecast whose cumulative weight
    # share reaches j / groups, compared as cum * groups >= j * total (less the slack);
    # cum is non-decreasing, so one sorted search finds every cut in O(groups log n)
    first = np.searchsorted(cum * groups, np.arange(1, groups) * total * slack, side="left")
    cuts = values[np.minimum(first, values.shape[0] - 1)]
    group_of_value = np.searchsorted(cuts, values, side="left")
    return group_of_value[index]


def hosmer_lemeshow(
    y: Any, p: Any, *, groups: int = 10, weights: Any = None, positive: Any = None
) -> HosmerLemeshow:
    r"""Hosmer-Lemeshow goodness-of-fit test over groups of risk.

    The rows are ordered by forecast and cut into ``groups`` groups of (nearly) equal
    total weight, the "deciles of risk" for ``groups=10``.  Cut point :math:`c_j`
    (:math:`j = 1..G-1`) is the smallest distinct forecast :math:`v` whose cumulative
    weight share :math:`W(f \le v)/W` reaches :math:`j/G`; a row belongs to group
    :math:`\#\{j: c_j < f_i\}`.  Rows with tied forecasts are therefore never split
    across groups; when ties make cut points coincide, the empty groups are dropped
    and the degrees of freedom count the groups actually formed.  With
    :math:`O_g = \sum_g w_i o_i`, :math:`E_g = \sum_g w_i f_i`,
    :math:`O'_g = \sum_g w_i (1-o_i)`, :math:`E'_g = \sum_g w_i (1-f_i)`:

    .. math:: C = \sum_g \frac{(O_g - E_g)^2}{E_g} + \frac{(O'_g - E'_g)^2}{E'_g}
              = \sum_g \frac{(O_g - E_g)^2}{W_g \bar f_g (1 - \bar f_g)},

    referred to chi-square with (groups formed - 2) degrees of freedom.  A group whose
    expected count is 0 while its observed count is not makes the statistic ``inf``
    (p-value 0); 0/0 terms count 0.

    Parameters
    ----------
    y : array-like
        Binary labels.
    p : array-like
        Probability of the positive class.
    groups : int
        Number of groups wanted, 3 to 1,000,000 (``lintools.metrics.binning.MAX_BINS``).
    weights : array-like, optional
        Case weights, counted as cases: multiplying all weights by :math:`c` leaves the
        groups unchanged and multiplies the statistic and every observed and expected
        count by :math:`c` (the p-value follows).  Each group's sums are formed on the
        weights divided by a power of two, so weights of any magnitude neither overflow
        nor underflow.
    positive : label, optional

    Returns
    -------
    HosmerLemeshow

    Raises
    ------
    InputError
        When ties leave fewer than 3 groups (no degrees of freedom), or the statistic or a
        group's total exceeds the largest floating-point number (weights that are not
        case counts: divide them by a constant).

    References
    ----------
    Hosmer, D. W. & Lemeshow, S. (1980). Goodness of fit tests for the multiple logistic
    regression model. Communications in Statistics - Theory and Methods 9, 1035-1049.
    """
    f = binary_forecast(p)
    o, _ = binary_outcome(y, positive, n=f.shape[0])
    w, u, _ = scaled_weights(weights, f.shape[0])
    g_wanted = check_bins(groups, "groups", minimum=3)
    gid = _risk_groups(f, u, g_wanted)
    m = g_wanted
    scale, wk, (obs, exp, obs0, exp0) = group_sums(gid, m, w, [o, f, 1.0 - o, 1.0 - f])
    keep = wk > 0
    if keep.sum() < 3:
        raise InputError(
            f"p has too few distinct values (with positive weight) to form 3 risk groups "
            f"(formed {int(keep.sum())}); the Hosmer-Lemeshow test needs at least 3 groups"
        )
    count = np.bincount(gid, minlength=m)
    lower, upper = np.full(m, np.inf), np.full(m, -np.inf)
    np.minimum.at(lower, gid, f)
    np.maximum.at(upper, gid, f)
    lower[count == 0] = upper[count == 0] = np.nan

    def part(a: np.ndarray, e: np.ndarray) -> np.ndarray:
        with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
            t = (a - e) ** 2 / e
        if ((e > 0) & np.isinf(t)).any():
            raise InputError(
                "p has forecasts so close to 0 or 1 that a Hosmer-Lemeshow term (observed "
                "minus expected, squared, over an expected count below 1e-300) exceeds the "
                "largest floating-point number; the test cannot be computed for these forecasts"
            )
        return np.where(e == 0, np.where(a == 0, 0.0, np.inf), t)

    # each group's terms on its own scale, then brought to the largest group's scale
    # (exact powers of two) and summed: the statistic counts the weights as cases
    sk = scale[keep]
    top = float(sk.max())
    terms = part(obs[keep], exp[keep]) + part(obs0[keep], exp0[keep])
    with np.errstate(invalid="ignore"):
        terms = np.where(np.isinf(terms), np.inf, sk / top * terms)
    stat = unscale(float(terms.sum()), top, "the Hosmer-Lemeshow statistic")
    df = int(keep.sum()) - 2
    pval = 0.0 if math.isinf(stat) else float(dist.chi2_sf(stat, df))
    return HosmerLemeshow(
        statistic=stat,
        degrees_of_freedom=df,
        p_value=pval,
        lower=lower[keep],
        upper=upper[keep],
        count=count[keep],
        weight=unscale(wk[keep], sk, "the total weight of a risk group"),
        observed=unscale(obs[keep], sk, "the observed count of a risk group"),
        expected=unscale(exp[keep], sk, "the expected count of a risk group"),
        observed_negative=unscale(obs0[keep], sk, "the observed count of a risk group"),
        expected_negative=unscale(exp0[keep], sk, "the expected count of a risk group"),
    )


# ---------------------------------------------------------------------- Spiegelhalter
@dataclass(frozen=True)
class SpiegelhalterTest(ReadOnlyArrays):
    """Result of :func:`spiegelhalter`.

    Attributes
    ----------
    statistic : float
        :math:`z = (B - E_0 B)/\\sqrt{\\mathrm{Var}_0 B}`.
    p_value : float
        Two-sided normal tail.
    brier, expected_brier, brier_variance : float
        :math:`B`, its mean and variance if the forecasts were the true probabilities.
    """

    statistic: float
    p_value: float
    brier: float
    expected_brier: float
    brier_variance: float


def spiegelhalter(y: Any, p: Any, *, weights: Any = None, positive: Any = None) -> SpiegelhalterTest:
    r"""Spiegelhalter's (1986) z test of calibration, based on the Brier score.

    If each outcome is Bernoulli(:math:`f_i`), the Brier score
    :math:`B = \frac1W\sum w_i (o_i - f_i)^2` has mean
    :math:`E_0 B = \frac1W\sum w_i f_i(1-f_i)` and variance
    :math:`\mathrm{Var}_0 B = \frac{1}{W^2}\sum w_i (1-2f_i)^2 f_i(1-f_i)`
    (weights as frequency weights), so that

    .. math:: z = \frac{\sum_i w_i (o_i - f_i)(1 - 2 f_i)}
                       {\sqrt{\sum_i w_i (1 - 2 f_i)^2 f_i (1 - f_i)}}

    is approximately standard normal; the p-value is two-sided.

    Parameters
    ----------
    y : array-like
        Binary labels.
    p : array-like
        Probability of the positive class.
    weights : array-like, optional
        Case (frequency) weights, counted as cases: multiplying all weights by
        :math:`c` multiplies z by :math:`\sqrt c` and ``brier_variance`` by
        :math:`1/c`, and leaves ``brier`` and ``expected_brier`` unchanged.  The sums
        are formed on the weights divided by a power of two (no overflow or underflow).
    positive : label, optional

    Returns
    -------
    SpiegelhalterTest

    Raises
    ------
    InputError
        When every forecast is 0, 1/2 or 1 (the variance is 0 and z does not exist), or
        ``brier_variance`` exceeds the largest floating-point number (weights whose total
        is far below one case: pass case counts).

    References
    ----------
    Spiegelhalter, D. J. (1986). Probabilistic prediction in patient management and
    clinical trials. Statistics in Medicine 5, 421-433.
    """
    f = binary_forecast(p)
    o, _ = binary_outcome(y, positive, n=f.shape[0])
    _, u, scale = scaled_weights(weights, f.shape[0])
    total = float(u.sum())
    var_sum = float(u @ ((1.0 - 2.0 * f) ** 2 * f * (1.0 - f)))
    if not var_sum > 0.0:
        raise InputError(
            "p has every forecast (with positive weight) equal to 0, 1/2 or 1, so the Brier "
            "score has no variance under calibration and Spiegelhalter's z does not exist"
        )
    # on the scaled weights z' = z / sqrt(scale); sqrt(scale) is a power of two times 1 or sqrt 2
    z = unscale(float(u @ ((o - f) * (1.0 - 2.0 * f))) / math.sqrt(var_sum), math.sqrt(scale), "Spiegelhalter's z")
    return SpiegelhalterTest(
        statistic=z,
        p_value=two_sided(z),
        brier=float(u @ (o - f) ** 2) / total,
        expected_brier=float(u @ (f * (1.0 - f))) / total,
        brier_variance=unscale(var_sum / total**2, scale, "the variance of the Brier score under calibration",
                               divide=True),
    )
