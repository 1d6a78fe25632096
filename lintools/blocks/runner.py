"""The runner of a blocked fit's passes: over a source of blocks, or over dask arrays.

:func:`make_runner` picks :class:`lintools.blocks.stream.StreamRunner` for a ``source``
and :class:`lintools.blocks.dask_runner.DaskRunner` for row-chunked dask arrays (imported only then,
so dask is needed only by those who pass dask arrays).
"""

from __future__ import annotations

from typing import Any

from .stream import StreamRunner
from ..support.errors import InputError

__all__ = ["make_runner"]


def _is_dask(obj: Any) -> bool:
    """A dask array, recognised without importing dask."""
    return type(obj).__module__.split(".")[0] == "dask" and hasattr(obj, "to_delayed")


def make_runner(source: Any, X: Any, y: Any, weights: Any, labels: Any = None) -> Any:
    """The stream runner for a source, or the Dask runner for dask arrays."""
    if source is not None and (X is not None or y is not None or weights is not None):
        raise InputError(
            "pass either source (a function returning an iterator of blocks) or X and y as "
            "row-chunked dask arrays, not both; block weights come with the blocks"
        )
    if source is not None:
        return StreamRunner(source, labels)
    if X is None and y is None:
        raise InputError(
            "no data: pass source (a function returning a fresh iterator of (X_block, y_block"
            "[, weights_block]) on every call) or X and y as row-chunked dask arrays"
        )
    if not (_is_dask(X) and _is_dask(y) and (weights is None or _is_dask(weights))):
        kinds = ", ".join(f"{k} is a {type(v).__name__}" for k, v in (("X", X), ("y", y), ("weights", weights)) if v is not None)
        raise InputError(
            f"X=, y= (and weights=) must all be dask arrays ({kinds}); for in-memory arrays use "
            "lintools.least_squares / lintools.logistic, or pass a source of blocks"
        )
    from .dask_runner import DaskRunner

    return DaskRunner(X, y, weights, labels)
