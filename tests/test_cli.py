"""The command line, end to end by subprocess: exit codes, text and --json output."""

import csv
import io
import json
import subprocess
import sys

import numpy as np
import statsmodels.api as sm

import lintools as lt
from lintools.cli.common import Progress
from lintools.exchange.pmml import read_pmml


def run(*args, cwd=None):
    return subprocess.run([sys.executable, "-m", "lintools", *args], capture_output=True, text=True, timeout=120, cwd=cwd)


def _stackloss_csv(tmp_path):
    # Brownlee's stack-loss data as shipped by statsmodels' datasets.
    d = sm.datasets.stackloss.load_pandas().data
    path = tmp_path / "stackloss.csv"
    d.to_csv(path, index=False)
    return path, d


def test_fit_linear_json_matches_the_library_and_writes_a_model_file(tmp_path):
    path, d = _stackloss_csv(tmp_path)
    model = tmp_path / "m.json"
    proc = run("fit", str(path), "--target", "STACKLOSS", "--covariance", "HC1", "--save", str(model), "--json")
    assert proc.returncode == 0, proc.stderr
    doc = json.loads(proc.stdout)
    ref = lt.least_squares(d[["AIRFLOW", "WATERTEMP", "ACIDCONC"]], d["STACKLOSS"], covariance="HC1")
    assert np.allclose(doc["fit"]["coefficients"], ref.coefficients, rtol=1e-13, atol=0)
    assert doc["fit"]["names"] == ["AIRFLOW", "WATERTEMP", "ACIDCONC"]
    back = lt.load(model)
    assert np.array_equal(back.coefficients, ref.coefficients)


def test_fit_text_report_and_caution(tmp_path):
    path, _ = _stackloss_csv(tmp_path)
    proc = run("fit", str(path), "--target", "STACKLOSS", "--features", "AIRFLOW,WATERTEMP")
    assert proc.returncode == 0, proc.stderr
    assert "AIRFLOW" in proc.stdout and "ACIDCONC" not in proc.stdout
    # the caution goes to standard error, never into the requested output
    assert "statistical agreement is not model validation" in proc.stderr
    assert "statistical agreement is not model validation" not in proc.stdout


def test_bad_input_exits_2_with_a_message(tmp_path):
    path, _ = _stackloss_csv(tmp_path)
    proc = run("fit", str(path), "--target", "NOPE")
    assert proc.returncode == 2
    assert "target column 'NOPE' is not in" in proc.stderr or "the column 'NOPE' is not in" in proc.stderr
    proc = run("fit", str(tmp_path / "missing.csv"), "--target", "y")
    assert proc.returncode == 2 and "cannot be read" in proc.stderr
    proc = run("fit")
    assert proc.returncode == 2


def test_missing_values_stop_or_are_dropped(tmp_path):
    path = tmp_path / "gaps.csv"
    path.write_text("a,b,y\n1,2,3.5\n2,,4.1\n3,1,5.2\n4,3,7.9\n5,5,8.8\n6,2,9.1\n")
    proc = run("fit", str(path), "--target", "y")
    assert proc.returncode == 2 and "line 3, column 'b': missing value" in proc.stderr
    proc = run("fit", str(path), "--target", "y", "--drop-missing", "--json")
    assert proc.returncode == 0, proc.stderr
    assert json.loads(proc.stdout)["dropped_rows"] == 1


def test_folds_writes_a_balanced_fold_column(tmp_path):
    path = tmp_path / "labels.csv"
    labels = ["leak"] * 10 + ["ok"] * 25
    path.write_text("id,label\n" + "".join(f"{i},{c}\n" for i, c in enumerate(labels)))
    out = tmp_path / "folds.csv"
    proc = run("folds", str(path), "--label", "label", "--k", "5", "--out", str(out), "--json")
    assert proc.returncode == 0, proc.stderr
    assert json.loads(proc.stdout)["rows_per_fold"] == [7] * 5
    with open(out, newline="") as fh:
        rows = list(csv.DictReader(fh))
    assert [r["id"] for r in rows] == [str(i) for i in range(35)]
    for fold in range(5):
        assert sum(r["label"] == "leak" and r["fold"] == str(fold) for r in rows) == 2


