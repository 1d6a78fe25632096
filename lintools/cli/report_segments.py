"""The segments table of the sign-off document for models judged on more than one
probability (least squares, softmax): one entry per value of the ``--by`` column, each
figure computed by the library on the segment's rows, a figure that cannot be computed
recorded as a note with the library's reason, every segment kept.
"""

from __future__ import annotations

from typing import Any, Callable, Sequence

import numpy as np

from .report_facts import attempt


def _text(values: Sequence) -> np.ndarray:
    return np.array([str(v) for v in values], dtype=object)


def segment_table(by: str, groups: Sequence, recent_groups: Sequence | None,
                  figures: dict[str, Callable[[np.ndarray], Any]], *,
                  stability: Callable[[np.ndarray, np.ndarray], float] | None,
                  small: Callable[[np.ndarray], bool], rule: str) -> dict[str, Any]:
    """One entry per segment (sorted as text, from either sample): its rows, every figure
    of ``figures`` (``fn(rows)`` on the development rows of the segment), whether it is
    small (``small(rows)``), and with a recent sample ``stability(rows, recent_rows)``."""
    g = _text(groups)
    rg = None if recent_groups is None else _text(recent_groups)
    entries = []
    for value in sorted(set(g.tolist()) | (set(rg.tolist()) if rg is not None else set())):
        rows = g == value
        notes: list[str] = [] if rows.any() else ["absent from the development sample"]
        entry: dict[str, Any] = {"segment": value, "rows": int(rows.sum()), "small": bool(small(rows))}
        for key, fn in figures.items():
            entry[key] = attempt(notes, key, lambda: fn(rows)) if rows.any() else None
        entry["stability_index"] = None
        if stability is not None and rows.any():
            there = rg == value
            if there.any():
                entry["stability_index"] = attempt(notes, "stability", lambda: stability(rows, there))
            else:
                notes.append("absent from the recent sample")
        entry["note"] = "; ".join(notes) or None
        entries.append(entry)
    return {"by": by, "small_rule": rule, "entries": entries}


def weights_of(weights: Any, rows: np.ndarray) -> Any:
    """The case weights of some rows (None without weights)."""
    return None if weights is None else np.asarray(weights)[rows]
