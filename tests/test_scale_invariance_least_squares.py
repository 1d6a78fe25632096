"""Least squares does not depend on the scale of y, of the weights or of a column, nor on a
shift of a column, except as the mathematics says (issue 16).

Sources of the expected values:

* the mathematics of the model, stated beside each property (for example: ``y -> c y``
  scales coefficients and standard errors by ``c`` and variances by ``c^2``; case weights
  are counts, so ``w -> c w`` multiplies the observations by ``c``);
* exact rational arithmetic (``fractions.Fraction``; tests/_exact.py and the exact sandwich
  below) on the very floats passed in;
* the exactness of multiplication by a power of two in IEEE 754 arithmetic (common
  practice: it changes only the exponent), which makes the scaled answer bit for bit the
  scaled unscaled answer;
* statsmodels' OLS with HC3 covariance as the oracle for the shifted-column sandwich.

A figure whose true value lies beyond the largest float64 number must be refused with a
named InputError; the properties predict from the unscaled fit when that happens.
"""

from __future__ import annotations

import importlib
import math
import warnings
from fractions import Fraction

import mpmath
import numpy as np
import pytest
import statsmodels.api as sm
from _exact import _inverse, exact_least_squares, lre
from hypothesis import given, settings
from hypothesis import strategies as st

import lintools as lt
from lintools import InputError
from lintools.blocks import least_squares_blocks

_fit = importlib.import_module("lintools.models.least_squares")._fit

COVARIANCES = ["classical", "HC0", "HC1", "HC2", "HC3"]
TINY = 1e-320  # a few subnormal spacings: what gradual underflow may leave of a figure
MAX = np.finfo(float).max


def _close(a, b, rtol, floor=0.0):
    """``|a - b| <= rtol (|b| + floor) + TINY`` entrywise (floor: a scale for entries near 0)."""
    a, b = np.asarray(a, float), np.asarray(b, float)
    assert a.shape == b.shape
    bad = ~(np.abs(a - b) <= rtol * (np.abs(b) + floor) + TINY)
    assert not bad.any(), (a[bad] if a.ndim else a, b[bad] if b.ndim else b)


def _close_cov(a, b, rtol):
    """Covariances entrywise relative to ``sqrt(V_ii V_jj)`` of ``b`` (entries whose true size
    is below the float64 range may have underflowed: TINY)."""
    a, b = np.asarray(a, float), np.asarray(b, float)
    d = np.sqrt(np.abs(np.diag(b)))
    scale = np.maximum(d[:, None] * d[None, :], np.abs(b))
    assert np.all(np.abs(a - b) <= rtol * scale + TINY), np.max(np.abs(a - b) / np.maximum(scale, 1e-300))


@st.composite
def problems(draw, n_min=10, n_max=30):
    n = draw(st.integers(n_min, n_max))
    p = draw(st.integers(1, 3))
    rng = np.random.default_rng(draw(st.integers(0, 2**31 - 1)))
    X = rng.normal(size=(n, p)) * rng.uniform(0.2, 5, size=p)
    y = X @ rng.normal(size=p) + 1.5 + rng.normal(size=n) * (1 + np.abs(X[:, 0]))
    w = rng.uniform(0.2, 3.0, size=n)
    return X, y, w


def _scale(draw_exponent):
    return st.tuples(st.floats(*draw_exponent), st.sampled_from([1.0, -1.0]), st.floats(1.0, 9.99))


def _number(t, signed=True):
    u, sign, mant = t
    return (sign if signed else 1.0) * mant * 10.0**u


def _same_summary(a, b, rtol):
    """R^2 (absolute: it is a difference from 1) and F (absolute below 1: a slope near 0 has
    few significant digits, and F is its square in standard errors)."""
    assert abs(a.r_squared - b.r_squared) <= rtol
    _close(a.f_statistic, b.f_statistic, rtol, floor=1.0)


def _fitted(X, y, **kw):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", lt.IllConditionedWarning)
        return _fit(X, y, **kw)


def _log10(x):
    return math.log10(x) if x > 0 else -math.inf


# ---------------------------------------------------------------------------------------
# y -> c y
# ---------------------------------------------------------------------------------------


