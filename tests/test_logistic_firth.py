"""Firth's bias-reduced logistic regression and profile-likelihood intervals.

Sources: an independent implementation of the penalised log-likelihood
l(b) + 1/2 log det I(b) (Firth 1993) in mpmath at 40 digits, differentiated by
mpmath.diff; SciPy's optimiser (scipy.optimize.minimize) on a NumPy implementation for
the profile and null fits; SciPy's chi-square quantile; statsmodels GLM with an offset for
the unpenalised profile.  No published Firth values are used (none shipped, and none
recalled reliably enough to quote).
"""

import mpmath
import numpy as np
import pytest
import scipy.optimize
import scipy.stats
import statsmodels.api as sm

from lintools import logistic

X_SEP = np.column_stack([
    [-2.0, -1.0, -0.5, 0.0, 0.0, 0.5, 1.0, 2.0, 1.5, -1.5],
    [0.3, -1.2, 0.8, 0.1, -0.4, 1.1, -0.7, 0.2, 0.9, -0.3],
])
Y_SEP = np.array([0, 0, 0, 0, 1, 1, 1, 1, 1, 0])  # quasi-complete on the first column


def _mp_penalised(theta, X, y, m, w):
    A = mpmath.matrix([[1] + [mpmath.mpf(float(v)) for v in row] for row in X])
    n, k = A.rows, A.cols
    ll = mpmath.mpf(0)
    info = mpmath.zeros(k, k)
    for i in range(n):
        eta = sum(A[i, j] * theta[j] for j in range(k))
        mu = 1 / (1 + mpmath.exp(-eta))
        ll += w[i] * (y[i] * mpmath.log(mu) + (m[i] - y[i]) * mpmath.log(1 - mu))
        wi = w[i] * m[i] * mu * (1 - mu)
        for a in range(k):
            for b in range(k):
                info[a, b] += wi * A[i, a] * A[i, b]
    return ll + mpmath.log(mpmath.det(info)) / 2


def _mp_gradient(theta, X, y, m=None, w=None):
    n = len(y)
    m = np.ones(n) if m is None else m
    w = np.ones(n) if w is None else w
    with mpmath.workdps(40):
        th = [mpmath.mpf(float(t)) for t in theta]
        out = []
        for j in range(len(th)):
            def f(t, j=j):
                arg = list(th)
                arg[j] = t
                return _mp_penalised(arg, X, [int(v) for v in y], [int(v) for v in m], [mpmath.mpf(float(v)) for v in w])
            out.append(float(mpmath.diff(f, th[j])))
    return np.array(out)


def _np_penalised(theta, X, y, m=None, w=None):
    n = len(y)
    m = np.ones(n) if m is None else m
    w = np.ones(n) if w is None else w
    A = np.column_stack([np.ones(n), X])
    eta = A @ theta
    ll = np.sum(w * (y * -np.logaddexp(0, -eta) + (m - y) * -np.logaddexp(0, eta)))
    mu = 1 / (1 + np.exp(-eta))
    sign, logdet = np.linalg.slogdet(A.T @ (A * (w * m * mu * (1 - mu))[:, None]))
    return ll + 0.5 * logdet


@pytest.mark.parametrize("solver", ["newton", "lbfgs", "gradient"])
def test_firth_on_separated_data_is_finite_and_stationary(solver):
    # source: mpmath (40 digits) gradient of l(b) + 1/2 log det I(b), independent code
    fit = logistic(X_SEP, Y_SEP, firth=True, solver=solver, max_iter=20000)
    theta = np.r_[fit.intercept, fit.coefficients]
    assert fit.convergence.converged and np.all(np.isfinite(theta)) and fit.firth
    assert np.max(np.abs(_mp_gradient(theta, X_SEP, Y_SEP))) < 1e-6
    # the penalised log-likelihood reported is the independent one at the estimate
    assert fit.penalised_log_likelihood == pytest.approx(_np_penalised(theta, X_SEP, Y_SEP), rel=1e-12)


def test_firth_solvers_agree_and_covariance_is_the_inverse_fisher_information():
    # source: common practice (one optimum); Heinze & Schemper (2002): covariance from I(b)^-1
    fits = [logistic(X_SEP, Y_SEP, firth=True, solver=s, tol=1e-9, max_iter=20000) for s in ("newton", "lbfgs", "gradient")]
    for f in fits[1:]:
        np.testing.assert_allclose(f.coefficients, fits[0].coefficients, rtol=1e-7)
    f = fits[0]
    A = np.column_stack([np.ones(10), X_SEP])
    mu = f.mean(X_SEP)
    info = A.T @ (A * (mu * (1 - mu))[:, None])
    np.testing.assert_allclose(f.covariance, np.linalg.inv(info), rtol=1e-9)


