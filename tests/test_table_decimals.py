"""The decimal places written in each numeric column of a CSV file (``read_table(..., written_decimals=True)``).

Oracle: the standard library's ``csv`` module for the records and ``decimal.Decimal`` for
the place of each cell's last written digit (``Decimal(cell).as_tuple().exponent`` is
``E - f`` for a cell with ``f`` digits after its decimal mark and exponent ``E``), written
here independently of lintools.  The reader's chunk size is made tiny in half the
examples so that every way through a file is taken (the compiled reader on whole chunks,
chunks with text cells or refused rows, and csv records for quoted cells).
"""

from __future__ import annotations

import csv
import io
from decimal import Decimal

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from lintools import InputError
from lintools.exchange import csv_chunks as _csv_chunks
from lintools.exchange.csv_decimals import LIMIT, chunk_places, token_places
from lintools.exchange.csv_table import read_table

MISSING = ("NA", "")


@st.composite
def number_cell(draw) -> str:
    """A number in the strict grammar: sign, digits, decimal mark, exponent in every combination."""
    sign = draw(st.sampled_from(["", "", "-", "+"]))
    whole = draw(st.text("0123456789", min_size=0, max_size=5))
    frac = draw(st.one_of(st.none(), st.text("0123456789", min_size=0, max_size=6)))
    if not whole and not frac:
        whole = draw(st.text("0123456789", min_size=1, max_size=3))
    mantissa = whole + ("" if frac is None else "." + frac)
    if draw(st.integers(0, 3)) == 0:
        mark = draw(st.sampled_from(["e", "E"]))
        exp = draw(st.sampled_from(["", "+", "-"])) + draw(st.text("0123456789", min_size=1, max_size=3))
        mantissa += mark + exp
    return sign + mantissa


@st.composite
def csv_file(draw):
    """A file of numeric columns ``x0..`` and a target ``y``, with a text column ``tag`` in some
    files, padded and quoted cells, CRLF line ends and missing values ``NA`` in some."""
    k = draw(st.integers(1, 4))
    names = [f"x{j}" for j in range(k)] + ["y"]
    tag = draw(st.booleans())
    n = draw(st.integers(1, 25))
    eol = draw(st.sampled_from(["\n", "\r\n"]))
    missing_rate = draw(st.sampled_from([0.0, 0.0, 0.1]))
    rows = []
    for _ in range(n):
        row = []
        for _ in names:
            cell = "NA" if draw(st.floats(0, 1)) < missing_rate else draw(number_cell())
            if draw(st.integers(0, 9)) == 0:
                cell = draw(st.sampled_from([" ", "\t"])) + cell + draw(st.sampled_from(["", " "]))
            if draw(st.integers(0, 24)) == 0:
                cell = '"' + cell + '"'
            row.append(cell)
        if tag:
            row.append(draw(st.sampled_from(["a", "b.e", "c.1.e5"])))
        rows.append(row)
    header = names + (["tag"] if tag else [])
    return eol.join(",".join(r) for r in [header] + rows) + eol


def reference(text: str) -> dict[str, int]:
    """Per numeric column, ``-max(exponent)`` over the rows without a missing value in a used column."""
    reader = csv.reader(io.StringIO(text, newline=""), skipinitialspace=True, strict=True)
    header, *rows = list(reader)
    used = [j for j, h in enumerate(header) if h != "tag"]
    kept = [r for r in rows if all(r[j].strip(" \t\r") not in MISSING for j in used)]
    out = {}
    for j in used:
        if kept:
            places = [Decimal(r[j].strip(" \t\r")).as_tuple().exponent for r in kept]
            out[header[j]] = -max(min(max(q, -LIMIT), LIMIT) for q in places)
    return out


@settings(max_examples=60, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(text=csv_file(), chunked=st.booleans())
def test_written_decimals_equal_the_decimal_exponent_of_the_least_precise_cell(tmp_path, monkeypatch, text, chunked):
    # oracle: csv module + decimal.Decimal(cell).as_tuple().exponent (written here)
    monkeypatch.setattr(_csv_chunks, "CHUNK", 40 if chunked else 1 << 20)
    path = tmp_path / "d.csv"
    path.write_bytes(text.encode())
    expected = reference(text)
    try:
        t = read_table(path, target="y", drop_missing=True, exclude=["tag"] if "tag" in text.split("\n")[0] else [],
                       written_decimals=True)
    except InputError as exc:  # only: every line dropped, or a number beyond a double
        assert "no data lines left" in str(exc) or "beyond the range of a double" in str(exc), str(exc)
        return
    assert t.written_decimals == expected
    assert t.source == "d.csv"


@given(cells=st.lists(number_cell(), min_size=1, max_size=30), k=st.integers(1, 3))
@settings(max_examples=60, deadline=None)
def test_byte_and_token_readings_agree_with_decimal(cells, k):
    # oracle: decimal.Decimal(cell).as_tuple().exponent
    rows = max(1, len(cells) // k)
    cells = (cells * k)[: rows * k]
    chunk = ("\n".join(",".join(cells[i * k:(i + 1) * k]) for i in range(rows)) + "\n").encode()
    want = [min(max(Decimal(c).as_tuple().exponent, -LIMIT), LIMIT) for c in cells]
    got = chunk_places(np.frombuffer(chunk, np.uint8), ord(","), ord("."), rows, k, True)
    assert got.ravel().tolist() == want
    assert token_places([c.encode() for c in cells], b".").tolist() == want


def test_examples_of_the_rules(tmp_path):
    # the rules stated in lintools.exchange.csv_table (worked by hand)
    path = tmp_path / "e.csv"
    path.write_text("a;b;c;d;e;y\n12,5;1200;1,5e3;15e-1;,5;1\n3,25;7;2,0E3;2e-3;0,125;0\n")
    t = read_table(path, target="y", decimal=",", written_decimals=True)
    assert t.written_decimals == {"a": 1, "b": 0, "c": -2, "d": 1, "e": 1, "y": 0}
    assert read_table(path, target="y", decimal=",").written_decimals is None


def test_a_grid_of_one_digit_cells_has_its_units_as_last_written_digit(tmp_path):
    # the rule f - E = 0 for '7' (lintools.exchange.csv_table; worked by hand): a file whose
    # every line is one-digit cells takes the byte-grid path of the reader, which must
    # still record the place (it did not when the grid path and the decimals met)
    rows = "\n".join(",".join(str((3 * i + j) % 10) for j in range(4)) for i in range(3000))
    path = tmp_path / "g.csv"
    path.write_text("a,b,c,y\n" + rows + "\n")
    t = read_table(path, target="y", written_decimals=True)
    assert t.written_decimals == {"a": 0, "b": 0, "c": 0, "y": 0}


def test_indicator_columns_are_exact_and_precision_follows_the_order_asked(tmp_path):
    # common practice: indicator columns of text levels carry no rounding
    path = tmp_path / "p.csv"
    path.write_text("u,colour,v,y\n1.25,red,10,2.5\n2.5,blue,20,3.75\n3.75,red,30,1.0\n")
    t = read_table(path, target="y", written_decimals=True)
    assert t.written_decimals == {"u": 1, "v": 0, "y": 1}  # 2.5: one decimal, the least precise
    prec = t.data_precision(["v", "colour=red", "u"], target="y")
    assert prec.x_absolute.tolist() == [0.5, 0.0, 0.05]
    assert prec.y_absolute == 0.05 and "p.csv" in prec.what
    with pytest.raises(InputError, match="written_decimals=True"):
        read_table(path, target="y").data_precision()
    with pytest.raises(InputError, match="'w' is not a column of this table"):
        t.data_precision(["w"])
