"""Splitting a CSV file's bytes into records and cells, a chunk of about 1 MB at a time.

Three ways through a chunk, all giving the same cells (the tests check this):

* **numbers** (no quote, no lone carriage return): a chunk whose every line is one-digit
  cells is read as a grid of bytes, and columns whose every cell in the chunk is a sign
  and a few digits are read from the bytes (:mod:`lintools.exchange.csv_whole`); the other
  columns expected to hold numbers go through NumPy's compiled text reader (:func:`numpy.loadtxt`).  On the bytes such a
  chunk can hold, it accepts exactly the strict grammar of :mod:`lintools.support.csv_cells` once the
  result is required to be finite and the white space it strips is the reader's own
  (its float conversion is Python's correctly rounded one).  Rows it refuses are found
  by halving and their cells classified one by one.
* **fields** (no quote, every line with the header's number of fields): the other
  columns' cells are cut out of the bytes with vectorised index arithmetic.
* **records**: a chunk with quotes or lone carriage returns is read record by record
  with the standard library's ``csv`` module (RFC 4180 quoting; a quoted field may
  hold separators and line breaks), and so is a chunk with blank or ragged lines, which
  are skipped or refused with their line named.

Every physical line is at most ``max_line`` bytes and every cell at most ``max_field``.
"""

from __future__ import annotations

import csv
import io
import re
from dataclasses import dataclass, field
from typing import Any, Callable, Iterator

import numpy as np
from numpy.lib.stride_tricks import as_strided

from ..support.csv_cells import STRIP
from .csv_decimals import chunk_places
from ..support.errors import InputError
from ..support.files import BoundedFile
from .csv_whole import WIDTH, one_digit_cells, starts_of, whole_columns

__all__ = ["CHUNK", "Layout", "Plan", "Piece", "pieces", "header_record"]

#: Bytes per chunk (a chunk ends at the first line end after this many bytes).
CHUNK = 1 << 20
_NARROW = 32  # cells up to this many bytes are cut out as fixed-width byte strings
_SMALL = 8  # rows refused by the compiled reader are looked at one by one below this many
_LINE = re.compile(rb"[^\r\n]*(?:\r\n|\r|\n)?")
_STRIP_TEXT = STRIP.decode()
_NUMBER_BYTES = b"0123456789.,+-eE\n" + STRIP  # what cells of numbers, and their line ends, may hold
_DECIMAL_COMMA = bytes.maketrans(b",.", b".#")  # '.' becomes a byte no number holds


@dataclass(frozen=True)
class Layout:
    """What every chunk needs to know about the file."""

    where: str
    src: BoundedFile  # the file, read forward a window at a time
    delimiter: bytes
    names: tuple[str, ...]
    decimal: bytes
    max_line: int
    max_field: int
    line_hint: str

    @property
    def k(self) -> int:
        return len(self.names)


@dataclass(frozen=True)
class Plan:
    """Which used columns are read as numbers and which as tokens (column indices, sorted);
    ``whole`` are numeric columns whose whole-number values must say whether their cells
    were written as integers (no decimal mark, no exponent); ``places``: find the place of
    the last written digit of every number cell (:mod:`lintools.exchange.csv_decimals`)."""

    numeric: tuple[int, ...]
    tokens: tuple[int, ...]
    whole: tuple[int, ...] = ()
    places: bool = False


@dataclass
class Piece:
    """The cells of consecutive records.

    ``numbers[c]`` holds column ``c``'s values (NaN in the rows of ``exceptions[c]``, whose
    stripped tokens are given there); ``tokens[c]`` holds every stripped token of column
    ``c``.  ``lines`` is the file line on which each record starts.  ``integers[c]`` says
    whether every cell of column ``c`` in ``numbers`` was written as an integer.
    ``matrix`` holds every column's values when the whole chunk was read as numbers (float64,
    or uint8 for one-digit cells: exact either way, cast as the table's block is filled).
    ``places[c]`` (only when the plan asks, and only from the bytes of a plain chunk) holds
    the place of the last written digit of column ``c``'s cells (meaningless in the rows of
    ``exceptions[c]``); without it the tokens give them.
    """

    lines: np.ndarray
    numbers: dict[int, np.ndarray] = field(default_factory=dict)
    integers: dict[int, bool] = field(default_factory=dict)
    matrix: np.ndarray | None = None  # every column's values, when the whole chunk was numbers
    exceptions: dict[int, tuple[np.ndarray, np.ndarray]] = field(default_factory=dict)
    tokens: dict[int, np.ndarray] = field(default_factory=dict)
    places: dict[int, np.ndarray] = field(default_factory=dict)


