"""The generic solvers: problem derivatives, stopping rule, line search, (n, K) outputs.

Sources: central finite differences (common practice) for derivatives; statsmodels' Logit
and multinomial logit (its anes96 data) as oracles for the optima; the strong Wolfe
conditions as stated by Nocedal & Wright (2006), eq. 3.7.
"""

from dataclasses import replace

import numpy as np
import pytest
import statsmodels.api as sm

from lintools import IterationLimitWarning, logistic
from lintools.engine.losses import BinomialLoss
from lintools.engine import IterationRecord, LinearModelProblem, SOLVERS, solve
from lintools.engine.lbfgs import C1, C2, wolfe_search
from lintools.engine.settings import EXACT_PATH, fast_paths, using


def _fd_check(P, z, h=1e-6):
    ev = P.evaluate(z)
    g = np.zeros(P.size)
    Hn = np.zeros((P.size, P.size))
    for j in range(P.size):
        e = np.zeros(P.size)
        e[j] = h
        up, dn = P.evaluate(z + e), P.evaluate(z - e)
        g[j] = (up.value - dn.value) / (2 * h)
        Hn[:, j] = (up.gradient - dn.gradient) / (2 * h)
    return ev, g, Hn


@pytest.mark.parametrize("intercept,l2,firth", [(True, 0.0, False), (False, 0.3, False), (True, 1.5, False), (True, 0.0, True)])
def test_gradient_and_hessian_match_finite_differences(intercept, l2, firth):
    # source: central finite differences (common practice)
    rng = np.random.default_rng(2)
    X = rng.normal(size=(40, 3)) * [1.0, 8.0, 0.2] + [0.0, 3.0, -1.0]
    m = rng.integers(1, 6, 40).astype(float)
    y = np.floor(rng.random(40) * (m + 1))
    P = LinearModelProblem(X, BinomialLoss(y, m, rng.random(40) + 0.5), intercept=intercept, l2=l2,
                           offset=rng.normal(size=40) * 0.3, firth=firth)
    z = rng.normal(size=P.size) * 0.3
    ev, g, Hn = _fd_check(P, z)
    np.testing.assert_allclose(ev.gradient, g, rtol=1e-6, atol=1e-6)
    np.testing.assert_allclose(P.hessian(z), Hn, rtol=1e-5, atol=1e-5)
    # the original-coordinate gradient is the chain rule of the z gradient: g_z = T' g_theta
    T = P.theta_from_z_matrix()
    np.testing.assert_allclose(T.T @ ev.original_gradient, ev.gradient, rtol=1e-12, atol=1e-12)
    if not firth:
        v = rng.normal(size=P.size)
        np.testing.assert_allclose(P.hessian_vector(z, v), P.hessian(z) @ v, rtol=1e-11, atol=1e-11)
    # line changes and slopes agree with differences of evaluations
    d = -ev.gradient
    line = P.line(z, d)
    for t in (1e-3, 0.2):
        c, s = line.change_and_slope(t)
        at = P.evaluate(z + t * d)
        assert c == pytest.approx(at.value - ev.value, rel=1e-9, abs=1e-12)
        assert s == pytest.approx(float(at.gradient @ d), rel=1e-9, abs=1e-12)


def _spector():
    d = sm.datasets.spector.load_pandas()
    return d.exog.to_numpy(float), d.endog.to_numpy(float)


@pytest.mark.parametrize("method", SOLVERS)
def test_stopping_rule_is_on_the_scale_free_gradient_at_the_answer(method):
    # source: statsmodels Logit for the optimum; the gradient is recomputed here with NumPy
    X, y = _spector()
    records = []
    fit = logistic(X, y, solver=method, tol=3e-11, max_iter=5000, on_iteration=records.append)
    ref = sm.Logit(y, sm.add_constant(X)).fit(disp=0, tol=1e-13, method="newton")
    eta = fit.intercept + X @ fit.coefficients
    mu = 1 / (1 + np.exp(-eta))
    # the stopping rule is scale-free: the gradient per unit of total weight (32 rows) with
    # respect to the intercept and the coefficients of the standardised, centred columns
    grad = np.concatenate([[np.sum(mu - y)], (X - X.mean(axis=0)).T @ (mu - y) / X.std(axis=0)]) / len(y)
    assert fit.convergence.converged
    # equal up to the rounding of the sums (about 1e-16 here, common practice)
    assert fit.convergence.gradient_norm == pytest.approx(np.max(np.abs(grad)), abs=1e-15)
    assert fit.convergence.gradient_norm <= 3e-11
    np.testing.assert_allclose(np.r_[fit.intercept, fit.coefficients], ref.params, rtol=1e-7)
    assert [r.iteration for r in records] == list(range(1, fit.convergence.iterations + 1))
    assert all(isinstance(r, IterationRecord) for r in records)
    assert records[-1].gradient_norm == pytest.approx(fit.convergence.gradient_norm)
    with pytest.raises(AttributeError):
        records[0].objective = 0.0  # frozen
    if method == "newton":  # step halving never lets the objective rise
        assert all(b.objective <= a.objective + 1e-12 for a, b in zip(records, records[1:]))


