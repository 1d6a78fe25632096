"""Row threads (lintools.support.threads): a fit on several threads equals the fit on one, the
caller's BLAS setting comes back, chunks come back in order.

Sources: statsmodels Logit (the oracle, on data large enough to be split into chunks and
handed to the threads); NumPy's own products on the same arrays; the serial run of the
same code (LINTOOLS_THREADS=1).
"""

import threading
import time
import warnings

import numpy as np
import pytest
import statsmodels.api as sm

import lintools as lt
from lintools.support import threads as _threads
from lintools.engine.losses import BinomialLoss
from lintools.engine import LinearModelProblem


def _data(n: int = 120_000, p: int = 6, seed: int = 11):
    rng = np.random.default_rng(seed)
    X = rng.normal(size=(n, p)) * np.linspace(0.5, 3.0, p) + np.linspace(-1.0, 1.0, p)
    eta = 0.3 + X @ np.linspace(-0.4, 0.4, p)
    y = (rng.uniform(size=n) < 1.0 / (1.0 + np.exp(-eta))).astype(float)
    return X, y


def _openblas() -> bool:
    return "openblas" in str(np.__config__.CONFIG["Build Dependencies"]["blas"]["name"]).lower()


def test_blas_control_is_found_for_openblas_builds(monkeypatch):
    # NumPy's wheels ship OpenBLAS: then the row threads must be available, take the
    # number LINTOOLS_THREADS asks for, hold the BLAS at one thread inside the session and
    # give it back its own count afterwards; other builds run on the calling thread (the
    # documented fallback)
    monkeypatch.setenv("LINTOOLS_THREADS", "2")
    control = _threads._lookup()
    before = int(control[1]()) if control is not None else None
    with _threads.session() as count:
        if _openblas():
            assert control is not None
            assert count == 2
            assert int(control[1]()) == 1
        else:
            assert count == 1
    if control is not None:
        assert int(control[1]()) == before


def test_threaded_fit_equals_serial_fit_and_statsmodels(monkeypatch):
    X, y = _data()
    monkeypatch.setenv("LINTOOLS_THREADS", "1")
    one = lt.logistic(X, y, tol=1e-9)
    monkeypatch.setenv("LINTOOLS_THREADS", "2")
    with _threads.session() as count:
        assert count == (2 if _openblas() else 1)
    two = lt.logistic(X, y, tol=1e-9)
    # fixed chunks summed in a fixed order, the BLAS at one thread either way: the same bits
    np.testing.assert_array_equal(two.coefficients, one.coefficients)
    np.testing.assert_array_equal(two.covariance, one.covariance)
    assert two.log_likelihood == one.log_likelihood
    # oracle: statsmodels Logit (Newton, tight tolerance) on the same rows
    ref = sm.Logit(y, sm.add_constant(X)).fit(disp=0, method="newton", tol=1e-12)
    params = np.r_[two.intercept, two.coefficients]
    np.testing.assert_allclose(params, ref.params, rtol=1e-9, atol=0)
    np.testing.assert_allclose(np.r_[two.intercept_standard_error, two.standard_errors], ref.bse, rtol=1e-8)


def test_session_restores_the_blas_setting(monkeypatch):
    control = _threads._lookup()
    if control is None:  # not an OpenBLAS build: nothing is changed, one row thread
        with _threads.session() as count:
            assert count == 1
        return
    setter, getter = control
    before = getter()
    monkeypatch.setenv("LINTOOLS_THREADS", "2")
    with _threads.session() as count:
        assert count == 2
        assert getter() == 1  # the BLAS is held to one thread during the fit
        with _threads.session() as inner:  # nested: the outer one holds everything
            assert inner == 2
        assert getter() == 1
    assert getter() == before
    X, y = _data(60_000, 3)
    X[123, 1] = np.nan
    with pytest.raises(lt.InputError):
        lt.logistic(X, y)
    assert getter() == before  # also after a fit that raised