@settings(max_examples=40, deadline=None)
@given(problems(), _scale((-300.0, 300.0)), st.sampled_from(COVARIANCES), st.sampled_from(["qr", "gram"]))
def test_property_scaling_y_scales_coefficients_and_errors_by_c_and_variances_by_c2(prob, cs, cov, method):
    """Invariance: y -> c y (c in [1e-300, 1e300], either sign) gives coefficients,
    intercept, standard errors and residual standard error times c, covariance and
    deviance times c^2, log-likelihood minus n log|c|, the same R^2, F, p, leverage and
    Cook's distance; or, where a figure leaves the float64 range (above it, or wholly
    below its normal numbers), a named refusal."""
    X, y, _ = prob
    c = _number(cs)
    base = _fitted(X, y, covariance=cov, diagnostics=True, method=method)
    size = max(_log10(np.abs(base.covariance).max()), _log10(base.deviance)) + 2 * math.log10(abs(c))
    low = min(_log10(np.abs(base.covariance).max()), _log10(base.deviance)) + 2 * math.log10(abs(c))
    try:
        fit = _fitted(X, y * c, covariance=cov, diagnostics=True, method=method)
    except InputError as exc:
        assert size > 307 or low < -307, (size, low, str(exc))
        assert ("beyond the largest float64" in str(exc) or "below the smallest normal float64" in str(exc))
        assert "scale of y" in str(exc)
        return
    assert size < 309 and low > -309
    assert fit.convergence.converged and fit.convergence.solver == base.convergence.solver
    se = base.standard_errors
    _close(fit.coefficients / c, base.coefficients, 1e-12, floor=se)
    _close(fit.intercept / c, base.intercept, 1e-12, floor=base.intercept_standard_error)
    _close(fit.standard_errors, se * abs(c), 1e-12)
    _close(fit.intercept_standard_error, base.intercept_standard_error * abs(c), 1e-12)
    _close(fit.residual_standard_error, base.residual_standard_error * abs(c), 1e-12)
    d = np.sqrt(np.diag(base.covariance))
    assert np.all(np.abs(fit.covariance - base.covariance * c * c) <= 1e-12 * np.outer(d, d) * c * c + TINY)
    _close(fit.deviance, base.deviance * c * c, 1e-12)
    _same_summary(fit, base, 1e-11)
    _close(fit.f_p_value, base.f_p_value, 1e-8)  # a far tail magnifies the F's last digits
    _close(fit.leverage, base.leverage, 1e-12)
    _close(fit.cooks_distance, base.cooks_distance, 1e-10, floor=base.cooks_distance.max())
    expected = base.log_likelihood - base.n_observations * math.log(abs(c))
    assert abs(fit.log_likelihood - expected) <= 1e-12 * (abs(base.log_likelihood) + base.n_observations * abs(math.log(abs(c))))


@settings(max_examples=20, deadline=None)
@given(problems(), st.integers(-1000, 1000), st.sampled_from(COVARIANCES))
def test_property_y_times_a_power_of_two_gives_the_bits_times_that_power(prob, k, cov):
    """Invariance, exactly: y -> 2^k y changes no digit of the coefficients, standard errors
    or covariance, only their exponents (multiplication by 2^k is exact in IEEE 754), while
    every figure stays in range (k in [-1000, 1000] and the fit not refused: refusals only
    where a figure leaves the range)."""
    X, y, _ = prob
    base = _fitted(X, y, covariance=cov)
    try:
        fit = _fitted(X, np.ldexp(y, k), covariance=cov)
    except InputError as exc:
        assert (k > 400 and "beyond the largest float64" in str(exc)) or (
            k < -400 and "below the smallest normal float64" in str(exc))
        return
    assert np.array_equal(fit.coefficients, np.ldexp(base.coefficients, k))
    assert fit.intercept == math.ldexp(base.intercept, k)
    assert np.array_equal(fit.standard_errors, np.ldexp(base.standard_errors, k))
    if abs(k) < 400:  # no variance reaches the subnormal range
        assert np.array_equal(fit.covariance, np.ldexp(base.covariance, 2 * k))


# ---------------------------------------------------------------------------------------
# weights -> c weights
# ---------------------------------------------------------------------------------------


