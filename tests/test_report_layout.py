"""Every record's text report has lintools' own layout (issue 20).

The layout is our own (common practice for a plain text report, no outside source): a title
line underlined with '=', the sections Data, Estimation, Fit, Tests and Coefficients, and a
closing Convergence line for the fit records; the intercept printed as a plain word that no
column carries; one p-value wording everywhere, below 1e-300 printed as 'below 1e-300'.
No line of any report may read like another program's summary: the phrases listed in
BORROWED are the ones issue 20 names.  Data: the demo's invented inspection records
(lintools.cli.demo_data) and, for the softmax record, statsmodels' shipped anes96 data.
"""

from __future__ import annotations

import math
import re

import numpy as np
import pytest
import statsmodels.api as sm

import lintools as lt
from lintools.cli.demo_data import inspection_data, recent_inspection_data
from lintools.support.text import intercept_label, p_text
from lintools.support.validate import INTERCEPT_NAME

#: lines of another program's summary layout that no lintools report may contain
BORROWED = {
    "residual std error": re.compile(r"residual std\.? error", re.I),
    "R-squared ... adjusted": re.compile(r"R-squared.*adjusted", re.I),
    "F ... on (a, b) df": re.compile(r"\bF\b.*\bon \(\s*\d+,\s*\d+\s*\) df"),
    "... on k df": re.compile(r"\bon \d+ df\b"),
    "(intercept)": re.compile(r"\(intercept\)"),
    "deviance ... null deviance on one line": re.compile(r"deviance.*null deviance", re.I),
    "<1e-300": re.compile(r"<\s*1e-300"),
}

FIT_SECTIONS = ("Data", "Estimation", "Fit", "Tests", "Coefficients")


def _borrowed(text):
    return [(name, line) for line in text.splitlines() for name, rx in BORROWED.items() if rx.search(line)]


def _demo():
    d = inspection_data(600)
    return d, recent_inspection_data(600)


def _fit_records():
    d, _ = _demo()
    a = sm.datasets.anes96.load_pandas().data
    Xa, ya = a[["logpopul", "selfLR"]].to_numpy(), a["PID"].to_numpy()
    return {
        "least squares": lt.least_squares(d.X, d.fill_deviation, names=d.names),
        "least squares HC3, no intercept": lt.least_squares(d.X, d.fill_deviation, names=d.names,
                                                            covariance="HC3", intercept=False),
        "least squares in blocks": lt.least_squares_blocks(lambda: iter([(d.X[:300], d.fill_deviation[:300]),
                                                                        (d.X[300:], d.fill_deviation[300:])]),
                                                         names=d.names),
        "logistic with profile intervals": lt.logistic(d.X, d.leak, names=d.names, profile=True),
        "logistic, Firth": lt.logistic(d.X, d.leak, names=d.names, firth=True),
        "logistic, l2": lt.logistic(d.X, d.leak, names=d.names, l2=1.0),
        "softmax": lt.softmax(Xa, ya),
        "softmax, symmetric": lt.softmax(Xa, ya, reference=None, l2=1.0),
    }


FIT_KINDS = ["least squares", "least squares HC3, no intercept", "least squares in blocks",
             "logistic with profile intervals", "logistic, Firth", "logistic, l2", "softmax", "softmax, symmetric"]


@pytest.fixture(scope="module")
def fit_records():
    return _fit_records()


@pytest.mark.parametrize("kind", FIT_KINDS)
def test_every_fit_report_has_our_sections_and_no_borrowed_line(kind, fit_records):
    """Invariant: each fit record's report starts with its title underlined by '=', has the
    five sections in order, each heading on its own line, ends with one Convergence line,
    prints the intercept as 'intercept' and contains no line of BORROWED."""
    fit = fit_records[kind]
    text = fit.report()
    lines = text.splitlines()
    assert lines[0].startswith("lintools ") and lines[1] == "=" * len(lines[0])
    where = [lines.index(h) for h in FIT_SECTIONS]
    assert where == sorted(where)
    assert [l for l in lines if l.startswith("Convergence: ")] == [lines[-1]]
    assert lines[-1] == f"Convergence: {fit.convergence.message}"
    assert _borrowed(text) == []
    rows = [l.split()[0] for l in lines if l.startswith("intercept ")]
    assert len(rows) == (len(fit.classes) - (fit.reference_class is not None) if kind.startswith("softmax")
                         else int(fit.with_intercept)) * (2 if "profile" in kind else 1)
    # the stored name is unchanged: tables and model files keep it
    assert fit.coefficient_table().terms[0].endswith(INTERCEPT_NAME) == fit.with_intercept


def test_every_figure_of_a_fit_stands_on_its_own_labelled_line(fit_records):
    """The least-squares Fit section holds one figure per line, labelled in full words, and
    each figure equals the record's field printed at its stated digits."""
    fit = fit_records["least squares"]
    text = fit.report()
    block = text.split("\nFit\n")[1].split("\n\n")[0].splitlines()
    got = {re.split(r"\s{2,}", l.strip())[0]: re.split(r"\s{2,}", l.strip())[1] for l in block}
    assert got == {
        "residual standard error": f"{fit.residual_standard_error:.7g}",
        "coefficient of determination": f"{fit.r_squared:.6f}",
        "the same, adjusted for parameters": f"{fit.adjusted_r_squared:.6f}",
        "log-likelihood": f"{fit.log_likelihood:.8g}",
        "Akaike information criterion": f"{fit.aic:.8g}",
        "Bayesian information criterion": f"{fit.bic:.8g}",
    }
    fdf = fit.f_degrees_of_freedom
    assert (f"F test, every slope zero  {fit.f_statistic:.6g} with {fdf[0]:g} and {fdf[1]:g} degrees of "
            f"freedom, p-value {p_text(fit.f_p_value)}") in text


