"""Tests of lintools.metrics.discrimination (ROC area, DeLong variance, paired DeLong test).

Oracles: scikit-learn roc_auc_score; a brute-force O(n_pos * n_neg) computation of
DeLong's placement values written here; SciPy normal tails.  Each check names its source.
"""

from __future__ import annotations

import math
import warnings

import numpy as np
import pytest
import scipy.stats
from hypothesis import given, settings
from hypothesis import strategies as st
from sklearn.metrics import roc_auc_score

from lintools.support.errors import InputError, LintoolsWarning
from lintools.metrics.discrimination import roc_auc, roc_auc_difference

TOL = 1e-12


def close(a, b, tol=TOL):
    a, b = np.asarray(a, float), np.asarray(b, float)
    return bool(np.all(np.abs(a - b) <= tol * np.maximum(1.0, np.abs(b))))


def tied_scores(seed, n=300):
    rng = np.random.default_rng(seed)
    y = rng.uniform(size=n) < 0.4
    s = np.round(rng.normal(size=n) + 0.8 * y, 1)  # rounding makes many ties
    s2 = np.round(0.5 * s + rng.normal(size=n), 1)
    w = rng.uniform(0.2, 3.0, size=n)
    return y.astype(int), s, s2, w


def brute_placements(y, s):
    """DeLong et al. (1988) placement values by the full positives x negatives comparison."""
    sp, sn = s[y == 1], s[y == 0]
    psi = (sp[:, None] > sn[None, :]) + 0.5 * (sp[:, None] == sn[None, :])
    return psi.mean(axis=1), psi.mean(axis=0), psi.mean()


@pytest.mark.parametrize("seed", [0, 1, 2])
def test_area_matches_sklearn(seed):
    y, s, _, w = tied_scores(seed)
    # source: scikit-learn roc_auc_score (oracle), unweighted and with sample_weight
    assert close(roc_auc(y, s).area, roc_auc_score(y, s))
    assert close(roc_auc(y, s, weights=w).area, roc_auc_score(y, s, sample_weight=w))
    labels = np.where(y == 1, "case", "control")
    # source: scikit-learn roc_auc_score; positive named explicitly (the smaller label)
    assert close(roc_auc(labels, s, positive="case").area, roc_auc_score(labels == "case", s))


@pytest.mark.parametrize("seed", [3, 4])
def test_delong_standard_error_against_brute_force(seed):
    y, s, _, _ = tied_scores(seed, n=120)
    v10, v01, area = brute_placements(y, s)
    var = v10.var(ddof=1) / v10.size + v01.var(ddof=1) / v01.size
    r = roc_auc(y, s, level=0.9)
    # source: brute-force placement values, DeLong, DeLong & Clarke-Pearson (1988) eq. for Var
    assert close(r.area, area) and close(r.standard_error, math.sqrt(var))
    q = scipy.stats.norm.ppf(0.95)
    logit = math.log(area / (1 - area))
    half = q * math.sqrt(var) / (area * (1 - area))
    # source: logit-scale Wald interval (documented), SciPy normal quantile
    assert close([r.lower, r.upper], [1 / (1 + math.exp(-(logit - half))), 1 / (1 + math.exp(-(logit + half)))], 1e-10)
    rp = roc_auc(y, s, level=0.9, interval="plain")
    assert close([rp.lower, rp.upper], [area - q * math.sqrt(var), area + q * math.sqrt(var)], 1e-10)


@pytest.mark.parametrize("seed", [5, 6])
def test_paired_delong_against_brute_force(seed):
    y, sa, sb, _ = tied_scores(seed, n=150)
    a10, a01, aa = brute_placements(y, sa)
    b10, b01, ab = brute_placements(y, sb)
    s10 = np.cov(np.vstack([a10, b10]), ddof=1)
    s01 = np.cov(np.vstack([a01, b01]), ddof=1)
    cov = s10 / a10.size + s01 / a01.size
    se = math.sqrt(cov[0, 0] + cov[1, 1] - 2 * cov[0, 1])
    z = (aa - ab) / se
    d = roc_auc_difference(y, sa, sb)
    # source: brute-force placement values, DeLong et al. (1988) paired comparison
    assert close(d.areas, [aa, ab]) and close(d.covariance, cov) and close(d.standard_error, se)
    assert close(d.statistic, z)
    # source: scipy.stats.norm two-sided tail (oracle)
    assert close(d.p_value, 2 * scipy.stats.norm.sf(abs(z)), 1e-10)
    assert "difference" in d.report()


