"""Tests of lintools.splitting.stratified: stratified holdout, folds, repeats, bootstrap and balance.

Sources named beside the checks:
- scikit-learn's StratifiedKFold / StratifiedShuffleSplit (oracle library) for the
  per-fold class counts and for exact-share holdouts;
- pandas.crosstab (oracle library) for the balance report's counts;
- exact rational arithmetic (fractions.Fraction) for the documented rounding rule;
- Sechidis, Tsoumakas & Vlahavas (2011) for iterative stratification and its
  label-distribution (LD) measure;
- NumPy's documented stream stability of ``default_rng`` / ``SeedSequence.spawn``.
Where no outside source exists the check is marked "common practice" (e.g. partitions).
"""

from __future__ import annotations

import math
import warnings
from collections import Counter
from fractions import Fraction

import numpy as np
import pandas as pd
import pytest
from hypothesis import HealthCheck, assume, given, settings
from hypothesis import strategies as st
from sklearn.model_selection import StratifiedKFold, StratifiedShuffleSplit

from lintools.support.errors import InputError, LintoolsWarning
from lintools.splitting.stratified import (
    SmallClassWarning,
    repeated_stratified_folds,
    split_balance,
    stratified_bootstrap,
    stratified_folds,
    stratified_holdout,
)

# no timing in tests: a loaded machine must not turn slow data generation into a failure
FAST = settings(max_examples=40, deadline=None, suppress_health_check=[HealthCheck.too_slow])

labels_st = st.lists(st.integers(0, 4), min_size=2, max_size=60)
fractions_st = st.sampled_from([0.1, 0.2, 0.25, 0.3, 1 / 3, 0.5, 0.7, 0.9])
seeds_st = st.integers(0, 2**32)


def quiet(fn, *args, **kwargs):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", SmallClassWarning)
        return fn(*args, **kwargs)


def class_counts(y, rows, classes):
    c = Counter(np.asarray(y)[rows].tolist())
    return tuple(c.get(k, 0) for k in classes)


def fold_table(y, folds, k):
    """(k, C) counts of each class in each fold, classes in sorted order."""
    y = np.asarray(y)
    classes = sorted(set(y.tolist()))
    return np.array([class_counts(y, folds == j, classes) for j in range(k)])


def rule_bounds(n_c, f):
    """Documented holdout rule: floor/ceil of f*n_c, clipped to [1, n_c-1] (Fraction)."""
    if n_c < 2:
        return 0, 0
    q = Fraction(f) * n_c
    return min(max(math.floor(q), 1), n_c - 1), min(max(math.ceil(q), 1), n_c - 1)


# ------------------------------------------------------------------------- holdout


@FAST
@given(labels_st, fractions_st, seeds_st)
def test_holdout_partition_and_rounding_rule(y, f, seed):
    y = np.array(y)
    assume(np.bincount(y).max() >= 2)
    train, test = quiet(stratified_holdout, y, test_fraction=f, seed=seed)
    # common practice: the two sides are sorted and partition the rows
    assert np.all(np.diff(train) > 0) and np.all(np.diff(test) > 0)
    assert np.array_equal(np.sort(np.concatenate([train, test])), np.arange(y.size))
    classes = sorted(set(y.tolist()))
    t = class_counts(y, test, classes)
    sizes = class_counts(y, np.arange(y.size), classes)
    bounds = [rule_bounds(m, f) for m in sizes]
    # exact rational arithmetic (Fraction): each class within its clipped floor/ceil
    for tc, (lo, hi), m in zip(t, bounds, sizes):
        assert lo <= tc <= hi
        if m >= 2:  # every class with two rows is on both sides
            assert 1 <= tc <= m - 1
    # the total is the attainable value closest to rhe(f*n) clipped to [1, n-1]
    n = y.size
    goal = min(max(round(Fraction(f) * n), 1), n - 1)  # Fraction rounds half to even
    lo_sum, hi_sum = sum(b[0] for b in bounds), sum(b[1] for b in bounds)
    assert sum(t) == min(max(goal, lo_sum), hi_sum)
    # largest-remainder consistency: a class rounded up has a remainder >= any rounded down
    rem = [Fraction(f) * m - lo for m, (lo, hi) in zip(sizes, bounds)]
    free = [c for c, (lo, hi) in enumerate(bounds) if lo < hi]
    up = [rem[c] for c in free if t[c] == bounds[c][1]]
    down = [rem[c] for c in free if t[c] == bounds[c][0]]
    if up and down:
        assert min(up) >= max(down)