@pytest.mark.parametrize("method", SOLVERS)
def test_iteration_limit_is_never_presented_as_converged(method):
    # source: common practice (an honest convergence record)
    X, y = _spector()
    with pytest.warns(IterationLimitWarning, match="NOT converged"):
        fit = logistic(X, y, solver=method, max_iter=2)
    assert not fit.convergence.converged and fit.convergence.iterations == 2
    assert fit.convergence.gradient_norm > 1e-10
    assert "iteration limit" in fit.convergence.message


def test_strong_wolfe_conditions_hold_at_the_accepted_step():
    # source: Nocedal & Wright (2006) eq. 3.7, checked with direct evaluations
    X, y = _spector()
    P = LinearModelProblem(X, BinomialLoss(y))
    rng = np.random.default_rng(0)
    for _ in range(10):
        z = rng.normal(size=P.size)
        ev = P.evaluate(z)
        d = -ev.gradient * rng.uniform(0.01, 3)
        g0 = float(ev.gradient @ d)
        t, change, ok = wolfe_search(P.line(z, d), g0, 1.0)
        at = P.evaluate(z + t * d)
        assert ok
        assert at.value - ev.value <= C1 * t * g0 + 1e-12 * abs(ev.value)
        assert abs(float(at.gradient @ d)) <= C2 * abs(g0) * (1 + 1e-9)
        assert change == pytest.approx(at.value - ev.value, rel=1e-8, abs=1e-12)


@pytest.mark.parametrize("method", SOLVERS)
def test_badly_scaled_columns_give_the_same_model(method):
    # source: common practice (equivariance: scaling a column divides its coefficient)
    X, y = _spector()
    scale = np.array([1e4, 1e-3, 1.0])
    a = logistic(X, y, solver=method, tol=1e-8, max_iter=20000)
    b = logistic(X * scale, y, solver=method, tol=1e-8, max_iter=20000)
    assert b.convergence.converged
    np.testing.assert_allclose(b.coefficients * scale, a.coefficients, rtol=1e-6)
    assert b.intercept == pytest.approx(a.intercept, rel=1e-6)


class _Multinomial:
    """Test-only multinomial loss (first class as reference): exercises the (n, K) path."""

    row_subsets = row_blocks = closed_null = False  # declared capabilities: none

    def __init__(self, codes, K):
        self.Y = np.eye(K)[codes][:, 1:]
        self.outputs = K - 1
        self.w = np.ones(codes.size)

    def row_weights(self):
        return self.w

    def start_intercept(self, offset=None):
        freq = self.Y.mean(0)
        return np.log(freq / (1 - self.Y.sum(1)).mean())

    def _probs(self, eta):
        full = np.column_stack([np.zeros(eta.shape[0]), eta])
        full -= full.max(1, keepdims=True)
        e = np.exp(full)
        return (e / e.sum(1, keepdims=True))[:, 1:]

    def value(self, eta):
        full = np.column_stack([np.zeros(eta.shape[0]), eta])
        mx = full.max(1)
        lse = mx + np.log(np.exp(full - mx[:, None]).sum(1))
        return float(np.sum(lse - np.sum(self.Y * eta, 1)))

    def value_change(self, eta, delta):
        # lse(a + d) - lse(a) = log1p(sum_k softmax(a)_k expm1(d_k)), reference class d_0 = 0
        P = self._probs(eta)
        return float(np.sum(np.log1p(np.sum(P * np.expm1(delta), 1)) - np.sum(self.Y * delta, 1)))

    def gradient(self, eta):
        return self._probs(eta) - self.Y

    def value_and_gradient(self, eta):
        return self.value(eta), self.gradient(eta)

    def curvature(self, eta):
        P = self._probs(eta)
        return P[:, :, None] * np.eye(P.shape[1])[None] - P[:, :, None] * P[:, None, :]

    def hessian_vector(self, eta, u):
        P = self._probs(eta)
        Pu = P * u
        return Pu - P * Pu.sum(1, keepdims=True)


