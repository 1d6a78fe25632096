"""The command line keeps files, takes every setting as an option, never shows a traceback,
and says what it models (issue 17).

Run in-process through ``lintools.cli.main`` (fast); by subprocess only where a real
process is the point: a closed pipe, the one-line warning format.

Data: Spector & Mazzeo's grade data and Brownlee's stack-loss data as shipped by
statsmodels, the wine and breast-cancer data shipped by scikit-learn.  Oracles:
statsmodels' Logit, scikit-learn's roc_auc_score, numpy.linalg.lstsq, the csv module.
"""

import ast
import csv
import inspect
import json
import re
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest
import sklearn.datasets
import sklearn.metrics
import statsmodels.api as sm

import lintools as lt
from lintools.cli import build_parser, main

CAUTION_WORDS = "statistical agreement is not model validation"


def cli(capsys, *args):
    """Run the command line in-process; return (exit code, stdout, stderr)."""
    code = main([str(a) for a in args])
    out, err = capsys.readouterr()
    return code, out, err


@pytest.fixture()
def spector(tmp_path):
    # Spector & Mazzeo (1980), shipped by statsmodels
    d = sm.datasets.spector.load_pandas().data.astype({"GRADE": int, "PSI": int})
    path = tmp_path / "spector.csv"
    d.to_csv(path, index=False)
    return path, d


@pytest.fixture()
def stackloss(tmp_path):
    d = sm.datasets.stackloss.load_pandas().data  # Brownlee's stack-loss data, shipped by statsmodels
    path = tmp_path / "stackloss.csv"
    d.to_csv(path, index=False)
    return path, d


@pytest.fixture()
def wine(tmp_path):
    w = sklearn.datasets.load_wine(as_frame=True)  # shipped by scikit-learn
    d = w.frame[["alcohol", "flavanoids"]].copy()
    d["cultivar"] = np.asarray(w.target_names)[w.target]
    path = tmp_path / "wine.csv"
    d.to_csv(path, index=False)
    return path, d


def leftovers(folder):
    """Temporary files of an atomic write left behind (there must be none)."""
    return [p.name for p in Path(folder).iterdir() if p.name.startswith(".lintools-")]


# ---------------------------------------------------------------- nothing lost
def test_fit_refuses_to_save_the_model_over_its_own_data(capsys, spector, tmp_path):
    path, _ = spector
    before = path.read_bytes()
    code, _, err = cli(capsys, "fit", path, "--target", "GRADE", "--save", path)
    assert code == 2 and "--save" in err and "same file as the CSV file" in err
    assert path.read_bytes() == before
    link = tmp_path / "link.json"  # the same file under another name: caught by resolved path
    link.symlink_to(path)
    code, _, err = cli(capsys, "fit", path, "--target", "GRADE", "--save-pmml", link, "--replace")
    assert code == 2 and "same file" in err and path.read_bytes() == before


def test_fit_refuses_two_outputs_that_are_one_file(capsys, spector, tmp_path):
    path, _ = spector
    model = tmp_path / "m.json"
    code, _, err = cli(capsys, "fit", path, "--target", "GRADE", "--model", "logistic", "--save", model,
                       "--save-pmml", model)
    assert code == 2 and "are the same file" in err and not model.exists()


def test_an_existing_output_is_refused_before_any_work_unless_replace(capsys, spector, tmp_path):
    path, _ = spector
    model = tmp_path / "m.json"
    model.write_text("keep me")
    # The target column does not exist: the refusal of the output comes first, before reading or fitting.
    code, _, err = cli(capsys, "fit", path, "--target", "NOPE", "--save", model)
    assert code == 2 and "--save" in err and "exists" in err and "--replace" in err and "replace=True" not in err
    assert model.read_text() == "keep me"
    code, _, err = cli(capsys, "fit", path, "--target", "GRADE", "--model", "logistic", "--save", model, "--replace")
    assert code == 0, err
    assert lt.load(model).kind == "logistic" and leftovers(tmp_path) == []


