"""Pieces of the sign-off document (``lintools report``) that every kind of model shares:
the refit's coefficient intervals, the model's input columns, the recent sample (with or
without outcomes) and the population stability of the inputs and of the delivered
model's scores against it.
"""

from __future__ import annotations

import argparse
from dataclasses import dataclass
from typing import Any

import numpy as np


@dataclass(frozen=True)
class Recent:
    """The ``--recent`` sample: its table, the model's inputs in delivered order, and
    whether it holds the outcome (the target column) for an out-of-time judgement."""

    table: Any
    X: np.ndarray
    with_outcomes: bool


def coefficient_interval(fit: Any, comparison: Any, level: float = 0.95) -> dict[str, Any]:
    """The refit's standard errors and Wald intervals (Student t for least squares, normal
    otherwise: :meth:`coefficient_table`) in the comparison's order of terms."""
    table = fit.coefficient_table(level)
    at = {t: i for i, t in enumerate(table.terms)}
    pick = [at[t] for t in comparison.terms]
    return {"level": level, "distribution": table.distribution,
            "standard_error": np.asarray(table.standard_error)[pick], "lower": np.asarray(table.lower)[pick],
            "upper": np.asarray(table.upper)[pick]}


def input_columns(d: Any, table: Any, X: np.ndarray) -> dict[str, np.ndarray]:
    """The model's input columns as the CSV holds them: numbers, or a text column's cells."""
    from .stability import _columns

    if d.categorical_fields:
        fields = [f.name for f in d.categorical_fields]
        out: dict[str, np.ndarray] = {}
        for j, name in enumerate(d.names):
            field = next((f for f in fields if name.startswith(f + "=")), None)
            if field is None:
                out[name] = X[:, j]
            elif field not in out:
                out[field] = np.array(list(table.extra[field]), dtype=object)
        return out
    texts = set(table.reference_levels)
    plain = [n for n in table.names if not ("=" in n and n.split("=", 1)[0] in texts)]
    return _columns(table, tuple(plain) + tuple(texts))


def read_recent(args: argparse.Namespace, d: Any, target: str) -> Recent | None:
    """The ``--recent`` sample (None without it), with the outcome when the file has the
    target column."""
    from .check import read_refit_data
    from .table_options import table_options
    from ..exchange.csv_table import read_header

    if not args.recent:
        return None
    header = read_header(args.recent, **table_options(args, "categorical", header=True))
    with_outcomes = target in header
    table, X, _ = read_refit_data(args, d, path=args.recent, extra=[args.by] if args.by else [],
                                  with_target=with_outcomes)
    return Recent(table, X, with_outcomes)


def stability_part(args: argparse.Namespace, d: Any, dev: tuple[Any, np.ndarray, dict[str, np.ndarray]],
                   recent: Recent, scores: dict[str, np.ndarray], charts: dict) -> dict[str, Any]:
    """The stability record of the document: every input and every delivered score
    (``dev[2]`` on the development rows, ``scores`` on the recent ones); the figures of
    the index and of the bins of the scores and of every column that moved go to ``charts``."""
    from .report_facts import stability
    from ..document import charts as ch

    table, X, dev_scores = dev
    dev_cols = {**dev_scores, **input_columns(d, table, X)}
    recent_cols = {**scores, **input_columns(d, recent.table, recent.X)}
    stab = stability(dev_cols, recent_cols, (table.weights, recent.table.weights), args.stability_bins)
    charts["stability"] = ch.stability_chart(stab, "Population stability: recent against development")
    shown = [n for n, r in stab.items() if n in dev_scores or r.reading != "stable"]
    for name in shown:
        charts[f"stability bins of {name}"] = ch.stability_bins_chart(stab[name], name, f"Bins of {name}")
    rtab = recent.table
    return {"file": args.recent, "rows_read": int(rtab.lines.size + rtab.dropped), "rows_used": int(rtab.lines.size),
            "bins": args.stability_bins, "scores": list(dev_scores), "columns": stab, "shown": shown,
            "bin_words": {n: ch.bin_words(stab[n]) for n in shown}}


def out_of_time_part(args: argparse.Namespace, recent: Recent | None, target: str, judge: Any) -> Any:
    """The out-of-time record: ``judge(recent)`` (a dict of the sample's figures) when the
    recent sample has the outcome, else a record that says it has none."""
    from .report_facts import attempt

    if recent is None:
        return None
    rtab = recent.table
    head = {"file": args.recent, "rows_used": int(rtab.lines.size), "with_outcomes": recent.with_outcomes}
    if not recent.with_outcomes:
        return {**head, "note": f"the recent sample has no column '{target}': its outcomes are not known yet, so "
                                "only its population is compared (no out-of-time calibration or discrimination)"}
    notes: list[str] = []
    figures = attempt(notes, "out-of-time judgement", lambda: judge(recent))
    return {**head, **(figures or {}), "note": "; ".join(notes) or None}
