"""Reliability battery, part 2: inputs are never modified (issue #9).

Every public function is called with its array arguments in six forms -- a C-ordered
NumPy array, a read-only array, a Fortran-ordered array, a non-contiguous (strided) view,
nested lists, and pandas Series/DataFrame -- and each argument is compared, after the
call, with a deep snapshot taken before it: values bit for bit, dtype, shape, strides and
the writeable flag.  Results must not share memory with the caller's arrays either
(the README: results are frozen records holding read-only NumPy arrays, never views).

Source of the expectations: common practice and the house rule "Inputs are never
modified" (the README).  Data are drawn from a seeded generator.

Extending the table: add ``Call("id", function, {"name": array, ...}, {other kwargs})``
to ``CALLS``; array arguments are converted to every form, other arguments passed as is.
"""

from __future__ import annotations

import copy
import dataclasses
import warnings
from pathlib import Path
from typing import Any, Callable, NamedTuple

import numpy as np
import pandas as pd
import pytest

import lintools as lt
from lintools.exchange.pmml import read_pmml, write_pmml
from lintools.exchange.csv_table import read_table

RNG = np.random.default_rng(9)
N = 40
X = RNG.normal(size=(N, 3))
YB = (X[:, 0] - X[:, 1] + RNG.logistic(size=N) > 0).astype(np.int64)
YL = X @ np.array([1.0, -2.0, 0.5]) + RNG.normal(size=N)
W = RNG.uniform(0.5, 2.0, size=N)
P = np.clip(1.0 / (1.0 + np.exp(-(X[:, 0] - X[:, 1]))), 0.03, 0.97)
S2 = X[:, 2] + RNG.normal(size=N)
Y3 = np.arange(N) % 3
Z3 = RNG.normal(size=(N, 3)) + 1.5 * np.eye(3)[Y3]
P3 = np.exp(Z3) / np.exp(Z3).sum(axis=1, keepdims=True)
OFF = RNG.normal(scale=0.1, size=N)
GROUPS = np.arange(N) // 4
IND = (RNG.random(size=(N, 3)) < 0.4).astype(np.int64)
FOLDS = np.arange(N) % 4

with warnings.catch_warnings():
    warnings.simplefilter("ignore")
    LIN = lt.least_squares(X, YL)
    LOGI = lt.logistic(X, YB)
    PLATT = lt.platt_scaling(YB, S2)
    TEMP = lt.temperature_scaling(Y3, Z3)
    ISO = lt.isotonic_calibration(YB, P)
    SOFT = lt.softmax(X, Y3)
OFF3 = RNG.normal(scale=0.1, size=(N, 3))


def _two_blocks(X, y, weights):
    """A block source over the caller's objects (sliced, never copied by the test)."""
    return lambda: iter([(X[:25], y[:25], weights[:25]), (X[25:], y[25:], weights[25:])])


class Call(NamedTuple):
    id: str
    function: Callable[..., Any]
    arrays: dict[str, np.ndarray]
    other: dict[str, Any] = {}


