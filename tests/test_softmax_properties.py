"""Softmax regression: invariants, extremes, separation, model files, cross-checks.

Sources: the invariances of the multinomial likelihood (common practice: relabelling,
shared shifts, case weights as repeated rows); mpmath at 50 digits for the loss at
extreme linear predictors; central finite differences (common practice) for the loss
derivatives; the LP characterisation of Albert & Anderson (1984) for separation, checked
on data built to be separated; scikit-learn's multinomial LogisticRegression (l2 = 1/C)
for the implied penalty; a hand computation of the Wald statistic d' V^-1 d.
"""

import os
import sys
import tempfile

import mpmath
import numpy as np
import pytest
from hypothesis import assume, given, settings
from hypothesis import strategies as st
from sklearn.datasets import load_wine
from sklearn.linear_model import LogisticRegression

import lintools as lt
from lintools import SeparationError, softmax
from lintools.engine.multinomial import MultinomialLoss, softmax_parts
from lintools.exchange.pmml import read_pmml, write_pmml

mpmath.mp.dps = 50


def _data(seed, n=60, p=2, K=3):
    rng = np.random.default_rng(seed)
    X = rng.normal(size=(n, p))
    B = rng.normal(size=(p, K))
    P = softmax_parts(X @ B)[0]
    y = np.array([rng.choice(K, p=row) for row in P])
    y[:K] = np.arange(K)  # every class present
    return X, y


@settings(max_examples=25, deadline=None)
@given(st.integers(0, 10_000), st.permutations(list(range(3))))
def test_relabelling_permutes_the_columns_and_nothing_else(seed, perm):
    # source: invariance of the likelihood under renaming the classes (common practice)
    X, y = _data(seed)
    names = np.array(["k0", "k1", "k2"])
    a = softmax(X, names[y], reference=None, l2=0.5)
    relabelled = np.array(["k0", "k1", "k2"])[np.array(perm)][y]
    b = softmax(X, relabelled, reference=None, l2=0.5)
    # class label L of b is class perm^-1(L) of a
    where = [b.classes.index(f"k{perm[j]}") for j in range(3)]
    np.testing.assert_allclose(b.coefficients[:, where], a.coefficients, atol=1e-10)
    np.testing.assert_allclose(b.mean(X)[:, where], a.mean(X), atol=1e-12)
    assert b.log_likelihood == pytest.approx(a.log_likelihood, rel=1e-12)


@settings(max_examples=25, deadline=None)
@given(st.integers(0, 10_000), st.floats(-50, 50))
def test_shared_shift_changes_no_probability(seed, shift):
    # source: softmax(eta + c 1) = softmax(eta) (common practice)
    X, y = _data(seed)
    f = softmax(X, y, reference=None, l2=1.0)
    v = np.random.default_rng(seed).normal(size=X.shape[1]) * shift
    E1 = X @ f.coefficients + f.intercept
    E2 = X @ (f.coefficients + v[:, None]) + (f.intercept + shift)
    np.testing.assert_allclose(f._mean_from(E2), f._mean_from(E1), atol=1e-13)
    P = f.mean(X)
    assert np.max(np.abs(P.sum(axis=1) - 1.0)) <= 2.3e-16 * 3


@settings(max_examples=20, deadline=None)
@given(st.integers(0, 10_000))
def test_duplicated_rows_equal_weight_two_and_row_order(seed):
    # source: case weights count repeated rows (common practice)
    X, y = _data(seed, n=40)
    # small random draws can be quasi-separated (then no estimate exists): those are filtered
    assume(lt.check_separation(X, y).kind == "none")
    rng = np.random.default_rng(seed)
    dup = rng.random(40) < 0.3
    w = np.where(dup, 2.0, 1.0)
    a = softmax(X, y, weights=w)
    Xd = np.vstack([X, X[dup]])
    yd = np.concatenate([y, y[dup]])
    b = softmax(Xd, yd)
    np.testing.assert_allclose(a.coefficients, b.coefficients, atol=1e-9)
    np.testing.assert_allclose(a.standard_errors, b.standard_errors, atol=1e-9)
    order = rng.permutation(40)
    c = softmax(X[order], y[order], weights=w[order])
    np.testing.assert_allclose(c.coefficients, a.coefficients, atol=1e-10)


def test_column_scaling_scales_the_coefficients():
    # source: equivariance of the linear predictor (common practice)
    X, y = _data(7, n=80, p=3)
    s = np.array([1e-3, 10.0, 1e4])
    a = softmax(X, y)
    b = softmax(X * s, y)
    np.testing.assert_allclose(b.coefficients * s[:, None], a.coefficients, rtol=1e-9, atol=1e-12)
    np.testing.assert_allclose(b.standard_errors * s[:, None], a.standard_errors, rtol=1e-9, atol=1e-12)


