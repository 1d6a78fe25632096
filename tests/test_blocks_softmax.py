"""Softmax over row blocks (lintools.blocks.softmax_blocks) against the in-memory fit.

Sources named beside each check: the in-memory lintools.softmax on the concatenated rows
(itself checked against statsmodels MNLogit and scikit-learn in test_softmax.py) on the
American National Election Studies 1996 extract shipped by statsmodels (anes96, an open
dataset: columns logpopul, selfLR, age, educ, income; target PID, 7 classes; the binary
target vote for two classes).  Case weights and the designs of the property test and the
separation test are invented, only to exercise blocking; the reference is then the
in-memory fit.
"""

from __future__ import annotations

import warnings

import numpy as np
import pytest
import statsmodels.api as sm
from hypothesis import given, settings
from hypothesis import strategies as st

import lintools as lt
from lintools import InputError, IterationLimitWarning, SeparationError
from lintools.blocks import softmax_blocks

RTOL = 1e-10

ANES = sm.datasets.anes96.load_pandas().data
COLUMNS = ["logpopul", "selfLR", "age", "educ", "income"]
AX = ANES[COLUMNS].to_numpy(float)
AY = ANES["PID"].to_numpy()  # 0.0 .. 6.0, 7 classes
AV = ANES["vote"].to_numpy()  # two classes
N = AX.shape[0]
# invented case weights, only to exercise weighted blocking (some rows at zero weight)
AW = np.random.default_rng(81).uniform(0.1, 2.5, N)
AW[[0, 17, 500]] = 0.0
CUTS = [0, 1, 2, 5, 100, 101, 400, 731, N - 1, N]  # uneven, blocks of one row


def blocks(X, y, w=None, cuts=CUTS):
    """A source: a function returning a fresh generator of row blocks at the given cuts."""

    def source():
        for a, b in zip(cuts[:-1], cuts[1:]):
            if b > a:
                yield (X[a:b], y[a:b]) if w is None else (X[a:b], y[a:b], w[a:b])

    return source


def rel(a, b):
    a, b = np.asarray(a, float), np.asarray(b, float)
    return float(np.max(np.abs(a - b) / np.maximum(np.abs(b), 1e-300)))


def rel_rows(a, b):
    """Error of each entry relative to the largest entry of its row (one term over the
    classes): in the symmetric form a term's coefficients sum to zero over the classes, so
    a single entry can be far smaller than the term's own scale."""
    a, b = np.atleast_2d(np.asarray(a, float)), np.atleast_2d(np.asarray(b, float))
    scale = np.maximum(np.max(np.abs(b), axis=1, keepdims=True), 1e-300)
    return float(np.max(np.abs(a - b) / scale))


def rel_cov(a, b):
    """Covariance error scaled by sqrt(V_ii V_jj)."""
    d = np.sqrt(np.abs(np.diag(b)))
    d = np.where(d > 0, d, 1.0)
    return float(np.max(np.abs(np.asarray(a) - np.asarray(b)) / np.outer(d, d)))


def assert_same_softmax(f, g, rtol=RTOL):
    assert f.convergence.converged and g.convergence.converged
    assert f.convergence.gradient_norm <= 1e-10  # the default tol
    close = rel_rows if g.reference_class is None else rel
    assert close(f.coefficients, g.coefficients) <= rtol
    assert close(f.standard_errors, g.standard_errors) <= rtol
    if g.with_intercept:
        assert close(f.intercept, g.intercept) <= rtol
        assert close(f.intercept_standard_error, g.intercept_standard_error) <= rtol
    assert f.covariance.shape == g.covariance.shape
    assert rel_cov(f.covariance, g.covariance) <= rtol
    for name in ("log_likelihood", "deviance", "null_deviance", "aic", "bic"):
        assert rel(getattr(f, name), getattr(g, name)) <= rtol, name
    if g.l2 == 0:
        assert rel(f.lr_statistic, g.lr_statistic) <= rtol
        assert rel(f.lr_p_value, g.lr_p_value) <= 1e-8
    else:
        assert np.isnan(f.lr_statistic) and np.isnan(f.lr_p_value)
    assert f.lr_degrees_of_freedom == g.lr_degrees_of_freedom
    assert f.classes == g.classes and f.reference_class == g.reference_class
    assert f.parameter_terms() == g.parameter_terms()
    assert f.n_observations == pytest.approx(g.n_observations, rel=1e-14)