def test_folds_never_rewrites_its_input_and_replaces_only_when_told(capsys, spector, tmp_path):
    path, _ = spector
    before = path.read_bytes()
    code, _, err = cli(capsys, "folds", path, "--label", "GRADE", "--out", path)
    assert code == 2 and "--out" in err and "same file" in err and path.read_bytes() == before
    out = tmp_path / "folds.csv"
    out.write_text("old")
    code, _, err = cli(capsys, "folds", path, "--label", "GRADE", "--out", out)
    assert code == 2 and "exists" in err and "--replace" in err and out.read_text() == "old"
    code, _, err = cli(capsys, "folds", path, "--label", "GRADE", "--out", out, "--replace")
    assert code == 0, err
    assert out.read_text().splitlines()[0].endswith(",fold") and leftovers(tmp_path) == []


def test_calibration_plot_is_checked_first_and_written_atomically(capsys, spector, tmp_path):
    path, d = spector
    png = tmp_path / "diagram.png"
    png.write_bytes(b"old picture")
    args = ["calibration", path, "--label", "GRADE", "--probability", "GPA", "--plot", png]
    # GPA is no probability: the existing --plot file is refused before the column is read
    code, _, err = cli(capsys, *args)
    assert code == 2 and "--plot" in err and "exists" in err and png.read_bytes() == b"old picture"
    q = tmp_path / "q.csv"
    q.write_text("y,p\n" + "".join(f"{g},{(gpa - 2) / 2.1!r}\n" for g, gpa in zip(d["GRADE"], d["GPA"])))
    code, _, err = cli(capsys, "calibration", q, "--label", "y", "--probability", "p", "--plot", png, "--replace")
    assert code == 0, err
    assert png.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n" and leftovers(tmp_path) == []  # PNG signature (PNG spec)
    code, _, err = cli(capsys, "calibration", q, "--label", "y", "--probability", "p", "--plot", q, "--replace")
    assert code == 2 and "same file" in err


def test_demo_does_not_write_into_a_folder_that_is_not_empty(capsys, tmp_path):
    folder = tmp_path / "demo"
    folder.mkdir()
    (folder / "report.txt").write_text("my own report")
    code, out, err = cli(capsys, "demo", "--out", folder, "--rows", "300", "--quiet")
    assert code == 2 and "not empty" in err and "--replace" in err
    assert [p.name for p in folder.iterdir()] == ["report.txt"] and (folder / "report.txt").read_text() == "my own report"
    (folder / "notes.txt").write_text("untouched")
    code, out, err = cli(capsys, "demo", "--out", folder, "--rows", "300", "--quiet", "--seed", "7")
    assert code == 2 and (folder / "report.txt").read_text() == "my own report"
    code, out, err = cli(capsys, "demo", "--out", folder, "--rows", "300", "--quiet", "--replace")
    assert code == 0, err
    assert "300 inspection records" in (folder / "report.txt").read_text()
    assert (folder / "notes.txt").read_text() == "untouched" and leftovers(folder) == []


# ---------------------------------------------------------------- every setting a flag
def test_the_fit_settings_reach_the_fit(capsys, spector, stackloss):
    path, d = spector
    ref = sm.Logit(d["GRADE"], sm.add_constant(d[["GPA", "TUCE", "PSI"]])).fit(disp=0, tol=1e-12)  # oracle
    code, out, err = cli(capsys, "fit", path, "--target", "GRADE", "--model", "logistic", "--positive", "0",
                         "--solver", "lbfgs", "--tol", "1e-9", "--max-iter", "500", "--json")
    assert code == 0, err
    doc = json.loads(out)["fit"]
    assert doc["positive_class"] == 0 and doc["convergence"]["solver"] == "lbfgs"
    assert "tol 1e-09" in doc["convergence"]["message"]
    # modelling class 0 negates every coefficient of statsmodels' fit of class 1
    assert np.allclose(doc["coefficients"], -ref.params.to_numpy()[1:], rtol=1e-6, atol=0)
    code, out, err = cli(capsys, "fit", path, "--target", "GRADE", "--model", "logistic", "--l2", "2.5", "--json")
    assert code == 0 and json.loads(out)["fit"]["l2"] == 2.5
    code, out, err = cli(capsys, "fit", path, "--target", "GRADE", "--model", "logistic", "--max-iter", "1", "--json")
    assert code == 1 and json.loads(out)["fit"]["convergence"]["converged"] is False
    spath, s = stackloss
    code, out, err = cli(capsys, "fit", spath, "--target", "STACKLOSS", "--no-intercept", "--json")
    assert code == 0, err
    doc = json.loads(out)["fit"]
    beta = np.linalg.lstsq(s[["AIRFLOW", "WATERTEMP", "ACIDCONC"]].to_numpy(), s["STACKLOSS"].to_numpy(), rcond=None)[0]
    assert doc["with_intercept"] is False and np.allclose(doc["coefficients"], beta, rtol=1e-12, atol=0)


