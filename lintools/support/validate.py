"""Input checking: array-likes to float arrays, with messages that name the problem.

Every public function of lintools passes its arguments through the helpers here, so
the wording of errors is uniform: the argument, the position (row, column or label),
and what to do about it.  Nothing here modifies its input; conversions copy when the
input is not already a float64 array, and never write to the caller's array.

Accepted array-likes: NumPy arrays, nested lists and tuples, objects that implement
``__array__`` and DataFrame-like objects (anything with a ``columns`` attribute and a
``to_numpy`` method or ``__array__``), whose column labels become coefficient names.
pandas is never imported.

Refused with a named :class:`InputError` and the remedy, because a number would be made
up otherwise:

* dates and durations (``datetime64`` / ``timedelta64`` arrays, DataFrames with such a
  column, ``datetime`` / ``timedelta`` objects in object arrays): NumPy would turn them
  into nanoseconds since 1970 without a word; convert them to numbers explicitly (days
  since a reference date, a year, a duration in hours) in the unit the model should use;
* masked arrays (``numpy.ma.MaskedArray``) with at least one masked entry: NumPy would
  drop the mask and fit the hidden fill values; fill the masked entries or drop their
  rows.  A masked array with no masked entry is its data and is accepted as such (the
  mask then hides nothing, so no number depends on it);
* values beyond the float64 range (a ``longdouble`` of 1e400, a Python int of 10**400).
"""

from __future__ import annotations

import datetime
import decimal
import math
import numbers
from typing import Any, Sequence

import numpy as np

from .errors import InputError

#: the intercept's name in tables, model files and messages (never a column name)
INTERCEPT_NAME = "(intercept)"

__all__ = [
    "as_matrix",
    "as_vector",
    "as_labels",
    "as_array",
    "as_weights",
    "as_offset",
    "power_of_two",
    "weight_scale",
    "read_only",
    "ReadOnlyArrays",
    "check_names",
    "check_flag",
    "as_texts",
    "name_problem",
    "text_problem",
    "MAX_NAME_LENGTH",
    "check_nonnegative",
    "check_choice",
    "is_one_of",
    "check_positive_int",
    "check_probabilities",
]


def _column_names(obj: Any) -> tuple[str, ...] | None:
    cols = getattr(obj, "columns", None)
    if cols is None or isinstance(obj, np.ndarray):
        return None
    try:
        return tuple(str(c) for c in list(cols))
    except TypeError:
        return None


#: the remedy for dates and durations, which NumPy would read as nanoseconds since 1970
DATE_REMEDY = (
    "convert them to numbers explicitly, in the unit the model should use (for example days "
    "since a reference date, or a duration in hours)"
)
#: the remedy for masked entries, whose hidden fill values NumPy would read as data
MASK_REMEDY = "fill the masked entries (numpy.ma.filled) or drop their rows (numpy.ma.compress_rows)"


def _is_date(value: Any) -> bool:
    """A date, time or duration object (datetime, numpy datetime64/timedelta64, pandas Timestamp)."""
    return isinstance(value, (datetime.date, datetime.timedelta, np.datetime64, np.timedelta64))


def _refuse_dates_and_masks(obj: Any, name: str, names: Sequence[str] | None) -> None:
    """Raise an InputError for a masked entry, or a date or duration column, before any conversion."""
    if isinstance(obj, np.ma.MaskedArray):
        mask = np.ma.getmaskarray(obj)
        if mask.any():
            index = tuple(int(i) for i in np.argwhere(mask)[0])
            raise InputError(
                f"{name} is a masked array with {int(mask.sum())} masked entr"
                f"{'y' if mask.sum() == 1 else 'ies'} (the first at {_position(index, names)}); "
                f"lintools does not read masks: {MASK_REMEDY}"
            )
    if hasattr(obj, "columns") and hasattr(obj, "dtypes") and not isinstance(obj, np.ndarray):
        try:  # a DataFrame: one dtype per column
            kinds = [getattr(d, "kind", "O") for d in list(obj.dtypes)]
        except TypeError:
            kinds = []
        for j, kind in enumerate(kinds):
            if kind in "mM":
                what = "dates or times (datetime64)" if kind == "M" else "durations (timedelta64)"
                where = f"column {j}" + (f" ('{names[j]}')" if names is not None and j < len(names) else "")
                raise InputError(f"{name} {where} holds {what}; {DATE_REMEDY}")
    kind = getattr(getattr(obj, "dtype", None), "kind", None)
    if isinstance(kind, str) and kind in "mM":
        what = "dates or times (datetime64)" if kind == "M" else "durations (timedelta64)"
        raise InputError(f"{name} holds {what}; {DATE_REMEDY}")


