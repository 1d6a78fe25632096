"""A new model family is one file: the test-only Poisson family (tests/poisson_family.py)
fits through the one likelihood driver with each solver.

Oracle: statsmodels' Poisson GLM (``sm.GLM(y, X, family=sm.families.Poisson())``, IRLS)
on the capital-punishment data shipped with statsmodels (``statsmodels.datasets.cpunish``:
executions by US state in 1997, 17 rows; the example of statsmodels' GLM documentation).
"""

from __future__ import annotations

import numpy as np
import pytest
import statsmodels.api as sm

from poisson_family import poisson


def _cpunish():
    data = sm.datasets.cpunish.load_pandas().data
    X = data[["INCOME", "PERPOVERTY", "PERBLACK", "VC100k96", "SOUTH", "DEGREE"]].to_numpy(dtype=float)
    X[:, 0] = np.log(X[:, 0])  # log income, as in statsmodels' example
    return X, data["EXECUTIONS"].to_numpy(dtype=float)


@pytest.mark.parametrize("solver", ["newton", "lbfgs", "gradient"])
def test_poisson_family_through_the_driver_matches_statsmodels_glm(solver):
    # source: statsmodels GLM Poisson (IRLS to 1e-14 deviance change) on its cpunish data
    X, y = _cpunish()
    ref = sm.GLM(y, sm.add_constant(X), family=sm.families.Poisson()).fit(tol=1e-14)
    fit = poisson(X, y, solver=solver, max_iter=100 if solver == "newton" else 5000)
    assert fit.convergence.converged, fit.convergence.message
    np.testing.assert_allclose(fit.coefficients, ref.params, rtol=1e-9, atol=0)
    np.testing.assert_allclose(fit.standard_errors, ref.bse, rtol=1e-9, atol=0)
    np.testing.assert_allclose([fit.deviance, fit.null_deviance], [ref.deviance, ref.null_deviance], rtol=1e-9)