def test_softmax_reference_and_symmetric_form_are_options(capsys, wine):
    path, _ = wine
    code, out, err = cli(capsys, "fit", path, "--target", "cultivar", "--model", "softmax", "--reference", "class_2",
                         "--json")
    assert code == 0, err
    assert json.loads(out)["fit"]["reference_class"] == "class_2"
    code, out, err = cli(capsys, "fit", path, "--target", "cultivar", "--model", "softmax", "--symmetric", "--l2",
                         "1", "--json")
    assert code == 0, err
    assert json.loads(out)["fit"]["reference_class"] is None
    code, _, err = cli(capsys, "fit", path, "--target", "cultivar", "--model", "softmax", "--symmetric")
    assert code == 2 and "--symmetric" in err and "--l2 above 0" in err and "reference=None" not in err
    code, _, err = cli(capsys, "fit", path, "--target", "cultivar", "--model", "softmax", "--reference", "class_9")
    assert code == 2 and "--reference 'class_9' is not one of the labels" in err


def test_separation_names_the_options_and_firth_fits(capsys, spector, tmp_path):
    path, d = spector
    sep = tmp_path / "separated.csv"
    d.assign(PASSED=d["GRADE"]).to_csv(sep, index=False)  # a column equal to the outcome separates it
    code, _, err = cli(capsys, "fit", sep, "--target", "GRADE", "--model", "logistic")
    assert code != 0 and "--firth" in err and "--l2 above 0" in err
    assert "firth=True" not in err and "l2 > 0" not in err and "Traceback" not in err
    code, out, err = cli(capsys, "fit", sep, "--target", "GRADE", "--model", "logistic", "--firth", "--json")
    assert code == 0, err
    doc = json.loads(out)["fit"]
    ref = lt.logistic(d[["GPA", "TUCE", "PSI"]].assign(PASSED=d["GRADE"]), d["GRADE"], firth=True)
    assert doc["firth"] is True and np.allclose(doc["coefficients"], ref.coefficients, rtol=1e-10, atol=0)
    code, _, err = cli(capsys, "fit", sep, "--target", "GRADE", "--model", "logistic", "--firth", "--l2", "1")
    assert code == 2 and "--firth together with --l2 above 0" in err


@pytest.mark.parametrize("model, option", [
    ("logistic", ["--covariance", "HC1"]), ("softmax", ["--covariance", "HC3"]),
    ("linear", ["--solver", "lbfgs"]), ("linear", ["--tol", "1e-8"]), ("linear", ["--max-iter", "50"]),
    ("linear", ["--firth"]), ("softmax", ["--firth"]), ("linear", ["--positive", "1"]),
    ("softmax", ["--positive", "1"]), ("logistic", ["--reference", "0"]), ("logistic", ["--symmetric"]),
])
def test_an_option_that_does_not_apply_to_the_model_is_refused(capsys, spector, model, option):
    path, _ = spector
    code, out, err = cli(capsys, "fit", path, "--target", "GRADE", "--model", model, *option)
    assert code == 2 and f"{option[0]} does not apply to --model {model}" in err and out == ""


