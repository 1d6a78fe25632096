"""Logistic regression against published values and oracle libraries.

Sources named beside each check: Greene's logit example on the grade data (published
table, from memory), statsmodels Logit / GLM Binomial on the data statsmodels ships
(spector, star98), scikit-learn's LogisticRegression on its breast-cancer data.
"""

import functools

import numpy as np
import pytest
import statsmodels.api as sm
from sklearn.datasets import load_breast_cancer
from sklearn.linear_model import LogisticRegression

import lintools as lt
from lintools import LogisticFit, load, logistic, save
from lintools.exchange.crosscheck import compare_coefficients

SPECTOR = sm.datasets.spector.load_pandas()
SX, SY = SPECTOR.exog, SPECTOR.endog
SPECTOR_REF = sm.Logit(SY, sm.add_constant(SX)).fit(disp=0, method="newton", tol=1e-14, maxiter=100)

STAR = sm.datasets.star98.load_pandas()
STAR_X = STAR.exog.to_numpy(float)
STAR_SUCC = STAR.endog["NABOVE"].to_numpy(float)
STAR_M = STAR.endog.sum(axis=1).to_numpy(float)
STAR_REF = sm.GLM(np.column_stack([STAR_SUCC, STAR_M - STAR_SUCC]), sm.add_constant(STAR_X),
                  family=sm.families.Binomial()).fit(tol=1e-14)

_bc = load_breast_cancer()
BC_X = (_bc.data - _bc.data.mean(0)) / _bc.data.std(0)
BC_Y = _bc.target

#: per-solver settings that reach the tolerance (first-order solvers need more iterations)
ITER = {"newton": 100, "lbfgs": 20000, "gradient": 200000}


CASES = {
    "spector": (lambda s: logistic(SX, SY, solver=s, max_iter=ITER[s])),
    "star98": (lambda s: logistic(STAR_X, STAR_SUCC, trials=STAR_M, solver=s, tol=1e-13, max_iter=ITER[s])),
    "breast_cancer": (lambda s: logistic(BC_X, BC_Y, l2=1.0, solver=s, max_iter=ITER[s])),
}


@functools.lru_cache(maxsize=None)
def _case(case, solver):
    return CASES[case](solver)


def _theta(fit):
    return np.r_[fit.intercept, fit.coefficients]


def _se(fit):
    return np.r_[fit.intercept_standard_error, fit.standard_errors]


def test_greene_grade_data_published_table():
    # source: Greene, Econometric Analysis, logit model for the grade data (Spector &
    # Mazzeo 1980), coefficients and standard errors as printed -- from memory
    fit = logistic(SX, SY)
    published = {"(intercept)": (-13.021, 4.931), "GPA": (2.826, 1.263), "TUCE": (0.095, 0.142), "PSI": (2.379, 1.065)}
    table = fit.coefficient_table()
    for term, est, se in zip(table.terms, table.estimate, table.standard_error):
        assert round(est, 3) == published[term][0], term
        assert round(se, 3) == published[term][1], term
    # source: same table, log-likelihood -12.890 (from memory)
    assert round(fit.log_likelihood, 3) == -12.890


@pytest.mark.parametrize("solver", ["newton", "lbfgs", "gradient"])
def test_spector_matches_statsmodels_logit(solver):
    # source: statsmodels Logit on its shipped spector data
    ref = SPECTOR_REF
    fit = logistic(SX, SY, solver=solver, max_iter=ITER[solver])
    assert fit.convergence.converged
    np.testing.assert_allclose(_theta(fit), ref.params, rtol=1e-8)
    np.testing.assert_allclose(_se(fit), ref.bse, rtol=1e-8)
    assert fit.log_likelihood == pytest.approx(ref.llf, rel=1e-10)
    assert fit.null_deviance == pytest.approx(-2 * ref.llnull, rel=1e-10)
    assert fit.lr_statistic == pytest.approx(ref.llr, rel=1e-8)
    assert fit.lr_p_value == pytest.approx(ref.llr_pvalue, rel=1e-7)
    assert fit.lr_degrees_of_freedom == 3
    assert fit.aic == pytest.approx(ref.aic, rel=1e-10)
    assert fit.bic == pytest.approx(ref.bic, rel=1e-10)
    table = fit.coefficient_table()
    np.testing.assert_allclose(table.statistic, ref.tvalues, rtol=1e-8)
    np.testing.assert_allclose(table.p_value, ref.pvalues, rtol=1e-7)
    np.testing.assert_allclose(np.column_stack([table.lower, table.upper]), ref.conf_int(), rtol=1e-7)
    np.testing.assert_allclose(fit.covariance, ref.cov_params(), rtol=1e-7)
    np.testing.assert_allclose(fit.mean(SX), ref.predict(sm.add_constant(SX)), rtol=1e-8)
    assert fit.n_observations == 32 and fit.names == ("GPA", "TUCE", "PSI") and fit.target == "GRADE"


