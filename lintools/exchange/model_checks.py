"""Consistency of a fit record read from (or written to) a model file.

Types are checked while decoding (:mod:`lintools.exchange.model_files`); here every field is checked
against the others, so that a record that passes gives numbers whose methods
(``report``, ``mean``, ``linear_predictor``, ``labels``, ``coefficient_table``) and
:func:`lintools.compare_coefficients` work, and a damaged or edited file is refused
with the field named:

* shapes: coefficients (p,) or, for softmax, (p, K) with one column per class;
  standard errors of the same shape; covariance square with one row per estimated
  parameter; p the number of names;
* the intercept is present exactly when ``with_intercept`` says so (otherwise it is 0
  and has no standard error);
* coefficients, intercepts, standard errors, covariance, l2, counts and degrees of
  freedom finite; standard errors, l2 and counts non-negative (counts positive);
  standard errors equal to the square roots of the covariance's diagonal;
* classes: two distinct labels for a logistic model, the positive class among them; at
  least two for softmax, the reference class among them (and pinned at zero) or the
  symmetric form with l2 > 0;
* integers (rank, iterations, degrees of freedom) within their ranges; names usable
  (:func:`lintools.support.validate.check_names`); choices (covariance type, weight type)
  known;
* categorical fields agree with the names (:func:`lintools.support.categories.field_layout`).
"""

from __future__ import annotations

import math
from typing import Any, Callable

import numpy as np

from ..models.kinds import KINDS
from ..support.categories import field_layout
from ..support.errors import InputError
from ..support.validate import check_names

__all__ = ["check_record"]

Refuse = Callable[[str, str], Exception]

#: Relative tolerance for standard errors against the covariance's diagonal and for the
#: covariance's symmetry: written files agree exactly; edited ones are caught.
_RTOL = 1e-10


def _number(value: Any, field: str, refuse: Refuse, *, low: float | None = None, positive: bool = False,
            nan: bool = False, inf: bool = False) -> None:
    v = float(value)
    if math.isnan(v):
        if not nan:
            raise refuse(field, "is NaN; it must be a number")
        return
    if math.isinf(v) and not inf:
        raise refuse(field, f"is {v}; it must be finite")
    if positive and not v > 0:
        raise refuse(field, f"is {v!r}; it must be > 0")
    if low is not None and v < low:
        raise refuse(field, f"is {v!r}; it must be >= {low:g}")


def _array(value: Any, shape: tuple, field: str, refuse: Refuse, *, nonnegative: bool = False) -> np.ndarray:
    arr = np.asarray(value)
    if arr.dtype != np.float64:
        raise refuse(field, f"has dtype {arr.dtype}; it must hold float64 numbers")
    if arr.shape != shape:
        raise refuse(field, f"has shape {arr.shape} but the model's names and classes give {shape}")
    finite = np.isfinite(arr)
    if not finite.all():
        raise refuse(field, f"holds {_at(arr, ~finite)}; it must be finite")
    if nonnegative and arr.size and arr.min() < 0:
        raise refuse(field, f"holds {_at(arr, arr < 0)}; it must be >= 0")
    return arr


def _at(arr: np.ndarray, mask: np.ndarray) -> str:
    """The first entry where ``mask`` holds, as 'value at entry i' (or '(i, j)')."""
    index = tuple(int(i) for i in np.argwhere(mask)[0])
    where = "" if not index else f" at entry {index[0] if len(index) == 1 else index}"
    return f"{float(arr[index])!r}{where}"


def _as_floats(value: Any, shape: tuple, field: str, refuse: Refuse) -> np.ndarray:
    """A field typed ``Any`` (intercepts and their standard errors): a number for a
    single-output model, a float64 array of one entry per class for softmax."""
    if shape == () and isinstance(value, (int, float)) and not isinstance(value, bool):
        return np.asarray(float(value))
    if shape != () and isinstance(value, np.ndarray):
        return value
    need = "a number" if shape == () else f"an array of {shape[0]} numbers, one per class"
    raise refuse(field, f"holds a {type(value).__name__}; the model needs {need}")


def _integer(value: int, field: str, refuse: Refuse, low: int, high: int) -> None:
    if not low <= value <= high:
        raise refuse(field, f"is {value}; it must lie between {low} and {high}")


