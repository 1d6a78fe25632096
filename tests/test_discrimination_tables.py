"""Tests of lintools.kolmogorov_smirnov, lintools.metrics.gains and the accuracy ratio of roc_auc.

Oracles, named beside each check: scipy.stats.ks_2samp (statistic, location, exact
p-value) and scipy.stats.kstwobign (the asymptotic law); a gains table computed by hand
with exact fractions; scikit-learn's roc_auc_score for the accuracy ratio (2A - 1,
Engelmann, Hayden & Tasche 2003); duplicated rows for case weights.
"""

from __future__ import annotations

import json
import math
import warnings
from fractions import Fraction

import numpy as np
import pytest
import scipy.stats
from hypothesis import given, settings
from hypothesis import strategies as st
from sklearn.metrics import roc_auc_score

import lintools as lt
from lintools import InputError, LintoolsWarning


def scores(seed, n=400, ties=False):
    rng = np.random.default_rng(seed)
    y = rng.uniform(size=n) < 0.35
    p = 1.0 / (1.0 + np.exp(-(rng.normal(size=n) + 1.2 * y - 0.8)))
    return y, (np.round(p, 2) if ties else p)


# ------------------------------------------------------------------ Kolmogorov-Smirnov
@pytest.mark.parametrize("seed, n", [(0, 60), (1, 400), (2, 3000)])
def test_ks_against_scipy_exact(seed, n):
    y, p = scores(seed, n)
    r = lt.kolmogorov_smirnov(y, p)
    ref = scipy.stats.ks_2samp(p[y], p[~y], method="exact")
    # source: scipy.stats.ks_2samp (statistic, statistic_location, exact p-value)
    assert r.method == "exact"
    assert abs(r.statistic - ref.statistic) <= 1e-15 and r.location == ref.statistic_location
    assert abs(r.p_value - ref.pvalue) <= 1e-12 * ref.pvalue
    assert r.positives == y.sum() and r.negatives == (~y).sum()
    labels = np.where(y, "bad", "good")
    same = lt.kolmogorov_smirnov(labels, p, positive="bad")
    assert same.statistic == r.statistic and same.p_value == r.p_value


def test_ks_asymptotic_against_scipy_limit_law():
    y, p = scores(3, 50_000)
    r = lt.kolmogorov_smirnov(y, p)
    ref = scipy.stats.ks_2samp(p[y], p[~y])
    m, n = y.sum(), (~y).sum()
    # source: scipy.stats.ks_2samp (statistic); scipy.stats.kstwobign (Kolmogorov's limit law)
    assert r.method == "asymptotic" and abs(r.statistic - ref.statistic) <= 1e-15
    assert math.isclose(r.p_value, scipy.stats.kstwobign.sf(ref.statistic * math.sqrt(m * n / (m + n))), rel_tol=1e-12)


def test_ks_case_weights_are_duplicated_rows():
    y, p = scores(4, 300, ties=True)
    w = np.random.default_rng(4).integers(0, 4, size=y.size).astype(float)
    weighted = lt.kolmogorov_smirnov(y, p, weights=w)
    copies = lt.kolmogorov_smirnov(np.repeat(y, w.astype(int)), np.repeat(p, w.astype(int)))
    # source: duplicated rows (a weight of 2 is two copies of the row; a weight of 0 no row)
    assert weighted.method == copies.method == "exact"
    assert (weighted.statistic, weighted.location, weighted.p_value) == (copies.statistic, copies.location,
                                                                          copies.p_value)
    assert (weighted.positives, weighted.negatives) == (copies.positives, copies.negatives)


def test_ks_with_weights_that_are_not_counts():
    y, p = scores(5, 500)
    w = np.random.default_rng(5).uniform(0.5, 1.5, size=y.size)
    r = lt.kolmogorov_smirnov(y, p, weights=w)
    m, n = w[y].sum(), w[~y].sum()
    # the documented effective sizes: each class's total case weight
    assert r.method == "asymptotic" and math.isclose(r.positives, m) and math.isclose(r.negatives, n)
    # source: scipy.stats.kstwobign at D sqrt(mn / (m + n))
    assert math.isclose(r.p_value, scipy.stats.kstwobign.sf(r.statistic * math.sqrt(m * n / (m + n))), rel_tol=1e-12)
    with pytest.warns(LintoolsWarning, match="needs at least 1 in each class"):
        tiny = lt.kolmogorov_smirnov(y, p, weights=w / w.sum())
    assert math.isnan(tiny.p_value) and math.isclose(tiny.statistic, r.statistic, rel_tol=1e-14)
    assert "not computed" in tiny.report()


