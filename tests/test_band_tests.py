"""Tests of lintools.metrics.band_tests (exact binomial and Jeffreys tests band by band).

Oracles, named beside each check: scipy.stats.binomtest (two-sided, "greater", "less"),
scipy.stats.beta (the Jeffreys posterior Beta(d + 1/2, n - d + 1/2): cdf, sf, ppf, isf),
statsmodels' multipletests(method="holm") for Holm's step-down count; duplicated rows for
case weights.
"""

from __future__ import annotations

import json
import math

import numpy as np
import pytest
import scipy.stats
from hypothesis import given, settings
from hypothesis import strategies as st
from statsmodels.stats.multitest import multipletests

import lintools as lt
from lintools import InputError


def sample(seed, n=2000, drift=0.0):
    rng = np.random.default_rng(seed)
    p = 1.0 / (1.0 + np.exp(-rng.normal(-2.0, 1.0, size=n)))
    y = rng.uniform(size=n) < np.clip(p * (1.0 + drift), 0, 1)
    return y, p


SCIPY_SIDE = {"both": "two-sided", "above": "greater", "below": "less"}


@pytest.mark.parametrize("side", ["both", "above", "below"])
def test_each_band_against_scipy_binomtest_and_beta(side):
    y, p = sample(1, drift=0.3)
    r = lt.band_tests(y, p, 8, side=side, level=0.9)
    assert r.bands == tuple(range(1, 9)) and r.rows.sum() == y.size
    for b in range(8):
        n, d, pb = int(r.cases[b]), int(r.positives[b]), float(r.predicted[b])
        # source: scipy.stats.binomtest with the band's cases, positives and mean prediction
        ref = scipy.stats.binomtest(d, n, pb, alternative=SCIPY_SIDE[side]).pvalue
        assert math.isclose(r.binomial_p_value[b], ref, rel_tol=1e-10)
        # source: scipy.stats.beta, the Jeffreys posterior Beta(d + 1/2, n - d + 1/2)
        post = scipy.stats.beta(d + 0.5, n - d + 0.5)
        want = {"above": post.cdf(pb), "below": post.sf(pb),
                "both": min(1.0, 2 * min(post.cdf(pb), post.sf(pb)))}[side]
        assert math.isclose(r.jeffreys_p_value[b], want, rel_tol=1e-10)
        assert math.isclose(r.jeffreys_lower[b], post.ppf(0.05), rel_tol=1e-11)
        assert math.isclose(r.jeffreys_upper[b], post.isf(0.05), rel_tol=1e-11)
        rows = (p >= r.lowest[b]) & (p <= r.highest[b])
        assert math.isclose(r.predicted[b], p[rows].mean(), rel_tol=1e-13) and d == y[rows].sum()
    alpha = 0.1
    for k, ps in enumerate((r.binomial_p_value, r.jeffreys_p_value)):
        # source: statsmodels multipletests(method="holm")
        assert r.rejected_holm[k] == multipletests(ps, alpha=alpha, method="holm")[0].sum()
        assert r.rejected[k] == (ps < alpha).sum()
    assert "Holm" in r.report() and json.dumps(r.to_dict())


def test_grades_given_as_labels_and_the_interval_ends():
    y = np.array([0, 0, 0, 0, 1, 1, 1, 0, 1, 1])
    p = np.array([0.1, 0.1, 0.2, 0.2, 0.6, 0.5, 0.9, 0.8, 0.7, 0.9])
    grade = np.array(["A", "A", "A", "A", "B", "B", "C", "C", "C", "C"])
    r = lt.band_tests(y, p, grade)
    assert r.bands == ("A", "B", "C") and r.positives.tolist() == [0, 2, 3] and r.cases.tolist() == [4, 2, 4]
    # Brown, Cai & DasGupta (2001): the lower end is 0 when no positive, the upper 1 when no negative
    assert r.jeffreys_lower[0] == 0.0 and r.jeffreys_upper[1] == 1.0
    # source: scipy.stats.beta.isf at (1 - 0.95) / 2 for grade A (d = 0, n = 4)
    assert math.isclose(r.jeffreys_upper[0], scipy.stats.beta.isf(0.025, 0.5, 4.5), rel_tol=1e-12)
    # source: scipy.stats.binomtest(0, 4, 0.15), the mean prediction of grade A
    assert math.isclose(r.binomial_p_value[0], scipy.stats.binomtest(0, 4, 0.15).pvalue, rel_tol=1e-12)


