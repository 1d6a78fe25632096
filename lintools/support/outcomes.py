"""Inputs of the probability metrics: labels, forecasts, weights.

The metric modules (:mod:`lintools.metrics.scores`, :mod:`lintools.metrics.discrimination`,
:mod:`lintools.metrics.recalibration`) share these readers so that every metric treats labels,
probability vectors, probability matrices and case weights the same way.

Binary labels
    ``y`` may be bool, 0/1 or any two mutually comparable labels.  The positive class is
    the larger label unless ``positive=`` names it.  A ``y`` that holds a single label is
    accepted when that label is 0/1/bool (its meaning is then clear) or when
    ``positive=`` is given; more than two labels are an error.

Class-probability matrices
    ``p`` of shape (n, K): column k is the probability of the k-th class in sorted label
    order.  When ``y`` shows fewer than K distinct labels, its labels must be integers in
    ``0..K-1`` (they are then read as column numbers).  Every row must sum to 1 within
    ``ROW_SUM_TOLERANCE``.
"""

from __future__ import annotations

import math
import numbers
from typing import Any

import numpy as np

from . import distributions as dist
from .errors import InputError
from .validate import as_labels, as_vector, as_weights, check_probabilities, is_one_of, weight_scale

__all__ = [
    "ROW_SUM_TOLERANCE",
    "binary_outcome",
    "binary_forecast",
    "class_forecast",
    "class_codes",
    "forecast",
    "case_weights",
    "scaled_weights",
    "unscale",
    "finite_scores",
    "check_level",
    "fmt_number",
    "vector_in",
    "two_sided",
]

#: largest accepted |row sum - 1| of a class-probability matrix
ROW_SUM_TOLERANCE = 1e-6


def _is_zero_one(label: Any) -> bool:
    if isinstance(label, (bool, np.bool_)):
        return True
    try:
        return float(label) in (0.0, 1.0) and not isinstance(label, str)
    except (TypeError, ValueError):
        return False


def binary_outcome(
    y: Any, positive: Any = None, name: str = "y", n: int | None = None, *, need_both: bool = False
) -> tuple[np.ndarray, tuple]:
    """Return the 0/1 outcome (float64) of binary labels and the (negative, positive) labels.

    Parameters
    ----------
    y : array-like
        One label per row.
    positive : label, optional
        The label of the positive class; default the larger of the two labels.
    n : int, optional
        Required number of rows (the length of the forecasts).
    need_both : bool
        Require both classes to be present (for example for the ROC area).
    """
    classes, codes = as_labels(y, name, None)
    if n is not None and codes.shape[0] != n:
        raise InputError(
            f"{name} has {codes.shape[0]} labels but the forecasts have {n} rows; "
            "pass one forecast per label (mismatched lengths)"
        )
    if len(classes) > 2:
        shown = ", ".join(repr(c) for c in classes[:5])
        raise InputError(
            f"{name} has {len(classes)} distinct labels ({shown}{', ...' if len(classes) > 5 else ''}) "
            "but this metric needs two classes; pass binary labels, or an (n, K) "
            "probability matrix where the metric accepts one"
        )
    if positive is not None:
        if not is_one_of(positive, classes, exact_kind=False):
            if len(classes) == 2:
                raise InputError(
                    f"positive={positive!r} is not one of the labels of {name} "
                    f"({classes[0]!r}, {classes[1]!r}); name one of them"
                )
            # a single label that is not the positive one: every row is negative
            outcome = np.zeros(codes.shape[0])
            return outcome, (classes[0], positive)
        outcome = (codes == classes.index(positive)).astype(np.float64)
        other = [c for c in classes if c != positive]
        negative = other[0] if other else None
        if need_both and len(classes) < 2:
            raise InputError(
                f"{name} holds a single class ({classes[0]!r}); this metric needs cases "
                "of both classes"
            )
        return outcome, (negative, positive)
    if len(classes) == 1:
        if need_both:
            raise InputError(
                f"{name} holds a single class ({classes[0]!r}); this metric needs cases "
                "of both classes"
            )
        label = classes[0]
        if not _is_zero_one(label):
            raise InputError(
                f"{name} holds the single label {label!r}, so it cannot tell which class "
                "is positive; pass positive=<label of the positive class>"
            )
        value = float(label)
        return np.full(codes.shape[0], value), ((None, label) if value else (label, None))
    return codes.astype(np.float64), classes


def binary_forecast(p: Any, name: str = "p") -> np.ndarray:
    """Return a 1-D vector of probabilities in [0, 1] (a matrix is refused)."""
    arr = check_probabilities(p, name)
    if arr.ndim != 1:
        raise InputError(
            f"{name} has shape {arr.shape}; this metric is binary: pass the 1-D probability "
            f"of the positive class (for a two-column matrix, {name}[:, 1])"
        )
    return arr


def class_forecast(y: Any, p: np.ndarray, name: str = "p", ylabel: str = "y") -> tuple[np.ndarray, tuple]:
    """Check an (n, K) probability matrix against labels; return column codes and classes."""
    n, k = p.shape
    if k < 2:
        raise InputError(
            f"{name} has {k} column; a class-probability matrix needs one column per class "
            "(at least 2); for a binary forecast pass a 1-D vector"
        )
    sums = p.sum(axis=1)
    off = np.abs(sums - 1.0) > ROW_SUM_TOLERANCE
    if off.any():
        i = int(np.argmax(off))
        raise InputError(
            f"{name} row {i} sums to {float(sums[i])!r}, not 1; each row must hold the class "
            f"probabilities (tolerance {ROW_SUM_TOLERANCE:g}); normalise the rows or apply "
            "a softmax to logits"
        )
    return class_codes(y, n, k, name, ylabel)