def _too_long(lay: Layout, line: int) -> InputError:
    return InputError(
        f"{lay.where!r} line {line} is longer than {lay.max_line} bytes ({lay.line_hint}); "
        "check that this is a CSV file with one record per line"
    )


def _field_too_long(lay: Layout, line: int) -> InputError:
    return InputError(
        f"{lay.where!r} line {line} has a cell longer than {lay.max_field} bytes; "
        "check the file (an unmatched quote or a missing line end?)"
    )


def _bad_text(lay: Layout, line: int, byte: int, column: int) -> InputError:
    return InputError(
        f"{lay.where!r} is not a readable CSV file: line {line} is not UTF-8 text "
        f"(byte 0x{byte:02x} at byte {column} of the line); save the file as UTF-8"
    )


def _nul(lay: Layout, line: int) -> InputError:
    return InputError(
        f"{lay.where!r} is not a readable CSV file: line {line} holds a NUL byte; is it a text file?"
    )


# ----------------------------------------------------------------------- records (csv)
class _Lines:
    """Physical lines of the file from ``pos`` as str, for :mod:`csv`, with the bookkeeping
    of where the current record started and how long it is."""

    def __init__(self, lay: Layout, pos: int, line: int) -> None:
        self.lay, self.pos, self.line = lay, pos, line
        self.record_line = line
        self.record_bytes = 0
        self.fresh = True

    def __iter__(self) -> Iterator[str]:
        lay = self.lay
        while True:
            chunk = _next_line(lay, self.pos, self.line)
            if chunk is None:
                return
            if self.fresh:
                self.record_line, self.record_bytes, self.fresh = self.line, 0, False
            if len(chunk.rstrip(b"\r\n")) > lay.max_line:
                raise _too_long(lay, self.line)
            self.record_bytes += len(chunk)
            if self.record_bytes > lay.max_line + 2 and self.record_line != self.line:
                raise InputError(
                    f"{lay.where!r}: the record starting on line {self.record_line} runs past "
                    f"{lay.max_line} bytes ({lay.line_hint}); check for an unmatched quote"
                )
            if b"\x00" in chunk:
                raise _nul(lay, self.line)
            try:
                text = chunk.decode("utf-8")
            except UnicodeDecodeError as exc:
                raise _bad_text(lay, self.line, chunk[exc.start], exc.start + 1) from None
            self.pos += len(chunk)
            self.line += 1
            yield text


def _next_line(lay: Layout, pos: int, line: int) -> bytearray | None:
    """The physical line at file position ``pos`` with its line end (None at the end of the file),
    read onto the window as needed; a line longer than ``max_line`` is refused before it is all read."""
    src = lay.src
    while True:
        off = pos - src.base
        m = _LINE.match(src.buf, off)
        if m.end() < len(src.buf) or src.eof:
            return m.group() if m.end() > off else None
        if m.end() - off > lay.max_line + 2:
            raise _too_long(lay, line)
        src.more()