def test_chunks_come_back_in_order(monkeypatch):
    monkeypatch.setenv("LINTOOLS_THREADS", "2")

    def slow_first(lo: int, hi: int):
        time.sleep(0.02 if lo == 0 else 0.0)  # the first chunk finishes last
        return lo, hi

    with _threads.session():
        out = _threads.for_rows(slow_first, 10, 3)
    assert out == [(0, 3), (3, 6), (6, 9), (9, 10)]
    assert _threads.for_rows(lambda lo, hi: hi - lo, 0, 4) == []


def test_another_threads_fit_waits_for_the_running_one(monkeypatch):
    monkeypatch.setenv("LINTOOLS_THREADS", "2")
    seen = []

    def other() -> None:
        with _threads.session() as count:
            seen.append(count)

    with _threads.session() as mine:
        worker = threading.Thread(target=other)
        worker.start()
        worker.join(timeout=0.2)
        assert worker.is_alive() and seen == []  # waiting for this session to end
    worker.join()
    assert seen == [mine]


def test_concurrent_fits_give_the_same_bits(monkeypatch):
    monkeypatch.setenv("LINTOOLS_THREADS", "2")
    X, y = _data(100_000, 4, seed=8)
    alone = lt.logistic(X, y)
    results = [None, None]

    def run(k: int) -> None:
        results[k] = lt.logistic(X, y)

    workers = [threading.Thread(target=run, args=(k,)) for k in range(2)]
    for w in workers:
        w.start()
    for w in workers:
        w.join()
    for fit in results:
        np.testing.assert_array_equal(fit.coefficients, alone.coefficients)
        np.testing.assert_array_equal(fit.covariance, alone.covariance)


def test_bad_thread_setting_names_the_variable(monkeypatch):
    if _threads._lookup() is None:
        return  # the setting is read only where row threads are possible
    monkeypatch.setenv("LINTOOLS_THREADS", "two")
    X, y = _data(2000, 2)
    with pytest.raises(ValueError, match="LINTOOLS_THREADS"):
        lt.logistic(X, y)


def test_threaded_products_match_numpy(monkeypatch):
    X, y = _data(300_000, 7, seed=3)
    monkeypatch.setenv("LINTOOLS_THREADS", "2")
    with _threads.session():
        problem = LinearModelProblem(X, BinomialLoss(y), intercept=True)
        r = np.random.default_rng(1).normal(size=X.shape[0])
        got = problem._transposed_product(r)
        z = np.random.default_rng(2).normal(size=problem.size)
        eta = problem.eta(z)
        W = np.random.default_rng(3).uniform(size=X.shape[0])
        H = problem._information(W)
    bound = np.abs(r) @ np.abs(X)  # the scale of the rounding of X' r
    assert np.all(np.abs(got - X.T @ r) <= 1e-13 * bound)
    b, beta = problem.coefficients(z)
    np.testing.assert_allclose(eta, X @ beta + b, rtol=0, atol=1e-13 * float(np.max(np.abs(X) @ np.abs(beta)) + abs(b)))
    A = np.column_stack([np.ones(X.shape[0]), (X - problem.c) / problem.s])
    Href = A.T @ (A * W[:, None])
    np.testing.assert_allclose(H, Href, rtol=1e-12, atol=1e-12 * float(np.max(np.abs(Href))))


def test_no_floating_point_warnings_from_the_threads(monkeypatch):
    # errstate is per thread: each chunk sets its own (overflowing exp is the right limit)
    monkeypatch.setenv("LINTOOLS_THREADS", "2")
    n = 100_000
    y = (np.arange(n) % 2).astype(float)
    eta = np.where(np.arange(n) % 3 == 0, 1000.0, -1000.0) * (1 + np.arange(n) / n)
    loss = BinomialLoss(y)
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        with _threads.session():
            g = loss.gradient(eta)
            v = loss.value(eta)
            c = loss.value_change(eta, np.full(n, 0.5))
    serial = BinomialLoss(y)
    monkeypatch.setenv("LINTOOLS_THREADS", "1")
    np.testing.assert_array_equal(g, serial.gradient(eta))
    assert v == pytest.approx(serial.value(eta), rel=1e-15)
    assert c == pytest.approx(serial.value_change(eta, np.full(n, 0.5)), rel=1e-14)


