r"""Row passes on several threads while a fit runs.

NumPy's elementwise functions run on one core, and OpenBLAS's own threads gain little on
the long, narrow products of a fit (measured on 2 cores: ``X'X`` of a 1e6 x 50 array took
0.13-0.16 s on two BLAS threads, and 0.08 s as two halves on two threads of one BLAS
thread each).  A fit therefore splits each pass over the rows into fixed chunks and hands
them to a small pool of threads (NumPy and BLAS release the interpreter lock), with the
BLAS held to one thread meanwhile, so the two kinds of threads do not compete for the
cores (an idle OpenBLAS thread keeps spinning for a while after each call).

* :func:`session` (a context manager; the fits enter it) sets NumPy's OpenBLAS to one
  thread and restores the caller's setting on exit.  The number of row threads starts
  as the BLAS thread count found on entry, at most the CPUs this process may use; a
  softmax fit in memory then settles it by its size (:func:`settle`, before its first
  pass): one row thread when it has fewer than :data:`FEW_PARAMETERS` coefficients, where
  the elementwise work of a chunk, dispatched from Python under the interpreter lock,
  weighs more than its products and a second thread mostly waits for the lock.  Binary
  logistic fits (one output, larger chunks), least squares and the fits over blocks keep
  the count found on entry (least squares passes are products over 1 MiB blocks: the
  wall time of one row thread over that of two measured 0.91 to 1.02 at p 5 to 20 and
  1.40 at p 50 on 1e5 rows, 0.94 to 1.08 at p 5 to 50 on 1e6 rows: nothing to gain from
  one thread).  The environment variable ``LINTOOLS_THREADS`` overrides both (``1``
  turns the pool off): a
  whole number from 1 up, written in ASCII digits, of which at most :data:`MAX_THREADS`
  are used; anything else (``0``, ``-2``, ``two``, ``1.5``) is an :class:`InputError`,
  whatever the BLAS.
  The BLAS stays at one thread for the whole fit whatever the number of row threads, so
  the arithmetic, and with it every digit of the result, does not depend on that number.
  When NumPy's BLAS is not an OpenBLAS whose thread count can be set through ``ctypes``
  (other BLAS builds, unusual layouts) everything runs on the calling thread and the BLAS
  is left alone.  One session at a time: a fit started on another thread meanwhile waits
  for the running one (each already uses all the cores it may), so concurrent calls give
  the same digits as calls one after another.  One row thread with the BLAS at its own
  thread count instead is not an option: a threaded BLAS splits the larger products
  otherwise (other bits: softmax and logistic at 1e5 rows, p 5 to 10), and it was 1.7 to
  7.5 times slower on the small products of the chunks (one row thread with the BLAS at
  one thread as the base; ``benchmarks/row_threads.py``).
* :func:`for_rows` runs ``fn(lo, hi)`` over consecutive chunks of rows and returns the
  results **in chunk order**.  The chunks do not depend on the number of threads, and the
  callers add the partial results in that order, so one thread and several give
  bit-identical results.

Side effect, stated plainly: while a fit runs, other threads of the process that call
NumPy's BLAS get one BLAS thread.
"""

from __future__ import annotations

import contextlib
import ctypes
import functools
import glob
import os
import threading
from concurrent.futures import ThreadPoolExecutor
from typing import Any, Callable, Iterator

import numpy as np

from .errors import InputError

__all__ = ["ELEMENT_CHUNK", "row_buffer", "session", "settle", "FEW_PARAMETERS", "whole_blas", "with_row_threads",
           "threads", "for_rows", "add_up", "scratch", "PassBuffers", "env_threads", "MAX_THREADS"]

#: The most row threads ``LINTOOLS_THREADS`` can ask for; larger values are used as this.
MAX_THREADS = 64

