"""Triangular solves of lintools.support.linalg against outside references.

* Column-oriented forward and back substitution (Golub, G. H. & Van Loan, C. F. (2013),
  Matrix Computations, 4th ed., Algorithms 3.1.3 and 3.1.4; from memory), written out here on
  Python floats: the solves must give its bits, one right-hand side at a time or several.
* Exact rational arithmetic (``fractions``): the solution of the same floating-point system.
"""

from __future__ import annotations

from fractions import Fraction

import numpy as np
from hypothesis import given, settings
from hypothesis import strategies as st

from lintools.support.linalg import solve_lower, solve_upper


def _column_forward(L: np.ndarray, b: np.ndarray) -> np.ndarray:
    p = L.shape[0]
    v, rows = [float(t) for t in b], L.tolist()
    for j in range(p):
        xj = v[j] = v[j] / rows[j][j]
        for i in range(j + 1, p):
            v[i] -= rows[i][j] * xj
    return np.array(v)


def _column_back(R: np.ndarray, b: np.ndarray) -> np.ndarray:
    p = R.shape[0]
    v, rows = [float(t) for t in b], R.tolist()
    for j in range(p - 1, -1, -1):
        xj = v[j] = v[j] / rows[j][j]
        for i in range(j):
            v[i] -= rows[i][j] * xj
    return np.array(v)


def _factor(p: int, seed: int, spread: float) -> tuple[np.ndarray, np.ndarray]:
    rng = np.random.default_rng(seed)
    A = rng.normal(size=(p + 3, p)) * np.exp(spread * rng.normal(size=p))
    return np.linalg.cholesky(A.T @ A), rng.normal(size=p) * np.exp(spread * rng.normal(size=p))


@settings(max_examples=60, deadline=None)
@given(p=st.integers(1, 90), seed=st.integers(0, 2**32 - 1), spread=st.floats(0.0, 4.0))
def test_one_right_hand_side_gives_the_bits_of_column_substitution(p, seed, spread):
    L, b = _factor(p, seed, spread)
    assert solve_lower(L, b).tobytes() == _column_forward(L, b).tobytes()
    assert solve_upper(L.T, b).tobytes() == _column_back(L.T, b).tobytes()
    assert solve_upper(np.ascontiguousarray(L.T), b).tobytes() == _column_back(L.T, b).tobytes()


@settings(max_examples=20, deadline=None)
@given(p=st.integers(1, 40), seed=st.integers(0, 2**32 - 1))
def test_several_right_hand_sides_give_the_bits_of_one_at_a_time(p, seed):
    # invariant: each column of a matrix right-hand side is solved as that column alone
    L, _ = _factor(p, seed, 1.0)
    B = np.random.default_rng(seed).normal(size=(p, 3))
    X, Y = solve_lower(L, B), solve_upper(L.T, B)
    for k in range(3):
        assert X[:, k].tobytes() == _column_forward(L, B[:, k]).tobytes()
        assert Y[:, k].tobytes() == _column_back(L.T, B[:, k]).tobytes()


def test_forward_substitution_against_exact_rationals():
    # the exact solution of the rounded system, by forward substitution in fractions; a
    # backward-stable solve of a well-conditioned system keeps about 14 digits or more
    L, b = _factor(45, 7, 0.5)
    exact: list[Fraction] = []
    for i in range(45):
        acc = Fraction(float(b[i])) - sum((Fraction(float(L[i, j])) * exact[j] for j in range(i)), Fraction(0))
        exact.append(acc / Fraction(float(L[i, i])))
    x = solve_lower(L, b)
    worst = max(abs(Fraction(float(x[i])) - exact[i]) / abs(exact[i]) for i in range(45) if exact[i] != 0)
    assert float(worst) < 1e-13
