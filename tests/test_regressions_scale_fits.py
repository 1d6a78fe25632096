"""Regression tests for issue #16, iterative fits: each case failed on the code before the fix.

Sources named beside each check: exact algebra (a common factor on the case weights
multiplies the log-likelihood and leaves its maximiser unchanged; a shift or a scale of a
column reparametrises the fit), frequency weights equal to duplicated rows (the
definition of a case weight), statsmodels' shipped datasets (spector, star98) and its
GLM Binomial as the oracle for grouped data.  Invented data only where the case is about
arithmetic, not about a published value.
"""

from __future__ import annotations

import json
import subprocess
import sys
import warnings

import numpy as np
import pytest
import statsmodels.api as sm

import lintools as lt
from lintools.blocks import logistic_blocks, softmax_blocks


def _rel(a, b) -> float:
    a, b = np.asarray(a, float), np.asarray(b, float)
    return float(np.max(np.abs(a - b)) / np.max(np.abs(b)))


RNG = np.random.default_rng(16)
N = 50
X = RNG.normal(size=(N, 2))
Y = (RNG.random(N) < 1 / (1 + np.exp(-(0.5 + X @ [1.0, -0.7])))).astype(float)
YK = np.digitize(X[:, 0] - 0.5 * X[:, 1] + RNG.logistic(size=N), [-0.7, 0.9])
P = np.clip(1 / (1 + np.exp(-(0.4 + 1.3 * X[:, 0]))), 0.02, 0.98)
BASE = lt.logistic(X, Y)
BASE_K = lt.softmax(X, YK)


@pytest.mark.parametrize("c", [1e-12, 1e-8])
@pytest.mark.parametrize("solver", ["newton", "lbfgs", "gradient"])
def test_small_constant_weights_give_the_unweighted_fit(c, solver):
    # source: exact algebra.  Before: weights 1e-12 returned coefficients [0, 0] "converged"
    # after 0 iterations; weights 1e-8 were wrong in the 3rd digit, also "converged"
    base = lt.logistic(X, Y, solver=solver, max_iter=5000)
    fit = lt.logistic(X, Y, weights=np.full(N, c), solver=solver, max_iter=5000)
    assert fit.convergence.converged and fit.convergence.iterations == base.convergence.iterations
    assert _rel(fit.coefficients, base.coefficients) < 1e-12
    assert fit.intercept == pytest.approx(base.intercept, rel=1e-12)
    assert _rel(fit.covariance * c, base.covariance) < 1e-10


def test_small_weights_give_the_unweighted_softmax_fit():
    # source: exact algebra; before: weights 1e-12 left the softmax fit at its start
    fit = lt.softmax(X, YK, weights=np.full(N, 1e-12))
    assert fit.convergence.converged and fit.convergence.iterations == BASE_K.convergence.iterations
    assert _rel(fit.coefficients, BASE_K.coefficients) < 1e-12
    assert fit.log_likelihood == pytest.approx(1e-12 * BASE_K.log_likelihood, rel=1e-12)


def test_calibration_line_with_weights_1e_170_is_the_unweighted_line():
    # source: exact algebra (Cox 1958 line is a logistic fit); before: slope 0.0
    base = lt.calibration_line(Y, P)
    line = lt.calibration_line(Y, P, weights=np.full(N, 1e-170))
    assert line.slope == pytest.approx(base.slope, rel=1e-12)
    assert line.intercept == pytest.approx(base.intercept, rel=1e-12, abs=1e-14)
    assert line.in_the_large == pytest.approx(base.in_the_large, rel=1e-12, abs=1e-14)
    assert line.slope_standard_error == pytest.approx(base.slope_standard_error * 1e85, rel=1e-10)
    assert line.line_fit.convergence.converged


@pytest.mark.parametrize("c", [1e5, 1e6])
@pytest.mark.parametrize("solver", ["newton", "lbfgs", "gradient"])
def test_large_constant_weights_converge(c, solver):
    # source: exact algebra.  Before: "stalled, NOT converged" (or the iteration limit)
    # although the answer equalled the unweighted fit to 5e-14
    base = lt.logistic(X, Y, solver=solver, max_iter=5000)
    with warnings.catch_warnings():
        warnings.simplefilter("error", lt.LintoolsWarning)
        fit = lt.logistic(X, Y, weights=np.full(N, c), solver=solver, max_iter=5000)
    assert fit.convergence.converged and fit.convergence.iterations == base.convergence.iterations
    assert _rel(fit.coefficients, base.coefficients) < 1e-12