CASES = [
    ({}, False),
    ({}, True),
    ({"l2": 2.0, "reference": None}, True),
    ({"reference": 3.0}, False),
    ({"reference": 6.0, "l2": 0.5}, True),
    ({"intercept": False}, True),
    ({"intercept": False, "l2": 2.0, "reference": None}, True),
]


@pytest.mark.parametrize("kw, weighted", CASES)
def test_anes96_softmax_equals_in_memory(kw, weighted):
    # source: the in-memory lintools.softmax on statsmodels' anes96 data (PID, 7 classes).
    # Measured worst LRE over these cases, reference class: coefficients 12.3, intercepts
    # 13.8, standard errors 14.1, covariance 13.8, log-likelihood 15.7, null deviance 15.4,
    # LR statistic 14.6.  Symmetric form (l2 = 2): coefficients 11.4 relative to each
    # term's largest entry (9.7 elementwise, on an entry 1/150 of its row), standard
    # errors 11.3, covariance 11.0.  There the slopes' shared shift has curvature l2 only;
    # against a solve in the subspace where each term sums to zero over the classes, the
    # in-memory and the blocked fit are both off by about 1e-12, so this is the in-memory
    # fit's own rounding level, not an error of blocking.
    w = AW if weighted else None
    fit = softmax_blocks(blocks(AX, AY, w), **kw)
    ref = lt.softmax(AX, AY, weights=w, **kw)
    assert_same_softmax(fit, ref)
    assert fit.convergence.solver == "newton" and "passes over the blocks" in fit.convergence.message


def test_anes96_two_classes_equals_in_memory_softmax():
    # source: the in-memory lintools.softmax on statsmodels' anes96 data, target vote (two
    # classes: one free column, the shape the solvers hand one-output losses)
    fit = softmax_blocks(blocks(AX, AV, AW))
    assert_same_softmax(fit, lt.softmax(AX, AV, weights=AW))


def test_dataframe_blocks_give_names_and_string_labels():
    # source: statsmodels' anes96 data as DataFrames, PID as text labels; names come from
    # the first block; the reference is the in-memory fit
    frame = ANES[COLUMNS]
    text = np.array(["party " + str(int(v)) for v in AY], dtype=object)
    src = lambda: iter([(frame.iloc[:300], text[:300]), (frame.iloc[300:], text[300:])])  # noqa: E731
    fit = softmax_blocks(src, reference="party 4")
    ref = lt.softmax(frame, text, reference="party 4")
    assert fit.names == tuple(COLUMNS)
    assert_same_softmax(fit, ref)


def test_passes_iterations_and_on_iteration():
    # common practice: one pass for the labels and design, one per full Newton step
    calls, records = [], []
    src = blocks(AX, AY)

    def counted():
        calls.append(1)
        return src()

    fit = softmax_blocks(counted, on_iteration=records.append)
    assert [r.iteration for r in records] == list(range(1, fit.convergence.iterations + 1))
    assert records[-1].gradient_norm == pytest.approx(fit.convergence.gradient_norm)
    assert len(calls) >= fit.convergence.iterations + 2
    assert f"{len(calls)} passes" in fit.convergence.message


def test_iteration_limit_warns_and_is_not_converged():
    # common practice: the documented behaviour at max_iter
    with pytest.warns(IterationLimitWarning, match="iteration limit"):
        fit = softmax_blocks(blocks(AX, AY), max_iter=2)
    assert not fit.convergence.converged and fit.convergence.iterations == 2


def test_inputs_untouched():
    # common practice: inputs are never modified
    Xc, yc, wc = AX.copy(), AY.copy(), AW.copy()
    softmax_blocks(blocks(AX, AY, AW), l2=1.0, reference=None)
    assert np.array_equal(AX, Xc) and np.array_equal(AY, yc) and np.array_equal(AW, wc)


# ---------------------------------------------------------------------------------------
# Separation
# ---------------------------------------------------------------------------------------