def _records(lay: Layout, pos: int, line: int) -> Iterator[tuple[list[str], int, _Lines]]:
    """Records from ``pos``: (fields, line the record starts on, the line source after it)."""
    src = _Lines(lay, pos, line)
    reader = csv.reader(iter(src), delimiter=lay.delimiter.decode(), quotechar='"', doublequote=True,
                        skipinitialspace=True, strict=True)
    while True:
        try:
            row = next(reader)
        except StopIteration:
            return
        except csv.Error as exc:
            msg = str(exc)
            if "field larger than field limit" in msg:
                raise _field_too_long(lay, src.record_line) from None
            raise InputError(
                f"{lay.where!r} is not a readable CSV file: line {src.record_line}: {msg}; "
                "a quoted cell must be closed, and a closing quote followed by the separator or the line end"
            ) from None
        src.fresh = True
        yield row, src.record_line, src


def header_record(lay: Layout, pos: int) -> tuple[list[str], int, int]:
    """The first record from ``pos``: (fields, position after it, the next line number)."""
    for row, _, src in _records(lay, pos, 1):
        return row, src.pos, src.line
    return [], lay.src.end, 1


def _blank(fields: list[str]) -> bool:
    return len(fields) == 0 or (len(fields) == 1 and not fields[0].strip(_STRIP_TEXT))


def _rows_to_piece(rows: list[list[bytes]], lines: list[int], plan: Plan) -> Piece:
    piece = Piece(lines=np.array(lines, dtype=np.int64))
    for c in plan.numeric + plan.tokens:
        col = np.empty(len(rows), dtype=object)
        col[:] = [r[c] for r in rows]
        piece.tokens[c] = col
    return piece


def _ragged(lay: Layout, line: int, got: int) -> InputError:
    hint = ""
    if got > lay.k and lay.delimiter == b",":
        hint = ("; a number written with a decimal comma or a thousands separator splits a cell in two: quote "
                "such cells, or separate the file with ';' and pass decimal=',' (--decimal ,)")
    return InputError(f"{lay.where!r} line {line} has {got} fields but the header has {lay.k}{hint}")


def _quoted(lay: Layout, pos: int, line: int, plan: Plan) -> tuple[Piece, int, int]:
    """Records from ``pos`` through the csv module, until about CHUNK bytes are read."""
    rows: list[list[bytes]] = []
    lines: list[int] = []
    stop = pos + CHUNK
    src = None
    for row, start, src in _records(lay, pos, line):
        if not _blank(row):
            if len(row) != lay.k:
                raise _ragged(lay, start, len(row))
            cells = [f.encode("utf-8").strip(STRIP) for f in row]
            if max(map(len, cells)) > lay.max_field:
                raise _field_too_long(lay, start)
            rows.append(cells)
            lines.append(start)
        if src.pos >= stop:
            break
    if src is None:
        return Piece(lines=np.zeros(0, dtype=np.int64)), lay.src.end, line
    return _rows_to_piece(rows, lines, plan), src.pos, src.line


# ------------------------------------------------------------------- plain chunks
def _split_lines(lay: Layout, chunk: bytes, line0: int, plan: Plan) -> Piece:
    """Line by line with bytes.split: blank lines skipped, ragged lines refused."""
    rows: list[list[bytes]] = []
    lines: list[int] = []
    for i, text in enumerate(chunk.split(b"\n")[:-1]):
        if not text.strip(STRIP) and lay.delimiter not in text:  # blank (a tab may be the separator)
            continue
        cells = text.split(lay.delimiter)
        if len(cells) != lay.k:
            raise _ragged(lay, line0 + i, len(cells))
        cells = [c.strip(STRIP) for c in cells]
        if max(map(len, cells)) > lay.max_field:
            raise _field_too_long(lay, line0 + i)
        rows.append(cells)
        lines.append(line0 + i)
    return _rows_to_piece(rows, lines, plan)


def _loadtxt(lay: Layout, source: Any, rows: int, usecols: tuple[int, ...] | None,
             width: int) -> np.ndarray | None:
    """NumPy's compiled reader on ``source`` (``rows`` lines); None unless it reads every
    line into finite numbers."""
    try:
        v = np.loadtxt(source, dtype=np.float64, delimiter=lay.delimiter.decode("latin1"), comments=None,
                       quotechar=None, ndmin=2, encoding="latin1", usecols=usecols)
    except (ValueError, TypeError, OverflowError, IndexError):
        return None
    if v.shape != (rows, width) or not np.isfinite(v).all():
        return None
    return v


