"""Calibration and discrimination metrics under extreme weights, intervals that hold their
estimate, read-only records and hostile values (issue #16).

Invariances checked (each test's name says which):

* scale-free metrics (Brier score and its terms, cross-entropy, reliability means,
  calibration error, ROC area): multiplying every weight by ``c`` changes no value
  (source: the definitions -- weighted means are homogeneous of degree 0 in the weights);
* count statistics (source: the definitions, with case weights as numbers of cases):
  Hosmer-Lemeshow's statistic and counts scale by ``c`` (Hosmer & Lemeshow 1980);
  Spiegelhalter's z by ``sqrt(c)`` and the variance of the Brier score by ``1/c``
  (Spiegelhalter 1986); DeLong's covariance is checked against exact rational arithmetic
  on the scaled weights (DeLong, DeLong & Clarke-Pearson 1988), and the Wilson interval
  against the roots of its quadratic in 1500-digit mpmath arithmetic (Wilson 1927).

The factor ``c`` is drawn log-uniformly over [1e-300, 1e300] with weights of order 1.
"""

from __future__ import annotations

import dataclasses
import functools
import itertools
import math
import warnings
from fractions import Fraction

import mpmath
import numpy as np
import pytest
import scipy.stats
from hypothesis import given, settings
from hypothesis import strategies as st

import lintools as lt
from lintools.support.validate import ReadOnlyArrays
from lintools.cli.calibration import plot_reliability

SETTINGS = settings(max_examples=40, deadline=None)


def close(a, b, rtol=1e-12, atol=0.0):
    a, b = np.asarray(a, float), np.asarray(b, float)
    same_nan = np.isnan(a) & np.isnan(b)
    return bool(np.all(same_nan | (np.abs(a - b) <= rtol * np.abs(b) + atol)))


@st.composite
def weighted(draw, n_min=8, n_max=30, matrix=False):
    """Binary labels (both classes), forecasts in [0.01, 0.99], weights in [0.25, 4] and a
    factor c = 10**e with e uniform on [-300, 300]."""
    n = draw(st.integers(n_min, n_max))
    y = np.array(draw(st.lists(st.integers(0, 1), min_size=n, max_size=n)))
    y[:2] = [0, 1]
    p = np.array(draw(st.lists(st.floats(0.01, 0.99), min_size=n, max_size=n)))
    w = np.array(draw(st.lists(st.floats(0.25, 4.0), min_size=n, max_size=n)))
    c = 10.0 ** draw(st.floats(-300.0, 300.0))
    if matrix:
        raw = np.array(draw(st.lists(st.floats(0.05, 1.0), min_size=3 * n, max_size=3 * n))).reshape(n, 3)
        p = raw / raw.sum(axis=1, keepdims=True)
        y = np.arange(n) % 3
    return y, p, w, c


def outcome(call):
    """The result of ``call`` or the type of the lintools error it raised (the verdict)."""
    try:
        return call()
    except lt.InputError as exc:
        return type(exc)


# ----------------------------------------------------------------- scale-free metrics
@SETTINGS
@given(weighted())
def test_brier_terms_are_unchanged_by_the_weight_scale_and_total_scales_by_c(data):
    y, p, w, c = data
    for bins in (None, 5):
        a, b = lt.brier(y, p, weights=w, bins=bins), lt.brier(y, p, weights=c * w, bins=bins)
        terms = ("score", "reliability", "resolution", "uncertainty", "within_bin_variance", "within_bin_covariance")
        assert close([getattr(b, t) for t in terms], [getattr(a, t) for t in terms], 1e-12, 1e-15)
        assert close(b.total_weight, c * a.total_weight, 1e-13)
        # Murphy (1973) / Stephenson et al. (2008): the identity holds at every scale
        assert close(b.score, b.reliability - b.resolution + b.uncertainty + b.within_bin_variance
                     - b.within_bin_covariance, 0, 1e-13)


@SETTINGS
@given(weighted(matrix=True))
def test_class_matrix_scores_are_unchanged_by_the_weight_scale(data):
    y, P, w, c = data
    assert close(float(lt.brier(y, P, weights=c * w)), float(lt.brier(y, P, weights=w)), 1e-12)
    assert close(lt.cross_entropy(y, P, weights=c * w), lt.cross_entropy(y, P, weights=w), 1e-12)
    for multiclass in ("top-label", "class-wise"):
        assert close(lt.calibration_error(y, P, weights=c * w, multiclass=multiclass),
                     lt.calibration_error(y, P, weights=w, multiclass=multiclass), 1e-12, 1e-15)