@pytest.mark.parametrize("weighted", [False, True])
def test_threaded_least_squares_equals_serial_and_statsmodels(monkeypatch, weighted):
    rng = np.random.default_rng(21)
    n, p = 150_000, 5
    X = rng.normal(size=(n, p)) * np.array([1.0, 2.0, 0.5, 3.0, 1.5]) + np.array([0.0, 5.0, -2.0, 0.3, 1.0])
    y = 1.0 + X @ np.array([0.5, -0.2, 0.1, 0.05, 0.3]) + rng.normal(size=n) * (1 + 0.5 * np.abs(X[:, 0]))
    w = rng.uniform(0.5, 2.0, size=n) if weighted else None
    fits = {}
    for count in ("1", "2"):
        monkeypatch.setenv("LINTOOLS_THREADS", count)
        fits[count] = lt.least_squares(X, y, weights=w, covariance="HC3", weight_type="precision", diagnostics=True)
    one, two = fits["1"], fits["2"]
    np.testing.assert_array_equal(two.coefficients, one.coefficients)
    np.testing.assert_array_equal(two.covariance, one.covariance)
    # oracle: statsmodels WLS / OLS with HC3 on the same rows
    A = sm.add_constant(X)
    model = sm.WLS(y, A, weights=w) if weighted else sm.OLS(y, A)
    ref = model.fit(cov_type="HC3")
    np.testing.assert_allclose(np.r_[two.intercept, two.coefficients], ref.params, rtol=1e-10)
    np.testing.assert_allclose(two.covariance, ref.cov_params(), rtol=1e-8,
                               atol=1e-10 * float(np.max(np.abs(ref.cov_params()))))


def _fit_in_child(queue) -> None:
    X, y = _data(100_000, 4, seed=8)
    queue.put(lt.logistic(X, y).coefficients.tolist())


def test_a_forked_child_can_fit_after_the_parent_did(monkeypatch):
    # the parent's pool threads do not exist in a forked child: it must make its own
    import multiprocessing

    if "fork" not in multiprocessing.get_all_start_methods():
        return  # no fork on this platform: nothing to inherit
    monkeypatch.setenv("LINTOOLS_THREADS", "2")
    X, y = _data(100_000, 4, seed=8)
    parent = lt.logistic(X, y).coefficients
    ctx = multiprocessing.get_context("fork")
    queue = ctx.Queue()
    child = ctx.Process(target=_fit_in_child, args=(queue,))
    child.start()
    got = queue.get(timeout=60)  # without the fork handler the child waits forever
    child.join(timeout=60)
    assert child.exitcode == 0
    np.testing.assert_array_equal(np.array(got), parent)


def _classes(n: int = 70_000, p: int = 5, K: int = 4, seed: int = 31):
    rng = np.random.default_rng(seed)
    X = rng.normal(size=(n, p)) * np.linspace(0.5, 2.0, p) + np.linspace(-0.5, 0.5, p)
    E = X @ rng.normal(scale=0.4, size=(p, K)) + np.linspace(-0.3, 0.3, K)
    P = np.exp(E - E.max(axis=1, keepdims=True))
    P /= P.sum(axis=1, keepdims=True)
    y = (rng.uniform(size=(n, 1)) > np.cumsum(P, axis=1)).sum(axis=1)
    return X, y


