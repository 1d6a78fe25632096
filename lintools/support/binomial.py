r"""The binomial law and the beta law's tails and quantiles, for the band tests.

Built on the incomplete beta function of :mod:`lintools.support.distributions` (its continued
fraction and Stirling-series prefactor):

* beta tails, both of them to full relative precision:
  :math:`I_x(a, b)` and :math:`1 - I_x(a, b) = I_{1-x}(b, a)`;
* binomial tails :math:`\Pr(X \ge k) = I_p(k, n - k + 1)` and
  :math:`\Pr(X \le k) = 1 - I_p(k + 1, n - k)` (A&S 26.5.24), so no sum of terms is ever
  formed;
* the binomial probability :math:`\Pr(X = k)` in Loader's (2000) saddle-point form,
  :math:`\log f = \mu(n) - \mu(k) - \mu(n-k) - D(k, np) - D(n-k, nq) +
  \tfrac12\log\frac{n}{2\pi k(n-k)}` with Stirling's remainder :math:`\mu` and the
  deviance term :math:`D(x, M) = x\log(x/M) + M - x`, written as :math:`x\,g((M-x)/x)`,
  :math:`g(u) = u - \log(1+u)` without cancellation; it keeps its relative precision for
  any :math:`n`, where a difference of log-gammas loses :math:`\log_{10} n` digits;
* the two-sided exact binomial test: the probability of every outcome no more likely
  than the one observed (the "minimum likelihood" rule; Fay 2010), outcomes within a
  relative 1e-7 of the observed probability counting as equally likely, so that outcomes
  equal in exact arithmetic (the mirror image at p = 1/2) are not split by rounding;
* beta quantiles by safeguarded Newton on the logit of the argument.

Shape parameters above 1e10 (counts beyond ten thousand million cases) are refused by
the incomplete beta function; the callers check them first and say so in their own words.

References
----------
Abramowitz, M. & Stegun, I. A. (1964). Handbook of Mathematical Functions, 26.5.24.
Loader, C. (2000). Fast and accurate computation of binomial probabilities. Technical
report, Bell Laboratories.
Fay, M. P. (2010). Two-sided exact tests and matching confidence intervals for discrete
data. The R Journal 2(1), 53-58.
"""

from __future__ import annotations

import math

import numpy as np

from .distributions import _solve_increasing
from .special import MAX_SHAPE, _beta_core, _log1pmx_neg, _stirling_rest

__all__ = ["MAX_COUNT", "beta_tails", "beta_quantile", "binomial_tails", "binomial_log_pmf", "binomial_two_sided"]

#: Largest count (trials) the tails are computed for: the incomplete beta function's limit.
MAX_COUNT = MAX_SHAPE
#: Outcomes whose probability is within this relative distance of the observed one's count
#: as equally likely in the two-sided test.
TIE_TOLERANCE = 1e-7


