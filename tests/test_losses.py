"""Binomial loss in the linear predictor: exact values, overflow safety, accurate changes.

Sources: mpmath at 50 significant digits (exact reference arithmetic), SciPy's binomial
distribution (scipy.stats.binom) for the grouped log-likelihood, statsmodels' GLM for the
deviance.
"""

import math

import mpmath
import numpy as np
import pytest
import scipy.stats
import statsmodels.api as sm
from hypothesis import given, settings
from hypothesis import strategies as st

from lintools.engine.losses import BinomialLoss, log1pexp, sigmoid, unpenalised_gradient

mpmath.mp.dps = 50


def _mp_terms(eta, y, m, w):
    """Exact per-row value, gradient, weight, weight slope and second derivative."""
    out = []
    for e, yi, mi, wi in zip(eta, y, m, w):
        e = mpmath.mpf(float(e))
        mu = 1 / (1 + mpmath.exp(-e))
        val = wi * (yi * mpmath.log1p(mpmath.exp(-e)) + (mi - yi) * mpmath.log1p(mpmath.exp(e)))
        grad = wi * (mi * mu - yi)
        v = mu * (1 - mu)
        out.append((val, grad, wi * mi * v, wi * mi * v * (1 - 2 * mu), wi * mi * v * (1 - 6 * v)))
    return out


ETA = np.array([-700.0, -40.0, -12.5, -1.0, -1e-9, 0.0, 3e-12, 0.75, 18.0, 36.5, 705.0])


def test_value_gradient_and_weights_match_mpmath():
    # source: mpmath, 50 significant digits
    rng = np.random.default_rng(3)
    m = rng.integers(1, 9, ETA.size).astype(float)
    y = np.floor(rng.random(ETA.size) * (m + 1))
    w = rng.random(ETA.size) + 0.5
    loss = BinomialLoss(y, m, w)
    exact = _mp_terms(ETA, y, m, w)
    total = sum(t[0] for t in exact)
    assert abs(loss.value(ETA) - float(total)) <= 4e-16 * float(total)
    for k, got in enumerate([loss.gradient(ETA), loss.curvature(ETA), loss.curvature_slope(ETA), loss.curvature_second(ETA)]):
        ref = np.array([float(t[k + 1]) for t in exact])
        # the gradient w (m mu - y) cancels near mu = y / m: allow rounding of its two terms
        np.testing.assert_allclose(got, ref, rtol=1e-14, atol=4e-16 * float(np.max(w * m)) if k == 0 else 1e-300)


def test_extreme_eta_gives_finite_loglik_gradient_and_probabilities():
    # source: common practice (the limits mu -> 0 and 1); mpmath for the exact log-likelihood
    eta = np.array([-1e300, -1e300, 1e300, 1e300, -745.2, 745.2])
    y = np.array([0.0, 1.0, 1.0, 0.0, 0.0, 1.0])
    loss = BinomialLoss(y)
    ll = loss.log_likelihood(eta)
    assert np.isfinite(ll) and ll == pytest.approx(-2e300, rel=1e-15)
    g = loss.gradient(eta)
    assert np.all(np.isfinite(g))
    np.testing.assert_array_equal(g, [0.0, -1.0, 0.0, 1.0, 0.0, 0.0])
    p = sigmoid(eta)
    np.testing.assert_array_equal(p[:4], [0.0, 0.0, 1.0, 1.0])
    assert np.all(np.isfinite(loss.curvature(eta))) and np.all(loss.curvature(eta) >= 0)
    assert np.isfinite(loss.deviance(eta))
    # the correctly predicted rows contribute exactly nothing; log1pexp stays exact
    assert BinomialLoss(np.array([1.0, 0.0])).value(np.array([1e300, -1e300])) == 0.0
    assert log1pexp(np.array([1e300]))[0] == 1e300


