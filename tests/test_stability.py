"""Tests of lintools.population_stability (the population stability index).

Oracles, named beside each check: a hand computation with exact fractions
(fractions.Fraction shares, logarithms by mpmath at 40 digits); NumPy's weighted
inverted-CDF quantile (numpy.quantile, method="inverted_cdf", Hyndman & Fan definition 1)
for the bins; duplicated rows for case weights.  The reading bands (0.1, 0.25) are common
practice in credit-model monitoring.
"""

from __future__ import annotations

import json
from fractions import Fraction

import mpmath
import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

import lintools as lt
from lintools import InputError

mpmath.mp.dps = 40


def exact_index(e_counts, a_counts, empty=Fraction(1e-4)):
    """The index by hand: exact shares, each term's logarithm at 40 digits."""
    e_total, a_total = sum(e_counts), sum(a_counts)
    total = mpmath.mpf(0)
    for e, a in zip(e_counts, a_counts):
        if e == 0 and a == 0:
            continue
        es = Fraction(e) / e_total if e else empty
        as_ = Fraction(a) / a_total if a else empty
        diff = as_ - es
        total += mpmath.mpf(diff.numerator) / diff.denominator * (
            mpmath.log(mpmath.mpf(as_.numerator) / as_.denominator) - mpmath.log(mpmath.mpf(es.numerator) / es.denominator))
    return float(total)


def test_index_with_given_edges_against_exact_fractions():
    expected = np.arange(1.0, 21.0)  # 20 values
    actual = np.array([1, 2, 6, 7, 8, 9, 9.5, 12, 13, 14, 15, 16, 17, 18, 19, 19.5, 25.0])
    r = lt.population_stability(expected, actual, edges=[5, 10, 15])
    # bins (.., 5], (5, 10], (10, 15], (15, ..): by hand 5/5/5/5 and 2/5/4/6
    assert r.expected_rows.tolist() == [5, 5, 5, 5] and r.actual_rows.tolist() == [2, 5, 4, 6]
    # source: hand computation in exact fractions (logarithms by mpmath at 40 digits)
    assert abs(r.index - exact_index([5, 5, 5, 5], [2, 5, 4, 6])) <= 1e-15 * r.index
    assert r.binning == "edges" and r.reading == "moderate shift"  # 0.1433


def test_index_with_case_weights_against_exact_fractions():
    expected = np.array([0.1, 0.2, 0.3, 0.6, 0.7, 0.9])
    w = np.array([1.5, 0.25, 2.0, 1.0, 3.0, 0.75])
    actual = np.array([0.05, 0.4, 0.65, 0.8, 0.95])
    v = np.array([2.0, 1.0, 0.5, 4.0, 1.25])
    r = lt.population_stability(expected, actual, edges=[0.25, 0.5, 0.75], weights=w, actual_weights=v)
    e_w = [Fraction(1.5) + Fraction(0.25), Fraction(2.0), Fraction(1.0) + Fraction(3.0), Fraction(0.75)]
    a_w = [Fraction(2.0), Fraction(1.0), Fraction(0.5), Fraction(4.0) + Fraction(1.25)]
    # source: hand computation in exact fractions of the binary weights
    assert abs(r.index - exact_index(e_w, a_w)) <= 1e-15 * r.index
    assert np.allclose(r.expected_weight, [1.75, 2.0, 4.0, 0.75]) and np.allclose(r.actual_weight, [2, 1, 0.5, 5.25])


