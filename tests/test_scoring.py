"""Scoring with loaded models: ``load`` / ``read_pmml`` in Python and ``lintools score``.

Data: statsmodels' shipped data sets, Grunfeld's investment data (least squares, text
column ``firm``) and the 1996 American National Election Study extract ``anes96``
(logistic on ``vote``, softmax on the seven-level party identification ``PID``; text
column ``educ`` from its education codes).  The fit's own predictions on the same rows
are the reference: a model file must give them back bit for bit (JSON: the record
itself is restored; PMML: coefficients are written as the shortest decimal text that
reads back as the same double, so the equations are the fit's).
"""

import csv
import subprocess
import sys

import numpy as np
import pytest
import statsmodels.api as sm

import lintools as lt
from lintools import InputError


def run(*args, cwd=None):
    return subprocess.run([sys.executable, "-m", "lintools", *args], capture_output=True, text=True, timeout=120,
                          cwd=cwd)


def _grunfeld_csv(tmp_path):
    d = sm.datasets.grunfeld.load_pandas().data[["invest", "value", "capital", "firm"]].copy()
    d.insert(0, "row", [f"g{i}" for i in range(len(d))])
    path = tmp_path / "grunfeld.csv"
    d.to_csv(path, index=False)
    return path


def _anes_csv(tmp_path):
    d = sm.datasets.anes96.load_pandas().data[["logpopul", "age", "educ", "vote", "PID"]].copy()
    d["educ"] = [f"E{int(v)}" for v in d["educ"]]  # education code as a text column
    d["PID"] = [f"P{int(v)}" for v in d["PID"]]
    d.insert(0, "row", [f"a{i}" for i in range(len(d))])
    path = tmp_path / "anes.csv"
    d.to_csv(path, index=False)
    return path


CASES = {  # kind -> (csv builder, target, columns left out, fitter)
    "least_squares": (_grunfeld_csv, "invest", ["row"], lambda t: lt.least_squares(t.X, t.target, names=t.names)),
    "logistic": (_anes_csv, "vote", ["row", "PID"], lambda t: lt.logistic(t.X, t.target, names=t.names)),
    "softmax": (_anes_csv, "PID", ["row", "vote"], lambda t: lt.softmax(t.X, t.target, names=t.names)),
}


def _fit(tmp_path, kind):
    build, target, leave_out, fitter = CASES[kind]
    path = build(tmp_path)
    table = lt.read_table(path, target=target, exclude=leave_out)
    fit = fitter(table)
    if hasattr(fit, "target"):
        import dataclasses

        fit = dataclasses.replace(fit, target=target)
    return path, table, fit


@pytest.mark.parametrize("kind", sorted(CASES))
def test_loaded_json_model_scores_bit_for_bit_as_its_fit(tmp_path, kind):
    """Reference: the fit's own linear_predictor / mean / labels on the rows it was fitted on."""
    path, table, fit = _fit(tmp_path, kind)
    assert table.reference_levels  # the design holds indicator columns of a text column
    lt.save(fit, tmp_path / "m.json", reference_levels=table.reference_levels)
    back = lt.load(tmp_path / "m.json")
    assert np.array_equal(back.linear_predictor(table.X), fit.linear_predictor(table.X))
    assert np.array_equal(back.mean(table.X), fit.mean(table.X))
    if kind != "least_squares":
        assert np.array_equal(back.labels(table.X), fit.labels(table.X))
    field = back.categorical_fields[0]
    column = next(iter(table.reference_levels))
    assert field.name == column and field.levels[0] == table.reference_levels[column]
    assert {f"{column}={lv}" for lv in field.levels[1:]} == {n for n in fit.names if n.startswith(column + "=")}


@pytest.mark.parametrize("kind", sorted(CASES))
def test_pmml_model_scores_as_its_fit(tmp_path, kind):
    """Reference: the fit's linear predictor and mean, bit for bit (the same equations read
    back, and PMML's normalisation applied to the same numbers as the fit's)."""
    path, table, fit = _fit(tmp_path, kind)
    lt.write_pmml(fit, tmp_path / "m.pmml", reference_levels=table.reference_levels)
    m = lt.read_pmml(tmp_path / "m.pmml")
    assert m.names == fit.names
    assert np.array_equal(m.linear_predictor(table.X), fit.linear_predictor(table.X))
    assert np.array_equal(m.mean(table.X), fit.mean(table.X))


def _read_scored(path):
    with open(path, newline="") as fh:
        return list(csv.reader(fh))