@SETTINGS
@given(weighted())
def test_cross_entropy_and_calibration_error_are_unchanged_by_the_weight_scale(data):
    y, p, w, c = data
    assert close(lt.cross_entropy(y, p, weights=c * w), lt.cross_entropy(y, p, weights=w), 1e-12)
    for norm, strategy in itertools.product((1, 2, "max"), ("width", "count")):
        a = lt.calibration_error(y, p, weights=w, norm=norm, strategy=strategy, bins=6)
        b = lt.calibration_error(y, p, weights=c * w, norm=norm, strategy=strategy, bins=6)
        assert close(b, a, 1e-12, 1e-15)


@functools.lru_cache(maxsize=None)
def _wilson_z(level: float):
    """The (1 + level) / 2 normal quantile, sqrt(2) erfinv(level), to 1500 digits."""
    with mpmath.workdps(1500):
        return mpmath.sqrt(2) * mpmath.erfinv(mpmath.mpf(level))


def wilson_roots(phat: float, n: float, level: float) -> tuple[float, float]:
    """Roots of (n + z^2) q^2 - (2 n phat + z^2) q + n phat^2 by the textbook formula in
    1500-digit arithmetic: enough for its two cancellations (b^2 - 4ac with b^2 up to
    1e620, and -b - root down to the smallest subnormal) over every finite n."""
    with mpmath.workdps(1500):
        z = _wilson_z(level)
        N, ph = mpmath.mpf(n), mpmath.mpf(phat)
        a, b, c = N + z**2, -(2 * N * ph + z**2), N * ph**2
        root = mpmath.sqrt(b**2 - 4 * a * c)
        return float((-b - root) / (2 * a)), float((-b + root) / (2 * a))


@SETTINGS
@given(weighted(), st.sampled_from(["width", "count"]))
def test_reliability_means_are_unchanged_and_its_wilson_interval_counts_c_times_the_weight(data, strategy):
    y, p, w, c = data
    a = lt.reliability(y, p, weights=w, bins=5, strategy=strategy)
    b = lt.reliability(y, p, weights=c * w, bins=5, strategy=strategy)
    assert close(b.mean_predicted, a.mean_predicted, 1e-13) and close(b.observed, a.observed, 1e-13)
    assert close(b.weight, c * a.weight, 1e-13)
    live = b.weight > 0
    for t in (a, b):
        # the interval holds the observed frequency (Wilson 1927: q = phat satisfies the inequality)
        assert np.all(t.observed_lower[live] <= t.observed[live]) and np.all(t.observed[live] <= t.observed_upper[live])
        for j in np.flatnonzero(live):
            lo, hi = wilson_roots(float(t.observed[j]), float(t.weight[j]), t.level)
            # source: mpmath roots of Wilson's quadratic, at the table's own frequency and weight
            assert close([t.observed_lower[j], t.observed_upper[j]], [lo, hi], 1e-12, 1e-320)


# ------------------------------------------------------------- count statistics
@SETTINGS
@given(weighted())
def test_hosmer_lemeshow_statistic_and_counts_scale_by_c(data):
    y, p, w, c = data
    a = outcome(lambda: lt.hosmer_lemeshow(y, p, weights=w, groups=4))
    b = outcome(lambda: lt.hosmer_lemeshow(y, p, weights=c * w, groups=4))
    if isinstance(a, type):  # ties leave fewer than 3 groups: refused at every scale
        assert b is a
        return
    assert np.array_equal(a.count, b.count) and b.degrees_of_freedom == a.degrees_of_freedom
    assert close(b.statistic, c * a.statistic, 1e-12)
    for name in ("weight", "observed", "expected", "observed_negative", "expected_negative"):
        assert close(getattr(b, name), c * getattr(a, name), 1e-12, 1e-300)
    # source: SciPy chi2.sf (oracle) at the scaled statistic
    assert close(b.p_value, scipy.stats.chi2.sf(b.statistic, b.degrees_of_freedom), 1e-10, 1e-300)


