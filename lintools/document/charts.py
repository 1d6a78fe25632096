"""The figures of the sign-off document as data: one function per figure computes its series.

A :class:`Chart` holds panels; a :class:`Panel` holds axes (ranges, labels with units,
ticks) and :class:`Series` in data coordinates.  Two renderers draw the same chart:
:func:`lintools.document.svg.chart_svg` (inline SVG, NumPy only) and
:func:`lintools.document.png.chart_png` (matplotlib, for ``calibration --plot``).  The
series functions decide everything that is data (what is drawn, where, and the axis
ranges, padded so that no marker or bar touches the frame); a renderer decides only
pixels.

Colours are the colour-blind-safe palette of Okabe & Ito (2008); series that share a
panel differ in marker shape or dash as well, so the figures read in grey print.

References
----------
Okabe, M. & Ito, K. (2008). Color Universal Design: how to make figures and
presentations that are friendly to colorblind people (the eight-colour palette).
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any

import numpy as np

from ..metrics.stability import READING_BANDS
from ..support.outcomes import binary_outcome, case_weights, finite_scores
from ..support.errors import InputError
from ..support.validate import ReadOnlyArrays, weight_scale

__all__ = ["PALETTE", "Chart", "Panel", "Series", "coefficient_chart", "gains_chart", "reliability_chart",
           "roc_chart", "stability_bins_chart", "stability_chart", "term_words"]

#: Okabe & Ito (2008) colours by name.
PALETTE = {"blue": "#0072B2", "vermillion": "#D55E00", "green": "#009E73", "orange": "#E69F00",
           "sky": "#56B4E9", "purple": "#CC79A7", "black": "#000000", "grey": "#6E6E6E"}

#: Points at most this far apart (as a share of each axis) are enough to draw a ROC curve.
ROC_STEP = 1.0 / 200


@dataclass(frozen=True)
class Series(ReadOnlyArrays):
    """One thing drawn in a panel, in data coordinates.

    ``kind`` is ``"line"`` (a polyline through x, y), ``"points"`` (markers at x, y, with
    an interval from ``low`` to ``high`` along the axis ``along`` when given, joined by a
    thin line when ``joined``) or ``"boxes"`` (rectangles from (x, y) to (x2, y2)).
    ``label`` is the legend entry (empty: none).
    """

    label: str
    kind: str
    x: np.ndarray
    y: np.ndarray
    x2: np.ndarray | None = None
    y2: np.ndarray | None = None
    low: np.ndarray | None = None
    high: np.ndarray | None = None
    along: str = "y"
    colour: str = "blue"
    marker: str = "circle"
    dashed: bool = False
    joined: bool = False


@dataclass(frozen=True)
class Panel:
    """Axes and the series drawn in them.  ``x_ticks``/``y_ticks`` are (position, text)
    pairs for an axis of categories (None: round numbers chosen by the renderer);
    ``height`` is relative to a standard panel."""

    x_label: str
    y_label: str
    x_range: tuple[float, float]
    y_range: tuple[float, float]
    series: tuple[Series, ...]
    y_log: bool = False
    x_ticks: tuple[tuple[float, str], ...] | None = None
    y_ticks: tuple[tuple[float, str], ...] | None = None
    height: float = 1.0


@dataclass(frozen=True)
class Chart:
    """A figure: a title, panels stacked top to bottom, and a sentence saying how to read it."""

    name: str
    title: str
    panels: tuple[Panel, ...]
    note: str = ""


def _pad(lo: float, hi: float, share: float = 0.03) -> tuple[float, float]:
    span = (hi - lo) or 1.0
    return float(lo - share * span), float(hi + share * span)


def term_words(term: str) -> str:
    """A coefficient's name as the document prints it (the intercept as a plain word, also
    in a class's term ``class:(intercept)``)."""
    return term.replace("(intercept)", "intercept")


def _short(text: str, most: int = 36) -> str:
    return text if len(text) <= most else text[: most - 1] + "\u2026"


