"""Typing CSV columns from all their cells, and turning them into the table's arrays.

The cells of every used column arrive a chunk at a time (:class:`lintools.exchange.csv_chunks.Piece`);
:class:`Columns` stores them compactly (numbers as float64 in one row-major block for
the features, text as small integer codes of its levels) and, at the end, decides each
column's type from the whole column and applies the rules stated in
:mod:`lintools.exchange.csv_table`.  Storage grows in place (``ndarray.resize``) from an estimate of
the number of rows, so the file's numbers are held once; a numeric target is held as
int8 while its values are small whole numbers (widened to float64 at the first other one).
"""

from __future__ import annotations

from dataclasses import dataclass
from itertools import chain
from typing import Any

import numpy as np

from ..support.csv_cells import BAD, MISS, NUM, TEXT, classify, date_like
from .csv_chunks import Piece, Plan
from .csv_decimals import NONE, token_places
from ..support.errors import InputError

__all__ = ["MAX_LEVELS", "Spec", "Columns"]

#: An undeclared text feature becomes indicator columns only with at most this many levels.
MAX_LEVELS = 20
_EXACT_INT = 2.0**53


@dataclass(frozen=True)
class Spec:
    """One used column: its index and name in the file, its role and whether it was declared categorical."""

    index: int
    name: str
    role: str  # "feature", "target", "weights" or "extra"
    categorical: bool = False

    @property
    def text_only(self) -> bool:
        return self.categorical or self.role == "extra"

    def label(self) -> str:
        return f"{'' if self.role in ('feature', 'extra') else self.role + ' '}column '{self.name}'"


def _both(python: str, cli: str) -> str:
    """A remedy for both readers of a message: the Python argument, then the command-line
    option (the command line keeps only the option: :func:`lintools.cli.console.translate`)."""
    return f"{python}; on the command line {cli}"


def _cli_value(text: str) -> str:
    return text if text and all(ch.isalnum() or ch in "_-./" for ch in text) else repr(text)


def _unique(tokens: np.ndarray) -> tuple[list[bytes], np.ndarray]:
    """The distinct tokens (bytes) and the index of each token among them.

    Byte strings of up to 8 bytes are compared as integers (cells of one or two bytes by
    counting), which is much faster than sorting strings.
    """
    if tokens.dtype.kind == "S" and tokens.dtype.itemsize <= 8:
        w = tokens.dtype.itemsize
        cells = tokens.view(np.uint8).reshape(-1, w)
        if w <= 2:
            keys = cells[:, 0].astype(np.int64) if w == 1 else cells[:, 0].astype(np.int64) * 256 + cells[:, 1]
            present = np.flatnonzero(np.bincount(keys, minlength=1))
            lookup = np.zeros(present[-1] + 1 if present.size else 1, dtype=np.int64)
            lookup[present] = np.arange(present.size)
            inverse = lookup[keys]
            chars = np.zeros((present.size, w), dtype=np.uint8)
            chars[:, -1] = present % 256
            if w == 2:
                chars[:, 0] = present // 256
        else:
            keys = np.zeros((cells.shape[0], 8), dtype=np.uint8)
            keys[:, :w] = cells
            distinct, inverse = np.unique(keys.view(np.uint64).ravel(), return_inverse=True)
            chars = distinct.view(np.uint8).reshape(-1, 8)[:, :w]
        return [bytes(u) for u in np.ascontiguousarray(chars).view(f"S{w}").ravel().tolist()], inverse.ravel()
    distinct, inverse = np.unique(tokens, return_inverse=True)
    return [bytes(u) for u in distinct.tolist()], inverse.ravel()


def _runs(columns: list[int]) -> list[tuple[int, int, int]]:
    """``columns`` as runs of consecutive indices: (first, after the last, position of the first)."""
    runs: list[tuple[int, int, int]] = []
    for j, c in enumerate(columns):
        if runs and runs[-1][1] == c:
            runs[-1] = (runs[-1][0], c + 1, runs[-1][2])
        else:
            runs.append((c, c + 1, j))
    return runs


