"""The one file reader and writer (lintools.support.files): bounded, regular files only, atomic,
no clobbering.  The invariants are common practice for tools that must not lose data
(write to a temporary file in the same folder, fsync, rename; POSIX rename(2) is atomic)."""

from __future__ import annotations

import os
import subprocess
import sys
import textwrap

import pytest

from lintools import InputError
from lintools.support.files import check_outputs, read_bounded, write_atomic


def test_read_bounded_reads_a_regular_file(tmp_path):
    f = tmp_path / "a.bin"
    f.write_bytes(b"x" * 3000)
    assert read_bounded(f, "data file", 3000) == b"x" * 3000


def test_read_bounded_stops_at_the_limit_while_reading(tmp_path):
    f = tmp_path / "a.bin"
    f.write_bytes(b"x" * 3001)
    with pytest.raises(InputError, match=r"data file .* larger than the 3000 bytes allowed \(--max-bytes\)"):
        read_bounded(f, "data file", 3000, limit_hint="--max-bytes")


@pytest.mark.skipif(not os.path.exists("/dev/zero"), reason="needs /dev/zero")
def test_read_bounded_refuses_a_device():
    with pytest.raises(InputError, match="is a device; pass the path of a regular file"):
        read_bounded("/dev/zero", "model file", 1 << 20)


@pytest.mark.skipif(not hasattr(os, "mkfifo"), reason="needs FIFOs")
def test_read_bounded_refuses_a_fifo_without_hanging(tmp_path):
    fifo = tmp_path / "pipe"
    os.mkfifo(fifo)
    with pytest.raises(InputError, match=r"is a pipe \(FIFO\)"):
        read_bounded(fifo, "model file", 100)


def test_read_bounded_names_a_directory_and_a_missing_file(tmp_path):
    with pytest.raises(InputError, match="is a directory"):
        read_bounded(tmp_path, "CSV file", 100)
    with pytest.raises(InputError, match="cannot be read: No such file"):
        read_bounded(tmp_path / "nope.csv", "CSV file", 100)


def test_write_atomic_refuses_an_existing_file_unless_told(tmp_path):
    f = tmp_path / "m.json"
    f.write_text("old")
    with pytest.raises(InputError, match=r"exists; choose a new path or pass --replace to replace it"):
        write_atomic(f, "new", replace_hint="--replace")
    assert f.read_text() == "old"
    write_atomic(f, "new", replace=True)
    assert f.read_text() == "new"
    assert [p.name for p in tmp_path.iterdir()] == ["m.json"]  # no temporary file left behind


def test_write_atomic_creates_with_the_umask_mode(tmp_path):
    f = tmp_path / "new.txt"
    write_atomic(f, b"abc")
    umask = os.umask(0)
    os.umask(umask)
    assert f.read_bytes() == b"abc"
    assert (f.stat().st_mode & 0o777) == (0o666 & ~umask)


@pytest.mark.skipif(sys.platform == "win32", reason="needs resource limits")
def test_an_interrupted_write_leaves_the_old_file_byte_identical(tmp_path):
    """A write cut short by a file-size limit (RLIMIT_FSIZE in a child) changes nothing."""
    f = tmp_path / "model.json"
    old = b'{"old": true}\n' * 100
    f.write_bytes(old)
    code = textwrap.dedent(f"""
        import resource, sys
        resource.setrlimit(resource.RLIMIT_FSIZE, (4096, 4096))
        from lintools.support.files import write_atomic
        from lintools import InputError
        try:
            write_atomic({str(f)!r}, b"y" * 100_000, replace=True)
        except InputError as exc:
            print("refused:", exc)
            sys.exit(3)
        sys.exit(0)
    """)
    run = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, timeout=60)
    assert run.returncode == 3, run.stderr
    assert "cannot be written" in run.stdout and "nothing was changed" in run.stdout
    assert f.read_bytes() == old
    assert sorted(p.name for p in tmp_path.iterdir()) == ["model.json"]


def test_check_outputs_refuses_an_input_and_duplicate_outputs(tmp_path):
    data = tmp_path / "d.csv"
    data.write_text("a\n1\n")
    link = tmp_path / "alias.csv"
    os.link(data, link)
    with pytest.raises(InputError, match="--save .* is the same file as the data file"):
        check_outputs([("data file", str(data))], [("--save", str(data))])
    with pytest.raises(InputError, match="the same file as the data file"):  # a hard link: same inode
        check_outputs([("data file", str(data))], [("--out", str(link))])
    with pytest.raises(InputError, match="--save-pmml .* and --save .* are the same file"):
        check_outputs([], [("--save", str(tmp_path / "m")), ("--save-pmml", str(tmp_path / "." / "m"))])
    check_outputs([("data file", str(data))], [("--save", str(tmp_path / "m.json")), ("--out", None)])
