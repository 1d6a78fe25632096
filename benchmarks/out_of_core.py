"""Out-of-core fits: memory stays flat in n while the rows stream from a memory-mapped file.

Usage::

    python benchmarks/out_of_core.py            # 5e7 rows (2.4 GB in /tmp), a few minutes
    python benchmarks/out_of_core.py --quick    # 1e5 rows, seconds (what CI runs)
    python benchmarks/out_of_core.py --rows 100000000 --block-mb 64 --dir /tmp

The script writes a ``.npy`` file of ``rows`` x 6 float64 values (5 features and a
target) through a memory map (``numpy.lib.format.open_memmap``), after checking that the
disk has room for it.  Then, each in a fresh child process so that its figures are its
own, it fits

* least squares (:func:`lintools.blocks.least_squares_blocks`, TSQR) of the target on the
  features, and
* logistic regression (:func:`lintools.blocks.logistic_blocks`, Newton) of the label
  ``target > threshold`` on the features,

reading the file in blocks of ``--block-mb`` megabytes (the block budget: the bytes of one
block of the file).  Each block is a fresh memory map of its own rows, released before
the next one is read, so the pages of the file do not pile up in the process.  Both fits
run on the whole file and on its first tenth with the same blocks: flat memory means
the two peaks agree.  Reported per fit: rows, file size, wall time, passes over the file,
the peak of traced allocations (``tracemalloc``, which sees NumPy's buffers) and the
growth of the peak resident set size during the fit (Linux ``VmHWM``, reset just before
the fit, less the resident set then; elsewhere ``resource.getrusage`` max RSS), both
against the file size.  With ``--quick`` the fits are also
compared with the in-memory fits on the same rows (digits of agreement, LRE).  The file
is deleted at the end.  Nothing is asserted about time.
"""

from __future__ import annotations

import argparse
import json
import os
import resource
import shutil
import subprocess
import sys
import tempfile
import time
import tracemalloc
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))

COLUMNS = 6  # 5 features and the target
MEANS = np.array([10.0, -5.0, 0.0, 100.0, 1.0])
SPREADS = np.array([1.0, 2.0, 0.5, 10.0, 3.0])
BETA = np.array([0.5, -0.3, 1.0, 0.02, 0.2])
NOISE = 2.0
THRESHOLD = float(MEANS @ BETA)  # the label is target > its mean: about half the rows
MB = 1 << 20


def write_file(path: Path, rows: int, seed: int = 0, chunk: int = 1 << 20) -> int:
    """Write ``rows`` invented rows (only to exercise the fits) into a memory-mapped .npy."""
    mm = np.lib.format.open_memmap(path, mode="w+", dtype=np.float64, shape=(rows, COLUMNS))
    rng = np.random.default_rng(seed)
    for lo in range(0, rows, chunk):
        hi = min(rows, lo + chunk)
        X = rng.standard_normal((hi - lo, 5)) * SPREADS + MEANS
        mm[lo:hi, :5] = X
        mm[lo:hi, 5] = X @ BETA + NOISE * rng.standard_normal(hi - lo)
    mm.flush()
    offset = mm.offset
    del mm
    return offset


def block_source(path: str, offset: int, rows: int, block_rows: int, label: bool, counter: list):
    """A source for lintools.blocks: each call maps the file block by block."""
    row_bytes = COLUMNS * 8

    def source():
        counter.append(1)
        for lo in range(0, rows, block_rows):
            hi = min(rows, lo + block_rows)
            mm = np.memmap(path, dtype=np.float64, mode="r", offset=offset + lo * row_bytes, shape=(hi - lo, COLUMNS))
            y = mm[:, 5] > THRESHOLD if label else mm[:, 5]
            yield mm[:, :5], y
            del mm, y

    return source


def _status_kb(field: str) -> int | None:
    """A field of /proc/self/status in kB (Linux), or None."""
    try:
        with open("/proc/self/status") as fh:
            for line in fh:
                if line.startswith(field + ":"):
                    return int(line.split()[1])
    except OSError:
        return None
    return None


