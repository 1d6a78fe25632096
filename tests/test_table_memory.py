"""Peak memory while reading a CSV file of one-character cells (issue 17: it was 28 times
the file's size).

The stated bound (lintools.exchange.csv_table, "Memory"): the returned arrays plus 2.5 times the file.
One-character cells are the worst case: a float64 value per two bytes of file makes the
returned matrix alone 4 times the file, so the bound is on what the reader needs beyond
what it returns.  Measured in a child process: the growth of its peak resident set while
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
    t = read_table(path, target="y")
    growth = kb("VmHWM") - before
else:
    tracemalloc.start()
    t = read_table(path, target="y")
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
    proc = subprocess.run([sys.executable, "-c", CHILD, str(path)], capture_output=True, text=True, timeout=600)
    assert proc.returncode == 0, proc.stderr
    got = json.loads(proc.stdout)
    assert got["rows"] == rows and got["sum"] == float(cells[:, :-1].sum())  # every cell read
    beyond = (got["growth"] - got["returned"]) / got["size"]
    assert beyond <= 2.5, got
