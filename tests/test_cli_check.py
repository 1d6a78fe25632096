"""``lintools check`` end to end by subprocess: verdicts, exit codes, --json, hostile files."""

import dataclasses
import json
import subprocess
import sys

import numpy as np
import pytest
import sklearn.datasets
import statsmodels.api as sm
from scipy import stats

import lintools as lt
from lintools.exchange.pmml import write_pmml


def run(*args, cwd=None):
    return subprocess.run([sys.executable, "-m", "lintools", *args], capture_output=True, text=True, timeout=120, cwd=cwd)


@pytest.fixture()
def spector(tmp_path):
    # statsmodels' spector data (Spector & Mazzeo 1980), written as CSV.
    d = sm.datasets.spector.load_pandas().data
    path = tmp_path / "spector.csv"
    d.to_csv(path, index=False)
    return path, d


def _delivered(fit, path, slopes, intercept):
    """A delivered PMML file with other coefficients than the refit (test fixture)."""
    write_pmml(dataclasses.replace(fit, coefficients=np.asarray(slopes, dtype=float), intercept=float(intercept)),
               path, target="GRADE")


def test_our_own_json_model_agrees_with_its_refit(spector, tmp_path):
    path, _ = spector
    model = tmp_path / "m.json"
    assert run("fit", str(path), "--target", "GRADE", "--model", "logistic", "--save", str(model)).returncode == 0
    proc = run("check", str(model), str(path), "--json")
    assert proc.returncode == 0, proc.stderr
    doc = json.loads(proc.stdout)
    assert doc["agree"] is True and doc["format"] == "lintools JSON model file" and doc["kind"] == "logistic"
    assert doc["comparison"]["wald_statistic"] < 1e-18
    assert doc["comparison"]["max_abs_prediction_difference"] < 1e-12
    assert "not model validation" in doc["caution"]
    text = run("check", str(model), str(path))
    assert text.returncode == 0 and "Verdict: AGREE" in text.stdout and "not model validation" in text.stderr


DISAGREE_SLOPES, DISAGREE_INTERCEPT = [1.2, 0.05, 1.0], -8.0


def test_a_disagreeing_pmml_model_exits_1_with_the_hand_computed_statistics(spector, tmp_path):
    path, d = spector
    X, y = d[["GPA", "TUCE", "PSI"]], d["GRADE"]
    model = tmp_path / "delivered.pmml"
    _delivered(lt.logistic(X, y), model, DISAGREE_SLOPES, DISAGREE_INTERCEPT)
    proc = run("check", str(model), str(path), "--json")
    assert proc.returncode == 1, proc.stderr
    doc = json.loads(proc.stdout)
    assert doc["agree"] is False and doc["format"] == "PMML 4.4 RegressionModel"
    cmp = doc["comparison"]
    # Hand computation with statsmodels' Logit covariance (oracle) and scipy's chi-square tail.
    ref = sm.Logit(y, sm.add_constant(X)).fit(disp=0, tol=1e-12)
    dd = np.r_[DISAGREE_INTERCEPT, DISAGREE_SLOPES] - ref.params.to_numpy()
    W = dd @ np.linalg.solve(ref.cov_params().to_numpy(), dd)
    assert np.isclose(cmp["wald_statistic"], W, rtol=1e-9) and cmp["wald_degrees_of_freedom"] == 4
    assert np.isclose(cmp["wald_p_value"], stats.chi2.sf(W, 4), rtol=1e-9)
    assert cmp["wald_p_value"] < 0.05 and "Wald test rejects" in doc["reasons"][0]
    # Score test at the delivered coefficients, by statsmodels' GLM score test (oracle).
    s_sm, _, _ = sm.GLM(y, sm.add_constant(X), family=sm.families.Binomial()).score_test(
        np.r_[DISAGREE_INTERCEPT, DISAGREE_SLOPES], k_constraints=4)
    assert np.isclose(cmp["score_statistic"], s_sm[0], rtol=1e-10)
    text = run("check", str(model), str(path))
    assert text.returncode == 1 and "Verdict: DISAGREE" in text.stdout and "Caution" in text.stderr


