r"""Population stability: has the population a model sees moved away from the one it was
built on?

The population stability index compares the distribution of one variable (a feature or
the score) in an expected sample (usually the development sample) with an actual one
(a recent sample), bin by bin:

.. math:: \mathrm{PSI} = \sum_b (a_b - e_b) \log\frac{a_b}{e_b},

with :math:`e_b` and :math:`a_b` the shares of the expected and actual case weight in
bin :math:`b`.  It is the symmetrised Kullback-Leibler divergence (Jeffreys' J
divergence) of the two binned distributions, so it is never negative and is 0 exactly
when the shares agree.  Its use and its reading bands are common practice in
credit-model monitoring (for example Siddiqi 2006, chapter 8, quoted from memory), not a
statistical test: the index of two samples from one population is positive and falls
with the sample sizes (Yurdakul 2018).
"""

from __future__ import annotations

import math
import numbers
from dataclasses import dataclass
from typing import Any

import numpy as np

from .bands import band_of, quantile_cuts, range_words, sample_weights
from ..support.errors import InputError
from ..support.outcomes import unscale
from ..support.validate import ReadOnlyArrays, as_array, as_labels, as_vector, check_positive_int

__all__ = ["PopulationStability", "population_stability", "READING_BANDS", "EMPTY_SHARE"]

#: Upper ends of the "stable" and "moderate shift" readings (common practice in
#: credit-model monitoring); above the second the shift is "major".
READING_BANDS = (0.1, 0.25)
#: The share a bin without case weight in one sample is given (common practice).
EMPTY_SHARE = 1e-4


def reading(index: float) -> str:
    """The common-practice reading of a stability index."""
    if index < READING_BANDS[0]:
        return "stable"
    return "moderate shift" if index <= READING_BANDS[1] else "major shift"


@dataclass(frozen=True)
class PopulationStability(ReadOnlyArrays):
    """Result of :func:`population_stability`: the index and its per-bin table.

    Attributes
    ----------
    index : float
        The population stability index (``float(result)`` is the index).
    reading : str
        ``"stable"`` (index below 0.1), ``"moderate shift"`` (0.1 to 0.25) or
        ``"major shift"`` (above 0.25): the reading bands of common practice in
        credit-model monitoring, not a test.
    binning : str
        ``"quantile"`` (bins at weighted quantiles of the expected sample), ``"edges"``
        (bins at the cut points given) or ``"category"`` (one bin per category).
    cuts : ndarray
        Cut points of numeric bins: bin ``b`` holds ``cuts[b-1] < v <= cuts[b]``, the
        first bin is open below and the last open above (empty for categories).
    categories : tuple
        The category of each bin (``binning == "category"``): those of the expected
        sample in sorted order, then those seen only in the actual sample.
    expected_rows, actual_rows : ndarray of int
        Rows of each sample in each bin.
    expected_weight, actual_weight : ndarray
        Case weight of each sample in each bin (the rows without weights).
    expected_share, actual_share : ndarray
        Each sample's share of its total case weight in each bin, as observed.
    expected_empty, actual_empty : ndarray of bool
        Bins where that sample has no case weight but the other has: there its share is
        taken as ``empty_share`` in the index.
    contribution : ndarray
        Each bin's term of the index (0 for a bin empty in both samples).
    empty_share : float
    """

    index: float
    reading: str
    binning: str
    cuts: np.ndarray
    categories: tuple
    expected_rows: np.ndarray
    actual_rows: np.ndarray
    expected_weight: np.ndarray
    actual_weight: np.ndarray
    expected_share: np.ndarray
    actual_share: np.ndarray
    expected_empty: np.ndarray
    actual_empty: np.ndarray
    contribution: np.ndarray
    empty_share: float

    def __float__(self) -> float:
        return float(self.index)

    def bin_labels(self) -> list[tuple[str, str]]:
        """Each bin's bounds as text, ``(above, up to)``, or ``(category, "")``."""
        if self.binning == "category":
            return [(str(c), "") for c in self.categories]
        return [range_words(self.cuts, b) for b in range(self.cuts.size + 1)]

    def headline(self) -> str:
        """One line: the index, its reading and the reading bands."""
        low, high = READING_BANDS
        return (f"population stability index {self.index:.4f}: {self.reading} (common practice: below {low:g} "
                f"stable, {low:g} to {high:g} moderate shift, above {high:g} major shift)")

    def report(self) -> str:
        """The index, its reading and the per-bin table as text."""
        kind = {"quantile": "bins at the weighted quantiles of the expected sample",
                "edges": "bins at the cut points given", "category": "one bin per category"}[self.binning]
        first = self.headline()
        lines = [first[0].upper() + first[1:], f"  {len(self.contribution)} {kind}"]
        cat = self.binning == "category"
        head = ("bin".rjust(4) + ("  category".ljust(22) if cat else "above".rjust(12) + "up to".rjust(12))
                + "expected rows".rjust(15) + "expected share".rjust(16) + "actual rows".rjust(13)
                + "actual share".rjust(14) + "contribution".rjust(14))
        lines += [head, "-" * len(head)]
        for b, (low, high) in enumerate(self.bin_labels()):
            where = ("  " + (low if len(low) <= 19 else low[:16] + "...")).ljust(22) if cat else low.rjust(12) + high.rjust(12)
            e = f"{self.expected_share[b]:.6f}" + ("*" if self.expected_empty[b] else " ")
            a = f"{self.actual_share[b]:.6f}" + ("*" if self.actual_empty[b] else " ")
            lines.append(str(b + 1).rjust(4) + where + str(int(self.expected_rows[b])).rjust(15) + e.rjust(16)
                         + str(int(self.actual_rows[b])).rjust(13) + a.rjust(14)
                         + f"{self.contribution[b]:.6f}".rjust(14))
        if self.expected_empty.any() or self.actual_empty.any():
            lines.append(f"  * no case weight in that sample: its share is taken as {self.empty_share:g} in the index")
        return "\n".join(lines) + "\n"

    def to_dict(self) -> dict[str, Any]:
        """The record as plain Python values (lists for arrays)."""
        import dataclasses

        out = {}
        for f in dataclasses.fields(self):
            v = getattr(self, f.name)
            out[f.name] = v.tolist() if isinstance(v, np.ndarray) else (list(v) if isinstance(v, tuple) else v)
        out["categories"] = [c.item() if isinstance(c, np.generic) else c for c in self.categories]
        return out