def _labels(classes: tuple, field: str, refuse: Refuse, *, exactly: int | None = None) -> None:
    for i, c in enumerate(classes):
        if isinstance(c, float) and not math.isfinite(c):
            raise refuse(f"{field}[{i}]", f"is {c}; a class label must be finite")
    if len(set(classes)) != len(classes):
        raise refuse(field, f"{classes!r:.120} repeats a label; the classes must be distinct")
    if exactly is not None and len(classes) != exactly:
        raise refuse(field, f"has {len(classes)} labels; a logistic model has exactly {exactly} "
                            "(a model of more classes is a softmax model)")
    if len(classes) < 2:
        raise refuse(field, f"has {len(classes)} label(s); a classifier needs at least 2")


def _label_in(label: Any, classes: tuple) -> bool:
    """Whether ``label`` (a field typed ``Any``) is a label and one of ``classes``."""
    return isinstance(label, (str, int, float, bool)) and label in classes


def check_record(rec: Any, refuse: Refuse) -> None:
    """Raise ``refuse(field, problem)`` for the first field of ``rec`` that disagrees with
    the others (see the module docstring); return None when the record is consistent."""
    kind = KINDS[rec.kind]
    try:
        check_names(rec.names, len(rec.names), None)
    except InputError as exc:
        raise refuse("record.names", f"cannot be used ({exc})") from None
    p = len(rec.names)
    wi = bool(rec.with_intercept)
    if kind.per_class:
        _labels(rec.classes, "record.classes", refuse)
        K = len(rec.classes)
        if rec.reference_class is None:
            if not rec.l2 > 0:
                raise refuse("record.reference_class", "is null (the symmetric form) but l2 is 0; the symmetric "
                                                       "form is identified only with l2 > 0")
            free = list(range(K))
        elif not _label_in(rec.reference_class, rec.classes):
            raise refuse("record.reference_class", f"{rec.reference_class!r:.80} is not one of the classes")
        else:
            ref = rec.classes.index(rec.reference_class)
            free = [k for k in range(K) if k != ref]
        coef_shape, b_shape, n_free = (p, K), (K,), (p + wi) * len(free)
    else:
        coef_shape, b_shape, n_free = (p,), (), p + wi
        if kind.classifier:
            _labels(rec.classes, "record.classes", refuse, exactly=kind.classes)
            if not _label_in(rec.positive_class, rec.classes):
                raise refuse("record.positive_class", f"{rec.positive_class!r:.80} is not one of the classes "
                                                      f"{rec.classes!r:.80}")
    B = _array(rec.coefficients, coef_shape, "record.coefficients", refuse)
    S = _array(rec.standard_errors, coef_shape, "record.standard_errors", refuse, nonnegative=True)
    b = _array(_as_floats(rec.intercept, b_shape, "record.intercept", refuse), b_shape, "record.intercept", refuse)
    if wi:
        if rec.intercept_standard_error is None:
            raise refuse("record.intercept_standard_error", "is missing but with_intercept is true")
        se_b = _array(_as_floats(rec.intercept_standard_error, b_shape, "record.intercept_standard_error", refuse),
                      b_shape, "record.intercept_standard_error", refuse, nonnegative=True)
    else:
        if np.any(b != 0.0):
            raise refuse("record.intercept", f"is {rec.intercept!r:.80} but with_intercept is false; a model "
                                             "without an intercept has intercept 0 (set with_intercept true if "
                                             "the model has one)")
        if rec.intercept_standard_error is not None:
            raise refuse("record.intercept_standard_error", "is given but with_intercept is false")
        se_b = np.zeros(b_shape)
    V = _array(rec.covariance, (n_free, n_free), "record.covariance", refuse)
    scale = float(np.max(np.abs(V))) if V.size else 0.0
    if V.size and float(np.max(np.abs(V - V.T))) > _RTOL * scale:
        raise refuse("record.covariance", "is not symmetric")
    # standard errors in covariance order: intercept first, then the slopes, per free class
    if kind.per_class:
        A = np.vstack([se_b[None, :], S]) if wi else S
        se = np.ravel(A[:, free], order="F")
        for k in sorted(set(range(len(rec.classes))) - set(free)):
            if np.any(B[:, k]) or np.any(S[:, k]) or (wi and (b[k] != 0 or se_b[k] != 0)):
                raise refuse("record.coefficients", f"column {k} belongs to the reference class "
                                                    f"{rec.reference_class!r:.40} but is not all zero")
    else:
        se = np.concatenate([np.atleast_1d(se_b), S]) if wi else S
    root = np.sqrt(np.maximum(np.diag(V), 0.0))
    if se.size and float(np.max(np.abs(se - root) / np.maximum(np.maximum(se, root), 1e-300))) > _RTOL:
        j = int(np.argmax(np.abs(se - root)))
        raise refuse("record.standard_errors", f"disagree with the square root of the covariance's diagonal "
                                               f"(entry {j}: {se[j]!r} against {root[j]!r})")
    _number(rec.l2, "record.l2", refuse, low=0.0)
    _number(rec.n_observations, "record.n_observations", refuse, positive=True)
    conv = rec.convergence
    if type(conv).__name__ != "Convergence":
        raise refuse("record.convergence", "is not a convergence record")
    _integer(conv.iterations, "record.convergence.iterations", refuse, 0, 2**31)
    _number(conv.gradient_norm, "record.convergence.gradient_norm", refuse, low=0.0, nan=True, inf=True)
    if not kind.classifier:
        _check_linear(rec, p, wi, refuse)
    else:
        _integer(rec.lr_degrees_of_freedom, "record.lr_degrees_of_freedom", refuse, 0,
                 p * kind.outputs(len(rec.classes)))
    if kind.classes == 2:
        _check_binary(rec, p, wi, refuse)
    if getattr(rec, "categorical_fields", ()):
        try:
            field_layout(rec.names, rec.categorical_fields)
        except InputError as exc:
            raise refuse("record.categorical_fields", f"disagree with the names ({exc})") from None


