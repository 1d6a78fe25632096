"""Fits over row blocks (lintools.blocks) against the in-memory fits and exact arithmetic.

Sources named beside each check: the in-memory lintools fits on the concatenated rows
(themselves checked against statsmodels, scikit-learn and exact arithmetic in
test_least_squares.py / test_logistic.py), exact rational arithmetic (tests/_exact.py) on
the Longley data shipped by statsmodels, the datasets shipped by statsmodels (longley,
spector) and scikit-learn (diabetes, breast cancer).  Random designs are invented, only to
exercise blocking; the reference is then the in-memory fit.
"""

from __future__ import annotations

import json
import subprocess
import sys
import warnings

import numpy as np
import pytest
import statsmodels.api as sm
from _exact import exact_least_squares, lre
from hypothesis import given, settings
from hypothesis import strategies as st
from sklearn.datasets import load_breast_cancer, load_diabetes

import lintools as lt
from lintools import InputError, IterationLimitWarning, SeparationError
from lintools.blocks import least_squares_blocks, logistic_blocks

RTOL = 1e-10

LONGLEY = sm.datasets.longley.load_pandas()
LX, LY = LONGLEY.exog.to_numpy(float), LONGLEY.endog.to_numpy(float)
SPECTOR = sm.datasets.spector.load_pandas()
SX, SY = SPECTOR.exog.to_numpy(float), SPECTOR.endog.to_numpy(float)
_diabetes = load_diabetes()
DX, DY = _diabetes.data, _diabetes.target
_bc = load_breast_cancer()
BX = (_bc.data - _bc.data.mean(0)) / _bc.data.std(0)
BY = _bc.target
# invented weights, only to exercise weighted blocking; the reference is the in-memory fit
DW = np.random.default_rng(8).uniform(0.0, 3.0, DX.shape[0])
DW[[3, 50, 51]] = 0.0
BW = np.random.default_rng(9).uniform(0.2, 2.0, BX.shape[0])


def blocks(X, y, w=None, cuts=None, sizes=None):
    """A source: a function returning a fresh generator of row blocks at the given cuts."""
    n = X.shape[0]
    if cuts is None:
        edges = np.cumsum([0] + list(sizes)) if sizes is not None else np.linspace(0, n, 6).astype(int)
        cuts = [int(v) for v in edges]

    def source():
        for a, b in zip(cuts[:-1], cuts[1:]):
            if b > a:
                yield (X[a:b], y[a:b]) if w is None else (X[a:b], y[a:b], w[a:b])

    return source