def test_separated_blocks_raise_and_ridge_is_the_remedy():
    # common practice (Albert & Anderson 1984): classes ordered by one column without
    # overlap are completely separated (scores -M x, 0, M x rank every row's own class
    # first), so the estimate does not exist; invented data
    x = np.column_stack([np.linspace(-3, 3, 90), np.cos(np.arange(90.0))])
    cls = np.where(x[:, 0] < -1.0, "low", np.where(x[:, 0] > 1.0, "high", "mid"))
    src = blocks(x, cls, cuts=[0, 1, 20, 61, 90])
    with pytest.raises(SeparationError, match="does not exist") as info:
        softmax_blocks(src)
    assert "l2 > 0" in str(info.value) and "ahead of every other by more than 30" in str(info.value)
    fit = softmax_blocks(src, l2=0.5)
    assert_same_softmax(fit, lt.softmax(x, cls, l2=0.5))


# ---------------------------------------------------------------------------------------
# Property: blocking does not matter
# ---------------------------------------------------------------------------------------

# invented, only to exercise blocking; the reference is the in-memory fit
_rng = np.random.default_rng(82)
PX = _rng.normal(size=(120, 3)) * [1.0, 20.0, 0.05] + [3.0, -40.0, 0.0]
_scores = np.column_stack([np.zeros(120), PX @ [0.8, 0.02, 9.0], PX @ [-0.5, -0.03, 4.0], 0.3 + PX @ [0.1, 0.0, -6.0]])
PY = np.argmax(_scores + _rng.gumbel(size=(120, 4)), axis=1)
PW = _rng.uniform(0.0, 2.0, 120)
P_REF = lt.softmax(PX, PY, weights=PW)
P_SYM = lt.softmax(PX, PY, weights=PW, l2=1.0, reference=None)


@settings(max_examples=20, deadline=None)
@given(st.lists(st.integers(1, 50), min_size=1, max_size=10), st.booleans())
def test_property_any_blocking_gives_the_same_fit(sizes, symmetric):
    # invented data; reference: the in-memory fit (common practice: blocking is exact algebra)
    edges = np.minimum(np.cumsum([0] + sizes), 120).tolist()
    cuts = sorted(set(edges + [120]))
    kw = {"l2": 1.0, "reference": None} if symmetric else {}
    assert_same_softmax(softmax_blocks(blocks(PX, PY, PW, cuts=cuts), **kw), P_SYM if symmetric else P_REF)


# ---------------------------------------------------------------------------------------
# Bad input: every path names the block, row, column and remedy
# ---------------------------------------------------------------------------------------

X0 = np.arange(30, dtype=float).reshape(10, 3) ** 1.5
X0[:, 1] = np.sin(np.arange(10.0))
Y0 = np.array([0, 1, 2, 0, 1, 2, 2, 1, 0, 1])


def _blocks_of(*items):
    return lambda: iter(list(items))


