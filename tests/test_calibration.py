"""Tests of lintools.metrics.scores, lintools.metrics.bins and lintools.metrics.checks.

Oracles: scikit-learn (brier_score_loss, log_loss, calibration_curve), statsmodels
(proportion_confint Wilson interval, GLM Binomial with offset), SciPy (chi-square and
normal tails), exact rational arithmetic (fractions.Fraction), and lintools' own
logistic fit.  Each check names its source beside it.
"""

from __future__ import annotations

import math
from fractions import Fraction

import numpy as np
import pytest
import scipy.stats
import statsmodels.api as sm
from hypothesis import given, settings
from hypothesis import strategies as st
from sklearn.calibration import calibration_curve
from sklearn.metrics import brier_score_loss, log_loss
from statsmodels.stats.proportion import proportion_confint

from lintools.support.errors import InputError
from lintools.metrics.scores import brier, cross_entropy
from lintools.metrics.bins import calibration_error, reliability
from lintools.metrics.checks import calibration_line, hosmer_lemeshow, spiegelhalter

TOL = 1e-12


def close(a, b, tol=TOL):
    a, b = np.asarray(a, float), np.asarray(b, float)
    return bool(np.all(np.abs(a - b) <= tol * np.maximum(1.0, np.abs(b))))


def tied_data(seed, n=400, grid=20):
    """Random binary data whose forecasts lie on a grid (many ties, some on bin edges)."""
    rng = np.random.default_rng(seed)
    p = np.round(rng.uniform(size=n) * grid) / grid
    y = (rng.uniform(size=n) < p).astype(int)
    w = rng.uniform(0.2, 3.0, size=n)
    return p, y, w


# ------------------------------------------------------------------------ Brier score
@pytest.mark.parametrize("seed", [0, 1, 2])
def test_brier_matches_sklearn(seed):
    p, y, w = tied_data(seed)
    # source: scikit-learn brier_score_loss (oracle), unweighted and with sample_weight
    assert close(brier(y, p).score, brier_score_loss(y, p))
    assert close(brier(y, p, weights=w).score, brier_score_loss(y, p, sample_weight=w))
    labels = np.where(y == 1, "yes", "no")
    # source: scikit-learn brier_score_loss with pos_label on text labels
    assert close(brier(labels, 1 - p, positive="no").score, brier_score_loss(labels, 1 - p, pos_label="no"))


def test_brier_multiclass_matches_sklearn():
    rng = np.random.default_rng(5)
    P = rng.dirichlet([1.0, 2.0, 0.5], size=300)
    P = np.round(P, 1)
    P[:, 2] = 1.0 - P[:, 0] - P[:, 1]
    P = np.clip(P, 0, 1)
    P /= P.sum(axis=1, keepdims=True)
    y = np.array(["a", "b", "c"])[[rng.choice(3, p=row) for row in P]]
    w = rng.uniform(0.5, 2.0, size=300)
    # source: scikit-learn brier_score_loss, multiclass form (sum over classes, range [0, 2])
    assert close(brier(y, P).score, brier_score_loss(y, P, labels=["a", "b", "c"]))
    assert close(brier(y, P, weights=w).score, brier_score_loss(y, P, sample_weight=w, labels=["a", "b", "c"]))


def _fraction_decomposition(y, p, w):
    """Murphy's terms with exact rational arithmetic, grouped by distinct forecast."""
    y = [Fraction(int(v)) for v in y]
    p = [Fraction(float(v)) for v in p]
    w = [Fraction(float(v)) for v in w]
    W = sum(w)
    groups = {}
    for yi, pi, wi in zip(y, p, w):
        g = groups.setdefault(pi, [Fraction(0), Fraction(0)])
        g[0] += wi
        g[1] += wi * yi
    obar = sum(wi * yi for yi, wi in zip(y, w)) / W
    rel = sum(g[0] * (f - g[1] / g[0]) ** 2 for f, g in groups.items()) / W
    res = sum(g[0] * (g[1] / g[0] - obar) ** 2 for g in groups.values()) / W
    bs = sum(wi * (pi - yi) ** 2 for yi, pi, wi in zip(y, p, w)) / W
    return bs, rel, res, obar * (1 - obar)