def _to_numpy(obj: Any) -> Any:
    if isinstance(obj, np.ma.MaskedArray):
        return np.ma.getdata(obj)  # nothing is masked (checked first): the data are the values
    if hasattr(obj, "to_numpy") and not isinstance(obj, np.ndarray):
        try:
            return obj.to_numpy()
        except Exception:  # pragma: no cover - exotic objects fall back to asarray
            return obj
    return obj


def _first_nonnumeric(arr: np.ndarray) -> tuple[tuple[int, ...], Any] | None:
    for index in np.ndindex(arr.shape):
        value = arr[index]
        if isinstance(value, (bool, np.bool_)):
            continue
        if isinstance(value, (numbers.Real, decimal.Decimal)) and not _is_date(value):
            continue
        if isinstance(value, str):
            try:
                float(value)
                continue
            except ValueError:
                return index, value
        return index, value
    return None


def _position(index: tuple[int, ...], names: Sequence[str] | None) -> str:
    if len(index) == 1:
        return f"row {index[0]}"
    row, col = index[0], index[1]
    label = f"column {col}"
    if names is not None and col < len(names):
        label = f"column {col} ('{names[col]}')"
    return f"row {row}, {label}"


def as_float(obj: Any, name: str, names: Sequence[str] | None = None) -> np.ndarray:
    _refuse_dates_and_masks(obj, name, names)
    raw = _to_numpy(obj)
    try:
        arr = np.asarray(raw)
    except Exception as exc:  # ragged lists and the like
        raise InputError(
            f"{name} could not be read as an array ({exc}); pass a rectangular array or "
            "nested list of numbers"
        ) from None
    _refuse_dates_and_masks(arr, name, names)
    if arr.ndim == 0 and (arr.dtype == object or arr.dtype.kind in "USV"):
        value = arr.item() if arr.dtype.kind != "V" else raw
        if isinstance(value, str) or isinstance(value, (bool, np.bool_)) or not isinstance(value, numbers.Real):
            raise InputError(
                f"{name} is a single {type(value).__name__} ({value!r:.60}), not an array of numbers; "
                "pass an array (or nested list) of numbers"
            )
    if arr.dtype == object or arr.dtype.kind in "USV":
        bad = _first_nonnumeric(arr) if arr.dtype.kind != "V" else ((0,), "structured")
        if bad is not None:
            index, value = bad
            value = value.item() if isinstance(value, np.generic) else value
            if _is_date(value):
                raise InputError(
                    f"{name} has a date, time or duration at {_position(index, names)}: {value!r}; {DATE_REMEDY}"
                )
            raise InputError(
                f"{name} has a value that is not a number at {_position(index, names)}: "
                f"{value!r}; convert text columns to numbers (or to indicator columns) "
                "before fitting"
            )
    if arr.dtype.kind == "c":
        raise InputError(f"{name} is complex; pass real numbers")
    if arr.dtype == np.float64:
        # no copy: a read-only view, so nothing in lintools can write into the caller's data
        out = arr.view()
        out.flags.writeable = False
        return out
    try:
        with np.errstate(over="raise"):
            out = np.array(arr, dtype=np.float64, copy=True)
    except (FloatingPointError, OverflowError):
        raise InputError(
            f"{name} has a value beyond the float64 range (about 1.8e308); rescale it (divide by a "
            "power of ten) before fitting"
        ) from None
    except (TypeError, ValueError, ArithmeticError) as exc:
        raise InputError(f"{name} could not be converted to float64 ({exc}); pass numbers") from None
    return out


def check_finite(arr: np.ndarray, name: str, names: Sequence[str] | None = None) -> None:
    """Raise an InputError naming the first NaN or infinite entry of ``arr`` (row, column)."""
    _check_finite(arr, name, names)


def _check_finite(arr: np.ndarray, name: str, names: Sequence[str] | None = None) -> None:
    # one summing pass decides the usual case: a NaN or infinity makes the sum non-finite;
    # only a non-finite sum (bad entries, or an overflow of finite ones) needs the full test
    with np.errstate(over="ignore", invalid="ignore"):
        if arr.size and np.isfinite(np.add.reduce(arr, axis=None)):
            return
    finite = np.isfinite(arr)
    if not finite.all():
        index = tuple(int(i) for i in np.argwhere(~finite)[0])
        value = arr[index]
        raise InputError(
            f"{name} has a non-finite value ({value}) at {_position(index, names)}; "
            "remove or impute the missing or infinite values first"
        )


