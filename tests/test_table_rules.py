"""Typed CSV columns, separators and bounded reads (issue 17): the cases reported, each
of which the reader before the fix got wrong (a number silently made up, a column turned
into indicators, a file read without end).

The files are the demo scenario's inspection records (lintools.cli.demo_data) written as CSV with
one cell edited, so every case is a realistic file with one thing wrong.
"""

from __future__ import annotations

import os
import re
import subprocess
import sys

import numpy as np
import pytest

from lintools import InputError
from lintools.cli.demo_data import inspection_data
from lintools.exchange.csv_table import MAX_LEVELS, read_header, read_table

DATA = inspection_data(4000)
COLUMNS = list(DATA.names) + ["leak"]


def inspection_csv(tmp_path, *, delimiter=",", edit=None, extra=None, name="inspection.csv"):
    """The demo records as CSV; ``edit`` maps (row, column) to a replacement cell;
    ``extra`` adds (name, cells) columns in front."""
    header = ([extra[0]] if extra else []) + COLUMNS
    lines = [delimiter.join(header)]
    for i in range(DATA.X.shape[0]):
        cells = ([extra[1][i]] if extra else []) + [repr(float(v)) for v in DATA.X[i]] + [str(int(DATA.leak[i]))]
        for (row, col), cell in (edit or {}).items():
            if row == i:
                cells[header.index(col)] = cell
        lines.append(delimiter.join(cells))
    path = tmp_path / name
    path.write_text("\n".join(lines) + "\n", encoding="utf-8")
    return path


# ------------------------------------------------------------------ one bad cell
@pytest.mark.parametrize("cell", ["n/a", "12..5", "-", "?", "12%", "1 000"])
def test_one_text_cell_in_a_numeric_column_is_refused_naming_file_line_column_and_cell(tmp_path, cell):
    # before: the column became hundreds of indicator columns and a fit "succeeded"
    path = inspection_csv(tmp_path, edit={(16, "nozzle_age"): cell})
    with pytest.raises(InputError) as info:
        read_table(path, target="leak")
    msg = str(info.value)
    assert "inspection.csv" in msg and "line 18, column 'nozzle_age'" in msg and repr(cell) in msg
    assert "--missing-values" in msg and "--categorical nozzle_age" in msg  # the remedies


def test_the_same_column_with_the_token_declared_missing_names_the_line_or_drops_it(tmp_path):
    path = inspection_csv(tmp_path, edit={(16, "nozzle_age"): "n/a"})
    with pytest.raises(InputError, match=r"line 18, column 'nozzle_age': missing value \('n/a'\)"):
        read_table(path, target="leak", missing_values=["NA", "n/a"])
    t = read_table(path, target="leak", missing_values=["NA", "n/a"], drop_missing=True)
    assert t.dropped == 1 and t.X.shape == (3999, 5) and 18 not in t.lines.tolist()
    # the kept rows are the demo records themselves (exact: repr round-trips a double)
    assert np.array_equal(t.X, np.delete(DATA.X, 16, axis=0))


@pytest.mark.parametrize("cell, why", [
    ("1_000", "digit separators '_'"),
    ("\uff11\uff12", "ASCII digits"),          # full-width digits
    ("\u0661\u0662", "ASCII digits"),          # Arabic-Indic digits
    ("inf", "not finite"),
    ("1e999", "not finite"),
    ('"1,200"', "thousands"),
])
def test_numbers_outside_the_strict_grammar_are_refused_with_the_reason(tmp_path, cell, why):
    # before: Python's float() read 1_000, full-width and Arabic-Indic digits as numbers
    path = inspection_csv(tmp_path, edit={(5, "line_speed"): cell})
    with pytest.raises(InputError) as info:
        read_table(path, target="leak")
    assert "line 7, column 'line_speed'" in str(info.value) and why in str(info.value)


def test_a_few_levels_plus_a_decimal_comma_cell_is_refused_not_made_categorical(tmp_path):
    # before: a column of 1/2/3 plus one "2,5" silently became indicator columns
    shift = [str(1 + i % 3) for i in range(4000)]
    shift[40] = "2,5"
    path = inspection_csv(tmp_path, delimiter=";", extra=("shift", shift))
    with pytest.raises(InputError) as info:
        read_table(path, target="leak")
    assert "line 42, column 'shift'" in str(info.value) and "--decimal ," in str(info.value)


def test_thousands_separators_in_a_whole_column_are_refused(tmp_path):
    # before: "1,200"-style cells made the column categorical
    counts = ['"1,%03d"' % (i % 1000) for i in range(4000)]
    path = inspection_csv(tmp_path, extra=("bottles", counts))
    with pytest.raises(InputError, match=r"line 2, column 'bottles'.*thousands"):
        read_table(path, target="leak")


