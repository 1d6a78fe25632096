"""Bins of forecast probabilities, shared by the reliability table, the calibration
error and the binned Brier decomposition.

Edge rules (one rule for every binned metric):

- ``strategy="width"``: ``bins`` equal-width bins on [0, 1], edges ``j / bins``.
- ``strategy="count"``: edges are the empirical quantiles of the forecasts at levels
  ``j / bins`` (NumPy's default linear-interpolation quantile, Hyndman & Fan type 7),
  so the first edge is the smallest and the last the largest forecast.  Case weights do
  not move these edges (equal count means equal numbers of rows).  Tied forecasts can
  make edges coincide, which leaves some bins empty.
- Bins are closed on the right, ``(e[j], e[j+1]]``, except the first, ``[e[0], e[1]]``;
  so p = 0 falls in the first bin, p = 1 in the last, and a forecast equal to an inner
  edge belongs to the bin below that edge.

The number of bins (and of Hosmer-Lemeshow groups) is at most :data:`MAX_BINS`, one
million: every bin costs memory in the result whether or not a forecast falls in it, and
beyond that almost every bin is empty for any data that fit in memory.
"""

from __future__ import annotations

import numpy as np

from ..support import distributions as dist
from ..support.validate import check_choice, check_positive_int

__all__ = ["STRATEGIES", "MAX_BINS", "check_bins", "edges_for", "assign", "group_sums", "group_shares",
           "wilson_interval"]

STRATEGIES = ("width", "count")
#: The largest number of bins (or risk groups) a binned metric accepts.
MAX_BINS = 1_000_000


def check_bins(value: object, name: str = "bins", minimum: int = 1) -> int:
    """A number of bins (or groups): an integer from ``minimum`` to :data:`MAX_BINS`."""
    return check_positive_int(value, name, minimum, MAX_BINS,
                              f"; every {name[:-1]} costs memory, and beyond {MAX_BINS} almost all of them are "
                              f"empty: pass fewer {name}")


def edges_for(p: np.ndarray, bins: int, strategy: str) -> np.ndarray:
    """Return the ``bins + 1`` bin edges for the forecasts ``p`` (see module notes)."""
    check_bins(bins)
    check_choice(strategy, "strategy", STRATEGIES)
    if strategy == "width":
        return np.linspace(0.0, 1.0, bins + 1)
    return np.percentile(p, np.linspace(0.0, 1.0, bins + 1) * 100.0)


def assign(p: np.ndarray, edges: np.ndarray) -> np.ndarray:
    """Return the bin number (0-based) of each forecast: right-closed bins, first closed."""
    return np.searchsorted(edges[1:-1], p, side="left")


def group_sums(idx: np.ndarray, m: int, w: np.ndarray, columns: list[np.ndarray]):
    """Weighted sums per group, each group on its own power-of-two scale.

    Returns ``(scale, weight, sums)``: for group ``g``, ``scale[g]`` is the power of two
    with the group's largest weight divided by it in [1, 2) (1 for a group without
    positive weight), ``weight[g] = sum w_i / scale[g]`` and ``sums[k][g] = sum w_i
    c_ik / scale[g]`` over the rows of the group.  The divisions are exact, so a group's
    weighted means ``sums[k] / weight`` neither overflow nor underflow and do not depend on
    the scale of the weights (also when the groups' weights differ by 300 orders of
    magnitude); ``scale * weight`` is the group's total weight.
    """
    top = np.zeros(m)
    np.maximum.at(top, idx, w)
    _, e = np.frexp(top)
    scale = np.where(top > 0, np.ldexp(1.0, e - 1), 1.0)
    u = w / scale[idx]
    return scale, np.bincount(idx, weights=u, minlength=m), [np.bincount(idx, weights=u * c, minlength=m) for c in columns]


def group_shares(scale: np.ndarray, weight: np.ndarray) -> np.ndarray:
    """Each group's share of the total weight, from :func:`group_sums`' ``scale`` and
    ``weight`` (no overflow: the scales are divided by the largest first, exactly)."""
    r = scale / scale.max() * weight
    return r / r.sum()


def wilson_interval(phat: np.ndarray, trials: np.ndarray, level: float) -> tuple[np.ndarray, np.ndarray]:
    """Wilson (1927) score interval for a binomial proportion; NaN where ``trials == 0``.

    The interval is the set of ``q`` with ``n (phat - q)^2 <= z^2 q (1 - q)``, ``z`` the
    ``(1 + level) / 2`` normal quantile and ``n = trials``: the roots of
    ``(n + z^2) q^2 - (2 n phat + z^2) q + n phat^2``.  They are computed without
    cancellation and without overflow for any finite ``n``::

        upper = (n phat + z^2 / 2 + z sqrt(n phat (1 - phat) + z^2 / 4)) / (n + z^2)
        lower = n phat^2 / ((n + z^2) upper)       (product of the roots)

    so ``lower`` is exactly 0 at ``phat = 0``.  The interval always contains ``phat``
    (``q = phat`` satisfies the inequality), and the bounds are clamped to
    ``[0, phat]`` and ``[phat, 1]`` so that rounding cannot put ``phat`` outside.
    """
    z = float(dist.normal_quantile(0.5 + level / 2.0))
    z2 = z * z
    n = np.asarray(trials, dtype=float)
    ph = np.asarray(phat, dtype=float)
    live = n > 0
    with np.errstate(divide="ignore", invalid="ignore", under="ignore"):
        d = n + z2
        upper = (n * ph + z2 / 2.0 + z * np.sqrt(np.maximum(n * ph * (1.0 - ph), 0.0) + z2 / 4.0)) / d
        lower = n * ph * ph / (d * upper)
    # fmin / fmax drop a NaN from a degenerate 0 / 0 (z = 0) in favour of phat
    lower = np.where(live, np.clip(np.fmin(lower, ph), 0.0, 1.0), np.nan)
    upper = np.where(live, np.clip(np.fmax(upper, ph), 0.0, 1.0), np.nan)
    return lower, upper
