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

``NumericPredictor`` terms with exponent 1 and ``CategoricalPredictor`` terms are read
and written; a fit's indicator columns ``column=level`` of a text column (see
:attr:`lintools.Table.reference_levels`) are written as the categorical field they come
from (:mod:`lintools.exchange.pmml_categories`).  Anything else (interaction terms, other
exponents, other model types) is refused with a message rather than misread.  Reading checks that the document agrees with itself (namespace, required
attributes, a strict number grammar, one table per declared target category: see
:mod:`lintools.exchange.pmml_read`), refuses any document with a DTD or an entity declaration,
so external entities and entity expansion cannot occur, and reads no file other than
the one named.  Writing refuses what reading would refuse (unusable names, a target
named like a predictor, class labels that XML cannot hold or that print alike), so
:func:`write_pmml` never writes a file :func:`read_pmml` refuses.

Reference: Data Mining Group, PMML 4.4 - Regression
(``RegressionModel``, ``RegressionTable``, ``NumericPredictor``, ``CategoricalPredictor``).
"""

from __future__ import annotations

import io
import os
import xml.etree.ElementTree as ET
from dataclasses import dataclass
from typing import Any

import numpy as np

from ..support.errors import InputError
from ..support.files import file_path, read_bounded, write_atomic
from ..support.text import intercept_label, section, title
from ..support.categories import CategoricalField
from ..models.kinds import KINDS, ModelKind, kind_of
from .pmml_categories import write_inputs, write_terms
from .pmml_read import NAMESPACES, parse_pmml
from ..support.validate import (
    short_repr,
    as_matrix,
    check_flag,
    check_names,
    name_problem,
    scored,
    text_problem,
)

__all__ = ["DeliveredModel", "read_pmml", "write_pmml"]

NS = NAMESPACES[-1]
MAX_BYTES = 64 * 1024 * 1024


@dataclass(frozen=True)
class DeliveredModel:
    """Coefficients read from a model file, ready to compare with a refit.

    ``coefficients`` is (p,) for ``kind`` "least_squares" and "logistic", (p, K) for
    "softmax"; ``intercept`` is a float or (K,).  ``classes`` lists the target
    categories (the positive class first for "logistic").

    ``linear_predictor(X)`` is ``intercept + X @ coefficients``; ``mean(X)`` applies the
    document's normalisation: none (least squares), the logistic function (logit: the
    probability of ``classes[0]``) or softmax (one column per class); ``labels(X)`` gives
    the most probable class.

    ``categorical_fields`` lists the document's categorical inputs with their valid values
    (:class:`lintools.support.categories.CategoricalField`); each value with a
    ``CategoricalPredictor`` is an input column named ``field=value`` (1 where the field
    has that value, else 0), and the values without one add nothing.
    """

    kind: str
    names: tuple[str, ...]
    coefficients: np.ndarray
    intercept: Any
    classes: tuple = ()
    target: str = "y"
    source: str = ""
    categorical_fields: tuple[CategoricalField, ...] = ()

    def _kind(self) -> ModelKind:
        kind = kind_of(self)
        if kind is None:
            raise InputError(f"this delivered model has kind {self.kind!r:.40}, which is not one of "
                             f"{', '.join(KINDS)}; read models with read_pmml or lintools.load")
        return kind

    def linear_predictor(self, X: Any) -> np.ndarray:
        """``intercept + X @ coefficients`` for new rows ``X`` (columns in ``names`` order)."""
        arr, _ = as_matrix(X, "X")
        if arr.shape[1] != len(self.names):
            raise InputError(f"X has {arr.shape[1]} columns but the model has {len(self.names)} predictors "
                             f"({', '.join(self.names)}); pass the same columns in the same order")
        return scored(arr, self.coefficients, self.intercept)

    def mean(self, X: Any) -> np.ndarray:
        """The model's prediction for new rows: the response (least squares), the
        probability of ``classes[0]`` (logistic) or the class probabilities (softmax)."""
        return self._kind().mean_of(self.linear_predictor(X))

    def labels(self, X: Any) -> np.ndarray:
        """The most probable class of each row (a classifier's): for logit ``classes[0]``
        where its linear predictor is above 0, else ``classes[1]``; for softmax the class
        with the largest linear predictor (the first of equal ones)."""
        kind = self._kind()
        if not kind.classifier:
            raise InputError(f"labels() applies to classification models; this is a {self.kind} model")
        eta = self.linear_predictor(X)
        if kind.per_class:
            return np.asarray(self.classes)[np.argmax(eta, axis=1)]
        return np.asarray(self.classes)[np.where(eta > 0, 0, 1)]

    def report(self) -> str:
        """A plain-text account of the model: title, Data (target, source, classes),
        Coefficients (one column per class for softmax) and the categorical inputs."""
        kind = self._kind()
        data = [("target", self.target)] + ([("source", str(self.source))] if self.source else [])
        if kind.per_class:
            data.append(("classes", f"{len(self.classes)}: {', '.join(map(str, self.classes))}"))
        elif kind.classifier:
            data += [("classes", ", ".join(map(str, self.classes))), ("modelled probability", f"of {self.classes[0]!s}")]
        B = np.asarray(self.coefficients, dtype=float).reshape(len(self.names), -1)
        b = np.atleast_1d(np.asarray(self.intercept, dtype=float))
        cols = [str(c) for c in self.classes] if kind.per_class else ["coefficient"]
        label = intercept_label(self.names)
        width = max([len(n) for n in self.names] + [len(label), 4])
        lines = title(f"delivered {self.kind} model of '{self.target}'") + section("Data", data)
        lines += ["", "Coefficients", "term".ljust(width) + "".join(c[:20].rjust(22) for c in cols)]
        lines.append("-" * len(lines[-1]))
        for term, row in [(label, b)] + list(zip(self.names, B)):
            lines.append(term.ljust(width) + "".join(f"{v:22.15g}" for v in row))
        if self.categorical_fields:
            lines += section("Categorical inputs", [
                (f"'{f.name}'", f"values {', '.join(map(repr, f.levels))}; a value without a term "
                                f"'{f.name}=<value>' adds nothing") for f in self.categorical_fields])
        return "\n".join(lines) + "\n"


def _num(x: float) -> str:
    return repr(float(x))


def _writable(fit: Any, target: str) -> list[str]:
    """The class labels as written (``str``), after refusing what read_pmml would refuse."""
    try:
        check_names(fit.names, len(fit.names), None)
    except InputError as exc:
        raise InputError(f"write_pmml: the fit's names cannot be written ({exc})") from None
    problem = name_problem(target)
    if problem is not None:
        raise InputError(f"write_pmml: the target name {target[:80]!r} {problem}; pass target= with a usable name")
    if target in fit.names:
        raise InputError(f"write_pmml: the target name {target!r} is also the name of a predictor; pass target= "
                         "with another name")
    labels = [str(c) for c in getattr(fit, "classes", ())]
    for label in labels:
        problem = text_problem(label)
        if problem is not None:
            raise InputError(f"write_pmml: the class label {label[:80]!r} {problem}; XML cannot hold it as "
                             "written: relabel the classes before fitting")
    if len(set(labels)) != len(labels):
        dup = next(lab for lab in labels if labels.count(lab) > 1)
        raise InputError(f"write_pmml: two class labels are both written {dup!r}; relabel the classes before fitting")
    return labels


def _terms(fit: Any, kind: ModelKind, labels: list[str]) -> tuple[np.ndarray, np.ndarray]:
    """The intercepts (K,) and coefficients (p, K) to write (K the kind's number of
    outputs), checked for shape and finiteness (a model assembled by hand may hold anything)."""
    p, k = len(fit.names), kind.outputs(len(labels))
    try:
        B = np.asarray(fit.coefficients, dtype=float)
        b = np.asarray(fit.intercept, dtype=float)
    except (TypeError, ValueError):
        B = b = np.full(1, np.nan)
    want = (p, k) if kind.per_class else (p,)
    if kind.classes and len(labels) != kind.classes:
        raise InputError(f"write_pmml: a {kind.words} model needs two classes; this one has {len(labels)}")
    if B.shape != want or b.shape != (want[1:]) or not (np.all(np.isfinite(B)) and np.all(np.isfinite(b))):
        raise InputError(f"write_pmml: the model's coefficients must be finite numbers of shape {want} and its "
                         f"intercept of shape {want[1:]}; got shapes {B.shape} and {b.shape}: write a fit record "
                         "or a model read from a file, unchanged")
    return b.reshape(k), B.reshape(p, k)


def write_pmml(fit: Any, path: str | os.PathLike, *, target: str | None = None, reference_levels: Any = None,
               replace: bool = False) -> None:
    """Write a lintools fit (least squares, logistic or softmax) as a PMML 4.4 document.

    ``fit`` may also be a :class:`DeliveredModel` (a model read with :func:`read_pmml`, or
    from a lintools model file): it carries all that PMML needs (names, coefficients,
    intercept, classes with the positive one first, target), so a delivered model can be
    written out again.  ``target`` (a str) names the response; by default the fit's own.
    The file is written atomically (a temporary file in the same folder, renamed into
    place); an existing ``path`` is refused unless ``replace=True``.  Names, the target
    and class labels that :func:`read_pmml` would refuse are refused here, with the
    remedy, before anything is written.

    The indicator columns ``column=level`` of a text column are written as one
    categorical field with its levels and a ``CategoricalPredictor`` per indicator column
    when the fit's ``categorical_fields`` say so, or ``reference_levels`` (``{column:
    reference level}``, as :attr:`lintools.Table.reference_levels` of the table the fit
    was fitted on) does; other inputs are continuous fields.
    """
    kind = kind_of(fit)
    if kind is None:
        raise InputError(f"write_pmml() takes a lintools fit record or a DeliveredModel; got {type(fit).__name__}")
    if target is None:
        target = getattr(fit, "target", None) or "y"
    if not isinstance(target, str):
        raise InputError(f"write_pmml: target must be a str (the name of the response) or None; got "
                         f"{type(target).__name__} {short_repr(target)}")
    check_flag(replace, "replace")
    labels = _writable(fit, target)
    if reference_levels is not None:
        from ..support.categories import with_references

        fit = with_references(fit, reference_levels, "write_pmml")
    fields = tuple(getattr(fit, "categorical_fields", ()))
    if target in {f.name for f in fields if isinstance(f, CategoricalField)}:
        raise InputError(f"write_pmml: the target name {target!r} is also the name of a categorical input; pass "
                         "target= with another name")
    intercepts, coefficients = _terms(fit, kind, labels)
    ET.register_namespace("", NS)
    root = ET.Element(f"{{{NS}}}PMML", {"version": "4.4"})
    header = ET.SubElement(root, f"{{{NS}}}Header", {"description": f"lintools {kind.name} fit"})
    from ..support.version import __version__

    ET.SubElement(header, f"{{{NS}}}Application", {"name": "lintools", "version": __version__})
    dd = ET.SubElement(root, f"{{{NS}}}DataDictionary")
    holder = ET.Element("MiningSchema")  # the inputs' MiningFields, moved into the model below
    try:
        layout = write_inputs(dd, holder, lambda name: f"{{{NS}}}{name}", fit.names, fields)
    except InputError as exc:
        raise InputError(f"write_pmml: the fit's categorical fields cannot be written ({exc})") from None
    dd.set("numberOfFields", str(len(dd) + 1))
    if not kind.classifier:
        ET.SubElement(dd, f"{{{NS}}}DataField", {"name": target, "optype": "continuous", "dataType": "double"})
    else:
        field = ET.SubElement(dd, f"{{{NS}}}DataField", {"name": target, "optype": "categorical", "dataType": "string"})
        for label in labels:
            ET.SubElement(field, f"{{{NS}}}Value", {"value": label})
    attrs = {"functionName": kind.function_name, "normalizationMethod": kind.normalisation}
    model = ET.SubElement(root, f"{{{NS}}}RegressionModel", {"modelName": f"lintools {kind.name}", **attrs})
    schema = ET.SubElement(model, f"{{{NS}}}MiningSchema")
    schema.extend(holder)
    ET.SubElement(schema, f"{{{NS}}}MiningField", {"name": target, "usageType": "target"})

    def table(intercept: float, coefs: np.ndarray | None, category: str | None = None) -> None:
        a = {"intercept": _num(intercept)}
        if category is not None:
            a["targetCategory"] = category
        t = ET.SubElement(model, f"{{{NS}}}RegressionTable", a)
        if coefs is not None:
            write_terms(t, lambda name: f"{{{NS}}}{name}", fit.names, coefs, layout, _num)

    if kind.normalisation == "none":  # one table
        table(intercepts[0], coefficients[:, 0])
    elif kind.normalisation == "logit":  # the modelled class's table, then the other's, empty
        # a delivered model lists its positive class first (see DeliveredModel)
        pos = 0 if isinstance(fit, DeliveredModel) else list(fit.classes).index(fit.positive_class)
        table(intercepts[0], coefficients[:, 0], labels[pos])
        table(0.0, None, labels[1 - pos])
    else:  # softmax: one table per class
        for k, label in enumerate(labels):
            table(intercepts[k], coefficients[:, k], label)
    file_path(path, "PMML file")
    buffer = io.BytesIO()
    ET.ElementTree(root).write(buffer, encoding="utf-8", xml_declaration=True)
    write_atomic(path, buffer.getvalue(), replace=replace, label="PMML file")


def read_pmml(path: str | os.PathLike) -> DeliveredModel:
    """Read a PMML ``RegressionModel`` and return its coefficients as a :class:`DeliveredModel`.

    Raises
    ------
    InputError
        If the file is not a PMML 4.x document, declares a DTD or entities, or does not
        agree with itself (see :mod:`lintools.exchange.pmml_read`); the message names the file,
        the element or attribute, and the remedy.
    """
    where = file_path(path, "PMML file")
    return read_pmml_bytes(read_bounded(where, "PMML file", MAX_BYTES), where)


def read_pmml_bytes(raw: bytes, where: str) -> DeliveredModel:
    """The model in the bytes ``raw`` of the PMML file ``where`` (see :func:`read_pmml`)."""
    if len(raw) > MAX_BYTES:
        raise InputError(f"PMML file {where!r} is larger than the {MAX_BYTES} bytes allowed; check that this "
                         "is the intended file")
    return DeliveredModel(**parse_pmml(raw, where), source=where)