@settings(max_examples=40, deadline=None)
@given(problems(), _scale((-150.0, 150.0)), st.sampled_from(COVARIANCES), st.sampled_from(["qr", "gram"]))
def test_property_scaling_precision_weights_changes_only_the_variance_unit(prob, cs, cov, method):
    """Invariance: precision weights w -> c w (c in [1e-150, 1e150]) leave coefficients,
    standard errors, covariance (HC0-HC3 and classical), R^2, F, log-likelihood, leverage
    and Cook's distance unchanged (1e-12); the residual standard error scales by sqrt(c)
    and the deviance (sum of w e^2) by c: the model is Var(y_i) = sigma^2 / w_i."""
    X, y, w = prob
    c = _number(cs, signed=False)
    base = _fitted(X, y, weights=w, weight_type="precision", covariance=cov, diagnostics=True, method=method)
    fit = _fitted(X, y, weights=w * c, weight_type="precision", covariance=cov, diagnostics=True, method=method)
    assert fit.convergence.converged and fit.convergence.solver == base.convergence.solver
    _close(fit.coefficients, base.coefficients, 1e-12, floor=base.standard_errors)
    _close(fit.intercept, base.intercept, 1e-12, floor=base.intercept_standard_error)
    _close(fit.standard_errors, base.standard_errors, 1e-12)
    _close_cov(fit.covariance, base.covariance, 1e-12)
    _close(fit.residual_standard_error, base.residual_standard_error * math.sqrt(c), 1e-12)
    _close(fit.deviance, base.deviance * c, 1e-12)
    _same_summary(fit, base, 1e-11)
    for name in ("log_likelihood", "n_observations", "degrees_of_freedom"):
        _close(getattr(fit, name), getattr(base, name), 1e-11)
    _close(fit.leverage, base.leverage, 1e-12)
    _close(fit.cooks_distance, base.cooks_distance, 1e-10, floor=base.cooks_distance.max())


def _case_sandwich(X, y, w, fit, c, kind):
    """HC2/HC3 with case weights c w from first principles (NumPy, unscaled weights): a row
    of weight c w_i is c w_i copies, each with leverage x_i' (X'WX)^-1 x_i / c."""
    Xt = np.column_stack([np.ones(len(y)), X])
    B = np.linalg.inv(Xt.T @ (Xt * w[:, None]))
    e = y - fit.linear_predictor(X)
    ell = np.einsum("ij,jk,ik->i", Xt, B, Xt) / c
    m = w * e * e / (1.0 - ell) ** (1 if kind == "HC2" else 2)
    return B @ (Xt.T @ (Xt * m[:, None])) @ B / c, ell


@settings(max_examples=40, deadline=None)
@given(problems(), _scale((-150.0, 150.0)), st.sampled_from(COVARIANCES), st.sampled_from(["qr", "gram"]))
def test_property_scaling_case_weights_multiplies_the_observations(prob, cs, cov, method):
    """Invariance: case weights w -> c w (c in [1e-150, 1e150]) are c times the copies of
    every row: the same coefficients (1e-12), N -> c N observations and df = c N - k
    (refused when c N <= k), deviance and log-likelihood times c, classical covariance
    times (N - k)/(c N - k), HC0 times 1/c, HC1 times (1/c) (cN/(cN-k)) / (N/(N-k)), HC2
    and HC3 as the sandwich of the copies (refused when a copy has leverage 1)."""
    X, y, w = prob
    c = _number(cs, signed=False)
    k = X.shape[1] + 1
    base = _fitted(X, y, weights=w, covariance="classical", method=method)
    N = base.n_observations
    try:
        fit = _fitted(X, y, weights=w * c, covariance=cov, method=method)
    except InputError as exc:
        if c * N <= k * (1 + 1e-12):
            assert "observations" in str(exc)
        else:
            assert cov in ("HC2", "HC3") and "leverage 1" in str(exc)
            _, ell = _case_sandwich(X, y, w, base, c, cov)
            assert ell.max() >= 1.0 - 1e-9
        return
    assert c * N > k
    assert fit.convergence.converged
    _close(fit.coefficients, base.coefficients, 1e-12, floor=base.standard_errors)
    _close(fit.intercept, base.intercept, 1e-12, floor=base.intercept_standard_error)
    _close(fit.n_observations, c * N, 1e-14)
    _close(fit.degrees_of_freedom, c * N - k, 1e-12)
    _close(fit.deviance, base.deviance * c, 1e-12)
    _close(fit.log_likelihood, base.log_likelihood * c, 1e-11)
    if cov == "classical":
        expected = base.covariance * ((N - k) / (c * N - k))
    elif cov in ("HC0", "HC1"):
        ref = _fitted(X, y, weights=w, covariance=cov, method=method)
        expected = ref.covariance / c
        if cov == "HC1":
            expected = expected * (c * N / (c * N - k)) / (N / (N - k))
    else:
        expected, _ = _case_sandwich(X, y, w, base, c, cov)
    _close_cov(fit.covariance, expected, 1e-12 if cov != "HC2" and cov != "HC3" else 1e-9)


