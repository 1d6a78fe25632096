"""PMML 4.4 RegressionModel import and export, and hostile XML."""

import numpy as np
import pytest
import statsmodels.api as sm

import lintools as lt
from lintools import InputError
from lintools.exchange.pmml import read_pmml, write_pmml

# A document written by hand from the PMML 4.4 Regression specification (Data Mining
# Group): a linear regression y = 2.5 + 0.75*a - 1.25*b.
HAND_WRITTEN = """<?xml version="1.0" encoding="UTF-8"?>
<PMML version="4.4" xmlns="http://www.dmg.org/PMML-4_4">
  <Header description="hand-written"/>
  <DataDictionary numberOfFields="3">
    <DataField name="a" optype="continuous" dataType="double"/>
    <DataField name="b" optype="continuous" dataType="double"/>
    <DataField name="out" optype="continuous" dataType="double"/>
  </DataDictionary>
  <RegressionModel functionName="regression" normalizationMethod="none">
    <MiningSchema>
      <MiningField name="a"/><MiningField name="b"/>
      <MiningField name="out" usageType="target"/>
    </MiningSchema>
    <RegressionTable intercept="2.5">
      <NumericPredictor name="a" exponent="1" coefficient="0.75"/>
      <NumericPredictor name="b" coefficient="-1.25"/>
    </RegressionTable>
  </RegressionModel>
</PMML>
"""


def test_hand_written_document_is_read(tmp_path):
    path = tmp_path / "hand.pmml"
    path.write_text(HAND_WRITTEN)
    m = read_pmml(path)
    assert m.kind == "least_squares" and m.names == ("a", "b") and m.target == "out"
    assert m.intercept == 2.5 and list(m.coefficients) == [0.75, -1.25]


def test_linear_round_trip_is_exact(tmp_path):
    d = sm.datasets.stackloss.load_pandas()  # statsmodels' stack-loss data
    fit = lt.least_squares(d.exog, d.endog)
    path = tmp_path / "ls.pmml"
    write_pmml(fit, path)
    m = read_pmml(path)
    assert m.names == fit.names and m.target == "STACKLOSS"
    assert np.array_equal(m.coefficients, fit.coefficients) and m.intercept == fit.intercept


HOSTILE = {
    "entity expansion": """<?xml version="1.0"?>
<!DOCTYPE lolz [<!ENTITY lol "lol"><!ENTITY lol2 "&lol;&lol;&lol;&lol;&lol;&lol;">]>
<PMML version="4.4"><Header description="&lol2;"/></PMML>""",
    "external entity": """<?xml version="1.0"?>
<!DOCTYPE foo [<!ENTITY xxe SYSTEM "file:///etc/passwd">]>
<PMML version="4.4"><Header description="&xxe;"/></PMML>""",
}


@pytest.mark.parametrize("name", sorted(HOSTILE))
def test_dtd_and_entities_are_refused(tmp_path, name):
    path = tmp_path / "evil.pmml"
    path.write_text(HOSTILE[name])
    with pytest.raises(InputError, match="refuses such XML"):
        read_pmml(path)


BAD = [
    ("<PMML><RegressionModel", "not well-formed XML"),
    ("<Other/>", "not a PMML document"),
    ('<PMML xmlns="http://www.dmg.org/PMML-4_4" version="4.4"><DataDictionary/><TreeModel/></PMML>',
     "exactly one RegressionModel .found: TreeModel"),
    (HAND_WRITTEN.replace('exponent="1" coefficient="0.75"', 'exponent="2" coefficient="0.75"'), "exponent other than 1"),
    (HAND_WRITTEN.replace('coefficient="0.75"', 'coefficient="abc"'), "is not a number"),
    (HAND_WRITTEN.replace('coefficient="0.75"', 'coefficient="inf"'), "is not a number"),
    (HAND_WRITTEN.replace('coefficient="0.75"', 'coefficient="1e999"'), "is not finite"),
    (HAND_WRITTEN.replace('normalizationMethod="none"', 'normalizationMethod="exp"'), "normalizationMethod 'none'"),
    (HAND_WRITTEN.replace('functionName="regression"', 'functionName="clustering"'), "not 'regression' or 'classification'"),
    (HAND_WRITTEN.replace('<NumericPredictor name="b" coefficient="-1.25"/>', '<CategoricalPredictor name="b" value="x" coefficient="1"/>'), "CategoricalPredictor on 'b', whose DataField has optype 'continuous'"),
    (HAND_WRITTEN.replace('<NumericPredictor name="b" coefficient="-1.25"/>', '<PredictorTerm coefficient="1"/>'), "PredictorTerm terms .interactions. in RegressionTable 1"),
]