@settings(max_examples=40, deadline=None)
@given(st.integers(0, 2**31 - 1), st.integers(-200, 200), st.integers(20, 200))
def test_ks_distance_is_invariant_to_weight_scale_and_row_order(seed, k, n):
    """Invariants: multiplying all weights by a power of two changes neither the distance
    nor its location (bit for bit), and permuting the rows changes only the order of the
    sums (the distance to rounding, its location not at all)."""
    y, p = scores(seed, n, ties=True)
    if y.all() or not y.any():
        y[0] = not y[0]
    w = np.random.default_rng(seed).uniform(0.5, 2.0, size=n)
    base = lt.kolmogorov_smirnov(y, p, weights=w)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", LintoolsWarning)  # weights of 2**-200 are not counts: p-value NaN
        scaled = lt.kolmogorov_smirnov(y, p, weights=np.ldexp(w, k))
    assert (scaled.statistic, scaled.location) == (base.statistic, base.location)
    order = np.random.default_rng(seed + 1).permutation(n)
    moved = lt.kolmogorov_smirnov(y[order], p[order], weights=w[order])
    assert math.isclose(moved.statistic, base.statistic, rel_tol=1e-14) and moved.location == base.location
    assert moved.p_value == base.p_value or abs(moved.p_value - base.p_value) <= 1e-13 * base.p_value


@pytest.mark.parametrize("call, words", [
    (lambda: lt.kolmogorov_smirnov([1, 1, 1], [0.1, 0.2, 0.3]), "single class"),
    (lambda: lt.kolmogorov_smirnov([0, 1, 1], [0.1, 0.2, 0.3], weights=[0, 1, 1]), "weights are zero for every"),
    (lambda: lt.kolmogorov_smirnov([0, 1, 1], [0.1, 0.2]), "mismatched lengths"),
    (lambda: lt.kolmogorov_smirnov([0, 1, 1], [0.1, np.inf, 0.3]), "p has a non-finite value (inf) at row 1"),
])
def test_ks_bad_input_is_refused_by_name(call, words):
    with pytest.raises(InputError) as info:
        call()
    assert words in str(info.value)


# ------------------------------------------------------------------------------ gains
def test_gains_against_a_hand_computation():
    p = np.array([0.95, 0.9, 0.8, 0.7, 0.6, 0.5, 0.4, 0.3, 0.2, 0.1])
    y = np.array([1, 1, 0, 1, 0, 1, 0, 0, 0, 0])
    g = lt.gains(y, p, bands=5)
    # by hand: bands of two rows from the top, positives 2, 1, 1, 0, 0; overall rate 4/10
    positives = [2, 1, 1, 0, 0]
    captured = [Fraction(sum(positives[: b + 1]), 4) for b in range(5)]
    lift = [Fraction(d, 2) / Fraction(4, 10) for d in positives]
    cum_lift = [Fraction(sum(positives[: b + 1]), 2 * (b + 1)) / Fraction(4, 10) for b in range(5)]
    # source: hand computation in exact fractions
    assert g.rows.tolist() == [2] * 5 and g.positives.tolist() == positives
    assert np.allclose(g.captured, [float(c) for c in captured], rtol=1e-15, atol=0)
    assert np.allclose(g.lift, [float(v) for v in lift], rtol=1e-15, atol=0)
    assert np.allclose(g.cumulative_lift, [float(v) for v in cum_lift], rtol=1e-15, atol=0)
    assert g.highest.tolist() == [0.95, 0.8, 0.6, 0.4, 0.2] and g.lowest.tolist() == [0.9, 0.7, 0.5, 0.3, 0.1]
    assert g.captured[-1] == 1.0 and g.cumulative_share.tolist()[-1] == 1.0
    assert "captured so far" in g.report()
    json.dumps(g.to_dict())


def test_gains_never_split_tied_scores():
    p = np.array([0.9, 0.9, 0.9, 0.9, 0.5, 0.5, 0.2, 0.2, 0.2, 0.1])
    y = np.array([1, 0, 1, 1, 0, 1, 0, 0, 1, 0])
    g = lt.gains(y, p, bands=5)
    # the four tied 0.9 rows reach the shares 0.2 and 0.4 together: one band, so 4 bands in all
    assert g.rows.tolist() == [4, 2, 3, 1] and g.positives.tolist() == [3, 1, 1, 0]


