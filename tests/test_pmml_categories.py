"""PMML 4.4 categorical inputs: CategoricalPredictor terms and categorical DataFields.

Sources named beside each check:
* the structural rules are those of the Data Mining Group's PMML 4.4 specification pages
  (General Structure, Data Dictionary, Mining Schema, Regression: the XSD fragments
  printed on them); the schema file itself is not shipped, so each rule that lintools'
  documents use is checked here, by a checker that is itself shown to catch a breach;
* the supplier document follows the layout of the classification example of the PMML
  4.4 Regression page (job category by age, years of work, sex and minority, softmax;
  its numbers quoted from memory of that page) and is scored against a hand computation
  of the specification's formulas in exact rationals and 40-digit mpmath;
* round trips compare with the fit itself (statsmodels' shipped ``anes96`` and Grunfeld
  data, as in ``test_scoring.py``).
"""

import re
import subprocess
import sys
import xml.etree.ElementTree as ET
from fractions import Fraction

import mpmath
import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

import lintools as lt
from lintools import InputError
from lintools.support.categories import CategoricalField
from test_scoring import CASES, _fit

NS = "http://www.dmg.org/PMML-4_4"
P = f"{{{NS}}}"

# ------------------------------------------------------------------ structural rules of PMML 4.4
# xs:double lexical space as PMML numbers use it (REAL-NUMBER): sign, digits, point, exponent.
REAL = re.compile(r"[+-]?(\d+(\.\d*)?|\.\d+)([eE][+-]?\d+)?")
DATATYPES = {"string", "integer", "float", "double", "boolean", "date", "time", "dateTime"}  # DATATYPE (subset)
OPTYPES = {"categorical", "ordinal", "continuous"}
USAGE = {"active", "predicted", "target", "supplementary", "group", "order", "frequencyWeight",
         "analysisWeight"}
MODEL_ORDER = ["MiningSchema", "Output", "ModelStats", "ModelExplanation", "Targets", "LocalTransformations",
               "RegressionTable", "ModelVerification"]
TABLE_ORDER = ["NumericPredictor", "CategoricalPredictor", "PredictorTerm"]


def _local(tag):
    return tag.split("}", 1)[1] if tag.startswith(P) else "?" + tag


def _in_order(children, order):
    ranks = [order.index(c) for c in children if c != "Extension"]
    return all(c in order or c == "Extension" for c in children) and ranks == sorted(ranks)


