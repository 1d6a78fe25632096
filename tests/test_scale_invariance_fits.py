"""Scale invariance of the iterative fits (issue #16), as hypothesis properties.

Each test states the invariance it checks.  Source for all of them: exact algebra on
the objectives stated in the docstrings (common practice): a common factor ``c`` on the
case weights multiplies the log-likelihood and leaves its maximiser unchanged (the ridge
is given in the caller's weights, so ``l2`` scales with ``c`` for the same optimum);
multiplying a column by ``c`` divides its coefficient by ``c``; adding a constant to a
column moves only the intercept.  The factor ``c`` is drawn log-uniformly over
[1e-150, 1e150].  The last test checks what ``tol`` promises: to first order the
standardised coefficients lie within ``||Hbar^{-1}||_inf * tol`` of the optimum, with
``Hbar`` the information per unit weight in the standardised, centred coordinates
(computed here independently with NumPy).  Invented data only (property-test inputs).
"""

from __future__ import annotations

import math
from types import SimpleNamespace

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

import lintools as lt
from lintools.blocks import logistic_blocks, softmax_blocks

SETTINGS = settings(max_examples=25, deadline=None)
SOLVERS = ("newton", "lbfgs", "gradient")
TOL = 1e-13  # the fits' default tol
#: a common factor on the weights: 10 ** u, u uniform on [-150, 150]
FACTOR = st.floats(-150.0, 150.0).map(lambda u: 10.0**u)
#: how the factor meets the weights: constant weights (any factor), mixed weights times a
#: power of two, mixed weights times any factor (the caller's products are then rounded)
KIND = st.sampled_from(["constant", "mixed, power of two", "mixed"])


def _scaled(kind: str, w: np.ndarray, c: float) -> tuple[np.ndarray, float, bool]:
    """``(weights, factor, exact)``: the base weights and the factor for this kind of draw;
    ``exact`` when the scaled weights divided by their largest equal the base ones divided
    by theirs bit for bit, so the fits must be bit-identical."""
    if kind == "constant":
        return np.ones_like(w), c, True
    if kind == "mixed, power of two":
        return w, 2.0 ** round(math.log2(c)), True
    return w, c, False


def _same_count(a, b, exact: bool, tol: float = TOL) -> None:
    """The same verdict, and the same iteration count where the scaled problem is the base
    one bit for bit (``exact``).  Otherwise the scaled data differ from the base ones in
    their last bits (the caller's products are rounded) and so do the paths: Newton's count
    is the same but for a last step that rounding decides (the fit that stopped first then
    ended within 10% of tol); the first-order solvers' discrete choices near the answer
    (restarts, backtracking, bracketing) are then rounding's too, and their counts may
    differ by a few iterations (at most 2 or 10%)."""
    assert a.converged == b.converged
    if exact or a.iterations == b.iterations:
        assert a.iterations == b.iterations
        return
    if a.solver == "newton":
        early = a if a.iterations < b.iterations else b
        assert abs(a.iterations - b.iterations) == 1 and early.gradient_norm >= 0.9 * tol, (a, b)
    else:
        assert abs(a.iterations - b.iterations) <= max(2, 0.1 * max(a.iterations, b.iterations)), (a, b)


def _rel(a, b) -> float:
    a, b = np.asarray(a, float), np.asarray(b, float)
    top = float(np.max(np.abs(b)))
    return float(np.max(np.abs(a - b))) / top if top > 0 else float(np.max(np.abs(a)))


def _binary(seed: int, n: int = 40, p: int = 2):
    """Random rows plus p + 1 anchor points carrying both labels (so the MLE exists), and
    positive weights of mixed sizes."""
    rng = np.random.default_rng(seed)
    X = rng.normal(size=(n, p)) * rng.uniform(0.3, 3.0, p)
    y = (X @ rng.normal(size=p) + rng.logistic(size=n) > 0).astype(float)
    anchors = np.vstack([np.zeros(p), np.eye(p)])
    X = np.vstack([X, anchors, anchors])
    y = np.r_[y, np.zeros(p + 1), np.ones(p + 1)]
    return X, y, rng.uniform(0.2, 3.0, y.size)


def _classes(seed: int, n: int = 45, p: int = 2, K: int = 3):
    """As :func:`_binary` with K classes: every anchor point carries every class."""
    rng = np.random.default_rng(seed)
    X = rng.normal(size=(n, p))
    y = np.digitize(X @ rng.normal(size=p) + rng.logistic(size=n), np.linspace(-1.0, 1.0, K - 1))
    anchors = np.vstack([np.zeros(p), np.eye(p)])
    X = np.vstack([X] + [anchors] * K)
    y = np.r_[y, np.repeat(np.arange(K), p + 1)]
    return X, y, rng.uniform(0.2, 3.0, y.size)