def class_codes(y: Any, n: int, k: int, name: str = "p", ylabel: str = "y") -> tuple[np.ndarray, tuple]:
    """Column number (0..k-1) of each label of ``y`` for an (n, k) matrix called ``name``."""
    classes, codes = as_labels(y, ylabel, None)
    if codes.shape[0] != n:
        raise InputError(
            f"{ylabel} has {codes.shape[0]} labels but {name} has {n} rows; pass one "
            "row per label (mismatched lengths)"
        )
    if len(classes) == k:
        return codes, classes
    if len(classes) < k and all(
        not isinstance(c, (str, bool, np.bool_)) and float(c).is_integer() and 0 <= c < k for c in classes
    ):
        codes = np.array([int(c) for c in classes], dtype=np.intp)[codes]
        return codes, tuple(range(k))
    raise InputError(
        f"{ylabel} has {len(classes)} distinct labels but {name} has {k} columns (wrong "
        "number of columns); pass one column per class in sorted label order (or integer "
        f"labels 0..{k - 1} that name the columns)"
    )


def forecast(y: Any, p: Any, positive: Any = None, name: str = "p") -> tuple[np.ndarray, np.ndarray, bool]:
    """Read a binary or class forecast.

    Returns ``(outcome, probs, is_matrix)``: for a 1-D ``p`` the 0/1 outcome and the
    vector; for an (n, K) ``p`` the one-hot outcome matrix and the matrix.
    """
    arr = check_probabilities(p, name)
    if arr.ndim == 1:
        outcome, _ = binary_outcome(y, positive, n=arr.shape[0])
        return outcome, arr, False
    if positive is not None:
        raise InputError(
            f"positive= applies to a 1-D {name}; with a probability matrix each column is a "
            "class in sorted label order"
        )
    codes, _ = class_forecast(y, arr, name)
    onehot = np.zeros_like(arr)
    onehot[np.arange(arr.shape[0]), codes] = 1.0
    return onehot, arr, True


def fmt_number(value: float, width: int = 11, digits: int = 6) -> str:
    """Right-aligned number for the text reports ("-" for NaN)."""
    if value is None or (isinstance(value, float) and math.isnan(value)):
        return "-".rjust(width)
    return f"{value:.{digits}g}".rjust(width)


def check_level(level: Any) -> float:
    """Return a confidence level strictly between 0 and 1."""
    if isinstance(level, bool) or not isinstance(level, numbers.Real) or not 0.0 < float(level) < 1.0:
        raise InputError(f"level must be a number strictly between 0 and 1 (e.g. 0.95); got {level!r}")
    return float(level)


def vector_in(x: Any, name: str) -> tuple[np.ndarray, bool]:
    """A finite 1-D input of a map's ``apply`` and whether it was a scalar."""
    if isinstance(x, (bool, np.bool_)):
        raise InputError(f"{name} is a bool ({x!r}); pass a number or an array of numbers")
    # a collection goes to as_vector whole (np.ndim would raise on a ragged list)
    if not hasattr(x, "__len__") and np.ndim(x) == 0:
        return as_vector([x], name), True
    return as_vector(x, name), False


def two_sided(z: float) -> float:
    """Two-sided standard normal tail probability of ``z`` (0 for infinite z)."""
    if math.isnan(z):
        return math.nan
    if math.isinf(z):
        return 0.0
    return float(min(1.0, 2.0 * dist.normal_sf(abs(z))))


def case_weights(weights: Any, n: int) -> np.ndarray:
    """Case weights: ones when None; else finite, >= 0, positive total (see ``as_weights``).

    Weights near the largest float are accepted (their total may overflow in the check;
    the metrics never sum them unscaled, see :func:`scaled_weights`)."""
    with np.errstate(over="ignore"):
        return as_weights(weights, n)


def scaled_weights(weights: Any, n: int) -> tuple[np.ndarray, np.ndarray, float]:
    """Case weights checked as in :func:`case_weights`, and the same weights divided by a
    power of two: ``(w, u, s)`` with ``u = w / s`` exact and ``max(u)`` in [1, 2).

    The metrics form every weighted sum from ``u`` (it cannot overflow, and for a power-of-two
    factor its digits do not depend on the scale of ``w``), and multiply a total that they
    report by ``s`` once, through :func:`unscale`.  ``w`` itself only says which rows have
    positive weight (a row can have ``u == 0`` when its weight is below ``max(w) * 2**-1074``).
    """
    w = case_weights(weights, n)
    s = weight_scale(w)
    return w, w / s, s


def unscale(value: Any, s: Any, what: str, *, divide: bool = False) -> Any:
    """``value * s`` (or ``value / s`` with ``divide=True``): a total computed on the scaled
    weights of :func:`scaled_weights`, brought back to the scale of the weights.  A finite
    ``value`` whose result overflows is refused; ``what`` names the total in the message."""
    with np.errstate(over="ignore"):
        out = np.divide(value, s) if divide else np.multiply(value, s)
    if (np.isfinite(value) & ~np.isfinite(out)).any():
        raise InputError(
            f"weights are such that {what} exceeds the largest floating-point number "
            "(about 1.8e308); divide every weight by the same constant (for example their "
            "largest value) or pass case counts: weighted means do not change, and "
            "statistics that count the weights as cases change as their docstrings say"
        )
    return float(out) if np.ndim(out) == 0 else out


def finite_scores(score: Any, name: str, n: int) -> np.ndarray:
    """Return finite real scores (any scale), one per row."""
    arr = as_vector(score, name)
    if arr.shape[0] != n:
        raise InputError(
            f"{name} has {arr.shape[0]} entries but the labels have {n}; pass one score per "
            "label (mismatched lengths)"
        )
    return arr
