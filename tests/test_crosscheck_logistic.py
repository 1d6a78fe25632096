"""compare_coefficients and implied_l2 for the logistic fit, against hand computations and oracles.

Data: statsmodels' ``spector`` data (Spector & Mazzeo 1980, 32 students: GPA, TUCE, PSI,
GRADE), shipped with statsmodels; scikit-learn's breast-cancer data (Wisconsin diagnostic
breast cancer, shipped with scikit-learn), standardised.
"""

import numpy as np
import pytest
import sklearn.datasets
import sklearn.linear_model
import statsmodels.api as sm
from scipy import stats
from scipy.special import expit

import lintools as lt
from lintools import InputError
from lintools.exchange.crosscheck import compare_coefficients, implied_l2


def _spector():
    # statsmodels' spector dataset (Spector & Mazzeo 1980).
    d = sm.datasets.spector.load_pandas()
    return d.exog, d.endog


def _lre(a, b):
    """Log relative error, McCullough (1998)."""
    a, b = np.asarray(a, dtype=float), np.asarray(b, dtype=float)
    err = np.max(np.abs(a - b) / np.abs(b))
    return np.inf if err == 0 else -np.log10(err)


DELIVERED_INTERCEPT = -12.0
DELIVERED_SLOPES = np.array([2.5, 0.1, 2.0])  # GPA, TUCE, PSI: near the refit, not equal to it


def test_wald_statistic_with_the_intercept_equals_the_hand_computation():
    X, y = _spector()
    fit = lt.logistic(X, y)
    cmp = compare_coefficients(fit, DELIVERED_SLOPES, DELIVERED_INTERCEPT)
    # Hand computation: W = d' V^-1 d with V the covariance of statsmodels' Logit (oracle)
    # and the chi-square tail from scipy.stats (oracle).
    ref = sm.Logit(y, sm.add_constant(X)).fit(disp=0, tol=1e-12)
    d = np.r_[DELIVERED_INTERCEPT, DELIVERED_SLOPES] - ref.params.to_numpy()
    V = ref.cov_params().to_numpy()
    W = d @ np.linalg.solve(V, d)
    assert cmp.wald_degrees_of_freedom == 4
    assert _lre(cmp.wald_statistic, W) > 9
    assert _lre(cmp.wald_p_value, stats.chi2.sf(W, 4)) > 9
    assert _lre(cmp.difference_in_se, d / ref.bse.to_numpy()) > 9
    assert cmp.terms == ("(intercept)", "GPA", "TUCE", "PSI")


def test_wald_statistic_of_the_slopes_alone_uses_their_block_of_the_covariance():
    X, y = _spector()
    fit = lt.logistic(X, y)
    cmp = compare_coefficients(fit, DELIVERED_SLOPES)
    ref = sm.Logit(y, sm.add_constant(X)).fit(disp=0, tol=1e-12)  # oracle
    d = DELIVERED_SLOPES - ref.params.to_numpy()[1:]
    V = ref.cov_params().to_numpy()[1:, 1:]
    W = d @ np.linalg.solve(V, d)
    assert cmp.wald_degrees_of_freedom == 3
    assert _lre(cmp.wald_statistic, W) > 9
    assert _lre(cmp.wald_p_value, stats.chi2.sf(W, 3)) > 9


def test_score_test_at_the_delivered_coefficients_equals_the_hand_computation():
    X, y = _spector()
    fit = lt.logistic(X, y)
    cmp = compare_coefficients(fit, DELIVERED_SLOPES, DELIVERED_INTERCEPT, X=X, y=y)
    # Hand computation (Rao 1948): U = A'(y - mu0), I = A' diag(mu0 (1 - mu0)) A at the
    # delivered theta0, S = U' I^-1 U on 4 df.
    A = np.column_stack([np.ones(len(y)), X.to_numpy()])
    theta0 = np.r_[DELIVERED_INTERCEPT, DELIVERED_SLOPES]
    mu = expit(A @ theta0)
    U = A.T @ (y.to_numpy() - mu)
    info = A.T @ (A * (mu * (1 - mu))[:, None])
    S = U @ np.linalg.solve(info, U)
    assert _lre(cmp.score_statistic, S) > 11
    assert _lre(cmp.score_p_value, stats.chi2.sf(S, 4)) > 9
    # Second oracle: statsmodels' GLM score test at fully constrained parameters.
    s_sm, p_sm, df_sm = sm.GLM(y, sm.add_constant(X), family=sm.families.Binomial()).score_test(theta0, k_constraints=4)
    assert df_sm == 4 and _lre(cmp.score_statistic, s_sm[0]) > 11 and _lre(cmp.score_p_value, p_sm[0]) > 9
    # Predictions: the largest and mean absolute difference in probability, by hand.
    gap = np.abs(mu - expit(A @ np.r_[fit.intercept, fit.coefficients]))
    assert _lre(cmp.max_abs_prediction_difference, gap.max()) > 12
    assert _lre(cmp.mean_abs_prediction_difference, gap.mean()) > 12