def test_brier_decomposition_exact_rational():
    p, y, w = tied_data(7, n=120, grid=8)
    bs, rel, res, unc = _fraction_decomposition(y, p, w)
    b = brier(y, p, weights=w)
    # source: exact rational arithmetic (fractions.Fraction) of Murphy's (1973) terms
    assert close([b.score, b.reliability, b.resolution, b.uncertainty],
                 [float(bs), float(rel), float(res), float(unc)])
    assert b.within_bin_variance == 0.0 and b.within_bin_covariance == 0.0
    # source: Murphy (1973) identity BS = REL - RES + UNC, exact in rationals
    assert bs == rel - res + unc


def test_brier_binned_stephenson_terms_exact_rational():
    p, y, _ = tied_data(8, n=150, grid=37)
    b = brier(y, p, bins=5)
    # source: exact rational arithmetic of Stephenson, Coelho & Jolliffe (2008) terms
    edges = np.linspace(0, 1, 6)
    idx = np.searchsorted(edges[1:-1], p, side="left")
    F = [Fraction(float(v)) for v in p]
    O = [Fraction(int(v)) for v in y]
    n = len(F)
    obar = sum(O) / n
    rel = res = wbv = wbc = Fraction(0)
    for k in range(5):
        members = [i for i in range(n) if idx[i] == k]
        if not members:
            continue
        fk = sum(F[i] for i in members) / len(members)
        ok = sum(O[i] for i in members) / len(members)
        rel += len(members) * (fk - ok) ** 2
        res += len(members) * (ok - obar) ** 2
        wbv += sum((F[i] - fk) ** 2 for i in members)
        wbc += 2 * sum((O[i] - ok) * (F[i] - fk) for i in members)
    bs = sum((F[i] - O[i]) ** 2 for i in range(n)) / n
    assert bs == (rel - res + wbv - wbc) / n + obar * (1 - obar)
    assert close([b.reliability, b.resolution, b.within_bin_variance, b.within_bin_covariance, b.score],
                 [float(rel / n), float(res / n), float(wbv / n), float(wbc / n), float(bs)])


def test_brier_multiclass_decomposition_exact_rational():
    rng = np.random.default_rng(9)
    vecs = np.array([[0.5, 0.25, 0.25], [0.125, 0.75, 0.125], [0.25, 0.25, 0.5], [1.0, 0.0, 0.0]])
    P = vecs[rng.integers(0, 4, size=90)]
    y = rng.integers(0, 3, size=90)
    b = brier(y, P)
    # source: exact rational arithmetic, Murphy's vector partition summed over classes
    n = len(y)
    onehot = [[Fraction(int(y[i] == j)) for j in range(3)] for i in range(n)]
    obar = [sum(onehot[i][j] for i in range(n)) / n for j in range(3)]
    rel = res = Fraction(0)
    for v in vecs:
        members = [i for i in range(n) if np.array_equal(P[i], v)]
        if not members:
            continue
        ok = [sum(onehot[i][j] for i in members) / len(members) for j in range(3)]
        rel += len(members) * sum((Fraction(float(v[j])) - ok[j]) ** 2 for j in range(3))
        res += len(members) * sum((ok[j] - obar[j]) ** 2 for j in range(3))
    unc = sum(o * (1 - o) for o in obar)
    assert close([b.reliability, b.resolution, b.uncertainty], [float(rel / n), float(res / n), float(unc)])
    assert abs(b.score - (b.reliability - b.resolution + b.uncertainty)) < 1e-14


@settings(max_examples=50, deadline=None)
@given(
    st.lists(st.tuples(st.sampled_from([0.0, 0.1, 0.25, 0.3, 0.5, 0.7, 0.9, 1.0]), st.booleans(),
                       st.floats(0.1, 5.0)), min_size=1, max_size=60),
    st.one_of(st.none(), st.integers(1, 12)),
)
def test_brier_identity_property(rows, bins):
    p = np.array([r[0] for r in rows])
    y = np.array([r[1] for r in rows]).astype(int)
    w = np.array([r[2] for r in rows])
    b = brier(y, p, weights=w, bins=bins)
    # source: Murphy (1973) identity (Stephenson et al. 2008 with bins), common practice tolerance
    total = b.reliability - b.resolution + b.uncertainty + b.within_bin_variance - b.within_bin_covariance
    assert abs(total - b.score) <= 1e-13
    if bins is None:
        assert b.within_bin_variance == 0.0