def as_matrix(
    X: Any, name: str = "X", *, min_rows: int = 1, allow_empty_columns: bool = False, check_finite: bool = True
) -> tuple[np.ndarray, tuple[str, ...] | None]:
    """Return ``X`` as a 2-D float64 array (a read-only view when it already is one, else a
    new array) and its column names (or None).

    Raises
    ------
    InputError
        If ``X`` is not 2-D, is empty, holds text that is not a number, or holds NaN or
        infinite values (the message names the first bad row and column).  With
        ``check_finite=False`` the caller takes on the finiteness check (the least-squares
        Gram pass detects a non-finite entry for free and then calls :func:`check_finite`).
    """
    if X is None:
        raise InputError(f"{name} is None; pass a 2-D array of shape (rows, columns)")
    names = _column_names(X)
    arr = as_float(X, name, names)
    if arr.ndim == 1:
        raise InputError(
            f"{name} is 1-D with shape {arr.shape}; pass a 2-D array "
            f"(for a single feature use {name}.reshape(-1, 1))"
        )
    if arr.ndim != 2:
        raise InputError(f"{name} must be 2-D (rows, columns); got shape {arr.shape}")
    if arr.shape[0] < min_rows:
        raise InputError(
            f"{name} has {arr.shape[0]} rows; at least {min_rows} needed"
        )
    if arr.shape[1] == 0 and not allow_empty_columns:
        raise InputError(f"{name} has no columns; pass at least one feature column")
    if check_finite:
        _check_finite(arr, name, names)
    return arr, names


def as_vector(y: Any, name: str = "y", n: int | None = None) -> np.ndarray:
    """Return ``y`` as a new 1-D float64 array of length ``n`` with finite values."""
    if y is None:
        raise InputError(f"{name} is None; pass a 1-D array of numbers")
    arr = as_float(y, name)
    if arr.ndim == 2 and 1 in arr.shape and arr.size > 0:
        raise InputError(
            f"{name} has shape {arr.shape}; pass a 1-D array ({name}.ravel() if it is "
            "a single column)"
        )
    if arr.ndim != 1:
        raise InputError(f"{name} must be 1-D (one value per row); got shape {arr.shape}")
    if n is not None and arr.shape[0] != n:
        raise InputError(
            f"{name} has {arr.shape[0]} entries but X has {n} rows; pass one value per row"
        )
    if arr.shape[0] == 0:
        raise InputError(f"{name} is empty; pass at least one value")
    _check_finite(arr, name)
    return arr


def _is_missing(value: Any) -> bool:
    if value is None:
        return True
    if isinstance(value, (float, np.floating)):
        return math.isnan(float(value))
    return False


def as_array(obj: Any, name: str) -> np.ndarray:
    """``obj`` as a NumPy array of any dtype (labels, group keys, indicator matrices):
    masked entries, dates and durations, and ragged nesting are refused by name."""
    _refuse_dates_and_masks(obj, name, _column_names(obj))
    try:
        arr = np.asarray(_to_numpy(obj))
    except Exception as exc:  # ragged lists and the like
        raise InputError(f"{name} could not be read as an array ({exc}); pass one value per row") from None
    _refuse_dates_and_masks(arr, name, None)
    return arr


