"""Columns of short whole numbers read straight from a chunk's bytes, without a text parser.

A CSV column of codes, counts or 0/1 labels holds cells of one to a few bytes; NumPy's
compiled text reader spends most of its time per cell, not per byte, on them (measured in
``benchmarks/read_table.py``: one-digit cells read at about 50 MB/s).  Here the cells of
such a column are read with a few vectorised operations over the whole chunk: every cell
whose bytes are an optional sign (``+`` or ``-``) followed by one to :data:`WIDTH` ASCII
digits in all is a number of the strict grammar of :mod:`lintools.support.csv_cells`
(digits, no decimal mark, no exponent), and its value, a whole number below ``10**WIDTH``,
is exact in float64, so it is the correctly rounded value that Python's ``float`` gives.

A column is read here only when every one of its cells in the chunk has that form (no
white space, no other byte); otherwise the column goes to the compiled reader and the
exact rules as before, so errors and values never depend on which way a cell was read.
"""

from __future__ import annotations

import numpy as np

__all__ = ["WIDTH", "one_digit_cells", "starts_of", "whole_columns"]

#: Longest cell (sign included) read here.
WIDTH = 4
_TENS = np.array([1, 10, 100, 1000, 10000], dtype=np.int32)


def one_digit_cells(a: np.ndarray, rows: int, k: int, separator: int) -> np.ndarray | None:
    """The (rows, k) values (uint8, exact; copied into the float64 table by the caller, so that
    no float64 copy of the chunk is made here) of a chunk whose every line is ``k`` cells of
    one ASCII digit (``2 k`` bytes a line with the separators and the line feed), or None
    when it is not."""
    lines = a.reshape(rows, 2 * k)
    if k > 1 and not bool((lines[:, 1:-1:2] == separator).all()):
        return None
    digits = lines[:, 0::2] - np.uint8(48)
    if int(digits.max(initial=0)) > 9:
        return None
    return digits


def starts_of(grid: np.ndarray) -> np.ndarray:
    """The position of the first byte of every cell, from ``grid`` (row i: the positions of the
    separators and the line end that close its cells)."""
    starts = np.empty_like(grid)
    starts.ravel()[1:] = grid.ravel()[:-1] + 1
    if starts.size:
        starts.ravel()[0] = 0
    return starts


def whole_columns(a: np.ndarray, grid: np.ndarray, cols: tuple[int, ...],
                  crlf: bool) -> tuple[tuple[int, ...], np.ndarray]:
    """The columns of ``cols`` whose every cell is a short whole number, and their float64
    values (a C-ordered block, one column per column read).

    ``a`` holds the chunk's bytes (uint8), ``grid`` the end of every cell (see :func:`starts_of`);
    ``crlf``: lines may end with a carriage return before the line feed (it is not part of
    the last cell).  Columns left out of the result are read by the exact rules.
    """
    n, k = grid.shape
    if not cols or n == 0:
        return (), np.zeros((n, 0))
    widths = np.diff(grid.ravel(), prepend=-1).reshape(n, k)
    widths -= 1
    if crlf and cols[-1] == k - 1:
        widths[:, -1] -= a[grid[:, -1] - 1] == 13
    lo, hi = widths.min(axis=0), widths.max(axis=0)
    cols = tuple(c for c in cols if lo[c] >= 1 and hi[c] <= WIDTH)
    if not cols:
        return (), np.zeros((n, 0))
    every = cols == tuple(range(k))
    ends = (grid.copy() if crlf else grid) if every else grid[:, cols]  # the caller's grid is left as it is
    widths = widths if every else widths[:, cols]
    if crlf and cols[-1] == k - 1:
        ends[:, -1] -= a[ends[:, -1] - 1] == 13
    ends, widths = ends.ravel(), widths.ravel()
    values, bad = _read(a, ends, widths, int(hi[list(cols)].max()))
    values = values.reshape(n, len(cols))
    if bad is not None:
        ok = ~bad.reshape(n, len(cols)).any(axis=0)
        cols, values = tuple(c for c, good in zip(cols, ok.tolist()) if good), values[:, ok]
    return cols, values


def _read(a: np.ndarray, ends: np.ndarray, widths: np.ndarray, longest: int) -> tuple[np.ndarray, np.ndarray | None]:
    """Values of the cells ending before ``ends`` (of ``widths`` bytes, at most ``longest``) and
    which are not a sign and digits (None when all are)."""
    if longest == 1:  # one byte: a digit (a sign alone is not a number)
        digit = a[ends - 1]
        digit -= np.uint8(48)
        values = digit.astype(np.float64)
        return values, None if int(digit.max()) <= 9 else digit > 9
    first = a[ends - widths]
    signed = (first == 45) | (first == 43)
    bad = widths <= signed  # a sign alone
    acc = np.zeros(widths.shape, dtype=np.int32)
    for j in range(1, longest + 1):  # the j-th byte from the end of each cell
        present = widths >= j
        digit = a[ends - j]
        digit -= np.uint8(48)
        is_digit = digit <= 9
        bad |= present & ~is_digit & ~((widths == j) & signed)
        digit[~(present & is_digit)] = 0
        acc += digit * _TENS[j - 1]
    values = acc.astype(np.float64)
    np.negative(values, out=values, where=first == 45)  # -0 is -0.0, as float('-0')
    return values, bad if bad.any() else None