# ---------------------------------------------------------------------- cross-entropy
@pytest.mark.parametrize("seed", [0, 3])
def test_cross_entropy_matches_sklearn(seed):
    rng = np.random.default_rng(seed)
    p = np.clip(np.round(rng.uniform(size=300), 2), 0.01, 0.99)
    y = (rng.uniform(size=300) < p).astype(int)
    w = rng.uniform(0.1, 2.0, size=300)
    # source: scikit-learn log_loss (oracle), binary with and without sample_weight
    assert close(cross_entropy(y, p), log_loss(y, p))
    assert close(cross_entropy(y, p, weights=w), log_loss(y, p, sample_weight=w))
    P = rng.dirichlet([2.0, 1.0, 1.0, 3.0], size=300)
    yk = np.array([rng.choice(4, p=row) for row in P])
    # source: scikit-learn log_loss, multiclass
    assert close(cross_entropy(yk, P, weights=w), log_loss(yk, P, sample_weight=w))


def test_cross_entropy_infinite_and_clipped():
    y = [1, 0, 1]
    p = [0.0, 0.2, 0.9]
    # source: definition -log(0) = inf (common practice)
    assert cross_entropy(y, p) == math.inf
    eps = 1e-6
    want = -(math.log(eps) + math.log(0.8) + math.log(0.9)) / 3
    # source: hand computation of the documented clipping rule
    assert close(cross_entropy(y, p, eps=eps), want)
    # a zero-weight row never contributes (documented)
    assert close(cross_entropy(y, p, weights=[0, 1, 1]), -(math.log(0.8) + math.log(0.9)) / 2)
    with pytest.raises(InputError, match="eps must be"):
        cross_entropy(y, p, eps=0.7)


# ---------------------------------------------------------------- reliability table
@pytest.mark.parametrize("seed", [0, 1, 4])
@pytest.mark.parametrize("bins", [5, 10, 13])
def test_reliability_matches_sklearn_binning(seed, bins):
    p, y, _ = tied_data(seed)
    for ours, theirs in (("width", "uniform"), ("count", "quantile")):
        table = reliability(y, p, bins=bins, strategy=ours)
        # source: scikit-learn calibration_curve (oracle), same edges and same edge rule
        prob_true, prob_pred = calibration_curve(y, p, n_bins=bins, strategy=theirs)
        live = table.count > 0
        assert live.sum() == prob_true.shape[0]
        assert close(table.observed[live], prob_true)
        assert close(table.mean_predicted[live], prob_pred)
        assert table.count.sum() == len(p)


def test_reliability_wilson_interval_matches_statsmodels():
    p, y, _ = tied_data(2, n=250)
    table = reliability(y, p, bins=8, level=0.9)
    live = table.count > 0
    successes = np.round(table.observed[live] * table.count[live])
    # source: statsmodels proportion_confint(method="wilson") (oracle)
    lo, hi = proportion_confint(successes, table.count[live], alpha=0.1, method="wilson")
    assert close(table.observed_lower[live], lo) and close(table.observed_upper[live], hi)


def test_reliability_edges_and_empty_bins():
    y = [0, 1, 1, 0, 1]
    p = [0.0, 0.2, 0.5, 0.5000001, 1.0]
    t = reliability(y, p, bins=4)
    # source: documented edge rule (right-closed bins, first closed; p=1 in the last bin)
    assert t.count.tolist() == [2, 1, 1, 1]
    t = reliability(y, [0.0, 0.1, 0.1, 0.15, 0.95], bins=4)
    # empty bins are kept with count 0 and NaN means (documented)
    assert t.count.tolist() == [4, 0, 0, 1]
    assert np.isnan(t.observed[1]) and np.isnan(t.mean_predicted[2]) and np.isnan(t.observed_lower[1])
    assert "reliability table" in t.report()