def test_the_tolerance_options_decide_the_verdict(spector, tmp_path):
    path, d = spector
    X, y = d[["GPA", "TUCE", "PSI"]], d["GRADE"]
    model = tmp_path / "delivered.pmml"
    fit = lt.logistic(X, y)
    # A near miss: d = 1.5 L e1 with V = L L' the covariance of statsmodels' Logit (oracle),
    # so that W = d' V^-1 d = 2.25 on 4 df (p 0.69).
    ref = sm.Logit(y, sm.add_constant(X)).fit(disp=0, tol=1e-12)
    dd = 1.5 * np.linalg.cholesky(ref.cov_params().to_numpy())[:, 0]
    _delivered(fit, model, fit.coefficients + dd[1:], fit.intercept + dd[0])
    loose = json.loads(run("check", str(model), str(path), "--json").stdout)
    assert loose["agree"] is True and loose["comparison"]["wald_p_value"] > 0.05
    gap = loose["comparison"]["max_abs_prediction_difference"]
    assert gap > 0
    tight = run("check", str(model), str(path), "--max-difference", repr(gap / 2), "--json")
    assert tight.returncode == 1 and "exceeds --max-difference" in json.loads(tight.stdout)["reasons"][0]
    assert run("check", str(model), str(path), "--max-difference", repr(gap * 2)).returncode == 0
    p = loose["comparison"]["wald_p_value"]
    assert np.isclose(loose["comparison"]["wald_statistic"], 2.25, rtol=1e-9)  # (1.5 SE)^2
    assert np.isclose(p, stats.chi2.sf(2.25, 4), rtol=1e-9)  # scipy's chi-square tail (oracle)
    assert run("check", str(model), str(path), "--significance", repr(p * 1.01)).returncode == 1
    assert run("check", str(model), str(path), "--significance", repr(p * 0.99)).returncode == 0


def test_format_is_recognised_by_content_not_by_name(spector, tmp_path):
    path, d = spector
    fit = lt.logistic(d[["GPA", "TUCE", "PSI"]], d["GRADE"])
    pmml_named_json = tmp_path / "model.json"
    _delivered(fit, pmml_named_json, fit.coefficients, fit.intercept)
    json_named_xml = tmp_path / "model.xml"
    lt.save(dataclasses.replace(fit, target="GRADE"), json_named_xml)
    a = json.loads(run("check", str(pmml_named_json), str(path), "--json").stdout)
    b = json.loads(run("check", str(json_named_xml), str(path), "--json").stdout)
    assert a["format"].startswith("PMML") and b["format"].startswith("lintools JSON")
    assert a["agree"] and b["agree"]


def test_least_squares_model_files_are_checked(tmp_path):
    # statsmodels' stack-loss data (Brownlee 1965).
    d = sm.datasets.stackloss.load_pandas().data
    path = tmp_path / "stackloss.csv"
    d.to_csv(path, index=False)
    model = tmp_path / "ls.json"
    assert run("fit", str(path), "--target", "STACKLOSS", "--save", str(model)).returncode == 0
    assert run("check", str(model), str(path)).returncode == 0
    fit = lt.least_squares(d[["AIRFLOW", "WATERTEMP", "ACIDCONC"]], d["STACKLOSS"])
    off = tmp_path / "off.pmml"
    write_pmml(dataclasses.replace(fit, coefficients=fit.coefficients + [0.3, -0.3, 0.1]), off, target="STACKLOSS")
    proc = run("check", str(off), str(path), "--json")
    assert proc.returncode == 1
    doc = json.loads(proc.stdout)
    ref = sm.OLS(d["STACKLOSS"], sm.add_constant(d[["AIRFLOW", "WATERTEMP", "ACIDCONC"]])).fit()  # oracle
    dd = np.r_[0.0, 0.3, -0.3, 0.1]
    W = dd @ np.linalg.solve(ref.cov_params().to_numpy(), dd)
    assert np.isclose(doc["comparison"]["wald_statistic"], W, rtol=1e-9)


