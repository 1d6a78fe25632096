"""Reading a PMML 4.x ``RegressionModel``: safe parsing and consistency checks.

Parsing refuses a DTD or an entity declaration in any encoding (expat reports the
declaration before anything is expanded); a comment or a text that merely contains
``<!DOCTYPE`` is not a declaration and is read.  Then the document must agree with itself:

* the namespace is PMML 4's (``http://www.dmg.org/PMML-4_0`` .. ``PMML-4_4``) and the
  root carries its required ``version``;
* the required attributes are present: ``DataField`` name, optype and dataType;
  ``MiningField`` name; ``RegressionModel`` functionName; ``RegressionTable`` intercept
  (PMML 4.4 declares it ``use="required"``: a missing intercept is an error, never 0);
  ``NumericPredictor`` name and coefficient; ``CategoricalPredictor`` name, value and
  coefficient; ``Value`` value;
* numbers follow one strict grammar (:data:`REAL`): an optional sign, digits with at most
  one ``.``, an optional exponent, ASCII digits only; no ``1_000``, no ``inf`` or ``nan``
  words, no hexadecimal; XML white space around it is allowed (XML Schema collapses it);
* the model has exactly one target field (MiningField usageType ``target``), declared in
  the DataDictionary; every predictor is an active MiningField and a DataField, named
  as a lintools fit would accept it; a ``CategoricalPredictor`` refers to a categorical
  field and one of its values (:mod:`lintools.exchange.pmml_categories`), and the inputs come in
  the order of the MiningSchema;
* nothing that would change the scores is ignored: an active field with an ``outliers``
  treatment other than ``asIs``, and a ``Targets`` element that rescales, casts or
  bounds the prediction, are refused;
* a classification model has one table per target category (PMML 4.4 Regression: "These
  models should contain exactly one regression table for each targetCategory"): the
  categories are the target DataField's valid ``Value`` elements, every table names one
  of them, and no category has two tables.

Reference: Data Mining Group, PMML 4.4 - Regression, http://www.dmg.org/pmml/v4-4/Regression.html
(RegressionModel, RegressionTable, NumericPredictor); PMML 4.4 - Data Dictionary and
Mining Schema.
"""

from __future__ import annotations

import re
import xml.etree.ElementTree as ET
from typing import Any
from xml.parsers import expat

import numpy as np

from ..models.kinds import KINDS
from ..support.errors import InputError
from .pmml_categories import read_inputs
from ..support.validate import check_names, name_problem

__all__ = ["parse_pmml", "NAMESPACES", "REAL"]

#: The namespaces of PMML 4.0 to 4.4, whose RegressionModel lintools reads.
NAMESPACES = tuple(f"http://www.dmg.org/PMML-4_{minor}" for minor in range(5))
_XML_SPACE = "[ \t\n\r]*"
#: The number grammar: optional sign, ASCII digits with at most one '.', optional exponent.
REAL = re.compile(_XML_SPACE + r"([+-]?(?:[0-9]+(?:\.[0-9]*)?|\.[0-9]+)(?:[eE][+-]?[0-9]+)?)" + _XML_SPACE)
_INTEGER = re.compile(_XML_SPACE + r"([+-]?[0-9]+)" + _XML_SPACE)


class _Declaration(Exception):
    pass

#: The kind of model that each normalizationMethod read stands for.
_KIND_OF = {k.normalisation: k.name for k in KINDS.values()}


def _refuse_declarations(raw: bytes, where: str) -> None:
    """Refuse a DTD or entity declaration in any encoding: expat reports the declaration
    before anything is expanded, and never reads an external file."""

    def stop(*_: Any) -> None:
        raise _Declaration

    parser = expat.ParserCreate()
    parser.SetParamEntityParsing(expat.XML_PARAM_ENTITY_PARSING_NEVER)
    parser.StartDoctypeDeclHandler = stop
    parser.EntityDeclHandler = stop
    parser.ExternalEntityRefHandler = stop
    refused = f"{where!r} declares a DTD or entities; lintools refuses such XML (external entities, entity expansion)"
    try:
        parser.Parse(raw, True)
    except _Declaration:
        raise InputError(refused) from None
    except expat.ExpatError as exc:
        # a misspelt declaration (<!doctype ...>) is a syntax error to expat; say what it is
        if re.search(rb"<!\s*(doctype|entity)", raw[:65536], re.IGNORECASE):
            raise InputError(refused) from None
        raise InputError(f"{where!r} is not well-formed XML ({expat.ErrorString(exc.code)}, line {exc.lineno})") from None
    except (LookupError, ValueError) as exc:  # an unknown or broken encoding declaration
        raise InputError(f"{where!r} cannot be decoded as XML ({exc}); save it as UTF-8") from None