@FAST
@given(st.lists(st.integers(1, 8), min_size=1, max_size=4), seeds_st)
def test_holdout_exact_shares_match_sklearn(quarters, seed):
    # scikit-learn StratifiedShuffleSplit: with test_size=0.25 (exact in binary) and
    # class sizes that are multiples of 4, every class's test count is exactly n_c / 4.
    y = np.repeat(np.arange(len(quarters)), [4 * q for q in quarters])
    train, test = stratified_holdout(y, test_fraction=0.25, seed=seed)
    ref = StratifiedShuffleSplit(n_splits=1, test_size=0.25, random_state=seed % 2**31)
    _, ref_test = next(ref.split(np.zeros(y.size), y))
    assert np.array_equal(np.bincount(y[test]), np.bincount(y[ref_test]))
    assert np.array_equal(np.bincount(y[test]), np.array(quarters))


def test_holdout_follows_documented_permutation():
    # NumPy documents default_rng streams as stable; the split is the first t_c rows of
    # each class in rng.permutation order, so it can be recomputed from NumPy alone.
    y = np.array(list("abcab" * 9 + "cc"))
    train, test = stratified_holdout(y, test_fraction=0.3, seed=11)
    perm = np.random.default_rng(11).permutation(y.size)
    expect = []
    for c in "abc":
        rows = perm[y[perm] == c]
        expect += list(rows[: len(test[y[test] == c])])
    assert np.array_equal(test, np.sort(expect))


def test_holdout_singleton_class_stays_in_training_with_warning():
    y = ["a"] * 6 + ["b"] * 4 + ["rare"]
    with pytest.warns(SmallClassWarning, match="'rare'"):
        train, test = stratified_holdout(y, test_fraction=0.3, seed=1)
    assert 10 in train
    assert issubclass(SmallClassWarning, LintoolsWarning)


@FAST
@given(labels_st, st.integers(2, 12), fractions_st, seeds_st)
def test_holdout_groups_stay_whole(y, n_groups, f, seed):
    y = np.array(y)
    groups = np.random.default_rng(seed).integers(0, n_groups, y.size)
    assume(np.unique(groups).size >= 2 and np.bincount(y).max() >= 2)
    train, test = quiet(stratified_holdout, y, test_fraction=f, seed=seed, groups=groups)
    # common practice: a group never straddles the two sides
    assert not set(groups[train]) & set(groups[test])
    assert train.size and test.size
    assert np.array_equal(np.sort(np.concatenate([train, test])), np.arange(y.size))


@FAST
@given(labels_st, fractions_st, seeds_st)
def test_holdout_one_row_groups_give_the_ungrouped_counts(y, f, seed):
    # with one row per group the group engine must meet the rounding rule exactly
    y = np.array(y)
    assume(np.bincount(y).max() >= 2)
    _, t0 = quiet(stratified_holdout, y, test_fraction=f, seed=seed)
    _, t1 = quiet(stratified_holdout, y, test_fraction=f, seed=seed, groups=np.arange(y.size))
    assert np.array_equal(np.bincount(y[t0], minlength=5), np.bincount(y[t1], minlength=5))


