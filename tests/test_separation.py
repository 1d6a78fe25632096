"""Exact separation check (Konis 2007 linear programme) and the fits' refusal to diverge.

Sources: the definitions of Albert & Anderson (1984), checked by evaluating the returned
direction on every row; for one feature with an intercept, the exact sorting rule
(complete iff the two classes' ranges do not meet, quasi-complete iff they touch) as an
independent oracle; statsmodels Logit for fits on overlapping data.
"""

import json
import subprocess
import sys
import textwrap

import numpy as np
import pytest
import statsmodels.api as sm
from hypothesis import given, settings
from hypothesis import strategies as st

import lintools.models.separation as separation
from lintools import InputError, LintoolsError, SeparationError, check_separation, logistic


def _margins(chk, X, y, intercept=True):
    return (np.where(y == 1, 1.0, -1.0)) * (X @ chk.direction + (chk.intercept_direction if intercept else 0.0))


def test_complete_separation_is_detected_and_the_direction_separates():
    # source: Albert & Anderson (1984) definition, checked row by row
    rng = np.random.default_rng(0)
    X = rng.normal(size=(60, 3))
    y = (X[:, 0] + 2 * X[:, 1] > 0.3).astype(int)
    chk = check_separation(X, y, names=["a", "b", "c"])
    assert chk.kind == "complete" and chk.separated
    assert np.all(_margins(chk, X, y) > 0)
    np.testing.assert_array_equal(chk.rows, np.arange(60))
    assert {"a", "b"} <= set(chk.columns)
    assert max(np.max(np.abs(chk.direction)), abs(chk.intercept_direction)) == pytest.approx(1.0)


def test_quasi_complete_separation_names_the_perfectly_predicted_rows():
    # source: Albert & Anderson (1984): a hyperplane with both classes on it, one class
    # strictly on each side elsewhere
    x1 = np.array([-3.0, -2.0, -1.0, 0.0, 0.0, 0.0, 0.0, 1.0, 2.0, 3.0])
    x2 = np.array([0.5, -1.0, 2.0, 1.0, -1.0, 2.0, 0.0, 1.5, -0.5, 0.0])
    y = np.array([0, 0, 0, 0, 1, 1, 0, 1, 1, 1])
    X = np.column_stack([x1, x2])
    chk = check_separation(X, y)
    assert chk.kind == "quasi-complete"
    np.testing.assert_array_equal(chk.rows, [0, 1, 2, 7, 8, 9])
    margins = _margins(chk, X, y)
    assert np.all(margins >= -1e-9) and np.all(margins[chk.rows] > 0)
    assert chk.columns == ("x1",) and chk.intercept_direction == 0.0
    assert "quasi-complete separation" in chk.describe()


def _sorting_rule(x, y):
    lo0, hi0, lo1, hi1 = x[y == 0].min(), x[y == 0].max(), x[y == 1].min(), x[y == 1].max()
    if hi0 < lo1 or hi1 < lo0:
        return "complete"
    if hi0 <= lo1 or hi1 <= lo0:
        return "quasi-complete"
    return "none"


@settings(max_examples=60, deadline=None)
@given(st.lists(st.tuples(st.integers(-4, 4), st.booleans()), min_size=3, max_size=25))
def test_one_feature_matches_the_exact_sorting_rule(rows):
    # source: exact rule for one feature with an intercept (derived from Albert & Anderson)
    x = np.array([r[0] for r in rows], dtype=float)
    y = np.array([int(r[1]) for r in rows])
    if len(set(y)) < 2 or len(set(x)) < 2:
        return
    kind = _sorting_rule(x, y)
    chk = check_separation(x[:, None], y)
    assert chk.kind == kind
    if kind == "quasi-complete":
        tie = x[y == 0].max() if x[y == 0].max() <= x[y == 1].min() else x[y == 1].max()
        np.testing.assert_array_equal(chk.rows, np.flatnonzero(x != tie))