# ----------------------------------------------------------------- text columns
def test_an_identifier_column_is_refused_by_name_with_the_exclude_remedy(tmp_path):
    # before: 3999 indicator columns, and the fit then recommended "l2 > 0"
    ids = [f"B-{i:05d}" for i in range(4000)]
    path = inspection_csv(tmp_path, extra=("bottle_id", ids))
    with pytest.raises(InputError) as info:
        read_table(path, target="leak")
    msg = str(info.value)
    assert "'bottle_id'" in msg and "identifier" in msg and "--exclude bottle_id" in msg and "l2" not in msg
    t = read_table(path, target="leak", exclude=["bottle_id"])
    assert t.names == tuple(DATA.names)


def test_a_date_column_is_refused_unless_excluded(tmp_path):
    days = [f"2026-11-{1 + i % 5:02d}" for i in range(4000)]
    path = inspection_csv(tmp_path, extra=("inspected", days))
    with pytest.raises(InputError, match="'inspected' holds dates"):
        read_table(path, target="leak")
    assert read_table(path, target="leak", exclude=["inspected"]).X.shape == (4000, 5)


def test_text_levels_become_indicators_up_to_the_limit_and_beyond_it_only_when_declared(tmp_path):
    few = [f"shift-{i % MAX_LEVELS}" for i in range(4000)]
    t = read_table(inspection_csv(tmp_path, extra=("crew", few)), target="leak")
    assert t.X.shape == (4000, 5 + MAX_LEVELS - 1) and t.reference_levels == {"crew": "shift-0"}
    many = [f"shift-{i % (MAX_LEVELS + 1)}" for i in range(4000)]
    path = inspection_csv(tmp_path, extra=("crew", many), name="many.csv")
    with pytest.raises(InputError, match=f"'crew' has {MAX_LEVELS + 1} levels.*--categorical crew"):
        read_table(path, target="leak")
    t = read_table(path, target="leak", categorical=["crew"])
    assert t.X.shape == (4000, 5 + MAX_LEVELS)
    # every indicator column is the exact indicator of its level (pandas-free check)
    col = t.names.index("crew=shift-7")
    assert np.array_equal(t.X[:, col], np.array([lv == "shift-7" for lv in many], dtype=float))


def test_declared_categorical_reads_numbers_as_levels_and_the_target_as_labels(tmp_path):
    codes = [str(1 + i % 3) for i in range(4000)]
    path = inspection_csv(tmp_path, extra=("line", codes))
    numeric = read_table(path, target="leak")
    assert "line" in numeric.names  # undeclared: a numeric column
    t = read_table(path, target="leak", categorical=["line", "leak"])
    assert t.names[:2] == ("line=2", "line=3") and set(t.target) == {"0", "1"}


# ------------------------------------------------------------------- separators
def test_a_semicolon_file_is_read_and_a_wrong_separator_is_named(tmp_path):
    # before: "the target is missing", listing one column 'fill_temperature;line_speed;...'
    path = inspection_csv(tmp_path, delimiter=";")
    t = read_table(path, target="leak")
    assert t.delimiter == ";" and np.array_equal(t.X, DATA.X)
    with pytest.raises(InputError, match=r"is not in .*the header holds ';' 5 times.*--delimiter ';'"):
        read_table(path, target="leak", delimiter=",")


def test_tabs_are_detected_and_a_tie_is_refused(tmp_path):
    t = read_table(inspection_csv(tmp_path, delimiter="\t"), target="leak")
    assert t.delimiter == "\t" and np.array_equal(t.X, DATA.X)
    tie = tmp_path / "tie.csv"
    tie.write_text("a,b;c;d,y\n1,2;3;4,0\n", encoding="utf-8")
    with pytest.raises(InputError, match="2 commas and 2 semicolons.*--delimiter"):
        read_table(tie, target="y")
    assert read_header(tie, delimiter=";") == ("a,b", "c", "d,y")


def test_a_decimal_comma_is_read_exactly_when_asked_for(tmp_path):
    path = tmp_path / "comma.csv"
    rows = ["{};{};{}".format(repr(float(a)).replace(".", ","), repr(float(b)).replace(".", ","), int(y))
            for a, b, y in zip(DATA.X[:, 0], DATA.X[:, 2], DATA.leak)]
    path.write_text("temp;torque;leak\n" + "\n".join(rows) + "\n", encoding="utf-8")
    t = read_table(path, target="leak", decimal=",")
    assert np.array_equal(t.X, DATA.X[:, [0, 2]])  # exact: the digits are Python's repr
    with pytest.raises(InputError, match="line 2, column 'temp'.*decimal mark is ','"):
        read_table(path, target="leak")
    with pytest.raises(InputError, match="decimal mark"):
        read_table(path, target="leak", decimal=",", delimiter=",")