@FAST
@given(labels_st, fractions_st, seeds_st)
def test_multilabel_holdout_one_hot_meets_label_targets(y, f, seed):
    # Sechidis et al. (2011): a row goes to the side with the largest remaining demand
    # for its label; with one label per row this meets each label's target exactly.
    y = np.array(y)
    onehot = (y[:, None] == np.arange(5)[None, :]).astype(int)
    assume(onehot.sum(0).max() >= 2)
    train, test = quiet(stratified_holdout, onehot, test_fraction=f, seed=seed)
    assert np.array_equal(np.sort(np.concatenate([train, test])), np.arange(y.size))
    for l in range(5):
        lo, hi = rule_bounds(int(onehot[:, l].sum()), f)
        q = Fraction(f) * int(onehot[:, l].sum())
        want = min(max(round(q), lo), hi) if hi else 0
        assert onehot[test, l].sum() == want


def test_multilabel_holdout_with_groups():
    rng = np.random.default_rng(5)
    Y = (rng.random((80, 4)) < 0.3).astype(np.int8)
    groups = rng.integers(0, 20, 80)
    train, test = stratified_holdout(Y, test_fraction=0.25, seed=3, groups=groups)
    assert not set(groups[train]) & set(groups[test])  # common practice
    assert 0 < test.size < 80


# --------------------------------------------------------------------------- folds


@FAST
@given(labels_st, st.integers(2, 6), seeds_st)
def test_folds_partition_and_balance(y, k, seed):
    y = np.array(y)
    assume(k <= y.size)
    folds = quiet(stratified_folds, y, k=k, seed=seed)
    # common practice: ids 0..k-1, every fold non-empty, sizes differ by at most one
    assert folds.dtype == np.int64 and set(folds.tolist()) == set(range(k))
    sizes = np.bincount(folds, minlength=k)
    assert sizes.max() - sizes.min() <= 1
    table = fold_table(y, folds, k)
    assert np.all(table.max(0) - table.min(0) <= 1)


@FAST
@given(labels_st, st.integers(2, 6))
def test_fold_class_counts_match_sklearn(y, k):
    # scikit-learn StratifiedKFold: the multiset of per-fold class-count vectors agrees
    y = np.array(y)
    assume(k <= y.size and np.bincount(y).max() >= k)
    folds = quiet(stratified_folds, y, k=k, seed=0)
    ours = sorted(map(tuple, fold_table(y, folds, k)))
    classes = sorted(set(y.tolist()))
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", UserWarning)
        ref = [class_counts(y, test, classes)
               for _, test in StratifiedKFold(n_splits=k).split(np.zeros(y.size), y)]
    assert ours == sorted(ref)


def test_folds_follow_documented_permutation():
    # NumPy's stable default_rng stream: permute, stable-sort by class (classes in order
    # of first appearance: 3, 1, 2), deal position j to fold j mod k
    y = np.array([3, 1, 2, 2, 1, 3, 3, 3, 1, 2, 2, 2, 1, 1])
    perm = np.random.default_rng(7).permutation(y.size)
    order = perm[np.argsort(np.array([0, 1, 2, 0])[y[perm]], kind="stable")]
    expect = np.empty(y.size, dtype=np.int64)
    expect[order] = np.arange(y.size) % 3
    assert np.array_equal(stratified_folds(y, k=3, seed=7), expect)


@FAST
@given(seeds_st, seeds_st)
def test_determinism_and_seed_sensitivity(s1, s2):
    # common practice: same seed, same split; 400 rows make a collision of two seeds'
    # splits practically impossible (about 1 in C(400, 80)).
    y = np.array(["yes", "no"] * 150 + ["maybe"] * 100)
    a = stratified_folds(y, k=5, seed=s1)
    assert np.array_equal(a, stratified_folds(y, k=5, seed=s1))
    assert np.array_equal(a, stratified_folds(y, k=5, seed=np.random.default_rng(s1)))
    h = stratified_holdout(y, seed=s1)
    assert all(np.array_equal(u, v) for u, v in zip(h, stratified_holdout(y, seed=s1)))
    if s1 != s2:
        assert not np.array_equal(a, stratified_folds(y, k=5, seed=s2))
        assert not np.array_equal(h[1], stratified_holdout(y, seed=s2)[1])
        assert not np.array_equal(stratified_bootstrap(y, seed=s1), stratified_bootstrap(y, seed=s2))