@pytest.mark.parametrize("solver", ["newton", "lbfgs", "gradient"])
def test_star98_grouped_matches_statsmodels_glm(solver):
    # source: statsmodels GLM Binomial on its shipped star98 data (successes out of trials);
    # tol 1e-13 on the gradient per unit weight (267 611 trials) and standardised centred
    # column: this design is ill-conditioned, and the first-order solvers need it for 1e-7
    # agreement (measured 3e-9 lbfgs, 1e-8 gradient; at tol 1e-12 gradient 3e-7)
    ref = STAR_REF
    fit = _case("star98", solver)
    assert fit.convergence.converged and fit.grouped
    np.testing.assert_allclose(_theta(fit), ref.params, rtol=1e-7)
    np.testing.assert_allclose(_se(fit), ref.bse, rtol=1e-7)
    # documented: the log-likelihood includes the log binomial coefficients, as GLM's
    assert fit.log_likelihood == pytest.approx(ref.llf, rel=1e-10)
    assert fit.deviance == pytest.approx(ref.deviance, rel=1e-9)
    assert fit.null_deviance == pytest.approx(ref.null_deviance, rel=1e-10)
    assert fit.aic == pytest.approx(ref.aic, rel=1e-10)
    # documented: BIC counts n = sum(w * m) trials (statsmodels' bic_llf counts rows)
    assert fit.bic == pytest.approx(-2 * ref.llf + np.log(STAR_M.sum()) * 21, rel=1e-10)
    assert fit.n_observations == STAR_M.sum()
    assert fit.classes == (0, 1) and fit.positive_class == 1


@pytest.mark.parametrize("C", [1.0, 0.05])
@pytest.mark.parametrize("solver", ["newton", "lbfgs", "gradient"])
def test_breast_cancer_l2_matches_sklearn(C, solver):
    # source: scikit-learn LogisticRegression (newton-cholesky, tol 1e-12) on its shipped
    # breast-cancer data, standardised; its C maps to l2 = 1 / C
    ref = LogisticRegression(C=C, solver="newton-cholesky", tol=1e-12, max_iter=1000).fit(BC_X, BC_Y)
    fit = logistic(BC_X, BC_Y, l2=1.0 / C, solver=solver, max_iter=ITER[solver])
    assert fit.convergence.converged
    np.testing.assert_allclose(fit.coefficients, ref.coef_[0], rtol=1e-6, atol=1e-8)
    assert fit.intercept == pytest.approx(ref.intercept_[0], rel=1e-6)
    assert np.isnan(fit.lr_statistic) and np.isnan(fit.lr_p_value)


@pytest.mark.parametrize("case", sorted(CASES))
def test_three_solvers_agree(case):
    # source: common practice (one optimum); each solver stops on its own at tol
    fits = [_case(case, s) for s in ("newton", "lbfgs", "gradient")]
    base = _theta(fits[0])
    for f in fits[1:]:
        np.testing.assert_allclose(_theta(f), base, rtol=1e-7, atol=1e-9)
        np.testing.assert_allclose(_se(f), _se(fits[0]), rtol=1e-7)


def test_an_unattainable_tol_is_reported_as_a_stall_with_an_attainable_one():
    # source: statsmodels GLM Binomial (star98) for the optimum; common practice for the
    # honest record: tol 1e-17 (per unit weight) is below this gradient's float64 rounding
    # level (measured 5e-16 where the fit stalls)
    with pytest.warns(lt.LintoolsWarning, match="NOT converged") as caught:
        fit = logistic(STAR_X, STAR_SUCC, trials=STAR_M, tol=1e-17)
    assert not fit.convergence.converged and "stalled" in fit.convergence.message
    assert "attainable" in str(caught[0].message)
    np.testing.assert_allclose(_theta(fit), STAR_REF.params, rtol=1e-9)
    suggested = float(fit.convergence.message.split("tol = ")[1].split(" ")[0])
    again = logistic(STAR_X, STAR_SUCC, trials=STAR_M, tol=suggested)
    assert again.convergence.converged and again.convergence.gradient_norm <= suggested