def _local(tag: Any) -> str:
    return tag.rsplit("}", 1)[-1] if isinstance(tag, str) else ""


class _Doc:
    """The parsed document, with the messages that name the file."""

    def __init__(self, root: ET.Element, where: str) -> None:
        self.where = where
        tag = root.tag if isinstance(root.tag, str) else ""
        ns = tag[1:].split("}", 1)[0] if tag.startswith("{") else None
        if _local(tag) != "PMML":
            raise self.refuse(f"is not a PMML document (root element <{_local(tag)}>)")
        if ns not in NAMESPACES:
            found = f"the namespace {ns!r}" if ns else "no namespace"
            raise self.refuse(f"has {found} on its root element; a PMML 4.4 document declares "
                              f'xmlns="{NAMESPACES[-1]}"', fix="declare PMML's namespace")
        self.ns = ns
        self.root = root
        self.required(root, "version", "the PMML element")

    def refuse(self, problem: str, fix: str = "") -> InputError:
        remedy = fix or "correct the document or ask its supplier for a valid PMML 4.4 RegressionModel"
        return InputError(f"PMML file {self.where!r} {problem}; {remedy}")

    def tag(self, name: str) -> str:
        return f"{{{self.ns}}}{name}"

    def children(self, el: ET.Element, name: str) -> list[ET.Element]:
        return [c for c in el if c.tag == self.tag(name)]

    def one(self, el: ET.Element, name: str, inside: str) -> ET.Element:
        found = self.children(el, name)
        if len(found) != 1:
            raise self.refuse(f"has {len(found)} {name} elements in {inside}; PMML requires exactly one")
        return found[0]

    def required(self, el: ET.Element, name: str, what: str) -> str:
        value = el.get(name)
        if value is None:
            raise self.refuse(f"has no '{name}' attribute on {what}; PMML 4.4 requires it")
        return value

    def real(self, el: ET.Element, name: str, what: str) -> float:
        text = self.required(el, name, what)
        m = REAL.fullmatch(text)
        if m is None:
            raise self.refuse(f"has the attribute '{name}' = {text[:40]!r} on {what}, which is not a number (an "
                              "optional sign, digits with at most one '.', an optional exponent)")
        value = float(m.group(1))
        if not np.isfinite(value):
            raise self.refuse(f"has the attribute '{name}' = {text[:40]!r} on {what}, which is not finite (it "
                              "overflows a double)")
        return value


