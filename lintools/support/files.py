"""The one way lintools reads and writes files: bounded reads, atomic writes, no clobbering.

Reading (:func:`read_bounded`) opens the named path without blocking, refuses anything
that is not a regular file (a directory, a FIFO, a device such as ``/dev/zero``, a
socket), and reads at most ``limit`` bytes *while reading*: the size the system reports is
never trusted, so a file that grows, or a special file that reports size 0, cannot make
it read more.  :class:`BoundedFile` makes the same refusals for a file read forward a
block at a time (a CSV file is streamed, never held whole).

Writing (:func:`write_atomic`) writes to a new temporary file in the target's own folder,
flushes it to disk and renames it into place, so the target holds either its old bytes or
the complete new ones, never a part (a full disk, a file-size limit or an interrupted
process leave the old file byte-identical).  An existing target is refused unless the
caller says ``replace=True``; without it, the rename is itself no-clobber (a hard link,
which fails when the name exists), so two writers cannot race past the check.

:func:`check_outputs` refuses a set of outputs of which one is an input of the same
command, or two are the same file (compared by resolved path and by file identity).
"""

from __future__ import annotations

import errno
import os
import stat
import tempfile
from typing import Any, Iterable

from .errors import InputError
from .validate import check_flag

__all__ = ["BoundedFile", "file_path", "read_bounded", "write_atomic", "check_outputs", "same_file"]

_CHUNK = 1 << 20


def file_path(path: Any, label: str) -> str:
    """Return ``path`` as a str, refusing anything that is not a str or os.PathLike."""
    if isinstance(path, bytes) or not isinstance(path, (str, os.PathLike)):
        raise InputError(f"the {label} path must be a str or os.PathLike; got {type(path).__name__}")
    where = os.fspath(path)
    if not isinstance(where, str) or not where or "\x00" in where:
        raise InputError(f"the {label} path {where!r} is not a usable file name; pass the path of a file")
    return where


def _kind(mode: int) -> str:
    if stat.S_ISDIR(mode):
        return "a directory"
    if stat.S_ISFIFO(mode):
        return "a pipe (FIFO)"
    if stat.S_ISCHR(mode) or stat.S_ISBLK(mode):
        return "a device"
    if stat.S_ISSOCK(mode):
        return "a socket"
    return "not a regular file"


def _open_regular(where: str, label: str) -> int:
    """A descriptor of the regular file ``where``, opened without blocking (InputError otherwise)."""
    flags = os.O_RDONLY | getattr(os, "O_NONBLOCK", 0) | getattr(os, "O_NOCTTY", 0) | getattr(os, "O_BINARY", 0)
    try:
        fd = os.open(where, flags)
    except IsADirectoryError:
        raise InputError(f"{label} {where!r} is a directory; pass the path of a file") from None
    except OSError as exc:
        raise InputError(f"{label} {where!r} cannot be read: {exc.strerror or exc}") from None
    try:
        mode = os.fstat(fd).st_mode
    except OSError as exc:
        os.close(fd)
        raise InputError(f"{label} {where!r} cannot be read: {exc.strerror or exc}") from None
    if stat.S_ISDIR(mode) or not stat.S_ISREG(mode):
        os.close(fd)
        if stat.S_ISDIR(mode):
            raise InputError(f"{label} {where!r} is a directory; pass the path of a file")
        raise InputError(f"{label} {where!r} is {_kind(mode)}; pass the path of a regular file")
    return fd


def _too_large(label: str, where: str, limit: int, limit_hint: str) -> InputError:
    hint_text = f" ({limit_hint})" if limit_hint else ""
    return InputError(f"{label} {where!r} is larger than the {limit} bytes allowed{hint_text}; "
                      "check that this is the intended file")


