"""Regression tests for issue #16: extreme X, weights, trials, offsets and logits in the
likelihood fits and the recalibration maps.  Each case was a defect of the hostile battery
(tests/test_reliability_hostile.py, its former KNOWN list) and fails on the code before the
fix: a RuntimeWarning (overflow in exp2, a product or a square; the square root of a
negative number), an OverflowError from math.lgamma, or a call that never returned.

Sources named beside each check: exact algebra (a power-of-two factor on a column or on
the logits is exact in floating point and reparametrises the fit; binomial data with m
trials and m successes or none per row has m times the Bernoulli log-likelihood, so the
same maximiser), exact rational arithmetic (fractions) for weighted spreads and Platt's
targets, and the definition of a profile-likelihood interval (Venzon & Moolgavkar 1988;
for Firth's penalised likelihood, Heinze & Schemper 2002): at each finite end the
penalised likelihood ratio equals the chi-square(1) quantile, checked against a
maximisation written out here with SciPy.  Invented data only, as the cases are about
arithmetic at the ends of the float64 range, not about a published value.  Two checks are
guards of a boundary rather than regressions (they pass before the fix too): trials of
exactly 2**53, and Platt's targets on weights that do not overflow.
"""

from __future__ import annotations

import math
import re
import signal
import warnings
from fractions import Fraction

import numpy as np
import pytest
from scipy import optimize, stats

import lintools as lt

RNG = np.random.default_rng(1616)
N = 50
X = RNG.normal(size=(N, 2))
Y = (RNG.random(N) < 1 / (1 + np.exp(-(0.5 + X @ [1.0, -0.7])))).astype(float)
YK = np.digitize(X[:, 0] - 0.5 * X[:, 1] + RNG.logistic(size=N), [-0.7, 0.9])
S = 2.0 * X[:, 0] + RNG.normal(size=N)  # scores (log-odds) of a binary forecaster
Z3 = np.column_stack([-S, RNG.normal(size=N), S])  # logits of a three-class forecaster
Y3 = np.where(RNG.random(N) < 0.2, 1, 2 * Y.astype(int))
# separated data (x1 splits the classes): Firth's fit exists, the ordinary one does not
YSEP = np.tile([0.0, 1.0], 12)
XSEP = np.column_stack([np.where(YSEP == 1, 1.0, -1.0) + 0.1 * RNG.normal(size=24), RNG.normal(size=24)])


@pytest.fixture(autouse=True)
def _no_foreign_warning():
    """Every case here once let a RuntimeWarning out: make one an error."""
    with warnings.catch_warnings():
        warnings.simplefilter("error", RuntimeWarning)
        yield


class _Hang(Exception):
    pass


def _within(seconds: float, thunk):
    """Run ``thunk``; a call that has not returned after ``seconds`` fails the test (the
    defect was a call that never returned; this is a guard, not a measure of speed)."""
    def alarm(signum, frame):
        raise _Hang(f"no answer after {seconds} s")

    old = signal.signal(signal.SIGALRM, alarm)
    signal.setitimer(signal.ITIMER_REAL, seconds)
    try:
        return thunk()
    finally:
        signal.setitimer(signal.ITIMER_REAL, 0)
        signal.signal(signal.SIGALRM, old)


def _spread(column: np.ndarray) -> float:
    """The weighted (unit weights) spread sqrt(mean((x - mean x)^2)) in exact rationals,
    its square root taken on the variance times 2**2200 (exact) so that a subnormal
    spread keeps its digits."""
    xs = [Fraction(float(v)) for v in column]
    mean = sum(xs) / len(xs)
    variance = sum((v - mean) ** 2 for v in xs) / len(xs)
    return math.ldexp(math.sqrt(float(variance * 2**2200)), -1100)


# ---------------------------------------------------------------- extreme columns of X
FITS = {
    "logistic": lambda Xs: lt.logistic(Xs, Y),
    "logistic-lbfgs": lambda Xs: lt.logistic(Xs, Y, solver="lbfgs"),
    "logistic-firth": lambda Xs: lt.logistic(Xs, Y, firth=True),
    "softmax": lambda Xs: lt.softmax(Xs, YK),
    "platt-scores": lambda Xs: lt.platt_scaling(Y, Xs[:, 0]),
}