def test_multioutput_problem_derivatives_and_all_solvers_match_statsmodels_multinomial():
    # source: statsmodels multinomial logit (MNLogit) on its shipped anes96 data; central
    # finite differences (common practice) for the (n, K) gradient and Hessian
    d = sm.datasets.anes96.load_pandas()
    X = d.exog.to_numpy(float)
    codes = d.endog.to_numpy().astype(int)
    loss = _Multinomial(codes, 7)
    P = LinearModelProblem(X, loss)
    z = np.random.default_rng(1).normal(size=P.size) * 0.05
    ev, g, Hn = _fd_check(P, z, h=1e-5)
    np.testing.assert_allclose(ev.gradient, g, rtol=1e-5, atol=1e-5)
    np.testing.assert_allclose(P.hessian(z), Hn, rtol=1e-4, atol=1e-4)
    v = np.arange(P.size, dtype=float)
    np.testing.assert_allclose(P.hessian_vector(z, v), P.hessian(z) @ v, rtol=1e-10, atol=1e-9)
    ref = sm.MNLogit(codes, sm.add_constant(X)).fit(disp=0, method="newton", tol=1e-12, maxiter=100)
    expected = np.asarray(ref.params)  # (p + 1, K - 1), intercept row first
    # tols per unit weight (944 rows): those of the gradient sums 1e-8, 1e-6, 1e-5 before
    for method, tol, iters in (("newton", 1e-11, 100), ("lbfgs", 1e-9, 20000), ("gradient", 1e-8, 200000)):
        res = solve(P, method, tol=tol, max_iter=iters)
        assert res.converged, res.message
        got = P.to_original(res.z).reshape(6, 6)
        np.testing.assert_allclose(got, expected, rtol=1e-5, atol=1e-6)
    res = solve(P, "newton", tol=1e-11, max_iter=100)
    np.testing.assert_allclose(P.to_original(res.z).reshape(6, 6), expected, rtol=1e-8, atol=1e-10)


def test_newton_sketch_reaches_the_exact_newton_optimum(monkeypatch):
    # source: the exact-Hessian Newton fit on the same data (the sketch only changes the
    # path: Pilanci & Wainwright 2017); the covariance is always the exact one
    from lintools import softmax

    rng = np.random.default_rng(8)
    n = 60_000
    X = rng.normal(size=(n, 3)) * [1.0, 3.0, 0.2]
    yb = rng.random(n) < 1 / (1 + np.exp(-(X @ [0.5, -0.3, 2.0] + 0.2)))
    yk = np.digitize(X[:, 0] + rng.logistic(size=n), [-1.0, 1.0])
    calls = []
    real = LinearModelProblem.sketch_hessian
    monkeypatch.setattr(LinearModelProblem, "sketch_hessian",
                        lambda self, z, E=None: calls.append(1) or real(self, z, E))
    sketched = [logistic(X, yb), softmax(X, yk)]
    assert len(calls) >= 2  # it was used by both fits
    calls.clear()
    with using(replace(fast_paths(), sketch_until=np.inf)):
        exact = [logistic(X, yb), softmax(X, yk)]
    assert not calls
    for a, b in zip(sketched, exact):
        assert a.convergence.converged and b.convergence.converged
        np.testing.assert_allclose(a.coefficients, b.coefficients, rtol=1e-9, atol=1e-12)
        np.testing.assert_allclose(a.standard_errors, b.standard_errors, rtol=1e-9, atol=1e-12)


def _large_data():
    rng = np.random.default_rng(21)
    n = 60_000
    X = rng.normal(size=(n, 4)) * [1.0, 3.0, 0.2, 50.0] + [0.0, 5.0, -1.0, 1e3]
    yb = rng.random(n) < 1 / (1 + np.exp(-(X @ [0.5, -0.3, 2.0, 0.01] - 9.5)))
    yk = np.digitize(X[:, 0] + 0.4 * X[:, 1] + rng.logistic(size=n), [1.0, 3.0])
    return X, yb, yk


