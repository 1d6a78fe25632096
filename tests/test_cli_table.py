"""The CSV rules on the command line: the same refusals and options as read_table.

Files are the demo scenario's inspection records (lintools.cli.demo_data) written as CSV.
"""

from __future__ import annotations

import json
import subprocess
import sys

import numpy as np
import pytest

import lintools as lt
from lintools.cli.demo_data import inspection_data

DATA = inspection_data(600)


def run(*args):
    return subprocess.run([sys.executable, "-m", "lintools", *args], capture_output=True, text=True, timeout=120)


def write(tmp_path, name="inspection.csv", delimiter=",", decimal=".", edit=None, extra=None):
    header = ([extra[0]] if extra else []) + list(DATA.names) + ["leak"]
    lines = [delimiter.join(header)]
    for i in range(DATA.X.shape[0]):
        cells = ([extra[1][i]] if extra else []) + [repr(float(v)).replace(".", decimal) for v in DATA.X[i]]
        cells.append(str(int(DATA.leak[i])))
        for (row, col), cell in (edit or {}).items():
            if row == i:
                cells[header.index(col)] = cell
        lines.append(delimiter.join(cells))
    path = tmp_path / name
    path.write_text("\n".join(lines) + "\n", encoding="utf-8")
    return str(path)


def test_fit_refuses_one_bad_cell_with_exit_2_naming_line_column_and_the_flags(tmp_path):
    # before: exit 0 and a report with hundreds of parameters
    path = write(tmp_path, edit={(9, "humidity"): "n/a"})
    proc = run("fit", path, "--target", "leak", "--model", "logistic")
    assert proc.returncode == 2 and proc.stdout == ""
    assert "line 11, column 'humidity': 'n/a' is not a number" in proc.stderr
    assert "--missing-values" in proc.stderr and "--categorical humidity" in proc.stderr
    ok = run("fit", path, "--target", "leak", "--model", "logistic", "--missing-values", "n/a", "--drop-missing",
             "--json")
    assert ok.returncode == 0, ok.stderr
    doc = json.loads(ok.stdout)
    assert doc["dropped_rows"] == 1 and doc["fit"]["n_observations"] == 599
    # oracle: the library's fit on the same rows without the edited one
    ref = lt.logistic(np.delete(DATA.X, 9, axis=0), np.delete(DATA.leak.astype(int), 9), names=DATA.names)
    assert np.allclose(doc["fit"]["coefficients"], ref.coefficients, rtol=1e-12, atol=0)


def test_fit_refuses_an_identifier_with_the_exclude_flag_not_a_penalty(tmp_path):
    path = write(tmp_path, extra=("bottle_id", [f"B{i:04d}" for i in range(600)]))
    proc = run("fit", path, "--target", "leak", "--model", "logistic")
    assert proc.returncode == 2 and "--exclude bottle_id" in proc.stderr and "l2" not in proc.stderr
    assert run("fit", path, "--target", "leak", "--model", "logistic", "--exclude", "bottle_id").returncode == 0


def test_separator_and_decimal_comma_on_the_command_line(tmp_path):
    semi = write(tmp_path, name="semi.csv", delimiter=";", decimal=",")
    proc = run("fit", semi, "--target", "leak", "--model", "logistic", "--decimal", ",", "--json")
    assert proc.returncode == 0, proc.stderr
    ref = lt.logistic(DATA.X, DATA.leak.astype(int), names=DATA.names)
    assert np.allclose(json.loads(proc.stdout)["fit"]["coefficients"], ref.coefficients, rtol=1e-12, atol=0)
    wrong = run("fit", semi, "--target", "leak", "--delimiter", ",")
    assert wrong.returncode == 2 and "--delimiter ';'" in wrong.stderr
    plain = run("fit", semi, "--target", "leak", "--model", "logistic")
    assert plain.returncode == 2 and "--decimal ," in plain.stderr
    tabs = write(tmp_path, name="tabs.tsv", delimiter="\t")
    assert run("fit", tabs, "--target", "leak", "--model", "logistic", "--delimiter", "tab").returncode == 0


def test_check_reads_the_header_with_the_same_options(tmp_path):
    semi = write(tmp_path, name="semi.csv", delimiter=";")
    model = tmp_path / "m.json"
    fit = lt.logistic(DATA.X, DATA.leak.astype(int), names=DATA.names)
    import dataclasses

    lt.save(dataclasses.replace(fit, target="leak"), model)
    proc = run("check", str(model), semi)
    assert proc.returncode == 0, proc.stderr


def test_declared_categorical_and_limits(tmp_path):
    codes = [str(1 + i % 4) for i in range(600)]
    path = write(tmp_path, extra=("line", codes))
    proc = run("fit", path, "--target", "leak", "--model", "logistic", "--categorical", "line", "--json")
    assert proc.returncode == 0, proc.stderr
    assert json.loads(proc.stdout)["fit"]["names"][:3] == ["line=2", "line=3", "line=4"]
    small = run("fit", path, "--target", "leak", "--max-bytes", "100")
    assert small.returncode == 2 and "--max-bytes" in small.stderr


@pytest.mark.parametrize("args, fragment", [
    (["calibration", "{csv}", "--label", "leak", "--probability", "humidity", "--exclude", "line_speed"],
     "--exclude does not apply"),
    (["folds", "{csv}", "--label", "leak", "--out", "{out}", "--categorical", "leak"], "--categorical does not apply"),
    (["fit", "{csv}", "--target", "leak", "--delimiter", "ab"], "delimiter must be one ASCII character"),
    (["fit", "{csv}", "--target", "leak", "--max-line-bytes", "0"], "--max-line-bytes must be a whole number"),
])
def test_options_that_do_not_apply_or_are_bad_exit_2(tmp_path, args, fragment):
    path = write(tmp_path)
    proc = run(*[a.format(csv=path, out=tmp_path / "f.csv") for a in args])
    assert proc.returncode == 2 and fragment in proc.stderr, proc.stderr


def test_demo_takes_no_csv_options(tmp_path):
    proc = run("demo", "--delimiter", ";")
    assert proc.returncode == 2 and "unrecognized arguments" in proc.stderr
