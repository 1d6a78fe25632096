"""Oracles for the accuracy records: exact rational least squares (fractions.Fraction) and
logistic / softmax optima by Newton's method in mpmath at 50 digits, with the digits of a
coefficient vector counted as lintools.models.accuracy documents (column-scaled, a
coefficient below 1e-3 of the largest measured against the largest), written out here
independently.  Problems range from well to badly conditioned (nearly collinear columns).
"""

from __future__ import annotations

import math
from fractions import Fraction

import mpmath
import numpy as np

from _exact import _solve

NEAR = 1e-3
MAX_DIGITS = -math.log10(2.0**-53)


def problem(rng: np.random.Generator, n: int, p: int, log_cond: float, shift: float = 0.0,
            logscale: float = 0.0) -> np.ndarray:
    """Columns of N(0, 1) with column p-1 = column 0 + 10**-log_cond N(0, 1) (scaled condition
    about 10**log_cond), each multiplied by 10**U(-logscale, logscale) and shifted by ``shift``."""
    X = rng.normal(size=(n, p))
    if p >= 2:
        X[:, -1] = X[:, 0] + 10.0 ** (-log_cond) * rng.normal(size=n)
    X = X * 10.0 ** rng.uniform(-logscale, logscale, size=p) + shift
    return X


def fractions(a) -> list:
    return [Fraction(float(v)) for v in np.ravel(a)]


def exact_ls(cols: list[list[Fraction]], y: list[Fraction], w: list[Fraction], intercept: bool) -> list[Fraction]:
    """Exact weighted least squares (normal equations in rational arithmetic), intercept first."""
    n = len(y)
    cols = ([[Fraction(1)] * n] if intercept else []) + cols
    k = len(cols)
    A = [[sum(wi * a * b for wi, a, b in zip(w, cols[i], cols[j])) for j in range(k)] for i in range(k)]
    rhs = [sum(wi * a * b for wi, a, b in zip(w, cols[i], y)) for i in range(k)]
    return _solve(A, rhs)


def rho(X: np.ndarray, w: np.ndarray) -> np.ndarray:
    """The weighted root mean square of each column."""
    return np.sqrt((w @ (X * X)) / w.sum())


def digits(err: np.ndarray, theta: np.ndarray) -> float:
    """Digits of the worst coefficient (column-scaled ``err`` against ``theta``)."""
    top = float(np.max(np.abs(theta)))
    ref = np.maximum(np.abs(theta), NEAR * top)
    with np.errstate(divide="ignore"):
        d = -np.log10(np.asarray(err, dtype=float) / ref)
    return float(np.min(np.clip(d, 0.0, MAX_DIGITS)))


def scale_vector(X: np.ndarray, w: np.ndarray, intercept: bool, K: int = 1) -> np.ndarray:
    r = rho(X, w)
    s = np.concatenate([[1.0] if intercept else [], r])
    return np.repeat(s, K) if K > 1 else s


def ls_truth(fit, X, y, w, intercept) -> tuple[float, list[Fraction]]:
    """Digits of the fit's coefficients against the exact optimum, and that optimum."""
    ex = exact_ls([fractions(X[:, j]) for j in range(X.shape[1])], fractions(y), fractions(w), intercept)
    got = ([fit.intercept] if intercept else []) + list(np.ravel(fit.coefficients))
    err = np.array([float(abs(Fraction(float(g)) - e)) for g, e in zip(got, ex)])
    sv = scale_vector(X, w, intercept)
    return digits(err * sv, np.array([float(e) for e in ex]) * sv), ex


def ls_perturbed(X, y, w, intercept, exact, rel: float, rng) -> float:
    """Digits of the change of the exact optimum when X and y get independent uniform
    relative errors of half-width ``rel`` (rational arithmetic throughout)."""
    h = Fraction(rel)

    def jitter(v):
        return [x * (1 + h * Fraction(float(rng.uniform(-1, 1)))) for x in fractions(v)]

    ex2 = exact_ls([jitter(X[:, j]) for j in range(X.shape[1])], jitter(y), fractions(w), intercept)
    err = np.array([float(abs(a - b)) for a, b in zip(ex2, exact)])
    sv = scale_vector(X, w, intercept)
    return digits(err * sv, np.array([float(e) for e in exact]) * sv)


# ---------------------------------------------------------------- logistic and softmax in mpmath
def _mp_newton(A, Y, K, w, dps=50, iters=60):
    """The optimum of the multinomial (K = 1: binary) log-likelihood by Newton in mpmath.

    ``A``: rows of the design (intercept column included), mpf; ``Y``: per row the class
    (0..K, 0 the reference) ; returns the coefficient matrix (k columns by K outputs) flat,
    index j K + k."""
    with mpmath.workdps(dps):
        n, k = len(A), len(A[0])
        th = [mpmath.mpf(0)] * (k * K)
        for _ in range(iters):
            g = [mpmath.mpf(0)] * (k * K)
            H = [[mpmath.mpf(0)] * (k * K) for _ in range(k * K)]
            for i in range(n):
                eta = [sum(A[i][j] * th[j * K + c] for j in range(k)) for c in range(K)]
                ex = [mpmath.exp(e) for e in eta]
                den = 1 + sum(ex)
                mu = [e / den for e in ex]
                for c in range(K):
                    rc = w[i] * (mu[c] - (1 if Y[i] == c + 1 else 0))
                    for j in range(k):
                        g[j * K + c] += A[i][j] * rc
                for c in range(K):
                    for d in range(K):
                        wcd = w[i] * (mu[c] * ((1 if c == d else 0) - mu[d]))
                        for j in range(k):
                            aj = A[i][j] * wcd
                            for l in range(k):
                                H[j * K + c][l * K + d] += aj * A[i][l]
            step = mpmath.lu_solve(mpmath.matrix(H), mpmath.matrix(g))
            th = [t - step[i] for i, t in enumerate(th)]
            if max(abs(s) for s in step) < mpmath.mpf(10) ** (-(dps - 5)) * (1 + max(abs(t) for t in th)):
                break
        return th


def mp_rows(X, intercept, rel=None, rng=None):
    rows = []
    for x in X:
        r = [mpmath.mpf(float(v)) for v in x]
        if rel is not None:
            r = [v * (1 + mpmath.mpf(rel) * mpmath.mpf(float(rng.uniform(-1, 1)))) for v in r]
        rows.append(([mpmath.mpf(1)] if intercept else []) + r)
    return rows


def glm_optimum(X, classes, K, w, intercept, rel=None, rng=None):
    with mpmath.workdps(50):
        return _mp_newton(mp_rows(X, intercept, rel, rng), list(classes), K, [mpmath.mpf(float(v)) for v in w])


def glm_digits(got: np.ndarray, exact, X, w, intercept, K=1) -> float:
    """Digits of ``got`` (flat, j K + k, intercept first) against the mpmath optimum."""
    with mpmath.workdps(50):
        err = np.array([float(abs((g if isinstance(g, mpmath.mpf) else mpmath.mpf(float(g))) - e))
                        for g, e in zip(got, exact)])
    sv = scale_vector(X, w, intercept, K)
    return digits(err * sv, np.array([float(e) for e in exact]) * sv)
