"""Reading a CSV file: lintools.read_table beside numpy.loadtxt and pandas.read_csv.

Usage::

    python benchmarks/read_table.py             # 500,000 rows (about 38 MB) and 50 MB of one-character cells
    python benchmarks/read_table.py --quick     # 20,000 rows and 2 MB (what CI runs)
    python benchmarks/read_table.py --rows 1000000 --rounds 7 --dir /tmp

Two files are written to ``--dir`` and deleted at the end:

* **numbers**: the demo scenario's inspection records (lintools.cli.demo_data, invented data), nine
  numeric columns written with ``%.6g`` (the five features, the fill deviation, the
  supplier's leak probability, the defect class code, the leak label 0/1): a purely
  numeric file, the case the readers are compared on;
* **short cells**: 25 columns of one-digit cells (two bytes a cell with its separator),
  the worst case for memory: the float64 result alone is four times the file.

Each reader runs in a fresh child process per round, rounds interleaved, so a slow spell
of a shared machine hits every reader alike; the paired ratio to numpy.loadtxt is taken
per round (and to pandas' reader, CPU time).  Reported: median (and best) wall seconds, CPU seconds (the process's own, steadier than
wall time on a loaded machine), MB/s of file, and the growth of the peak resident set
while reading (Linux ``VmHWM``, reset just before the read, less the resident set then),
also as a multiple of the file size.  pandas is timed with its default float parser;
it is an oracle here only and is skipped (said so) when it is not installed.  The
values read are checked against numpy.loadtxt (exact equality); nothing is asserted
about time.
"""

from __future__ import annotations

import argparse
import json
import os
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))

MB = 1 << 20
READERS = ("read_table", "read_table+decimals", "numpy.loadtxt", "pandas.read_csv")


def write_numbers(path: Path, rows: int) -> None:
    """The demo records as a purely numeric CSV (``%.6g``), written a block at a time."""
    from lintools.cli.demo_data import DEFECT_CLASSES, inspection_data, supplier_leak_model

    slopes, intercept = supplier_leak_model()
    d = inspection_data(rows, seed=17)
    p = 1.0 / (1.0 + np.exp(-(intercept + d.X @ np.array([slopes[f] for f in d.names]))))
    code = np.array([DEFECT_CLASSES.index(c) for c in d.defect])
    cols = np.column_stack([d.X, d.fill_deviation, p])
    with open(path, "w", encoding="ascii") as fh:
        fh.write(",".join(list(d.names) + ["fill_deviation", "supplier_p", "defect_code", "leak"]) + "\n")
        for lo in range(0, rows, 50_000):
            hi = min(rows, lo + 50_000)
            body = np.char.mod("%.6g", cols[lo:hi])
            lines = [",".join(r) + f",{c},{int(y)}" for r, c, y in zip(body.tolist(), code[lo:hi], d.leak[lo:hi])]
            fh.write("\n".join(lines) + "\n")