def as_labels(y: Any, name: str = "y", n: int | None = None) -> tuple[tuple, np.ndarray]:
    """Return the sorted distinct labels of ``y`` and the code (index into them) of each row.

    Labels may be of any hashable, mutually comparable type (bool, int, float, str).
    Missing values (None, NaN) are an error naming the row.
    """
    if y is None:
        raise InputError(f"{name} is None; pass one label per row")
    arr = as_array(y, name)
    if arr.dtype.kind in "cV":
        what = "complex numbers" if arr.dtype.kind == "c" else "structured records"
        raise InputError(f"{name} holds {what}; pass one label (a number, text or bool) per row")
    if arr.ndim == 2 and 1 in arr.shape and arr.size > 0:
        raise InputError(
            f"{name} has shape {arr.shape}; pass a 1-D array of labels ({name}.ravel())"
        )
    if arr.ndim != 1:
        raise InputError(f"{name} must be 1-D (one label per row); got shape {arr.shape}")
    if n is not None and arr.shape[0] != n:
        raise InputError(
            f"{name} has {arr.shape[0]} labels but X has {n} rows; pass one label per row"
        )
    if arr.shape[0] == 0:
        raise InputError(f"{name} is empty; pass at least one label")
    if arr.dtype.kind in "biufUS":  # one plain type: NumPy's sort, the same labels and order
        if arr.dtype.kind == "f":
            bad = np.flatnonzero(~np.isfinite(arr))
            if bad.size:
                i = int(bad[0])
                if np.isnan(arr[i]):
                    raise InputError(f"{name} has a missing label at row {i}; drop or label that row first")
                raise InputError(f"{name} has an infinite label at row {i}; labels must be finite")
        uniq, codes = np.unique(arr, return_inverse=True)
        return tuple(uniq.tolist()), codes.reshape(-1).astype(np.intp)
    values = arr.tolist()
    for i, v in enumerate(values):
        if _is_missing(v):
            raise InputError(
                f"{name} has a missing label at row {i}; drop or label that row first"
            )
        if isinstance(v, float) and not math.isfinite(v):
            raise InputError(f"{name} has an infinite label at row {i}; labels must be finite")
        if _is_date(v):
            raise InputError(
                f"{name} has a date, time or duration at row {i} ({v!r}); {DATE_REMEDY} "
                f"(or to text, {name}.astype(str), to use them as categories)"
            )
        try:
            hash(v)
        except TypeError:
            raise InputError(
                f"{name} has a {type(v).__name__} at row {i}, which cannot be a label; pass one "
                "label (a number, text or bool) per row"
            ) from None
    try:
        classes = tuple(sorted(set(values)))
    except (TypeError, ValueError):  # ValueError: pd.NA and the like refuse a truth value
        raise InputError(
            f"{name} mixes label types that cannot be ordered (for example numbers and "
            "text); use one type for every label"
        ) from None
    lookup = {c: k for k, c in enumerate(classes)}
    codes = np.fromiter((lookup[v] for v in values), dtype=np.intp, count=len(values))
    return classes, codes


def as_weights(weights: Any, n: int, name: str = "weights") -> np.ndarray:
    """Return case weights as a new float64 array: ones when None; else checked.

    Weights must be finite and non-negative with a positive total.
    """
    if weights is None:
        return np.ones(n)
    w = as_vector(weights, name, n)
    if (w < 0).any():
        i = int(np.argmax(w < 0))
        raise InputError(
            f"{name} has a negative value ({w[i]}) at row {i}; weights must be >= 0"
        )
    if not np.any(w > 0):  # not the sum: weights of 1e308 would overflow it
        raise InputError(f"{name} are all zero; at least one row needs a positive weight")
    return w


def power_of_two(value: float) -> float:
    """The power of two nearest below ``value`` (> 0, finite): dividing by it is exact.

    Used to bring weights, a response or a column to a moderate size before any sum or
    product, so that results neither overflow nor underflow and the arithmetic on the
    scaled values is bit-for-bit that on the unscaled ones for any power-of-two factor
    (``math.frexp`` splits off the exponent exactly).
    """
    if not (value > 0 and math.isfinite(value)):
        return 1.0
    return math.ldexp(1.0, math.frexp(value)[1] - 1)


def weight_scale(w: np.ndarray) -> float:
    """A power of two ``s`` with ``max(w / s)`` in [1, 2): weights divided by ``s`` are exact
    (but for weights below ``max(w) * 2**-1074``, which become 0) and their sum cannot
    overflow; see :func:`power_of_two`.  Every weight-proportional total (log-likelihood,
    information, sums of squares) is computed on ``w / s`` and multiplied by ``s`` once at
    the end, so multiplying all weights by a constant changes no digit of the answer
    beyond what the mathematics says."""
    return power_of_two(float(np.max(w))) if w.size else 1.0


#: The largest |offset| accepted: beyond 2**52 consecutive doubles are at least 1 apart.
MAX_OFFSET = 2.0**52


