r"""The place of the last digit written in each number cell of a CSV file.

A number cell written with ``f`` digits after its decimal mark and an exponent ``E``
(zero without one) has its last written digit at the power of ten

.. math::

    q = E - f ,

so the cell states its value to within half a unit of that digit, an absolute rounding
error of at most :math:`\tfrac12 10^{q}`.  Examples: ``12.5`` -> ``q = -1``; ``12.50`` ->
``-2`` (a trailing zero after the decimal mark is a written digit); ``1200`` and ``1200.``
-> ``0`` (the digits of an integer are taken as written: its trailing zeros count as
known); ``1.5e3`` -> ``2``; ``15e-1`` -> ``-1``; ``.5`` -> ``-1``.  The *decimal places*
of a cell are ``-q`` (negative when the last digit stands left of the units).  Powers
beyond :data:`LIMIT` are held at it (such a number is 0 or beyond the range of a double).

Two ways, giving the same ``q`` (the tests check both against the exponent of Python's
:class:`decimal.Decimal` of the cell): :func:`token_places` for stripped tokens and
:func:`chunk_places` straight on the bytes of a chunk whose every line has the header's
number of fields, with vectorised index arithmetic on the positions of its decimal
marks, exponent marks, separators and white space (the bytes after a decimal mark up to
the next of those are its digits).
"""

from __future__ import annotations

import numpy as np

__all__ = ["LIMIT", "NONE", "chunk_places", "token_places"]

#: Largest power of ten of a last digit held (larger ones are held at +-LIMIT).
LIMIT = 9999
#: The place of a cell that holds no number.
NONE = np.iinfo(np.int32).min
_SHORT = 6  # exponents of up to this many digits are read with array arithmetic


def token_places(tokens: list[bytes], decimal: bytes) -> np.ndarray:
    """``q`` (see the module) of each stripped number token, as int32."""
    out = np.empty(len(tokens), dtype=np.int32)
    for i, tok in enumerate(tokens):
        mant, _, exp = tok.replace(b"E", b"e").partition(b"e")
        at = mant.find(decimal)
        q = (int(exp) if exp else 0) - (len(mant) - at - 1 if at >= 0 else 0)
        out[i] = min(max(q, -LIMIT), LIMIT)
    return out


def chunk_places(a: np.ndarray, delimiter: int, decimal: int, n: int, k: int, numbers_only: bool) -> np.ndarray:
    """``q`` of every cell of a chunk (``a``: its bytes, ending with a line end; ``n`` lines of
    ``k`` fields each), shape ``(n, k)``.  Only cells that are numbers by the rules of
    :mod:`lintools.support.csv_cells` get a meaningful value; the caller ignores the others.
    ``numbers_only``: every cell is a number (at most one decimal mark in a cell)."""
    q = np.zeros(n * k, dtype=np.int32)
    dots = a == decimal
    exps = (a == 101) | (a == 69)  # 'e' or 'E'
    some_exp = bool(exps.any())
    if not some_exp and not dots.any():
        return q.reshape(n, k)
    plain = numbers_only and not some_exp and np.count_nonzero(a < 33) == n  # no white space but line ends
    if plain:
        at = np.flatnonzero(dots | (a == delimiter) | (a == 10))
        t = np.flatnonzero(a[at] == decimal)
        cell = t - np.arange(t.size)  # the boundaries before the t-th mark: every other mark is a decimal mark
    else:
        at = np.flatnonzero(dots | exps | (a == delimiter) | (a < 33))  # ... and line ends and white space
        b = a[at]
        cells = np.cumsum((b == delimiter) | (b == 10), dtype=np.int32)  # the cell of a mark: boundaries before it
        t = np.flatnonzero(b == decimal)
        cell = cells[t]
    q[cell] = (at[t] + 1 - at[t + 1]).astype(np.int32)  # minus the digits after the mark, up to the next mark
    if some_exp:
        t = np.flatnonzero((b == 101) | (b == 69))
        q[cells[t]] += _exponents(a, at, t)
        np.clip(q, -LIMIT, LIMIT, out=q)
    return q.reshape(n, k)


def _exponents(a: np.ndarray, at: np.ndarray, t: np.ndarray) -> np.ndarray:
    """The exponent written after each exponent mark ``at[t]`` (up to the next mark of ``at``)."""
    start = at[t] + 1
    sign = a[start]
    signed = (sign == 43) | (sign == 45)
    start = start + signed
    length = at[t + 1] - start
    value = np.zeros(t.size, dtype=np.int64)
    for j in range(min(int(length.max(initial=0)), _SHORT)):
        live = length > j
        value[live] = value[live] * 10 + (a[start[live] + j].astype(np.int64) - 48)
    for i in np.flatnonzero(length > _SHORT).tolist():  # long exponents (leading zeros, or beyond a double)
        digits = bytes(a[start[i]:start[i] + length[i]])
        value[i] = min(int(digits), LIMIT) if digits.isdigit() else 0
    value = np.where(sign == 45, -value, value)
    return np.clip(value, -LIMIT, LIMIT).astype(np.int32)