def reliability_chart(table: Any, title: str, positive: str = "the positive class") -> Chart:
    """The reliability diagram of a :class:`lintools.ReliabilityTable`: observed frequency
    with its interval against the mean forecast of every bin with weight, the diagonal of
    perfect calibration, and below it the rows per bin on a log scale (so sparse bins stay
    visible).  Bins without weight are left out of the upper panel only."""
    full = (table.weight > 0) & np.isfinite(table.observed) & np.isfinite(table.mean_predicted)
    o = table.observed[full]
    # the table's intervals contain the observed frequency (reliability guarantees it)
    low, high = np.minimum(table.observed_lower[full], o), np.maximum(table.observed_upper[full], o)
    diagonal = Series("perfect calibration", "line", np.array([0.0, 1.0]), np.array([0.0, 1.0]), colour="grey",
                      dashed=True)
    points = Series(f"observed frequency, {100 * table.level:g}% Wilson interval", "points",
                    table.mean_predicted[full], o, low=low, high=high, colour="blue", joined=True)
    upper = Panel("", f"observed frequency of {positive}", _pad(0.0, 1.0), _pad(0.0, 1.0), (diagonal, points))
    counts = np.asarray(table.count, dtype=float)
    edges = np.asarray(table.edges, dtype=float)
    has = counts > 0
    inset = 0.04 * np.diff(edges)
    floor = 0.5  # the bars stand on 0.5 so that a bin of one row shows on the log scale
    bars = Series("rows per bin", "boxes", (edges[:-1] + inset)[has], np.full(int(has.sum()), floor),
                  x2=(edges[1:] - inset)[has], y2=counts[has], colour="grey")
    top = max(float(counts.max()) if counts.size else 1.0, 1.0)
    lower = Panel("forecast probability (bins of the table)", "rows (log scale)", _pad(0.0, 1.0),
                  (floor, 10 ** (math.floor(math.log10(top)) + 1)), (bars,), y_log=True, height=0.4)
    return Chart("reliability", title, (upper, lower),
                 "Points on the diagonal are calibrated; bars give the rows behind each point.")


def roc_curve_points(y: Any, score: Any, *, weights: Any = None, positive: Any = None,
                     step: float = ROC_STEP) -> tuple[np.ndarray, np.ndarray]:
    """The ROC curve's vertices (false and true positive rates, from (0, 0) to (1, 1)),
    one per distinct score from the highest down, with case weights; thinned to the
    vertices where either rate first passes a multiple of ``step``, so the drawn line is
    within ``step`` of the full curve in each rate."""
    o, _ = binary_outcome(y, positive, need_both=True)
    s = finite_scores(score, "score", o.shape[0])
    w = case_weights(weights, o.shape[0])
    w = w / weight_scale(w)  # exact (a power of two): the cumulative sums cannot overflow
    order = np.argsort(-s, kind="stable")
    s, o, w = s[order], o[order], w[order]
    tp, fp = np.cumsum(w * o), np.cumsum(w * (1.0 - o))
    if not (tp[-1] > 0 and fp[-1] > 0):
        raise InputError("weights are zero for every case of one class; a ROC curve needs both classes")
    last = np.r_[s[1:] != s[:-1], True]  # the last row of each run of equal scores
    tpr = np.r_[0.0, tp[last] / tp[-1]]
    fpr = np.r_[0.0, fp[last] / fp[-1]]
    grid = np.arange(0.0, 1.0 + step, step)
    keep = np.unique(np.r_[0, np.searchsorted(fpr, grid), np.searchsorted(tpr, grid), fpr.size - 1])
    keep = keep[keep < fpr.size]
    return fpr[keep], tpr[keep]


def roc_chart(y: Any, score: Any, title: str, *, weights: Any = None, positive: Any = None) -> Chart:
    """The ROC curve of a score (see :func:`roc_curve_points`) with the diagonal of a
    score that does not rank."""
    fpr, tpr = roc_curve_points(y, score, weights=weights, positive=positive)
    chance = Series("a score that does not rank", "line", np.array([0.0, 1.0]), np.array([0.0, 1.0]),
                    colour="grey", dashed=True)
    curve = Series("ROC curve of the score", "line", fpr, tpr, colour="blue")
    panel = Panel("false positive rate (share of negatives at or above a threshold)",
                  "true positive rate (share of positives)", _pad(0.0, 1.0), _pad(0.0, 1.0), (chance, curve))
    return Chart("roc", title, (panel,), "The further the curve bends towards the upper left, the better the "
                 "score ranks; the area under it is the ROC area.")


def gains_chart(table: Any, title: str) -> Chart:
    """Cumulative gains of a :class:`lintools.GainsTable`: the share of positives captured
    against the share of case weight taken, highest scores first (in percent), with the
    lines of a random order and of a score that ranks every positive first."""
    x = 100.0 * np.r_[0.0, table.cumulative_share]
    yv = 100.0 * np.r_[0.0, table.captured]
    rate = float(table.overall_rate)
    random = Series("random order", "line", np.array([0.0, 100.0]), np.array([0.0, 100.0]), colour="grey",
                    dashed=True)
    best = Series("every positive first", "line", np.array([0.0, 100.0 * rate, 100.0]),
                  np.array([0.0, 100.0, 100.0]), colour="orange", dashed=True)
    gain = Series("the score, by band", "points", x, yv, colour="blue", joined=True)
    panel = Panel("rows taken, highest scores first (% of case weight)", "positives captured (% of all)",
                  _pad(0.0, 100.0), _pad(0.0, 100.0), (random, best, gain))
    return Chart("gains", title, (panel,), "Each point is the end of a score band.")