def as_offset(offset: Any, n: int, k: int | None = None, name: str = "offset") -> np.ndarray:
    """Return an offset of shape (n,) (or (n, k) when ``k`` is given); zeros when None.

    An offset is a known part of the linear predictor, in logits.  Entries beyond
    :data:`MAX_OFFSET` (2**52, about 4.5e15) in magnitude are refused: there consecutive
    doubles are at least 1 apart, so the linear predictor ``offset + b + x'beta`` cannot be
    formed to any useful digit (and sums of such offsets over the rows may overflow)."""
    if offset is None:
        return np.zeros(n) if k is None else np.zeros((n, k))
    if k is None:
        arr = as_vector(offset, name, n)
    else:
        arr = as_float(offset, name)
        if arr.shape != (n, k):
            raise InputError(
                f"{name} has shape {arr.shape}; pass an array of shape ({n}, {k}) "
                "(one column per class)"
            )
        _check_finite(arr, name)
    big = np.abs(arr) > MAX_OFFSET
    if big.any():
        index = tuple(int(i) for i in np.argwhere(big)[0])
        raise InputError(
            f"{name} has {arr[index]:.6g} at {_position(index, None)}, beyond 2**52 (4.5e15) in magnitude, where "
            "doubles are at least 1 apart: the linear predictor (offset + intercept + x'beta, in logits) cannot "
            "be formed to any useful digit; check the offset's units (a logit, or the log of an exposure, not "
            "the exposure itself)"
        )
    return arr


#: Longest coefficient, target or class name accepted (characters).
MAX_NAME_LENGTH = 1000
#: Unicode categories a name may not contain: control (Cc) and format (Cf) characters,
#: lone surrogates (Cs), line and paragraph separators (Zl, Zp).
_UNPRINTABLE = frozenset({"Cc", "Cf", "Cs", "Zl", "Zp"})


def text_problem(text: str) -> str | None:
    """Why ``text`` cannot be written to and read back from a model file, or None.

    Refused are the characters of Unicode categories Cc, Cf, Cs, Zl and Zp (controls,
    invisible format characters, lone surrogates, line separators) and the Unicode
    noncharacters (U+FDD0..U+FDEF and the last two code points of every plane): XML 1.0
    cannot hold some of them at all, and the others print as nothing or break lines.
    """
    if text.isprintable():  # the usual case, in C
        return None
    import unicodedata

    for i, ch in enumerate(text):
        code = ord(ch)
        category = unicodedata.category(ch)
        if category in _UNPRINTABLE or 0xFDD0 <= code <= 0xFDEF or (code & 0xFFFE) == 0xFFFE:
            kind = {"Cc": "a control character", "Cf": "an invisible format character",
                    "Cs": "a lone surrogate", "Zl": "a line separator", "Zp": "a paragraph separator"}
            return f"holds {kind.get(category, 'a Unicode noncharacter')} (U+{code:04X}) at position {i}"
    return None


def name_problem(name: str) -> str | None:
    """Why ``name`` cannot be a coefficient or target name, or None: it must be a non-empty,
    printable (:func:`text_problem`) string of at most :data:`MAX_NAME_LENGTH` characters
    that is not only white space."""
    if not name or name.isspace():
        return "is empty" if not name else "is only white space"
    if len(name) > MAX_NAME_LENGTH:
        return f"has {len(name)} characters, more than the {MAX_NAME_LENGTH} allowed"
    return text_problem(name)


def check_names(names: Any, p: int, found: tuple[str, ...] | None, prefix: str = "x") -> tuple[str, ...]:
    """Return coefficient names: ``names`` if given, else the column names found, else x1..xp.

    Names given or found must be usable in every model file lintools writes: one per
    column, distinct, non-empty, printable and not too long (:func:`name_problem`), and
    not ``"(intercept)"``, the intercept's own name.  Checking them here, at fit time,
    means :func:`lintools.save` and :func:`lintools.exchange.pmml.write_pmml` never write a file
    that :func:`lintools.load` or :func:`lintools.exchange.pmml.read_pmml` refuse.
    """
    if names is None:
        if found is None:
            return tuple(f"{prefix}{j + 1}" for j in range(p))
        out, what = tuple(found), "X has column names that cannot be used"
        remedy = "rename the columns of X, or pass names= with one distinct name per column"
    else:
        if isinstance(names, str):
            raise InputError("names is a single string; pass a sequence with one name per column")
        out, what = as_texts(names, "names", "one name per column"), "names cannot be used"
        remedy = "pass one distinct, non-empty, printable name per column"
        if len(out) != p:
            raise InputError(f"names has {len(out)} entries but X has {p} columns; pass one name per column")
    for j, name in enumerate(out):
        problem = name_problem(name)
        if problem is not None:
            raise InputError(f"{what}: the name of column {j} ({name[:80]!r}) {problem}; {remedy}")
    if len(set(out)) != len(out):
        seen: dict[str, int] = {}
        for j, name in enumerate(out):
            if name in seen:
                raise InputError(f"{what}: the name {name[:80]!r} appears more than once (columns {seen[name]} "
                                 f"and {j}); names must be distinct: {remedy}")
            seen[name] = j
    if INTERCEPT_NAME in out:
        raise InputError(f"{what}: column {out.index(INTERCEPT_NAME)} is named {INTERCEPT_NAME!r}, the "
                         f"intercept's own name; {remedy}")
    return out


