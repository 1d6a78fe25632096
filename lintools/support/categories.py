"""Categorical inputs of a model: a text column and the indicator columns it stands for.

A text column ``c`` enters a linear model as indicator columns named ``c=l`` (1 where the
cell is the level ``l``, else 0), the names :func:`lintools.read_table` gives them.  A
:class:`CategoricalField` records the column and every level the model accepts; the
levels without an indicator column add nothing to the linear predictor (the reference
level of :func:`lintools.read_table`, or any value a PMML document lists without a
``CategoricalPredictor``), and a cell holding none of the levels is an unseen category,
which a model cannot score.

:func:`field_layout` checks a model's fields against its names (so a model file that
loads, and a model that is written, agree with themselves); :func:`fields_from_references`
builds the fields of a fit from the reference levels of the table it was fitted on
(:attr:`lintools.Table.reference_levels`); :class:`LevelMatch` maps cells to levels.

Reference: Data Mining Group, PMML 4.4 - Data Dictionary (``DataField`` with ``Value``
elements: the valid values of a categorical field; ``dataType`` says how values compare)
and Regression (``CategoricalPredictor``: the term is 1 when the field's value equals
``value``, 0 otherwise).
"""

from __future__ import annotations

import math
from collections.abc import Mapping
from dataclasses import dataclass
from typing import Any, Sequence

from .csv_cells import is_number
from .errors import InputError
from .validate import name_problem, text_problem

__all__ = ["CategoricalField", "DATA_TYPES", "FieldColumns", "LevelMatch", "field_layout", "fields_from_references",
           "with_references"]

#: How the cells of a categorical field compare with its levels: as text, or as numbers
#: (PMML's ``dataType`` of the field).
DATA_TYPES = ("string", "integer", "float", "double")


@dataclass(frozen=True)
class CategoricalField:
    """A text input column of a model and the levels it accepts.

    Attributes
    ----------
    name : str
        The column (in a CSV file, its header name).
    levels : tuple of str
        Every level the model accepts.  The model's indicator columns are named
        ``name=level`` for the levels that have a coefficient; the other levels (the
        reference level) add nothing.  A cell with any other value is an unseen category.
    data_type : str
        ``"string"``: a cell matches a level when their texts are equal; ``"integer"``,
        ``"float"`` or ``"double"`` (a PMML field of numbers used as categories): when both
        are numbers of equal value (``"1.0"`` matches ``"1"``).
    """

    name: str
    levels: tuple[str, ...]
    data_type: str = "string"


@dataclass(frozen=True)
class FieldColumns:
    """Where a field's indicator columns stand among a model's names."""

    field: CategoricalField
    columns: tuple[int, ...]  # positions in the model's names
    levels: tuple[str, ...]  # the level of each of those columns

    @property
    def without_column(self) -> tuple[str, ...]:
        """The levels that have no indicator column (they add nothing)."""
        return tuple(lv for lv in self.field.levels if lv not in self.levels)


def _text(value: Any, what: str) -> str:
    if not isinstance(value, str):
        raise InputError(f"{what} must be text (a str); got {type(value).__name__}")
    return value


def field_layout(names: Sequence[str], fields: Sequence[CategoricalField]) -> list[FieldColumns]:
    """The indicator columns of each field among ``names``, after checking that they agree.

    Refused (:class:`InputError`, naming the field): a field that is not a
    :class:`CategoricalField`; a field name that is unusable, repeated, or also a name
    of the model (one column cannot be both numbers and categories); levels that are
    empty, repeated or unprintable, or an unknown data type; a field with no indicator
    column among ``names``; a name ``field=value`` whose value is not a level; a name
    that two fields claim (fields ``a`` and ``a=b`` both claim ``a=b=c``); indicator
    columns in another order than their levels.
    """
    names = list(names)
    position = {n: j for j, n in enumerate(names)}
    out: list[FieldColumns] = []
    claimed: dict[int, str] = {}
    seen: set[str] = set()
    for f in fields:
        if not isinstance(f, CategoricalField):
            raise InputError(f"a categorical field must be a CategoricalField; got {type(f).__name__}")
        name = _text(f.name, "the name of a categorical field")
        problem = name_problem(name)
        if problem is not None:
            raise InputError(f"the categorical field name {name[:80]!r} {problem}")
        if name in seen:
            raise InputError(f"the categorical field '{name}' is given twice")
        seen.add(name)
        if name in position:
            raise InputError(f"'{name}' is both a categorical field and a numeric input of the model; a column is "
                             "one or the other")
        if f.data_type not in DATA_TYPES:
            raise InputError(f"the categorical field '{name}' has data type {f.data_type!r:.40}, not one of "
                             f"{', '.join(DATA_TYPES)}")
        if not isinstance(f.levels, tuple) or not f.levels:
            raise InputError(f"the categorical field '{name}' must list its levels (a non-empty tuple of str)")
        for level in f.levels:
            level = _text(level, f"a level of the categorical field '{name}'")
            problem = "is empty (an empty cell is a missing value)" if not level.strip() else text_problem(level)
            if problem is not None:
                raise InputError(f"the level {level[:80]!r} of the categorical field '{name}' {problem}")
        if len(set(f.levels)) != len(f.levels):
            dup = next(lv for lv in f.levels if f.levels.count(lv) > 1)
            raise InputError(f"the categorical field '{name}' lists the level {dup[:80]!r} twice")
        prefix = name + "="
        columns, levels = [], []
        for j, n in enumerate(names):
            if not n.startswith(prefix):
                continue
            level = n[len(prefix):]
            if level not in f.levels:
                raise InputError(f"the model's input '{n[:120]}' looks like an indicator column of the categorical "
                                 f"field '{name}', but {level[:80]!r} is not one of its levels")
            if j in claimed:
                raise InputError(f"the model's input '{n[:120]}' could be an indicator column of the categorical "
                                 f"fields '{claimed[j]}' and '{name}'; rename one of them")
            claimed[j] = name
            columns.append(j)
            levels.append(level)
        if not columns:
            raise InputError(f"the categorical field '{name}' has no indicator column among the model's inputs "
                             f"(names '{name}=<level>')")
        order = [f.levels.index(lv) for lv in levels]
        if order != sorted(order):
            raise InputError(f"the indicator columns of the categorical field '{name}' are not in the order of its "
                             "levels; list the levels in the order of the columns")
        out.append(FieldColumns(f, tuple(columns), tuple(levels)))
    return out