WIDE_FITS = dict(FITS, **{
    "logistic_blocks": lambda Xs: lt.logistic_blocks(lambda: iter([(Xs[:20], Y[:20]), (Xs[20:], Y[20:])])),
    "softmax_blocks": lambda Xs: lt.softmax_blocks(lambda: iter([(Xs[:20], YK[:20]), (Xs[20:], YK[20:])])),
})


def _one_entry(Xs):
    Xs[3, 0] = 1e308


def _every_entry(Xs):
    Xs[:, 0] = np.ldexp(Xs[:, 0] / 2.0, 1023)  # exact; the largest entry is about 9.6e307


@pytest.mark.parametrize("design", [_one_entry, _every_entry], ids=["one-entry", "every-entry"])
@pytest.mark.parametrize("fit", list(WIDE_FITS))
def test_a_column_with_entries_near_1e308_is_refused_for_its_sums(fit, design):
    # source: IEEE 754 double -- an entry of 1e308 times a residual of order 1, summed
    # with 49 more rows, can pass 1.8e308 (the refusal bounds the sums by the largest entry
    # times the total weight).  Before: RuntimeWarning "overflow encountered in exp2" while
    # the column's moments were formed (one entry, the battery's case), or "in matmul" in
    # the gradient X' r (every entry: found while writing these tests)
    Xs = X.copy()
    design(Xs)
    top = re.escape(f"{np.max(np.abs(Xs[:, 0])):.3g}")
    with pytest.raises(lt.InputError, match=rf"X column 0 \('x1'\) has entries up to {top} in magnitude: "
                                            r"the fit's sums .* pass 1\.8e308.*rescale that column"):
        WIDE_FITS[fit](Xs)


@pytest.mark.parametrize("factor", [1e-320, 5e-324])
@pytest.mark.parametrize("fit", list(FITS), ids=list(FITS))
def test_a_subnormal_column_is_refused_naming_it_with_the_variance_bound(fit, factor):
    # source: exact algebra and exact rationals -- without a ridge the inverse information's
    # diagonal is at least the inverse of its diagonal, and the information of the
    # coefficient of a column of spread s is at most W s^2 / 4 (W the total weight, here N),
    # so its variance is at least 4 / (N s^2); s computed here in fractions.  Before:
    # RuntimeWarning "overflow encountered in divide" (1 / s)
    Xs = X.copy()
    Xs[:, 0] = Xs[:, 0] * factor
    s = _spread(Xs[:, 0])
    with pytest.raises(lt.InputError, match=r"variance of the coefficient of 'x1'.*at least 1e(\d+).*"
                                            r"rescale that column") as info:
        FITS[fit](Xs)
    exponent = int(re.search(r"at least 1e(\d+)", str(info.value)).group(1))
    assert exponent == round(math.log10(4.0 / N) - 2.0 * math.log10(s))
    assert f"{s:.3g}" in str(info.value)


@pytest.mark.parametrize("fit", [
    lambda Xs: lt.logistic(Xs, Y, l2=0.5),
    lambda Xs: lt.logistic(Xs, Y, l2=0.5, solver="lbfgs"),
    lambda Xs: lt.softmax(Xs, YK, l2=1.0, reference=None),
], ids=["logistic-newton", "logistic-lbfgs", "softmax-symmetric"])
def test_a_ridge_on_a_column_of_1e_300_is_refused_naming_the_column(fit):
    # source: exact algebra -- the ridge on the standardised coefficient is l2 / s^2, here
    # about 1e600, beyond float64.  Before: RuntimeWarning "overflow encountered in multiply"
    # (or "in divide") inside the line search
    Xs = X.copy()
    Xs[:, 1] *= 1e-300
    with pytest.raises(lt.InputError, match=r"X column 1 \('x2'\).*l2 / spread\^2\) exceeds 1\.8e308.*rescale"):
        fit(Xs)


# ------------------------------------------------------------------------ offsets, trials
@pytest.mark.parametrize("offset, where", [(np.full(N, 1e308), "row 0"), (np.where(np.arange(N) == 7, -4.6e15, 0.0),
                                                                        "row 7")], ids=["1e308", "one-minus-4.6e15"])