def test_grouped_data_as_weighted_rows_converge_in_blocks():
    # source: statsmodels' star98 data (successes of 267 611 trials in 303 groups) and its
    # GLM Binomial fit.  Grouped data reach logistic_blocks as a success row and a failure
    # row per group, weighted by the counts; before: "stalled, NOT converged"
    star = sm.datasets.star98.load_pandas()
    Xs = star.exog.to_numpy(float)
    succ = star.endog["NABOVE"].to_numpy(float)
    fail = star.endog["NBELOW"].to_numpy(float)
    ref = sm.GLM(np.column_stack([succ, fail]), sm.add_constant(Xs), family=sm.families.Binomial()).fit(tol=1e-14)
    Xw, yw, ww = np.vstack([Xs, Xs]), np.r_[np.ones(len(succ)), np.zeros(len(fail))], np.r_[succ, fail]
    blocks = [(Xw[i : i + 200], yw[i : i + 200], ww[i : i + 200]) for i in range(0, Xw.shape[0], 200)]
    with warnings.catch_warnings():
        warnings.simplefilter("error", lt.LintoolsWarning)
        fit = logistic_blocks(lambda: iter(blocks))
    assert fit.convergence.converged
    assert _rel(np.r_[fit.intercept, fit.coefficients], ref.params) < 1e-9  # measured 3e-12
    assert _rel(np.r_[fit.intercept_standard_error, fit.standard_errors], ref.bse) < 1e-9


def _shifted(shift):
    Xs = X.copy()
    Xs[:, 1] += shift
    exact = Xs.copy()
    exact[:, 1] -= shift  # exact: Sterbenz's lemma (the entries lie within a factor 2 of shift)
    return Xs, exact


@pytest.mark.parametrize("shift", [1.7e9, 1e12])
@pytest.mark.parametrize("solver", ["newton", "lbfgs", "gradient"])
def test_shifted_column_fits_as_the_reparametrised_problem(shift, solver):
    # source: exact algebra -- x + shift moves only the intercept (by -shift * slope).
    # Before: "stalled" and 4.6-7.6 digits (a Unix time stamp is 1.7e9 + N(0, 1))
    Xs, exact = _shifted(shift)
    for fitter, y in ((lt.logistic, Y), (lt.softmax, YK)):
        a = fitter(Xs, y, solver=solver, max_iter=5000)
        b = fitter(exact, y, solver=solver, max_iter=5000)
        assert a.convergence.converged and a.convergence.iterations == b.convergence.iterations
        slope = np.asarray(b.coefficients)[1]
        assert _rel(a.coefficients, b.coefficients) < 1e-10  # measured >= 14.5 digits
        assert _rel(a.intercept, np.asarray(b.intercept) - shift * slope) < 1e-10
        assert _rel(a.standard_errors, b.standard_errors) < 1e-10


@pytest.mark.parametrize("shift", [1.7e9, 1e12])
def test_shifted_column_in_blocks_fits_as_the_reparametrised_problem(shift):
    # source: exact algebra, as above; the block fits formed X beta + b before (7 and 4
    # digits at these shifts)
    Xs, exact = _shifted(shift)
    for fitter, y in ((logistic_blocks, Y), (softmax_blocks, YK)):
        a = fitter(lambda: iter([(Xs[:20], y[:20]), (Xs[20:], y[20:])]))
        b = fitter(lambda: iter([(exact[:20], y[:20]), (exact[20:], y[20:])]))
        assert a.convergence.converged and a.convergence.iterations == b.convergence.iterations
        slope = np.asarray(b.coefficients)[1]
        assert _rel(a.coefficients, b.coefficients) < 1e-10
        assert _rel(a.intercept, np.asarray(b.intercept) - shift * slope) < 1e-10
        assert _rel(a.standard_errors, b.standard_errors) < 1e-10