def _bars(values: list[np.ndarray], labels: list[str], colours: list[str], names: list[str],
          x_label: str, title: str, key: str, note: str, extra: tuple[Series, ...] = (),
          x_top: float | None = None) -> Chart:
    """Horizontal bars, one group per name (top to bottom), one bar per series in a group."""
    k = len(values)
    thick = 0.8 / k
    series = []
    for j, (v, label, colour) in enumerate(zip(values, labels, colours)):
        pos = np.arange(len(names)) - 0.4 + j * thick
        v = np.asarray(v, dtype=float)
        series.append(Series(label, "boxes", np.zeros(v.size), pos + 0.05 * thick, x2=v, y2=pos + 0.95 * thick,
                             colour=colour))
    top = max([float(np.max(v)) for v in values if np.size(v)] + [x_top or 0.0, 1e-12])
    panel = Panel(x_label, "", (0.0, 1.08 * top), (len(names) - 0.5, -0.5), (*series, *extra),
                  y_ticks=tuple((float(i), _short(n)) for i, n in enumerate(names)),
                  height=max(0.5, 0.12 * len(names) * max(1, k) / 1.5))
    return Chart(key, title, (panel,), note)


def stability_chart(results: dict[str, Any], title: str) -> Chart:
    """The population stability index of every compared column, with the reading bands of
    common practice (credit-model monitoring) as vertical lines."""
    names = list(results)
    index = np.array([float(results[n].index) for n in names])
    edge = len(names) - 0.5
    lines = tuple(Series("reading bands (common practice)" if i == 0 else "", "line", np.array([b, b]),
                         np.array([-0.5, edge]), colour="vermillion", dashed=True)
                  for i, b in enumerate(READING_BANDS))
    return _bars([index], ["population stability index"], ["blue"], names,
                 "population stability index (no unit)", title, "stability",
                 "Dashed lines: below the first stable, between them a moderate shift, beyond the second a major "
                 "shift (common practice, not a test).", lines, x_top=READING_BANDS[1])


def bin_words(record: Any) -> list[str]:
    """The bins of a :class:`lintools.PopulationStability` as short labels."""
    out = []
    for above, up_to in record.bin_labels():
        if record.binning == "category":
            out.append(above)
        elif above == "-":
            out.append(f"up to {up_to}")
        elif up_to == "-":
            out.append(f"above {above}")
        else:
            out.append(f"{above} to {up_to}")
    return out


def stability_bins_chart(record: Any, column: str, title: str) -> Chart:
    """Shares of a column's bins in the development and the recent sample (percent)."""
    return _bars([100.0 * np.asarray(record.expected_share), 100.0 * np.asarray(record.actual_share)],
                 ["development sample", "recent sample"], ["blue", "orange"], bin_words(record),
                 "share of case weight in the bin (%)", title, f"stability bins of {column}",
                 f"Bins of '{column}' from the development sample; a shift shows as bars of unequal length.")


def coefficient_chart(comparison: Any, title: str, level: float = 0.95, *, bars: tuple[Any, Any, Any] | None = None,
                      interval_words: str | None = None) -> Chart:
    """Delivered against refit coefficients, each in the refit's standard errors: the
    refit at 0 with its interval, the delivered coefficient at (delivered - refit) /
    refit standard error.  The interval is the Wald interval at ``level`` on the normal
    scale, or ``bars`` (the refit's lower and upper bounds and standard errors, e.g. a
    Student-t interval for least squares) put on the same scale.  Terms whose difference is not defined (a standard
    error of 0) are left out of the figure, not out of the table."""
    from ..support import distributions as dist

    z = float(dist.normal_quantile(0.5 + level / 2))
    d = np.asarray(comparison.difference_in_se, dtype=float)
    ok = np.isfinite(d)
    names = [term_words(t) for t, good in zip(comparison.terms, ok) if good]
    pos = np.arange(len(names), dtype=float)
    low, high = np.full(pos.size, -z), np.full(pos.size, z)
    if bars is not None:
        with np.errstate(divide="ignore", invalid="ignore"):
            se = np.asarray(bars[2], dtype=float)
            refit = np.asarray(comparison.refit, dtype=float)
            low = ((np.asarray(bars[0], dtype=float) - refit) / se)[ok]
            high = ((np.asarray(bars[1], dtype=float) - refit) / se)[ok]
    words = interval_words or f"{100 * level:g}% Wald interval"
    refit_s = Series(f"refit, {words}", "points", np.zeros(pos.size), pos, low=np.minimum(low, 0.0),
                     high=np.maximum(high, 0.0), along="x", colour="blue")
    delivered = Series("delivered", "points", d[ok], pos, colour="vermillion", marker="diamond")
    reach = max(float(np.max(np.abs(d[ok]))) if ok.any() else 0.0, float(np.max(np.abs(np.r_[low, high, z])))) * 1.1
    panel = Panel("delivered minus refit (refit standard errors)", "", (-reach, reach),
                  (len(names) - 0.5, -0.5), (refit_s, delivered),
                  y_ticks=tuple((float(i), _short(n)) for i, n in enumerate(names)),
                  height=max(0.45, 0.1 * len(names)))
    return Chart("coefficients", title, (panel,),
                 "A delivered coefficient outside the bar differs from the refit beyond its sampling noise.")
