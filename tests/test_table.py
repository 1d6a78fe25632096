"""The CSV reader: header rules, missing values, text columns, hostile files."""

import csv
import re
import io

import numpy as np
import pandas as pd
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from lintools import InputError
from lintools.exchange.csv_table import read_table
from test_table_battery import reference


def _write(tmp_path, text, name="data.csv"):
    path = tmp_path / name
    path.write_text(text, encoding="utf-8")
    return path


def test_numbers_and_text_columns_against_pandas(tmp_path):
    text = "speed,shift,weight,leak\n1.5,day,2,0\n2.5,night,1,1\n3.0,late,1,0\n4.0,day,3,1\n"
    path = _write(tmp_path, text)
    t = read_table(path, target="leak", weights="weight")
    # Oracle: pandas read_csv + get_dummies with the first sorted level dropped.
    df = pd.read_csv(io.StringIO(text))
    ref = pd.get_dummies(df[["speed", "shift"]], columns=["shift"], prefix_sep="=", drop_first=True, dtype=float)
    assert t.names == tuple(ref.columns)
    assert np.array_equal(t.X, ref.to_numpy())
    assert t.target == (0, 1, 0, 1)
    assert np.array_equal(t.weights, df["weight"].to_numpy(float))
    assert t.reference_levels == {"shift": "day"}
    assert list(t.lines) == [2, 3, 4, 5]


def test_named_reference_level(tmp_path):
    path = _write(tmp_path, "a,g,y\n1,u,0\n2,v,1\n3,w,1\n")
    t = read_table(path, target="y", reference_levels={"g": "w"})
    assert t.names == ("a", "g=u", "g=v")


def test_missing_values_name_line_and_column_or_are_dropped(tmp_path):
    path = _write(tmp_path, "a,b,y\n1,2,0\n3,,1\n4,5,NA\n6,7,1\n")
    with pytest.raises(InputError, match="line 3, column 'b': missing value"):
        read_table(path, target="y")
    t = read_table(path, target="y", drop_missing=True)
    assert t.dropped == 2 and list(t.lines) == [2, 5]


@pytest.mark.parametrize(
    "text, fragment",
    [
        ("", "a header line is required"),
        ("1,2,3\n4,5,6\n", "looks like data"),
        ("a,a,y\n1,2,3\n", "more than once"),
        ("a,,y\n1,2,3\n", "column 2 of the header has no name"),
        ("a,b,y\n1,2\n", "line 2 has 2 fields but the header has 3"),
        ("a,b,y\n", "no data lines"),
        ("a,b,y\n1,inf,0\n", "line 2, column 'b': value 'inf' is not finite"),
        ("a,b,y\n1,2,0\n", "column 'z' is not in"),
    ],
)
def test_bad_files_are_refused(tmp_path, text, fragment):
    path = _write(tmp_path, text)
    target = "z" if "'z'" in fragment else "y"
    with pytest.raises(InputError, match=fragment):
        read_table(path, target=target)


def test_a_missing_file_is_an_input_error(tmp_path):
    with pytest.raises(InputError, match="cannot be read"):
        read_table(tmp_path / "nope.csv", target="y")


