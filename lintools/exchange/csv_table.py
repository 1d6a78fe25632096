"""Reading a CSV file into a design matrix: typed columns, strict numbers, bounded reads.

Rules (the command line uses them through the same function, so they hold there too;
its options are named beside the Python arguments):

* **File.** A regular file of UTF-8 text (a byte-order mark is skipped), read through
  :class:`lintools.support.files.BoundedFile`: at most ``max_bytes`` (default 2 GiB,
  ``--max-bytes``), counted while reading.  A line longer than ``max_line_bytes``
  (default 1 MiB, ``--max-line-bytes``) or a cell longer than 131072 bytes (or the line
  limit, if smaller) is refused with its line named.  A NUL byte or bytes that are not
  UTF-8 are refused with the line named.
* **Header and separator.** The first line is the header; it is required.  Column names
  are stripped of white space, must be distinct, non-empty and printable; a first line
  whose every field is a number is taken for data and refused.  The separator is
  ``delimiter`` (``--delimiter``) when given, else the one of comma, semicolon and tab
  that occurs most often in the header line outside quotes (a comma when none occurs; a
  tie between two of them is refused: name the separator).  Every line has as many
  fields as the header; blank lines are skipped.  Cells may be quoted with ``"`` (a
  quoted cell may hold separators, line breaks and doubled quotes).  White space around
  a cell (space, tab, vertical tab, form feed, ``\\x1c``-``\\x1f``) is removed.
* **Numbers.** A number is an optional sign, ASCII digits with at most one decimal mark
  and digits on at least one side of it, and an optional exponent (``e``/``E``, optional
  sign, digits).  The decimal mark is ``.``, or ``,`` with ``decimal=","``
  (``--decimal ,``; the separator must then be another character).  Its value is the
  correctly rounded double; a number beyond the range of a double is refused.
* **Missing values.** An empty cell, or a cell equal (after stripping, case-sensitive) to
  one of ``missing_values`` (default :data:`MISSING_VALUES`: NA, N/A, NaN, nan, null,
  NULL, None; ``--missing-values`` takes a comma-separated list that replaces it).  A
  missing value in a used column is refused with its line and column named, unless
  ``drop_missing=True`` (``--drop-missing``): then such lines are dropped and counted.
* **Near-numbers.** A cell that a looser reader would take for a number is refused with
  its line, column and the reason, unless the column is declared categorical or the
  token missing: what Python's ``float`` reads but the grammar does not (``1_000``,
  ``inf``, ``nan`` in any case, non-ASCII digits), a number with the other decimal mark
  (``2,5``), with thousands separators (``1,200``, ``1 000``, ``1'000``) or a percent
  sign (``12%``).
* **Column types** are decided from the whole column.  A column of numbers (and missing
  values) is numeric.  A column with both numbers and other cells is refused, naming the
  first cell of the smaller kind with its line, and the remedies: fix the cell, declare
  the token missing, or declare the column categorical.  A feature column of text
  becomes indicator columns, one per level except the reference level, named
  ``column=level`` (the reference is the first level in sorted order unless
  ``reference_levels`` names another) when it is declared (``categorical=[...]``,
  ``--categorical NAME``; every present cell is then a level, numbers included) or when
  it has at most :data:`MAX_LEVELS` levels.  An undeclared text column with more levels
  is refused: as an identifier when it has more distinct values than half its rows, else
  for its number of levels; the remedy is ``exclude=[...]`` (``--exclude NAME``) or
  declaring it.  An undeclared column of dates or times (ISO dates and date-times,
  d/m/y or m/d/y dates, clock times) is refused; exclude it.
* **Target and others.** The target column is numeric (returned as ints when every cell
  is written as an integer, without decimal mark or exponent, and below 2**53 in
  magnitude, else as floats) or text labels (returned as str; declaring the target
  categorical reads numbers as labels too).  The weights column must be numeric.  Extra
  columns are returned as their stripped text.  Unused columns are only split, never
  typed.
* **Memory and speed.** The file is streamed: only a window of about one chunk (1 MB) of
  its bytes is held, and its cells are converted a chunk at a time straight into the
  arrays returned (numbers into one float64 block, text into small integer codes of its
  levels, a numeric target of small whole numbers into int8 until a value needs more).
  Peak memory is the returned table plus at most half the file's size (measured with
  ``benchmarks/read_table.py``: 1.6 times the file for a numeric file of %.6g numbers; 4.27
  times for one-character cells, where the returned float64 matrix alone is 3.84 times the
  file and the table 4.16 times, so that no reader returning this table stays under 4
  times).  A chunk whose every line is one-digit cells is read as a grid of bytes, and a
  column whose every cell in a chunk is a sign and at most four digits is read from the
  bytes (:mod:`lintools.exchange.csv_whole`; such a cell is a whole number of the grammar,
  exact in float64): one-character cells read about 5 times faster than with
  :func:`numpy.loadtxt`.  Other numeric columns are parsed by NumPy's compiled text
  reader, which on the bytes these columns may hold accepts exactly the grammar above
  once its result is required to be finite; rows it refuses are found by halving and
  their cells read one by one, so the errors and values are those of the rules, never of
  the reader.  A file of numbers with decimals is therefore read at about two thirds of
  that reader's speed (the reader itself plus the checks and the chunking).
* **Decimals written.** With ``written_decimals=True`` (the command line always asks)
  the table records, for every numeric column it returns (features that are numbers, a
  numeric target, the weights), the decimal places of its least precise number as
  written, over the rows kept: ``f - E`` for a number with ``f`` digits after its
  decimal mark and exponent ``E`` (``12.5`` -> 1, ``12.50`` -> 2, ``1200`` and ``7`` ->
  0: an integer's digits count as written, its trailing zeros included; ``1.5e3`` -> -2,
  ``15e-1`` -> 1).  Half a unit of that place, :math:`\tfrac12 10^{-d}`, bounds the
  absolute rounding error of every cell of the column (see
  :mod:`lintools.exchange.csv_decimals`); :meth:`Table.data_precision` turns it into the
  data precision a fit's accuracy record is stated at.  It is found on the bytes each
  chunk is parsed from (it multiplies the reading time by about 1.4 for a numeric file of
  ``%.6g`` numbers and 1.08 for cells of one-digit integers: the ``read_table+decimals``
  row of ``benchmarks/read_table.py``), so it is asked for, not done by default.
"""

