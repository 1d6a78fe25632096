"""Reading a CSV file into a design matrix, with the standard library only.

Rules (the command line uses them, and so may any caller):

* The first line is the header; it is required.  Column names must be distinct and
  non-empty.  A first line whose every field reads as a number is taken for data and
  refused.
* Every line has as many fields as the header.
* Missing values are the empty field and the tokens in :data:`MISSING`.  A missing value
  in a used column raises :class:`InputError` naming the line and the column, unless the
  caller passes ``drop_missing=True``; then such lines are dropped and counted.
* A feature column in which some present value is not a number is a text column: it
  becomes one indicator column per level except the reference level, named
  ``column=level``.  The reference level is the first level in sorted order unless the
  caller names another in ``reference_levels``.
* Numbers are parsed with ``float()``; an infinite value raises an error naming the
  line and the column.
"""

from __future__ import annotations

import csv
import math
import os
from dataclasses import dataclass
from typing import Mapping, Sequence

import numpy as np

from ._errors import InputError
from ._files import file_path

__all__ = ["MISSING", "Table", "read_table"]

MISSING = frozenset({"", "NA", "N/A", "NaN", "nan", "null", "NULL", "None"})
MAX_BYTES = 2 * 1024**3


@dataclass(frozen=True)
class Table:
    """A design read from a CSV file.

    Attributes
    ----------
    X : ndarray, shape (n, q)
        Features, text columns expanded to indicators.
    names : tuple of str
        Names of the columns of ``X``.
    target : tuple
        The target column's values: ints if every value is an integer, floats if every
        value is a number, strings otherwise.
    weights : ndarray or None
        The weights column, when one was named.
    extra : dict
        Other named columns read as text (for example a probability or group column).
    reference_levels : dict
        The reference level of every text feature column.
    lines : ndarray
        The file line number (1 = header) of every row kept.
    dropped : int
        Lines dropped because of missing values (only with ``drop_missing=True``).
    """

    X: np.ndarray
    names: tuple[str, ...]
    target: tuple
    weights: np.ndarray | None
    extra: dict
    reference_levels: dict
    lines: np.ndarray
    dropped: int


def _number(text: str) -> float | None:
    try:
        return float(text)
    except ValueError:
        return None


def _typed(values: list[str]) -> tuple:
    nums = [_number(v) for v in values]
    if all(v is not None for v in nums):
        if all(float(v).is_integer() and "." not in s and "e" not in s.lower() for v, s in zip(nums, values)):
            return tuple(int(s) for s in values)
        return tuple(nums)
    return tuple(values)


