"""``data_digits`` at the decimals written in a CSV file (read_table(..., written_decimals=True)).

Oracles: exact rational least squares (fractions.Fraction) and the logistic optimum by
Newton's method in mpmath at 50 digits (tests/_accuracy_oracle.py), refitted on copies of
the data whose every cell is moved uniformly within half a unit of its last written
decimal (Monte Carlo, here); the digits of the worst coefficient are counted as
lintools.models.accuracy documents (column-scaled), written out in the oracle module.
The claim checked is the one of issue 21: the stated figure matches the measured change
within 1.5 digits.
"""

from __future__ import annotations

import json
import subprocess
import sys
from fractions import Fraction

import numpy as np
import pytest

from _accuracy_oracle import digits, exact_ls, fractions, glm_optimum, scale_vector
from lintools import InputError, Precision, least_squares, logistic, read_table, softmax

DECIMALS = (2, 1)  # of the two feature columns; the response of least squares gets 1


def _write(path, X, y, y_format):
    with open(path, "w") as fh:
        fh.write("a,b,y\n")
        for (a, b), v in zip(X.tolist(), y.tolist()):
            fh.write(f"{a:.{DECIMALS[0]}f},{b:.{DECIMALS[1]}f},{y_format(v)}\n")


def _jitter(rng, column, decimals):
    """Every cell moved uniformly within half a unit of its last written decimal (exact rationals)."""
    h = Fraction(1, 2 * 10**decimals)
    return [x + h * Fraction(float(rng.uniform(-1, 1))) for x in fractions(column)]


def test_least_squares_data_digits_match_the_change_of_the_exact_optimum_at_the_written_decimals(tmp_path):
    # oracle: exact rational least squares on Monte Carlo copies of the written data
    rng = np.random.default_rng(21)
    n = 40
    X = rng.normal(size=(n, 2)) * [1.0, 3.0]
    X[:, 1] += 0.8 * X[:, 0]
    y = 1.5 + X @ [2.0, -0.7] + 0.2 * rng.normal(size=n)
    path = tmp_path / "d.csv"
    _write(path, X, y, lambda v: f"{v:.1f}")
    t = read_table(path, target="y", written_decimals=True)
    assert t.written_decimals == {"a": 2, "b": 1, "y": 1}
    yv = np.array(t.target, dtype=float)
    fit = least_squares(t.X, yv, names=t.names, data_precision=t.data_precision(target="y"))
    plain = least_squares(t.X, yv, names=t.names)
    assert "the decimals written in d.csv" in fit.accuracy.sentence
    w = np.ones(n)
    exact = exact_ls([fractions(t.X[:, j]) for j in range(2)], fractions(yv), fractions(w), True)
    changes = []
    for _ in range(30):
        moved = exact_ls([_jitter(rng, t.X[:, j], DECIMALS[j]) for j in range(2)], _jitter(rng, yv, 1),
                         fractions(w), True)
        changes.append([float(a - b) for a, b in zip(moved, exact)])
    rms = np.sqrt(np.mean(np.square(changes), axis=0))
    sv = scale_vector(t.X, w, True)
    measured = digits(rms * sv, np.array([float(e) for e in exact]) * sv)
    assert abs(fit.accuracy.data_digits - measured) <= 1.5, (fit.accuracy.data_digits, measured)
    assert fit.accuracy.data_digits < plain.accuracy.data_digits - 8  # far fewer than at float64
    # per term too: the stated expected change against the measured one
    assert np.all(np.abs(np.log10(fit.accuracy.data_error / rms)) <= 1.5), (fit.accuracy.data_error, rms)


