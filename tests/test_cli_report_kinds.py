"""``lintools report`` for least-squares and softmax delivered models, and out of time.

Data: the demo scenario's (``lintools demo`` writes the fill-deviation least-squares
model, the defect-class softmax model, the development CSV and a recent CSV that has the
outcomes).  Checked here, as for the binary model in test_cli_report.py:

* the page parses strictly, every SVG parses as XML, nothing outside the page is needed,
  every number printed equals the JSON twin's to the digits printed;
* two runs with SOURCE_DATE_EPOCH give byte-identical files;
* the twin's figures against independent sources, each named beside its check:
  statsmodels OLS (the refit, its intervals, the line of observed on predicted, the t and
  F tests), scikit-learn (ROC area per class, log-loss, the table of classes, accuracy),
  plain NumPy on the CSV parsed with Python's csv module (residuals, binned means);
* out of time: with a recent sample that has the outcomes the page judges it (labelled
  out of time); without the outcome column it says so.
"""

import csv
import json
import os
import re
import xml.etree.ElementTree as ET

import numpy as np
import pytest
import sklearn.metrics as skm
import statsmodels.api as sm

import lintools as lt
from lintools.cli.demo_data import FEATURES
from test_cli_report import Strict, test_every_number_on_the_page_is_the_twins_to_the_digits_printed as numbers_match
from test_cli_report import demo, rows_of, run  # noqa: F401 (demo: the demo folder fixture)


def _report(folder, model, out, *extra, env=None):
    proc = run("report", f"demo/{model}", "demo/inspection.csv", "--out", out, "--quiet", *extra, cwd=folder, env=env)
    assert proc.returncode in (0, 1), proc.stderr
    page = (folder / out).read_text(encoding="utf-8")
    return page, json.loads((folder / out.replace(".html", ".json")).read_text(encoding="utf-8"))


@pytest.fixture(scope="module")
def linear(demo):
    return (demo, *_report(demo, "fill_deviation.json", "ls.html", "--recent", "demo/recent.csv", "--by", "shift"))


@pytest.fixture(scope="module")
def classes(demo):
    return (demo, *_report(demo, "defect.pmml", "sm.html", "--recent", "demo/recent.csv", "--by", "shift"))


def lre(a, b):
    """Digits of agreement, the log relative error (LRE): 15.95 or more is every digit."""
    err = float(np.max(np.abs(np.subtract(a, b)) / np.abs(b)))
    return np.inf if err == 0 else -np.log10(err)


def _data(folder, name="inspection.csv"):
    rows = rows_of(folder / "demo" / name)
    X = np.array([[float(r[f]) for f in FEATURES] for r in rows])
    return rows, X


@pytest.mark.parametrize("which", ["linear", "classes"])
def test_the_page_is_strict_self_contained_and_tied_to_its_twin(which, request):
    folder, page, doc = request.getfixturevalue(which)
    p = Strict()
    p.feed(page)
    p.close()
    assert not p.errors and not p.stack, (p.errors, p.stack)
    assert ET.fromstring(page.split("\n", 1)[1]).tag == "html"
    svgs = re.findall(r"<svg\b.*?</svg>", page, flags=re.S)
    # coefficients, the scores' figures (twice: development and out of time), stability and its bins
    assert len(svgs) == p.svgs >= 6
    for svg in svgs:
        assert ET.fromstring(svg).tag == "svg"
    lower = page.lower()
    assert "<script" not in lower and " src=" not in lower and "://" not in page and "url(" not in lower
    numbers_match((folder, page, doc))
    assert "(out of time)" in page and doc["out_of_time"]["with_outcomes"] is True


@pytest.mark.parametrize("model", ["fill_deviation.json", "defect.pmml"])
def test_two_runs_with_a_fixed_date_are_byte_identical(demo, model):
    env = {**os.environ, "SOURCE_DATE_EPOCH": "1767225600"}  # reproducible-builds convention
    for name in ("a", "b"):
        _report(demo, model, f"{name}-{model}.html", "--recent", "demo/recent.csv", env=env)
    a, b = ((demo / f"{n}-{model}.html").read_bytes() for n in "ab")
    assert a.replace(b"a-" + model.encode(), b"b-" + model.encode()) == b
    ja, jb = ((demo / f"{n}-{model}.json").read_bytes() for n in "ab")
    assert ja.replace(b"a-" + model.encode(), b"b-" + model.encode()) == jb