@pytest.mark.parametrize("weight_type", ["case", "precision"])
@pytest.mark.parametrize("k", [-1074 + 60, -600, 600, 1000])
def test_weights_times_a_power_of_two_give_the_same_bits(weight_type, k):
    """Exactly: w -> 2^k w changes no bit of the coefficients (the weights are divided by a
    power of two before any sum, exactly), for weights as small as 2^-1014 or as large as 2^1001."""
    rng = np.random.default_rng(4)
    X = rng.normal(size=(40, 3))
    y = X @ [1.0, 2.0, -1.0] + rng.normal(size=40)
    w = rng.uniform(0.5, 1.9, 40)
    a = lt.least_squares(X, y, weights=w, weight_type="precision")
    b = lt.least_squares(X, y, weights=np.ldexp(w, k), weight_type="precision")
    assert np.array_equal(a.coefficients, b.coefficients) and a.intercept == b.intercept
    assert np.array_equal(a.standard_errors, b.standard_errors)
    if weight_type == "case" and k > 0:
        c = lt.least_squares(X, y, weights=np.ldexp(w, k))
        assert np.array_equal(a.coefficients, c.coefficients)


# ---------------------------------------------------------------------------------------
# a column -> c column
# ---------------------------------------------------------------------------------------


@settings(max_examples=40, deadline=None)
@given(problems(), _scale((-290.0, 290.0)), st.sampled_from(COVARIANCES), st.sampled_from(["qr", "gram"]), st.data())
def test_property_scaling_a_column_is_the_reparametrised_fit(prob, cs, cov, method, data):
    """Invariance: column j -> c x_j (c in [1e-290, 1e290], either sign) is the
    reparametrised problem: coefficient j and its standard error divided by c (row and
    column j of the covariance too), every other figure unchanged; or, where a figure
    leaves the float64 range, a refusal that names column j."""
    X, y, _ = prob
    j = data.draw(st.integers(0, X.shape[1] - 1))
    c = _number(cs)
    Xc = X.copy()
    Xc[:, j] *= c
    base = _fitted(X, y, covariance=cov, diagnostics=True, method=method)
    size = max(_log10(base.covariance[j + 1, j + 1]) - 2 * math.log10(abs(c)), 0.0)
    try:
        fit = _fitted(Xc, y, covariance=cov, diagnostics=True, method=method)
    except InputError as exc:
        assert size > 307, (size, str(exc))
        assert f"column {j}" in str(exc) and "beyond the largest float64" in str(exc)
        return
    assert size < 309
    scale = np.ones(X.shape[1])
    scale[j] = c
    se = base.standard_errors
    _close(fit.coefficients * scale, base.coefficients, 1e-12, floor=se)
    _close(fit.intercept, base.intercept, 1e-12, floor=base.intercept_standard_error)
    _close(fit.standard_errors * np.abs(scale), se, 1e-12)
    full = np.r_[1.0, scale]
    _close_cov(fit.covariance, base.covariance / full[:, None] / full[None, :], 1e-12)
    _same_summary(fit, base, 1e-11)
    for name in ("residual_standard_error", "deviance", "log_likelihood"):
        _close(getattr(fit, name), getattr(base, name), 1e-11)
    _close(fit.leverage, base.leverage, 1e-12)
    _close(fit.cooks_distance, base.cooks_distance, 1e-10, floor=base.cooks_distance.max())


# ---------------------------------------------------------------------------------------
# a column -> column + shift
# ---------------------------------------------------------------------------------------


def _shifted(X, j, shift):
    """``X`` with column j moved by ``shift`` (rounded), and the same data with the shift
    subtracted exactly (Sterbenz: the difference of floats within a factor 2 is exact)."""
    Xs = X.copy()
    Xs[:, j] = X[:, j] + shift
    X0 = Xs.copy()
    X0[:, j] = Xs[:, j] - shift
    assert all(Fraction(float(a)) - Fraction(shift) == Fraction(float(b)) for a, b in zip(Xs[:, j], X0[:, j]))
    return Xs, X0


