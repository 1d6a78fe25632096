"""Model files: a versioned JSON format of our own, with an exact round trip.

File layout (schema version 1)::

    {"format": "lintools-model", "schema_version": 1, "kind": "<fit kind>",
     "written_by": "lintools <version>", "record": <encoded record>}

Values are encoded so that reading gives back exactly what was written:

* a finite float is a JSON number (Python writes the shortest repr that round-trips);
* a non-finite float is ``{"$float": "nan" | "inf" | "-inf"}``;
* an array is ``{"$array": [flat values], "shape": [...], "dtype": "float64" | "int64" | "bool"}``;
* a tuple is ``{"$tuple": [...]}``; a record is ``{"$record": "<class>", "fields": {...}}``.

Only the record classes of :mod:`lintools._records` can be built; nothing is executed,
and no pickle is ever used.  Files larger than :data:`MAX_BYTES` are refused.
"""

from __future__ import annotations

import dataclasses
import json
import math
import os
from typing import Any

import numpy as np

from . import _records
from ._errors import InputError
from ._files import read_bounded, write_atomic

__all__ = ["save", "load", "SCHEMA_VERSION", "MAX_BYTES"]

FORMAT = "lintools-model"
SCHEMA_VERSION = 1
MAX_BYTES = 256 * 1024 * 1024
_DTYPES = {"float64": np.float64, "int64": np.int64, "bool": np.bool_}


def _record_types() -> dict[str, type]:
    out = {}
    for value in vars(_records).values():
        if isinstance(value, type) and dataclasses.is_dataclass(value) and not value.__name__.startswith("_"):
            out[value.__name__] = value
    return out


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


def _decode_float(v: Any, where: str) -> float:
    if isinstance(v, dict) and set(v) == {"$float"} and v["$float"] in ("nan", "inf", "-inf"):
        return float(v["$float"])
    if isinstance(v, bool) or not isinstance(v, (int, float)):
        raise InputError(f"model file: {where} holds {v!r:.80} where a number was expected")
    try:
        return float(v)
    except OverflowError:
        raise InputError(f"model file: {where} holds an integer too large for a float; the file is damaged") from None


def _decode(value: Any, where: str, types: dict[str, type]) -> Any:
    if value is None or isinstance(value, (bool, str, int, float)):
        return value
    if isinstance(value, list):
        return [_decode(v, f"{where}[{i}]", types) for i, v in enumerate(value)]
    if not isinstance(value, dict):
        raise InputError(f"model file: {where} has an unreadable value")
    if "$float" in value:
        return _decode_float(value, where)
    if "$tuple" in value:
        items = value["$tuple"]
        if not isinstance(items, list):
            raise InputError(f"model file: {where} is a malformed tuple")
        return tuple(_decode(v, f"{where}[{i}]", types) for i, v in enumerate(items))
    if "$array" in value:
        return _decode_array(value, where)
    if "$record" in value:
        name = value["$record"]
        cls = types.get(name) if isinstance(name, str) else None
        fields = value.get("fields")
        if cls is None or not isinstance(fields, dict):
            raise InputError(f"model file: {where} names an unknown record type {name!r}")
        expected = {f.name for f in dataclasses.fields(cls)}
        missing = expected - set(fields)
        extra = set(fields) - expected
        if missing or extra:
            raise InputError(
                f"model file: {where} ({name}) has missing fields {sorted(missing)} and "
                f"unknown fields {sorted(extra)}; the file is damaged or from another schema"
            )
        kwargs = {k: _decode(v, f"{where}.{k}", types) for k, v in fields.items()}
        for f in dataclasses.fields(cls):
            _check_type(kwargs[f.name], f.type, f"{where}.{f.name}")
        try:
            return cls(**kwargs)
        except (TypeError, ValueError) as exc:
            raise InputError(f"model file: {where} ({name}) could not be built: {exc}") from None
    raise InputError(f"model file: {where} is an object of unknown kind")


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
}