def _overlapping(seed, n, p):
    """Random rows plus p + 1 anchor points carrying both labels: the MLE then exists."""
    rng = np.random.default_rng(seed)
    X = rng.normal(size=(n, p))
    y = (X @ rng.normal(size=p) + rng.logistic(size=n) > 0).astype(int)
    anchors = np.vstack([np.zeros(p), np.eye(p)])
    X = np.vstack([X, anchors, anchors])
    y = np.concatenate([y, np.zeros(p + 1, int), np.ones(p + 1, int)])
    return X, y


@settings(max_examples=30, deadline=None)
@given(st.integers(0, 10**6), st.integers(5, 40), st.integers(1, 4))
def test_overlapping_data_are_not_flagged(seed, n, p):
    # source: Albert & Anderson (1984): a point with both labels forces x'theta = 0; p + 1
    # affinely independent such points leave only theta = 0, so the MLE exists
    X, y = _overlapping(seed, n, p)
    assert check_separation(X, y).kind == "none"


@pytest.mark.parametrize("solver", ["newton", "lbfgs", "gradient"])
@pytest.mark.parametrize("kind", ["complete", "quasi-complete"])
def test_unpenalised_fits_on_separated_data_raise_with_the_diagnosis(solver, kind):
    # source: Albert & Anderson (1984): no finite MLE under separation
    y = np.array([0, 0, 0, 0, 1, 1, 1, 1])
    if kind == "complete":
        x = np.array([-2.0, -1.0, -0.5, -0.1, 0.1, 0.5, 1.0, 2.0])
    else:  # rows 3 and 4 share x = 0 with different outcomes
        x = np.array([-2.0, -1.0, -0.5, 0.0, 0.0, 0.5, 1.0, 2.0])
    with pytest.raises(SeparationError) as info:
        logistic(x[:, None], y, solver=solver, max_iter=2000)
    diag = info.value.diagnosis
    assert diag.kind == kind
    message = str(info.value)
    assert f"{kind} separation" in message and "firth=True" in message and "l2 > 0" in message
    # both remedies give finite answers on the same data
    assert np.isfinite(logistic(x[:, None], y, firth=True).coefficients).all()
    assert np.isfinite(logistic(x[:, None], y, l2=1.0, solver=solver, max_iter=2000).coefficients).all()


def test_two_points_are_caught_even_though_the_gradient_vanishes():
    # source: Albert & Anderson (1984); the gradient reaches tol at |eta| near 23, below
    # the in-iteration alarm, so the end-of-fit check must catch it
    with pytest.raises(SeparationError, match="complete separation"):
        logistic(np.array([[-1.0], [1.0]]), [0, 1])


def test_grouped_rows_with_both_outcomes_are_never_perfect():
    # source: Albert & Anderson (1984): a row with successes and failures is an
    # observation of each class at the same point
    x = np.array([[-2.0], [-1.0], [0.0], [1.0], [2.0]])
    succ = np.array([0.0, 0.0, 2.0, 3.0, 3.0])
    trials = np.array([3.0, 3.0, 4.0, 3.0, 3.0])
    chk = check_separation(x, succ, trials=trials)
    assert chk.kind == "quasi-complete"
    np.testing.assert_array_equal(chk.rows, [0, 1, 3, 4])
    with pytest.raises(SeparationError):
        logistic(x, succ, trials=trials)
    # with the middle row mixed on the other side too, the data overlap
    succ2 = np.array([0.0, 1.0, 2.0, 3.0, 3.0])
    assert check_separation(x, succ2, trials=trials).kind == "none"
    ref = sm.GLM(np.column_stack([succ2, trials - succ2]), sm.add_constant(x), family=sm.families.Binomial()).fit(tol=1e-14)
    fit = logistic(x, succ2, trials=trials)
    np.testing.assert_allclose(np.r_[fit.intercept, fit.coefficients], ref.params, rtol=1e-8)


def test_rows_of_weight_zero_are_left_out():
    # source: common practice (a row of weight zero is not an observation)
    x = np.array([[-2.0], [-1.0], [1.0], [2.0], [1.5]])
    y = np.array([0, 0, 1, 1, 0])
    assert check_separation(x, y).kind == "none"
    assert check_separation(x, y, weights=[1, 1, 1, 1, 0]).kind == "complete"