def _reset_peak_rss() -> bool:
    """Reset the peak resident set size (VmHWM) to the current one (Linux >= 4.0).

    ``getrusage`` max RSS survives ``exec``: a child started by a parent with a large
    resident set reports the parent's peak, so it cannot measure its own.
    """
    try:
        with open("/proc/self/clear_refs", "w") as fh:
            fh.write("5")
        return True
    except OSError:
        return False


def child(args: argparse.Namespace) -> None:
    """Run one fit in this (fresh) process and print its figures as JSON."""
    import lintools.blocks as lb

    passes: list = []
    src = block_source(args.path, args.offset, args.rows, args.block_rows, args.child == "logistic", passes)
    fit_fn = lb.least_squares_blocks if args.child == "least_squares" else lb.logistic_blocks
    exact = _reset_peak_rss() and _status_kb("VmHWM") is not None
    rss0 = _status_kb("VmRSS") * 1024 if exact else resource.getrusage(resource.RUSAGE_SELF).ru_maxrss * 1024
    tracemalloc.start()
    t0 = time.perf_counter()
    fit = fit_fn(src)  # the default tol: per unit weight, it holds at any number of rows
    wall = time.perf_counter() - t0
    _, peak = tracemalloc.get_traced_memory()
    tracemalloc.stop()
    rss1 = _status_kb("VmHWM") * 1024 if exact else resource.getrusage(resource.RUSAGE_SELF).ru_maxrss * 1024
    out = {
        "fit": args.child, "rows": args.rows, "block_rows": args.block_rows, "wall": wall,
        "passes": len(passes), "traced_peak": peak, "rss_growth": rss1 - rss0, "rss_before": rss0,
        "converged": bool(fit.convergence.converged), "iterations": fit.convergence.iterations,
        "coefficients": [fit.intercept] + fit.coefficients.tolist(),
        "standard_errors": [fit.intercept_standard_error] + fit.standard_errors.tolist(),
        "log_likelihood": fit.log_likelihood, "gradient_norm": fit.convergence.gradient_norm,
    }
    if args.compare:
        import lintools as lt

        data = np.load(args.path, mmap_mode="r")
        X, y = np.array(data[: args.rows, :5]), np.array(data[: args.rows, 5])
        ref = lt.least_squares(X, y) if args.child == "least_squares" else lt.logistic(X, y > THRESHOLD)
        def lre(a, b):
            a, b = np.asarray(a, float), np.asarray(b, float)
            with np.errstate(divide="ignore"):
                e = np.abs(a - b) / np.abs(b)
            return float(np.min(np.where(e == 0, 16.0, np.minimum(16.0, -np.log10(e)))))

        out["lre_coefficients"] = lre(out["coefficients"], [ref.intercept] + ref.coefficients.tolist())
        out["lre_standard_errors"] = lre(out["standard_errors"], [ref.intercept_standard_error] + ref.standard_errors.tolist())
        out["lre_log_likelihood"] = lre([fit.log_likelihood], [ref.log_likelihood])
    print(json.dumps(out))


def run_child(fit: str, path: Path, offset: int, rows: int, block_rows: int, compare: bool) -> dict:
    cmd = [sys.executable, __file__, "--child", fit, "--path", str(path), "--offset", str(offset),
           "--rows", str(rows), "--block-rows", str(block_rows)] + (["--compare"] if compare else [])
    proc = subprocess.run(cmd, capture_output=True, text=True)
    if proc.returncode != 0:
        raise SystemExit(f"child {fit} failed:\n{proc.stderr}")
    return json.loads(proc.stdout.strip().splitlines()[-1])