def test_logistic_data_digits_match_the_change_of_the_mpmath_optimum_at_the_written_decimals(tmp_path):
    # oracle: the logistic optimum by Newton in mpmath at 50 digits on Monte Carlo copies
    rng = np.random.default_rng(7)
    n = 60
    X = rng.normal(size=(n, 2)) * [1.0, 2.0]
    eta = 0.3 + X @ [1.2, -0.6]
    y = (rng.uniform(size=n) < 1 / (1 + np.exp(-eta))).astype(int)
    path = tmp_path / "g.csv"
    _write(path, X, y, str)
    t = read_table(path, target="y", written_decimals=True)
    assert t.written_decimals == {"a": 2, "b": 1, "y": 0}
    labels = np.array(t.target)
    fit = logistic(t.X, labels, names=t.names, data_precision=t.data_precision())
    w = np.ones(n)
    exact = glm_optimum(t.X, labels.tolist(), 1, w, True)
    changes = []
    for _ in range(8):
        h = 0.5 * 10.0 ** -np.array(DECIMALS)
        moved = glm_optimum(t.X + h * rng.uniform(-1, 1, size=t.X.shape), labels.tolist(), 1, w, True)
        changes.append([float(a - b) for a, b in zip(moved, exact)])
    rms = np.sqrt(np.mean(np.square(changes), axis=0))
    sv = scale_vector(t.X, w, True)
    measured = digits(rms * sv, np.array([float(e) for e in exact]) * sv)
    assert abs(fit.accuracy.data_digits - measured) <= 1.5, (fit.accuracy.data_digits, measured)
    assert fit.accuracy.data_digits < 5


def test_softmax_data_digits_match_the_change_of_the_mpmath_optimum_at_the_written_decimals(tmp_path):
    # oracle: the softmax optimum (reference class first) by Newton in mpmath at 50 digits on
    # Monte Carlo copies of the written data, every cell moved within half a unit of its decimal
    rng = np.random.default_rng(11)
    n = 90
    X = rng.normal(size=(n, 2)) * [1.0, 2.0]
    eta = np.column_stack([np.zeros(n), 0.2 + X @ [1.0, -0.5], -0.3 + X @ [-0.7, 0.4]])
    P = np.exp(eta - eta.max(axis=1, keepdims=True))
    P /= P.sum(axis=1, keepdims=True)
    y = np.array([rng.choice(3, p=row) for row in P])
    path = tmp_path / "s.csv"
    _write(path, X, y, str)
    t = read_table(path, target="y", categorical=["y"], written_decimals=True)
    labels = np.array(t.target)
    fit = softmax(t.X, labels, names=t.names, data_precision=t.data_precision())
    at_float64 = softmax(t.X, labels, names=t.names)
    codes = np.searchsorted(np.array(fit.classes), labels).tolist()
    w = np.ones(n)
    exact = glm_optimum(t.X, codes, 2, w, True)
    changes = []
    for _ in range(6):
        h = 0.5 * 10.0 ** -np.array(DECIMALS)
        moved = glm_optimum(t.X + h * rng.uniform(-1, 1, size=t.X.shape), codes, 2, w, True)
        changes.append([float(a - b) for a, b in zip(moved, exact)])
    rms = np.sqrt(np.mean(np.square(changes), axis=0))
    sv = scale_vector(t.X, w, True, 2)
    measured = digits(rms * sv, np.array([float(e) for e in exact]) * sv)
    assert abs(fit.accuracy.data_digits - measured) <= 1.5, (fit.accuracy.data_digits, measured)
    assert fit.accuracy.data_digits < at_float64.accuracy.data_digits - 8
    assert "one decimal" not in fit.accuracy.precision and fit.accuracy.precision


def test_command_line_fit_states_the_written_decimals_and_matches_the_python_path(tmp_path):
    # the Python path above is the reference of the command line (same library, same file)
    rng = np.random.default_rng(3)
    X = rng.normal(size=(80, 2))
    y = 1.0 + X @ [2.0, -1.0] + 0.3 * rng.normal(size=80)
    path = tmp_path / "d.csv"
    _write(path, X, y, lambda v: f"{v:.2f}")
    out = subprocess.run([sys.executable, "-m", "lintools", "fit", str(path), "--target", "y", "--json"],
                         capture_output=True, text=True, check=True)
    acc = json.loads(out.stdout)["fit"]["accuracy"]
    t = read_table(path, target="y", written_decimals=True)
    yv = np.array(t.target, dtype=float)
    fit = least_squares(t.X, yv, names=t.names, data_precision=t.data_precision(target="y"))
    at_float64 = least_squares(t.X, yv, names=t.names)
    assert acc["data_digits"] == fit.accuracy.data_digits
    assert "the decimals written in d.csv" in acc["precision"]
    assert acc["data_digits"] < at_float64.accuracy.data_digits - 8
    text = subprocess.run([sys.executable, "-m", "lintools", "fit", str(path), "--target", "y"],
                          capture_output=True, text=True, check=True).stdout
    assert f"about {fit.accuracy.data_digits:.1f} digits at their precision, the decimals written in d.csv" in text


