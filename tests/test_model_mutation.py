"""Mutated model files: refused with InputError, or a model that works (issue #17).

Valid JSON and PMML files written by lintools (statsmodels' spector, stack-loss and
anes96 data) are mutated: values replaced by hostile ones (NaN, infinities, huge and
tiny numbers, wrong types, other fields' values), arrays and tuples lengthened,
shortened or reshaped, keys, attributes and elements deleted, duplicated or renamed.
Invariant checked: loading either raises :class:`lintools.InputError`, or returns a
model whose ``report()``, ``mean(X)``, ``linear_predictor(X)`` (and ``labels(X)``,
``coefficient_table()``) and :func:`lintools.compare_coefficients` run without any other
exception; the command line's reader (``read_delivered``) agrees.  Source of the
expectation: the error contract of README "Guarantees" (common practice: a file either
loads as a working model or is refused with a reason).

The deterministic sweeps replace every field of four JSON files by each of 15 hostile
values (1860 files, of which 349 load, measured) and each kind of attribute of four PMML
documents by each of 20 values or its deletion (2331 documents, 834 read); the
hypothesis tests draw deeper mutations (array entries, shapes, deletions, element
renames, several at once) from all six files.
"""

from __future__ import annotations

import copy
import json
import xml.etree.ElementTree as ET
from pathlib import Path
from typing import Any

import numpy as np
import pytest
import statsmodels.api as sm
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

import lintools as lt
from lintools import InputError
from lintools.cli.check import read_delivered
from lintools.exchange.pmml import read_pmml, write_pmml

SPECTOR = sm.datasets.spector.load_pandas().data
SX, SY = SPECTOR[["GPA", "TUCE", "PSI"]], SPECTOR["GRADE"]
STACK = sm.datasets.stackloss.load_pandas()
ANES = sm.datasets.anes96.load_pandas().data
AX = ANES[["selfLR", "age", "educ"]]
# party identification (0..6) grouped into three classes, to keep the files small
AY = np.array(["democrat", "independent", "republican"])[np.digitize(ANES["PID"], [1.5, 4.5])]

FITS = [
    lt.least_squares(STACK.exog, STACK.endog, diagnostics=True),
    lt.least_squares(STACK.exog, STACK.endog, intercept=False, covariance="HC3"),
    lt.logistic(SX, SY, profile=True),
    lt.logistic(SX, SY, intercept=False, l2=0.5),
    lt.softmax(AX, AY),
    lt.softmax(AX, AY, reference=None, l2=1.0),
]
#: the files of the deterministic sweeps (the hypothesis tests draw from all of them)
SWEPT = (0, 3, 4, 5)
MUTATE = settings(max_examples=60, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])


def rows(p: int) -> np.ndarray:
    """Seven rows of ``p`` moderate values (property-test input)."""
    return np.cos(np.arange(7 * p, dtype=float).reshape(7, p)) * 2.0


def exercise(rec: Any) -> None:
    """Everything a loaded record offers; only InputError may escape."""
    p = len(rec.names)
    X = rows(p)
    for call in (
        rec.report,
        rec.coefficient_table,
        lambda: rec.mean(X),
        lambda: rec.linear_predictor(X),
        lambda: rec.labels(X) if rec.kind != "least_squares" else None,
        lambda: lt.compare_coefficients(rec, rec.coefficients, rec.intercept if rec.with_intercept else None, X=X),
        lambda: lt.compare_coefficients(rec, np.asarray(rec.coefficients) + 0.25, X=X),
    ):
        try:
            call()
        except InputError:
            pass


def exercise_delivered(m: Any, refits: dict) -> None:
    X = rows(len(m.names))
    for call in (m.report, lambda: m.mean(X), lambda: m.linear_predictor(X),
                 lambda: lt.compare_coefficients(refits[m.kind], m.coefficients, m.intercept, names=m.names, X=X)):
        try:
            call()
        except InputError:
            pass


def load_checked(path: Path, cli: bool = True) -> bool:
    """True when the file loaded (and worked); False when it was refused.  With ``cli``
    the command line's reader must agree."""
    try:
        rec = lt.load(path)
    except InputError as exc:
        assert str(exc)
        loaded = False
    else:
        exercise(rec)
        loaded = True
    if cli:
        try:
            read_delivered(str(path))
        except InputError:
            assert not loaded, "the command line refused a file that load() accepts"
    return loaded


