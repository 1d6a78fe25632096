"""Reports print clearly at any magnitude, and records hold read-only arrays (issue 16).

Sources: exact rational arithmetic (tests/_exact.py) for the exact fit; statsmodels OLS
on the reduced design for the identified coefficients of a minimum-norm fit (an estimable
coefficient has the value and standard error of the fit without the aliased column: a
fact of linear models, Searle 1971, ch. 5); statsmodels' shipped spector and anes96 data
for real logistic and softmax records.  The rendering properties state their invariant:
no two columns ever touch.
"""

from __future__ import annotations

import dataclasses
import math

import numpy as np
import pytest
import statsmodels.api as sm
from _exact import exact_least_squares
from hypothesis import given, settings
from hypothesis import strategies as st

import lintools as lt
from lintools.models.records import _wald_table, render_table

NUMBERS = st.floats(allow_nan=True, allow_infinity=True, width=64)


def _table_rows(text):
    """The rows of the first coefficient table in a report (after the dashed rule)."""
    lines = text.splitlines()
    start = next(i for i, line in enumerate(lines) if line and set(line) == {"-"})
    rows = []
    for line in lines[start + 1 :]:
        if not line.strip() or line.startswith("- not defined"):
            break
        rows.append(line)
    return lines[start - 1], rows


def _assert_columns_apart(header, rows):
    """Every row has the term and six figures separated by blanks, right edges aligned."""
    for row in rows:
        # the floor of the p column is one cell in two words
        assert len(row.replace("below 1e-300", "below_1e-300").split()) == 7, row
        assert len(row) == len(header), (row, header)


# ---------------------------------------------------------------------------------------
# exact fits, zero standard errors, non-identified coefficients
# ---------------------------------------------------------------------------------------


def _exact_data():
    X = np.array([[0, 1], [1, 0], [2, 3], [3, 1], [4, 4.0], [5, 2]])
    return X, 1 + 2 * X[:, 0] - X[:, 1]


@pytest.mark.parametrize("cov", ["classical", "HC0", "HC3"])
def test_exact_fit_prints_no_t_or_p_and_says_why(cov):
    """Regression (issue 16: an exact fit printed run-together columns).  Zero residuals:
    the coefficients are exact (oracle: exact rational arithmetic), the standard errors 0,
    and t, p and F are not defined: the table shows '-', the facts say 'F not defined'."""
    X, y = _exact_data()
    fit = lt.least_squares(X, y, covariance=cov)
    theta, _, rss = exact_least_squares(X, y)
    assert rss == 0 and [fit.intercept, *fit.coefficients] == [float(t) for t in theta]
    assert fit.deviance == 0 and np.all(fit.standard_errors == 0)
    table = fit.coefficient_table()
    assert np.all(np.isnan(table.statistic)) and np.all(np.isnan(table.p_value))
    assert np.array_equal(table.lower, table.estimate) and np.array_equal(table.upper, table.estimate)
    text = fit.report()
    header, rows = _table_rows(text)
    _assert_columns_apart(header, rows)
    for row in rows:
        assert row.split()[3:5] == ["-", "-"], row
    assert "F test, every slope zero  not defined (zero residuals: an exact fit)" in text
    assert "- not defined: no t or p where the standard error is zero" in text
    assert "nan" not in text


def test_near_exact_fit_keeps_its_columns_apart():
    """Regression: residuals at the rounding level give t statistics near 1e16, which were
    printed with three decimals and ran into the p column."""
    rng = np.random.default_rng(0)
    X = rng.normal(size=(8, 2))
    y = X @ [1.0, 2.0] + 3.0
    fit = lt.least_squares(X, y)
    assert 0 < fit.deviance < 1e-25
    header, rows = _table_rows(fit.report())
    _assert_columns_apart(header, rows)
    assert all("e+" in row.split()[3] for row in rows)


def _stackloss():
    # Brownlee's stack-loss plant data as shipped by statsmodels' datasets.
    d = sm.datasets.stackloss.load_pandas()
    return d.exog.to_numpy(), d.endog.to_numpy()