def test_small_classes_warn_and_are_spread():
    y = ["a"] * 12 + ["b"] * 3
    with pytest.warns(SmallClassWarning, match=r"'b' \(3 rows\)"):
        folds = stratified_folds(y, k=5, seed=2)
    b_folds = folds[12:]
    assert len(set(b_folds.tolist())) == 3  # three rows of b in three different folds
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        stratified_folds(["a"] * 10 + ["b"] * 5, k=5)


def test_float_labels_warning_suggests_bins():
    with pytest.warns(SmallClassWarning, match="continuous_bins"):
        stratified_folds(np.linspace(0, 1, 20), k=4)


@FAST
@given(labels_st, st.integers(2, 15), st.integers(2, 5), seeds_st)
def test_group_folds_keep_groups_whole(y, n_groups, k, seed):
    y = np.array(y)
    groups = np.random.default_rng(seed).integers(0, n_groups, y.size)
    assume(np.unique(groups).size >= k)
    folds = quiet(stratified_folds, y, k=k, seed=seed, groups=groups)
    # common practice: each group in exactly one fold, every fold non-empty
    for g in np.unique(groups):
        assert np.unique(folds[groups == g]).size == 1
    assert set(folds.tolist()) == set(range(k))
    again = quiet(stratified_folds, y, k=k, seed=seed, groups=groups)
    assert np.array_equal(folds, again)


@FAST
@given(labels_st, st.integers(2, 5), seeds_st)
def test_one_row_groups_keep_the_per_class_bound(y, k, seed):
    y = np.array(y)
    assume(k <= y.size)
    groups = [f"g{i}" for i in np.random.default_rng(seed).permutation(y.size)]
    folds = quiet(stratified_folds, y, k=k, seed=seed, groups=groups)
    table = fold_table(y, folds, k)
    assert np.all(table.max(0) - table.min(0) <= 1)


def test_group_folds_balance_on_equal_groups():
    # 40 groups of 5 rows, each group one class: 24 groups of "x", 16 of "y".  With
    # k=4 a perfect split exists (6 x-groups and 4 y-groups per fold) and must be found.
    y = np.repeat(["x"] * 24 + ["y"] * 16, 5)
    groups = np.repeat(np.arange(40), 5)
    folds = stratified_folds(y, k=4, seed=9, groups=groups)
    report = split_balance(y, folds)
    assert report.largest_deviation == 0.0
    assert np.array_equal(report.counts, np.array([[30, 20]] * 4))


# ------------------------------------------------------------------------ multilabel


multilabel_st = st.tuples(st.integers(8, 50), st.integers(1, 5), seeds_st)


def _random_indicator(n, L, seed):
    rng = np.random.default_rng(seed)
    return (rng.random((n, L)) < rng.uniform(0.05, 0.6, L)).astype(np.int64)


@FAST
@given(multilabel_st, st.integers(2, 5))
def test_multilabel_folds_properties(shape, k):
    n, L, seed = shape
    Y = _random_indicator(n, L, seed)
    folds = quiet(stratified_folds, Y, k=k, seed=seed)
    assert set(folds.tolist()) == set(range(k))  # common practice: partition, no empty fold
    # Sechidis et al. (2011): the rarest label is placed first, each row into a fold with
    # the largest remaining demand for it, so it reaches min(n_l, k) folds.
    counts = Y.sum(0)
    if counts.max() > 0:
        rarest = int(np.argmin(np.where(counts > 0, counts, n + 1)))
        assert np.unique(folds[Y[:, rarest] == 1]).size == min(int(counts[rarest]), k)
    sizes = np.bincount(folds, minlength=k)
    assert sizes.sum() == n
    assert np.array_equal(folds, quiet(stratified_folds, Y, k=k, seed=seed))


