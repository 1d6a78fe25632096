"""The sign-off document's judgement of a delivered binary logistic model: calibration
(reliability table and checks), discrimination (ROC area, accuracy ratio,
Kolmogorov-Smirnov, gains), band tests, stability of the probability and the inputs,
segments, and the same calibration and discrimination on a recent sample that has the
outcomes (out of time).
"""

from __future__ import annotations

import argparse
from typing import Any

import numpy as np

from .report_parts import Recent, out_of_time_part, stability_part

#: The name of the delivered model's probability among the compared columns.
SCORE = "delivered probability"


def binary_sample(args: argparse.Namespace, y: list, p: np.ndarray, w: Any, positive: Any, target: str,
                  charts: dict, prefix: str = "", where: str = "") -> dict[str, Any]:
    """Calibration and discrimination of the probabilities ``p`` against ``y``; their
    figures go to ``charts`` under ``prefix``."""
    from .calibration import calibration_report
    from .report_facts import discrimination
    from ..document import charts as ch

    cal = calibration_report(y, p, positive=positive, bins=args.bins, strategy=args.strategy, groups=args.groups,
                             weights=w)
    disc = discrimination(y, p, w, positive, args.gain_bands)
    words = f"{target} = {positive!s}"
    charts[prefix + "reliability"] = ch.reliability_chart(cal.reliability, f"Reliability of the delivered "
                                                          f"probabilities{where}", words)
    charts[prefix + "roc"] = ch.roc_chart(y, p, f"ROC curve of the delivered probabilities{where}", weights=w,
                                          positive=positive)
    charts[prefix + "gains"] = ch.gains_chart(disc["gains"], f"Cumulative gains of the delivered probabilities{where}")
    calibration = cal.to_json()
    calibration.pop("roc_area")  # in the discrimination section
    return {"calibration": calibration, "discrimination": disc}


def binary_parts(args: argparse.Namespace, d: Any, table: Any, X: np.ndarray, target: str, cc: Any,
                 recent: Recent | None, charts: dict) -> dict[str, Any]:
    """The binary model's part of the document (its charts go to ``charts``)."""
    from .report_facts import attempt, bands_argument, segments
    from ..exchange.scoring import read_model
    from ..metrics.band_tests import band_tests
    from ..metrics.checks import hosmer_lemeshow

    positive = cc.fit.positive_class
    y, w = list(table.target), table.weights
    model = read_model(args.model)
    p = np.asarray(model.mean(X), dtype=float)  # the delivered model's probabilities
    parts = binary_sample(args, y, p, w, positive, target, charts)
    notes: list[str] = []
    bands, band_source = bands_argument(args.bands, 10, table.extra)
    grades = attempt(notes, "band tests", lambda: band_tests(y, p, bands, weights=w, positive=positive))
    rp = None if recent is None else np.asarray(model.mean(recent.X), dtype=float)
    stab = None if recent is None else stability_part(args, d, (table, X, {SCORE: p}), recent, {SCORE: rp}, charts)
    segs = None
    if args.by:
        segs = segments(args.by, table.extra[args.by], y, p, w, positive, bands=bands,
                        recent=None if recent is None else (recent.table.extra[args.by], rp, recent.table.weights),
                        stability_bins=args.stability_bins,
                        calibration=lambda ys, ps, ws: hosmer_lemeshow(ys, ps, groups=args.groups, weights=ws,
                                                                       positive=positive))
    oot = out_of_time_part(args, recent, target, lambda r: binary_sample(
        args, list(r.table.target), rp, r.table.weights, positive, target, charts, "out-of-time ",
        " (out of time)"))
    return {**parts, "band_tests": grades, "band_source": band_source, "band_notes": notes, "stability": stab,
            "segments": segs, "out_of_time": oot,
            "band_significance": None if grades is None else 1.0 - grades.level, "positive": str(positive)}