class _Fields:
    """Cells of a chunk whose every line has the header's number of fields."""

    def __init__(self, chunk: bytes, a: np.ndarray, bounds: np.ndarray, k: int) -> None:
        self.chunk, self.a, self.bounds, self.k = chunk, a, bounds, k
        self.grid = bounds[: bounds.size - bounds.size % k].reshape(-1, k)  # row i: the ends of its cells
        self._padded: bool | None = None
        self._window: np.ndarray | None = None

    @property
    def padded(self) -> bool:
        """Whether the chunk holds any white space to strip."""
        if self._padded is None:
            self._padded = len(self.chunk.translate(None, STRIP)) != len(self.chunk)
        return self._padded

    def tokens(self, c: int, rows: np.ndarray | None = None) -> np.ndarray:
        """The stripped cells of column ``c`` (in ``rows``, or every row)."""
        grid = self.grid if rows is None else self.grid[rows]
        ends = grid[:, c]
        if c:
            starts = grid[:, c - 1] + 1
        else:
            starts = self.grid[:, -1] + 1
            starts = np.concatenate(([0], starts[:-1])) if rows is None else np.where(rows > 0, starts[rows - 1], 0)
        lengths = ends - starts
        width = int(lengths.max()) if lengths.size else 0
        if width == 0:
            return np.zeros(lengths.size, dtype="S1")
        if width > _NARROW:
            chunk = self.chunk
            out = np.empty(lengths.size, dtype=object)
            out[:] = [chunk[s:e].strip(STRIP) for s, e in zip(starts.tolist(), ends.tolist())]
            return out
        if self._window is None:
            pad = np.zeros(self.a.size + _NARROW, dtype=np.uint8)
            pad[: self.a.size] = self.a
            self._window = as_strided(pad, shape=(self.a.size, _NARROW), strides=(1, 1), writeable=False)
        cut = self._window[starts, :width]
        if width > 1 or not lengths.all():
            cut[np.arange(width) >= lengths[:, None]] = 0
        out = cut.view(f"S{width}").ravel()
        return np.strings.strip(out, STRIP) if self.padded else out

    def longest(self) -> tuple[int, int]:
        """(length, row) of the longest cell."""
        lengths = np.diff(self.bounds, prepend=-1) - 1
        i = int(np.argmax(lengths))
        return int(lengths[i]), i // self.k


def _suspects(lay: Layout, chunk: bytes, a: np.ndarray, cells: _Fields, cols: tuple[int, ...]) -> np.ndarray:
    """Rows with a cell of ``cols`` that cannot be a number: empty, or holding a byte no
    number holds (found without parsing, so that the compiled reader is not tried on them)."""
    grid = cells.grid
    lengths = (grid - starts_of(grid))[:, cols]
    bad = (lengths == 0).any(axis=1)
    if chunk.translate(None, _NUMBER_BYTES + lay.delimiter):
        lut = np.ones(256, dtype=bool)
        lut[np.frombuffer(_NUMBER_BYTES + lay.delimiter, dtype=np.uint8)] = False
        at = np.searchsorted(cells.bounds, np.flatnonzero(lut[a]))  # the cell of each such byte
        hit = np.zeros(cells.grid.size, dtype=bool)
        hit[at] = True
        bad |= hit.reshape(grid.shape)[:, cols].any(axis=1)
    return np.flatnonzero(bad)