@FAST
@given(labels_st, st.integers(2, 5), seeds_st)
def test_multilabel_one_hot_is_balanced(y, k, seed):
    # Sechidis et al. (2011) with one label per row: per-label counts differ by at most
    # one between folds, and the row-demand tie-break keeps fold sizes within one.
    y = np.array(y)
    assume(k <= y.size)
    onehot = (y[:, None] == np.arange(5)[None, :]).astype(bool)
    folds = quiet(stratified_folds, onehot, k=k, seed=seed)
    table = fold_table(y, folds, k)
    assert np.all(table.max(0) - table.min(0) <= 1)
    sizes = np.bincount(folds, minlength=k)
    assert sizes.max() - sizes.min() <= 1


def _label_distribution(Y, folds, k):
    """LD of Sechidis et al. (2011): mean over labels of the mean absolute difference of
    the positive-to-negative ratio in each fold from that of the whole data."""
    total = []
    for l in range(Y.shape[1]):
        pos, neg = Y[:, l].sum(), (1 - Y[:, l]).sum()
        d = [abs(Y[folds == j, l].sum() / max((1 - Y[folds == j, l]).sum(), 1) - pos / neg)
             for j in range(k)]
        total.append(np.mean(d))
    return float(np.mean(total))


def test_iterative_stratification_beats_random_folds_on_label_distribution():
    # Sechidis et al. (2011) report lower LD for iterative stratification than for random
    # splits; check it on 20 seeded data sets (average over them).
    ours, rand = [], []
    for seed in range(20):
        Y = _random_indicator(120, 6, 100 + seed)
        folds = quiet(stratified_folds, Y, k=5, seed=seed)
        random_folds = np.random.default_rng(seed).permutation(120) % 5
        ours.append(_label_distribution(Y, folds, 5))
        rand.append(_label_distribution(Y, random_folds, 5))
    assert np.mean(ours) < 0.5 * np.mean(rand)


def test_multilabel_group_folds():
    rng = np.random.default_rng(2)
    Y = (rng.random((90, 3)) < 0.4).astype(int)
    groups = rng.integers(0, 30, 90)
    folds = stratified_folds(Y, k=3, seed=1, groups=groups)
    for g in np.unique(groups):  # common practice: groups whole
        assert np.unique(folds[groups == g]).size == 1
    assert set(folds.tolist()) == {0, 1, 2}


# ------------------------------------------------------------------------- continuous


@FAST
@given(st.lists(st.integers(-20, 20), min_size=6, max_size=60), st.integers(2, 5), seeds_st)
def test_continuous_bins(values, bins, seed):
    x = np.array(values, dtype=float) / 4
    assume(bins <= x.size)
    report = split_balance(x, np.zeros(x.size, dtype=int), continuous_bins=bins)
    # empirical-CDF bins: floor(b * #{y_j < y_i} / n) (exact integer arithmetic)
    below = np.array([(x < v).sum() for v in x])
    codes = below * bins // x.size
    assert tuple(sorted(set(codes.tolist()))) == report.classes
    assert np.all(np.diff(codes[np.argsort(x, kind="stable")]) >= 0)  # monotone, ties share
    if np.unique(x).size == x.size:
        sizes = np.bincount(codes)
        assert sizes.max() - sizes.min() <= 1
    k = min(3, x.size)
    folds = quiet(stratified_folds, x, k=k, seed=seed, continuous_bins=bins)
    for b in set(codes.tolist()):
        c = np.bincount(folds[codes == b], minlength=k)
        assert c.max() - c.min() <= 1
    train, test = quiet(stratified_holdout, x, test_fraction=0.3, seed=seed,
                        continuous_bins=bins)
    assert train.size + test.size == x.size


# -------------------------------------------------------------------------- repeats