def test_loss_derivatives_match_finite_differences():
    # source: central finite differences (common practice)
    rng = np.random.default_rng(5)
    n, K = 15, 4
    codes = rng.integers(0, K, n)
    w = rng.random(n) + 0.5
    for reference in (True, False):
        L = MultinomialLoss(codes, K, w, reference)
        eta = rng.normal(size=(n, L.outputs))
        h = 1e-6
        g = L.gradient(eta)
        W = L.curvature(eta)
        for i in (0, 7):
            for k in range(L.outputs):
                e = np.zeros_like(eta)
                e[i, k] = h
                assert (L.value(eta + e) - L.value(eta - e)) / (2 * h) == pytest.approx(g[i, k], abs=1e-8)
                np.testing.assert_allclose((L.gradient(eta + e) - L.gradient(eta - e))[i] / (2 * h), W[i, k], atol=1e-8)
        u = rng.normal(size=eta.shape)
        np.testing.assert_allclose(L.hessian_vector(eta, u), np.einsum("ikm,im->ik", W, u), atol=1e-14)
        d = rng.normal(size=eta.shape) * 1e-7
        exact = sum(float(w[i]) * float(_mp_term(eta[i] + d[i], codes[i], reference) - _mp_term(eta[i], codes[i], reference))
                    for i in range(n))
        assert L.value_change(eta, d) == pytest.approx(exact, rel=1e-9)


def _mp_term(row, code, reference):
    vals = [mpmath.mpf(0)] + [mpmath.mpf(float(v)) for v in row] if reference else [mpmath.mpf(float(v)) for v in row]
    # shifted by the maximum and written with log1p of the other terms, so that 50 digits
    # suffice whatever the size of the entries
    top = max(vals)
    j = vals.index(top)
    rest = mpmath.fsum(mpmath.exp(v - top) for i, v in enumerate(vals) if i != j)
    return mpmath.log1p(rest) + (top - vals[code])


@pytest.mark.parametrize("scale", [1.0, 40.0, 1e3, 1e300])
def test_extreme_linear_predictors_stay_finite_and_accurate(scale):
    # source: mpmath at 50 digits (log-likelihood terms and probabilities)
    rng = np.random.default_rng(11)
    E = rng.choice([-1.0, 0.3, 1.0], size=(6, 4)) * scale
    E[0] = [scale, -scale, 0.0, 0.5 * scale]
    codes = np.array([0, 1, 2, 3, 0, 1])
    L = MultinomialLoss(codes, 4, None, reference=False)
    P, Q, _ = softmax_parts(E)
    assert np.all(np.isfinite(P)) and np.all(np.isfinite(Q))
    terms = L._terms(E)
    assert np.all(np.isfinite(terms)) and np.isfinite(L.value(E))
    assert np.all(np.isfinite(L.gradient(E))) and np.all(np.isfinite(L.curvature(E)))
    for i in range(6):
        exact = _mp_term(E[i], codes[i], False)
        assert float(terms[i]) == pytest.approx(float(exact), rel=1e-14, abs=1e-300)
        ex = [mpmath.exp(mpmath.mpf(float(v)) - mpmath.mpf(float(E[i].max()))) for v in E[i]]
        total = mpmath.fsum(ex)
        for k in range(4):
            others = mpmath.fsum(e for j, e in enumerate(ex) if j != k)
            assert P[i, k] == pytest.approx(float(ex[k] / total), rel=1e-14, abs=1e-300)
            assert Q[i, k] == pytest.approx(float(others / total), rel=1e-14, abs=1e-300)


def _separated(kind):
    x = np.linspace(-3, 3, 30)
    X = np.column_stack([x, np.cos(7 * x)])
    if kind == "complete":
        y = np.where(x < -1, "a", np.where(x < 1, "b", "c"))
    else:  # classes a and b overlap; c alone beyond x = 2
        y = np.where(np.sin(5 * x) > 0, "a", "b")
        y[x > 2] = "c"
    return X, y


@pytest.mark.parametrize("kind", ["complete", "quasi-complete"])
def test_separation_is_detected_exactly_and_the_fit_refuses(kind):
    # source: data built to be separated (Albert & Anderson 1984 definitions)
    X, y = _separated(kind)
    check = lt.check_separation(X, y)
    assert isinstance(check, lt.MultinomialSeparationCheck) and check.kind == kind
    if kind == "quasi-complete":
        assert check.separated_classes == ("c",) and set(check.rows) == set(np.flatnonzero(X[:, 0] > 2))
    with pytest.raises(SeparationError) as info:
        softmax(X, y)
    assert f"{kind} separation" in str(info.value) and "l2 > 0" in str(info.value)
    assert info.value.diagnosis.kind == kind
    # the remedy works: a ridge gives a finite, converged fit
    assert softmax(X, y, l2=1.0).convergence.converged


def test_separation_without_scipy_reports_the_divergence(monkeypatch):
    # source: issue requirement (without SciPy the divergence itself is reported)
    module = sys.modules["lintools.models.softmax"]
    monkeypatch.setattr(module, "_exact_check", lambda *a: None)
    X, y = _separated("complete")
    for solver in ("newton", "lbfgs"):
        with pytest.raises(SeparationError, match="SciPy"):
            softmax(X, y, solver=solver, max_iter=500)


