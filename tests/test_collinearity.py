"""Tests of lintools.metrics.collinearity (variance inflation factors, condition indices and
variance-decomposition proportions).

Oracles, named beside each check: statsmodels' variance_inflation_factor (on the design
with a constant column, as statsmodels documents it); an SVD of the scaled design computed
here with numpy.linalg.svd for the condition indices and proportions (Belsley, Kuh &
Welsch 1980, chapter 3); duplicated rows for case weights.
"""

from __future__ import annotations

import json

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from statsmodels.stats.outliers_influence import variance_inflation_factor

import lintools as lt
from lintools import InputError


def design(seed, n=200):
    rng = np.random.default_rng(seed)
    a, b, c = rng.normal(size=(3, n))
    return np.column_stack([a, b, a + 0.5 * b + 0.05 * c, rng.uniform(size=n)])


def bkw(X, intercept=True):
    """Condition indices (ascending) and proportions by the book: unit-length columns of
    [1, X], SVD, phi_jk = v_jk^2 / d_k^2 normalised over k."""
    Z = np.column_stack([np.ones(len(X)), X]) if intercept else X
    Z = Z / np.linalg.norm(Z, axis=0)
    _, d, Vt = np.linalg.svd(Z, full_matrices=False)
    phi = Vt.T**2 / d**2
    shares = (phi / phi.sum(axis=1, keepdims=True)).T
    order = np.argsort(d[0] / d)
    return (d[0] / d)[order], shares[order]


@pytest.mark.parametrize("seed", [0, 1])
def test_against_statsmodels_and_an_svd(seed):
    X = design(seed)
    r = lt.collinearity(X, names=["a", "b", "ab", "u"])
    exog = np.column_stack([np.ones(len(X)), X])
    want = [variance_inflation_factor(exog, j) for j in range(1, exog.shape[1])]
    # source: statsmodels variance_inflation_factor with a constant column (and with standardize=False)
    assert np.allclose(r.variance_inflation, [variance_inflation_factor(exog, j, standardize=False)
                                              for j in range(1, exog.shape[1])], rtol=1e-10, atol=0)
    assert np.allclose(r.variance_inflation, want, rtol=1e-10, atol=0)
    index, shares = bkw(X)
    # source: numpy.linalg.svd of the unit-length design with a column of ones (Belsley, Kuh & Welsch)
    assert np.allclose(r.condition_indices, index, rtol=1e-10, atol=0)
    assert np.allclose(r.proportions, shares, rtol=1e-8, atol=1e-12)
    assert r.terms[0] == "(intercept)" and r.rank == 5
    found = r.dependencies()
    # ab = a + 0.5 b + 0.05 noise: one dimension with index above 30 carries a, b and ab
    assert len(found) == 1 and found[0][0] > 30 and [t for t, _ in found[0][1]] == ["a", "b", "ab"]
    assert "near dependency" in r.report() and json.dumps(r.to_dict())


def test_without_intercept_against_statsmodels_and_an_svd():
    X = design(2) + 3.0
    r = lt.collinearity(X, intercept=False)
    want = [variance_inflation_factor(X, j, standardize=False) for j in range(4)]
    # source: statsmodels variance_inflation_factor on X alone, standardize=False (uncentred R^2)
    assert np.allclose(r.variance_inflation, want, rtol=1e-10)
    index, shares = bkw(X, intercept=False)
    # source: numpy.linalg.svd of the unit-length design
    assert np.allclose(r.condition_indices, index, rtol=1e-10) and np.allclose(r.proportions, shares, rtol=1e-8)


def test_a_weight_of_two_is_a_duplicated_row():
    X = design(3, 80)
    w = np.random.default_rng(3).integers(0, 4, size=80)
    weighted = lt.collinearity(X, weights=w.astype(float))
    copies = lt.collinearity(np.repeat(X, w, axis=0))
    # source: duplicated rows (case weights are counts)
    assert np.allclose(weighted.variance_inflation, copies.variance_inflation, rtol=1e-10)
    assert np.allclose(weighted.condition_indices, copies.condition_indices, rtol=1e-10)
    assert np.allclose(weighted.proportions, copies.proportions, rtol=1e-8, atol=1e-12)


def test_an_exact_dependency_is_reported_not_refused():
    X = design(4)
    X[:, 2] = X[:, 0] + X[:, 1]
    r = lt.collinearity(X)
    assert np.isinf(r.variance_inflation[:3]).all() and np.isfinite(r.variance_inflation[3])
    assert r.rank == 4 and np.isinf(r.condition_indices[-1])
    assert np.allclose(r.proportions.sum(axis=0), 1.0)


@settings(max_examples=30, deadline=None)
@given(st.integers(0, 2**31 - 1), st.floats(1e-50, 1e50), st.floats(-1e3, 1e3))
def test_inflation_is_invariant_to_column_scale_and_shift(seed, c, s):
    """Invariants: the variance inflation factors do not change when a column is
    multiplied by a constant c or shifted (with an intercept; the shift s * c is at most
    1e3 times the column's scale, so the shifted column still holds its digits in
    float64), nor when the weights are scaled; the condition indices of the unit-length
    design do not change when a column is multiplied by a constant."""
    shift = s * c
    X = design(seed, 60)
    w = np.random.default_rng(seed).uniform(0.5, 2.0, size=60)
    base = lt.collinearity(X, weights=w)
    Y = X.copy()
    Y[:, 1] = Y[:, 1] * c + shift
    moved = lt.collinearity(Y, weights=w * c)
    assert np.allclose(moved.variance_inflation, base.variance_inflation, rtol=1e-7)
    Y = X.copy()
    Y[:, 1] *= c
    assert np.allclose(lt.collinearity(Y).condition_indices, lt.collinearity(X).condition_indices, rtol=1e-10)


@pytest.mark.parametrize("X, words", [
    (np.column_stack([np.ones(5), np.arange(5.0)]), "X column 0 ('x1') is constant"),
    (np.array([[1.0, np.nan], [2.0, 3.0]]), "X has a non-finite value (nan) at row 0, column 1"),
])
def test_bad_input_is_refused_by_name(X, words):
    with pytest.raises(InputError) as info:
        lt.collinearity(X)
    assert words in str(info.value)


def test_fit_command_prints_the_collinearity_of_its_design(tmp_path):
    """``lintools fit --collinearity``: the JSON figures against statsmodels on the same columns."""
    import json
    import subprocess
    import sys

    X = design(5, 120)
    y = X @ [1.0, -1.0, 0.5, 2.0] + np.random.default_rng(5).normal(size=120)
    path = tmp_path / "d.csv"
    path.write_text("a,b,ab,u,y\n" + "".join(",".join(repr(float(v)) for v in row) + "\n"
                                            for row in np.column_stack([X, y])))
    out = subprocess.run([sys.executable, "-m", "lintools", "fit", str(path), "--target", "y", "--collinearity",
                          "--json"], capture_output=True, text=True, timeout=120)
    assert out.returncode == 0, out.stderr
    got = json.loads(out.stdout)["collinearity"]
    exog = np.column_stack([np.ones(120), X])
    # source: statsmodels variance_inflation_factor with a constant column
    assert np.allclose(got["variance_inflation"], [variance_inflation_factor(exog, j) for j in range(1, 5)], rtol=1e-10)
    assert got["terms"] == ["(intercept)", "a", "b", "ab", "u"]
    text = subprocess.run([sys.executable, "-m", "lintools", "fit", str(path), "--target", "y", "--collinearity"],
                          capture_output=True, text=True, timeout=120)
    assert "near dependency at index" in text.stdout and "Variance inflation factors" in text.stdout