def test_large_fit_with_an_offset_matches_statsmodels_glm():
    # regression: with n >= 50 000 the null model of a fit with an offset (intercept only, no
    # columns) took the Newton-sketch path and crashed on its empty design
    # source: statsmodels GLM Binomial with the same offset, and its intercept-only fit for
    # the null deviance
    rng = np.random.default_rng(14)
    n = 60_000
    X = rng.normal(size=(n, 3))
    o = 0.3 * rng.normal(size=n)
    y = ((X @ [0.6, -0.4, 0.2] + o + rng.logistic(size=n)) > 0).astype(float)
    fit = logistic(X, y, offset=o, tol=1e-10)
    ref = sm.GLM(y, sm.add_constant(X), family=sm.families.Binomial(), offset=o).fit(tol=1e-14)
    null = sm.GLM(y, np.ones((n, 1)), family=sm.families.Binomial(), offset=o).fit(tol=1e-14)
    np.testing.assert_allclose(_theta(fit), ref.params, rtol=1e-9)
    np.testing.assert_allclose(_se(fit), ref.bse, rtol=1e-8)
    assert fit.deviance == pytest.approx(ref.deviance, rel=1e-11)
    assert fit.null_deviance == pytest.approx(null.deviance, rel=1e-11)


def test_offsets_and_case_weights_match_statsmodels_glm():
    # source: statsmodels GLM Binomial with offset and freq_weights (case weights)
    rng = np.random.default_rng(4)
    X = rng.normal(size=(300, 2))
    o = rng.normal(size=300) * 0.5
    w = rng.integers(1, 4, 300).astype(float)
    y = ((X @ [0.8, -0.5] + o + rng.logistic(size=300)) > 0).astype(float)
    ref = sm.GLM(y, sm.add_constant(X), family=sm.families.Binomial(), offset=o, freq_weights=w).fit(tol=1e-14)
    fit = logistic(X, y, offset=o, weights=w)
    np.testing.assert_allclose(_theta(fit), ref.params, rtol=1e-9)
    np.testing.assert_allclose(_se(fit), ref.bse, rtol=1e-9)
    assert fit.null_deviance == pytest.approx(ref.null_deviance, rel=1e-10)
    assert fit.deviance == pytest.approx(ref.deviance, rel=1e-10)
    assert fit.n_observations == w.sum() and fit.has_offset
    np.testing.assert_allclose(fit.mean(X, offset=o), ref.fittedvalues, rtol=1e-9)
    # without an intercept: coefficients as statsmodels; the documented null model is
    # eta = offset, whose deviance the statsmodels family computes independently
    ref0 = sm.GLM(y, X, family=sm.families.Binomial(), offset=o, freq_weights=w).fit(tol=1e-14)
    fit0 = logistic(X, y, offset=o, weights=w, intercept=False)
    np.testing.assert_allclose(fit0.coefficients, ref0.params, rtol=1e-9)
    null0 = sm.families.Binomial().deviance(y, 1 / (1 + np.exp(-o)), freq_weights=w)
    assert fit0.null_deviance == pytest.approx(null0, rel=1e-10)
    assert fit0.intercept_standard_error is None and fit0.lr_degrees_of_freedom == 2


def test_labels_of_any_type_and_the_positive_class():
    # source: statsmodels Logit on the spector data for the estimates
    yes = np.where(SY.to_numpy() == 1, "pass", "fail")
    fit = logistic(SX, yes)
    assert fit.classes == ("fail", "pass") and fit.positive_class == "pass"
    np.testing.assert_allclose(_theta(fit), SPECTOR_REF.params, rtol=1e-9)
    predicted = fit.labels(SX)
    assert predicted.dtype.kind == "U" and set(predicted) <= {"fail", "pass"}
    np.testing.assert_array_equal(predicted == "pass", SPECTOR_REF.predict(sm.add_constant(SX)).to_numpy() > 0.5)
    flipped = logistic(SX, yes, positive="fail")
    assert flipped.positive_class == "fail"
    np.testing.assert_allclose(_theta(flipped), -SPECTOR_REF.params, rtol=1e-9)
    boolean = logistic(SX, SY.to_numpy() > 0)
    assert boolean.classes == (False, True) and boolean.labels(SX).dtype == bool