def read_bounded(path: Any, label: str, limit: int, *, limit_hint: str = "") -> bytearray:
    """Return the bytes of the regular file ``path`` (a bytearray), at most ``limit`` of them.

    Raises :class:`InputError` (naming ``label``, the path and the remedy) when the path
    is missing, unreadable, not a regular file, or holds more than ``limit`` bytes;
    ``limit_hint`` says how to raise the limit (for example the option that sets it).
    """
    where = file_path(path, label)
    fd = _open_regular(where, label)
    try:
        # one buffer, sized by the reported size and grown if the file grows: the file is
        # held once in memory while reading (the size reported is a hint, never a limit)
        hint = os.fstat(fd).st_size
        buf = bytearray(min(max(hint, 0), limit) + 1)
        total = 0
        while True:
            if total == len(buf):
                if total > limit:
                    raise _too_large(label, where, limit, limit_hint)
                buf.extend(bytes(min(max(_CHUNK, total), limit + 1 - total)))
            got = os.readv(fd, [memoryview(buf)[total:]])
            if not got:
                break
            total += got
        del buf[total:]
        return buf
    except OSError as exc:
        raise InputError(f"{label} {where!r} cannot be read: {exc.strerror or exc}") from None
    finally:
        os.close(fd)


class BoundedFile:
    """A regular file read forward a block at a time, at most ``limit`` bytes in all.

    The same refusals as :func:`read_bounded` (not a regular file; more than ``limit``
    bytes, counted while reading), but only a window of the file is held: ``buf`` holds
    the bytes from file position ``base`` to ``end``; :meth:`more` reads the next block
    onto it and :meth:`drop` forgets the bytes before a position.  ``size_hint`` is the
    size the system reported at opening (a hint for estimates, never a limit).  Use it
    as a context manager, or call :meth:`close`.
    """

    def __init__(self, path: Any, label: str, limit: int, *, limit_hint: str = "") -> None:
        self.where = file_path(path, label)
        self.label, self.limit, self.limit_hint = label, limit, limit_hint
        self.fd: int | None = _open_regular(self.where, label)
        try:
            self.size_hint = max(os.fstat(self.fd).st_size, 0)
        except OSError as exc:
            self.close()
            raise InputError(f"{label} {self.where!r} cannot be read: {exc.strerror or exc}") from None
        self.buf = bytearray()
        self.base = 0
        self.eof = False

    @property
    def end(self) -> int:
        """The file position after the last byte read."""
        return self.base + len(self.buf)

    def more(self, size: int = _CHUNK) -> None:
        """Read about ``size`` more bytes onto ``buf`` (fewer at the end of the file; then ``eof``)."""
        if self.eof:
            return
        if self.fd is None:
            raise InputError(f"{self.label} {self.where!r} was closed before it was read to its end")
        want = min(max(size, _CHUNK), self.limit + 1 - self.end)
        try:
            data = os.read(self.fd, want)
        except OSError as exc:
            raise InputError(f"{self.label} {self.where!r} cannot be read: {exc.strerror or exc}") from None
        if not data:
            self.eof = True
            return
        if self.end + len(data) > self.limit:
            raise _too_large(self.label, self.where, self.limit, self.limit_hint)
        self.buf += data

    def fill(self, upto: int) -> None:
        """Read until ``buf`` reaches file position ``upto`` or the end of the file."""
        while self.end < upto and not self.eof:
            self.more(upto - self.end)

    def drop(self, pos: int) -> None:
        """Forget the bytes before file position ``pos``."""
        if pos > self.base:
            del self.buf[: pos - self.base]
            self.base = pos

    def close(self) -> None:
        if self.fd is not None:
            os.close(self.fd)
            self.fd = None

    def __enter__(self) -> "BoundedFile":
        return self

    def __exit__(self, *exc: object) -> None:
        self.close()


def same_file(a: str, b: str) -> bool:
    """Whether two paths name the same file: the same resolved path, or the same inode."""
    if os.path.realpath(a) == os.path.realpath(b):
        return True
    try:
        return os.path.samefile(a, b)
    except OSError:
        return False