@pytest.mark.parametrize("scale,where", [(1e160, "below"), (1e-200, "above")])
def test_extreme_column_scale_is_refused_for_its_true_cause(scale, where):
    # source: exact algebra -- the coefficient's variance scales by 1 / scale^2, beyond
    # float64 here.  Before: refused as "constant" or "a linear combination of nothing"
    Xs = X.copy()
    Xs[:, 1] *= scale
    with warnings.catch_warnings():
        warnings.simplefilter("error", RuntimeWarning)  # no overflow on the way either
        with pytest.raises(lt.InputError, match=rf"variance of the coefficient of 'x2'.*{where}.*rescale that column"):
            lt.logistic(Xs, Y)
        with pytest.raises(lt.InputError, match=rf"variance of the coefficient of 'x2'.*{where}.*rescale that column"):
            logistic_blocks(lambda: iter([(Xs[:20], Y[:20]), (Xs[20:], Y[20:])]))
        for fit in (lambda: lt.softmax(Xs, YK), lambda: softmax_blocks(lambda: iter([(Xs, YK)]))):
            with pytest.raises(lt.InputError, match=r"variance of the coefficient of 'x2' for class .*rescale that column"):
                fit()


@pytest.mark.parametrize("solver", [None, "Newton", 3])
def test_a_bad_solver_is_an_input_error_naming_the_choices(solver):
    # source: common practice (no foreign exception); before: KeyError for solver=None
    for call in (lambda: lt.logistic(X, Y, solver=solver), lambda: lt.softmax(X, YK, solver=solver)):
        with pytest.raises(lt.InputError, match=r"solver=.*'newton', 'lbfgs', 'gradient'"):
            call()


def test_firth_with_integer_weights_equals_duplicated_rows():
    # source: the definition of a case weight (a weight of 3 is three copies of the row);
    # Firth's penalty does not scale with the weights, so this pins its handling when the
    # weights are brought to a power-of-two scale
    w = np.full(N, 3.0)
    a = lt.logistic(X, Y, weights=w, firth=True, profile=True)
    b = lt.logistic(np.vstack([X] * 3), np.r_[Y, Y, Y], firth=True, profile=True)
    assert _rel(a.coefficients, b.coefficients) < 1e-10
    assert _rel(a.covariance, b.covariance) < 1e-9
    assert a.penalised_log_likelihood == pytest.approx(b.penalised_log_likelihood, rel=1e-12)
    assert a.lr_statistic == pytest.approx(b.lr_statistic, rel=1e-9)
    np.testing.assert_allclose(a.profile_intervals, b.profile_intervals, rtol=1e-8)


def _cli(*args):
    return subprocess.run([sys.executable, "-m", "lintools", *args], capture_output=True, text=True, timeout=120)


@pytest.mark.parametrize("c", ["1e-12", "1e6", "1e150"])
def test_command_line_fit_with_tiny_or_huge_weights(tmp_path, c):
    # source: statsmodels' spector data (Spector & Mazzeo 1980); exact algebra for the
    # weights.  Before: weights 1e-12 exited 0 with coefficients 0, weights 1e6 exited 1
    # ("stalled, NOT converged")
    d = sm.datasets.spector.load_pandas().data
    path = tmp_path / "spector.csv"
    with open(path, "w") as fh:
        fh.write("GPA,TUCE,PSI,GRADE,w\n")
        for row in d.itertuples(index=False):
            fh.write(f"{row.GPA!r},{row.TUCE!r},{row.PSI!r},{int(row.GRADE)},{c}\n")
    proc = _cli("fit", str(path), "--target", "GRADE", "--model", "logistic", "--weights", "w", "--json")
    assert proc.returncode == 0, proc.stderr + proc.stdout
    doc = json.loads(proc.stdout)
    ref = lt.logistic(d[["GPA", "TUCE", "PSI"]], d["GRADE"])
    assert _rel(doc["fit"]["coefficients"], ref.coefficients) < 1e-10  # the command line's own tol


def test_profile_intervals_with_huge_weights_reach_the_wald_limit():
    # source: statsmodels' spector data; asymptotic theory (common practice): weights of
    # 1e14 multiply the information by 1e14, the log-likelihood is then quadratic over the
    # interval and the profile ends equal the Wald ends.  Before: NaN ends, because the
    # rise of the objective (about 2) was taken as a difference of two values near 1e15
    d = sm.datasets.spector.load_pandas()
    fit = lt.logistic(d.exog, d.endog, weights=np.full(32, 1e14), profile=True)
    est = np.r_[fit.intercept, fit.coefficients]
    se = np.r_[fit.intercept_standard_error, fit.standard_errors]
    wald = est[:, None] + np.array([-1.0, 1.0]) * 1.959963984540054 * se[:, None]
    np.testing.assert_allclose(fit.profile_intervals - est[:, None], wald - est[:, None], rtol=1e-4)
