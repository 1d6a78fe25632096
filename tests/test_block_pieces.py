"""Blocks larger than a piece: their passes run in fixed pieces on the row threads.

Checked here: one row thread and two give bit-identical fits (the pieces, and the order in
which their sums are added, are fixed: the design of lintools.support.threads), and a fit
over blocks that are split into pieces agrees with the in-memory fit and with statsmodels
(an oracle) to the digits the in-memory fit is held to.  The data are statsmodels' own
(the Spector and Mazzeo data set, shipped with statsmodels), repeated to exceed one piece
(repeating every row leaves the maximum-likelihood coefficients unchanged: the
log-likelihood is multiplied by the number of copies).
"""

from __future__ import annotations

import numpy as np
import pytest
import statsmodels.api as sm
from _exact import lre

import lintools as lt
from lintools.blocks import least_squares_blocks, logistic_blocks, softmax_blocks
from lintools.blocks.stream import PIECE_ROWS


def _spector(copies: int):
    data = sm.datasets.spector.load_pandas()
    X = np.tile(data.exog.to_numpy(float), (copies, 1))
    y = np.tile(data.endog.to_numpy(float), copies)
    return X, y


def _source(X, y, rows):
    return lambda: ((X[lo:lo + rows], y[lo:lo + rows]) for lo in range(0, X.shape[0], rows))


@pytest.mark.parametrize("fit", ["least_squares", "logistic", "softmax"])
def test_one_thread_and_two_give_the_same_bits(fit, monkeypatch):
    X, y = _spector(5000)  # 160,000 rows: blocks of 100,000 rows are two pieces and one
    assert X.shape[0] > PIECE_ROWS
    if fit == "softmax":
        y = y + (X[:, 0] > 3.0)  # three classes
    fn = {"least_squares": least_squares_blocks, "logistic": logistic_blocks, "softmax": softmax_blocks}[fit]
    fits = []
    for threads in ("1", "2"):
        monkeypatch.setenv("LINTOOLS_THREADS", threads)
        fits.append(fn(_source(X, y, 100_000)))
    assert np.array_equal(fits[0].coefficients, fits[1].coefficients)
    assert np.array_equal(fits[0].standard_errors, fits[1].standard_errors)


def test_pieced_logistic_blocks_agree_with_statsmodels():
    X, y = _spector(5000)
    blocked = logistic_blocks(_source(X, y, 150_000))
    memory = lt.logistic(X, y)
    oracle = sm.Logit(y, sm.add_constant(X)).fit(disp=0, tol=1e-14, maxiter=100)  # statsmodels (oracle)
    ours = np.r_[blocked.intercept, blocked.coefficients]
    assert np.min(lre(ours, np.r_[memory.intercept, memory.coefficients])) > 10  # the tolerance of tests/test_blocks.py (RTOL 1e-10)
    assert np.min(lre(ours, oracle.params)) > 9  # statsmodels' own stopping rule limits its digits


def test_pieced_least_squares_blocks_agree_with_the_in_memory_fit():
    X, y = _spector(5000)
    blocked = least_squares_blocks(_source(X, y, 150_000))
    memory = lt.least_squares(X, y)
    assert np.min(lre(np.r_[blocked.intercept, blocked.coefficients], np.r_[memory.intercept, memory.coefficients])) > 13