def _numbers(lay: Layout, chunk: bytes, cols: tuple[int, ...], suspects: Callable[[], np.ndarray],
             tried: bool) -> tuple[np.ndarray, np.ndarray]:
    """Values of ``cols`` for every line (NaN where refused) and the refused rows.

    Every line goes to the compiled reader at once (unless ``tried``: it refused them
    already); if it refuses, the ``suspects()`` rows
    are set aside without a try, the others go to the reader together, and where it
    refuses a stretch, the stretch is halved until the refused rows are found (at most
    ``_SMALL`` rows are then looked at one by one).
    """
    usecols = None if cols == tuple(range(lay.k)) else cols
    text = _for_numbers(lay, chunk)
    n = text.count(b"\n")
    v = None if tried else _loadtxt(lay, io.BytesIO(text), n, usecols, len(cols))
    if v is not None:
        return v, np.zeros(0, dtype=np.int64)
    lines = text.split(b"\n")
    lines.pop()
    skip = suspects()
    values = np.full((n, len(cols)), np.nan)
    keep = np.ones(n, dtype=bool)
    keep[skip] = False
    order = np.flatnonzero(keep)
    chosen = lines if order.size == n else [lines[i] for i in order.tolist()]
    refused: list[int] = skip.tolist()
    stack = [(0, order.size)]
    while stack:
        lo, hi = stack.pop()
        if hi <= lo:
            continue
        v = _loadtxt(lay, chosen[lo:hi], hi - lo, usecols, len(cols))
        if v is not None:
            values[order[lo:hi]] = v
        elif hi - lo <= _SMALL:
            refused.extend(order[lo:hi].tolist())
        else:
            mid = (lo + hi) // 2
            stack.append((mid, hi))
            stack.append((lo, mid))
    return values, np.array(sorted(refused), dtype=np.int64)


def _for_numbers(lay: Layout, chunk: bytes) -> bytes:
    """The chunk as the compiled reader must see it: with a decimal comma, ',' becomes '.'
    and '.' a byte no number holds."""
    return chunk.translate(_DECIMAL_COMMA) if lay.decimal == b"," else chunk


def _plain(lay: Layout, chunk: bytes, line0: int, plan: Plan) -> tuple[Piece, int]:
    """A chunk without quotes or lone carriage returns, ending with a line end; its
    records and its number of lines."""
    a = np.frombuffer(chunk, dtype=np.uint8)
    ends = np.flatnonzero(a == 10)
    n, k = ends.size, lay.k
    lengths = np.empty_like(ends)
    lengths[0] = ends[0]
    np.subtract(ends[1:], ends[:-1], out=lengths[1:])
    lengths[1:] -= 1
    if b"\r" in chunk:
        lengths -= a[ends - 1] == 13  # without the line end
    longest = int(lengths.max())
    if longest > lay.max_line:
        raise _too_long(lay, line0 + int(np.argmax(lengths > lay.max_line)))
    cells: _Fields | None = None

    def fields() -> _Fields:
        nonlocal cells
        if cells is None:
            cells = _Fields(chunk, a, np.flatnonzero((a == lay.delimiter[0]) | (a == 10)), k)
        return cells

    if len(plan.numeric) == k and longest == 2 * k - 1 == int(lengths.min()) and b"\r" not in chunk:
        digits = one_digit_cells(a, n, k, lay.delimiter[0])  # every line k one-byte cells?
        if digits is not None:
            piece = Piece(lines=np.arange(line0, line0 + n, dtype=np.int64),
                          numbers={c: digits[:, c] for c in range(k)}, matrix=digits,
                          integers={c: True for c in plan.whole})
            if plan.places:  # a one-digit whole number's last written digit is the units
                piece.places = {c: np.zeros(n, dtype=np.int32) for c in plan.numeric}
            return piece, n
    tried = False
    if len(plan.numeric) == k > 1 and int(ends[0]) > k * (WIDTH + 1) and chunk.strip(STRIP + b"\n"):
        # numbers longer than whole_columns reads: every line to the compiled reader at once
        # (NumPy warns on a chunk without data)
        v = _loadtxt(lay, io.BytesIO(_for_numbers(lay, chunk)), n, None, k)
        tried = True
        if v is not None and longest <= lay.max_field:
            piece = Piece(lines=np.arange(line0, line0 + n, dtype=np.int64), numbers={c: v[:, c] for c in range(k)},
                          matrix=v)
            _integers(lay, piece, plan, a, ends, fields)
            if plan.places:
                _places(lay, piece, plan, a, True)
            return piece, n
    bounds = fields().bounds
    if k == 1 or bounds.size != n * k or not np.all(a[bounds[k - 1 :: k]] == 10):
        return _split_lines(lay, chunk, line0, plan), n
    if longest > lay.max_field:
        size, row = fields().longest()
        if size > lay.max_field:
            raise _field_too_long(lay, line0 + row)
    piece = Piece(lines=np.arange(line0, line0 + n, dtype=np.int64))
    for c in plan.tokens:
        piece.tokens[c] = fields().tokens(c)
    if plan.numeric:
        _numeric_cells(lay, chunk, a, fields(), plan, piece, tried)
        _integers(lay, piece, plan, a, ends, fields)
        if plan.places:
            _places(lay, piece, plan, a, False)
    return piece, n