def test_check_refuses_options_that_do_not_apply_to_the_delivered_model(capsys, spector, stackloss, tmp_path):
    path, _ = spector
    model = tmp_path / "m.json"
    assert cli(capsys, "fit", path, "--target", "GRADE", "--model", "logistic", "--save", model)[0] == 0
    code, _, err = cli(capsys, "check", model, path, "--covariance", "XX")
    assert code == 2 and "argument --covariance: invalid choice: 'XX'" in err
    code, _, err = cli(capsys, "check", model, path, "--covariance", "HC1")
    assert code == 2 and "--covariance does not apply to the delivered model (a logistic model)" in err
    spath, _ = stackloss
    linear = tmp_path / "ls.json"
    assert cli(capsys, "fit", spath, "--target", "STACKLOSS", "--save", linear)[0] == 0
    code, _, err = cli(capsys, "check", linear, spath, "--solver", "lbfgs")
    assert code == 2 and "--solver does not apply to the delivered model (a least-squares model)" in err
    code, out, err = cli(capsys, "check", model, path, "--max-iter", "1")  # the refit's settings are options too
    assert code == 1 and "did not converge" in err and "raise --max-iter" in err


def test_options_are_not_abbreviated(capsys, spector, tmp_path):
    path, _ = spector
    model = tmp_path / "m.json"
    model.write_text("keep me")
    code, _, err = cli(capsys, "fit", path, "--target", "GRADE", "--save", model, "--rep")
    assert code == 2 and "unrecognized arguments: --rep" in err and model.read_text() == "keep me"


def test_version(capsys):
    code, out, _ = cli(capsys, "--version")
    assert code == 0 and out.strip() == f"lintools {lt.__version__}"


# Parameters without an option: the command line fills them from the file (X, y, p, score,
# names), sets them itself (on_iteration), or leaves them at their defaults and never meets
# their messages: grouped outcomes and offsets (trials, offset: one outcome per row),
# interval levels and norms (level, profile_level, norm), bins of a numeric label
# (continuous_bins: folds reads the label column as text, so that hint never shows).
NO_OPTION = {"X", "y", "p", "score", "names", "on_iteration", "trials", "offset", "level", "profile_level", "norm",
             "continuous_bins"}
# (file, parameter) pairs of code the command line never runs.
NOT_RUN = {("blocks/runner.py", "weights"),  # row blocks and dask arrays
           ("exchange/crosscheck.py", "intercept"),  # coefficients given by name: the command line passes an array
           ("engine/losses.py", "model"),  # implied_l2's model is set from the delivered file's kind
           ("support/categories.py", "reference_levels"),  # the command line passes the table's own mapping
           ("exchange/csv_table.py", "reference_levels"),  # the command line builds it: a dict of str from the model
           # the command line always reads with written_decimals=True and builds data_precision itself
           ("exchange/csv_table.py", "written_decimals"), ("models/accuracy.py", "data_precision"),
           ("models/accuracy.py", "written_decimals")}


def _library_messages():
    """Every string of the library outside the command line that is not a docstring;
    f-strings with their replacement fields shown as VALUE.  The document layer is left out
    with the command line: its strings are the page's HTML (``coefficients</th>`` reads as a
    comparison here), written for the page, not messages of a Python call."""
    root = Path(lt.__file__).parent
    for path in sorted(root.rglob("*.py")):
        name = path.relative_to(root).as_posix()
        if name.startswith(("cli/", "document/")):
            continue
        tree = ast.parse(path.read_text(encoding="utf-8"))
        skip = set()
        for node in ast.walk(tree):
            body = getattr(node, "body", None)
            if isinstance(body, list) and body and isinstance(body[0], ast.Expr) and isinstance(body[0].value, ast.Constant):
                skip.add(id(body[0].value))
            if isinstance(node, ast.JoinedStr):
                skip.update(id(v) for v in node.values)
                yield name, node.lineno, "".join(
                    v.value if isinstance(v, ast.Constant) else "VALUE" for v in node.values)
        for node in ast.walk(tree):
            if isinstance(node, ast.Constant) and isinstance(node.value, str) and id(node) not in skip:
                yield name, node.lineno, node.value