def structure_problems(text):
    """Every breach of the PMML 4.4 rules below (an empty list: none)."""
    bad = []
    root = ET.fromstring(text)
    # General Structure: the root is PMML in the 4.4 namespace with version "4.4";
    # Header first, then DataDictionary, then the model.
    if root.tag != P + "PMML" or root.get("version") != "4.4":
        bad.append("root is not <PMML version='4.4'> in the PMML 4.4 namespace")
    kids = [_local(c.tag) for c in root]
    if kids[:2] != ["Header", "DataDictionary"]:
        bad.append(f"PMML children begin {kids[:2]}, not Header, DataDictionary")
    dd = root.find(P + "DataDictionary")
    fields = {}
    for f in dd.findall(P + "DataField"):
        # Data Dictionary: name, optype and dataType are required; names are unique.
        name, optype, dtype = f.get("name"), f.get("optype"), f.get("dataType")
        if not name or optype not in OPTYPES or dtype not in DATATYPES:
            bad.append(f"DataField {name!r} lacks a required attribute or has an unknown optype/dataType")
        if name in fields:
            bad.append(f"DataField {name!r} twice")
        values = [v.get("value") for v in f.findall(P + "Value")]
        if None in values or len(set(values)) != len(values):
            bad.append(f"DataField {name!r} has a Value without value, or the same value twice")
        if optype == "categorical" and not values:
            bad.append(f"categorical DataField {name!r} lists no Value")
        fields[name] = (optype, values)
    # Data Dictionary: numberOfFields, when present, is the number of DataField elements.
    if dd.get("numberOfFields") is not None and int(dd.get("numberOfFields")) != len(fields):
        bad.append(f"numberOfFields {dd.get('numberOfFields')} but {len(fields)} DataField elements")
    models = root.findall(P + "RegressionModel")
    model = models[0]
    # Regression: functionName is required; the RegressionModel's children come in the XSD's order.
    if model.get("functionName") not in ("regression", "classification"):
        bad.append("RegressionModel without a regression/classification functionName")
    if model.get("normalizationMethod", "none") not in ("none", "simplemax", "softmax", "logit", "probit",
                                                        "cloglog", "exp", "loglog", "cauchit"):
        bad.append("unknown normalizationMethod")
    if not _in_order([_local(c.tag) for c in model], MODEL_ORDER):
        bad.append("RegressionModel children out of the XSD's order")
    # Mining Schema: every MiningField names a DataField (field scope); usageType known.
    usage = {}
    for mf in model.find(P + "MiningSchema").findall(P + "MiningField"):
        name = mf.get("name")
        if name not in fields:
            bad.append(f"MiningField {name!r} is not a DataField")
        if mf.get("usageType", "active") not in USAGE:
            bad.append(f"MiningField {name!r} has an unknown usageType")
        usage[name] = mf.get("usageType", "active")
    targets = [n for n, u in usage.items() if u in ("target", "predicted")]
    tables = model.findall(P + "RegressionTable")
    if model.get("functionName") == "regression" and len(tables) != 1:
        bad.append("a regression model holds exactly one RegressionTable")
    if model.get("functionName") == "classification":
        # Regression: "exactly one regression table for each targetCategory".
        cats = [t.get("targetCategory") for t in tables]
        if sorted(cats, key=str) != sorted(fields[targets[0]][1]) if targets else True:
            bad.append(f"targetCategory values {cats} are not the target field's values")
    for t in tables:
        # Regression: intercept is required; NumericPredictor*, CategoricalPredictor*, PredictorTerm*.
        if t.get("intercept") is None or not REAL.fullmatch(t.get("intercept")):
            bad.append("RegressionTable without a numeric intercept")
        if not _in_order([_local(c.tag) for c in t], TABLE_ORDER):
            bad.append("RegressionTable terms out of the order NumericPredictor, CategoricalPredictor")
        for term in t:
            kind, name = _local(term.tag), term.get("name")
            if not REAL.fullmatch(term.get("coefficient") or ""):
                bad.append(f"{kind} {name!r} without a numeric coefficient")
            if usage.get(name) != "active":
                bad.append(f"{kind} {name!r} is not an active MiningField")
            optype, values = fields.get(name, (None, []))
            if kind == "NumericPredictor" and optype != "continuous":
                bad.append(f"NumericPredictor {name!r} on a field of optype {optype!r}")
            if kind == "CategoricalPredictor" and (optype not in ("categorical", "ordinal")
                                                   or term.get("value") not in values):
                bad.append(f"CategoricalPredictor {name!r}={term.get('value')!r} is not a value of a categorical field")
    return bad


@pytest.mark.parametrize("kind", sorted(CASES))
def test_written_documents_follow_each_structural_rule(tmp_path, kind):
    """PMML 4.4 rules above; the text column is one categorical DataField with every level."""
    _, table, fit = _fit(tmp_path, kind)
    path = tmp_path / "m.pmml"
    lt.write_pmml(fit, path, reference_levels=table.reference_levels)
    text = path.read_text()
    assert structure_problems(text) == []
    root = ET.fromstring(text)
    column, reference = next(iter(table.reference_levels.items()))
    field = [f for f in root.iter(P + "DataField") if f.get("name") == column]
    assert len(field) == 1 and field[0].get("optype") == "categorical"
    levels = [v.get("value") for v in field[0].findall(P + "Value")]
    assert levels[0] == reference and {f"{column}={lv}" for lv in levels[1:]} == {
        n for n in fit.names if n.startswith(column + "=")}
    assert not any("=" in (f.get("name") or "") for f in root.iter(P + "DataField"))  # no indicator fields


