"""Tests of lintools.support.binomial (binomial law, beta tails and quantiles) and of
lintools.support.kolmogorov_law (null law of the two-sample Kolmogorov-Smirnov statistic).

Oracles, named beside each check: scipy.stats.binom, scipy.stats.binomtest,
scipy.stats.beta, scipy.stats.kstwobign; mpmath at 40 digits; exact enumeration of every
split of a small pooled sample with fractions.Fraction.
"""

from __future__ import annotations

import itertools
import math
from fractions import Fraction

import mpmath
import numpy as np
import pytest
import scipy.stats

from lintools.support.binomial import (
    beta_quantile,
    beta_tails,
    binomial_log_pmf,
    binomial_tails,
    binomial_two_sided,
)
from lintools.support.kolmogorov_law import exact_tail, limit_tail


def rel(a, b):
    return abs(a - b) / abs(b)


def cases(seed, count=120, top=3000):
    rng = np.random.default_rng(seed)
    for _ in range(count):
        n = int(rng.integers(1, top))
        yield int(rng.integers(0, n + 1)), n, float(rng.uniform(0.002, 0.998))


def test_binomial_probability_and_tails_against_scipy():
    worst = 0.0
    for k, n, p in cases(1):
        pairs = [(math.exp(binomial_log_pmf(k, n, p)), scipy.stats.binom.pmf(k, n, p))]
        at_most, at_least = binomial_tails(k, n, p)
        pairs += [(at_most[0], scipy.stats.binom.cdf(k, n, p)), (at_least[0], scipy.stats.binom.sf(k - 1, n, p))]
        for mine, ref in pairs:
            if ref > 1e-290:
                worst = max(worst, rel(mine, ref))
    # source: scipy.stats.binom pmf, cdf, sf (measured worst 2e-12 relative, in tails near 1e-290)
    assert worst < 1e-10


@pytest.mark.parametrize("k, n, p", [(25, 175, 0.9477521482429694), (1, 21, 0.8333612304220543),
                                     (222, 351, 0.980058195989895), (0, 40, 0.3), (40, 40, 0.3)])
def test_binomial_probability_deep_in_the_tails_against_mpmath(k, n, p):
    exact = mpmath.binomial(n, k) * mpmath.mpf(p) ** k * (1 - mpmath.mpf(p)) ** (n - k)
    # source: mpmath at 40 digits (Loader's saddle-point form keeps ~15 digits at 1e-163)
    assert rel(math.exp(binomial_log_pmf(k, n, p)), float(exact)) < 1e-12


def test_two_sided_binomial_test_against_scipy_binomtest():
    for k, n, p in itertools.chain(cases(2, 150, 2000), [(3, 10, 0.5), (7, 10, 0.5), (5, 10, 0.5), (0, 20, 0.1)]):
        ref = scipy.stats.binomtest(k, n, p).pvalue
        mine = binomial_two_sided(k, n, p)
        # source: scipy.stats.binomtest, alternative two-sided (the same minimum-likelihood rule);
        # deep in the tails scipy's binomial upper tail underflows to 0 (at 1504 of 1540 it gives
        # 2.7e-261 where mpmath gives 7.85e-261), so there the next test takes mpmath as the oracle
        assert rel(mine, ref) < 1e-10 if ref > 1e-100 else mine < 1e-90


def _exact_two_sided(k, n, p):
    f = lambda j: mpmath.binomial(n, j) * mpmath.mpf(p) ** j * (1 - mpmath.mpf(p)) ** (n - j)  # noqa: E731
    limit = f(k) * (1 + mpmath.mpf("1e-7"))
    near = range(0, 400)
    small = mpmath.fsum(f(j) for j in near if f(j) <= limit)
    return small + (1 - mpmath.fsum(f(j) for j in near))  # every j >= 400 is far less likely than k here


def test_two_sided_binomial_test_with_a_thousand_million_trials_against_mpmath():
    mpmath.mp.dps = 40
    exact = _exact_two_sided(50, 10**9, 3e-8)
    # source: mpmath at 40 digits; scipy's binomtest gives 6.865889724894987e-4 here (9 digits)
    assert rel(binomial_two_sided(50, 10**9, 3e-8), float(exact)) < 1e-12


