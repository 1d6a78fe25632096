"""``--by COLUMN`` of ``lintools calibration`` and ``lintools check`` end to end by subprocess.

Source of every per-segment figure: the public library function (lintools.brier, roc_auc,
hosmer_lemeshow, band_tests, logistic, least_squares, compare_coefficients) run here on
that segment's rows alone, parsed with Python's csv module.  The library functions are
themselves checked against scipy, statsmodels and scikit-learn in their own test files
(test_calibration.py, test_discrimination.py, test_band_tests.py, test_logistic.py,
test_crosscheck*.py).  The small-segment rule (fewer than ten rows of a class, or of the
smallest class per coefficient) is common practice: ten events per variable (Peduzzi et
al. 1996, quoted from memory).
"""

import csv
import dataclasses
import json
import subprocess
import sys

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

import lintools as lt
from lintools.cli.common import SMALL_SEGMENT_ROWS, segments


def run(*args, cwd=None):
    return subprocess.run([sys.executable, "-m", "lintools", *args], capture_output=True, text=True, timeout=120, cwd=cwd)


def read(path):
    with open(path, newline="") as f:
        return list(csv.DictReader(f))


@pytest.fixture(scope="module")
def data(tmp_path_factory):
    """Invented rows (property-test style inputs): two features, a 0/1 label whose intercept
    differs by segment, case weights 1 to 3, a grade column; segment C is tiny."""
    folder = tmp_path_factory.mktemp("segments")
    rng = np.random.default_rng(7)
    n = 900
    X = rng.normal(size=(n, 2))
    seg = rng.choice(["A", "B", "C"], n, p=[0.6, 0.385, 0.015])
    eta = -0.4 + X @ np.array([1.0, -0.6]) + 0.9 * (seg == "B")
    y = (rng.uniform(size=n) < 1 / (1 + np.exp(-eta))).astype(int)
    w = rng.integers(1, 4, n)
    grade = rng.choice(["g1", "g2", "g3"], n)
    p = 1 / (1 + np.exp(-(-0.4 + X @ np.array([1.0, -0.6]))))
    with open(folder / "rows.csv", "w") as f:
        f.write("x1,x2,y,seg,w,grade,p\n")
        for i in range(n):
            f.write(f"{float(X[i, 0])!r},{float(X[i, 1])!r},{y[i]},{seg[i]},{w[i]},{grade[i]},{float(p[i])!r}\n")
    fit = dataclasses.replace(lt.logistic(X, y, names=("x1", "x2"), weights=w), target="y")
    lt.save(fit, folder / "model.json")
    return folder, read(folder / "rows.csv")


def columns(rows, mask=None):
    keep = [r for r in rows if mask is None or r["seg"] == mask]
    X = np.array([[float(r["x1"]), float(r["x2"])] for r in keep])
    return (X, np.array([int(r["y"]) for r in keep]), np.array([float(r["w"]) for r in keep]),
            np.array([float(r["p"]) for r in keep]), [r["grade"] for r in keep])


def test_calibration_segment_figures_equal_the_library_on_the_segment_rows(data):
    folder, rows = data
    out = run("calibration", "rows.csv", "--label", "y", "--probability", "p", "--weights", "w", "--by", "seg",
              "--bands", "grade", "--json", "--quiet", cwd=folder)
    assert out.returncode == 0, out.stderr
    doc = json.loads(out.stdout)
    assert doc["by"] == "seg" and [s["segment"] for s in doc["segments"]] == ["A", "B", "C"]
    for block in doc["segments"]:
        _, y, w, p, grade = columns(rows, block["segment"])
        assert block["rows"] == len(y) and block["positives"] == int(y.sum())  # source: counts of the csv rows
        rep = block["report"]
        # source: the library functions on this segment's rows alone
        assert rep["brier"]["score"] == lt.brier(y, p, weights=w).score
        assert rep["reliability"]["observed"] == [None if np.isnan(v) else v
                                                  for v in lt.reliability(y, p, weights=w).observed.tolist()]
        assert rep["hosmer_lemeshow"]["statistic"] == lt.hosmer_lemeshow(y, p, weights=w).statistic
        assert rep["roc_area"]["area"] == lt.roc_auc(y, p, weights=w).area
        bands = lt.band_tests(y, p, grade, weights=w)
        assert block["band_tests"]["binomial_p_value"] == bands.binomial_p_value.tolist()
        assert block["band_tests"]["jeffreys_p_value"] == bands.jeffreys_p_value.tolist()
    # the block of all rows is unchanged by --by: the library on every row
    _, y, w, p, _ = columns(rows)
    assert doc["brier"]["score"] == lt.brier(y, p, weights=w).score and doc["rows"] == len(rows)


