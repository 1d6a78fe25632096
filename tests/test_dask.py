"""Blocked fits on dask arrays, run on a two-process distributed.LocalCluster.

Sources: the in-memory lintools fits on the same rows (checked against statsmodels,
scikit-learn and exact arithmetic elsewhere), on data shipped by scikit-learn (diabetes,
breast cancer, standardised) and statsmodels (spector; anes96, the American National
Election Studies 1996 extract, an open dataset).  dask and distributed are
imported at module top, so a missing ``dask`` extra fails this module (never skips).
"""

from __future__ import annotations

import dask.array as da
import distributed
import numpy as np
import pytest
import statsmodels.api as sm
from sklearn.datasets import load_breast_cancer, load_diabetes

import lintools as lt
from lintools import InputError
from lintools.blocks import least_squares_blocks, logistic_blocks, softmax_blocks

RTOL = 1e-10

_diabetes = load_diabetes()
DX, DY = _diabetes.data, _diabetes.target
_bc = load_breast_cancer()
BX = (_bc.data - _bc.data.mean(0)) / _bc.data.std(0)
BY = _bc.target
SPECTOR = sm.datasets.spector.load_pandas()
SX, SY = SPECTOR.exog.to_numpy(float), SPECTOR.endog.to_numpy(float)
ANES = sm.datasets.anes96.load_pandas().data
AX = ANES[["logpopul", "selfLR", "age", "educ", "income"]].to_numpy(float)
AY = ANES["PID"].to_numpy()  # 7 classes
# invented weights, only to exercise weighted chunks; the reference is the in-memory fit
AW = np.random.default_rng(13).uniform(0.1, 2.0, AX.shape[0])
DW = np.random.default_rng(11).uniform(0.0, 2.0, DX.shape[0])
BW = np.random.default_rng(12).uniform(0.2, 2.0, BX.shape[0])


@pytest.fixture(scope="module")
def client():
    cluster = distributed.LocalCluster(n_workers=2, threads_per_worker=1, processes=True,
                                       dashboard_address=None)
    c = distributed.Client(cluster)
    try:
        yield c
    finally:
        c.close()
        cluster.close()