def test_empty_bins_take_the_stated_share():
    expected = np.array([1.0, 2.0, 3.0, 4.0, 5.0, 6.0])
    actual = np.array([1.0, 1.5, 2.0, 7.0, 8.0])
    r = lt.population_stability(expected, actual, edges=[2.0, 4.0, 6.0])  # (..2], (2,4], (4,6], (6,..)
    assert r.actual_empty.tolist() == [False, True, True, False]
    assert r.expected_empty.tolist() == [False, False, False, True]
    # source: hand computation in exact fractions, empty shares replaced by 0.0001 (the documented rule)
    assert abs(r.index - exact_index([2, 2, 2, 0], [3, 0, 0, 2])) <= 1e-14 * r.index
    assert "taken as 0.0001" in r.report()
    other = lt.population_stability(expected, actual, edges=[2.0, 4.0, 6.0], empty_share=1e-6)
    assert abs(other.index - exact_index([2, 2, 2, 0], [3, 0, 0, 2], Fraction(1e-6))) <= 1e-14 * other.index
    both = lt.population_stability(expected, actual, edges=[-5.0, -4.0])  # two bins empty in both samples
    assert both.contribution[:2].tolist() == [0.0, 0.0] and both.index == 0.0


def test_categories_by_hand():
    expected = np.array(["b", "a", "a", "c", "b", "b"])
    actual = ["a", "d", "b", "d", "a"]
    r = lt.population_stability(expected, actual)
    assert r.binning == "category" and r.categories == ("a", "b", "c", "d")
    assert r.expected_rows.tolist() == [2, 3, 1, 0] and r.actual_rows.tolist() == [2, 1, 0, 2]
    # source: hand computation in exact fractions (a new category and a lost one take 0.0001)
    assert abs(r.index - exact_index([2, 3, 1, 0], [2, 1, 0, 2])) <= 1e-14 * r.index
    assert r.reading == "major shift"
    json.dumps(r.to_dict())
    flags = lt.population_stability(np.array([True, False, True]), np.array([False, False]))
    assert flags.categories == (False, True)


@pytest.mark.parametrize("seed", [0, 1, 2])
def test_quantile_bins_against_numpy_weighted_inverted_cdf(seed):
    rng = np.random.default_rng(seed)
    x = np.round(rng.normal(size=997), 2)  # ties on purpose
    w = rng.uniform(0.1, 3.0, size=x.size)
    r = lt.population_stability(x, rng.normal(size=300), bins=10, weights=w)
    q = np.quantile(x, np.arange(1, 10) / 10, method="inverted_cdf", weights=w)
    want = np.unique(q[q < x.max()])
    # source: numpy.quantile(method="inverted_cdf", weights=w), Hyndman & Fan (1996) definition 1
    assert np.array_equal(r.cuts, want)
    assert r.binning == "quantile" and (r.expected_rows > 0).all()


def test_tied_values_are_never_split_and_the_top_bin_holds_the_largest():
    x = np.array([0.0] * 70 + [1.0] * 30)
    r = lt.population_stability(x, np.array([0.0, 1.0, 2.0]))
    assert r.cuts.tolist() == [0.0] and r.expected_rows.tolist() == [70, 30]  # 2 bins, not 10
    assert r.actual_rows.tolist() == [1, 2]  # 2.0 lies above every expected value: the top bin


def test_a_weight_of_two_is_a_duplicated_row():
    rng = np.random.default_rng(5)
    x, z = rng.normal(size=120), rng.normal(0.2, 1.0, size=90)
    w, v = rng.integers(0, 4, size=x.size).astype(float), rng.integers(1, 3, size=z.size).astype(float)
    weighted = lt.population_stability(x, z, weights=w, actual_weights=v)
    copies = lt.population_stability(np.repeat(x, w.astype(int)), np.repeat(z, v.astype(int)))
    # source: duplicated rows (case weights are counts)
    assert weighted.index == copies.index
    assert np.array_equal(weighted.cuts, copies.cuts)
    assert np.array_equal(weighted.expected_weight, copies.expected_rows)
    cats = np.array(list("abcab"))
    assert (lt.population_stability(cats, cats[:3], weights=[2, 1, 1, 1, 1]).index
            == lt.population_stability(np.append(cats, "a"), cats[:3]).index)