def test_firth_on_grouped_weighted_data_matches_the_independent_gradient():
    # source: mpmath (40 digits), independent code; successes out of trials with weights
    x = np.array([[-1.0], [0.0], [0.5], [1.0], [2.0]])
    succ = np.array([0.0, 1.0, 2.0, 4.0, 3.0])
    trials = np.array([3.0, 4.0, 2.0, 4.0, 3.0])
    w = np.array([1.0, 2.0, 0.5, 1.0, 1.0])
    fit = logistic(x, succ, trials=trials, weights=w, firth=True)
    theta = np.r_[fit.intercept, fit.coefficients]
    assert np.max(np.abs(_mp_gradient(theta, x, succ, trials, w))) < 1e-6


def _profile_drop(j, v, theta_hat, fn):
    """2 * (max fn - max fn with theta_j = v), maximised by SciPy (independent)."""
    free = [i for i in range(theta_hat.size) if i != j]

    def neg(u):
        th = np.empty(theta_hat.size)
        th[j] = v
        th[free] = u
        return -fn(th)

    res = scipy.optimize.minimize(neg, theta_hat[free], method="BFGS", options={"gtol": 1e-10})
    return 2.0 * (fn(theta_hat) + res.fun)


def test_firth_profile_intervals_hit_the_chi_square_quantile():
    # source: SciPy BFGS on an independent NumPy penalised likelihood; scipy.stats.chi2
    fit = logistic(X_SEP, Y_SEP, firth=True, profile=True, profile_level=0.9)
    theta = np.r_[fit.intercept, fit.coefficients]
    q = scipy.stats.chi2.ppf(0.9, 1)
    fn = lambda th: _np_penalised(th, X_SEP, Y_SEP)  # noqa: E731
    bounds = fit.profile_intervals
    assert bounds.shape == (3, 2) and np.all(np.isfinite(bounds))
    for j in range(3):
        assert bounds[j, 0] < theta[j] < bounds[j, 1]
        for v in bounds[j]:
            assert _profile_drop(j, v, theta, fn) == pytest.approx(q, abs=1e-6)
    assert "Profile-penalised-likelihood 90% intervals" in fit.report()


def test_firth_likelihood_ratio_uses_the_penalised_null_fit():
    # source: SciPy optimiser on the independent penalised likelihood of the
    # intercept-only model (Heinze & Schemper 2002, penalised likelihood ratio test)
    fit = logistic(X_SEP, Y_SEP, firth=True)
    null = scipy.optimize.minimize_scalar(lambda b: -_np_penalised(np.array([b]), np.zeros((10, 0)), Y_SEP))
    expected = 2.0 * (fit.penalised_log_likelihood + null.fun)
    assert fit.lr_statistic == pytest.approx(expected, rel=1e-8)
    assert fit.lr_p_value == pytest.approx(scipy.stats.chi2.sf(expected, 2), rel=1e-8)


def test_unpenalised_profile_intervals_match_statsmodels_restricted_fits():
    # source: statsmodels GLM Binomial with theta_j * x_j as an offset (the restricted
    # maximum); scipy.stats.chi2 for the quantile; Greene's grade data shipped by statsmodels
    d = sm.datasets.spector.load_pandas()
    X, y = d.exog.to_numpy(float), d.endog.to_numpy(float)
    fit = logistic(X, y, profile=True)
    full = sm.add_constant(X)
    q = scipy.stats.chi2.ppf(0.95, 1)
    llf = sm.GLM(y, full, family=sm.families.Binomial()).fit(tol=1e-14).llf
    for j in range(4):
        for v in fit.profile_intervals[j]:
            rest = np.delete(full, j, axis=1)
            ref = sm.GLM(y, rest, family=sm.families.Binomial(), offset=v * full[:, j]).fit(tol=1e-14)
            assert 2 * (llf - ref.llf) == pytest.approx(q, abs=1e-7)
    # profile intervals are not the symmetric Wald ones (common practice)
    table = fit.coefficient_table()
    assert not np.allclose(fit.profile_intervals[:, 0], table.lower, rtol=1e-3)