#: A fit of several outputs with fewer coefficients than this runs its passes on one row
#: thread (see :func:`settle`).  Measured on 2 cores by ``benchmarks/row_threads.py`` (median
#: over 5 to 9 interleaved rounds of the paired wall ratio, one row thread over two; below 1:
#: one thread is faster), with ``(p + 1)(K - 1)`` coefficients for softmax:
#:
#: * fewer than 50: softmax 12 (p 5, K 3): 0.76 at 1e4 rows, 0.92 and 0.95 at 1e5, 0.81 at
#:   1e6; 22 (p 10, K 3): 0.76 at 1e4, 0.95 and 0.97 at 1e5 (earlier 0.78 / 0.81 / 0.88 at
#:   1e4 / 1e5 / 1e6); 24 (p 5, K 5): 0.95 at 1e4, 0.94 at 1e5; 42 (p 20, K 3): 0.96 at 1e4,
#:   0.83 and 0.97 at 1e5; 44 (p 10, K 5): 1.10 at 1e4 but 0.95 and 0.96 at 1e5;
#: * 50 and more: 54 (p 5, K 10): 1.20 at 1e4, 1.17 at 1e5; 84 (p 20, K 5): 1.13 at 1e4,
#:   1.17 (earlier 1.21) at 1e5; 99 (p 10, K 10): 1.30 at 1e4; 189 (p 20, K 10): 1.40 at 1e4
#:   (earlier 1.42 at 1e5).
#:
#: Binary logistic fits (one output) keep the count found on entry whatever their size: with
#: p 5 to 20 one row thread over two measured 0.96 to 1.17 at 1e5 rows and 0.98 to 1.38 at
#: 1e6 on a quiet machine (0.87 to 0.98 with another process on a core): nothing to gain
#: from one thread and up to a third to lose (their chunks are 16384 rows, four times
#: softmax's, and a row's elementwise work is one output's).  p 50: 1.32 at 1e6 (earlier 1.64).
#:
#: The work of a chunk's products grows with the coefficients, that of its elementwise steps
#: (many short NumPy calls, each taking the interpreter lock back) with the outputs only, so
#: with few coefficients the two threads mostly take turns with the lock (their CPU time
#: was then no more than the wall time).  The machine was shared: runs with another process
#: on one core gave 0.92 to 1.00 for softmax at 1e5 rows with 54 to 99 coefficients.
FEW_PARAMETERS = 50

#: Entries per chunk of an elementwise pass over the rows (128 KB of float64 per array).
ELEMENT_CHUNK = 1 << 14

_lock = threading.Lock()
_state: dict[str, Any] = {"owner": None, "threads": 1, "restore": None, "entry": 1, "asked": False}
_pool: dict[int, ThreadPoolExecutor] = {}
_control: list[Any] = []  # [(set, get)] or [None] once looked up


def _after_fork_in_child() -> None:
    """A forked child has none of the parent's threads: forget the pools and the session
    (its lock may have been held by a thread that does not exist here) and give the BLAS
    back the thread count the parent's running fit had taken from it."""
    global _lock
    _lock = threading.Lock()
    _pool.clear()
    restore = _state["restore"]
    _state.update(owner=None, threads=1, restore=None, entry=1, asked=False)
    if restore is not None and _control and _control[0] is not None:
        _control[0][0](restore)


if hasattr(os, "register_at_fork"):
    os.register_at_fork(after_in_child=_after_fork_in_child)


def _library_paths() -> list[str]:
    """Candidate files of NumPy's OpenBLAS: beside NumPy (wheels), else those mapped in."""
    here = os.path.dirname(np.__file__)
    found: list[str] = []
    for pattern in (os.path.join(os.path.dirname(here), "numpy.libs", "*openblas*"),  # Linux, Windows
                    os.path.join(here, ".dylibs", "*openblas*")):  # macOS
        found += sorted(glob.glob(pattern))
    if not found:
        try:
            with open("/proc/self/maps", encoding="utf-8", errors="replace") as maps:
                mapped = {line.split()[-1] for line in maps if "openblas" in line.rsplit("/", 1)[-1]}
            found = sorted(p for p in mapped if os.path.isfile(p))
            if len(found) != 1:  # several OpenBLAS copies loaded: not sure which is NumPy's
                found = []
        except OSError:
            found = []
    return found