from __future__ import annotations

import dataclasses
import os
import re
from dataclasses import dataclass
from typing import Iterable, Mapping, Sequence

import numpy as np

from ..models.accuracy import UNIT, Precision, half_unit
from ..support.csv_cells import STRIP, TEXT, classify, is_number
from .csv_chunks import Layout, header_record, pieces
from .csv_columns import MAX_LEVELS, Columns, Spec
from ..support.errors import InputError
from ..support.files import BoundedFile, file_path
from ..support.validate import as_texts, check_flag

__all__ = ["MAX_BYTES", "MAX_FIELD_BYTES", "MAX_LEVELS", "MAX_LINE_BYTES", "MISSING_VALUES", "Table",
           "read_header", "read_table"]

#: Tokens read as missing values unless the caller gives its own list.
MISSING_VALUES = ("NA", "N/A", "NaN", "nan", "null", "NULL", "None")
#: Largest file read unless the caller allows more (``max_bytes``).
MAX_BYTES = 2 * 1024**3
#: Longest line read unless the caller allows more (``max_line_bytes``).
MAX_LINE_BYTES = 1 << 20
#: Longest cell read (or the line limit, if smaller).
MAX_FIELD_BYTES = 131072
_SEPARATORS = {",": "commas", ";": "semicolons", "\t": "tabs"}
_QUOTED = re.compile(rb'"[^"]*"')
_BOM = b"\xef\xbb\xbf"