@settings(max_examples=60, deadline=None)
@given(problems(), st.floats(3.0, 12.0), st.sampled_from([1.0, -1.0]), st.sampled_from(COVARIANCES),
       st.sampled_from(["qr", "gram"]), st.data())
def test_property_shifting_a_column_loses_no_digits(prob, u, sign, cov, method, data):
    """Invariance: column j -> x_j + shift (|shift| in [1e3, 1e12]) is the reparametrised
    fit of the data with the shift subtracted exactly: the same slopes, standard errors
    (every covariance type), residual standard error, leverage and Cook's distance to at
    least 10 digits (LRE >= 10; the intercept moves by -shift * beta_j)."""
    X, y, _ = prob
    j = data.draw(st.integers(0, X.shape[1] - 1))
    Xs, X0 = _shifted(X, j, sign * 10.0**u)
    a = _fitted(Xs, y, covariance=cov, diagnostics=True, method=method)
    b = _fitted(X0, y, covariance=cov, diagnostics=True, method=method)
    _close(a.coefficients, b.coefficients, 1e-10, floor=b.standard_errors * 1e-2)
    _close(a.standard_errors, b.standard_errors, 1e-10)
    _close(a.residual_standard_error, b.residual_standard_error, 1e-10)
    _close(a.leverage, b.leverage, 1e-10)
    _close(a.cooks_distance, b.cooks_distance, 1e-10, floor=b.cooks_distance.max() * 1e-3)
    _same_summary(a, b, 1e-10)


def _exact_sandwich_se(X, y, kind):
    """HC0 or HC3 standard errors by exact rational arithmetic (White 1980; MacKinnon &
    White 1985) on the floats given: bread (X'X)^-1, residuals and leverages all exact."""
    n, p = X.shape
    rows = [[Fraction(1)] + [Fraction(float(v)) for v in X[i]] for i in range(n)]
    yy = [Fraction(float(v)) for v in y]
    k = p + 1
    A = [[sum(r[a] * r[b] for r in rows) for b in range(k)] for a in range(k)]
    B = _inverse(A)
    theta = [sum(B[a][b] * sum(r[b] * t for r, t in zip(rows, yy)) for b in range(k)) for a in range(k)]
    meat = [[Fraction(0)] * k for _ in range(k)]
    for r, t in zip(rows, yy):
        e = t - sum(th * v for th, v in zip(theta, r))
        h = sum(r[a] * B[a][b] * r[b] for a in range(k) for b in range(k))
        m = e * e / ((1 - h) ** 2 if kind == "HC3" else 1)
        for a in range(k):
            for b in range(k):
                meat[a][b] += m * r[a] * r[b]
    V = [[sum(B[a][i] * meat[i][l] * B[l][b] for i in range(k) for l in range(k)) for b in range(k)] for a in range(k)]
    with mpmath.workdps(40):
        return [mpmath.sqrt(mpmath.mpf(V[a][a].numerator) / V[a][a].denominator) for a in range(k)]


@pytest.mark.parametrize("shift", [1.7e9, 1e12])
def test_hc3_of_a_shifted_column_against_exact_rational_arithmetic(shift):
    """Regression (issue 16: HC3 standard errors 8.8e-8 relative error at 1.7e9 + N(0,1),
    8.1e-6 at 1e12 + N(0,1)).  Oracle: exact rational arithmetic on the same floats; the
    issue asks for LRE >= 10; measured 15.3-17 here (the old code: HC3 7.7 at 1.7e9, 3.9
    at 1e12)."""
    rng = np.random.default_rng(11)
    n = 14
    X = np.column_stack([shift + rng.normal(size=n), rng.normal(size=n)])
    y = 0.5 * (X[:, 0] - shift) - X[:, 1] + rng.normal(size=n) * (1 + np.abs(X[:, 1]))
    for kind in ("HC0", "HC3"):
        fit = lt.least_squares(X, y, covariance=kind)
        exact = _exact_sandwich_se(X, y, kind)
        digits = lre(fit.standard_errors, exact[1:])
        assert digits.min() >= 12, (kind, digits)
    theta, se, _ = exact_least_squares(X, y)
    fit = lt.least_squares(X, y)
    assert lre(fit.standard_errors, se[1:]).min() >= 12
    assert lre(fit.coefficients, theta[1:]).min() >= 12