def test_float32_steps_reach_the_float64_optimum_and_covariance(monkeypatch):
    # source: the exact float64-Hessian Newton fit on the same data (float32 step
    # Hessians, the warm start and Hessian reuse change only the path: the stopping test
    # is on the float64 gradient, and the covariance is always formed in float64)
    from lintools import softmax

    X, yb, yk = _large_data()
    used = []
    real = LinearModelProblem._information_one
    monkeypatch.setattr(LinearModelProblem, "_information_one",
                        lambda self, W, single: used.append(single) or real(self, W, single))
    fast = [logistic(X, yb, tol=1e-13), softmax(X, yk, tol=1e-13)]
    assert any(used) and not used[-1]  # float32 steps were taken; the covariance is float64
    used.clear()
    with using(EXACT_PATH):
        exact = [logistic(X, yb, tol=1e-13), softmax(X, yk, tol=1e-13)]
    assert not any(used)
    for a, b in zip(fast, exact):
        assert a.convergence.converged and b.convergence.converged
        assert a.convergence.gradient_norm <= 1e-13
        np.testing.assert_allclose(a.coefficients, b.coefficients, rtol=1e-10, atol=1e-13)
        np.testing.assert_allclose(a.covariance, b.covariance, rtol=1e-12, atol=1e-12 * np.abs(b.covariance).max())
        assert abs(a.log_likelihood - b.log_likelihood) <= 1e-12 * abs(b.log_likelihood)


def test_float32_steps_are_refused_for_an_ill_conditioned_design(monkeypatch):
    # source: scikit-learn's copy of the Wisconsin breast-cancer data (UCI), whose columns
    # are nearly collinear (radius, perimeter, area); the test of conditioning must send
    # the steps back to float64, and the fit must equal the float64 one
    from sklearn.datasets import load_breast_cancer

    data = load_breast_cancer()
    X, y = data.data, data.target
    seen = []
    real = LinearModelProblem.step_hessian
    monkeypatch.setattr(LinearModelProblem, "step_hessian",
                        lambda self, z, E=None: (seen.append(self.single), real(self, z, E), seen.append(self.single))[1])
    with using(replace(fast_paths(), single_min_rows=0)):
        fast = logistic(X, y, l2=1.0, tol=1e-12)
    assert seen[0] is True and seen[-1] is False  # tried float32, refused it for good
    with using(EXACT_PATH):
        exact = logistic(X, y, l2=1.0, tol=1e-12)
    np.testing.assert_allclose(fast.coefficients, exact.coefficients, rtol=1e-9, atol=1e-12)
    np.testing.assert_allclose(fast.covariance, exact.covariance, rtol=1e-11, atol=1e-14)


def test_reported_evaluation_is_fresh_after_carried_linear_predictors():
    # source: the definition (the answer's objective and gradient are those of X beta + b
    # formed anew, not of the line search's eta + t X d; common practice)
    X, yb, _ = _large_data()
    P = LinearModelProblem(X, BinomialLoss(yb.astype(float)))
    res = solve(P, "newton", tol=1e-13, max_iter=50)
    assert res.converged and res.evaluation is not None and res.evaluation.fresh
    Q = LinearModelProblem(X, BinomialLoss(yb.astype(float)))
    ev = Q.evaluate(res.z)
    assert ev.value == res.evaluation.value and ev.gradient_norm == res.evaluation.gradient_norm
    np.testing.assert_array_equal(ev.original_gradient, res.evaluation.original_gradient)


def test_constant_column_is_found_on_a_large_design_without_a_full_scan():
    # source: common practice (a column constant on the rows used is aliased with the
    # intercept); 0.1 is not a binary fraction, so its weighted mean is not exactly 0.1
    from lintools import InputError

    X, yb, _ = _large_data()
    Xc = np.column_stack([X, np.full(X.shape[0], 0.1)])
    w = np.ones(X.shape[0])
    Xc[:7, 4] = 5.0  # differs only on rows of weight zero
    w[:7] = 0.0
    with pytest.raises(InputError, match=r"column 4 \('x5'\) is constant"):
        logistic(Xc, yb, weights=w)