def _is_numeric(arr: np.ndarray) -> bool:
    """Numbers (binned at cut points) rather than categories (bool, text, other labels)."""
    if arr.dtype.kind in "iuf":
        return True
    if arr.dtype.kind != "O":
        return False
    return all(isinstance(v, numbers.Real) and not isinstance(v, (bool, np.bool_)) for v in arr.ravel().tolist())


def _sample(x: Any, name: str) -> tuple[bool, np.ndarray]:
    """(numeric, values): a 1-D sample of numbers or of categories."""
    if x is None:
        raise InputError(f"{name} is None; pass one value per row (numbers, or text categories)")
    arr = as_array(x, name)
    if arr.ndim != 1:
        raise InputError(f"{name} must be 1-D (one value per row); got shape {arr.shape}")
    if arr.shape[0] == 0:
        raise InputError(f"{name} is empty; pass at least one value")
    if arr.dtype.kind in "cV":
        raise InputError(f"{name} holds {'complex numbers' if arr.dtype.kind == 'c' else 'structured records'}; "
                         "pass numbers or text categories")
    if _is_numeric(arr):
        return True, as_vector(arr, name)
    return False, arr


def _check_edges(edges: Any) -> np.ndarray:
    cuts = as_vector(edges, "edges")
    if cuts.size > 1 and not np.all(np.diff(cuts) > 0):
        i = int(np.argmax(~(np.diff(cuts) > 0)))
        raise InputError(f"edges must increase strictly; entry {i + 1} ({cuts[i + 1]!r}) is not above entry {i} "
                         f"({cuts[i]!r}); pass sorted, distinct cut points")
    return cuts


def _check_share(value: Any) -> float:
    if isinstance(value, (bool, np.bool_)) or not isinstance(value, numbers.Real) or not 0.0 < float(value) < 1.0:
        raise InputError(f"empty_share must be a number strictly between 0 and 1 (e.g. {EMPTY_SHARE:g}); "
                         f"got {value!r}")
    return float(value)


def _bin_sums(index: np.ndarray, u: np.ndarray, m: int) -> np.ndarray:
    """Case weight per bin, summed in the order of (bin, weight): the same rows in any
    order give the same sums bit for bit (so a sample against itself gives exactly 0)."""
    order = np.lexsort((u, index))
    return np.bincount(index[order], weights=u[order], minlength=m)


