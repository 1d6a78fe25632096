"""``lintools calibration`` end to end by subprocess: the text report, --json, the PNG, exit codes.

matplotlib (the ``plot`` extra) is imported at module top: the PNG tests need it, and a
missing package must fail here, not skip.
"""

import json
import subprocess
import sys
import textwrap

import matplotlib  # noqa: F401  (the plot extra must be installed for these tests)
import numpy as np
import pytest
import sklearn.calibration
import sklearn.datasets
import sklearn.metrics
import statsmodels.api as sm


def run(*args, cwd=None):
    return subprocess.run([sys.executable, "-m", "lintools", *args], capture_output=True, text=True, timeout=120, cwd=cwd)


@pytest.fixture()
def forecasts(tmp_path):
    """scikit-learn's breast-cancer data (shipped with scikit-learn) with forecasts of a
    statsmodels Logit on three standardised columns, written as CSV."""
    bc = sklearn.datasets.load_breast_cancer()
    Z = bc.data[:, [0, 1, 4]]
    Z = (Z - Z.mean(axis=0)) / Z.std(axis=0)
    p = sm.Logit(bc.target, sm.add_constant(Z)).fit(disp=0).predict(sm.add_constant(Z))
    label = np.where(bc.target == 1, "benign", "malignant")
    path = tmp_path / "forecasts.csv"
    path.write_text("id,outcome,p_benign\n" + "".join(f"{i},{c},{q!r}\n" for i, (c, q) in enumerate(zip(label, p.tolist()))))
    return path, bc.target, p


def test_json_report_matches_scikit_learn(forecasts):
    path, y, p = forecasts
    proc = run("calibration", str(path), "--label", "outcome", "--probability", "p_benign", "--positive", "benign",
               "--json")
    assert proc.returncode == 0, proc.stderr
    doc = json.loads(proc.stdout)
    assert doc["rows"] == len(y) and doc["positive"] == "benign" and doc["plot"] is None
    rel = doc["reliability"]
    count = np.array(rel["count"])
    # Oracle: scikit-learn's calibration_curve with 10 uniform bins (non-empty bins only).
    prob_true, prob_pred = sklearn.calibration.calibration_curve(y, p, n_bins=10, strategy="uniform")
    assert np.allclose(np.array(rel["observed"], dtype=float)[count > 0], prob_true, rtol=1e-12, atol=0)
    assert np.allclose(np.array(rel["mean_predicted"], dtype=float)[count > 0], prob_pred, rtol=1e-12, atol=0)
    assert all(v is None for v in np.array(rel["observed"], dtype=object)[count == 0])
    # Oracles: scikit-learn's Brier score and ROC area.
    assert np.isclose(doc["brier"]["score"], sklearn.metrics.brier_score_loss(y, p), rtol=1e-12)
    assert np.isclose(doc["roc_area"]["area"], sklearn.metrics.roc_auc_score(y, p), rtol=1e-12)
    assert doc["hosmer_lemeshow"]["degrees_of_freedom"] == 8
    assert 0.0 < doc["calibration_line"]["slope"] and doc["notes"] == []


def test_text_report_always_has_the_reliability_table(forecasts):
    path, _, _ = forecasts
    proc = run("calibration", str(path), "--label", "outcome", "--probability", "p_benign", "--bins", "5",
               "--strategy", "count")
    assert proc.returncode == 0, proc.stderr
    assert "reliability table, 5 bins of equal count" in proc.stdout
    for piece in ("Brier score", "Hosmer-Lemeshow test", "calibration line", "Spiegelhalter z test", "ROC area"):
        assert piece in proc.stdout


def test_plot_writes_a_png(forecasts, tmp_path):
    path, _, _ = forecasts
    png = tmp_path / "diagram.png"
    proc = run("calibration", str(path), "--label", "outcome", "--probability", "p_benign", "--plot", str(png))
    assert proc.returncode == 0, proc.stderr
    assert png.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"  # the PNG signature (PNG specification)
    assert f"reliability diagram written to {png}" in proc.stderr


