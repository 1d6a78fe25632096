"""Reproducible stratified splits: holdout, folds, repeated folds, bootstrap, balance report.

A target ``y`` is read in one of three ways:

* **class labels** -- a 1-D array of hashable, mutually comparable values (ints,
  strings, bools); each distinct value is a class, in sorted order;
* **label indicator matrix** -- an ``(n, L)`` 0/1 (or bool) array: row ``i`` carries
  label ``l`` when ``y[i, l] == 1``; splits use iterative stratification
  (Sechidis, Tsoumakas & Vlahavas 2011);
* **continuous target** -- a 1-D numeric array together with ``continuous_bins=b``:
  row ``i`` falls in quantile bin ``floor(b * F(y_i-))``, where
  ``F(t-) = #{j : y_j < t} / n`` is the empirical distribution just below ``t``, and
  the bins are stratified as classes.  Equal values share a bin; without ties the bins
  hold ``floor(n/b)`` or ``ceil(n/b)`` rows.

``groups`` (one label per row) keeps every group whole: no group is ever split across
folds or sides.  The class balance is then kept as close as the groups allow; see
:func:`split_balance` for the achieved counts and the largest deviation.

Reproducibility: ``seed`` is a non-negative int (given to ``numpy.random.default_rng``)
or a ``numpy.random.Generator`` (which the call advances).  The assignment uses integer
arithmetic, exact rationals and NumPy's permutations only, so a seed gives the same split
on every platform.
"""

from __future__ import annotations

import math
import numbers
from dataclasses import dataclass
from fractions import Fraction
from typing import Any, NamedTuple

import numpy as np

from ..support.errors import InputError, LintoolsWarning, warn_caller
from .iterative import assign_groups, iterative_stratification
from ..support.validate import ReadOnlyArrays, as_array, as_labels

__all__ = [
    "SmallClassWarning",
    "SplitBalance",
    "stratified_holdout",
    "stratified_folds",
    "repeated_stratified_folds",
    "stratified_bootstrap",
    "split_balance",
]


class SmallClassWarning(LintoolsWarning):
    """A class (or label, or bin) has too few rows to appear in every fold or on both sides."""


class _Target(NamedTuple):
    codes: np.ndarray | None  # (n,) class or bin code per row
    indicator: np.ndarray | None  # (n, L) bool, for a label indicator matrix
    classes: tuple  # class labels, bin numbers or label columns
    n: int
    kind: str  # "class", "bin" or "label"
    float_labels: bool


# ----------------------------------------------------------------------------- checks


def _check_int(value: Any, name: str, minimum: int, remedy: str) -> int:
    if isinstance(value, (bool, np.bool_)) or not isinstance(value, numbers.Integral):
        raise InputError(f"{name} must be an integer; got {value!r} ({type(value).__name__})")
    if value < minimum:
        raise InputError(f"{name} must be at least {minimum}; got {value}. {remedy}")
    return int(value)


def _generator(seed: Any) -> np.random.Generator:
    if isinstance(seed, np.random.Generator):
        return seed
    remedy = "pass a non-negative int or an instance such as np.random.default_rng(123)"
    if seed is np.random.default_rng or (
        isinstance(seed, type) and issubclass(seed, (np.random.Generator, np.random.BitGenerator))
    ):
        raise InputError(f"seed is {seed!r} itself, not a generator made by it; {remedy}")
    if isinstance(seed, np.random.RandomState):
        raise InputError(f"seed is a legacy RandomState, which is not accepted; {remedy}")
    if isinstance(seed, (np.random.BitGenerator, np.random.SeedSequence)):
        raise InputError(
            f"seed is a {type(seed).__name__}; wrap it as np.random.default_rng(seed), "
            "or pass a non-negative int"
        )
    if isinstance(seed, (bool, np.bool_)) or not isinstance(seed, numbers.Integral):
        raise InputError(f"seed must be a non-negative int or a numpy Generator; got "
                         f"{seed!r} ({type(seed).__name__}); {remedy}")
    if seed < 0:
        raise InputError(f"seed must be non-negative; got {seed}; {remedy}")
    return np.random.default_rng(int(seed))