def test_weights_equal_replicated_rows():
    y, s, s2, _ = tied_scores(7, n=80)
    w = np.random.default_rng(1).integers(1, 4, size=80)
    a = roc_auc(y, s, weights=w)
    b = roc_auc(np.repeat(y, w), np.repeat(s, w))
    # source: frequency-weight identity (documented definition; common practice)
    assert close([a.area, a.standard_error, a.lower, a.upper], [b.area, b.standard_error, b.lower, b.upper])
    da = roc_auc_difference(y, s, s2, weights=w)
    db = roc_auc_difference(np.repeat(y, w), np.repeat(s, w), np.repeat(s2, w))
    assert close([da.difference, da.standard_error], [db.difference, db.standard_error])


@settings(max_examples=50, deadline=None)
@given(st.lists(st.tuples(st.booleans(), st.integers(-5, 5)), min_size=2, max_size=50))
def test_area_unchanged_by_increasing_transform(rows):
    y = np.array([r[0] for r in rows]).astype(int)
    if y.min() == y.max():
        y[0] = 1 - y[0]
    s = np.array([r[1] for r in rows], dtype=float)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", LintoolsWarning)  # one case of a class: NaN standard error, warned
        a = roc_auc(y, s)
        b = roc_auc(y, np.exp(s) * 3.0 + 1.0)
    # source: rank invariance of the Mann-Whitney form (Hanley & McNeil 1982)
    assert a.area == b.area
    assert (math.isnan(a.standard_error) and math.isnan(b.standard_error)) or close(a.standard_error, b.standard_error)
    # source: scikit-learn roc_auc_score (oracle)
    assert close(a.area, roc_auc_score(y, s))


def test_separating_score_and_small_classes():
    r = roc_auc([0, 0, 1, 1], [0.1, 0.2, 0.8, 0.9])
    # source: hand computation, every positive above every negative
    assert r.area == 1.0 and r.standard_error == 0.0 and r.lower == r.upper == 1.0
    with pytest.warns(LintoolsWarning, match="needs more than 1 in each class"):
        r = roc_auc([0, 0, 1], [0.1, 0.5, 0.3])
    # one positive: the area exists (1/2) but DeLong's variance does not (documented NaN, with a warning)
    assert r.area == 0.5 and math.isnan(r.standard_error) and math.isnan(r.lower) and math.isnan(r.upper)


def test_bad_inputs():
    with pytest.raises(InputError, match="single class"):
        roc_auc([1, 1, 1], [0.1, 0.2, 0.3])
    with pytest.raises(InputError, match="mismatched lengths"):
        roc_auc([0, 1, 1], [0.1, 0.2])
    with pytest.raises(InputError, match="non-finite"):
        roc_auc([0, 1, 1], [0.1, np.nan, 0.2])
    with pytest.raises(InputError, match="needs two classes"):
        roc_auc([0, 1, 2], [0.1, 0.2, 0.3])
    with pytest.raises(InputError, match="weights are zero for every case of one class"):
        roc_auc([0, 1, 1], [0.1, 0.2, 0.3], weights=[0, 1, 1])
    with pytest.raises(InputError, match="standard error 0"):
        roc_auc_difference([0, 1, 0, 1], [0.1, 0.2, 0.3, 0.4], [1, 2, 3, 4])
    with pytest.raises(InputError, match="interval="):
        roc_auc([0, 1], [0.1, 0.2], interval="wald")
    with pytest.raises(InputError, match="level"):
        roc_auc([0, 1], [0.1, 0.2], level=95)