def test_an_offset_beyond_2_52_is_refused_naming_the_row(offset, where):
    # source: IEEE 754 double -- beyond 2**52 consecutive doubles are at least 1 apart, so
    # offset + intercept + x'beta has no digit left in logits.  Before: RuntimeWarning
    # "overflow encountered in matmul" at 1e308, a number without digits at 4.6e15
    with pytest.raises(lt.InputError, match=rf"offset has .* at {where}, beyond 2\*\*52"):
        lt.logistic(X, Y, offset=offset)
    with pytest.raises(lt.InputError, match=rf"offset has .* at {where}, column 0, beyond 2\*\*52"):
        lt.softmax(X, YK, offset=np.column_stack([offset, np.zeros(N), np.zeros(N)]))


@pytest.mark.parametrize("firth", [False, True])
@pytest.mark.parametrize("trials", [1e308, 2.0**53 + 2], ids=["1e308", "2**53+2"])
def test_trials_beyond_2_53_are_refused_naming_the_row(trials, firth):
    # source: IEEE 754 double -- above 2**53 doubles do not hold every whole number, so no
    # count there is exact.  Before: OverflowError "math range error" from math.lgamma
    # (firth=True) or RuntimeWarning "overflow encountered in reduce" at 1e308
    m = np.full(N, 4.0)
    m[5] = trials
    with pytest.raises(lt.InputError, match=r"trials is .* at row 5, beyond 2\*\*53"):
        _within(10.0, lambda: lt.logistic(X, Y, trials=m, firth=firth))


def test_trials_of_2_53_give_the_bernoulli_fit():
    # source: exact algebra -- rows of m trials with m or 0 successes have m times the
    # Bernoulli log-likelihood, whose maximiser is the Bernoulli fit's (2**53 is the
    # largest count accepted, the boundary of the refusal above)
    base = lt.logistic(X, Y)
    m = 2.0**53
    fit = lt.logistic(X, Y * m, trials=np.full(N, m))
    assert fit.convergence.converged
    assert np.max(np.abs(fit.coefficients - base.coefficients)) < 1e-10 * np.max(np.abs(base.coefficients))
    assert fit.intercept == pytest.approx(base.intercept, rel=1e-10)


# ------------------------------------------------------------------------------- Firth
def test_firth_with_subnormal_weights_is_refused_not_left_running():
    # source: exact algebra -- Firth's penalty 0.5 log det I does not scale with the case
    # weights, and against weights of 5e-324 it outweighs the log-likelihood by more than
    # float64 holds.  Before: the call did not return (more than 30 s measured)
    with pytest.raises(lt.InputError, match=r"firth=True with case weights whose largest is 4\.94e-324"):
        _within(10.0, lambda: lt.logistic(XSEP, YSEP, weights=np.full(24, 5e-324), firth=True))


def _penalised_log_likelihood(theta: np.ndarray) -> float:
    """Firth's objective written out: log L + 0.5 log det(X1' diag(p(1-p)) X1), X1 = [1, XSEP]."""
    X1 = np.column_stack([np.ones(24), XSEP])
    eta = X1 @ theta
    loglik = float(np.sum(YSEP * eta - np.logaddexp(0.0, eta)))
    p = 1.0 / (1.0 + np.exp(-eta))
    return loglik + 0.5 * float(np.linalg.slogdet(X1.T @ (X1 * (p * (1 - p))[:, None]))[1])


def test_firth_profile_intervals_on_separated_data_meet_the_chi_square_quantile():
    # source: the definition of a profile penalised-likelihood interval (Heinze & Schemper
    # 2002): at each end 2 (l*(theta_hat) - max l*(theta | theta_j = end)) equals the 0.95
    # quantile of chi-square(1) (SciPy); the profile is maximised here with SciPy's BFGS on
    # the objective written out.  Before: RuntimeWarning "invalid value encountered in
    # sqrt" (the Cholesky factor of an indefinite Hessian during the profile search)
    fit = lt.logistic(XSEP, YSEP, firth=True, profile=True)
    theta = np.concatenate([[fit.intercept], fit.coefficients])
    top = _penalised_log_likelihood(theta)
    q = stats.chi2.ppf(0.95, 1)
    bounds = fit.profile_intervals
    assert np.all(np.isfinite(bounds))
    for j in range(3):
        assert bounds[j, 0] < theta[j] < bounds[j, 1]  # each interval contains its estimate
        for end in bounds[j]:
            # the penalised likelihood has more than one local maximum in the other
            # coefficients: follow the profile's path from the estimate (warm starts)
            free = np.delete(theta, j)
            for step in np.linspace(theta[j], end, 25)[1:]:
                best = optimize.minimize(lambda f, j=j, at=step: -_penalised_log_likelihood(np.insert(f, j, at)),
                                         free, method="BFGS", options={"gtol": 1e-10})
                free = best.x
            assert 2.0 * (top + best.fun) == pytest.approx(q, abs=1e-6)