def test_row_samples_are_runs_that_see_periodic_data_whole(monkeypatch):
    # source: the exact-path Newton fit on the same data. A design of 16 runs repeated in
    # order would make a sample of every 16th row a single run (Cochran 1977, ch. 8, on
    # periodic populations); the random runs of consecutive rows (a cluster sample,
    # Cochran ch. 9) cover every run, and the fit equals the exact path
    from lintools.engine import SAMPLE_RUN, sample_rows, take_rows

    rng = np.random.default_rng(31)
    runs = np.array([[a, b, c, d] for a in (-1, 1) for b in (-1, 1) for c in (-1, 1) for d in (-1, 1)], float)
    reps = 4000
    X = np.tile(runs, (reps, 1)) + 0.01 * rng.normal(size=(16 * reps, 4))
    y = rng.random(16 * reps) < 1 / (1 + np.exp(-(X @ [0.8, -0.5, 0.3, 0.0] + 0.1)))
    rows = sample_rows(X.shape[0], X.shape[0] // 16, seed=5)
    assert rows.size >= X.shape[0] // 16 and rows.size % SAMPLE_RUN == 0
    assert np.all(np.diff(rows) > 0) and rows[-1] < X.shape[0]
    assert len(np.unique(rows % 16)) == 16  # every run of the design is in the sample
    np.testing.assert_array_equal(take_rows(X, rows), X[rows])
    np.testing.assert_array_equal(take_rows(np.asfortranarray(X), rows), X[rows])
    odd = np.arange(SAMPLE_RUN) + 5  # a run that is not aligned: plain indexing
    np.testing.assert_array_equal(take_rows(X, odd), X[odd])
    fast = logistic(X, y, tol=1e-14)
    with using(EXACT_PATH):
        exact = logistic(X, y, tol=1e-14)
    assert fast.convergence.converged and exact.convergence.converged
    np.testing.assert_allclose(fast.coefficients, exact.coefficients, rtol=1e-10, atol=1e-12)
    np.testing.assert_allclose(fast.standard_errors, exact.standard_errors, rtol=1e-10)


def test_deferred_objective_equals_the_loss_value():
    # source: the definition F = loss(eta) + l2/2 |beta|^2 (common practice): the value an
    # evaluation forms on first use is the one an eager computation gives
    rng = np.random.default_rng(32)
    X = rng.normal(size=(200, 3))
    y = (rng.random(200) < 0.4).astype(float)
    P = LinearModelProblem(X, BinomialLoss(y), l2=0.7)
    z = rng.normal(size=4) * 0.3
    ev = P.evaluate(z)
    assert callable(ev.objective)
    b, beta = P.coefficients(z)
    eta = X @ beta + b
    want = float(np.sum(np.logaddexp(0.0, eta) - y * eta)) + 0.35 * float(beta @ beta)
    assert abs(ev.value - want) <= 1e-13 * abs(want)
    assert ev.objective == ev.value  # formed once, then kept


def test_the_exact_path_takes_no_shortcut(monkeypatch):
    """Invariant: under EXACT_PATH no shortcut runs (no float32 step Hessian, no warm
    start, no sketch, no reused Hessian, no carried linear predictor), and every field of
    FastPaths is set to its off value there (a new shortcut must say how it is off)."""
    from dataclasses import fields

    off = {"single_min_rows": np.inf, "warm_min_rows": np.inf, "sketch_min_rows": np.inf,
           "sketch_until": np.inf, "reuse_ratio": 0.0, "carry_above": np.inf}
    assert {f.name for f in fields(EXACT_PATH)} == set(off)
    assert {f.name: getattr(EXACT_PATH, f.name) for f in fields(EXACT_PATH)} == off
    X, yb, _ = _large_data()
    taken = []
    for name in ("sketch_hessian", "warm_start"):  # record the calls that returned a shortcut
        real = getattr(LinearModelProblem, name)

        def spy(self, *a, _n=name, _r=real, **k):
            out = _r(self, *a, **k)
            if out is not None:
                taken.append(_n)
            return out

        monkeypatch.setattr(LinearModelProblem, name, spy)
    real_info = LinearModelProblem._information_one
    monkeypatch.setattr(LinearModelProblem, "_information_one",
                        lambda self, W, single: (single and taken.append("float32"), real_info(self, W, single))[1])
    fast = logistic(X, yb, tol=1e-13)
    assert {"sketch_hessian", "float32", "warm_start"} <= set(taken)  # the default path takes them here
    taken.clear()
    with using(EXACT_PATH):
        exact = logistic(X, yb, tol=1e-13)
    assert not taken and exact.convergence.converged
    np.testing.assert_allclose(fast.coefficients, exact.coefficients, rtol=1e-10, atol=1e-13)