def check_outputs(inputs: Iterable[tuple[str, Any]], outputs: Iterable[tuple[str, Any]]) -> None:
    """Refuse an output that is an input, or two outputs that are the same file.

    ``inputs`` and ``outputs`` are pairs ``(what, path)``; ``what`` names the option or
    argument in the message (for example ``"--save"``).  Paths that are None are skipped.
    """
    ins = [(w, file_path(p, w)) for w, p in inputs if p is not None]
    outs = [(w, file_path(p, w)) for w, p in outputs if p is not None]
    for i, (w, p) in enumerate(outs):
        for wi, q in ins:
            if same_file(p, q):
                raise InputError(
                    f"{w} {p!r} is the same file as the {wi} {q!r}; writing it would destroy the input: "
                    "choose another output path"
                )
        for w2, q in outs[:i]:
            if same_file(p, q):
                raise InputError(f"{w} {p!r} and {w2} {q!r} are the same file; give each output its own path")


def write_atomic(path: Any, data: bytes | str, *, replace: bool = False, label: str = "output file",
                 replace_hint: str = "replace=True") -> str:
    """Write ``data`` to ``path`` atomically; return the path written.

    The bytes go to a temporary file in the same folder, are flushed and synced, and the
    file is renamed into place.  An existing ``path`` is refused (InputError naming
    ``replace_hint``, the way to allow it) unless ``replace`` is true.  On any failure
    the temporary file is removed and ``path`` is left as it was.  ``replace`` must be a
    bool (an array or ``pd.NA`` has no single truth value; "no" would be true).
    """
    replace = check_flag(replace, "replace")
    where = file_path(path, label)
    if isinstance(data, str):
        data = data.encode("utf-8")
    folder = os.path.dirname(os.path.abspath(where))
    if os.path.lexists(where):
        if not replace:
            raise InputError(f"{label} {where!r} exists; choose a new path or pass {replace_hint} to replace it")
        if os.path.isdir(where):
            raise InputError(f"{label} {where!r} is a directory; pass the path of a file")
    try:
        fd, tmp = tempfile.mkstemp(prefix=".lintools-", suffix=".part", dir=folder)
    except OSError as exc:
        raise InputError(
            f"{label} {where!r} cannot be written: {exc.strerror or exc}; check that the directory "
            "exists and is writable"
        ) from None
    try:
        try:
            view = memoryview(data)
            while view:
                done = os.write(fd, view)
                view = view[done:]
            os.fsync(fd)
        finally:
            os.close(fd)
        umask = os.umask(0)
        os.umask(umask)
        os.chmod(tmp, 0o666 & ~umask)
        if replace:
            os.replace(tmp, where)
        else:
            try:
                os.link(tmp, where)  # fails if the name exists: no clobbering, even in a race
            except FileExistsError:
                raise InputError(
                    f"{label} {where!r} exists; choose a new path or pass {replace_hint} to replace it"
                ) from None
            except OSError as exc:
                if exc.errno not in (errno.EPERM, errno.ENOTSUP, errno.EOPNOTSUPP, errno.EXDEV, errno.EMLINK):
                    raise
                if os.path.lexists(where):  # a file system without hard links: check, then rename
                    raise InputError(
                        f"{label} {where!r} exists; choose a new path or pass {replace_hint} to replace it"
                    ) from None
                os.replace(tmp, where)
    except InputError:
        _remove(tmp)
        raise
    except OSError as exc:
        _remove(tmp)
        raise InputError(
            f"{label} {where!r} cannot be written: {exc.strerror or exc}; nothing was changed "
            "(check free space, quotas and permissions)"
        ) from None
    except BaseException:
        _remove(tmp)
        raise
    _remove(tmp)  # after a hard link the temporary name is still there
    return where


def _remove(tmp: str) -> None:
    try:
        os.unlink(tmp)
    except OSError:
        pass
