"""Categorical inputs in PMML 4.4 regression models: writing and reading them.

A text column of a fit (its indicator columns ``column=level``, see
:mod:`lintools.support.categories`) is written as what it is, one categorical input:

* a ``DataField`` with ``optype="categorical"`` and ``dataType="string"`` whose ``Value``
  elements list every level (the reference level too) in the order of the fit's
  :class:`~lintools.support.categories.CategoricalField`;
* one ``MiningField`` for it, where its first indicator column stands among the inputs;
* in every ``RegressionTable`` with coefficients, one ``CategoricalPredictor`` (``name``
  the field, ``value`` the level, ``coefficient``) per indicator column, after the
  ``NumericPredictor`` elements: the schema's ``RegressionTable`` is a sequence of
  ``NumericPredictor*``, then ``CategoricalPredictor*``, then ``PredictorTerm*``.

Reading gives the model's inputs back in the order of its ``MiningSchema`` (a
categorical field's indicator columns in the order of its ``Value`` elements), which is
the order they were written in, so the round trip is exact: names, coefficients and
fields.  A supplier's document is read by the same rules: a ``CategoricalPredictor``
refers to an active field of optype categorical or ordinal whose valid ``Value``
elements (``property`` absent or ``"valid"``) are the levels; its ``value`` must be one of
them; a level without a term adds nothing; a value the document does not list is an
unseen category, as PMML's default ``invalidValueTreatment="returnInvalid"`` makes it (a
field with another treatment is refused rather than scored differently).

References: Data Mining Group, PMML 4.4 - Regression (RegressionTable, NumericPredictor,
CategoricalPredictor); Data Dictionary (DataField, Value); Mining Schema (MiningField,
invalidValueTreatment, outliers).  http://dmg.org/pmml/v4-4/Regression.html
"""

from __future__ import annotations

import xml.etree.ElementTree as ET
from typing import Any, Callable, Sequence

from ..support.categories import DATA_TYPES, CategoricalField, field_layout
from ..support.errors import InputError

__all__ = ["write_inputs", "write_terms", "read_inputs"]


def _layout(names: Sequence[str], fields: Sequence[CategoricalField]) -> dict[int, Any]:
    """Position of each indicator column -> its field layout; refuses scattered columns."""
    out: dict[int, Any] = {}
    for lay in field_layout(names, fields):
        cols = lay.columns
        if list(cols) != list(range(cols[0], cols[0] + len(cols))):
            raise InputError(f"write_pmml: the indicator columns of the text column '{lay.field.name}' are not "
                             "next to each other among the fit's names; PMML lists a categorical field once: "
                             "fit with the columns in the order read_table gives them")
        for j in cols:
            out[j] = lay
    return out


def write_inputs(dd: ET.Element, schema: ET.Element, tag: Callable[[str], str], names: Sequence[str],
                 fields: Sequence[CategoricalField]) -> dict[int, Any]:
    """Write the DataField and MiningField of every input (a categorical field once, where
    its first indicator column stands); return the layout for :func:`write_terms`."""
    layout = _layout(names, fields)
    for j, name in enumerate(names):
        lay = layout.get(j)
        if lay is None:
            ET.SubElement(dd, tag("DataField"), {"name": name, "optype": "continuous", "dataType": "double"})
            ET.SubElement(schema, tag("MiningField"), {"name": name})
        elif lay.columns[0] == j:
            f = lay.field
            field = ET.SubElement(dd, tag("DataField"), {"name": f.name, "optype": "categorical",
                                                         "dataType": f.data_type})
            for level in f.levels:
                ET.SubElement(field, tag("Value"), {"value": level})
            ET.SubElement(schema, tag("MiningField"), {"name": f.name})
    return layout


