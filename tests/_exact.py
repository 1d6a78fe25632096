"""Exact rational least squares, used as an oracle (fractions.Fraction arithmetic).

The float inputs are converted exactly (``Fraction(float)``), so the oracle answers the
problem the library was actually given, free of any rounding.
"""

from __future__ import annotations

from fractions import Fraction

import mpmath
import numpy as np


def _solve(A, b):
    k = len(A)
    M = [row[:] + [b[i]] for i, row in enumerate(A)]
    for c in range(k):
        piv = next(r for r in range(c, k) if M[r][c] != 0)
        M[c], M[piv] = M[piv], M[c]
        for r in range(k):
            if r != c and M[r][c] != 0:
                f = M[r][c] / M[c][c]
                M[r] = [a - f * bb for a, bb in zip(M[r], M[c])]
    return [M[i][k] / M[i][i] for i in range(k)]


def _inverse(A):
    k = len(A)
    cols = [_solve(A, [Fraction(int(i == j)) for i in range(k)]) for j in range(k)]
    return [[cols[j][i] for j in range(k)] for i in range(k)]


def exact_least_squares(X, y, weights=None, intercept=True, l2=0):
    """Return (coefficients with intercept first, standard errors, rss) as exact values.

    Standard errors are classical (``s^2 (X'WX + l2 D)^{-1}``, case weights, residual
    df = sum(w) - k), returned as mpmath numbers with 40 significant digits.
    """
    X = np.asarray(X, dtype=float)
    n, p = X.shape
    cols = ([[Fraction(1)] * n] if intercept else []) + [[Fraction(float(v)) for v in X[:, j]] for j in range(p)]
    yy = [Fraction(float(v)) for v in y]
    ww = [Fraction(1)] * n if weights is None else [Fraction(float(v)) for v in weights]
    k = len(cols)
    lam = Fraction(l2)
    A = [[sum(w * a * b for w, a, b in zip(ww, cols[i], cols[j])) for j in range(k)] for i in range(k)]
    for i in range(int(intercept), k):
        A[i][i] += lam
    rhs = [sum(w * a * b for w, a, b in zip(ww, cols[i], yy)) for i in range(k)]
    theta = _solve(A, rhs)
    resid = [yy[r] - sum(theta[i] * cols[i][r] for i in range(k)) for r in range(n)]
    rss = sum(w * e * e for w, e in zip(ww, resid))
    df = sum(ww) - k
    inv = _inverse(A)
    with mpmath.workdps(40):
        se = [mpmath.sqrt(mpmath.mpf((rss / df * inv[i][i]).numerator) / (rss / df * inv[i][i]).denominator) for i in range(k)]
    return theta, se, rss


def lre(estimate, exact):
    """Log relative error, McCullough (1998): -log10(|est - exact| / |exact|), capped at 17."""
    out = []
    for e, x in zip(np.ravel(estimate), exact):
        x = mpmath.mpf(x.numerator) / x.denominator if isinstance(x, Fraction) else mpmath.mpf(x)
        err = abs(mpmath.mpf(float(e)) - x)
        out.append(17.0 if err == 0 else min(17.0, float(-mpmath.log10(err / abs(x)))))
    return np.array(out)
