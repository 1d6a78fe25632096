"""The residual checks of a continuous response (lintools.metrics.response_checks) and the
table of classes (lintools.metrics.confusion), against independent sources named beside
each check: exact rational arithmetic (fractions), statsmodels OLS on rows repeated by
their case weight (the meaning of a case weight: a weight of 2 is two copies of the row),
NumPy's inverted-CDF quantile, scikit-learn's confusion_matrix.
"""

from fractions import Fraction

import numpy as np
import pytest
import sklearn.metrics as skm
import statsmodels.api as sm

from lintools import InputError
from lintools.metrics.confusion import confusion_table
from lintools.metrics.response_checks import residual_summary, response_bins, response_line

# small integer data, with whole-number case weights
Y = [3, 5, 4, 9, 7, 12, 10, 15, 13, 20]
PRED = [2, 4, 5, 7, 8, 10, 11, 14, 15, 18]
W = [1, 2, 1, 3, 1, 2, 1, 1, 2, 1]


def _repeated():
    return np.repeat(Y, W).astype(float), np.repeat(PRED, W).astype(float)


def test_binned_means_are_exact_fractions():
    t = response_bins(Y, PRED, bins=2, weights=W)
    # weighted quantile cut: 15 cases, 2 bins; the first bin holds the cases up to the
    # value where the cumulative weight first reaches half (1+2+1+3+1 = 8 >= 7.5, at 8)
    groups = [range(0, 5), range(5, 10)]
    assert t.rows.tolist() == [5, 5]
    for j, g in enumerate(groups):
        wsum = sum(Fraction(W[i]) for i in g)
        mo = sum(Fraction(W[i] * Y[i]) for i in g) / wsum  # source: exact rational arithmetic
        mp = sum(Fraction(W[i] * PRED[i]) for i in g) / wsum
        var = sum(W[i] * (Y[i] - mo) ** 2 for i in g) / (wsum - 1)
        assert t.weight[j] == float(wsum)
        assert t.mean_observed[j] == float(mo) and t.mean_predicted[j] == float(mp)
        assert abs(t.mean_residual[j] - float(mo - mp)) <= 4e-16 * abs(float(mo))
        assert abs(t.observed_sd[j] - float(var) ** 0.5) <= 4e-16 * float(var) ** 0.5
        assert t.lowest[j] == min(PRED[i] for i in g) and t.highest[j] == max(PRED[i] for i in g)


def test_the_bin_interval_is_the_student_t_interval_of_the_repeated_rows():
    t = response_bins(Y, PRED, bins=2, weights=W)
    y, _ = _repeated()
    first = y[:8]
    # source: statsmodels' t interval of a mean (DescrStatsW.tconfint_mean on the copies)
    lo, hi = sm.stats.DescrStatsW(first).tconfint_mean(0.05)
    assert np.isclose(t.observed_lower[0], lo, rtol=1e-13) and np.isclose(t.observed_upper[0], hi, rtol=1e-13)


def test_the_line_of_observed_on_predicted_is_ols_on_the_repeated_rows():
    line = response_line(Y, PRED, weights=W)
    y, p = _repeated()
    ols = sm.OLS(y, sm.add_constant(p)).fit()  # source: statsmodels OLS on rows repeated by weight
    assert np.allclose([line.intercept, line.slope], ols.params, rtol=1e-12)
    assert np.allclose([line.intercept_standard_error, line.slope_standard_error], ols.bse, rtol=1e-11)
    assert np.allclose(line.slope_interval, ols.conf_int(0.05)[1], rtol=1e-11)
    t = ols.t_test(([0.0, 1.0], 1.0))
    assert np.isclose(line.slope_statistic, np.asarray(t.tvalue).item(), rtol=1e-10)
    assert np.isclose(line.slope_p_value, np.asarray(t.pvalue).item(), rtol=1e-9)
    f = ols.f_test((np.eye(2), [0.0, 1.0]))
    assert np.isclose(line.joint_statistic, np.asarray(f.fvalue).item(), rtol=1e-10)
    assert np.isclose(line.joint_p_value, np.asarray(f.pvalue).item(), rtol=1e-9)
    r = y - p
    lo, hi = sm.stats.DescrStatsW(r).tconfint_mean(0.05)  # statsmodels t interval of the mean residual
    assert np.allclose(line.mean_residual_interval, (lo, hi), rtol=1e-12)


def test_the_residual_summary_counts_weights_as_copies():
    s = residual_summary(Y, PRED, weights=W)
    y, p = _repeated()
    r = y - p
    assert s.weight == 15 and s.rows == 10
    assert s.mean == pytest.approx(r.mean(), rel=1e-15)
    assert s.standard_deviation == pytest.approx(r.std(ddof=1), rel=1e-14)
    assert s.root_mean_square == pytest.approx(np.sqrt(np.mean(r**2)), rel=1e-15)
    # source: NumPy's inverted-CDF quantile (the smallest value whose cumulative share reaches q)
    assert s.quantiles.tolist() == np.quantile(r, s.quantile_shares, method="inverted_cdf").tolist()
    assert s.explained == pytest.approx(1 - np.sum(r**2) / np.sum((y - y.mean()) ** 2), rel=1e-14)


def test_scaling_the_weights_leaves_the_means_and_moves_the_intervals_as_copies_do():
    a = response_bins(Y, PRED, bins=3, weights=W)
    b = response_bins(Y, PRED, bins=3, weights=[4 * w for w in W])
    assert a.mean_observed.tolist() == b.mean_observed.tolist() and a.rows.tolist() == b.rows.tolist()
    assert np.all(b.observed_upper - b.observed_lower < a.observed_upper - a.observed_lower)


def test_bad_input_is_refused_by_name():
    with pytest.raises(InputError, match="one prediction per row"):
        response_bins(Y, PRED[:-1])
    with pytest.raises(InputError, match="predictions are all equal"):
        response_line(Y, [1.0] * len(Y))
    with pytest.raises(InputError, match="predicted has a non-finite value .* at row 2"):
        residual_summary(Y, PRED[:2] + [float("nan")] + PRED[3:])


def test_the_table_of_classes_against_scikit_learn():
    rng = np.random.default_rng(7)
    P = rng.dirichlet([1, 2, 3], size=200)
    labels = np.array(["a", "b", "c"])
    y = labels[[rng.choice(3, p=row) for row in P]]
    w = rng.integers(1, 5, 200).astype(float)
    t = confusion_table(y, P, weights=w)
    guess = labels[np.argmax(P, axis=1)]
    # source: scikit-learn confusion_matrix, accuracy_score, recall_score, precision_score
    assert t.weight.tolist() == skm.confusion_matrix(y, guess, labels=labels, sample_weight=w).tolist()
    assert t.rows.tolist() == skm.confusion_matrix(y, guess, labels=labels).tolist()
    assert t.accuracy == pytest.approx(skm.accuracy_score(y, guess, sample_weight=w), rel=1e-15)
    assert np.allclose(t.recall, skm.recall_score(y, guess, labels=labels, average=None, sample_weight=w), rtol=1e-15)
    assert np.allclose(t.precision, skm.precision_score(y, guess, labels=labels, average=None, sample_weight=w),
                       rtol=1e-15)