def test_minimum_norm_report_gives_no_t_or_p_for_coefficients_that_are_not_identified():
    """Regression (issue 16: the minimum-norm report printed t and p for coefficients that
    are not identified and stated the rank two ways).  With x4 = 2 x1, beta_1 and beta_4 are
    not identified; beta_2, beta_3 and the intercept are, and equal (value and standard
    error) those of the fit without x4 (oracle: statsmodels OLS on the reduced design)."""
    X, y = _stackloss()
    Xd = np.column_stack([X, 2.0 * X[:, 0]])
    fit = lt.least_squares(Xd, y, rank_deficient="minimum_norm")
    ref = sm.OLS(y, sm.add_constant(X)).fit()
    ident = [0, 2, 3]  # intercept, x2, x3 in the table's order
    table = fit.coefficient_table()
    assert np.allclose(table.estimate[ident], ref.params[ident], rtol=1e-10)
    assert np.allclose(table.standard_error[ident], ref.bse[ident], rtol=1e-10)
    assert np.allclose(table.p_value[ident], ref.pvalues[ident], rtol=1e-8)
    for i in (1, 4):
        assert np.isnan(table.standard_error[i]) and np.isnan(table.statistic[i]) and np.isnan(table.p_value[i])
    text = fit.report()
    header, rows = _table_rows(text)
    _assert_columns_apart(header, rows)
    for i, row in enumerate(rows):
        assert (row.split()[2:] == ["-"] * 5) == (i in (1, 4)), row
    assert "the coefficients of x1, x4 are not identified" in text
    assert text.count("rank") == 2 and "rank-deficient" in text  # one figure
    assert "\n  rank of the design           4\n" in text and "\n  parameters                   5\n" in text


def test_a_constant_column_leaves_the_intercept_not_identified():
    """A column constant at 4 is the intercept times 4: neither the intercept nor its
    coefficient is identified in the minimum-norm fit; the other slopes are (oracle:
    statsmodels OLS without the constant column)."""
    X, y = _stackloss()
    Xd = np.column_stack([X, np.full(len(y), 4.0)])
    fit = lt.least_squares(Xd, y, rank_deficient="minimum_norm")
    assert np.isnan(fit.intercept_standard_error) and np.isnan(fit.standard_errors[3])
    ref = sm.OLS(y, sm.add_constant(X)).fit()
    assert np.allclose(fit.standard_errors[:3], ref.bse[1:], rtol=1e-10)
    text = fit.report()
    assert "the coefficients of intercept, x4 are not identified" in text
    assert "(intercept)" not in text


# ---------------------------------------------------------------------------------------
# any magnitude: the renderer and every fit record's report
# ---------------------------------------------------------------------------------------


@settings(max_examples=60, deadline=None)
@given(st.lists(st.tuples(NUMBERS, NUMBERS), min_size=1, max_size=6),
       st.sampled_from([None, 3.0, 1e6]), st.sampled_from(["t", "z"]))
def test_property_table_columns_never_touch_whatever_the_numbers(pairs, df, label):
    """Invariant: for any estimates and standard errors (any sign and magnitude, 0, inf,
    NaN) every rendered row has the term and six blank-separated figures, right-aligned
    under the header; t and p are '-' exactly where they are not defined."""
    est = np.array([a for a, _ in pairs])
    se = np.array([b for _, b in pairs])
    table = _wald_table(tuple(f"term{i}" for i in range(len(pairs))), est, se, 0.95, df)
    text = render_table(table, label)
    lines = text.splitlines()
    header, rows = lines[0], lines[2 : 2 + len(pairs)]
    _assert_columns_apart(header, rows)
    for row, e, s in zip(rows, est, se):
        defined = s > 0 and math.isfinite(e)
        assert (row.split()[3] != "-") == defined, row


def _hostile(fit, values):
    """The fit with its coefficients and standard errors replaced (a rendering test)."""
    shape = np.shape(fit.coefficients)
    coef = np.resize(values, shape)
    se = np.resize(np.abs(values[::-1]), shape)
    return dataclasses.replace(fit, coefficients=coef, standard_errors=se)


HOSTILE = np.array([1e300, -1e-300, -1.2345678e-299, 5e-324, -1.7976931348623157e308, np.nan, 0.0, -0.0])


def test_linear_report_at_any_magnitude():
    """Regression: estimates of 1e300 or -1e-300 (14 characters) ran into their neighbours."""
    X, y = _stackloss()
    fit = _hostile(lt.least_squares(X, y), HOSTILE)
    header, rows = _table_rows(fit.report())
    _assert_columns_apart(header, rows)


def test_logistic_report_at_any_magnitude_with_profile_intervals():
    """The logistic report (statsmodels' spector data), its coefficients replaced by hostile
    magnitudes, keeps every column apart, its profile-interval table too."""
    d = sm.datasets.spector.load_pandas()
    fit = lt.logistic(d.exog, d.endog)
    fit = _hostile(fit, HOSTILE)
    fit = dataclasses.replace(fit, profile_intervals=np.resize(HOSTILE, (4, 2)), profile_level=0.95)
    text = fit.report()
    header, rows = _table_rows(text)
    _assert_columns_apart(header, rows)
    lines = text.splitlines()
    start = lines.index(next(l for l in lines if l.startswith("Profile"))) + 2
    prof = lines[start : lines.index("", start)]
    assert len(prof) == 4
    for row in prof:
        assert len(row.split()) == 3, row