# ------------------------------------------------------------------ calibration error
def _sklearn_gaps(y, p, bins, strategy):
    """Bin shares and gaps from scikit-learn's binning (oracle)."""
    prob_true, prob_pred = calibration_curve(y, p, n_bins=bins, strategy=strategy)
    if strategy == "uniform":
        edges = np.linspace(0, 1, bins + 1)
    else:
        edges = np.percentile(p, np.linspace(0, 1, bins + 1) * 100)
    counts = np.bincount(np.searchsorted(edges[1:-1], p), minlength=bins)
    share = counts[counts > 0] / len(p)
    return share, np.abs(prob_true - prob_pred)


@pytest.mark.parametrize("seed", [0, 6])
def test_calibration_error_binary_against_sklearn_bins(seed):
    p, y, _ = tied_data(seed, n=500)
    for ours, theirs in (("width", "uniform"), ("count", "quantile")):
        share, gap = _sklearn_gaps(y, p, 15, theirs)
        # source: Naeini et al. (2015) ECE / MCE on scikit-learn calibration_curve bins
        assert close(calibration_error(y, p, strategy=ours), share @ gap)
        assert close(calibration_error(y, p, strategy=ours, norm=2), math.sqrt(share @ gap**2))
        assert close(calibration_error(y, p, strategy=ours, norm="max"), gap.max())


def test_calibration_error_multiclass_against_sklearn_bins():
    rng = np.random.default_rng(11)
    P = np.round(rng.dirichlet([1.0, 1.0, 1.0], size=400), 2)
    P[:, 2] = 1.0 - P[:, 0] - P[:, 1]
    P = np.abs(P)
    P /= P.sum(axis=1, keepdims=True)
    y = np.array([rng.choice(3, p=row) for row in P])
    conf = P.max(axis=1)
    correct = (P.argmax(axis=1) == y).astype(int)
    share, gap = _sklearn_gaps(correct, conf, 10, "uniform")
    # source: Guo et al. (2017) top-label ECE, bins from scikit-learn calibration_curve
    assert close(calibration_error(y, P, bins=10), share @ gap)
    per_class = []
    for k in range(3):
        s, g = _sklearn_gaps((y == k).astype(int), P[:, k], 10, "uniform")
        per_class.append(s @ g)
    # source: Kull et al. (2019) class-wise ECE = mean of per-class ECE, scikit-learn bins
    assert close(calibration_error(y, P, bins=10, multiclass="class-wise"), np.mean(per_class))


# -------------------------------------------------------------------- Hosmer-Lemeshow
HL_P = [0.05, 0.1, 0.15, 0.2, 0.3, 0.35, 0.4, 0.45, 0.6, 0.7, 0.8, 0.9]
HL_Y = [0, 0, 1, 0, 1, 0, 0, 0, 1, 1, 0, 1]


def test_hosmer_lemeshow_hand_table():
    h = hosmer_lemeshow(HL_Y, HL_P, groups=3)
    # source: hand-built table (three groups of four rows) in exact rational arithmetic
    stat = Fraction(0)
    for g in range(3):
        ps = [Fraction(str(v)) for v in HL_P[4 * g: 4 * g + 4]]
        ys = HL_Y[4 * g: 4 * g + 4]
        o1, e1 = Fraction(sum(ys)), sum(ps)
        o0, e0 = 4 - o1, 4 - e1
        stat += (o1 - e1) ** 2 / e1 + (o0 - e0) ** 2 / e0
        assert close(h.observed[g], float(o1)) and close(h.expected[g], float(e1))
    assert h.count.tolist() == [4, 4, 4] and h.degrees_of_freedom == 1
    assert close(h.statistic, float(stat))
    # source: scipy.stats.chi2 upper tail (oracle)
    assert close(h.p_value, scipy.stats.chi2.sf(float(stat), 1), 1e-10)
    assert "Hosmer-Lemeshow" in h.report()


def test_hosmer_lemeshow_ties_never_split_and_weights():
    p = [0.1, 0.2, 0.3, 0.3, 0.3, 0.4, 0.5, 0.6, 0.7, 0.8]
    y = [0, 0, 1, 0, 0, 1, 0, 1, 1, 1]
    h = hosmer_lemeshow(y, p, groups=5)
    # source: documented tie rule (cut points at cumulative shares j/G; ties kept together)
    assert h.count.tolist() == [2, 3, 1, 2, 2] and h.degrees_of_freedom == 3
    # source: frequency-weight identity (common practice): weight 2 == the row twice
    w = np.array([1, 2, 1, 1, 1, 3, 1, 1, 2, 1])
    hw = hosmer_lemeshow(y, p, groups=4, weights=w)
    hr = hosmer_lemeshow(np.repeat(y, w), np.repeat(p, w), groups=4)
    assert close(hw.statistic, hr.statistic) and hw.weight.tolist() == hr.count.tolist()
    # source: scipy.stats.chi2 upper tail (oracle)
    assert close(h.p_value, scipy.stats.chi2.sf(h.statistic, 3), 1e-10)