CALLS = [
    Call("least_squares", lt.least_squares, {"X": X, "y": YL, "weights": W}),
    Call("logistic", lt.logistic, {"X": X, "y": YB, "weights": W, "offset": OFF}),
    Call("check_separation", lt.check_separation, {"X": X, "y": YB, "weights": W}),
    Call("softmax", lt.softmax, {"X": X, "y": Y3, "weights": W, "offset": OFF3}),
    Call("softmax-symmetric", lt.softmax, {"X": X, "y": Y3}, {"l2": 1.0, "reference": None}),
    Call("SoftmaxFit.mean", SOFT.mean, {"X": X, "offset": OFF3}),
    Call("SoftmaxFit.labels", SOFT.labels, {"X": X}),
    Call("least_squares_blocks", lambda X, y, weights: lt.least_squares_blocks(_two_blocks(X, y, weights)),
         {"X": X, "y": YL, "weights": W}),
    Call("logistic_blocks", lambda X, y, weights: lt.logistic_blocks(_two_blocks(X, y, weights)),
         {"X": X, "y": YB, "weights": W}),
    Call("softmax_blocks", lambda X, y, weights: lt.softmax_blocks(_two_blocks(X, y, weights)),
         {"X": X, "y": Y3, "weights": W}),
    Call("LinearFit.mean", LIN.mean, {"X": X}),
    Call("LinearFit.linear_predictor", LIN.linear_predictor, {"X": X}),
    Call("LogisticFit.mean", LOGI.mean, {"X": X, "offset": OFF}),
    Call("LogisticFit.labels", LOGI.labels, {"X": X}),
    Call("brier", lt.brier, {"y": YB, "p": P, "weights": W}),
    Call("brier-matrix", lt.brier, {"y": Y3, "p": P3}),
    Call("cross_entropy", lt.cross_entropy, {"y": YB, "p": P, "weights": W}),
    Call("reliability", lt.reliability, {"y": YB, "p": P, "weights": W}, {"strategy": "count"}),
    Call("calibration_error", lt.calibration_error, {"y": YB, "p": P, "weights": W}),
    Call("calibration_error-matrix", lt.calibration_error, {"y": Y3, "p": P3}, {"multiclass": "class-wise"}),
    Call("hosmer_lemeshow", lt.hosmer_lemeshow, {"y": YB, "p": P, "weights": W}),
    Call("calibration_line", lt.calibration_line, {"y": YB, "p": P, "weights": W}),
    Call("spiegelhalter", lt.spiegelhalter, {"y": YB, "p": P, "weights": W}),
    Call("roc_auc", lt.roc_auc, {"y": YB, "score": S2, "weights": W}),
    Call("roc_auc_difference", lt.roc_auc_difference, {"y": YB, "score_a": S2, "score_b": P, "weights": W}),
    Call("kolmogorov_smirnov", lt.kolmogorov_smirnov, {"y": YB, "p": S2, "weights": W}),
    Call("gains", lt.gains, {"y": YB, "p": S2, "weights": W}, {"bands": 4}),
    Call("band_tests", lt.band_tests, {"y": YB, "p": P, "bands": np.arange(N) % 3, "weights": W}),
    Call("population_stability", lt.population_stability, {"expected": S2, "actual": P, "weights": W}, {"bins": 4}),
    Call("collinearity", lt.collinearity, {"X": X, "weights": W}),
    Call("platt_scaling", lt.platt_scaling, {"y": YB, "scores": S2, "weights": W}),
    Call("PlattMap.apply", PLATT.apply, {"scores": S2}),
    Call("temperature_scaling", lt.temperature_scaling, {"y": Y3, "logits": Z3, "weights": W}),
    Call("temperature_scaling-binary", lt.temperature_scaling, {"y": YB, "logits": 2.0 * (X[:, 0] - X[:, 1])}),
    Call("TemperatureMap.apply", TEMP.apply, {"logits": Z3}),
    Call("isotonic_calibration", lt.isotonic_calibration, {"y": YB, "p": P, "weights": W}),
    Call("IsotonicMap.apply", ISO.apply, {"p": P}),
    Call("stratified_holdout", lt.stratified_holdout, {"y": YB, "groups": GROUPS}),
    Call("stratified_folds", lt.stratified_folds, {"y": Y3}, {"k": 4}),
    Call("stratified_folds-groups", lt.stratified_folds, {"y": YB, "groups": GROUPS}, {"k": 3}),
    Call("stratified_folds-label-matrix", lt.stratified_folds, {"y": IND}, {"k": 3}),
    Call("stratified_folds-continuous", lt.stratified_folds, {"y": YL}, {"continuous_bins": 4}),
    Call("repeated_stratified_folds", lt.repeated_stratified_folds, {"y": YB}, {"repeats": 3}),
    Call("stratified_bootstrap", lt.stratified_bootstrap, {"y": Y3}),
    Call("split_balance", lt.split_balance, {"y": Y3, "parts": FOLDS}),
    Call("compare_coefficients", lambda **a: lt.compare_coefficients(LOGI, **a),
         {"coefficients": LOGI.coefficients + 0.01, "X": X, "y": YB, "weights": W}),
    Call("compare_coefficients-linear", lambda **a: lt.compare_coefficients(LIN, **a),
         {"coefficients": LIN.coefficients + 0.01, "X": X, "y": YL}),
    Call("implied_l2", lt.implied_l2, {"X": X, "y": YB, "coefficients": LOGI.coefficients, "weights": W},
         {"intercept": float(LOGI.intercept)}),
    Call("implied_l2-least-squares", lt.implied_l2, {"X": X, "y": YL, "coefficients": LIN.coefficients},
         {"model": "least_squares"}),
]

FORMS = ("ndarray", "readonly", "fortran", "strided", "list", "pandas")


def _strided(a: np.ndarray) -> np.ndarray:
    """A non-contiguous view holding the values of ``a`` (every other element/column)."""
    if a.ndim == 1:
        big = np.zeros(2 * a.shape[0], dtype=a.dtype)
        big[::2] = a
        return big[::2]
    big = np.zeros((a.shape[0], 2 * a.shape[1]), dtype=a.dtype)
    big[:, ::2] = a
    return big[:, ::2]


def convert(a: np.ndarray, form: str) -> Any:
    if form == "ndarray":
        return np.array(a)
    if form == "readonly":
        out = np.array(a)
        out.flags.writeable = False
        return out
    if form == "fortran":
        return np.asfortranarray(a)
    if form == "strided":
        out = _strided(a)
        assert not out.flags.c_contiguous
        return out
    if form == "list":
        return a.tolist()
    if a.ndim == 1:
        return pd.Series(a.copy(), name="v")
    return pd.DataFrame(a.copy(), columns=[f"c{j}" for j in range(a.shape[1])])


