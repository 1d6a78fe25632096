r"""The table of observed against predicted classes of a class-probability forecast.

Each row's predicted class is the class of its largest probability (the first such
column on a tie).  With case weights :math:`w_i`, cell :math:`(j, k)` holds
:math:`\sum_{i:\,y_i = j,\ \hat y_i = k} w_i`; the share of weight on the diagonal is the
accuracy, and per class the recall (share of the class's weight predicted as it) and the
precision (share of the weight predicted as the class that is of it).

References
----------
Provost, F. & Kohavi, R. (1998). Glossary of terms. Machine Learning 30, 271-274 (the
confusion matrix, accuracy, precision and recall).
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

import numpy as np

from .bands import sample_weights
from ..support.outcomes import class_forecast
from ..support.errors import InputError
from ..support.validate import ReadOnlyArrays, check_probabilities

__all__ = ["ConfusionTable", "confusion_table"]


@dataclass(frozen=True)
class ConfusionTable(ReadOnlyArrays):
    """Result of :func:`confusion_table`: ``weight[j, k]`` is the case weight of rows of
    class ``classes[j]`` predicted as ``classes[k]`` (``rows[j, k]``: their number);
    ``recall`` and ``precision`` per class (NaN for a class without weight, observed or
    predicted); ``accuracy``: the share of weight on the diagonal."""

    classes: tuple
    rows: np.ndarray
    weight: np.ndarray
    recall: np.ndarray
    precision: np.ndarray
    accuracy: float


def confusion_table(y: Any, p: Any, *, weights: Any = None) -> ConfusionTable:
    """Observed against predicted classes of an (n, K) probability matrix ``p`` whose
    columns are the classes in sorted label order (as :func:`lintools.brier`)."""
    arr = check_probabilities(p, "p")
    if arr.ndim != 2:
        raise InputError("p must be an (n, K) matrix of class probabilities, one column per class")
    codes, classes = class_forecast(y, arr, "p")
    _, u, s = sample_weights(weights, arr.shape[0], "weights", "p")
    k = arr.shape[1]
    guess = np.argmax(arr, axis=1)
    cell = codes * k + guess
    rows = np.bincount(cell, minlength=k * k).reshape(k, k)
    scaled = np.bincount(cell, weights=u, minlength=k * k).reshape(k, k)  # u = w / s: exact, no overflow
    total = scaled.sum()
    with np.errstate(divide="ignore", invalid="ignore"):
        recall = np.diag(scaled) / scaled.sum(axis=1)
        precision = np.diag(scaled) / scaled.sum(axis=0)
    return ConfusionTable(classes=tuple(classes), rows=rows, weight=scaled * s,
                          recall=recall, precision=precision, accuracy=float(np.trace(scaled) / total))