BREACHES = [  # (edit of a written logistic document, the rule the checker must name)
    (lambda s: re.sub(r'numberOfFields="\d+"', 'numberOfFields="99"', s), "numberOfFields"),
    (lambda s: re.sub(r'(<NumericPredictor [^>]*/>)((?:<NumericPredictor [^>]*/>|<CategoricalPredictor [^>]*/>)+)',
                      r"\2\1", s, count=1), "out of the order"),
    (lambda s: s.replace('<CategoricalPredictor name="educ" value="E', '<CategoricalPredictor name="educ" value="X',
                         1), "is not a value of a categorical field"),
    (lambda s: s.replace('targetCategory="0.0"', 'targetCategory="zero"'), "targetCategory values"),
    (lambda s: re.sub(r'<MiningField name="age" ?/>', '', s), "is not an active MiningField"),
]


@pytest.mark.parametrize("edit, rule", BREACHES)
def test_the_structure_checker_catches_each_breach(tmp_path, edit, rule):
    """The checker above can fail: each edit breaks one rule, and it is named."""
    _, table, fit = _fit(tmp_path, "logistic")
    path = tmp_path / "m.pmml"
    lt.write_pmml(fit, path, reference_levels=table.reference_levels)
    text = path.read_text()
    broken = edit(text)
    assert broken != text
    assert any(rule in problem for problem in structure_problems(broken))


@pytest.mark.parametrize("kind", sorted(CASES))
def test_round_trip_with_categorical_predictors_is_exact(tmp_path, kind):
    """write_pmml then read_pmml gives back the fit's names, coefficients, intercept and
    the categorical field (column, every level, reference first) exactly."""
    _, table, fit = _fit(tmp_path, kind)
    lt.write_pmml(fit, tmp_path / "m.pmml", reference_levels=table.reference_levels)
    m = lt.read_pmml(tmp_path / "m.pmml")
    assert m.names == fit.names and m.kind == kind
    assert np.array_equal(m.coefficients, fit.coefficients)
    assert np.array_equal(np.asarray(m.intercept), np.asarray(fit.intercept))
    lt.save(fit, tmp_path / "m.json", reference_levels=table.reference_levels)
    assert m.categorical_fields == lt.load(tmp_path / "m.json").categorical_fields
    (f,) = m.categorical_fields
    assert isinstance(f, CategoricalField) and f.data_type == "string"
    # and a document read back writes the same document (lintools' writer is stable)
    lt.write_pmml(lt.load(tmp_path / "m.json"), tmp_path / "again.pmml", target=m.target)
    assert (tmp_path / "again.pmml").read_text() == (tmp_path / "m.pmml").read_text()


# ------------------------------------------------------------------ a supplier's document
JOBCAT = {  # category -> (intercept, age, work, sex=0, minority=0); the spec example's layout
    "clerical": ("46.418", "-0.132", "7.867E-02", "-20.525", "-19.054"),
    "professional": ("51.169", "-0.302", "0.155", "-21.389", "-18.443"),
    "trainee": ("25.478", "-0.154", "0.266", "-2.639", "-19.821"),
}


def supplier_document(normalization="softmax"):
    """A document in the layout of the PMML 4.4 Regression page's classification example:
    sex and minority are categorical fields, each level with a CategoricalPredictor (the
    level 1 with coefficient 0), the last category's table empty."""
    cats = list(JOBCAT) + ["skilled"] if normalization == "softmax" else ["clerical", "skilled"]
    tables = []
    for c in cats[:-1]:
        b0, age, work, sex0, min0 = JOBCAT[c]
        tables.append(f"""
    <RegressionTable intercept="{b0}" targetCategory="{c}">
      <NumericPredictor name="age" exponent="1" coefficient="{age}"/>
      <NumericPredictor name="work" exponent="1" coefficient="{work}"/>
      <CategoricalPredictor name="sex" value="0" coefficient="{sex0}"/>
      <CategoricalPredictor name="sex" value="1" coefficient="0.000"/>
      <CategoricalPredictor name="minority" value="0" coefficient="{min0}"/>
      <CategoricalPredictor name="minority" value="1" coefficient="0.000"/>
    </RegressionTable>""")
    tables.append(f'\n    <RegressionTable intercept="0.000" targetCategory="{cats[-1]}"/>')
    values = "".join(f'<Value value="{c}"/>' for c in cats)
    return f"""<?xml version="1.0" encoding="UTF-8"?>
<PMML xmlns="{NS}" version="4.4">
  <Header copyright="supplier"/>
  <DataDictionary numberOfFields="5">
    <DataField name="age" optype="continuous" dataType="double"/>
    <DataField name="work" optype="continuous" dataType="double"/>
    <DataField name="sex" optype="categorical" dataType="string"><Value value="0"/><Value value="1"/></DataField>
    <DataField name="minority" optype="categorical" dataType="integer"><Value value="0"/><Value value="1"/></DataField>
    <DataField name="jobcat" optype="categorical" dataType="string">{values}</DataField>
  </DataDictionary>
  <RegressionModel modelName="supplier" functionName="classification" normalizationMethod="{normalization}">
    <MiningSchema>
      <MiningField name="age"/><MiningField name="work"/><MiningField name="sex"/><MiningField name="minority"/>
      <MiningField name="jobcat" usageType="target"/>
    </MiningSchema>{"".join(tables)}
  </RegressionModel>
</PMML>
"""