samples = st.lists(st.floats(-1e3, 1e3, allow_nan=False, allow_subnormal=False), min_size=3, max_size=40)


@settings(max_examples=40, deadline=None)
@given(samples, samples, st.floats(1e-6, 1e6), st.integers(-300, 300), st.integers(0, 2**31 - 1))
def test_index_is_invariant_to_weight_scale_and_row_order(e, a, c, k, seed):
    """Invariants: multiplying either sample's case weights by a constant changes no share
    (bit for bit for a power of two, to rounding otherwise), and permuting the rows of
    either sample changes nothing but the order of the sums."""
    e, a = np.array(e), np.array(a)
    rng = np.random.default_rng(seed)
    w, v = rng.uniform(0.5, 2.0, size=e.size), rng.uniform(0.5, 2.0, size=a.size)
    base = lt.population_stability(e, a, bins=4, weights=w, actual_weights=v)
    two = lt.population_stability(e, a, bins=4, weights=np.ldexp(w, k), actual_weights=np.ldexp(v, -k))
    assert two.index == base.index and np.array_equal(two.cuts, base.cuts)
    scaled = lt.population_stability(e, a, bins=4, weights=w * c, actual_weights=v / c)
    assert abs(scaled.index - base.index) <= 1e-9 * max(base.index, 1e-12)
    pe, pa = rng.permutation(e.size), rng.permutation(a.size)
    moved = lt.population_stability(e[pe], a[pa], bins=4, weights=w[pe], actual_weights=v[pa])
    assert np.array_equal(moved.cuts, base.cuts) and np.array_equal(moved.expected_rows, base.expected_rows)
    assert abs(moved.index - base.index) <= 1e-12 * max(base.index, 1e-12)


@pytest.mark.parametrize("call, words", [
    (lambda: lt.population_stability([1.0, 2.0], ["a", "b"]), "expected holds numbers but actual holds categories"),
    (lambda: lt.population_stability([1.0, np.nan, 2.0], [1.0]), "expected has a non-finite value (nan) at row 1"),
    (lambda: lt.population_stability([], [1.0]), "expected is empty"),
    (lambda: lt.population_stability([1.0, 2.0], [1.0], edges=[1.0, 1.0]), "edges must increase strictly"),
    (lambda: lt.population_stability([1.0, 2.0], [1.0], actual_weights=[1.0, 2.0]),
     "actual_weights has 2 entries but actual has 1"),
    (lambda: lt.population_stability([1.0, 2.0], [1.0], weights=[-1.0, 2.0]), "weights has a negative value"),
    (lambda: lt.population_stability(["a", None], ["a"]), "expected has a missing label at row 1"),
    (lambda: lt.population_stability(["a"], ["a"], edges=[1.0]), "edges apply to numbers"),
    (lambda: lt.population_stability([1.0], [1.0], empty_share=0.0), "empty_share must be a number strictly"),
    (lambda: lt.population_stability([1.0], [1.0], bins=0), "bins must be >= 1"),
    (lambda: lt.population_stability([[1.0]], [1.0]), "expected must be 1-D"),
])
def test_bad_input_is_refused_by_name(call, words):
    with pytest.raises(InputError, match=None) as info:
        call()
    assert words in str(info.value)


@settings(max_examples=40, deadline=None)
@given(samples, st.integers(1, 12), st.integers(0, 2**31 - 1))
def test_a_sample_against_itself_has_index_zero(e, bins, seed):
    """Invariant: the index of a sample against itself (any row order, the same weights)
    is exactly 0, and so is every contribution."""
    e = np.array(e)
    w = np.random.default_rng(seed).uniform(0.5, 2.0, size=e.size)
    order = np.random.default_rng(seed + 1).permutation(e.size)
    r = lt.population_stability(e, e[order], bins=bins, weights=w, actual_weights=w[order])
    assert r.index == 0.0 and not r.contribution.any() and r.reading == "stable"
