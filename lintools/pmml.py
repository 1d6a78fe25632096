"""PMML regression models (Data Mining Group, PMML 4.4 ``RegressionModel``).

PMML is an open standard for exchanging fitted models.  lintools writes and reads the
part of it that its fits correspond to:

* linear regression: ``functionName="regression"``, ``normalizationMethod="none"``, one
  ``RegressionTable``;
* binary logistic regression: ``functionName="classification"``,
  ``normalizationMethod="logit"``, the positive class's table first with the
  coefficients, the other class's table second and empty (PMML gives the last category
  ``1 - sum`` of the others);
* softmax regression: ``normalizationMethod="softmax"``, one table per class.

Only ``NumericPredictor`` terms with exponent 1 are read; anything else (categorical
predictors, interaction terms, other model types) is refused with a message rather than
misread.  Parsing refuses any document with a DTD (``<!DOCTYPE``) or an entity
declaration, so external entities and entity expansion cannot occur, and reads no file
other than the one named.

Reference: Data Mining Group, PMML 4.4 - Regression
(``RegressionModel``, ``RegressionTable``, ``NumericPredictor``).
"""

from __future__ import annotations

import io
import math
import os
import xml.etree.ElementTree as ET
from xml.parsers import expat
from dataclasses import dataclass
from typing import Any

import numpy as np

from ._errors import InputError
from ._files import file_path, read_bounded, write_atomic

__all__ = ["DeliveredModel", "read_pmml", "write_pmml"]

NS = "http://www.dmg.org/PMML-4_4"
MAX_BYTES = 64 * 1024 * 1024


@dataclass(frozen=True)
class DeliveredModel:
    """Coefficients read from a model file, ready to compare with a refit.

    ``coefficients`` is (p,) for ``kind`` "least_squares" and "logistic", (p, K) for
    "softmax"; ``intercept`` is a float or (K,).  ``classes`` lists the target
    categories (the positive class first for "logistic").
    """

    kind: str
    names: tuple[str, ...]
    coefficients: np.ndarray
    intercept: Any
    classes: tuple = ()
    target: str = "y"
    source: str = ""


def _num(x: float) -> str:
    return repr(float(x))


def write_pmml(fit: Any, path: str | os.PathLike, *, target: str | None = None, replace: bool = False) -> None:
    """Write a lintools fit (least squares, logistic or softmax) as a PMML 4.4 document.

    The file is written atomically (a temporary file in the same folder, renamed into
    place); an existing ``path`` is refused unless ``replace=True``.
    """
    kind = getattr(fit, "kind", None)
    if kind not in ("least_squares", "logistic", "softmax"):
        raise InputError(f"write_pmml() takes a lintools fit record; got {type(fit).__name__}")
    target = target or getattr(fit, "target", None) or "y"
    ET.register_namespace("", NS)
    root = ET.Element(f"{{{NS}}}PMML", {"version": "4.4"})
    header = ET.SubElement(root, f"{{{NS}}}Header", {"description": f"lintools {kind} fit"})
    from . import __version__

    ET.SubElement(header, f"{{{NS}}}Application", {"name": "lintools", "version": __version__})
    dd = ET.SubElement(root, f"{{{NS}}}DataDictionary", {"numberOfFields": str(len(fit.names) + 1)})
    for name in fit.names:
        ET.SubElement(dd, f"{{{NS}}}DataField", {"name": name, "optype": "continuous", "dataType": "double"})
    if kind == "least_squares":
        ET.SubElement(dd, f"{{{NS}}}DataField", {"name": target, "optype": "continuous", "dataType": "double"})
        attrs = {"functionName": "regression", "normalizationMethod": "none"}
    else:
        field = ET.SubElement(dd, f"{{{NS}}}DataField", {"name": target, "optype": "categorical", "dataType": "string"})
        for c in fit.classes:
            ET.SubElement(field, f"{{{NS}}}Value", {"value": str(c)})
        attrs = {"functionName": "classification", "normalizationMethod": "logit" if kind == "logistic" else "softmax"}
    model = ET.SubElement(root, f"{{{NS}}}RegressionModel", {"modelName": f"lintools {kind}", **attrs})
    schema = ET.SubElement(model, f"{{{NS}}}MiningSchema")
    for name in fit.names:
        ET.SubElement(schema, f"{{{NS}}}MiningField", {"name": name})
    ET.SubElement(schema, f"{{{NS}}}MiningField", {"name": target, "usageType": "target"})

    def table(intercept: float, coefs: np.ndarray | None, category: Any = None) -> None:
        a = {"intercept": _num(intercept)}
        if category is not None:
            a["targetCategory"] = str(category)
        t = ET.SubElement(model, f"{{{NS}}}RegressionTable", a)
        if coefs is not None:
            for name, c in zip(fit.names, coefs):
                ET.SubElement(t, f"{{{NS}}}NumericPredictor", {"name": name, "exponent": "1", "coefficient": _num(c)})

    if kind == "least_squares":
        table(fit.intercept, fit.coefficients)
    elif kind == "logistic":
        positive = fit.positive_class
        other = next(c for c in fit.classes if c != positive)
        table(fit.intercept, fit.coefficients, positive)
        table(0.0, None, other)
    else:
        for k, c in enumerate(fit.classes):
            table(float(np.asarray(fit.intercept)[k]), np.asarray(fit.coefficients)[:, k], c)
    file_path(path, "PMML file")
    buffer = io.BytesIO()
    ET.ElementTree(root).write(buffer, encoding="utf-8", xml_declaration=True)
    write_atomic(path, buffer.getvalue(), replace=replace, label="PMML file")


