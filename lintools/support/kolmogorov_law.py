r"""Null distribution of the two-sample Kolmogorov-Smirnov statistic.

Two ways, chosen by :func:`exact_is_affordable`:

* **Exact, given the ties.**  Under the null hypothesis every assignment of the pooled
  cases to the two samples (sizes ``m`` and ``n``) is equally likely.  Walk through the
  pooled cases in order of score: ``i`` cases of the first sample and ``j`` of the second
  after ``t = i + j`` steps, a lattice path from (0, 0) to (m, n).  The statistic
  compares the two empirical distribution functions only where a block of tied scores
  ends, so a path reaches the observed value :math:`D = K/(mn)` when at one of those
  steps :math:`|i n - j m| \ge K` (whole numbers, compared exactly).  The p-value is the
  share of paths that do.  With :math:`P_t(i)` the share of the paths to :math:`(i, t-i)`
  that have reached the boundary,

  .. math:: P_t(i) = \frac{i}{t} P_{t-1}(i-1) + \frac{t-i}{t} P_{t-1}(i),

  set to 1 where the boundary is reached; the p-value is :math:`P_{m+n}(m)`.  Every step
  is a convex combination of numbers in [0, 1]: nothing overflows and nothing cancels, so
  small p-values keep their relative precision.  Without ties this is the classical
  lattice-path count (Hodges 1957); with ties it is the exact permutation distribution
  given the tie pattern (Schröer & Trenkler 1995).  Cost: ``(m + n) (min(m, n) + 1)``.
* **Asymptotic.**  Kolmogorov's limit law,
  :math:`\Pr(\sqrt{mn/(m+n)}\,D > \lambda) \to Q(\lambda) = 2\sum_{k\ge1}(-1)^{k-1}
  e^{-2k^2\lambda^2}`, evaluated for :math:`\lambda < 1` from the theta-function form of
  the distribution function, :math:`1 - Q = \frac{\sqrt{2\pi}}{\lambda}\sum_{k\ge1}
  e^{-(2k-1)^2\pi^2/(8\lambda^2)}` (Smirnov 1939; Feller 1948), where the alternating
  series converges slowly.  With ties it is conservative.

References
----------
Hodges, J. L. (1957). The significance probability of the Smirnov two-sample test.
Arkiv för Matematik 3, 469-486.
Schröer, G. & Trenkler, D. (1995). Exact and randomization distributions of
Kolmogorov-Smirnov tests two or three samples. Computational Statistics & Data
Analysis 20, 185-202.
Smirnov, N. V. (1939). On the estimation of the discrepancy between empirical curves of
distribution for two independent samples. Bulletin Mathématique de l'Université de
Moscou 2, 3-14.
Feller, W. (1948). On the Kolmogorov-Smirnov limit theorems for empirical
distributions. Annals of Mathematical Statistics 19, 177-189.
"""

from __future__ import annotations

import math

import numpy as np

__all__ = ["EXACT_BUDGET", "exact_is_affordable", "exact_tail", "limit_tail"]

#: Largest ``(m + n) * (min(m, n) + 1)`` (lattice cells) for which the exact p-value is
#: computed; about half a second on one core.
EXACT_BUDGET = 1e8
#: Most steps ``m + n`` of the exact computation (each is a few NumPy calls).
EXACT_STEPS = 40_000


def exact_is_affordable(m: float, n: float) -> bool:
    """Whether the exact p-value is computed for samples of ``m`` and ``n`` cases."""
    return m + n <= EXACT_STEPS and (m + n) * (min(m, n) + 1.0) <= EXACT_BUDGET


def exact_tail(first: np.ndarray, second: np.ndarray, k: int) -> float:
    r"""``Pr(D >= K / (mn))`` under random assignment, given the tie blocks.

    ``first[b]`` and ``second[b]`` are the numbers of cases of each sample in the ``b``-th
    block of tied scores (blocks in score order, whole numbers); ``k`` is the observed
    :math:`K = \max_b |I_b n - J_b m|` with :math:`I_b, J_b` the running counts.
    """
    first = np.asarray(first, dtype=np.int64)
    second = np.asarray(second, dtype=np.int64)
    m, n = int(first.sum()), int(second.sum())
    if k <= 0:
        return 1.0
    if m > n:  # the index runs over the smaller sample; |i n - j m| is symmetric in the two
        first, second, m, n = second, first, n, m
    ends = np.cumsum(first + second)
    is_end = np.zeros(m + n + 1, dtype=bool)
    is_end[ends] = True
    share = np.zeros(m + 2)  # share[i + 1] = P_t(i); share[0] stays 0
    total = m + n
    for t in range(1, total + 1):
        lo, hi = max(0, t - n), min(t, m)
        i = np.arange(lo, hi + 1, dtype=np.float64)
        new = (i * share[lo : hi + 1] + (t - i) * share[lo + 1 : hi + 2]) / t
        if is_end[t]:
            gap = np.abs(np.arange(lo, hi + 1, dtype=np.int64) * total - t * m)
            new[gap >= k] = 1.0
        share[lo + 1 : hi + 2] = new
    return float(min(1.0, max(0.0, share[m + 1])))


def limit_tail(lam: float) -> float:
    r"""Kolmogorov's limit tail :math:`Q(\lambda) = \Pr(K > \lambda)`."""
    if not lam > 0.0:
        return 1.0
    if lam < 1.0:
        c = -(math.pi**2) / (8.0 * lam * lam)
        total = sum(math.exp(c * (2 * j - 1) ** 2) for j in range(1, 20))
        return float(min(1.0, max(0.0, 1.0 - math.sqrt(2.0 * math.pi) / lam * total)))
    total = 0.0
    for j in range(1, 101):
        term = math.exp(-2.0 * j * j * lam * lam)
        total += term if j % 2 else -term
        if term < 1e-17 * total:
            break
    return float(min(1.0, max(0.0, 2.0 * total)))