def test_repeated_folds_use_spawned_children():
    y = np.array([0] * 30 + [1] * 20 + [2] * 10)
    rep = repeated_stratified_folds(y, k=5, repeats=4, seed=21)
    assert rep.shape == (4, 60) and rep.dtype == np.int64
    # NumPy SeedSequence.spawn: repeat r is stratified_folds on child stream r
    children = np.random.SeedSequence(21).spawn(4)
    for r in range(4):
        assert np.array_equal(rep[r], stratified_folds(y, k=5, seed=np.random.default_rng(children[r])))
        table = fold_table(y, rep[r], 5)
        assert np.all(table.max(0) - table.min(0) <= 1)
    assert len({tuple(row) for row in rep}) == 4
    # repeat r does not depend on how many repeats were asked for
    assert np.array_equal(repeated_stratified_folds(y, k=5, repeats=2, seed=21), rep[:2])
    gen = repeated_stratified_folds(y, k=5, repeats=3, seed=np.random.default_rng(21))
    assert gen.shape == (3, 60)


def test_repeated_folds_with_groups():
    y = np.repeat([0, 1, 0, 1, 1, 0, 0, 1, 0, 1], 3)
    groups = np.repeat(np.arange(10), 3)
    rep = repeated_stratified_folds(y, k=2, repeats=3, seed=4, groups=groups)
    for row in rep:
        for g in range(10):
            assert np.unique(row[groups == g]).size == 1


# ------------------------------------------------------------------------- bootstrap


@FAST
@given(labels_st, seeds_st)
def test_bootstrap_keeps_class_counts(y, seed):
    y = np.array(y)
    idx = stratified_bootstrap(y, seed=seed)
    # Davison & Hinkley (1997) stratified resampling: n_c draws from class c's own rows
    assert idx.size == y.size and np.all(np.diff(idx) >= 0)
    assert np.array_equal(np.bincount(y[idx], minlength=5), np.bincount(y, minlength=5))
    assert np.array_equal(idx, stratified_bootstrap(y, seed=seed))


