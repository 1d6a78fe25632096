"""Softmax: the blocked passes give the unblocked results, and a large fit stays small.

Sources: exact rational arithmetic (fractions.Fraction) for the sums of the curvature
pass; mpmath at 50 digits for the per-row curvature blocks, the loss terms and the
line-search changes; the explicitly formed (n, K, K) curvature contracted with numpy's
einsum (the unblocked computation); statsmodels' MNLogit for a fit large enough to take
every large-problem path; the peak target of issue #8 (1.5 times the bytes of X, traced
as benchmarks/run.py traces it) for the memory check.
"""

import gc
import tracemalloc
from fractions import Fraction

import mpmath
import numpy as np
import pytest
import statsmodels.api as sm

import lintools as lt
import lintools.engine.multinomial as multinomial_module
import lintools.engine.kernels_multi as kernels_module
from lintools.engine.multinomial import MultinomialLoss
from lintools.engine import LinearModelProblem
from lintools.engine.kernels_multi import PairWeights, multi_output_information



@pytest.fixture(autouse=True)
def _fifty_digits():
    """50-digit mpmath in this module only (other modules keep their own precision)."""
    with mpmath.workdps(50):
        yield


def _problem(seed, n, p, K, reference=True, scale=1.0):
    rng = np.random.default_rng(seed)
    X = rng.normal(size=(n, p)) * [1.0, 3.0, 0.5][:p] if p <= 3 else rng.normal(size=(n, p))
    codes = rng.integers(0, K, n)
    w = rng.random(n) + 0.5
    loss = MultinomialLoss(codes, K, w, reference=reference)
    P = LinearModelProblem(X, loss)
    z = rng.normal(size=P.size) * scale
    return P, loss, z


def _mp_probabilities(row, reference):
    vals = ([mpmath.mpf(0)] if reference else []) + [mpmath.mpf(float(v)) for v in row]
    top = max(vals)
    ex = [mpmath.exp(v - top) for v in vals]
    total = mpmath.fsum(ex)
    return [e / total for e in ex]


def test_curvature_pass_in_row_blocks_equals_the_exact_sum(monkeypatch):
    # source: exact rational arithmetic (fractions.Fraction) of sum_i a_i a_i' (x) W_i over
    # the same float rows and weights; and the explicitly formed (n, K, K) curvature
    # contracted with numpy's einsum (the unblocked computation)
    monkeypatch.setattr(multinomial_module, "ROWS", 16)  # the loss's passes: many blocks
    monkeypatch.setattr(kernels_module, "_CACHE_BYTES", 1)  # the curvature pass: 64-row blocks
    P, loss, z = _problem(3, 150, 2, 3)
    eta = P.eta(z)
    H = multi_output_information(P, PairWeights(loss, eta))
    A = np.column_stack([np.ones(P.n), (P.X - P.c) * (1.0 / P.s)])  # as the pass standardises
    Wp = loss.pair_weights(eta, slice(None))
    K, p1 = P.K, P.p1
    pairs = [(k, m) for k in range(K) for m in range(k, K)]
    exact = [[Fraction(0)] * P.size for _ in range(P.size)]
    Af = [[Fraction(float(v)) for v in row] for row in A]
    for j, (k, m) in enumerate(pairs):
        wj = [Fraction(float(v)) for v in Wp[j]]
        for a in range(p1):
            for b in range(p1):
                s = sum(Af[i][a] * Af[i][b] * wj[i] for i in range(P.n))
                exact[a * K + k][b * K + m] = s
                exact[b * K + m][a * K + k] = s
    E = np.array([[float(v) for v in row] for row in exact])
    np.testing.assert_allclose(H, E, rtol=1e-13, atol=1e-13 * np.abs(E).max())
    W3 = loss.curvature(eta)
    unblocked = np.einsum("ij,ikm,il->jklm", A, W3, A).reshape(P.size, P.size)
    np.testing.assert_allclose(H, unblocked, rtol=1e-13, atol=1e-13 * np.abs(unblocked).max())
    # the float32 step version is the same sum to float32 rounding
    H32 = multi_output_information(P, PairWeights(loss, eta), single=True)
    np.testing.assert_allclose(H32, unblocked, rtol=0, atol=1e-5 * np.abs(unblocked).max())


@pytest.mark.parametrize("reference", [True, False])
@pytest.mark.parametrize("scale", [1.0, 40.0])
def test_pair_weights_and_curvature_match_mpmath(reference, scale):
    # source: mpmath at 50 digits, w_i (diag pi_i - pi_i pi_i') on the free columns; at
    # scale 40 most rows have one probability within 1e-15 of 1, where 1 - pi must be
    # formed from the other classes' terms
    P, loss, z = _problem(5, 12, 2, 4, reference=reference, scale=scale)
    eta = P.eta(z)
    W = loss.curvature(eta)
    Wp = loss.pair_weights(eta, np.array([0, 3, 7, 11]))
    first = int(reference)
    Kf = loss.outputs
    for i in range(12):
        every = _mp_probabilities(eta[i], reference)
        pi = every[first:]
        for k in range(Kf):
            for m in range(Kf):
                # 1 - pi_k as the sum of the other probabilities (at 50 digits the difference
                # itself would cancel for pi_k within 1e-50 of 1)
                q = mpmath.fsum(e for j, e in enumerate(every) if j != k + first) if k == m else -pi[m]
                exact = mpmath.mpf(float(loss.weights[i])) * pi[k] * q
                assert W[i, k, m] == pytest.approx(float(exact), rel=1e-13, abs=1e-300)
    j = 0
    for k in range(Kf):
        for m in range(k, Kf):
            np.testing.assert_array_equal(Wp[j], W[[0, 3, 7, 11], k, m])
            j += 1