def _lookup() -> Any:
    """``(set_threads, get_threads)`` of NumPy's OpenBLAS, or None."""
    if _control:
        return _control[0]
    control = None
    try:
        name = str(np.__config__.CONFIG["Build Dependencies"]["blas"]["name"]).lower()
    except (AttributeError, KeyError, TypeError):
        name = ""
    if "openblas" in name:
        for path in _library_paths():
            try:
                lib = ctypes.CDLL(path)
            except OSError:
                continue
            for prefix in ("scipy_openblas", "openblas"):
                for suffix in ("64_", ""):
                    setter = getattr(lib, f"{prefix}_set_num_threads{suffix}", None)
                    getter = getattr(lib, f"{prefix}_get_num_threads{suffix}", None)
                    if setter is None or getter is None:
                        continue
                    setter.argtypes, setter.restype = [ctypes.c_int], None
                    getter.argtypes, getter.restype = [], ctypes.c_int
                    control = (setter, getter)
                    break
                if control:
                    break
            if control:
                break
    _control.append(control)
    return control


def _cpus() -> int:
    try:
        return max(1, len(os.sched_getaffinity(0)))
    except (AttributeError, OSError):
        return max(1, os.cpu_count() or 1)


def env_threads() -> int | None:
    """The number of row threads ``LINTOOLS_THREADS`` asks for (None: unset or blank).

    Raises :class:`InputError` naming the variable unless it is a whole number >= 1 in
    ASCII digits; values above :data:`MAX_THREADS` give :data:`MAX_THREADS`.
    """
    text = os.environ.get("LINTOOLS_THREADS", "").strip()
    if not text:
        return None
    digits = text.lstrip("0")
    if not (text.isascii() and text.isdigit()) or not digits:
        raise InputError(f"the environment variable LINTOOLS_THREADS is {text!r}, not a whole number >= 1; "
                         "set it to the number of row threads (1 turns them off) or unset it")
    return MAX_THREADS if len(digits) > 3 else min(int(digits), MAX_THREADS)


@contextlib.contextmanager
def session() -> Iterator[int]:
    """Run the enclosed fit with row threads (see the module doc); yields their number."""
    me = threading.get_ident()
    if _state["owner"] == me:  # nested: the outer session already holds everything
        held = _state["threads"]
        try:
            yield held
        finally:
            _state["threads"] = held  # an inner fit's choice (see settle) ends with it
        return
    asked = env_threads()  # a bad setting is refused whatever the BLAS
    _lock.acquire()  # a fit on another thread meanwhile waits for this one (see the module doc)
    try:
        control = _lookup()
        count, restore = 1, None
        if control is not None:
            setter, getter = control
            before = int(getter())
            count = asked if asked is not None else max(1, min(before, _cpus()))
            if before != 1:
                setter(1)
                restore = before
        _state.update(owner=me, threads=count, restore=restore, entry=count, asked=asked is not None)
        try:
            yield count
        finally:
            if restore is not None:
                control[0](restore)
            _state.update(owner=None, threads=1, restore=None, entry=1, asked=False)
    finally:
        _lock.release()


@contextlib.contextmanager
def whole_blas() -> Iterator[None]:
    """Inside a session of the calling thread: the caller's BLAS threads back for the
    enclosed work (one large LAPACK call, such as a QR factorisation, that the row threads
    do not split); elsewhere nothing changes."""
    restore = _state["restore"] if _state["owner"] == threading.get_ident() else None
    if restore is None:
        yield
        return
    control = _lookup()
    control[0](restore)
    try:
        yield
    finally:
        control[0](1)


def settle(parameters: int, outputs: int) -> int:
    """Inside a session of the calling thread: the row threads of the fit whose problem has
    ``parameters`` coefficients (terms times ``outputs``, its free outputs), to be called
    before its first pass over the rows; returns the count the passes will use (1 outside
    a session).

    One row thread for several outputs and fewer than :data:`FEW_PARAMETERS`
    coefficients, else the count found on entry; a count set by ``LINTOOLS_THREADS`` is
    kept either way.  The chunks, and so every bit of the
    result, are the same whatever is chosen."""
    if _state["owner"] != threading.get_ident():
        return 1
    if not _state["asked"]:
        _state["threads"] = 1 if outputs > 1 and parameters < FEW_PARAMETERS else _state["entry"]
    return _state["threads"]


def threads() -> int:
    """Row threads available to the calling thread now (1 outside a session)."""
    return _state["threads"] if _state["owner"] == threading.get_ident() else 1