def uneven(n):
    """Cuts with blocks of 1 row, a block of 2, and larger uneven blocks."""
    return sorted({0, 1, 2, 4, 5, n // 3, n // 3 + 1, n // 2 + 7, n - 1, n})


def rel(a, b):
    a, b = np.asarray(a, float), np.asarray(b, float)
    return float(np.max(np.abs(a - b) / np.maximum(np.abs(b), 1e-300)))


def rel_cov(a, b):
    """Covariance error scaled by sqrt(V_ii V_jj) (entries zero in theory have no own scale)."""
    d = np.sqrt(np.abs(np.diag(b)))
    return float(np.max(np.abs(np.asarray(a) - np.asarray(b)) / np.outer(d, d)))


def assert_same_linear(f, g, rtol=RTOL):
    assert rel(f.coefficients, g.coefficients) <= rtol
    assert rel(f.standard_errors, g.standard_errors) <= rtol
    if g.with_intercept:
        assert rel(f.intercept, g.intercept) <= rtol
        assert rel(f.intercept_standard_error, g.intercept_standard_error) <= rtol
    assert rel_cov(f.covariance, g.covariance) <= rtol
    for name in ("log_likelihood", "deviance", "aic", "bic", "r_squared", "adjusted_r_squared",
                 "f_statistic", "f_p_value", "residual_standard_error", "condition_number"):
        assert rel(getattr(f, name), getattr(g, name)) <= 1e-8 if name == "condition_number" else rtol, name
    assert f.n_observations == pytest.approx(g.n_observations, rel=1e-14)
    assert f.degrees_of_freedom == pytest.approx(g.degrees_of_freedom, rel=1e-14)
    assert f.rank == g.rank and f.names == g.names and f.l2 == g.l2
    assert f.convergence.converged and f.convergence.gradient_norm <= 1e-6 * (1 + abs(f.deviance))


def assert_same_logistic(f, g, rtol=RTOL):
    assert f.convergence.converged and g.convergence.converged
    assert rel(f.coefficients, g.coefficients) <= rtol
    assert rel(f.standard_errors, g.standard_errors) <= rtol
    if g.with_intercept:
        assert rel(f.intercept, g.intercept) <= rtol
        assert rel(f.intercept_standard_error, g.intercept_standard_error) <= rtol
    assert rel_cov(f.covariance, g.covariance) <= rtol
    for name in ("log_likelihood", "deviance", "null_deviance", "aic", "bic", "penalised_log_likelihood"):
        assert rel(getattr(f, name), getattr(g, name)) <= rtol, name
    if g.l2 == 0:
        assert rel(f.lr_statistic, g.lr_statistic) <= 1e-9
        assert rel(f.lr_p_value, g.lr_p_value) <= 1e-8
    else:
        assert np.isnan(f.lr_statistic) and np.isnan(f.lr_p_value)
    assert f.classes == g.classes and f.positive_class == g.positive_class
    assert f.n_observations == pytest.approx(g.n_observations, rel=1e-14)
    assert f.convergence.gradient_norm <= 1e-10  # the default tol


# ---------------------------------------------------------------------------------------
# Least squares: exact arithmetic and the in-memory fit
# ---------------------------------------------------------------------------------------


@pytest.mark.parametrize("cuts", [[0, 16], [0, 1, 5, 6, 11, 16], [0, 3, 4, 9, 15, 16]])
def test_longley_tsqr_against_exact_rational_arithmetic(cuts):
    # source: exact rational arithmetic (fractions.Fraction) on the Longley (1967) data as
    # shipped by statsmodels; McCullough (1998) LRE.  Brief asks >= 12 digits; measured
    # coefficients 15.1-15.2 and standard errors 14.5-15.1 over these blockings.
    fit = least_squares_blocks(blocks(LX, LY, cuts=cuts))
    theta, se, rss = exact_least_squares(LX, LY)
    assert lre(np.r_[fit.intercept, fit.coefficients], theta).min() >= 13.5
    assert lre(np.r_[fit.intercept_standard_error, fit.standard_errors], se).min() >= 13.5
    assert lre([fit.deviance], [rss]).min() >= 13


@pytest.mark.parametrize("l2", [0.0, 2.5])
@pytest.mark.parametrize("intercept", [True, False])
@pytest.mark.parametrize("weighted", [False, True])
def test_diabetes_least_squares_equals_in_memory(weighted, intercept, l2):
    # source: the in-memory lintools.least_squares on scikit-learn's diabetes data
    w = DW if weighted else None
    fit = least_squares_blocks(blocks(DX, DY, w, cuts=uneven(DX.shape[0])), intercept=intercept, l2=l2)
    ref = lt.least_squares(DX, DY, weights=w, intercept=intercept, l2=l2)
    assert_same_linear(fit, ref)
    assert fit.convergence.solver == "tsqr" and "passes over the blocks" in fit.convergence.message


def test_longley_least_squares_equals_in_memory_with_ridge():
    # source: the in-memory lintools.least_squares on statsmodels' Longley data
    for l2 in (0.0, 1e3):
        fit = least_squares_blocks(blocks(LX, LY, cuts=[0, 1, 2, 9, 16]), l2=l2)
        assert_same_linear(fit, lt.least_squares(LX, LY, l2=l2))


def _invented_design(seed, n=400, p=4):
    # invented, only to exercise blocking; the reference is the in-memory fit.  Large
    # column means and unequal scales make centring and scaling matter.
    rng = np.random.default_rng(seed)
    X = rng.normal(size=(n, p)) * [1.0, 30.0, 0.01, 5.0][:p] + [1e4, -50.0, 0.3, 0.0][:p]
    y = X @ [2.0, -0.1, 40.0, 1.5][:p] + rng.normal(size=n)
    return X, y


def test_least_squares_uneven_blocks_with_one_row_blocks_and_weights():
    # invented design; reference: the in-memory fit.  Blocks of one row and a block
    # whose rows all have zero weight.
    X, y = _invented_design(1)
    w = np.random.default_rng(2).uniform(0, 2, X.shape[0])
    w[5:9] = 0.0
    cuts = [0, 1, 2, 3, 5, 9, 10, 150, 151, 399, 400]
    for kw in ({}, {"intercept": False}, {"l2": 0.7}):
        fit = least_squares_blocks(blocks(X, y, w, cuts=cuts), **kw)
        assert_same_linear(fit, lt.least_squares(X, y, weights=w, **kw))


def test_least_squares_passes_and_inputs_untouched():
    # common practice: one pass for the factor, then residual passes (at most 1 + 4)
    X, y = _invented_design(3)
    Xc, yc = X.copy(), y.copy()
    calls = []
    src = blocks(X, y, cuts=uneven(X.shape[0]))

    def counted():
        calls.append(1)
        return src()

    fit = least_squares_blocks(counted)
    assert 2 <= len(calls) <= 5 and f"{len(calls)} passes" in fit.convergence.message
    assert np.array_equal(X, Xc) and np.array_equal(y, yc)


def test_dataframe_blocks_give_names():
    # source: statsmodels' Longley data as DataFrames; names come from the first block
    ex, en = LONGLEY.exog, LONGLEY.endog
    fit = least_squares_blocks(lambda: iter([(ex.iloc[:7], en.iloc[:7]), (ex.iloc[7:], en.iloc[7:])]))
    assert fit.names == tuple(ex.columns)
    assert rel(fit.coefficients, lt.least_squares(ex, en).coefficients) <= RTOL


# ---------------------------------------------------------------------------------------
# Logistic regression against the in-memory fit
# ---------------------------------------------------------------------------------------


def test_spector_logistic_equals_in_memory():
    # source: the in-memory lintools.logistic on statsmodels' spector data
    fit = logistic_blocks(blocks(SX, SY, cuts=[0, 1, 2, 10, 11, 31, 32]))
    assert_same_logistic(fit, lt.logistic(SX, SY))


@pytest.mark.parametrize("l2", [1.0, 0.05])
def test_breast_cancer_logistic_with_weights_and_l2_equals_in_memory(l2):
    # source: the in-memory lintools.logistic on scikit-learn's breast-cancer data,
    # standardised (separated without a penalty, hence l2 > 0); invented case weights
    fit = logistic_blocks(blocks(BX, BY, BW, cuts=uneven(BX.shape[0])), l2=l2)
    assert_same_logistic(fit, lt.logistic(BX, BY, weights=BW, l2=l2))


def test_logistic_uneven_blocks_weights_no_intercept_and_string_labels():
    # invented, only to exercise blocking; the reference is the in-memory fit
    rng = np.random.default_rng(4)
    X = rng.normal(size=(300, 3)) * [1.0, 4.0, 0.2] + [2.0, 0.0, -1.0]
    yb = X @ [0.8, -0.3, 2.0] + rng.logistic(size=300) > 1.0
    labels = np.where(yb, "yes", "no")
    w = rng.uniform(0, 2, 300)
    w[10:14] = 0.0
    cuts = [0, 1, 2, 3, 10, 14, 15, 200, 299, 300]
    for kw in ({}, {"intercept": False}, {"l2": 0.3}):
        fit = logistic_blocks(blocks(X, labels, w, cuts=cuts), **kw)
        ref = lt.logistic(X, labels, weights=w, **kw)
        assert_same_logistic(fit, ref)
        assert fit.classes == ("no", "yes") and fit.positive_class == "yes"


def test_logistic_passes_iterations_and_on_iteration():
    # common practice: one pass for the design, one for the start, one per full Newton step
    calls, records = [], []
    src = blocks(SX, SY, sizes=[10, 10, 12])

    def counted():
        calls.append(1)
        return src()

    fit = logistic_blocks(counted, on_iteration=records.append)
    assert [r.iteration for r in records] == list(range(1, fit.convergence.iterations + 1))
    assert records[-1].gradient_norm == pytest.approx(fit.convergence.gradient_norm)
    assert len(calls) >= fit.convergence.iterations + 2
    assert f"{len(calls)} passes" in fit.convergence.message


def test_logistic_iteration_limit_warns_and_is_not_converged():
    # common practice: the documented behaviour at max_iter
    with pytest.warns(IterationLimitWarning, match="iteration limit"):
        fit = logistic_blocks(blocks(SX, SY), max_iter=2)
    assert not fit.convergence.converged and fit.convergence.iterations == 2
    assert fit.convergence.gradient_norm > 1e-10


def test_separated_blocks_raise_and_ridge_is_the_remedy():
    # common practice (Albert & Anderson 1984): completely separated classes have no
    # maximum-likelihood estimate; invented data
    x = np.linspace(-3, 3, 60).reshape(-1, 1)
    yy = (x[:, 0] > 0.8).astype(float)
    with pytest.raises(SeparationError, match="does not exist") as info:
        logistic_blocks(blocks(x, yy, sizes=[7, 23, 30]))
    assert "l2 > 0" in str(info.value) and "beyond +-30" in str(info.value)
    fit = logistic_blocks(blocks(x, yy, sizes=[7, 23, 30]), l2=0.5)
    assert_same_logistic(fit, lt.logistic(x, yy, l2=0.5))


# ---------------------------------------------------------------------------------------
# Properties: blocking and row order do not matter
# ---------------------------------------------------------------------------------------

PX, PY = _invented_design(5, n=120, p=3)
# the logistic design is the same less the large mean of column 0 (a mean of 1e4 puts the
# float64 rounding level of the gradient near 1e-7, above the default tol)
PXL = PX - [1e4 - 2.0, 0.0, 0.0]
PB = PXL @ [0.5, -0.05, 30.0] + np.random.default_rng(6).logistic(size=120) > np.median(PXL @ [0.5, -0.05, 30.0])
PW = np.random.default_rng(7).uniform(0, 2, 120)
P_LS = lt.least_squares(PX, PY, weights=PW)
P_LOGIT = lt.logistic(PXL, PB, weights=PW, l2=0.1)


@settings(max_examples=30, deadline=None)
@given(st.lists(st.integers(1, 40), min_size=1, max_size=12))
def test_property_any_blocking_gives_the_same_least_squares_fit(sizes):
    # invented data; reference: the in-memory fit (common practice: blocking is exact algebra)
    edges = np.minimum(np.cumsum([0] + sizes), 120).tolist()
    cuts = sorted(set(edges + [120]))
    assert_same_linear(least_squares_blocks(blocks(PX, PY, PW, cuts=cuts)), P_LS)


@settings(max_examples=15, deadline=None)
@given(st.lists(st.integers(1, 60), min_size=1, max_size=8))
def test_property_any_blocking_gives_the_same_logistic_fit(sizes):
    # invented data; reference: the in-memory fit
    edges = np.minimum(np.cumsum([0] + sizes), 120).tolist()
    cuts = sorted(set(edges + [120]))
    assert_same_logistic(logistic_blocks(blocks(PXL, PB, PW, cuts=cuts), l2=0.1), P_LOGIT)


@settings(max_examples=20, deadline=None)
@given(st.permutations(list(range(12))))
def test_property_row_order_does_not_matter(perm):
    # invented data; reference: the in-memory fit on the rows in their first order.
    # The permutation moves groups of 10 rows; blocks of 7 then cut them anew.
    order = np.concatenate([np.arange(10 * g, 10 * g + 10)[::-1] if g % 2 else np.arange(10 * g, 10 * g + 10)
                            for g in perm])
    src = blocks(PX[order], PY[order], PW[order], sizes=[7] * 17 + [1])
    assert_same_linear(least_squares_blocks(src), P_LS)
    src = blocks(PXL[order], PB[order], PW[order], sizes=[7] * 17 + [1])
    assert_same_logistic(logistic_blocks(src, l2=0.1), P_LOGIT)


# ---------------------------------------------------------------------------------------
# Bad input: every path names the block, row, column and remedy
# ---------------------------------------------------------------------------------------

X0 = np.arange(24, dtype=float).reshape(8, 3) ** 1.5
B0 = np.array([0, 1, 0, 1, 1, 0, 1, 0])
Y0 = B0.astype(float)  # two values: a valid response for both fits


def _blocks_of(*items):
    return lambda: iter(list(items))


def _with(value, i, j, arr=X0):
    out = arr.copy()
    out[i, j] = value
    return out


@pytest.mark.parametrize("fit", [least_squares_blocks, logistic_blocks])
@pytest.mark.parametrize("source, fragment", [
    (42, "source must be a function of no arguments"),
    (lambda: 5, "returned a int, which is not an iterator"),
    (lambda: iter([]), "yielded no blocks on pass 1"),
    (_blocks_of(X0[:4]), "block 0: the source yielded a ndarray"),
    (_blocks_of((X0[:4], Y0[:4]), (X0[4:],)), "block 1: the source yielded a tuple of length 1"),
    (_blocks_of((X0[:4], Y0[:4]), (X0[4:, 0], Y0[4:])), "block 1 (rows counted within the block): X is 1-D"),
    (_blocks_of((X0[:4], Y0[:4]), (_with(np.nan, 6, 1)[4:], Y0[4:])),
     "block 1 (rows counted within the block): X has a non-finite value (nan) at row 2, column 1"),
    (_blocks_of((X0[:4].astype(object), Y0[:4]), (np.array([[1, "a", 2]] * 4, dtype=object), Y0[4:])),
     "block 1 (rows counted within the block): X has a value that is not a number at row 0, column 1"),
    (_blocks_of((X0[:4], Y0[:4]), (X0[4:, :2], Y0[4:])), "block 1: X has 2 columns but block 0 had 3"),
    (_blocks_of((X0[:4], Y0[:3])), "block 0 (rows counted within the block): y has 3"),
    (_blocks_of((X0[:4], Y0[:4], np.ones(4)), (X0[4:], Y0[4:])), "block 1: no weights are given, but block 0 had them"),
    (_blocks_of((X0[:4], Y0[:4]), (X0[4:], Y0[4:], np.ones(4))), "block 1: weights are given, but block 0 had none"),
    (_blocks_of((X0[:4], Y0[:4], np.ones(4)), (X0[4:], Y0[4:], np.array([1.0, 1, -2, 1]))),
     "block 1: weights has a negative value (-2) at row 2 of the block; weights must be >= 0"),
    (_blocks_of((X0[:4], Y0[:4], np.ones(4)), (X0[4:], Y0[4:], np.array([1.0, np.inf, 1, 1]))),
     "block 1 (rows counted within the block): weights has a non-finite value (inf) at row 1"),
    (_blocks_of((X0[:4], Y0[:4], np.zeros(4)), (X0[4:], Y0[4:], np.zeros(4))), "weights are zero in every block"),
])
def test_bad_sources_and_blocks(fit, source, fragment):
    # common practice: every bad input raises InputError naming block, row, column, remedy
    with pytest.raises(InputError) as info:
        fit(source)
    assert fragment in str(info.value)


def test_a_source_that_returns_the_same_iterator_twice():
    # common practice: a generator object is exhausted after one pass
    gen = blocks(X0, Y0, sizes=[4, 4])()
    with pytest.raises(InputError, match="same iterator as on the previous pass"):
        least_squares_blocks(lambda: gen)


def test_a_source_that_changes_between_passes():
    # common practice: the passes must see the same rows
    state = {"calls": 0}

    def shrinking():
        state["calls"] += 1
        yield X0[:5], Y0[:5]
        if state["calls"] == 1:
            yield X0[5:], Y0[5:]

    with pytest.raises(InputError, match="yielded 1 blocks on pass 2 but 2 on pass 1"):
        least_squares_blocks(shrinking)
    state["calls"] = 0

    def resized():
        state["calls"] += 1
        cut = 4 if state["calls"] == 1 else 5
        yield X0[:cut], Y0[:cut]
        yield X0[cut:], Y0[cut:]

    with pytest.raises(InputError, match="block 0 on pass 2 has 5 rows, but on pass 1 it had 4 rows"):
        least_squares_blocks(resized)


def _changing(first, later):
    """A source whose blocks are ``first`` on pass 1 and ``later`` on every later pass."""
    calls = {"n": 0}

    def source():
        calls["n"] += 1
        return iter(first if calls["n"] == 1 else later)

    return source


CHANGED = "the block source must return the same rows on every call"


@pytest.mark.parametrize("later, fragment", [
    # values changed (noise drawn afresh on each pass: the case of issue #16)
    ([(DX[:200], DY[:200]), (DX[200:] + 1e-9 * np.random.default_rng(1).normal(size=DX[200:].shape), DY[200:])],
     "block 1 on pass 2 differs from the same block on pass 1: X holds other values"),
    # rows reordered within a block, X and y together (sums unchanged)
    ([(DX[:200][::-1], DY[:200][::-1]), (DX[200:], DY[200:])], "block 0 on pass 2 differs"),
    # two rows in the middle of a block swapped, X and y together (sums and end rows unchanged)
    ([(DX[[0, 1, 2, 4, 3] + list(range(5, 200))], DY[[0, 1, 2, 4, 3] + list(range(5, 200))]), (DX[200:], DY[200:])],
     "block 0 on pass 2 differs from the same block on pass 1: X holds other values or rows in another order"),
    # y alone changed
    ([(DX[:200], DY[:200]), (DX[200:], DY[200:] * (1 + 1e-9))], "block 1 on pass 2 differs from the same block on pass 1: y"),
])
def test_least_squares_blocks_refuses_a_source_whose_values_change(later, fragment):
    # issue #16: such a source returned converged=True on the old code.  Source: common
    # practice (the passes of one fit must read one data set)
    first = [(DX[:200], DY[:200]), (DX[200:], DY[200:])]
    with pytest.raises(InputError) as info:
        least_squares_blocks(_changing(first, later))
    assert fragment in str(info.value) and CHANGED in str(info.value)


def test_changed_weights_are_refused():
    # common practice: the weights are part of the data of every pass
    first = [(DX[:200], DY[:200], DW[:200]), (DX[200:], DY[200:], DW[200:])]
    later = [(DX[:200], DY[:200], DW[:200]), (DX[200:], DY[200:], DW[200:][::-1])]
    with pytest.raises(InputError, match="block 1 on pass 2 differs from the same block on pass 1: the weights"):
        least_squares_blocks(_changing(first, later))


@pytest.mark.parametrize("change", ["X", "labels"])
def test_logistic_blocks_refuses_a_source_whose_values_change(change):
    # issue #16; common practice.  Labels moved between rows are seen on the first coded
    # pass (against the first rows and totals of each label of pass 1)
    Xl, yl = (BX[:250], BY[:250]), (BX[250:], BY[250:])
    later = [Xl, (BX[250:] * (1 + 1e-9), BY[250:])] if change == "X" else [Xl, (BX[250:], np.roll(BY[250:], 1))]
    with pytest.raises(InputError) as info:
        logistic_blocks(_changing([Xl, yl], later), l2=0.1)
    assert "block 1 on pass 2 differs from the same block on pass 1" in str(info.value)
    assert CHANGED in str(info.value)


def test_labels_changed_after_the_first_coded_pass_are_refused():
    # common practice: from the second pass on the class codes are compared exactly
    Xl, yl = (BX[:250], BY[:250]), (BX[250:], BY[250:])
    calls = {"n": 0}

    def source():
        calls["n"] += 1
        return iter([Xl, (BX[250:], BY[250:] if calls["n"] < 3 else np.roll(BY[250:], 1))])

    with pytest.raises(InputError, match="block 1 on pass 3 differs from the same block on pass 1: the labels of y"):
        logistic_blocks(source, l2=0.1)


def test_the_same_values_in_another_memory_layout_are_the_same_block():
    """Invariant: the checksum sees values, not memory: blocks read back as Fortran-ordered,
    strided or float32-widened copies of the same numbers are accepted, and the fit is the
    in-memory one.  Source: the in-memory fit; the bound 2 (m - 1) eps sum|x| on the
    difference of two summation orders (Higham 2002, sec. 4.2)."""
    Xf = DX.astype(np.float32).astype(float)
    layouts = [lambda a: a, np.asfortranarray, lambda a: np.repeat(a, 2, axis=0)[::2], lambda a: a.astype(np.float32)]
    calls = {"n": 0}

    def source():
        make = layouts[calls["n"] % len(layouts)]
        calls["n"] += 1
        for lo in range(0, DX.shape[0], 97):
            yield make(Xf[lo : lo + 97]), DY[lo : lo + 97]

    assert_same_linear(least_squares_blocks(source), lt.least_squares(Xf, DY))
    assert calls["n"] >= 2


def test_weights_too_large_for_a_blocked_fit_are_refused():
    # issue #16: weights of 1e308 raised numpy's LinAlgError "SVD did not converge"
    # the total weight leaves float64: refused by that reason, as in memory
    w = np.full(DX.shape[0], 1e308)
    with pytest.raises(InputError, match="case weights add up to more than the largest float64 number"):
        least_squares_blocks(blocks(DX, DY, w))
    with pytest.raises(InputError, match="weights sum to more than float64 holds"):
        logistic_blocks(blocks(BX, BY, np.full(BX.shape[0], 1e308)))
    with pytest.raises(InputError, match="weights sum to more than float64 holds"):
        lt.softmax_blocks(blocks(BX, BY, np.full(BX.shape[0], 1e308)))


def test_a_source_that_needs_arguments_is_refused_before_the_first_pass():
    # common practice (before: the TypeError of the call escaped)
    with pytest.raises(InputError, match="source must be callable with no arguments"):
        least_squares_blocks(lambda path: iter([(X0, Y0)]))


def test_least_squares_design_errors():
    # common practice: the in-memory fit's checks, over all blocks together
    Xr = np.column_stack([X0, X0[:, 0] - 2 * X0[:, 2]])
    with pytest.raises(InputError, match=r"rank deficient: column 3 \('x4'\)"):
        least_squares_blocks(blocks(Xr, Y0, sizes=[3, 5]))
    with pytest.raises(InputError, match=r"column 1 \('x2'\) is constant on the rows used"):
        least_squares_blocks(blocks(_with(5.0, slice(None), 1), Y0, sizes=[3, 5]))
    with pytest.raises(InputError, match="y is constant"):
        least_squares_blocks(blocks(X0, np.full(8, 2.5), sizes=[3, 5]))
    with pytest.raises(InputError, match="rows with positive weight but the model has 4 parameters"):
        least_squares_blocks(blocks(X0[:3], Y0[:3], sizes=[1, 2]))
    with pytest.raises(InputError, match="l2 must be a finite number >= 0"):
        least_squares_blocks(blocks(X0, Y0), l2=-1.0)
    with pytest.raises(InputError, match="intercept must be True or False"):
        least_squares_blocks(blocks(X0, Y0), intercept="yes")
    with pytest.raises(InputError, match="names has 2 entries but X has 3 columns"):
        least_squares_blocks(blocks(X0, Y0), names=["a", "b"])


def test_logistic_label_errors():
    # common practice: exactly two labels over all blocks, the same on every pass
    with pytest.raises(InputError, match=r"block 1: y has a third label 2 at row 1 of the block \(after 0 and 1\)"):
        logistic_blocks(_blocks_of((X0[:4], B0[:4]), (X0[4:], np.array([1, 2, 0, 1]))))
    with pytest.raises(InputError, match=r"block 0: y has a third label 'c' at row 2 of the block"):
        logistic_blocks(_blocks_of((X0[:4], np.array(["a", "b", "c", "a"])),))
    with pytest.raises(InputError, match=r"only one class \(1\) over all blocks"):
        logistic_blocks(_blocks_of((X0[:4], np.ones(4, int)), (X0[4:], np.ones(4, int))))
    with pytest.raises(InputError, match="mixes label types across blocks"):
        logistic_blocks(_blocks_of((X0[:4], np.array(["a", "b", "a", "b"])), (X0[4:], B0[4:])))
    with pytest.raises(InputError, match="block 1 .*: y has a missing label at row 3"):
        logistic_blocks(_blocks_of((X0[:4], B0[:4].astype(float)), (X0[4:], np.array([1.0, 0, 1, np.nan]))))
    state = {"calls": 0}

    def relabelled():
        state["calls"] += 1
        yield X0[:4], B0[:4]
        yield X0[4:], (B0[4:] if state["calls"] == 1 else np.array([0, 1, 5, 1]))

    with pytest.raises(InputError, match="block 1: y has the label 5 at row 2 of the block, which the first pass did not see"):
        logistic_blocks(relabelled)


def test_logistic_design_and_option_errors():
    # common practice: the in-memory fit's checks
    Xc = _with(3.0, slice(None), 2)
    with pytest.raises(InputError, match=r"X column 2 \('x3'\) is constant on the rows used"):
        logistic_blocks(blocks(Xc, B0, sizes=[4, 4]))
    Xr = np.column_stack([X0[:, :2], X0[:, 0] + X0[:, 1]])
    with pytest.raises(InputError, match=r"rank deficient on the rows used: column 2 \('x3'\) is a linear combination of 'x1', 'x2'"):
        logistic_blocks(blocks(Xr, B0, sizes=[4, 4]))
    with pytest.raises(InputError, match="no successes on the rows with positive weight"):
        logistic_blocks(blocks(X0, B0, np.where(B0 == 1, 0.0, 1.0), sizes=[4, 4]))
    for kw, fragment in (({"tol": 0}, "tol must be a finite number > 0"), ({"max_iter": 0}, "max_iter must be >= 1"),
                         ({"on_iteration": 3}, "on_iteration must be a callable")):
        with pytest.raises(InputError, match=fragment):
            logistic_blocks(blocks(X0, B0), **kw)


def test_source_and_arrays_are_exclusive():
    # common practice: one way of passing the data
    with pytest.raises(InputError, match="not both"):
        least_squares_blocks(blocks(X0, Y0), X=X0, y=Y0)
    with pytest.raises(InputError, match="no data"):
        logistic_blocks()
    with pytest.raises(InputError, match=r"must all be dask arrays \(X is a ndarray, y is a ndarray\)"):
        least_squares_blocks(X=X0, y=Y0)


def test_blocks_module_never_imports_dask_for_a_source():
    # common practice: dask is an optional extra, imported only when a dask array is passed
    script = (
        "import sys, json, numpy as np\n"
        "from lintools.blocks import least_squares_blocks, logistic_blocks\n"
        "X = np.random.default_rng(0).normal(size=(50, 2)); y = X @ [1.0, 2.0] + X[:, 0] ** 2\n"
        "least_squares_blocks(lambda: iter([(X[:20], y[:20]), (X[20:], y[20:])]))\n"
        "logistic_blocks(lambda: iter([(X[:20], y[:20] > 1), (X[20:], y[20:] > 1)]), l2=1.0)\n"
        "print(json.dumps(sorted(m for m in sys.modules if m.split('.')[0] in ('dask', 'distributed'))))\n"
    )
    proc = subprocess.run([sys.executable, "-c", script], capture_output=True, text=True, timeout=120)
    assert proc.returncode == 0, proc.stderr
    assert json.loads(proc.stdout.strip().splitlines()[-1]) == []