@dataclass(frozen=True)
class Table:
    """A design read from a CSV file.

    Attributes
    ----------
    X : ndarray, shape (n, q)
        Features (read-only), text columns expanded to indicators.
    names : tuple of str
        Names of the columns of ``X``.
    target : tuple
        The target column's values: ints if every value is a whole number below 2**53 in
        magnitude, floats if every value is a number, str labels otherwise.
    weights : ndarray or None
        The weights column (read-only), when one was named.
    extra : dict
        Other named columns as their stripped text (for example a probability or group column).
    reference_levels : dict
        The reference level of every text feature column.
    lines : ndarray
        The file line number (1 = header) on which every kept row starts (read-only).
    dropped : int
        Lines dropped because of missing values (only with ``drop_missing=True``).
    delimiter : str
        The separator the file was read with.
    written_decimals : dict or None
        With ``written_decimals=True``: for every numeric column returned (by name: the
        numeric features, a numeric target, the weights) the decimal places of its least
        precise number as written in the file (negative when its last digit stands left
        of the units; see the module's rules).  None when not asked for.
    source : str
        The file's name (without its folder).
    """

    X: np.ndarray
    names: tuple[str, ...]
    target: tuple
    weights: np.ndarray | None
    extra: dict
    reference_levels: dict
    lines: np.ndarray
    dropped: int
    delimiter: str = ","
    written_decimals: dict | None = None
    source: str = ""

    def data_precision(self, names: Sequence[str] | None = None, target: str | None = None) -> Precision:
        """The precision of the data as written in the file, for a fit's accuracy record
        (the ``data_precision`` argument of :func:`lintools.least_squares` and
        :func:`lintools.logistic`).

        Every numeric column of ``names`` (default :attr:`names`, the columns of ``X``)
        carries an absolute rounding error of half a unit of its :attr:`written_decimals`
        place beside the relative rounding ``u = 2**-53`` of float64; indicator columns of
        text levels are exact.  ``target``: the name of the numeric target column, when the
        target's rounding counts (least squares); its decimals are taken from the table.
        """
        if self.written_decimals is None:
            raise InputError("this table was read without its written decimals; read it with "
                             "read_table(..., written_decimals=True)")
        names = self.names if names is None else tuple(_names(names, "names", ordered=True))
        for name in names:
            if name not in self.names:
                raise InputError(f"'{name}' is not a column of this table's X; its columns are "
                                 f"{', '.join(self.names)}")
        if target is not None and not isinstance(target, str):
            raise InputError(f"target must be the name (str) of the target column, or None; got {target!r:.80}")
        dec = self.written_decimals
        x_abs = np.array([half_unit(dec[n]) if n in dec else 0.0 for n in names])
        y_abs = half_unit(dec[target]) if target is not None and target in dec else 0.0
        return Precision(np.full(len(names), UNIT), x_abs, y_absolute=y_abs,
                         what=f"the decimals written in {self.source or 'the file'}")


def _names(value: Iterable[str] | None, label: str, *, ordered: bool = False) -> list[str]:
    if value is None:
        return []
    return list(as_texts(value, label, "pass a list of column names (str)", ordered=ordered))


def _limit(value: object, label: str) -> int:
    if isinstance(value, bool) or not isinstance(value, (int, np.integer)) or value < 1:
        raise InputError(f"{label} must be a whole number of bytes >= 1; got {value!r}")
    return int(value)


def _delimiter(value: str | None, decimal: str) -> str | None:
    if value is None:
        return None
    if (not isinstance(value, str) or len(value) != 1 or not value.isascii() or value in "\"\r\n\x00 .+-"
            or value.isalnum()):
        raise InputError(
            f"delimiter must be one ASCII character other than a letter, digit, quote, space, line end, '.', '+' "
            f"or '-'; got {value!r}"
        )
    if value == decimal:
        raise InputError(f"the separator and the decimal mark are both {value!r}; they must differ")
    return value


def _missing(value: Iterable[str] | None) -> frozenset[bytes]:
    tokens = MISSING_VALUES if value is None else as_texts(value, "missing_values", "pass a list of str tokens",
                                                           ordered=False)
    return frozenset({b""} | {t.strip(STRIP.decode()).encode("utf-8") for t in tokens})


def _first_line(src: BoundedFile, max_line: int) -> tuple[int, bytes]:
    """Where the header starts (after a byte-order mark) and its first physical line (at most
    ``max_line + 2`` bytes of it, read onto the window)."""
    src.fill(len(_BOM))
    start = len(_BOM) if src.buf.startswith(_BOM) else 0
    stop = start + max_line + 2
    while src.buf.find(b"\n", start, stop) < 0 and src.end < stop and not src.eof:
        src.more()
    end = src.buf.find(b"\n", start, stop)
    return start, bytes(src.buf[start:end if end >= 0 else stop]).split(b"\r", 1)[0]