def hand_probabilities(row, normalization):
    """PMML 4.4 Regression: y_j = intercept_j + sum coefficient_ji * x_i, a
    CategoricalPredictor's x being 1 when the field equals its value; softmax
    p_j = exp(y_j) / sum_k exp(y_k); logit p = 1 / (1 + exp(-y_1)).  Exact rationals for
    y, 40-digit mpmath for the exponentials."""
    age, work, sex, minority = row
    cats = list(JOBCAT) if normalization == "softmax" else ["clerical"]
    ys = []
    for c in cats:
        b0, a, w, s0, m0 = (Fraction(v) for v in JOBCAT[c])
        ys.append(b0 + a * Fraction(age) + w * Fraction(work) + s0 * (sex == "0") + m0 * (minority == "0"))
    mpmath.mp.dps = 40
    if normalization == "logit":
        p = 1 / (1 + mpmath.exp(-mpmath.mpf(ys[0].numerator) / ys[0].denominator))
        return [p, 1 - p]
    e = [mpmath.exp(mpmath.mpf(y.numerator) / y.denominator) for y in ys] + [mpmath.mpf(1)]  # skilled: y = 0
    return [v / sum(e) for v in e]


ROWS = st.lists(st.tuples(st.integers(18, 70), st.floats(0, 45, allow_nan=False).map(lambda v: round(v, 2)),
                          st.sampled_from(["0", "1"]), st.sampled_from(["0", "1"])), min_size=1, max_size=6)


def _design(rows):
    return np.array([[a, w, s == "0", s == "1", m == "0", m == "1"] for a, w, s, m in rows], dtype=float)


@pytest.mark.parametrize("normalization", ["softmax", "logit"])
@settings(max_examples=40, deadline=None)
@given(rows=ROWS)
def test_supplier_document_scores_as_the_specification_computes(tmp_path_factory, normalization, rows):
    """Invariant: read_pmml's mean on any rows equals the hand computation of the
    specification's formulas within 1e-13 relative (double rounding of a 6-term sum of
    numbers below 100)."""
    path = tmp_path_factory.mktemp("supplier") / "jobcat.pmml"
    path.write_text(supplier_document(normalization))
    m = lt.read_pmml(path)
    assert m.names == ("age", "work", "sex=0", "sex=1", "minority=0", "minority=1")
    assert [f.name for f in m.categorical_fields] == ["sex", "minority"]
    got = np.atleast_2d(m.mean(_design(rows)).T).T
    for row, g in zip(rows, got.reshape(len(rows), -1)):
        want = hand_probabilities(row, normalization)
        assert np.allclose(g, [float(v) for v in want[:g.size]], rtol=1e-13, atol=1e-300)