def _mp_term(row, code, reference):
    p = _mp_probabilities(row, reference)
    return -mpmath.log(p[code])


@pytest.mark.parametrize("reference", [True, False])
def test_blocked_value_gradient_and_change_match_mpmath(monkeypatch, reference):
    # source: mpmath at 50 digits for the loss, its gradient w (pi - onehot) and the exact
    # change value(eta + t d) - value(eta); the same numbers in one block (ROWS large)
    P, loss, z = _problem(9, 45, 3, 4, reference=reference, scale=3.0)
    d = np.random.default_rng(2).normal(size=P.size) * 1e-6
    d[:3] *= 1e7  # some rows move by more than 1: the plain-difference branch
    eta, deta = P.eta(z), P.eta(d, with_offset=False)
    results = []
    for rows in (7, 10**6):
        monkeypatch.setattr(multinomial_module, "ROWS", rows)
        loss.forget()
        value, G = loss.value_and_gradient(eta)
        results.append((value, np.array(G), loss.change_along(eta, deta, 0.5)))
    (v1, G1, c1), (v2, G2, c2) = results
    assert v1 == pytest.approx(v2, rel=1e-14)
    np.testing.assert_allclose(G1, G2, rtol=1e-14, atol=0)
    assert c1 == pytest.approx(c2, rel=1e-12)
    first = int(reference)
    exact_value = mpmath.fsum(mpmath.mpf(float(loss.weights[i])) * _mp_term(eta[i], loss.codes[i], reference)
                              for i in range(P.n))
    assert v1 == pytest.approx(float(exact_value), rel=1e-14)
    for i in (0, 13, 44):
        pi = _mp_probabilities(eta[i], reference)[first:]
        for k in range(loss.outputs):
            every = _mp_probabilities(eta[i], reference)
            own = k + first == loss.codes[i]
            diff = -mpmath.fsum(e for j, e in enumerate(every) if j != k + first) if own else pi[k]
            g = mpmath.mpf(float(loss.weights[i])) * diff
            assert G1[i, k] == pytest.approx(float(g), rel=1e-13, abs=1e-300)
    trial = eta + 0.5 * deta
    exact_change = mpmath.fsum(mpmath.mpf(float(loss.weights[i])) * (_mp_term(trial[i], loss.codes[i], reference)
                                                                     - _mp_term(eta[i], loss.codes[i], reference))
                               for i in range(P.n))
    assert c1 == pytest.approx(float(exact_change), rel=1e-9)


def test_line_trial_is_infinite_when_the_linear_predictor_overflows():
    # source: IEEE 754 overflow (common practice): eta + t X d beyond the largest double
    P, loss, z = _problem(1, 30, 2, 3)
    d = np.zeros(P.size)
    d[P.K :] = 1e306  # slope entries
    line = P.line(z, d)
    assert line.change(1e3) == np.inf
    assert np.isfinite(line.change(1e-300))


def _large(seed, n=60_000, p=20, K=5):
    rng = np.random.default_rng(seed)
    X = rng.normal(size=(n, p))
    B = rng.normal(scale=0.3, size=(p, K))
    E = X @ B + rng.normal(scale=0.5, size=K)
    P = np.exp(E - E.max(axis=1, keepdims=True))
    P /= P.sum(axis=1, keepdims=True)
    y = (rng.uniform(size=(n, 1)) > np.cumsum(P, axis=1)).sum(axis=1)
    return X, y


def test_large_fit_matches_statsmodels_and_its_peak_stays_below_one_and_a_half_X():
    # source: statsmodels MNLogit (Newton, tol 1e-10) on the same rows; the memory target
    # of issue #8: the traced peak of new allocations during the fit at most 1.5 x X.nbytes
    # (n = 60000 rows: the warm start, the Newton sketch and the float32 step Hessians run)
    X, y = _large(21)
    gc.collect()
    tracemalloc.start()
    try:
        fit = lt.softmax(X, y, tol=1e-13)
        _, peak = tracemalloc.get_traced_memory()
    finally:
        tracemalloc.stop()
    assert fit.convergence.converged
    assert peak <= 1.5 * X.nbytes, peak / X.nbytes
    ref = sm.MNLogit(y, sm.add_constant(X)).fit(disp=0, method="newton", tol=1e-10, maxiter=100)
    params = np.asarray(ref.params)  # (p + 1, K - 1), against the first class
    np.testing.assert_allclose(fit.intercept[1:], params[0], rtol=1e-8, atol=1e-10)
    np.testing.assert_allclose(fit.coefficients[:, 1:], params[1:], rtol=1e-8, atol=1e-10)
    se = np.asarray(ref.bse)
    np.testing.assert_allclose(fit.intercept_standard_error[1:], se[0], rtol=1e-7)
    np.testing.assert_allclose(fit.standard_errors[:, 1:], se[1:], rtol=1e-7)
    assert fit.log_likelihood == pytest.approx(ref.llf, rel=1e-12)
    # the intercept-only optimum puts each class at its share N_k / N (McCullagh & Nelder
    # 1989, sec. 6.4), so the null deviance is -2 sum_k N_k log(N_k / N), here in mpmath;
    # statsmodels fits its null model iteratively (to about ten digits)
    counts = np.bincount(y)
    exact = -2 * mpmath.fsum(int(c) * mpmath.log(mpmath.mpf(int(c)) / y.size) for c in counts)
    assert fit.null_deviance == pytest.approx(float(exact), rel=1e-14)
    assert fit.null_deviance == pytest.approx(-2 * ref.llnull, rel=1e-9)