@settings(max_examples=20, deadline=None)
@given(st.integers(0, 10_000))
def test_random_overlapping_classes_are_not_separated(seed):
    # source: with many rows of every class scattered over the same region no direction
    # separates them (Albert & Anderson 1984); the exact check must say "none"
    rng = np.random.default_rng(seed)
    X = rng.normal(size=(90, 2))
    y = np.tile(np.arange(3), 30)
    check = lt.check_separation(X, y)
    assert check.kind == "none" and not check.separated


def test_model_files_round_trip():
    # source: our JSON schema and PMML 4.4 (an open standard of the Data Mining Group)
    X, y = _data(3, n=100, p=3)
    f = softmax(X, np.array(["p", "q", "r"])[y], names=["a", "b", "c"])
    with tempfile.TemporaryDirectory() as d:
        lt.save(f, os.path.join(d, "m.json"))
        g = lt.load(os.path.join(d, "m.json"))
        assert type(g) is lt.SoftmaxFit and g.classes == f.classes and g.reference_class == "p"
        np.testing.assert_array_equal(g.covariance, f.covariance)
        np.testing.assert_array_equal(g.mean(X), f.mean(X))
        write_pmml(f, os.path.join(d, "m.pmml"))
        m = read_pmml(os.path.join(d, "m.pmml"))
    assert m.kind == "softmax" and m.classes == f.classes
    np.testing.assert_array_equal(m.coefficients, f.coefficients)
    np.testing.assert_array_equal(m.intercept, f.intercept)


def test_compare_coefficients_matches_a_hand_computation():
    # source: hand computation of the Wald statistic d' V^-1 d on the free parameters
    X, y = _data(21, n=150, p=2)
    f = softmax(X, y)
    rng = np.random.default_rng(0)
    B = f.coefficients + rng.normal(size=f.coefficients.shape) * 0.05
    b = f.intercept + rng.normal(size=3) * 0.05
    c = lt.compare_coefficients(f, B, b, X=X, y=y)
    # free parameters relative to the reference class 0, class-major
    Bd, bd = B - B[:, [0]], b - b[0]
    d = np.concatenate([[bd[1] - f.intercept[1]], Bd[:, 1] - f.coefficients[:, 1],
                        [bd[2] - f.intercept[2]], Bd[:, 2] - f.coefficients[:, 2]])
    wald = float(d @ np.linalg.solve(f.covariance, d))
    assert c.wald_statistic == pytest.approx(wald, rel=1e-10)
    assert c.wald_degrees_of_freedom == 6
    Pd = f._mean_from(X @ B + b)
    assert c.max_abs_prediction_difference == pytest.approx(np.max(np.abs(Pd - f.mean(X))), rel=1e-12)
    # delivered = refit gives zero statistics
    same = lt.compare_coefficients(f, f.coefficients, f.intercept, X=X, y=y)
    assert same.wald_statistic < 1e-20 and same.score_statistic < 1e-12


def test_implied_l2_recovers_the_penalty_from_both_references():
    # source: lintools' own symmetric ridge fit and scikit-learn's multinomial
    # LogisticRegression with l2 = 1/C on its wine data (issue: to 1e-6)
    X, y = load_wine(return_X_y=True)
    X = (X - X.mean(0)) / X.std(0)
    ours = softmax(X, y, l2=3.0, reference=None)
    got = lt.implied_l2(X, y, ours.coefficients, ours.intercept, model="softmax")
    assert got.l2 == pytest.approx(3.0, rel=1e-9) and got.residual < 1e-8
    sk = LogisticRegression(C=1 / 3.0, tol=1e-14, max_iter=1000, solver="newton-cholesky").fit(X, y)
    got = lt.implied_l2(X, y, sk.coef_.T, sk.intercept_, model="softmax")
    assert got.l2 == pytest.approx(3.0, rel=1e-6) and got.residual < 1e-6


@pytest.mark.parametrize("scale", [1e150, 1e-150])
@pytest.mark.parametrize("solver", ["newton", "lbfgs"])
def test_features_of_extreme_size_scale_the_coefficients(scale, solver):
    # source: exact algebra -- the likelihood depends on X B only, so B(s X) = B(X) / s
    # (common practice); the scale-free stopping rule decides convergence the same way
    X, y = _data(13, n=120, p=2)
    base = softmax(X, y, solver=solver, max_iter=2000)
    f = softmax(X * scale, y, solver=solver, max_iter=2000)
    assert f.convergence.converged == base.convergence.converged
    np.testing.assert_allclose(f.coefficients * scale, base.coefficients, rtol=1e-8, atol=1e-12)
    np.testing.assert_allclose(f.standard_errors * scale, base.standard_errors, rtol=1e-8, atol=1e-12)
    assert np.all(np.isfinite(f.mean(X * scale)))