def _weight_proportional(a, b, c: float) -> None:
    """Fit ``a`` with weights ``c w`` against fit ``b`` with weights ``w``."""
    rel = 1e-12
    assert a.log_likelihood == pytest.approx(c * b.log_likelihood, rel=rel)
    assert a.deviance == pytest.approx(c * b.deviance, rel=rel)
    assert a.null_deviance == pytest.approx(c * b.null_deviance, rel=rel)
    assert a.n_observations == pytest.approx(c * b.n_observations, rel=rel)
    assert a.convergence.objective == pytest.approx(c * b.convergence.objective, rel=rel)
    k = b.aic / 2.0 + b.log_likelihood  # free parameters
    assert a.aic == pytest.approx(-2.0 * c * b.log_likelihood + 2.0 * k, rel=rel, abs=1e-9 * k)
    assert a.bic == pytest.approx(-2.0 * c * b.log_likelihood + k * math.log(c * b.n_observations), rel=rel,
                                  abs=1e-9 * k * (1.0 + abs(math.log(c))))
    if math.isfinite(b.lr_statistic):
        assert a.lr_statistic == pytest.approx(c * b.lr_statistic, rel=1e-10, abs=1e-10 * c * b.null_deviance)
    assert _rel(a.covariance * c, b.covariance) < 1e-10


def _same_answer(a, b, exact: bool) -> None:
    """Bit-identical coefficients where the scaled problem is the base one, else 1e-12
    relative (1e-10 for the first-order solvers, whose answers are within
    ||Hbar^{-1}|| tol of the optimum along paths that then differ)."""
    theta_a = np.r_[np.ravel(a.intercept), np.ravel(a.coefficients)]
    theta_b = np.r_[np.ravel(b.intercept), np.ravel(b.coefficients)]
    if exact:
        np.testing.assert_array_equal(theta_a, theta_b)
    else:
        assert _rel(theta_a, theta_b) < (1e-12 if a.convergence.solver == "newton" else 1e-10)


@SETTINGS
@given(st.integers(0, 10**6), FACTOR, KIND, st.sampled_from(SOLVERS), st.sampled_from([0.0, 0.5]))
def test_logistic_weight_scale_invariance(seed, c, kind, solver, l2):
    """Weights times c (and l2 times c): the same coefficients, verdict and iteration count;
    the weight-proportional outputs times c, the covariance divided by c."""
    X, y, w = _binary(seed)
    w, c, exact = _scaled(kind, w, c)
    b = lt.logistic(X, y, weights=w, l2=l2, solver=solver, tol=TOL, max_iter=5000)
    a = lt.logistic(X, y, weights=w * c, l2=l2 * c, solver=solver, tol=TOL, max_iter=5000)
    _same_count(a.convergence, b.convergence, exact)
    _same_answer(a, b, exact)
    _weight_proportional(a, b, c)


@SETTINGS
@given(st.integers(0, 10**6), FACTOR, KIND, st.sampled_from(SOLVERS))
def test_softmax_weight_scale_invariance(seed, c, kind, solver):
    """Weights times c: the same softmax coefficients, verdict and iteration count; the
    weight-proportional outputs scale as the mathematics says."""
    X, y, w = _classes(seed)
    w, c, exact = _scaled(kind, w, c)
    b = lt.softmax(X, y, weights=w, solver=solver, tol=TOL, max_iter=5000)
    a = lt.softmax(X, y, weights=w * c, solver=solver, tol=TOL, max_iter=5000)
    _same_count(a.convergence, b.convergence, exact)
    _same_answer(a, b, exact)
    _weight_proportional(a, b, c)


def _source(X, y, w, cuts=(17, 31)):
    edges = [0, *cuts, y.size]
    blocks = [(X[lo:hi], y[lo:hi], w[lo:hi]) for lo, hi in zip(edges, edges[1:])]
    return lambda: iter(blocks)