def read_table(
    path: str | os.PathLike,
    *,
    target: str | None,
    features: Sequence[str] | None = None,
    weights: str | None = None,
    extra: Sequence[str] = (),
    drop_missing: bool = False,
    reference_levels: Mapping[str, str] | None = None,
) -> Table:
    """Read ``path`` and return the target, the feature matrix and the named extra columns.

    ``features=None`` takes every column that is not the target, the weights or an extra.
    """
    where = file_path(path, "CSV file")
    try:
        size = os.path.getsize(where)
    except OSError as exc:
        raise InputError(f"cannot read {where!r}: {exc.strerror}") from None
    if os.path.isdir(where):
        raise InputError(f"{where!r} is a directory; pass the path of a CSV file")
    if size > MAX_BYTES:
        raise InputError(f"{where!r} is {size} bytes, more than the {MAX_BYTES} this reader takes")
    try:
        with open(where, newline="", encoding="utf-8-sig") as fh:
            rows = list(csv.reader(fh))
    except (csv.Error, UnicodeDecodeError) as exc:
        raise InputError(f"{where!r} is not a readable CSV file ({exc})") from None
    except OSError as exc:
        raise InputError(f"cannot read {where!r}: {exc.strerror or exc}") from None
    if not rows or not any(field.strip() for field in rows[0]):
        raise InputError(f"{where!r} is empty or has an empty first line; a header line is required")
    header = [h.strip() for h in rows[0]]
    if all(_number(h) is not None for h in header):
        raise InputError(f"{where!r}: the first line looks like data ({', '.join(header[:4])}); a header line with column names is required")
    for j, h in enumerate(header):
        if not h:
            raise InputError(f"{where!r}: column {j + 1} of the header has no name")
    if len(set(header)) != len(header):
        dup = next(h for h in header if header.count(h) > 1)
        raise InputError(f"{where!r}: the header names column '{dup}' more than once")
    index = {h: j for j, h in enumerate(header)}

    def column(name: str, role: str) -> int:
        if name not in index:
            raise InputError(f"{role} column '{name}' is not in {where!r}; its columns are: {', '.join(header)}")
        return index[name]

    special = [c for c in [target, weights, *extra] if c is not None]
    for c in special:
        column(c, "the")
    if features is None:
        feats = [h for h in header if h not in special]
    else:
        feats = list(features)
        for f in feats:
            column(f, "feature")
            if f in special:
                raise InputError(f"column '{f}' is named both as a feature and as the target, weights or an extra column")
    used = [index[c] for c in special] + [index[f] for f in feats]

    body, lines, dropped = [], [], 0
    for lineno, row in enumerate(rows[1:], start=2):
        if not row or (len(row) == 1 and not row[0].strip()):
            continue
        if len(row) != len(header):
            raise InputError(f"{where!r} line {lineno} has {len(row)} fields but the header has {len(header)}")
        cells = [c.strip() for c in row]
        missing = [j for j in used if cells[j] in MISSING]
        if missing:
            if drop_missing:
                dropped += 1
                continue
            raise InputError(
                f"{where!r} line {lineno}, column '{header[missing[0]]}': missing value; fill it in, "
                "or ask for rows with missing values to be dropped"
            )
        body.append(cells)
        lines.append(lineno)
    if not body:
        raise InputError(f"{where!r} has no data lines" + (" left after dropping missing values" if dropped else ""))

    refs = dict(reference_levels or {})
    for name in refs:
        if name not in feats:
            raise InputError(f"reference level given for '{name}', which is not a feature column")
    blocks, names, chosen = [], [], {}
    for f in feats:
        j = index[f]
        texts = [r[j] for r in body]
        nums = [_number(t) for t in texts]
        if all(v is not None for v in nums):
            for t, v, ln in zip(texts, nums, lines):
                if not math.isfinite(v):
                    raise InputError(f"{where!r} line {ln}, column '{f}': value {t!r} is not finite")
            blocks.append(np.array(nums, dtype=float)[:, None])
            names.append(f)
            continue
        levels = sorted(set(texts))
        ref = refs.get(f, levels[0])
        if ref not in levels:
            raise InputError(f"reference level {ref!r} of column '{f}' does not occur; its levels are {levels}")
        if len(levels) < 2:
            raise InputError(f"text column '{f}' has only the level {ref!r}; drop it")
        chosen[f] = ref
        arr = np.array(texts, dtype=object)
        for level in levels:
            if level == ref:
                continue
            blocks.append((arr == level).astype(float)[:, None])
            names.append(f"{f}={level}")
    X = np.hstack(blocks) if blocks else np.zeros((len(body), 0))

    y = _typed([r[index[target]] for r in body]) if target is not None else ()
    for i, v in enumerate(y):
        if isinstance(v, float) and not math.isfinite(v):
            raise InputError(
                f"{where!r} line {lines[i]}, target column '{target}': value {body[i][index[target]]!r} "
                "is not finite; fix or drop that line"
            )
    w = None
    if weights is not None:
        raw = [r[index[weights]] for r in body]
        vals = []
        for t, ln in zip(raw, lines):
            v = _number(t)
            if v is None or not math.isfinite(v):
                raise InputError(f"{where!r} line {ln}, weights column '{weights}': {t!r} is not a finite number")
            vals.append(v)
        w = np.array(vals)
    extras = {c: tuple(r[index[c]] for r in body) for c in extra}
    return Table(
        X=X,
        names=tuple(names),
        target=y,
        weights=w,
        extra=extras,
        reference_levels=chosen,
        lines=np.array(lines),
        dropped=dropped,
    )