@SETTINGS
@given(weighted())
def test_spiegelhalter_z_scales_by_root_c_and_brier_variance_by_one_over_c(data):
    y, p, w, c = data
    a = outcome(lambda: lt.spiegelhalter(y, p, weights=w))
    b = outcome(lambda: lt.spiegelhalter(y, p, weights=c * w))
    if isinstance(a, type):
        assert b is a
        return
    assert close(b.statistic, math.sqrt(c) * a.statistic, 1e-12)
    assert close([b.brier, b.expected_brier], [a.brier, a.expected_brier], 1e-12)
    assert close(b.brier_variance, a.brier_variance / c, 1e-12)
    # source: SciPy norm.sf (oracle), two-sided
    assert close(b.p_value, min(1.0, 2 * scipy.stats.norm.sf(abs(b.statistic))), 1e-10, 1e-300)


def exact_delong(y, scores, w):
    """Areas and DeLong covariance in exact rational arithmetic on the given float weights:
    the O(n1 n0) pair sums of DeLong, DeLong & Clarke-Pearson (1988) with case weights."""
    wf = [Fraction(float(v)) for v in w]
    pos = [i for i in range(len(y)) if y[i] == 1]
    neg = [j for j in range(len(y)) if y[j] == 0]
    W1, W0 = sum(wf[i] for i in pos), sum(wf[j] for j in neg)

    def psi(s, i, j):
        return Fraction(1) if s[i] > s[j] else Fraction(1, 2) if s[i] == s[j] else Fraction(0)

    v10 = [[sum(wf[j] * psi(s, i, j) for j in neg) / W0 for i in pos] for s in scores]
    v01 = [[sum(wf[i] * psi(s, i, j) for i in pos) / W1 for j in neg] for s in scores]
    area = [sum(wf[i] * v[k] for k, i in enumerate(pos)) / W1 for v in v10]
    m = len(scores)
    if W1 <= 1 or W0 <= 1:  # DeLong's divisors W - 1 vanish: no covariance
        return area, None, W1, W0
    cov = [[sum(wf[i] * (v10[a][k] - area[a]) * (v10[b][k] - area[b]) for k, i in enumerate(pos)) / ((W1 - 1) * W1)
            + sum(wf[j] * (v01[a][k] - area[a]) * (v01[b][k] - area[b]) for k, j in enumerate(neg)) / ((W0 - 1) * W0)
            for b in range(m)] for a in range(m)]
    return area, cov, W1, W0


@SETTINGS
@given(weighted(n_max=20))
def test_roc_area_is_unchanged_and_delong_variance_counts_the_weights_exactly(data):
    y, p, w, c = data
    cw = c * w
    area, cov, W1, W0 = exact_delong(y, [p], cw)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", lt.LintoolsWarning)  # unit-scale weights may total <= 1 too
        base = lt.roc_auc(y, p, weights=w)
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        r = lt.roc_auc(y, p, weights=cw)
    # source: exact rational arithmetic (area); the area does not depend on the scale
    assert close(r.area, float(area[0]), 1e-13) and close(r.area, base.area, 1e-13)
    if W1 <= 1 or W0 <= 1:  # fewer than one case in a class: no variance, and a warning says so
        assert math.isnan(r.standard_error) and math.isnan(r.lower)
        assert any(issubclass(x.category, lt.LintoolsWarning) for x in caught)
        return
    # W / (W - 1) is the conditioning of DeLong's divisor W - 1 (the weights' rounding)
    cond = float(max(W1 / (W1 - 1), W0 / (W0 - 1)))
    # the absolute floor: a variance that is exactly 0 (perfect ranking) comes out as rounding
    assert close(r.standard_error, math.sqrt(float(cov[0][0])), 1e-11 * cond, 1e-15)
    for kind in ("logit", "plain"):
        q = lt.roc_auc(y, p, weights=cw, interval=kind)
        assert q.lower <= q.area <= q.upper


