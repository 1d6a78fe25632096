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
"""

from __future__ import annotations

import numpy as np

from . import _distributions as dist
from ._validate import check_choice, check_positive_int

__all__ = ["STRATEGIES", "edges_for", "assign", "wilson_interval"]

STRATEGIES = ("width", "count")


def edges_for(p: np.ndarray, bins: int, strategy: str) -> np.ndarray:
    """Return the ``bins + 1`` bin edges for the forecasts ``p`` (see module notes)."""
    check_positive_int(bins, "bins")
    check_choice(strategy, "strategy", STRATEGIES)
    if strategy == "width":
        return np.linspace(0.0, 1.0, bins + 1)
    return np.percentile(p, np.linspace(0.0, 1.0, bins + 1) * 100.0)


def assign(p: np.ndarray, edges: np.ndarray) -> np.ndarray:
    """Return the bin number (0-based) of each forecast: right-closed bins, first closed."""
    return np.searchsorted(edges[1:-1], p, side="left")


def wilson_interval(successes: np.ndarray, trials: np.ndarray, level: float) -> tuple[np.ndarray, np.ndarray]:
    """Wilson (1927) score interval for a binomial proportion; NaN where ``trials == 0``.

    With ``z`` the ``(1 + level) / 2`` normal quantile and ``phat = successes / trials``::

        centre = (phat + z^2 / (2 n)) / (1 + z^2 / n)
        half   = z / (1 + z^2 / n) * sqrt(phat (1 - phat) / n + z^2 / (4 n^2))
    """
    z = float(dist.normal_quantile(0.5 + level / 2.0))
    n = np.asarray(trials, dtype=float)
    with np.errstate(divide="ignore", invalid="ignore"):
        phat = np.asarray(successes, dtype=float) / n
        z2n = z * z / n
        centre = (phat + z2n / 2.0) / (1.0 + z2n)
        half = z / (1.0 + z2n) * np.sqrt(np.maximum(phat * (1.0 - phat), 0.0) / n + z2n / (4.0 * n))
    lower = np.where(n > 0, np.clip(centre - half, 0.0, 1.0), np.nan)
    upper = np.where(n > 0, np.clip(centre + half, 0.0, 1.0), np.nan)
    return lower, upper