def test_data_precision_is_checked():
    X = np.arange(12.0).reshape(6, 2) ** [1, 2]
    y = np.array([0, 1, 0, 1, 1, 0])
    with pytest.raises(InputError, match="data_precision.x_relative has shape .* X has 2 columns"):
        least_squares(X, y, data_precision=Precision.written([1]))
    with pytest.raises(InputError, match="data_precision must be a Precision"):
        logistic(X, y, data_precision={"a": 1})
    with pytest.raises(InputError, match=r"x_decimals\[1\] must be a whole number"):
        Precision.written([1, 1.5])


def test_check_reports_differences_below_the_written_resolution_as_within_what_the_data_determine(tmp_path):
    # the resolution is the refit's own record (checked against the Monte Carlo oracles above);
    # here: check passes the file's decimals to the refit and judges by them
    import dataclasses

    import lintools as lt

    rng = np.random.default_rng(5)
    X = rng.normal(size=(200, 2)) * [1.0, 2.0]
    y = 0.5 + X @ [1.5, -0.8] + 0.05 * rng.normal(size=200)
    path = tmp_path / "d.csv"
    _write(path, X, y, lambda v: f"{v:.1f}")
    t = read_table(path, target="y", written_decimals=True)
    yv = np.array(t.target, dtype=float)
    fit = least_squares(t.X, yv, names=t.names, data_precision=t.data_precision(target="y"))
    at_float64 = least_squares(t.X, yv, names=t.names).accuracy
    resolution = 3 * fit.accuracy.data_error + fit.accuracy.solver_error
    move = 0.4 * resolution  # intercept first
    assert np.all(move > 3 * at_float64.data_error + at_float64.solver_error)  # not within at float64's rounding
    model = tmp_path / "m.json"
    lt.save(dataclasses.replace(fit, intercept=fit.intercept + move[0], coefficients=fit.coefficients + move[1:],
                                target="y"), model)
    proc = subprocess.run([sys.executable, "-m", "lintools", "check", str(model), str(path), "--json"],
                          capture_output=True, text=True)
    doc = json.loads(proc.stdout)
    assert "the decimals written in d.csv" in doc["comparison"]["data_precision"]
    assert np.all(np.abs(doc["comparison"]["difference"]) <= doc["comparison"]["data_resolution"])
    assert doc["refit"]["accuracy"]["data_digits"] == fit.accuracy.data_digits
    text = subprocess.run([sys.executable, "-m", "lintools", "check", str(model), str(path)],
                          capture_output=True, text=True).stdout
    assert "Every difference is within what the data determine" in text
    assert "Verdict: AGREE" in text, text
    # the sign-off document: the refit's accuracy record and the marks, each tied to its twin's value
    page, twin = tmp_path / "r.html", tmp_path / "r.json"
    proc = subprocess.run([sys.executable, "-m", "lintools", "report", str(model), str(path), "--out", str(page),
                           "--quiet"], capture_output=True, text=True)
    assert proc.returncode == 0, proc.stderr
    doc, body = json.loads(twin.read_text()), page.read_text()
    acc = doc["refit"]["accuracy"]
    assert acc["data_digits"] == fit.accuracy.data_digits and acc["solver_digits"] == fit.accuracy.solver_digits
    assert doc["comparison_within_data"] == [True, True, True]
    assert f'data-k="/refit/accuracy/data_digits">{acc["data_digits"]:.2f}<' in body
    assert f'data-k="/refit/accuracy/solver_digits">{acc["solver_digits"]:.2f}<' in body
    assert f'data-k="/refit/accuracy/data_worst">{acc["data_worst"]}<' in body
    assert f'data-k="/refit/accuracy/sentence">{acc["sentence"]}<' in body
    assert all(f'data-k="/comparison_within_data/{i}">yes<' in body for i in range(3))