def _numeric_cells(lay: Layout, chunk: bytes, a: np.ndarray, cells: _Fields, plan: Plan, piece: Piece,
                   tried: bool) -> None:
    """The values of the ``plan.numeric`` columns of a regular chunk into ``piece``: columns of
    short whole numbers read from the bytes, the others by the compiled reader (``tried``: it
    refused the whole chunk already)."""
    n = cells.grid.shape[0]
    whole, block = (), np.zeros((n, 0))
    if not tried:
        whole, block = whole_columns(a, cells.grid, plan.numeric, b"\r" in chunk)
    rest = tuple(c for c in plan.numeric if c not in whole)
    values, refused = np.zeros((n, 0)), np.zeros(0, dtype=np.int64)
    if rest:
        values, refused = _numbers(lay, chunk, rest, lambda: _suspects(lay, chunk, a, cells, rest), tried)
    for j, c in enumerate(whole):
        piece.numbers[c] = block[:, j]
        piece.integers[c] = True
    for j, c in enumerate(rest):
        piece.numbers[c] = values[:, j]
        if refused.size:
            piece.exceptions[c] = (refused, cells.tokens(c, refused))
    if not refused.size and len(plan.numeric) == lay.k:  # every column a number: one block
        if not whole or not rest:
            piece.matrix = block if whole else values
        else:
            piece.matrix = np.empty((n, lay.k))
            piece.matrix[:, list(whole)] = block
            piece.matrix[:, list(rest)] = values


def _places(lay: Layout, piece: Piece, plan: Plan, a: np.ndarray, numbers_only: bool) -> None:
    """Fill ``piece.places`` for the numeric columns of a plain chunk of the header's shape."""
    q = chunk_places(a, lay.delimiter[0], lay.decimal[0], piece.lines.size, lay.k, numbers_only)
    for c in plan.numeric:
        piece.places[c] = q[:, c]


_POWERS = 10.0 ** np.arange(1, 17)


def _integers(lay: Layout, piece: Piece, plan: Plan, a: np.ndarray, ends: np.ndarray,
              fields: Callable[[], _Fields]) -> None:
    """Fill ``piece.integers`` for the ``plan.whole`` columns read as numbers.

    A first or last column is checked cheaply: a whole number ``v`` written as an
    integer takes exactly the bytes of ``str(int(v))`` between the line's edge and the
    separator, and no cell shorter than that holds only digits and signs; so when the
    separator stands where that length puts it in every row, the bytes in that span are
    looked at for a decimal mark or an exponent.  Otherwise every cell is cut out.
    """
    marks = np.zeros(256, dtype=bool)
    marks[[lay.decimal[0], ord("e"), ord("E")]] = True
    last = a.size - 1
    for c in plan.whole:
        if c not in piece.numbers or c in piece.integers:
            continue
        v = np.ascontiguousarray(piece.numbers[c])
        finite = piece.matrix is not None or bool(np.isfinite(v).all())  # NaN marks a refused row
        w = v if finite else v[np.isfinite(v)]
        size_all = np.abs(w)
        if not np.array_equal(w, np.trunc(w)) or not size_all.max(initial=0.0) < 2.0**53:
            piece.integers[c] = False
            continue
        if finite and c in (0, lay.k - 1):
            digits = 1 if size_all.max(initial=0.0) < 10 else np.searchsorted(_POWERS, size_all, side="right") + 1
            size = digits + (v < 0)
            if c == 0:
                start = np.concatenate(([0], ends[:-1] + 1))
                edge = a[np.minimum(start + size, last)]
            else:
                stop = ends - (a[np.maximum(ends - 1, 0)] == 13)
                start = stop - size
                edge = a[np.maximum(start - 1, 0)]
            if np.all(edge == lay.delimiter[0]):
                marked = False
                for t in range(int(size.max())):
                    at = np.clip(start[size > t] + t, 0, last)
                    marked = marked or bool(marks[a[at]].any())
                piece.integers[c] = not marked
                continue
        refused = piece.exceptions[c][0] if c in piece.exceptions else np.zeros(0, dtype=np.int64)
        read = np.setdiff1d(np.arange(v.size), refused)  # the refused rows' cells are classified apart
        piece.integers[c] = not _marked(fields().tokens(c, read), lay.decimal)