@settings(max_examples=40, deadline=None)
@given(st.floats(-60, 60), st.floats(1e-30, 1e-6), st.booleans(), st.integers(0, 5), st.integers(1, 5))
def test_value_change_is_accurate_far_below_rounding_of_the_value(e0, d, negative, y, m):
    # source: mpmath at 100 digits; the change is resolved although it is << eps * value
    d = -d if negative else d
    y = min(y, m)
    loss = BinomialLoss(np.array([float(y)]), np.array([float(m)]))
    eta, delta = np.array([e0]), np.array([d])
    got = loss.value_change(eta, delta)
    with mpmath.workdps(100):
        a, b = mpmath.mpf(e0), mpmath.mpf(e0) + mpmath.mpf(d)
        up = lambda t: mpmath.log1p(mpmath.exp(-t))  # noqa: E731
        dn = lambda t: mpmath.log1p(mpmath.exp(t))  # noqa: E731
        t1, t2 = y * (up(b) - up(a)), (m - y) * (dn(b) - dn(a))
        wt = lambda t: m / (1 + mpmath.exp(-t)) / (1 + mpmath.exp(t))  # noqa: E731
        rw = float(wt(b) - wt(a))
        ref, scale = float(t1 + t2), float(abs(t1) + abs(t2))
    # each of the two terms is exact to rounding; their sum may cancel (common practice)
    assert abs(got - ref) <= 1e-14 * scale + 1e-300
    # and the change of the IRLS weight (one product, no cancellation)
    gw = loss.curvature_change(eta, delta)[0]
    assert abs(gw - rw) <= 1e-13 * abs(rw) + 1e-300


def test_large_changes_use_the_plain_difference_correctly():
    # source: mpmath, 50 digits
    loss = BinomialLoss(np.array([1.0, 0.0, 1.0]))
    eta, delta = np.array([40.0, -3.0, 0.5]), np.array([-800.0, 25.0, 2.0])
    ref = 0
    for e, d, yy in zip(eta, delta, [1, 0, 1]):
        f = lambda t: yy * mpmath.log1p(mpmath.exp(-t)) + (1 - yy) * mpmath.log1p(mpmath.exp(t))  # noqa: E731
        ref += f(mpmath.mpf(e) + mpmath.mpf(d)) - f(mpmath.mpf(e))
    assert loss.value_change(eta, delta) == pytest.approx(float(ref), rel=1e-14)


def test_grouped_log_likelihood_includes_the_binomial_coefficient():
    # source: scipy.stats.binom.logpmf (the documented choice: full binomial log-likelihood)
    rng = np.random.default_rng(7)
    m = rng.integers(0, 40, 25).astype(float)
    y = np.floor(rng.random(25) * (m + 1))
    w = rng.integers(1, 4, 25).astype(float)
    eta = rng.normal(size=25) * 2
    loss = BinomialLoss(y, m, w)
    ref = float(np.sum(w * scipy.stats.binom.logpmf(y, m, 1 / (1 + np.exp(-eta)))))
    assert loss.log_likelihood(eta) == pytest.approx(ref, rel=1e-13)
    assert BinomialLoss((y > 0).astype(float)).log_binomial_total() == 0.0


def test_deviance_matches_statsmodels_glm_binomial():
    # source: statsmodels GLM Binomial family deviance (counts as a two-column endog)
    rng = np.random.default_rng(11)
    m = rng.integers(1, 30, 40).astype(float)
    y = np.floor(rng.random(40) * (m + 1))
    eta = rng.normal(size=40)
    mu = 1 / (1 + np.exp(-eta))
    ref = sm.families.Binomial().deviance(y / m, mu, var_weights=m)
    assert BinomialLoss(y, m).deviance(eta) == pytest.approx(ref, rel=1e-12)


def test_unpenalised_gradient_is_zero_at_the_maximum_likelihood_estimate():
    # source: statsmodels Logit (the MLE), whose score vanishes there
    rng = np.random.default_rng(5)
    X = rng.normal(size=(200, 3))
    y = (X @ [1.0, -0.5, 0.25] + rng.logistic(size=200)) > 0
    ref = sm.Logit(y.astype(float), sm.add_constant(X)).fit(disp=0, tol=1e-13, method="newton")
    g, g0 = unpenalised_gradient("logistic", X, y, None, ref.params[1:], ref.params[0])
    assert np.max(np.abs(g)) < 1e-8 and abs(g0) < 1e-8
    g, g0 = unpenalised_gradient("logistic", X, y, None, np.zeros(3), None)
    assert g0 == 0.0 and np.max(np.abs(g)) > 1.0