# ---------------------------------------------------------------- bounded reads
def test_size_limits_are_enforced_while_reading_and_adjustable(tmp_path):
    path = inspection_csv(tmp_path)
    size = os.path.getsize(path)
    with pytest.raises(InputError, match="larger than the 1000 bytes allowed.*max_bytes"):
        read_table(path, target="leak", max_bytes=1000)
    assert read_table(path, target="leak", max_bytes=size).X.shape == (4000, 5)
    long_line = tmp_path / "long.csv"
    long_line.write_text("x,y\n1,0\n" + "2" * 5000 + ",1\n", encoding="utf-8")
    with pytest.raises(InputError, match="line 3 is longer than 4096 bytes"):
        read_table(long_line, target="y", max_line_bytes=4096)
    quoted = tmp_path / "quoted.csv"
    quoted.write_text('x,note,y\n1,"' + "a" * 200_000 + '",0\n', encoding="utf-8")
    with pytest.raises(InputError, match="line 2 has a cell longer than 131072 bytes"):
        read_table(quoted, target="y", features=["x"], extra=["note"])
    unclosed = tmp_path / "unclosed.csv"
    unclosed.write_text('x,note,y\n1,"open,0\n' + "2,b,1\n" * 2000, encoding="utf-8")
    with pytest.raises(InputError, match="record starting on line 2 runs past 4096 bytes.*unmatched quote"):
        read_table(unclosed, target="y", features=["x"], extra=["note"], max_line_bytes=4096)


CHILD = """
import os, resource, sys
resource.setrlimit(resource.RLIMIT_AS, (2 << 30, 2 << 30))  # a reader without bounds fails here, not the machine
from lintools import InputError
from lintools.exchange.csv_table import read_table
try:
    read_table(sys.argv[1], target="y")
except InputError as exc:
    print(exc)
"""


@pytest.mark.parametrize("kind, fragment", [("device", "is a device"), ("fifo", "is a pipe (FIFO)")])
def test_special_files_are_refused_without_reading_them(tmp_path, kind, fragment):
    # before: /dev/zero was read until memory ran out, and a FIFO blocked until a writer came
    path = "/dev/zero" if kind == "device" else str(tmp_path / "pipe.csv")
    if kind == "fifo":
        os.mkfifo(path)
    try:
        proc = subprocess.run([sys.executable, "-c", CHILD, path], capture_output=True, text=True, timeout=60)
    except subprocess.TimeoutExpired:
        pytest.fail(f"reading {path} did not return within 60 s")
    assert fragment in proc.stdout, proc.stdout + proc.stderr


@pytest.mark.parametrize("raw, fragment", [
    (b"x,y\n1,0\n2\x00,1\n", "line 3 holds a NUL byte"),
    (b"x,y\n1,0\n2,1\n\xff,0\n", "line 4 is not UTF-8 text (byte 0xff at byte 1"),
    (b"x,y\n1,0\n\"2\xfe\",1\n", "line 3 is not UTF-8 text"),
    (b"x,\x07y\n1,0\n", "not printable"),
    (b'x,y\n"1"x,0\n', "line 2"),
])
def test_damaged_files_name_the_line(tmp_path, raw, fragment):
    path = tmp_path / "bad.csv"
    path.write_bytes(raw)
    with pytest.raises(InputError, match=re.escape(fragment)):
        read_table(path, target=None)


def test_quoted_cells_crlf_bom_and_blank_lines_read_as_the_csv_module_reads_them(tmp_path):
    # oracle: the standard library's csv module reads this file into the same cells
    path = tmp_path / "quoted.csv"
    path.write_bytes(b'\xef\xbb\xbf"x","note",y\r\n1.5,"a, b",0\r\n\r\n"2","line\r\nbreak",1\r\n 3 ,"say ""hi""",0\r\n')
    t = read_table(path, target="y", features=["x"], extra=["note"])
    assert t.X[:, 0].tolist() == [1.5, 2.0, 3.0] and t.target == (0, 1, 0)
    assert t.extra["note"] == ("a, b", "line\r\nbreak", 'say "hi"')
    assert t.lines.tolist() == [2, 4, 6]


def test_integer_targets_keep_how_they_were_written(tmp_path):
    # "0.0"/"1.0" stay floats (a model fitted on float labels names its classes so)
    path = tmp_path / "t.csv"
    path.write_text("x,y\n1,0.0\n2,1.0\n3,1.0\n", encoding="utf-8")
    assert read_table(path, target="y").target == (0.0, 1.0, 1.0)
    path.write_text("x,y\n1,0\n2,1\n3,1e0\n", encoding="utf-8")
    assert [type(v) for v in read_table(path, target="y").target] == [float] * 3
    path.write_text("x,y\n1,-3\n2,10\n3,100\n", encoding="utf-8")
    assert read_table(path, target="y").target == (-3, 10, 100)