# ---------------------------------------------------------------------- recalibration
def test_platt_scaling_with_weights_of_1e308_is_refused_naming_the_weights():
    # source: exact rationals -- the class totals N+ and N- are 25e308 or so, beyond
    # float64, and the intercept's variance about 4 / (N 1e308), below it.  Before:
    # RuntimeWarning "overflow encountered in matmul" while N+ and N- were summed
    with pytest.raises(lt.InputError, match=r"variance of the coefficient of '\(intercept\)'.*rescale the weights"):
        lt.platt_scaling(Y, S, weights=np.full(N, 1e308))


@pytest.mark.parametrize("c", [2.0**-1000, 1.0, 2.0**100])
def test_platt_targets_are_the_smoothing_formula_in_exact_rationals(c):
    # source: Platt (1999) eq. for the targets t+ = (N+ + 1) / (N+ + 2), t- = 1 / (N- + 2),
    # evaluated in fractions on weights c (1 + i / N); the totals are formed on weights
    # divided by a power of two, which must leave them bit for bit those of the formula
    w = c * (1.0 + np.arange(N) / N)
    fit = lt.platt_scaling(Y, S, weights=w)
    n_pos = sum(Fraction(float(v)) for v, y in zip(w, Y) if y == 1)
    n_neg = sum(Fraction(float(v)) for v, y in zip(w, Y) if y == 0)
    assert fit.target_positive == pytest.approx(float((n_pos + 1) / (n_pos + 2)), rel=4e-16)
    assert fit.target_negative == pytest.approx(float(1 / (n_neg + 2)), rel=4e-16)


@pytest.mark.parametrize("k", [1000, -1000])
@pytest.mark.parametrize("kind", ["binary", "three-class"])
def test_temperature_of_logits_times_2_k_is_2_k_times_the_temperature(kind, k):
    # source: exact algebra -- softmax(Z / T) depends on Z / T only, and multiplying by 2**k
    # is exact, so the fitted temperature is 2**k times the one on Z, bit for bit, with the
    # same log-likelihood.  Before: RuntimeWarning "overflow encountered in square" (k=1000)
    y, Z = (Y, S) if kind == "binary" else (Y3, Z3)
    base = lt.temperature_scaling(y, Z)
    fit = lt.temperature_scaling(y, np.ldexp(Z, k))
    assert fit.temperature == math.ldexp(base.temperature, k)
    assert (fit.converged, fit.iterations, fit.log_likelihood) == (base.converged, base.iterations,
                                                                    base.log_likelihood)


@pytest.mark.parametrize("kind", ["binary", "three-class"])
def test_temperature_with_one_logit_of_1e308_scales_with_the_logits(kind):
    # source: exact algebra as above, on logits with one entry of 1e308 (the others about
    # 1) on its row's observed class: halving every logit halves the temperature exactly.
    # Before: RuntimeWarning "overflow encountered in matmul" or "in reduce"
    y, Z = (Y, S.copy()) if kind == "binary" else (Y3, Z3.copy())
    if kind == "binary":
        Z[int(np.flatnonzero(y == 1)[0])] = 1e308
    else:
        Z[int(np.flatnonzero(y == 2)[0]), 2] = 1e308
    fit = lt.temperature_scaling(y, Z)
    half = lt.temperature_scaling(y, Z / 2)
    assert math.isfinite(fit.temperature) and fit.temperature == 2.0 * half.temperature
    assert fit.log_likelihood == half.log_likelihood


def test_a_temperature_beyond_float64_is_refused():
    # source: exact algebra -- binary logits all 1e308 with both outcomes present want a
    # temperature of order 1e308 or more.  Before: RuntimeWarning "overflow encountered in
    # matmul"
    with pytest.raises(lt.InputError, match=r"fitted temperature is about 1e\d+, beyond what float64 holds"):
        lt.temperature_scaling(Y, np.full(N, 1e308))
