"""The response of a classifier, read and checked: labels, or successes out of trials.

Shared by the binary and softmax fits, the separation check and the block fits, so every
one of them reads ``y`` by the same rules and refuses it with the same messages.
"""

from __future__ import annotations

from typing import Any

import numpy as np

from ..support.errors import InputError
from ..support.validate import as_labels, as_vector, is_one_of

__all__ = ["MAX_COUNT", "binary_response", "read_labels", "target_name"]

#: The largest count of trials (or successes): 2**53, below which doubles hold every whole number.
MAX_COUNT = 2.0**53


def target_name(y: Any) -> str:
    name = getattr(y, "name", None)
    return str(name) if isinstance(name, str) and name else "y"


def _whole(values: np.ndarray) -> np.ndarray:
    return values == np.round(values)


def read_labels(y: Any, n: int) -> tuple[tuple, np.ndarray]:
    """``as_labels``, vectorised for plain numeric or boolean arrays of the right length."""
    arr = y if type(y) is np.ndarray else None  # not a masked array: as_labels refuses masked entries
    if arr is not None and arr.ndim == 1 and arr.shape[0] == n and arr.dtype.kind in "biuf":
        if arr.dtype.kind != "f" or np.all(np.isfinite(arr)):
            if n and arr.dtype.kind != "b":
                lo, hi = arr.min(), arr.max()
                if lo != hi:  # two values only (the usual binary target): no sort needed
                    top = arr == hi
                    if np.count_nonzero(top) + np.count_nonzero(arr == lo) == n:
                        return (lo.item(), hi.item()), top.astype(np.intp)
            uniq, codes = np.unique(arr, return_inverse=True)
            return tuple(uniq.tolist()), codes.astype(np.intp)
    return as_labels(y, "y", n)  # everything else, and the error messages


def binary_response(y: Any, trials: Any, positive: Any, n: int) -> tuple[np.ndarray, np.ndarray, tuple, Any]:
    """Successes, trials, classes and positive class, checked."""
    if trials is None:
        classes, codes = read_labels(y, n)
        if len(classes) == 1:
            raise InputError(
                f"y has only one class ({classes[0]!r}); a logistic model needs both outcomes: "
                "check the target column or the rows selected"
            )
        if len(classes) > 2:
            shown = ", ".join(repr(c) for c in classes[:5]) + (", ..." if len(classes) > 5 else "")
            raise InputError(
                f"y has {len(classes)} distinct labels ({shown}); a binary logistic model needs "
                "exactly two: use lintools.softmax for more classes, recode y, or pass success "
                "counts with trials="
            )
        if positive is None:
            positive = classes[1]
        elif not is_one_of(positive, classes, exact_kind=False):
            raise InputError(
                f"positive={positive!r} is not one of the labels of y ({classes[0]!r}, {classes[1]!r}); "
                "name one of them"
            )
        else:
            positive = classes[classes.index(positive)]
        yy = (codes == classes.index(positive)).astype(float)
        return yy, np.ones(n), classes, positive
    if positive is not None:
        raise InputError(
            "positive= names a label, but with trials= y holds success counts (the positive "
            "class is a success); leave positive unset"
        )
    yy = as_vector(y, "y", n)
    m = as_vector(trials, "trials", n)
    for arr, name, what in ((m, "trials", "the number of trials"), (yy, "y", "the number of successes")):
        bad = arr < 0
        if bad.any():
            i = int(np.argmax(bad))
            raise InputError(f"{name} is negative ({arr[i]:g}) at row {i}; {name} must count {what} (>= 0)")
        bad = arr > MAX_COUNT
        if bad.any():
            i = int(np.argmax(bad))
            raise InputError(
                f"{name} is {arr[i]:.6g} at row {i}, beyond 2**53 (9.0e15), above which doubles do not hold every "
                f"whole number, so it cannot be exactly {what}: pass counts up to 2**53 (a row "
                "that stands for many identical groups takes their number as its case weight instead)"
            )
        bad = ~_whole(arr)
        if bad.any():
            i = int(np.argmax(bad))
            raise InputError(
                f"{name} is not a whole number ({arr[i]:g}) at row {i}; with trials= y counts "
                "successes out of trials, both whole numbers (for fractional outcomes split each "
                "row into a success row and a failure row with case weights)"
            )
    bad = yy > m
    if bad.any():
        i = int(np.argmax(bad))
        raise InputError(
            f"y ({yy[i]:g} successes) exceeds trials ({m[i]:g}) at row {i}; successes cannot "
            "outnumber trials: check the two columns"
        )
    return yy, m, (0, 1), 1