@pytest.mark.parametrize("kind", sorted(CASES))
@pytest.mark.parametrize("fmt", ["json", "pmml"])
def test_cli_score_output_read_back_equals_the_fit(tmp_path, kind, fmt):
    """Reference: fit.mean (and linear_predictor, labels) on the same rows, to the last
    digit printed (the output holds the shortest text of each double: equality)."""
    path, table, fit = _fit(tmp_path, kind)
    model = tmp_path / f"m.{fmt}"
    if fmt == "json":
        lt.save(fit, model, reference_levels=table.reference_levels)
    else:
        lt.write_pmml(fit, model, reference_levels=table.reference_levels)
    _, target, leave_out, _ = CASES[kind]
    out = tmp_path / "scored.csv"
    others = [c for c in leave_out if c != "row"]
    proc = run("score", str(model), str(path), "--id", "row", "--out", str(out),
               *(["--exclude", ",".join(others)] if others else []))
    assert proc.returncode == 0, proc.stderr
    rows = _read_scored(out)
    head, body = rows[0], rows[1:]
    assert len(body) == table.X.shape[0] and head[0] == "row"
    assert [r[0] for r in body] == [f"{'g' if kind == 'least_squares' else 'a'}{i}" for i in range(len(body))]
    cells = np.array([[float(v) for v in r[1:len(r) - (kind != "least_squares")]] for r in body])
    eta, mean = fit.linear_predictor(table.X), fit.mean(table.X)
    if kind == "least_squares":
        assert head[1:] == ["linear_predictor", "mean"]
        assert np.array_equal(cells[:, 0], eta) and np.array_equal(cells[:, 1], mean)
        return
    assert head[-1] == "label" and [r[-1] for r in body] == [str(v) for v in fit.labels(table.X).tolist()]
    if kind == "logistic":
        assert head[1:3] == ["linear_predictor", f"probability:{fit.positive_class}"]
        got_eta, got_p = cells[:, 0], cells[:, 1]
    else:
        K = len(fit.classes)
        assert head[1:1 + 2 * K] == [f"linear_predictor:{c}" for c in fit.classes] + [
            f"probability:{c}" for c in fit.classes]
        got_eta, got_p = cells[:, :K], cells[:, K:]
    assert np.array_equal(got_eta, eta) and np.array_equal(got_p, mean)


# ------------------------------------------------------------------ hostile inputs, refused by name
def _logistic_model(tmp_path):
    path, table, fit = _fit(tmp_path, "logistic")
    model = tmp_path / "m.json"
    lt.save(fit, model, reference_levels=table.reference_levels)
    return path, model


def _rewrite(src, dst, edit):
    rows = _read_scored(src)
    rows = edit(rows)
    with open(dst, "w", newline="") as fh:
        csv.writer(fh).writerows(rows)
    return dst


def test_score_refuses_hostile_inputs_by_name(tmp_path):
    path, model = _logistic_model(tmp_path)
    out = tmp_path / "out.csv"
    base = ("score", str(model))

    def score(data, *more):
        return run(*base, str(data), "--out", str(out), "--id", "row", "--exclude", "PID", *more)

    missing = _rewrite(path, tmp_path / "missing.csv", lambda r: [row[:2] + row[3:] for row in r])  # no 'age'
    proc = score(missing)
    assert proc.returncode == 2 and "the model's input 'age' is not a column of" in proc.stderr

    extra = _rewrite(path, tmp_path / "extra.csv", lambda r: [row + (["note"] if i == 0 else ["x"])
                                                              for i, row in enumerate(r)])
    proc = score(extra)
    assert proc.returncode == 2 and "columns the model does not use: 'note'" in proc.stderr

    def unseen(rows):
        rows[5][rows[0].index("educ")] = "E9"
        return rows

    proc = score(_rewrite(path, tmp_path / "unseen.csv", unseen))
    assert proc.returncode == 2
    assert "line 6, column 'educ': 'E9' is not a level the model knows" in proc.stderr

    def repeated(rows):
        rows[7][0] = rows[3][0]
        return rows

    proc = score(_rewrite(path, tmp_path / "dup.csv", repeated))
    assert proc.returncode == 2
    assert "line 8: the --id column 'row' repeats 'a2' (first on line 4)" in proc.stderr

    def text_in_number(rows):
        rows[2][rows[0].index("age")] = "forty"
        return rows

    proc = score(_rewrite(path, tmp_path / "text.csv", text_in_number))
    assert proc.returncode == 2 and "line 3, column 'age': 'forty'" in proc.stderr

    proc = run(*base, str(path), "--out", str(path), "--id", "row", "--exclude", "PID")  # output over the input
    assert proc.returncode == 2 and "--out" in proc.stderr
    out.write_text("keep me\n")
    proc = score(path)  # an existing file without --replace
    assert proc.returncode == 2 and "--replace" in proc.stderr
    assert out.read_text() == "keep me\n"  # nothing lost
    assert score(path, "--replace").returncode == 0


def test_loaded_model_refuses_wrong_width_by_name(tmp_path):
    _, table, fit = _fit(tmp_path, "softmax")
    lt.save(fit, tmp_path / "m.json", reference_levels=table.reference_levels)
    lt.write_pmml(fit, tmp_path / "m.pmml", reference_levels=table.reference_levels)
    for m in (lt.load(tmp_path / "m.json"), lt.read_pmml(tmp_path / "m.pmml")):
        with pytest.raises(InputError, match="X"):
            m.mean(table.X[:, :-1])
