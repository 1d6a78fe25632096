"""Inline SVG of a :class:`lintools.document.charts.Chart`, drawn with NumPy and text only.

The figure is sized in its own units (:data:`WIDTH` wide, a view box that scales with the
page), with text at :data:`FONT` units so that it stays readable when printed at the
width of an A4 text column.  Margins are measured from the longest tick and category
labels (at :data:`CHAR` units per character, a generous width for sans-serif), so no
label is cut; every coordinate is kept inside its panel.  The output is well-formed XML
(it parses on its own), carries no script, no link and no reference to another
resource, and needs no namespace declaration inside an HTML page.
"""

from __future__ import annotations

import math
from typing import Any

import numpy as np

from .charts import PALETTE, Chart, Panel, Series

__all__ = ["WIDTH", "chart_svg", "nice_ticks", "tick_text", "xml_text"]

WIDTH = 680
FONT = 13
CHAR = 0.62 * FONT
PANEL = 290.0
TITLE = 30.0
LEGEND_LINE = 20.0


def xml_text(text: str) -> str:
    """Text escaped for XML character data and attribute values."""
    return (str(text).replace("&", "&amp;").replace("<", "&lt;").replace(">", "&gt;").replace('"', "&quot;"))


def tick_text(value: float) -> str:
    """A tick label: round numbers without float noise (0.6000000000000001 is 0.6)."""
    value = round(float(value), 10)
    if value == 0:
        return "0"
    if abs(value) >= 1 and value == int(value) and abs(value) < 1e9:
        return str(int(value))
    return f"{value:g}"


def nice_ticks(lo: float, hi: float, log: bool = False, count: int = 6) -> list[float]:
    """Round tick positions inside [lo, hi]: steps of 1, 2 or 5 times a power of ten, or
    the powers of ten on a log axis."""
    a, b = min(lo, hi), max(lo, hi)
    if log:
        return [10.0**k for k in range(math.ceil(math.log10(a)), math.floor(math.log10(b)) + 1)]
    raw = (b - a) / count
    if not raw > 0:
        return [a]
    mag = 10.0 ** math.floor(math.log10(raw))
    step = next(m * mag for m in (1, 2, 5, 10) if m * mag >= raw * (1 - 1e-9))
    first = math.ceil(a / step - 1e-9) * step
    return [first + i * step for i in range(int((b - first) / step + 1e-9) + 1)]


class _Axes:
    """Data to pixel coordinates of one panel."""

    def __init__(self, panel: Panel, left: float, top: float, width: float, height: float) -> None:
        self.p, self.left, self.top, self.width, self.height = panel, left, top, width, height

    def _fy(self, v: np.ndarray) -> np.ndarray:
        return np.log10(np.maximum(v, 1e-300)) if self.p.y_log else v

    def x(self, v: Any) -> np.ndarray:
        lo, hi = self.p.x_range
        out = self.left + (np.asarray(v, dtype=float) - lo) / (hi - lo) * self.width
        return np.clip(out, self.left, self.left + self.width)

    def y(self, v: Any) -> np.ndarray:
        lo, hi = self.p.y_range
        lo, hi = (math.log10(lo), math.log10(hi)) if self.p.y_log else (lo, hi)
        out = self.top + (1.0 - (self._fy(np.asarray(v, dtype=float)) - lo) / (hi - lo)) * self.height
        return np.clip(out, self.top, self.top + self.height)


def _n(v: float) -> str:
    return f"{float(v):.1f}"


def _marker(shape: str, x: float, y: float, colour: str, size: float = 4.5) -> str:
    if shape == "diamond":
        s = size * 1.3
        pts = f"{_n(x)},{_n(y - s)} {_n(x + s)},{_n(y)} {_n(x)},{_n(y + s)} {_n(x - s)},{_n(y)}"
        return f'<polygon points="{pts}" fill="{colour}" stroke="white" stroke-width="0.8"/>'
    if shape == "square":
        return (f'<rect x="{_n(x - size)}" y="{_n(y - size)}" width="{_n(2 * size)}" height="{_n(2 * size)}" '
                f'fill="{colour}" stroke="white" stroke-width="0.8"/>')
    return f'<circle cx="{_n(x)}" cy="{_n(y)}" r="{_n(size)}" fill="{colour}" stroke="white" stroke-width="0.8"/>'


def _series(s: Series, ax: _Axes) -> list[str]:
    colour = PALETTE[s.colour]
    dash = ' stroke-dasharray="6 4"' if s.dashed else ""
    out = []
    if s.kind == "boxes":
        x0, x1, y0, y1 = ax.x(s.x), ax.x(s.x2), ax.y(s.y), ax.y(s.y2)
        for a, b, c, d in zip(x0, x1, y0, y1):
            if abs(b - a) < 0.05 or abs(d - c) < 0.05:
                continue  # nothing to draw (an empty bar)
            out.append(f'<rect x="{_n(min(a, b))}" y="{_n(min(c, d))}" width="{_n(abs(b - a))}" '
                       f'height="{_n(abs(d - c))}" fill="{colour}"/>')
        return out
    px, py = ax.x(s.x), ax.y(s.y)
    if s.kind == "line" or s.joined:
        pts = " ".join(f"{_n(a)},{_n(b)}" for a, b in zip(px, py))
        width = "2.2" if s.kind == "line" else "1.2"
        out.append(f'<polyline points="{pts}" fill="none" stroke="{colour}" stroke-width="{width}"{dash}/>')
    if s.kind != "points":
        return out
    if s.low is not None:
        cap = 4.0
        if s.along == "x":
            lo, hi = ax.x(s.low), ax.x(s.high)
            for a, b, yy in zip(lo, hi, py):
                out.append(f'<path d="M{_n(a)},{_n(yy)}H{_n(b)}M{_n(a)},{_n(yy - cap)}V{_n(yy + cap)}'
                           f'M{_n(b)},{_n(yy - cap)}V{_n(yy + cap)}" stroke="{colour}" stroke-width="1.6" fill="none"/>')
        else:
            lo, hi = ax.y(s.low), ax.y(s.high)
            for xx, a, b in zip(px, lo, hi):
                out.append(f'<path d="M{_n(xx)},{_n(a)}V{_n(b)}M{_n(xx - cap)},{_n(a)}H{_n(xx + cap)}'
                           f'M{_n(xx - cap)},{_n(b)}H{_n(xx + cap)}" stroke="{colour}" stroke-width="1.6" fill="none"/>')
    out += [_marker(s.marker, a, b, colour) for a, b in zip(px, py)]
    return out