@pytest.fixture(scope="module")
def docs(tmp_path_factory) -> list[dict]:
    tmp = tmp_path_factory.mktemp("docs")
    out = []
    for i, fit in enumerate(FITS):
        lt.save(fit, tmp / f"m{i}.json")
        out.append(json.loads((tmp / f"m{i}.json").read_text()))
    return out


HOSTILE = [0, -1, 1e308, 5e-324, 2**63 - 1, {"$float": "nan"}, {"$float": "-inf"}, True, None, "x", [],
           {"$tuple": ["a", "a"]}, {"$array": [1.0], "shape": [1], "dtype": "float64"},
           {"$array": [], "shape": [0, 3], "dtype": "float64"}, {"$array": [1], "shape": [1], "dtype": "int64"}]
#: the extra values drawn by the hypothesis tests
MORE = [-(2**63), -1e308, {"$float": "inf"}, False, "", {}, {"$tuple": []},
        {"$array": [True], "shape": [1], "dtype": "bool"}]


def test_every_field_replaced_by_every_hostile_value(docs, tmp_path):
    """Sweep: each field (and each convergence field) of each file, times each hostile
    value, either refused or a working model."""
    path = tmp_path / "m.json"
    tried = loaded = 0
    swept = [docs[i] for i in SWEPT]
    for doc in swept:
        fields = doc["record"]["fields"]
        targets = [(fields, k) for k in fields] + [(fields["convergence"]["fields"], k)
                                                   for k in fields["convergence"]["fields"]]
        for container, key in targets:
            keep = container[key]
            for value in HOSTILE:
                container[key] = value
                path.write_text(json.dumps(doc))
                loaded += load_checked(path, cli=False)
                tried += 1
            container[key] = keep
    assert tried == len(HOSTILE) * sum(len(d["record"]["fields"]) + 6 for d in swept)
    assert tried > 1500 and 0 < loaded < tried  # some mutations are harmless (e.g. a new message)


def _paths(node: Any, prefix: tuple = ()) -> list[tuple]:
    out = [prefix]
    if isinstance(node, dict):
        for k, v in node.items():
            out += _paths(v, prefix + (k,))
    elif isinstance(node, list):
        for i in sorted({0, 1, len(node) - 1} & set(range(len(node)))):
            out += _paths(node[i], prefix + (i,))
    return out


def _mutate(doc: dict, draw) -> dict:
    fields = doc["record"]["fields"]  # the original's: sources for the swap below
    doc = copy.deepcopy(doc)
    for _ in range(draw(st.integers(1, 3))):
        path = draw(st.sampled_from([p for p in _paths(doc) if p]))
        parent = doc
        for key in path[:-1]:
            parent = parent[key]
        key, value = path[-1], parent[path[-1]]
        op = draw(st.sampled_from(["hostile", "scale", "delete", "grow", "shrink", "swap"]))
        if op == "hostile":
            parent[key] = copy.deepcopy(draw(st.sampled_from(HOSTILE + MORE)))
        elif op == "scale" and isinstance(value, (int, float)) and not isinstance(value, bool):
            parent[key] = value * draw(st.sampled_from([-1, 2, 0.5, 1e300, 1e-300, 0]))
        elif op == "delete":
            if isinstance(parent, dict):
                del parent[key]
            else:
                parent.pop(key)
        elif op == "grow" and isinstance(value, list):
            value.append(value[-1] if value else 1.0)
        elif op == "shrink" and isinstance(value, list) and value:
            value.pop()
        elif op == "swap":  # another field's value in this place (type and shape confusion)
            parent[key] = copy.deepcopy(fields[draw(st.sampled_from(sorted(fields)))])
    return doc


@MUTATE
@given(data=st.data())
def test_mutated_json_model_files_are_refused_or_work(docs, tmp_path, data):
    """Invariant: a mutated JSON model file loads as a working record or raises InputError."""
    doc = data.draw(st.sampled_from(docs))
    mutated = _mutate(doc, data.draw)
    path = tmp_path / "m.json"
    path.write_text(json.dumps(mutated))
    load_checked(path)


# ------------------------------------------------------------------------------- PMML
NS = "{http://www.dmg.org/PMML-4_4}"


