"""A model's inputs read from a CSV file: the design matrix in the model's own column order.

A model's inputs are its names: a numeric column each, except the indicator columns
``field=level`` of its categorical fields (:mod:`lintools.support.categories`), which come from
the text column ``field``.  :func:`read_inputs` reads the numeric columns as features
and the text columns as text through :func:`lintools.read_table` (so its rules hold:
strict numbers, missing values, limits), then builds the indicator columns from the
text: a cell with a level of the field sets the indicator of that level (a level without
one, such as the reference level, sets none), and a cell with a level the field does
not list is an unseen category, refused with the file, line, column and cell named.  A
numeric input whose column holds text is refused the same way.

The design matrix is C-ordered float64, numbers as read and indicators exactly 0 or 1,
the values :func:`lintools.read_table` gives a fit on the same file: a model scores the
rows with the numbers its fit would give (bit for bit).
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any, Sequence

import numpy as np

from ..support.categories import CategoricalField, FieldColumns, LevelMatch, field_layout
from ..support.csv_cells import is_number, number_reason
from ..support.errors import InputError

__all__ = ["Inputs", "model_inputs", "read_inputs", "first_missing", "read_model"]


@dataclass(frozen=True)
class Inputs:
    """The CSV columns a model needs."""

    names: tuple[str, ...]  # the model's input names (its design's columns)
    numeric: tuple[str, ...]  # the names read as numeric columns
    layouts: tuple[FieldColumns, ...]  # the categorical fields and their indicator columns
    columns: tuple[str, ...]  # every CSV column used, in the model's order


def model_inputs(names: Sequence[str], fields: Sequence[CategoricalField]) -> Inputs:
    """The inputs of a model with ``names`` and categorical ``fields`` (checked to agree)."""
    layouts = field_layout(names, fields)
    first = {lay.columns[0]: lay.field.name for lay in layouts}
    inside = {j for lay in layouts for j in lay.columns}
    numeric = tuple(n for j, n in enumerate(names) if j not in inside)
    columns = tuple(first.get(j, n) for j, n in enumerate(names) if j in first or j not in inside)
    return Inputs(tuple(names), numeric, tuple(layouts), columns)


def _not_number(path: str, column: str, options: dict[str, Any]) -> InputError | None:
    """The first cell of ``column`` that is not a number (missing values aside), as an
    error naming its line; None when every present cell is a number."""
    from .csv_table import read_table

    table = read_table(path, target=None, features=[], extra=[column], drop_missing=True, **options)
    decimal = options.get("decimal", ".").encode()
    for cell, line in zip(table.extra[column], table.lines.tolist()):
        token = cell.encode("utf-8")
        if not is_number(token, decimal):
            why = number_reason(token, decimal)
            return InputError(
                f"{path!r} line {line}, column '{column}': {cell[:80]!r} "
                + (f"{why}, and" if why else "is not a number, but")
                + f" the model uses '{column}' as a number; correct the cell or leave the line out"
            )
    return None


def read_inputs(path: str, inputs: Inputs, options: dict[str, Any], *, target: str | None = None,
                weights: str | None = None, extra: Sequence[str] = (), drop_missing: bool = False
                ) -> tuple[Any, np.ndarray]:
    """Read ``path`` and return the table (target, weights, extra columns, lines) and the
    design matrix of ``inputs`` (rows of the table, columns in the model's order).

    ``options`` are further keyword arguments of :func:`lintools.read_table` (the table
    options of the command line); a text column of the model named in ``categorical`` is
    read as text anyway.
    """
    from .csv_table import read_table

    options = dict(options)
    fields = [lay.field.name for lay in inputs.layouts]
    if options.get("categorical"):
        options["categorical"] = [c for c in options["categorical"] if c not in fields]
    plain = {k: v for k, v in options.items() if k not in ("categorical", "exclude")}
    kwargs = dict(target=target, features=list(inputs.numeric), weights=weights, extra=[*fields, *extra],
                  drop_missing=drop_missing, **options)
    try:
        table = read_table(path, **kwargs)
    except InputError:
        for column in inputs.numeric:  # a numeric input holding text: say so, with its line
            problem = _not_number(path, column, plain)
            if problem is not None:
                raise problem from None
        raise
    if table.names != inputs.numeric:
        for column in inputs.numeric:
            problem = _not_number(path, column, plain)
            if problem is not None:
                raise problem
        declared = [c for c in inputs.numeric if c in (options.get("categorical") or ())]
        raise InputError(f"{path!r}: the column '{declared[0] if declared else '?'}' was declared categorical, but "
                         "the model uses it as a number; leave it out of the categorical columns")
    n = table.lines.size
    X = np.zeros((n, len(inputs.names)))
    position = {name: j for j, name in enumerate(inputs.names)}
    for k, name in enumerate(inputs.numeric):
        X[:, position[name]] = table.X[:, k]
    for lay in inputs.layouts:
        _indicators(X, lay, table.extra[lay.field.name], table.lines, path, options.get("decimal", "."))
    return table, X


def _indicators(X: np.ndarray, lay: FieldColumns, cells: Sequence[str], lines: np.ndarray, path: str,
                decimal: str) -> None:
    """Set the indicator columns of one categorical field from its cells."""
    field = lay.field
    match = LevelMatch(field, decimal)
    column_of = {field.levels.index(lv): j for lv, j in zip(lay.levels, lay.columns)}
    lookup: dict[str, int] = {}  # cell -> column of X, or -1 (a level without one)
    for i, cell in enumerate(cells):
        j = lookup.get(cell)
        if j is None:
            level = match.index(cell)
            if level is None:
                shown = ", ".join(repr(lv) for lv in field.levels[:12]) + (", ..." if len(field.levels) > 12 else "")
                raise InputError(
                    f"{path!r} line {int(lines[i])}, column '{field.name}': {cell[:80]!r} is not a level the model "
                    f"knows ({shown}); a category the model was not built with cannot be scored: correct the cell "
                    "or leave the line out"
                )
            j = lookup[cell] = column_of.get(level, -1)
        if j >= 0:
            X[i, j] = 1.0


def first_missing(path: str, columns: Sequence[str], kept: np.ndarray, options: dict[str, Any]
                  ) -> tuple[int, str] | None:
    """The first line (and a column) of ``path`` whose row was dropped for a missing value
    in one of ``columns`` (``kept``: the lines of the rows that were not); None if none was."""
    from .csv_table import read_table

    plain = {k: v for k, v in options.items() if k not in ("categorical", "exclude")}
    every = read_table(path, target=None, features=[], extra=[], **plain).lines
    dropped = np.setdiff1d(every, kept)
    if dropped.size == 0:
        return None
    line = int(dropped[0])
    for column in columns:
        alone = read_table(path, target=None, features=[], extra=[column], drop_missing=True, **plain)
        if line not in set(alone.lines.tolist()):
            return line, column
    return line, columns[0] if columns else "?"


def read_model(path: str) -> Any:
    """The model in a lintools JSON model file (a fit record) or a PMML document (a
    :class:`lintools.DeliveredModel`), recognised by its first byte, never by its name.

    The file is read once, through the bounded reader (a FIFO or a device is refused,
    not waited on), and checked for consistency by the JSON or PMML reader.
    """
    from . import model_files as model_io
    from ..models.kinds import kind_of
    from . import pmml
    from ..support.files import read_bounded

    try:
        raw = read_bounded(path, "model file", max(model_io.MAX_BYTES, pmml.MAX_BYTES))
    except InputError as exc:
        raise InputError(f"cannot read the model file ({exc})") from None
    head = raw[:256].removeprefix(b"\xef\xbb\xbf").lstrip()
    if head.startswith(b"{"):
        fit = model_io.load_bytes(raw, path)
        if kind_of(fit) is None:
            raise InputError(f"model file {path!r} holds a {fit.kind!r} record, not a fitted model")
        return fit
    if head.startswith(b"<") or head.startswith((b"\xff\xfe", b"\xfe\xff")):  # XML, also in UTF-16
        return pmml.read_pmml_bytes(raw, path)
    raise InputError(
        f"{path!r} is neither a lintools JSON model file (starts with '{{') nor a PMML document "
        "(XML, starts with '<'); pass the delivered model file"
    )