def test_ordinary_fits_never_run_the_linear_programme(monkeypatch):
    # source: common practice (the exact check runs only on signs of divergence)
    def refuse(*args, **kwargs):
        raise AssertionError("the linear programme ran on an ordinary fit")

    monkeypatch.setattr(separation, "separation_from_arrays", refuse)
    d = sm.datasets.spector.load_pandas()
    for solver in ("newton", "lbfgs", "gradient"):
        logistic(d.exog, d.endog, solver=solver, max_iter=5000)
    X, y = _overlapping(3, 200, 3)
    logistic(X, y)


def test_check_separation_input_errors():
    # source: common practice (messages that name the argument)
    # three labels run the multinomial check; naming a positive class asks for a binary one
    with pytest.raises(InputError, match="exactly two"):
        check_separation(np.zeros((3, 1)), [0, 1, 2], positive=1)
    with pytest.raises(InputError, match="intercept must be True or False"):
        check_separation(np.eye(2), [0, 1], intercept=1)


SCRIPT = textwrap.dedent(
    """
    import importlib.abc, sys, json
    class Refuse(importlib.abc.MetaPathFinder):
        def find_spec(self, name, path=None, target=None):
            if name.split(".")[0] == "scipy":
                raise ImportError("scipy is blocked for this test")
            return None
    sys.meta_path.insert(0, Refuse())
    import numpy as np
    import lintools as lt
    out = {}
    x = np.array([[-2.0], [-1.0], [-0.5], [0.5], [1.0], [2.0]])
    try:
        lt.logistic(x, [0, 0, 0, 1, 1, 1])
    except lt.SeparationError as exc:
        out["fit"] = str(exc)
    try:
        lt.check_separation(x, [0, 0, 0, 1, 1, 1])
    except lt.LintoolsError as exc:
        out["check"] = str(exc)
    out["firth"] = float(lt.logistic(x, [0, 0, 0, 1, 1, 1], firth=True).coefficients[0])
    print(json.dumps(out))
    """
)


def test_without_scipy_the_divergence_itself_is_reported():
    # source: common practice (a clear error instead of a huge coefficient)
    proc = subprocess.run([sys.executable, "-c", SCRIPT], capture_output=True, text=True, timeout=120)
    assert proc.returncode == 0, proc.stderr
    out = json.loads(proc.stdout.strip().splitlines()[-1])
    assert "the fit diverges" in out["fit"] and "SciPy" in out["fit"] and "firth=True" in out["fit"]
    assert "needs SciPy" in out["check"]
    assert np.isfinite(out["firth"])
    assert issubclass(SeparationError, LintoolsError)


def test_a_false_alarm_resumes_the_fit_and_matches_statsmodels(monkeypatch):
    # source: statsmodels Logit; one far-out row drives |eta| past the alarm although the
    # classes overlap, so the exact check runs, finds no separation, and the fit goes on
    rng = np.random.default_rng(8)
    x = rng.normal(size=200)
    y = (x + rng.logistic(size=200) > 0).astype(int)
    x[0], y[0] = 60.0, 1
    calls = []
    real = separation.separation_from_arrays
    monkeypatch.setattr(separation, "separation_from_arrays", lambda *a: calls.append(1) or real(*a))
    records = []
    fit = logistic(x[:, None], y, on_iteration=records.append)
    assert calls == [1]  # the alarm fired once and the programme said: no separation
    ref = sm.Logit(y, sm.add_constant(x)).fit(disp=0, method="newton", tol=1e-13)
    np.testing.assert_allclose(np.r_[fit.intercept, fit.coefficients], ref.params, rtol=1e-8)
    assert fit.convergence.converged
    assert abs(fit.linear_predictor(x[:1, None])[0]) > 30
    assert [r.iteration for r in records] == list(range(1, fit.convergence.iterations + 1))
    assert f"converged in {fit.convergence.iterations} iteration" in fit.convergence.message