def test_softmax_report_at_any_magnitude():
    """The softmax report (statsmodels' anes96 data, three columns), coefficients replaced
    by hostile magnitudes, keeps every column apart in every class's table."""
    d = sm.datasets.anes96.load_pandas().data
    fit = lt.softmax(d[["logpopul", "selfLR", "age"]].to_numpy(), d["PID"].to_numpy())
    fit = _hostile(fit, HOSTILE)
    text = fit.report()
    blocks = text.split("\nclass ")[1:]
    assert len(blocks) == len(fit.classes) - 1
    for block in blocks:
        header, rows = _table_rows(block)
        _assert_columns_apart(header, rows)


# ---------------------------------------------------------------------------------------
# read-only records
# ---------------------------------------------------------------------------------------


def _array_fields(record):
    out = []
    for f in dataclasses.fields(record):
        v = getattr(record, f.name)
        if isinstance(v, np.ndarray):
            out.append((f.name, v))
    return out


def _records():
    X, y = _stackloss()
    d = sm.datasets.spector.load_pandas()
    a = sm.datasets.anes96.load_pandas().data
    return {
        "linear": (lt.least_squares(X, y, diagnostics=True), X),
        "logistic": (lt.logistic(d.exog, d.endog, profile=True), d.exog.to_numpy()),
        "softmax": (lt.softmax(a[["logpopul", "selfLR"]].to_numpy(), a["PID"].to_numpy()),
                    a[["logpopul", "selfLR"]].to_numpy()),
    }


@pytest.mark.parametrize("kind", ["linear", "logistic", "softmax"])
def test_records_hold_read_only_arrays(kind, tmp_path):
    """Regression (issue 16: 'fit.coefficients[0] = 99' worked).  Every array of every fit
    record, of its coefficient table and of a record read back from a model file refuses
    writes; the methods that hand out arrays (linear_predictor, mean, labels) return new
    writable ones that share no memory with the record."""
    fit, X = _records()[kind]
    with pytest.raises(ValueError, match="read-only"):
        fit.coefficients[0] = 99
    table = fit.coefficient_table()
    path = tmp_path / "model.json"
    lt.save(fit, path)
    loaded = lt.load(path)
    for record in (fit, table, loaded):
        fields = _array_fields(record)
        assert fields
        for name, value in fields:
            assert not value.flags.writeable, name
    outs = [fit.linear_predictor(X), fit.mean(X)] + ([fit.labels(X)] if kind != "linear" else [])
    for out in outs:
        assert out.flags.writeable
        out[...] = out  # writable indeed
        for _, value in _array_fields(fit):
            assert not np.shares_memory(out, value)


def test_a_callers_array_is_not_frozen_by_a_record():
    """A record copies what it freezes: the caller's arrays stay writable."""
    X, y = _stackloss()
    Xw, yw = X.copy(), y.copy()
    fit = lt.least_squares(Xw, yw)
    assert Xw.flags.writeable and yw.flags.writeable
    coef = np.array(fit.coefficients)
    replaced = dataclasses.replace(fit, coefficients=coef)
    assert coef.flags.writeable and not replaced.coefficients.flags.writeable
    assert not np.shares_memory(coef, replaced.coefficients)


@pytest.mark.parametrize("k", [-500, -3, 0, 3, 500])
def test_minimum_norm_solution_in_the_callers_units_any_column_scale(k):
    """With x4 = 2^k x1 exactly, the minimum of |beta| over the solutions is, in closed form,
    beta_1 = b_1 / (1 + 4^k), beta_4 = 2^k b_1 / (1 + 4^k), the other slopes as in the fit
    without x4 (b; a fact of linear algebra).  Checked in the caller's norm (1e-12 for
    |k| <= 3); for any k the estimable beta_1 + 2^k beta_4 = b_1 and the identified slopes
    (1e-12), with no inf or NaN where the old SVD of the unscaled design overflowed."""
    X, y = _stackloss()
    b = lt.least_squares(X, y).coefficients
    v = 2.0**k
    fit = lt.least_squares(np.column_stack([X, X[:, 0] * v]), y, rank_deficient="minimum_norm")
    assert np.all(np.isfinite(fit.coefficients)) and np.all(np.isfinite(fit.covariance))
    assert abs(fit.coefficients[0] + v * fit.coefficients[3] - b[0]) <= 1e-12 * abs(b[0])
    assert np.allclose(fit.coefficients[1:3], b[1:], rtol=1e-12, atol=0)
    if abs(k) <= 3:
        exact = np.r_[b[0] / (1 + v * v), b[1:], v * b[0] / (1 + v * v)]
        assert np.linalg.norm(fit.coefficients - exact) <= 1e-12 * np.linalg.norm(exact)