def _check_binary(rec: Any, p: int, wi: bool, refuse: Refuse) -> None:
    """The fields of a binary model's record: Firth's penalty and profile intervals."""
    if rec.firth and rec.l2 != 0:
        raise refuse("record.firth", "is true but l2 is not 0; Firth's penalty is not combined with l2")
    if rec.profile_intervals is not None:
        _number(rec.profile_level, "record.profile_level", refuse, positive=True)
        if not rec.profile_level < 1:
            raise refuse("record.profile_level", f"is {rec.profile_level!r}; it must lie below 1")
        arr = np.asarray(rec.profile_intervals)
        if arr.dtype != np.float64 or arr.shape != (p + wi, 2):
            raise refuse("record.profile_intervals", f"has shape {arr.shape}; one row (from, to) per "
                                                     f"coefficient gives {(p + wi, 2)}")


_COVARIANCE_TYPES = ("classical", "HC0", "HC1", "HC2", "HC3")


def _check_linear(rec: Any, p: int, wi: bool, refuse: Refuse) -> None:
    # the residual degrees of freedom of a t reference distribution; below 0.01 the t
    # quantile is not computed (and no fit of a sensible size has so few)
    _number(rec.degrees_of_freedom, "record.degrees_of_freedom", refuse, low=0.01)
    _number(rec.residual_standard_error, "record.residual_standard_error", refuse, low=0.0)
    _integer(rec.rank, "record.rank", refuse, 0, p + wi)
    if rec.covariance_type not in _COVARIANCE_TYPES:
        raise refuse("record.covariance_type", f"{rec.covariance_type!r:.40} is not one of {', '.join(_COVARIANCE_TYPES)}")
    if rec.weight_type not in ("case", "precision"):
        raise refuse("record.weight_type", f"{rec.weight_type!r:.40} is not 'case' or 'precision'")
    unknown = [a for a in rec.aliased if a not in rec.names]
    if unknown or len(set(rec.aliased)) != len(rec.aliased):
        raise refuse("record.aliased", f"{rec.aliased!r:.80} must list distinct names of the model")
    for name in ("leverage", "cooks_distance"):
        arr = getattr(rec, name)
        if arr is not None and (arr.ndim != 1 or arr.dtype != np.float64):
            raise refuse(f"record.{name}", f"has shape {arr.shape}; it must be one number per row")
    if rec.leverage is not None and rec.cooks_distance is not None and rec.leverage.shape != rec.cooks_distance.shape:
        raise refuse("record.cooks_distance", "has another length than record.leverage; both have one number per row")