def test_least_squares_refit_and_residual_checks_against_statsmodels(linear):
    folder, _, doc = linear
    rows, X = _data(folder)
    y = np.array([float(r["fill_deviation"]) for r in rows])
    ols = sm.OLS(y, sm.add_constant(X)).fit()  # source: statsmodels OLS
    assert lre(doc["comparison"]["refit"], ols.params) > 11
    assert lre(doc["refit_interval"]["standard_error"], ols.bse) > 10
    ci = ols.conf_int(0.05)
    assert lre(doc["refit_interval"]["lower"], ci[:, 0]) > 10 and lre(doc["refit_interval"]["upper"], ci[:, 1]) > 10
    pred = lt.load(folder / "demo" / "fill_deviation.json").mean(X)
    # the demo's delivered model is the fit on these rows: observed on predicted is exactly
    # intercept 0 and slope 1 (least squares reproduces itself), up to rounding
    got = doc["response_line"]
    assert abs(got["intercept"]) < 1e-12 and abs(got["slope"] - 1) < 1e-13
    line = sm.OLS(y, sm.add_constant(pred)).fit()  # source: statsmodels OLS of observed on predicted
    assert lre([got["intercept_standard_error"], got["slope_standard_error"]], line.bse) > 10
    r = y - pred  # plain NumPy on the CSV
    assert np.isclose(got["mean_residual"], r.mean(), rtol=0, atol=1e-13)
    assert lre([doc["residuals"]["root_mean_square"]], [np.sqrt(np.mean(r**2))]) > 12
    assert lre(doc["residuals"]["quantiles"], np.quantile(r, [0, .05, .25, .5, .75, .95, 1], method="inverted_cdf")) > 13
    assert lre([doc["residuals"]["explained"]], [1 - np.sum(r**2) / np.sum((y - y.mean()) ** 2)]) > 12
    bins = doc["response_bins"]
    assert sum(bins["rows"]) == len(rows) and len(bins["rows"]) == 10
    # 1500 distinct predictions in 10 bins of equal weight: bin j holds the rows ranked
    # 150 j to 150 j + 149 by prediction (source: the definition of quantile bins)
    assert bins["rows"] == [150] * 10
    ranked = np.argsort(pred, kind="stable")
    for j in range(10):
        group = ranked[150 * j: 150 * (j + 1)]
        assert lre([bins["mean_observed"][j]], [y[group].mean()]) > 12
        assert lre([bins["observed_sd"][j]], [y[group].std(ddof=1)]) > 11
    seg = {e["segment"]: e for e in doc["segments"]["entries"]}
    shifts = np.array([r["shift"] for r in rows])
    for name, e in seg.items():
        assert e["rows"] == int((shifts == name).sum())
        assert lre([e["root_mean_square"]], [np.sqrt(np.mean(r[shifts == name] ** 2))]) > 12


def test_least_squares_out_of_time_is_the_recent_rows(linear):
    folder, page, doc = linear
    rows, X = _data(folder, "recent.csv")
    y = np.array([float(r["fill_deviation"]) for r in rows])
    r = y - lt.load(folder / "demo" / "fill_deviation.json").mean(X)
    oot = doc["out_of_time"]
    assert oot["rows_used"] == len(rows)
    assert np.isclose(oot["residuals"]["mean"], r.mean(), rtol=1e-12, atol=1e-14)  # plain NumPy
    line = sm.OLS(y, sm.add_constant(y - r)).fit()  # source: statsmodels OLS of observed on predicted
    got = oot["response_line"]
    assert lre([got["intercept"], got["slope"]], line.params) > 10
    assert lre([got["intercept_standard_error"], got["slope_standard_error"]], line.bse) > 10
    assert lre(got["slope_interval"], line.conf_int(0.05)[1]) > 10
    t = line.t_test(([0.0, 1.0], 1.0))  # statsmodels t test of slope = 1
    assert lre([got["slope_statistic"]], [np.asarray(t.tvalue).item()]) > 9
    assert lre([got["slope_p_value"]], [np.asarray(t.pvalue).item()]) > 8
    f = line.f_test((np.eye(2), [0.0, 1.0]))  # statsmodels F test of (intercept, slope) = (0, 1)
    assert lre([got["joint_statistic"]], [np.asarray(f.fvalue).item()]) > 9
    assert lre([got["joint_p_value"]], [np.asarray(f.pvalue).item()]) > 8
    assert lre([got["mean_residual_standard_error"]], [r.std(ddof=1) / np.sqrt(r.size)]) > 11
    assert "Out of time: the recent sample" in page


def _probabilities(folder, X, classes):
    model = lt.read_pmml(folder / "demo" / "defect.pmml")
    P = np.asarray(model.mean(X))
    order = [[str(c) for c in model.classes].index(c) for c in classes]
    return P[:, order]


