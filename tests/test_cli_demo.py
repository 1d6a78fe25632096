"""``lintools demo`` end to end by subprocess: its folder, its report, its numbers.

The demo's data are invented (lintools.cli.demo_data); the numbers it prints are checked here
against oracles recomputed on the same rows.
"""

import json
import subprocess
import sys

import matplotlib  # noqa: F401  (the plot extra: the demo writes reliability.png with it)
import numpy as np
import pytest
import sklearn.metrics
import statsmodels.api as sm

import lintools as lt
from lintools.cli.demo_data import FEATURES, inspection_data, recent_inspection_data, supplier_leak_model

FILES = ["report.txt", "inspection.csv", "recent.csv", "supplier_leak.pmml", "fill_deviation.json", "fill_deviation.pmml",
         "leak.json", "leak.pmml", "reliability.png", "report.html", "report.json"]


def run(*args, cwd=None):
    return subprocess.run([sys.executable, "-m", "lintools", *args], capture_output=True, text=True, timeout=120, cwd=cwd)


@pytest.fixture(scope="module")
def demo(tmp_path_factory):
    folder = tmp_path_factory.mktemp("demo") / "out"
    proc = run("demo", "--out", str(folder), "--json", "--quiet")
    assert proc.returncode == 0, proc.stderr
    return folder, json.loads(proc.stdout)


def test_the_folder_holds_the_report_and_the_model_files(demo):
    folder, doc = demo
    for name in FILES:
        assert (folder / name).is_file(), name
    assert (folder / "reliability.png").read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
    report = (folder / "report.txt").read_text()
    assert "statistical agreement is not model validation" in report
    assert "local regulation" in report and "model-risk practice" in report
    for heading in ("1. Fill-volume deviation", "2. Seal leak", "3. Defect class", "4. The supplier's",
                    "5. Calibration", "6. Stratified 5-fold", "7. A recent sample"):
        assert heading in report
    assert doc["folder"] == str(folder) and sorted(doc["files"]) == sorted(
        str(folder / f) for f in FILES + (["defect.json", "defect.pmml"] if doc["defect"] else []))
    loaded = lt.load(folder / "leak.json")
    assert np.array_equal(loaded.coefficients, np.array(doc["leak"]["coefficients"]))


def test_the_planted_disagreement_is_found_and_put_in_words(demo):
    folder, doc = demo
    # lintools.cli.demo_data plants the supplier's errors in cap_torque and nozzle_age only.
    assert set(doc["supplier_flagged_terms"]) - {"(intercept)"} == {"cap_torque", "nozzle_age"}
    assert doc["supplier_comparison"]["wald_p_value"] < 1e-4
    report = " ".join((folder / "report.txt").read_text().split())  # words, whatever the line wrapping
    assert "cap_torque: the supplier's -1.5" in report and "understates this effect" in report
    assert "nozzle_age: the supplier's 0.025" in report and "overstates this effect" in report
    assert "no ridge penalty explains the delivered slopes" in report


def test_the_leak_refit_and_the_comparison_match_statsmodels(demo):
    _, doc = demo
    data = inspection_data()
    A = sm.add_constant(data.X)
    ref = sm.Logit(data.leak.astype(float), A).fit(disp=0, tol=1e-12)  # oracle
    assert np.allclose(doc["leak"]["coefficients"], ref.params[1:], rtol=1e-8, atol=0)
    slopes, b = supplier_leak_model()
    d = np.r_[b, [slopes[f] for f in FEATURES]] - ref.params
    W = d @ np.linalg.solve(ref.cov_params(), d)
    assert np.isclose(doc["supplier_comparison"]["wald_statistic"], W, rtol=1e-7)


