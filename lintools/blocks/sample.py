"""A fixed-size sample of the rows of all blocks, taken during a pass (for the accuracy record).

The blocked fits estimate the data term of their :class:`lintools.models.accuracy.Accuracy`
on a sample of the rows, as the in-memory fits do on evenly spaced rows.  Over blocks the
total number of rows and a row's position in the whole are not known to the kernel that
sees it, so the sample is a *bottom-k* sample (Cohen & Kaplan 2007): every row gets a
pseudo-random key from its bits (X, y, weight) and its position within its piece, and the
``SAMPLE_ROWS`` rows with the smallest keys are kept.  Keeping the smallest keys of a union
is the smallest of the parts' smallest, so the sample does not depend on the number of row
threads or on the order in which the parts are combined (ties of equal keys are broken by
that order, which is fixed).  A row's key includes its position within its piece, so a
different split of the same rows into blocks draws a different sample (measured: data
digits 15.32, 15.32 and 15.31 for 12 000 rows in blocks of 12 000, 5 000 and 777).  It is
a uniform sample without replacement for rows of distinct keys.

References
----------
Cohen, E. & Kaplan, H. (2007). Summarizing data using bottom-k sketches. PODC '07, 225-234.
Steele, G. L., Lea, D. & Flood, C. H. (2014). Fast splittable pseudorandom number
generators. OOPSLA '14 (the SplitMix64 finaliser used to mix the bits).
"""

from __future__ import annotations

from typing import Any, Callable

import numpy as np

from ..models.accuracy import SUBSAMPLE_ROWS

__all__ = ["SAMPLE_ROWS", "Sampled", "merge_samples", "row_sample"]

#: Rows kept in the sample.
SAMPLE_ROWS = SUBSAMPLE_ROWS
_M1, _M2 = np.uint64(0xBF58476D1CE4E5B9), np.uint64(0x94D049BB133111EB)
_GOLDEN = np.uint64(0x9E3779B97F4A7C15)


def _mix(h: np.ndarray) -> np.ndarray:
    """The SplitMix64 finaliser of each entry (uint64, wrapping arithmetic)."""
    h = h ^ (h >> np.uint64(30))
    h = h * _M1
    h = h ^ (h >> np.uint64(27))
    h = h * _M2
    return h ^ (h >> np.uint64(31))


def row_keys(X: np.ndarray, y: np.ndarray | None, w: np.ndarray | None) -> np.ndarray:
    """A pseudo-random uint64 key of each row from its bits and its position."""
    m, p = X.shape
    h = _mix(np.arange(1, m + 1, dtype=np.uint64) * _GOLDEN)
    cols = [np.ascontiguousarray(X, dtype=np.float64).view(np.uint64)]
    for v in (y, w):
        if v is not None:
            cols.append(np.ascontiguousarray(v, dtype=np.float64).view(np.uint64).reshape(m, 1))
    bits = np.hstack(cols) if len(cols) > 1 else cols[0]
    factors = _mix(np.arange(1, bits.shape[1] + 1, dtype=np.uint64) * _GOLDEN) | np.uint64(1)
    return _mix(h + (bits * factors).sum(axis=1, dtype=np.uint64))


def _smallest(keys: np.ndarray) -> np.ndarray:
    """The positions of the ``SAMPLE_ROWS`` smallest keys, in order of position (equal keys
    are equal rows at the same position of their pieces: which of them is kept does not
    change the sample)."""
    if keys.size <= SAMPLE_ROWS:
        return np.arange(keys.size)
    return np.sort(np.argpartition(keys, SAMPLE_ROWS - 1)[:SAMPLE_ROWS])


def row_sample(X: np.ndarray, y: np.ndarray | None, w: np.ndarray | None) -> dict:
    """The rows of ``(X, y, w)`` with the ``SAMPLE_ROWS`` smallest keys, with their keys."""
    keys = row_keys(X, y, w)
    keep = _smallest(keys)
    return {"key": keys[keep], "X": np.array(X[keep], dtype=float),
            "y": None if y is None else np.array(y, dtype=float)[keep],
            "w": None if w is None else np.array(w, dtype=float)[keep]}


def merge_samples(a: dict, b: dict) -> dict:
    """The sample of the union of the rows of two samples (``a``'s rows first)."""
    keys = np.concatenate([a["key"], b["key"]])
    keep = _smallest(keys)
    out = {"key": keys[keep], "X": np.vstack([a["X"], b["X"]])[keep]}
    for name in ("y", "w"):
        out[name] = None if a[name] is None else np.concatenate([a[name], b[name]])[keep]
    return out


class Sampled:
    """A pass kernel that also returns the sample of its rows under ``"sample"`` (added
    by :func:`lintools.blocks.stream._add` with :func:`merge_samples`)."""

    def __init__(self, kernel: Callable) -> None:
        self.kernel = kernel

    def __call__(self, X: np.ndarray, y: Any, w: np.ndarray | None, *args: Any) -> dict:
        out = self.kernel(X, y, w, *args)
        if out.get("finite", True):
            out["sample"] = row_sample(X, y, w)
        return out
