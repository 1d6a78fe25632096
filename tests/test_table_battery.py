"""A generated battery of CSV files with bad cells at random places.

Property: every file is either refused with an InputError that names the line and the
column of a cell that really is bad, or read exactly as a reference parser reads it.
The reference is written here, independently of lintools: the standard library's
``csv`` module for records and quoting, and a strict number parser (a regular expression
for the grammar, Python's correctly rounded ``float`` for the value).  The reader's chunk
size is made tiny so that every way through a file is taken: NumPy's compiled reader,
the halving search for refused rows, cells cut out of the bytes, and csv records.
"""

from __future__ import annotations

import csv
import io
import math
import re

import numpy as np
import pytest
from hypothesis import HealthCheck, event, given, settings
from hypothesis import strategies as st

from lintools import InputError
from lintools.exchange import csv_chunks as _csv_chunks
from lintools.exchange.csv_table import MISSING_VALUES, read_table

STRICT = re.compile(r"[+-]?(?:[0-9]+(?:\.[0-9]*)?|\.[0-9]+)(?:[eE][+-]?[0-9]+)?")
WHITE = " \t\x0b\x0c\x1c\x1d\x1e\x1f\r"
BAD_CELLS = ["n/a", "12..5", "-", "?", "12%", "1 000", "1,200", "1_000", "inf", "-Infinity", "nAn", "\u0661\u0662",
             "\uff11\uff12", "0x10", "1e999", "abc", "--1", "+-1", "1e", ".", "e5", "1.5.2", "2,5", "3 kg", "TRUE",
             "NA", "nan", "", "null", " "]


def strict_value(cell: str) -> float | None:
    """The reference number parser: strict grammar, then Python's float; None if not a finite number."""
    if STRICT.fullmatch(cell) is None:
        return None
    v = float(cell)
    return v if math.isfinite(v) else None


def reference(text: str, delimiter: str, target: str, missing: frozenset = frozenset({""}), drop: bool = False):
    """What a careful reader makes of ``text``: ('error', {(line, column), ...}) or ('table', ...).

    Cells are stripped of white space; an empty cell or a token in ``missing`` is missing.
    Without ``drop`` a missing cell is an error; with it, its line is dropped.  Any other
    cell that is not a strict number is an error, wherever it stands.
    """
    rows = []
    src = io.StringIO(text, newline="")
    reader = csv.reader(src, delimiter=delimiter, skipinitialspace=True, strict=True)
    start = 1
    for row in reader:
        rows.append((start, row))
        start = reader.line_num + 1
    header = [h.strip(WHITE) for h in rows[0][1]]
    data = [(ln, [c.strip(WHITE) for c in r]) for ln, r in rows[1:]
            if not (len(r) == 0 or (len(r) == 1 and not r[0].strip(WHITE)))]
    bad = set()
    for ln, r in data:
        assert len(r) == len(header)
        for j, cell in enumerate(r):
            if strict_value(cell) is None and not (drop and (cell in missing or cell == "")):
                bad.add((ln, header[j]))
    if bad:
        return "error", bad
    data = [(ln, r) for ln, r in data if not any(c in missing or c == "" for c in r)]
    if not data:
        return "error", set()
    X = np.array([[strict_value(c) for j, c in enumerate(r) if header[j] != target] for _, r in data])
    t = [r[header.index(target)] for _, r in data]
    values = [strict_value(c) for c in t]
    if all(re.fullmatch(r"[+-]?[0-9]+", c) for c in t) and all(abs(v) < 2.0**53 for v in values):
        y = tuple(int(v) for v in values)
    else:
        y = tuple(values)
    return "table", (tuple(h for h in header if h != target), X, y, [ln for ln, _ in data])


def number_cell(draw) -> str:
    v = draw(st.one_of(
        st.floats(allow_nan=False, allow_infinity=False, width=64),
        st.floats(-1e6, 1e6),
        st.integers(-10**6, 10**6),
        st.decimals(allow_nan=False, allow_infinity=False, places=3).map(str),
    ))
    if isinstance(v, str):
        return v
    if isinstance(v, int):
        return str(v)
    form = draw(st.sampled_from(["repr", "g", "e", "f"]))
    return {"repr": repr(v), "g": f"{v:.6g}", "e": f"{v:.4e}", "f": f"{v:.3f}"}[form]