def test_a_weight_of_two_is_a_duplicated_row():
    y, p = sample(2, 600)
    p = np.round(p, 2)
    w = np.random.default_rng(2).integers(0, 4, size=y.size)
    weighted = lt.band_tests(y, p, 6, weights=w.astype(float))
    copies = lt.band_tests(np.repeat(y, w), np.repeat(p, w), 6)
    # source: duplicated rows (case weights are counts, in the bands, counts and p-values)
    for name in ("lowest", "highest", "cases", "positives", "observed", "binomial_p_value", "jeffreys_p_value"):
        assert np.allclose(getattr(weighted, name), getattr(copies, name), rtol=1e-12, atol=0), name
    assert np.array_equal(weighted.cases, copies.rows)


def test_weights_that_are_not_counts_leave_only_the_jeffreys_test():
    y, p = sample(3, 500)
    w = np.random.default_rng(3).uniform(0.5, 1.5, size=y.size)
    r = lt.band_tests(y, p, 4, weights=w)
    assert np.isnan(r.binomial_p_value).all() and not np.isnan(r.jeffreys_p_value).any()
    assert r.tested == (0, 4) and "needs whole numbers" in r.report()


@settings(max_examples=30, deadline=None)
@given(st.integers(0, 2**31 - 1), st.integers(-60, 60))
def test_rates_are_invariant_to_weight_scale_and_row_order(seed, k):
    """Invariants: multiplying the weights by a power of two leaves the bands, rates and
    predictions unchanged (bit for bit) and multiplies the cases by it; permuting the rows
    changes nothing but the order of the sums."""
    y, p = sample(seed, 300)
    w = np.random.default_rng(seed).integers(1, 5, size=y.size).astype(float)
    base = lt.band_tests(y, p, 5, weights=w)
    scaled = lt.band_tests(y, p, 5, weights=np.ldexp(w, k))
    assert np.array_equal(scaled.observed, base.observed) and np.array_equal(scaled.predicted, base.predicted)
    assert np.array_equal(scaled.cases, np.ldexp(base.cases, k))
    order = np.random.default_rng(seed + 1).permutation(y.size)
    moved = lt.band_tests(y[order], p[order], 5, weights=w[order])
    assert np.array_equal(moved.rows, base.rows)
    assert np.allclose(moved.jeffreys_p_value, base.jeffreys_p_value, rtol=1e-10, atol=0)


@pytest.mark.parametrize("call, words", [
    (lambda: lt.band_tests([0, 1], [0.2, 1.2], 2), "p has a value outside [0, 1] (1.2) at row 1"),
    (lambda: lt.band_tests([0, 1], [0.2, 0.3], "A"), "bands must be a number of quantile bands"),
    (lambda: lt.band_tests([0, 1], [0.2, 0.3], ["A"]), "bands has 1 labels but p has 2 rows"),
    (lambda: lt.band_tests([0, 1], [0.2, 0.3], 2, side="up"), "side='up' is not one of"),
    (lambda: lt.band_tests([0, 1], [0.2, 0.3], 0), "bands must be >= 1"),
])
def test_bad_input_is_refused_by_name(call, words):
    with pytest.raises(InputError) as info:
        call()
    assert words in str(info.value)


def test_calibration_command_back_tests_the_grades_of_a_column(tmp_path):
    """``lintools calibration --bands COLUMN`` and ``--bands N``: the JSON figures against
    scipy.stats.binomtest on the columns as written."""
    import subprocess
    import sys

    y, p = sample(7, 1500, drift=0.2)
    grade = np.where(p < 0.05, "A", np.where(p < 0.15, "B", "C"))
    path = tmp_path / "pd.csv"
    path.write_text("y,p,grade\n" + "".join(f"{int(a)},{float(b)!r},{c}\n" for a, b, c in zip(y, p, grade)))
    out = subprocess.run([sys.executable, "-m", "lintools", "calibration", str(path), "--label", "y", "--probability",
                          "p", "--bands", "grade", "--json"], capture_output=True, text=True, timeout=120)
    assert out.returncode == 0, out.stderr
    got = json.loads(out.stdout)["band_tests"]
    assert got["bands"] == ["A", "B", "C"]
    for b, g in enumerate("ABC"):
        rows = grade == g
        # source: scipy.stats.binomtest (two-sided) with the grade's rows, positives and mean probability
        ref = scipy.stats.binomtest(int(y[rows].sum()), int(rows.sum()), float(p[rows].mean())).pvalue
        assert math.isclose(got["binomial_p_value"][b], ref, rel_tol=1e-9)
    text = subprocess.run([sys.executable, "-m", "lintools", "calibration", str(path), "--label", "y", "--probability",
                           "p", "--bands", "4"], capture_output=True, text=True, timeout=120)
    assert text.returncode == 0 and "Band tests (two-sided" in text.stdout and "Holm" in text.stdout