def write_short(path: Path, size: int) -> None:
    """25 columns of one-digit cells (the last one 0/1), about ``size`` bytes."""
    rng = np.random.default_rng(5)
    k = 25
    rows = max(1, size // (2 * k))
    cells = rng.integers(0, 10, size=(rows, k), dtype=np.uint8)
    cells[:, -1] %= 2
    out = np.empty((rows, 2 * k), dtype=np.uint8)
    out[:, 0::2] = cells + ord("0")
    out[:, 1::2] = ord(",")
    out[:, -1] = ord("\n")
    with open(path, "wb") as fh:
        fh.write((",".join(f"c{j}" for j in range(k - 1)) + ",y\n").encode())
        fh.write(out.tobytes())


def _status_kb(field: str) -> int | None:
    try:
        with open("/proc/self/status") as fh:
            for line in fh:
                if line.startswith(field + ":"):
                    return int(line.split()[1])
    except OSError:
        return None
    return None


def _reset_peak() -> bool:
    try:
        with open("/proc/self/clear_refs", "w") as fh:
            fh.write("5")
        return _status_kb("VmHWM") is not None
    except OSError:
        return False


def child(reader: str, path: str, target: str, check: bool) -> None:
    """Read ``path`` once with ``reader``; print one JSON line of figures."""
    import resource

    if reader.startswith("read_table"):
        from lintools.exchange.csv_table import read_table

        def read():  # "+decimals": with the decimal places written in each column (written_decimals=True)
            return read_table(path, target=target, written_decimals=reader.endswith("+decimals"))
    elif reader == "numpy.loadtxt":
        def read():
            return np.loadtxt(path, delimiter=",", skiprows=1)
    else:
        import pandas as pd

        def read():
            return pd.read_csv(path)
    exact = _reset_peak()
    rss0 = (_status_kb("VmRSS") if exact else resource.getrusage(resource.RUSAGE_SELF).ru_maxrss) * 1024
    t0, c0 = time.perf_counter(), time.process_time()
    result = read()
    wall, cpu = time.perf_counter() - t0, time.process_time() - c0
    rss1 = (_status_kb("VmHWM") if exact else resource.getrusage(resource.RUSAGE_SELF).ru_maxrss) * 1024
    out = {"reader": reader, "wall": wall, "cpu": cpu, "rss_growth": rss1 - rss0, "exact_rss": exact}
    if check and reader == "read_table":
        ref = np.loadtxt(path, delimiter=",", skiprows=1, ndmin=2)
        names = open(path, encoding="ascii").readline().strip().split(",")
        j = names.index(target)
        same_x = np.array_equal(result.X, np.delete(ref, j, axis=1))
        same_y = np.array_equal(np.array(result.target, dtype=float), ref[:, j])
        out["agrees_with_loadtxt"] = bool(same_x and same_y)
    print(json.dumps(out))


def run_child(reader: str, path: Path, target: str, check: bool) -> dict | None:
    cmd = [sys.executable, __file__, "--child", reader, "--path", str(path), "--target", target]
    cmd += ["--check"] if check else []
    proc = subprocess.run(cmd, capture_output=True, text=True)
    if proc.returncode != 0:
        if reader == "pandas.read_csv" and "No module named 'pandas'" in proc.stderr:
            return None
        raise SystemExit(f"child {reader} failed:\n{proc.stderr}")
    return json.loads(proc.stdout.strip().splitlines()[-1])


def measure(label: str, path: Path, target: str, rounds: int) -> None:
    size = path.stat().st_size
    runs: dict[str, list[dict]] = {r: [] for r in READERS}
    for i in range(rounds):
        for reader in READERS:
            got = run_child(reader, path, target, check=(i == 0))
            if got is not None:
                runs[reader].append(got)
    print(f"\n{label}: {path.name}, {size / MB:.1f} MB, {rounds} rounds (median; best in brackets)")
    head = (f"{'reader':<20}{'wall s':>16}{'CPU s':>16}{'MB/s':>8}{'peak RSS growth MB':>20}{'x file':>8}"
            f"{'wall / loadtxt':>16}{'CPU / loadtxt':>15}{'CPU / pandas':>14}")
    print(head)
    print("-" * len(head))
    base = runs["numpy.loadtxt"]
    pandas = runs["pandas.read_csv"]
    for reader in READERS:
        r = runs[reader]
        if not r:
            print(f"{reader:<20}  (not installed: skipped)")
            continue
        wall = statistics.median(x["wall"] for x in r)
        cpu = statistics.median(x["cpu"] for x in r)
        best_wall, best_cpu = min(x["wall"] for x in r), min(x["cpu"] for x in r)
        rss = statistics.median(x["rss_growth"] for x in r)
        ratio_w = statistics.median(x["wall"] / b["wall"] for x, b in zip(r, base))
        ratio_c = statistics.median(x["cpu"] / b["cpu"] for x, b in zip(r, base))
        ratio_p = f"{statistics.median(x['cpu'] / b['cpu'] for x, b in zip(r, pandas)):>14.2f}" if pandas else ""
        print(f"{reader:<20}{wall:>8.3f} ({best_wall:.3f}){cpu:>8.3f} ({best_cpu:.3f}){size / MB / wall:>8.1f}"
              f"{rss / MB:>20.1f}{rss / size:>8.2f}{ratio_w:>16.2f}{ratio_c:>15.2f}{ratio_p}")
    agree = runs["read_table"][0].get("agrees_with_loadtxt")
    print(f"read_table agrees with numpy.loadtxt (every value, exactly): {agree}")
    if not runs["read_table"][0]["exact_rss"]:
        print("(peak RSS from getrusage: not reset per read, an upper bound)")


def main(argv: list[str] | None = None) -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--quick", action="store_true", help="20,000 rows and 2 MB of short cells, 2 rounds")
    ap.add_argument("--rows", type=int, default=None, help="rows of the numeric file (default 500,000)")
    ap.add_argument("--short-mb", type=float, default=None, help="size of the short-cell file in MB (default 50)")
    ap.add_argument("--rounds", type=int, default=None, help="rounds (default 7; quick 2)")
    ap.add_argument("--dir", default=tempfile.gettempdir(), help="where the files go (default the temp folder)")
    ap.add_argument("--child", choices=READERS, help=argparse.SUPPRESS)
    ap.add_argument("--path", help=argparse.SUPPRESS)
    ap.add_argument("--target", help=argparse.SUPPRESS)
    ap.add_argument("--check", action="store_true", help=argparse.SUPPRESS)
    args = ap.parse_args(argv)
    if args.child:
        child(args.child, args.path, args.target, args.check)
        return
    rows = args.rows or (20_000 if args.quick else 500_000)
    short = int((args.short_mb or (2 if args.quick else 50)) * 1e6)
    rounds = args.rounds or (2 if args.quick else 7)
    numbers = Path(args.dir) / f"lintools_read_numbers_{os.getpid()}.csv"
    cells = Path(args.dir) / f"lintools_read_short_{os.getpid()}.csv"
    try:
        write_numbers(numbers, rows)
        write_short(cells, short)
        measure(f"purely numeric, {rows:,} rows x 9 columns", numbers, "leak", rounds)
        measure("one-character cells, 25 columns", cells, "y", rounds)
    finally:
        numbers.unlink(missing_ok=True)
        cells.unlink(missing_ok=True)


if __name__ == "__main__":
    main()