def write_terms(table: ET.Element, tag: Callable[[str], str], names: Sequence[str], coefficients: Sequence[float],
                layout: dict[int, Any], number: Callable[[float], str]) -> None:
    """The terms of one RegressionTable: NumericPredictor elements, then CategoricalPredictor
    elements (the schema's order)."""
    categorical = []
    for j, (name, c) in enumerate(zip(names, coefficients)):
        lay = layout.get(j)
        if lay is None:
            ET.SubElement(table, tag("NumericPredictor"), {"name": name, "exponent": "1", "coefficient": number(c)})
        else:
            categorical.append((lay.field.name, lay.levels[lay.columns.index(j)], c))
    for field, level, c in categorical:
        ET.SubElement(table, tag("CategoricalPredictor"), {"name": field, "value": level, "coefficient": number(c)})


def read_inputs(doc: Any, fields: dict[str, ET.Element], active: dict[str, ET.Element],
                tables: list[tuple[Any, float, dict[str, float], dict[str, tuple[str, str]]]]
                ) -> tuple[list[str], tuple[CategoricalField, ...]]:
    """The model's input names (MiningSchema order) and categorical fields, from the
    tables' terms: ``terms`` maps each name to its coefficient, and ``indicators`` maps a
    CategoricalPredictor's name ``field=value`` to ``(field, value)``."""
    numeric: set[str] = set()
    values: dict[str, set[str]] = {}
    for _, _, terms, indicators in tables:
        for name in terms:
            if name in indicators:
                field, value = indicators[name]
                values.setdefault(field, set()).add(value)
            else:
                numeric.add(name)
    both = sorted(numeric & set(values))
    if both:
        raise doc.refuse(f"uses the field '{both[0]}' both as a NumericPredictor and as a CategoricalPredictor")
    cats: dict[str, CategoricalField] = {}
    for field, used in values.items():
        cats[field] = _field(doc, field, fields.get(field), active[field], used)
    names: list[str] = []
    for field in active:
        if field in numeric:
            names.append(field)
        elif field in cats:
            names += [f"{field}={lv}" for lv in cats[field].levels if lv in values[field]]
    out = tuple(cats[f] for f in active if f in cats)
    try:
        field_layout(names, out)
    except InputError as exc:
        raise doc.refuse(f"has categorical predictors that lintools cannot name ({exc})") from None
    return names, out


def _field(doc: Any, field: str, data: ET.Element | None, mining: ET.Element, used: set[str]) -> CategoricalField:
    """The categorical field ``field``: its DataField's valid values, checked."""
    if data is None:
        raise doc.refuse(f"has a CategoricalPredictor on '{field}', which is not a DataField of its DataDictionary")
    optype = data.get("optype")
    if optype not in ("categorical", "ordinal"):
        raise doc.refuse(f"has a CategoricalPredictor on '{field}', whose DataField has optype {optype!r:.40}, not "
                         "'categorical' or 'ordinal'")
    data_type = data.get("dataType")
    if data_type not in DATA_TYPES:
        raise doc.refuse(f"has the categorical field '{field}' of dataType {data_type!r:.40}; lintools reads "
                         f"categorical fields of {', '.join(DATA_TYPES)}")
    treatment = mining.get("invalidValueTreatment", "returnInvalid")
    if treatment != "returnInvalid":
        raise doc.refuse(f"has invalidValueTreatment={treatment!r:.40} on the categorical field '{field}'; lintools "
                         "treats a value the field does not list as an error (PMML's default 'returnInvalid') and "
                         "does not score it otherwise")
    levels: list[str] = []
    for v in doc.children(data, "Value"):
        value = doc.required(v, "value", f"a Value of the field '{field}'")
        if v.get("property", "valid") == "valid" and value not in levels:
            levels.append(value)
    if not levels:
        raise doc.refuse(f"lists no valid Value for the categorical field '{field}'; lintools needs the field's "
                         "values to tell a known category from an unseen one",
                         fix="list the field's values as Value elements of its DataField")
    unknown = sorted(used - set(levels))
    if unknown:
        raise doc.refuse(f"has a CategoricalPredictor for '{field}' = {unknown[0][:80]!r}, which is not a valid "
                         f"Value of that field ({', '.join(map(repr, levels[:10]))})")
    return CategoricalField(field, tuple(levels), data_type)
