"""Model files: a versioned JSON format of our own, with an exact round trip.

File layout (schema version 1)::

    {"format": "lintools-model", "schema_version": 1, "kind": "<fit kind>",
     "written_by": "lintools <version>", "record": <encoded record>}

Values are encoded so that reading gives back exactly what was written:

* a finite float is a JSON number (Python writes the shortest repr that round-trips);
* a non-finite float is ``{"$float": "nan" | "inf" | "-inf"}``;
* an array is ``{"$array": [flat values], "shape": [...], "dtype": "float64" | "int64" | "bool"}``;
* a tuple is ``{"$tuple": [...]}``; a record is ``{"$record": "<class>", "fields": {...}}``.

Only the record classes named in ``RECORD_TYPES`` can be built; nothing is executed,
and no pickle is ever used.  Files larger than :data:`MAX_BYTES` are refused.

Loading checks every field against the others (:mod:`lintools.exchange.model_checks`): a file
that loads gives a record whose methods work, and a damaged or inconsistent file is
refused with the file, the field and the remedy named.

Memory: the lists of numbers behind float arrays are parsed straight into NumPy arrays
(a strict JSON-number scan, then NumPy's text parser on pieces of at most
:data:`_PIECE` bytes), never as Python lists, and everything else in the file may hold
at most one JSON value per 128 bytes of file (plus 10 000), counted before it is parsed.
Peak memory while loading is about 2 times the file's size for a file written by
:func:`save` (measured 2.0x for a 100 MB file: the bounded reader holds the file twice
while it joins its pieces; then the file's bytes and 8 bytes per number) and at most 6
times for any file (measured 5.1x for a 100 MB file of 2-byte numbers, ``1,1,1,...``,
whose doubles alone take 4 times the file); tests/test_model_memory.py checks both.
"""

from __future__ import annotations

import dataclasses
import json
import math
import os
import re
import secrets
from typing import Any

import numpy as np

from ..support.categories import CategoricalField
from ..models.kinds import KINDS
from ..models.records import Accuracy, CoefficientTable, Convergence
from ..support.errors import InputError
from ..support.files import file_path, read_bounded, write_atomic
from .model_checks import check_record

__all__ = ["save", "load", "SCHEMA_VERSION", "MAX_BYTES"]

FORMAT = "lintools-model"
SCHEMA_VERSION = 1
MAX_BYTES = 256 * 1024 * 1024
_DTYPES = {"float64": np.float64, "int64": np.int64, "bool": np.bool_}
_REMEDY = "the file is damaged or was not written by lintools.save: ask for an undamaged copy or re-save the model"

# ---------------------------------------------------------------- the float-array scan
_WS = rb"[ \t\n\r]*"  # JSON's white space (not \f or \v, which re's \s would take)
_NUMBER = rb"-?(?:0|[1-9][0-9]*)(?:\.[0-9]+)?(?:[eE][-+]?[0-9]+)?"  # JSON's number grammar
_MARKER = rb'\{' + _WS + rb'"\$float"' + _WS + rb":" + _WS + rb'"(nan|inf|-inf)"' + _WS + rb"\}"
_ITEM = rb"(?:" + _NUMBER + rb"|" + _MARKER + rb")"
#: ``"$array": [n, n, ...]`` with at least one number; the possessive loop scans in linear
#: time and constant memory.
_ARRAY_LIST = re.compile(
    rb'"\$array"' + _WS + rb":" + _WS + rb"\[(" + _WS + rb"(?:" + _ITEM + _WS + rb"," + _WS + rb")*+"
    + _ITEM + _WS + rb")\]"
)
_MARKERS = re.compile(_MARKER)
#: Bytes of number text handed to NumPy's parser at a time.
_PIECE = 1 << 20
#: Values allowed outside float arrays: one per this many bytes of file, plus _SLACK.
_BYTES_PER_VALUE = 128
_SLACK = 10_000


@dataclasses.dataclass
class _Parsed:
    """A number list read by the scan: its values, and whether every number was written
    as an integer (no '.', no exponent)."""

    values: np.ndarray
    integral: bool