def test_softmax_model_files_are_checked(tmp_path):
    # scikit-learn's wine data (three cultivars), three standardised columns.
    wine = sklearn.datasets.load_wine()
    Z = (wine.data[:, :3] - wine.data[:, :3].mean(axis=0)) / wine.data[:, :3].std(axis=0)
    path = tmp_path / "wine.csv"
    path.write_text("alcohol,malic_acid,ash,cultivar\n" + "".join(
        f"{a!r},{b!r},{c!r},c{k}\n" for (a, b, c), k in zip(Z.tolist(), wine.target)))
    model = tmp_path / "soft.json"
    fit_proc = run("fit", str(path), "--target", "cultivar", "--model", "softmax", "--save", str(model))
    assert fit_proc.returncode == 0, fit_proc.stderr
    assert run("check", str(model), str(path)).returncode == 0
    fit = lt.load(model)
    shifted = tmp_path / "shifted.pmml"
    B = np.asarray(fit.coefficients) + 0.5  # the same shift on every class: same probabilities
    write_pmml(dataclasses.replace(fit, coefficients=B), shifted)
    doc = json.loads(run("check", str(shifted), str(path), "--json").stdout)
    assert doc["agree"] is True and doc["comparison"]["max_abs_prediction_difference"] < 1e-12
    off = tmp_path / "off.pmml"
    B = np.asarray(fit.coefficients).copy()
    B[:, 1] += 1.0
    write_pmml(dataclasses.replace(fit, coefficients=B), off)
    assert run("check", str(off), str(path)).returncode == 1


HOSTILE_PMML = """<?xml version="1.0"?>
<!DOCTYPE lolz [<!ENTITY lol "lol"><!ENTITY lol2 "&lol;&lol;&lol;&lol;&lol;&lol;">]>
<PMML version="4.4"><Header description="&lol2;"/></PMML>"""


def test_bad_input_exits_2_with_a_message(spector, tmp_path):
    path, d = spector
    model = tmp_path / "m.json"
    assert run("fit", str(path), "--target", "GRADE", "--model", "logistic", "--save", str(model)).returncode == 0
    cases = []
    (tmp_path / "notes.txt").write_text("coefficients: 1, 2, 3\n")
    cases.append(((str(tmp_path / "notes.txt"), str(path)), "neither a lintools JSON model file"))
    (tmp_path / "v2.json").write_text(model.read_text().replace('"schema_version": 1', '"schema_version": 2'))
    cases.append(((str(tmp_path / "v2.json"), str(path)), "schema version 2"))
    (tmp_path / "evil.pmml").write_text(HOSTILE_PMML)
    cases.append(((str(tmp_path / "evil.pmml"), str(path)), "refuses such XML"))
    (tmp_path / "cut.json").write_text(model.read_text()[:100])
    cases.append(((str(tmp_path / "cut.json"), str(path)), "not valid JSON"))
    cases.append(((str(tmp_path / "absent.json"), str(path)), "cannot read the model file"))
    d.drop(columns=["TUCE"]).to_csv(tmp_path / "short.csv", index=False)
    cases.append(((str(model), str(tmp_path / "short.csv")), "feature 'TUCE' is not a column"))
    cases.append(((str(model), str(path), "--significance", "0"), "argument --significance: 0 is not strictly between 0 and 1"))
    cases.append(((str(model), str(path), "--positive", "yes"), "--positive 'yes' is not one of the labels"))
    for args, fragment in cases:
        proc = run("check", *args)
        assert proc.returncode == 2, (args, proc.stdout, proc.stderr)
        assert fragment in proc.stderr, (args, proc.stderr)
