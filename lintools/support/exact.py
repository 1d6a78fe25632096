r"""Exact reference values for the self-check: rational least squares, logarithms and square
roots to 40 digits, and the log relative error.

Everything here runs on Python's ``fractions`` and ``decimal`` modules only, so a
reference value never passes through the floating-point arithmetic it is used to judge.
A float is converted exactly (``Fraction(float)``), so the references answer the problem
the library is actually given.

The log relative error of a computed :math:`c` against a reference :math:`t`
(McCullough 1998) is

.. math:: \mathrm{LRE}(c, t) = -\log_{10}\frac{|c - t|}{|t|} \quad (t \ne 0), \qquad
          -\log_{10}|c - t| \quad (t = 0),

the number of significant decimal digits the two share, capped at the number of digits the
reference is given to (an LRE above them would credit digits nobody certified).  The
difference is formed exactly in rationals.

References
----------
McCullough, B. D. (1998). Assessing the reliability of statistical software: Part I.
The American Statistician 52, 358-366.
"""

from __future__ import annotations

import math
from decimal import Decimal, localcontext
from fractions import Fraction
from typing import Sequence

__all__ = ["FLOAT64_DIGITS", "REFERENCE_PRECISION", "exact_solve", "exact_inverse_diagonal",
           "exact_least_squares", "decimal_ln", "decimal_sqrt", "log_relative_error"]

#: The most digits a float64 result is credited with against an exact reference: a
#: correctly rounded float64 has a relative error of at most 2**-53, an LRE of 15.95.
FLOAT64_DIGITS = 16.0

#: Significant digits of the logarithms and square roots computed here (far beyond float64).
REFERENCE_PRECISION = 40


def exact_solve(A: Sequence[Sequence[Fraction]], b: Sequence[Fraction]) -> list[Fraction]:
    """Solve the square system ``A x = b`` exactly by Gauss-Jordan elimination in rationals.

    Raises :class:`ValueError` when ``A`` is singular (no pivot in a column); the
    self-check's cases never are.
    """
    k = len(A)
    M = [[Fraction(v) for v in row] + [Fraction(b[i])] for i, row in enumerate(A)]
    for c in range(k):
        pivot = next((r for r in range(c, k) if M[r][c] != 0), None)
        if pivot is None:
            raise ValueError(f"exact_solve: the matrix is singular (no pivot in column {c})")
        M[c], M[pivot] = M[pivot], M[c]
        for r in range(k):
            if r != c and M[r][c] != 0:
                f = M[r][c] / M[c][c]
                M[r] = [a - f * p for a, p in zip(M[r], M[c])]
    return [M[i][k] / M[i][i] for i in range(k)]


def exact_inverse_diagonal(A: Sequence[Sequence[Fraction]]) -> list[Fraction]:
    """The diagonal of ``A^{-1}``, exactly (one solve per unit vector)."""
    k = len(A)
    return [exact_solve(A, [Fraction(int(i == j)) for i in range(k)])[j] for j in range(k)]


def exact_least_squares(
    columns: Sequence[Sequence[Fraction]], y: Sequence[Fraction], weights: Sequence[Fraction]
) -> tuple[list[Fraction], Fraction, list[Fraction]]:
    r"""Weighted least squares in rationals: the coefficients, the residual sum of squares
    and the classical variances.

    Minimises :math:`\sum_i w_i (y_i - a_i'\theta)^2` over :math:`\theta`, ``a_i`` the
    ``i``-th entries of ``columns`` (an intercept is a column of ones), by the normal
    equations :math:`A'WA\,\theta = A'Wy` solved exactly.  The variances are
    :math:`s^2 \,\mathrm{diag}(A'WA)^{-1}` with :math:`s^2 = RSS / (\sum w_i - k)` (case
    weights), the squares of the classical standard errors.
    """
    k = len(columns)
    A = [[sum(w * a * b for w, a, b in zip(weights, columns[i], columns[j])) for j in range(k)] for i in range(k)]
    rhs = [sum(w * a * b for w, a, b in zip(weights, columns[i], y)) for i in range(k)]
    theta = exact_solve(A, rhs)
    rss = sum((w * (v - sum(theta[j] * columns[j][r] for j in range(k))) ** 2
               for r, (w, v) in enumerate(zip(weights, y))), Fraction(0))
    s2 = rss / (sum(weights) - k)
    return theta, rss, [s2 * d for d in exact_inverse_diagonal(A)]


def decimal_ln(q: Fraction) -> Decimal:
    """Natural logarithm of a positive rational to :data:`REFERENCE_PRECISION` digits."""
    with localcontext() as ctx:
        ctx.prec = REFERENCE_PRECISION + 5
        out = Decimal(q.numerator).ln() - Decimal(q.denominator).ln()
        ctx.prec = REFERENCE_PRECISION
        return +out


def decimal_sqrt(q: Fraction) -> Decimal:
    """Square root of a non-negative rational to :data:`REFERENCE_PRECISION` digits."""
    with localcontext() as ctx:
        ctx.prec = REFERENCE_PRECISION + 5
        out = (Decimal(q.numerator) / Decimal(q.denominator)).sqrt()
        ctx.prec = REFERENCE_PRECISION
        return +out


def log_relative_error(computed: float, reference: Fraction | Decimal | str, cap: float) -> float:
    """McCullough's (1998) log relative error of ``computed`` against ``reference``, at most
    ``cap`` (the digits the reference is given to); 0 for a non-finite ``computed``.

    ``reference`` is a rational, a :class:`~decimal.Decimal` or a decimal string, converted
    exactly; the relative (or, for a zero reference, absolute) error is formed in rationals.
    """
    if not math.isfinite(computed):
        return 0.0
    t = Fraction(reference) if not isinstance(reference, str) else Fraction(Decimal(reference))
    err = abs(Fraction(computed) - t)
    if t != 0:
        err /= abs(t)
    if err >= 1:
        return 0.0
    if err < Fraction(1, 10**20):  # beyond any cap (and below float's range for tiny errors)
        return float(cap)
    return float(min(cap, -math.log10(err)))