@pytest.fixture(scope="module")
def pmml_docs(tmp_path_factory) -> list[str]:
    tmp = tmp_path_factory.mktemp("pmml")
    out = []
    for i, fit in enumerate(FITS):
        write_pmml(fit, tmp / f"m{i}.pmml")
        out.append((tmp / f"m{i}.pmml").read_text())
    return out


REFITS = {"least_squares": FITS[0], "logistic": FITS[2], "softmax": FITS[4]}
ATTRIBUTE_VALUES = ["", " ", "0", "1", "1e308", "1e999", "5e-324", "nan", "1_0", "\uff11", "GPA", "age", "y",
                    "democrat", "(intercept)", "target", "classification", "softmax", "none", "categorical"]
#: the extra values drawn by the hypothesis tests
MORE_ATTRIBUTES = ["-0", "2", "-1e308", "inf", "0x10", "x1", "TUCE", "1.0", "0.0", "2.0", "active", "regression",
                   "logit", "continuous", "republican"]


def _pmml_mutate(text: str, draw) -> bytes:
    ET.register_namespace("", NS[1:-1])
    root = ET.fromstring(text.encode())
    for _ in range(draw(st.integers(1, 3))):
        elements = [(parent, el) for parent in root.iter() for el in parent]
        parent, el = draw(st.sampled_from(elements))
        op = draw(st.sampled_from(["attribute", "delete-attribute", "delete", "duplicate", "rename", "reorder"]))
        if op == "attribute" and el.attrib:
            el.set(draw(st.sampled_from(sorted(el.attrib))), draw(st.sampled_from(ATTRIBUTE_VALUES + MORE_ATTRIBUTES)))
        elif op == "delete-attribute" and el.attrib:
            del el.attrib[draw(st.sampled_from(sorted(el.attrib)))]
        elif op == "delete":
            parent.remove(el)
        elif op == "duplicate":
            parent.append(copy.deepcopy(el))
        elif op == "rename":
            el.tag = draw(st.sampled_from([NS + "Extension", NS + "NumericPredictor", "NumericPredictor",
                                           NS + "RegressionTable", "{urn:other}Value", NS + "TreeModel"]))
        elif op == "reorder" and len(parent) > 1:
            kids = list(parent)
            for kid in kids:
                parent.remove(kid)
            for kid in reversed(kids):
                parent.append(kid)
    return ET.tostring(root, encoding="utf-8", xml_declaration=True)


def _read_checked(path: Path, cli: bool = True) -> bool:
    try:
        m = read_pmml(path)
    except InputError as exc:
        assert str(exc)
        loaded = False
    else:
        assert np.all(np.isfinite(m.coefficients)) and np.all(np.isfinite(m.intercept))
        exercise_delivered(m, REFITS)
        loaded = True
    if cli:
        try:
            read_delivered(str(path))
        except InputError:
            assert not loaded, "the command line refused a document that read_pmml accepts"
    return loaded


@MUTATE
@given(data=st.data())
def test_mutated_pmml_documents_are_refused_or_work(pmml_docs, tmp_path, data):
    """Invariant: a mutated PMML document reads as a working model or raises InputError."""
    raw = _pmml_mutate(data.draw(st.sampled_from(pmml_docs)), data.draw)
    path = tmp_path / "m.pmml"
    path.write_bytes(raw)
    _read_checked(path)


def test_every_attribute_replaced_by_every_hostile_value(pmml_docs, tmp_path):
    """Sweep: each kind of attribute (element and name, at its first and last place) of
    each PMML document, times each hostile value (and once deleted), either refused or a
    working model."""
    path = tmp_path / "m.pmml"
    tried = loaded = 0
    ET.register_namespace("", NS[1:-1])
    for text in [pmml_docs[i] for i in SWEPT]:
        root = ET.fromstring(text.encode())
        kinds: dict[tuple, list] = {}
        for el in root.iter():
            for name in el.attrib:
                kinds.setdefault((el.tag, name), []).append((el, name))
        spots = [spot for places in kinds.values() for spot in {id(p): p for p in (places[0], places[-1])}.values()]
        for el, name in spots:
            keep = el.get(name)
            for value in ATTRIBUTE_VALUES + [None]:
                if value is None:
                    del el.attrib[name]
                else:
                    el.set(name, value)
                path.write_bytes(ET.tostring(root, encoding="utf-8", xml_declaration=True))
                loaded += _read_checked(path, cli=False)
                tried += 1
            el.set(name, keep)
    assert tried > 1500 and 0 < loaded < tried