def fields_from_references(names: Sequence[str], reference_levels: Any) -> tuple[CategoricalField, ...]:
    """The categorical fields of a model fitted on indicator columns ``column=level``,
    from the reference level of each text column (``{column: level}``, as
    :attr:`lintools.Table.reference_levels`): the levels are the reference followed by
    the levels of the indicator columns, in the order of ``names``; the fields follow the
    order of their first indicator column."""
    if not isinstance(reference_levels, Mapping):
        raise InputError(f"reference_levels must be a mapping of text column to its reference level (as "
                         f"Table.reference_levels); got {type(reference_levels).__name__}")
    names = list(names)
    fields = []
    for column, reference in reference_levels.items():
        column = _text(column, "a column of reference_levels")
        reference = _text(reference, f"the reference level of '{column[:80]}'")
        prefix = column + "="
        levels = [n[len(prefix):] for n in names if n.startswith(prefix)]
        if not levels:
            raise InputError(f"reference_levels names the column '{column[:80]}', but the model has no indicator "
                             f"column '{column[:80]}=<level>'; pass the reference levels of the table it was fitted on")
        if reference in levels:
            raise InputError(f"the reference level {reference[:80]!r} of '{column[:80]}' has an indicator column "
                             f"('{column[:80]}={reference[:80]}'); the reference level is the one left out")
        first = min(j for j, n in enumerate(names) if n.startswith(prefix))
        fields.append((first, CategoricalField(column, (reference, *levels))))
    out = tuple(f for _, f in sorted(fields, key=lambda pair: pair[0]))
    field_layout(names, out)
    return out


def with_references(model: Any, reference_levels: Any, caller: str) -> Any:
    """``model`` (a frozen record with ``names``) with the categorical fields that
    ``reference_levels`` gives (see :func:`fields_from_references`); the message of a
    refusal names ``caller``."""
    import dataclasses

    try:
        fields = fields_from_references(model.names, reference_levels)
    except InputError as exc:
        raise InputError(f"{caller}: reference_levels cannot be used ({exc})") from None
    return dataclasses.replace(model, categorical_fields=fields)


def _number(text: str, decimal: str) -> float | None:
    token = text.strip().encode("utf-8", "replace")
    if not is_number(token, decimal.encode()):
        return None
    value = float(token.replace(decimal.encode(), b"."))
    return value if math.isfinite(value) else None


class LevelMatch:
    """Maps the cells of a column to the levels of a :class:`CategoricalField`.

    Cells compare with the levels as text; for a field of numbers (``data_type`` other than
    ``"string"``) a cell that is a number (with the file's decimal mark ``decimal``) also
    matches a level of equal value.
    """

    def __init__(self, field: CategoricalField, decimal: str = ".") -> None:
        self.field = field
        self.decimal = decimal
        self._text = {lv: i for i, lv in enumerate(field.levels)}
        self._numbers: dict[float, int] = {}
        if field.data_type != "string":
            for i, lv in enumerate(field.levels):
                value = _number(lv, ".")
                if value is not None:
                    self._numbers.setdefault(value, i)

    def index(self, cell: str) -> int | None:
        """The position of ``cell``'s level in ``field.levels``, or None (an unseen category)."""
        hit = self._text.get(cell)
        if hit is None and self._numbers:
            value = _number(cell, self.decimal)
            if value is not None:
                hit = self._numbers.get(value)
        return hit