def test_threaded_softmax_equals_serial_and_statsmodels(monkeypatch):
    X, y = _classes()  # 70k rows: the warm start, sketch and float32 steps all run
    fits = {}
    for count in ("1", "2"):
        monkeypatch.setenv("LINTOOLS_THREADS", count)
        fits[count] = (lt.softmax(X, y, tol=1e-9), lt.softmax(X, y, l2=3.0, reference=None, tol=1e-9))
    for one, two in zip(fits["1"], fits["2"]):
        # fixed chunks summed in a fixed order, the BLAS at one thread either way: the same bits
        np.testing.assert_array_equal(two.coefficients, one.coefficients)
        np.testing.assert_array_equal(two.intercept, one.intercept)
        np.testing.assert_array_equal(two.covariance, one.covariance)
        assert two.log_likelihood == one.log_likelihood
    # oracle: statsmodels MNLogit (Newton, tight tolerance), coefficients against the first class
    two = fits["2"][0]
    ref = sm.MNLogit(y, sm.add_constant(X)).fit(disp=0, method="newton", tol=1e-12, maxiter=100)
    params = np.asarray(ref.params)
    np.testing.assert_allclose(two.intercept[1:], params[0], rtol=1e-8, atol=1e-11)
    np.testing.assert_allclose(two.coefficients[:, 1:], params[1:], rtol=1e-8, atol=1e-11)
    np.testing.assert_allclose(two.standard_errors[:, 1:], np.asarray(ref.bse)[1:], rtol=1e-7)


@pytest.fixture
def two_blas_threads(monkeypatch):
    """The BLAS at two threads on entry to a session, with two CPUs allowed (the machine's
    count does not decide the test); LINTOOLS_THREADS unset, so the library chooses."""
    control = _threads._lookup()
    if control is None:
        if _openblas():
            pytest.fail("NumPy's OpenBLAS has no thread control found: the row threads are off")
        pytest.skip("not an OpenBLAS build: one row thread always (the documented fallback)")
    monkeypatch.delenv("LINTOOLS_THREADS", raising=False)
    monkeypatch.setattr(_threads, "_cpus", lambda: 2)
    before = control[1]()
    control[0](2)
    yield
    control[0](before)


def test_settle_picks_one_row_thread_for_few_coefficients(two_blas_threads, monkeypatch):
    few, many = _threads.FEW_PARAMETERS - 1, _threads.FEW_PARAMETERS
    with _threads.session() as count:
        assert count == 2
        assert _threads.settle(few, 2) == 1 and _threads.threads() == 1
        assert _threads.settle(many, 2) == 2 and _threads.threads() == 2
        assert _threads.settle(few, 1) == 2  # one output (binary logistic): the count found on entry
        _threads.settle(few, 2)
        with _threads.session():  # an inner fit's choice ends with it
            assert _threads.settle(many, 2) == 2
        assert _threads.threads() == 1
    assert _threads.settle(many, 2) == 1  # outside a session: the calling thread only
    monkeypatch.setenv("LINTOOLS_THREADS", "2")  # the user's count is kept either way
    with _threads.session():
        assert _threads.settle(few, 2) == 2
    monkeypatch.setenv("LINTOOLS_THREADS", "1")
    with _threads.session():
        assert _threads.settle(many, 2) == 1


@pytest.mark.parametrize("p, K, pool", [(5, 3, False), (20, 5, True), (5, 2, True)])
def test_fits_choose_their_row_threads_and_keep_their_bits(two_blas_threads, monkeypatch, p, K, pool):
    # softmax with reference class: (p + 1) (K - 1) coefficients, 12 (below FEW_PARAMETERS:
    # one row thread, no pool is made) or 84 (two row threads); K = 2 is a binary logistic
    # fit (one output: two row threads at any size).  20,000 rows are several chunks of
    # every pass.  The same bits as either count set by LINTOOLS_THREADS.
    if K > 2:
        assert ((p + 1) * (K - 1) >= _threads.FEW_PARAMETERS) == pool
    X, y = _classes(20_000, p, K, seed=5)
    fit = lt.softmax if K > 2 else lt.logistic
    monkeypatch.setattr(_threads, "_pool", {})
    auto = fit(X, y)
    assert bool(_threads._pool) == pool
    for count in ("1", "2"):
        monkeypatch.setenv("LINTOOLS_THREADS", count)
        fixed = fit(X, y)
        np.testing.assert_array_equal(auto.coefficients, fixed.coefficients)
        np.testing.assert_array_equal(auto.covariance, fixed.covariance)
        assert auto.log_likelihood == fixed.log_likelihood