def test_every_remedy_phrase_of_the_library_names_an_option_under_the_command_line():
    """Invariant: after translation no message names a Python argument that has an option.

    The Python arguments are the parameters of the functions the command line calls; the
    options are every option of every subcommand (``intercept`` is ``--no-intercept``)."""
    from lintools.cli.console import translate

    called = [lt.least_squares, lt.logistic, lt.softmax, lt.save, lt.write_pmml, lt.read_table, lt.load,
              lt.read_pmml, lt.stratified_folds, lt.reliability, lt.brier, lt.calibration_error, lt.hosmer_lemeshow,
              lt.calibration_line, lt.spiegelhalter, lt.roc_auc, lt.compare_coefficients, lt.implied_l2]
    params = {name for fn in called for name in inspect.signature(fn).parameters}
    parser = build_parser()
    subs = next(a for a in parser._actions if a.dest == "command").choices.values()
    options = {a.dest for p in subs for a in p._actions} | {"intercept"}
    phrase = re.compile(r"(?<![\w.-])([A-Za-z_]\w*)(?:\s*(?:==|>=|<=|=|>|<)|(?=\b))")
    found = 0
    for file, line, text in _library_messages():
        for m in phrase.finditer(text):
            name = m.group(1)
            python_form = m.group(0) != name or "_" in name  # name= / name > ... or an identifier like max_iter
            if name not in params or not python_form or (file, name) in NOT_RUN or text == name:
                continue  # text == name: an argument name handed to a validator, which the options pre-empt
            found += 1
            if name in NO_OPTION:
                assert name not in options, f"{name} is now an option: translate it ({file}:{line})"
                continue
            again = re.compile(r"(?<![\w.-])" + re.escape(m.group(0)))
            assert not again.search(translate(text)), f"{file}:{line}: {text!r} -> {translate(text)!r}"
    assert found >= 30  # the scan saw the library's phrases (firth=True, l2 > 0, max_iter, positive=, ...)


def test_translation_leaves_options_labels_and_paths_alone():
    from lintools.cli.console import translate

    assert translate("set l2 > 0 or firth=True; raise max_iter") == "set --l2 above 0 or --firth; raise --max-iter"
    assert translate("--l2 must be >= 0") == "--l2 must be >= 0"
    assert translate("the column 'k=3' and the file 'tol=1.csv'") == "the column 'k=3' and the file 'tol=1.csv'"
    assert translate("use covariance='HC0'") == "use --covariance HC0"
    assert translate("positive='yes' is not one of the labels") == "--positive 'yes' is not one of the labels"



def test_a_remedy_for_both_readers_names_each_option_once_on_the_command_line(capsys, spector, tmp_path):
    # a bad cell's message offers the Python argument and the option; the command line keeps
    # only the option, once (common practice: one remedy, in the reader's own terms)
    path, d = spector
    rows = list(csv.reader(path.open()))
    rows[5][1] = "12..5"  # TUCE
    bad = tmp_path / "bad.csv"
    with bad.open("w", newline="") as fh:
        csv.writer(fh).writerows(rows)
    code, out, err = cli(capsys, "fit", bad, "--target", "GRADE", "--model", "logistic")
    assert code == 2 and "line 6" in err and "'12..5'" in err
    for option in ("--missing-values TOKENS", "--drop-missing", "--categorical TUCE"):
        assert err.count(option) == 1, err
    assert "on the command line" not in err and "missing_values" not in err and "categorical=" not in err
    with pytest.raises(lt.InputError, match=r"missing_values=\[\.\.\.\]; on the command line --missing-values"):
        lt.read_table(bad, target="GRADE")

# ---------------------------------------------------------------- no tracebacks
def test_a_closed_pipe_ends_quietly_with_the_commands_own_status(spector):
    path, _ = spector
    cmd = [sys.executable, "-m", "lintools", "fit", str(path), "--target", "GRADE", "--model", "logistic", "--json",
           "--max-iter", "1"]
    proc = subprocess.Popen(cmd, stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True)
    proc.stdout.close()  # the reader is gone before the report is written (as `| head -0`)
    err = proc.stderr.read()
    assert proc.wait(timeout=120) == 1  # not converged: the command's own status survives the closed pipe
    assert "Broken pipe" not in err and "Traceback" not in err and "Exception ignored" not in err
    assert err.endswith("lintools: the fit did not converge; its numbers are not an optimum\n")