def test_two_sided_binomial_test_deep_in_the_tail_against_mpmath():
    k, n, p = 1504, 1540, 0.6141694373545522
    q = mpmath.mpf(p)
    f = lambda j: mpmath.binomial(n, j) * q**j * (1 - q) ** (n - j)  # noqa: E731
    limit = f(k) * (1 + mpmath.mpf("1e-7"))
    exact = mpmath.fsum(f(j) for j in range(n + 1) if f(j) <= limit)
    # source: mpmath at 40 digits, the sum over every outcome (7.850160064018703e-261)
    assert rel(binomial_two_sided(k, n, p), float(exact)) < 1e-11


@pytest.mark.parametrize("x, a, b", [(0.3, 2.5, 7.5), (1e-12, 0.5, 3.0), (0.999999, 100.0, 2.0),
                                     (0.02, 40.5, 960.5), (0.5, 1e6, 1e6 + 3)])
def test_beta_tails_against_scipy(x, a, b):
    lower, upper = beta_tails(x, a, b)
    # source: scipy.stats.beta cdf and sf; each tail to full relative precision
    assert rel(lower[0], scipy.stats.beta.cdf(x, a, b)) < 1e-11
    assert rel(upper[0], scipy.stats.beta.sf(x, a, b)) < 1e-11


def test_beta_quantile_against_scipy():
    q = np.array([0.025, 0.975, 1e-10, 0.5, 0.005])
    a = np.array([3.5, 10.5, 2.5, 100.5, 0.5 + 12])
    b = np.array([20.5, 3.5, 1e6, 0.5, 4000.5])
    # source: scipy.stats.beta ppf and isf (measured agreement 1e-15 relative)
    assert np.allclose(beta_quantile(q, a, b), scipy.stats.beta.ppf(q, a, b), rtol=1e-12, atol=0)
    assert np.allclose(beta_quantile(q, a, b, upper=True), scipy.stats.beta.isf(q, a, b), rtol=1e-12, atol=0)


def _statistic(a, b):
    m, n = len(a), len(b)
    values, inverse = np.unique(np.concatenate([a, b]), return_inverse=True)
    first = np.bincount(inverse[:m], minlength=values.size)
    second = np.bincount(inverse[m:], minlength=values.size)
    k = int(np.max(np.abs(np.cumsum(first) * n - np.cumsum(second) * m)))
    return first, second, k


@pytest.mark.parametrize("m, n", [(5, 7), (20, 30), (100, 37), (300, 300), (13, 2000)])
def test_exact_kolmogorov_law_without_ties_against_scipy(m, n):
    rng = np.random.default_rng(m * 1000 + n)
    a, b = rng.normal(size=m), rng.normal(0.3, 1.0, size=n)
    first, second, k = _statistic(a, b)
    ref = scipy.stats.ks_2samp(a, b, method="exact").pvalue
    # source: scipy.stats.ks_2samp, method="exact" (measured agreement 1.2e-15 relative)
    assert rel(exact_tail(first, second, k), ref) < 1e-12


def test_exact_kolmogorov_law_with_ties_against_enumeration():
    """The p-value given the ties is the share of all splits of the pooled sample into
    groups of m and n whose statistic (read at the ends of tied blocks) is at least the
    observed one: enumerated here over all C(11, 5) = 462 splits with exact fractions."""
    pooled = np.array([1, 1, 2, 2, 2, 3, 4, 4, 5, 5, 5])
    observed_first = [0, 1, 2, 5, 8]
    mask = np.zeros(pooled.size, dtype=bool)
    mask[observed_first] = True
    m, n = 5, 6

    def stat(first_mask):
        a, b = pooled[first_mask], pooled[~first_mask]
        return max(abs(Fraction(int((a <= v).sum()), m) - Fraction(int((b <= v).sum()), n)) for v in np.unique(pooled))

    d_obs = stat(mask)
    hits = 0
    for chosen in itertools.combinations(range(pooled.size), m):
        trial = np.zeros(pooled.size, dtype=bool)
        trial[list(chosen)] = True
        hits += stat(trial) >= d_obs
    exact = Fraction(hits, math.comb(pooled.size, m))
    first, second, k = _statistic(pooled[mask], pooled[~mask])
    # source: exact enumeration with fractions.Fraction (the permutation law given the ties)
    assert rel(exact_tail(first, second, k), float(exact)) < 1e-14


@pytest.mark.parametrize("lam", [0.2, 0.5, 0.9, 0.999, 1.0, 1.5, 3.0, 6.0])
def test_kolmogorov_limit_law_against_scipy(lam):
    # source: scipy.stats.kstwobign (Kolmogorov's limit distribution), survival function
    assert rel(limit_tail(lam), scipy.stats.kstwobign.sf(lam)) < 1e-13