def main(argv: list[str] | None = None) -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--quick", action="store_true", help="1e5 rows, blocks of 0.25 MB (seconds)")
    ap.add_argument("--rows", type=int, default=None, help="rows in the file (default 5e7; quick 1e5)")
    ap.add_argument("--block-mb", type=float, default=None, help="block budget in MB (default 64; quick 0.25)")
    ap.add_argument("--dir", default=tempfile.gettempdir(), help="where the file goes (default /tmp)")
    ap.add_argument("--child", choices=["least_squares", "logistic"], help=argparse.SUPPRESS)
    ap.add_argument("--path", help=argparse.SUPPRESS)
    ap.add_argument("--offset", type=int, help=argparse.SUPPRESS)
    ap.add_argument("--block-rows", type=int, help=argparse.SUPPRESS)
    ap.add_argument("--compare", action="store_true", help=argparse.SUPPRESS)
    args = ap.parse_args(argv)
    if args.child:
        child(args)
        return
    rows = args.rows or (100_000 if args.quick else 50_000_000)
    block_mb = args.block_mb or (0.25 if args.quick else 64.0)
    block_rows = max(1, int(block_mb * MB) // (COLUMNS * 8))
    file_bytes = rows * COLUMNS * 8 + 128
    free = shutil.disk_usage(args.dir).free
    print(f"disk: {free / 2**30:.1f} GiB free in {args.dir}; the file needs {file_bytes / 2**30:.2f} GiB")
    if file_bytes > 0.9 * free:
        raise SystemExit(f"not enough disk for {rows} rows; pass --rows with at most {int(0.9 * free / 48):d}")
    path = Path(args.dir) / f"lintools_out_of_core_{os.getpid()}.npy"
    try:
        t0 = time.perf_counter()
        offset = write_file(path, rows)
        print(f"wrote {rows:,} rows x {COLUMNS} float64 ({path.stat().st_size / MB:,.1f} MB) "
              f"in {time.perf_counter() - t0:.1f} s; block budget {block_mb:g} MB = {block_rows:,} rows")
        sizes = [rows // 10, rows]
        results = [run_child(fit, path, offset, n, block_rows, args.quick)
                   for n in sizes for fit in ("least_squares", "logistic")]
    finally:
        path.unlink(missing_ok=True)
    head = (f"{'fit':<14}{'rows':>12}{'data MB':>10}{'blocks':>8}{'passes':>7}{'iter':>5}{'wall s':>9}"
            f"{'traced peak MB':>16}{'RSS growth MB':>15}{'peak/data':>10}")
    if args.quick:
        head += f"{'LRE coef':>10}{'LRE se':>8}{'LRE loglik':>11}"
    print(head)
    print("-" * len(head))
    for r in results:
        data_mb = r["rows"] * COLUMNS * 8 / MB
        line = (f"{r['fit'].replace('_', ' '):<14}{r['rows']:>12,}{data_mb:>10.1f}"
                f"{-(-r['rows'] // r['block_rows']):>8}{r['passes']:>7}{r['iterations']:>5}{r['wall']:>9.2f}"
                f"{r['traced_peak'] / MB:>16.1f}{r['rss_growth'] / MB:>15.1f}{r['traced_peak'] / MB / data_mb:>10.3f}")
        if args.quick:
            line += f"{r['lre_coefficients']:>10.1f}{r['lre_standard_errors']:>8.1f}{r['lre_log_likelihood']:>11.1f}"
        print(line)
    for fit in ("least_squares", "logistic"):
        small, big = [r for r in results if r["fit"] == fit]
        print(f"{fit.replace('_', ' ')}: traced peak at {big['rows']:,} rows / at {small['rows']:,} rows = "
              f"{big['traced_peak'] / small['traced_peak']:.2f} (flat in n: about 1); "
              f"all converged: {small['converged'] and big['converged']}; final max |gradient| "
              f"{small['gradient_norm']:.2g} and {big['gradient_norm']:.2g}"
              + (" (per unit weight; the default tol)" if fit == "logistic" else ""))


if __name__ == "__main__":
    main()