BLOCK_MATPLOTLIB = textwrap.dedent(
    """
    import importlib.abc, sys

    class Refuse(importlib.abc.MetaPathFinder):
        def find_spec(self, name, path=None, target=None):
            if name.split(".")[0] == "matplotlib":
                raise ImportError("matplotlib is blocked for this test")
            return None

    sys.meta_path.insert(0, Refuse())
    from lintools.cli import main
    raise SystemExit(main(sys.argv[1:]))
    """
)


def test_without_matplotlib_the_png_is_refused_with_the_extra_named_and_the_text_still_works(forecasts, tmp_path):
    path, _, _ = forecasts
    png = tmp_path / "diagram.png"
    base = ["calibration", str(path), "--label", "outcome", "--probability", "p_benign"]
    proc = subprocess.run([sys.executable, "-c", BLOCK_MATPLOTLIB, *base, "--plot", str(png)],
                          capture_output=True, text=True, timeout=120)
    assert proc.returncode == 2
    assert 'python -m pip install -e ".[plot]"' in proc.stderr and not png.exists()
    proc = subprocess.run([sys.executable, "-c", BLOCK_MATPLOTLIB, *base], capture_output=True, text=True, timeout=120)
    assert proc.returncode == 0 and "reliability table" in proc.stdout


def test_bad_input_exits_2_naming_the_line_or_column(tmp_path):
    bad = tmp_path / "bad.csv"
    bad.write_text("y,p\n1,0.2\n0,1.5\n1,0.7\n")
    proc = run("calibration", str(bad), "--label", "y", "--probability", "p")
    assert proc.returncode == 2 and "line 3, column 'p': 1.5 is not a probability" in proc.stderr
    three = tmp_path / "three.csv"
    three.write_text("y,p\na,0.2\nb,0.5\nc,0.7\n")
    proc = run("calibration", str(three), "--label", "y", "--probability", "p")
    assert proc.returncode == 2 and "3 distinct labels" in proc.stderr
    proc = run("calibration", str(three), "--label", "y", "--probability", "q")
    assert proc.returncode == 2 and "'q' is not in" in proc.stderr
    gaps = tmp_path / "gaps.csv"
    gaps.write_text("y,p\n1,0.2\n0,\n1,0.7\n0,0.4\n")
    proc = run("calibration", str(gaps), "--label", "y", "--probability", "p")
    assert proc.returncode == 2 and "line 3, column 'p': missing value" in proc.stderr
    proc = run("calibration", str(gaps), "--label", "y", "--probability", "p", "--drop-missing", "--json")
    assert proc.returncode == 0, proc.stderr
    assert json.loads(proc.stdout)["dropped_rows"] == 1


def test_probability_and_weight_cells_follow_the_strict_number_rules(tmp_path):
    """Issue #17: the calibration command read its probability and weight cells with
    Python's float(), so '0_5' and Arabic-Indic digits were numbers; they are now read by
    the CSV reader's strict grammar (common practice: one number grammar per program),
    and --decimal applies to them."""
    odd = tmp_path / "odd.csv"
    odd.write_text("y,p,w\n1,0.2,1\n0,0_5,1\n1,0.7,1\n0,0.4,1\n", encoding="utf-8")
    proc = run("calibration", str(odd), "--label", "y", "--probability", "p")
    assert proc.returncode == 2 and "line 3" in proc.stderr and "'_'" in proc.stderr
    arabic = tmp_path / "arabic.csv"
    arabic.write_text("y,p,w\n1,0.2,1\n0,0.5,\u0661\n1,0.7,1\n0,0.4,1\n", encoding="utf-8")
    proc = run("calibration", str(arabic), "--label", "y", "--probability", "p", "--weights", "w")
    assert proc.returncode == 2 and "line 3" in proc.stderr and "ASCII digits" in proc.stderr
    comma = tmp_path / "comma.csv"
    comma.write_text("y;p\n1;0,2\n0;0,5\n1;0,7\n0;0,4\n", encoding="utf-8")
    proc = run("calibration", str(comma), "--label", "y", "--probability", "p", "--decimal", ",", "--json")
    assert proc.returncode == 0, proc.stderr
