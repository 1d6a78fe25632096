"""Per-pass throughput of a blocked logistic fit: blocks from a memory-mapped file beside blocks in memory.

Usage::

    python benchmarks/block_passes.py             # 4e6 rows (192 MB), 5 rounds
    python benchmarks/block_passes.py --quick     # 2e5 rows, 1 round (what CI runs)
    python benchmarks/block_passes.py --rows 10000000 --block-mb 64 --rounds 7 --dir /tmp

One ``.npy`` file of invented rows (``benchmarks/out_of_core.py``'s generator: five
features and a target, the label is ``target > its mean``) is written and then fitted
by :func:`lintools.blocks.logistic_blocks`, each fit in a fresh child process, the
variants interleaved round by round so that a slow spell of a shared machine hits every
variant alike:

* **memory map**: each block is a fresh ``numpy.memmap`` of its rows (the out-of-core
  use: the file is in the page cache after the first round, so this measures the cost of
  mapping and touching the pages, not of the disk);
* **in memory**: the same blocks as slices of one array loaded before the clock starts;
* both again with ``LINTOOLS_THREADS=1`` (the row threads off), to show what the row
  threads bring to the elementwise work of a pass;
* for scale, the in-memory fit :func:`lintools.logistic` of the same rows.

Reported per variant: median wall seconds per fit, passes over the data, seconds per
pass and rows per second per pass, and the paired per-round ratio of the memory-map
throughput to the in-memory one (the target of issue 22: at least 0.6).  The fits'
coefficients are compared (digits of agreement, LRE) with the in-memory fit.  Nothing is
asserted about time.
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
sys.path.insert(0, str(Path(__file__).resolve().parent))

from out_of_core import COLUMNS, THRESHOLD, block_source, write_file  # noqa: E402

VARIANTS = ("memory map", "in memory", "memory map, 1 thread", "in memory, 1 thread", "logistic (not blocked)")


def child(args: argparse.Namespace) -> None:
    """Run one fit in this fresh process and print its figures as JSON."""
    import lintools
    import lintools.blocks as lb

    passes: list = []
    mm = np.load(args.path, mmap_mode="r")
    if args.variant.startswith("memory map"):
        source = block_source(args.path, mm.offset, args.rows, args.block_rows, True, passes)
    else:
        data = np.array(mm)  # loaded before the clock starts
        X, y = data[:, :5], data[:, 5] > THRESHOLD

        def source():
            passes.append(1)
            for lo in range(0, args.rows, args.block_rows):
                yield X[lo:lo + args.block_rows], y[lo:lo + args.block_rows]

    t0 = time.perf_counter()
    if args.variant.startswith("logistic"):
        fit = lintools.logistic(X, y)
        passes = [None]
    else:
        fit = lb.logistic_blocks(source)
    wall = time.perf_counter() - t0
    print(json.dumps({"wall": wall, "passes": len(passes),
                      "coefficients": [fit.intercept] + fit.coefficients.tolist()}))


def _lre(a: np.ndarray, b: np.ndarray) -> float:
    err = np.max(np.abs(a - b) / np.maximum(np.abs(b), 1e-300))
    return 16.0 if err == 0 else float(min(16.0, -np.log10(err)))


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    ap.add_argument("--rows", type=int, default=4_000_000)
    ap.add_argument("--block-mb", type=float, default=32.0)
    ap.add_argument("--rounds", type=int, default=5)
    ap.add_argument("--dir", default=None)
    ap.add_argument("--quick", action="store_true")
    ap.add_argument("--child", action="store_true", help=argparse.SUPPRESS)
    ap.add_argument("--variant", help=argparse.SUPPRESS)
    ap.add_argument("--path", help=argparse.SUPPRESS)
    ap.add_argument("--block-rows", type=int, help=argparse.SUPPRESS)
    args = ap.parse_args()
    if args.child:
        child(args)
        return
    if args.quick:
        args.rows, args.rounds, args.block_mb = 200_000, 1, 4.0  # blocks of two pieces
    block_rows = max(1, int(args.block_mb * (1 << 20)) // (COLUMNS * 8))
    with tempfile.TemporaryDirectory(dir=args.dir) as tmp:
        path = Path(tmp) / "rows.npy"
        write_file(path, args.rows)
        size = path.stat().st_size
        print(f"{args.rows:,} rows x {COLUMNS} float64 ({size / (1 << 20):.0f} MB), blocks of {block_rows:,} rows "
              f"({args.block_mb:g} MB), {args.rounds} rounds, {os.cpu_count()} CPUs")
        runs: dict[str, list[dict]] = {v: [] for v in VARIANTS}
        for _ in range(args.rounds):
            for variant in VARIANTS:
                env = dict(os.environ)
                if variant.endswith("1 thread"):
                    env["LINTOOLS_THREADS"] = "1"
                out = subprocess.run([sys.executable, __file__, "--child", "--variant", variant, "--path", str(path),
                                      "--rows", str(args.rows), "--block-rows", str(block_rows)],
                                     capture_output=True, text=True, env=env, check=True)
                runs[variant].append(json.loads(out.stdout))
    ref = np.array(runs["logistic (not blocked)"][0]["coefficients"])
    print(f"{'variant':<26}{'wall s':>9}{'passes':>8}{'s/pass':>9}{'Mrows/s':>9}{'LRE coef':>10}")
    per_pass = {}
    for variant in VARIANTS:
        walls = [r["wall"] for r in runs[variant]]
        n_pass = runs[variant][0]["passes"]
        per_pass[variant] = [w / n_pass for w in walls]
        med = statistics.median(walls)
        lre = _lre(np.array(runs[variant][0]["coefficients"]), ref)
        if variant.startswith("logistic"):  # its passes are not counted: the whole fit only
            print(f"{variant:<26}{med:9.3f}{'-':>8}{'-':>9}{'-':>9}{lre:10.1f}")
            continue
        print(f"{variant:<26}{med:9.3f}{n_pass:8d}{med / n_pass:9.4f}{args.rows / (med / n_pass) / 1e6:9.1f}{lre:10.1f}")
    for suffix in ("", ", 1 thread"):
        ratios = [b / a for a, b in zip(per_pass["memory map" + suffix], per_pass["in memory" + suffix])]
        print(f"throughput memory map / in memory{suffix}: median {statistics.median(ratios):.2f} "
              f"(per round {', '.join(f'{r:.2f}' for r in ratios)}; target >= 0.6)")
    for kind in ("memory map", "in memory"):
        ratios = [b / a for a, b in zip(per_pass[kind], per_pass[kind + ", 1 thread"])]
        print(f"{kind}: speed-up of the row threads {statistics.median(ratios):.2f}x (1 thread / default, per pass)")


if __name__ == "__main__":
    main()