def _header(src: BoundedFile, where: str, delimiter: str | None, decimal: str, max_line: int,
            limit_hint: str) -> tuple[Layout, int, int]:
    """The layout of the file (names, separator) and the position and line number after the header."""
    start, first = _first_line(src, max_line)
    if not first.strip(STRIP):
        raise InputError(f"{where!r} is empty or has an empty first line; a header line is required")
    if delimiter is None:
        bare = _QUOTED.sub(b"", first[: max_line + 1])
        counts = {s: bare.count(s.encode()) for s in _SEPARATORS}
        best = max(counts.values())
        tied = [s for s, c in counts.items() if c == best]
        if best and len(tied) > 1:
            shown = " and ".join(f"{counts[s]} {_SEPARATORS[s]}" for s in tied)
            raise InputError(
                f"{where!r}: the header line has {shown}, so the separator is ambiguous; name it "
                "(delimiter=';' / --delimiter ';')"
            )
        delimiter = tied[0] if best else ","
        if delimiter == decimal:
            raise InputError(
                f"{where!r}: the header is separated by {delimiter!r}, which is also the decimal mark asked for; "
                "a file with decimal commas must use another separator (usually ';')"
            )
    lay = Layout(where=where, src=src, delimiter=delimiter.encode(), names=(), decimal=decimal.encode(),
                 max_line=max_line, max_field=min(MAX_FIELD_BYTES, max_line), line_hint=limit_hint)
    fields, pos, line = header_record(lay, start)
    names = [f.strip(STRIP.decode()) for f in fields]
    if all(is_number(n.encode("utf-8"), lay.decimal) for n in names):
        raise InputError(
            f"{where!r}: the first line looks like data ({', '.join(names[:4])}); a header line with column "
            "names is required"
        )
    for j, name in enumerate(names):
        if not name:
            raise InputError(f"{where!r}: column {j + 1} of the header has no name")
        if not name.isprintable():
            raise InputError(f"{where!r}: column {j + 1} of the header, {name!r}, holds characters that are not "
                             "printable; rename the column")
    if len(set(names)) != len(names):
        dup = next(n for n in names if names.count(n) > 1)
        raise InputError(f"{where!r}: the header names column '{dup}' more than once")
    return dataclasses.replace(lay, names=tuple(names)), pos, line


def _separator_hint(names: Sequence[str], delimiter: str) -> str:
    joined = "".join(names)
    for sep, word in _SEPARATORS.items():
        if sep != delimiter and joined.count(sep):
            shown = "tab" if sep == "\t" else repr(sep)
            cli = "tab" if sep == "\t" else f"'{sep}'"
            return (f"; the header holds {shown} {joined.count(sep)} times: if the file is separated by {word}, "
                    f"pass delimiter={sep!r} (--delimiter {cli})")
    return ""


def _references(value: Mapping[str, str] | None) -> dict[str, str]:
    """``reference_levels`` checked: a mapping of feature column names (str) to levels (str)."""
    if value is None:
        return {}
    if not isinstance(value, Mapping):
        raise InputError(f"reference_levels must be a dict of column name to level (both str); got "
                         f"{type(value).__name__}: pass for example {{'colour': 'red'}}")
    for name, level in value.items():
        if not isinstance(name, str) or not isinstance(level, str):
            raise InputError(f"reference_levels must map column names (str) to levels (str); got {name!r}: "
                             f"{level!r:.80}: write the level as it is written in the file")
    return dict(value)


def _open(path: str | os.PathLike, delimiter: str | None, decimal: str, max_bytes: object,
          max_line_bytes: object) -> tuple[Layout, int, int]:
    """The file opened and its header read: the layout, and the position and line after the header
    (the caller closes ``layout.src``)."""
    where = file_path(path, "CSV file")
    if not isinstance(decimal, str) or decimal not in (".", ","):
        raise InputError(f"decimal must be '.' or ','; got {decimal!r:.80}")
    delimiter = _delimiter(delimiter, decimal)
    max_bytes = _limit(max_bytes, "max_bytes")
    max_line = _limit(max_line_bytes, "max_line_bytes")
    if os.path.isdir(where):
        raise InputError(f"{where!r} is a directory; pass the path of a CSV file")
    src = BoundedFile(where, "CSV file", max_bytes, limit_hint="allow more with max_bytes= / --max-bytes")
    try:
        return _header(src, where, delimiter, decimal, max_line,
                       "allow more with max_line_bytes= / --max-line-bytes")
    except BaseException:
        src.close()
        raise


