"""A :class:`lintools.document.charts.Chart` as a PNG image, drawn by matplotlib.

The second renderer of the same chart data as :mod:`lintools.document.svg` (for
``lintools calibration --plot``): matplotlib is imported here only, and its absence is an
:class:`InputError` naming the ``plot`` extra.
"""

from __future__ import annotations

import io

import numpy as np

from .charts import PALETTE, Chart
from ..support.errors import InputError

__all__ = ["PLOT_EXTRA", "chart_png"]

PLOT_EXTRA = ('the plot extra: python -m pip install -e ".[plot]" in a checkout of lintools, '
              'or python -m pip install "matplotlib>=3.7"')

_MARKERS = {"circle": "o", "diamond": "D", "square": "s"}


def chart_png(chart: Chart, dpi: int = 110) -> bytes:
    """The chart as PNG bytes (9 inches wide: about 1000 pixels at the default ``dpi``)."""
    try:
        from matplotlib.backends.backend_agg import FigureCanvasAgg
        from matplotlib.figure import Figure
    except ImportError:
        raise InputError(f"a PNG figure needs matplotlib, which is not installed: {PLOT_EXTRA}") from None
    heights = [p.height for p in chart.panels]
    fig = Figure(figsize=(9.0, 1.2 + 5.0 * sum(heights)))
    FigureCanvasAgg(fig)
    axes = fig.subplots(len(heights), 1, squeeze=False, gridspec_kw={"height_ratios": heights})[:, 0]
    for ax, panel in zip(axes, chart.panels):
        for s in panel.series:
            colour = PALETTE[s.colour]
            style = "--" if s.dashed else "-"
            label = s.label or None
            if s.kind == "boxes":
                for a, b, c, d in zip(s.x, s.x2, s.y, s.y2):
                    if b != a and d != c:
                        ax.fill_between([min(a, b), max(a, b)], min(c, d), max(c, d), color=colour, linewidth=0,
                                        label=label)
                        label = None
            elif s.kind == "line":
                ax.plot(s.x, s.y, style, color=colour, linewidth=2, label=label)
            else:
                err = None
                if s.low is not None:  # the intervals hold the points (the series functions make sure)
                    err = np.maximum(np.vstack([s.y - s.low, s.high - s.y]) if s.along == "y"
                                     else np.vstack([s.x - s.low, s.high - s.x]), 0.0)
                ax.errorbar(s.x, s.y, yerr=err if s.along == "y" else None, xerr=err if s.along == "x" else None,
                            fmt=_MARKERS[s.marker] + ("-" if s.joined else ""), color=colour, capsize=3,
                            linewidth=1.2, markersize=6, label=label)
        if panel.y_log:
            ax.set_yscale("log")
        ax.set_xlim(*panel.x_range)
        ax.set_ylim(*panel.y_range)
        for ticks, setter in ((panel.x_ticks, ax.set_xticks), (panel.y_ticks, ax.set_yticks)):
            if ticks is not None:
                setter([v for v, _ in ticks], [t for _, t in ticks])
        ax.set_xlabel(panel.x_label)
        ax.set_ylabel(panel.y_label)
        ax.grid(color="#e3e3e3")
        ax.set_axisbelow(True)
        if any(s.label for s in panel.series):
            ax.legend(loc="best", fontsize="small")
    axes[0].set_title(chart.title)
    fig.tight_layout()
    out = io.BytesIO()
    fig.savefig(out, format="png", dpi=dpi)
    return out.getvalue()
