"""PMML 4.4 RegressionModel import and export, and hostile XML."""

import numpy as np
import pytest
import statsmodels.api as sm

import lintools as lt
from lintools import InputError
from lintools.pmml import read_pmml, write_pmml

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
    ('<PMML version="4.4"><TreeModel/></PMML>', "exactly one RegressionModel .found: TreeModel"),
    (HAND_WRITTEN.replace('exponent="1" coefficient="0.75"', 'exponent="2" coefficient="0.75"'), "exponent other than 1"),
    (HAND_WRITTEN.replace('coefficient="0.75"', 'coefficient="abc"'), "is not a number"),
    (HAND_WRITTEN.replace('coefficient="0.75"', 'coefficient="inf"'), "is not finite"),
    (HAND_WRITTEN.replace('normalizationMethod="none"', 'normalizationMethod="exp"'), "normalizationMethod 'none'"),
    (HAND_WRITTEN.replace('functionName="regression"', 'functionName="clustering"'), "is not 'regression' or 'classification'"),
    (HAND_WRITTEN.replace('<NumericPredictor name="b" coefficient="-1.25"/>', '<CategoricalPredictor name="b" value="x" coefficient="1"/>'), "CategoricalPredictor terms are not supported"),
]


@pytest.mark.parametrize("text, fragment", BAD, ids=[b[1][:25] for b in BAD])
def test_malformed_documents_are_refused(tmp_path, text, fragment):
    path = tmp_path / "bad.pmml"
    path.write_text(text)
    with pytest.raises(InputError, match=fragment):
        read_pmml(path)