def test_hosmer_lemeshow_too_few_groups():
    with pytest.raises(InputError, match="3 risk groups"):
        hosmer_lemeshow([0, 1, 0, 1], [0.2, 0.2, 0.7, 0.7])


# ---------------------------------------------------------------------- Spiegelhalter
def test_spiegelhalter_exact_rational():
    p, y, _ = tied_data(3, n=80, grid=10)
    s = spiegelhalter(y, p)
    # source: Spiegelhalter (1986) z = (B - E B) / sqrt(Var B), exact rationals for the parts
    F = [Fraction(float(v)) for v in p]
    O = [Fraction(int(v)) for v in y]
    n = len(F)
    B = sum((o - f) ** 2 for o, f in zip(O, F)) / n
    EB = sum(f * (1 - f) for f in F) / n
    VB = sum((1 - 2 * f) ** 2 * f * (1 - f) for f in F) / n**2
    z = float(B - EB) / math.sqrt(float(VB))
    assert close([s.brier, s.expected_brier, s.brier_variance, s.statistic], [float(B), float(EB), float(VB), z])
    # source: scipy.stats.norm two-sided tail (oracle)
    assert close(s.p_value, 2 * scipy.stats.norm.sf(abs(z)), 1e-10)


def test_spiegelhalter_no_variance():
    with pytest.raises(InputError, match="0, 1/2 or 1"):
        spiegelhalter([0, 1, 1], [0.5, 1.0, 0.5])


# ------------------------------------------------------------------ calibration line
def _line_data(seed, n=600, shrink=0.7):
    rng = np.random.default_rng(seed)
    eta = rng.normal(0.0, 1.5, size=n)
    y = (rng.uniform(size=n) < 1 / (1 + np.exp(-(0.3 + shrink * eta)))).astype(int)
    p = 1 / (1 + np.exp(-eta))
    w = rng.uniform(0.5, 2.0, size=n)
    return y, p, w


def test_calibration_line_matches_statsmodels_glm():
    y, p, w = _line_data(0)
    line = calibration_line(y, p, weights=w)
    eta = np.log(p / (1 - p))
    # source: statsmodels GLM Binomial (oracle), logit(p) as covariate, freq_weights
    glm = sm.GLM(y, np.column_stack([np.ones_like(eta), eta]), family=sm.families.Binomial(),
                 freq_weights=w).fit(tol=1e-14)
    assert close([line.intercept, line.slope], glm.params, 1e-8)
    assert close([line.intercept_standard_error, line.slope_standard_error], glm.bse, 1e-7)
    assert close(line.covariance, glm.cov_params(), 1e-7)
    # source: statsmodels GLM Binomial with offset=logit(p), intercept only
    glm0 = sm.GLM(y, np.ones((len(y), 1)), family=sm.families.Binomial(), offset=eta,
                  freq_weights=w).fit(tol=1e-14)
    assert close(line.in_the_large, glm0.params[0], 1e-8)
    assert close(line.in_the_large_standard_error, glm0.bse[0], 1e-7)
    # source: scipy.stats.norm / chi2 tails for the Wald tests (oracle)
    z = (glm.params[1] - 1) / glm.bse[1]
    assert close(line.slope_p_value, 2 * scipy.stats.norm.sf(abs(z)), 1e-6)
    d = np.array([glm.params[0], glm.params[1] - 1])
    joint = d @ np.linalg.solve(glm.cov_params(), d)
    assert close(line.joint_p_value, scipy.stats.chi2.sf(joint, 2), 1e-6)
    assert "calibration line" in line.report()