def snapshot(obj: Any) -> Any:
    """Everything about ``obj`` that a call could change."""
    if isinstance(obj, np.ndarray):
        return ("ndarray", obj.dtype.str, obj.shape, obj.strides, bool(obj.flags.writeable),
                bool(obj.flags.f_contiguous), obj.tobytes(order="A"))
    if isinstance(obj, pd.DataFrame):
        return ("frame", tuple(obj.columns), tuple(map(str, obj.dtypes)), tuple(obj.index),
                obj.to_numpy(copy=True).tobytes())
    if isinstance(obj, pd.Series):
        return ("series", obj.name, str(obj.dtype), tuple(obj.index), obj.to_numpy(copy=True).tobytes())
    if dataclasses.is_dataclass(obj) and not isinstance(obj, type):
        return {f.name: snapshot(getattr(obj, f.name)) for f in dataclasses.fields(obj)}
    if isinstance(obj, (list, tuple)):
        return (type(obj).__name__, [snapshot(v) for v in obj])
    return copy.deepcopy(obj)


def result_arrays(obj: Any, depth: int = 0) -> list[np.ndarray]:
    if depth > 3:
        return []
    if isinstance(obj, np.ndarray):
        return [obj]
    if dataclasses.is_dataclass(obj) and not isinstance(obj, type):
        return [a for f in dataclasses.fields(obj) for a in result_arrays(getattr(obj, f.name), depth + 1)]
    if isinstance(obj, (tuple, list)):
        return [a for v in obj for a in result_arrays(v, depth + 1)]
    return []


def input_arrays(obj: Any) -> list[np.ndarray]:
    if isinstance(obj, np.ndarray):
        return [obj.base if obj.base is not None else obj]
    if isinstance(obj, (pd.DataFrame, pd.Series)):
        return [obj.to_numpy()]
    return []


@pytest.mark.parametrize("form", FORMS)
@pytest.mark.parametrize("call", CALLS, ids=[c.id for c in CALLS])
def test_inputs_are_never_modified(call: Call, form: str) -> None:
    # source: common practice (the README: "Inputs are never modified")
    args = {k: convert(v, form) for k, v in call.arrays.items()}
    before = {k: snapshot(v) for k, v in args.items()}
    other_before = snapshot(call.other)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        result = call.function(**args, **call.other)
    for k, v in args.items():
        assert snapshot(v) == before[k], f"{call.id} modified argument {k} given as {form}"
    assert snapshot(call.other) == other_before
    for out in result_arrays(result):
        for given in (a for v in args.values() for a in input_arrays(v)):
            assert not np.shares_memory(out, given), f"{call.id} returned a view of its input"


def test_fit_records_are_not_modified_by_the_functions_that_read_them(tmp_path: Path) -> None:
    # source: common practice -- a fit passed to save, write_pmml, compare_coefficients
    # and the evaluation methods comes back as it went in
    for fit in (LIN, LOGI):
        before = snapshot(fit)
        lt.save(fit, tmp_path / "m.json", replace=True)
        write_pmml(fit, tmp_path / "m.xml", replace=True)
        lt.compare_coefficients(fit, np.asarray(fit.coefficients) * 1.01, X=X)
        fit.mean(X), fit.linear_predictor(X), fit.report(), fit.to_dict()
        assert snapshot(fit) == before
        lt.load(tmp_path / "m.json")
        read_pmml(tmp_path / "m.xml")


def test_files_are_not_modified_by_the_readers(tmp_path: Path) -> None:
    # source: common practice -- readers only read
    csv_path = tmp_path / "d.csv"
    csv_path.write_text("a,b,y\n1,u,0\n2,v,1\n3,u,1\n4,v,0\n", encoding="utf-8")
    lt.save(LIN, tmp_path / "m.json")
    write_pmml(LOGI, tmp_path / "m.xml")
    paths = [csv_path, tmp_path / "m.json", tmp_path / "m.xml"]
    before = {p: (p.read_bytes(), p.stat().st_mtime_ns) for p in paths}
    read_table(csv_path, target="y")
    lt.load(tmp_path / "m.json")
    read_pmml(tmp_path / "m.xml")
    assert {p: (p.read_bytes(), p.stat().st_mtime_ns) for p in paths} == before


def test_the_table_covers_every_public_function() -> None:
    # source: common practice -- keep the table in step with the public API
    public = {n for n in lt.__all__ if callable(getattr(lt, n)) and not isinstance(getattr(lt, n), type)}
    covered = {c.id.split("-")[0] for c in CALLS} | {"save", "load", "read_table", "read_pmml", "write_pmml"}
    assert public - covered == set()