def test_score_test_with_the_intercept_at_its_constrained_estimate():
    X, y = _spector()
    fit = lt.logistic(X, y)
    cmp = compare_coefficients(fit, DELIVERED_SLOPES, X=X, y=y)
    # Hand computation: the intercept is the nuisance parameter, set to its maximum-
    # likelihood value given the delivered slopes (statsmodels GLM with the slopes' linear
    # predictor as offset, an oracle); the efficient score statistic is
    # U_beta' [I^-1]_beta,beta U_beta on 3 df.
    Xa, ya = X.to_numpy(), y.to_numpy()
    off = Xa @ DELIVERED_SLOPES
    b_tilde = sm.GLM(ya, np.ones((len(ya), 1)), family=sm.families.Binomial(), offset=off).fit(tol=1e-13).params[0]
    A = np.column_stack([np.ones(len(ya)), Xa])
    theta = np.r_[b_tilde, DELIVERED_SLOPES]
    mu = expit(A @ theta)
    U = A.T @ (ya - mu)
    assert abs(U[0]) < 1e-9  # the intercept's score vanishes at its constrained estimate
    Vinv = np.linalg.inv(A.T @ (A * (mu * (1 - mu))[:, None]))
    S = U[1:] @ Vinv[1:, 1:] @ U[1:]
    assert cmp.wald_degrees_of_freedom == 3
    assert _lre(cmp.score_statistic, S) > 8
    assert _lre(cmp.score_p_value, stats.chi2.sf(S, 3)) > 8
    # statsmodels' GLM score test at the constrained parameters, 3 constraints (oracle).
    s_sm, p_sm, _ = sm.GLM(ya, A, family=sm.families.Binomial()).score_test(theta, k_constraints=3)
    assert _lre(cmp.score_statistic, s_sm[0]) > 8


def test_score_test_of_a_penalised_fit_uses_the_penalised_score():
    X, y = _spector()
    l2 = 0.7
    fit = lt.logistic(X, y, l2=l2)
    cmp = compare_coefficients(fit, DELIVERED_SLOPES, DELIVERED_INTERCEPT, X=X, y=y)
    # Hand computation: the score and information of the penalised log-likelihood
    # (the intercept unpenalised), common practice for a ridge-penalised score test.
    A = np.column_stack([np.ones(len(y)), X.to_numpy()])
    theta0 = np.r_[DELIVERED_INTERCEPT, DELIVERED_SLOPES]
    pen = np.r_[0.0, np.full(3, l2)]
    mu = expit(A @ theta0)
    U = A.T @ (y.to_numpy() - mu) - pen * theta0
    info = A.T @ (A * (mu * (1 - mu))[:, None]) + np.diag(pen)
    assert _lre(cmp.score_statistic, U @ np.linalg.solve(info, U)) > 11
    # At the penalised optimum itself the score test is zero.
    same = compare_coefficients(fit, fit.coefficients, fit.intercept, X=X, y=y)
    assert same.score_statistic < 1e-18 and same.wald_statistic < 1e-20


def test_positive_class_other_than_the_larger_label_flips_every_sign():
    X, y = _spector()
    labels = np.where(y.to_numpy() == 1, "pass", "fail")
    up = lt.logistic(X, labels, positive="pass")
    down = lt.logistic(X, labels, positive="fail")
    a = compare_coefficients(up, DELIVERED_SLOPES, DELIVERED_INTERCEPT, X=X, y=labels)
    b = compare_coefficients(down, -DELIVERED_SLOPES, -DELIVERED_INTERCEPT, X=X, y=labels)
    # Exact symmetry of the logit model under relabelling (common practice).
    assert _lre(a.wald_statistic, b.wald_statistic) > 10 and _lre(a.score_statistic, b.score_statistic) > 10


def test_mismatched_names_are_named_for_the_logistic_fit():
    X, y = _spector()
    fit = lt.logistic(X, y)
    with pytest.raises(InputError, match=r"missing \['PSI'\]"):
        compare_coefficients(fit, {"GPA": 2.5, "TUCE": 0.1})
    with pytest.raises(InputError, match="score test needs both"):
        compare_coefficients(fit, DELIVERED_SLOPES, y=y)


# ----------------------------------------------------------------------------- implied l2
def _breast_cancer():
    # scikit-learn's breast-cancer data (shipped with scikit-learn), standardised.
    bc = sklearn.datasets.load_breast_cancer()
    Z = (bc.data - bc.data.mean(axis=0)) / bc.data.std(axis=0)
    return Z, bc.target


@pytest.mark.parametrize("l2", [0.1, 1.0, 10.0])
def test_implied_l2_recovers_our_own_penalised_fit(l2):
    Z, y = _breast_cancer()
    fit = lt.logistic(Z, y, l2=l2, max_iter=200)
    assert fit.convergence.converged
    got = implied_l2(Z, y, fit.coefficients, fit.intercept)
    assert abs(got.l2 - l2) <= 1e-6 * l2
    assert got.residual < 1e-6 and got.intercept_gradient < 1e-8


@pytest.mark.parametrize("l2", [0.1, 1.0, 10.0])
def test_implied_l2_recovers_scikit_learns_inverse_c(l2):
    Z, y = _breast_cancer()
    # Oracle: scikit-learn minimises C * sum(loss) + |w|^2 / 2, i.e. l2 = 1 / C.
    ref = sklearn.linear_model.LogisticRegression(C=1.0 / l2, solver="newton-cholesky", tol=1e-12, max_iter=10000)
    ref.fit(Z, y)
    got = implied_l2(Z, y, ref.coef_.ravel(), ref.intercept_[0])
    assert abs(got.l2 - l2) <= 1e-6 * l2
    assert got.residual < 1e-6


def test_implied_l2_says_an_unpenalised_optimum_needs_no_penalty_and_a_wrong_one_fits_none():
    Z, y = _breast_cancer()
    fit = lt.logistic(Z[:, :5], y)
    got = implied_l2(Z[:, :5], y, fit.coefficients, fit.intercept)
    assert got.gradient_norm < 1e-8 and abs(got.l2) < 1e-6
    flipped = fit.coefficients * np.array([1.0, -1.0, 1.0, -1.0, 1.0])
    assert implied_l2(Z[:, :5], y, flipped, fit.intercept).residual > 0.1