def test_calibration_line_matches_own_logistic():
    from lintools.models.logistic import logistic

    y, p, _ = _line_data(1, n=300)
    eta = np.log(p) - np.log1p(-p)
    line = calibration_line(y, p)
    # source: lintools.logistic, slope fit and intercept-only fit with logit(p) as offset
    fit = logistic(eta[:, None], y)
    large = logistic(np.ones((len(y), 1)), y, offset=eta, intercept=False)
    assert close([line.intercept, line.slope], [fit.intercept, fit.coefficients[0]])
    assert close([line.intercept_standard_error, line.slope_standard_error],
                 [fit.intercept_standard_error, fit.standard_errors[0]])
    assert close(line.in_the_large, large.coefficients[0])
    assert close(line.in_the_large_standard_error, large.standard_errors[0])


def test_calibration_line_perfect_forecasts_slope_near_one():
    # perfectly calibrated synthetic forecasts (y drawn from p itself), fixed seed;
    # statistical bound: |slope - 1| < 4 SE and |in-the-large| < 4 SE (common practice)
    rng = np.random.default_rng(2024)
    p = 1 / (1 + np.exp(-rng.normal(0.0, 2.0, size=3000)))
    y = (rng.uniform(size=3000) < p).astype(int)
    line = calibration_line(y, p)
    assert abs(line.slope - 1) < 4 * line.slope_standard_error
    assert abs(line.in_the_large) < 4 * line.in_the_large_standard_error


def test_calibration_line_rejects_zero_one():
    with pytest.raises(InputError, match="logit is infinite"):
        calibration_line([0, 1, 1], [0.2, 1.0, 0.6])


# ---------------------------------------------------------------------- bad inputs
def test_bad_inputs():
    y = [0, 1, 0, 1]
    with pytest.raises(InputError, match=r"outside \[0, 1\]"):
        brier(y, [0.1, 1.2, 0.3, 0.4])
    with pytest.raises(InputError, match="non-finite"):
        reliability(y, [0.1, np.nan, 0.3, 0.4])
    with pytest.raises(InputError, match="needs two classes"):
        hosmer_lemeshow([0, 1, 2, 1], [0.1, 0.2, 0.3, 0.4])
    with pytest.raises(InputError, match="bins must be >= 1"):
        reliability(y, [0.1, 0.2, 0.3, 0.4], bins=0)
    with pytest.raises(InputError, match="bins must be >= 1"):
        calibration_error(y, [0.1, 0.2, 0.3, 0.4], bins=0)
    with pytest.raises(InputError, match="mismatched lengths"):
        cross_entropy(y, [0.1, 0.2, 0.3])
    with pytest.raises(InputError, match="row 1 sums to"):
        brier([0, 1], [[0.5, 0.5], [0.3, 0.3]])
    with pytest.raises(InputError, match="wrong number of columns"):
        cross_entropy(["a", "b", "c"], [[0.5, 0.5], [0.3, 0.7], [0.2, 0.8]])
    with pytest.raises(InputError, match="single label"):
        brier(["a", "a"], [0.2, 0.4])
    with pytest.raises(InputError, match="norm="):
        calibration_error(y, [0.1, 0.2, 0.3, 0.4], norm=3)
    with pytest.raises(InputError, match="strategy="):
        reliability(y, [0.1, 0.2, 0.3, 0.4], strategy="quantile")
    with pytest.raises(InputError, match="binary forecast only"):
        brier([0, 1], [[0.5, 0.5], [0.3, 0.7]], bins=3)
    with pytest.raises(InputError, match="this metric is binary"):
        reliability([0, 1], [[0.5, 0.5], [0.3, 0.7]])
    with pytest.raises(InputError, match="positive="):
        brier(["a", "b"], [0.2, 0.4], positive="c")


def test_inputs_not_modified_and_integer_labels_as_columns():
    P = np.array([[0.2, 0.3, 0.5], [0.6, 0.2, 0.2]])
    keep = P.copy()
    # labels 0 and 2 only: integer labels name the columns (documented)
    b = brier([0, 2], P)
    assert np.array_equal(P, keep)
    # source: hand computation (0.8^2 + 0.3^2 + 0.5^2 + 0.6^2 + 0.2^2 + 0.8^2) / 2
    assert close(b.score, (0.64 + 0.09 + 0.25 + 0.36 + 0.04 + 0.64) / 2)