@st.composite
def csv_file(draw):
    delimiter = draw(st.sampled_from([",", ";", "\t"]))
    eol = draw(st.sampled_from(["\n", "\r\n"]))
    k = draw(st.integers(2, 5))
    header = [f"c{j}" for j in range(k - 1)] + ["y"]
    n = draw(st.integers(1, 30))
    bad_rate = draw(st.sampled_from([0.0, 0.0, 0.02, 0.1]))
    lines = [delimiter.join(header)]
    for i in range(n):
        cells = []
        for j in range(k):
            if i > 0 and draw(st.floats(0, 1)) < bad_rate:
                cell = draw(st.sampled_from(BAD_CELLS))
            elif j == k - 1:
                cell = str(draw(st.integers(0, 1))) if draw(st.booleans()) else number_cell(draw)
            else:
                cell = number_cell(draw)
            if draw(st.integers(0, 9)) == 0:
                cell = draw(st.sampled_from([" ", "  ", "\t"])) + cell if delimiter != "\t" else cell
            if delimiter in cell or draw(st.integers(0, 19)) == 0:
                cell = '"' + cell.replace('"', '""') + '"'
            cells.append(cell)
        lines.append(delimiter.join(cells))
        if draw(st.integers(0, 29)) == 0:
            lines.append("")
    return delimiter, eol.join(lines) + eol


LOCATION = re.compile(r"line (\d+), (?:target |weights )?column '([^']*)'")


@settings(max_examples=40, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(case=csv_file(), chunked=st.booleans())
def test_every_file_is_refused_at_a_bad_cell_or_read_exactly_as_the_reference(tmp_path, monkeypatch, case, chunked):
    # oracle: the standard library's csv module plus the strict float parser above
    delimiter, text = case
    monkeypatch.setattr(_csv_chunks, "CHUNK", 48 if chunked else 1 << 20)  # set in every example
    path = tmp_path / "battery.csv"
    path.write_bytes(text.encode("utf-8"))
    kind, expected = reference(text, delimiter, "y")
    event(f"{kind}, {'tiny' if chunked else 'normal'} chunks")
    if kind == "error":
        with pytest.raises(InputError) as info:
            read_table(path, target="y", missing_values=())
        found = LOCATION.search(str(info.value))
        assert found, str(info.value)
        assert (int(found.group(1)), found.group(2)) in expected, (str(info.value), expected)
        return
    names, X, y, lines = expected
    t = read_table(path, target="y", missing_values=())
    assert t.names == names
    assert t.X.shape == X.shape and t.X.tobytes() == X.astype(float).tobytes()  # bit for bit, -0.0 included
    assert t.target == y and [type(v) for v in t.target] == [type(v) for v in y]
    assert t.lines.tolist() == lines
    assert t.delimiter == delimiter


@settings(max_examples=25, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(case=csv_file(), chunked=st.booleans())
def test_dropping_missing_values_keeps_exactly_the_complete_lines(tmp_path, monkeypatch, case, chunked):
    # oracle: the reference parser above, dropping the lines that hold a missing cell
    delimiter, text = case
    monkeypatch.setattr(_csv_chunks, "CHUNK", 48 if chunked else 1 << 20)  # set in every example
    path = tmp_path / "battery.csv"
    path.write_bytes(text.encode("utf-8"))
    kind, expected = reference(text, delimiter, "y", frozenset(MISSING_VALUES) | {""}, drop=True)
    event(kind)
    if kind == "error":
        with pytest.raises(InputError) as info:
            read_table(path, target="y", drop_missing=True)
        if not expected:
            assert "no data lines left after dropping missing values" in str(info.value)
            return
        found = LOCATION.search(str(info.value))
        assert found and (int(found.group(1)), found.group(2)) in expected, (str(info.value), expected)
        return
    names, X, y, lines = expected
    t = read_table(path, target="y", drop_missing=True)
    assert t.X.tobytes() == X.astype(float).tobytes() and t.target == y
    assert t.lines.tolist() == lines