@settings(max_examples=60, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(st.binary(max_size=300))
def test_random_bytes_never_crash(tmp_path, blob):
    # Fuzzing (hypothesis): any file either reads or raises InputError, never anything else.
    path = tmp_path / "fuzz.csv"
    path.write_bytes(blob)
    try:
        read_table(path, target=None)
    except InputError:
        pass


@settings(max_examples=40, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(st.lists(st.lists(st.floats(allow_nan=False, allow_infinity=False, width=64), min_size=3, max_size=3), min_size=1, max_size=20))
def test_numbers_round_trip_exactly(tmp_path, rows):
    buf = io.StringIO()
    w = csv.writer(buf)
    w.writerow(["p", "q", "r"])
    w.writerows([[repr(v) for v in row] for row in rows])
    path = tmp_path / "nums.csv"
    path.write_text(buf.getvalue())
    t = read_table(path, target="r")
    assert np.array_equal(t.X, np.array(rows)[:, :2])


def _reference_target(text):
    """The target column as the standard library's csv module and Python's float read it (ints when
    every cell is written without a decimal mark or exponent)."""
    rows = list(csv.reader(io.StringIO(text)))[1:]
    cells = [r[-1].strip() for r in rows if r]
    if all(c.lstrip("+-").isdigit() for c in cells):
        return tuple(int(c) for c in cells)
    return tuple(float(c) for c in cells)


@pytest.mark.parametrize("late", ["-0.0", "2.5", "300", "-129", "1e0", "7", "-0"])
def test_a_target_of_small_whole_numbers_read_exactly_when_another_value_comes_late(tmp_path, monkeypatch, late):
    # oracle: the csv module and Python's float (above); the reader holds such a target compactly
    # (int8) until the first value it cannot hold, which comes here in a later chunk
    from lintools.exchange import csv_chunks

    monkeypatch.setattr(csv_chunks, "CHUNK", 64)
    body = "".join(f"{i % 7}.5,{i % 3 - 1}\n" for i in range(200))
    text = "a,y\n" + body + f"1.5,{late}\n" + "2.5,1\n"
    t = read_table(_write(tmp_path, text), target="y")
    want = _reference_target(text)
    assert t.target == want and [type(v) for v in t.target] == [type(v) for v in want]
    assert [str(v) for v in t.target] == [str(v) for v in want]  # -0.0 keeps its sign
    assert t.X[:, 0].tolist() == [float(r.split(",")[0]) for r in text.splitlines()[1:]]


def test_a_missing_target_cell_dropped_with_a_compact_target(tmp_path, monkeypatch):
    # oracle: the csv module and Python's float (above), the line with the missing cell left out
    from lintools.exchange import csv_chunks

    monkeypatch.setattr(csv_chunks, "CHUNK", 64)
    lines = [f"{i},{i % 2}" for i in range(60)]
    lines[37] = "37,NA"
    text = "a,y\n" + "\n".join(lines) + "\n"
    t = read_table(_write(tmp_path, text), target="y", drop_missing=True)
    assert t.dropped == 1 and t.target == tuple(i % 2 for i in range(60) if i != 37)
    assert t.lines.tolist() == [i + 2 for i in range(60) if i != 37]


@pytest.mark.parametrize("chunk", [7, 64, 1 << 20])
def test_lines_cut_at_any_chunk_mark_and_quoted_records_across_it(tmp_path, monkeypatch, chunk):
    # oracle: the csv module (RFC 4180 quoting); the file is streamed a chunk at a time, so a
    # quoted cell holding a line break may cross the chunk mark
    from lintools.exchange import csv_chunks

    monkeypatch.setattr(csv_chunks, "CHUNK", chunk)
    rows = [f'{i * 0.25},"note {i}\nsecond line",{i % 2}' if i % 5 == 0 else f"{i * 0.25},plain,{i % 2}"
            for i in range(40)]
    text = "a,note,y\n" + "\n".join(rows) + "\n"
    t = read_table(_write(tmp_path, text), target="y", extra=["note"])
    ref = list(csv.reader(io.StringIO(text)))[1:]
    assert t.X[:, 0].tolist() == [float(r[0]) for r in ref]
    assert t.extra["note"] == tuple(r[1] for r in ref) and t.target == tuple(int(r[2]) for r in ref)


def test_a_file_larger_than_the_limit_is_refused_while_it_is_streamed(tmp_path, monkeypatch):
    # source: the "File" rule of lintools.exchange.csv_table (at most max_bytes, counted while reading)
    from lintools.exchange import csv_chunks

    monkeypatch.setattr(csv_chunks, "CHUNK", 64)
    text = "a,y\n" + "".join(f"{i},{i % 2}\n" for i in range(3000))
    path = _write(tmp_path, text)
    with pytest.raises(InputError, match="larger than the 5000 bytes allowed"):
        read_table(path, target="y", max_bytes=5000)
    assert len(read_table(path, target="y", max_bytes=len(text)).target) == 3000


# ------------------------------------------------------------------ short whole numbers read from the bytes
SHORT_WHOLE = ["0", "1", "7", "-0", "+0", "-1", "+9", "00", "007", "-12", "+123", "9999", "-999", "0000"]
SHORT_NEAR = ["12345", "-1234", "1.", ".5", "-.5", "1.0", "1e3", "1e", "e1", "-", "+", "--1", "+-1", "1-", "1+",
              ".", "1.2.3", " 1", "1 ", "0x1", "1_0", "NA", "nan", "inf", "", "2,5", "\u0661", "1e99", "12%"]


@st.composite
def _short_cells_file(draw):
    """A CSV text whose columns hold short whole numbers, mostly, and near-numbers: (delimiter, text)."""
    delimiter = draw(st.sampled_from([",", ";", "\t"]))
    eol = draw(st.sampled_from(["\n", "\r\n"]))
    k = draw(st.integers(1, 5))
    n = draw(st.integers(1, 40))
    digits_only = draw(st.booleans())  # every cell one digit: the chunk is read as a grid of bytes
    pools = [draw(st.sampled_from(["whole", "whole", "mixed"])) for _ in range(k)]
    lines = [delimiter.join([f"c{j}" for j in range(k - 1)] + ["y"])]
    for _ in range(n):
        cells = []
        for pool in pools:
            near = pool == "mixed" and draw(st.integers(0, 4)) == 0
            cell = draw(st.sampled_from(SHORT_NEAR if near else SHORT_WHOLE))
            if digits_only:
                cell = draw(st.sampled_from(list("0123456789") + ([":", "/", ":", "a", "-", " "] if near else [])))
            cells.append(f'"{cell}"' if delimiter in cell else cell)
        line = delimiter.join(cells)
        if digits_only and k > 1 and draw(st.integers(0, 9)) == 0:  # a separator lost: a ragged line
            line = line.replace(delimiter, draw(st.sampled_from([".", ":", "0"])), 1)
        lines.append(line)
    return delimiter, eol.join(lines) + eol


def _outcome(path, **kw):
    """read_table's table as bytes and tuples, or the text of its InputError."""
    try:
        t = read_table(path, target="y", missing_values=(), **kw)
    except InputError as exc:
        return "error", str(exc)
    return "table", (t.names, t.X.shape, t.X.tobytes(), t.target, [type(v) for v in t.target], t.lines.tolist())


@settings(max_examples=80, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(case=_short_cells_file(), chunk=st.sampled_from([40, 1 << 20]))
def test_short_whole_numbers_read_from_the_bytes_agree_with_the_exact_path_and_the_reference(tmp_path, monkeypatch,
                                                                                            case, chunk):
    # oracle: the csv module plus a strict regular-expression float parser (reference() of
    # test_table_battery); and the exact path (cells classified one by one, the compiled reader for the
    # rest), taken by switching the byte reader of short whole numbers off: same table bit for bit,
    # or the same error message
    from lintools.exchange import csv_chunks

    delimiter, text = case
    monkeypatch.setattr(csv_chunks, "CHUNK", chunk)
    path = tmp_path / "short.csv"
    path.write_bytes(text.encode("utf-8"))
    fast = _outcome(path)
    with monkeypatch.context() as m:  # undone before the next example
        m.setattr(csv_chunks, "whole_columns", lambda a, grid, cols, crlf: ((), np.zeros((len(grid), 0))))
        m.setattr(csv_chunks, "one_digit_cells", lambda a, rows, k, separator: None)
        exact = _outcome(path)
    assert fast == exact
    if fast[0] == "error" and "fields but the header has" in fast[1]:
        return  # a ragged line (the reference parser takes only files of whole records)
    kind, expected = reference(text, delimiter, "y")
    assert fast[0] == kind, (fast, expected)
    if kind == "table":
        names, X, y, lines = expected
        assert fast[1][2] == X.astype(float).tobytes() and fast[1][3] == y and fast[1][5] == lines


_CELL = st.one_of(st.from_regex(r"[+-]?[0-9]{1,5}", fullmatch=True), st.from_regex(r"[+-]?[0-9]{1,3}", fullmatch=True),
                  st.sampled_from(["+", "-", ".", "", "1.", "1e2", " 1", "1 "]), st.text("0123456789+-.eE x:/", max_size=6))


@settings(max_examples=300, deadline=None)
@given(st.lists(st.lists(_CELL, min_size=3, max_size=3), min_size=1, max_size=12), st.booleans())
def test_the_byte_reader_takes_exactly_the_columns_of_a_sign_and_digits_up_to_four_bytes(rows, crlf):
    # the grammar (lintools.exchange.csv_table "Numbers", restricted to whole numbers written without
    # mark or exponent) as a regular expression here, and Python's float for the value (exact for
    # such short whole numbers); a column is taken only when every one of its cells has that form
    import re

    from lintools.exchange.csv_whole import WIDTH, whole_columns

    eol = b"\r\n" if crlf else b"\n"
    chunk = b"".join(b",".join(c.encode() for c in r) + eol for r in rows)
    a = np.frombuffer(chunk, dtype=np.uint8)
    grid = np.flatnonzero((a == ord(",")) | (a == 10)).reshape(len(rows), 3)
    cols, block = whole_columns(a, grid, (0, 1, 2), crlf)
    for j in range(3):
        cells = [r[j] for r in rows]
        ok = all(re.fullmatch(r"[+-]?[0-9]+", c) and len(c) <= WIDTH for c in cells)
        assert (j in cols) == ok, (cells, cols)
        if ok:
            got = block[:, cols.index(j)]
            assert got.tobytes() == np.array([float(c) for c in cells]).tobytes()  # -0 as -0.0 too


@pytest.mark.parametrize("odd", [":", "/", "a", "-", "+", " ", ".", "\x00", "\u00e9"])
def test_a_grid_of_one_digit_cells_with_one_other_byte_is_read_by_the_exact_rules(tmp_path, odd):
    # oracle: the csv module plus the strict float parser (reference() of test_table_battery); the
    # other byte stands in one cell of a file of one-digit cells (the chunk read as a grid of bytes)
    rng = np.random.default_rng(len(odd) + ord(odd[0]))
    cells = rng.integers(0, 10, size=(50, 4)).astype(str).astype(object)
    cells[int(rng.integers(1, 50)), int(rng.integers(0, 4))] = odd
    text = "a,b,c,y\n" + "".join(",".join(r) + "\n" for r in cells.tolist())
    path = tmp_path / "grid.csv"
    path.write_bytes(text.encode("utf-8"))
    got = _outcome(path)
    if odd == "\x00":
        assert got[0] == "error" and "NUL byte" in got[1]
        return
    kind, expected = reference(text, ",", "y")
    assert got[0] == kind == "error", got
    found = re.search(r"line (\d+), (?:target )?column '([^']*)'", got[1])
    assert found and (int(found.group(1)), found.group(2)) in expected, (got, expected)


def test_a_bad_short_cell_of_a_crlf_file_is_named_with_its_own_text(tmp_path):
    # source: the "Column types" rule of lintools.exchange.csv_table (the cell's text is named); the
    # carriage return of a CRLF line end belongs to no cell (RFC 4180 line ends)
    path = tmp_path / "crlf.csv"
    path.write_bytes(b"a,b,y\r\n1,2,3\r\n4,5,6\r\n1a,7,1\r\n")
    with pytest.raises(InputError, match=r"line 4, column 'a': '1a' is not a number"):
        read_table(path, target="y")
