"""The audit block of the sign-off document: what produced its numbers.

SHA-256 (FIPS 180-4) of every input file, the versions of lintools, NumPy and Python and
the platform, and the time of writing.  ``SOURCE_DATE_EPOCH`` (the reproducible-builds
convention: seconds since 1970-01-01 UTC), when set, stands for the time of writing, so
two runs can give byte-identical files.
"""

from __future__ import annotations

import datetime
import hashlib
import os
import platform
import sys
from typing import Any

import numpy as np

from ..support.errors import InputError
from ..support.files import read_bounded
from ..support.version import __version__

__all__ = ["file_digest", "versions", "written_at"]


def file_digest(path: str, role: str, limit: int) -> dict[str, Any]:
    """Role, path, size in bytes and SHA-256 (hex) of one input file, read with the
    project's bounded reader (regular files only, at most ``limit`` bytes)."""
    data = read_bounded(path, role, limit)
    return {"role": role, "path": str(path), "bytes": len(data), "sha256": hashlib.sha256(data).hexdigest()}


def versions() -> dict[str, str]:
    """The versions of lintools, NumPy and Python, and the platform."""
    return {"lintools": __version__, "numpy": np.__version__, "python": sys.version.split()[0],
            "implementation": platform.python_implementation(), "platform": platform.platform()}


def written_at() -> str:
    """The time of writing, UTC, to the second (``SOURCE_DATE_EPOCH`` when it is set)."""
    epoch = os.environ.get("SOURCE_DATE_EPOCH")
    if epoch is not None:
        if not epoch.strip().isdigit():
            raise InputError(f"SOURCE_DATE_EPOCH is {epoch!r}; set it to whole seconds since 1970-01-01 UTC, "
                             "or unset it")
        try:
            when = datetime.datetime.fromtimestamp(int(epoch), tz=datetime.timezone.utc)
        except (OverflowError, OSError, ValueError):
            raise InputError(f"SOURCE_DATE_EPOCH {epoch} is beyond the dates this system can show; set a "
                             "smaller number of seconds, or unset it") from None
    else:
        when = datetime.datetime.now(tz=datetime.timezone.utc)
    return when.strftime("%Y-%m-%d %H:%M:%S UTC")