def parse_pmml(raw: bytes, where: str) -> dict[str, Any]:
    """The fields of a :class:`lintools.exchange.pmml.DeliveredModel` read from the bytes of a PMML
    document (see the module docstring for what is checked)."""
    _refuse_declarations(raw, where)
    try:
        root = ET.fromstring(raw)
    except (ET.ParseError, LookupError, ValueError) as exc:
        raise InputError(f"{where!r} is not well-formed XML ({exc})") from None
    doc = _Doc(root, where)
    fields = _data_fields(doc)
    others = [_local(el.tag) for el in root if _local(el.tag).endswith("Model") and el.tag != doc.tag("RegressionModel")]
    models = doc.children(root, "RegressionModel")
    if len(models) != 1:
        found = f" (found: {', '.join(others)})" if others else ""
        raise doc.refuse(f"must hold exactly one RegressionModel{found}", fix="lintools reads linear, logit and "
                         "softmax regression models")
    model = models[0]
    function = doc.required(model, "functionName", "the RegressionModel")
    norm = model.get("normalizationMethod", "none")
    target, active = _mining_schema(doc, model, fields)
    tables = doc.children(model, "RegressionTable")
    if not tables:
        raise doc.refuse("has a RegressionModel without a RegressionTable")
    _refuse_rescaled_targets(doc, model)
    full = [_table(doc, t, f"RegressionTable {i + 1}", active) for i, t in enumerate(tables)]
    first: set[str] | None = None
    for label, (_, _, terms, _) in zip(range(1, len(full) + 1), full):
        if terms:
            if first is None:
                first = set(terms)
            elif set(terms) != first:
                raise doc.refuse(f"has other predictors in RegressionTable {label} than in the first table")
    names, categorical = read_inputs(doc, fields, active, full)
    parsed = [(c, b0, terms) for c, b0, terms, _ in full]
    try:
        check_names(names, len(names), None)
    except InputError as exc:
        raise doc.refuse(f"has predictor names that lintools cannot use ({exc})") from None
    optype = fields[target].get("optype")
    if function == "regression":
        if norm != "none" or len(parsed) != 1:
            raise doc.refuse("has a regression model that is not one table with normalizationMethod 'none'")
        if optype != "continuous":
            raise doc.refuse(f"has a regression model whose target '{target}' has optype {optype!r}, not 'continuous'")
        _, b0, terms = parsed[0]
        return dict(kind=_KIND_OF[norm], names=tuple(names), coefficients=np.array([terms[n] for n in names]),
                    intercept=b0, classes=(), target=target, categorical_fields=categorical)
    if function != "classification":
        raise doc.refuse(f"has functionName {function!r:.40}, not 'regression' or 'classification'")
    if optype not in ("categorical", "ordinal"):
        raise doc.refuse(f"has a classification model whose target '{target}' has optype {optype!r}, not "
                         "'categorical' or 'ordinal'")
    cats = _categories(doc, [c for c, _, _ in parsed], fields[target], target)
    if norm == "logit":
        if len(parsed) != 2 or any(parsed[1][2].values()) or parsed[1][1] != 0:
            raise doc.refuse("has a logit model that is not two tables with the second empty (the reference category)")
        _, b0, terms = parsed[0]
        return dict(kind=_KIND_OF[norm], names=tuple(names), coefficients=np.array([terms.get(n, 0.0) for n in names]),
                    intercept=b0, classes=cats, target=target, categorical_fields=categorical)
    if norm == "softmax":
        B = np.array([[terms.get(n, 0.0) for (_, _, terms) in parsed] for n in names]).reshape(len(names), len(parsed))
        return dict(kind=_KIND_OF[norm], names=tuple(names), coefficients=B, intercept=np.array([b for _, b, _ in parsed]),
                    classes=cats, target=target, categorical_fields=categorical)
    raise doc.refuse(f"has normalizationMethod {norm!r:.40}, which lintools does not read (it reads none, logit, softmax)")


def _data_fields(doc: _Doc) -> dict[str, ET.Element]:
    dictionary = doc.one(doc.root, "DataDictionary", "the document")
    fields: dict[str, ET.Element] = {}
    for f in doc.children(dictionary, "DataField"):
        name = doc.required(f, "name", "a DataField")
        for attr in ("optype", "dataType"):
            doc.required(f, attr, f"DataField '{name}'")
        if name in fields:
            raise doc.refuse(f"declares the DataField '{name}' twice")
        fields[name] = f
    count = dictionary.get("numberOfFields")
    if count is not None:
        m = _INTEGER.fullmatch(count)
        if m is None or int(m.group(1)) != len(fields):
            raise doc.refuse(f"has numberOfFields={count[:40]!r} but {len(fields)} DataField elements")
    return fields


def _mining_schema(doc: _Doc, model: ET.Element, fields: dict[str, ET.Element]) -> tuple[str, dict[str, ET.Element]]:
    """The target field and the active fields (name -> MiningField, in the schema's order)
    of the model's MiningSchema."""
    usage: dict[str, str] = {}
    elements: dict[str, ET.Element] = {}
    for mf in doc.children(doc.one(model, "MiningSchema", "the RegressionModel"), "MiningField"):
        name = doc.required(mf, "name", "a MiningField")
        if name in usage:
            raise doc.refuse(f"lists the MiningField '{name}' twice")
        usage[name] = mf.get("usageType", "active")
        elements[name] = mf
        outliers = mf.get("outliers", "asIs")
        if usage[name] == "active" and outliers != "asIs":
            raise doc.refuse(f"has outliers={outliers!r:.40} on the MiningField '{name}'; lintools does not apply "
                             "outlier treatments (it would score such values differently)")
    targets = [n for n, u in usage.items() if u in ("target", "predicted")]
    if len(targets) != 1:
        raise doc.refuse(f"has {len(targets)} target fields in its MiningSchema; lintools reads models with exactly "
                         'one (a MiningField with usageType="target")')
    target = targets[0]
    if target not in fields:
        raise doc.refuse(f"has the target '{target}', which is not a DataField of its DataDictionary")
    problem = name_problem(target)
    if problem is not None:
        raise doc.refuse(f"has a target name {target[:80]!r} that {problem}")
    return target, {n: elements[n] for n, u in usage.items() if u == "active"}


