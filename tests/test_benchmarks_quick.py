"""The benchmark harness still works (tiny quick mode; no timing is asserted)."""

import subprocess
import sys
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]


def test_benchmark_harness_quick_mode_runs():
    proc = subprocess.run(
        [sys.executable, str(ROOT / "benchmarks" / "run.py"), "--quick"],
        capture_output=True, text=True, timeout=300,
    )
    assert proc.returncode == 0, proc.stderr
    assert "lintools" in proc.stdout and "Gram-eq" in proc.stdout


def test_out_of_core_benchmark_quick_mode_runs():
    # the out-of-core benchmark in its tiny mode: it streams a memory-mapped file through
    # both blocked fits and agrees with the in-memory fits (no timing is asserted)
    proc = subprocess.run(
        [sys.executable, str(ROOT / "benchmarks" / "out_of_core.py"), "--quick"],
        capture_output=True, text=True, timeout=300,
    )
    assert proc.returncode == 0, proc.stderr
    rows = [line.split() for line in proc.stdout.splitlines() if line.startswith(("least squares ", "logistic "))]
    assert len(rows) == 4, proc.stdout
    for row in rows:
        assert min(float(v) for v in row[-3:]) >= 10, row  # digits of agreement (LRE)
    assert "all converged: True" in proc.stdout


def test_read_table_benchmark_quick_mode_runs():
    # the CSV benchmark in its tiny mode: read_table, numpy.loadtxt and pandas read the same
    # files in child processes; read_table's values equal numpy.loadtxt's (no timing is asserted)
    proc = subprocess.run(
        [sys.executable, str(ROOT / "benchmarks" / "read_table.py"), "--quick"],
        capture_output=True, text=True, timeout=300,
    )
    assert proc.returncode == 0, proc.stderr
    for reader in ("read_table", "numpy.loadtxt", "pandas.read_csv"):
        assert proc.stdout.count(reader) >= 2, proc.stdout
    assert proc.stdout.count("read_table agrees with numpy.loadtxt (every value, exactly): True") == 2, proc.stdout


def test_block_passes_benchmark_quick_mode_runs():
    # the per-pass throughput benchmark of blocked logistic fits in its tiny mode: every
    # variant fits the same rows and agrees with the in-memory fit (no timing is asserted)
    proc = subprocess.run(
        [sys.executable, str(ROOT / "benchmarks" / "block_passes.py"), "--quick"],
        capture_output=True, text=True, timeout=300,
    )
    assert proc.returncode == 0, proc.stderr
    rows = [line for line in proc.stdout.splitlines()
            if line.startswith(("memory map ", "in memory ", "memory map, 1 thread ", "in memory, 1 thread "))]
    assert len(rows) == 4, proc.stdout
    for row in rows:
        assert float(row.split()[-1]) >= 10, row  # digits of agreement with lintools.logistic (LRE)
    assert proc.stdout.count("target >= 0.6") == 2, proc.stdout


def test_step_precision_study_quick_mode_runs():
    # the study of float32 step Hessians below their row threshold in its tiny mode: both
    # paths fit the same rows, and their coefficients agree within what tol allows
    proc = subprocess.run(
        [sys.executable, str(ROOT / "benchmarks" / "step_precision.py"), "--quick"],
        capture_output=True, text=True, timeout=300,
    )
    assert proc.returncode == 0, proc.stderr
    rows = [line.split() for line in proc.stdout.splitlines()[1:]]
    assert len(rows) == 2, proc.stdout
    for row in rows:
        assert float(row[5]) < 1e-9, row  # the two paths' largest difference, relative
        assert min(float(row[6]), float(row[7])) >= 10, row  # solver digits of both fits


def test_row_threads_benchmark_quick_mode_runs():
    # the row-thread grid in its tiny mode: every setting (the rule, 1, 2, and 1 with the
    # BLAS's own threads) fits the same rows; the rule and a fixed count give the bits of
    # two row threads ('=' in each setting's last column; no timing is asserted)
    proc = subprocess.run(
        [sys.executable, str(ROOT / "benchmarks" / "row_threads.py"), "--quick"],
        capture_output=True, text=True, timeout=300,
    )
    assert proc.returncode == 0, proc.stderr
    rows = [line.split() for line in proc.stdout.splitlines() if line.startswith(("softmax", "logistic", "least_squares"))]
    assert len(rows) == 3, proc.stdout
    for row in rows:
        marks = [v for v in row if v in ("=", "DIFF")]
        assert len(marks) == 4 and marks[:3] == ["=", "=", "="], row  # '1+blas' may differ