@pytest.mark.parametrize("source, kw, fragment", [
    (42, {}, "source must be a function of no arguments"),
    (_blocks_of((X0[:5], Y0[:5]), (X0[5:, :2], Y0[5:])), {}, "block 1: X has 2 columns but block 0 had 3"),
    (_blocks_of((X0[:5], Y0[:5]), (np.where(np.arange(5)[:, None] == 3, np.nan, X0[5:]), Y0[5:])), {},
     "block 1 (rows counted within the block): X has a non-finite value (nan) at row 3, column 0"),
    (_blocks_of((X0[:5], Y0[:5], np.ones(5)), (X0[5:], Y0[5:], np.array([1.0, 1, 1, -1, 1]))), {},
     "block 1: weights has a negative value (-1) at row 3 of the block; weights must be >= 0"),
    (_blocks_of((X0[:5], Y0[:5], np.zeros(5)), (X0[5:], Y0[5:], np.zeros(5))), {}, "weights are zero in every block"),
    (_blocks_of((X0[:5], np.ones(5, int)), (X0[5:], np.ones(5, int))), {},
     "y has only one class (1) over all blocks; a softmax model needs at least two"),
    (_blocks_of((X0[:5], Y0[:5], np.where(Y0[:5] == 2, 0.0, 1.0)), (X0[5:], Y0[5:], np.where(Y0[5:] == 2, 0.0, 1.0))),
     {}, "class 2 of y (first seen at row 2 of block 0) has zero total weight over all blocks"),
    (_blocks_of((X0[:5], Y0[:5].astype(float)), (X0[5:], np.array([1.0, 0, np.nan, 1, 2]))), {},
     "block 1 (rows counted within the block): y has a missing label at row 2"),
    (_blocks_of((X0[:5], np.array(list("abcab"))), (X0[5:], Y0[5:])), {}, "mixes label types across blocks"),
    (_blocks_of((X0[:5], Y0[:5]), (X0[5:], Y0[5:])), {"reference": 7}, "reference=7 is neither 'first', None, nor a class"),
    (_blocks_of((X0[:5], Y0[:5]), (X0[5:], Y0[5:])), {"reference": None},
     "reference=None (the symmetric form) with l2 = 0"),
    (_blocks_of((np.column_stack([X0[:5], 2 * X0[:5, 0]]), Y0[:5]), (np.column_stack([X0[5:], 2 * X0[5:, 0]]), Y0[5:])),
     {}, "rank deficient on the rows used: column 3 ('x4')"),
    (_blocks_of((np.column_stack([X0[:5], np.full(5, 2.0)]), Y0[:5]), (np.column_stack([X0[5:], np.full(5, 2.0)]), Y0[5:])),
     {}, "X column 3 ('x4') is constant on the rows used"),
    (_blocks_of((np.column_stack([X0[:3]] * 2), Y0[:3]),), {}, "X has 7 columns with the intercept but only 3 rows"),
    (_blocks_of((X0, Y0)), {"tol": 0}, "tol must be a finite number > 0"),
    (_blocks_of((X0, Y0)), {"max_iter": 0}, "max_iter must be >= 1"),
    (_blocks_of((X0, Y0)), {"on_iteration": 3}, "on_iteration must be a callable"),
    (_blocks_of((X0, Y0)), {"intercept": "yes"}, "intercept must be True or False"),
    (_blocks_of((X0, Y0)), {"names": ["a"]}, "names has 1 entries but X has 3 columns"),
    (_blocks_of((X0, Y0)), {"X": X0}, "not both"),
])
def test_bad_sources_and_blocks(source, kw, fragment):
    # common practice: every bad input raises InputError naming block, row, column, remedy
    with pytest.raises(InputError) as info:
        softmax_blocks(source, **kw)
    assert fragment in str(info.value)


def test_a_label_not_seen_on_the_first_pass():
    # common practice: the passes must see the same rows
    state = {"calls": 0}

    def relabelled():
        state["calls"] += 1
        yield X0[:5], Y0[:5]
        yield X0[5:], (Y0[5:] if state["calls"] == 1 else np.array([0, 1, 9, 1, 2]))

    with pytest.raises(InputError, match="block 1: y has the label 9 at row 2 of the block, which the first pass did not see"):
        softmax_blocks(relabelled)


def test_a_source_whose_values_change_is_refused():
    # issue #16 (a changing source gave a converged fit); common practice: one data set per fit
    calls = {"n": 0}

    def source():
        calls["n"] += 1
        noise = 0.0 if calls["n"] == 1 else 1e-9
        yield AX[:400], AY[:400]
        yield AX[400:] + noise, AY[400:]

    with pytest.raises(InputError, match="block 1 on pass 2 differs from the same block on pass 1: X holds other values"):
        softmax_blocks(source)
    calls["n"] = 0

    def relabelled():
        calls["n"] += 1
        yield AX[:400], AY[:400]
        yield AX[400:], AY[400:] if calls["n"] == 1 else AY[400:][::-1]

    with pytest.raises(InputError, match="the block source must return the same rows on every call"):
        softmax_blocks(relabelled)


def test_binary_blocked_fit_still_names_a_third_label():
    # common practice: the label collection of the softmax fit leaves the binary fit's rule
    # (exactly two labels, the third one named) unchanged
    with pytest.raises(InputError, match=r"block 0: y has a third label 2 at row 2 of the block \(after 0 and 1\)"):
        lt.logistic_blocks(_blocks_of((X0[:5], Y0[:5]), (X0[5:], Y0[5:])))
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        fit = softmax_blocks(_blocks_of((X0[:5], Y0[:5]), (X0[5:], Y0[5:])), l2=1.0)
    assert fit.classes == (0, 1, 2)