@pytest.mark.parametrize("text, fragment", BAD, ids=[b[1][:25] for b in BAD])
def test_malformed_documents_are_refused(tmp_path, text, fragment):
    path = tmp_path / "bad.pmml"
    path.write_text(text)
    with pytest.raises(InputError, match=fragment):
        read_pmml(path)


# ------------------------------------------------------------------ logistic and JSON round trips
def _spector():
    # statsmodels' spector data (Spector & Mazzeo 1980).
    d = sm.datasets.spector.load_pandas()
    return d.exog, d.endog


def test_logistic_round_trip_keeps_coefficients_and_probabilities(tmp_path):
    X, y = _spector()
    labels = np.where(y.to_numpy() == 1, "improved", "not improved")
    fit = lt.logistic(X, labels, positive="improved")
    path = tmp_path / "logit.pmml"
    write_pmml(fit, path, target="GRADE")
    m = read_pmml(path)
    assert m.kind == "logistic" and m.names == ("GPA", "TUCE", "PSI") and m.target == "GRADE"
    assert m.classes[0] == "improved"  # the modelled class's table comes first
    assert np.array_equal(m.coefficients, fit.coefficients) and m.intercept == fit.intercept
    # PMML logit normalisation (DMG PMML 4.4 Regression): p = 1 / (1 + exp(-(b + x'beta))).
    eta = X.to_numpy() @ m.coefficients + m.intercept
    p_file = 1.0 / (1.0 + np.exp(-eta))
    assert np.max(np.abs(p_file - fit.mean(X))) <= 1e-15


def test_logistic_pmml_document_structure_follows_the_standard(tmp_path):
    import xml.etree.ElementTree as ET

    X, y = _spector()
    fit = lt.logistic(X, y)
    path = tmp_path / "logit.pmml"
    write_pmml(fit, path)
    ns = {"p": "http://www.dmg.org/PMML-4_4"}
    root = ET.parse(path).getroot()
    model = root.find("p:RegressionModel", ns)
    # From the PMML 4.4 Regression specification: classification with logit normalisation,
    # one RegressionTable per target category, the last one empty (the reference).
    assert model.get("functionName") == "classification" and model.get("normalizationMethod") == "logit"
    tables = model.findall("p:RegressionTable", ns)
    assert [t.get("targetCategory") for t in tables] == ["1.0", "0.0"]
    assert len(tables[1]) == 0 and float(tables[1].get("intercept")) == 0.0
    coefs = {e.get("name"): float(e.get("coefficient")) for e in tables[0].findall("p:NumericPredictor", ns)}
    assert coefs == dict(zip(fit.names, fit.coefficients.tolist()))


def test_logistic_json_round_trip_is_exact(tmp_path):
    X, y = _spector()
    fit = lt.logistic(X, y, l2=0.25)
    path = tmp_path / "logit.json"
    lt.save(fit, path)
    back = lt.load(path)
    assert type(back) is type(fit) and back.kind == "logistic"
    for name in ("coefficients", "standard_errors", "covariance"):
        assert np.array_equal(getattr(back, name), getattr(fit, name))
    assert back.intercept == fit.intercept and back.classes == fit.classes and back.l2 == 0.25
    assert back.convergence == fit.convergence
    assert np.array_equal(back.mean(X), fit.mean(X))


def test_model_files_of_another_schema_version_or_damaged_are_refused(tmp_path):
    X, y = _spector()
    path = tmp_path / "logit.json"
    lt.save(lt.logistic(X, y), path)
    text = path.read_text()
    (tmp_path / "v9.json").write_text(text.replace('"schema_version": 1', '"schema_version": 9'))
    with pytest.raises(InputError, match="schema version 9"):
        lt.load(tmp_path / "v9.json")
    (tmp_path / "cut.json").write_text(text[: len(text) // 2])
    with pytest.raises(InputError, match="not valid JSON"):
        lt.load(tmp_path / "cut.json")
