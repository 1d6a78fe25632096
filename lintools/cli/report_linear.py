"""The sign-off document's judgement of a delivered least-squares model: the residuals of
the delivered predictions (summary, the line of observed on predicted with the mean
residual, binned means with intervals), the stability of the prediction and the inputs,
segments, and the same residual checks on a recent sample that has the response (out
of time).
"""

from __future__ import annotations

import argparse
from typing import Any

import numpy as np

from .report_facts import SMALL_ROWS_PER_BAND, attempt
from .report_parts import Recent, out_of_time_part, stability_part
from .report_segments import segment_table, weights_of

#: The name of the delivered model's prediction among the compared columns.
SCORE = "delivered prediction"


def response_sample(args: argparse.Namespace, y: np.ndarray, pred: np.ndarray, w: Any, target: str, charts: dict,
                    prefix: str = "", where: str = "") -> dict[str, Any]:
    """The residual checks of the predictions ``pred`` against the response ``y``; the
    figure goes to ``charts`` under ``prefix``."""
    from ..document.charts_more import response_bins_chart
    from ..metrics.response_checks import residual_summary, response_bins, response_line

    notes: list[str] = []
    line = attempt(notes, "line of observed on predicted", lambda: response_line(y, pred, weights=w))
    bins = response_bins(y, pred, bins=args.bins, weights=w)
    charts[prefix + "binned response"] = response_bins_chart(
        bins, f"Mean residual of {target} by bin of the delivered prediction{where}", target)
    return {"residuals": residual_summary(y, pred, weights=w), "response_line": line, "response_bins": bins,
            "response_notes": notes}


def _numbers(values: Any, target: str, where: str) -> np.ndarray:
    from ..support.errors import InputError

    try:
        return np.array(list(values), dtype=float)
    except (TypeError, ValueError):
        raise InputError(f"the column '{target}' of {where} holds text; a least-squares model's response is a "
                         "number") from None


def _mean(values: np.ndarray, weights: Any) -> float:
    """The (case-weighted) mean of a segment's values; refused when its weights are all zero."""
    from ..support.errors import InputError

    total = float(values.size) if weights is None else float(np.sum(weights))
    if not total > 0:
        raise InputError("every row of the segment has case weight 0: it has no mean")
    return float(values.sum() if weights is None else np.asarray(weights, dtype=float) @ values) / total


def linear_parts(args: argparse.Namespace, d: Any, table: Any, X: np.ndarray, target: str, cc: Any,
                 recent: Recent | None, charts: dict) -> dict[str, Any]:
    """The least-squares model's part of the document (its charts go to ``charts``)."""
    from ..exchange.scoring import read_model
    from ..metrics.response_checks import residual_summary, response_line
    from ..metrics.stability import population_stability

    model = read_model(args.model)
    pred = np.asarray(model.mean(X), dtype=float)
    y, w = _numbers(table.target, target, "the development data"), table.weights
    parts = response_sample(args, y, pred, w, target, charts)
    rp = None if recent is None else np.asarray(model.mean(recent.X), dtype=float)
    stab = None if recent is None else stability_part(args, d, (table, X, {SCORE: pred}), recent, {SCORE: rp}, charts)
    segs = None
    if args.by:
        last: list[Any] = [None, None]  # the segment's rows and their residual figures, computed once

        def residuals_in(rows: np.ndarray) -> Any:
            if last[0] is not rows:
                last[:] = [rows, residual_summary(y[rows], pred[rows], weights=weights_of(w, rows))]
            return last[1]

        figures = {"weight": lambda r: residuals_in(r).weight,
                   "mean_observed": lambda r: _mean(y[r], weights_of(w, r)),
                   "mean_predicted": lambda r: _mean(pred[r], weights_of(w, r)),
                   "mean_residual": lambda r: residuals_in(r).mean,
                   "root_mean_square": lambda r: residuals_in(r).root_mean_square,
                   "explained": lambda r: residuals_in(r).explained,
                   "slope": lambda r: response_line(y[r], pred[r], weights=weights_of(w, r)).slope}
        stability = None if recent is None else (lambda r, t: population_stability(
            pred[r], rp[t], bins=args.stability_bins, weights=weights_of(w, r),
            actual_weights=weights_of(recent.table.weights, t)).index)
        segs = segment_table(args.by, table.extra[args.by], None if recent is None else recent.table.extra[args.by],
                             figures, stability=stability, small=lambda r: r.sum() < SMALL_ROWS_PER_BAND * args.bins,
                             rule=f"A segment is flagged SMALL with fewer than {SMALL_ROWS_PER_BAND} rows per bin "
                                  f"({args.bins} bins) (common practice); its figures are dominated by chance.")
    oot = out_of_time_part(args, recent, target, lambda r: response_sample(
        args, _numbers(r.table.target, target, "the recent sample"), rp, r.table.weights, target, charts,
        "out-of-time ", " (out of time)"))
    return {**parts, "stability": stab, "segments": segs, "out_of_time": oot}