def test_cross_validation_folds_match_scikit_learn_metrics(demo):
    _, doc = demo
    data = inspection_data()
    cv = doc["cross_validation"]
    folds = lt.stratified_folds(data.leak, k=5, seed=20261201)
    briers, sizes = [], []
    for j, row in enumerate(cv["folds"]):
        test = folds == j
        ref = sm.Logit(data.leak[~test].astype(float), sm.add_constant(data.X[~test])).fit(disp=0, tol=1e-12)
        p = ref.predict(sm.add_constant(data.X[test]))  # statsmodels' held-out forecasts (oracle)
        assert row["rows"] == int(test.sum())
        assert np.isclose(row["brier"], sklearn.metrics.brier_score_loss(data.leak[test], p), rtol=1e-7)
        assert np.isclose(row["auc"], sklearn.metrics.roc_auc_score(data.leak[test], p), rtol=1e-7)
        briers.append(row["brier"])
        sizes.append(row["rows"])
    # The cross-fold estimate is the row-weighted mean; its interval +- 1.96 combined SEs.
    share = np.array(sizes) / sum(sizes)
    assert np.isclose(cv["brier"], share @ briers, rtol=1e-12)
    se = np.sqrt(share**2 @ np.array([r["brier_se"] for r in cv["folds"]]) ** 2)
    assert np.isclose(cv["brier_se"], se, rtol=1e-12)
    lo, hi = cv["brier_interval"]
    assert np.isclose(hi - lo, 2 * 1.959963984540054 * se, rtol=1e-9)  # normal 0.975 quantile (common practice)
    lo, hi = cv["auc_interval"]
    assert lo < cv["auc"] < hi


def test_the_demo_files_feed_the_other_subcommands(demo):
    folder, _ = demo
    proc = run("check", str(folder / "supplier_leak.pmml"), str(folder / "inspection.csv"))
    assert proc.returncode == 1 and "Verdict: DISAGREE" in proc.stdout and "Caution" in proc.stderr
    proc = run("check", str(folder / "leak.json"), str(folder / "inspection.csv"))
    assert proc.returncode == 0, proc.stderr
    proc = run("calibration", str(folder / "inspection.csv"), "--label", "leak", "--probability",
               "supplier_leak_probability", "--json")
    assert proc.returncode == 0, proc.stderr
    assert json.loads(proc.stdout)["positive"] == "True"


def test_the_recent_sample_drifts_in_the_nozzle_age_only(demo):
    """lintools.cli.demo_data draws the recent sample with the nozzle age alone moved (30 to
    180 days against 0 to 120): its index is the largest of the features, by far, and every
    other feature reads stable (below 0.1, the reading band of common practice)."""
    folder, doc = demo
    psi = {name: r["index"] for name, r in doc["recent_stability"].items()}
    assert set(psi) == set(FEATURES) | {"fill_deviation", "leak", "defect", "supplier_leak_probability", "shift"}
    assert max(FEATURES, key=psi.get) == "nozzle_age" and psi["nozzle_age"] > 0.25
    assert all(psi[f] < 0.1 for f in FEATURES if f != "nozzle_age")
    # source: lintools.population_stability on the generator's columns (the library is checked
    # against a hand computation in exact fractions in test_stability.py)
    dev, recent = inspection_data(), recent_inspection_data()
    for j, name in enumerate(FEATURES):
        assert psi[name] == lt.population_stability(dev.X[:, j], recent.X[:, j]).index
    # the band tests are those of the supplier's probabilities on the recent rows (source: lintools.band_tests)
    slopes, intercept = supplier_leak_model()
    p = 1 / (1 + np.exp(-(recent.X @ np.array([slopes[f] for f in FEATURES]) + intercept)))
    want = lt.band_tests(recent.leak, p, 10)
    assert np.allclose(doc["recent_band_tests"]["binomial_p_value"], want.binomial_p_value, rtol=1e-9)
    report = (folder / "report.txt").read_text()
    assert "The feature that moved most: 'nozzle_age'" in report and "Band tests" in report
    proc = run("stability", str(folder / "inspection.csv"), str(folder / "recent.csv"), "--json", "--quiet")
    assert proc.returncode == 0 and json.loads(proc.stdout)["columns"]["nozzle_age"]["index"] == psi["nozzle_age"]


def test_text_summary_and_bad_options(tmp_path):
    proc = run("demo", "--out", str(tmp_path / "d"), "--quiet")
    assert proc.returncode == 0, proc.stderr
    assert "supplier's leak model against the refit" in proc.stdout and proc.stderr == ""  # --quiet
    proc = run("demo", "--out", str(tmp_path / "e"), "--rows", "50")
    assert proc.returncode == 2 and "argument --rows: 50 is out of range" in proc.stderr
    (tmp_path / "file").write_text("x")
    proc = run("demo", "--out", str(tmp_path / "file" / "sub"))
    assert proc.returncode == 2 and "cannot create the output folder" in proc.stderr