def as_texts(value: Any, name: str, remedy: str, *, ordered: bool = True) -> tuple[str, ...]:
    """``value`` as a tuple of str: any iterable (list, tuple, array, generator) of text.

    Refused by name, with ``remedy`` (what to pass instead): a single value that is not a
    collection (a number, a bool, ``None``, a 0-d array, a str or bytes), an entry that is
    not text (``str(1.5)`` would make up a name nobody gave), and, with ``ordered``, a set
    or a mapping, whose order is not the caller's (a set of str changes its order from one
    run of Python to the next).
    """
    if isinstance(value, (str, bytes)):
        raise InputError(f"{name} is a single {type(value).__name__} ({short_repr(value)}); pass a list: {remedy}")
    if ordered and isinstance(value, (set, frozenset, dict)):
        raise InputError(f"{name} is a {type(value).__name__}, which has no order of its own; pass a list: {remedy}")
    try:
        items = tuple(value)
    except TypeError:  # not iterable: a number, a bool, None, object(), a 0-d array
        raise InputError(f"{name} must be a list of str; got {short_repr(value)}: {remedy}") from None
    for j, item in enumerate(items):
        if not isinstance(item, str):
            raise InputError(f"{name} entry {j} is {short_repr(item)} ({type(item).__name__}), not text: {remedy}")
    return tuple(str(item) for item in items)


def check_flag(value: Any, name: str) -> bool:
    """``value`` as a bool: ``True``/``False`` (or NumPy's), nothing else (an array, ``pd.NA``,
    1, "yes" and None have no single agreed truth value)."""
    if not isinstance(value, (bool, np.bool_)):
        raise InputError(f"{name} must be True or False; got {short_repr(value)}")
    return bool(value)


def check_nonnegative(value: Any, name: str) -> float:
    """Return ``value`` as a float, checking it is finite and >= 0."""
    if isinstance(value, (bool, np.bool_)) or not isinstance(value, numbers.Real):
        raise InputError(f"{name} must be a real number >= 0; got {short_repr(value)}")
    try:
        v = float(value)
    except (OverflowError, ValueError, TypeError):
        v = math.inf
    if not math.isfinite(v) or v < 0:
        raise InputError(f"{name} must be a finite number >= 0; got {value!r}")
    return v


def is_one_of(value: Any, options: Sequence[Any], *, exact_kind: bool = True) -> bool:
    """Whether ``value`` is one of ``options``, by equality that never raises.

    ``value in options`` raises for arrays, pandas objects and ``pd.NA`` (no truth value);
    here anything unhashable or array-like matches nothing.  With ``exact_kind`` a value
    matches an option of its own kind only (a bool only a bool, text only text), so that
    ``True`` is not taken for the option ``1``; without it (labels, where ``True == 1``
    as in NumPy) plain equality decides.
    """
    if isinstance(value, np.generic):
        value = value.item()
    try:
        hash(value)
    except TypeError:
        return False
    for option in options:
        if exact_kind and isinstance(option, (bool, np.bool_)) != isinstance(value, (bool, np.bool_)):
            continue
        if isinstance(option, str) != isinstance(value, str):
            continue
        try:
            same = option == value
            if isinstance(same, (bool, np.bool_)) and bool(same):
                return True
        except Exception:  # noqa: BLE001 - an exotic __eq__: not a match
            continue
    return False


def check_choice(value: Any, name: str, options: Sequence[Any]) -> Any:
    """Check that ``value`` is one of ``options`` (see :func:`is_one_of`); return the option."""
    if not is_one_of(value, options):
        shown = ", ".join(repr(o) for o in options)
        raise InputError(f"{name}={short_repr(value)} is not one of {shown}")
    return next(o for o in options if is_one_of(value, (o,)))


