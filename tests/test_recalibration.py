"""Tests of lintools.metrics.recalibration (Platt, temperature and isotonic maps).

Oracles: scikit-learn IsotonicRegression, scipy.optimize.isotonic_regression,
scipy.optimize (brentq, minimize_scalar), statsmodels GLM Binomial with fractional
responses.  Each check names its source.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
import scipy.optimize
import statsmodels.api as sm
from hypothesis import given, settings
from hypothesis import strategies as st
from sklearn.isotonic import IsotonicRegression

from lintools.support.errors import InputError, SeparationError
from lintools.metrics.recalibration import isotonic_calibration, platt_scaling, temperature_scaling

TOL = 1e-12


def close(a, b, tol=TOL):
    a, b = np.asarray(a, float), np.asarray(b, float)
    return bool(np.all(np.abs(a - b) <= tol * np.maximum(1.0, np.abs(b))))


# -------------------------------------------------------------------------- isotonic
@pytest.mark.parametrize("seed", [0, 1, 2])
@pytest.mark.parametrize("increasing", [True, False])
def test_isotonic_matches_sklearn(seed, increasing):
    rng = np.random.default_rng(seed)
    p = np.round(rng.uniform(size=400), 2)  # ties
    y = (rng.uniform(size=400) < (p if increasing else 1 - p)).astype(int)
    w = rng.uniform(0.1, 3.0, size=400)
    new = np.concatenate([rng.uniform(-0.2, 1.2, size=500), p])
    for weights in (None, w):
        m = isotonic_calibration(y, p, weights=weights, increasing=increasing)
        # source: scikit-learn IsotonicRegression(out_of_bounds="clip") (oracle)
        ref = IsotonicRegression(increasing=increasing, out_of_bounds="clip").fit(p, y, sample_weight=weights)
        assert close(m.apply(new), ref.predict(new))


def test_isotonic_matches_scipy_pav():
    rng = np.random.default_rng(4)
    x = rng.permutation(200).astype(float)  # distinct inputs
    y = (rng.uniform(size=200) < x / 200).astype(int)
    w = rng.uniform(0.5, 2.0, size=200)
    m = isotonic_calibration(y, x, weights=w)
    order = np.argsort(x)
    # source: scipy.optimize.isotonic_regression (oracle), same weighted least squares
    ref = scipy.optimize.isotonic_regression(y[order].astype(float), weights=w[order])
    assert close(m.values, ref.x) and close(m.points, x[order])


@settings(max_examples=50, deadline=None)
@given(
    st.lists(st.tuples(st.floats(-3, 3, allow_nan=False), st.booleans(), st.floats(0.1, 4)), min_size=1, max_size=60),
    st.booleans(),
)
def test_isotonic_output_monotone(rows, increasing):
    x = np.array([r[0] for r in rows])
    y = np.array([r[1] for r in rows]).astype(int)
    w = np.array([r[2] for r in rows])
    m = isotonic_calibration(y, x, weights=w, increasing=increasing)
    grid = np.linspace(-4, 4, 101)
    out = m.apply(grid)
    steps = np.diff(out)
    # source: definition of an isotonic fit (Barlow et al. 1972), common practice tolerance
    assert (steps >= -1e-15).all() if increasing else (steps <= 1e-15).all()
    assert (out >= 0).all() and (out <= 1).all()
    # clipping outside the fitted points (documented)
    assert m.apply(-10.0) == m.values[0] and m.apply(10.0) == m.values[-1]


def test_isotonic_apply_between_nearly_equal_points():
    # regression: np.interp's slope (1 / 2e-320) overflowed and returned +-inf between two
    # points a few subnormals apart; IEEE 754 subnormal arithmetic, common practice check
    m = isotonic_calibration([0, 1], [-1e-320, 1e-320])
    assert m.apply(0.0) == 0.5 and m.apply(5e-321) == 0.75
    m = isotonic_calibration([1, 0], [-1e-320, 1e-320], increasing=False)
    assert m.apply(0.0) == 0.5
    # a gap wider than the largest double (x1 - x0 overflows): exact midpoint
    m = isotonic_calibration([0, 1], [-1.5e308, 1.5e308])
    assert m.apply(0.0) == 0.5 and m.apply(1.5e308) == 1.0


def test_isotonic_apply_matches_linear_interpolation():
    # source: numpy.interp (oracle) on well-separated points, to rounding
    rng = np.random.default_rng(3)
    x = rng.normal(size=200)
    y = (rng.uniform(size=200) < 1 / (1 + np.exp(-2 * x))).astype(int)
    m = isotonic_calibration(y, x)
    grid = np.linspace(-4, 4, 1001)
    assert np.max(np.abs(m.apply(grid) - np.interp(grid, m.points, m.values))) < 1e-15


# ----------------------------------------------------------------------- temperature
def _logit_data(seed, n=400, k=4, true_t=2.0):
    rng = np.random.default_rng(seed)
    Z = rng.normal(size=(n, k)) * 3.0
    P = np.exp(Z / true_t)
    P /= P.sum(axis=1, keepdims=True)
    y = np.array([rng.choice(k, p=row) for row in P])
    return Z, y, rng.uniform(0.5, 2.0, size=n)


def _nll(t, Z, y, w):
    S = Z / t
    m = S.max(axis=1)
    lse = m + np.log(np.exp(S - m[:, None]).sum(axis=1))
    return float(w @ (lse - S[np.arange(len(y)), y])) / w.sum()


@pytest.mark.parametrize("seed", [0, 1])
def test_temperature_matches_scipy_root(seed):
    Z, y, w = _logit_data(seed)
    m = temperature_scaling(y, Z, weights=w)

    def slope(beta):  # derivative of the mean NLL in beta = 1/T
        S = beta * Z
        P = np.exp(S - S.max(axis=1, keepdims=True))
        P /= P.sum(axis=1, keepdims=True)
        return float(w @ ((P * Z).sum(axis=1) - Z[np.arange(len(y)), y])) / w.sum()

    # source: scipy.optimize.brentq (oracle) on the stationarity condition in 1/T
    beta = scipy.optimize.brentq(slope, 1e-3, 1e3, xtol=1e-16, rtol=1e-15)
    assert close(m.temperature, 1 / beta, 1e-11) and m.converged
    # source: scipy.optimize.minimize_scalar (oracle, bounded Brent, ~1e-8 in T)
    ref = scipy.optimize.minimize_scalar(lambda t: _nll(t, Z, y, w), bounds=(0.05, 50), method="bounded",
                                         options={"xatol": 1e-10})
    assert abs(m.temperature - ref.x) < 1e-6
    assert close(m.log_likelihood, -_nll(m.temperature, Z, y, w) * w.sum(), 1e-12)
    P = m.apply(Z)
    assert close(P.sum(axis=1), 1.0) and P.shape == Z.shape


def test_temperature_binary_logits_equal_two_column_form():
    rng = np.random.default_rng(3)
    z = rng.normal(size=300) * 4
    y = (rng.uniform(size=300) < 1 / (1 + np.exp(-z / 3))).astype(int)
    a = temperature_scaling(y, z)
    b = temperature_scaling(y, np.column_stack([np.zeros_like(z), z]))
    # source: identity sigmoid(z) = softmax([0, z])[1] (common practice)
    assert close(a.temperature, b.temperature)
    assert close(a.apply(z), b.apply(np.column_stack([np.zeros_like(z), z]))[:, 1])


def test_temperature_without_finite_optimum():
    Z = np.array([[2.0, 0.0], [0.0, 1.0], [3.0, 1.0]])
    with pytest.raises(SeparationError, match="largest logit"):
        temperature_scaling([0, 1, 0], Z)
    with pytest.raises(InputError, match="infinite temperature"):
        temperature_scaling([1, 0, 1], Z)
    with pytest.raises(InputError, match="wrong number of columns"):
        temperature_scaling(["a", "b", "c"], Z)
    m = temperature_scaling([0, 1, 1], Z)
    with pytest.raises(InputError, match="columns"):
        m.apply(np.zeros((2, 3)))


# ----------------------------------------------------------------------------- Platt
def test_platt_matches_statsmodels_fractional_glm():
    rng = np.random.default_rng(8)
    s = rng.normal(size=300) * 2
    y = (rng.uniform(size=300) < 1 / (1 + np.exp(-(0.5 + 1.3 * s)))).astype(int)
    w = rng.uniform(0.5, 2.0, size=300)
    m = platt_scaling(y, s, weights=w)
    n_pos, n_neg = w @ y, w @ (1 - y)
    # source: Platt (1999) smoothed targets (from memory; also Lin, Lin & Weng 2007)
    assert close([m.target_positive, m.target_negative], [(n_pos + 1) / (n_pos + 2), 1 / (n_neg + 2)])
    t = np.where(y == 1, m.target_positive, m.target_negative)
    # source: statsmodels GLM Binomial with fractional response and freq_weights (oracle)
    glm = sm.GLM(t, np.column_stack([np.ones_like(s), s]), family=sm.families.Binomial(),
                 freq_weights=w).fit(tol=1e-14)
    assert close([m.intercept, m.slope], glm.params, 1e-8)
    assert close(m.apply(s), glm.predict(), 1e-8)


def test_platt_finite_on_separated_scores():
    s = np.array([-2.0, -1.0, -0.5, 0.5, 1.0, 2.0])
    y = np.array([0, 0, 0, 1, 1, 1])
    m = platt_scaling(y, s)
    # with smoothing the optimum is finite (Platt 1999); the fitted map is increasing
    assert math.isfinite(m.slope) and m.slope > 0
    assert 0 < m.apply(-2.0) < 0.5 < m.apply(2.0) < 1
    with pytest.raises(InputError, match="mismatched lengths"):
        platt_scaling(y, s[:-1])