@SETTINGS
@given(st.integers(0, 10**6), FACTOR, KIND)
def test_logistic_blocks_weight_scale_invariance(seed, c, kind):
    """Block weights times c: the same blocked logistic fit (coefficients, verdict, iteration
    count), the weight-proportional outputs scaled; and it is the in-memory fit."""
    X, y, w = _binary(seed)
    w, c, exact = _scaled(kind, w, c)
    b = _same_refusal(lambda: logistic_blocks(_source(X, y, w)), lambda: logistic_blocks(_source(X, y, w * c)))
    if b is None:  # refused (a row's linear predictor beyond 30 reads as divergence in blocks)
        return
    a = logistic_blocks(_source(X, y, w * c))
    _same_count(a.convergence, b.convergence, False)  # the total weight is a sum of the raw weights
    _same_answer(a, b, False)
    _weight_proportional(a, b, c)
    mem = lt.logistic(X, y, weights=w * c)
    assert _rel(a.coefficients, mem.coefficients) < 1e-10


@SETTINGS
@given(st.integers(0, 10**6), FACTOR, KIND)
def test_softmax_blocks_weight_scale_invariance(seed, c, kind):
    """Block weights times c: the same blocked softmax fit, the weight-proportional outputs scaled."""
    X, y, w = _classes(seed)
    w, c, exact = _scaled(kind, w, c)
    b = _same_refusal(lambda: softmax_blocks(_source(X, y, w)), lambda: softmax_blocks(_source(X, y, w * c)))
    if b is None:  # refused (a row's linear predictor beyond 30 reads as divergence in blocks)
        return
    a = softmax_blocks(_source(X, y, w * c))
    _same_count(a.convergence, b.convergence, False)
    _same_answer(a, b, False)
    _weight_proportional(a, b, c)


def _same_refusal(base, scaled):
    """``base()``; when it refuses the data, ``scaled()`` must refuse them the same way (and
    None is returned): whether a fit is refused does not depend on the scale either."""
    try:
        return base()
    except lt.LintoolsError as exc:
        with pytest.raises(type(exc)):
            scaled()
        return None


def _forecasts(seed: int, n: int = 60):
    rng = np.random.default_rng(seed)
    score = rng.normal(size=n)
    y = (score * rng.uniform(0.5, 2.0) + 0.3 * rng.normal(size=n) + rng.logistic(size=n) > 0).astype(int)
    y[:2] = [0, 1]
    p = np.clip(1.0 / (1.0 + np.exp(-score)), 0.01, 0.99)
    return y, p, score, rng.uniform(0.2, 3.0, n)


@SETTINGS
@given(st.integers(0, 10**6), FACTOR)
def test_calibration_line_weight_scale_invariance(seed, c):
    """Weights times c: the same calibration intercept, slope and in-the-large estimate, the
    same verdicts and iteration counts; the covariance divided by c."""
    y, p, _, w = _forecasts(seed)
    b = lt.calibration_line(y, p, weights=w)
    a = lt.calibration_line(y, p, weights=w * c)
    for fa, fb in ((a.line_fit, b.line_fit), (a.offset_fit, b.offset_fit)):
        _same_count(fa.convergence, fb.convergence, False)
    assert _rel([a.intercept, a.slope, a.in_the_large], [b.intercept, b.slope, b.in_the_large]) < 1e-12
    assert _rel(a.covariance * c, b.covariance) < 1e-10
    assert a.joint_statistic == pytest.approx(c * b.joint_statistic, rel=1e-9, abs=1e-12 * c)


@SETTINGS
@given(st.integers(0, 10**6), FACTOR)
def test_platt_scaling_weight_scale_invariance(seed, c):
    """Weights times c without smoothing: the same Platt map and verdict.  With Platt's
    smoothing the targets count the weighted cases, so the map changes with c; it is then
    the optimum of the documented objective for those targets (its gradient per unit
    weight and standardised score is at the rounding level)."""
    y, _, s, w = _forecasts(seed)
    b = lt.platt_scaling(y, s, weights=w, smoothing=False)
    a = lt.platt_scaling(y, s, weights=w * c, smoothing=False)
    _same_count(a.fit.convergence, b.fit.convergence, False)
    assert _rel([a.slope, a.intercept], [b.slope, b.intercept]) < 1e-12
    m = lt.platt_scaling(y, s, weights=w * c)
    wc = w * c
    n_pos, n_neg = float(wc @ y), float(wc @ (1 - y))
    t = np.where(y == 1, (n_pos + 1) / (n_pos + 2), 1 / (n_neg + 2))
    q = 1.0 / (1.0 + np.exp(-(m.slope * s + m.intercept)))
    r = (wc / wc.sum()) * (q - t)
    centre = float(wc @ s / wc.sum())
    spread = math.sqrt(float(wc @ (s - centre) ** 2 / wc.sum()))
    assert m.fit.convergence.converged
    assert max(abs(r.sum()), abs(r @ (s - centre)) / spread) <= 1e-12