def test_warnings_print_as_one_line_each_on_stderr(capsys, spector):
    path, _ = spector
    proc = subprocess.run([sys.executable, "-m", "lintools", "fit", str(path), "--target", "GRADE", "--model",
                           "logistic", "--max-iter", "1"], capture_output=True, text=True, timeout=120)
    assert proc.returncode == 1
    lines = proc.stderr.splitlines()
    warned = [ln for ln in lines if ln.startswith("lintools: warning: ")]
    assert len(warned) == 1 and "stopped at the iteration limit (1)" in warned[0] and "raise --max-iter" in warned[0]
    assert not any("Warning:" in ln or ".py:" in ln or "warn(" in ln for ln in lines)
    code, _, err = cli(capsys, *proc.args[3:], "--quiet")
    assert code == 1 and err == "lintools: the fit did not converge; its numbers are not an optimum\n"


def test_the_warning_channel_makes_one_line_of_any_warning(capsys):
    import warnings

    from lintools.cli.console import Console, warnings_to_stderr

    with warnings_to_stderr(Console(False)) as seen:
        warnings.warn("first line\n   second line: raise max_iter", UserWarning)
    assert capsys.readouterr().err == "lintools: warning: first line second line: raise --max-iter\n"
    assert seen == [(UserWarning, "first line second line: raise --max-iter")]


@pytest.mark.parametrize("value", ["abc", "0", "-2", "1.5", "\u0663", "2 threads"])
def test_a_bad_lintools_threads_is_bad_input(capsys, monkeypatch, stackloss, value):
    path, d = stackloss
    monkeypatch.setenv("LINTOOLS_THREADS", value)
    code, out, err = cli(capsys, "fit", path, "--target", "STACKLOSS")
    assert code == 2 and "LINTOOLS_THREADS" in err and out == ""
    with pytest.raises(lt.InputError, match="LINTOOLS_THREADS"):  # the library refuses it too, whatever the BLAS
        lt.least_squares(d[["AIRFLOW"]].to_numpy(), d["STACKLOSS"].to_numpy())


@pytest.mark.parametrize("args, words", [
    (["demo", "--seed", "-1"], "argument --seed: -1 is out of range"),
    (["demo", "--seed", "1e3"], "argument --seed: '1e3' is not a whole number"),
    (["demo", "--rows", "1000000000"], "argument --rows: 1000000000 is out of range; pass a whole number from 200 to 200000"),
    (["fit", "d.csv", "--target", "y", "--tol", "0"], "argument --tol: 0 is not above 0"),
    (["fit", "d.csv", "--target", "y", "--tol", "nan"], "argument --tol: 'nan' is not a number"),
    (["fit", "d.csv", "--target", "y", "--l2", "-1"], "argument --l2: -1 is negative"),
    (["fit", "d.csv", "--target", "y", "--l2", "1e999"], "argument --l2: '1e999' is too large"),
    (["fit", "d.csv", "--target", "y", "--max-iter", "0"], "argument --max-iter: 0 is out of range"),
    (["fit", "d.csv", "--target", "y", "--max-iter", "1_000"], "argument --max-iter: '1_000' is not a whole number"),
    (["folds", "d.csv", "--label", "y", "--out", "f.csv", "--k", "1"], "argument --k: 1 is out of range"),
    (["check", "m.json", "d.csv", "--significance", "1.5"], "argument --significance: 1.5 is not strictly between"),
    (["calibration", "d.csv", "--label", "y", "--probability", "p", "--bins", "0"], "argument --bins: 0 is out of range"),
])
def test_bad_numeric_options_exit_2_with_a_message(capsys, args, words):
    code, out, err = cli(capsys, *args)
    assert code == 2 and words in err and "Traceback" not in err and out == ""


# ---------------------------------------------------------------- honest messages
def test_fit_and_check_say_which_class_is_modelled(capsys, spector, wine, tmp_path):
    path, _ = spector
    model = tmp_path / "m.json"
    code, out, err = cli(capsys, "fit", path, "--target", "GRADE", "--model", "logistic", "--save", model)
    assert code == 0
    assert "lintools: modelling the probability of class '1' against '0' (choose with --positive)" in err
    code, out, err = cli(capsys, "check", model, path)
    assert code == 0 and "modelling the probability of class '1' against '0' (as in the model file" in err
    wpath, _ = wine
    code, out, err = cli(capsys, "fit", wpath, "--target", "cultivar", "--model", "softmax")
    assert code == 0
    assert ("modelling the probabilities of classes 'class_0', 'class_1', 'class_2'; the coefficients of class "
            "'class_0' are pinned at zero (choose with --reference" in err)