def for_rows(fn: Callable[[int, int], Any], n: int, chunk: int) -> list[Any]:
    """``[fn(lo, min(lo + chunk, n)) for lo in range(0, n, chunk)]``, on the row threads
    when there are several (the list is in chunk order either way).

    The calling thread works too; it and ``threads() - 1`` pool threads take the next
    chunk from a shared counter until none is left (one hand-over per thread and pass,
    not per chunk: about 40 microseconds each were measured).  The first exception stops
    the others at their next chunk and is raised here."""
    if 0 < n <= chunk:  # one chunk (small problems): no pool, no bookkeeping
        return [fn(0, n)]
    bounds = [(lo, min(lo + chunk, n)) for lo in range(0, n, chunk)]
    count = min(threads(), len(bounds))
    if count <= 1:
        return [fn(lo, hi) for lo, hi in bounds]
    pool = _pool.get(count)
    if pool is None:
        pool = _pool[count] = ThreadPoolExecutor(max_workers=count - 1, thread_name_prefix="lintools-rows")
    results: list[Any] = [None] * len(bounds)
    order = iter(range(len(bounds)))
    take = threading.Lock()
    failed: list[BaseException] = []

    def work() -> None:
        while not failed:
            with take:
                k = next(order, None)
            if k is None:
                return
            try:
                results[k] = fn(*bounds[k])
            except BaseException as exc:  # handed to the caller below
                failed.append(exc)
                return

    helpers = [pool.submit(work) for _ in range(count - 1)]
    work()
    for h in helpers:
        h.result()
    if failed:
        raise failed[0]
    return results


def add_up(parts: list[Any], empty: Any = None) -> Any:
    """The sum of the partial results in their order (a fixed order: see the module doc);
    ``empty`` when there are none (a pass over zero rows)."""
    if not parts:
        return empty
    total = parts[0]
    for part in parts[1:]:
        total = total + part
    return total


_local = threading.local()
#: Buffers up to this size are kept per thread for its next chunks (larger ones are not).
_KEEP_BYTES = 1 << 24


def scratch(name: str, shape: tuple[int, ...], dtype: Any = np.float64, keep_bytes: int = _KEEP_BYTES) -> np.ndarray:
    """A buffer of at least ``shape`` kept by the calling thread under ``name`` and reused by
    its next chunks (a fresh allocation per chunk would pay the first touch of its pages
    every time); the caller slices it to the rows it needs.  A buffer over ``keep_bytes``
    is made fresh and not kept."""
    store = getattr(_local, "buffers", None)
    if store is None:
        store = _local.buffers = {}
    key = (name, np.dtype(dtype).str)
    buf = store.get(key)
    if buf is None or buf.shape[0] < shape[0] or buf.shape[1:] != tuple(shape[1:]):
        buf = np.empty(shape, dtype=dtype)
        if buf.nbytes <= keep_bytes:
            store[key] = buf
    return buf[: shape[0]]


#: Row-sized arrays of a fit's sample (the accuracy terms, the Gram start) up to this size
#: live in buffers the thread keeps (a fresh array's pages cost as much as the arithmetic
#: on them at small sizes); larger ones are made fresh, so a wide design leaves none behind.
ROW_BUFFER_BYTES = 1 << 20


def row_buffer(name: str, shape: tuple[int, int]) -> np.ndarray:
    """An uninitialised float64 array of ``shape``: :func:`scratch` kept only up to
    ``ROW_BUFFER_BYTES`` (about 60 columns of a 2048-row sample)."""
    return scratch(name, shape, keep_bytes=ROW_BUFFER_BYTES)


class PassBuffers:
    """Buffers of one pass over the rows: one set per thread that works on the pass, made
    by ``make()`` on that thread's first chunk and freed with the pass (unlike
    :func:`scratch`, nothing stays behind, so a pass on two threads holds two sets at the
    most: for kernels whose buffers are large beside a small design)."""

    def __init__(self, make: Callable[[], Any]) -> None:
        self._make, self._sets = make, {}

    def get(self) -> Any:
        """The calling thread's set."""
        key = threading.get_ident()
        found = self._sets.get(key)
        if found is None:
            found = self._sets[key] = self._make()
        return found

    def release(self) -> None:
        """Free the sets now (the pass is over)."""
        self._sets.clear()


def with_row_threads(fn: Callable[..., Any]) -> Callable[..., Any]:
    """Decorator: run ``fn`` inside a :func:`session`."""
    @functools.wraps(fn)
    def run(*args: Any, **kwargs: Any) -> Any:
        with session():
            return fn(*args, **kwargs)

    return run