def population_stability(
    expected: Any,
    actual: Any,
    *,
    bins: int = 10,
    edges: Any = None,
    weights: Any = None,
    actual_weights: Any = None,
    empty_share: float = EMPTY_SHARE,
) -> PopulationStability:
    r"""Population stability index of ``actual`` against ``expected``, with its bins.

    .. math:: \mathrm{PSI} = \sum_b (a_b - e_b)\log\frac{a_b}{e_b},\qquad
              e_b = \frac{\sum_{i \in b} w_i}{\sum_i w_i},\
              a_b = \frac{\sum_{i \in b} v_i}{\sum_i v_i},

    natural logarithms, :math:`w` and :math:`v` the case weights of the two samples.

    Bins
        Numbers: ``bins`` bins at the weighted quantiles of the expected sample (the rule
        of :mod:`lintools.metrics.bands`: tied values are never split, so there may be fewer
        bins, and every bin holds part of the expected sample), or, with ``edges``, the
        bins between the given cut points.  The first bin is open below and the last
        open above, so ``k`` cut points make ``k + 1`` bins and no value falls outside.
        Text, bool and other labels: one bin per category, those of the expected sample
        first (sorted), then any seen only in the actual sample.  To bin numbers by value
        (codes, grades), pass them as text.
    Empty bins
        A bin with case weight in one sample and none in the other would make the index
        infinite.  The empty sample's share there is taken as ``empty_share`` (default
        0.0001, a rule of thumb of common practice), the other shares are left as
        observed, and the record marks the bin.  A bin empty in both samples
        contributes 0.  Quantile bins are never empty in the expected sample.
    Reading
        Below 0.1 "stable", 0.1 to 0.25 "moderate shift", above 0.25 "major shift":
        bands of common practice in credit-model monitoring (for example Siddiqi 2006),
        not a test.

    Parameters
    ----------
    expected, actual : array-like
        One value per row: numbers, or categories (text, bool, labels).  Both of one kind.
    bins : int
        Number of quantile bins of numeric samples (default 10, the deciles); not used
        with ``edges`` or categories.
    edges : array-like, optional
        Strictly increasing cut points of numeric bins.
    weights : array-like, optional
        Case weights of the ``expected`` rows (default 1): a row of weight 2 counts as two
        copies of it, in the shares and in the quantile bins.
    actual_weights : array-like, optional
        Case weights of the ``actual`` rows (default 1).  The weights of each sample are
        divided by a power of two before any sum, and only each sample's relative weights
        matter: multiplying either sample's weights by a constant changes no share and
        no term of the index.
    empty_share : float
        The share given to a sample in a bin where it has no case weight (0 < value < 1).

    Returns
    -------
    PopulationStability

    Raises
    ------
    InputError
        Empty samples, a sample that mixes numbers and text or samples of different
        kinds, NaN or infinite numbers, missing categories, edges that do not increase,
        bad weights, or a total case weight beyond the largest floating-point number.

    References
    ----------
    Siddiqi, N. (2006). Credit Risk Scorecards. Wiley, chapter 8 (the index and its
    reading bands in scorecard monitoring).
    Yurdakul, B. (2018). Statistical properties of population stability index. PhD
    dissertation, Western Michigan University.
    Jeffreys, H. (1946). An invariant form for the prior probability in estimation
    problems. Proceedings of the Royal Society A 186, 453-461 (the J divergence).
    """
    e_num, e = _sample(expected, "expected")
    a_num, a = _sample(actual, "actual")
    if e_num != a_num:
        kinds = {True: "numbers", False: "categories (text or labels)"}
        raise InputError(f"expected holds {kinds[e_num]} but actual holds {kinds[a_num]}; pass the same variable "
                         "in both samples (convert numbers to text to compare them as categories)")
    share = _check_share(empty_share)
    w, u, s = sample_weights(weights, e.shape[0], "weights", "expected")
    v, t, r = sample_weights(actual_weights, a.shape[0], "actual_weights", "actual")
    categories: tuple = ()
    if e_num:
        if edges is not None:
            cuts, binning = _check_edges(edges), "edges"
        else:
            cuts, binning = quantile_cuts(e, u, check_positive_int(bins, "bins")), "quantile"
        ie, ia, m = band_of(e, cuts), band_of(a, cuts), cuts.size + 1
    else:
        if edges is not None:
            raise InputError("edges apply to numbers; expected and actual hold categories (leave edges out)")
        ke, ce = as_labels(e, "expected")
        ka, ca = as_labels(a, "actual")
        new = [c for c in ka if c not in set(ke)]
        try:
            categories = tuple(ke) + tuple(sorted(new))
        except TypeError:
            raise InputError("actual has categories of another type than expected (for example numbers and "
                             "text); use one type in both samples") from None
        lookup = {c: b for b, c in enumerate(categories)}
        ie = np.array([lookup[c] for c in ke], dtype=np.intp)[ce]
        ia = np.array([lookup[c] for c in ka], dtype=np.intp)[ca]
        cuts, binning, m = np.empty(0), "category", len(categories)
    we, wa = _bin_sums(ie, u, m), _bin_sums(ia, t, m)
    se, sa = we / we.sum(), wa / wa.sum()
    e_empty, a_empty = (we == 0) & (wa > 0), (wa == 0) & (we > 0)
    used_e, used_a = np.where(e_empty, share, se), np.where(a_empty, share, sa)
    both = (we > 0) | (wa > 0)
    with np.errstate(divide="ignore", invalid="ignore"):
        terms = np.where(both, (used_a - used_e) * (np.log(used_a) - np.log(used_e)), 0.0)
    index = float(math.fsum(terms))
    return PopulationStability(
        index=index, reading=reading(index), binning=binning, cuts=cuts, categories=categories,
        expected_rows=np.bincount(ie, minlength=m), actual_rows=np.bincount(ia, minlength=m),
        expected_weight=unscale(we, s, "the expected sample's total weight"),
        actual_weight=unscale(wa, r, "the actual sample's total weight"),
        expected_share=se, actual_share=sa, expected_empty=e_empty, actual_empty=a_empty,
        contribution=terms, empty_share=share,
    )
