"""The statistics of the sign-off document (``lintools report``), gathered from the library.

Each function calls the library's own functions (:func:`lintools.gains`,
:func:`lintools.kolmogorov_smirnov`, :func:`lintools.band_tests`,
:func:`lintools.population_stability`, the calibration report of ``lintools
calibration``) and returns their records; nothing here computes a statistic of its own
beyond a share or a count.  A statistic that cannot be computed on a sample (a segment
with one class, say) is recorded as a note with the library's reason, never dropped.
"""

from __future__ import annotations

from typing import Any, Sequence

import numpy as np

from ..support.errors import InputError, LintoolsError

#: A segment with fewer rows than this per score band, or fewer cases of a class than
#: :data:`SMALL_CLASS`, is flagged as small (common practice: figures on a few dozen rows
#: are dominated by chance).
SMALL_ROWS_PER_BAND = 10
SMALL_CLASS = 10


def attempt(notes: list[str], what: str, fn: Any) -> Any:
    """``fn()``, or None with ``what: reason`` added to ``notes`` when the library refuses."""
    try:
        return fn()
    except (InputError, LintoolsError) as exc:
        notes.append(f"{what}: {exc}")
        return None


def bands_argument(text: str | None, default: int, extra: dict) -> tuple[Any, str]:
    """The ``bands`` argument of :func:`lintools.band_tests` from ``--bands N|COLUMN``
    and a description of it."""
    if text is None:
        return default, f"{default} quantile bands of the forecast"
    if text.isdigit():
        if int(text) < 1:
            raise InputError("--bands 0: pass a number of quantile bands of 1 or more, or a column of grades")
        return int(text), f"{int(text)} quantile bands of the forecast"
    return list(extra[text]), f"the grades of column '{text}'"


def discrimination(y: Sequence, p: np.ndarray, weights: Any, positive: Any, gain_bands: int) -> dict[str, Any]:
    """ROC area with the accuracy ratio, Kolmogorov-Smirnov and the gains table."""
    from ..metrics.discrimination import roc_auc
    from ..metrics.gains import gains
    from ..metrics.kolmogorov import kolmogorov_smirnov

    return {"roc_area": roc_auc(y, p, weights=weights, positive=positive),
            "kolmogorov_smirnov": kolmogorov_smirnov(y, p, weights=weights, positive=positive),
            "gains": gains(y, p, bands=gain_bands, weights=weights, positive=positive)}


def stability(dev: dict[str, np.ndarray], recent: dict[str, np.ndarray], weights: tuple[Any, Any],
              bins: int) -> dict[str, Any]:
    """The population stability record of every column of ``dev`` against ``recent``."""
    from ..metrics.stability import population_stability

    return {name: population_stability(dev[name], recent[name], bins=bins, weights=weights[0],
                                       actual_weights=weights[1]) for name in dev}


def segments(by: str, groups: Sequence, y: Sequence, p: np.ndarray, weights: Any, positive: Any, *,
             bands: Any, recent: tuple[Sequence, np.ndarray, Any] | None, stability_bins: int,
             calibration: Any) -> dict[str, Any]:
    """One entry per value of the ``--by`` column (sorted as text): rows, positives,
    observed rate, mean forecast, Brier score, ROC area and accuracy ratio,
    Kolmogorov-Smirnov, the Hosmer-Lemeshow p-value, bands rejected by the binomial test,
    and with a recent sample the stability index of the score; small segments flagged."""
    from ..metrics.band_tests import band_tests
    from ..metrics.discrimination import roc_auc
    from ..metrics.kolmogorov import kolmogorov_smirnov
    from ..metrics.scores import brier
    from ..metrics.stability import population_stability

    g = np.array([str(v) for v in groups], dtype=object)
    o = np.array([v == positive for v in y])
    w = np.ones(len(y)) if weights is None else np.asarray(weights, dtype=float)
    rg = None if recent is None else np.array([str(v) for v in recent[0]], dtype=object)
    entries = []
    n_bands = bands if isinstance(bands, int) else len(set(map(str, bands)))
    for value in sorted(set(g.tolist()) | (set(rg.tolist()) if rg is not None else set())):
        rows = g == value
        notes: list[str] = []
        ys = [v for v, keep in zip(y, rows) if keep]
        ws = None if weights is None else w[rows]
        ps = p[rows]
        pos, neg = float(w[rows & o].sum()), float(w[rows & ~o].sum())
        entry: dict[str, Any] = {
            "segment": value, "rows": int(rows.sum()), "positives": pos, "negatives": neg,
            "small": bool(rows.sum() < SMALL_ROWS_PER_BAND * n_bands or min(pos, neg) < SMALL_CLASS),
            "observed_rate": pos / (pos + neg) if pos + neg > 0 else None,
            "mean_forecast": (float(np.average(ps, weights=None if ws is None else ws / ws.max()))
                              if rows.any() and (ws is None or ws.max() > 0) else None),
        }
        if not rows.any():
            entry["note"] = "absent from the development sample"
        for key, fn in (("brier", lambda: brier(ys, ps, weights=ws, positive=positive).score),
                        ("roc", lambda: roc_auc(ys, ps, weights=ws, positive=positive)),
                        ("ks", lambda: kolmogorov_smirnov(ys, ps, weights=ws, positive=positive).statistic),
                        ("hl", lambda: calibration(ys, ps, ws).p_value),
                        ("bands", lambda: band_tests(ys, ps, bands if isinstance(bands, int)
                                                     else [b for b, keep in zip(bands, rows) if keep],
                                                     weights=ws, positive=positive).rejected[0])):
            entry[key] = attempt(notes, key, fn) if rows.any() else None
        roc = entry.pop("roc")
        entry["roc_area"] = None if roc is None else roc.area
        entry["accuracy_ratio"] = None if roc is None else roc.accuracy_ratio
        entry["hosmer_lemeshow_p_value"] = entry.pop("hl")
        entry["bands_rejected"] = entry.pop("bands")
        entry["stability_index"] = None
        if recent is not None and rows.any():
            there = rg == value
            if there.any():
                rw = None if recent[2] is None else np.asarray(recent[2])[there]
                entry["stability_index"] = attempt(notes, "stability", lambda: population_stability(
                    ps, recent[1][there], bins=stability_bins, weights=ws, actual_weights=rw).index)
            else:
                notes.append("absent from the recent sample")
        entry["note"] = "; ".join(([entry["note"]] if entry.get("note") else []) + notes) or None
        entries.append(entry)
    rule = (f"A segment is flagged SMALL with fewer than {SMALL_ROWS_PER_BAND} rows per band ({n_bands} bands) or "
            f"fewer than {SMALL_CLASS} cases of a class (common practice); its figures are dominated by chance.")
    return {"by": by, "small_rule": rule, "entries": entries}
