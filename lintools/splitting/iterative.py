"""Greedy engines that place units (rows or groups of rows) into parts with target counts.

Two engines serve :mod:`lintools.splitting.stratified`:

* :func:`iterative_stratification` places the rows of a 0/1 label indicator matrix
  one at a time, rarest label first, into the part that still lacks most of that label
  (Sechidis, Tsoumakas & Vlahavas 2011).
* :func:`assign_groups` places whole groups, largest first, into the part where the
  total absolute deviation from the target counts (then from the target row counts)
  rises least, then improves the placement by single-group moves while any move
  lowers that deviation.

Both work in integers only: targets and counts are scaled by a common ``step`` so that a
part's deviation for column ``c`` is ``step * count[c] - target[c]``.  Randomness enters
only through ``rng.permutation`` and ``rng.integers`` (tie-breaks), so a seed gives the
same result on every platform.

References
----------
Sechidis, K., Tsoumakas, G. and Vlahavas, I. (2011). On the stratification of
multi-label data. *Machine Learning and Knowledge Discovery in Databases (ECML PKDD)*,
LNCS 6913, 145-158.
"""

from __future__ import annotations

import numpy as np

__all__ = ["iterative_stratification", "assign_groups"]

_MAX_PASSES = 50


def _pick(candidates: np.ndarray, rng: np.random.Generator) -> int:
    """One of ``candidates`` (indices), uniformly at random when there is a tie."""
    if candidates.size == 1:
        return int(candidates[0])
    return int(candidates[rng.integers(candidates.size)])


def iterative_stratification(
    indicator: np.ndarray,
    row_targets: np.ndarray,
    label_targets: np.ndarray,
    step: int,
    rng: np.random.Generator,
) -> np.ndarray:
    """Part index of every row by iterative stratification (Sechidis et al. 2011).

    Parameters
    ----------
    indicator : (n, L) bool array
        Row ``i`` carries label ``l`` when ``indicator[i, l]``.
    row_targets : (B,) int array
        Desired number of rows of each part, scaled by ``step``.
    label_targets : (B, L) int array
        Desired number of positives of each label in each part, scaled by ``step``.
    step : int
        What one row is worth in the scaled units above.
    rng : numpy.random.Generator
        Source of the processing order and of the tie-breaks.

    Returns
    -------
    (n,) int64 array of part indices.

    Notes
    -----
    While rows with a label remain, take the label ``l`` with the fewest remaining
    positive rows (ties: lowest column), and place each remaining row carrying ``l``
    (in a random order) into the part with the largest remaining demand for ``l``;
    ties go to the part with the largest remaining demand for rows, then to a random
    one.  Each placement lowers the part's demands for all of the row's labels and for
    rows by ``step``.  Rows without labels go last, each to the part with the largest
    remaining demand for rows.
    """
    n, n_labels = indicator.shape
    want_rows = row_targets.astype(np.int64).copy()
    want = label_targets.astype(np.int64).copy()
    part = np.full(n, -1, dtype=np.int64)
    order = rng.permutation(n)
    left = np.ones(n, dtype=bool)
    left_per_label = indicator.sum(axis=0).astype(np.int64)
    while True:
        live = np.flatnonzero(left_per_label > 0)
        if live.size == 0:
            break
        label = int(live[np.argmin(left_per_label[live])])
        rows = order[indicator[order, label] & left[order]]
        for i in rows:
            demand = want[:, label]
            cand = np.flatnonzero(demand == demand.max())
            if cand.size > 1:
                cand = cand[want_rows[cand] == want_rows[cand].max()]
            b = _pick(cand, rng)
            part[i] = b
            left[i] = False
            labels = indicator[i]
            want[b, labels] -= step
            want_rows[b] -= step
            left_per_label[labels] -= 1
    for i in order[left[order]]:
        b = _pick(np.flatnonzero(want_rows == want_rows.max()), rng)
        part[i] = b
        want_rows[b] -= step
    return part


def _added_cost(deviation: np.ndarray, scaled: np.ndarray) -> np.ndarray:
    """Change of ``sum |deviation|`` along the last axis if ``scaled`` is added."""
    return np.abs(deviation + scaled).sum(axis=-1) - np.abs(deviation).sum(axis=-1)


def assign_groups(
    counts: np.ndarray,
    sizes: np.ndarray,
    targets: np.ndarray,
    row_targets: np.ndarray,
    step: int,
    rng: np.random.Generator,
) -> np.ndarray:
    """Part index of every group, keeping each part's counts close to its targets.

    Parameters
    ----------
    counts : (G, C) int array
        What each group holds of each balanced column (rows per class, or positives
        per label and, as a last column, rows).
    sizes : (G,) int array
        Rows in each group.
    targets : (B, C) int array
        Desired counts of each part, scaled by ``step``.
    row_targets : (B,) int array
        Desired rows of each part, scaled by ``step``.
    step : int
        What one row is worth in the scaled units.
    rng : numpy.random.Generator
        Source of the order among equal-sized groups and of tie-breaks.

    Returns
    -------
    (G,) int64 array of part indices; every part gets at least one group (G >= B).

    Notes
    -----
    A placement is judged first by its count cost
    ``sum_{b,c} |step * count[b, c] - target[b, c]|`` and, among placements of equal
    count cost, by its row cost ``sum_b |step * rows[b] - row_target[b]|``.  Groups
    are taken largest first (equal sizes in a random order); each goes to the part
    where the cost rises least (ties: a random one), except that once only as many
    groups remain as parts are empty they go to empty parts.  Then, while some
    single-group move to another part lowers the cost strictly and leaves its part
    non-empty, the best move for the group at hand is made (first such part on ties;
    at most 50 passes over the groups).
    """
    n_groups = counts.shape[0]
    n_parts = targets.shape[0]
    scaled = step * counts.astype(np.int64)
    scaled_sizes = step * sizes.astype(np.int64)
    # one unit of count cost outweighs any possible change of the row cost
    weight = 2 * int(scaled_sizes.sum()) + 1
    deviation = -targets.astype(np.int64)
    row_deviation = -row_targets.astype(np.int64)
    members = np.zeros(n_parts, dtype=np.int64)
    part = np.full(n_groups, -1, dtype=np.int64)

    def added(g: int) -> np.ndarray:
        return (weight * _added_cost(deviation, scaled[g])
                + np.abs(row_deviation + scaled_sizes[g]) - np.abs(row_deviation))

    def move(g: int, a: int, b: int) -> None:
        if a >= 0:
            deviation[a] -= scaled[g]
            row_deviation[a] -= scaled_sizes[g]
            members[a] -= 1
        deviation[b] += scaled[g]
        row_deviation[b] += scaled_sizes[g]
        members[b] += 1
        part[g] = b

    perm = rng.permutation(n_groups)
    order = perm[np.argsort(-sizes[perm], kind="stable")]
    for placed, g in enumerate(order):
        cost = added(g)
        empty = np.flatnonzero(members == 0)
        cand = empty if n_groups - placed <= empty.size else np.arange(n_parts)
        move(g, -1, _pick(cand[cost[cand] == cost[cand].min()], rng))
    for _ in range(_MAX_PASSES):
        moved = False
        for g in order:
            a = int(part[g])
            if members[a] == 1:
                continue
            removed = (weight * _added_cost(deviation[a], -scaled[g])
                       + abs(row_deviation[a] - scaled_sizes[g]) - abs(row_deviation[a]))
            change = removed + added(g)
            change[a] = 0
            b = int(np.argmin(change))
            if change[b] < 0:
                move(g, a, b)
                moved = True
        if not moved:
            break
    return part
