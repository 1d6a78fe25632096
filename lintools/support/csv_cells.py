"""What one CSV cell is: a number, a missing value, a refused near-number, or text.

The rules (the public statement is in :mod:`lintools.exchange.csv_table`):

* A **number** is, after removing white space around it, an optional sign, ASCII digits
  with at most one decimal mark (digits on at least one side of it), and an optional
  exponent ``e`` or ``E`` with an optional sign and ASCII digits.  The decimal mark is
  ``.`` unless the caller chooses ``,``.  Its value is the correctly rounded double
  (Python's own conversion); a number too large for a double is refused, not read as
  infinite.
* A **missing value** is an empty cell or one of the caller's missing-value tokens,
  compared exactly (case matters) after removing white space.
* A **refused near-number** is a cell that a looser reader would take for a number:
  one that Python's ``float()`` accepts but the grammar does not (``1_000``, ``inf``,
  ``nan``, non-ASCII digits), a number with the other decimal mark (``2,5``), with
  thousands separators (``1,200``, ``1 000``, ``1'000``) or with a percent sign
  (``12%``).  It is refused with the reason, wherever it stands, unless the column is
  declared categorical or the token declared missing.
* Everything else is **text**.

White space around a cell is ASCII space, tab, vertical tab, form feed, the separators
``\\x1c``-``\\x1f`` and the carriage return of a CRLF line end.
"""

from __future__ import annotations

import math
import re
from typing import Iterable

import numpy as np

__all__ = ["NUM", "MISS", "BAD", "TEXT", "STRIP", "Cells", "classify", "number_reason", "is_number",
           "date_like"]

NUM, MISS, BAD, TEXT = 0, 1, 2, 3

#: Bytes removed around every cell.
STRIP = b" \t\x0b\x0c\x1c\x1d\x1e\x1f\r"

_DIGITS = rb"(?:[0-9]+(?:{m}[0-9]*)?|{m}[0-9]+)"
_EXP = rb"(?:[eE][+-]?[0-9]+)?"
_NUMBER = {m: re.compile(rb"[+-]?" + _DIGITS.replace(b"{m}", re.escape(m)) + _EXP) for m in (b".", b",")}
_THOUSANDS = re.compile(rb"[+-]?[0-9]{1,3}([,. '])[0-9]{3}(?:\1[0-9]{3})*(?:[.,][0-9]+)?")
_PERCENT = re.compile(rb"[+-]?(?:[0-9]+(?:[.,][0-9]*)?|[.,][0-9]+)\s*%")
_DATES = [re.compile(p) for p in (
    rb"[0-9]{4}-[0-9]{2}-[0-9]{2}(?:[T ][0-9]{2}:[0-9]{2}(?::[0-9]{2}(?:\.[0-9]+)?)?(?:Z|[+-][0-9]{2}:?[0-9]{2})?)?",
    rb"[0-9]{4}/[0-9]{1,2}/[0-9]{1,2}",
    rb"[0-9]{1,2}[/.][0-9]{1,2}[/.][0-9]{2,4}",
    rb"[0-9]{1,2}:[0-9]{2}(?::[0-9]{2}(?:\.[0-9]+)?)?",
)]


def is_number(token: bytes, decimal: bytes = b".") -> bool:
    """Whether ``token`` (already stripped) is a number in the strict grammar."""
    return _NUMBER[decimal].fullmatch(token) is not None


def _value(token: bytes, decimal: bytes) -> float:
    return float(token if decimal == b"." else token.replace(b",", b"."))


def number_reason(token: bytes, decimal: bytes = b".") -> str | None:
    """Why ``token`` (stripped, not a strict number) is refused as a near-number, as a clause
    ("is not finite: ..." or "is not read as a number: ..."), or None when it is text."""
    other = b"," if decimal == b"." else b"."
    try:
        text = token.decode("utf-8")
        float(text)
        python_number = True
    except (UnicodeDecodeError, ValueError):
        python_number = False
    if python_number:
        if "_" in text:
            return "is not read as a number: digit separators '_' are not read"
        if not text.isascii():
            return "is not read as a number: only the ASCII digits 0-9 are read (and ASCII signs and spaces)"
        return "is not finite: only finite numbers are read"
    if _NUMBER[other].fullmatch(token):
        if decimal == b".":
            return ("is not read as a number: its decimal mark is ','; if the file writes numbers with a "
                    "decimal comma, pass decimal=',' (--decimal ,), and if ',' separates thousands, write "
                    "the number without it")
        return ("is not read as a number: its decimal mark is '.', but decimal=',' was asked for; if '.' "
                "separates thousands, write the number without it")
    if _THOUSANDS.fullmatch(token):
        return "is not read as a number: thousands separators are not read; write the number without them"
    if _PERCENT.fullmatch(token):
        return "is not read as a number: percent signs are not read; write the number without '%'"
    return None


class Cells:
    """The kinds and values of a set of distinct tokens (see :func:`classify`)."""

    __slots__ = ("kinds", "values", "reasons")

    def __init__(self, kinds: np.ndarray, values: np.ndarray, reasons: dict[int, str]) -> None:
        self.kinds = kinds
        self.values = values
        self.reasons = reasons


def classify(tokens: Iterable[bytes], decimal: bytes, missing: frozenset[bytes], text_only: bool) -> Cells:
    """Kind (NUM, MISS, BAD, TEXT) and value of each distinct, stripped token.

    ``text_only`` (a declared categorical or an extra column): every present token is TEXT.
    ``reasons`` maps the index of every BAD token to why it is refused.
    """
    tokens = list(tokens)
    kinds = np.full(len(tokens), TEXT, dtype=np.int8)
    values = np.full(len(tokens), np.nan)
    reasons: dict[int, str] = {}
    grammar = _NUMBER[decimal]
    for i, tok in enumerate(tokens):
        if not tok or tok in missing:
            kinds[i] = MISS
        elif text_only:
            continue
        elif grammar.fullmatch(tok):
            v = _value(tok, decimal)
            if math.isfinite(v):
                kinds[i] = NUM
                values[i] = v
            else:
                kinds[i] = BAD
                reasons[i] = "is not finite: it is beyond the range of a double (1.8e308)"
        else:
            why = number_reason(tok, decimal)
            if why is not None:
                kinds[i] = BAD
                reasons[i] = why
    return Cells(kinds, values, reasons)


def date_like(levels: Iterable[bytes]) -> bool:
    """Whether every level is an ISO date or date-time, a d/m/y or m/d/y date, or a clock time."""
    seen = False
    for lv in levels:
        seen = True
        if not any(p.fullmatch(lv) for p in _DATES):
            return False
    return seen