def test_calibration_names_the_class_and_warns_of_a_swapped_label(capsys, tmp_path):
    bc = sklearn.datasets.load_breast_cancer()  # shipped with scikit-learn; target 1 = benign
    Z = bc.data[:, [0, 1, 4]]
    Z = (Z - Z.mean(axis=0)) / Z.std(axis=0)
    p = sm.Logit(bc.target, sm.add_constant(Z)).fit(disp=0).predict(sm.add_constant(Z))  # statsmodels forecasts
    label = np.where(bc.target == 1, "benign", "malignant")
    path = tmp_path / "forecasts.csv"
    path.write_text("outcome,p_benign\n" + "".join(f"{c},{q!r}\n" for c, q in zip(label, p.tolist())))
    area = sklearn.metrics.roc_auc_score(bc.target, p)  # oracle, for the class 'benign'
    code, out, err = cli(capsys, "calibration", path, "--label", "outcome", "--probability", "p_benign", "--json")
    assert code == 0
    doc = json.loads(out)
    assert doc["positive"] == "malignant" and np.isclose(doc["roc_area"]["area"], 1 - area, rtol=1e-12)
    assert "taking 'p_benign' as the probability of class 'malignant' (the larger label; choose with --positive)" in err
    assert "lintools: warning: the ROC area is" in err
    assert "the probabilities may be for the other class: see --positive" in err
    assert any("may be for the other class" in w for w in doc["warnings"])
    code, out, err = cli(capsys, "calibration", path, "--label", "outcome", "--probability", "p_benign",
                         "--positive", "benign", "--json")
    assert code == 0 and "warning" not in err
    assert np.isclose(json.loads(out)["roc_area"]["area"], area, rtol=1e-12)


def test_folds_prints_the_class_balance_of_every_fold(capsys, spector, tmp_path):
    path, _ = spector
    out_csv = tmp_path / "folds.csv"
    code, out, err = cli(capsys, "folds", path, "--label", "GRADE", "--k", "4", "--out", out_csv)
    assert code == 0, err
    with open(out_csv, newline="") as fh:  # the csv module reads back what was written
        rows = list(csv.DictReader(fh))
    for j in range(4):
        mine = [r for r in rows if r["fold"] == str(j)]
        ones = sum(r["GRADE"] == "1" for r in mine)
        expect = (f"fold {j}: {len(mine)} rows; '0' {len(mine) - ones} ({100 * (len(mine) - ones) / len(mine):.1f}%), "
                  f"'1' {ones} ({100 * ones / len(mine):.1f}%)")
        assert expect in out
    assert "all: 32 rows; '0' 21 (65.6%), '1' 11 (34.4%)" in out  # 11 of the 32 students improved (Spector & Mazzeo)


def test_quiet_leaves_only_errors_and_the_requested_output(capsys, spector, tmp_path):
    path, _ = spector
    code, out, err = cli(capsys, "fit", path, "--target", "GRADE", "--model", "logistic")
    assert code == 0 and CAUTION_WORDS in err and CAUTION_WORDS not in out and "modelling" not in out
    code, out, err = cli(capsys, "fit", path, "--target", "GRADE", "--model", "logistic", "--quiet",
                         "--save", tmp_path / "m.json")
    assert code == 0 and err == "" and "lintools logistic model of 'GRADE'" in out
    code, out, err = cli(capsys, "fit", path, "--target", "GRADE", "--model", "logistic", "--quiet", "--json")
    assert code == 0 and err == "" and json.loads(out)["fit"]["kind"] == "logistic"
    code, out, err = cli(capsys, "fit", path, "--target", "NOPE", "--quiet")
    assert code == 2 and out == "" and err.startswith("lintools: bad input:")
