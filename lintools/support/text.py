"""The face of every text report: p-values, the intercept's printed name, titled sections.

Every ``report()`` of a lintools record is laid out with these helpers, so that all of them
read alike: a title line underlined with ``=``, then sections (``Data``, ``Estimation``,
``Fit``, ``Tests``, ``Coefficients``) whose figures stand one per line, labelled in full
words, and a closing ``Convergence`` line.  A p-value is printed by :func:`p_text` alone.
"""

from __future__ import annotations

import math
from typing import Iterable, Sequence

__all__ = ["P_FLOOR", "UNDEFINED", "INTERCEPT_LABEL", "p_text", "intercept_label", "title", "section"]

#: smallest p-value printed as a number; a smaller one reads "below 1e-300"
P_FLOOR = 1e-300

#: what a report prints where a figure is not defined
UNDEFINED = "-"

#: the intercept's printed name in report tables (model files keep their own stored name)
INTERCEPT_LABEL = "intercept"


def p_text(value: float) -> str:
    """A p-value as report text.

    ``-`` where it is not defined (NaN), ``below 1e-300`` under :data:`P_FLOOR` (the
    digits of so small a tail probability say nothing), three significant digits in
    exponent form below 1e-4 (``5.80e-05``), else four decimals (``0.0038``).
    """
    value = float(value)
    if math.isnan(value):
        return UNDEFINED
    if value < P_FLOOR:
        return f"below {P_FLOOR:g}"
    if value < 1e-4:
        return f"{value:.2e}"
    return f"{value:.4f}"


def intercept_label(names: Iterable[str]) -> str:
    """The intercept's printed name among the columns ``names``: ``intercept``, or, when a
    column is itself called so, ``intercept term`` (then ``intercept term 2``, ...): the
    first of these that no column carries."""
    taken = set(names)
    label, k = INTERCEPT_LABEL, 1
    while label in taken:
        label = f"{INTERCEPT_LABEL} term" + (f" {k}" if k > 1 else "")
        k += 1
    return label


def title(text: str) -> list[str]:
    """A report's title line, underlined with ``=``."""
    return [text, "=" * len(text)]


def section(heading: str, rows: Sequence[tuple[str, str]]) -> list[str]:
    """A titled section: a blank line, the heading, then one ``label  value`` per row, the
    values aligned two columns after the longest label."""
    width = max((len(label) for label, _ in rows), default=0) + 2
    return ["", heading] + [f"  {label.ljust(width)}{value}" for label, value in rows]