def read_header(
    path: str | os.PathLike,
    *,
    delimiter: str | None = None,
    decimal: str = ".",
    max_bytes: int = MAX_BYTES,
    max_line_bytes: int = MAX_LINE_BYTES,
) -> tuple[str, ...]:
    """The column names of a CSV file, by the header rules of :func:`read_table` (only the header is read)."""
    lay = _open(path, delimiter, decimal, max_bytes, max_line_bytes)[0]
    lay.src.close()
    return lay.names


def read_table(
    path: str | os.PathLike,
    *,
    target: str | None,
    features: Sequence[str] | None = None,
    weights: str | None = None,
    extra: Sequence[str] = (),
    drop_missing: bool = False,
    reference_levels: Mapping[str, str] | None = None,
    delimiter: str | None = None,
    decimal: str = ".",
    missing_values: Iterable[str] | None = None,
    categorical: Sequence[str] = (),
    exclude: Sequence[str] = (),
    max_bytes: int = MAX_BYTES,
    max_line_bytes: int = MAX_LINE_BYTES,
    written_decimals: bool = False,
) -> Table:
    """Read ``path`` and return the target, the feature matrix and the named extra columns.

    The rules are stated in the module docstring (:mod:`lintools.exchange.csv_table`).
    ``features=None`` takes every column that is not the target, the weights, an extra
    or excluded.

    Parameters
    ----------
    path : str or os.PathLike
        A regular file of UTF-8 CSV text with a header line.
    target, weights : str or None
        Names of the response column and of a case-weights column.
    features : list of str, optional
        Feature columns, in the order of the columns of ``X``.
    extra : list of str
        Other columns returned as text.
    drop_missing : bool
        Drop lines with a missing value in a used column instead of refusing them.
    reference_levels : dict, optional
        Reference level of text feature columns (default: the first in sorted order).
    delimiter : str, optional
        The separator (default: detected from the header line).
    decimal : {".", ","}
        The decimal mark of numbers.
    missing_values : list of str, optional
        Tokens read as missing (default :data:`MISSING_VALUES`); an empty cell always is.
    categorical : list of str
        Columns whose cells are levels (indicator columns for features, labels for the target).
    exclude : list of str
        Columns left out of the default feature set.
    max_bytes, max_line_bytes : int
        Size limits of the file and of one line.
    written_decimals : bool
        Record the decimal places written in every numeric column
        (:attr:`Table.written_decimals`; default False: it costs reading time).

    Returns
    -------
    Table

    References
    ----------
    Shafranovich, Y. (2005). Common Format and MIME Type for Comma-Separated Values (CSV)
    Files. RFC 4180 (the quoting rules).  Gay, D. M. (1990). Correctly rounded
    binary-decimal and decimal-binary conversions. AT&T Bell Laboratories Numerical
    Analysis Manuscript 90-10 (the conversion behind Python's ``float`` and NumPy's reader).
    """
    lay, pos, line = _open(path, delimiter, decimal, max_bytes, max_line_bytes)
    with lay.src:
        return _table(lay, pos, line, target, features, weights, extra, drop_missing, reference_levels,
                      missing_values, categorical, exclude, check_flag(written_decimals, "written_decimals"))


def _table(lay: Layout, pos: int, line: int, target: str | None, features: Sequence[str] | None,
           weights: str | None, extra: Sequence[str], drop_missing: bool, reference_levels: Mapping[str, str] | None,
           missing_values: Iterable[str] | None, categorical: Sequence[str], exclude: Sequence[str],
           places: bool = False) -> Table:
    """The rest of :func:`read_table`, the header read."""
    drop_missing = check_flag(drop_missing, "drop_missing")
    cols = _ColumnNames(lay)
    roles = cols.roles(target, weights, extra)
    feats = cols.features(features, [c for c, _ in roles], exclude)
    declared = _names(categorical, "categorical")
    for c in declared:
        cols.index_of(c, "categorical")
        if c not in feats and c != target:
            raise InputError(f"categorical column '{c}' is neither a feature nor the target; declare only columns "
                             "that are used")
    refs = _references(reference_levels)
    for name in refs:
        if name not in feats:
            raise InputError(f"reference level given for '{name}', which is not a feature column")
    specs = [Spec(cols.index[c], c, role, c in declared) for c, role in roles + [(f, "feature") for f in feats]]
    out = _read_columns(lay, pos, line, specs, _missing(missing_values), drop_missing, places).finish(refs)
    return Table(X=out["X"], names=out["names"], target=out["target"], weights=out["weights"],
                 extra=out["extra"], reference_levels=out["reference_levels"], lines=out["lines"],
                 dropped=out["dropped"], delimiter=lay.delimiter.decode(), written_decimals=out["places"],
                 source=os.path.basename(lay.where))


