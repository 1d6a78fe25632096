"""Reliability battery, part 4: hostile values never let out a foreign exception (issue #16).

Every public function of ``lintools.__all__`` (and every public method of the records
they return) is called with a generated set of hostile values, one argument at a time,
the others at a valid baseline.  A call may return, or raise an exception of the
``lintools.LintoolsError`` family; it may warn only with ``lintools.LintoolsWarning``.
Anything else fails: a ``KeyError``, ``TypeError``, ``ZeroDivisionError``,
``OverflowError``, numpy's ``LinAlgError``, a SciPy error, a ``RuntimeWarning`` from
NumPy leaking out of the library, a pandas or NumPy ``DeprecationWarning``, or a call
that hangs (more than ``HANG_SECONDS``).  A call that returns a record is followed by
calls of the record's argument-free methods (``report``, ``to_dict``, ``describe``...),
so a record built from hostile input must also render.

The hostile values (source: common practice for adversarial input testing, and the cases
listed in issue #16): None, text, bytes, dicts, sets, generators, ``object()``, bools,
0-d arrays, empty arrays, ragged lists, object arrays, complex numbers, NaN and
infinities, huge and tiny magnitudes (1e308, -1e308, 5e-324, 1e-320), negative, zero and
huge sizes and seeds, bad option names (None, "", "NEWTON"), datetime64 and timedelta64
arrays, masked arrays, pandas objects with odd dtypes (categorical, nullable with NA,
datetime columns, duplicate column labels), wrong shapes, mismatched lengths, and for the
file functions paths that are directories, missing, bytes, or contain a NUL byte (the
file contents are the subject of ``tests/test_reliability_files.py``).

The list of functions is built from ``lintools.__all__``: a new public function or record
method without an entry here fails ``test_every_public_callable_is_covered``.

The battery makes about 31,000 hostile calls (``pytest -s`` prints the count) in about
25 s of CPU time.  A failure names the argument, the value, the exception or warning and
the innermost lintools line it came from (``[at file.py:line]``), so it can be routed.

Every hostile call passes: the defects this battery once carried as known failures (its
``KNOWN`` list) are fixed, and the mechanism went with the last of them; a new failure is
a defect to fix, not to list.

The regression tests at the end check the named refusals that replaced the foreign
exceptions of issue #16 and the defects the battery found, each failing on the code
before the fix.
"""

from __future__ import annotations

import datetime
import decimal
import fractions
import inspect
import io
import math
import re
import signal
import warnings
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, Callable

import dask.array as da
import numpy as np
import pandas as pd
import pytest
import scipy.sparse

import lintools as lt

HANG_SECONDS = 3.0