@SETTINGS
@given(st.integers(0, 10**6), FACTOR, st.sampled_from([1, 3]))
def test_temperature_scaling_weight_scale_invariance(seed, c, kind):
    """Weights times c: the same temperature, verdict and iteration count (binary logits or
    a matrix of 3 classes); the log-likelihood times c."""
    y, _, s, w = _forecasts(seed)
    logits = 2.0 * s
    if kind == 3:
        rng = np.random.default_rng(seed)
        logits = np.column_stack([-s, rng.normal(size=s.size), s]) * 1.7
        y = np.where(rng.random(s.size) < 0.2, 1, 2 * y)
    b = _same_refusal(lambda: lt.temperature_scaling(y, logits, weights=w),
                      lambda: lt.temperature_scaling(y, logits, weights=w * c))
    if b is None:
        return
    a = lt.temperature_scaling(y, logits, weights=w * c)
    def record(m):
        return SimpleNamespace(converged=m.converged, iterations=m.iterations, gradient_norm=abs(m.gradient),
                               solver="newton")

    _same_count(record(a), record(b), False, tol=1e-12)  # the default tol of temperature_scaling
    assert a.temperature == pytest.approx(b.temperature, rel=1e-12)
    assert a.log_likelihood == pytest.approx(c * b.log_likelihood, rel=1e-12)


@SETTINGS
@given(st.integers(0, 10**6), st.integers(-1000, 1000), st.sampled_from([1, 3]))
def test_temperature_scaling_logit_scale_invariance(seed, k, kind):
    """Logits times 2**k (k from -1000 to 1000, logits near 1e-300 and 1e300 included): the
    temperature times 2**k exactly, the same verdict, iteration count and log-likelihood,
    bit for bit (softmax(Z / T) depends on Z / T only; the fit works on the logits divided
    by a power of two).  Before: logits near 1e300 overflowed (RuntimeWarning)."""
    y, _, s, w = _forecasts(seed)
    logits = 2.0 * s
    if kind == 3:
        rng = np.random.default_rng(seed)
        logits = np.column_stack([-s, rng.normal(size=s.size), s]) * 1.7
        y = np.where(rng.random(s.size) < 0.2, 1, 2 * y)
    b = _same_refusal(lambda: lt.temperature_scaling(y, logits, weights=w),
                      lambda: lt.temperature_scaling(y, np.ldexp(logits, k), weights=w))
    if b is None:
        return
    a = lt.temperature_scaling(y, np.ldexp(logits, k), weights=w)
    assert a.temperature == math.ldexp(b.temperature, k)
    assert (a.converged, a.iterations, a.gradient, a.log_likelihood) == (b.converged, b.iterations, b.gradient,
                                                                         b.log_likelihood)


@SETTINGS
@given(st.integers(0, 10**6), FACTOR)
def test_isotonic_calibration_weight_scale_invariance(seed, c):
    """Weights times c: the same isotonic points and fitted values."""
    y, p, _, w = _forecasts(seed)
    b = lt.isotonic_calibration(y, p, weights=w)
    a = lt.isotonic_calibration(y, p, weights=w * c)
    np.testing.assert_array_equal(a.points, b.points)
    np.testing.assert_allclose(a.values, b.values, rtol=1e-12, atol=1e-15)


@SETTINGS
@given(st.integers(0, 10**6), st.floats(-100.0, 100.0).map(lambda u: 10.0**u), st.integers(-60, 60),
       st.booleans(), st.sampled_from(SOLVERS), st.sampled_from(["logistic", "softmax"]))
def test_column_scale_gives_the_reparametrised_fit(seed, c, k, power, solver, model):
    """A column times c (any c in [1e-100, 1e100], or a power of two 2^k up to 2^+-60): its
    coefficients divided by c, the others, the intercept and the verdict unchanged; the
    iteration count too (bit for bit for 2^k: the standardised problem is then the same,
    its moments and products taking the same paths)."""
    X, y, w = _binary(seed) if model == "logistic" else _classes(seed)
    if power:
        c = 2.0**k
    fit = getattr(lt, model)
    b = fit(X, y, weights=w, solver=solver, max_iter=5000)
    Xs = X.copy()
    Xs[:, 1] *= c
    a = fit(Xs, y, weights=w, solver=solver, max_iter=5000)
    _same_count(a.convergence, b.convergence, power)
    scale = np.ones_like(np.asarray(b.coefficients, dtype=float))
    scale[1] = c  # compare in the units of the unscaled column
    if power:
        np.testing.assert_array_equal(a.coefficients * scale, b.coefficients)
    bound = 1e-11 if solver == "newton" else 1e-10
    assert _rel(a.coefficients * scale, b.coefficients) < bound
    assert _rel(a.intercept, b.intercept) < bound
    assert _rel(a.standard_errors * scale, b.standard_errors) < 1e-10