def test_hc3_of_a_timestamp_column_agrees_with_statsmodels_on_the_shifted_back_column():
    """Regression, issue 16's case: a Unix time stamp column (1.7e9 + N(0, 1)).  Oracle:
    statsmodels OLS, cov_type='HC3', on the column with the shift subtracted exactly
    (statsmodels on the raw time stamps loses digits itself, so it is given the small
    numbers)."""
    rng = np.random.default_rng(2)
    n = 200
    X = np.column_stack([rng.normal(size=n), rng.normal(size=n)])
    y = X @ [1.0, -0.5] + rng.normal(size=n) * (1 + np.abs(X[:, 0]))
    Xs, X0 = _shifted(X, 0, 1.7e9)
    ref = sm.OLS(y, sm.add_constant(X0)).fit(cov_type="HC3")
    ours = lt.least_squares(Xs, y, covariance="HC3")
    assert np.max(np.abs(ours.standard_errors / ref.bse[1:] - 1)) < 1e-10
    assert np.max(np.abs(ours.coefficients / ref.params[1:] - 1)) < 1e-10


# ---------------------------------------------------------------------------------------
# the blocked fit obeys the same rules
# ---------------------------------------------------------------------------------------


def _source(X, y, w=None, cuts=(0, 3, 4, 11)):
    edges = [c for c in cuts if c < len(y)] + [len(y)]

    def gen():
        for lo, hi in zip(edges[:-1], edges[1:]):
            yield (X[lo:hi], y[lo:hi]) if w is None else (X[lo:hi], y[lo:hi], w[lo:hi])

    return gen


@settings(max_examples=30, deadline=None)
@given(problems(), _scale((-300.0, 300.0)))
def test_property_blocks_scaling_y_scales_the_answer(prob, cs):
    """Invariance (least_squares_blocks): y -> c y, c in [1e-300, 1e300], as for the
    in-memory fit: coefficients and standard errors times c, covariance times c^2, or a
    named refusal when a figure leaves the float64 range."""
    X, y, _ = prob
    c = _number(cs)
    base = least_squares_blocks(_source(X, y))
    size = max(_log10(np.abs(base.covariance).max()), _log10(base.deviance)) + 2 * math.log10(abs(c))
    try:
        fit = least_squares_blocks(_source(X, y * c))
    except InputError as exc:
        assert size > 307 and "scale of y" in str(exc)
        return
    assert size < 309
    _close(fit.coefficients / c, base.coefficients, 1e-12, floor=base.standard_errors)
    _close(fit.intercept / c, base.intercept, 1e-12, floor=base.intercept_standard_error)
    _close(fit.standard_errors, base.standard_errors * abs(c), 1e-12)
    d = np.sqrt(np.diag(base.covariance))
    assert np.all(np.abs(fit.covariance - base.covariance * c * c) <= 1e-12 * np.outer(d, d) * c * c + TINY)
    _close(fit.deviance, base.deviance * c * c, 1e-12)


@settings(max_examples=30, deadline=None)
@given(problems(), _scale((-150.0, 150.0)))
def test_property_blocks_scaling_case_weights_multiplies_the_observations(prob, cs):
    """Invariance (least_squares_blocks, case weights): w -> c w, c in [1e-150, 1e150]: the
    same coefficients, c N observations, classical covariance times (N - k)/(c N - k); refused
    when c N <= k."""
    X, y, w = prob
    c = _number(cs, signed=False)
    k = X.shape[1] + 1
    base = least_squares_blocks(_source(X, y, w))
    N = base.n_observations
    try:
        fit = least_squares_blocks(_source(X, y, w * c))
    except InputError as exc:
        assert c * N <= k * (1 + 1e-12) and "observations" in str(exc)
        return
    _close(fit.coefficients, base.coefficients, 1e-12, floor=base.standard_errors)
    _close(fit.n_observations, c * N, 1e-14)
    _close_cov(fit.covariance, base.covariance * ((N - k) / (c * N - k)), 1e-12)


