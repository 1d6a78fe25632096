"""Properties of the logistic fit (hypothesis).

Sources: common practice (equivariance and invariance facts that follow from the
objective stated in the docstring): swapping the labels flips every sign; a row of weight
2 is two copies of the row; successes out of trials are the expanded Bernoulli rows; an
offset equal to a fitted linear predictor leaves nothing to fit.
"""

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from lintools import logistic

SETTINGS = settings(max_examples=30, deadline=None)


def _data(seed, n, p):
    """Random rows plus p + 1 anchors carrying both labels, so the MLE exists."""
    rng = np.random.default_rng(seed)
    X = rng.normal(size=(n, p)) * rng.uniform(0.2, 5, p)
    y = (X @ rng.normal(size=p) + rng.logistic(size=n) > 0).astype(int)
    anchors = np.vstack([np.zeros(p), np.eye(p)])
    return np.vstack([X, anchors, anchors]), np.concatenate([y, np.zeros(p + 1, int), np.ones(p + 1, int)])


def _theta(f):
    return np.r_[f.intercept, f.coefficients]


@SETTINGS
@given(st.integers(0, 10**6), st.integers(5, 60), st.integers(1, 4), st.sampled_from(["plain", "l2", "firth"]))
def test_swapping_the_labels_flips_every_sign(seed, n, p, kind):
    X, y = _data(seed, n, p)
    opts = {"plain": {}, "l2": {"l2": 0.7}, "firth": {"firth": True}}[kind]
    a = logistic(X, y, **opts)
    b = logistic(X, 1 - y, **opts)
    c = logistic(X, y, positive=0, **opts)
    np.testing.assert_allclose(_theta(b), -_theta(a), rtol=1e-8, atol=1e-10)
    np.testing.assert_allclose(_theta(c), -_theta(a), rtol=1e-8, atol=1e-10)
    np.testing.assert_allclose(b.standard_errors, a.standard_errors, rtol=1e-8)
    assert b.log_likelihood == pytest.approx(a.log_likelihood, rel=1e-10)


@SETTINGS
@given(st.integers(0, 10**6), st.integers(5, 50), st.integers(1, 3), st.sampled_from(["newton", "lbfgs"]))
def test_duplicated_rows_equal_weight_two(seed, n, p, solver):
    X, y = _data(seed, n, p)
    rng = np.random.default_rng(seed + 1)
    dup = rng.random(y.size) < 0.4
    Xd = np.vstack([X, X[dup]])
    yd = np.concatenate([y, y[dup]])
    w = np.where(dup, 2.0, 1.0)
    a = logistic(Xd, yd, solver=solver, max_iter=5000)
    b = logistic(X, y, weights=w, solver=solver, max_iter=5000)
    np.testing.assert_allclose(_theta(b), _theta(a), rtol=1e-7, atol=1e-9)
    np.testing.assert_allclose(b.standard_errors, a.standard_errors, rtol=1e-7)
    for name in ("log_likelihood", "deviance", "null_deviance", "aic", "bic", "n_observations", "lr_statistic"):
        assert getattr(b, name) == pytest.approx(getattr(a, name), rel=1e-8, abs=1e-9), name


@SETTINGS
@given(st.integers(0, 10**6), st.integers(3, 25), st.integers(1, 3), st.booleans())
def test_grouped_and_expanded_data_give_the_same_estimates(seed, groups, p, firth):
    rng = np.random.default_rng(seed)
    X = rng.normal(size=(groups, p))
    trials = rng.integers(1, 7, groups).astype(float)
    succ = np.floor(rng.random(groups) * (trials + 1))
    # anchors with both outcomes keep the MLE finite
    anchors = np.vstack([np.zeros(p), np.eye(p)])
    X = np.vstack([X, anchors])
    trials = np.concatenate([trials, np.full(p + 1, 2.0)])
    succ = np.concatenate([succ, np.ones(p + 1)])
    rows = np.repeat(np.arange(X.shape[0]), trials.astype(int))
    ybin = np.concatenate([np.r_[np.ones(int(s)), np.zeros(int(t - s))] for s, t in zip(succ, trials)])
    g = logistic(X, succ, trials=trials, firth=firth)
    e = logistic(X[rows], ybin, firth=firth)
    np.testing.assert_allclose(_theta(g), _theta(e), rtol=1e-7, atol=1e-9)
    np.testing.assert_allclose(g.standard_errors, e.standard_errors, rtol=1e-7)
    assert g.n_observations == e.n_observations == trials.sum()
    assert g.lr_statistic == pytest.approx(e.lr_statistic, rel=1e-7, abs=1e-9)
    # the log-likelihoods differ by exactly the log binomial coefficients (documented)
    from math import comb, log

    logc = sum(log(comb(int(t), int(s))) for s, t in zip(succ, trials))
    assert g.log_likelihood - e.log_likelihood == pytest.approx(logc, rel=1e-9, abs=1e-9)


@SETTINGS
@given(st.integers(0, 10**6), st.integers(5, 60), st.integers(1, 4))
def test_offset_equal_to_the_fitted_linear_predictor_leaves_zero_coefficients(seed, n, p):
    X, y = _data(seed, n, p)
    a = logistic(X, y)
    eta = a.linear_predictor(X)
    b = logistic(X, y, offset=eta)
    assert np.max(np.abs(_theta(b))) < 1e-8
    np.testing.assert_allclose(b.standard_errors, a.standard_errors, rtol=1e-7)
    assert b.deviance == pytest.approx(a.deviance, rel=1e-12)
    np.testing.assert_allclose(b.mean(X, offset=eta), a.mean(X), rtol=1e-8)