def _metric_records():
    d, recent = _demo()
    fit = lt.logistic(d.X, d.leak, names=d.names)
    p = fit.mean(d.X)
    q = fit.mean(recent.X)
    return {
        "brier": lt.brier(d.leak, p),
        "reliability": lt.reliability(d.leak, p),
        "hosmer_lemeshow": lt.hosmer_lemeshow(d.leak, p),
        "calibration_line": lt.calibration_line(d.leak, p),
        "roc_auc": lt.roc_auc(d.leak, p),
        "roc_auc_difference": lt.roc_auc_difference(d.leak, p, d.X[:, 0]),
        "kolmogorov_smirnov": lt.kolmogorov_smirnov(d.leak, p),
        "gains": lt.gains(d.leak, p),
        "band_tests": lt.band_tests(d.leak, p, 5),
        "population_stability": lt.population_stability(p, q),
        "collinearity": lt.collinearity(d.X, names=d.names),
        "compare_coefficients": lt.compare_coefficients(fit, np.asarray(fit.coefficients) * 1.01, X=d.X),
    }


METRIC_KINDS = ["brier", "reliability", "hosmer_lemeshow", "calibration_line", "roc_auc", "roc_auc_difference",
                "kolmogorov_smirnov",
                "gains", "band_tests", "population_stability", "collinearity", "compare_coefficients"]


@pytest.fixture(scope="module")
def metric_records():
    return _metric_records()


@pytest.mark.parametrize("kind", METRIC_KINDS)
def test_no_metric_report_reads_like_another_programs_summary(kind, metric_records):
    """Invariant: no line of a metric or cross-check report matches BORROWED (p-values in
    the one wording of lintools.support.text.p_text)."""
    assert set(metric_records) == set(METRIC_KINDS)
    assert _borrowed(metric_records[kind].report()) == []


def test_collinearity_prints_the_intercept_as_a_word():
    d, _ = _demo()
    text = lt.collinearity(d.X, names=d.names).report()
    assert re.search(r"\bintercept\b", text.split("Condition indices")[1]) and "(intercept)" not in text


def test_p_value_wording():
    """common practice: four decimals, three significant digits below 1e-4; our own floor
    wording below 1e-300, '-' where not defined."""
    assert p_text(0.0038) == "0.0038" and p_text(1.0) == "1.0000"
    assert p_text(5.8e-05) == "5.80e-05" and p_text(1e-300) == "1.00e-300"
    assert p_text(9.9e-301) == "below 1e-300" and p_text(0.0) == "below 1e-300"
    assert p_text(math.nan) == "-"


def test_a_p_value_below_the_floor_reads_below_in_the_table():
    """Slopes of 1e3 and more against the demo's unit-scale noise give t statistics in the
    thousands; where the table's own p-value is below 1e-300 the row prints 'below 1e-300'."""
    d, _ = _demo()
    y = d.X @ np.arange(1.0, d.X.shape[1] + 1) * 1e3 + d.fill_deviation
    fit = lt.least_squares(d.X, y, names=d.names)
    table = fit.coefficient_table()
    small = np.flatnonzero(table.p_value < 1e-300)
    assert small.size
    text = fit.report()
    for i in small:
        row = next(l for l in text.splitlines() if l.split()[:1] == [d.names[i - 1]])
        assert "below 1e-300" in row


def test_a_column_called_intercept_keeps_apart_from_the_intercept():
    """A column named 'intercept' keeps its name; the intercept then prints as
    'intercept term' (a name no column carries), and the model file keeps the stored name."""
    d, _ = _demo()
    names = ("intercept",) + d.names[1:]
    fit = lt.least_squares(d.X, d.fill_deviation, names=names)
    assert intercept_label(names) == "intercept term"
    assert intercept_label(("intercept", "intercept term")) == "intercept term 2"
    text = fit.report()
    rows = text.split("\nCoefficients\n")[1].splitlines()[2:4]
    assert rows[0].startswith("intercept term ") and rows[1].startswith("intercept ")
    assert float(rows[0].split()[2]) == pytest.approx(fit.intercept, rel=1e-6)
    assert float(rows[1].split()[1]) == pytest.approx(fit.coefficients[0], rel=1e-6)
    assert fit.coefficient_table().terms[:2] == (INTERCEPT_NAME, "intercept")


def test_delivered_model_report_has_our_sections(tmp_path):
    d, _ = _demo()
    fit = lt.logistic(d.X, d.leak, names=d.names)
    path = tmp_path / "m.pmml"
    lt.write_pmml(fit, path)
    text = lt.read_pmml(path).report()
    lines = text.splitlines()
    assert lines[1] == "=" * len(lines[0]) and "Data" in lines and "Coefficients" in lines
    assert _borrowed(text) == [] and "\nintercept " in text
