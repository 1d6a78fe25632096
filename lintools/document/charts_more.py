"""More figures of the sign-off document as data (see :mod:`lintools.document.charts`):
binned means of a continuous response against its predictions, and the per-class
reliability and ROC curves of a class-probability model.  One function per figure
computes its series; the renderers draw them.
"""

from __future__ import annotations

import math
from typing import Any, Sequence

import numpy as np

from .charts import Chart, Panel, Series, _pad, roc_curve_points

__all__ = ["CLASS_COLOURS", "class_reliability_chart", "class_roc_chart", "response_bins_chart"]

#: Colours of the classes, in order (Okabe & Ito 2008); markers and dashes vary as well.
CLASS_COLOURS = ("blue", "vermillion", "green", "orange", "sky", "purple", "black", "grey")
_MARKERS = ("circle", "diamond", "square")


def _held(values: np.ndarray, low: np.ndarray, high: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Interval bounds that hold the values (an undefined bound: the value itself)."""
    lo = np.where(np.isfinite(low), np.minimum(low, values), values)
    hi = np.where(np.isfinite(high), np.maximum(high, values), values)
    return lo, hi


def response_bins_chart(table: Any, title: str, response: str) -> Chart:
    """The mean residual (mean observed minus mean predicted response) in the bins of a
    :class:`lintools.metrics.response_checks.ResponseBins`, with the Student-t interval of
    the mean observed value moved by the bin's mean prediction, against the mean
    prediction; the line of no bias at 0; below it the rows of each bin (log scale) drawn
    over the bin's range of predictions.  On the residual scale a bias of a bin shows
    even when it is small beside the spread of the predictions."""
    mp, mo = np.asarray(table.mean_predicted), np.asarray(table.mean_observed)
    low, high = _held(mo, np.asarray(table.observed_lower), np.asarray(table.observed_upper))
    gap, low, high = mo - mp, low - mp, high - mp
    lowest, highest = np.asarray(table.lowest), np.asarray(table.highest)
    x_span = _pad(float(lowest.min()), float(highest.max()), 0.04)
    reach = max(float(np.max(np.abs(np.r_[low, high]))), 1e-300)
    y_span = (-1.15 * reach, 1.15 * reach)
    level = Series("no bias (mean residual 0)", "line", np.array(x_span), np.zeros(2), colour="grey", dashed=True)
    points = Series(f"mean residual of the bin, {100 * table.level:g}% Student-t interval", "points", mp, gap,
                    low=low, high=high, colour="blue", joined=True)
    upper = Panel("", "mean residual (observed - predicted)", x_span, y_span, (level, points))
    counts = np.asarray(table.rows, dtype=float)
    least = 0.006 * (x_span[1] - x_span[0])  # a bin of tied predictions still shows as a bar
    mid = (lowest + highest) / 2
    half = np.maximum((highest - lowest) / 2, least)
    floor = 0.5
    bars = Series("rows per bin", "boxes", mid - half, np.full(counts.size, floor), x2=mid + half, y2=counts,
                  colour="grey")
    top = max(float(counts.max()), 1.0)
    lower = Panel(f"predicted {response} (bins of the table)", "rows (log scale)", x_span,
                  (floor, 10 ** (math.floor(math.log10(top)) + 1)), (bars,), y_log=True, height=0.4)
    return Chart("binned response", title, (upper, lower),
                 "Points at 0 are predicted without bias in their bin; an interval that misses 0 marks a bin whose "
                 "mean the model misses beyond chance. Bars give the rows behind each point and the range of "
                 "predictions in the bin.")


def class_reliability_chart(tables: Sequence[Any], classes: Sequence[str], title: str) -> Chart:
    """One reliability panel per class (one class against the rest): observed share of the
    class with its Wilson interval against the mean forecast probability of every bin
    with weight, and the diagonal of perfect calibration."""
    panels = []
    for k, (table, name) in enumerate(zip(tables, classes)):
        full = (np.asarray(table.weight) > 0) & np.isfinite(table.observed) & np.isfinite(table.mean_predicted)
        o = np.asarray(table.observed)[full]
        low, high = _held(o, np.asarray(table.observed_lower)[full], np.asarray(table.observed_upper)[full])
        diagonal = Series("perfect calibration" if k == 0 else "", "line", np.array([0.0, 1.0]), np.array([0.0, 1.0]),
                          colour="grey", dashed=True)
        colour = CLASS_COLOURS[k % len(CLASS_COLOURS)]
        points = Series(f"'{name}': observed share, {100 * table.level:g}% Wilson interval", "points",
                        np.asarray(table.mean_predicted)[full], o, low=low, high=high, colour=colour,
                        marker=_MARKERS[k % len(_MARKERS)], joined=True)
        panels.append(Panel(f"forecast probability of '{name}'", f"share that is '{name}'", _pad(0.0, 1.0),
                            _pad(0.0, 1.0), (diagonal, points), height=0.75))
    return Chart("class reliability", title, tuple(panels),
                 "One panel per class, that class against all others; points on the diagonal are calibrated.")


def class_roc_chart(y: Any, P: np.ndarray, classes: Sequence[Any], title: str, *, weights: Any = None) -> Chart:
    """The ROC curve of each class's probability, that class against all others."""
    series = [Series("a score that does not rank", "line", np.array([0.0, 1.0]), np.array([0.0, 1.0]),
                     colour="grey", dashed=True)]
    for k, c in enumerate(classes):
        yc = np.array([v == c for v in y])  # the class against all others
        fpr, tpr = roc_curve_points(yc, P[:, k], weights=weights, positive=True)
        series.append(Series(f"'{c}' against the rest", "line", fpr, tpr, colour=CLASS_COLOURS[k % len(CLASS_COLOURS)],
                             dashed=k % 2 == 1))
    panel = Panel("false positive rate (share of the other classes at or above a threshold)",
                  "true positive rate (share of the class)", _pad(0.0, 1.0), _pad(0.0, 1.0), tuple(series))
    return Chart("class roc", title, (panel,), "One curve per class, that class's probability ranking it against all "
                 "others; the area under each is the class's ROC area.")