def _children(seed: Any, repeats: int) -> list[np.random.Generator]:
    if isinstance(seed, np.random.Generator):
        try:
            return list(seed.spawn(repeats))
        except (AttributeError, TypeError, ValueError):
            raise InputError(
                "seed: this Generator has no seed sequence to spawn independent child "
                "streams from; pass an int or a Generator made by np.random.default_rng"
            ) from None
    _generator(seed)
    return [np.random.default_rng(s) for s in np.random.SeedSequence(int(seed)).spawn(repeats)]


def _fraction(value: Any) -> Fraction:
    if isinstance(value, (bool, np.bool_)) or not isinstance(value, numbers.Real):
        raise InputError(f"test_fraction must be a number in (0, 1); got {value!r}")
    if not 0.0 < float(value) < 1.0:
        raise InputError(
            f"test_fraction must lie strictly between 0 and 1; got {value}; "
            "for example 0.2 holds out a fifth of the rows"
        )
    return Fraction(float(value))


def _not_01(r: int, c: int, v: Any) -> InputError:
    return InputError(
        f"y is 2-D, so it is read as a 0/1 label indicator matrix, but row {r}, column "
        f"{c} holds {v!r}; pass 1-D class labels (y.ravel() for a single column) or a "
        "matrix of 0 and 1"
    )


def _read_indicator(arr: np.ndarray) -> np.ndarray:
    if arr.shape[0] == 0 or arr.shape[1] == 0:
        raise InputError(f"y has shape {arr.shape}; pass at least one row and one label column")
    if arr.dtype.kind in "biuf":
        if arr.dtype.kind == "f" and np.isnan(arr).any():
            r, c = np.argwhere(np.isnan(arr))[0]
            raise InputError(f"y has a missing value (NaN) at row {r}, column {c}; "
                             "a label indicator matrix holds only 0 and 1")
        bad = np.argwhere((arr != 0) & (arr != 1))
        if bad.size:
            r, c = bad[0]
            raise _not_01(int(r), int(c), arr[r, c].item())
        return np.asarray(arr == 1, dtype=bool)
    out = np.zeros(arr.shape, dtype=bool)
    for (r, c), v in np.ndenumerate(arr):
        number = isinstance(v, (numbers.Real, np.bool_))
        if number and v != v:
            raise InputError(f"y has a missing value (NaN) at row {r}, column {c}; "
                             "a label indicator matrix holds only 0 and 1")
        if not (number and (v == 0 or v == 1)):
            raise _not_01(r, c, v)
        out[r, c] = v == 1
    return out


def _quantile_bins(arr: np.ndarray, bins: Any) -> tuple[np.ndarray, tuple]:
    b = _check_int(bins, "continuous_bins", 2, "Use None for class labels.")
    if arr.ndim != 1:
        raise InputError(f"continuous_bins needs a 1-D numeric y; got shape {arr.shape}")
    if arr.dtype.kind == "b":
        raise InputError("y is boolean, so it is already two classes; drop continuous_bins")
    values = np.empty(arr.shape[0], dtype=np.float64)
    for i, v in enumerate(arr.tolist()):
        try:
            values[i] = float(v) if v is not None else math.nan
        except (TypeError, ValueError):
            raise InputError(f"continuous_bins needs numbers, but y holds {v!r} at row {i}") from None
        if not math.isfinite(values[i]):
            raise InputError(f"y has a missing or infinite value ({v!r}) at row {i}; drop or fill it")
    n = values.size
    if b > n:
        raise InputError(f"continuous_bins={b} exceeds the {n} rows of y; use fewer bins")
    below = np.searchsorted(np.sort(values), values, side="left")
    raw = (below.astype(np.int64) * b) // n
    found, codes = np.unique(raw, return_inverse=True)
    return codes.astype(np.int64), tuple(int(c) for c in found)


def _read_target(y: Any, continuous_bins: Any) -> _Target:
    if y is None:
        raise InputError("y is None; pass one label per row")
    arr = as_array(y, "y")
    if continuous_bins is not None:
        codes, classes = _quantile_bins(arr, continuous_bins)
        return _Target(codes, None, classes, codes.size, "bin", False)
    if arr.ndim == 2:
        ind = _read_indicator(arr)
        return _Target(None, ind, tuple(range(ind.shape[1])), ind.shape[0], "label", False)
    if arr.ndim > 2:
        raise InputError(f"y must be 1-D labels or a 2-D 0/1 matrix; got shape {arr.shape}")
    classes, codes = as_labels(arr, "y")
    return _Target(codes.astype(np.int64), None, classes, codes.size, "class",
                   arr.dtype.kind in "fc" or any(isinstance(c, float) for c in classes))