def test_calibration_flags_a_small_segment_in_text_and_json(data):
    folder, rows = data
    _, y, *_ = columns(rows, "C")
    assert min(y.sum(), len(y) - y.sum()) < SMALL_SEGMENT_ROWS  # the fixture's segment C is small
    doc = json.loads(run("calibration", "rows.csv", "--label", "y", "--probability", "p", "--by", "seg", "--json",
                         "--quiet", cwd=folder).stdout)
    assert [s["small"] for s in doc["segments"]] == [False, False, True]
    assert "common practice" in doc["small_segment_rule"]
    text = run("calibration", "rows.csv", "--label", "y", "--probability", "p", "--by", "seg", cwd=folder)
    assert text.returncode == 0, text.stderr
    line = next(t for t in text.stdout.splitlines() if t.startswith("Segment seg = C:"))
    assert f"{len(y)} rows" in line and "SMALL: fewer than 10 rows of either class" in line
    assert "Segment seg = A:" in text.stdout and "SMALL" not in text.stdout.split("Segment seg = A:")[1].splitlines()[0]


def test_calibration_a_statistic_missing_in_a_segment_carries_its_reason(tmp_path):
    """A segment of one class: reported (flagged small) with the statistics that need both
    classes listed as not computed, never dropped."""
    rng = np.random.default_rng(3)
    with open(tmp_path / "f.csv", "w") as f:
        f.write("y,p,seg\n")
        for i in range(120):
            seg = "solo" if i < 15 else "main"
            f.write(f"{1 if seg == 'solo' else i % 2},{float(rng.uniform(0.05, 0.95))!r},{seg}\n")
    doc = json.loads(run("calibration", "f.csv", "--label", "y", "--probability", "p", "--by", "seg", "--json",
                         "--quiet", cwd=tmp_path).stdout)
    solo = next(s for s in doc["segments"] if s["segment"] == "solo")
    assert solo["small"] and solo["rows"] == 15 and solo["negatives"] == 0
    assert solo["report"]["roc_area"] is None and any("ROC area" in n and "single class" in n
                                                       for n in solo["report"]["notes"])
    text = run("calibration", "f.csv", "--label", "y", "--probability", "p", "--by", "seg", cwd=tmp_path).stdout
    assert "not computed: ROC area" in text.split("Segment seg = solo:")[1]


def test_calibration_by_column_roles_are_decided_by_name(data):
    """Refused: the label, the probability and the weights column; allowed: the --bands column."""
    folder, _ = data
    for column, words in (("y", "the --label column"), ("p", "the --probability column"), ("w", "the --weights column")):
        out = run("calibration", "rows.csv", "--label", "y", "--probability", "p", "--weights", "w", "--by", column,
                  cwd=folder)
        assert out.returncode == 2 and f"--by column '{column}' is also {words}" in out.stderr, out.stderr
    out = run("calibration", "rows.csv", "--label", "y", "--probability", "p", "--by", "grade", "--bands", "grade",
              "--json", "--quiet", cwd=folder)
    assert out.returncode == 0, out.stderr
    blocks = json.loads(out.stdout)["segments"]
    assert [b["band_tests"]["bands"] for b in blocks] == [["g1"], ["g2"], ["g3"]]