# ------------------------------------------------------------------------------ data
RNG = np.random.default_rng(16016)
N = 24
X = RNG.normal(size=(N, 2))
YL = X @ np.array([1.0, -2.0]) + 0.5 + RNG.normal(size=N)
YB = np.tile([0, 1], N // 2)
Y3 = np.arange(N) % 3
P = np.clip(1.0 / (1.0 + np.exp(-(X[:, 0] + 0.3 * RNG.normal(size=N)))), 0.03, 0.97)
S = 2.0 * X[:, 0] + RNG.normal(size=N)
S2 = X[:, 1] + RNG.normal(size=N)
Z3 = RNG.normal(size=(N, 3)) + 1.5 * np.eye(3)[Y3]
P3 = np.exp(Z3) / np.exp(Z3).sum(axis=1, keepdims=True)
W = RNG.uniform(0.5, 2.0, size=N)
TRIALS = np.full(N, 4.0)
SUCC = (np.arange(N) % 5).astype(float).clip(0, 4)
GROUPS = np.arange(N) // 2
FOLDS = np.arange(N) % 4
XSEP = np.column_stack([np.where(YB == 1, 1.0, -1.0) + 0.1 * RNG.normal(size=N), RNG.normal(size=N)])

with warnings.catch_warnings():
    warnings.simplefilter("ignore")
    LIN = lt.least_squares(X, YL, weights=W)
    LOGI = lt.logistic(X, YB, weights=W)
    SOFT = lt.softmax(X, Y3, weights=W)
    PLATT = lt.platt_scaling(YB, S)
    TEMP2 = lt.temperature_scaling(YB, S)
    TEMP3 = lt.temperature_scaling(Y3, Z3)
    ISO = lt.isotonic_calibration(YB, P)
    SEP = lt.check_separation(XSEP, YB)
    SEP3 = lt.check_separation(np.column_stack([Y3 + 0.1 * RNG.normal(size=N), RNG.normal(size=N)]) * [1, 0.01], Y3)
assert SEP.separated and SEP3.separated


def gen(values: Any) -> Any:
    return (v for v in values)


# ------------------------------------------------------------------- hostile values
#: (id, factory): a fresh value per call, so generators and mutable values are never reused
GENERIC: list[tuple[str, Callable[[], Any]]] = [
    ("None", lambda: None),
    ("str", lambda: "abc"),
    ("empty-str", lambda: ""),
    ("NEWTON", lambda: "NEWTON"),
    ("bytes", lambda: b"x"),
    ("dict", lambda: {"a": 1.0}),
    ("empty-dict", lambda: {}),
    ("set", lambda: {1.0, 2.0}),
    ("generator", lambda: gen([1.0, 2.0, 3.0])),
    ("object", lambda: object()),
    ("function", lambda: (lambda: 1)),
    ("True", lambda: True),
    ("False", lambda: False),
    ("np.bool", lambda: np.bool_(True)),
    ("zero", lambda: 0),
    ("minus-one", lambda: -1),
    ("int64-minus-seven", lambda: np.int64(-7)),
    ("2**63", lambda: 2**63),
    ("-2**63", lambda: -(2**63)),
    ("2**100", lambda: 2**100),
    ("half", lambda: 0.5),
    ("-0.0", lambda: -0.0),
    ("1e308", lambda: 1e308),
    ("-1e308", lambda: -1e308),
    ("5e-324", lambda: 5e-324),
    ("1e-320", lambda: 1e-320),
    ("nan", lambda: math.nan),
    ("inf", lambda: math.inf),
    ("-inf", lambda: -math.inf),
    ("float32-nan", lambda: np.float32("nan")),
    ("longdouble-huge", lambda: np.longdouble("1e4000")),
    ("complex", lambda: 1.0 + 2.0j),
    ("Decimal-nan", lambda: decimal.Decimal("NaN")),
    ("Fraction", lambda: fractions.Fraction(1, 3)),
    ("pd.NA", lambda: pd.NA),
    ("pd.NaT", lambda: pd.NaT),
    ("datetime", lambda: datetime.datetime(2024, 1, 1)),
    ("0d-array", lambda: np.array(0.5)),
    ("0d-nan", lambda: np.array(np.nan)),
    ("0d-object", lambda: np.array(None, dtype=object)),
    ("empty-array", lambda: np.array([])),
    ("empty-2d", lambda: np.empty((0, 2))),
    ("empty-columns", lambda: np.empty((N, 0))),
    ("empty-list", lambda: []),
    ("ragged", lambda: [[1.0, 2.0], [3.0]]),
    ("object-array", lambda: np.array([1.0, "a", None], dtype=object)),
    ("list-of-str", lambda: ["a"] * N),
    ("list-of-None", lambda: [None] * N),
    ("list-of-lists-of-str", lambda: [["a", "b"]] * N),
    ("structured", lambda: np.zeros(N, dtype=[("a", float), ("b", float)])),
    ("datetime64", lambda: np.arange(N).astype("datetime64[D]")),
    ("timedelta64", lambda: np.arange(N).astype("timedelta64[s]")),
    ("datetime64-2d", lambda: np.arange(2 * N).reshape(N, 2).astype("datetime64[s]")),
    ("masked", lambda: np.ma.masked_array(np.arange(N, dtype=float), mask=np.arange(N) == 3)),
    ("sparse", lambda: scipy.sparse.csr_matrix(np.eye(N, 2))),
    ("series-category", lambda: pd.Series(list("ab") * (N // 2), dtype="category")),
    ("series-datetime", lambda: pd.Series(pd.date_range("2024-01-01", periods=N))),
    ("df-datetime", lambda: pd.DataFrame({"t": pd.date_range("2024-01-01", periods=N)})),
    ("range", lambda: range(N)),
    ("nested-3d", lambda: np.zeros((2, 2, 2))),
    ("huge-array", lambda: np.full(N, 1e308)),
    ("tiny-array", lambda: np.full(N, 5e-324)),
    ("nan-array", lambda: np.full(N, np.nan)),
]


def _with(v: np.ndarray, value: Any, dtype: Any = float) -> np.ndarray:
    out = np.array(v, dtype=dtype, copy=True)
    out.flat[min(3, out.size - 1)] = value
    return out


def derived(v: Any) -> list[tuple[str, Callable[[], Any]]]:
    """Hostile variants of a valid array ``v``: shapes, magnitudes, dtypes, containers."""
    v = np.asarray(v)
    f = np.asarray(v, dtype=float) if v.dtype.kind in "biuf" else None
    out: list[tuple[str, Callable[[], Any]]] = [
        ("short", lambda: v[:-1]),
        ("long", lambda: np.concatenate([v, v[:1]])),
        ("one-row", lambda: v[:1]),
        ("3d", lambda: v[..., None, None]),
        ("row-matrix", lambda: v.reshape(1, -1)),
        ("list", lambda: v.tolist()),
        ("generator-of-rows", lambda: gen(v)),
        ("object-dtype", lambda: v.astype(object)),
        ("object-None", lambda: _with(v, None, object)),
        ("str-dtype", lambda: v.astype(str)),
        ("bytes-dtype", lambda: v.astype(bytes)),
        ("complex-dtype", lambda: v.astype(complex)),
        ("masked-one", lambda: np.ma.masked_array(v, mask=np.arange(v.size).reshape(v.shape) == 3)),
        ("masked-none", lambda: np.ma.masked_array(v)),
        ("datetime-dtype", lambda: np.zeros(v.shape, dtype="datetime64[ns]") + np.arange(v.size).reshape(v.shape)),
        ("timedelta-dtype", lambda: np.zeros(v.shape, dtype="timedelta64[ns]") + np.arange(v.size).reshape(v.shape)),
        ("readonly-strided", lambda: np.repeat(v, 2, axis=0)[::2]),
    ]
    if v.ndim == 2:
        out += [
            ("transposed", lambda: v.T),
            ("one-column", lambda: v[:, :1]),
            ("extra-column", lambda: np.column_stack([v, v[:, :1]])),
            ("column-vector", lambda: v[:, :1].ravel()),
            ("df-datetime-column", lambda: pd.DataFrame(v).assign(t=pd.date_range("2024-01-01", periods=v.shape[0]))),
            ("df-all-datetime", lambda: pd.DataFrame({c: pd.date_range("2024-01-01", periods=v.shape[0])
                                                      for c in range(v.shape[1])})),
            ("df-timedelta-column", lambda: pd.DataFrame(v).assign(t=pd.to_timedelta(np.arange(v.shape[0]), "s"))),
            ("df-category-column", lambda: pd.DataFrame(v).assign(c=pd.Categorical(["a", "b"] * (v.shape[0] // 2)))),
            ("df-duplicate-labels", lambda: pd.DataFrame(v, columns=["a"] * v.shape[1])),
            ("df-nullable-NA", lambda: pd.DataFrame(v).astype("Float64").mask(np.arange(v.size).reshape(v.shape) == 3)),
            ("df-object", lambda: pd.DataFrame(v).astype(object)),
            ("df-tz-datetime", lambda: pd.DataFrame({0: pd.date_range("2024-01-01", periods=v.shape[0], tz="UTC")})),
        ]
    else:
        out += [
            ("column", lambda: v.reshape(-1, 1)),
            ("series-category", lambda: pd.Series(v).astype("category")),
            ("series-object", lambda: pd.Series(v).astype(object)),
            ("series-datetime", lambda: pd.Series(pd.date_range("2024-01-01", periods=v.shape[0]))),
            ("series-nullable-NA", lambda: pd.Series(v).astype("Float64").mask(np.arange(v.size) == 3)),
            ("series-string", lambda: pd.Series(v).astype(str).astype("string")),
            ("series-sparse", lambda: pd.Series(pd.arrays.SparseArray(v))),
        ]
    if f is not None:
        out += [
            ("nan-at-3", lambda: _with(f, np.nan)),
            ("inf-at-3", lambda: _with(f, np.inf)),
            ("-inf-at-3", lambda: _with(f, -np.inf)),
            ("times-1e308", lambda: f * 1e308),
            ("times-minus-1e308", lambda: f * -1e308),
            ("times-5e-324", lambda: f * 5e-324),
            ("times-1e-320", lambda: f * 1e-320),
            ("times-1e300", lambda: f * 1e300),
            ("times-1e-300", lambda: f * 1e-300),
            ("plus-1e12", lambda: f + 1e12),
            ("all-1e308", lambda: np.full(f.shape, 1e308)),
            ("all-5e-324", lambda: np.full(f.shape, 5e-324)),
            ("one-1e308", lambda: _with(f, 1e308)),
            ("one-5e-324", lambda: _with(f, 5e-324)),
            ("zeros", lambda: np.zeros(f.shape)),
            ("negated", lambda: -f),
            ("constant", lambda: np.full(f.shape, f.flat[0])),
            ("bool-dtype", lambda: f.astype(bool)),
            ("float16", lambda: f.astype(np.float16)),
            ("float32", lambda: f.astype(np.float32)),
            ("longdouble", lambda: f.astype(np.longdouble)),
            ("int8", lambda: f.astype(np.int8)),
            ("uint64", lambda: np.abs(f).astype(np.uint64) + np.uint64(2**63)),
            ("float-strings", lambda: f.astype(str)),
            ("fractions", lambda: np.array([fractions.Fraction(x) for x in f.flat], dtype=object).reshape(f.shape)),
            ("decimals", lambda: np.array([decimal.Decimal(float(x)) for x in f.flat], dtype=object).reshape(f.shape)),
        ]
    return out


INT_EXTRA: list[tuple[str, Callable[[], Any]]] = [
    ("np.uint8", lambda: np.uint8(255)), ("float-int", lambda: 3.0), ("np.float-int", lambda: np.float64(2.0)),
    ("np.int-2", lambda: np.int64(2)),
]
FLOAT_EXTRA: list[tuple[str, Callable[[], Any]]] = [
    ("np.float32", lambda: np.float32(0.5)), ("int", lambda: 1), ("2", lambda: 2.0),
    ("just-above-1", lambda: 1.0 + 2**-52), ("just-below-0", lambda: -5e-324),
]


def hostile_values(baseline: Any) -> list[tuple[str, Callable[[], Any]]]:
    """The generic pool plus variants derived from the argument's valid ``baseline``."""
    values = list(GENERIC)
    if isinstance(baseline, np.ndarray):
        values += derived(baseline)
    elif isinstance(baseline, str):
        values += [("upper", lambda: baseline.upper()), ("padded", lambda: f" {baseline} "),
                   ("as-bytes", lambda: baseline.encode()), ("as-list", lambda: [baseline]),
                   ("np.str", lambda: np.str_(baseline)), ("with-NUL", lambda: baseline + "\x00")]
    elif isinstance(baseline, bool):
        values += [("np.bool-False", lambda: np.bool_(False)), ("str-True", lambda: "True"), ("one", lambda: 1)]
    elif isinstance(baseline, int):
        values += INT_EXTRA
    elif isinstance(baseline, float):
        values += FLOAT_EXTRA
    return values


def path_values(tmp: Path) -> list[tuple[str, Callable[[], Any]]]:
    """Argument types for file paths (the contents are tested elsewhere)."""
    return [
        ("directory", lambda: tmp),
        ("directory-str", lambda: str(tmp)),
        ("missing", lambda: tmp / "missing.file"),
        ("missing-bytes", lambda: bytes(tmp / "missing.file")),
        ("missing-directory", lambda: tmp / "no" / "such" / "x.file"),
        ("NUL-byte", lambda: str(tmp / "a\x00b")),
        ("too-long", lambda: str(tmp / ("x" * 5000))),
        ("dev-null", lambda: Path("/dev/null")),
        ("trailing-slash", lambda: str(tmp / "x.file") + "/"),
        ("fd-int", lambda: 0),
        ("file-object", lambda: io.BytesIO(b"x,y\n1,2\n")),
    ]


# ----------------------------------------------------------------- the call table
@dataclass
class Spec:
    """A public callable with a valid baseline; ``build`` turns arguments into the call."""

    name: str
    fn: Callable[..., Any]
    args: dict[str, Any]
    positional: tuple[str, ...] = ()
    paths: tuple[str, ...] = ()
    build: Callable[[dict[str, Any]], tuple[tuple, dict]] | None = None
    skip: tuple[str, ...] = ()  # arguments left at their baseline (a callback the caller owns)
    only: tuple[str, ...] | None = None  # a variant of another spec: only the arguments it is about
    extra: dict[str, list[tuple[str, Callable[[], Any]]]] = field(default_factory=dict)

    def call(self, args: dict[str, Any]) -> Any:
        if self.build is not None:
            pos, kw = self.build(args)
        else:
            pos = tuple(args[k] for k in self.positional)
            kw = {k: v for k, v in args.items() if k not in self.positional}
        return self.fn(*pos, **kw)


def spec(name: str, fn: Callable[..., Any], positional: tuple[str, ...] = (), **kw: Any) -> Spec:
    """A spec whose baseline is the signature's defaults overridden by ``args``."""
    args = dict(kw.pop("args", {}))
    target = fn
    for p in inspect.signature(target).parameters.values():
        if p.name in ("self",) or p.kind in (p.VAR_POSITIONAL, p.VAR_KEYWORD):
            continue
        if p.name not in args:
            if p.default is inspect.Parameter.empty:
                raise AssertionError(f"{name}: no baseline for required argument {p.name}")
            args[p.name] = p.default
    return Spec(name, fn, args, positional=positional, **kw)


def blocks_spec(name: str, fn: Callable[..., Any], y: np.ndarray) -> Spec:
    """A blocked fit over ``source``: the block's X, y and weights are hostile arguments of
    their own (a hostile block followed by a valid one), and ``source`` gets hostile sources."""
    args: dict[str, Any] = {"source": "blocks", "block_X": X, "block_y": y, "block_w": W}
    for p in inspect.signature(fn).parameters.values():
        if p.name not in ("source", "X", "y", "weights"):
            args[p.name] = p.default
    sources = [
        ("same-iterator", lambda: (lambda it=iter([(X, y)]): it)),
        ("returns-None", lambda: (lambda: None)),
        ("returns-int", lambda: (lambda: 5)),
        ("yields-None", lambda: (lambda: iter([None]))),
        ("yields-one-tuple", lambda: (lambda: iter([(X,)]))),
        ("yields-four-tuple", lambda: (lambda: iter([(X, y, W, W)]))),
        ("yields-dict", lambda: (lambda: iter([{"X": X, "y": y}]))),
        ("yields-str", lambda: (lambda: iter(["block"]))),
        ("yields-nothing-later", lambda: _once([(X, y)])),
        ("changes-rows-later", lambda: _flip([(X, y)], [(X[:-1], y[:-1])])),
        ("changes-values-later", lambda: _flip([(X, y)], [(X[::-1], y)])),
        ("changes-labels-later", lambda: _flip([(X, y)], [(X, y[::-1])])),
        ("needs-argument", lambda: (lambda a: iter([(X, y)]))),
        ("many-tiny-blocks", lambda: (lambda: iter([(X[i : i + 1], y[i : i + 1]) for i in range(N)]))),
        ("empty-first-block", lambda: (lambda: iter([(X[:0], y[:0]), (X, y)]))),
        ("weights-in-some-blocks", lambda: (lambda: iter([(X, y, W), (X, y)]))),
    ]

    def build(a: dict[str, Any]) -> tuple[tuple, dict]:
        kw = {k: v for k, v in a.items() if not k.startswith("block_") and k != "source"}
        src = a["source"]
        if isinstance(src, str) and src == "blocks":
            bx, by, bw = a["block_X"], a["block_y"], a["block_w"]
            src = lambda: iter([(bx, by, bw), (X, y, W)])  # noqa: E731
        return (src,), kw

    return Spec(name, fn, args, build=build, skip=("on_iteration",), extra={"source": sources})


def _once(blocks: list) -> Callable[[], Any]:
    calls = [0]

    def source():
        calls[0] += 1
        return iter(blocks if calls[0] == 1 else [])

    return source


def _flip(first: list, later: list) -> Callable[[], Any]:
    calls = [0]

    def source():
        calls[0] += 1
        return iter(first if calls[0] == 1 else later)

    return source


def dask_spec(name: str, fn: Callable[..., Any], y: np.ndarray, **extra_args: Any) -> Spec:
    args = {"X": da.from_array(X, chunks=(8, 2)), "y": da.from_array(y, chunks=8),
            "weights": da.from_array(W, chunks=8)} | extra_args
    extra = {
        "X": [("dask-3d", lambda: da.zeros((N, 2, 2), chunks=8)), ("dask-datetime", lambda: da.from_array(
            np.zeros((N, 2), "datetime64[ns]"), chunks=(8, 2))), ("dask-nan", lambda: da.from_array(
                _with(X, np.nan), chunks=(8, 2))), ("dask-other-chunks", lambda: da.from_array(X, chunks=(6, 2))),
              ("dask-unknown-chunks", lambda: da.from_array(X, chunks=(8, 2))[da.from_array(YB, chunks=8) > -1]),
              ("dask-column-chunks", lambda: da.from_array(X, chunks=(8, 1))), ("dask-empty", lambda: da.zeros((0, 2)))],
        "y": [("dask-2d", lambda: da.zeros((N, 1), chunks=8)), ("dask-str", lambda: da.from_array(
            np.array(["a"] * N), chunks=8)), ("dask-short", lambda: da.from_array(y[:-1], chunks=8))],
        "weights": [("dask-negative", lambda: -da.from_array(W, chunks=8)), ("dask-1e308", lambda: da.from_array(
            np.full(N, 1e308), chunks=8))],
    }
    return spec(name, fn, args=args, extra=extra, only=("X", "y", "weights"))


def DELIVERED(tmp: Path) -> Any:
    """The logistic baseline as a supplier's PMML file would deliver it (read back)."""
    path = tmp / "delivered.pmml"
    if not path.exists():
        lt.write_pmml(LOGI, path)
    return lt.read_pmml(path)


def specs(tmp: Path) -> list[Spec]:
    """Every public callable with its valid baseline (files are made in ``tmp``)."""
    model = tmp / "model.json"
    lt.save(LIN, model, replace=True)
    pmml = tmp / "model.xml"
    lt.write_pmml(LOGI, pmml, replace=True)
    csv = tmp / "data.csv"
    csv.write_text("x1,x2,g,y\n" + "".join(f"{a},{b},{'uv'[i % 2]},{c}\n" for i, (a, b, c) in enumerate(zip(X[:, 0], X[:, 1], YB))))
    cb = {"skip": ("on_iteration",)}
    out = [
        spec("least_squares", lt.least_squares, ("X", "y"), args={"X": X, "y": YL, "weights": W}),
        spec("least_squares[HC3]", lt.least_squares, ("X", "y"), args={"X": X, "y": YL, "covariance": "HC3"},
             only=("X", "y", "covariance")),
        spec("logistic", lt.logistic, ("X", "y"), args={"X": X, "y": YB, "weights": W, "offset": np.zeros(N)}, **cb),
        spec("logistic[grouped]", lt.logistic, ("X", "y"), args={"X": X, "y": SUCC, "trials": TRIALS},
             only=("X", "y", "trials", "weights", "positive")),
        spec("logistic[lbfgs]", lt.logistic, ("X", "y"), args={"X": X, "y": YB, "solver": "lbfgs", "l2": 0.5},
             only=("X", "y", "l2", "tol", "max_iter")),
        spec("logistic[firth]", lt.logistic, ("X", "y"), args={"X": XSEP, "y": YB, "firth": True},
             only=("X", "y", "weights", "trials", "profile", "l2")),
        spec("softmax", lt.softmax, ("X", "y"), args={"X": X, "y": Y3, "weights": W, "offset": np.zeros((N, 3))}, **cb),
        spec("softmax[symmetric]", lt.softmax, ("X", "y"), args={"X": X, "y": Y3, "reference": None, "l2": 1.0},
             only=("X", "y", "l2", "solver")),
        blocks_spec("least_squares_blocks", lt.least_squares_blocks, YL),
        blocks_spec("logistic_blocks", lt.logistic_blocks, YB),
        blocks_spec("softmax_blocks", lt.softmax_blocks, Y3),
        dask_spec("least_squares_blocks[dask]", lt.least_squares_blocks, YL),
        dask_spec("logistic_blocks[dask]", lt.logistic_blocks, YB),
        dask_spec("softmax_blocks[dask]", lt.softmax_blocks, Y3),
        spec("check_separation", lt.check_separation, ("X", "y"), args={"X": XSEP, "y": YB, "weights": W}),
        spec("check_separation[grouped]", lt.check_separation, ("X", "y"), args={"X": X, "y": SUCC, "trials": TRIALS},
             only=("X", "y", "trials")),
        spec("check_separation[multinomial]", lt.check_separation, ("X", "y"), args={"X": X, "y": Y3}, only=("X", "y")),
        spec("load", lt.load, ("path",), args={"path": model}, paths=("path",)),
        spec("save", lt.save, ("fit", "path"), args={"fit": LIN, "path": tmp / "out.json", "replace": True},
             paths=("path",), extra={"fit": [("separation-record", lambda: SEP), ("delivered", lambda: lt.read_pmml(pmml))]}),
        spec("read_pmml", lt.read_pmml, ("path",), args={"path": pmml}, paths=("path",)),
        spec("write_pmml", lt.write_pmml, ("fit", "path"), args={"fit": SOFT, "path": tmp / "out.xml", "replace": True},
             paths=("path",), extra={"fit": [("separation-record", lambda: SEP), ("delivered", lambda: lt.read_pmml(pmml))]}),
        spec("read_table", lt.read_table, ("path",), args={"path": csv, "target": "y", "weights": None,
                                                            "features": ("x1", "x2", "g"), "reference_levels": {"g": "u"}},
             paths=("path",)),
        spec("Table.data_precision", lt.read_table(csv, target="y", written_decimals=True).data_precision,
             args={"names": ("x1", "g=v"), "target": "y"}),
        spec("Precision.written", lt.Precision.written, ("x_decimals",), args={"x_decimals": [2, 1], "y_decimals": 1}),
        spec("Precision.float64", lt.Precision.float64, ("p",), args={"p": 2}),
        spec("stratified_holdout", lt.stratified_holdout, ("y",), args={"y": YB, "groups": GROUPS}),
        spec("stratified_folds", lt.stratified_folds, ("y",), args={"y": Y3, "k": 3}),
        spec("stratified_folds[continuous]", lt.stratified_folds, ("y",), args={"y": YL, "k": 3, "continuous_bins": 3}),
        spec("stratified_folds[multilabel]", lt.stratified_folds, ("y",),
             args={"y": np.column_stack([YB, (Y3 == 1).astype(int)]), "k": 3}),
        spec("repeated_stratified_folds", lt.repeated_stratified_folds, ("y",), args={"y": YB, "k": 3, "repeats": 2}),
        spec("stratified_bootstrap", lt.stratified_bootstrap, ("y",), args={"y": Y3}),
        spec("split_balance", lt.split_balance, ("y", "parts"), args={"y": Y3, "parts": FOLDS},
             extra={"parts": [("pair", lambda: (np.arange(0, N, 2), np.arange(1, N, 2))),
                              ("pair-of-str", lambda: ("a", "b")), ("list-of-floats", lambda: [0.5] * N)]}),
        spec("brier", lt.brier, ("y", "p"), args={"y": YB, "p": P, "weights": W, "bins": 4}),
        spec("brier[multiclass]", lt.brier, ("y", "p"), args={"y": Y3, "p": P3}),
        spec("cross_entropy", lt.cross_entropy, ("y", "p"), args={"y": YB, "p": P, "weights": W, "eps": 1e-12}),
        spec("calibration_error", lt.calibration_error, ("y", "p"), args={"y": YB, "p": P, "weights": W, "bins": 4}),
        spec("calibration_error[multiclass]", lt.calibration_error, ("y", "p"), args={"y": Y3, "p": P3, "bins": 4}),
        spec("reliability", lt.reliability, ("y", "p"), args={"y": YB, "p": P, "weights": W, "bins": 4}),
        spec("calibration_line", lt.calibration_line, ("y", "p"), args={"y": YB, "p": P, "weights": W}),
        spec("hosmer_lemeshow", lt.hosmer_lemeshow, ("y", "p"), args={"y": YB, "p": P, "weights": W, "groups": 4}),
        spec("spiegelhalter", lt.spiegelhalter, ("y", "p"), args={"y": YB, "p": P, "weights": W}),
        spec("roc_auc", lt.roc_auc, ("y", "score"), args={"y": YB, "score": S, "weights": W}),
        spec("roc_auc_difference", lt.roc_auc_difference, ("y", "score_a", "score_b"),
             args={"y": YB, "score_a": S, "score_b": S2, "weights": W}),
        spec("isotonic_calibration", lt.isotonic_calibration, ("y", "p"), args={"y": YB, "p": P, "weights": W}),
        spec("platt_scaling", lt.platt_scaling, ("y", "scores"), args={"y": YB, "scores": S, "weights": W}),
        spec("temperature_scaling", lt.temperature_scaling, ("y", "logits"), args={"y": YB, "logits": S, "weights": W}),
        spec("temperature_scaling[multiclass]", lt.temperature_scaling, ("y", "logits"), args={"y": Y3, "logits": Z3}),
        spec("compare_coefficients", lt.compare_coefficients, ("fit", "coefficients"),
             args={"fit": LIN, "coefficients": LIN.coefficients + 0.1, "intercept": np.float64(LIN.intercept),
                   "X": X, "y": YL, "weights": W},
             extra={"coefficients": [("near-1e300", lambda: np.array([1e300, -1e300])),
                                     ("mapping-nan", lambda: {"x1": math.nan, "x2": 1.0}),
                                     ("mapping-str", lambda: {"x1": "a", "x2": 1.0}),
                                     ("mapping-None", lambda: {"x1": None, "x2": 1.0})],
                    "fit": [("separation-record", lambda: SEP), ("delivered", lambda: lt.read_pmml(pmml))]}),
        spec("compare_coefficients[logistic]", lt.compare_coefficients, ("fit", "coefficients"),
             args={"fit": LOGI, "coefficients": LOGI.coefficients * 1.1, "X": X, "y": YB, "weights": W},
             extra={"coefficients": [("near-1e300", lambda: np.array([1e300, 1e300]))]}),
        spec("compare_coefficients[softmax]", lt.compare_coefficients, ("fit", "coefficients"),
             args={"fit": SOFT, "coefficients": SOFT.coefficients * 0.9, "intercept": SOFT.intercept, "X": X, "y": Y3},
             extra={"coefficients": [("near-1e300", lambda: np.full((2, 3), 1e300))]}),
        spec("implied_l2", lt.implied_l2, ("X", "y", "coefficients"),
             args={"X": X, "y": YB, "coefficients": LOGI.coefficients, "intercept": LOGI.intercept, "weights": W}),
        spec("implied_l2[least_squares]", lt.implied_l2, ("X", "y", "coefficients"),
             args={"X": X, "y": YL, "coefficients": LIN.coefficients, "model": "least_squares"}),
        spec("implied_l2[softmax]", lt.implied_l2, ("X", "y", "coefficients"),
             args={"X": X, "y": Y3, "coefficients": SOFT.coefficients, "model": "softmax"}),
        spec("kolmogorov_smirnov", lt.kolmogorov_smirnov, ("y", "p"), args={"y": YB, "p": S, "weights": W}),
        spec("gains", lt.gains, ("y", "p"), args={"y": YB, "p": S, "weights": W, "bands": 4}),
        spec("band_tests", lt.band_tests, ("y", "p", "bands"), args={"y": YB, "p": P, "bands": 4, "weights": W}),
        spec("population_stability", lt.population_stability, ("expected", "actual"),
             args={"expected": S, "actual": S2, "weights": W, "actual_weights": W, "bins": 4}),
        spec("collinearity", lt.collinearity, ("X",), args={"X": X, "weights": W}),
    ]
    # record methods: a bound method of a baseline record, the hostile values for its arguments
    for cls, rec in (("LinearFit", LIN), ("LogisticFit", LOGI), ("SoftmaxFit", SOFT)):
        offset = {} if cls == "LinearFit" else {"offset": np.zeros((N, 3)) if cls == "SoftmaxFit" else np.zeros(N)}
        for m in ("mean", "linear_predictor") + (() if cls == "LinearFit" else ("labels",)):
            out.append(spec(f"{cls}.{m}", getattr(rec, m), ("X",), args={"X": X, **offset}))
        out.append(spec(f"{cls}.report", rec.report))
        out.append(spec(f"{cls}.coefficient_table", rec.coefficient_table))
    out += [
        spec("PlattMap.apply", PLATT.apply, ("scores",), args={"scores": S}),
        spec("TemperatureMap.apply", TEMP2.apply, ("logits",), args={"logits": S}),
        spec("TemperatureMap.apply[multiclass]", TEMP3.apply, ("logits",), args={"logits": Z3}),
        spec("IsotonicMap.apply", ISO.apply, ("p",), args={"p": P}),
        spec("SeparationCheck.describe", SEP.describe),
        spec("DeliveredModel.linear_predictor", DELIVERED(tmp).linear_predictor, ("X",), args={"X": X}),
        spec("DeliveredModel.mean", DELIVERED(tmp).mean, ("X",), args={"X": X}),
        spec("DeliveredModel.labels", DELIVERED(tmp).labels, ("X",), args={"X": X}),
        spec("DeliveredModel.report", DELIVERED(tmp).report),
        spec("MultinomialSeparationCheck.describe", SEP3.describe),
    ]
    return out


#: methods of records without arguments: called on every record a hostile call returns
NO_ARGUMENT_METHODS = ("report", "to_dict", "describe", "parameter_terms", "coefficient_table", "headline",
                       "dependencies", "bin_labels")
#: covered by the follow-up calls on returned records (argument-free, or with defaults only)
FOLLOW_UP = {f"{c}.{m}" for c in ("SplitBalance", "BrierScore", "ReliabilityTable", "CalibrationLine",
                                  "HosmerLemeshow", "CoefficientComparison", "ROCArea", "ROCAreaDifference")
             for m in ("report",)} | {f"{c}.to_dict" for c in ("LinearFit", "LogisticFit", "SoftmaxFit")} | {
    "SoftmaxFit.parameter_terms"} | {
    "Accuracy.report"} | {  # every fit's report() prints it (LinearFit.report, LogisticFit.report)
    "BandTests.report", "BandTests.headline", "BandTests.to_dict", "Collinearity.dependencies", "Collinearity.report",
    "Collinearity.to_dict", "GainsTable.report", "GainsTable.to_dict", "KolmogorovSmirnov.report",
    "KolmogorovSmirnov.to_dict", "PopulationStability.bin_labels", "PopulationStability.report",
    "PopulationStability.headline", "PopulationStability.to_dict"}


# ----------------------------------------------------------------- running calls
#: Words of a solver or an internal function that must not reach a user (issue #16)
JARGON = re.compile(r"HiGHS|Status \d|linprog\b(?! *\))|\b(chi2|t|f|normal)_(sf|quantile)\b|regularized_|"
                    r"Traceback|LinAlgError|LAPACK|\bdgel")


class Hang(Exception):
    pass


def _alarm(signum: int, frame: Any) -> None:
    raise Hang()


def _outcome(thunk: Callable[[], Any], seconds: float = HANG_SECONDS) -> tuple[str | None, Any]:
    """Run ``thunk``; return (problem or None, result)."""
    old = signal.signal(signal.SIGALRM, _alarm)
    signal.setitimer(signal.ITIMER_REAL, seconds)
    problem, result = None, None
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        try:
            result = thunk()
        except lt.LintoolsError as exc:
            if JARGON.search(str(exc)):
                problem = f"jargon in {type(exc).__name__}: {str(exc)[:200]}"
        except Hang:
            problem = f"hangs (more than {seconds:g} s)"
        except BaseException as exc:  # noqa: BLE001 - the defect: an exception outside the family
            if isinstance(exc, KeyboardInterrupt):
                raise
            problem = f"{type(exc).__module__}.{type(exc).__name__}: {str(exc)[:160]}{_where(exc)}"
        finally:
            signal.setitimer(signal.ITIMER_REAL, 0)
            signal.signal(signal.SIGALRM, old)
    foreign = [w for w in caught if not issubclass(w.category, lt.LintoolsWarning)]
    if problem is None and foreign:
        w = foreign[0]
        problem = f"warning {w.category.__name__}: {str(w.message)[:120]} ({Path(w.filename).name}:{w.lineno})"
        problem += _warning_site(thunk, w.category)
    return problem, result


def _warning_site(thunk: Callable[[], Any], category: type[Warning]) -> str:
    """Where in lintools a foreign warning starts: the call again, with that warning an error."""
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        warnings.simplefilter("error", category)
        try:
            thunk()
        except category as exc:
            return _where(exc)
        except BaseException:  # noqa: BLE001 - only the site is wanted here
            pass
    return ""


def _where(exc: BaseException) -> str:
    """`` [at file:line]`` of the innermost frame inside lintools, to route a failure."""
    where = ""
    tb = exc.__traceback__
    while tb is not None:
        path = Path(tb.tb_frame.f_code.co_filename)
        if "lintools" in path.parts and "tests" not in path.parts:
            where = f" [at {path.name}:{tb.tb_lineno}]"
        tb = tb.tb_next
    return where


def _follow_up(result: Any) -> list[tuple[str, Callable[[], Any]]]:
    """Argument-free methods of a returned record (and of the records inside a tuple)."""
    items = result if isinstance(result, tuple) else (result,)
    calls = []
    for item in items:
        if type(item).__module__.split(".")[0] != "lintools":
            continue
        for m in NO_ARGUMENT_METHODS:
            method = getattr(item, m, None)
            if callable(method):
                calls.append((f"{type(item).__name__}.{m}", method))
    return calls


@dataclass
class Tally:
    calls: int = 0
    failures: dict[tuple[str, str, str], str] = field(default_factory=dict)


def run_spec(s: Spec, tmp: Path, tally: Tally) -> None:
    """Every hostile value in every argument of ``s``; follow-up calls on returned records."""
    cases: list[tuple[str, str, Callable[[], Any]]] = [("(baseline)", "valid", lambda: None)]
    for arg, base in s.args.items():
        if arg in s.skip or (s.only is not None and arg not in s.only):
            continue
        pool = hostile_values(base) + s.extra.get(arg, [])
        if arg in s.paths:
            pool += path_values(tmp)
        cases += [(arg, vid, make) for vid, make in pool]
    for arg, vid, make in cases:
        args = dict(s.args)
        if arg != "(baseline)":
            with np.errstate(all="ignore"), warnings.catch_warnings():
                warnings.simplefilter("ignore")
                args[arg] = make()
        tally.calls += 1
        problem, result = _outcome(lambda: s.call(args))
        if problem is not None:
            tally.failures[(s.name, arg, vid)] = problem
            continue
        for mname, method in _follow_up(result):
            tally.calls += 1
            problem, _ = _outcome(method)
            if problem is not None:
                tally.failures[(s.name, arg, f"{vid} then {mname}()")] = problem


TALLY: dict[str, Tally] = {}


SPEC_NAMES = [
    "Table.data_precision", "Precision.written", "Precision.float64",
    "least_squares", "least_squares[HC3]", "logistic", "logistic[grouped]", "logistic[lbfgs]", "logistic[firth]",
    "softmax", "softmax[symmetric]", "least_squares_blocks", "logistic_blocks", "softmax_blocks",
    "least_squares_blocks[dask]", "logistic_blocks[dask]", "softmax_blocks[dask]", "check_separation",
    "check_separation[grouped]", "check_separation[multinomial]", "load", "save", "read_pmml", "write_pmml",
    "read_table", "stratified_holdout", "stratified_folds", "stratified_folds[continuous]",
    "stratified_folds[multilabel]", "repeated_stratified_folds", "stratified_bootstrap", "split_balance", "brier",
    "brier[multiclass]", "cross_entropy", "calibration_error", "calibration_error[multiclass]", "reliability",
    "calibration_line", "hosmer_lemeshow", "spiegelhalter", "roc_auc", "roc_auc_difference", "kolmogorov_smirnov",
    "gains", "band_tests", "population_stability", "collinearity", "isotonic_calibration",
    "platt_scaling", "temperature_scaling", "temperature_scaling[multiclass]", "compare_coefficients",
    "compare_coefficients[logistic]", "compare_coefficients[softmax]", "implied_l2", "implied_l2[least_squares]",
    "implied_l2[softmax]", "LinearFit.mean", "LinearFit.linear_predictor", "LinearFit.report",
    "LinearFit.coefficient_table", "LogisticFit.mean", "LogisticFit.linear_predictor", "LogisticFit.labels",
    "LogisticFit.report", "LogisticFit.coefficient_table", "SoftmaxFit.mean", "SoftmaxFit.linear_predictor",
    "SoftmaxFit.labels", "SoftmaxFit.report", "SoftmaxFit.coefficient_table", "PlattMap.apply",
    "TemperatureMap.apply", "TemperatureMap.apply[multiclass]", "IsotonicMap.apply", "SeparationCheck.describe",
    "DeliveredModel.linear_predictor", "DeliveredModel.mean", "DeliveredModel.labels", "DeliveredModel.report",
    "MultinomialSeparationCheck.describe",
]


@pytest.mark.parametrize("name", SPEC_NAMES)
def test_hostile_values_raise_only_lintools_errors(name: str, tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    """Invariant: whatever the argument, a public callable returns or raises a LintoolsError,
    and warns only with LintoolsWarning (source: issue #16, common practice)."""
    monkeypatch.chdir(tmp_path)  # relative hostile paths ("abc", "") land in the temporary folder
    (s,) = [s for s in specs(tmp_path) if s.name == name]
    tally = Tally()
    run_spec(s, tmp_path, tally)
    TALLY[name] = tally
    lines = [f"{k[1]}={k[2]}: {v}" for k, v in sorted(tally.failures.items())]
    assert not lines, f"{len(lines)} of {tally.calls} hostile calls of {name} failed:\n" + "\n".join(lines)


def test_every_public_callable_is_covered(tmp_path: Path) -> None:
    """Every public function of lintools.__all__ and every public method of a public record
    class has a spec (or is an argument-free follow-up call); source: common practice."""
    names = {s.name.split("[")[0] for s in specs(tmp_path)}
    assert set(SPEC_NAMES) == {s.name for s in specs(tmp_path)}
    wanted = set()
    for public in lt.__all__:
        obj = getattr(lt, public)
        if isinstance(obj, type):
            if issubclass(obj, BaseException):
                continue
            wanted |= {f"{public}.{m}" for m, v in vars(obj).items() if not m.startswith("_") and callable(v)}
            for base in obj.__mro__[1:]:
                if base.__module__.startswith("lintools"):
                    wanted |= {f"{public}.{m}" for m, v in vars(base).items() if not m.startswith("_") and callable(v)}
        elif callable(obj):
            wanted.add(public)
    missing = wanted - names - FOLLOW_UP
    assert not missing, f"add hostile specs for: {sorted(missing)}"


def test_battery_size() -> None:
    """The battery makes tens of thousands of hostile calls (counted by the spec tests of
    this run; the count is printed with pytest -s)."""
    total = sum(t.calls for t in TALLY.values())
    failed = sum(len(t.failures) for t in TALLY.values())
    print(f"hostile calls: {total} over {len(TALLY)} callables; {failed} failed")
    if len(TALLY) == len(SPEC_NAMES):
        assert total > 20000


# ----------------------------------------------------------------- regression tests
# Each case below was measured on the code before this change (issue #16): it let out a
# foreign exception, leaked a NumPy warning, or fitted a number that the data do not give.


def _fails_with(call: Callable[[], Any], *fragments: str, kind: type = lt.InputError) -> str:
    with warnings.catch_warnings():
        warnings.simplefilter("error")  # no foreign warning on the way to the error either
        with pytest.raises(kind) as info:
            call()
    message = str(info.value)
    for fragment in fragments:
        assert fragment in message, message
    return message


DATES = "convert them to numbers explicitly"
MASKS = "fill the masked entries"


@pytest.mark.parametrize("X_bad, where", [
    (np.arange(2 * N).reshape(N, 2).astype("datetime64[D]"), "X holds dates or times (datetime64)"),
    (np.arange(2 * N).reshape(N, 2).astype("timedelta64[s]"), "X holds durations (timedelta64)"),
    (pd.DataFrame({"t": pd.date_range("2024-01-01", periods=N), "u": pd.date_range("2020-01-01", periods=N)}),
     "X column 0 ('t') holds dates or times"),
    (pd.DataFrame({"a": X[:, 0], "t": pd.date_range("2024-01-01", periods=N)}), "X column 1 ('t') holds dates"),
    (pd.DataFrame({"a": X[:, 0], "d": pd.to_timedelta(np.arange(N), "h")}), "X column 1 ('d') holds durations"),
    (np.array([[1.0, datetime.datetime(2024, 1, 1)]] * N, dtype=object), "X has a date, time or duration at row 0, column 1"),
], ids=["datetime64", "timedelta64", "all-datetime-frame", "mixed-frame", "timedelta-column", "datetime-objects"])
def test_dates_and_durations_are_refused_not_fitted_as_nanoseconds(X_bad: Any, where: str) -> None:
    """Invariant: a date or duration never enters a fit as nanoseconds since 1970 (before:
    fitted silently).  Source: issue #16; common practice (a unit must be chosen by the user)."""
    for fit in (lambda: lt.least_squares(X_bad, YL), lambda: lt.logistic(X_bad, YB), lambda: lt.softmax(X_bad, Y3)):
        _fails_with(fit, where, DATES)


def test_dates_are_refused_as_response_weights_and_labels() -> None:
    # source: issue #16 (datetime64 inputs are refused with the remedy); common practice
    days = np.arange(N).astype("datetime64[D]")
    _fails_with(lambda: lt.least_squares(X, days), "y holds dates or times", DATES)
    _fails_with(lambda: lt.least_squares(X, YL, weights=days - days[0]), "weights holds durations", DATES)
    _fails_with(lambda: lt.logistic(X, np.where(YB == 1, days[1], days[0])), "y holds dates or times", DATES)
    _fails_with(lambda: lt.stratified_folds(days, k=3), "y holds dates or times", DATES)
    _fails_with(lambda: lt.brier(YB, pd.Series(days)), "p holds dates or times", DATES)


def test_masked_arrays_with_masked_entries_are_refused() -> None:
    """Invariant: a masked entry never enters a fit with its hidden fill value (before: the
    mask was dropped and the hidden values fitted).  Source: issue #16."""
    Xm = np.ma.masked_array(X, mask=np.zeros_like(X, dtype=bool))
    Xm[5, 1] = np.ma.masked
    _fails_with(lambda: lt.least_squares(Xm, YL), "X is a masked array with 1 masked entry (the first at row 5, column 1)",
                MASKS)
    ym = np.ma.masked_array(YL, mask=np.arange(N) == 2)
    _fails_with(lambda: lt.least_squares(X, ym), "y is a masked array", "row 2", MASKS)
    yb = np.ma.masked_array(YB, mask=np.arange(N) == 7)
    _fails_with(lambda: lt.logistic(X, yb), "y is a masked array", "row 7", MASKS)
    _fails_with(lambda: lt.stratified_holdout(yb), "y is a masked array", MASKS)
    _fails_with(lambda: lt.roc_auc(YB, np.ma.masked_array(S, mask=np.arange(N) == 0)), "score is a masked array", MASKS)


def test_a_masked_array_without_masked_entries_is_its_data() -> None:
    """Invariant (the documented decision): a masked array with nothing masked is fitted as its
    data, bit for bit.  Source: common practice (the mask then hides nothing)."""
    a = lt.least_squares(np.ma.masked_array(X), np.ma.masked_array(YL, mask=False))
    b = lt.least_squares(X, YL)
    assert np.array_equal(a.coefficients, b.coefficients) and a.intercept == b.intercept


def test_values_beyond_float64_are_refused() -> None:
    # source: common practice -- a longdouble of 1e400 has no float64 value (before: a
    # RuntimeWarning from the cast, then the error of an infinity the caller never passed)
    big = X.astype(np.longdouble)
    big[3, 0] = np.longdouble("1e400")
    _fails_with(lambda: lt.least_squares(big, YL), "X has a value beyond the float64 range", "rescale it")


def test_solver_none_is_refused_by_name() -> None:
    # source: issue #16 (before: KeyError None from the solver table)
    _fails_with(lambda: lt.logistic(X, YB, solver=None), "solver=None is not one of 'newton', 'lbfgs', 'gradient'")
    _fails_with(lambda: lt.softmax(X, Y3, solver=None), "solver=None is not one of")


@pytest.mark.parametrize("call, fragment", [
    (lambda: lt.logistic(X, YB, positive=np.array([0, 1])), "is not one of the labels of y"),
    (lambda: lt.brier(YB, P, positive=pd.NA), "is not one of the labels of y"),
    (lambda: lt.softmax(X, Y3, reference=pd.NA), "reference=<NA> is neither 'first', None, nor a class of y"),
    (lambda: lt.calibration_error(YB, P, norm=np.array([1])), "is not one of 1, 2, 'max'"),
    (lambda: lt.least_squares(X, YL, covariance=np.array(["HC3"])), "is not one of 'classical'"),
], ids=["logistic-positive-array", "brier-positive-NA", "softmax-reference-NA", "norm-array", "covariance-array"])
def test_choices_that_cannot_be_compared_are_refused(call: Callable[[], Any], fragment: str) -> None:
    # source: common practice (before: numpy's "truth value of an array is ambiguous" or
    # pandas' "boolean value of NA is ambiguous")
    _fails_with(call, fragment)


def test_compare_coefficients_near_1e300_refuses_with_the_verdict() -> None:
    # source: issue #16 (before: numpy LinAlgError "Singular matrix" from the score test)
    _fails_with(lambda: lt.compare_coefficients(LIN, [1e300, -1e300], X=X, y=YL, weights=W),
                "coefficients", "plainly disagree")
    _fails_with(lambda: lt.compare_coefficients(LOGI, [1e300, 1e300], X=X, y=YB, weights=W),
                "plainly disagree")


def test_score_test_at_a_singular_information_is_refused() -> None:
    # source: common practice -- a constant column leaves the information singular (before:
    # numpy LinAlgError "Singular matrix")
    _fails_with(lambda: lt.compare_coefficients(LIN, LIN.coefficients, X=np.ones((N, 2)), y=YL),
                "the score test at the delivered coefficients is undefined", "compare without y=")


def test_implied_l2_of_subnormal_coefficients() -> None:
    # source: exact algebra -- l2 = -g'b / b'b; b = 5e-324 * (1, 1) made b'b underflow to 0
    # (before: ZeroDivisionError).  The answer is beyond float64, so it is refused by name.
    _fails_with(lambda: lt.implied_l2(X, YB, [5e-324, 5e-324]), "the implied l2 exceeds the float64 range")
    # dividing b by a power of two scales l2 by it exactly (the scaled products are exact)
    beta = LOGI.coefficients * 1.5
    a = lt.implied_l2(X, YB, beta, LOGI.intercept, weights=W)
    b = lt.implied_l2(X, YB, beta * 2.0**-40, LOGI.intercept, weights=W)
    assert np.isfinite(b.l2) and b.gradient_norm > 0 and a.l2 != b.l2


def test_separation_check_is_scale_free_and_warning_free() -> None:
    """Invariant: scaling a column by any power of ten decides nothing: the same verdict and
    rows, the direction rescaled (before: RuntimeWarnings, and SciPy's ValueError for inf
    in the programme).  Source: Albert & Anderson (1984): separation is a property of the
    signs of the linear predictor, unchanged by rescaling a column."""
    base = lt.check_separation(XSEP, YB)
    for scale in (1e300, 1e-300, 1e-320):
        with warnings.catch_warnings():
            warnings.simplefilter("error")
            got = lt.check_separation(XSEP * [scale, 1.0], YB, weights=np.full(N, 1e308))
        assert got.kind == base.kind and np.array_equal(got.rows, base.rows)


class _Failed:
    status, x, message = 4, None, "HiGHS Status 0: Not Set"


def test_solver_status_becomes_a_sentence_with_a_remedy(monkeypatch: pytest.MonkeyPatch) -> None:
    # source: issue #16 -- "HiGHS Status 0: Not Set" reached the user; the status is now
    # explained (scipy.optimize.linprog's documented status 4: numerical difficulties)
    import scipy.optimize

    monkeypatch.setattr(scipy.optimize, "linprog", lambda *a, **k: _Failed())
    message = _fails_with(lambda: lt.check_separation(XSEP, YB), "ran into numerical difficulties",
                          "rescale the columns", kind=lt.LintoolsError)
    assert "HiGHS" not in message and "Status" not in message


def test_missing_scipy_is_an_input_error_saying_how_to_install(monkeypatch: pytest.MonkeyPatch) -> None:
    # source: the README's promise that no foreign exception escapes (common practice: a missing optional package is named with its remedy)
    import sys

    monkeypatch.setitem(sys.modules, "scipy", None)
    monkeypatch.setitem(sys.modules, "scipy.optimize", None)
    _fails_with(lambda: lt.check_separation(XSEP, YB), "needs SciPy", "pip install scipy")
    fit = lt.logistic(X, YB)  # a fit does not need the check when nothing diverges
    assert fit.convergence.converged


def test_distribution_messages_are_plain_words() -> None:
    # source: issue #16 ("chi2_sf: argument 'x' is NaN" reached a user)
    from lintools.support import distributions as dist

    message = _fails_with(lambda: dist.chi2_sf(np.nan, 3.0), "the chi-square tail probability (a p-value) cannot be "
                          "computed", "is NaN (not a number)", "check the data")
    assert "chi2_sf" not in message


# The defects the battery listed as known (its former KNOWN list) until they were fixed;
# each test fails on the code before the fix (a TypeError, a KeyError, numpy's ValueError,
# an AttributeError, an OverflowError, a RuntimeWarning or a call that never returned).


@pytest.mark.parametrize("names, fragment", [
    (3, "names must be a list of str; got 3"),
    (True, "names must be a list of str; got True"),
    (np.array("x1"), "names must be a list of str"),
    (object(), "names must be a list of str"),
    ({"a", "b"}, "names is a set, which has no order of its own"),
    ([1, 2], "names entry 0 is 1 (int), not text"),
], ids=["int", "bool", "0d-array", "object", "set", "numbers"])
def test_names_that_are_not_a_sequence_of_text_are_refused_by_name(names: Any, fragment: str) -> None:
    # source: common practice (before: TypeError "'int' object is not iterable"; a set or
    # numbers were taken, the set in an order that changes between runs of Python)
    for fit in (lambda: lt.least_squares(X, YL, names=names), lambda: lt.logistic(X, YB, names=names),
                lambda: lt.softmax(X, Y3, names=names), lambda: lt.check_separation(XSEP, YB, names=names)):
        _fails_with(fit, fragment, "one name per column")


@pytest.mark.parametrize("argument, value, fragment", [
    ("features", 3, "features must be a list of str"),
    ("features", {"x1", "x2"}, "features is a set, which has no order of its own"),
    ("extra", object(), "extra must be a list of str"),
    ("categorical", 1.5, "categorical must be a list of str"),
    ("exclude", np.array(0), "exclude must be a list of str"),
    ("missing_values", [None], "missing_values entry 0 is None"),
    ("reference_levels", ["g", "u"], "reference_levels must be a dict of column name to level"),
    ("reference_levels", {"g": 1}, "reference_levels must map column names (str) to levels (str)"),
    ("decimal", np.array([".", ","]), "decimal must be '.' or ','"),
    ("drop_missing", np.array([True, False]), "drop_missing must be True or False"),
    ("drop_missing", pd.NA, "drop_missing must be True or False"),
])
def test_read_table_arguments_are_type_checked_by_name(tmp_path: Path, argument: str, value: Any,
                                                       fragment: str) -> None:
    # source: common practice (before: TypeError "not iterable", ValueError "truth value of an
    # array is ambiguous" or "dictionary update sequence element")
    path = tmp_path / "t.csv"
    path.write_text("x1,x2,g,y\n1,2,u,0\n3,4,v,1\n5,7,u,1\n")
    _fails_with(lambda: lt.read_table(path, target="y", **{argument: value}), fragment)


def test_replace_and_target_of_the_model_writers_are_checked(tmp_path: Path) -> None:
    # source: common practice (before: numpy's "truth value of an array is ambiguous",
    # pandas' "boolean value of NA is ambiguous", and a TypeError from the XML writer)
    for bad in (np.array([True, False]), pd.NA, "yes", 1):
        _fails_with(lambda: lt.save(LIN, tmp_path / "m.json", replace=bad), "replace must be True or False")
        _fails_with(lambda: lt.write_pmml(LIN, tmp_path / "m.pmml", replace=bad), "replace must be True or False")
    for bad in (np.array(["y", "z"]), 5, pd.NA):
        _fails_with(lambda: lt.write_pmml(LOGI, tmp_path / "m.pmml", target=bad), "target must be a str")
    assert not list(tmp_path.iterdir())  # nothing written


@pytest.mark.parametrize("fit", [LIN, LOGI, SOFT], ids=["least_squares", "logistic", "softmax"])
def test_a_delivered_model_is_written_back_as_the_same_model(tmp_path: Path, fit: Any) -> None:
    """Invariant: read_pmml(write_pmml(read_pmml(f))) is the model of f, bit for bit (before:
    AttributeError 'positive_class' for a delivered logistic model).  Source: PMML 4.4
    RegressionModel (the positive class's table first, the other empty) and exact repr
    round trips of floats (Python's repr is the shortest string that reads back exactly)."""
    lt.write_pmml(fit, tmp_path / "a.pmml")
    first = lt.read_pmml(tmp_path / "a.pmml")
    lt.write_pmml(first, tmp_path / "b.pmml")
    again = lt.read_pmml(tmp_path / "b.pmml")
    assert (again.kind, again.names, again.classes, again.target) == (first.kind, first.names, first.classes,
                                                                      first.target)
    assert np.array_equal(again.coefficients, first.coefficients)
    assert np.array_equal(again.intercept, first.intercept)
    assert np.array_equal(again.mean(X), first.mean(X))


def test_a_delivered_model_that_cannot_be_written_is_refused(tmp_path: Path) -> None:
    # source: common practice -- a hand-made model whose coefficients do not match its names
    bad = lt.DeliveredModel(kind="logistic", names=("a", "b"), coefficients=np.array([1.0]), intercept=0.0,
                            classes=("1", "0"))
    _fails_with(lambda: lt.write_pmml(bad, tmp_path / "m.pmml"), "coefficients must be finite numbers of shape (2,)")


@pytest.mark.parametrize("call", [
    lambda b: lt.brier(YB, P, bins=b), lambda b: lt.reliability(YB, P, bins=b),
    lambda b: lt.calibration_error(YB, P, bins=b), lambda b: lt.calibration_error(Y3, P3, bins=b),
    lambda b: lt.hosmer_lemeshow(YB, P, groups=b),
], ids=["brier", "reliability", "calibration_error", "calibration_error-multiclass", "hosmer_lemeshow"])
def test_bins_and_groups_have_a_documented_upper_bound(call: Callable[[int], Any]) -> None:
    # source: common practice (before: numpy's "Maximum allowed size exceeded" or an
    # IndexError for 2**63 bins, and Hosmer-Lemeshow with 2**63 groups never returned)
    for too_many in (1_000_001, 2**63, 2**100):
        _fails_with(lambda: call(too_many), "must be at most 1000000", "pass fewer")
    call(1_000_000)  # the bound itself (lintools.metrics.binning.MAX_BINS) is accepted


def test_hosmer_lemeshow_with_more_groups_than_rows_keeps_the_formed_groups() -> None:
    """Invariant: once every distinct forecast has a group of its own (here from 96 groups
    on: no row's weight share is below 1/96), more groups only add empty groups, which are
    dropped (source: the cut rule of Hosmer & Lemeshow 1980 as documented)."""
    a = lt.hosmer_lemeshow(YB, P, weights=W, groups=1000)
    b = lt.hosmer_lemeshow(YB, P, weights=W, groups=10**6)
    assert a.statistic == b.statistic and a.degrees_of_freedom == b.degrees_of_freedom == N - 2


@pytest.mark.parametrize("apply, name", [(PLATT.apply, "scores"), (TEMP2.apply, "logits"), (ISO.apply, "p")],
                         ids=["platt", "temperature", "isotonic"])
def test_map_apply_refuses_a_ragged_list_by_name(apply: Callable[[Any], Any], name: str) -> None:
    # source: common practice (before: numpy's ValueError "inhomogeneous shape")
    _fails_with(lambda: apply([[1.0, 2.0], [3.0]]), f"{name} could not be read as an array", "rectangular")