@dataclasses.dataclass
class _Context:
    path: str
    types: dict[str, type]
    nonce: str
    parsed: list

    def refuse(self, where: str, problem: str) -> InputError:
        return InputError(f"model file {self.path!r}: {where} {problem}; {_REMEDY}")


def _scan_arrays(raw: bytes, nonce: str) -> tuple[bytes | bytearray, list]:
    """Replace every list of numbers behind ``"$array"`` by a placeholder, and parse it.

    Returns the document with placeholders (``{"$parsed": nonce, "$index": k}``) and
    the parsed lists (a :class:`_Parsed`, or the text of a problem).  The nonce is new
    for each file, so a file cannot imitate a placeholder.
    """
    out = bytearray()
    parsed: list = []
    last = 0
    with memoryview(raw) as view:
        for m in _ARRAY_LIST.finditer(raw):
            start, stop = m.span(1)
            out += view[last:start - 1]
            out += b'{"$parsed": "%s", "$index": %d}' % (nonce.encode(), len(parsed))
            last = stop + 1
            parsed.append(_parse_numbers(raw, start, stop))
        if not parsed:
            return raw, parsed
        out += view[last:]
    return out, parsed


def _parse_numbers(raw: bytes, start: int, stop: int) -> Any:
    """The comma-separated numbers ``raw[start:stop]`` (already checked against JSON's
    grammar) as a float64 array, parsed a piece at a time; or the text of a problem."""
    count = raw.count(b",", start, stop) + 1
    values = np.empty(count)
    done, pos, nonfinite = 0, start, 0
    while pos < stop:
        end = stop if stop - pos <= _PIECE else raw.rfind(b",", pos, pos + _PIECE)
        if end <= pos:  # a single number longer than a piece
            end = raw.find(b",", pos + _PIECE, stop)
            end = stop if end < 0 else end
        piece = raw[pos:end].strip(b" \t\n\r")
        markers = piece.count(b'"$float"')
        if markers:
            piece = _MARKERS.sub(lambda g: g.group(1), piece)
        try:
            got = np.fromstring(bytes(piece), dtype=np.float64, sep=",")
        except ValueError:
            return "holds a number NumPy cannot read"
        if done + got.size > count:
            return "holds more numbers than its commas say"
        if np.count_nonzero(~np.isfinite(got)) != markers:
            return "holds a number too large for a float (lintools writes non-finite values as {\"$float\": ...})"
        values[done:done + got.size] = got
        done += got.size
        nonfinite += markers
        pos = end + 1
    if done != count:
        return "holds fewer numbers than its commas say"
    integral = not nonfinite and not any(raw.find(c, start, stop) >= 0 for c in (b".", b"e", b"E"))
    return _Parsed(values, integral)


# ---------------------------------------------------------------- encoding
#: the record types a model file may hold, by the name written in the file (an explicit
#: list: a class is readable from a file only when it is named here)
RECORD_TYPES: dict[str, type] = {
    cls.__name__: cls
    for cls in (Accuracy, CategoricalField, CoefficientTable, Convergence) + tuple(k.record for k in KINDS.values())
}


def _record_types() -> dict[str, type]:
    return RECORD_TYPES


def _encode_float(x: float) -> Any:
    if math.isfinite(x):
        return x
    return {"$float": "nan" if math.isnan(x) else ("inf" if x > 0 else "-inf")}


def _encode(value: Any) -> Any:
    if value is None or isinstance(value, (bool, str)):
        return value
    if isinstance(value, np.ndarray):
        if value.dtype.kind == "f":
            dtype, flat = "float64", [_encode_float(float(v)) for v in value.ravel()]
        elif value.dtype.kind in "iu":
            dtype, flat = "int64", [int(v) for v in value.ravel()]
        elif value.dtype.kind == "b":
            dtype, flat = "bool", [bool(v) for v in value.ravel()]
        else:
            raise InputError(f"cannot write an array of dtype {value.dtype} to a model file")
        return {"$array": flat, "shape": list(value.shape), "dtype": dtype}
    if isinstance(value, (np.bool_,)):
        return bool(value)
    if isinstance(value, (int, np.integer)):
        return int(value)
    if isinstance(value, (float, np.floating)):
        return _encode_float(float(value))
    if isinstance(value, np.str_):
        return str(value)
    if isinstance(value, tuple):
        return {"$tuple": [_encode(v) for v in value]}
    if isinstance(value, list):
        return [_encode(v) for v in value]
    if dataclasses.is_dataclass(value) and not isinstance(value, type):
        fields = {f.name: _encode(getattr(value, f.name)) for f in dataclasses.fields(value)}
        return {"$record": type(value).__name__, "fields": fields}
    raise InputError(f"cannot write a value of type {type(value).__name__} to a model file")