def test_unpenalised_gradient_refuses_other_models_and_bad_shapes():
    # source: common practice (a message that names what is wrong)
    with pytest.raises(ValueError, match="the likelihood losses are 'logistic' and 'softmax'"):
        unpenalised_gradient("poisson", np.zeros((3, 1)), [0, 1, 2], None, np.zeros(1), 0.0)
    with pytest.raises(ValueError, match=r"needs \(1, 3\): one column per class"):
        unpenalised_gradient("softmax", np.zeros((3, 1)), [0, 1, 2], None, np.zeros(1), None)


def test_start_intercept_is_the_logit_of_the_weighted_rate():
    # source: common practice (the intercept-only MLE is the logit of the mean)
    loss = BinomialLoss(np.array([1.0, 0.0, 3.0]), np.array([1.0, 2.0, 4.0]), np.array([2.0, 1.0, 1.0]))
    rate = (2 * 1 + 0 + 3) / (2 * 1 + 2 + 4)
    assert loss.start_intercept() == pytest.approx(math.log(rate / (1 - rate)), rel=1e-15)


def test_binary_margin_form_matches_mpmath():
    # source: mpmath, 50 significant digits; 0/1 outcomes without trials use the one-term
    # margin form (u = (1 - 2y) eta), which must agree with the two-term definition
    rng = np.random.default_rng(11)
    eta = np.concatenate([ETA, -ETA])
    y = (rng.random(eta.size) < 0.5).astype(float)
    w = rng.random(eta.size) + 0.5
    loss = BinomialLoss(y, None, w)
    assert loss._binary
    exact = _mp_terms(eta, y, np.ones(eta.size), w)
    total = float(sum(t[0] for t in exact))
    assert abs(loss.value(eta) - total) <= 4e-16 * total
    assert abs(loss.deviance(eta) - 2 * total) <= 8e-16 * total  # saturated log-likelihood 0
    for k, got in enumerate([loss.gradient(eta), loss.curvature(eta)]):
        ref = np.array([float(t[k + 1]) for t in exact])
        np.testing.assert_allclose(got, ref, rtol=1e-14, atol=1e-300)


@settings(max_examples=40, deadline=None)
@given(st.floats(-60, 60), st.floats(1e-30, 3.0), st.booleans(), st.booleans())
def test_binary_value_change_is_accurate_small_and_large(e0, d, negative, positive):
    # source: mpmath at 100 digits; small moves through log1p(q expm1(sgn d)), moves past
    # 1 through the plain difference, each exact to rounding of the change
    d = -d if negative else d
    yy = 1.0 if positive else 0.0
    loss = BinomialLoss(np.array([yy]))
    got = loss.value_change(np.array([e0]), np.array([d]))
    with mpmath.workdps(100):
        f = lambda t: mpmath.log1p(mpmath.exp(-t)) if positive else mpmath.log1p(mpmath.exp(t))  # noqa: E731
        a = mpmath.mpf(e0)
        ref = float(f(a + mpmath.mpf(d)) - f(a))
        size = float(f(a))
    tol = 1e-14 * abs(ref) if abs(d) <= 1 else 1e-14 * max(abs(ref), size)
    assert abs(got - ref) <= tol + 1e-300


def test_subset_is_the_loss_of_the_chosen_rows():
    # source: the definition (a sum over rows; common practice)
    rng = np.random.default_rng(12)
    y, m, w = rng.integers(0, 4, 30).astype(float), np.full(30, 4.0), rng.random(30)
    eta = rng.normal(size=30)
    rows = np.array([1, 4, 5, 17, 29])
    for loss in (BinomialLoss(y, m, w), BinomialLoss((y > 1).astype(float), None, w)):
        sub = loss.subset(rows)
        whole = type(loss)(loss.y[rows], loss.trials[rows] if loss.grouped else None, loss.weights[rows])
        assert sub.value(eta[rows]) == whole.value(eta[rows])
        np.testing.assert_array_equal(sub.gradient(eta[rows]), loss.gradient(eta)[rows])