def _chunks(n):
    """Uneven row chunks, the first of one row."""
    return (1, n // 4, n // 3, n - 1 - n // 4 - n // 3)


def _dask(client, *arrays, chunks):
    out = []
    for a in arrays:
        cs = (chunks,) + ((a.shape[1],) if a.ndim == 2 else ())
        out.append(client.persist(da.from_array(a, chunks=cs)))
    return out


def rel(a, b):
    a, b = np.asarray(a, float), np.asarray(b, float)
    return float(np.max(np.abs(a - b) / np.maximum(np.abs(b), 1e-300)))


def _same(f, g):
    assert rel(f.coefficients, g.coefficients) <= RTOL
    assert rel(f.standard_errors, g.standard_errors) <= RTOL
    assert rel(f.intercept, g.intercept) <= RTOL
    assert rel(f.intercept_standard_error, g.intercept_standard_error) <= RTOL
    assert rel(f.log_likelihood, g.log_likelihood) <= RTOL
    assert rel(f.deviance, g.deviance) <= RTOL
    assert f.n_observations == pytest.approx(g.n_observations, rel=1e-14)


@pytest.mark.parametrize("l2", [0.0, 1.5])
def test_least_squares_on_the_cluster_equals_in_memory(client, l2):
    # source: the in-memory lintools.least_squares on scikit-learn's diabetes data
    X, y, w = _dask(client, DX, DY, DW, chunks=_chunks(DX.shape[0]))
    fit = least_squares_blocks(X=X, y=y, weights=w, l2=l2)
    ref = lt.least_squares(DX, DY, weights=DW, l2=l2)
    _same(fit, ref)
    assert rel(fit.f_statistic, ref.f_statistic) <= RTOL and rel(fit.r_squared, ref.r_squared) <= RTOL
    assert fit.convergence.solver == "tsqr"


def test_logistic_on_the_cluster_equals_in_memory(client):
    # source: the in-memory lintools.logistic on statsmodels' spector data (unpenalised)
    X, y = _dask(client, SX, SY, chunks=(1, 10, 21))
    fit = logistic_blocks(X=X, y=y)
    ref = lt.logistic(SX, SY)
    _same(fit, ref)
    assert rel(fit.lr_statistic, ref.lr_statistic) <= 1e-9 and fit.convergence.converged


def test_weighted_ridge_logistic_on_the_cluster_equals_in_memory(client):
    # source: the in-memory lintools.logistic on scikit-learn's breast-cancer data
    # (standardised), with l2 and invented case weights; columns split in two chunks
    X = client.persist(da.from_array(BX, chunks=(_chunks(BX.shape[0]), (10, 20))))
    y, w = _dask(client, BY, BW, chunks=_chunks(BX.shape[0]))
    fit = logistic_blocks(X=X, y=y, weights=w, l2=1.0)
    _same(fit, lt.logistic(BX, BY, weights=BW, l2=1.0))


def test_bad_chunks_are_named_on_the_cluster(client):
    # common practice: a bad chunk raises InputError naming the chunk (block), row, column
    bad = DX.copy()
    bad[120, 3] = np.nan  # chunk 2 starts at row 1 + 110 = 111
    X, y = _dask(client, bad, DY, chunks=_chunks(DX.shape[0]))
    with pytest.raises(InputError, match=r"block 2 \(rows counted within the block\): X has a non-finite value \(nan\) at row 9, column 3"):
        least_squares_blocks(X=X, y=y)
    X, = _dask(client, DX, chunks=_chunks(DX.shape[0]))
    y_other = client.persist(da.from_array(DY, chunks=(221, 221)))
    with pytest.raises(InputError, match=r"y has row chunks .* but X has .*y.rechunk\(X.chunks\[0\]\)"):
        least_squares_blocks(X=X, y=y_other)
    yb, = _dask(client, np.where(DY > 140, 2, np.where(DY > 100, 1, 0)), chunks=_chunks(DX.shape[0]))
    with pytest.raises(InputError, match="third label"):
        logistic_blocks(X=X, y=yb)


def test_softmax_on_the_cluster_equals_in_memory(client):
    # source: the in-memory lintools.softmax on statsmodels' anes96 data (PID, 7 classes),
    # with invented case weights; unpenalised with the first class as reference, and the
    # symmetric form with l2.  Measured worst LRE: reference class, coefficients 14.2,
    # standard errors 15.1; symmetric form, coefficients 11.6 relative to each term's
    # largest entry (the in-memory fit's own rounding level there, see
    # test_blocks_softmax.py), standard errors 11.9; log-likelihood >= 15.8.
    X, y, w = _dask(client, AX, AY, AW, chunks=_chunks(AX.shape[0]))
    for kw in ({}, {"l2": 2.0, "reference": None}):
        fit = softmax_blocks(X=X, y=y, weights=w, **kw)
        ref = lt.softmax(AX, AY, weights=AW, **kw)
        scale = np.max(np.abs(ref.coefficients), axis=1, keepdims=True)
        assert float(np.max(np.abs(fit.coefficients - ref.coefficients) / scale)) <= RTOL
        assert rel(fit.standard_errors, ref.standard_errors) <= RTOL
        assert rel(fit.intercept, ref.intercept) <= RTOL
        assert rel(fit.log_likelihood, ref.log_likelihood) <= RTOL
        assert rel(fit.null_deviance, ref.null_deviance) <= RTOL
        assert fit.classes == ref.classes and fit.convergence.converged
        if not kw:
            assert rel(fit.lr_statistic, ref.lr_statistic) <= RTOL


def test_a_chunk_recomputed_with_other_values_is_refused(client):
    # issue #16: a chunk from a non-deterministic graph gives other rows on each pass (here
    # a delayed function with fresh noise, pure=False); common practice: one data set per fit
    import dask

    def noisy(lo, hi):
        return DX[lo:hi] + 1e-9 * np.random.default_rng().normal(size=(hi - lo, DX.shape[1]))

    cuts = [0, 150, 300, DX.shape[0]]
    parts = [da.from_delayed(dask.delayed(noisy, pure=False)(a, b), shape=(b - a, DX.shape[1]), dtype=float)
             for a, b in zip(cuts[:-1], cuts[1:])]
    X = da.concatenate(parts)
    y = da.from_array(DY, chunks=(tuple(b - a for a, b in zip(cuts[:-1], cuts[1:])),))
    with pytest.raises(InputError, match="on pass 2 differs from the same block on pass 1: X holds other values"):
        least_squares_blocks(X=X, y=y)