class _Sized:
    """Python numbers of a sequence of array slices, with their count as the length hint, so that
    ``tuple`` allocates the result once instead of growing it."""

    def __init__(self, slices: list[np.ndarray], kind: Any, count: int) -> None:
        self.slices, self.kind, self.count = slices, kind, count

    def __iter__(self) -> Any:
        return chain.from_iterable(s.astype(self.kind).tolist() for s in self.slices)

    def __length_hint__(self) -> int:
        return self.count


def _small_whole(v: np.ndarray) -> bool:
    """Whether every value of ``v`` is a whole number in int8's range, and none is -0.0 or NaN."""
    if v.size == 0:
        return True
    if not (-128.0 <= v.min() and v.max() <= 127.0):  # False for NaN too
        return False
    return bool(np.array_equal(v, np.trunc(v))) and not bool((np.signbit(v) & (v == 0)).any())


class _Col:
    """What is known so far about one used column."""

    def __init__(self, spec: Spec, numeric: bool) -> None:
        self.spec = spec
        self.numeric = numeric  # read through the compiled number reader
        self.n_num = 0
        self.n_text = 0
        self.first_num: tuple[int, float] | None = None
        self.first_text: tuple[int, bytes] | None = None
        self.levels: dict[bytes, int] = {}
        self.values: str | None = None  # the store entry (and column) holding its numbers
        self.slot = 0
        self.codes: str | None = None
        self.integers = True  # every number written as an integer
        self.place = NONE  # the place of the coarsest last written digit of its kept numbers


class _Store:
    """Arrays indexed by row, grown together in place."""

    def __init__(self) -> None:
        self.arrays: dict[str, np.ndarray] = {}
        self.fill: dict[str, Any] = {}
        self.capacity = 0

    def add(self, name: str, dtype: Any, fill: Any = None, width: int | None = None) -> None:
        """A new array; ``fill`` is the value of rows not yet written (None: every row is written)."""
        shape = (self.capacity,) if width is None else (self.capacity, width)
        self.arrays[name] = np.empty(shape, dtype=dtype) if fill is None else np.full(shape, fill, dtype=dtype)
        self.fill[name] = fill

    def reserve(self, rows: int, estimate: int) -> None:
        if rows <= self.capacity:
            return
        new = max(rows, estimate, int(self.capacity * 1.5) + 16)
        for name, arr in self.arrays.items():
            if self.capacity == 0:  # the first reservation: no zero filling to pay for
                arr = self.arrays[name] = np.empty((new,) + arr.shape[1:], dtype=arr.dtype)
            else:
                arr.resize((new,) + arr.shape[1:], refcheck=False)
            if self.fill[name] is not None:
                arr[self.capacity:] = self.fill[name]
        self.capacity = new

    def __getitem__(self, name: str) -> np.ndarray:
        return self.arrays[name]