def _strip(tag: str) -> str:
    return tag.rsplit("}", 1)[-1]


def _float_attr(el: ET.Element, name: str, where: str, default: str | None = None) -> float:
    raw = el.get(name, default)
    if raw is None:
        raise InputError(f"PMML {where}: attribute '{name}' is missing")
    try:
        v = float(raw)
    except ValueError:
        raise InputError(f"PMML {where}: attribute '{name}' = {raw!r} is not a number") from None
    if not math.isfinite(v):
        raise InputError(f"PMML {where}: attribute '{name}' = {raw!r} is not finite")
    return v


class _Declaration(Exception):
    pass


def _refuse_declarations(raw: bytes, where: str) -> None:
    """Refuse a DTD or entity declaration in any encoding (the byte test above sees only
    ASCII-compatible ones): expat reports the declaration before anything is expanded."""

    def stop(*_: Any) -> None:
        raise _Declaration

    parser = expat.ParserCreate()
    parser.SetParamEntityParsing(expat.XML_PARAM_ENTITY_PARSING_NEVER)
    parser.StartDoctypeDeclHandler = stop
    parser.EntityDeclHandler = stop
    parser.ExternalEntityRefHandler = stop
    try:
        parser.Parse(raw, True)
    except _Declaration:
        raise InputError(
            f"{where!r} declares a DTD or entities; lintools refuses such XML (external entities, entity expansion)"
        ) from None
    except expat.ExpatError as exc:
        raise InputError(f"{where!r} is not well-formed XML ({expat.ErrorString(exc.code)}, line {exc.lineno})") from None
    except (LookupError, ValueError) as exc:  # an unknown or broken encoding declaration
        raise InputError(f"{where!r} cannot be decoded as XML ({exc}); save it as UTF-8") from None