@SETTINGS
@given(weighted(n_max=16), st.integers(0, 2**32 - 1))
def test_paired_delong_covariance_counts_the_weights_exactly(data, seed):
    y, p, w, c = data
    s2 = p + np.random.default_rng(seed).normal(0.0, 0.3, p.size)
    cw = c * w
    area, cov, W1, W0 = exact_delong(y, [p, s2], cw)
    d = outcome(lambda: lt.roc_auc_difference(y, p, s2, weights=cw))
    if W1 <= 1 or W0 <= 1:
        assert d is lt.InputError
        return
    if isinstance(d, type):  # standard error 0: the same verdict on unit-scale weights
        assert outcome(lambda: lt.roc_auc_difference(y, p, s2, weights=w)) is d
        return
    cond = float(max(W1 / (W1 - 1), W0 / (W0 - 1)))
    exact = np.array([[float(v) for v in row] for row in cov])
    # source: exact rational arithmetic on the scaled weights (DeLong et al. 1988)
    assert close(d.areas, [float(a) for a in area], 1e-13)
    assert np.all(np.abs(d.covariance - exact) <= 1e-11 * cond * np.abs(exact).max())
    assert d.lower <= d.difference <= d.upper


# -------------------------------------------------- regressions (issue #16, main fails)
RNG = np.random.default_rng(16)
N = 200
P = RNG.uniform(0.05, 0.95, N)
Y = (RNG.uniform(size=N) < P).astype(int)
S2 = P + RNG.normal(0.0, 0.2, N)


def test_weights_1e306_give_the_unit_weight_value_or_name_the_overflowing_total():
    # main: Brier 0.0, cross-entropy 0.0, ROC area inf (200 x 1e306 overflows the weight total)
    w = np.full(N, 1e306)
    assert close(lt.cross_entropy(Y, P, weights=w), lt.cross_entropy(Y, P), 1e-14)
    assert close(lt.roc_auc(Y, P, weights=w).area, lt.roc_auc(Y, P).area, 1e-14)  # class totals ~1e308
    assert close(lt.calibration_error(Y, P, weights=w), lt.calibration_error(Y, P), 1e-14)
    with pytest.raises(lt.InputError, match="the total weight exceeds the largest floating-point number"):
        lt.brier(Y, P, weights=w)  # its record reports the total weight, 2e308
    b = lt.brier(Y[:150], P[:150], weights=w[:150])
    assert close(float(b), float(lt.brier(Y[:150], P[:150])), 1e-14) and close(b.total_weight, 1.5e308, 1e-14)


def test_weights_1e306_scale_the_count_statistics_as_the_mathematics_says():
    # main: Hosmer-Lemeshow refused as "too few groups", Spiegelhalter raised OverflowError
    w = np.full(50, 1e306)
    y, p = Y[:50], P[:50]
    assert close(lt.hosmer_lemeshow(y, p, weights=w).statistic, 1e306 * lt.hosmer_lemeshow(y, p).statistic, 1e-13)
    assert close(lt.spiegelhalter(y, p, weights=w).statistic, 1e153 * lt.spiegelhalter(y, p).statistic, 1e-13)
    r = lt.roc_auc(y, p, weights=w)
    assert r.lower <= r.area <= r.upper and 0 < r.standard_error < 1e-150


def test_weights_1e308_give_the_same_value_or_name_the_overflowing_total():
    # main: NaN from every one of these
    w = np.full(N, 1e308)
    assert close(lt.cross_entropy(Y, P, weights=w), lt.cross_entropy(Y, P), 1e-14)
    assert close(lt.calibration_error(Y, P, weights=w), lt.calibration_error(Y, P), 1e-14)
    for call in (lambda: lt.brier(Y, P, weights=w), lambda: lt.roc_auc(Y, P, weights=w),
                 lambda: lt.reliability(Y, P, weights=w), lambda: lt.hosmer_lemeshow(Y, P, weights=w)):
        with pytest.raises(lt.InputError, match="exceeds the largest floating-point number"):
            call()


def test_weights_1e_160_and_1e_170_scale_spiegelhalter_and_warn_about_delong():
    # main: ZeroDivisionError at 1e-170; a silent NaN standard error at 1e-160
    for c in (1e-160, 1e-170):
        z = lt.spiegelhalter(Y, P, weights=np.full(N, c)).statistic
        assert close(z, math.sqrt(c) * lt.spiegelhalter(Y, P).statistic, 1e-13)
    with pytest.warns(lt.LintoolsWarning, match="counts case weights as cases"):
        r = lt.roc_auc(Y, P, weights=np.full(N, 1e-160))
    assert close(r.area, lt.roc_auc(Y, P).area, 1e-14) and math.isnan(r.standard_error)