def test_check_segment_refits_equal_the_library_and_the_exit_follows_all_rows(data):
    folder, rows = data
    out = run("check", "model.json", "rows.csv", "--weights", "w", "--by", "seg", "--json", "--quiet", cwd=folder)
    # the model was fitted on all rows: the whole sample agrees (exit 0) although the
    # segments, whose intercepts differ by construction, disagree
    assert out.returncode == 0, out.stderr
    doc = json.loads(out.stdout)
    assert doc["agree"] is True and doc["segments_disagreeing"] == ["A", "B"]
    delivered = lt.load(folder / "model.json")
    for block in doc["segments"]:
        X, y, w, *_ = columns(rows, block["segment"])
        # source: lintools.logistic and lintools.compare_coefficients on this segment's rows alone
        fit = lt.logistic(X, y, weights=w, names=("x1", "x2"))
        assert np.allclose(block["refit"]["coefficients"], fit.coefficients, rtol=1e-12, atol=1e-14)
        cmp = lt.compare_coefficients(fit, delivered.coefficients, delivered.intercept, X=X, y=y, weights=w)
        assert np.isclose(block["comparison"]["wald_statistic"], cmp.wald_statistic, rtol=1e-9)
        assert block["agree"] == (cmp.wald_p_value >= 0.05)
        assert block["smallest_class_rows"] == min(int(y.sum()), len(y) - int(y.sum()))
        assert block["small"] == (block["smallest_class_rows"] < SMALL_SEGMENT_ROWS * 3)  # 3 coefficients
    assert [b["small"] for b in doc["segments"]] == [False, False, True]
    text = run("check", "model.json", "rows.csv", "--weights", "w", "--by", "seg", cwd=folder)
    assert text.returncode == 0
    assert "Verdict: AGREE" in text.stdout and "Verdict on this segment: DISAGREE" in text.stdout
    c_line = next(t for t in text.stdout.splitlines() if t.startswith("Segment seg = C:"))
    assert "SMALL: fewer than 10 rows of its smallest class per coefficient" in c_line
    assert "The exit status follows all rows; 2 of 3 segments disagree" in text.stdout


def test_check_a_segment_that_cannot_be_refitted_is_listed_with_its_reason(data, tmp_path):
    folder, rows = data
    with open(tmp_path / "rows.csv", "w") as f:  # segment C keeps only its label-1 rows
        f.write("x1,x2,y,seg,w,grade,p\n")
        for r in rows:
            if r["seg"] != "C" or r["y"] == "1":
                f.write(",".join(r[k] for k in ("x1", "x2", "y", "seg", "w", "grade", "p")) + "\n")
    doc = json.loads(run("check", str(folder / "model.json"), "rows.csv", "--by", "seg", "--json", "--quiet",
                         cwd=tmp_path).stdout)
    c = next(b for b in doc["segments"] if b["segment"] == "C")
    assert c["small"] and c["agree"] is None and c["problem"].startswith("not compared:") and "label" in c["problem"]


def test_check_by_column_roles_are_decided_by_name(data):
    """Refused: the target, the weights and any column the model uses (constant within a segment)."""
    folder, _ = data
    for column, words in (("y", "the target column"), ("w", "the --weights column"),
                          ("x1", "a column the delivered model uses")):
        out = run("check", "model.json", "rows.csv", "--weights", "w", "--by", column, cwd=folder)
        assert out.returncode == 2 and f"--by column '{column}' is also {words}" in out.stderr, out.stderr


def test_check_least_squares_segments_use_rows_per_coefficient(tmp_path):
    rng = np.random.default_rng(11)
    n = 260
    x = rng.normal(size=n)
    seg = np.where(np.arange(n) < 15, "small", "big")
    y = 1.0 + 2.0 * x + rng.normal(size=n)
    with open(tmp_path / "f.csv", "w") as f:
        f.write("x,y,seg\n")
        for i in range(n):
            f.write(f"{float(x[i])!r},{float(y[i])!r},{seg[i]}\n")
    lt.save(dataclasses.replace(lt.least_squares(x[:, None], y, names=("x",)), target="y"), tmp_path / "m.json")
    doc = json.loads(run("check", "m.json", "f.csv", "--by", "seg", "--json", "--quiet", cwd=tmp_path).stdout)
    blocks = {b["segment"]: b for b in doc["segments"]}
    # 15 rows < 10 rows per coefficient * 2 coefficients; 245 rows are not
    assert blocks["small"]["small"] and not blocks["big"]["small"] and blocks["small"]["smallest_class_rows"] is None
    small = np.arange(n) < 15
    # source: lintools.least_squares on the segment's rows alone
    assert np.allclose(blocks["small"]["refit"]["coefficients"],
                       lt.least_squares(x[small, None], y[small]).coefficients, rtol=1e-12)


@settings(max_examples=40, deadline=None)
@given(st.lists(st.lists(st.sampled_from(["a", "b", "c", "d"]), max_size=30), min_size=1, max_size=3))
def test_segments_partition_the_rows_of_every_file(files):
    """Invariant: every row of every file falls in exactly one segment, in sorted order of values."""
    found = segments(*files)
    assert [v for v, _ in found] == sorted(set().union(*files))
    for k, column in enumerate(files):
        covered = np.zeros(len(column), dtype=int)
        for value, masks in found:
            covered += masks[k]
            assert all(column[i] == value for i in np.flatnonzero(masks[k]))
        assert (covered == 1).all()