def test_bootstrap_draws_with_replacement():
    y = np.array([0] * 50 + [1] * 50)
    idx = stratified_bootstrap(y, seed=3)
    assert np.unique(idx).size < 100  # 100 draws with replacement repeat rows (p ~ 1)
    x = np.arange(40.0)
    idx = stratified_bootstrap(x, seed=1, continuous_bins=4)
    assert np.array_equal(np.bincount(idx // 10, minlength=4), [10, 10, 10, 10])


# --------------------------------------------------------------------------- balance


def test_split_balance_matches_pandas_crosstab():
    y = np.array(list("aabbbcccccdd") * 3)
    folds = stratified_folds(y, k=4, seed=5)
    report = split_balance(y, folds)
    # pandas.crosstab as the counting oracle
    ref = pd.crosstab(folds, y)
    assert np.array_equal(report.counts, ref.to_numpy())
    assert report.classes == tuple(ref.columns)
    assert np.array_equal(report.sizes, np.bincount(folds))
    expected = np.outer(report.sizes, ref.sum(axis=0).to_numpy()) / y.size
    assert np.allclose(report.expected, expected, rtol=0, atol=1e-12)
    assert report.largest_deviation == pytest.approx(np.abs(ref.to_numpy() - expected).max())
    assert report.largest_deviation < 1  # stratification keeps every count within a row
    text = report.report()
    assert "largest deviation" in text and len(text.splitlines()) == 6
    with pytest.raises(ValueError):
        report.counts[0, 0] = 9


def test_split_balance_for_holdout_pair_and_multilabel():
    y = np.array([0, 1] * 20)
    train, test = stratified_holdout(y, test_fraction=0.25, seed=0)
    report = split_balance(y, (train, test))
    assert report.counts.tolist() == [[15, 15], [5, 5]]  # exact quarter of each class
    Y = np.column_stack([y, 1 - y, np.ones(40, int)])
    report = split_balance(Y, (train, test))
    assert report.counts[:, 2].tolist() == [30, 10]


@pytest.mark.parametrize(
    "parts, fragment",
    [
        (([0, 1, 2], [2, 3]), "row 2 is in part 0 and in part 1"),
        (([0, 1], [2]), "row 3 is in no part"),
        (([0, 1], [2, 3, 9]), "row index 9"),
        ([0, 1, 0], "integer fold ids"),
        (np.array([0.0, 1.0, 0.0, 1.0]), "integer fold ids"),
    ],
)
def test_split_balance_bad_parts(parts, fragment):
    with pytest.raises(InputError, match=fragment):
        split_balance([0, 1, 0, 1], parts)


# ---------------------------------------------------------------------------- inputs


def test_label_containers_and_inputs_unchanged():
    values = ["red", "blue", "red", "green", "blue", "red", "green", "blue", "red", "red"]
    arr = np.array(values)
    series = pd.Series(values, index=range(100, 110))
    cat = pd.Series(values, dtype="category")
    ref = stratified_folds(values, k=2, seed=3)
    assert np.array_equal(ref, stratified_folds(arr, k=2, seed=3))
    assert np.array_equal(ref, stratified_folds(series, k=2, seed=3))
    assert np.array_equal(ref, stratified_folds(cat, k=2, seed=3))
    assert np.array_equal(arr, np.array(values))
    bools = [True, False] * 5
    folds = stratified_folds(bools, k=5, seed=0)
    assert fold_table(bools, folds, 5).tolist() == [[1, 1]] * 5
    Y = np.array([[1, 0], [0, 1], [1, 1], [0, 0]] * 3)
    Y0 = Y.copy()
    stratified_folds(Y, k=3)
    assert np.array_equal(Y, Y0)


Y2 = np.array([[0, 1], [1, 0], [1, 1], [0, 0]])


@pytest.mark.parametrize(
    "call, fragment",
    [
        (lambda: stratified_folds([0, 1] * 5, k=1), "k must be at least 2"),
        (lambda: stratified_folds([0, 1] * 5, k=11), "k=11 exceeds the number of rows n=10"),
        (lambda: stratified_folds([0, 1] * 5, k=2.0), "k must be an integer"),
        (lambda: stratified_folds([0, 1] * 5, k=True), "k must be an integer"),
        (lambda: stratified_folds([0, 1] * 5, k=3, groups=[0, 0, 1, 1] + [0] * 6),
         "exceeds the 2 distinct groups"),
        (lambda: stratified_holdout([0, 1] * 5, test_fraction=0), "strictly between 0 and 1"),
        (lambda: stratified_holdout([0, 1] * 5, test_fraction=1.0), "strictly between 0 and 1"),
        (lambda: stratified_holdout([0, 1] * 5, test_fraction=-0.2), "strictly between 0 and 1"),
        (lambda: stratified_holdout([0, 1] * 5, test_fraction=float("nan")), "strictly between"),
        (lambda: stratified_holdout([0, 1] * 5, test_fraction="0.2"), "test_fraction must be a number"),
        (lambda: stratified_holdout([0, 1] * 5, test_fraction=True), "test_fraction must be a number"),
        (lambda: stratified_holdout([0, 1] * 5, groups=[1] * 10), "at least two distinct groups"),
        (lambda: stratified_holdout(["a", "b", "c"]), "no class has two or more rows"),
        (lambda: stratified_holdout([1]), "at least two rows"),
        (lambda: stratified_folds([0, 1] * 5, groups=[0, 1, 2]), "groups has 3 entries but y has 10 rows"),
        (lambda: stratified_holdout([0, 1] * 5, groups=np.zeros((10, 2))), "groups must be 1-D"),
        (lambda: stratified_folds([0, 1] * 5, k=2, groups=[0, 1] * 4 + [None, 1]),
         "groups has a missing label at row 8"),
        (lambda: stratified_folds([0.0, 1.0, float("nan"), 1.0], k=2), "missing label at row 2"),
        (lambda: stratified_folds(pd.Series(["a", None, "b", "a"]), k=2), "missing label at row 1"),
        (lambda: stratified_folds(np.array(["a", 1, "b", 2], dtype=object), k=2), "cannot be ordered"),
        (lambda: stratified_folds(None), "y is None"),
        (lambda: stratified_folds(np.zeros((2, 2, 2))), "got shape (2, 2, 2)"),
        (lambda: stratified_folds(np.array([[0, 2], [1, 0]]), k=2), "row 0, column 1 holds 2"),
        (lambda: stratified_folds(np.array([[0.5, 1], [1, 0]]), k=2), "row 0, column 0 holds 0.5"),
        (lambda: stratified_folds(np.array([["a", "b"], ["b", "a"]]), k=2), "0/1 label indicator"),
        (lambda: stratified_folds(np.array([[0, 1], [np.nan, 0]]), k=2),
         "missing value (NaN) at row 1, column 0"),
        (lambda: stratified_folds(np.array([[1, 2, 3, 4]]).T, k=2), "y.ravel()"),
        (lambda: stratified_folds(np.zeros((4, 0)), k=2), "at least one row and one label column"),
        (lambda: stratified_folds([1.0, 2, 3, 4], k=2, continuous_bins=1), "continuous_bins must be at least 2"),
        (lambda: stratified_folds([1.0, 2, 3, 4], k=2, continuous_bins=5), "exceeds the 4 rows"),
        (lambda: stratified_folds([1.0, 2, np.inf, 4], k=2, continuous_bins=2), "at row 2"),
        (lambda: stratified_folds(["x", "y", "z", "w"], k=2, continuous_bins=2), "holds 'x' at row 0"),
        (lambda: stratified_folds([True, False] * 3, k=2, continuous_bins=2), "already two classes"),
        (lambda: stratified_folds(Y2, k=2, continuous_bins=2), "1-D numeric y"),
        (lambda: repeated_stratified_folds([0, 1] * 5, k=2, repeats=0), "repeats must be at least 1"),
        (lambda: stratified_bootstrap(Y2), "one class per row"),
        (lambda: split_balance([0, 1], [0, 0, 1]), "2 integer fold ids"),
    ],
)
def test_bad_inputs(call, fragment):
    with pytest.raises(InputError) as err:
        call()
    assert fragment in str(err.value)


@pytest.mark.parametrize(
    "seed, fragment",
    [
        (1.5, "seed must be a non-negative int or a numpy Generator"),
        ("7", "seed must be a non-negative int"),
        (None, "seed must be a non-negative int"),
        (True, "seed must be a non-negative int"),
        (-3, "seed must be non-negative"),
        (np.random.default_rng, "not a generator made by it"),
        (np.random.Generator, "not a generator made by it"),
        (np.random.RandomState(0), "legacy RandomState"),
        (np.random.PCG64(0), "wrap it as np.random.default_rng(seed)"),
        (np.random.SeedSequence(0), "wrap it as np.random.default_rng(seed)"),
    ],
)
def test_bad_seeds(seed, fragment):
    for call in (
        lambda: stratified_folds([0, 1] * 5, k=2, seed=seed),
        lambda: stratified_holdout([0, 1] * 5, seed=seed),
        lambda: stratified_bootstrap([0, 1] * 5, seed=seed),
        lambda: repeated_stratified_folds([0, 1] * 5, k=2, repeats=2, seed=seed),
    ):
        with pytest.raises(InputError) as err:
            call()
        assert fragment in str(err.value)


def test_numpy_integer_seed_and_generator_is_advanced():
    y = [0, 1] * 20
    assert np.array_equal(stratified_folds(y, seed=np.int64(4)), stratified_folds(y, seed=4))
    gen = np.random.default_rng(4)
    first = stratified_folds(y, seed=gen)
    second = stratified_folds(y, seed=gen)  # the Generator moved on: a new split
    assert np.array_equal(first, stratified_folds(y, seed=4))
    assert not np.array_equal(first, second)