def _marked(tokens: np.ndarray, decimal: bytes) -> bool:
    """Whether a token holds the decimal mark or an exponent."""
    if tokens.dtype.kind == "S":
        return bool(np.isin(tokens.view(np.uint8), (decimal[0], ord("e"), ord("E"))).any())
    return any(m in t for t in tokens.tolist() for m in (decimal, b"e", b"E"))


def _chunk_end(lay: Layout, pos: int, line: int, size: int) -> int:
    """The file position after the first line end at or beyond ``pos + size`` (or the end of
    the file), read onto the window; the line crossing that mark is refused when too long."""
    src = lay.src
    src.fill(pos + size)
    mark = pos + size
    found = src.buf.find(b"\n", max(mark - src.base, 0))
    while found < 0 and not src.eof and src.end - pos <= size + lay.max_line + 1:
        seen = src.end
        src.more()
        found = src.buf.find(b"\n", seen - src.base)
    end = src.end if found < 0 else src.base + found + 1
    if end - pos > size + lay.max_line:  # the line crossing the chunk mark may be too long
        buf, base = src.buf, src.base
        start = buf.rfind(b"\n", pos - base, mark - base) + 1 or pos - base
        if end - base - start > lay.max_line + 1:
            raise _too_long(lay, line + buf.count(b"\n", pos - base, start))
    return end


def pieces(lay: Layout, pos: int, line: int, plan: Callable[[], Plan]) -> Iterator[tuple[Piece, int]]:
    """The records of the file from ``pos`` (on line ``line``), a chunk at a time, each with
    the position after it.  Only the current chunk's bytes are held (the window before
    ``pos`` is dropped as reading goes on)."""
    src = lay.src
    while True:
        src.drop(pos)
        end = _chunk_end(lay, pos, line, CHUNK)
        if end <= pos:
            return
        with memoryview(src.buf) as view:  # one copy of the chunk's bytes
            chunk = bytes(view[pos - src.base:end - src.base])
        if b'"' in chunk or (b"\r" in chunk and chunk.count(b"\r") != chunk.count(b"\r\n")):
            piece, pos, line = _quoted(lay, pos, line, plan())
            yield piece, pos
            continue
        if b"\x00" in chunk:
            raise _nul(lay, line + chunk.count(b"\n", 0, chunk.index(b"\x00")))
        if not chunk.isascii():
            try:
                chunk.decode("utf-8")
            except UnicodeDecodeError as exc:
                at = line + chunk.count(b"\n", 0, exc.start)
                column = exc.start - chunk.rfind(b"\n", 0, exc.start)
                raise _bad_text(lay, at, chunk[exc.start], column) from None
        if not chunk.endswith(b"\n"):
            chunk += b"\n"
        piece, physical = _plain(lay, chunk, line, plan())
        line += physical
        pos = end
        yield piece, pos