@settings(max_examples=30, deadline=None)
@given(problems(), _scale((-290.0, 290.0)), st.data())
def test_property_blocks_scaling_a_column_is_the_reparametrised_fit(prob, cs, data):
    """Invariance (least_squares_blocks): column j -> c x_j is the reparametrised fit, or a
    refusal naming column j when a figure leaves the float64 range."""
    X, y, _ = prob
    j = data.draw(st.integers(0, X.shape[1] - 1))
    c = _number(cs)
    Xc = X.copy()
    Xc[:, j] *= c
    base = least_squares_blocks(_source(X, y))
    size = _log10(base.covariance[j + 1, j + 1]) - 2 * math.log10(abs(c))
    try:
        fit = least_squares_blocks(_source(Xc, y))
    except InputError as exc:
        assert size > 307 and f"column {j}" in str(exc)
        return
    scale = np.ones(X.shape[1])
    scale[j] = c
    _close(fit.coefficients * scale, base.coefficients, 1e-12, floor=base.standard_errors)
    _close(fit.standard_errors * np.abs(scale), base.standard_errors, 1e-12)
    _close(fit.residual_standard_error, base.residual_standard_error, 1e-12)


@settings(max_examples=30, deadline=None)
@given(problems(), st.floats(3.0, 12.0), st.sampled_from([1.0, -1.0]), st.data())
def test_property_blocks_shifting_a_column_loses_no_digits(prob, u, sign, data):
    """Invariance (least_squares_blocks): column j -> x_j + shift, |shift| in [1e3, 1e12],
    gives the slopes and standard errors of the exactly shifted-back data to 10 digits."""
    X, y, _ = prob
    j = data.draw(st.integers(0, X.shape[1] - 1))
    Xs, X0 = _shifted(X, j, sign * 10.0**u)
    a = least_squares_blocks(_source(Xs, y))
    b = least_squares_blocks(_source(X0, y))
    _close(a.coefficients, b.coefficients, 1e-10, floor=b.standard_errors * 1e-2)
    _close(a.standard_errors, b.standard_errors, 1e-10)
    _close(a.residual_standard_error, b.residual_standard_error, 1e-10)


# ---------------------------------------------------------------------------------------
# regressions: every case of issue 16 on least squares, each failing on the old code
# ---------------------------------------------------------------------------------------


def _data(n=50, seed=0):
    rng = np.random.default_rng(seed)
    X = rng.normal(size=(n, 3))
    y = X @ [1.0, 2.0, 3.0] + 1.0 + rng.normal(size=n)
    return X, y


@pytest.mark.parametrize("c", [1e-170, 1e-300])
def test_tiny_y_is_refused_by_name_not_a_division_by_zero(c):
    """Regression: y * 1e-170 raised ZeroDivisionError.  Its covariance (about 1e-340)
    would be stored as 0 or a subnormal with few digits: refused, naming the covariance,
    y and the remedy, as y * 1e300 is above the range."""
    X, y = _data()
    with pytest.raises(InputError, match=r"covariance of the coefficients .* below the smallest normal .* scale of y"):
        lt.least_squares(X, y * c)


def test_small_y_within_the_range_is_the_fit_of_y_times_c():
    """y * 1e-150: every figure in the normal range; the fit of y times c."""
    c = 1e-150
    X, y = _data()
    base, fit = lt.least_squares(X, y), lt.least_squares(X, y * c)
    _close(fit.coefficients / c, base.coefficients, 1e-13)
    _close(fit.standard_errors / c, base.standard_errors, 1e-13)
    _close(fit.residual_standard_error / c, base.residual_standard_error, 1e-13)
    assert fit.convergence.converged


def test_huge_y_is_refused_by_name_not_given_nan_standard_errors():
    """Regression: y * 1e300 returned NaN standard errors with converged=True.  The
    covariance would be about 1e598: refused, naming the covariance, y and the remedy;
    y * 1e150 still fits (its covariance, about 1e298, is in range)."""
    X, y = _data()
    with pytest.raises(InputError, match=r"covariance of the coefficients .* beyond the largest float64 .* scale of y"):
        lt.least_squares(X, y * 1e300)
    base, fit = lt.least_squares(X, y), lt.least_squares(X, y * 1e150)
    assert np.all(np.isfinite(fit.covariance)) and np.all(np.isfinite(fit.standard_errors))
    _close(fit.standard_errors / 1e150, base.standard_errors, 1e-13)