def _read_groups(groups: Any, n: int) -> np.ndarray | None:
    if groups is None:
        return None
    arr = as_array(groups, "groups")
    if arr.ndim != 1:
        raise InputError(f"groups must be 1-D, one group label per row; got shape {arr.shape}")
    if arr.shape[0] != n:
        raise InputError(
            f"groups has {arr.shape[0]} entries but y has {n} rows; pass one group label per row"
        )
    return as_labels(arr, "groups")[1].astype(np.int64)


def _totals(target: _Target) -> np.ndarray:
    if target.indicator is not None:
        return target.indicator.sum(axis=0).astype(np.int64)
    return np.bincount(target.codes, minlength=len(target.classes)).astype(np.int64)


def _warn_small(target: _Target, limit: int, what: str) -> None:
    totals = _totals(target)
    small = [c for c in range(totals.size) if 0 < totals[c] < limit]
    if not small:
        return
    unit = "positive rows" if target.kind == "label" else "rows"
    noun = {"class": "class", "bin": "bin", "label": "label column"}[target.kind]
    shown = ", ".join(f"{target.classes[c]!r} ({totals[c]} {unit})" for c in small[:5])
    more = f" and {len(small) - 5} more" if len(small) > 5 else ""
    hint = "; for a continuous target pass continuous_bins=" if target.float_labels else ""
    warn_caller(f"y: {len(small)} {noun}(s) with fewer than {limit} {unit} {what}: "
                f"{shown}{more}{hint}", SmallClassWarning)


