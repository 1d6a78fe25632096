"""The sign-off document's judgement of a delivered softmax (multiclass logistic) model:
per class, that class against all others, the reliability table, the calibration line
and the ROC area; over all classes the log-loss, the Brier score and the table of
observed against predicted classes; the stability of every class's probability and the
inputs, segments, and the same figures on a recent sample that has the outcomes (out of
time).
"""

from __future__ import annotations

import argparse
from typing import Any

import numpy as np

from .report_facts import SMALL_CLASS, SMALL_ROWS_PER_BAND, attempt
from .report_parts import Recent, out_of_time_part, stability_part
from .report_segments import segment_table, weights_of


def score_name(c: Any) -> str:
    """The name of the delivered probability of class ``c`` among the compared columns."""
    return f"probability of '{c}'"


def _one_class(args: argparse.Namespace, y: list, p: np.ndarray, w: Any, c: Any, notes: list[str]) -> dict[str, Any]:
    from ..metrics.bins import reliability
    from ..metrics.checks import calibration_line
    from ..metrics.discrimination import roc_auc
    from ..metrics.scores import brier

    yc = np.array([v == c for v in y])  # the class against all others
    o = yc.astype(float)
    ww = np.ones(len(y)) if w is None else np.asarray(w, dtype=float)
    line = attempt(notes, f"calibration line of '{c}'", lambda: calibration_line(yc, p, weights=w, positive=True))
    return {"class": str(c), "weight": float(ww.sum()), "cases": float(ww @ o), "observed_share": float(ww @ o) / float(ww.sum()),
            "mean_forecast": float(ww @ p) / float(ww.sum()),
            "brier": attempt(notes, f"Brier score of '{c}'", lambda: brier(yc, p, weights=w, positive=True).score),
            "roc_area": attempt(notes, f"ROC area of '{c}'", lambda: roc_auc(yc, p, weights=w, positive=True)),
            "calibration_line": None if line is None else {
                k: getattr(line, k) for k in ("slope", "slope_interval", "in_the_large", "in_the_large_interval",
                                              "in_the_large_p_value")},
            "reliability": reliability(yc, p, bins=args.bins, strategy=args.strategy, weights=w, positive=True)}


def class_sample(args: argparse.Namespace, y: list, P: np.ndarray, w: Any, classes: tuple, charts: dict,
                 prefix: str = "", where: str = "") -> dict[str, Any]:
    """Per-class and overall figures of the probability matrix ``P`` (columns: ``classes``)
    against the labels ``y``; the figures go to ``charts`` under ``prefix``."""
    from ..document.charts_more import class_reliability_chart, class_roc_chart
    from ..metrics.confusion import confusion_table
    from ..metrics.scores import brier, cross_entropy

    notes: list[str] = []
    per = [_one_class(args, y, P[:, k], w, c, notes) for k, c in enumerate(classes)]
    names = [str(c) for c in classes]
    charts[prefix + "class reliability"] = class_reliability_chart(
        [e["reliability"] for e in per], names, f"Reliability of each class's delivered probability{where}")
    present = [k for k, e in enumerate(per) if e["roc_area"] is not None]
    if present:
        charts[prefix + "class roc"] = class_roc_chart(y, P[:, present], [classes[k] for k in present],
                                                       f"ROC curve of each class's delivered probability{where}",
                                                       weights=w)
    overall = {"log_loss": attempt(notes, "log-loss", lambda: cross_entropy(y, P, weights=w)),
               "brier": attempt(notes, "Brier score", lambda: brier(y, P, weights=w)),
               "confusion": attempt(notes, "table of classes", lambda: confusion_table(y, P, weights=w))}
    areas = [e["roc_area"].area for e in per if e["roc_area"] is not None]
    overall["mean_roc_area"] = float(np.mean(areas)) if len(areas) == len(per) else None
    return {"classes": per, "overall": overall, "class_notes": notes}


def delivered_probabilities(d: Any, fit: Any, X: np.ndarray) -> np.ndarray:
    """The delivered model's probabilities on ``X``, one column per class of the refit (its order)."""
    from .check import _softmax_delivered
    from ..models.kinds import KINDS

    B, b, _ = _softmax_delivered(d, fit)
    return KINDS[d.kind].mean_of(X @ B + (0.0 if b is None else b))


def class_parts(args: argparse.Namespace, d: Any, table: Any, X: np.ndarray, target: str, cc: Any,
                recent: Recent | None, charts: dict) -> dict[str, Any]:
    """The softmax model's part of the document (its charts go to ``charts``)."""
    from ..metrics.scores import brier, cross_entropy
    from ..metrics.stability import population_stability

    classes = tuple(cc.fit.classes)
    y, w = list(table.target), table.weights
    P = delivered_probabilities(d, cc.fit, X)
    parts = class_sample(args, y, P, w, classes, charts)
    scores = {score_name(c): P[:, k] for k, c in enumerate(classes)}
    RP = None if recent is None else delivered_probabilities(d, cc.fit, recent.X)
    stab = None if recent is None else stability_part(
        args, d, (table, X, scores), recent, {score_name(c): RP[:, k] for k, c in enumerate(classes)}, charts)
    segs = None
    if args.by:
        def sub(r: np.ndarray) -> tuple[list, np.ndarray, Any]:
            return [v for v, keep in zip(y, r) if keep], P[r], weights_of(w, r)

        figures = {"log_loss": lambda r: cross_entropy(*sub(r)[:2], weights=sub(r)[2]),
                   "brier": lambda r: brier(*sub(r)[:2], weights=sub(r)[2]).score,
                   "accuracy": lambda r: _accuracy(*sub(r))}
        stability = None if recent is None else (lambda r, t: max(population_stability(
            P[r, k], RP[t, k], bins=args.stability_bins, weights=weights_of(w, r),
            actual_weights=weights_of(recent.table.weights, t)).index for k in range(len(classes))))

        def small(r: np.ndarray) -> bool:
            counts = [sum(1 for v, keep in zip(y, r) if keep and v == c) for c in classes]
            return bool(r.sum() < SMALL_ROWS_PER_BAND * args.bins or min(counts) < SMALL_CLASS)

        segs = segment_table(args.by, table.extra[args.by], None if recent is None else recent.table.extra[args.by],
                             figures, stability=stability, small=small,
                             rule=f"A segment is flagged SMALL with fewer than {SMALL_ROWS_PER_BAND} rows per bin "
                                  f"({args.bins} bins) or fewer than {SMALL_CLASS} rows of a class (common practice); "
                                  "its figures are dominated by chance. Its stability is the largest index of the "
                                  "classes' probabilities.")
    oot = out_of_time_part(args, recent, target, lambda r: class_sample(
        args, list(r.table.target), RP, r.table.weights, classes, charts, "out-of-time ",
        " (out of time)"))
    return {**parts, "stability": stab, "segments": segs, "out_of_time": oot,
            "class_order": [str(c) for c in classes]}


def _accuracy(y: list, P: np.ndarray, w: Any) -> float:
    from ..metrics.confusion import confusion_table

    return confusion_table(y, P, weights=w).accuracy
