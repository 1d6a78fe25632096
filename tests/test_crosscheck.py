"""Comparing delivered coefficients with a refit, and the implied ridge strength."""

import numpy as np
import pytest
import sklearn.linear_model
import statsmodels.api as sm
from scipy import stats

import lintools as lt
from lintools import InputError
from lintools.exchange.crosscheck import compare_coefficients, implied_l2


def _stackloss():
    # statsmodels' stack-loss plant data.
    d = sm.datasets.stackloss.load_pandas()
    return d.exog, d.endog


def test_wald_comparison_against_a_hand_computation():
    X, y = _stackloss()
    fit = lt.least_squares(X, y)
    delivered = fit.coefficients + np.array([0.1, -0.2, 0.05])
    cmp = compare_coefficients(fit, delivered, fit.intercept + 3.0)
    # Hand computation with statsmodels' covariance (oracle) and SciPy's chi-square tail.
    ref = sm.OLS(y, sm.add_constant(X)).fit()
    d = np.r_[3.0, 0.1, -0.2, 0.05]
    W = d @ np.linalg.solve(ref.cov_params().to_numpy(), d)
    assert np.isclose(cmp.wald_statistic, W, rtol=1e-9)
    assert cmp.wald_degrees_of_freedom == 4
    assert np.isclose(cmp.wald_p_value, stats.chi2.sf(W, 4), rtol=1e-9)
    assert np.allclose(cmp.difference_in_se, d / ref.bse.to_numpy(), rtol=1e-9)


def test_score_test_against_the_restricted_regression():
    X, y = _stackloss()
    fit = lt.least_squares(X, y)
    beta0 = fit.coefficients * 1.1
    cmp = compare_coefficients(fit, beta0, X=X, y=y)
    # Hand computation (common practice, the LM test of beta = beta0 with a free
    # intercept): S = (RSS0 - RSS1) / (RSS0 / n), RSS0 = restricted residual sum of squares.
    Xa, ya = X.to_numpy(), y.to_numpy()
    r0 = ya - Xa @ beta0
    r0 = r0 - r0.mean()
    rss0 = r0 @ r0
    rss1 = fit.deviance
    S = (rss0 - rss1) / (rss0 / len(ya))
    assert np.isclose(cmp.score_statistic, S, rtol=1e-9)
    assert cmp.wald_degrees_of_freedom == 3


def test_agreeing_coefficients_pass_and_predictions_match():
    X, y = _stackloss()
    fit = lt.least_squares(X, y)
    cmp = compare_coefficients(fit, dict(zip(fit.names, fit.coefficients), **{"(intercept)": fit.intercept}), X=X, y=y)
    assert cmp.wald_statistic < 1e-20 and cmp.wald_p_value > 0.999999
    assert cmp.score_statistic < 1e-12
    assert cmp.max_abs_prediction_difference < 1e-10
    assert "Wald test" in cmp.report()


def test_names_are_matched_and_mismatches_named():
    X, y = _stackloss()
    fit = lt.least_squares(X, y)
    mapping = {"ACIDCONC": 0.0, "AIRFLOW": 0.7, "WATERTEMP": 1.3}
    cmp = compare_coefficients(fit, mapping)
    assert np.allclose(cmp.delivered, [0.7, 1.3, 0.0])
    with pytest.raises(InputError, match=r"missing \['ACIDCONC'\]; not in the refit \['ACID'\]"):
        compare_coefficients(fit, {"AIRFLOW": 0.7, "WATERTEMP": 1.3, "ACID": 0.0})
    with pytest.raises(InputError, match="shape"):
        compare_coefficients(fit, [1.0, 2.0])


@pytest.mark.parametrize("l2", [0.5, 3.0, 40.0])
def test_implied_l2_recovers_our_own_ridge_and_sklearn(l2):
    X, y = _stackloss()
    fit = lt.least_squares(X, y, l2=l2)
    got = implied_l2(X, y, fit.coefficients, fit.intercept, model="least_squares")
    assert abs(got.l2 - l2) < 1e-6 * l2 and got.residual < 1e-6
    # Oracle: scikit-learn Ridge with alpha = l2 (same objective up to a factor of 2).
    ref = sklearn.linear_model.Ridge(alpha=l2, solver="svd").fit(X, y)
    got = implied_l2(X, y, ref.coef_, ref.intercept_, model="least_squares")
    assert abs(got.l2 - l2) < 1e-6 * l2 and got.residual < 1e-6


def test_implied_l2_says_when_no_ridge_explains_the_coefficients():
    X, y = _stackloss()
    fit = lt.least_squares(X, y)
    got = implied_l2(X, y, fit.coefficients * np.array([1.0, -1.0, 1.0]), fit.intercept, model="least_squares")
    assert got.residual > 0.1


def test_a_difference_that_rounds_to_zero_prints_without_a_sign():
    # statsmodels' stack-loss data; a delivered model a hair below the refit: its differences
    # in standard errors (about -1e-13) print as 0.00, not -0.00 (common practice in printed
    # tables: the sign of a value below the printed precision says nothing)
    X, y = _stackloss()
    fit = lt.least_squares(X, y)
    cmp = compare_coefficients(fit, fit.coefficients * (1 - 1e-13), fit.intercept * (1 - 1e-13))
    assert np.any(cmp.difference_in_se < 0) and np.max(np.abs(cmp.difference_in_se)) < 0.005
    text = cmp.report()
    assert "-0.00" not in text and " 0.00" in text