def _check_type(value: Any, annotation: Any, where: str) -> None:
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
    raise InputError(f"model file: {where} holds a {type(value).__name__} where {text} was expected")


def _decode_array(value: dict, where: str) -> np.ndarray:
    flat, shape, dtype = value.get("$array"), value.get("shape"), value.get("dtype")
    if (
        not isinstance(flat, list)
        or not isinstance(shape, list)
        or not all(isinstance(d, int) and not isinstance(d, bool) and d >= 0 for d in shape)
        or not isinstance(dtype, str)
        or dtype not in _DTYPES
    ):
        raise InputError(f"model file: {where} is a malformed array")
    if math.prod(shape) != len(flat):
        raise InputError(f"model file: {where} has {len(flat)} values for shape {shape}")
    if dtype == "float64":
        data = [_decode_float(v, where) for v in flat]
    elif dtype == "int64":
        if not all(isinstance(v, int) and not isinstance(v, bool) for v in flat):
            raise InputError(f"model file: {where} holds a non-integer in an integer array")
        data = flat
    else:
        if not all(isinstance(v, bool) for v in flat):
            raise InputError(f"model file: {where} holds a non-boolean in a boolean array")
        data = flat
    try:
        return np.array(data, dtype=_DTYPES[dtype]).reshape(shape)
    except (OverflowError, ValueError) as exc:
        raise InputError(f"model file: {where} cannot be built as a {dtype} array of shape {shape} ({exc})") from None


def save(fit: Any, path: str | os.PathLike, *, replace: bool = False) -> None:
    """Write a fit record to ``path`` as a lintools JSON model file (schema version 1).

    The file is written atomically (a temporary file in the same folder, renamed into
    place), so ``path`` never holds a partial model.  An existing ``path`` is refused
    unless ``replace=True``.
    """
    types = _record_types()
    if type(fit).__name__ not in types or not hasattr(fit, "kind"):
        raise InputError(f"save() takes a lintools fit record; got {type(fit).__name__}")
    from . import __version__

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

    Raises
    ------
    InputError
        If the file is not a lintools model file, has another schema version, or is
        damaged; the message says which.
    """
    raw = read_bounded(path, "model file", MAX_BYTES)
    try:
        doc = json.loads(raw.decode("utf-8"), parse_constant=_refuse_constant, parse_float=_finite_float)
    except (UnicodeDecodeError, json.JSONDecodeError, RecursionError) as exc:
        raise InputError(f"model file {os.fspath(path)!r} is not valid JSON ({exc})") from None
    except ValueError as exc:  # an integer of more digits than Python converts
        if isinstance(exc, InputError):
            raise
        raise InputError(f"model file {os.fspath(path)!r} holds an unreadable number ({exc}); the file is damaged") from None
    if not isinstance(doc, dict) or doc.get("format") != FORMAT:
        raise InputError(f"{os.fspath(path)!r} is not a lintools model file (no \"format\": \"{FORMAT}\")")
    version = doc.get("schema_version")
    if version != SCHEMA_VERSION or isinstance(version, bool):
        raise InputError(
            f"model file {os.fspath(path)!r} has schema version {version!r}; this lintools reads "
            f"version {SCHEMA_VERSION}: re-save the model with a matching lintools"
        )
    types = _record_types()
    try:
        record = _decode(doc.get("record"), "record", types)
    except RecursionError:
        raise InputError(f"model file {os.fspath(path)!r} is nested too deeply") from None
    if not hasattr(record, "kind") or record.kind != doc.get("kind"):
        raise InputError(f"model file {os.fspath(path)!r}: the record does not match kind {doc.get('kind')!r}")
    return record


def _finite_float(text: str) -> float:
    value = float(text)
    if not math.isfinite(value):
        raise InputError(
            f"model file holds the number {text[:40]!r}, which overflows a float; the file is damaged "
            '(lintools writes non-finite values as {"$float": ...})'
        )
    return value


def _refuse_constant(name: str) -> Any:
    raise InputError(f"model file holds the bare constant {name}, which is not JSON; the file is damaged")