def test_wilson_lower_bound_is_exactly_zero_at_an_observed_zero_and_the_plot_draws_it(tmp_path):
    # main: the lower bound of a two-row bin of negatives was 5.55e-17 > 0, and the plot
    # stopped with the plotting library's "negative error bar" traceback
    t = lt.reliability([0, 0, 1], [0.05, 0.06, 0.9])
    assert t.observed[0] == 0.0 and t.observed_lower[0] == 0.0
    for y, p, strategy in (([0, 0, 1], [0.05, 0.06, 0.9], "width"), ([0, 1, 0, 1], [0.0, 1.0, 0.0, 1.0], "count"),
                           ([1], [0.3], "width")):  # an observed 0, points at 0 and 1, a one-row table
        plot_reliability(lt.reliability(y, p, bins=5, strategy=strategy), str(tmp_path / "d.png"))
        assert (tmp_path / "d.png").read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"  # PNG signature (PNG spec)


@pytest.mark.parametrize("level", [0.5, 0.9, 0.95, 0.99])
def test_wilson_interval_holds_the_frequency_of_every_count_up_to_300(level):
    # source: Wilson (1927) -- the interval always contains phat; 0 and 1 are exact ends
    n = np.arange(1, 301)
    for k in (np.zeros_like(n), n, n // 3):
        y = np.concatenate([np.r_[np.ones(kk), np.zeros(nn - kk)] for kk, nn in zip(k, n)])
        bins = np.repeat(np.arange(300), n)
        t = lt.reliability(y, (bins + 0.5) / 300, bins=300, level=level)
        assert np.all(t.observed_lower <= t.observed) and np.all(t.observed <= t.observed_upper)
        assert np.all(t.observed_lower[t.observed == 0] == 0) and np.all(t.observed_upper[t.observed == 1] == 1)


# ------------------------------------------------------------------ read-only records
def records():
    y, p = Y[:60], P[:60]
    return {
        "BrierScore": lt.brier(y, p),
        "ReliabilityTable": lt.reliability(y, p),
        "HosmerLemeshow": lt.hosmer_lemeshow(y, p),
        "SpiegelhalterTest": lt.spiegelhalter(y, p),
        "ROCArea": lt.roc_auc(y, p),
        "ROCAreaDifference": lt.roc_auc_difference(y, p, S2[:60]),
        "SplitBalance": lt.split_balance(y, lt.stratified_folds(y, k=3)),
    }


@pytest.mark.parametrize("name", list(records()))
def test_metric_records_hold_read_only_arrays(name):
    # source: the design contract ("records hold read-only NumPy arrays"); main: writable
    rec = records()[name]
    arrays = [getattr(rec, f.name) for f in dataclasses.fields(rec) if isinstance(getattr(rec, f.name), np.ndarray)]
    assert arrays or name in ("BrierScore", "SpiegelhalterTest", "ROCArea")
    for a in arrays:
        with pytest.raises(ValueError):
            a.flat[0] = 99
    assert isinstance(rec, ReadOnlyArrays)


# --------------------------------------------------------------------- hostile values
HN = 12
_rng = np.random.default_rng(1)
HY = {"both": np.array([0, 1] * 6), "ones": np.ones(HN, int), "zeros": np.zeros(HN, int)}
HP = {"mixed": _rng.uniform(0.05, 0.95, HN), "all 0": np.zeros(HN), "all 1": np.ones(HN), "all 1/2": np.full(HN, 0.5),
      "exactly right": (HY["both"] == 1).astype(float), "exactly wrong": (HY["both"] == 0).astype(float),
      "5e-324": np.full(HN, 5e-324), "1 - 2**-53": np.full(HN, 1 - 2**-53)}
HW = {"none": None, "NaN": np.r_[np.nan, np.ones(HN - 1)], "inf": np.r_[np.inf, np.ones(HN - 1)],
      "negative": np.r_[-1.0, np.ones(HN - 1)], "1e308": np.full(HN, 1e308), "float max": np.full(HN, np.finfo(float).max),
      "5e-324": np.full(HN, 5e-324), "2.2e-308": np.full(HN, 2.2e-308), "1e308 and 5e-324": np.r_[1e308, 5e-324, np.ones(HN - 2)],
      "classes 1e308 / 5e-324": np.where(HY["both"] == 1, 1e308, 5e-324), "all zero but one": np.r_[1.0, np.zeros(HN - 1)],
      "all zero": np.zeros(HN)}
S_OTHER = _rng.normal(size=HN)
# plotting is slow: a few of the tables (forecasts on 0 and 1, mixed extreme weights)
PLOTTED = {("exactly wrong", "1e308 and 5e-324"), ("all 1", "none")}
HF = {
    "brier": lambda y, p, w: lt.brier(y, p, weights=w),
    "brier bins": lambda y, p, w: lt.brier(y, p, weights=w, bins=4),
    "cross_entropy": lambda y, p, w: lt.cross_entropy(y, p, weights=w),
    "cross_entropy eps": lambda y, p, w: lt.cross_entropy(y, p, weights=w, eps=1e-15),
    "reliability": lambda y, p, w: lt.reliability(y, p, weights=w),
    "reliability count": lambda y, p, w: lt.reliability(y, p, weights=w, strategy="count"),
    "calibration_error": lambda y, p, w: lt.calibration_error(y, p, weights=w),
    "calibration_error max": lambda y, p, w: lt.calibration_error(y, p, weights=w, norm="max", strategy="count"),
    "hosmer_lemeshow": lambda y, p, w: lt.hosmer_lemeshow(y, p, weights=w, groups=3),
    "spiegelhalter": lambda y, p, w: lt.spiegelhalter(y, p, weights=w),
    "roc_auc": lambda y, p, w: lt.roc_auc(y, p, weights=w),
    "roc_auc plain": lambda y, p, w: lt.roc_auc(y, p, weights=w, interval="plain"),
    "roc_auc_difference": lambda y, p, w: lt.roc_auc_difference(y, p, S_OTHER, weights=w),
}


def _numbers(result):
    if dataclasses.is_dataclass(result):
        return {f.name: getattr(result, f.name) for f in dataclasses.fields(result)
                if isinstance(getattr(result, f.name), (float, np.ndarray))}
    return {"value": result}


@pytest.mark.parametrize("name", list(HF))
def test_hostile_values_give_lintools_errors_or_documented_numbers_only(name, tmp_path):
    """Every combination of hostile labels, forecasts and weights (3 x 8 x 12 per metric):
    no foreign exception and no RuntimeWarning; a non-finite number only where documented
    (cross-entropy inf for a zero probability given to the class that occurred; the ROC
    standard error NaN, with a warning, when a class has total weight <= 1; empty bins)."""
    call = HF[name]
    for (yk, y), (pk, p), (wk, w) in itertools.product(HY.items(), HP.items(), HW.items()):
        with warnings.catch_warnings(record=True) as caught:
            warnings.simplefilter("always")
            try:
                result = call(y, p, w)
            except lt.LintoolsError:
                continue
            finally:
                runtime = [str(x.message) for x in caught if issubclass(x.category, RuntimeWarning)]
                assert not runtime, (yk, pk, wk, runtime)
        where = (yk, pk, wk)
        if name.startswith("reliability"):
            if name == "reliability" and yk == "both" and (pk, wk) in PLOTTED:  # the plot draws these tables
                plot_reliability(result, str(tmp_path / "h.png"))
            live = result.weight > 0
            assert np.all(result.observed_lower[live] <= result.observed[live]), where
            assert np.all(result.observed[live] <= result.observed_upper[live]), where
            continue
        for field, value in _numbers(result).items():
            if np.all(np.isfinite(value)):
                continue
            if name.startswith("cross_entropy"):
                assert value == math.inf and name == "cross_entropy", where
            elif name.startswith("roc_auc") and field in ("standard_error", "lower", "upper",
                                                          "accuracy_ratio_standard_error", "accuracy_ratio_lower",
                                                          "accuracy_ratio_upper"):  # the accuracy ratio's: their images
                assert min(result.positives, result.negatives) <= 1.0, where
                assert any(issubclass(x.category, lt.LintoolsWarning) for x in caught), where
            elif name == "hosmer_lemeshow" and field in ("statistic", "lower", "upper"):
                # documented: an expected count of 0 with observed cases makes the statistic inf
                assert field != "statistic" or value == math.inf, where
            else:
                pytest.fail(f"{name} {field} = {value} for {where}")