def test_demo_writes_into_the_default_folder_of_the_working_directory(tmp_path):
    proc = run("demo", "--quiet", cwd=tmp_path)
    assert proc.returncode == 0, proc.stderr
    assert "supplier's leak model" in proc.stdout and "Caution" not in proc.stdout
    report = (tmp_path / "lintools-demo" / "report.txt").read_text()
    assert "fill_temperature" in report and "statistical agreement is not model validation" in report


def test_fit_logistic_names_its_target_and_writes_pmml(tmp_path):
    # statsmodels' spector data (Spector & Mazzeo 1980).
    d = sm.datasets.spector.load_pandas().data
    path = tmp_path / "spector.csv"
    d.to_csv(path, index=False)
    proc = run("fit", str(path), "--target", "GRADE", "--model", "logistic", "--save-pmml", str(tmp_path / "m.pmml"),
               "--json")
    assert proc.returncode == 0, proc.stderr
    doc = json.loads(proc.stdout)
    assert doc["fit"]["target"] == "GRADE"
    ref = sm.Logit(d["GRADE"], sm.add_constant(d[["GPA", "TUCE", "PSI"]])).fit(disp=0, tol=1e-12)  # oracle
    assert np.allclose(doc["fit"]["coefficients"], ref.params.to_numpy()[1:], rtol=1e-8, atol=0)
    m = read_pmml(tmp_path / "m.pmml")
    assert m.target == "GRADE" and np.allclose(m.coefficients, ref.params.to_numpy()[1:], rtol=1e-8, atol=0)


class _Clock:
    def __init__(self):
        self.now = 100.0

    def __call__(self):
        return self.now


class _Record:
    def __init__(self, i):
        self.iteration, self.objective, self.gradient_norm, self.step = i, 1.0 / i, 10.0**-i, 0.1


def test_progress_lines_start_after_one_second_and_quiet_silences_them():
    clock, out = _Clock(), io.StringIO()
    progress = Progress(False, "leak fit", clock=clock, stream=out)
    clock.now += 0.999
    progress(_Record(1))
    assert out.getvalue() == ""  # common practice: no chatter for fits under a second
    clock.now += 0.002
    progress(_Record(2))
    assert out.getvalue().startswith("  leak fit: iteration 2, 1.0 s: objective 0.5")
    out2 = io.StringIO()
    silent = Progress(True, "x", clock=clock, stream=out2)
    clock.now += 5.0
    silent(_Record(3))
    assert out2.getvalue() == "" and silent.printed == 0


def test_progress_reaches_stderr_of_a_long_fit_and_quiet_removes_it(tmp_path):
    # A fit that "lasts" more than a second: in a child process whose clock advances
    # 0.6 s per reading, the command's progress callback passes the one-second mark at
    # the second iteration (no timing of real work).
    d = sm.datasets.spector.load_pandas().data
    path = tmp_path / "spector.csv"
    d.to_csv(path, index=False)
    script = (
        "import itertools, time, sys\n"
        "ticks = itertools.count()\n"
        "time.perf_counter = lambda: 0.6 * next(ticks)\n"
        "from lintools.cli import main\n"
        "raise SystemExit(main(sys.argv[1:]))\n"
    )
    args = ["fit", str(path), "--target", "GRADE", "--model", "logistic"]
    loud = subprocess.run([sys.executable, "-c", script, *args], capture_output=True, text=True, timeout=120)
    assert loud.returncode == 0, loud.stderr
    assert "fit: iteration" in loud.stderr
    quiet = subprocess.run([sys.executable, "-c", script, *args, "--quiet"], capture_output=True, text=True, timeout=120)
    assert "iteration" not in quiet.stderr