# ---------------------------------------------------------------- decoding
def _decode_float(v: Any, where: str, ctx: _Context) -> float:
    if isinstance(v, dict) and set(v) == {"$float"} and v["$float"] in ("nan", "inf", "-inf"):
        return float(v["$float"])
    if isinstance(v, bool) or not isinstance(v, (int, float)):
        raise ctx.refuse(where, f"holds {v!r:.80} where a number was expected")
    try:
        return float(v)
    except OverflowError:
        raise ctx.refuse(where, "holds an integer too large for a float") from None


def _decode(value: Any, where: str, ctx: _Context) -> Any:
    if value is None or isinstance(value, (bool, str, int, float)):
        return value
    if isinstance(value, list):
        return [_decode(v, f"{where}[{i}]", ctx) for i, v in enumerate(value)]
    if not isinstance(value, dict):
        raise ctx.refuse(where, "has an unreadable value")
    if "$float" in value:
        return _decode_float(value, where, ctx)
    if "$tuple" in value:
        items = value["$tuple"]
        if not isinstance(items, list):
            raise ctx.refuse(where, "is a malformed tuple")
        return tuple(_decode(v, f"{where}[{i}]", ctx) for i, v in enumerate(items))
    if "$array" in value:
        return _decode_array(value, where, ctx)
    if "$record" in value:
        name = value["$record"]
        cls = ctx.types.get(name) if isinstance(name, str) else None
        fields = value.get("fields")
        if cls is None or not isinstance(fields, dict):
            raise ctx.refuse(where, f"names an unknown record type {name!r:.80}")
        expected = {f.name for f in dataclasses.fields(cls)}
        missing = expected - set(fields) - _ADDED_FIELDS
        extra = set(fields) - expected
        if missing or extra:
            raise ctx.refuse(where, f"({name}) has missing fields {sorted(missing)} and unknown fields "
                                    f"{sorted(extra)[:10]}; the file may be from another schema")
        kwargs = {k: _decode(v, f"{where}.{k}", ctx) for k, v in fields.items()}
        for f in dataclasses.fields(cls):
            if f.name in kwargs:  # a field added later takes its default when absent
                _check_type(kwargs[f.name], f.type, f"{where}.{f.name}", ctx)
        try:
            return cls(**kwargs)
        except (TypeError, ValueError) as exc:
            raise ctx.refuse(where, f"({name}) could not be built: {exc}") from None
    raise ctx.refuse(where, "is an object of unknown kind")


def _is_number(v: Any) -> bool:
    return isinstance(v, (int, float)) and not isinstance(v, bool)


_SIMPLE = {
    "float": _is_number,
    "int": lambda v: isinstance(v, int) and not isinstance(v, bool),
    "bool": lambda v: isinstance(v, bool),
    "str": lambda v: isinstance(v, str),
    "np.ndarray": lambda v: isinstance(v, np.ndarray),
    "tuple[str, ...]": lambda v: isinstance(v, tuple) and all(isinstance(x, str) for x in v),
    "tuple[float, float]": lambda v: isinstance(v, tuple) and len(v) == 2 and all(_is_number(x) for x in v),
    "tuple": lambda v: isinstance(v, tuple) and all(isinstance(x, (str, int, float, bool)) for x in v),
    "tuple[CategoricalField, ...]": lambda v: isinstance(v, tuple) and all(
        type(x).__name__ == "CategoricalField" for x in v),
}
#: Record fields added after schema version 1 was first written: a file without them
#: (written by an earlier lintools) takes their defaults (no categorical fields).
_ADDED_FIELDS = frozenset({"categorical_fields", "accuracy"})