def _ticks(panel: Panel, axis: str) -> list[tuple[float, str]]:
    given = panel.x_ticks if axis == "x" else panel.y_ticks
    if given is not None:
        return [(float(v), str(t)) for v, t in given]
    lo, hi = panel.x_range if axis == "x" else panel.y_range
    log = panel.y_log and axis == "y"
    return [(v, tick_text(v)) for v in nice_ticks(lo, hi, log)]


def _legend_swatch(s: Series, x: float, y: float) -> str:
    colour = PALETTE[s.colour]
    if s.kind == "boxes":
        return f'<rect x="{_n(x)}" y="{_n(y - 6)}" width="22" height="12" fill="{colour}"/>'
    line = ""
    if s.kind == "line" or s.joined or s.low is not None:
        dash = ' stroke-dasharray="6 4"' if s.dashed else ""
        line = (f'<line x1="{_n(x)}" y1="{_n(y)}" x2="{_n(x + 22)}" y2="{_n(y)}" stroke="{colour}" '
                f'stroke-width="2"{dash}/>')
    return line + (_marker(s.marker, x + 11, y, colour) if s.kind == "points" else "")


def chart_svg(chart: Chart) -> str:
    """The chart as one ``<svg>`` element (text)."""
    ticks = [(_ticks(p, "x"), _ticks(p, "y")) for p in chart.panels]
    widest = max((len(t) for _, ys in ticks for _, t in ys), default=1)
    named_y = any(p.y_label for p in chart.panels)
    left = 14 + widest * CHAR + (FONT + 14 if named_y else 0)
    right = 14 + CHAR * max((len(xs[-1][1]) for xs, _ in ticks if xs), default=1) / 2
    width = WIDTH - left - right
    body, top = [], TITLE + 6
    for panel, (xs, ys) in zip(chart.panels, ticks):
        height = PANEL * panel.height
        ax = _Axes(panel, left, top, width, height)
        for v, _ in ys:
            yy = float(ax.y(v))
            body.append(f'<line x1="{_n(left)}" y1="{_n(yy)}" x2="{_n(left + width)}" y2="{_n(yy)}" stroke="#e3e3e3"/>')
        for v, _ in xs:
            xx = float(ax.x(v))
            body.append(f'<line x1="{_n(xx)}" y1="{_n(top)}" x2="{_n(xx)}" y2="{_n(top + height)}" stroke="#e3e3e3"/>')
        for s in panel.series:
            body += _series(s, ax)
        body.append(f'<rect x="{_n(left)}" y="{_n(top)}" width="{_n(width)}" height="{_n(height)}" fill="none" '
                    'stroke="#444"/>')
        for v, t in ys:
            body.append(f'<text x="{_n(left - 6)}" y="{_n(float(ax.y(v)) + FONT * 0.35)}" text-anchor="end">'
                        f'{xml_text(t)}</text>')
        if panel.y_label:
            mid = top + height / 2
            body.append(f'<text transform="translate({_n(4 + FONT)},{_n(mid)}) rotate(-90)" text-anchor="middle">'
                        f'{xml_text(panel.y_label)}</text>')
        top += height
        if panel.x_label:
            for v, t in xs:
                body.append(f'<text x="{_n(float(ax.x(v)))}" y="{_n(top + FONT + 4)}" text-anchor="middle">'
                            f'{xml_text(t)}</text>')
            body.append(f'<text x="{_n(left + width / 2)}" y="{_n(top + 2 * FONT + 12)}" text-anchor="middle">'
                        f'{xml_text(panel.x_label)}</text>')
            top += 2 * FONT + 20
        else:
            top += 10
    entries = [s for p in chart.panels for s in p.series if s.label]
    top += 6
    for s in entries:
        body.append(_legend_swatch(s, left, top + LEGEND_LINE / 2))
        body.append(f'<text x="{_n(left + 30)}" y="{_n(top + LEGEND_LINE / 2 + FONT * 0.35)}">{xml_text(s.label)}</text>')
        top += LEGEND_LINE
    total = top + 8
    most = int((WIDTH - 20) / (CHAR * (FONT + 2) / FONT))
    shown = chart.title if len(chart.title) <= most else chart.title[: most - 1] + "\u2026"
    head = (f'<svg viewBox="0 0 {WIDTH} {_n(total)}" width="{WIDTH}" height="{_n(total)}" role="img" '
            f'font-family="DejaVu Sans, Helvetica, Arial, sans-serif" font-size="{FONT}" fill="#1a1a1a">'
            f'<title>{xml_text(chart.title)}</title>'
            f'<text x="{WIDTH / 2:.1f}" y="{TITLE - 8:.1f}" text-anchor="middle" font-size="{FONT + 2}" '
            f'font-weight="bold">{xml_text(shown)}</text>')
    return head + "".join(body) + "</svg>"
