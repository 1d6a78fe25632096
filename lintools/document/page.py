"""Pieces of the self-contained HTML page: escaping, numbers tied to the JSON twin, tables,
and the stylesheet (screen and print).

Every number the page shows is taken from the document's JSON twin (a plain dictionary)
by a JSON Pointer (RFC 6901) and printed inside an element that carries the pointer in
its ``data-k`` attribute, so a reader (or a test) can find each printed figure's full
value in the twin.  The page is XHTML-compatible: every element is closed, void
elements end in ``/>``, and the only character references are ``&amp; &lt; &gt; &quot;``.
"""

from __future__ import annotations

import math
from typing import Any, Sequence

from .svg import xml_text

__all__ = ["STYLE", "Page", "escape", "lookup", "pointer"]

escape = xml_text

STYLE = """
:root { --ink: #1a1a1a; --rule: #c8c8c8; --faint: #f3f3f3; --blue: #0072B2; --red: #D55E00; --green: #009E73; }
* { box-sizing: border-box; }
body { font-family: "DejaVu Sans", Helvetica, Arial, sans-serif; color: var(--ink); margin: 0 auto;
       max-width: 60rem; padding: 1.5rem 2rem 3rem; line-height: 1.45; font-size: 15px; }
h1 { font-size: 1.6rem; margin: 0 0 .3rem; }
h2 { font-size: 1.25rem; border-bottom: 2px solid var(--ink); padding-bottom: .2rem; margin-top: 2.4rem; }
h3 { font-size: 1.05rem; margin: 1.4rem 0 .4rem; }
p.lead { margin-top: 0; color: #444; }
table { border-collapse: collapse; margin: .5rem 0 1rem; font-size: .88rem; }
caption { text-align: left; font-weight: bold; padding: .3rem 0; }
th, td { border-bottom: 1px solid var(--rule); padding: .22rem .55rem; vertical-align: top; }
th { text-align: left; background: var(--faint); font-weight: 600; }
table.wide { font-size: .76rem; }
table.wide th, table.wide td { padding: .2rem .32rem; }
td.n { text-align: right; font-variant-numeric: tabular-nums; white-space: nowrap; }
td.t { overflow-wrap: break-word; }
td.hash { font-family: "DejaVu Sans Mono", Menlo, Consolas, monospace; font-size: .78rem; overflow-wrap: anywhere; }
figure { margin: 1rem 0 1.5rem; }
figure svg { max-width: 100%; height: auto; }
figcaption { font-size: .85rem; color: #444; max-width: 42rem; }
.verdict { border: 2px solid var(--ink); padding: .6rem 1rem; margin: 1rem 0; }
.verdict h2 { margin-top: .2rem; }
.verdict li { margin: .15rem 0; }
.bad { color: var(--red); font-weight: bold; }
.good { color: var(--green); font-weight: bold; }
.caution { border-left: 4px solid var(--red); padding: .4rem .9rem; background: #fbf3ee; }
.small { font-size: .85rem; color: #444; }
nav ol { columns: 2; font-size: .9rem; }
@media print {
  @page { size: A4; margin: 14mm 12mm; }
  body { max-width: none; padding: 0; font-size: 10pt; }
  nav { display: none; }
  h2 { break-before: auto; break-after: avoid; }
  h3 { break-after: avoid; }
  figure, table, .verdict, .caution { break-inside: avoid; }
  figure svg { max-height: 24cm; }
  a { color: inherit; text-decoration: none; }
}
"""


def pointer(*keys: Any) -> str:
    """The JSON Pointer (RFC 6901) of ``keys``: ``~`` as ``~0``, ``/`` as ``~1``."""
    return "".join("/" + str(k).replace("~", "~0").replace("/", "~1") for k in keys)


def lookup(doc: Any, path: str) -> Any:
    """The value at a JSON Pointer (RFC 6901) in a plain JSON document."""
    value = doc
    for part in path.split("/")[1:]:
        key = part.replace("~1", "/").replace("~0", "~")
        value = value[int(key)] if isinstance(value, list) else value[key]
    return value


def number_text(value: Any, spec: str, missing: str = "not defined") -> str:
    """A number as the page prints it: ``spec`` is a format spec (``".4f"``; ``""`` the
    shortest text that reads back as the same number), ``"int"``, or ``"p"`` (a p-value
    to 3 significant digits; an exact 0 says why it is 0).  A rounded number that rounds
    to zero prints without a sign (``-1e-15`` at ``".2f"`` is ``0.00``): the sign of a
    difference below the printed precision carries no information.  Text is printed as it is."""
    if value is None or (isinstance(value, float) and not math.isfinite(value)):
        return missing
    if isinstance(value, bool):
        return "yes" if value else "no"
    if isinstance(value, str):
        return value
    if spec == "int":
        return str(int(value))
    if spec == "p":
        if value == 0:
            return "0 (below the smallest double)"
        return f"{value:.3g}"
    if "." in spec and isinstance(value, float):
        spec = "z" + spec  # a value that rounds to zero prints 0.00, not -0.00 (PEP 682)
    return format(value, spec)


class Page:
    """Builds page text from a JSON twin ``doc``: numbers by pointer, tables, paragraphs."""

    def __init__(self, doc: dict) -> None:
        self.doc = doc

    def get(self, *keys: Any) -> Any:
        return lookup(self.doc, pointer(*keys))

    def num(self, keys: Sequence[Any], spec: str = ".6g") -> str:
        """An inline number tied to its place in the twin."""
        return f'<span data-k="{escape(pointer(*keys))}">{escape(number_text(self.get(*keys), spec))}</span>'

    def cell(self, keys: Sequence[Any], spec: str = ".6g", missing: str = "not defined", cls: str = "") -> str:
        """A table cell holding a value of the twin (numbers and undefined figures to the
        right, text to the left, unless ``cls`` says)."""
        value = self.get(*keys)
        cls = cls or ("t" if isinstance(value, (bool, str)) else "n")
        return f'<td class="{cls}" data-k="{escape(pointer(*keys))}">{escape(number_text(value, spec, missing))}</td>'

    @staticmethod
    def word(text: Any, cls: str = "t") -> str:
        """A table cell of text (escaped; no number of the twin)."""
        return f'<td class="{cls}">{escape(text)}</td>'

    @staticmethod
    def table(head: Sequence[str], rows: Sequence[Sequence[str]], caption: str = "") -> str:
        """A table; ``rows`` hold cells made by :meth:`cell` or :meth:`word`.  A table of
        more than eight columns is set smaller (class ``wide``) so that it fits the page."""
        out = ['<table class="wide">' if len(head) > 8 else "<table>"]
        if caption:
            out.append(f"<caption>{escape(caption)}</caption>")
        out.append("<thead><tr>" + "".join(f"<th>{escape(h)}</th>" for h in head) + "</tr></thead><tbody>")
        out += ["<tr>" + "".join(r) + "</tr>" for r in rows]
        out.append("</tbody></table>")
        return "\n".join(out)

    def pairs(self, items: Sequence[tuple[str, Sequence[Any], str]], caption: str = "") -> str:
        """A two-column table of (label, pointer keys, spec) rows."""
        rows = [[f"<th>{escape(label)}</th>", self.cell(keys, spec)] for label, keys, spec in items]
        out = ["<table>"] + ([f"<caption>{escape(caption)}</caption>"] if caption else [])
        out += ["<tbody>"] + ["<tr>" + "".join(r) + "</tr>" for r in rows] + ["</tbody></table>"]
        return "\n".join(out)