def short_repr(value: Any) -> str:
    """``repr(value)``, cut to a line (an array's repr can run to thousands of characters)."""
    text = repr(value)
    return text if len(text) <= 60 else text[:57] + "..."


def check_positive_int(value: Any, name: str, minimum: int = 1, maximum: int | None = None,
                       why: str = "") -> int:
    """Check that ``value`` is an integer >= ``minimum`` (and <= ``maximum`` when given;
    ``why`` then says what a larger value would do)."""
    if isinstance(value, bool) or not isinstance(value, numbers.Integral):
        raise InputError(f"{name} must be an integer >= {minimum}; got {short_repr(value)}")
    if value < minimum:
        raise InputError(f"{name} must be >= {minimum}; got {value}")
    if maximum is not None and value > maximum:
        raise InputError(f"{name} must be at most {maximum}; got {value}{why}")
    return int(value)


def check_probabilities(p: Any, name: str = "p", n: int | None = None) -> np.ndarray:
    """Return probabilities as a new float64 array (1-D, or 2-D with rows summing to 1)."""
    if p is None:
        raise InputError(f"{name} is None; pass probabilities, one per row")
    try:
        kind = np.asarray(_to_numpy(p)).dtype.kind
    except Exception:  # ragged input: as_float below names the problem
        kind = ""
    if kind == "b":
        raise InputError(
            f"{name} is boolean; pass probabilities (numbers in [0, 1]), not labels or a mask"
        )
    arr = as_float(p, name)
    if arr.ndim not in (1, 2) or arr.size == 0:
        raise InputError(f"{name} must be a non-empty 1-D array or (rows, classes) matrix; got shape {arr.shape}")
    if n is not None and arr.shape[0] != n:
        raise InputError(f"{name} has {arr.shape[0]} rows but the labels have {n}; pass one row per label")
    _check_finite(arr, name)
    bad = (arr < 0) | (arr > 1)
    if bad.any():
        index = tuple(int(i) for i in np.argwhere(bad)[0])
        raise InputError(
            f"{name} has a value outside [0, 1] ({arr[index]}) at {_position(index, None)}; "
            "pass probabilities, not scores or logits"
        )
    return arr


def read_only(value: Any) -> Any:
    """``value`` with every NumPy array in it read-only (tuples, lists and dicts are walked).

    An array that is already read-only and owns its memory is kept; any other is copied
    and the copy frozen, so a record never shares writable memory with anyone (its
    maker, or a caller whose array went into it).
    """
    if isinstance(value, np.ndarray):
        if value.base is None and not value.flags.writeable:
            return value
        out = value.copy()
        out.flags.writeable = False
        return out
    if isinstance(value, tuple) and not hasattr(value, "_fields"):
        return tuple(read_only(v) for v in value)
    if isinstance(value, list):
        return [read_only(v) for v in value]
    if isinstance(value, dict):
        return {k: read_only(v) for k, v in value.items()}
    return value


class ReadOnlyArrays:
    """Mixin for frozen dataclass records: after ``__init__``, every array field is
    read-only (see :func:`read_only`), so ``fit.coefficients[0] = 1`` raises."""

    def __post_init__(self) -> None:
        import dataclasses

        for f in dataclasses.fields(self):  # type: ignore[arg-type]
            v = getattr(self, f.name)
            frozen = read_only(v)
            if frozen is not v:
                object.__setattr__(self, f.name, frozen)


def scored(X: np.ndarray, coefficients: np.ndarray, intercept: Any, offset: np.ndarray | None = None) -> np.ndarray:
    """``X @ coefficients + intercept (+ offset)``: a model's linear predictor on new rows.

    A row whose linear predictor leaves the float64 range (values or coefficients near
    1e308) is refused by name rather than returned as inf or NaN: every number a model
    scores is one the rows and the coefficients imply.
    """
    with np.errstate(over="ignore", invalid="ignore"):
        eta = X @ coefficients + intercept
        if offset is not None:
            eta = eta + offset
        quick = np.isfinite(np.add.reduce(eta, axis=None))
    if not quick and not np.all(np.isfinite(eta)):
        row = int(np.argwhere(~np.isfinite(eta))[0][0])
        raise InputError(
            f"X row {row}: the linear predictor leaves the float64 range (its values or the "
            "coefficients are near 1e308); rescale the columns of X (and refit) before scoring"
        )
    return eta
