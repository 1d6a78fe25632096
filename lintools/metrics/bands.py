"""Bands of a sample at its weighted quantiles, shared by the stability index, the gains
table and the band tests; and the reader of a sample's case weights.

Rule (one for every banded statistic of the validator's battery):

* The cut points of ``bands`` quantile bands are, for ``j = 1 .. bands - 1``, the
  smallest value ``v`` of the sample with at least the share ``j / bands`` of the total
  case weight at or below ``v`` (the inverse of the weighted distribution function,
  Hyndman & Fan 1996 definition 1).  Cut points that coincide (tied values) are kept
  once, and a cut point equal to the largest value is dropped, so every band holds at
  least one value of the sample and there may be fewer bands than asked for.
* Band ``b`` holds the values ``v`` with ``cut[b-1] < v <= cut[b]``: the first band is
  open below and the last open above, so a value of another sample outside the range of
  this one falls in an end band.
* Case weights are counts: a row of weight 2 moves the cut points exactly as two copies
  of the row, and a row of weight 0 as no row.  (The reliability table's equal-count bins
  use NumPy's interpolated quantiles of the forecasts, unweighted; see
  :mod:`lintools.metrics.binning`.)

Reference: Hyndman, R. J. & Fan, Y. (1996). Sample quantiles in statistical packages.
The American Statistician 50, 361-365.
"""

from __future__ import annotations

from typing import Any

import numpy as np

from ..support.errors import InputError
from ..support.validate import as_vector, as_weights, weight_scale

__all__ = ["quantile_cuts", "band_of", "sample_weights", "range_words"]


def quantile_cuts(values: np.ndarray, u: np.ndarray, bands: int) -> np.ndarray:
    """Cut points of ``bands`` weighted quantile bands of ``values`` (weights ``u`` >= 0,
    some positive); see the module notes."""
    live = u > 0
    x, w = values[live], u[live]
    distinct, index = np.unique(x, return_inverse=True)
    cum = np.cumsum(np.bincount(index.ravel(), weights=w, minlength=distinct.size))
    # share * bands at each distinct value; a cut lies at the value where it passes a whole number j
    level = np.floor(cum * float(bands) / cum[-1])
    before = np.concatenate(([0.0], level[:-1]))
    is_cut = (level > before) & (before + 1.0 <= bands - 1.0)
    is_cut[-1] = False  # the largest value is the top of the last band, never a cut
    return distinct[is_cut]


def band_of(values: np.ndarray, cuts: np.ndarray) -> np.ndarray:
    """The band (0-based) of each value: ``cut[b-1] < v <= cut[b]``."""
    return np.searchsorted(cuts, values, side="left")


def sample_weights(weights: Any, n: int, name: str, what: str) -> tuple[np.ndarray, np.ndarray, float]:
    """Case weights of a sample of ``n`` rows: ``(w, u, s)`` with ``u = w / s`` exact and
    ``max(u)`` in [1, 2) (ones when None; finite, >= 0, some positive).  ``what`` names
    the sample in the length message."""
    if weights is None:
        return np.ones(n), np.ones(n), 1.0
    arr = as_vector(weights, name)
    if arr.shape[0] != n:
        raise InputError(f"{name} has {arr.shape[0]} entries but {what} has {n}; pass one weight per row of {what}")
    with np.errstate(over="ignore"):
        w = as_weights(arr, n, name)
    s = weight_scale(w)
    return w, w / s, s


def range_words(cuts: np.ndarray, band: int) -> tuple[str, str]:
    """The bounds of a band as text: (above, up to), ``-`` where the band is open."""
    low = "-" if band == 0 else f"{cuts[band - 1]:.6g}"
    high = "-" if band == cuts.size else f"{cuts[band]:.6g}"
    return low, high