@settings(max_examples=6, deadline=None)
@given(rows=ROWS)
def test_cli_scores_the_supplier_document_as_the_specification_computes(tmp_path_factory, rows):
    """Invariant: lintools score on a CSV of any rows writes, per row, the hand-computed
    class probabilities (within 1e-13 relative) and the most likely class; an integer
    field's cell '1.0' is the value '1' (dataType integer compares numbers)."""
    folder = tmp_path_factory.mktemp("cli")
    (folder / "jobcat.pmml").write_text(supplier_document("softmax"))
    lines = ["id,age,work,sex,minority"] + [f"r{i},{a},{w},{s},{m}.0" for i, (a, w, s, m) in enumerate(rows)]
    (folder / "rows.csv").write_text("\n".join(lines) + "\n")
    proc = subprocess.run([sys.executable, "-m", "lintools", "score", "jobcat.pmml", "rows.csv", "--id", "id",
                           "--out", "scored.csv"], capture_output=True, text=True, timeout=120, cwd=folder)
    assert proc.returncode == 0, proc.stderr
    out = [line.split(",") for line in (folder / "scored.csv").read_text().splitlines()]
    cats = list(JOBCAT) + ["skilled"]
    assert out[0] == ["id"] + [f"linear_predictor:{c}" for c in cats] + [f"probability:{c}" for c in cats] + ["label"]
    for i, (row, cells) in enumerate(zip(rows, out[1:])):
        want = [float(v) for v in hand_probabilities(row, "softmax")]
        assert cells[0] == f"r{i}"
        assert np.allclose([float(v) for v in cells[5:9]], want, rtol=1e-13, atol=1e-300)
        assert cells[9] == cats[int(np.argmax(want))]


SUPPLIER_BAD = [  # (edit of the supplier document, the refusal's words)
    (lambda s: s.replace('name="sex" value="0" coefficient', 'name="sex" value="2" coefficient'),
     "'2', which is not a valid Value of that field"),
    (lambda s: s.replace('<DataField name="sex" optype="categorical"', '<DataField name="sex" optype="continuous"'),
     "CategoricalPredictor on 'sex', whose DataField has optype 'continuous'"),
    (lambda s: s.replace('<MiningField name="sex"/>', '<MiningField name="sex" invalidValueTreatment="asMissing"/>'),
     "invalidValueTreatment='asMissing' on the categorical field 'sex'"),
    (lambda s: s.replace('<MiningField name="age"/>', '<MiningField name="age" outliers="asExtremeValues"/>'),
     "outliers='asExtremeValues' on the MiningField 'age'"),
    (lambda s: s.replace("</MiningSchema>", '</MiningSchema><Targets><Target field="jobcat" rescaleFactor="2"/>'
                                            "</Targets>"), "rescaleFactor='2'"),
    (lambda s: s.replace('<Value value="0"/><Value value="1"/></DataField>\n    <DataField name="minority"',
                         '</DataField>\n    <DataField name="minority"'), "lists no valid Value for the categorical"),
    (lambda s: s.replace('<MiningField name="sex"/>', ''),
     "'sex' = '0' of RegressionTable 1, whose field is not an active MiningField"),
    (lambda s: s.replace('<CategoricalPredictor name="sex" value="1" coefficient="0.000"/>',
                         '<CategoricalPredictor name="sex" value="1" coefficient="0.000"/>'
                         '<CategoricalPredictor name="sex" value="1" coefficient="1"/>', 1), "'sex' = '1' of RegressionTable 1 twice"),
]


@pytest.mark.parametrize("edit, words", SUPPLIER_BAD)
def test_supplier_documents_that_would_be_misread_are_refused_by_name(tmp_path, edit, words):
    text = supplier_document()
    broken = edit(text)
    assert broken != text
    path = tmp_path / "bad.pmml"
    path.write_text(broken)
    with pytest.raises(InputError, match=re.escape(words)):
        lt.read_pmml(path)


def test_unseen_category_of_a_supplier_document_is_refused_by_name(tmp_path):
    (tmp_path / "jobcat.pmml").write_text(supplier_document())
    (tmp_path / "rows.csv").write_text("id,age,work,sex,minority\nr0,30,5,0,1\nr1,40,7,F,0\n")
    proc = subprocess.run([sys.executable, "-m", "lintools", "score", "jobcat.pmml", "rows.csv", "--id", "id",
                           "--out", "scored.csv"], capture_output=True, text=True, timeout=120, cwd=tmp_path)
    assert proc.returncode == 2
    assert "line 3, column 'sex': 'F' is not a level the model knows ('0', '1')" in proc.stderr
    assert not (tmp_path / "scored.csv").exists()