def _check_type(value: Any, annotation: Any, where: str, ctx: _Context) -> None:
    """Refuse a decoded field whose type does not match the record's annotation."""
    text = annotation if isinstance(annotation, str) else getattr(annotation, "__name__", str(annotation))
    options = [t.strip() for t in text.split("|")]
    for option in options:
        if option == "None" and value is None:
            return
        if option == "Any":
            return
        test = _SIMPLE.get(option)
        if test is not None and test(value):
            return
        if test is None and option not in ("None",) and type(value).__name__ == option:
            return
    raise ctx.refuse(where, f"holds a {type(value).__name__} where {text} was expected")


def _decode_array(value: dict, where: str, ctx: _Context) -> np.ndarray:
    flat, shape, dtype = value.get("$array"), value.get("shape"), value.get("dtype")
    pre = None
    if isinstance(flat, dict) and set(flat) == {"$parsed", "$index"} and flat["$parsed"] == ctx.nonce:
        pre = ctx.parsed[flat["$index"]]
        if isinstance(pre, str):
            raise ctx.refuse(where, pre)
    if (
        (pre is None and not isinstance(flat, list))
        or not isinstance(shape, list)
        or not all(isinstance(d, int) and not isinstance(d, bool) and d >= 0 for d in shape)
        or not isinstance(dtype, str)
        or dtype not in _DTYPES
    ):
        raise ctx.refuse(where, "is a malformed array")
    size = pre.values.size if pre is not None else len(flat)
    if math.prod(shape) != size:
        raise ctx.refuse(where, f"has {size} values for shape {shape}")
    if pre is not None:
        if dtype == "float64":
            return pre.values.reshape(shape)
        if dtype == "bool" or not pre.integral:
            raise ctx.refuse(where, f"holds a number that is not a {'boolean' if dtype == 'bool' else 'integer'}")
        if size and np.max(np.abs(pre.values)) > 2.0**53:
            raise ctx.refuse(where, "holds an integer beyond 2**53, which this reader does not take")
        return pre.values.astype(np.int64).reshape(shape)
    if dtype == "float64":
        data = [_decode_float(v, where, ctx) for v in flat]
    elif dtype == "int64":
        if not all(isinstance(v, int) and not isinstance(v, bool) for v in flat):
            raise ctx.refuse(where, "holds a non-integer in an integer array")
        data = flat
    else:
        if not all(isinstance(v, bool) for v in flat):
            raise ctx.refuse(where, "holds a non-boolean in a boolean array")
        data = flat
    try:
        return np.array(data, dtype=_DTYPES[dtype]).reshape(shape)
    except (OverflowError, ValueError) as exc:
        raise ctx.refuse(where, f"cannot be built as a {dtype} array of shape {shape} ({exc})") from None


# ---------------------------------------------------------------- save and load
def save(fit: Any, path: str | os.PathLike, *, reference_levels: Any = None, replace: bool = False) -> None:
    """Write a fit record to ``path`` as a lintools JSON model file (schema version 1).

    The file is written atomically (a temporary file in the same folder, renamed into
    place), so ``path`` never holds a partial model.  An existing ``path`` is refused
    unless ``replace=True``.  A record that :func:`load` would refuse (one edited into
    inconsistency, for example with ``dataclasses.replace``) is refused before anything
    is written.

    ``reference_levels`` (``{text column: reference level}``, as
    :attr:`lintools.Table.reference_levels` of the table the fit was fitted on) records
    which inputs are the indicator columns ``column=level`` of a text column, so that the
    model can score a CSV file holding the text column (``lintools score``); by default
    the fit's own ``categorical_fields`` are written.
    """
    types = _record_types()
    if type(fit).__name__ not in types or not hasattr(fit, "kind"):
        raise InputError(f"save() takes a lintools fit record; got {type(fit).__name__}")
    if reference_levels is not None:
        from ..support.categories import with_references

        fit = with_references(fit, reference_levels, "save")
    check_record(fit, lambda field, problem: InputError(
        f"save: this record cannot be written, its {field.removeprefix('record.')} {problem}"))
    from ..support.version import __version__

    doc = {
        "format": FORMAT,
        "schema_version": SCHEMA_VERSION,
        "kind": fit.kind,
        "written_by": f"lintools {__version__}",
        "record": _encode(fit),
    }
    text = json.dumps(doc, allow_nan=False, indent=1)
    write_atomic(path, text, replace=replace, label="model file")