@pytest.mark.parametrize("weight_type", ["precision", "case"])
def test_tiniest_weights_give_the_unweighted_coefficients(weight_type):
    """Regression: precision weights of 5e-324 (the smallest float64) gave coefficients off
    in the 3rd digit, 'converged'.  Equal weights are no weights: the same coefficients
    (1e-12) at 1e-300; case weights that small count fewer observations than parameters,
    and precision weights of 5e-324 a weighted residual sum of squares below the normal
    float64 range: refused by name."""
    X, y = _data()
    base = lt.least_squares(X, y)
    if weight_type == "case":
        with pytest.raises(InputError, match="observations"):
            lt.least_squares(X, y, weights=np.full(50, 5e-324))
        return
    with pytest.raises(InputError, match=r"residual sum of squares .* below the smallest normal .* weights"):
        lt.least_squares(X, y, weights=np.full(50, 5e-324), weight_type="precision")
    fit = lt.least_squares(X, y, weights=np.full(50, 1e-300), weight_type="precision")
    _close(fit.coefficients, base.coefficients, 1e-12)
    _close(fit.standard_errors, base.standard_errors, 1e-12)


def test_weights_of_1e308_give_the_weighted_fit_or_a_named_refusal():
    """Regression: weights of 1e308 raised NumPy's LinAlgError 'SVD did not converge'.
    Precision weights 1e308 * w: the coefficients of weights w (1e-12) when the weighted
    residual sum of squares is in range; otherwise a refusal that names it and the weights."""
    X, y = _data()
    w = np.linspace(0.5, 1.5, 50)
    small = 1.0 + X @ [1.0, 2.0, 3.0] + (y - X @ [1.0, 2.0, 3.0] - 1.0) * 1e-3  # residuals ~1e-3
    base = lt.least_squares(X, small, weights=w, weight_type="precision")
    fit = lt.least_squares(X, small, weights=w * 1e308 / 1.5, weight_type="precision")
    _close(fit.coefficients, base.coefficients, 1e-12)
    _close(fit.standard_errors, base.standard_errors, 1e-12)
    with pytest.raises(InputError, match=r"residual sum of squares .* beyond the largest float64 .* weights"):
        lt.least_squares(X, y, weights=np.full(50, 1e308), weight_type="precision")
    with pytest.raises(InputError, match="case weights add up to more than the largest float64"):
        lt.least_squares(X, y, weights=np.full(50, 1e308))


def test_columns_times_1e160_and_1e_minus_200_are_not_called_constant():
    """Regression: columns times 1e160 or 1e-200 were refused as 'constant'.  1e160: the
    reparametrised fit (coefficient / 1e160); 1e-200: its covariance entry (about 1e398)
    is beyond float64, so it is refused naming that column and the remedy; 1e-150 fits."""
    X, y = _data()
    base = lt.least_squares(X, y)
    for c in (1e160, 1e-150):
        Xc = X.copy()
        Xc[:, 1] *= c
        fit = lt.least_squares(Xc, y)
        _close(fit.coefficients * [1, c, 1], base.coefficients, 1e-13)
        _close(fit.standard_errors * [1, c, 1], base.standard_errors, 1e-13)
    Xc = X.copy()
    Xc[:, 1] *= 1e-200
    with pytest.raises(InputError, match=r"beyond the largest float64 .* column 1 \('x2'\) .* Rescale column 1"):
        lt.least_squares(Xc, y)


def test_a_column_at_the_rounding_level_is_named_as_such():
    """A column 1e16 + small integers varies only in the last bits float64 keeps: refused,
    and the message says so (not 'constant')."""
    X, y = _data()
    X[:, 0] = 1e16 + 2.0 * np.arange(50) % 3
    with pytest.raises(InputError, match="varies only in the last digits"):
        lt.least_squares(X, y)


def test_shifted_column_does_not_depend_on_the_number_of_rows():
    """A 1e12 + N(0, 1) column with 20 000 rows (the old rank rule, n * eps against the
    raw length, called it constant at this size) is fitted; its slope and HC3 standard
    error equal those of the exactly shifted-back column to 10 digits (both paths)."""
    rng = np.random.default_rng(8)
    n = 20000
    X = rng.normal(size=(n, 2))
    y = X @ [2.0, -1.0] + rng.normal(size=n) * (1 + np.abs(X[:, 0]))
    Xs, X0 = _shifted(X, 0, 1e12)
    for method in ("gram", "qr"):
        a = _fit(Xs, y, covariance="HC3", method=method)
        b = _fit(X0, y, covariance="HC3", method=method)
        assert a.convergence.solver == b.convergence.solver == ("cholesky" if method == "gram" else "qr")
        _close(a.coefficients, b.coefficients, 1e-10)
        _close(a.standard_errors, b.standard_errors, 1e-10)