def _refuse_rescaled_targets(doc: _Doc, model: ET.Element) -> None:
    """A Targets element that changes the prediction (PMML 4.4 Targets: rescaleFactor,
    rescaleConstant, min, max, castInteger) is refused: lintools would ignore it."""
    for targets in doc.children(model, "Targets"):
        for t in doc.children(targets, "Target"):
            changes = [a for a in ("rescaleFactor", "rescaleConstant", "min", "max", "castInteger") if a in t.attrib]
            if changes:
                raise doc.refuse(f"has a Target with {changes[0]}={t.get(changes[0])!r:.40}, which changes the "
                                 "prediction; lintools scores the regression equations as they stand and does "
                                 "not apply it")


def _table(doc: _Doc, t: ET.Element, label: str, active: dict[str, ET.Element]
           ) -> tuple[Any, float, dict[str, float], dict[str, tuple[str, str]]]:
    """A RegressionTable: its target category, intercept, terms (name -> coefficient;
    a CategoricalPredictor is named ``field=value``) and which terms are categorical."""
    intercept = doc.real(t, "intercept", label)
    terms: dict[str, float] = {}
    indicators: dict[str, tuple[str, str]] = {}
    for el in t:
        local = _local(el.tag)
        if el.tag == doc.tag("NumericPredictor"):
            name = doc.required(el, "name", f"a NumericPredictor of {label}")
            what = f"predictor '{name}' of {label}"
            exponent = el.get("exponent", "1")
            m = _INTEGER.fullmatch(exponent)
            if m is None or int(m.group(1)) != 1:
                raise doc.refuse(f"has exponent={exponent[:40]!r} on {what}; lintools reads linear terms only "
                                 "(an exponent other than 1 is refused)")
            if name in terms:
                raise doc.refuse(f"has {what} twice")
            if name not in active:
                raise doc.refuse(f"has {what}, which is not an active MiningField of the model (a derived field?); "
                                 "lintools reads predictors that are data fields")
            terms[name] = doc.real(el, "coefficient", what)
        elif el.tag == doc.tag("CategoricalPredictor"):
            field = doc.required(el, "name", f"a CategoricalPredictor of {label}")
            value = doc.required(el, "value", f"the CategoricalPredictor '{field[:80]}' of {label}")
            what = f"predictor '{field[:80]}' = {value[:80]!r} of {label}"
            name = f"{field}={value}"
            if name in terms:
                raise doc.refuse(f"has {what} twice" if name in indicators else
                                 f"has {what} and a NumericPredictor named '{name[:80]}'")
            if field not in active:
                raise doc.refuse(f"has {what}, whose field is not an active MiningField of the model")
            terms[name] = doc.real(el, "coefficient", what)
            indicators[name] = (field, value)
        elif local == "PredictorTerm":
            raise doc.refuse(f"has {local} terms (interactions) in {label}, which lintools does not read",
                             fix="ask for a model without interaction terms")
        elif el.tag != doc.tag("Extension"):
            raise doc.refuse(f"has an element <{local}> in {label}, which a RegressionTable does not hold")
    return t.get("targetCategory"), intercept, terms, indicators


def _categories(doc: _Doc, cats: list, field: ET.Element, target: str) -> tuple[str, ...]:
    """The tables' target categories, checked against the target's declared values."""
    if any(c is None for c in cats):
        raise doc.refuse("has a classification RegressionTable without a targetCategory")
    declared = []
    for v in doc.children(field, "Value"):
        value = doc.required(v, "value", f"a Value of the target field '{target}'")
        if v.get("property", "valid") == "valid":
            declared.append(value)
    if not declared:
        raise doc.refuse(f"declares no categories for its target '{target}'",
                         fix="list them as Value elements of the target's DataField")
    for c in cats:
        if cats.count(c) > 1:
            raise doc.refuse(f"has two RegressionTables for the target category {c[:80]!r}; each category has one")
        if c not in declared:
            raise doc.refuse(f"has a RegressionTable for the category {c[:80]!r}, which is not a value of the "
                             f"target '{target}' ({', '.join(map(repr, declared[:10]))})")
    missing = [d for d in declared if d not in cats]
    if missing:
        raise doc.refuse(f"has no RegressionTable for the target category {missing[0][:80]!r}; a classification "
                         "model has one table per category")
    return tuple(cats)