def test_softmax_figures_against_scikit_learn(classes):
    folder, _, doc = classes
    rows, X = _data(folder)
    y = np.array([r["defect"] for r in rows])
    names = doc["model"]["classes"]
    P = _probabilities(folder, X, names)
    for k, c in enumerate(names):
        e = doc["classes"][k]
        assert e["class"] == c
        # source: scikit-learn roc_auc_score, the class against all others
        assert np.isclose(e["roc_area"]["area"], skm.roc_auc_score(y == c, P[:, k]), rtol=1e-12)
        assert np.isclose(e["brier"], skm.brier_score_loss(y == c, P[:, k]), rtol=1e-10)  # scikit-learn
        assert e["reliability"]["count"] == np.histogram(P[:, k], np.linspace(0, 1, 11))[0].tolist()
    o = doc["overall"]
    assert np.isclose(o["log_loss"], skm.log_loss(y, P, labels=names), rtol=1e-12)  # scikit-learn log_loss
    onehot = (y[:, None] == np.array(names)[None, :]).astype(float)
    assert np.isclose(o["brier"]["score"], np.mean(np.sum((P - onehot) ** 2, axis=1)), rtol=1e-12)  # definition
    guess = np.array(names)[np.argmax(P, axis=1)]
    cm = skm.confusion_matrix(y, guess, labels=names)  # scikit-learn confusion_matrix
    assert o["confusion"]["weight"] == cm.astype(float).tolist()
    assert np.isclose(o["confusion"]["accuracy"], skm.accuracy_score(y, guess), rtol=1e-15)
    recall = skm.recall_score(y, guess, labels=names, average=None, zero_division=np.nan)
    assert np.allclose(o["confusion"]["recall"], recall, rtol=1e-15, equal_nan=True)
    seg = {e["segment"]: e for e in doc["segments"]["entries"]}
    shifts = np.array([r["shift"] for r in rows])
    for name, e in seg.items():
        m = shifts == name
        assert np.isclose(e["log_loss"], skm.log_loss(y[m], P[m], labels=names), rtol=1e-12)
    assert set(doc["stability"]["scores"]) == {f"probability of '{c}'" for c in names}


def test_softmax_out_of_time_against_scikit_learn(classes):
    folder, _, doc = classes
    rows, X = _data(folder, "recent.csv")
    y = np.array([r["defect"] for r in rows])
    names = doc["model"]["classes"]
    P = _probabilities(folder, X, names)
    oot = doc["out_of_time"]
    for k, c in enumerate(names):
        assert np.isclose(oot["classes"][k]["roc_area"]["area"], skm.roc_auc_score(y == c, P[:, k]), rtol=1e-12)
    assert np.isclose(oot["overall"]["log_loss"], skm.log_loss(y, P, labels=names), rtol=1e-12)


def _without(folder, column):
    rows = rows_of(folder / "demo" / "recent.csv")
    path = folder / f"recent-no-{column}.csv"
    with open(path, "w", newline="") as f:
        w = csv.DictWriter(f, [c for c in rows[0] if c != column])
        w.writeheader()
        w.writerows({k: v for k, v in r.items() if k != column} for r in rows)
    return path.name


def test_binary_out_of_time_and_a_recent_sample_without_outcomes(demo):
    page, doc = _report(demo, "supplier_leak.pmml", "bin.html", "--recent", "demo/recent.csv")
    rows, X = _data(demo, "recent.csv")
    y = np.array([r["leak"] == "True" for r in rows])
    p = lt.read_pmml(demo / "demo" / "supplier_leak.pmml").mean(X)
    oot = doc["out_of_time"]
    assert np.isclose(oot["discrimination"]["roc_area"]["area"], skm.roc_auc_score(y, p), rtol=1e-12)  # scikit-learn
    assert np.isclose(oot["calibration"]["brier"]["score"], skm.brier_score_loss(y, p), rtol=1e-10)  # scikit-learn
    assert "Calibration of the delivered probabilities (out of time)" in page
    numbers_match((demo, page, doc))
    for model, column in (("supplier_leak.pmml", "leak"), ("fill_deviation.json", "fill_deviation"),
                          ("defect.pmml", "defect")):
        name = _without(demo, column)
        page, doc = _report(demo, model, f"none-{column}.html", "--recent", name)
        assert doc["out_of_time"]["with_outcomes"] is False and "(out of time)" not in page
        assert f"the recent sample has no column '{column}'" in page
        assert doc["stability"] is not None  # the population is still compared