def load(path: str | os.PathLike) -> Any:
    """Read a lintools JSON model file written by :func:`save` and return the fit record.

    Every field is type-checked and checked against the others (shapes of coefficients,
    names, standard errors and covariance; the intercept present exactly when declared;
    classes for the kind; finite, non-negative standard errors and counts; l2; integers
    in range; printable names).  Peak memory is at most 6 times the file's size (about
    2 times for files written by :func:`save`; see the module docstring).

    Raises
    ------
    InputError
        If the file is not a lintools model file, has another schema version, or is
        damaged or inconsistent; the message names the file, the field and the remedy.
    """
    where = file_path(path, "model file")
    return load_bytes(read_bounded(where, "model file", MAX_BYTES), where)


def load_bytes(raw: bytes, where: str) -> Any:
    """The record in the bytes ``raw`` of the model file ``where`` (see :func:`load`)."""
    size = len(raw)
    nonce = secrets.token_hex(16)
    text, parsed = _scan_arrays(raw, nonce)
    del raw  # the caller passes the bytes on (load keeps no reference): freed here
    values = text.count(b",") + text.count(b"[") + text.count(b"{") + 2 * text.count(b":") + 1
    limit = size // _BYTES_PER_VALUE + _SLACK
    if values > limit:
        raise InputError(
            f"model file {where!r} holds about {values} JSON values besides the numbers of its arrays, more "
            f"than the {limit} a model file of {size} bytes may hold; {_REMEDY}"
        )
    try:
        decoded = text.decode("utf-8")
        del text
        doc = json.loads(decoded, parse_constant=_refuse_constant, parse_float=_finite_float, parse_int=_bounded_int)
    except (UnicodeDecodeError, json.JSONDecodeError, RecursionError) as exc:
        raise InputError(f"model file {where!r} is not valid JSON ({exc}); {_REMEDY}") from None
    except InputError as exc:
        raise InputError(f"model file {where!r} {exc}") from None
    del decoded
    if not isinstance(doc, dict) or doc.get("format") != FORMAT:
        raise InputError(f"{where!r} is not a lintools model file (no \"format\": \"{FORMAT}\")")
    version = doc.get("schema_version")
    if version != SCHEMA_VERSION or isinstance(version, bool):
        raise InputError(
            f"model file {where!r} has schema version {version!r:.40}; this lintools reads "
            f"version {SCHEMA_VERSION}: re-save the model with a matching lintools"
        )
    ctx = _Context(where, _record_types(), nonce, parsed)
    try:
        record = _decode(doc.get("record"), "record", ctx)
    except RecursionError:
        raise InputError(f"model file {where!r} is nested too deeply; {_REMEDY}") from None
    if not hasattr(record, "kind") or record.kind != doc.get("kind"):
        raise InputError(f"model file {where!r}: the record does not match kind {doc.get('kind')!r:.40}; {_REMEDY}")
    check_record(record, lambda field, problem: ctx.refuse(field, problem))
    return record


def _finite_float(text: str) -> float:
    value = float(text)
    if not math.isfinite(value):
        raise InputError(
            f"holds the number {text[:40]!r}, which overflows a float; the file is damaged "
            '(lintools writes non-finite values as {"$float": ...})'
        )
    return value


def _bounded_int(text: str) -> int:
    # 19 digits hold every int64; longer integers are refused before Python converts them
    if len(text.lstrip("-")) > 19 or not -(2**63) <= (value := int(text)) < 2**63:
        raise InputError(f"holds the integer {text[:40]!r}{'...' if len(text) > 40 else ''}, which is out of range "
                         "(lintools writes integers of at most 64 bits)")
    return value


def _refuse_constant(name: str) -> Any:
    raise InputError(f"holds the bare constant {name}, which is not JSON; the file is damaged")
