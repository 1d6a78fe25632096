"""Peak memory while reading a CSV file (issue 17: it was 28 times the file's size for
one-character cells, then 5.5 times with the whole file held while reading).

The stated bound (lintools.exchange.csv_table, "Memory"): the returned table plus at most
half the file's size (the file is streamed: only about one chunk's bytes and working
arrays are held beside the result), and at most 2 times the file for numbers of several
digits.  One-character cells are the worst case: a float64 value per two bytes of file
makes the returned matrix alone 3.84 times the file, and with the line numbers and the
target the returned table is 4.16 times it, so no reader returning this table can stay
under 4 times; the bound there is 4.5 times.  Measured in a child process: the growth of its peak resident set while
reading (Linux VmHWM, reset just before the read), which sees every allocation, NumPy's
included; where the peak cannot be reset, tracemalloc's peak.
"""

from __future__ import annotations

import json
import subprocess
import sys

import numpy as np

CHILD = r"""
import json, os, sys, tracemalloc

def kb(field):
    try:
        with open("/proc/self/status") as fh:
            for line in fh:
                if line.startswith(field + ":"):
                    return int(line.split()[1]) * 1024
    except OSError:
        return None

from lintools.exchange.csv_table import read_table
path = sys.argv[1]
try:
    with open("/proc/self/clear_refs", "w") as fh:
        fh.write("5")
    exact = kb("VmHWM") is not None
except OSError:
    exact = False
if exact:
    before = kb("VmRSS")
    t = read_table(path, target=sys.argv[2])
    growth = kb("VmHWM") - before
else:
    tracemalloc.start()
    t = read_table(path, target=sys.argv[2])
    growth = tracemalloc.get_traced_memory()[1]
returned = t.X.nbytes + t.lines.nbytes + 8 * len(t.target)
print(json.dumps({"growth": growth, "returned": returned, "size": os.path.getsize(path), "rows": len(t.target),
                  "sum": float(t.X.sum()), "exact": exact}))
"""


def test_peak_memory_reading_50_mb_of_one_character_cells_stays_within_the_stated_bound(tmp_path):
    # source of the bound: the "Memory" rule stated in lintools.exchange.csv_table (2.5 x file beyond the result)
    k = 25
    rows = 1_000_000  # 50 MB: 25 one-digit cells and their separators a row
    rng = np.random.default_rng(3)
    cells = rng.integers(0, 10, size=(rows, k), dtype=np.uint8)
    cells[:, -1] %= 2
    body = np.empty((rows, 2 * k), dtype=np.uint8)
    body[:, 0::2] = cells + ord("0")
    body[:, 1::2] = ord(",")
    body[:, -1] = ord("\n")
    path = tmp_path / "short.csv"
    with open(path, "wb") as fh:
        fh.write((",".join(f"c{j}" for j in range(k - 1)) + ",y\n").encode())
        fh.write(body.tobytes())
    got = _measure(path, "y")
    assert got["rows"] == rows and got["sum"] == float(cells[:, :-1].sum())  # every cell read
    beyond = (got["growth"] - got["returned"]) / got["size"]
    assert beyond <= 0.5, got  # measured 0.11 (4.27 times the file in all, the table returned being 4.16)
    assert got["growth"] <= 4.5 * got["size"], got


def _measure(path, target: str) -> dict:
    proc = subprocess.run([sys.executable, "-c", CHILD, str(path), target], capture_output=True, text=True,
                          timeout=600)
    assert proc.returncode == 0, proc.stderr
    return json.loads(proc.stdout)


def test_peak_memory_reading_a_numeric_file_stays_under_twice_its_size(tmp_path):
    # source of the bound: the "Memory" rule stated in lintools.exchange.csv_table (at most 2 times the file
    # for numbers of several digits); the file: 8 columns of six-digit numbers and a 0/1 target, about 30 MB
    rng = np.random.default_rng(4)
    rows, k = 400_000, 8
    values = np.round(rng.normal(50.0, 20.0, size=(rows, k)), 4)
    y = rng.integers(0, 2, size=rows)
    path = tmp_path / "numbers.csv"
    with open(path, "w") as fh:
        fh.write(",".join(f"x{j}" for j in range(k)) + ",y\n")
        for lo in range(0, rows, 50_000):
            body = np.char.mod("%.6g", values[lo:lo + 50_000])
            fh.write("".join(",".join(r) + f",{t}\n" for r, t in zip(body.tolist(), y[lo:lo + 50_000].tolist())))
    got = _measure(path, "y")
    assert got["rows"] == rows
    assert got["sum"] == float(np.loadtxt(path, delimiter=",", skiprows=1, usecols=range(k)).sum())  # oracle
    assert got["growth"] - got["returned"] <= 0.5 * got["size"], got
    assert got["growth"] <= 2.0 * got["size"], got  # measured 1.6
