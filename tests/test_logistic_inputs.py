"""Bad input to logistic(): each case raises InputError naming the argument and the remedy.

Source: common practice (the README's error contract: name the argument, the position and
the remedy; bad input never yields a silent number).
"""

import numpy as np
import pytest

from lintools import InputError, LogisticFit, logistic

RNG = np.random.default_rng(0)
X = RNG.normal(size=(20, 2))
Y = (X[:, 0] + RNG.logistic(size=20) > 0).astype(int)
M = np.full(20, 5.0)
S = np.minimum(np.floor(RNG.random(20) * 6), 5.0)

CASES = [
    ("three labels", dict(y=np.arange(20) % 3), "3 distinct labels"),
    ("three labels remedy", dict(y=np.arange(20) % 3), "lintools.softmax"),
    ("one class", dict(y=np.zeros(20)), "only one class"),
    ("missing label", dict(y=[None] + [0, 1] * 9 + [1]), "missing label at row 0"),
    ("successes exceed trials", dict(y=np.r_[6.0, S[1:]], trials=M), "exceeds trials (5) at row 0"),
    ("non-integer successes", dict(y=np.r_[2.5, S[1:]], trials=M), "not a whole number (2.5) at row 0"),
    ("non-integer trials", dict(y=S, trials=np.r_[5.5, M[1:]]), "trials is not a whole number (5.5) at row 0"),
    ("negative trials", dict(y=S, trials=np.r_[M[:3], -1.0, M[4:]]), "trials is negative (-1) at row 3"),
    ("negative successes", dict(y=np.r_[-1.0, S[1:]], trials=M), "y is negative (-1) at row 0"),
    ("trials wrong length", dict(y=S, trials=M[:5]), "trials has 5 entries but X has 20 rows"),
    ("no successes", dict(y=np.zeros(20), trials=M), "no successes"),
    ("no failures", dict(y=M, trials=M), "no failures"),
    ("positive with trials", dict(y=S, trials=M, positive=1), "leave positive unset"),
    ("positive not a label", dict(positive="yes"), "positive='yes' is not one of the labels"),
    ("bad solver", dict(solver="sgd"), "solver='sgd' is not one of 'newton', 'lbfgs', 'gradient'"),
    ("tol zero", dict(tol=0.0), "tol must be a finite number > 0"),
    ("tol negative", dict(tol=-1e-8), "tol must be a finite number > 0"),
    ("tol nan", dict(tol=float("nan")), "tol must be a finite number > 0"),
    ("max_iter zero", dict(max_iter=0), "max_iter must be >= 1"),
    ("max_iter float", dict(max_iter=10.5), "max_iter must be an integer"),
    ("offset wrong length", dict(offset=np.zeros(19)), "offset has 19 entries but X has 20 rows"),
    ("offset not finite", dict(offset=np.r_[np.inf, np.zeros(19)]), "offset has a non-finite value"),
    ("firth with l2", dict(firth=True, l2=0.5), "firth=True together with l2 > 0"),
    ("negative l2", dict(l2=-1.0), "l2 must be a finite number >= 0"),
    ("intercept not bool", dict(intercept="yes"), "intercept must be True or False"),
    ("firth not bool", dict(firth=1), "firth must be True or False"),
    ("on_iteration not callable", dict(on_iteration=3), "on_iteration must be a callable"),
    ("profile level", dict(profile=True, profile_level=1.5), "profile_level must lie strictly between 0 and 1"),
    ("negative weight", dict(weights=np.r_[-1.0, np.ones(19)]), "weights has a negative value (-1.0) at row 0"),
    ("labels wrong length", dict(y=Y[:10]), "y has 10 labels but X has 20 rows"),
    ("names wrong length", dict(names=["a"]), "names has 1 entries but X has 2 columns"),
]


@pytest.mark.parametrize("what,kwargs,fragment", CASES, ids=[c[0] for c in CASES])
def test_bad_input_is_refused_with_a_message(what, kwargs, fragment):
    args = dict(y=Y)
    args.update(kwargs)
    y = args.pop("y")
    with pytest.raises(InputError) as info:
        logistic(X, y, **args)
    assert fragment in str(info.value), str(info.value)


def test_design_problems_name_the_column():
    Xc = np.column_stack([X, np.ones(20)])
    with pytest.raises(InputError, match=r"X column 2 \('x3'\) is constant on the rows used"):
        logistic(Xc, Y)
    Xd = np.column_stack([X, X[:, 0] - 2 * X[:, 1]])
    for kw in ({}, {"firth": True}, {"solver": "lbfgs"}):
        with pytest.raises(InputError, match=r"rank deficient.*column 2 \('x3'\).*'x1', 'x2'"):
            logistic(Xd, Y, **kw)
    with pytest.raises(InputError, match=r"row 3, column 1"):
        logistic(np.where(np.arange(40).reshape(20, 2) == 7, np.nan, X), Y)
    # a ridge makes the dependent design estimable (the documented remedy)
    assert np.all(np.isfinite(logistic(Xd, Y, l2=1.0).coefficients))


def test_inputs_are_not_modified_and_the_record_is_frozen():
    Xc, Yc, w, o = X.copy(), Y.copy(), np.ones(20), np.zeros(20)
    fit = logistic(Xc, Yc, weights=w, offset=o)
    np.testing.assert_array_equal(Xc, X)
    np.testing.assert_array_equal(Yc, Y)
    assert np.all(w == 1) and np.all(o == 0)
    assert isinstance(fit, LogisticFit)
    with pytest.raises(AttributeError):
        fit.intercept = 0.0
    with pytest.raises(InputError, match="X has 3 columns but the model has 2"):
        fit.mean(np.zeros((2, 3)))