def _logs(x: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """``1 - x``, ``log x`` and ``log(1 - x)`` for 0 < x < 1, each from the more accurate side."""
    y = 1.0 - x
    high = x >= 0.5
    lx = np.where(high, np.log1p(-np.where(high, y, 0.0)), np.log(np.where(high, 0.5, x)))
    ly = np.where(high, np.log(np.where(high, y, 0.5)), np.log1p(-np.where(high, 0.5, x)))
    return y, lx, ly


def beta_tails(x: np.ndarray, a: np.ndarray, b: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    r"""``(I_x(a, b), 1 - I_x(a, b))`` elementwise for x in [0, 1], 0 < a, b <= 1e10.

    The incomplete beta function computes one tail by its continued fraction, on the side
    where that converges (the smaller tail, up to the last digit or so) and the other as
    its complement, so both keep their relative precision.
    """
    x, a, b = (np.asarray(v, dtype=float).ravel() for v in np.broadcast_arrays(x, a, b))
    lower = np.where(x >= 1.0, 1.0, 0.0)
    upper = 1.0 - lower
    mid = (x > 0.0) & (x < 1.0)
    if mid.any():
        y, lx, ly = _logs(x[mid])
        lo, up, _ = _beta_core(a[mid], b[mid], x[mid], y, lx, ly)
        lower[mid], upper[mid] = np.clip(lo, 0.0, 1.0), np.clip(up, 0.0, 1.0)
    return lower, upper


def binomial_tails(k: np.ndarray, n: np.ndarray, p: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    r"""``(Pr(X <= k), Pr(X >= k))`` for X binomial(n, p), whole 0 <= k <= n, 0 <= p <= 1."""
    k, n, p = (np.asarray(v, dtype=float).ravel() for v in np.broadcast_arrays(k, n, p))
    at_most = np.ones_like(k)
    at_least = np.ones_like(k)
    some = k < n  # Pr(X <= k) = 1 - I_p(k + 1, n - k)
    if some.any():
        at_most[some] = beta_tails(p[some], k[some] + 1.0, n[some] - k[some])[1]
    some = k > 0  # Pr(X >= k) = I_p(k, n - k + 1)
    if some.any():
        at_least[some] = beta_tails(p[some], k[some], n[some] - k[some] + 1.0)[0]
    return at_most, at_least


def _deviance(x: float, m: float) -> float:
    """``x log(x / m) + m - x`` for x > 0, m > 0, without cancellation.

    ``x g(u)`` with ``u = (m - x) / x``; the series behind ``g`` converges fast for
    ``u > -1/2``, and below that ``u - log(1 + u)`` has no cancellation to fear."""
    u = (m - x) / x
    return x * (u - math.log1p(u) if u <= -0.5 else float(_log1pmx_neg(np.array([u]))[0]))


def binomial_log_pmf(k: float, n: float, p: float) -> float:
    """``log Pr(X = k)`` for X binomial(n, p), whole 0 <= k <= n, 0 < p < 1 (Loader 2000)."""
    q = 1.0 - p
    if k == 0:
        return n * math.log1p(-p)
    if k == n:
        return n * math.log(p)
    mu = _stirling_rest(np.array([n, k, n - k]))
    return (float(mu[0] - mu[1] - mu[2]) - _deviance(k, n * p) - _deviance(n - k, n * q)
            + 0.5 * (math.log(n) - math.log(2.0 * math.pi) - math.log(k) - math.log(n - k)))


def binomial_two_sided(k: float, n: float, p: float) -> float:
    r"""Two-sided exact binomial p-value of ``k`` successes in ``n`` trials at probability ``p``.

    The sum of :math:`\Pr(X = j)` over the outcomes :math:`j` with
    :math:`\Pr(X = j) \le (1 + 10^{-7}) \Pr(X = k)`.  The probabilities fall away from the
    mode on either side, so the outcomes on the far side of the mean :math:`np` form one
    tail whose first member is found by bisection; the p-value is the sum of two tails.
    """
    if p <= 0.0:
        return 1.0 if k == 0 else 0.0
    if p >= 1.0:
        return 1.0 if k == n else 0.0
    mean = n * p
    if k == mean:
        return 1.0
    limit = binomial_log_pmf(k, n, p) + math.log1p(TIE_TOLERANCE)
    if k < mean:
        # the first j >= ceil(np) with Pr(X = j) <= limit (the probabilities fall from there on)
        lo, hi = float(math.ceil(mean)), n + 1.0
        while lo < hi:
            mid = math.floor((lo + hi) / 2.0)
            if binomial_log_pmf(mid, n, p) <= limit:
                hi = mid
            else:
                lo = mid + 1.0
        below = binomial_tails(k, n, p)[0][0]
        above = binomial_tails(lo, n, p)[1][0] if lo <= n else 0.0
    else:
        # the last j <= floor(np) with Pr(X = j) <= limit (the probabilities rise up to there)
        lo, hi = -1.0, float(math.floor(mean))
        while lo < hi:
            mid = math.ceil((lo + hi) / 2.0)
            if binomial_log_pmf(mid, n, p) <= limit:
                lo = mid
            else:
                hi = mid - 1.0
        below = binomial_tails(lo, n, p)[0][0] if lo >= 0 else 0.0
        above = binomial_tails(k, n, p)[1][0]
    return min(1.0, float(below + above))


def _softplus(t: np.ndarray) -> np.ndarray:
    return np.maximum(t, 0.0) + np.log1p(np.exp(-np.abs(t)))


def beta_quantile(q: np.ndarray, a: np.ndarray, b: np.ndarray, *, upper: bool = False) -> np.ndarray:
    r"""The ``x`` with :math:`I_x(a, b) = q` (or, with ``upper=True``, :math:`1 - I_x(a, b) = q`).

    Safeguarded Newton (bisection when a step leaves the bracket) on :math:`u =
    \mathrm{logit}\,x`, solving :math:`\log I_x = \log q`; the derivative of
    :math:`I_x` in :math:`u` is :math:`x^a (1-x)^b / B(a, b)`, the incomplete beta
    function's own prefactor.  Both :math:`x` and :math:`1 - x` are formed from
    :math:`u`, so either keeps its digits.  0 < q < 1; 0 < a, b <= 1e10; ``u`` is kept
    within [-700, 700], so an answer below 1e-304 (or within it of 1) is returned as that
    bound.
    """
    q, a, b = (np.asarray(v, dtype=float).ravel() for v in np.broadcast_arrays(q, a, b))
    target = np.log(q)
    mean = a / (a + b)
    sd = np.sqrt(a * b / ((a + b) ** 2 * (a + b + 1.0)))
    z = np.where((q < 0.5) != upper, -1.0, 1.0)  # a lower-tail q below 1/2 lies below the mean
    start = np.clip(mean + z * sd, 1e-300, 1.0 - 1e-16)
    u0 = np.clip(np.log(start) - np.log1p(-start), -700.0, 700.0)

    def fun(u: np.ndarray, idx: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        x, y = 1.0 / (1.0 + np.exp(-u)), 1.0 / (1.0 + np.exp(u))
        lo, up, pref = _beta_core(a[idx], b[idx], x, y, -_softplus(-u), -_softplus(u))
        with np.errstate(divide="ignore"):
            if upper:
                return target[idx] - np.log(up), pref / up
            return np.log(lo) - target[idx], pref / lo

    u = _solve_increasing(fun, u0, np.full_like(u0, -700.0), np.full_like(u0, 700.0))
    return 1.0 / (1.0 + np.exp(-u))
