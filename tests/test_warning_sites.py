"""Warnings name the caller's line, not a line inside lintools.

Source: Python's ``warnings`` documentation (the ``stacklevel`` of a library warning points
at the code that called the library), common practice.  Each call below is made from this
file, through whatever depth of the library (and the row-thread wrapper of the fits) the
warning arises in; the recorded warning must carry this file's name and the line of the
call.
"""

from __future__ import annotations

import warnings

import numpy as np
import pytest

import lintools as lt
from lintools import IllConditionedWarning, IterationLimitWarning, LintoolsWarning, SmallClassWarning


def _hard_polynomial():
    x = 1.0 + np.arange(41) / 40
    X = np.column_stack([x**k for k in range(1, 11)])
    return X, np.sin(np.arange(41.0))


def _rows(n=400, seed=3):
    rng = np.random.default_rng(seed)
    X = rng.normal(size=(n, 3))
    y = (X @ [1.0, -1.0, 0.5] + rng.logistic(size=n) > 0).astype(int)
    return X, y


def _logits(n=60, seed=1):
    rng = np.random.default_rng(seed)
    y = np.arange(n) % 3
    return y, 0.5 * np.eye(3)[y] + rng.normal(size=(n, 3))


X, Y = _rows()
CALLS = {
    "logistic": (lambda: lt.logistic(X, Y, max_iter=1), IterationLimitWarning),
    "softmax": (lambda: lt.softmax(X, np.digitize(X[:, 0] + np.random.default_rng(2).normal(size=400), [-0.5, 0.5]),
                                   max_iter=1), IterationLimitWarning),
    "least_squares": (lambda: lt.least_squares(*_hard_polynomial()), IllConditionedWarning),
    "blocks": (lambda: lt.least_squares_blocks(lambda: iter([_hard_polynomial()])), IllConditionedWarning),
    "temperature": (lambda: lt.temperature_scaling(*_logits(), max_iter=1), IterationLimitWarning),
    "folds": (lambda: lt.stratified_folds(["a"] * 9 + ["rare"], k=3, seed=0), SmallClassWarning),
}


@pytest.mark.parametrize("case", sorted(CALLS))
def test_warning_points_at_the_callers_line(case):
    call, category = CALLS[case]
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        call()
    hits = [w for w in caught if issubclass(w.category, category)]
    assert hits, [str(w.message) for w in caught]
    w = hits[0]
    assert issubclass(w.category, LintoolsWarning)
    # the first frame outside the library: the lambda above, in this file
    assert (w.filename, w.lineno) == (__file__, call.__code__.co_firstlineno), str(w.message)