@SETTINGS
@given(st.integers(0, 10**6), st.floats(0.0, 12.0).map(lambda u: 10.0**u), st.sampled_from([1.0, -1.0]),
       st.sampled_from(SOLVERS), st.sampled_from(["logistic", "softmax"]))
def test_column_shift_gives_the_reparametrised_fit(seed, shift, sign, solver, model):
    """A constant added to a column (up to 1e12): the slopes unchanged, the intercept moved
    by -shift * slope, the verdict and the iteration count unchanged, at least 10 digits."""
    X, y, w = _binary(seed) if model == "logistic" else _classes(seed)
    shift *= sign
    Xs = X.copy()
    Xs[:, 0] += shift
    exact = Xs.copy()
    exact[:, 0] -= shift  # the column with the shift subtracted (exact where Sterbenz applies)
    fit = getattr(lt, model)
    a = fit(Xs, y, weights=w, solver=solver, max_iter=5000)
    b = fit(exact, y, weights=w, solver=solver, max_iter=5000)
    _same_count(a.convergence, b.convergence, False)
    slope = np.asarray(b.coefficients)[0]
    assert _rel(a.coefficients, b.coefficients) < 1e-10
    assert _rel(np.asarray(a.intercept) + shift * slope, b.intercept) < 1e-10 * max(1.0, abs(shift))
    assert _rel(a.standard_errors, b.standard_errors) < 1e-10


def _standardised(X, w, intercept=True):
    """Weighted centres and spreads of the columns, and the standardised design [1, (X - c) / s]."""
    W = w.sum()
    c = w @ X / W
    s = np.sqrt(w @ (X - c) ** 2 / W)
    return c, s, np.column_stack([np.ones(X.shape[0]), (X - c) / s])


def _z_binary(fit, c, s):
    return np.r_[fit.intercept + c @ fit.coefficients, fit.coefficients * s]


def _hbar_binary(fit, X, w, A):
    mu = fit.mean(X)
    return (A * (w * mu * (1 - mu))[:, None]).T @ A / w.sum()


def _z_softmax(fit, c, s):
    """Free parameters (classes after the first), (p+1, K-1) flattened row by row."""
    B = np.asarray(fit.coefficients)[:, 1:]
    a = np.asarray(fit.intercept)[1:] + c @ B
    return np.vstack([a, B * s[:, None]]).ravel()


def _hbar_softmax(fit, X, w, A):
    P = fit.mean(X)[:, 1:]
    H = 0.0
    for i in range(X.shape[0]):
        Wi = np.diag(P[i]) - np.outer(P[i], P[i])
        H = H + w[i] * np.kron(np.outer(A[i], A[i]), Wi)
    return H / w.sum()


@settings(max_examples=40, deadline=None)
@given(st.integers(0, 10**6), FACTOR, st.floats(-3.0, 3.0).map(lambda u: 10.0**u), st.floats(-8.0, -4.0),
       st.sampled_from(SOLVERS), st.sampled_from(["logistic", "softmax"]))
def test_a_converged_fit_keeps_the_promise_of_tol(seed, c, col, log_tol, solver, model):
    """Whatever the scale of the weights (c) and of a column (col): a fit that says
    converged=True at tol has standardised coefficients within ||Hbar^{-1}||_inf * tol of
    the optimum (a Newton fit at tol 1e-15), with a factor 2 of room for the first-order
    argument."""
    X, y, w = _binary(seed) if model == "logistic" else _classes(seed)
    X = X.copy()
    X[:, 1] *= col
    w = w * c
    tol = 10.0**log_tol
    fit = getattr(lt, model)
    loose = fit(X, y, weights=w, solver=solver, tol=tol, max_iter=50_000)
    exact = fit(X, y, weights=w, solver="newton", tol=1e-15)
    centre, spread, A = _standardised(X, w)
    z, hbar = (_z_binary, _hbar_binary) if model == "logistic" else (_z_softmax, _hbar_softmax)
    H = hbar(exact, X, w, A)
    bound = float(np.max(np.sum(np.abs(np.linalg.inv(H)), axis=1))) * tol
    assert loose.convergence.converged  # the iteration limit is ample for these problems
    assert loose.convergence.gradient_norm <= tol
    gap = float(np.max(np.abs(z(loose, centre, spread) - z(exact, centre, spread))))
    assert gap <= 2.0 * bound + 1e-12, (gap, bound)