def _group_counts(target: _Target, group_codes: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    n_groups = int(group_codes.max()) + 1
    sizes = np.bincount(group_codes, minlength=n_groups).astype(np.int64)
    if target.indicator is None:
        counts = np.zeros((n_groups, len(target.classes)), dtype=np.int64)
        np.add.at(counts, (group_codes, target.codes), 1)
        return counts, sizes
    counts = np.zeros((n_groups, target.indicator.shape[1]), dtype=np.int64)
    np.add.at(counts, group_codes, target.indicator.astype(np.int64))
    return np.column_stack([counts, sizes]), sizes


# ------------------------------------------------------------------------ assignment


def _test_counts(sizes: np.ndarray, frac: Fraction, adjust: bool) -> np.ndarray:
    """Test rows per class (or positives per label) by the documented rounding rule."""
    t, lo, hi = [], [], []
    for m in (int(s) for s in sizes):
        q = frac * m
        clip = (lambda v: min(max(v, 1), m - 1)) if m >= 2 else (lambda v: 0)
        t.append(clip(round(q)))  # round() of a Fraction rounds half to even
        lo.append(clip(math.floor(q)))
        hi.append(clip(math.ceil(q)))
    if adjust:
        n = int(sizes.sum())
        need = min(max(round(frac * n), 1), n - 1) - sum(t)
        if need > 0:
            up = sorted((c for c in range(len(t)) if t[c] < hi[c]),
                        key=lambda c: (t[c] - frac * int(sizes[c]), c))
            for c in up[:need]:
                t[c] += 1
        elif need < 0:
            down = sorted((c for c in range(len(t)) if t[c] > lo[c]),
                          key=lambda c: (frac * int(sizes[c]) - t[c], c))
            for c in down[:-need]:
                t[c] -= 1
    return np.array(t, dtype=np.int64)


def _class_order(keys: np.ndarray, rng: np.random.Generator) -> np.ndarray:
    """Rows sorted by ``keys`` (a class rank per row), in a random order within a class."""
    perm = rng.permutation(keys.size)
    return perm[np.argsort(keys[perm], kind="stable")]


def _fold_ids(target: _Target, k: int, rng: np.random.Generator,
              group_codes: np.ndarray | None) -> np.ndarray:
    n = target.n
    if group_codes is not None:
        counts, sizes = _group_counts(target, group_codes)
        targets = np.tile(counts.sum(axis=0), (k, 1))
        part = assign_groups(counts, sizes, targets, np.full(k, n), k, rng)
        return part[group_codes]
    if target.indicator is not None:
        label_targets = np.tile(_totals(target), (k, 1))
        return iterative_stratification(target.indicator, np.full(k, n), label_targets, k, rng)
    first_row = np.unique(target.codes, return_index=True)[1]
    appearance = np.argsort(np.argsort(first_row, kind="stable"), kind="stable")
    fold = np.empty(n, dtype=np.int64)
    fold[_class_order(appearance[target.codes], rng)] = np.arange(n, dtype=np.int64) % k
    return fold


def _check_k(k: Any, n: int, group_codes: np.ndarray | None) -> int:
    k = _check_int(k, "k", 2, "Cross-validation needs at least two folds.")
    if k > n:
        raise InputError(f"k={k} exceeds the number of rows n={n}; use k <= {n}")
    if group_codes is not None and k > int(group_codes.max()) + 1:
        raise InputError(f"k={k} exceeds the {int(group_codes.max()) + 1} distinct groups; "
                         "every fold needs a whole group, so use fewer folds")
    return k


# ---------------------------------------------------------------------------- public


def stratified_holdout(
    y: Any,
    *,
    test_fraction: float = 0.2,
    seed: int | np.random.Generator = 0,
    groups: Any = None,
    continuous_bins: int | None = None,
) -> tuple[np.ndarray, np.ndarray]:
    r"""Split the rows into a training and a test side, keeping each class's share.

    Parameters
    ----------
    y : array-like
        ``(n,)`` class labels, an ``(n, L)`` 0/1 label indicator matrix, or ``(n,)``
        numbers with ``continuous_bins`` (see the module notes).
    test_fraction : float
        Share ``f`` of the rows to hold out, ``0 < f < 1``.
    seed : int or numpy.random.Generator
        Non-negative int for ``numpy.random.default_rng``, or a Generator (advanced).
    groups : array-like, optional
        ``(n,)`` group labels; every group lands wholly on one side.
    continuous_bins : int, optional
        Stratify a continuous ``y`` by this many quantile bins.

    Returns
    -------
    train, test : int64 arrays
        Sorted row indices; together they hold every row exactly once.

    Notes
    -----
    **Rounding rule.**  With the exact share :math:`q_c = f n_c` of class ``c``
    (``f`` taken as the exact binary value of the float), a class of
    :math:`n_c \ge 2` rows gets :math:`t_c = \operatorname{clip}(\operatorname{rhe}(q_c),
    1, n_c - 1)` test rows (``rhe``: round half to even), so it appears on both sides;
    a class of one row stays in training (with a :class:`SmallClassWarning`).  Then the
    total is moved towards :math:`\operatorname{clip}(\operatorname{rhe}(f n), 1, n-1)`
    one row at a time, each :math:`t_c` staying within
    :math:`[\operatorname{clip}(\lfloor q_c\rfloor), \operatorname{clip}(\lceil q_c\rceil)]`
    (same clip): rows are added where :math:`q_c - t_c` is largest, removed where
    :math:`t_c - q_c` is largest, ties to the class first in label order.  The test
    rows of each class are the first :math:`t_c` of a uniform random permutation.

    For a label matrix each label gets :math:`t_l` by the same clipped rounding (no
    total adjustment), the test side aims at the adjusted total above, and iterative
    stratification (Sechidis et al. 2011) places the rows.  With ``groups``, whole groups
    are placed greedily (largest first) to minimise
    :math:`\sum_c |\text{test}_c - t_c| + |\text{train}_c - (n_c - t_c)|`, then improved
    by single-group moves; "both sides" for every class is then kept where the groups
    allow it (check with :func:`split_balance`).

    References
    ----------
    Kohavi, R. (1995). A study of cross-validation and bootstrap for accuracy estimation
    and model selection. *IJCAI*, 1137-1143.
    Sechidis, K., Tsoumakas, G. and Vlahavas, I. (2011). On the stratification of
    multi-label data. *ECML PKDD*, LNCS 6913, 145-158.
    """
    target = _read_target(y, continuous_bins)
    frac = _fraction(test_fraction)
    rng = _generator(seed)
    group_codes = _read_groups(groups, target.n)
    n = target.n
    if n < 2 or (group_codes is not None and int(group_codes.max()) < 1):
        what = "rows" if n < 2 else "distinct groups"
        raise InputError(f"a holdout needs at least two {what}; y has too few to split")
    totals = _totals(target)
    if target.indicator is None:
        t = _test_counts(totals, frac, adjust=True)
        goal = int(t.sum())
        if goal == 0:
            raise InputError("y: no class has two or more rows, so nothing can be held out "
                             "while keeping every class in training; merge rare classes")
        where = "stay in training" if group_codes is None else "are aimed at training"
        _warn_small(target, 2, where)
    else:
        t = _test_counts(totals, frac, adjust=False)
        _warn_small(target, 2, "cannot be on both sides")
        goal = min(max(round(frac * n), 1), n - 1)
    if group_codes is not None:
        counts, sizes = _group_counts(target, group_codes)
        test_target = t if target.indicator is None else np.append(t, goal)
        targets = np.vstack([counts.sum(axis=0) - test_target, test_target])
        part = assign_groups(counts, sizes, targets, np.array([n - goal, goal]), 1, rng)
        is_test = part[group_codes] == 1
    elif target.indicator is not None:
        label_targets = np.vstack([totals - t, t])
        part = iterative_stratification(target.indicator, np.array([n - goal, goal]),
                                        label_targets, 1, rng)
        is_test = part == 1
    else:
        order = _class_order(target.codes, rng)
        starts = np.concatenate([[0], np.cumsum(totals)[:-1]])
        cls = target.codes[order]
        is_test = np.zeros(n, dtype=bool)
        is_test[order] = (np.arange(n) - starts[cls]) < t[cls]
    if is_test.all() or not is_test.any():
        raise InputError("the split left one side empty (too few rows, or groups too "
                         "large); pass more or smaller groups, or another test_fraction")
    return np.flatnonzero(~is_test), np.flatnonzero(is_test)


def stratified_folds(
    y: Any,
    *,
    k: int = 5,
    seed: int | np.random.Generator = 0,
    groups: Any = None,
    continuous_bins: int | None = None,
) -> np.ndarray:
    r"""Assign every row to one of ``k`` folds, keeping each class's share in every fold.

    Parameters
    ----------
    y : array-like
        ``(n,)`` class labels, an ``(n, L)`` 0/1 label indicator matrix, or ``(n,)``
        numbers with ``continuous_bins``.
    k : int
        Number of folds, ``2 <= k <= n`` (and at most the number of groups).
    seed : int or numpy.random.Generator
        Non-negative int for ``numpy.random.default_rng``, or a Generator (advanced).
    groups : array-like, optional
        ``(n,)`` group labels; every group lands wholly in one fold.
    continuous_bins : int, optional
        Stratify a continuous ``y`` by this many quantile bins.

    Returns
    -------
    (n,) int64 array of fold ids in ``0 .. k-1``; every fold is non-empty.

    Notes
    -----
    **Class labels.**  Take a uniform random permutation of the rows, sort it stably by
    class (classes in order of first appearance in ``y``) and give position ``j`` fold
    ``j mod k``.  Then class ``c``
    has :math:`\lfloor n_c/k\rfloor` or :math:`\lceil n_c/k\rceil` rows in every fold,
    fold sizes differ by at most one, and the per-fold class counts are those of the
    classic sorted round-robin allocation.  A class with fewer than ``k`` rows is
    spread one row per fold, and a :class:`SmallClassWarning` names it.

    **Label matrix.**  Iterative stratification with per-fold demands :math:`n_l/k`
    and :math:`n/k` (Sechidis et al. 2011); the rarest label is spread first, so it
    reaches :math:`\min(n_l, k)` folds, and with one label per row the per-label
    bound above holds too.  **Groups.**  Whole groups are placed largest first where
    they raise :math:`\sum_{j,c} |k\,\text{count}_{jc} - n_c|` least, then improved by
    single-group moves (label matrices add the row count as a balanced column).  With
    one row per group this reproduces the per-class bound above.

    References
    ----------
    Kohavi, R. (1995). A study of cross-validation and bootstrap for accuracy estimation
    and model selection. *IJCAI*, 1137-1143.
    Sechidis, K., Tsoumakas, G. and Vlahavas, I. (2011). On the stratification of
    multi-label data. *ECML PKDD*, LNCS 6913, 145-158.
    """
    target = _read_target(y, continuous_bins)
    group_codes = _read_groups(groups, target.n)
    k = _check_k(k, target.n, group_codes)
    rng = _generator(seed)
    _warn_small(target, k, f"cannot reach all k={k} folds")
    return _fold_ids(target, k, rng, group_codes)


def repeated_stratified_folds(
    y: Any,
    *,
    k: int = 5,
    repeats: int = 10,
    seed: int | np.random.Generator = 0,
    groups: Any = None,
    continuous_bins: int | None = None,
) -> np.ndarray:
    """Fold ids for ``repeats`` independent runs of :func:`stratified_folds`.

    Parameters
    ----------
    y, k, groups, continuous_bins
        As for :func:`stratified_folds`.
    repeats : int
        Number of repeats, at least 1.
    seed : int or numpy.random.Generator
        Root of the streams.  Repeat ``r`` uses child ``r`` of
        ``numpy.random.SeedSequence(seed).spawn(repeats)`` (or of ``Generator.spawn``),
        so repeats are statistically independent and repeat ``r`` does not depend on
        ``repeats``.  (Repeat 0 is therefore not ``stratified_folds(y, seed=seed)``.)

    Returns
    -------
    (repeats, n) int64 array; row ``r`` is a fold id per row with all the guarantees
    of :func:`stratified_folds`.

    References
    ----------
    Bouckaert, R. R. and Frank, E. (2004). Evaluating the replicability of significance
    tests for comparing learning algorithms. *PAKDD*, LNCS 3056, 3-12.
    """
    target = _read_target(y, continuous_bins)
    group_codes = _read_groups(groups, target.n)
    k = _check_k(k, target.n, group_codes)
    repeats = _check_int(repeats, "repeats", 1, "Ask for at least one repeat.")
    if repeats * target.n > 2**31:
        raise InputError(f"repeats={repeats} would make {repeats * target.n:.3g} fold ids; ask for fewer repeats")
    rngs = _children(seed, repeats)
    _warn_small(target, k, f"cannot reach all k={k} folds")
    return np.stack([_fold_ids(target, k, r, group_codes) for r in rngs])


def stratified_bootstrap(
    y: Any,
    *,
    seed: int | np.random.Generator = 0,
    continuous_bins: int | None = None,
) -> np.ndarray:
    r"""Row indices of one bootstrap resample drawn with replacement within each class.

    Parameters
    ----------
    y : array-like
        ``(n,)`` class labels, or numbers with ``continuous_bins`` (strata = bins).
    seed : int or numpy.random.Generator
        Non-negative int for ``numpy.random.default_rng``, or a Generator (advanced).
    continuous_bins : int, optional
        Resample a continuous ``y`` within this many quantile bins.

    Returns
    -------
    (n,) int64 array of sorted row indices (with repeats).

    Notes
    -----
    Class ``c`` contributes exactly :math:`n_c` draws, each uniform over its own rows,
    so the class counts of ``y[indices]`` equal those of ``y``.  Recomputing a metric
    on many such resamples gives its stratified bootstrap distribution (for percentile
    intervals, for example).

    References
    ----------
    Davison, A. C. and Hinkley, D. V. (1997). *Bootstrap Methods and their
    Application*. Cambridge University Press (stratified resampling).
    Efron, B. and Tibshirani, R. J. (1993). *An Introduction to the Bootstrap*.
    Chapman & Hall.
    """
    target = _read_target(y, continuous_bins)
    if target.indicator is not None:
        raise InputError("stratified_bootstrap needs one class per row; for a label "
                         "matrix pass a 1-D key per row (for example each row's label set)")
    rng = _generator(seed)
    totals = _totals(target)
    order = np.argsort(target.codes, kind="stable")
    starts = np.concatenate([[0], np.cumsum(totals)[:-1]])
    cls = target.codes[order]
    picks = order[starts[cls] + rng.integers(0, totals[cls])]
    return np.sort(picks)


# --------------------------------------------------------------------------- balance


@dataclass(frozen=True)
class SplitBalance(ReadOnlyArrays):
    """Per-part class counts of a split and how far they are from proportional.

    Attributes
    ----------
    parts : (P,) array
        Part names: the distinct fold ids, or ``0, 1, ...`` for index sets in the
        order given (``0`` = train, ``1`` = test for a holdout).
    classes : tuple
        Class labels, bin numbers, or label columns (for a label matrix).
    counts : (P, C) int64 array
        Rows of each class (positive rows of each label) in each part.
    sizes : (P,) int64 array
        Rows in each part.
    expected : (P, C) float array
        Proportional counts :math:`n_c \\, s_j / n` for part size :math:`s_j`.
    largest_deviation : float
        :math:`\\max_{j,c} |\\text{counts}_{jc} - \\text{expected}_{jc}|`, in rows.
    largest_share_deviation : float
        :math:`\\max_{j,c} |\\text{counts}_{jc}/s_j - n_c/n|`, as a proportion.
    """

    parts: np.ndarray
    classes: tuple
    counts: np.ndarray
    sizes: np.ndarray
    expected: np.ndarray
    largest_deviation: float
    largest_share_deviation: float

    def report(self) -> str:
        """A plain-text table: one line per part, one column per class."""
        head = ["part", "rows"] + [str(c) for c in self.classes]
        lines = [head] + [[str(p), str(s)] + [str(v) for v in row]
                          for p, s, row in zip(self.parts.tolist(), self.sizes, self.counts)]
        width = [max(len(r[i]) for r in lines) for i in range(len(head))]
        text = ["  ".join(v.rjust(w) for v, w in zip(r, width)) for r in lines]
        text.append(f"largest deviation {self.largest_deviation:.3f} rows, "
                    f"{self.largest_share_deviation:.4f} of a part's share")
        return "\n".join(text)


def _read_parts(parts: Any, n: int) -> tuple[np.ndarray, np.ndarray]:
    """Part code per row and the part names, from fold ids or from index sets."""
    if isinstance(parts, (tuple, list)) and parts and all(np.ndim(p) == 1 for p in parts):
        where = np.full(n, -1, dtype=np.int64)
        for j, p in enumerate(parts):
            idx = as_array(p, f"parts[{j}]")
            if idx.size == 0 or idx.dtype.kind not in "iu":
                raise InputError(f"parts[{j}] must be a non-empty array of integer row indices")
            outside = idx[(idx < 0) | (idx >= n)]
            if outside.size:
                raise InputError(f"parts[{j}] holds row index {outside[0]}, outside 0..{n - 1}")
            for i in idx.tolist():
                if where[i] != -1:
                    raise InputError(f"parts: row {i} is in part {where[i]} and in part {j} "
                                     "(or twice in one); parts must not overlap")
                where[i] = j
        if (where < 0).any():
            raise InputError(f"parts: row {int(np.argmax(where < 0))} is in no part; "
                             "the parts must cover every row")
        return where, np.arange(len(parts))
    ids = as_array(parts, "parts")
    if ids.ndim != 1 or ids.shape[0] != n or ids.dtype.kind not in "iu":
        raise InputError(f"parts must be {n} integer fold ids (one per row of y) or a sequence "
                         f"of index arrays such as (train, test); got shape {ids.shape}, "
                         f"dtype {ids.dtype}")
    names, where = np.unique(ids, return_inverse=True)
    return where.astype(np.int64), names


def split_balance(y: Any, parts: Any, *, continuous_bins: int | None = None) -> SplitBalance:
    r"""Report the class counts of each part of a split and the largest deviation.

    Parameters
    ----------
    y : array-like
        The target the split was made for (class labels, 0/1 label matrix, or numbers
        with ``continuous_bins``).
    parts : array-like or sequence of array-likes
        Either one fold id per row (from :func:`stratified_folds`) or index arrays that
        partition the rows, such as the ``(train, test)`` pair of
        :func:`stratified_holdout`.
    continuous_bins : int, optional
        The bins used for the split of a continuous target.

    Returns
    -------
    SplitBalance

    Notes
    -----
    A part of :math:`s_j` rows holds its proportional share when
    :math:`\text{count}_{jc} = n_c s_j / n`; the report gives the counts, those shares,
    and the largest absolute deviation in rows and in proportion.  Without groups the
    splits here keep every deviation below one row (a class counts once per row).
    """
    target = _read_target(y, continuous_bins)
    where, names = _read_parts(parts, target.n)
    n_parts = names.size
    if target.indicator is None:
        counts = np.zeros((n_parts, len(target.classes)), dtype=np.int64)
        np.add.at(counts, (where, target.codes), 1)
    else:
        counts = np.zeros((n_parts, target.indicator.shape[1]), dtype=np.int64)
        np.add.at(counts, where, target.indicator.astype(np.int64))
    sizes = np.bincount(where, minlength=n_parts).astype(np.int64)
    totals = _totals(target)
    expected = np.outer(sizes, totals) / target.n
    shares = counts / sizes[:, None] - totals[None, :] / target.n
    return SplitBalance(names, target.classes, counts, sizes, expected,
                        float(np.abs(counts - expected).max()), float(np.abs(shares).max()))