def test_gains_case_weights_are_duplicated_rows():
    y, p = scores(6, 250, ties=True)
    w = np.random.default_rng(6).integers(0, 4, size=y.size).astype(float)
    weighted = lt.gains(y, p, weights=w)
    copies = lt.gains(np.repeat(y, w.astype(int)), np.repeat(p, w.astype(int)))
    # source: duplicated rows
    for name in ("highest", "lowest", "positives", "rate", "captured", "lift", "cumulative_lift", "cumulative_share"):
        assert np.array_equal(getattr(weighted, name), getattr(copies, name)), name
    assert np.array_equal(weighted.weight, copies.rows)


@settings(max_examples=40, deadline=None)
@given(st.integers(0, 2**31 - 1), st.floats(1e-100, 1e100))
def test_gains_shares_are_invariant_to_weight_scale_and_row_order(seed, c):
    """Invariants: rates, captured shares and lifts depend on relative weights only, and on
    no row order."""
    y, p = scores(seed, 120, ties=True)
    y[0] = True
    w = np.random.default_rng(seed).uniform(0.5, 2.0, size=y.size)
    base = lt.gains(y, p, bands=6, weights=w)
    scaled = lt.gains(y, p, bands=6, weights=w * c)
    order = np.random.default_rng(seed + 1).permutation(y.size)
    moved = lt.gains(y[order], p[order], bands=6, weights=w[order])
    for other in (scaled, moved):
        assert np.array_equal(other.rows, base.rows)
        for name in ("rate", "captured", "lift", "cumulative_lift"):
            assert np.allclose(getattr(other, name), getattr(base, name), rtol=1e-12, atol=1e-15), name


def test_gains_needs_a_positive():
    with pytest.raises(InputError, match="no positive row with positive weight"):
        lt.gains([0, 1, 0], [0.1, 0.2, 0.3], weights=[1, 0, 1])


# -------------------------------------------------------------------- accuracy ratio
@pytest.mark.parametrize("seed", [7, 8])
def test_accuracy_ratio_against_scikit_learn(seed):
    y, p = scores(seed, 500, ties=True)
    w = np.random.default_rng(seed).uniform(0.2, 3.0, size=y.size)
    for weights in (None, w):
        r = lt.roc_auc(y, p, weights=weights)
        area = roc_auc_score(y, p, sample_weight=weights)
        # source: scikit-learn roc_auc_score; the accuracy ratio is 2A - 1 (Engelmann, Hayden & Tasche 2003)
        assert abs(r.accuracy_ratio - (2 * area - 1)) <= 1e-14
        assert r.accuracy_ratio_lower == 2 * r.lower - 1 and r.accuracy_ratio_upper == 2 * r.upper - 1
        assert r.accuracy_ratio_lower <= r.accuracy_ratio <= r.accuracy_ratio_upper
        assert r.accuracy_ratio_standard_error == 2 * r.standard_error
    assert "accuracy ratio (Gini, 2 x area - 1)" in r.report()


@settings(max_examples=30, deadline=None)
@given(st.integers(0, 2**31 - 1))
def test_ranking_figures_are_invariant_to_a_monotone_transform_of_the_score(seed):
    """Invariant: the Kolmogorov-Smirnov distance and p-value, the gains table's counts,
    captured shares and lifts, and the ROC area depend on the order of the scores only, so
    an increasing transform (here the logit, times 3, plus 7) changes none of them."""
    y, p = scores(seed, 150, ties=True)
    p = np.clip(p, 0.01, 0.99)
    t = 3.0 * np.log(p / (1.0 - p)) + 7.0
    a, b = lt.kolmogorov_smirnov(y, p), lt.kolmogorov_smirnov(y, t)
    assert (a.statistic, a.p_value, a.method) == (b.statistic, b.p_value, b.method)
    ga, gb = lt.gains(y, p, bands=5), lt.gains(y, t, bands=5)
    for name in ("rows", "positives", "captured", "lift", "cumulative_lift"):
        assert np.array_equal(getattr(ga, name), getattr(gb, name)), name
    assert lt.roc_auc(y, p).area == lt.roc_auc(y, t).area