class Columns:
    """The used columns of a CSV file, filled a piece at a time; :meth:`finish` types them."""

    def __init__(self, where: str, specs: list[Spec], text_first: set[int], decimal: bytes,
                 missing: frozenset[bytes], drop_missing: bool, places: bool = False) -> None:
        self.where = where
        self.places = places
        self.decimal = decimal
        self.missing = missing
        self.drop_missing = drop_missing
        self.cols = [_Col(s, not s.text_only and s.index not in text_first) for s in specs]
        self.rows = 0
        self._pending: list[tuple[int, int, str]] = []
        self.store = _Store()
        self.store.add("lines", np.int64)
        if drop_missing:
            self.store.add("missing", np.bool_, False)
        block = [c for c in self.cols if c.spec.role == "feature" and c.numeric]
        self._block_columns = [c.spec.index for c in block]
        self._runs = _runs(self._block_columns)
        if block:
            self.store.add("block", np.float64, width=len(block))
            for j, c in enumerate(block):
                c.values, c.slot = "block", j
        for c in self.cols:
            if c.spec.role in ("target", "weights") and not c.spec.categorical:
                c.values = f"values {c.spec.index}"  # a target of small whole numbers is held as int8
                self.store.add(c.values, np.int8 if c.spec.role == "target" else np.float64)

    # ------------------------------------------------------------------ filling
    def plan(self) -> Plan:
        return Plan(numeric=tuple(sorted(c.spec.index for c in self.cols if c.numeric)),
                    tokens=tuple(sorted(c.spec.index for c in self.cols if not c.numeric)),
                    whole=tuple(c.spec.index for c in self.cols if c.numeric and c.spec.role == "target"),
                    places=self.places)

    def add(self, piece: Piece, estimate: int) -> None:
        """Store ``piece``; ``estimate`` is the expected number of rows of the whole file."""
        r = piece.lines.size
        if r == 0:
            return
        r0 = self.rows
        self.store.reserve(r0 + r, estimate)
        self.store["lines"][r0:r0 + r] = piece.lines
        whole = piece.matrix is not None and bool(self._block_columns)
        if whole:  # the block's rows in one copy
            out = self.store["block"]
            for lo, hi, at in self._runs:  # slices copy faster than a take
                out[r0:r0 + r, at:at + hi - lo] = piece.matrix[:, lo:hi]
        places: dict[int, np.ndarray] = {}
        for col in self.cols:
            c = col.spec.index
            q, rows, toks = None, None, None
            if c in piece.numbers:
                rows, toks = piece.exceptions.get(c, (None, None))
            if self.places and not col.spec.text_only:
                q = piece.places.get(c)
                if q is None:
                    q = np.full(r, NONE, dtype=np.int32)  # filled from the tokens
                elif rows is not None:  # the refused rows' cells are classified apart
                    q = q.copy()
                    q[rows] = NONE
                places[c] = q
            if c in piece.numbers:
                good = r - (0 if rows is None else rows.size)
                if good:
                    col.n_num += good
                    col.integers = col.integers and piece.integers.get(c, False)
                    if col.first_num is None:
                        i = 0
                        while rows is not None and i < rows.size and rows[i] == i:
                            i += 1
                        col.first_num = (int(piece.lines[i]), float(piece.numbers[c][i]))
                    if not (whole and col.values == "block"):
                        self._put(col, slice(r0, r0 + r), piece.numbers[c])
                if rows is not None:
                    self._cells(col, piece.lines, r0, rows, toks, q)
            elif c in piece.tokens:
                self._cells(col, piece.lines, r0, None, piece.tokens[c], q)
        if self._pending:  # the first problem in the file's order
            raise InputError(min(self._pending)[2])
        if places:
            self._coarsest(places, r0, r)
        self.rows += r

    def _coarsest(self, places: dict[int, np.ndarray], r0: int, r: int) -> None:
        """Each column's coarsest last written digit so far, over the rows kept."""
        keep = ~self.store["missing"][r0:r0 + r] if self.drop_missing else None
        for col in self.cols:
            q = places.get(col.spec.index)
            if q is not None and col.n_text == 0:
                col.place = max(col.place, int((q if keep is None else q[keep]).max(initial=NONE)))

    def _values(self, col: _Col) -> np.ndarray:
        arr = self.store[col.values]
        return arr[:, col.slot] if arr.ndim == 2 else arr

    def _put(self, col: _Col, rows: Any, values: np.ndarray) -> None:
        """Write ``values`` into ``rows`` of the column's numbers, widening an int8 store to float64
        at the first value it cannot hold exactly (not whole, beyond int8, -0.0 or NaN)."""
        arr = self.store[col.values]
        if arr.dtype == np.int8 and not _small_whole(values):
            arr = self.store.arrays[col.values] = arr.astype(np.float64)
        (arr[:, col.slot] if arr.ndim == 2 else arr)[rows] = values

    def _codes(self, col: _Col) -> np.ndarray:
        if col.codes is None:
            col.codes = f"codes {col.spec.index}"
            self.store.add(col.codes, np.uint8, np.iinfo(np.uint8).max)
        arr = self.store[col.codes]
        if len(col.levels) >= np.iinfo(arr.dtype).max:  # widen: uint8 -> uint16 -> uint32
            wider = np.uint16 if arr.dtype == np.uint8 else np.uint32
            new = arr.astype(wider)
            new[arr == np.iinfo(arr.dtype).max] = np.iinfo(wider).max
            self.store.arrays[col.codes] = new
            self.store.fill[col.codes] = np.iinfo(wider).max
            arr = new
        return arr

    def _cells(self, col: _Col, lines: np.ndarray, r0: int, rows: np.ndarray | None, toks: np.ndarray,
               places: np.ndarray | None = None) -> None:
        """Classify ``toks`` (the stripped cells of ``col`` in ``rows`` of the piece, or all rows);
        ``places``: the piece's places of the last written digits of ``col``, filled at its numbers."""
        spec = col.spec
        uniq, inverse = _unique(toks)
        cells = classify(uniq, self.decimal, self.missing, spec.text_only)
        kinds = cells.kinds[inverse]
        at = np.arange(toks.size) if rows is None else rows
        if cells.reasons:
            i = int(np.flatnonzero(kinds == BAD)[0])
            tok = uniq[inverse[i]]
            self._problem(int(lines[at[i]]), spec, self._bad(spec, int(lines[at[i]]), tok,
                                                             cells.reasons[int(inverse[i])]))
        missing = kinds == MISS
        if missing.any():
            if not self.drop_missing:
                i = int(np.flatnonzero(missing)[0])
                tok = uniq[inverse[i]].decode("utf-8", "replace")
                self._problem(int(lines[at[i]]), spec,
                              f"{self.where!r} line {int(lines[at[i]])}, {spec.label()}: missing value"
                              + (f" ({tok!r})" if tok else "")
                              + "; fill it in, or drop the lines with missing values "
                              "(drop_missing=True / --drop-missing)")
            else:
                self.store["missing"][r0 + at[missing]] = True
        num = kinds == NUM
        if num.any():
            col.n_num += int(num.sum())
            col.integers = col.integers and not any(
                m in uniq[u] for u in np.flatnonzero(cells.kinds == NUM).tolist() for m in (self.decimal, b"e", b"E"))
            if col.first_num is None:
                i = int(np.flatnonzero(num)[0])
                col.first_num = (int(lines[at[i]]), float(cells.values[inverse[i]]))
            if col.values is not None:
                self._put(col, r0 + at[num], cells.values[inverse[num]])
            if places is not None:
                found = np.flatnonzero(cells.kinds == NUM)
                q = np.full(len(uniq), NONE, dtype=np.int32)
                q[found] = token_places([uniq[u] for u in found.tolist()], self.decimal)
                places[at[num]] = q[inverse[num]]
        text = kinds == TEXT
        if text.any():
            i = int(np.flatnonzero(text)[0])
            if spec.role == "weights":
                self._problem(int(lines[at[i]]), spec,
                              f"{self.where!r} line {int(lines[at[i]])}, weights column '{spec.name}': "
                              f"{uniq[inverse[i]].decode('utf-8', 'replace')!r} is not a finite number; weights "
                              "must be numbers")
                return
            col.n_text += int(text.sum())
            if col.first_text is None:
                col.first_text = (int(lines[at[i]]), uniq[inverse[i]])
            col.numeric = False
            ids = np.zeros(len(uniq), dtype=np.int64)
            for u in np.flatnonzero(cells.kinds == TEXT).tolist():
                ids[u] = col.levels.setdefault(uniq[u], len(col.levels))
                self._codes(col)
            self._codes(col)[r0 + at[text]] = ids[inverse[text]]

    # ------------------------------------------------------------------ messages
    def _problem(self, line: int, spec: Spec, message: str) -> None:
        self._pending.append((line, spec.index, message))

    def _bad(self, spec: Spec, line: int, tok: bytes, reason: str) -> str:
        shown = tok.decode("utf-8", "replace")
        return (
            f"{self.where!r} line {line}, {spec.label()}: value {shown!r} {reason}; fix or drop that line; if "
            f"{shown!r} marks a missing value, add it to the missing-value tokens "
            f"({_both('missing_values=[...]', '--missing-values TOKENS')}); if the column holds labels, declare it "
            f"categorical ({_both(f'categorical=[{spec.name!r}]', '--categorical ' + _cli_value(spec.name))})"
        )

    def _mixed(self, col: _Col) -> str:
        """A column of numbers and text: name its first text cell, and its first number."""
        spec = col.spec
        declare = _both(f"categorical=[{spec.name!r}]", "--categorical " + _cli_value(spec.name))
        assert col.first_text is not None and col.first_num is not None
        line_t, tok = col.first_text
        line_n, value = col.first_num
        shown = tok.decode("utf-8", "replace")
        others = f"{col.n_text} cells are not numbers, " if col.n_text > 1 else ""
        return (
            f"{self.where!r} line {line_t}, {spec.label()}: {shown!r} is not a number, but the column holds "
            f"numbers ({others}{col.n_num} are numbers, the first on line {line_n}: {value:.17g}). Fix the "
            f"cell; if {shown!r} marks a missing value, add it to the missing-value tokens "
            f"({_both('missing_values=[...]', '--missing-values TOKENS')}) and fill those cells in or drop their lines "
            f"({_both('drop_missing=True', '--drop-missing')}); if the column holds labels, declare it "
            f"categorical ({declare})"
        )

    def _text_rules(self, col: _Col, names: list[str], rows: int) -> None:
        """Refuse an undeclared text feature that is date-like, identifier-like or has too many levels."""
        name = col.spec.name
        exclude = _both(f"exclude=[{name!r}]", "--exclude " + _cli_value(name))
        declare = _both(f"categorical=[{name!r}]", "--categorical " + _cli_value(name))
        if date_like(n.encode("utf-8") for n in names):
            raise InputError(
                f"{self.where!r}: column '{name}' holds dates or times (for example {names[0]!r}), which are not "
                f"read as a feature. Exclude it ({exclude}), or declare it categorical if each value is a "
                f"category ({declare})"
            )
        if len(names) > MAX_LEVELS and len(names) > rows / 2:
            raise InputError(
                f"{self.where!r}: text column '{name}' has {len(names)} different values in {rows} rows, nearly "
                f"one per row: it looks like an identifier, not a feature. Exclude it ({exclude}), or name the "
                f"features to use ({_both('features=[...]', '--features NAMES')})"
            )
        if len(names) > MAX_LEVELS:
            raise InputError(
                f"{self.where!r}: text column '{name}' has {len(names)} levels, more than the {MAX_LEVELS} that "
                f"become indicator columns without being asked. Declare it categorical to get {len(names) - 1} "
                f"indicator columns ({declare}), or exclude it ({exclude})"
            )

    # ------------------------------------------------------------------ finishing
    def _compact(self, keep: np.ndarray, rows: int) -> None:
        for arr in self.store.arrays.values():
            if arr.ndim == 1:
                arr[:rows] = arr[: keep.size][keep]
            else:
                for j in range(arr.shape[1]):
                    arr[:rows, j] = arr[: keep.size, j][keep]

    def _levels(self, col: _Col, rows: int) -> tuple[list[str], list[int]]:
        """The level names present in the kept rows, sorted, and their codes."""
        if col.codes is None:
            return [], []
        counts = np.bincount(self.store[col.codes][:rows], minlength=len(col.levels))[: len(col.levels)]
        by_code = {i: lv for lv, i in col.levels.items()}
        present = sorted((by_code[i].decode("utf-8"), i) for i in np.flatnonzero(counts).tolist())
        return [name for name, _ in present], [i for _, i in present]

    def _labels(self, col: _Col, rows: int) -> tuple:
        """The text of every kept row of a text column."""
        names, ids = self._levels(col, rows)
        table = np.empty(len(col.levels) + 1, dtype=object)
        table[ids] = names
        codes = self.store[col.codes][:rows] if col.codes is not None else np.zeros(0, dtype=np.uint8)
        return tuple(table[np.minimum(codes, len(col.levels))].tolist())

    def finish(self, reference_levels: dict[str, str]) -> dict[str, Any]:
        """Type every column and return the arrays of the table (see :class:`lintools.exchange.csv_table.Table`)."""
        n = self.rows
        if n == 0:
            raise InputError(f"{self.where!r} has no data lines")
        dropped = 0
        rows = n
        if self.drop_missing:
            miss = self.store["missing"][:n]
            dropped = int(miss.sum())
            rows = n - dropped
            if rows == 0:
                raise InputError(f"{self.where!r} has no data lines left after dropping missing values")
            if dropped:
                self._compact(~miss.copy(), rows)
        for col in self.cols:
            if col.n_num and col.n_text and not col.spec.text_only:
                raise InputError(self._mixed(col))
        out: dict[str, Any] = {"dropped": dropped, "extra": {}, "target": (), "weights": None}
        features = [c for c in self.cols if c.spec.role == "feature"]
        blocks: list[tuple[_Col, Any]] = []
        chosen: dict[str, str] = {}
        for col in features:
            if col.n_text == 0 and not col.spec.categorical:
                blocks.append((col, None))
                continue
            names, ids = self._levels(col, rows)
            if not col.spec.categorical:
                self._text_rules(col, names, rows)
            ref = reference_levels.get(col.spec.name, names[0] if names else "")
            if ref not in names:
                raise InputError(
                    f"reference level {ref!r} of column '{col.spec.name}' does not occur; its levels are {names}"
                )
            if len(names) < 2:
                raise InputError(
                    f"{self.where!r}: text column '{col.spec.name}' has only the level {ref!r}; drop it "
                    f"({_both(f'exclude=[{col.spec.name!r}]', '--exclude ' + _cli_value(col.spec.name))})"
                )
            chosen[col.spec.name] = ref
            blocks.append((col, (names, ids, names.index(ref))))
        out["X"], out["names"] = self._design(blocks, rows)
        out["reference_levels"] = chosen
        for col in self.cols:
            if col.spec.role == "target":
                out["target"] = self._target(col, rows)
            elif col.spec.role == "weights":
                w = self._values(col)[:rows]
                w.flags.writeable = False
                out["weights"] = w
            elif col.spec.role == "extra":
                out["extra"][col.spec.name] = self._labels(col, rows)
        lines = self.store["lines"][:rows]
        lines.flags.writeable = False
        out["lines"] = lines
        out["places"] = None if not self.places else {
            c.spec.name: -c.place for c in self.cols
            if c.place != NONE and c.n_text == 0 and not c.spec.text_only}
        return out

    def _design(self, blocks: list[tuple[_Col, Any]], rows: int) -> tuple[np.ndarray, tuple[str, ...]]:
        names: list[str] = []
        for col, text in blocks:
            if text is None:
                names.append(col.spec.name)
            else:
                levels, _, ref = text
                names += [f"{col.spec.name}={lv}" for i, lv in enumerate(levels) if i != ref]
        in_block = all(text is None and col.values == "block" and col.slot == j for j, (col, text) in enumerate(blocks))
        if blocks and in_block and self.store["block"].shape[1] == len(blocks):
            X = self.store["block"][:rows]
        else:
            X = np.empty((rows, len(names)))
            parts = []  # (numbers, None) or (codes, the codes of the indicator columns)
            for col, text in blocks:
                if text is None:
                    parts.append((self._values(col), None))
                else:
                    _, ids, ref = text
                    parts.append((self.store[col.codes], [code for i, code in enumerate(ids) if i != ref]))
            step = max(1, (1 << 20) // (8 * max(1, len(names))))  # rows of about 1 MB of X at a time
            for lo in range(0, rows, step):
                hi = min(rows, lo + step)
                j = 0
                for source, wanted in parts:
                    if wanted is None:
                        X[lo:hi, j] = source[lo:hi]
                        j += 1
                        continue
                    cut = source[lo:hi]
                    for code in wanted:
                        X[lo:hi, j] = cut == code
                        j += 1
            self.store.arrays.pop("block", None)
        X.flags.writeable = False
        return X, tuple(names)

    def _target(self, col: _Col, rows: int) -> tuple:
        if col.n_text or col.spec.categorical:
            return self._labels(col, rows)
        v = self._values(col)[:rows]
        step = 1 << 16  # converted a slice at a time: no full-length temporary beside the tuple
        if col.integers and max(float(v.max(initial=0)), -float(v.min(initial=0))) < _EXACT_INT:
            kind = np.int64
        else:
            kind = np.float64
        return tuple(_Sized([v[lo:lo + step] for lo in range(0, rows, step)], kind, rows))
