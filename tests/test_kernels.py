"""The one-output passes over the design (lintools/solvers/_kernels.py) against exact arithmetic.

Sources: exact rational arithmetic (fractions.Fraction) for the moments and the weighted
Gram matrix; the centred block path of LinearModelProblem (checked against statsmodels in
test_logistic*) for the problem-level Hessians on every path.
"""

from __future__ import annotations

import math
from fractions import Fraction

import numpy as np
import pytest

from lintools.engine.losses import BinomialLoss
from lintools.engine import LinearModelProblem, NonFiniteDesign
from lintools.engine.kernels import column_moments, uncentred_ok, weighted_gram


def exact_moments(x: np.ndarray, v: np.ndarray, centre: bool) -> tuple[Fraction, Fraction]:
    V = sum(Fraction(a) for a in v)
    m = sum(Fraction(a) * Fraction(b) for a, b in zip(v, x)) / V if centre else Fraction(0)
    ss = sum(Fraction(a) * (Fraction(b) - m) ** 2 for a, b in zip(v, x)) / V
    return m, ss


def lre(a: float, b: float) -> float:
    if a == b:
        return 16.0
    return -math.log10(abs(a - b) / abs(b)) if b != 0 else -math.log10(abs(a - b))


@pytest.mark.parametrize("centre", [True, False])
def test_moments_against_rationals(centre: bool) -> None:
    # exact rational arithmetic: means and spreads of columns that cancel badly in the
    # one-pass form (mean 1e8 with unit spread, 1e12 with spread 1e-3), a constant column,
    # ordinary and tiny columns, uneven weights
    rng = np.random.default_rng(11)
    n = 300
    X = np.column_stack([
        rng.normal(size=n),
        1e8 + rng.normal(size=n),
        1e12 + 1e-3 * rng.normal(size=n),
        np.full(n, 7.1),
        1e-150 * rng.normal(size=n),
    ])
    v = rng.uniform(0.0, 3.0, size=n)
    c, s, finite = column_moments(X, v, 64, centre)
    assert finite
    for j in range(X.shape[1]):
        m, ss = exact_moments(X[:, j], v, centre)
        if centre:
            assert lre(float(c[j]), float(m)) >= 15.0
        else:
            assert c[j] == 0.0
        want = math.sqrt(float(ss)) if ss else 0.0
        if want == 0.0:
            assert s[j] < 1e-15 * abs(X[0, j])  # the constant column: rounding of its mean only
        else:
            assert lre(float(s[j]), want) >= 13.0, (j, s[j], want)


def test_moments_of_huge_entries_and_non_finite() -> None:
    # exact rational arithmetic: entries near 1e300 overflow the sums of squares; the
    # scaled pass still gets the spread; a NaN or an infinity is reported (finite=False)
    rng = np.random.default_rng(12)
    X = rng.normal(size=(200, 2)) * np.array([1e300, 1.0])
    v = np.ones(200)
    c, s, finite = column_moments(X, v, 50, True)
    assert finite
    m, ss = exact_moments(X[:, 0] / 1e300, v, True)
    assert lre(float(c[0]) / 1e300, float(m)) >= 14.0
    assert lre(float(s[0]) / 1e300, math.sqrt(float(ss))) >= 14.0
    for bad in (np.nan, np.inf, -np.inf):
        Y = X.copy()
        Y[17, 1] = bad
        assert column_moments(Y, v, 50, True)[2] is False
    with pytest.raises(NonFiniteDesign):
        Y = X.copy()
        Y[3, 0] = np.nan
        LinearModelProblem(Y, BinomialLoss((rng.uniform(size=200) < 0.5).astype(float)))


def exact_gram(X: np.ndarray, W: np.ndarray, c: np.ndarray, s: np.ndarray, intercept: bool) -> np.ndarray:
    rows = []
    for i in range(X.shape[0]):
        a = ([Fraction(1)] if intercept else []) + [
            (Fraction(X[i, j]) - Fraction(c[j])) / Fraction(s[j]) for j in range(X.shape[1])]
        rows.append(a)
    k = len(rows[0])
    H = np.zeros((k, k))
    for j in range(k):
        for m in range(j, k):
            H[j, m] = H[m, j] = float(sum(Fraction(W[i]) * rows[i][j] * rows[i][m] for i in range(len(rows))))
    return H


@pytest.mark.parametrize("intercept", [True, False])
def test_weighted_gram_against_rationals(intercept: bool) -> None:
    # exact rational arithmetic: A' diag(W) A for the standardised rows, formed uncentred
    # and centred afterwards, agrees with the exact sum entry by entry (relative to the
    # Jacobi scale sqrt(H_jj H_kk)); the float32 form to single precision
    rng = np.random.default_rng(13)
    n, p = 400, 4
    X = rng.normal(size=(n, p)) * np.array([1.0, 3.0, 1e-4, 2e5]) + np.array([0.5, -2.0, 0.0, 1e5])
    W = rng.uniform(0.0, 0.25, size=n)
    c = X.mean(axis=0) if intercept else np.zeros(p)
    s = X.std(axis=0)
    assert uncentred_ok(c, s)
    want = exact_gram(X, W, c, s, intercept)
    d = np.sqrt(np.diag(want))
    for single, digits in ((False, 14.5), (True, 6.0)):
        got = weighted_gram(X, W, c, s, intercept, 64, single=single, row_bound=math.sqrt(n))
        err = np.max(np.abs(got - want) / np.multiply.outer(d, d))
        assert -math.log10(err) >= digits, (single, err)
        np.testing.assert_array_equal(got, got.T)


def test_problem_hessian_same_on_centred_and_uncentred_paths() -> None:
    # common practice (two algebraically equal forms): the problem's information with the
    # centring applied afterwards equals the centred-block form to rounding, in float64,
    # and to float32 level in the step form; columns with |mean| > spread take the
    # centred blocks
    rng = np.random.default_rng(14)
    n, p = 3000, 5
    X = rng.normal(size=(n, p))
    y = (rng.uniform(size=n) < 0.4).astype(float)
    P = LinearModelProblem(X, BinomialLoss(y))
    assert P.uncentred
    W = P.loss.curvature(P.eta(P.start() + 0.1))
    fast = P._information_one(W, False)
    P.uncentred = False
    slow = P._information_one(W, False)
    d = np.sqrt(np.diag(slow))
    assert np.max(np.abs(fast - slow) / np.multiply.outer(d, d)) < 1e-14
    shifted = LinearModelProblem(X + 10.0, BinomialLoss(y))
    assert not shifted.uncentred