class _ColumnNames:
    """The header's names and the checks of the column arguments against them."""

    def __init__(self, lay: Layout) -> None:
        self.where, self.header = lay.where, list(lay.names)
        self.index = {h: j for j, h in enumerate(self.header)}
        self.hint = _separator_hint(self.header, lay.delimiter.decode())

    def index_of(self, name: object, role: str) -> int:
        """The position of column ``name`` (an InputError naming the role when it is not a str in the header)."""
        if not isinstance(name, str):
            raise InputError(f"the {role} column must be named by a str; got {name!r:.80}")
        if name not in self.index:
            raise InputError(f"{role} column '{name}' is not in {self.where!r}; its columns are: "
                             f"{', '.join(self.header)}{self.hint}")
        return self.index[name]

    def roles(self, target: str | None, weights: str | None, extra: Sequence[str]) -> list[tuple[str, str]]:
        """``(name, role)`` of the target, the weights and the extra columns, each named once."""
        roles = ([(target, "target")] if target is not None else []) + ([(weights, "weights")] if weights is not None
                                                                        else [])
        roles += [(c, "extra") for c in _names(extra, "extra")]
        for c, role in roles:
            self.index_of(c, role)
        special = [c for c, _ in roles]
        if len(set(special)) != len(special):
            dup = next(c for c in special if special.count(c) > 1)
            raise InputError(f"column '{dup}' is named twice among the target, weights and extra columns")
        return roles

    def features(self, features: Sequence[str] | None, special: list[str], exclude: Sequence[str]) -> list[str]:
        """The feature columns: those named, or every column not ``special`` nor excluded."""
        excluded = _names(exclude, "exclude")
        for c in excluded:
            self.index_of(c, "excluded")
            if c in special:
                raise InputError(f"column '{c}' is both excluded and named as the target, weights or an extra column")
        if features is None:
            return [h for h in self.header if h not in special and h not in excluded]
        feats = _names(features, "features", ordered=True)
        for f in feats:
            self.index_of(f, "feature")
            if f in special:
                raise InputError(f"column '{f}' is named both as a feature and as the target, weights or an extra "
                                 "column")
            if f in excluded:
                raise InputError(f"column '{f}' is named both as a feature and as excluded")
        if len(set(feats)) != len(feats):
            raise InputError(f"features names column '{next(f for f in feats if feats.count(f) > 1)}' twice")
        return feats


def _read_columns(lay: Layout, pos: int, line: int, specs: list[Spec], missing: frozenset[bytes],
                  drop_missing: bool, places: bool = False) -> Columns:
    """The cells of the used columns after the header, converted about 1 MB at a time."""
    text_first = _text_first(lay, pos, specs, missing)
    if any(is_number(t, lay.decimal) for t in missing):  # the compiled reader would read such a token
        text_first |= {s.index for s in specs}
    cols = Columns(lay.where, specs, text_first, lay.decimal, missing, drop_missing, places)
    size, start = max(lay.src.size_hint, pos + 1), pos
    for piece, pos in pieces(lay, pos, line, cols.plan):
        cols.add(piece, int((cols.rows + piece.lines.size) * (size - start) / max(pos - start, 1) * 1.01) + 16)
    return cols


def _text_first(lay: Layout, pos: int, specs: list[Spec], missing: frozenset[bytes]) -> set[int]:
    """Columns whose first data cell is text: they are read as tokens from the start."""
    lay.src.fill(pos + 1)
    if pos >= lay.src.end:
        return set()
    try:
        fields, _, _ = header_record(lay, pos)
    except InputError:
        return set()  # the reading proper names the problem
    if len(fields) != lay.k:
        return set()
    out = set()
    for s in specs:
        tok = fields[s.index].encode("utf-8").strip(STRIP)
        if classify([tok], lay.decimal, missing, False).kinds[0] == TEXT:
            out.add(s.index)
    return out