def test_score_and_information_feed_the_crosscheck():
    from lintools.models.logistic import score_and_information

    # source: common practice: at the refit the score is zero and the inverse information
    # is the covariance; a delivered copy of the refit is accepted with Wald statistic 0
    fit = logistic(SX, SY)
    U, info = score_and_information(fit, SX.to_numpy(), SY, None, fit.coefficients, fit.intercept, False)
    assert np.max(np.abs(U)) < 1e-9
    np.testing.assert_allclose(np.linalg.inv(info), fit.covariance, rtol=1e-9)
    cmp = compare_coefficients(fit, fit.coefficients, fit.intercept, X=SX, y=SY)
    assert cmp.wald_statistic == pytest.approx(0.0, abs=1e-20)
    assert cmp.score_statistic == pytest.approx(0.0, abs=1e-12)


def test_model_file_round_trip(tmp_path):
    # source: common practice (what is written is read back unchanged)
    fit = logistic(SX, np.where(SY.to_numpy() == 1, "pass", "fail"), profile=True)
    path = tmp_path / "model.json"
    save(fit, path)
    back = load(path)
    assert isinstance(back, LogisticFit) and back.kind == "logistic"
    assert back.classes == fit.classes and back.positive_class == "pass"
    np.testing.assert_array_equal(back.coefficients, fit.coefficients)
    np.testing.assert_array_equal(back.covariance, fit.covariance)
    np.testing.assert_array_equal(back.profile_intervals, fit.profile_intervals)
    assert back.convergence == fit.convergence
    np.testing.assert_array_equal(back.mean(SX), fit.mean(SX))
    np.testing.assert_array_equal(back.labels(SX), fit.labels(SX))
    assert back.report() == fit.report()


def test_report_layout():
    # source: common practice (our own layout: title, Data, Estimation, Fit, Tests,
    # Coefficients with the z table, Convergence)
    text = logistic(SX, SY).report()
    lines = text.splitlines()
    assert lines[0] == "lintools logistic model of 'GRADE'" and "modelled probability  of 1.0" in text
    head = lines[lines.index("Coefficients") + 1]
    assert " z " in head and lines[lines.index("Coefficients") + 3].split()[0] == "intercept"
    assert "deviance of the intercept-only model  41.18345939" in text
    assert "against the intercept-only model  15.4042 with 3 degrees of freedom, p-value 0.0015" in text
    assert "converged in" in text
    assert lt.logistic is logistic


def test_null_deviance_closed_form_against_mpmath():
    # source: the intercept-only binomial optimum in closed form, mu = S / T, evaluated in
    # 50-digit arithmetic (mpmath): null deviance -2 [S log mu + (T - S) log(1 - mu)] for
    # binary rows with case weights and for grouped rows
    import mpmath

    with mpmath.workdps(50):
        _null_cases(mpmath)


def _null_cases(mpmath):
    rng = np.random.default_rng(41)
    n = 5000
    X = rng.normal(size=(n, 2))
    w = rng.uniform(0.5, 2.0, size=n)
    m = rng.integers(1, 5, size=n).astype(float)
    for y, trials in (((rng.random(n) < 0.07).astype(float), None), (np.floor(rng.random(n) * (m + 1)), m)):
        fit = logistic(X, y, weights=w, trials=trials)
        mm = np.ones(n) if trials is None else m
        S = mpmath.fsum(mpmath.mpf(a) * mpmath.mpf(b) for a, b in zip(w, y))
        T = mpmath.fsum(mpmath.mpf(a) * mpmath.mpf(b) for a, b in zip(w, mm))
        mu = S / T
        loglik0 = S * mpmath.log(mu) + (T - S) * mpmath.log(1 - mu)
        if trials is None:
            assert abs(fit.null_deviance - float(-2 * loglik0)) <= 1e-14 * abs(float(loglik0))
        else:  # grouped: the deviance is measured from the saturated model
            sat = mpmath.fsum(
                mpmath.mpf(wi) * ((mpmath.mpf(yi) * mpmath.log(mpmath.mpf(yi) / mpmath.mpf(mi)) if yi > 0 else 0)
                                  + ((mpmath.mpf(mi - yi)) * mpmath.log(mpmath.mpf(mi - yi) / mpmath.mpf(mi)) if mi > yi else 0))
                for wi, yi, mi in zip(w, y, m))
            want = float(2 * (sat - loglik0))
            assert abs(fit.null_deviance - want) <= 1e-12 * abs(want)