def read_pmml(path: str | os.PathLike) -> DeliveredModel:
    """Read a PMML ``RegressionModel`` and return its coefficients as a :class:`DeliveredModel`."""
    where = file_path(path, "PMML file")
    raw = read_bounded(where, "PMML file", MAX_BYTES)
    upper = raw.upper()
    if b"<!DOCTYPE" in upper or b"<!ENTITY" in upper:
        raise InputError(f"{where!r} declares a DTD or entities; lintools refuses such XML (external entities, entity expansion)")
    _refuse_declarations(raw, where)
    try:
        root = ET.fromstring(raw)
    except (ET.ParseError, LookupError, ValueError) as exc:
        raise InputError(f"{where!r} is not well-formed XML ({exc})") from None
    if _strip(root.tag) != "PMML":
        raise InputError(f"{where!r} is not a PMML document (root element <{_strip(root.tag)}>)")
    models = [el for el in root if _strip(el.tag) == "RegressionModel"]
    others = [_strip(el.tag) for el in root if _strip(el.tag).endswith("Model") and _strip(el.tag) != "RegressionModel"]
    if len(models) != 1:
        found = f" (found: {', '.join(others)})" if others else ""
        raise InputError(f"{where!r} must hold exactly one RegressionModel{found}")
    model = models[0]
    function = model.get("functionName")
    norm = model.get("normalizationMethod", "none")
    target = next(
        (mf.get("name") for el in model if _strip(el.tag) == "MiningSchema" for mf in el
         if _strip(mf.tag) == "MiningField" and mf.get("usageType") in ("target", "predicted")),
        "y",
    )
    tables = [el for el in model if _strip(el.tag) == "RegressionTable"]
    if not tables:
        raise InputError(f"{where!r}: the RegressionModel has no RegressionTable")
    names: list[str] | None = None
    parsed = []
    for t_index, t in enumerate(tables):
        label = f"RegressionTable {t_index + 1}"
        terms: dict[str, float] = {}
        for el in t:
            tag = _strip(el.tag)
            if tag == "NumericPredictor":
                name = el.get("name")
                if not name:
                    raise InputError(f"PMML {label}: a NumericPredictor has no name")
                if _float_attr(el, "exponent", label, "1") != 1:
                    raise InputError(f"PMML {label}: predictor '{name}' has an exponent other than 1; lintools reads linear terms only")
                if name in terms:
                    raise InputError(f"PMML {label}: predictor '{name}' appears twice")
                terms[name] = _float_attr(el, "coefficient", f"{label}, predictor '{name}'")
            elif tag in ("CategoricalPredictor", "PredictorTerm"):
                raise InputError(f"PMML {label}: {tag} terms are not supported; encode them as numeric indicator columns")
        parsed.append((t.get("targetCategory"), _float_attr(t, "intercept", label, "0"), terms))
        if terms:
            if names is None:
                names = list(terms)
            elif set(terms) != set(names):
                raise InputError(f"PMML {label} has other predictors than the first table")
    names = names or []
    if function == "regression":
        if norm != "none" or len(parsed) != 1:
            raise InputError(f"{where!r}: a regression model must have one table and normalizationMethod 'none'")
        _, b0, terms = parsed[0]
        return DeliveredModel("least_squares", tuple(names), np.array([terms[n] for n in names]), b0, (), target, where)
    if function != "classification":
        raise InputError(f"{where!r}: functionName {function!r} is not 'regression' or 'classification'")
    cats = tuple(c for c, _, _ in parsed)
    if any(c is None for c in cats):
        raise InputError(f"{where!r}: every RegressionTable of a classification model needs a targetCategory")
    if norm == "logit":
        if len(parsed) != 2 or any(parsed[1][2].values()) or parsed[1][1] != 0:
            raise InputError(f"{where!r}: a logit model must have two tables, the second empty (the reference category)")
        _, b0, terms = parsed[0]
        return DeliveredModel("logistic", tuple(names), np.array([terms.get(n, 0.0) for n in names]), b0, cats, target, where)
    if norm == "softmax":
        B = np.array([[terms.get(n, 0.0) for (_, _, terms) in parsed] for n in names]).reshape(len(names), len(parsed))
        b0 = np.array([b for _, b, _ in parsed])
        return DeliveredModel("softmax", tuple(names), B, b0, cats, target, where)
    raise InputError(f"{where!r}: normalizationMethod {norm!r} is not supported (lintools reads none, logit, softmax)")
